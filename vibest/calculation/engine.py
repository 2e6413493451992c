"""The only place that talks to a tight-binding code.

An :class:`Engine` answers one question: energy (Eh), gradient (Eh/Bohr) and dipole (e*Bohr)
at a geometry (Bohr). The tblite backend is the default; xtb-python is optional behind the
same interface. Engines keep the last converged wavefunction and use it as the SCF guess of
the next evaluation (restart), which is what makes finite differences cheap.
"""

from __future__ import annotations

import os
import tempfile
from contextlib import contextmanager
from dataclasses import asdict, dataclass

import numpy as np

from ..errors import CalculationError, InputError
from .methods import DEFAULT_METHOD, METHODS, DFTSettings, Method

BACKENDS = ("tblite", "xtb", "pyscf")
#: Solvent names with parametrised GFN2-xTB ALPB models (Ehlert, Stahn, Spicher, Grimme,
#: J. Chem. Theory Comput. 17, 4250 (2021)); tblite also accepts them for CPCM (ddX).
SOLVENTS = ("acetone", "acetonitrile", "aniline", "benzaldehyde", "benzene", "ch2cl2", "chcl3", "cs2", "dioxane",
            "dmf", "dmso", "ether", "ethylacetate", "furane", "hexadecane", "hexane", "methanol", "nitromethane",
            "octanol", "woctanol", "phenol", "toluene", "thf", "water")
SOLVENT_MODELS = ("alpb", "cpcm")
#: Common names of the solvents above (lower case) -> the engine's keyword.
SOLVENT_NAMES = {"dichloromethane": "ch2cl2", "methylene chloride": "ch2cl2", "chloroform": "chcl3",
                 "trichloromethane": "chcl3", "carbon disulfide": "cs2", "1,4-dioxane": "dioxane",
                 "dimethylformamide": "dmf", "n,n-dimethylformamide": "dmf", "dimethyl sulfoxide": "dmso",
                 "dimethylsulfoxide": "dmso", "diethyl ether": "ether", "ethyl acetate": "ethylacetate",
                 "furan": "furane", "tetrahydrofuran": "thf", "1-octanol": "octanol", "n-octanol": "octanol",
                 "wet octanol": "woctanol", "n-hexane": "hexane", "n-hexadecane": "hexadecane", "h2o": "water"}


def solvent_keyword(name: str | None) -> str | None:
    """The engine's keyword for a solvent given by keyword or common name (any case), None for
    gas phase; InputError for a solvent without a parametrised model."""
    if name is None:
        return None
    if not isinstance(name, str):
        raise InputError(f"solvent must be a name or None, not {name!r}")
    key = name.strip().lower()
    key = SOLVENT_NAMES.get(key, key)
    if key not in SOLVENTS:
        raise InputError(f"no implicit-solvent model for {name!r}; vibest knows {', '.join(SOLVENTS)} "
                         f"(and common names such as chloroform, dichloromethane, tetrahydrofuran: vibest solvents)")
    return key


@dataclass(frozen=True)
class EngineSettings:
    """What defines the level of theory; everything that changes the numbers.

    Attributes:
        method: tight-binding Hamiltonian (``"GFN1-xTB"``, the default, or ``"GFN2-xTB"``).
        backend: ``"tblite"`` (default) or ``"xtb"`` (xtb-python, optional extra).
        accuracy: tblite/xtb numerical accuracy multiplier (smaller is tighter; 1.0 is the codes' default).
        electronic_temperature_K: Fermi smearing temperature in kelvin.
        max_scf_iterations: SCF cycle limit.
        solvent: implicit solvent name (one of :data:`SOLVENTS`), or None for gas phase.
        solvent_model: "alpb" (analytical linearised Poisson-Boltzmann, default) or "cpcm" (tblite's ddX).
        dft: density-functional settings (backend "pyscf" only), else None.
    """

    method: str = METHODS[DEFAULT_METHOD].name
    backend: str = "tblite"
    accuracy: float = 0.01
    electronic_temperature_K: float = 300.0
    max_scf_iterations: int = 250
    solvent: str | None = None
    solvent_model: str = "alpb"
    dft: DFTSettings | None = None

    def to_dict(self) -> dict:
        """All fields; ``dft`` only when set, so that tight-binding settings (and the store keys
        made from them) are what they were before density-functional methods existed."""
        d = asdict(self)
        if d["dft"] is None:
            del d["dft"]
        return d

    @classmethod
    def for_method(cls, method: Method, backend: str = "tblite", solvent: str | None = None,
                   solvent_model: str = "alpb") -> "EngineSettings":
        """Settings of ``method`` (tight-binding methods with ``backend``; DFT through PySCF)."""
        if method.is_dft:
            return cls(method=method.name, backend="pyscf", solvent=solvent, solvent_model=solvent_model,
                       dft=method.dft)
        return cls(method=method.name, backend=backend, solvent=solvent, solvent_model=solvent_model)

    @property
    def is_dft(self) -> bool:
        return self.dft is not None

    def validate(self) -> None:
        if self.solvent is not None and solvent_keyword(self.solvent) != self.solvent:
            raise InputError(f"solvent {self.solvent!r}: give the engine's keyword {solvent_keyword(self.solvent)!r}")
        if self.backend not in BACKENDS:
            raise InputError(f"unknown backend {self.backend!r}; choose one of {', '.join(BACKENDS)}")
        if self.is_dft and self.solvent:
            raise InputError(f"implicit solvent is available with the tight-binding methods only, not {self.method}")
        if self.solvent is not None and self.solvent.lower() not in SOLVENTS:
            raise InputError(f"unknown solvent {self.solvent!r}; choose one of {', '.join(SOLVENTS)}")
        if self.solvent_model not in SOLVENT_MODELS:
            raise InputError(f"unknown solvent model {self.solvent_model!r}; choose one of {', '.join(SOLVENT_MODELS)}")


@dataclass(frozen=True)
class Evaluation:
    """One single point: energy in Eh, gradient in Eh/Bohr (N, 3), dipole in e*Bohr (3,)."""

    energy_hartree: float
    gradient_hartree_bohr: np.ndarray
    dipole_e_bohr: np.ndarray


class Engine:
    """Interface: evaluate energy, gradient and dipole at positions in Bohr."""

    settings: EngineSettings
    count: int = 0
    #: Whether copies of this engine (:meth:`copy`) may evaluate at the same time in threads of
    #: one process (the library releases the GIL and keeps no shared state between calculators).
    concurrent: bool = False
    #: Whether the dipole is measured from the coordinate origin (so that translating a charged
    #: molecule changes it by charge * shift); tested for tblite in tests/test_pipeline.py.
    dipole_about_coordinate_origin: bool = False

    def evaluate(self, positions_bohr: np.ndarray) -> Evaluation:  # pragma: no cover - interface
        raise NotImplementedError

    def copy(self) -> "Engine":  # pragma: no cover - interface
        """A new engine for the same molecule and settings (no wavefunction yet)."""
        raise NotImplementedError

    def wavefunction(self):
        """The last converged wavefunction as an opaque object for :meth:`restart_from`, or None."""
        return None

    def restart_from(self, wavefunction) -> None:
        """Use a copy of ``wavefunction`` (from :meth:`wavefunction`) as the next SCF guess."""

    def save_guess(self, path: str) -> bool:
        """Write the current wavefunction to ``path`` for other processes; False if unsupported."""
        return False

    def load_guess(self, path: str) -> None:
        """Use the wavefunction stored at ``path`` as the next SCF guess."""


class TBLiteEngine(Engine):
    """GFN2-xTB through tblite's Python API, restarting every SCF from the last wavefunction.

    tblite's calls release the GIL (cffi) and each calculator owns its data, so copies evaluate
    in parallel threads; checked in tests/test_pipeline.py (threaded Hessian equals the serial one).
    """

    concurrent = True
    dipole_about_coordinate_origin = True

    def __init__(self, numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                 settings: EngineSettings = EngineSettings()):
        from tblite.interface import Calculator

        self.settings = settings
        self.numbers = np.asarray(numbers, dtype=int)
        self._start = (np.array(positions_bohr, dtype=float), int(charge), int(uhf))
        self.count = 0
        try:
            self._calc = Calculator(settings.method, self.numbers, np.asarray(positions_bohr, float),
                                    charge=float(charge), uhf=int(uhf))
        except Exception as exc:  # tblite raises its own error types
            raise CalculationError(f"tblite refused the structure: {exc}") from None
        self._calc.set("verbosity", 0)
        self._calc.set("accuracy", float(settings.accuracy))
        self._calc.set("temperature", float(settings.electronic_temperature_K) * _KELVIN_TO_HARTREE)
        self._calc.set("max-iter", int(settings.max_scf_iterations))
        if settings.solvent:
            settings.validate()
            try:
                if settings.solvent_model == "cpcm":
                    self._calc.add("ddX-solvation", settings.solvent.lower(), "cpcm")
                else:
                    self._calc.add("alpb-solvation", settings.solvent.lower())
            except Exception as exc:
                raise InputError(f"solvent {settings.solvent!r} is not available in tblite: {exc}") from None
        self._result = None

    def evaluate(self, positions_bohr: np.ndarray) -> Evaluation:
        self._calc.update(np.asarray(positions_bohr, dtype=float))
        try:
            self._result = self._calc.singlepoint(self._result)
        except Exception as exc:
            self._result = None
            raise CalculationError(f"GFN2-xTB single point failed: {exc}") from None
        self.count += 1
        res = self._result
        return Evaluation(float(res.get("energy")), np.array(res.get("gradient")), _dipole(res))

    def copy(self) -> "TBLiteEngine":
        positions, charge, uhf = self._start
        return TBLiteEngine(self.numbers, positions, charge, uhf, self.settings)

    def wavefunction(self):
        from tblite.interface import Result

        return None if self._result is None else Result(self._result)

    def restart_from(self, wavefunction) -> None:
        from tblite.interface import Result

        self._result = None if wavefunction is None else Result(wavefunction)

    def save_guess(self, path: str) -> bool:
        if self._result is None:
            return False
        self._result.save(path)
        self._guess_path, self._guess = path, self.wavefunction()
        return True

    def load_guess(self, path: str) -> None:
        """Restart from the wavefunction at ``path``; the file is read once, later calls copy it."""
        from tblite.interface import Result

        if getattr(self, "_guess_path", None) != path:
            cached = Result()
            cached.load(path)
            self._guess_path, self._guess = path, cached
        self.restart_from(self._guess)


def _dipole(result) -> np.ndarray:
    """Molecular dipole (e*Bohr) of a tblite result, read with the C API's
    ``tblite_get_result_dipole`` (Result.get("dipole") builds the whole post-processing
    dictionary in Python, ~10x the time); the dictionary when the symbol is missing."""
    from tblite import library

    getter = getattr(library.lib, "tblite_get_result_dipole", None)
    if getter is None:  # pragma: no cover - older or newer tblite builds
        return np.array(result.get("dipole"))
    out = np.zeros(3)
    library.error_check(getter)(result._res, library.ffi.cast("double*", out.ctypes.data))
    return out


class XTBEngine(Engine):
    """GFN2-xTB through the optional xtb-python package (same interface)."""

    def __init__(self, numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                 settings: EngineSettings = EngineSettings()):
        try:
            from xtb.interface import Calculator, Param
            from xtb.libxtb import VERBOSITY_MUTED
        except ImportError:
            raise InputError("backend 'xtb' needs the optional xtb-python package: pip install 'vibest[xtb]'") from None
        self.settings = settings
        self.count = 0
        param = {"GFN2-xTB": Param.GFN2xTB, "GFN1-xTB": Param.GFN1xTB}[settings.method]
        self._calc = Calculator(param, np.asarray(numbers, int), np.asarray(positions_bohr, float),
                                charge=float(charge), uhf=int(uhf))
        self._calc.set_verbosity(VERBOSITY_MUTED)
        self._calc.set_accuracy(float(settings.accuracy))
        self._calc.set_electronic_temperature(float(settings.electronic_temperature_K))
        self._calc.set_max_iterations(int(settings.max_scf_iterations))
        if settings.solvent:
            from xtb.utils import get_solvent

            solv = get_solvent(settings.solvent)
            if solv is None:
                raise InputError(f"solvent {settings.solvent!r} is not known to xtb")
            self._calc.set_solvent(solv)
        self._result = None

    def evaluate(self, positions_bohr: np.ndarray) -> Evaluation:
        self._calc.update(np.asarray(positions_bohr, float))
        try:
            self._result = self._calc.singlepoint(self._result)
        except Exception as exc:
            self._result = None
            raise CalculationError(f"GFN2-xTB single point failed (xtb): {exc}") from None
        self.count += 1
        res = self._result
        return Evaluation(float(res.get_energy()), np.array(res.get_gradient()), np.array(res.get_dipole()))


def _kelvin_to_hartree() -> float:
    """Boltzmann's constant in Eh/K (ase.units: CODATA; imported instead of scipy.constants,
    which takes ~0.18 s to import and so half of a Hessian worker's start-up)."""
    from ase.units import Hartree, kB

    return kB / Hartree


_KELVIN_TO_HARTREE = _kelvin_to_hartree()


def make_engine(numbers, positions_bohr, charge: int = 0, uhf: int = 0,
                settings: EngineSettings = EngineSettings(), resources=None) -> Engine:
    """Create the engine named by ``settings.backend`` (``resources``: threads and memory of a
    density-functional engine, :class:`vibest.calculation.dft_engine.DFTResources`)."""
    if settings.backend == "tblite":
        return TBLiteEngine(numbers, positions_bohr, charge, uhf, settings)
    if settings.backend == "xtb":
        return XTBEngine(numbers, positions_bohr, charge, uhf, settings)
    if settings.backend == "pyscf":
        from .dft_engine import DFTResources, PySCFEngine

        return PySCFEngine(numbers, positions_bohr, charge, uhf, settings, resources or DFTResources())
    raise InputError(f"unknown backend {settings.backend!r}; choose one of {', '.join(BACKENDS)}")


def scratch_file(suffix: str) -> str:
    """A fresh temporary file name (the caller removes it)."""
    fd, path = tempfile.mkstemp(suffix=suffix, prefix="vibest-")
    os.close(fd)
    return path


#: OpenMP/BLAS threads of the process that optimises geometries. On the 2-core machine of
#: benchmarks/speed.py, tblite with 2 OpenMP threads took 0.119 s per optimisation gradient of a
#: 53-atom molecule against 0.065 s with one (and was no faster for 92 or 188 atoms), so each
#: process computes with one thread and parallelism comes from worker processes.
CALCULATION_THREADS = 1


_CONTROLLER = None


def _thread_controller():
    """One threadpoolctl controller for the process: building one scans every loaded library
    (1-7 ms with RDKit and SciPy loaded), so it is made once, after tblite (whose OpenMP runtime
    must be among the libraries it controls) has been loaded."""
    global _CONTROLLER
    if _CONTROLLER is None:
        from threadpoolctl import ThreadpoolController

        try:
            import tblite.interface  # noqa: F401  (loads the OpenMP runtime)
        except ImportError:  # pragma: no cover - tblite is a dependency
            pass
        _CONTROLLER = ThreadpoolController()
    return _CONTROLLER


@contextmanager
def calculation_threads(count: int = CALCULATION_THREADS, user_api: str | None = None):
    """Limit OpenMP and BLAS thread pools to ``count`` while the block runs (threadpoolctl; the
    previous limits come back afterwards). OpenMP limits hold for the calling thread only, so
    every thread that calls the engine enters this block itself (``user_api="openmp"``)."""
    with _thread_controller().limit(limits=int(count), user_api=user_api):
        yield

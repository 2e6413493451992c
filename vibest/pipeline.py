"""The prediction pipeline: SMILES -> Hessian record (expensive) -> analysed prediction (cheap).

:func:`compute_record` is the only function here that calls the tight-binding engine.
:func:`analyse` turns a stored record into wavenumbers, intensities, band characters and a
spectrum without any new gradient, so re-analysis (other scaling, width, masses) is instant.
"""

from __future__ import annotations

import dataclasses
import platform
import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from ase.units import Bohr

from . import __version__
from .analysis.composition import ModeComposition, mode_composition
from .analysis.harmonic import HarmonicModes, harmonic_analysis, rayleigh_wavenumbers
from .analysis.internal_space import InternalSpace
from .analysis.scaling import ScaleModel, default_scale_model, named_scale_model, user_scale_model
from .calculation.engine import EngineSettings, calculation_threads, make_engine
from .calculation.hessian import default_workers, finite_difference_hessian
from .calculation.workers import pool_is_ready, prestart
from .calculation.optimizer import OptimizerSettings, optimize
from .analysis.groups import band_label, find_groups
from .calculation.record import HessianRecord, record_molecule
from .errors import InputError
from .spectrum import DEFAULT_FWHM_CM1, DEFAULT_RANGE_CM1, DEFAULT_STEP_CM1, LINE_SHAPES, Spectrum, broaden, grid
from .structure import Molecule, build_molecule

#: Imaginary modes weaker than this (cm^-1, absolute) are treated as numerical noise.
IMAGINARY_THRESHOLD_CM1 = 20.0
#: With an engine that computes in threads (tblite), a Hessian expected to take more than this
#: on one core (s) runs in parallel threads. Below it (water: 4 ms serial, 6 ms in two threads),
#: starting threads costs more than it saves; from methanol (0.02 s) on, two threads are faster.
THREAD_HESSIAN_SECONDS = 0.02
#: With an engine that needs worker processes (xtb-python) and the default worker count, a
#: Hessian expected to take more than this on one core (s) starts the worker pool right after the
#: first gradient, so that its start-up (~0.2 s of both cores on the 2-core benchmark machine)
#: overlaps the optimisation; this process computes displacements itself until the workers are
#: up. Below it, starting workers would cost more than it saves.
POOL_START_HESSIAN_SECONDS = 0.3
#: A pool already running (started for an earlier molecule) serves any Hessian expected to take
#: more than this on one core (s).
POOL_USE_HESSIAN_SECONDS = 0.05
#: A restarted gradient of a displaced geometry costs about this fraction of a gradient from
#: scratch or of an optimisation step (measured on benchmarks/speed.py molecules: 0.5-0.8).
RESTARTED_GRADIENT_FRACTION = 0.6
CAUTION = ("Predicted spectra are estimates from an approximate quantum-chemical model; confirm any "
           "identification with reference standards and a validated method.")

#: progress(stage, done, total, message)
Progress = Callable[[str, int, int, str], None]


@dataclass(frozen=True)
class CalculationOptions:
    """Settings of the expensive stage (all change the numbers, all are recorded).

    Attributes:
        seed: random seed of the 3D embedding.
        largest_fragment: keep only the largest fragment of a multi-fragment SMILES.
        engine: level of theory (:class:`EngineSettings`).
        optimizer: convergence settings (:class:`OptimizerSettings`).
        hessian_step_bohr: finite-difference step, Bohr.
        hessian_displacements: ``"vibrational"`` (default: central differences along the 3N-6
            directions orthogonal to translations and rotations, 6N-12 gradients, the rest from
            the invariance of the energy) or ``"cartesian"`` (every Cartesian coordinate, 6N).
        workers: processes for the Hessian (None = all cores).
        max_imaginary_retries: how often to displace along an imaginary mode and re-optimise.
    """

    seed: int = 0xB1B
    largest_fragment: bool = False
    engine: EngineSettings = field(default_factory=EngineSettings)
    optimizer: OptimizerSettings = field(default_factory=OptimizerSettings)
    hessian_step_bohr: float = 0.005
    hessian_displacements: str = "vibrational"
    workers: int | None = None
    max_imaginary_retries: int = 2

    def to_dict(self) -> dict:
        d = dataclasses.asdict(self)
        d.pop("workers")  # does not change the numbers
        return d


@dataclass(frozen=True)
class SpectrumOptions:
    """Settings of the cheap stage: scaling and broadening.

    ``scale_factor`` (a uniform factor) overrides ``scale_model`` ("uniform" or
    "per-coordinate"); with neither, the shipped default model is used.
    """

    scale_factor: float | None = None
    fwhm_cm1: float = DEFAULT_FWHM_CM1
    line_shape: str = "lorentzian"
    range_cm1: tuple[float, float] = DEFAULT_RANGE_CM1
    step_cm1: float = DEFAULT_STEP_CM1
    scale_model: str | None = None

    def validate(self) -> None:
        if self.line_shape not in LINE_SHAPES:
            raise InputError(f"line shape {self.line_shape!r} unknown; choose one of {', '.join(LINE_SHAPES)}")
        if not (0 < self.fwhm_cm1 <= 500):
            raise InputError(f"FWHM {self.fwhm_cm1} cm^-1 must be between 0 and 500")
        lo, hi = self.range_cm1
        if not (0 <= lo < hi <= 10000):
            raise InputError(f"range {lo}-{hi} cm^-1 must satisfy 0 <= low < high <= 10000")
        if not (0 < self.step_cm1 <= (hi - lo) / 2):
            raise InputError(f"grid step {self.step_cm1} cm^-1 does not fit the range")

    def resolve_scale(self) -> ScaleModel:
        if self.scale_factor is not None:
            return user_scale_model(self.scale_factor)
        if self.scale_model is not None:
            return named_scale_model(self.scale_model)
        return default_scale_model()


@dataclass(frozen=True)
class Band:
    """One vibrational band: scaled and harmonic wavenumber (cm^-1), intensity (km/mol),
    ``character`` (dominant internal-coordinate types with percentages) and ``label`` (plain words
    with the functional group, e.g. "C=O stretch (ketone)")."""

    index: int
    wavenumber_cm1: float
    harmonic_cm1: float
    intensity_km_mol: float
    reduced_mass_amu: float
    force_constant_mdyn_angstrom: float
    character: str
    label: str = ""

    def to_dict(self) -> dict:
        return dataclasses.asdict(self)


@dataclass(frozen=True)
class Prediction:
    """A predicted IR spectrum and everything it came from.

    Attributes:
        record: the Hessian record (geometry, Hessian, dipole derivatives, settings, timings).
        modes: harmonic analysis of the record.
        composition: internal-coordinate composition of the modes.
        scale: the scale model applied.
        bands: one :class:`Band` per mode (scaled wavenumbers).
        spectrum: the broadened spectrum of the scaled bands.
        converged: whether the geometry optimisation converged.
        imaginary_cm1: imaginary wavenumbers that remain (negative numbers, cm^-1).
        notes: remarks for the user (fragment choice, retries, warnings).
    """

    record: HessianRecord
    modes: HarmonicModes
    composition: ModeComposition
    scale: ScaleModel
    bands: tuple[Band, ...]
    spectrum: Spectrum
    converged: bool
    imaginary_cm1: tuple[float, ...]
    notes: tuple[str, ...]

    @property
    def smiles(self) -> str:
        return self.record.smiles

    @property
    def wavenumbers_cm1(self) -> np.ndarray:
        """Scaled wavenumbers, cm^-1."""
        return np.array([b.wavenumber_cm1 for b in self.bands])

    @property
    def intensities_km_mol(self) -> np.ndarray:
        return np.array([b.intensity_km_mol for b in self.bands])

    def strongest(self, count: int = 5) -> list[Band]:
        return sorted(self.bands, key=lambda b: -b.intensity_km_mol)[:count]

    def to_dict(self, include_spectrum: bool = True) -> dict:
        from ase.data import chemical_symbols

        rec = self.record
        d = {
            "vibest_version": __version__,
            "caution": CAUTION,
            "smiles": rec.smiles,
            "charge": rec.charge,
            "uhf": rec.uhf,
            "converged": self.converged,
            "energy_hartree": rec.energy_hartree,
            "imaginary_cm1": list(self.imaginary_cm1),
            "notes": list(self.notes),
            "geometry": {
                "symbols": [chemical_symbols[int(z)] for z in rec.numbers],
                "positions_angstrom": rec.positions_angstrom.tolist(),
            },
            "scale": self.scale.to_dict(),
            "bands": [b.to_dict() for b in self.bands],
            "modes": {
                "displacements": self.modes.displacements.round(6).tolist(),
                "composition": [[c.to_dict() for c in row] for row in self.composition.contributions],
            },
            "settings": rec.settings,
            "timings": rec.timings,
            "versions": _versions(),
        }
        if include_spectrum:
            d["spectrum"] = self.spectrum.to_dict()
        return d


def _versions() -> dict:
    import ase
    import rdkit

    out = {"vibest": __version__, "python": platform.python_version(), "rdkit": rdkit.__version__,
           "ase": ase.__version__, "numpy": np.__version__}
    try:
        from importlib.metadata import version

        out["tblite"] = version("tblite")
    except Exception:  # pragma: no cover - metadata missing
        out["tblite"] = "unknown"
    return out


def _notify(progress: Progress | None, stage: str, done: int, total: int, message: str = "") -> None:
    if progress is not None:
        progress(stage, done, total, message)


def compute_record(molecule: Molecule, options: CalculationOptions = CalculationOptions(),
                   progress: Progress | None = None) -> tuple[HessianRecord, bool, list[str]]:
    """Optimise the geometry, compute the Hessian and dipole derivatives (the expensive stage).

    Returns the record, whether the optimisation converged, and notes. Imaginary modes above
    :data:`IMAGINARY_THRESHOLD_CM1` trigger a displacement along the mode and a new
    optimisation, at most ``options.max_imaginary_retries`` times. This process computes with
    one OpenMP/BLAS thread (:data:`vibest.calculation.engine.CALCULATION_THREADS`).
    """
    with calculation_threads():
        return _compute_record(molecule, options, progress)


def _compute_record(molecule: Molecule, options: CalculationOptions,
                    progress: Progress | None) -> tuple[HessianRecord, bool, list[str]]:
    notes: list[str] = []
    numbers = molecule.numbers
    x = molecule.positions_angstrom / Bohr
    engine = make_engine(numbers, x, molecule.charge, molecule.uhf, options.engine)
    workers = options.workers or default_workers()
    t_first = time.perf_counter()
    first = engine.evaluate(x)
    t_first = time.perf_counter() - t_first

    def parallel_pays(per_gradient_seconds: float) -> bool:
        """Whether the expected one-core Hessian time exceeds the threshold for threads, or for
        worker processes in the pool's present state."""
        expected = 6 * len(numbers) * RESTARTED_GRADIENT_FRACTION * per_gradient_seconds
        if engine.concurrent:
            return expected > THREAD_HESSIAN_SECONDS
        return expected > (POOL_USE_HESSIAN_SECONDS if pool_is_ready(workers) else POOL_START_HESSIAN_SECONDS)

    # threads start at no cost; worker processes are started now, to overlap the optimisation
    started = workers > 1 and (engine.concurrent or bool(options.workers) or parallel_pays(t_first))
    if started and not engine.concurrent:
        prestart(workers)
    # the first gradient, made here to decide on the pool, is the optimisation's first
    timings = {"optimization_gradients": 1, "optimization_seconds": t_first, "optimization_gradient_seconds": t_first,
               "hessian_gradients": 0, "hessian_seconds": 0.0, "hessian_workers": workers, "retries": 0}
    attempt = 0
    while True:
        def opt_progress(step, energy, force):
            _notify(progress, "optimisation", step, options.optimizer.max_steps,
                    f"E = {energy:.8f} Eh, max force {force:.1e} Eh/Bohr")

        opt = optimize(engine, numbers, x, options.optimizer, progress=opt_progress, first=first)
        timings["optimization_gradients"] += opt.gradient_calls
        timings["optimization_seconds"] += opt.seconds
        timings["optimization_gradient_seconds"] += opt.gradient_seconds
        timings["optimization_coordinates"] = opt.coordinates
        first = None
        if not opt.converged:
            notes.append(f"geometry optimisation did not converge in {opt.gradient_calls} gradients "
                         f"(max force {opt.max_force_hartree_bohr:.1e} Eh/Bohr); frequencies may be unreliable")
        x = opt.positions_bohr
        # The wavefunction at the final geometry is the SCF guess of every displacement.
        ev = opt.final_evaluation
        if ev is None:
            t_final = time.perf_counter()
            ev = engine.evaluate(x)
            t_final = time.perf_counter() - t_final
            timings["optimization_gradients"] += 1
            timings["optimization_seconds"] += t_final
            timings["optimization_gradient_seconds"] += t_final
        # over all optimisation gradients so far, the first included (an already converged start
        # makes no gradient of the optimiser's own)
        per_gradient = timings["optimization_gradient_seconds"] / timings["optimization_gradients"]
        use = workers if started and (options.workers or parallel_pays(per_gradient)) else 1
        hes = finite_difference_hessian(engine, numbers, x, molecule.charge, molecule.uhf,
                                        step_bohr=options.hessian_step_bohr, workers=use,
                                        progress=lambda d, t: _notify(progress, "hessian", d, t),
                                        displacements=options.hessian_displacements, reference=ev)
        timings["hessian_gradients"] += hes.gradient_calls
        timings["hessian_seconds"] += hes.seconds
        timings["hessian_workers"] = hes.workers
        timings["hessian_displacements"] = hes.displacements
        modes = harmonic_analysis(numbers, x * Bohr, hes.hessian_hartree_bohr2)
        bad = [k for k in modes.imaginary if modes.wavenumbers_cm1[k] < -IMAGINARY_THRESHOLD_CM1]
        if not bad or attempt >= options.max_imaginary_retries:
            break
        attempt += 1
        timings["retries"] = attempt
        notes.append(f"imaginary mode(s) {', '.join(f'{modes.wavenumbers_cm1[k]:.0f}' for k in bad)} cm^-1 "
                     f"found: displaced along them and re-optimised (attempt {attempt})")
        for k in bad:
            d = modes.displacements[k]
            x = x + (0.2 / Bohr) * d / np.abs(d).max() * 0.5
    record = HessianRecord(
        smiles=molecule.smiles, numbers=numbers, positions_angstrom=x * Bohr, bonds=molecule.bonds,
        charge=molecule.charge, uhf=molecule.uhf, energy_hartree=ev.energy_hartree,
        hessian_hartree_bohr2=hes.hessian_hartree_bohr2, dipole_e_bohr=ev.dipole_e_bohr,
        dipole_derivatives_e=hes.dipole_derivatives_e,
        settings=options.to_dict() | {"converged": bool(opt.converged)}, timings=timings,
        molblock=molecule.molblock, notes=tuple(molecule.notes) + tuple(notes), mass_numbers=molecule.mass_numbers,
    )
    return record, bool(opt.converged), notes


def analyse(record: HessianRecord, options: SpectrumOptions = SpectrumOptions(),
            masses_amu=None, notes: tuple[str, ...] = ()) -> Prediction:
    """Turn a Hessian record into bands and a spectrum (no gradients are computed).

    ``masses_amu`` (N,) replaces the record's masses (:attr:`HessianRecord.masses_amu`: isotopes
    named in the SMILES, else standard atomic weights). The prediction's notes are the record's
    notes followed by ``notes``."""
    options.validate()
    if masses_amu is None:
        masses_amu = record.masses_amu
    scale = options.resolve_scale()
    space = InternalSpace.build(record.positions_angstrom, record.bonds)
    if scale.per_coordinate:
        hessian = scale.scaled_hessian(record.numbers, record.bonds, record.hessian_hartree_bohr2, space)
    else:
        hessian = record.hessian_hartree_bohr2
    modes = harmonic_analysis(record.numbers, record.positions_angstrom, hessian,
                              record.dipole_derivatives_e, masses_amu=masses_amu, charge=record.charge)
    comp = mode_composition(record.numbers, record.positions_angstrom, record.bonds, hessian,
                            modes.displacements, space=space)
    mol = record_molecule(record)
    groups = find_groups(mol)
    if scale.per_coordinate:
        scaled = modes.wavenumbers_cm1
        harmonic = rayleigh_wavenumbers(record.hessian_hartree_bohr2, modes)
    else:
        scaled = scale.apply(modes.wavenumbers_cm1)
        harmonic = modes.wavenumbers_cm1
    bands = tuple(
        Band(index=k + 1, wavenumber_cm1=float(scaled[k]), harmonic_cm1=float(harmonic[k]),
             intensity_km_mol=float(modes.intensities_km_mol[k]),
             reduced_mass_amu=float(modes.reduced_masses_amu[k]),
             force_constant_mdyn_angstrom=float(modes.force_constants_mdyn_angstrom[k]),
             character=comp.rough_character(k),
             label=band_label(record.numbers, record.bonds, comp.primitives, comp.shares[k],
                              comp.internal_displacements[k], groups, mol) if len(comp.primitives) else "")
        for k in range(modes.count)
    )
    spec = broaden(scaled, modes.intensities_km_mol, options.fwhm_cm1, options.line_shape,
                   grid(*options.range_cm1, options.step_cm1))
    imaginary = tuple(float(w) for w in harmonic if w < -IMAGINARY_THRESHOLD_CM1)
    all_notes = list(record.notes) + list(notes)
    if imaginary:
        all_notes.append(f"{len(imaginary)} imaginary mode(s) remain: the geometry is not a true minimum")
    converged = bool(record.settings.get("converged", True))
    return Prediction(record, modes, comp, scale, bands, spec, converged, imaginary, tuple(all_notes))


def predict(smiles: str, *, seed: int = 0xB1B, largest_fragment: bool = False, scale_factor: float | None = None,
            scale_model: str | None = None,
            fwhm_cm1: float = DEFAULT_FWHM_CM1, line_shape: str = "lorentzian",
            range_cm1: tuple[float, float] = DEFAULT_RANGE_CM1, step_cm1: float = DEFAULT_STEP_CM1,
            workers: int | None = None, backend: str = "tblite", solvent: str | None = None,
            solvent_model: str = "alpb",
            max_force_hartree_bohr: float = OptimizerSettings.max_force_hartree_bohr,
            hessian_step_bohr: float = 0.005, progress: Progress | None = None) -> Prediction:
    """Predict the IR spectrum of one molecule given as SMILES.

    Args:
        smiles: the structure; charges and radicals in the SMILES set charge and spin.
        seed: embedding seed (same seed, same result).
        largest_fragment: for salts/mixtures, keep the largest fragment instead of refusing.
        scale_factor: a uniform scale factor instead of the fitted default model.
        scale_model: "uniform" or "per-coordinate" (default: the shipped default model).
        fwhm_cm1, line_shape, range_cm1, step_cm1: broadening and grid (cm^-1).
        workers: processes for the Hessian (default all cores).
        backend: "tblite" (default) or "xtb".
        solvent: implicit solvent name or None (gas phase); solvent_model: "alpb" or "cpcm".
        max_force_hartree_bohr: optimisation convergence, Eh/Bohr.
        hessian_step_bohr: finite-difference step, Bohr.
        progress: optional callback progress(stage, done, total, message).

    Raises:
        InputError: for invalid input (message suitable for the user).
        CalculationError: when the tight-binding calculation fails.
    """
    spec_opts = SpectrumOptions(scale_factor, fwhm_cm1, line_shape, tuple(range_cm1), step_cm1, scale_model)
    spec_opts.validate()
    spec_opts.resolve_scale()
    if workers is not None and workers < 1:
        raise InputError("workers must be at least 1")
    EngineSettings(backend=backend, solvent=solvent, solvent_model=solvent_model).validate()
    calc_opts = CalculationOptions(
        seed=seed, largest_fragment=largest_fragment,
        engine=EngineSettings(backend=backend, solvent=solvent, solvent_model=solvent_model),
        optimizer=OptimizerSettings(max_force_hartree_bohr=max_force_hartree_bohr),
        hessian_step_bohr=hessian_step_bohr, workers=workers,
    )
    t0 = time.perf_counter()
    _notify(progress, "structure", 0, 1, smiles)
    molecule = build_molecule(smiles, seed=seed, largest_fragment=largest_fragment)
    record, _, notes = compute_record(molecule, calc_opts, progress)
    t1 = time.perf_counter()
    pred = analyse(record, spec_opts)
    record.timings["analysis_seconds"] = time.perf_counter() - t1
    record.timings["total_seconds"] = time.perf_counter() - t0
    return pred


def isotopologue(parent: Prediction, spec: str, options: SpectrumOptions | None = None):
    """The prediction for the isotopologue ``spec`` (see :mod:`vibest.analysis.isotopes`) from the
    parent's record (no new gradients), and the shift of every parent band."""
    from .analysis.isotopes import band_shifts, isotopologue_masses

    rec = parent.record
    masses = isotopologue_masses(rec.numbers, rec.bonds, spec, base_masses_amu=rec.masses_amu)
    opts = options or SpectrumOptions(fwhm_cm1=parent.spectrum.fwhm_cm1, line_shape=parent.spectrum.line_shape,
                                      scale_factor=parent.scale.factor if parent.scale.name == "user" else None,
                                      scale_model=None if parent.scale.name == "user" else parent.scale.name)
    iso = analyse(rec, opts, masses_amu=masses, notes=(f"isotopologue {spec}",))
    shifts = band_shifts(parent.wavenumbers_cm1, parent.modes, iso.wavenumbers_cm1, iso.modes)
    return iso, shifts


def prediction_thermochemistry(pred: Prediction, temperature_K: float = 298.15, pressure_Pa: float = 101325.0,
                               symmetry_number: int | None = None, quasi_harmonic: bool = False):
    """Thermochemistry of a prediction from its scaled wavenumbers; the symmetry number is found
    from the structure unless given."""
    from .analysis.thermo import rotational_symmetry_number, thermochemistry

    rec = pred.record
    sigma = symmetry_number or rotational_symmetry_number(record_molecule(rec), rec.positions_angstrom)
    return thermochemistry(pred.wavenumbers_cm1, rec.positions_angstrom, pred.modes.masses_amu, rec.energy_hartree,
                           temperature_K, pressure_Pa, sigma, rec.uhf + 1, quasi_harmonic)

"""The prediction pipeline: SMILES -> Hessian record (expensive) -> analysed prediction (cheap).

:func:`compute_record` (from :mod:`vibest.calculation.driver`) is the expensive stage.
:func:`analyse` turns a stored record into wavenumbers, intensities, band characters and a
spectrum without any new gradient, so re-analysis (other scaling, width, masses) is instant.
"""

from __future__ import annotations

import dataclasses
import platform
import time
from dataclasses import dataclass
from numbers import Integral

import numpy as np

from . import __version__
from .analysis.composition import ModeComposition, mode_composition
from .analysis.harmonic import HarmonicModes, harmonic_analysis, rayleigh_wavenumbers
from .analysis.internal_space import InternalSpace
from .analysis.scaling import (DEFAULT_METHOD_NAME, UNRECORDED_METHOD_NAME, ScaleModel, default_scale_model, named_scale_model,
                               user_scale_model)
from .calculation.driver import (DEFAULT_DFT_MEMORY_MB, DEFAULT_SEED, IMAGINARY_THRESHOLD_CM1,  # noqa: F401
                                 CalculationOptions, Progress, calculation_options, check_cost, compute_record)
from .calculation.methods import DEFAULT_METHOD
from .calculation.optimizer import OptimizerSettings
from .analysis.groups import band_label, find_groups, named_band
from .calculation.record import HessianRecord, record_molecule
from .errors import InputError
from .spectrum import DEFAULT_FWHM_CM1, DEFAULT_RANGE_CM1, DEFAULT_STEP_CM1, LINE_SHAPES, Spectrum, broaden, grid
from .structure import Molecule, build_molecule

CAUTION = ("Predicted spectra are estimates from an approximate quantum-chemical model; confirm any "
           "identification with reference standards and a validated method.")
#: The caution's short form, printed at the foot of every plot.
PLOT_CAUTION = "Estimate only: confirm with reference standards and validated methods."


def is_count(value) -> bool:
    """A whole number of at least 0 (any integer type, numpy's too; not a bool)."""
    return not isinstance(value, bool) and isinstance(value, Integral) and value >= 0


def is_real(value) -> bool:
    """A finite real number (not a bool, not a string)."""
    if isinstance(value, bool) or not isinstance(value, (int, float)):
        return False
    try:
        return bool(np.isfinite(float(value)))
    except OverflowError:
        return False


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
        for name in ("fwhm_cm1", "step_cm1", "scale_factor"):
            value = getattr(self, name)
            if value is None and name == "scale_factor":
                continue
            if not is_real(value):
                raise InputError(f"{name} must be a number, not {value!r}")
        try:
            lo, hi = (float(v) for v in self.range_cm1)
        except (TypeError, ValueError, OverflowError):
            raise InputError(f"range_cm1 must be two numbers (cm^-1), not {self.range_cm1!r}") from None
        if not (np.isfinite(lo) and np.isfinite(hi)):
            raise InputError(f"range_cm1 must be two finite numbers (cm^-1), not {self.range_cm1!r}")
        if not isinstance(self.line_shape, str) or self.line_shape not in LINE_SHAPES:
            raise InputError(f"line shape {self.line_shape!r} unknown; choose one of {', '.join(LINE_SHAPES)}")
        if not (0 < self.fwhm_cm1 <= 500):
            raise InputError(f"FWHM {self.fwhm_cm1:g} cm^-1 must be above 0 and at most 500")
        if not (0 <= lo < hi <= 10000):
            raise InputError(f"range {lo}-{hi} cm^-1 must satisfy 0 <= low < high <= 10000")
        if not (0 < self.step_cm1 <= (hi - lo) / 2):
            raise InputError(f"grid step {self.step_cm1} cm^-1 does not fit the range")

    def resolve_scale(self, method: str = DEFAULT_METHOD_NAME) -> ScaleModel:
        """The scale model for Hessians computed with ``method`` (its recorded name)."""
        if self.scale_factor is not None:
            return user_scale_model(self.scale_factor)
        if self.scale_model is not None:
            return named_scale_model(self.scale_model, method)
        return default_scale_model(method)


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
        hydrogen_bonding: computed hydrogen-bond changes of its stretches
            (:class:`vibest.hydrogen_bonding.HydrogenBonding`), attached for comparisons with
            condensed samples by :func:`vibest.hydrogen_bonding.with_hydrogen_bonding`; else None.
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
    hydrogen_bonding: object | None = None

    @property
    def smiles(self) -> str:
        return self.record.smiles

    @property
    def first_prediction(self) -> "Prediction":
        """Itself (an ensemble's is its first member's: code that takes either reads this)."""
        return self

    @property
    def medium(self) -> str:
        """"gas phase", or the implicit solvent and its model (e.g. "in chcl3 (ALPB)")."""
        engine = self.record.settings.get("engine", {})
        solvent = engine.get("solvent")
        return f"in {solvent} ({str(engine.get('solvent_model', 'alpb')).upper()})" if solvent else "gas phase"

    @property
    def method_name(self) -> str:
        """The level of theory in words (e.g. "GFN2-xTB", or "GFN2-xTB positions, B3LYP-...
        intensities")."""
        return record_level(self.record)

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


def record_method(record: HessianRecord) -> str:
    """Name of the method that computed the record's Hessian (GFN2-xTB for records without one)."""
    return str(record.settings.get("engine", {}).get("method", UNRECORDED_METHOD_NAME))


def record_level(record: HessianRecord) -> str:
    """The level of theory of a record in words: its method, and the intensities' method when another."""
    other = record.settings.get("intensity_engine")
    base = record_method(record)
    return base if not other else f"{base} positions, {other.get('method', '?')} intensities"


def analyse(record: HessianRecord, options: SpectrumOptions = SpectrumOptions(),
            masses_amu=None, notes: tuple[str, ...] = ()) -> Prediction:
    """Turn a Hessian record into bands and a spectrum (no gradients are computed).

    ``masses_amu`` (N,) replaces the record's masses (:attr:`HessianRecord.masses_amu`: isotopes
    named in the SMILES, else standard atomic weights). The prediction's notes are the record's
    notes followed by ``notes``."""
    options.validate()
    if masses_amu is None:
        masses_amu = record.masses_amu
    scale = options.resolve_scale(record_method(record))
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
             label=named_band(band_label(record.numbers, record.bonds, comp.primitives, comp.shares[k],
                                         comp.internal_displacements[k], groups, mol), float(scaled[k]))
             if len(comp.primitives) else "")
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


def predict(smiles: str, *, method: str = DEFAULT_METHOD, seed: int = DEFAULT_SEED, largest_fragment: bool = False,
            scale_factor: float | None = None, scale_model: str | None = None,
            fwhm_cm1: float = DEFAULT_FWHM_CM1, line_shape: str = "lorentzian",
            range_cm1: tuple[float, float] = DEFAULT_RANGE_CM1, step_cm1: float = DEFAULT_STEP_CM1,
            workers: int | None = None, backend: str = "tblite", solvent: str | None = None,
            solvent_model: str = "alpb", memory_mb: int = DEFAULT_DFT_MEMORY_MB, allow_long: bool = False,
            max_force_hartree_bohr: float = OptimizerSettings.max_force_hartree_bohr,
            hessian_step_bohr: float = 0.005, progress: Progress | None = None,
            store=None) -> Prediction:
    """Predict the IR spectrum of one molecule given as SMILES.

    Args:
        smiles: the structure; charges and radicals in the SMILES set charge and spin, isotopes
            ([2H], [13CH3]) the masses.
        method: level of theory: "gfn1" (GFN1-xTB, default), "gfn2" (GFN2-xTB), "b3lyp" (B3LYP-D3(BJ)/6-31G(d) for
            geometry, Hessian and intensities), "gfn2+b3lyp" (GFN2-xTB positions, B3LYP
            intensities); see ``vibest methods``.
        seed: embedding seed (same seed, same result).
        largest_fragment: for salts/mixtures, keep the largest fragment instead of refusing.
        scale_factor: a uniform scale factor instead of the fitted default model.
        scale_model: "uniform", "region" or "per-coordinate" (default: the method's default model).
        fwhm_cm1, line_shape, range_cm1, step_cm1: broadening and grid (cm^-1).
        workers: parallel workers for the Hessian, or threads of a DFT calculation (default all cores).
        backend: "tblite" (default) or "xtb" for the tight-binding methods.
        solvent: implicit solvent name or None (gas phase); solvent_model: "alpb" or "cpcm".
        memory_mb: memory a DFT calculation may use (MB).
        allow_long: run a DFT calculation even when it is estimated to take hours.
        max_force_hartree_bohr: optimisation convergence, Eh/Bohr.
        hessian_step_bohr: finite-difference step, Bohr.
        progress: optional callback progress(stage, done, total, message).
        store: a result store (a path to its SQLite file, or a :class:`vibest.RecordStore`):
            the record is taken from it when it holds one for these settings, else computed and
            kept there, so that calling again (a minutes-long DFT calculation, say) costs
            nothing. None (default): always computed, nothing kept.

    Raises:
        InputError: for invalid input (message suitable for the user).
        CalculationError: when the electronic-structure calculation fails.
    """
    try:
        range_cm1 = tuple(range_cm1)
    except TypeError:
        raise InputError(f"range_cm1 must be two numbers (cm^-1), not {range_cm1!r}") from None
    spec_opts = SpectrumOptions(scale_factor, fwhm_cm1, line_shape, range_cm1, step_cm1, scale_model)
    spec_opts.validate()
    calc_opts = calculation_options(method, seed=seed, largest_fragment=largest_fragment, backend=backend,
                                    solvent=solvent, solvent_model=solvent_model, workers=workers,
                                    memory_mb=memory_mb, max_force_hartree_bohr=max_force_hartree_bohr,
                                    hessian_step_bohr=hessian_step_bohr, allow_long=allow_long)
    if store is None:
        return predict_with(smiles, calc_opts, spec_opts, progress)
    from .ranking import predict_stored
    from .store import open_store

    return predict_stored(smiles, calc_opts, spec_opts, open_store(store), progress)[0]


def predict_with(smiles: str, calc: CalculationOptions, spec: SpectrumOptions = SpectrumOptions(),
                 progress: Progress | None = None) -> Prediction:
    """:func:`predict` with its settings as option objects (checked before any calculation)."""
    spec.validate()
    spec.resolve_scale(calc.engine.method)
    t0 = time.perf_counter()
    if progress is not None:
        progress("structure", 0, 1, smiles)
    molecule = build_molecule(smiles, seed=calc.seed, largest_fragment=calc.largest_fragment,
                              allow_large=calc.allow_long, start_conformers=calc.start_conformers)
    check_cost(molecule, calc)
    record, _, notes = compute_record(molecule, calc, progress)
    t1 = time.perf_counter()
    pred = analyse(record, spec)
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

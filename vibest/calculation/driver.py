"""The expensive stage as one call: a 3D structure in, a :class:`HessianRecord` out.

Three steps, each its own function: optimise to a minimum, compute the Hessian and dipole
derivatives there, and if the Hessian shows an imaginary mode, displace along it and go again
(at most ``max_imaginary_retries`` times). The Hessian comes from finite differences of
gradients (tight-binding engines) or analytically (density-functional engine). With a
density-functional method the geometry is first optimised with GFN2-xTB, so that the costly
gradients start near their minimum. With density-functional intensities only (``gfn2+b3lyp``),
the tight-binding record gets the dipole derivatives of the density functional at its own
geometry.
"""

from __future__ import annotations

import dataclasses
import time
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
from ase.units import Bohr

from ..analysis.harmonic import harmonic_analysis
from ..errors import InputError
from ..structure import DEFAULT_SEED
from .engine import Engine, EngineSettings, Evaluation, calculation_threads, make_engine, solvent_keyword
from .hessian import default_workers, finite_difference_hessian
from .methods import DEFAULT_METHOD, METHODS, parse_level
from .optimizer import OptimizerSettings, optimize
from .record import HessianRecord
from .workers import pool_is_ready, prestart

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
#: Memory a density-functional calculation may use unless told otherwise (MB).
DEFAULT_DFT_MEMORY_MB = 4000

#: progress(stage, done, total, message)
Progress = Callable[[str, int, int, str], None]


@dataclass(frozen=True)
class CalculationOptions:
    """Settings of the expensive stage (all but ``workers`` and ``memory_mb`` change the numbers,
    and all of those are recorded).

    Attributes:
        seed: random seed of the 3D embedding.
        largest_fragment: keep only the largest fragment of a multi-fragment SMILES.
        engine: level of theory of geometry and Hessian (:class:`EngineSettings`).
        optimizer: convergence settings (:class:`OptimizerSettings`).
        hessian_step_bohr: finite-difference step, Bohr (tight-binding engines).
        hessian_displacements: ``"vibrational"`` (default: central differences along the 3N-6
            directions orthogonal to translations and rotations, 6N-12 gradients, the rest from
            the invariance of the energy) or ``"cartesian"`` (every Cartesian coordinate, 6N).
        workers: parallel workers for the Hessian, or threads of a density-functional
            calculation (None = all cores).
        max_imaginary_retries: how often to displace along an imaginary mode and re-optimise.
        intensity_engine: another level of theory for the dipole derivatives (density
            functional), or None for the engine's own.
        memory_mb: memory a density-functional calculation may use (MB).
        allow_long: compute molecules above the size limit and DFT calculations estimated at hours.
        start_conformers: for a flexible molecule, optimise the few lowest force-field conformers
            (:func:`vibest.structure.build_molecule`) and keep the lowest minimum.
    """

    seed: int = DEFAULT_SEED
    largest_fragment: bool = False
    engine: EngineSettings = field(default_factory=EngineSettings)
    optimizer: OptimizerSettings = field(default_factory=OptimizerSettings)
    hessian_step_bohr: float = 0.005
    hessian_displacements: str = "vibrational"
    workers: int | None = None
    max_imaginary_retries: int = 2
    intensity_engine: EngineSettings | None = None
    memory_mb: int = DEFAULT_DFT_MEMORY_MB
    allow_long: bool = False
    start_conformers: bool = True

    def to_dict(self) -> dict:
        """What changes the numbers (the store key is made from it): no workers, memory or
        permission, and no ``intensity_engine`` unless set (keys of tight-binding records stay as
        they were)."""
        d = dataclasses.asdict(self)
        d["engine"] = self.engine.to_dict()
        for name in ("workers", "memory_mb", "allow_long"):
            d.pop(name)
        if self.intensity_engine is None:
            d.pop("intensity_engine")
        else:
            d["intensity_engine"] = self.intensity_engine.to_dict()
        return d

    @property
    def uses_dft(self) -> bool:
        return self.engine.is_dft or self.intensity_engine is not None

    @property
    def method_name(self) -> str:
        """The level in words: "GFN2-xTB", or "GFN2-xTB positions, B3LYP-... intensities"."""
        if self.intensity_engine is None:
            return self.engine.method
        return f"{self.engine.method} positions, {self.intensity_engine.method} intensities"


def calculation_options(method: str = DEFAULT_METHOD, *, seed: int = DEFAULT_SEED, largest_fragment: bool = False,
                        backend: str = "tblite", solvent: str | None = None, solvent_model: str = "alpb",
                        workers: int | None = None, memory_mb: int = DEFAULT_DFT_MEMORY_MB,
                        max_force_hartree_bohr: float = OptimizerSettings.max_force_hartree_bohr,
                        hessian_step_bohr: float = 0.005, allow_long: bool = False) -> CalculationOptions:
    """Checked :class:`CalculationOptions` from the plain values a user gives (the command line
    and :func:`vibest.predict` both build them here). ``method``: a level as
    :func:`vibest.calculation.methods.parse_level` reads it (``gfn2``, ``b3lyp``, ``gfn2+b3lyp``)."""
    level = parse_level(method)
    for name, value in (("workers", workers), ("memory_mb", memory_mb)):
        if value is not None and (isinstance(value, bool) or not isinstance(value, int)):
            raise InputError(f"{name} must be a whole number, not {value!r}")
    if workers is not None and workers < 1:
        raise InputError("workers must be at least 1")
    if isinstance(seed, bool) or not isinstance(seed, int) or not 0 <= seed < 2 ** 31:
        raise InputError(f"seed {seed!r} must be a whole number from 0 to {2 ** 31 - 1}")
    if not isinstance(max_force_hartree_bohr, (int, float)) or not 1e-8 <= max_force_hartree_bohr <= 1e-1:
        raise InputError(f"max_force_hartree_bohr {max_force_hartree_bohr!r} must be a number from 1e-8 to 0.1")
    if not isinstance(hessian_step_bohr, (int, float)) or not 1e-4 <= hessian_step_bohr <= 0.1:
        raise InputError(f"hessian_step_bohr {hessian_step_bohr!r} must be a number from 1e-4 to 0.1")
    if memory_mb < 500:
        raise InputError(f"memory {memory_mb} MB is too little for a density-functional calculation (at least 500)")
    for name, value in (("backend", backend), ("solvent_model", solvent_model)):
        if not isinstance(value, str):
            raise InputError(f"{name} must be a name, not {value!r}")
    solvent = solvent_keyword(solvent)  # common names (chloroform) accepted beside the keywords (chcl3)
    engine = EngineSettings.for_method(level.positions, backend, solvent, solvent_model)
    engine.validate()
    intensities = EngineSettings.for_method(level.intensities) if level.intensities else None
    return CalculationOptions(seed=seed, largest_fragment=largest_fragment, engine=engine,
                              optimizer=OptimizerSettings(max_force_hartree_bohr=max_force_hartree_bohr),
                              hessian_step_bohr=hessian_step_bohr, workers=workers, intensity_engine=intensities,
                              memory_mb=int(memory_mb), allow_long=allow_long)


#: A density-functional calculation estimated to take longer than this (s) is refused unless the
#: user insists (``allow_long``, ``--force``).
MAX_DFT_SECONDS = 2 * 3600.0


def check_cost(molecule, options: CalculationOptions) -> float | None:
    """Estimated wall time (s) of the density-functional part of ``options`` for ``molecule``
    (None without one); InputError when it exceeds :data:`MAX_DFT_SECONDS` and long runs were
    not allowed."""
    if not options.uses_dft:
        return None
    from .dft_engine import atoms_past_neon, build_pyscf_molecule, estimated_seconds

    settings = options.engine if options.engine.is_dft else options.intensity_engine
    size = build_pyscf_molecule(molecule.numbers, molecule.positions_angstrom / Bohr, molecule.charge, molecule.uhf,
                                settings).nao
    tier = "full" if options.engine.is_dft else "intensities"
    seconds = estimated_seconds(size, len(atoms_past_neon(molecule.numbers)), tier,
                                options.workers or default_workers())
    if seconds > MAX_DFT_SECONDS and not options.allow_long:
        raise InputError(f"{settings.method} for this molecule ({molecule.natoms} atoms, {size} basis functions) is "
                         f"estimated at {seconds / 3600:.1f} h on {options.workers or default_workers()} cores; "
                         "add --force to run it anyway, or use a cheaper method (gfn2, gfn2+b3lyp)")
    return seconds


def _notify(progress: Progress | None, stage: str, done: int, total: int, message: str = "") -> None:
    if progress is not None:
        progress(stage, done, total, message)


def compute_record(molecule, options: CalculationOptions = CalculationOptions(),
                   progress: Progress | None = None) -> tuple[HessianRecord, bool, list[str]]:
    """Optimise the geometry, compute the Hessian and dipole derivatives (the expensive stage).

    Returns the record, whether the optimisation converged, and notes. Tight-binding engines
    compute with one OpenMP/BLAS thread in this process (parallelism comes from Hessian
    workers); a density-functional engine uses ``options.workers`` threads (all cores)."""
    with calculation_threads():
        if options.engine.is_dft:
            return _dft_record(molecule, options, progress)
        record, converged, notes = _tight_binding_record(molecule, options, progress)
        if options.intensity_engine is not None:
            record = with_dft_intensities(record, options, progress)
        return record, converged, notes


# -- timings -------------------------------------------------------------------------------

@dataclass
class Timings:
    """Counts and seconds of one calculation, filled in as it goes; the record keeps
    :meth:`to_dict` (JSON-able; stages that did not happen are left out)."""

    hessian_workers: int
    optimization_gradients: int = 0
    optimization_seconds: float = 0.0
    optimization_gradient_seconds: float = 0.0
    hessian_gradients: int = 0
    hessian_seconds: float = 0.0
    retries: int = 0
    optimization_coordinates: str | None = None
    hessian_displacements: str | None = None
    hessian_analytic: bool | None = None
    start_conformers: int | None = None
    preoptimization_gradients: int | None = None
    preoptimization_seconds: float | None = None
    basis_functions: int | None = None

    def count_optimisation(self, gradients: int, seconds: float, gradient_seconds: float) -> None:
        self.optimization_gradients += gradients
        self.optimization_seconds += seconds
        self.optimization_gradient_seconds += gradient_seconds

    @property
    def seconds_per_optimisation_gradient(self) -> float:
        """Mean over the optimisation gradients so far (the first included)."""
        return self.optimization_gradient_seconds / max(self.optimization_gradients, 1)

    def to_dict(self) -> dict:
        return {k: v for k, v in dataclasses.asdict(self).items() if v is not None}


# -- the three steps -------------------------------------------------------------------------

HessianStep = Callable[[np.ndarray, Evaluation, "Timings"], tuple[np.ndarray, np.ndarray, Evaluation]]


def _minimum_and_hessian(engine: Engine, numbers, x: np.ndarray, options: CalculationOptions, hessian_step: HessianStep,
                         progress: Progress | None, timings: Timings, notes: list[str], first: Evaluation | None = None,
                         start_hessian: np.ndarray | None = None):
    """Optimise from ``x`` (Bohr), compute the Hessian there, and leave saddle points (displace
    along the imaginary modes and re-optimise). ``start_hessian``: the first optimisation's start
    curvature at ``x`` (Eh/Bohr^2; else Lindh's model). Returns (positions Bohr, evaluation
    there, Hessian Eh/Bohr^2, dipole derivatives e, optimisation converged)."""
    attempt = 0
    while True:
        def opt_progress(step, energy, force):
            _notify(progress, "optimisation", step, options.optimizer.max_steps,
                    f"E = {energy:.8f} Eh, max force {force:.1e} Eh/Bohr")

        opt = optimize(engine, numbers, x, options.optimizer, progress=opt_progress, first=first, hessian=start_hessian)
        timings.count_optimisation(opt.gradient_calls, opt.seconds, opt.gradient_seconds)
        timings.optimization_coordinates = opt.coordinates
        first = start_hessian = None
        if not opt.converged:
            notes.append(f"geometry optimisation did not converge in {opt.gradient_calls} gradients "
                         f"(max force {opt.max_force_hartree_bohr:.1e} Eh/Bohr); frequencies may be unreliable")
        x = opt.positions_bohr
        # The wavefunction at the final geometry is the SCF guess of every displacement.
        ev = opt.final_evaluation
        if ev is None:
            t = time.perf_counter()
            ev = engine.evaluate(x)
            t = time.perf_counter() - t
            timings.count_optimisation(1, t, t)
        hessian, dipole_derivatives, ev = hessian_step(x, ev, timings)
        modes = harmonic_analysis(numbers, x * Bohr, hessian)
        bad = [k for k in modes.imaginary if modes.wavenumbers_cm1[k] < -IMAGINARY_THRESHOLD_CM1]
        if not bad or attempt >= options.max_imaginary_retries:
            return x, ev, hessian, dipole_derivatives, bool(opt.converged)
        attempt += 1
        timings.retries = attempt
        notes.append(f"imaginary mode(s) {', '.join(f'{modes.wavenumbers_cm1[k]:.0f}' for k in bad)} cm^-1 "
                     f"found: displaced along them and re-optimised (attempt {attempt})")
        for k in bad:
            d = modes.displacements[k]
            x = x + (0.2 / Bohr) * d / np.abs(d).max() * 0.5


def _finite_difference_step(engine: Engine, molecule, options: CalculationOptions, progress: Progress | None,
                            first_seconds: float) -> HessianStep:
    """Hessian by finite differences of gradients, in parallel when it pays (threads for tblite,
    worker processes for engines that cannot compute in threads; the pool starts now, to overlap
    the optimisation, when the Hessian is expected to be long)."""
    workers = options.workers or default_workers()
    numbers = molecule.numbers

    def parallel_pays(per_gradient_seconds: float) -> bool:
        expected = 6 * len(numbers) * RESTARTED_GRADIENT_FRACTION * per_gradient_seconds
        if engine.concurrent:
            return expected > THREAD_HESSIAN_SECONDS
        return expected > (POOL_USE_HESSIAN_SECONDS if pool_is_ready(workers) else POOL_START_HESSIAN_SECONDS)

    started = workers > 1 and (engine.concurrent or bool(options.workers) or parallel_pays(first_seconds))
    if started and not engine.concurrent:
        prestart(workers)

    def step(x, ev, timings):
        # over all optimisation gradients so far, the first included
        per_gradient = timings.seconds_per_optimisation_gradient
        use = workers if started and (options.workers or parallel_pays(per_gradient)) else 1
        hes = finite_difference_hessian(engine, numbers, x, molecule.charge, molecule.uhf,
                                        step_bohr=options.hessian_step_bohr, workers=use,
                                        progress=lambda d, t: _notify(progress, "hessian", d, t),
                                        displacements=options.hessian_displacements, reference=ev)
        timings.hessian_gradients += hes.gradient_calls
        timings.hessian_seconds += hes.seconds
        timings.hessian_workers = hes.workers
        timings.hessian_displacements = hes.displacements
        return hes.hessian_hartree_bohr2, hes.dipole_derivatives_e, ev

    return step


def _analytic_step(engine: Engine, progress: Progress | None) -> HessianStep:
    """Hessian and dipole derivatives from the engine's analytic second derivatives."""
    def step(x, ev, timings):
        t = time.perf_counter()
        hessian, dipole_derivatives, ev = engine.hessian_and_dipole_derivatives(
            x, progress=lambda name, message: _notify(progress, "DFT Hessian", 0, 0, f"{name} {message}".strip()),
            reference=ev)
        timings.hessian_seconds += time.perf_counter() - t
        timings.hessian_analytic = True
        return hessian, dipole_derivatives, ev

    return step


# -- the records -----------------------------------------------------------------------------

def _record(molecule, options: CalculationOptions, x: np.ndarray, ev: Evaluation, hessian, dipole_derivatives,
            converged: bool, timings: Timings, notes: list[str]) -> HessianRecord:
    return HessianRecord(
        smiles=molecule.smiles, numbers=molecule.numbers, positions_angstrom=x * Bohr, bonds=molecule.bonds,
        charge=molecule.charge, uhf=molecule.uhf, energy_hartree=ev.energy_hartree,
        hessian_hartree_bohr2=hessian, dipole_e_bohr=ev.dipole_e_bohr, dipole_derivatives_e=dipole_derivatives,
        settings=options.to_dict() | {"converged": bool(converged)}, timings=timings.to_dict(),
        molblock=molecule.molblock, notes=tuple(molecule.notes) + tuple(notes), mass_numbers=molecule.mass_numbers,
    )


#: Of a flexible molecule's start geometries, this many lowest by a single-point energy of the
#: engine are optimised (the force field's order is a poorer guide: for cyclohexanol from the
#: default seed, the 4 lowest by MMFF94 missed the lowest GFN2-xTB minimum by 1.2 kcal/mol).
OPTIMISED_STARTS = 4


def _lowest_start(engine: Engine, molecule, options: CalculationOptions, progress: Progress | None, timings: Timings,
                  notes: list[str]) -> np.ndarray:
    """Positions (Bohr) to optimise from: with alternative start conformers, the
    :data:`OPTIMISED_STARTS` lowest by a single point are optimised and the lowest minimum kept
    (its optimisation then converges at once); else the molecule's own."""
    starts = [molecule.positions_angstrom, *molecule.alternatives]
    if len(starts) == 1:
        return molecule.positions_angstrom / Bohr
    if len(starts) > OPTIMISED_STARTS:
        t = time.perf_counter()
        energies = []
        for pos in starts:
            engine.restart_from(None)
            energies.append(engine.evaluate(pos / Bohr).energy_hartree)
        t = time.perf_counter() - t
        timings.count_optimisation(len(starts), t, t)
        starts = [starts[k] for k in np.argsort(energies, kind="stable")[:OPTIMISED_STARTS]]
    found = []
    for k, pos in enumerate(starts):
        _notify(progress, "start conformers", k, len(starts), f"optimising start conformer {k + 1} of {len(starts)}")
        engine.restart_from(None)
        opt = optimize(engine, molecule.numbers, pos / Bohr, options.optimizer)
        timings.count_optimisation(opt.gradient_calls, opt.seconds, opt.gradient_seconds)
        found.append((opt.energy_hartree, k, opt.positions_bohr))
    found.sort(key=lambda f: (f[0], f[1]))
    from ase.units import Hartree, kcal, mol

    others = ", ".join(f"+{(e - found[0][0]) * Hartree / (kcal / mol):.1f}" for e, _, _ in found[1:])
    notes.append(f"{len(starts)} start conformers optimised with {engine.settings.method} (the lowest by a single "
                 f"point of {len(molecule.alternatives) + 1}): the lowest minimum kept, the others {others} kcal/mol above")
    timings.start_conformers = len(starts)
    engine.restart_from(None)
    return found[0][2]


def _tight_binding_record(molecule, options: CalculationOptions, progress: Progress | None):
    notes: list[str] = []
    x = molecule.positions_angstrom / Bohr
    engine = make_engine(molecule.numbers, x, molecule.charge, molecule.uhf, options.engine)
    timings = Timings(options.workers or default_workers())
    x = _lowest_start(engine, molecule, options, progress, timings, notes)
    t = time.perf_counter()
    first = engine.evaluate(x)
    t = time.perf_counter() - t
    # the first gradient, made here to decide on the pool, is the optimisation's first
    timings.count_optimisation(1, t, t)
    step = _finite_difference_step(engine, molecule, options, progress, t)
    x, ev, hessian, dmu, converged = _minimum_and_hessian(engine, molecule.numbers, x, options, step, progress,
                                                          timings, notes, first)
    return _record(molecule, options, x, ev, hessian, dmu, converged, timings, notes), converged, notes


def _dft_resources(options: CalculationOptions):
    from .dft_engine import DFTResources

    return DFTResources(threads=options.workers, memory_mb=options.memory_mb)


#: The tight-binding level a density-functional optimisation starts from (and its records were
#: fitted from): GFN2-xTB, whatever the default level.
DFT_START_ENGINE = EngineSettings(method=METHODS["gfn2"].name)


def _tight_binding_minimum(molecule, options: CalculationOptions, progress: Progress | None,
                           timings: Timings, notes: list[str]) -> tuple[np.ndarray, np.ndarray]:
    """The GFN2-xTB minimum (Bohr) a density-functional optimisation starts from, and the GFN2-xTB
    Hessian there (Eh/Bohr^2), the optimisation's start curvature: on acetone, 2-butanone, methyl
    acetate, phenol and 1-butanol it took 30-40 % fewer gradients than Lindh's model (GFN2-xTB
    optimisations from randomly displaced minima: 8/13/25/9/8 -> 5/9/16/5/6)."""
    t = time.perf_counter()
    x = molecule.positions_angstrom / Bohr
    start = make_engine(molecule.numbers, x, molecule.charge, molecule.uhf, DFT_START_ENGINE)
    _notify(progress, "pre-optimisation", 0, 1, "GFN2-xTB")
    x = _lowest_start(start, molecule, options, progress, timings, notes)
    opt = optimize(start, molecule.numbers, x, options.optimizer)
    ev = opt.final_evaluation or start.evaluate(opt.positions_bohr)
    hes = finite_difference_hessian(start, molecule.numbers, opt.positions_bohr, molecule.charge, molecule.uhf,
                                    step_bohr=options.hessian_step_bohr, workers=options.workers or default_workers(),
                                    reference=ev)
    timings.preoptimization_gradients = opt.gradient_calls + hes.gradient_calls
    timings.preoptimization_seconds = time.perf_counter() - t
    return opt.positions_bohr, hes.hessian_hartree_bohr2


def _dft_record(molecule, options: CalculationOptions, progress: Progress | None):
    notes: list[str] = []
    timings = Timings(options.workers or default_workers())
    x, start_hessian = _tight_binding_minimum(molecule, options, progress, timings, notes)
    engine = make_engine(molecule.numbers, x, molecule.charge, molecule.uhf, options.engine, _dft_resources(options))
    timings.basis_functions = engine.basis_functions
    notes.extend(_core_potential_notes(molecule.numbers, options.engine))
    x, ev, hessian, dmu, converged = _minimum_and_hessian(engine, molecule.numbers, x, options,
                                                          _analytic_step(engine, progress), progress, timings, notes,
                                                          start_hessian=start_hessian)
    return _record(molecule, options, x, ev, hessian, dmu, converged, timings, notes), converged, notes


def with_dft_intensities(record: HessianRecord, options: CalculationOptions,
                         progress: Progress | None = None) -> HessianRecord:
    """``record`` with the dipole derivatives of ``options.intensity_engine`` at its geometry
    (the Hessian, hence the modes and positions, stay the record's own)."""
    settings = options.intensity_engine
    if settings is None or not settings.is_dft:
        raise InputError("intensities from another method need a density-functional method (e.g. gfn2+b3lyp)")
    x = record.positions_angstrom / Bohr
    engine = make_engine(record.numbers, x, record.charge, record.uhf, settings, _dft_resources(options))
    t = time.perf_counter()
    dmu = engine.dipole_derivatives(
        x, progress=lambda name, message: _notify(progress, "DFT intensities", 0, 0, f"{name} {message}".strip()))
    timings = dict(record.timings) | {"intensity_seconds": time.perf_counter() - t,
                                      "basis_functions": engine.basis_functions}
    settings_dict = dict(record.settings) | {"intensity_engine": settings.to_dict()}
    notes = tuple(record.notes) + tuple(f"intensities: {n}" for n in _core_potential_notes(record.numbers, settings))
    return dataclasses.replace(record, dipole_derivatives_e=dmu, settings=settings_dict, timings=timings, notes=notes)


def _core_potential_notes(numbers, settings: EngineSettings) -> list[str]:
    """The one-line note of vibest.calculation.dft_engine.core_potential_note, if any."""
    from .dft_engine import core_potential_note

    note = core_potential_note(numbers, settings.dft)
    return [note] if note else []

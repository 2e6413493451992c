"""The density-functional tier (PySCF engine): analytic Hessian and dipole derivatives checked
against PySCF's own harmonic analysis and against finite differences of the SCF dipole; the
two ways to use it (full, intensities only); what it refuses.

For speed these tests use the STO-3G basis and a coarse grid (the shipped method uses 6-31G(d));
what they check (that vibest's assembly of PySCF's analytic pieces, its field-response dipole
derivatives and its harmonic analysis are right) does not depend on the basis."""

from __future__ import annotations

import dataclasses
import subprocess
import sys

import numpy as np
import pytest
from ase.units import Bohr

from vibest.analysis.harmonic import harmonic_analysis
from vibest.calculation.driver import CalculationOptions, calculation_options, compute_record
from vibest.calculation.engine import EngineSettings, make_engine
from vibest.calculation.methods import METHODS, DFTSettings, Method, parse_level
from vibest.errors import InputError
from vibest.structure import build_molecule

pytest.importorskip("pyscf")

SMALL = Method("test", "B3LYP/STO-3G (test)", "dft", "small basis for tests",
               DFTSettings(functional="b3lyp", basis="sto-3g", dispersion=None, grid_level=1))


def small_options(**kw) -> CalculationOptions:
    return CalculationOptions(engine=EngineSettings.for_method(SMALL), workers=2, **kw)


def scf_dipole_differences(engine, x_bohr: np.ndarray, step: float = 0.01) -> np.ndarray:
    """Dipole derivatives (3N, 3), e, as central differences (``step`` Bohr) of the engine's SCF dipole."""
    numeric = np.zeros((x_bohr.size, 3))
    for k in range(x_bohr.size):
        plus, minus = x_bohr.ravel().copy(), x_bohr.ravel().copy()
        plus[k] += step
        minus[k] -= step
        numeric[k] = (engine.evaluate(plus.reshape(-1, 3)).dipole_e_bohr
                      - engine.evaluate(minus.reshape(-1, 3)).dipole_e_bohr) / (2 * step)
    return numeric


def gradient_differences(engine, x_bohr: np.ndarray, step: float = 0.005) -> np.ndarray:
    """Hessian (3N, 3N), Eh/Bohr^2, as central differences (``step`` Bohr) of the engine's
    analytic gradients, symmetrised."""
    n = x_bohr.size
    numeric = np.zeros((n, n))
    for k in range(n):
        plus, minus = x_bohr.ravel().copy(), x_bohr.ravel().copy()
        plus[k] += step
        minus[k] -= step
        numeric[k] = (engine.evaluate(plus.reshape(-1, 3)).gradient_hartree_bohr.ravel()
                      - engine.evaluate(minus.reshape(-1, 3)).gradient_hartree_bohr.ravel()) / (2 * step)
    return 0.5 * (numeric + numeric.T)


@pytest.fixture(scope="module")
def water_record():
    record, converged, _ = compute_record(build_molecule("O"), small_options())
    assert converged
    return record


@pytest.mark.slow
@pytest.mark.parametrize("smiles", ["O", "C=O"])
def test_frequencies_match_pyscfs_own_harmonic_analysis(smiles, water_record):
    """Reference: PySCF's Hessian (its own kernel, not vibest's assembly of its pieces) and its
    harmonic analysis (pyscf.hessian.thermo.harmonic_analysis) at vibest's optimised geometry;
    the issue asks for 0.5 cm^-1."""
    from pyscf import gto
    from pyscf.hessian import thermo

    from vibest.calculation.dft_engine import make_rks

    record = water_record if smiles == "O" else compute_record(build_molecule(smiles), small_options())[0]
    ours = harmonic_analysis(record.numbers, record.positions_angstrom, record.hessian_hartree_bohr2,
                             record.dipole_derivatives_e)
    mol = gto.M(atom=[(int(z), tuple(p)) for z, p in zip(record.numbers, record.positions_angstrom)],
                basis=SMALL.dft.basis, unit="Angstrom", verbose=0)
    mf = make_rks(mol, SMALL.dft, 2000)
    mf.kernel()
    theirs = thermo.harmonic_analysis(mol, mf.Hessian().kernel())["freq_wavenumber"]
    theirs = np.sort(np.real(theirs))
    assert np.abs(np.sort(ours.wavenumbers_cm1) - theirs).max() < 0.5, (ours.wavenumbers_cm1, theirs)
    # and the geometry is a minimum of this method: PySCF's own gradient there is small
    assert np.abs(mf.nuc_grad_method().kernel()).max() < 1e-4


@pytest.mark.slow
def test_dipole_derivatives_match_finite_differences_of_the_scf_dipole():
    """Reference: central differences (step 0.01 Bohr) of PySCF's SCF dipole. The SCF converges
    the dipole to ~1e-7 e Bohr, so the differences carry ~1e-4 e of noise and truncation; 2e-3 e
    is 0.4 % of the largest element."""
    mol = build_molecule("C=O")
    x = mol.positions_angstrom / Bohr
    engine = make_engine(mol.numbers, x, 0, 0, EngineSettings.for_method(SMALL))
    analytic = engine.dipole_derivatives(x)
    numeric = scf_dipole_differences(engine, x)
    assert np.abs(analytic - numeric).max() < 2e-3, np.abs(analytic - numeric).max()
    assert np.abs(analytic).max() > 0.3  # not trivially small
    # sum rule: moving the whole neutral molecule does not change its dipole
    assert np.abs(analytic.reshape(-1, 3, 3).sum(axis=0)).max() < 1e-3


def test_hessian_path_and_field_path_give_the_same_dipole_derivatives(water_record):
    """The full tier takes the dipole derivatives from the Hessian run, the intensities-only tier
    from its own call: same numbers (same field response) to SCF noise."""
    x = water_record.positions_angstrom / Bohr
    engine = make_engine(water_record.numbers, x, 0, 0, EngineSettings.for_method(SMALL))
    again = engine.dipole_derivatives(x)
    assert np.abs(again - water_record.dipole_derivatives_e).max() < 1e-5


def test_intensities_only_tier_keeps_the_tight_binding_modes():
    mol = build_molecule("O")
    base, _, _ = compute_record(mol, CalculationOptions(workers=1))
    mixed, _, _ = compute_record(mol, CalculationOptions(workers=1, intensity_engine=EngineSettings.for_method(SMALL)))
    assert np.allclose(mixed.hessian_hartree_bohr2, base.hessian_hartree_bohr2, atol=1e-8)
    assert not np.allclose(mixed.dipole_derivatives_e, base.dipole_derivatives_e, atol=1e-2)
    assert mixed.settings["intensity_engine"]["dft"]["basis"] == "sto-3g"
    # the record says how it was made, and the store key tells the two apart
    from vibest.store import RecordStore

    plain = CalculationOptions(workers=1)
    assert RecordStore.key_of("O", "", plain) != RecordStore.key_of("O", "", dataclasses.replace(
        plain, intensity_engine=EngineSettings.for_method(SMALL)))


def test_tight_binding_keys_do_not_change_with_the_new_fields():
    """Store keys are made from CalculationOptions.to_dict(): the DFT fields appear only when set,
    so records stored before this tier existed keep serving GFN2-xTB requests."""
    d = CalculationOptions().to_dict()
    assert "intensity_engine" not in d and "dft" not in d["engine"] and "memory_mb" not in d


@pytest.mark.parametrize("text, key", [("gfn2", "gfn2"), ("B3LYP", "b3lyp"), ("gfn2+b3lyp", "gfn2+b3lyp"),
                                       ("b3lyp+b3lyp", "b3lyp")])
def test_levels_are_read(text, key):
    assert parse_level(text).key == key


@pytest.mark.parametrize("text", ["b3lyp+gfn2", "gfn2+gfn1", "pbe", "gfn2+", "+b3lyp"])
def test_unreadable_levels_are_input_errors(text):
    with pytest.raises(InputError):
        parse_level(text)


def test_what_the_dft_tier_refuses_gives_one_line_and_exit_2():
    # a radical: restricted KS only; a solvent: not here
    for args in (["[CH3]", "--method", "b3lyp"],
                 ["CCO", "--method", "b3lyp", "--solvent", "water"], ["CCO", "--method", "nonsense"],
                 ["O", "--method", "wb97x"]):  # no fitted scale model: said before any computing
        res = subprocess.run([sys.executable, "-m", "vibest.cli", "predict", *args, "-q"],
                             capture_output=True, text=True, timeout=120)
        lines = [line for line in res.stderr.splitlines() if line.strip()]
        assert res.returncode == 2 and len(lines) == 1 and lines[0].startswith("vibest: error:"), (args, res.stderr)


def test_open_shell_refused_by_the_engine():
    mol = build_molecule("[CH3]")
    with pytest.raises(InputError, match="closed-shell"):
        make_engine(mol.numbers, mol.positions_angstrom / Bohr, mol.charge, mol.uhf,
                    EngineSettings.for_method(METHODS["b3lyp"]))


def test_density_fitted_hessian_terms_for_an_uncovered_functional_are_refused_before_any_scf(monkeypatch):
    """vibest's assembly, which alone takes density-fitted Hessian terms, covers LDA and GGA
    functionals without range separation: asking them for the range-separated wB97X fails when
    the engine is built (no SCF has run), not after a whole optimisation; B3LYP's shipped row
    builds."""
    import vibest.calculation.dft_engine as dft_engine

    monkeypatch.setattr(dft_engine.PySCFEngine, "_scf", lambda self, x: pytest.fail("an SCF ran"))
    water = build_molecule("O")
    wb97x = METHODS["wb97x"]
    fitted = dataclasses.replace(wb97x, dft=dataclasses.replace(wb97x.dft, hessian_two_electron="density-fitted"))
    for method, message in ((fitted, "range separation"), (dataclasses.replace(
            fitted, dft=dataclasses.replace(wb97x.dft, hessian_two_electron="fitted")), "one of exact")):
        with pytest.raises(InputError, match=message):
            make_engine(water.numbers, water.positions_angstrom / Bohr, 0, 0, EngineSettings.for_method(method))
    make_engine(water.numbers, water.positions_angstrom / Bohr, 0, 0, EngineSettings.for_method(METHODS["b3lyp"]))


def test_calculation_options_check_their_values():
    with pytest.raises(InputError, match="memory"):
        calculation_options("b3lyp", memory_mb=10)
    with pytest.raises(InputError, match="seed"):
        calculation_options(seed=10 ** 20)
    assert calculation_options("gfn2+b3lyp").intensity_engine.method == METHODS["b3lyp"].name


def test_rank_refine_recomputes_the_best_candidates_at_the_refining_level(tmp_path):
    """Constructed measured spectrum (the methyl radical's own default-level curve, for the
    mechanics only): the best two are recomputed at the (small-basis) DFT level, marked and ranked
    by their new scores; the methyl radical, which the refining level cannot compute (open shell),
    keeps its first result with a note and follows the refined ones although its first-level
    score is the highest (scores of two levels are never compared); the rest are not refined.
    Each refined entry keeps its screening rank, and the assessment flags that the levels
    disagree on the first candidate."""
    from vibest.confidence import LEVELS_DISAGREE, assess
    from vibest.measured import MeasuredSpectrum
    from vibest.pipeline import SpectrumOptions, analyse
    from vibest.ranking import Candidate, rank_candidates
    from vibest.store import RecordStore

    from .conftest import record_of

    methyl = analyse(record_of("[CH3]"), SpectrumOptions(scale_factor=0.97))  # as the candidates are scaled
    heard: list[str] = []
    measured = MeasuredSpectrum(methyl.spectrum.wavenumbers_cm1, methyl.spectrum.absorbance_normalised, "absorbance")
    store = RecordStore(tmp_path / "store.sqlite")
    ranking = rank_candidates(measured, [Candidate("water", "O"), Candidate("methyl", "[CH3]"),
                                         Candidate("formaldehyde", "C=O"), Candidate("methane", "C")],
                              calc=CalculationOptions(workers=1), spec=SpectrumOptions(scale_factor=0.97), store=store,
                              refine=3, refine_calc=small_options(),  # no scale model is fitted for the test method
                              refine_progress=lambda stage, done, total, message: heard.append(stage))
    assert heard  # the refining calculation's stages were reported (minutes each at a real DFT level)
    by_rank = [e.candidate.name for e in ranking.entries]
    refused = ranking.entries[by_rank.index("methyl")]
    refined = [e for e in ranking.entries if e.refined]
    assert len(refined) == 2 and all(e.method == SMALL.name for e in refined)
    assert [e.rank for e in refined] == [1, 2] and refined[0].score >= refined[1].score
    assert refused.rank == 3 and not refused.refined and "closed-shell" in refused.note
    assert refused.score > max(e.score for e in refined)  # the best first-level score, still after them
    assert refined[1].margin_to_next is None  # no margin across the two levels
    assert refused.screening_rank == 1 and sorted(e.screening_rank for e in refined) == [2, 3]
    flags = {f.kind: f.message for f in assess(ranking).flags}  # the refined first was not first before
    assert "GFN1-xTB put methyl first" in flags[LEVELS_DISAGREE]
    last = ranking.entries[3]
    assert not last.refined and last.method == "GFN1-xTB" and not last.note
    path = tmp_path / "ranking.csv"
    ranking.write_csv(path)
    assert "refined" in path.read_text().splitlines()[0]


def test_check_refine_recomputes_the_verdicts_best_candidates(tmp_path):
    """`check --refine K` (check_structure(refine=K)): the intended structure and its decoys are
    ranked at the default level, the best K recomputed at the refining level (here the
    small-basis test level) and ranked again; the group evidence comes from the intended
    structure's refined prediction. The test level has no calibrated confidence, so the
    assessment says why; where a refined model holds (a model of the test's own here: which
    note, not the chemistry), its number carries the note that its calibration had no decoy
    rankings, and only when decoys are ranked.
    Constructed measured spectrum: methanol's own default-level curve (mechanics only)."""
    from vibest.measured import MeasuredSpectrum
    from vibest.pipeline import SpectrumOptions
    from vibest.confidence import REFINED_DECOYS_NOTE
    from vibest.verdict import check_structure

    from .conftest import prediction_of

    methanol = prediction_of("CO")
    measured = MeasuredSpectrum(methanol.spectrum.wavenumbers_cm1, methanol.spectrum.absorbance_normalised,
                                "absorbance")
    spec = SpectrumOptions(scale_factor=0.97)  # no scale model is fitted for the test level
    store = tmp_path / "store.sqlite"
    heard: list[str] = []
    verdict = check_structure(measured, "CO", name="methanol", decoys=2, calc=CalculationOptions(workers=1),
                              spec=spec, store=store, refine=2, refine_calc=small_options(),
                              refine_progress=lambda stage, done, total, message: heard.append(stage))
    refined = [e for e in verdict.ranking.entries if e.refined]
    assert heard and verdict.ranking.refine == 2 and len(refined) == 2
    assert all(e.method == SMALL.name for e in refined) and [e.rank for e in refined] == [1, 2]
    mine = next(e for e in verdict.ranking.entries if e.candidate == verdict.intended)
    assert mine.refined and mine.prediction.method_name == SMALL.name  # the evidence is read from this prediction
    assert verdict.assessment.confidence is None and verdict.assessment.note
    decoys = [e.candidate for e in verdict.ranking.entries if e.candidate != verdict.intended]
    assert decoys and all(c.decoy_of == "CO" for c in decoys)
    rows = verdict.to_dict()["ranking"]["candidates"]  # and the JSON says which rows are decoys
    assert sorted(r["decoy_of"] for r in rows) == [""] + ["CO"] * len(decoys)
    # a model that holds for any ranking refined with K = 2 (the shipped refined one holds only
    # for K = 5 at B3LYP/6-31G(d))
    from vibest.confidence import ConfidenceModel, assess

    model = ConfidenceModel(0.0, 1.0, 1.0, 0.0, {"refine": 2}, poor_fit_score=0.0, cross_validated_ece=0.0)
    with_note = assess(verdict.ranking, model=model)
    assert with_note.confidence is not None and with_note.note == REFINED_DECOYS_NOTE
    no_decoys = dataclasses.replace(verdict.ranking, entries=tuple(
        dataclasses.replace(e, candidate=dataclasses.replace(e.candidate, decoy_of="")) for e in verdict.ranking.entries))
    without_note = assess(no_decoys, model=model)
    assert without_note.confidence is not None and without_note.note == ""


@pytest.mark.slow
def test_chlorine_rows_include_the_grid_response():
    """PySCF's analytic RKS Hessian leaves out the grid's motion (pyscf/pyscf #3339), which for
    chlorine at the shipped grid level is 0.17 Eh/Bohr^2: Cl2 comes out at 625 cm^-1 instead of
    514. vibest takes the rows of atoms past neon from finite differences of gradients.
    References: (1) central differences of this engine's own gradients over all coordinates;
    (2) PySCF's own analytic Hessian on a fine grid (level 6, where the missing term is small:
    levels 4/6/8 give 515.1/514.5/514.5 cm^-1) at vibest's geometry."""
    from pyscf import gto
    from pyscf.hessian import thermo

    from vibest.calculation.dft_engine import make_rks

    method = METHODS["b3lyp"]
    record, converged, _ = compute_record(build_molecule("ClCl"),
                                          CalculationOptions(engine=EngineSettings.for_method(method), workers=2))
    assert converged
    x = record.positions_angstrom / Bohr
    engine = make_engine(record.numbers, x, 0, 0, EngineSettings.for_method(method))
    numeric = gradient_differences(engine, x)
    assert np.abs(record.hessian_hartree_bohr2 - numeric).max() < 2e-4
    ours = harmonic_analysis(record.numbers, record.positions_angstrom, record.hessian_hartree_bohr2,
                             record.dipole_derivatives_e).wavenumbers_cm1
    pmol = gto.M(atom=[(int(z), tuple(p)) for z, p in zip(record.numbers, record.positions_angstrom)],
                 basis=method.dft.basis, unit="Angstrom", verbose=0)
    mf = make_rks(pmol, dataclasses.replace(method.dft, grid_level=6), 2000)
    mf.kernel()
    fine = np.real(thermo.harmonic_analysis(pmol, mf.Hessian().kernel())["freq_wavenumber"])
    assert ours.shape == fine.shape == (1,)
    assert abs(ours[0] - fine[0]) < 1.0, (ours, fine)


def test_a_dft_calculation_estimated_at_hours_is_refused_at_once():
    """Triacontane at B3LYP (92 atoms, ~540 basis functions) is estimated above the 2 h cap
    (a measured small molecule, benzene at 96 basis functions, took 115 s on 2 cores and the time
    grows about as the 2.6th power of the basis: benchmarks/dft_cost.py): refused in one line, with the
    way round, before any calculation."""
    import time

    from click.testing import CliRunner

    from vibest.cli import main

    t = time.perf_counter()
    res = CliRunner().invoke(main, ["predict", "C" * 30, "--method", "b3lyp", "-q", "--no-store"])
    assert res.exit_code == 2 and "estimated at" in res.output and "--force" in res.output, res.output
    assert time.perf_counter() - t < 30


@pytest.mark.slow
def test_chlorine_dipole_derivatives_agree_between_the_two_paths():
    """HCl (small basis, coarse grid, as above): the full tier's dipole derivatives (Hessian run)
    and the intensities-only tier's (its own call) have chlorine rows from finite differences and
    hydrogen rows from the field response; they agree to SCF noise, and the mixture keeps the sum
    rule of a neutral molecule (moving it whole does not change its dipole: the rows sum to zero)."""
    record, converged, _ = compute_record(build_molecule("Cl"), small_options())
    assert converged
    x = record.positions_angstrom / Bohr
    engine = make_engine(record.numbers, x, 0, 0, EngineSettings.for_method(SMALL))
    again = engine.dipole_derivatives(x)
    assert np.abs(again - record.dipole_derivatives_e).max() < 1e-4
    assert np.abs(again.reshape(-1, 3, 3).sum(axis=0)).max() < 2e-3
    assert np.abs(again).max() > 0.05  # HCl's dipole changes along the bond: not trivially zero


@pytest.mark.slow
@pytest.mark.parametrize("key, tolerance", [("wb97x", 2e-3), ("r2scan", 2e-2)])
def test_dipole_derivatives_of_the_modern_functionals_match_finite_differences(key, tolerance):
    """The shipped range-separated hybrid and meta-GGA take their own paths through PySCF's Fock
    derivatives and response kernel; checked like B3LYP above (central differences of the SCF
    dipole, 0.01 Bohr), with the shipped functional and grid in the STO-3G basis (speed). r2SCAN is
    known to be grid-sensitive: the finite differences include the grid's motion, the field
    response does not, and on formaldehyde the gap was 0.010 e at grid level 3 and 0.0023 e at
    level 6 (measured 2026-12-04), hence its looser bound; a wrong response kernel is off by tenths."""
    method = dataclasses.replace(METHODS[key], dft=dataclasses.replace(METHODS[key].dft, basis="sto-3g"))
    mol = build_molecule("O")
    x = mol.positions_angstrom / Bohr
    engine = make_engine(mol.numbers, x, 0, 0, EngineSettings.for_method(method))
    analytic = engine.dipole_derivatives(x)
    numeric = scf_dipole_differences(engine, x)
    assert np.abs(analytic - numeric).max() < tolerance, np.abs(analytic - numeric).max()
    assert np.abs(analytic).max() > 0.3  # not trivially small


def test_without_a_core_potential_basis_iodine_is_refused():
    """def2 basis sets define iodine for use with an effective core potential; run all-electron
    it would be silently wrong, so a method whose settings name none refuses it."""
    settings = dataclasses.replace(SMALL.dft, beyond_krypton_basis=None)
    mol = build_molecule("I")
    with pytest.raises(InputError, match="effective core potential"):
        make_engine(mol.numbers, mol.positions_angstrom / Bohr, 0, 0,
                    EngineSettings.for_method(dataclasses.replace(SMALL, dft=settings)))


def test_the_core_potential_basis_is_in_the_store_key_only_where_it_acts():
    """Records of molecules without an element past krypton keep their keys (and the shipped
    benchmark stores stay valid); an iodide's key depends on the setting."""
    from vibest.store import RecordStore

    plain = CalculationOptions(engine=EngineSettings.for_method(METHODS["b3lyp"]))
    other = dataclasses.replace(plain, engine=dataclasses.replace(
        plain.engine, dft=dataclasses.replace(plain.engine.dft, beyond_krypton_basis="def2-tzvp")))
    assert RecordStore.key_of("CCO", "", plain) == RecordStore.key_of("CCO", "", other)
    assert RecordStore.key_of("CI", "", plain) != RecordStore.key_of("CI", "", other)


@pytest.mark.slow
def test_iodine_with_an_effective_core_potential():
    """Hydrogen iodide, STO-3G on H and def2-SVP with its 28-electron core potential on I (the
    shipped setting for elements past krypton). Checks: PySCF was told of the core potential
    (26 electrons, not 54: all-electron with def2-SVP's iodine would be silently wrong); the
    record says so in one note; the Hessian agrees with central differences (0.005 Bohr) of the
    engine's own analytic gradients, and the dipole derivatives with central differences of its
    SCF dipole (0.01 Bohr), both over all coordinates; the rows of the neutral molecule sum to
    zero (moving it whole changes nothing)."""
    record, converged, notes = compute_record(build_molecule("I"), small_options())
    assert converged
    assert any("effective core potential" in n and "I:" in n for n in record.notes), record.notes
    x = record.positions_angstrom / Bohr
    engine = make_engine(record.numbers, x, 0, 0, EngineSettings.for_method(SMALL))
    assert engine.mol.nelectron == 26 and engine.mol.has_ecp()
    numeric = gradient_differences(engine, x)
    assert np.abs(record.hessian_hartree_bohr2 - numeric).max() < 2e-4
    assert np.abs(record.hessian_hartree_bohr2).max() > 0.1  # the H-I stretch: not trivially small
    apt = record.dipole_derivatives_e
    assert np.abs(apt - scf_dipole_differences(engine, x)).max() < 2e-3
    assert np.abs(apt.reshape(-1, 3, 3).sum(axis=0)).max() < 2e-3


def test_reference_records_from_before_the_core_potential_setting_stay_current():
    """The scale-model fit reuses cached records whose engine settings equal the current ones
    (vibest.reference_records.computed_with): a B3LYP record stored before the setting for
    elements past krypton existed stays current for ethanol, but an iodide's does not (its numbers
    depend on the setting), and a record with the setting is current too."""
    from types import SimpleNamespace

    from vibest.reference_records import computed_with

    options = CalculationOptions(engine=EngineSettings.for_method(METHODS["b3lyp"]))
    old = options.to_dict()
    del old["engine"]["dft"]["beyond_krypton_basis"]
    ethanol, iodomethane = [6, 6, 8, 1, 1, 1, 1, 1, 1], [6, 53, 1, 1, 1]
    assert computed_with(SimpleNamespace(settings=old, numbers=ethanol), options)
    assert not computed_with(SimpleNamespace(settings=old, numbers=iodomethane), options)
    assert computed_with(SimpleNamespace(settings=options.to_dict(), numbers=iodomethane), options)
    assert computed_with(SimpleNamespace(settings=options.to_dict(), numbers=ethanol), options)


def test_the_hessians_two_electron_terms_are_in_the_store_key_only_where_they_act():
    """The shipped B3LYP takes density-fitted two-electron terms in its Hessian assembly: its
    full-level records get new keys (their numbers moved), while intensities-only records (no
    Hessian) and methods with exact terms keep the keys they had before the setting existed."""
    from vibest.store import RecordStore

    full = calculation_options("b3lyp", allow_long=True)
    assert full.engine.dft.hessian_two_electron == "density-fitted"
    exact = dataclasses.replace(full, engine=dataclasses.replace(
        full.engine, dft=dataclasses.replace(full.engine.dft, hessian_two_electron="exact")))
    assert RecordStore.key_of("CCO", "", full) != RecordStore.key_of("CCO", "", exact)

    intensities = calculation_options("gfn2+b3lyp")
    as_exact = dataclasses.replace(intensities, intensity_engine=dataclasses.replace(
        intensities.intensity_engine, dft=dataclasses.replace(intensities.intensity_engine.dft,
                                                              hessian_two_electron="exact")))
    assert RecordStore.key_of("CCO", "", intensities) == RecordStore.key_of("CCO", "", as_exact)

    from types import SimpleNamespace

    from vibest.reference_records import computed_with

    before = exact.to_dict()  # an exact record stored before the setting existed
    del before["engine"]["dft"]["hessian_two_electron"]
    ethanol = [6, 6, 8, 1, 1, 1, 1, 1, 1]
    assert computed_with(SimpleNamespace(settings=before, numbers=ethanol), exact)
    assert not computed_with(SimpleNamespace(settings=before, numbers=ethanol), full)


def test_the_hessian_reuses_the_optimisers_last_scf(monkeypatch):
    """The full level computes its Hessian where the optimiser stopped: the SCF (and gradient)
    already done there is reused, not repeated (one SCF per optimisation gradient, none more),
    and the Hessian is the one a fresh engine computes at that geometry (to SCF noise)."""
    import vibest.calculation.dft_engine as dft_engine

    calls = []
    scf = dft_engine.PySCFEngine._scf

    def counted(self, x):
        calls.append(1)
        return scf(self, x)

    monkeypatch.setattr(dft_engine.PySCFEngine, "_scf", counted)
    record, converged, _ = compute_record(build_molecule("O"), small_options())
    monkeypatch.undo()  # the fresh engine below runs its SCF uncounted
    assert converged and len(calls) == record.timings["optimization_gradients"]
    x = record.positions_angstrom / Bohr
    fresh, apt, ev = make_engine(record.numbers, x, 0, 0, EngineSettings.for_method(SMALL)).hessian_and_dipole_derivatives(x)
    assert np.abs(record.hessian_hartree_bohr2 - fresh).max() < 1e-6
    assert np.abs(record.dipole_derivatives_e - apt).max() < 1e-6


def test_a_hessian_without_dipole_derivatives_is_the_same_hessian():
    """VPT2's displaced Hessians skip the electric-field response (benchmark cost): the Hessian is
    unchanged and no dipole derivatives are returned, rather than stale or zero ones
    (vibest's own consistency; the Hessian itself is checked against PySCF above)."""
    mol = build_molecule("O")
    x = mol.positions_angstrom / Bohr
    engine = make_engine(mol.numbers, x, 0, 0, EngineSettings.for_method(SMALL))
    full, apt, _ = engine.hessian_and_dipole_derivatives(x)
    bare, none, _ = engine.hessian_and_dipole_derivatives(x, dipole_derivatives=False)
    assert apt is not None and apt.shape == (3 * len(mol.numbers), 3) and none is None
    assert np.abs(full - bare).max() < 1e-6

"""The public API as the README shows it: every public name stays what it is after use, and a
screening loop over several molecules runs in one process (issue: the second call of
``vibest.predict`` used to raise "'module' object is not callable")."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]


def _run(code: str) -> subprocess.CompletedProcess:
    return subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300, cwd=ROOT)


def test_every_public_name_is_stable_after_every_submodule_is_imported():
    # A fresh interpreter: import order decides whether a submodule shadows a public name.
    code = """
import importlib, pkgutil, vibest
before = {name: getattr(vibest, name) for name in vibest.__all__}
for info in pkgutil.walk_packages(vibest.__path__, "vibest."):
    if not info.name.endswith("worker_main"):
        importlib.import_module(info.name)
changed = [n for n in vibest.__all__ if getattr(vibest, n) is not before[n]]
print("changed:", changed)
assert not changed, changed
"""
    res = _run(code)
    assert res.returncode == 0, res.stdout + res.stderr


def test_predict_and_compare_called_twice_in_one_process(tmp_path):
    # the README's calls, each twice; compare against the prediction's own curve written as CSV
    code = f"""
import vibest
for _ in range(2):
    pred = vibest.predict("O", workers=1)
    assert callable(vibest.predict) and callable(vibest.compare)
path = {str(tmp_path / "water.csv")!r}
with open(path, "w") as fh:
    fh.write("wavenumber,absorbance\\n")
    for x, y in zip(pred.spectrum.wavenumbers_cm1, pred.spectrum.absorbance_normalised):
        fh.write(f"{{x}},{{y}}\\n")
for _ in range(2):
    spec = vibest.load_spectrum(path, kind="absorbance")
    comp = vibest.compare(pred, spec, fit_shift=False)
    assert comp.score > 0.99, comp.score
again = vibest.analyse(pred.record, vibest.SpectrumOptions(fwhm_cm1=8.0))
assert isinstance(again, vibest.Prediction)
print("ok")
"""
    res = _run(code)
    assert res.returncode == 0 and "ok" in res.stdout, res.stdout + res.stderr


def test_predict_with_a_store_computes_once(tmp_path, monkeypatch):
    """The second call with the same store takes the record from it (no calculation: the
    calculation is replaced by one that fails) and gives the same bands; a bad store argument
    is an input error."""
    import vibest
    import vibest.ranking
    from vibest.errors import InputError

    path = tmp_path / "api.sqlite"
    first = vibest.predict("C=O", workers=1, store=path)

    def no_calculation(*args, **kwargs):
        raise AssertionError("computed again")

    monkeypatch.setattr(vibest.ranking, "compute_record", no_calculation)
    again = vibest.predict("C=O", workers=1, store=str(path))
    assert [b.wavenumber_cm1 for b in again.bands] == [b.wavenumber_cm1 for b in first.bands]
    with pytest.raises(AssertionError):  # another molecule is not in the store
        vibest.predict("O", workers=1, store=path)
    with pytest.raises(InputError):
        vibest.predict("C=O", store=3)


@pytest.mark.slow
def test_screening_loop_example_runs():
    res = subprocess.run([sys.executable, str(ROOT / "examples" / "screening_loop.py")], capture_output=True,
                         text=True, timeout=300, cwd=ROOT)
    assert res.returncode == 0, res.stderr
    lines = [line for line in res.stdout.splitlines() if "cm^-1" in line]
    assert len(lines) == 3, res.stdout  # three molecules in one process, each predicted
    assert "caution" in res.stdout


def test_measured_spectra_and_candidates_as_a_user_types_them(tmp_path):
    """A path where a spectrum goes, SMILES strings or (name, SMILES) pairs where candidates go
    (as the CLI takes them) give the same ranking as the objects; what cannot be one is a
    one-line input error naming the argument, not an AttributeError from deep inside (found by a new-user
    pass, 2026-12-04: ``rank_candidates("x.jdx", ["CCO"])`` failed with "'str' object has no
    attribute 'problem'")."""
    import vibest
    from vibest.errors import InputError

    from .conftest import prediction_of

    water, methanol = prediction_of("O"), prediction_of("CO")
    path = tmp_path / "water.csv"
    with open(path, "w") as fh:
        fh.write("wavenumber,absorbance\n")
        for x, y in zip(water.spectrum.wavenumbers_cm1, water.spectrum.absorbance_normalised):
            fh.write(f"{x},{y}\n")
    spec = vibest.load_spectrum(path)
    store = vibest.RecordStore(tmp_path / "s.sqlite")
    by_objects = vibest.rank_candidates(spec, [vibest.Candidate("water", "O"), vibest.Candidate("methanol", "CO")],
                                       store=store, calc=vibest.CalculationOptions(workers=1))
    # the store as a path too, as predict() takes it (rank_candidates and check_structure once
    # failed with "'str' object has no attribute 'get'": new-user pass, 2026-12-05)
    by_text = vibest.rank_candidates(str(path), ["O", ("methanol", "CO")], store=str(tmp_path / "s.sqlite"),
                                    calc=vibest.CalculationOptions(workers=1))
    assert all(e.from_store for e in by_text.entries)
    verdict = vibest.check_structure(path, "O", decoys=0, store=tmp_path / "s.sqlite")
    assert verdict.ranking.entries[0].from_store
    with pytest.raises(InputError, match="store"):
        vibest.rank_candidates(spec, ["O"], store=3)
    assert [e.candidate.smiles for e in by_text.entries] == [e.candidate.smiles for e in by_objects.entries] == ["O", "CO"]
    assert [e.score for e in by_text.entries] == pytest.approx([e.score for e in by_objects.entries])
    assert [e.candidate.name for e in by_text.entries] == ["O", "methanol"]
    assert vibest.compare(water, path).score == pytest.approx(vibest.compare(water, spec).score)
    assert vibest.fit_components(path, [vibest.Component("water", water), vibest.Component("methanol", methanol)]).shares
    with pytest.raises(InputError, match="candidates"):
        vibest.rank_candidates(spec, "CCO")
    with pytest.raises(InputError, match="candidates"):
        vibest.rank_candidates(spec, [3])
    with pytest.raises(InputError, match="predict_many"):
        vibest.predict_many("CCO")
    with pytest.raises(InputError, match="measured"):
        vibest.rank_candidates(water, ["O"])
    with pytest.raises(InputError, match="prediction"):
        vibest.compare("O", spec)
    with pytest.raises(InputError, match="before"):
        vibest.difference_spectrum(None, spec)


def test_settings_of_the_wrong_type_are_one_line_input_errors(tmp_path):
    """Settings passed as a user might guess them (a method name where CalculationOptions go, a
    number where SpectrumOptions go, a string of decoys, a negative band width) are one-line
    InputErrors that say what to pass; they used to fail deep inside with AttributeError,
    TypeError or ValueError (new-user pass, 2026-12-05). No calculation is needed to refuse."""
    import vibest
    from vibest.errors import InputError

    from .conftest import prediction_of

    water = prediction_of("O")
    from vibest.measured import MeasuredSpectrum

    spec = MeasuredSpectrum(water.spectrum.wavenumbers_cm1, water.spectrum.absorbance_normalised, "absorbance",
                            source="constructed")
    cases = [(dict(calc="gfn2"), "calculation_options"), (dict(spec=16), "SpectrumOptions"),
             (dict(options="x"), "ComparisonOptions"), (dict(refine=1, refine_calc="b3lyp"), "refine_calc"),
             (dict(method="gfn2"), "calc=vibest.calculation_options"), (dict(fwhm_cm1=-3.0), "positive"),
             (dict(step_cm1=0.0), "positive"), (dict(fwhm_cm1="16"), "positive number")]
    for kwargs, words in cases:
        with pytest.raises(InputError, match=words):
            vibest.rank_candidates(spec, ["O"], **kwargs)
    with pytest.raises(InputError, match="calculation_options"):  # the batch call checks the same way
        vibest.predict_many(["O"], calc="gfn2")
    for decoys in ("3", -1, 2.5, True):
        with pytest.raises(InputError, match="decoys"):
            vibest.check_structure(spec, "O", decoys=decoys)
    # refining: a whole K and a level to refine with, checked by both calls before any file is read
    for kwargs, words in [(dict(refine="2"), "whole number"), (dict(refine=True), "whole number"),
                          (dict(refine=2), "a level of theory to refine with"), (dict(refine=-1), "at least 0"),
                          (dict(refine=2, refine_calc="b3lyp"), "refine_calc must be")]:
        for call in (lambda: vibest.rank_candidates("/nonexistent.csv", ["O"], **kwargs),
                     lambda: vibest.check_structure("/nonexistent.csv", "O", **kwargs)):
            with pytest.raises(InputError, match=words):
                call()

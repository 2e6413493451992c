"""Property-based tests (Hypothesis) of everything that reads what a user gives: any byte string
or value gives a result or an InputError, never another exception; a valid spectrum survives
being written and read back. Examples are bounded so that the suite stays fast."""

from __future__ import annotations

import tempfile
from pathlib import Path

import numpy as np
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from vibest.errors import InputError
from vibest.measured import load_spectrum
from vibest.measured.jcamp import write_jcamp

FAST = settings(max_examples=int(__import__("os").environ.get("VIBEST_FUZZ_EXAMPLES", 150)), deadline=None, suppress_health_check=[HealthCheck.too_slow])

JCAMP_LINES = st.sampled_from([
    "##TITLE=x", "##JCAMP-DX=4.24", "##DATA TYPE=INFRARED SPECTRUM", "##XUNITS=1/CM", "##YUNITS=ABSORBANCE",
    "##YUNITS=TRANSMITTANCE", "##XFACTOR=1", "##YFACTOR=0", "##YFACTOR=0.001", "##FIRSTX=4000", "##LASTX=400",
    "##NPOINTS=5", "##XYDATA=(X++(Y..Y))", "##XYPOINTS=(XY..XY)", "##PEAK TABLE=(XY..XY)", "##END=",
    "##BLOCKS=2", "##DELTAX=-900", "4000 1 2 3 4 5", "3100 @A1J2%", "400,0.5;500,0.6", "nan nan", "1e400 3",
    "##STATE=gas", "##XUNITS=MICROMETERS", "##XUNITS=parsecs", "##YUNITS=%T", "4000 -5 -6", "",
])


def _write(data: bytes, suffix: str) -> Path:
    fd, name = tempfile.mkstemp(suffix=suffix)
    with open(fd, "wb") as fh:
        fh.write(data)
    return Path(name)


def _read_or_input_error(path: Path, **kw) -> None:
    try:
        spec = load_spectrum(path, **kw)
    except InputError:
        return
    finally:
        pass
    assert np.all(np.isfinite(spec.wavenumbers_cm1)) and np.all(np.isfinite(spec.values))
    assert np.all(np.diff(spec.wavenumbers_cm1) > 0)


@FAST
@given(st.binary(max_size=2000), st.sampled_from([".jdx", ".csv", ".txt", ".dx"]))
def test_any_bytes_give_a_spectrum_or_an_input_error(data, suffix):
    path = _write(data, suffix)
    try:
        _read_or_input_error(path)
    finally:
        path.unlink()


@FAST
@given(st.lists(JCAMP_LINES, max_size=25))
def test_jcamp_like_files_give_a_spectrum_or_an_input_error(lines):
    path = _write("\n".join(lines).encode(), ".jdx")
    try:
        _read_or_input_error(path)
    finally:
        path.unlink()


NUMBER_TEXT = st.one_of(st.floats(allow_nan=True, allow_infinity=True).map(repr), st.integers().map(str),
                        st.sampled_from(["", "nan", "1,5", "-", "1e999", "abc", "0,87", "%T", "Absorbance"]))


@FAST
@given(st.lists(st.lists(NUMBER_TEXT, min_size=1, max_size=4), max_size=30),
       st.sampled_from([",", ";", "\t", " "]), st.sampled_from(["\n", "\r\n"]), st.booleans())
def test_delimited_files_give_a_spectrum_or_an_input_error(rows, sep, newline, bom):
    text = newline.join(sep.join(r) for r in rows)
    path = _write((b"\xef\xbb\xbf" if bom else b"") + text.encode(), ".csv")
    try:
        _read_or_input_error(path)
    finally:
        path.unlink()


@FAST
@given(st.integers(min_value=5, max_value=400),
       st.floats(min_value=400, max_value=1000), st.floats(min_value=0.5, max_value=8.0),
       st.lists(st.floats(min_value=0.0, max_value=3.0), min_size=5, max_size=5))
def test_a_valid_spectrum_survives_write_then_read(n, start, step, bumps):
    x = start + step * np.arange(n)
    y = np.interp(np.linspace(0, 4, n), np.arange(5), bumps) + 0.01 * np.sin(np.arange(n))
    path = _write(b"", ".jdx")
    try:
        write_jcamp(path, x, y, title="round trip")
        spec = load_spectrum(path)
        assert np.allclose(spec.wavenumbers_cm1, x, rtol=1e-6, atol=1e-6)
        assert np.allclose(spec.values, y, rtol=1e-6, atol=1e-6 * max(1.0, np.abs(y).max()))
    except InputError as exc:  # only a flat curve may be refused
        assert np.ptp(y) < 1e-6, exc
    finally:
        path.unlink()


@FAST
@given(st.one_of(st.text(max_size=60), st.sampled_from(["CC(=O) C", "C1CC", "[13CH4]", "[2H]O[2H]", "C/C=C/C",
                                                         "c1ccccc1", "[Na+].[Cl-]", "C" * 3000, "\u2603", "[U]"])))
def test_any_smiles_text_is_parsed_or_refused(text):
    from vibest.structure import parse_smiles

    try:
        mol, notes = parse_smiles(text)
    except InputError:
        return
    assert mol.GetNumAtoms() > 0 and not any(ch.isspace() for ch in text.strip())


ANY_VALUE = st.one_of(st.none(), st.booleans(), st.integers(), st.floats(allow_nan=True), st.text(max_size=8),
                      st.lists(st.floats(allow_nan=True), max_size=3))


@FAST
@given(ANY_VALUE, ANY_VALUE, ANY_VALUE, ANY_VALUE)
def test_spectrum_options_are_valid_or_an_input_error(fwhm, shape, range_cm1, scale_factor):
    from vibest.pipeline import SpectrumOptions

    try:
        SpectrumOptions(scale_factor=scale_factor, fwhm_cm1=fwhm, line_shape=shape, range_cm1=range_cm1).validate()
    except InputError:
        pass


@FAST
@given(ANY_VALUE, ANY_VALUE, ANY_VALUE, ANY_VALUE, ANY_VALUE)
def test_calculation_options_are_valid_or_an_input_error(method, seed, workers, solvent, memory):
    from vibest.calculation.driver import calculation_options

    kw = {k: v for k, v in (("seed", seed), ("workers", workers), ("solvent", solvent), ("memory_mb", memory))
          if v is not None or k in ("workers", "solvent")}
    try:
        calculation_options(method if method is not None else "gfn2", **kw)
    except InputError:
        pass


@FAST
@given(st.binary(max_size=1500), st.booleans())
def test_candidate_and_batch_files_give_candidates_or_an_input_error(data, csv_header):
    from vibest.ranking import read_candidates

    path = _write((b"name,smiles\n" if csv_header else b"") + data, ".txt")
    try:
        cands = read_candidates(path)
        assert cands and all(isinstance(c.smiles, str) and isinstance(c.problem, str) for c in cands)
    except InputError:
        pass
    finally:
        path.unlink()

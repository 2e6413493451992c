"""Reading measured spectra: JCAMP-DX forms (hand-written files checked by hand, public-domain
test files), CSV variants, unit conversions, and clear errors for bad files."""

from pathlib import Path

import numpy as np
import pytest

from vibest.errors import InputError
from vibest.measured import (ABSORBANCE, TRANSMITTANCE, load_spectrum, preprocess, rubber_band_baseline)
from vibest.measured.jcamp import read_jcamp, write_jcamp

DATA = Path(__file__).parent / "data"
# The values encoded by hand in every tests/data/handmade/*.jdx file (YFACTOR 0.001), X 1000..1011.
HAND_Y = np.array([10, 12, 15, 15, 15, 11, 8, 8, 9, 100, -5, 0]) * 0.001


@pytest.mark.parametrize("name", ["affn", "sqz", "dif", "sqzdup", "difdup"])
def test_handmade_compression_forms(name):
    blk = read_jcamp(DATA / "handmade" / f"{name}.jdx")
    np.testing.assert_allclose(blk.y, HAND_Y, atol=1e-12)
    np.testing.assert_allclose(blk.x, np.arange(1000, 1012))


def test_xy_pairs_micrometres_and_percent_transmittance():
    spec = load_spectrum(DATA / "handmade" / "xypairs.jdx")
    # 2.5, 4, 5, 10 um -> 4000, 2500, 2000, 1000 cm^-1; %T -> fraction
    np.testing.assert_allclose(spec.wavenumbers_cm1, [1000, 2000, 2500, 4000])
    np.testing.assert_allclose(spec.values, [1.0, 0.1, 0.5, 0.9])
    assert spec.kind == TRANSMITTANCE and any("micrometres" in n for n in spec.notes)
    a = spec.absorbance()
    np.testing.assert_allclose(a.values, -np.log10([1.0, 0.1, 0.5, 0.9]))


def test_truncated_file_names_file_and_line():
    with pytest.raises(InputError, match=r"truncated\.jdx:\d+: ##NPOINTS= 13"):
        read_jcamp(DATA / "handmade" / "truncated.jdx")


# Public-domain test files of R. J. Lancashire (tests/data/lancashire/README.md): NPOINTS from
# their own headers; first Y values read off their first data lines.
@pytest.mark.parametrize("name,npoints,first_y", [
    ("dupdec1.jdx", 3951, 82.25), ("dupdec2.jdx", 3951, 0.5839), ("dupinc2.jdx", 3734, 44.97),
    ("fixdec1.jdx", 3951, None), ("fixinc2.jdx", 3601, 0.3487), ("jtpolys.jdx", 1844, None),
    ("jtpolysd.jdx", 1844, None), ("pacdec1.jdx", 3301, 101.6), ("sqzdupd1.jdx", 18669, None),
    ("xyinc1.jdx", 3601, 0.448),
])
def test_public_domain_files_parse_with_npoints(name, npoints, first_y):
    blk = read_jcamp(DATA / "lancashire" / name)
    assert len(blk.y) == npoints == int(blk.labels["NPOINTS"])
    if first_y is not None:
        assert blk.y[0] == pytest.approx(first_y, rel=1e-6)
    assert abs(blk.x[0] - float(blk.labels["FIRSTX"])) < 1e-6


def test_fix_and_difdup_forms_of_the_same_polystyrene_spectrum_agree():
    a = read_jcamp(DATA / "lancashire" / "jtpolys.jdx")
    b = read_jcamp(DATA / "lancashire" / "jtpolysd.jdx")
    np.testing.assert_allclose(a.x, b.x, atol=1e-3)
    assert np.corrcoef(a.y, b.y)[0, 1] > 0.999


def test_multi_block_file_needs_a_choice():
    with pytest.raises(InputError, match="holds 5 spectra"):
        read_jcamp(DATA / "lancashire" / "compound.jdx")
    blk = read_jcamp(DATA / "lancashire" / "compound.jdx", block=4)
    assert "Rh(py)4Cl2" in blk.title() and len(blk.y) == 1976
    with pytest.raises(InputError, match="block 9 does not exist"):
        read_jcamp(DATA / "lancashire" / "compound.jdx", block=9)


@pytest.mark.parametrize("text,kind", [
    ("wavenumber,absorbance\n3000,0.1\n2000,0.5\n1000,0.2\n", ABSORBANCE),
    ("1000\t0,2\n2000\t0,5\n3000\t0,1\n", ABSORBANCE),
    ("1000;0,2\n2000;0,5\n3000;0,1\n", ABSORBANCE),
    ("# comment\n1000 0.2\n2000 0.5\n3000 0.1\n", ABSORBANCE),
])
def test_csv_variants(tmp_path, text, kind):
    p = tmp_path / "s.csv"
    p.write_text(text)
    spec = load_spectrum(p, kind=kind)
    np.testing.assert_allclose(spec.wavenumbers_cm1, [1000, 2000, 3000])
    np.testing.assert_allclose(spec.values, [0.2, 0.5, 0.1])


def test_csv_kind_is_guessed_with_a_note(tmp_path):
    p = tmp_path / "t.csv"
    x = np.arange(400, 4001, 10)
    y = 95 - 60 * np.exp(-((x - 1700) / 15) ** 2)
    p.write_text("\n".join(f"{a},{b:.3f}" for a, b in zip(x, y)))
    spec = load_spectrum(p)
    assert spec.kind == TRANSMITTANCE and any("guessed transmittance" in n for n in spec.notes)
    assert spec.values.max() <= 1.0  # percent detected


@pytest.mark.parametrize("text,match", [
    ("", "empty"),
    ("1000,0.1\n2000,nan\n3000,0.2\n", r"s\.csv:2: missing value"),
    ("1000,0.1\n3000,0.3\n2000,0.2\n", "not monotonic"),
    ("1000,0.1\n2000,abc\n3000,0.2\n", r"s\.csv:2: not a number"),
    ("1000\n2000\n3000\n", "two columns"),
])
def test_bad_csv_files(tmp_path, text, match):
    p = tmp_path / "s.csv"
    p.write_text(text)
    with pytest.raises(InputError, match=match):
        load_spectrum(p, kind=ABSORBANCE)


def test_wrong_units_refused(tmp_path):
    text = (DATA / "handmade" / "affn.jdx").read_text().replace("##XUNITS=1/CM", "##XUNITS=HZ")
    p = tmp_path / "u.jdx"
    p.write_text(text)
    with pytest.raises(InputError, match="X units 'HZ'"):
        load_spectrum(p)


def test_jcamp_write_read_round_trip(tmp_path):
    x = np.linspace(400, 4000, 1801)
    y = np.exp(-((x - 1715) / 10) ** 2) + 0.3 * np.exp(-((x - 2950) / 20) ** 2)
    p = tmp_path / "rt.jdx"
    write_jcamp(p, x, y, "round trip")
    spec = load_spectrum(p)
    assert spec.kind == ABSORBANCE
    np.testing.assert_allclose(spec.wavenumbers_cm1, x, atol=1e-6)
    np.testing.assert_allclose(spec.values, y, atol=1e-8)


def test_rubber_band_baseline_removes_a_slope():
    x = np.linspace(500, 3800, 500)
    band = np.exp(-((x - 1700) / 20) ** 2)
    y = band + 0.2 + 1e-4 * x
    base = rubber_band_baseline(x, y)
    np.testing.assert_allclose(y - base, band, atol=0.01)


def test_preprocess_normalises_absorbance_on_grid():
    from vibest.measured import MeasuredSpectrum

    x = np.linspace(500, 3800, 200)
    t = 1 - 0.9 * np.exp(-((x - 1700) / 30) ** 2)
    spec = MeasuredSpectrum(x, t, TRANSMITTANCE)
    out = preprocess(spec, np.arange(500, 3801, 2.0))
    assert out.max() == pytest.approx(1.0) and out.min() >= 0


# Gas-phase band centres (cm^-1), from memory of Herzberg's tables and the NIST WebBook:
# methane nu3 3019, CO2 nu3 2349, CO fundamental 2143, SO2 nu3 1362, water nu2 1595.
KNOWN_BAND_CENTRES = [("methane.jdx", 2900, 3150, 3019), ("carbon dioxide.jdx", 2250, 2450, 2349),
                      ("carbon monoxide.jdx", 2040, 2250, 2143), ("sulfur dioxide.jdx", 1290, 1430, 1362),
                      ("water.jdx", 1350, 1850, 1595)]


@pytest.mark.slow
def test_every_used_real_spectrum_parses_with_npoints_and_shows_known_bands(measured_folder):
    """The 36 used files of the jcamp 1.3.2 sdist (benchmarks/data/measured_set.csv, fetched and
    SHA-256-checked at test time, never stored here): each parses with as many points as its own
    ##NPOINTS, its ##ORIGIN is the mapped one, and a few band centres (absorbance-weighted mean
    over the band's window, the P/R envelope included) lie within 15 cm^-1 of the known values: the
    files are digitised from hard copy at 2-4 cm^-1, and the digitised P and R branches are not
    equally strong (methane: 3007 against 3019), while a misread X axis would be off by far more."""
    import measured_set  # on the path through the measured_folder fixture

    folder = measured_folder
    entries = measured_set.entries()
    assert len(entries) == 36
    for e in entries:
        blk = read_jcamp(folder / e.file)
        assert len(blk.y) == int(float(blk.labels["NPOINTS"])), e.file
        assert blk.labels["ORIGIN"].strip() == e.origin, e.file
        assert "ANALYTICAL CHEMISTRY DIVISION" not in blk.labels["ORIGIN"].upper()  # the blind set stays unused
    for file, lo, hi, centre in KNOWN_BAND_CENTRES:
        spec = load_spectrum(folder / file).absorbance()
        x, a = spec.wavenumbers_cm1, spec.values
        window = (x >= lo) & (x <= hi)
        band = np.clip(a[window] - np.median(a[window]), 0.0, None)  # above the local level
        mean = float((x[window] * band).sum() / band.sum())
        assert abs(mean - centre) < 15.0, (file, mean)


def test_absorbance_like_y_units_are_read_as_absorbance_with_a_note(tmp_path):
    """Absorption coefficients per concentration and path length (base 10), as some published
    gas-phase files state them, are absorbance-like: read as absorbance, and said so."""
    x = np.linspace(500.0, 4000.0, 500)
    y = np.exp(-((x - 1700.0) / 10.0) ** 2) * 3e-4
    path = tmp_path / "coefficient.jdx"
    write_jcamp(path, x, y, "absorbance-like units", yunits="(MICROMOL/MOL)-1M-1 (BASE 10)")
    spec = load_spectrum(path)
    assert spec.kind == ABSORBANCE
    assert any("read as absorbance" in n for n in spec.notes)
    np.testing.assert_allclose(spec.values, y, rtol=1e-4, atol=1e-9)

"""Following a reaction: difference spectra, component fits, conversion over time.

The chemistry checked: oxidising a secondary alcohol to a ketone removes the alcohol's C-O
stretch band (near 1050-1100 cm^-1) and O-H bands and brings a strong C=O stretch near 1715-1745
cm^-1 (common practice, no source). Mixtures follow the Beer-Lambert law: absorbances of
components add, each proportional to its amount (textbook physical chemistry, no source needed).
The "measured" spectra here are constructed from vibest's own predictions of cyclohexanol and
cyclohexanone, so the true fractions and conversions are known exactly; the tests check that
the analysis gets them back, not that the predictions are right (that is tests/test_accuracy.py).
"""

from __future__ import annotations

import datetime

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from vibest.cli import main
from vibest.components import Component, fit_components
from vibest.difference import APPEARS, GOES, difference_spectrum as difference
from vibest.errors import InputError
from vibest.measured import ABSORBANCE, MeasuredSpectrum, load_spectrum, recorded_at
from vibest.measured.jcamp import write_jcamp
from vibest.series import conversion_series, read_series_list, times_from_files
from vibest.spectrum import broaden, grid

from .conftest import prediction_of

ALCOHOL, KETONE = "OC1CCCCC1", "O=C1CCCCC1"
X = grid(450, 3900, 2)


def _per_mole(smiles: str) -> np.ndarray:
    """Absorption per mole of the predicted spectrum (km/mol per cm^-1, 16 cm^-1 Lorentzians)."""
    p = prediction_of(smiles)
    return broaden(p.wavenumbers_cm1, p.intensities_km_mol, 16.0, "lorentzian", X).absorption_km_mol_cm1


def _mixture(moles_alcohol: float, moles_ketone: float, name: str = "mix", shift_ketone: float = 0.0,
             noise: float = 0.0, seed: int = 1) -> MeasuredSpectrum:
    """Beer-Lambert mixture on X (one common factor so that the strongest pure band is ~1 A)."""
    a, k = _per_mole(ALCOHOL), _per_mole(KETONE)
    scale = 1.0 / max(a.max(), k.max())
    k = np.interp(X - shift_ketone, X, k)
    y = scale * (moles_alcohol * a + moles_ketone * k)
    if noise:
        y = y + np.random.default_rng(seed).normal(0.0, noise, size=y.shape)
    return MeasuredSpectrum(X, y, ABSORBANCE, name)


def test_difference_names_the_ketone_band_that_appears_and_the_alcohol_band_that_goes():
    before = _mixture(1.0, 0.0, "t0")
    after = _mixture(0.5, 0.5, "t1")
    d = difference(before, after, start=prediction_of(ALCOHOL), product=prediction_of(KETONE))
    appears = [c for c in d.changes if c.kind == APPEARS]
    goes = [c for c in d.changes if c.kind == GOES]
    assert appears[0].assigned.startswith("C=O stretch") and "product" in appears[0].assigned
    assert 1700 <= appears[0].wavenumber_cm1 <= 1800  # the predicted ketone C=O (gas-phase harmonic, scaled)
    assert any(c.assigned.startswith("C-O stretch") and "starting material" in c.assigned
               and 1000 <= c.wavenumber_cm1 <= 1150 for c in goes)
    assert "near 2" in d.scaled_on  # the strongest band both share: the ring's C-H stretches


def test_difference_scaled_on_a_given_band_cancels_an_unchanged_spectrum():
    """Model logic: after = 2 x before (twice the path length) scaled on a window gives factor 2 and no changes."""
    before = _mixture(1.0, 0.0, "t0")
    after = MeasuredSpectrum(X, 2.0 * before.values, ABSORBANCE, "t1")
    d = difference(before, after, scale_on_cm1=(2800.0, 3000.0))
    assert d.scale == pytest.approx(2.0, rel=1e-9)
    assert np.abs(d.difference).max() < 1e-9 and d.changes == ()
    assert difference(before, after, scale=1.0).changes[0].kind == APPEARS  # unscaled: everything grew


def test_difference_refuses_spectra_that_do_not_overlap_or_hold_nothing():
    a = MeasuredSpectrum(np.linspace(400, 1000, 301), np.ones(301), ABSORBANCE, "low.csv")
    b = MeasuredSpectrum(np.linspace(2000, 4000, 1001), np.ones(1001), ABSORBANCE, "high.csv")
    with pytest.raises(InputError, match="share less than"):
        difference(a, b)
    flat = MeasuredSpectrum(X, np.zeros_like(X), ABSORBANCE, "empty.csv")
    with pytest.raises(InputError, match="empty.csv: no absorbance"):
        difference(flat, _mixture(1.0, 0.0))
    with pytest.raises(InputError, match="not both"):
        difference(_mixture(1.0, 0.0), _mixture(1.0, 0.0), scale=1.0, scale_on_cm1=(2800.0, 3000.0))


@pytest.mark.parametrize("alcohol,ketone", [(0.75, 0.25), (0.3, 0.7)])
def test_component_fit_recovers_mole_fractions_of_a_beer_lambert_mixture(alcohol, ketone):
    """Mole fractions from predicted integrated intensities: exact for a mixture built by
    Beer-Lambert from the same predictions, up to the Lorentzian tails outside the fitted range
    (about 1 %); a small shift of one component is found."""
    fit = fit_components(_mixture(alcohol, ketone, shift_ketone=6.0),
                         [Component("cyclohexanol", prediction_of(ALCOHOL)),
                          Component("cyclohexanone", prediction_of(KETONE))])
    assert fit.shares[1].mole_fraction == pytest.approx(ketone / (alcohol + ketone), abs=0.02)
    assert fit.shares[1].shift_cm1 == pytest.approx(6.0, abs=1.0) and fit.shares[0].shift_cm1 == pytest.approx(0.0, abs=1.0)
    assert fit.relative_residual < 0.05


def test_component_fit_with_measured_references_and_concentrations_and_its_uncertainty():
    """References recorded at known concentrations (constructed): 0.3 x reference A (1.0 mol/L)
    + 0.6 x reference B (2.0 mol/L) is 0.3 mol/L of A and 1.2 of B, mole fraction of A 0.2. With
    noise the bootstrap spread is positive and the truth lies within a few spreads."""
    ref_a = _mixture(1.0, 0.0, "refA.csv")
    ref_b = _mixture(0.0, 1.0, "refB.csv")
    sample = MeasuredSpectrum(X, 0.3 * ref_a.values + 0.6 * ref_b.values, ABSORBANCE, "sample.csv")
    comps = [Component("A", reference=ref_a, concentration=1.0), Component("B", reference=ref_b, concentration=2.0)]
    fit = fit_components(sample, comps)
    assert fit.shares[0].mole_fraction == pytest.approx(0.2, abs=1e-3)
    noisy = MeasuredSpectrum(X, sample.values + np.random.default_rng(3).normal(0, 0.01, X.shape), ABSORBANCE, "n.csv")
    fit = fit_components(noisy, comps)
    share = fit.shares[0]
    assert share.mole_fraction_sd > 0 and abs(share.mole_fraction - 0.2) < 4 * share.mole_fraction_sd + 0.005


def test_component_fit_refuses_a_component_listed_twice_and_mixed_kinds_get_no_mole_fraction():
    with pytest.raises(InputError, match="list each component once"):
        fit_components(_mixture(1, 1), [Component("a", prediction_of(KETONE)), Component("b", prediction_of(KETONE))])
    fit = fit_components(_mixture(1, 1), [Component("a", prediction_of(ALCOHOL)),
                                          Component("b", reference=_mixture(0, 1, "refB.csv"))])
    assert fit.shares[0].mole_fraction is None and "no common intensity scale" in fit.mole_basis


@pytest.mark.parametrize("method,tolerance", [("band", 0.035), ("fit", 0.03)])
def test_conversion_series_follows_a_constructed_reaction(method, tolerance):
    """Conversions 0, 0.25, 0.5, 0.75, 1 of alcohol to ketone (Beer-Lambert mixtures, constant
    path): recovered within 0.03 by the fit and 0.035 by the band method (the README's figures;
    the band method's error is the diagnostic band's residual overlap with the other compound:
    0.032 with GFN1-xTB predictions, under 0.03 with GFN2-xTB's)."""
    truth = [0.0, 0.25, 0.5, 0.75, 1.0]
    spectra = [_mixture(1 - c, c, f"s{k}.csv") for k, c in enumerate(truth)]
    times = [40.0, 0.0, 10.0, 20.0, 30.0]  # given out of order: sorted by time
    series = conversion_series([spectra[4]] + spectra[:4], times, prediction_of(ALCOHOL), prediction_of(KETONE),
                               method=method)
    assert [p.time for p in series.points] == [0.0, 10.0, 20.0, 30.0, 40.0]
    np.testing.assert_allclose([p.conversion for p in series.points], truth, atol=tolerance)
    if method == "band":
        assert "starting material" in series.how and series.start_band.label.startswith("C-O stretch")
        assert series.product_band.label.startswith("C=O stretch")


def test_series_times_from_jcamp_dx_date_labels_and_from_a_list_file(tmp_path):
    paths = []
    for k, minutes in enumerate((0, 15, 90)):
        when = datetime.datetime(2026, 12, 3, 9, 0) + datetime.timedelta(minutes=minutes)
        p = tmp_path / f"r{k}.jdx"
        write_jcamp(p, X, _mixture(1.0, 0.0).values, f"r{k}", extra_labels={"LONGDATE": when.strftime("%Y/%m/%d %H:%M:%S")})
        paths.append(p)
    spectra = [load_spectrum(p) for p in paths]
    assert times_from_files(spectra) == [0.0, 15.0, 90.0]
    listing = tmp_path / "runs.csv"
    listing.write_text("# reaction HX-12 (invented)\nfile,time_h\nr0.jdx,0\nr1.jdx,0.25\nr2.jdx,1.5\n")
    rows, unit = read_series_list(listing)
    assert unit == "h" and [t for t, _ in rows] == [0.0, 0.25, 1.5] and rows[2][1] == tmp_path / "r2.jdx"
    undated = tmp_path / "u.csv"
    undated.write_text("wavenumber_cm1,absorbance\n" + "".join(f"{x},{y}\n" for x, y in zip(X, _mixture(1, 0).values)))
    with pytest.raises(InputError, match="no recording time"):
        times_from_files([spectra[0], load_spectrum(undated)])


@settings(max_examples=200, deadline=None)
@given(st.text(max_size=60), st.text(max_size=20), st.text(max_size=20))
def test_jcamp_date_labels_never_break_reading(longdate, date, time):
    """Any text in the date labels gives a datetime or None, never an exception."""
    got = recorded_at({"LONGDATE": longdate, "DATE": date, "TIME": time})
    assert got is None or isinstance(got, datetime.datetime)


@settings(max_examples=300, deadline=None)
@given(st.one_of(st.binary(max_size=400),
                 st.text(alphabet="filetm_,0123456789.\r\n \"#-", max_size=200).map(str.encode)))
def test_series_list_reader_gives_rows_or_one_input_error(tmp_path_factory, data):
    p = tmp_path_factory.mktemp("lists") / "list.csv"
    p.write_bytes(data)
    try:
        rows, unit = read_series_list(p)
    except InputError:
        return
    assert len(rows) >= 2 and all(np.isfinite(t) for t, _ in rows)


def test_cli_difference_components_and_series(tmp_path):
    def write(name, spec):
        path = tmp_path / name
        path.write_text("wavenumber_cm1,absorbance\n" + "".join(f"{x:.1f},{y:.6f}\n" for x, y in zip(X, spec.values)))
        return str(path)

    t0, t1 = write("t0.csv", _mixture(1.0, 0.0)), write("t1.csv", _mixture(0.5, 0.5))
    store = ["--store", str(tmp_path / "s.sqlite"), "-q"]
    r = CliRunner().invoke(main, ["difference", t0, t1, "--start", ALCOHOL, "--product", KETONE,
                                  "--csv", str(tmp_path / "d.csv"), *store])
    assert r.exit_code == 0, r.output
    assert "C=O stretch (ketone)" in r.output and "appears" in r.output and "caution" in r.output
    assert (tmp_path / "d.csv").read_text().startswith("wavenumber_cm1,")
    r = CliRunner().invoke(main, ["difference", t0, t1, "--scale-on", "2800", "3000", "--no-scaling", *store])
    assert r.exit_code == 2 and "exclude each other" in r.output
    r = CliRunner().invoke(main, ["components", t1, "--smiles", f"{ALCOHOL} cyclohexanol", "--smiles",
                                  f"{KETONE} cyclohexanone", "--csv", str(tmp_path / "c.csv"), *store])
    assert r.exit_code == 0, r.output
    assert (tmp_path / "c.csv").read_text().splitlines()[2].startswith("cyclohexanone,")
    r = CliRunner().invoke(main, ["components", t1, *store])
    assert r.exit_code == 2 and "give the components" in r.output
    listing = tmp_path / "runs.csv"
    listing.write_text("file,time_min\nt0.csv,0\nt1.csv,30\n")
    r = CliRunner().invoke(main, ["series", "--list", str(listing), "--start", ALCOHOL, "--product", KETONE, *store])
    assert r.exit_code == 0, r.output
    assert "C-O stretch (alcohol) of the starting material" in r.output


@pytest.mark.slow
@pytest.mark.parametrize("before,after,start,product,expected", [
    # Real gas-phase spectra (DOW CHEMICAL COMPANY, jcamp 1.3.2 sdist, fetched at test time).
    # Band positions of common practice, no source: an alcohol's O-H stretch (vapour) near
    # 3650-3700 and C-O stretch 1000-1100 cm^-1; methyl C-H stretches 2850-3000; an alkene's C=C
    # stretch 1620-1680 and =C-H stretches above 3000 cm^-1; an epoxide ring's CH2 stretches
    # 2990-3070 cm^-1.
    ("ethane.jdx", "ethanol.jdx", "CC", "CCO",
     [(APPEARS, "O-H stretch", 3600, 3700), (APPEARS, "C-O stretch", 1000, 1100), (GOES, "CH3 stretch", 2850, 3000)]),
    ("propylene.jdx", "propylene oxide.jdx", "C=CC", "CC1CO1",
     [(GOES, "C=C stretch", 1620, 1680), (GOES, "=C-H stretch", 3000, 3150), (APPEARS, "CH2 stretch", 2990, 3070)]),
])
def test_difference_of_real_spectra_names_the_groups_that_come_and_go(before, after, start, product, expected,
                                                                       measured_folder):
    d = difference(load_spectrum(measured_folder / before), load_spectrum(measured_folder / after),
                   start=prediction_of(start), product=prediction_of(product))
    role = {APPEARS: "of the product", GOES: "of the starting material"}
    for kind, label, lo, hi in expected:
        assert any(c.kind == kind and c.assigned.startswith(label) and role[kind] in c.assigned
                   and lo <= c.wavenumber_cm1 <= hi for c in d.changes), (label, [c.describe() for c in d.changes])


@pytest.mark.slow
def test_mixtures_of_real_spectra_recovered_with_measured_references(measured_folder):
    """benchmarks/mixtures.py's construction (absorbances of gases add): m-xylene and p-xylene, and
    methanol and water, at absorbance fractions 0.1-0.9 with 1 % noise: the fraction comes back
    within 0.03 (the issue's target) using the measured spectra as references."""
    import sys
    from pathlib import Path

    sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "benchmarks"))
    from mixtures import FRACTIONS, mixture

    for f1, f2 in (("m-xylene.jdx", "p-xylene.jdx"), ("methanol.jdx", "water.jdx")):
        a, b = load_spectrum(measured_folder / f1), load_spectrum(measured_folder / f2)
        for j, f in enumerate(FRACTIONS):
            mix, truth = mixture(a, b, f, seed=j)
            fit = fit_components(mix, [Component("a", reference=a), Component("b", reference=b)])
            assert fit.shares[0].absorbance_fraction == pytest.approx(truth, abs=0.03), (f1, f)

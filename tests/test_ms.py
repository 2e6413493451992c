"""The mass-spectrum cross-check (vibest.ms).

Isotope abundances: IUPAC isotopic compositions as carried by RDKit's periodic table
(Cl-35 75.78 %, Cl-37 24.22 %; Br-79 50.69 %, Br-81 49.31 %; C-13 1.07 %; H-2 0.0115 %).
Real mass spectra: data/mass_spectra of the jcamp 1.3.2 sdist (NIST Mass Spectrometry Data
Center and Widener University files; fetched at test time, never stored here).
"""

from __future__ import annotations

import numpy as np
import pytest
from click.testing import CliRunner
from hypothesis import given, settings
from hypothesis import strategies as st

from vibest import ms
from vibest.cli import main
from vibest.errors import InputError


def test_isotope_pattern_of_dichloromethane_by_hand():
    """CH2Cl2, M = 12 + 2 + 70 = 84. Cl2 alone: P(0 x 37Cl) = 0.7578^2 = 0.574261,
    P(1) = 2 x 0.7578 x 0.2422 = 0.367078, P(2) = 0.2422^2 = 0.058661, so M+2/M = 0.63922 and
    M+4/M = 0.10215 (13C and 2H shift those by one unit, into M+3 and M+5). M+1/M =
    0.0107/0.9893 (one C) + 2 x 0.000115/0.999885 (two H) = 0.010816 + 0.000230 = 0.011046."""
    p = ms.isotope_pattern(ms.formula_counts("ClCCl"))
    assert (p.formula, p.nominal_mass) == ("CH2Cl2", 84)
    assert p.ratio(2) == pytest.approx(0.63922, abs=2e-4)
    assert p.ratio(4) == pytest.approx(0.10215, abs=1e-4)
    assert p.ratio(1) == pytest.approx(0.011046, abs=1e-5)
    # monoisotopic: 12 + 2 x 1.007825 + 2 x 34.968853 = 83.953355 u
    assert p.monoisotopic_mass_u == pytest.approx(83.95335, abs=1e-4)


def test_isotope_pattern_of_bromomethane_by_hand():
    """CH3Br, M = 12 + 3 + 79 = 94; M+2/M = 0.4931/0.5069 = 0.97278; M+1/M = 0.010816 +
    3 x 0.000115 = 0.011161."""
    p = ms.isotope_pattern(ms.formula_counts("CBr"))
    assert (p.formula, p.nominal_mass) == ("CH3Br", 94)
    assert p.ratio(2) == pytest.approx(0.97278, abs=2e-4)
    assert p.ratio(1) == pytest.approx(0.011161, abs=2e-5)


def test_formulas_are_read_and_written_in_hill_order():
    assert ms.hill(ms.parse_formula("C 3 H 8 O 1")) == "C3H8O"
    assert ms.hill(ms.parse_formula("Cl4C2")) == "C2Cl4"
    assert ms.hill(ms.parse_formula("H2O")) == "H2O"
    for bad in ("", "c2h6", "C2Xx", "C0H4", "2C"):
        with pytest.raises(InputError):
            ms.parse_formula(bad)


def test_tetrachloroethylene_cluster_and_candidates(mass_folder):
    """NIST EI spectrum of tetrachloroethylene: M+. 164 is found for the right candidate, its Cl4
    cluster agrees with the computed ratios within 10 %, 4 Cl are implied; lighter candidates
    are contradicted by the heavier ions, and a chlorine-free candidate at m/z 170 by the cluster."""
    spec = ms.load_mass_spectrum(mass_folder / "Tetrachloroethylene_ms.jdx")
    right = ms.check_candidate("ClC(Cl)=C(Cl)Cl", ms=spec)
    assert right.status == ms.CONSISTENT and "4 Cl" in right.reason
    for key in ("M+2/M", "M+4/M", "M+6/M"):
        measured, computed = right.ratios[key]
        assert measured == pytest.approx(computed, rel=0.10), key
    assert ms.implied_halogens(spec, 164) == (4, 0)
    for wrong in ("ClC=C(Cl)Cl", "ClCCl", "c1ccccc1", "CCCCCCCCCCCC"):
        assert ms.check_candidate(wrong, ms=spec).status == ms.CONTRADICTED, wrong


def test_alcohol_spectra_keep_the_right_mass_and_drop_lighter_candidates(mass_folder):
    ethanol = ms.load_mass_spectrum(mass_folder / "ethanol_ms.jdx")
    assert ms.check_candidate("CCO", ms=ethanol).status == ms.CONSISTENT
    assert ms.check_candidate("CC=O", ms=ethanol).status == ms.CONTRADICTED  # m/z 46 above acetaldehyde's 44
    assert ms.check_candidate("CCCO", ms=ethanol).status == ms.UNDECIDED  # no m/z 60: lighter, or M+. unseen
    propanol = ms.load_mass_spectrum(mass_folder / "1-propanol_ms.jdx")  # 6 blocks: the first mass spectrum
    assert "block 1 of 6" in propanol.notes[0]
    assert ms.check_candidate("CCCO", ms=propanol).status == ms.CONSISTENT
    assert ms.check_candidate("CCO", ms=propanol).status == ms.CONTRADICTED
    tnt = ms.load_mass_spectrum(mass_folder / "118-96-7-Mass.jdx")
    assert ms.check_candidate("Cc1c(cc(cc1[N+](=O)[O-])[N+](=O)[O-])[N+](=O)[O-]", ms=tnt).status == ms.CONSISTENT
    assert ms.nitrogen_rule(227).startswith("odd")  # TNT: three N


def test_bad_mass_spectra_are_refused_or_said(tmp_path):
    def write(name, text):
        (tmp_path / name).write_text(text)
        return tmp_path / name

    with pytest.raises(InputError, match="no peaks"):
        ms.load_mass_spectrum(write("empty.csv", "mz,intensity\n"))
    with pytest.raises(InputError, match="negative intensities"):
        ms.load_mass_spectrum(write("neg.csv", "10,5\n20,-3\n"))
    unsorted = ms.load_mass_spectrum(write("unsorted.csv", "mz,intensity\n46,20\n31,100\n45,50\n"))
    assert unsorted.mz.tolist() == [31, 45, 46] and "sorted" in unsorted.notes[0]
    uv = write("uv.jdx", "##TITLE=uv\n##JCAMP-DX=4.24\n##DATA TYPE=UV/VIS SPECTRUM\n##XUNITS=NANOMETERS\n"
                         "##YUNITS=ABSORBANCE\n##NPOINTS=3\n##XYPOINTS=(XY..XY)\n200,0.1\n210,0.2\n220,0.3\n##END=\n")
    with pytest.raises(InputError, match="UV/VIS SPECTRUM, not a mass spectrum"):
        ms.load_mass_spectrum(uv)
    with pytest.raises(InputError, match="names an optical spectrum"):
        ms.load_mass_spectrum(write("ir.csv", "wavenumber_cm1,absorbance\n4000,0.1\n3996,0.2\n"))
    with pytest.raises(InputError, match="mass spectrum, a formula or a mass"):
        ms.check_candidate("CCO")


def test_formula_and_mass_alone_decide():
    assert ms.check_candidate("CCO", formula="C2H6O").status == ms.CONSISTENT
    assert ms.check_candidate("CC=O", formula="C2H6O").status == ms.CONTRADICTED
    assert ms.check_candidate("CC=O", mass=46).reason == "nominal mass 44, not the given 46"


CSV_LIKE = st.text(alphabet="0123456789.,;\t\r\n -e#\"ab", max_size=200).map(str.encode)


@settings(max_examples=300, deadline=None)
@given(st.one_of(st.binary(max_size=300), CSV_LIKE))
def test_mass_spectrum_csv_reader_gives_a_spectrum_or_one_input_error(tmp_path_factory, data):
    p = tmp_path_factory.mktemp("ms") / "ms.csv"
    p.write_bytes(data)
    try:
        spec = ms.load_mass_spectrum(p)
    except InputError:
        return
    assert len(spec.mz) and np.all(np.diff(spec.mz) > 0) and spec.intensity.max() == pytest.approx(100.0)


def test_verdict_is_not_supported_when_the_mass_contradicts_the_intended_structure():
    """Constructed: the IR of formaldehyde itself, but the sample's formula is given as C2H6O."""
    from vibest.measured import ABSORBANCE, MeasuredSpectrum
    from vibest.ms import MassEvidence
    from vibest.verdict import NOT_SUPPORTED, check_structure

    from .conftest import prediction_of

    pred = prediction_of("C=O")
    measured = MeasuredSpectrum(pred.spectrum.wavenumbers_cm1, pred.spectrum.absorbance_normalised, ABSORBANCE, "f")
    v = check_structure(measured, "C=O", decoys=1, mass_evidence=MassEvidence(formula="C2H6O"), condensed_shifts=False)
    assert v.conclusion == NOT_SUPPORTED and "formula CH2O, not the given C2H6O" in v.reasons[0]
    assert [c.status for c in v.mass_checks][0] == ms.CONTRADICTED


def test_cli_rank_with_a_mass_spectrum_drops_contradicted_candidates(measured_folder, mass_folder, tmp_path):
    args = ["rank", str(measured_folder / "ethanol.jdx"), "CCO", "CC=O", "--ms", str(mass_folder / "ethanol_ms.jdx"),
            "--store", str(tmp_path / "s.sqlite"), "-q"]
    r = CliRunner().invoke(main, args + ["--ms-drop"])
    assert r.exit_code == 0, r.output
    assert "dropped from the ranking: CC=O" in r.output and "(CC=O)" not in r.output.split("mass evidence")[0]
    r = CliRunner().invoke(main, args + ["--formula", "Xx2"])
    assert r.exit_code == 2 and "not an element" in r.output
    r = CliRunner().invoke(main, ["rank", str(measured_folder / "ethanol.jdx"), "CC=O", "--mass", "46", "--ms-drop",
                                  "--store", str(tmp_path / "s.sqlite"), "-q"])
    assert r.exit_code == 2 and "contradicts every candidate" in r.output

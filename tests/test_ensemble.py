"""Conformer ensembles and implicit solvent."""

import numpy as np
import pytest
from scipy import constants as sc

from vibest.ensemble import EnsembleOptions, boltzmann_weights, predict_ensemble
from vibest.errors import InputError
from vibest.pipeline import CalculationOptions, predict

from .conftest import prediction_of

SERIAL = CalculationOptions(workers=1)


def test_boltzmann_weights_sum_to_one_and_follow_exp():
    """w_i / w_j = exp(-(E_i - E_j)/RT), R from scipy.constants (statistical mechanics)."""
    e = np.array([0.0, 0.5, 1.2, 3.0])
    w = boltzmann_weights(e, 298.15)
    assert w.sum() == pytest.approx(1.0)
    rt_kcal = sc.R * 298.15 / (1000 * sc.calorie)
    assert w[1] / w[0] == pytest.approx(np.exp(-0.5 / rt_kcal))
    assert w[3] / w[2] == pytest.approx(np.exp(-1.8 / rt_kcal))


def test_rigid_molecule_ensemble_equals_single_conformer_path():
    # benzene has one conformer (common practice): the ensemble must reduce to the plain path
    ens = predict_ensemble("c1ccccc1", calc=SERIAL)
    single = prediction_of("c1ccccc1")
    assert len(ens.members) == 1 and ens.members[0].weight == 1.0
    np.testing.assert_allclose(ens.spectrum.absorption_km_mol_cm1, single.spectrum.absorption_km_mol_cm1,
                               rtol=1e-6, atol=1e-9)


def test_ensemble_is_deterministic():
    a = predict_ensemble("ClCCCl", calc=SERIAL)
    b = predict_ensemble("ClCCCl", calc=SERIAL)
    assert [m.relative_energy_kcal_mol for m in a.members] == pytest.approx([m.relative_energy_kcal_mol for m in b.members])
    np.testing.assert_allclose(a.spectrum.absorption_km_mol_cm1, b.spectrum.absorption_km_mol_cm1, atol=1e-6)


def test_dichloroethane_anti_below_gauche_and_spectrum_changes():
    """Gas-phase 1,2-dichloroethane: anti is more stable than gauche (handbook fact, from memory:
    about 1.1-1.2 kcal/mol); the gauche form is doubly degenerate (two mirror-image minima)."""
    ens = predict_ensemble("ClCCCl", calc=SERIAL)
    assert len(ens.members) >= 2
    lowest = ens.members[0].prediction.record

    def cl_dihedral(rec):
        """|Cl-C-C-Cl| in degrees (atoms 0-3 in SMILES order ClCCCl)."""
        x = rec.positions_angstrom
        b1, b2, b3 = x[1] - x[0], x[2] - x[1], x[3] - x[2]
        n1, n2 = np.cross(b1, b2), np.cross(b2, b3)
        m1 = np.cross(n1, b2 / np.linalg.norm(b2))
        return abs(np.degrees(np.arctan2(m1 @ n2, n1 @ n2)))

    assert cl_dihedral(lowest) > 150  # anti
    gauche = [m for m in ens.members if m.relative_energy_kcal_mol > 0.1]
    assert gauche and all(40 < cl_dihedral(m.prediction.record) < 90 for m in gauche)
    assert 0.3 < gauche[0].relative_energy_kcal_mol < 3.0
    assert sum(m.weight for m in ens.members) == pytest.approx(1.0)
    single = predict("ClCCCl", workers=1)
    diff = np.abs(ens.spectrum.absorption_km_mol_cm1 - single.spectrum.absorption_km_mol_cm1).max()
    assert diff > 0.01 * single.spectrum.absorption_km_mol_cm1.max()


def test_ethanol_has_more_than_one_conformer():
    # ethanol has trans and gauche rotamers of its O-H (common practice; both seen in microwave spectra)
    ens = predict_ensemble("CCO", calc=SERIAL)
    assert len(ens.members) >= 2
    assert all(m.gradient_calls > 0 and m.seconds > 0 for m in ens.members)


def test_free_energy_weighting_and_bad_options():
    # Boltzmann weights sum to one by definition; 1,2-dichloroethane has anti and gauche forms
    ens = predict_ensemble("ClCCCl", calc=SERIAL, ens=EnsembleOptions(weighting="free-energy"))
    assert ens.weighting == "free-energy" and sum(m.weight for m in ens.members) == pytest.approx(1.0)
    with pytest.raises(InputError):
        predict_ensemble("CCO", ens=EnsembleOptions(weighting="votes"))


@pytest.mark.slow
def test_acetone_carbonyl_shifts_down_in_water():
    """The C=O stretch of acetone lies lower in water than in the gas phase (direction only;
    common practice, no source)."""
    gas = prediction_of("CC(C)=O")
    water = predict("CC(C)=O", solvent="water", workers=1)
    co = lambda p: max((b for b in p.bands if "C=O stretch" in b.label), key=lambda b: b.intensity_km_mol)  # noqa: E731
    assert co(water).wavenumber_cm1 < co(gas).wavenumber_cm1
    assert water.record.settings["engine"]["solvent"] == "water"


def test_unknown_solvent_is_refused():
    with pytest.raises(InputError, match="no implicit-solvent model for 'mud'"):
        predict("O", solvent="mud")


def test_common_solvent_names_are_accepted_and_named():
    """Chloroform is tblite's chcl3 (ALPB solvent list of Ehlert et al., JCTC 17, 4250 (2021))."""
    from vibest.calculation.driver import calculation_options

    assert calculation_options(solvent="Chloroform").engine.solvent == "chcl3"
    assert calculation_options(solvent="tetrahydrofuran").engine.solvent == "thf"
    pred = predict("O", solvent="dichloromethane", workers=1)
    assert pred.medium == "in ch2cl2 (ALPB)"

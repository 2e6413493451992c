"""Wilson B vectors against central finite differences of the coordinate values (exact calculus)."""

import numpy as np
import pytest

from vibest.internal_coordinates import (BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION, Primitive,
                                         primitives_from_bonds, value_and_b_row)

RNG = np.random.default_rng(3)
X = np.array([[0.0, 0.0, 0.0], [1.5, 0.1, 0.0], [2.1, 1.4, 0.2], [3.5, 1.6, 1.1], [1.9, -1.0, 0.8]]) \
    + RNG.normal(scale=0.05, size=(5, 3))


@pytest.mark.parametrize("prim", [Primitive(STRETCH, (0, 1)), Primitive(BEND, (0, 1, 2)),
                                  Primitive(TORSION, (0, 1, 2, 3)), Primitive(OUT_OF_PLANE, (0, 2, 4, 1))])
def test_b_rows_match_finite_differences(prim):
    _, row = value_and_b_row(X, prim)
    h = 1e-6
    num = np.zeros(X.size)
    for k in range(X.size):
        xp, xm = X.copy().ravel(), X.copy().ravel()
        xp[k] += h
        xm[k] -= h
        num[k] = (value_and_b_row(xp.reshape(-1, 3), prim)[0] - value_and_b_row(xm.reshape(-1, 3), prim)[0]) / (2 * h)
    np.testing.assert_allclose(row, num, atol=1e-6)


def test_linear_chain_gets_two_linear_bends():
    x = np.array([[0.0, 0, 0], [1.2, 0, 0], [2.4, 0, 0]])
    prims = primitives_from_bonds(x, [(0, 1), (1, 2)])
    kinds = [p.kind for p in prims]
    assert kinds.count(LINEAR_BEND) == 2 and kinds.count(BEND) == 0


def test_redundant_set_values_agree_with_ase_and_b_matrix_with_finite_differences():
    """The optimiser's vectorised coordinates: values against ASE's Atoms.get_distance / get_angle /
    get_dihedral (general-purpose reference), B matrix against central differences (exact calculus)."""
    from ase import Atoms
    from ase.units import Bohr

    from vibest.calculation import redundant_internals
    from vibest.structure import build_molecule

    mol = build_molecule("CC(O)C(=O)NC")
    x = mol.positions_angstrom / Bohr
    ic = redundant_internals.build(mol.numbers, x)
    assert ic is not None and len(ic.torsions) > 0
    q = ic.values(x)
    atoms = Atoms(numbers=mol.numbers, positions=mol.positions_angstrom)
    nb, na = len(ic.bonds), len(ic.bends)
    for k, (i, j) in enumerate(ic.bonds):
        assert q[k] * Bohr == pytest.approx(atoms.get_distance(i, j), abs=1e-10)
    for k, (i, j, m) in enumerate(ic.bends):
        assert np.degrees(q[nb + k]) == pytest.approx(atoms.get_angle(i, j, m), abs=1e-8)
    for k, t in enumerate(ic.torsions):
        ref = atoms.get_dihedral(*t)  # degrees in [0, 360)
        diff = (np.degrees(q[nb + na + k]) - ref + 180.0) % 360.0 - 180.0
        assert abs(diff) < 1e-8
    q_again, bmat = ic.values_and_b_matrix(x)
    np.testing.assert_allclose(q_again, q, rtol=0, atol=1e-12)  # the one-pass values are the values (to rounding)
    h = 1e-6
    num = np.zeros_like(bmat)
    for c in range(x.size):
        xp, xm = x.copy().ravel(), x.copy().ravel()
        xp[c] += h
        xm[c] -= h
        num[:, c] = ic.difference(ic.values(xp.reshape(-1, 3)), ic.values(xm.reshape(-1, 3))) / (2 * h)
    np.testing.assert_allclose(bmat, num, atol=1e-6)
    # the set describes every internal motion: rank 3N - 6
    assert np.linalg.matrix_rank(bmat, tol=1e-6) == x.size - 6


def test_redundant_set_joins_fragments_and_refuses_linear_geometries():
    from ase.units import Bohr

    from vibest.calculation import redundant_internals

    # two water molecules 3 Angstrom apart: one inter-fragment bond joins them
    w = np.array([[0.0, 0.0, 0.0], [0.96, 0.0, 0.0], [-0.24, 0.93, 0.0]])
    x = np.vstack([w, w + [3.0, 0.0, 0.0]]) / Bohr
    ic = redundant_internals.build([8, 1, 1, 8, 1, 1], x)
    assert ic is not None and len(ic.bonds) == 5
    linear = np.array([[0.0, 0, 0], [1.16, 0, 0], [-1.16, 0, 0]]) / Bohr
    assert redundant_internals.build([6, 8, 8], linear) is None

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

"""Redundant internal coordinates of one molecule and the Hessian carried into them.

F_q = G^- B H B^T G^-, with G = B B^T and G^- its generalised inverse (P. Pulay, G. Fogarasi,
J. Chem. Phys. 96, 2856 (1992); C. Peng, P. Y. Ayala, H. B. Schlegel, M. J. Frisch,
J. Comput. Chem. 17, 49 (1996)). Shared by the mode composition and the scaled force field.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
from ase.units import Bohr

from ..internal_coordinates import Primitive, b_matrix, primitives_from_bonds


@dataclass(frozen=True)
class InternalSpace:
    """Primitives, their B matrix (P, 3N) in Bohr-based units, and ginv_b = G^- B (P, 3N)."""

    primitives: tuple[Primitive, ...]
    b: np.ndarray
    ginv_b: np.ndarray

    @classmethod
    def build(cls, positions_angstrom, bonds) -> "InternalSpace":
        x_bohr = np.asarray(positions_angstrom, dtype=float) / Bohr
        prims = tuple(primitives_from_bonds(x_bohr, [(int(i), int(j)) for i, j, *_ in bonds]))
        if not prims:
            z = np.zeros((0, x_bohr.size))
            return cls(prims, z, z)
        bmat = b_matrix(x_bohr, list(prims))
        g_inv = np.linalg.pinv(bmat @ bmat.T, rcond=1e-8, hermitian=True)
        return cls(prims, bmat, g_inv @ bmat)

    def force_constants(self, hessian_hartree_bohr2) -> np.ndarray:
        """F_q (P, P) in Eh per (Bohr or radian)^2."""
        return self.ginv_b @ np.asarray(hessian_hartree_bohr2) @ self.ginv_b.T

    def diagonal_force_constants(self, hessian_hartree_bohr2) -> np.ndarray:
        return np.einsum("ij,jk,ik->i", self.ginv_b, np.asarray(hessian_hartree_bohr2), self.ginv_b)

"""Frequency scaling: harmonic GFN2-xTB wavenumbers -> estimates of observed fundamentals.

Two models, both fitted by ``benchmarks/fit_scale_factor.py`` on the experimental gas-phase
fundamentals of ``vibest/data/fundamentals.csv`` and shipped in ``vibest/data/scale_factors.json``:

* ``uniform``: every wavenumber times one factor s (least squares through the origin).
* ``per-coordinate``: the scaled-quantum-mechanical force field of Pulay and co-workers
  (P. Pulay, G. Fogarasi, G. Pongor, J. E. Boggs, A. Vargha, J. Am. Chem. Soc. 105, 7037 (1983)):
  the Hessian in internal coordinates is scaled as F'_ij = sqrt(s_i s_j) F_ij, with one factor
  per coordinate type (C-H stretch, C=O stretch, bend with H, ...), then carried back to
  Cartesians and diagonalised again. Types absent from the fit use the square of the uniform factor.

The model with the lower error on held-out molecules is the default (see the JSON file).
"""

from __future__ import annotations

import json
from dataclasses import dataclass, field
from importlib import resources

import numpy as np
from ase.data import chemical_symbols

from ..errors import InputError
from ..internal_coordinates import BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION, Primitive
from .internal_space import InternalSpace

UNIFORM, PER_COORDINATE, USER = "uniform", "per-coordinate", "user"
_SYMBOL = {1.0: "-", 1.5: ":", 2.0: "=", 3.0: "#"}
_HALOGENS = {9, 17, 35, 53}


@dataclass(frozen=True)
class ScaleModel:
    """How harmonic wavenumbers are scaled.

    Attributes:
        name: "uniform", "per-coordinate" or "user".
        factor: uniform wavenumber factor (dimensionless); for per-coordinate models the fallback
            (its square scales force constants of coordinate types without a fitted factor).
        force_constant_factors: per coordinate type, the factor s_k on force constants
            (per-coordinate model only; wavenumbers scale roughly as sqrt(s_k)).
        source: where the numbers come from.
    """

    factor: float
    name: str = UNIFORM
    source: str = ""
    force_constant_factors: dict[str, float] = field(default_factory=dict)

    @property
    def per_coordinate(self) -> bool:
        return self.name == PER_COORDINATE

    def describe(self) -> str:
        """Short text for reports, e.g. "uniform factor 0.9939" or "per-coordinate (12 types)"."""
        if self.per_coordinate:
            return f"per-coordinate scaled force field ({len(self.force_constant_factors)} types)"
        return f"{self.name} factor {self.factor:.4f}"

    def apply(self, wavenumbers_cm1) -> np.ndarray:
        """Uniformly scaled wavenumbers (cm^-1); imaginary (negative) values scale the same way."""
        return np.asarray(wavenumbers_cm1, dtype=float) * self.factor

    def coordinate_factors(self, numbers, bonds, space: InternalSpace) -> np.ndarray:
        """Force-constant factor of every primitive of ``space`` (dimensionless)."""
        types = coordinate_types(numbers, bonds, space.primitives)
        fallback = self.factor ** 2
        return np.array([self.force_constant_factors.get(t, fallback) for t in types])

    def scaled_hessian(self, numbers, bonds, hessian_hartree_bohr2, space: InternalSpace) -> np.ndarray:
        """Cartesian Hessian with the internal force constants scaled (Eh/Bohr^2)."""
        if not self.per_coordinate:
            return np.asarray(hessian_hartree_bohr2) * self.factor ** 2
        return scale_hessian(hessian_hartree_bohr2, space, self.coordinate_factors(numbers, bonds, space))

    def to_dict(self) -> dict:
        return {"name": self.name, "factor": self.factor, "source": self.source,
                "force_constant_factors": dict(self.force_constant_factors)}


def scale_hessian(hessian_hartree_bohr2, space: InternalSpace, factors) -> np.ndarray:
    """H' = H + B^T ((sqrt(s) sqrt(s)^T - 1) o F_q) B: exactly H when every s is 1."""
    h = np.asarray(hessian_hartree_bohr2, dtype=float)
    if not len(space.primitives):
        return h.copy()
    root = np.sqrt(np.asarray(factors, dtype=float))
    fq = space.force_constants(h)
    delta = (np.outer(root, root) - 1.0) * fq
    out = h + space.b.T @ delta @ space.b
    return 0.5 * (out + out.T)


def _cumulated_atoms(bonds) -> set[int]:
    doubles: dict[int, int] = {}
    for i, j, o in bonds:
        if float(o) >= 2.0:
            for a in (int(i), int(j)):
                doubles[a] = doubles.get(a, 0) + 1
    return {a for a, c in doubles.items() if c >= 2}


def coordinate_types(numbers, bonds, primitives: tuple[Primitive, ...] | list[Primitive]) -> list[str]:
    """Scaling type of each primitive, e.g. "C-H stretch", "C=O stretch", "C#N stretch",
    "C=O stretch (cumulated)", "heavy-atom-H stretch" (S-H, Cl-H, ...), "bend (H)", "bend", "linear bend", "torsion", "out-of-plane"."""
    orders = {(min(int(i), int(j)), max(int(i), int(j))): float(o) for i, j, o in bonds}
    cumulated = _cumulated_atoms(bonds)
    out = []
    for p in primitives:
        a = p.atoms
        if p.kind == STRETCH:
            zi, zj = sorted((int(numbers[a[0]]), int(numbers[a[1]])))
            if zi == 1:
                # First-row hydrides by element; heavier ones (S, Cl, Br, P, ...) share one type:
                # GFN2-xTB places their stretches too low by a similar fraction.
                out.append(f"{chemical_symbols[zj]}-H stretch" if zj <= 10 else "heavy-atom-H stretch")
                continue
            order = orders.get((min(a), max(a)), 1.0)
            sym = _SYMBOL.get(order, "-")
            if zi in _HALOGENS or zj in _HALOGENS:
                out.append("C-halogen stretch" if 6 in (zi, zj) else "X-halogen stretch")
                continue
            first, second = (zi, zj) if zi == 6 else ((zj, zi) if zj == 6 else (zj, zi))
            name = f"{chemical_symbols[first]}{sym}{chemical_symbols[second]} stretch"
            if order >= 2.0 and (a[0] in cumulated or a[1] in cumulated):
                name += " (cumulated)"
            out.append(name)
        elif p.kind == BEND:
            out.append("bend (H)" if 1 in (int(numbers[a[0]]), int(numbers[a[2]])) else "bend")
        elif p.kind == LINEAR_BEND:
            out.append("linear bend")
        elif p.kind == TORSION:
            out.append("torsion")
        elif p.kind == OUT_OF_PLANE:
            out.append("out-of-plane")
        else:  # pragma: no cover - all kinds are listed above
            out.append(p.kind)
    return out


def _shipped() -> dict:
    return json.loads(resources.files("vibest.data").joinpath("scale_factors.json").read_text())


def uniform_scale_model() -> ScaleModel:
    fit = _shipped()["uniform"]
    return ScaleModel(float(fit["factor"]), UNIFORM,
                      f"fitted on {fit['fundamentals']} gas-phase fundamentals of {fit['molecules']} molecules, "
                      "benchmarks/fit_scale_factor.py")


def per_coordinate_scale_model() -> ScaleModel:
    data = _shipped()
    fit = data.get(PER_COORDINATE)
    if fit is None:
        raise InputError("no per-coordinate scale factors are shipped with this installation")
    return ScaleModel(float(data["uniform"]["factor"]), PER_COORDINATE,
                      f"scaled force field fitted on {fit['train_molecules']} molecules, "
                      "benchmarks/fit_scale_factor.py",
                      {k: float(v) for k, v in fit["force_constant_factors"].items()})


SCALE_MODELS = (UNIFORM, PER_COORDINATE)


def named_scale_model(name: str) -> ScaleModel:
    if name == UNIFORM:
        return uniform_scale_model()
    if name == PER_COORDINATE:
        return per_coordinate_scale_model()
    raise InputError(f"unknown scale model {name!r}; choose one of {', '.join(SCALE_MODELS)}")


def default_scale_model() -> ScaleModel:
    """The shipped model with the lower held-out error (named in scale_factors.json)."""
    return named_scale_model(_shipped().get("default", UNIFORM))


def user_scale_model(factor: float) -> ScaleModel:
    """A uniform factor chosen by the user (checked to be a plausible number)."""
    if not (0.5 <= float(factor) <= 1.5):
        raise InputError(f"scale factor {factor} is outside 0.5-1.5; give e.g. 0.97")
    return ScaleModel(float(factor), USER, "given by the user")


def fit_uniform_factor(calculated_cm1, experimental_cm1) -> float:
    """Least-squares factor s minimising sum (s w_calc - w_exp)^2."""
    c = np.asarray(calculated_cm1, dtype=float)
    e = np.asarray(experimental_cm1, dtype=float)
    return float(c @ e / (c @ c))

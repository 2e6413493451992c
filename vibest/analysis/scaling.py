"""Frequency scaling: harmonic GFN2-xTB wavenumbers -> estimates of observed fundamentals.

Three models, all fitted by ``benchmarks/fit_scale_factor.py`` on the experimental gas-phase
fundamentals of ``vibest/data/fundamentals.csv`` and shipped in ``vibest/data/scale_factors.json``:

* ``uniform``: every wavenumber times one factor s (least squares through the origin).
* ``region``: one factor per wavenumber region of the harmonic band (below 1000, 1000-1600,
  1600-2000, 2000-2700 and above 2700 cm^-1: skeletal, fingerprint, double bonds, triple and
  cumulated bonds, X-H stretches), each by least squares through the origin.
* ``per-coordinate``: the scaled-quantum-mechanical force field of Pulay and co-workers
  (P. Pulay, G. Fogarasi, G. Pongor, J. E. Boggs, A. Vargha, J. Am. Chem. Soc. 105, 7037 (1983)):
  the Hessian in internal coordinates is scaled as F'_ij = sqrt(s_i s_j) F_ij, with one factor
  per coordinate type (C-H stretch, C=O stretch, bend with H, ...), then carried back to
  Cartesians and diagonalised again. Types are grouped in families (C-H stretches; N-H, O-H, F-H
  stretches; bonds to halogens; triple, cumulated, double and single bonds; bends with H;
  torsions): the fit pulls each type's factor towards its family's (partial pooling), and a type
  absent from the fit (N=N of N2O, H-F) uses its family's factor, or else the square of the
  uniform factor. Beyond that rule, five classes of couplings (off-diagonal F_ij) get a further
  factor of their own, because GFN2-xTB overestimates them: two X-H stretches on one atom
  (symmetric/antisymmetric XH2/XH3 splitting), two linear bends (e.g. the cis/trans bends of
  acetylene), two heavy-atom stretches sharing an atom, a stretch and a bend over its bond, and
  two torsions about one bond.

The model with the lower error on held-out molecules is the default (see the JSON file).
"""

from __future__ import annotations

import functools
import json
from dataclasses import dataclass, field
from importlib import resources

import numpy as np
from ase.data import chemical_symbols

from ..errors import InputError
from ..internal_coordinates import BEND, LINEAR_BEND, OUT_OF_PLANE, STRETCH, TORSION, Primitive
from .internal_space import InternalSpace

UNIFORM, REGION, PER_COORDINATE, USER = "uniform", "region", "per-coordinate", "user"
#: upper edges (cm^-1, harmonic) of the regions of the ``region`` model; the last region is open.
REGION_EDGES_CM1 = (1000.0, 1600.0, 2000.0, 2700.0)
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
        region_factors: wavenumber factors of the regions split at :data:`REGION_EDGES_CM1`
            (region model only).
        source: where the numbers come from.
    """

    factor: float
    name: str = UNIFORM
    source: str = ""
    force_constant_factors: dict[str, float] = field(default_factory=dict)
    region_factors: tuple[float, ...] = ()

    @property
    def per_coordinate(self) -> bool:
        return self.name == PER_COORDINATE

    def describe(self) -> str:
        """Short text for reports, e.g. "uniform factor 0.9939" or "per-coordinate scaled force field (37 types, 9 families)"."""
        if self.per_coordinate:
            families = sum(k.startswith(FAMILY_PREFIX) for k in self.force_constant_factors)
            couplings = sum(k in COUPLING_CLASSES for k in self.force_constant_factors)
            types = len(self.force_constant_factors) - families - couplings
            extra = (f", {families} families" if families else "") + (f", {couplings} coupling factors" if couplings else "")
            return f"per-coordinate scaled force field ({types} types{extra})"
        if self.name == REGION:
            return "region factors " + ", ".join(f"{f:.4f}" for f in self.region_factors)
        return f"{self.name} factor {self.factor:.4f}"

    def apply(self, wavenumbers_cm1) -> np.ndarray:
        """Scaled wavenumbers (cm^-1): one factor, or the factor of each band's region (by the
        magnitude of the harmonic wavenumber); imaginary (negative) values scale the same way."""
        w = np.asarray(wavenumbers_cm1, dtype=float)
        if self.name == REGION and self.region_factors:
            return w * np.asarray(self.region_factors)[region_index(w)]
        return w * self.factor

    def type_factor(self, coordinate_type: str) -> float:
        """Force-constant factor of one coordinate type: its own fitted factor, else its
        family's (:func:`type_family`), else the square of the uniform factor."""
        got = self.force_constant_factors.get(coordinate_type)
        if got is None:
            got = self.force_constant_factors.get(type_family(coordinate_type), self.factor ** 2)
        return float(got)

    def coordinate_factors(self, numbers, bonds, space: InternalSpace) -> np.ndarray:
        """Force-constant factor of every primitive of ``space`` (dimensionless)."""
        return np.array([self.type_factor(t) for t in coordinate_types(numbers, bonds, space.primitives)])

    def scaled_hessian(self, numbers, bonds, hessian_hartree_bohr2, space: InternalSpace) -> np.ndarray:
        """Cartesian Hessian with the internal force constants scaled (Eh/Bohr^2).

        F'_ij = sqrt(s_i s_j) F_ij, except that the couplings of the classes of
        :data:`COUPLING_CLASSES` the model has a factor for (two X-H stretches on one atom, two
        linear bends, two adjacent heavy-atom stretches, a stretch and a bend over its bond, two
        torsions about one bond) are scaled by that further factor."""
        if not self.per_coordinate:
            return np.asarray(hessian_hartree_bohr2) * self.factor ** 2
        root = np.sqrt(self.coordinate_factors(numbers, bonds, space))
        matrix = np.outer(root, root)
        for name, (rows, cols) in coupling_pairs(numbers, space.primitives).items():
            factor = self.force_constant_factors.get(name)
            if factor is not None and len(rows):
                matrix[rows, cols] *= factor
                matrix[cols, rows] *= factor
        return scale_hessian_matrix(hessian_hartree_bohr2, space, matrix)

    def to_dict(self) -> dict:
        return {"name": self.name, "factor": self.factor, "source": self.source,
                "force_constant_factors": dict(self.force_constant_factors),
                "region_factors": list(self.region_factors),
                "region_edges_cm1": list(REGION_EDGES_CM1) if self.region_factors else []}


def region_index(wavenumbers_cm1) -> np.ndarray:
    """Region number (0-4) of each wavenumber, by its magnitude (cm^-1)."""
    return np.searchsorted(np.asarray(REGION_EDGES_CM1), np.abs(np.asarray(wavenumbers_cm1, dtype=float)), side="right")


def scale_hessian_matrix(hessian_hartree_bohr2, space: InternalSpace, matrix) -> np.ndarray:
    """H' = H + B^T ((S - 1) o F_q) B for a symmetric matrix S of factors on F_q entries."""
    h = np.asarray(hessian_hartree_bohr2, dtype=float)
    if not len(space.primitives):
        return h.copy()
    fq = space.force_constants(h)
    delta = (np.asarray(matrix, dtype=float) - 1.0) * fq
    out = h + space.b.T @ delta @ space.b
    return 0.5 * (out + out.T)


#: Names of the extra factors on couplings (off-diagonal force constants) of pairs of coordinates.
GEMINAL_COUPLING = "X-H/X-H stretch coupling (same X)"
LINEAR_BEND_COUPLING = "linear bend/linear bend coupling"
ADJACENT_STRETCH_COUPLING = "heavy-atom stretch/stretch coupling (shared atom)"
STRETCH_BEND_COUPLING = "stretch/bend coupling (bond in the bend)"
TORSION_COUPLING = "torsion/torsion coupling (same bond)"


def geminal_xh_pairs(numbers, primitives) -> list[tuple[int, int]]:
    """Index pairs of X-H stretch primitives that share their heavy atom X."""
    by_atom: dict[int, list[int]] = {}
    for k, p in enumerate(primitives):
        if p.kind == STRETCH:
            a, b = p.atoms[:2]
            za, zb = int(numbers[a]), int(numbers[b])
            if (za == 1) != (zb == 1):
                by_atom.setdefault(b if za == 1 else a, []).append(k)
    return _pairs_within(by_atom.values())


def _pairs_within(groups) -> list[tuple[int, int]]:
    return [(ks[i], ks[j]) for ks in groups for i in range(len(ks)) for j in range(i + 1, len(ks))]


def linear_bend_pairs(numbers, primitives) -> list[tuple[int, int]]:
    """Pairs of linear-bend components at different apex atoms."""
    idx = [k for k, p in enumerate(primitives) if p.kind == LINEAR_BEND]
    return [(a, b) for n, a in enumerate(idx) for b in idx[n + 1:] if primitives[a].atoms[1] != primitives[b].atoms[1]]


def adjacent_stretch_pairs(numbers, primitives) -> list[tuple[int, int]]:
    """Pairs of stretches of bonds between heavy atoms that share an atom."""
    by_atom: dict[int, list[int]] = {}
    for k, p in enumerate(primitives):
        if p.kind == STRETCH and all(int(numbers[a]) != 1 for a in p.atoms[:2]):
            for a in p.atoms[:2]:
                by_atom.setdefault(a, []).append(k)
    return _pairs_within(by_atom.values())


def stretch_bend_pairs(numbers, primitives) -> list[tuple[int, int]]:
    """Pairs (stretch, bend) where the stretched bond is one arm of the bend."""
    stretch = {frozenset(p.atoms[:2]): k for k, p in enumerate(primitives) if p.kind == STRETCH}
    out = []
    for k, p in enumerate(primitives):
        if p.kind == BEND:
            i, j, l = p.atoms[:3]
            out += [(stretch[arm], k) for arm in (frozenset((i, j)), frozenset((j, l))) if arm in stretch]
    return out


def torsion_pairs(numbers, primitives) -> list[tuple[int, int]]:
    """Pairs of torsions about the same central bond."""
    by_bond: dict[frozenset, list[int]] = {}
    for k, p in enumerate(primitives):
        if p.kind == TORSION:
            by_bond.setdefault(frozenset(p.atoms[1:3]), []).append(k)
    return _pairs_within(by_bond.values())


#: Coupling classes with a factor of their own in the per-coordinate model: name -> pair finder.
#: Chosen by the cross-validated MAD over the training molecules (DEVELOPERS.md); GFN2-xTB
#: overestimates these couplings (fitted factors 0.66-0.96).
COUPLING_CLASSES = {
    GEMINAL_COUPLING: geminal_xh_pairs,
    LINEAR_BEND_COUPLING: linear_bend_pairs,
    ADJACENT_STRETCH_COUPLING: adjacent_stretch_pairs,
    STRETCH_BEND_COUPLING: stretch_bend_pairs,
    TORSION_COUPLING: torsion_pairs,
}


@functools.lru_cache(maxsize=512)
def _coupling_pairs_cached(numbers: tuple[int, ...], primitives: tuple[Primitive, ...]) -> dict:
    out = {}
    for name, finder in COUPLING_CLASSES.items():
        pairs = finder(numbers, primitives)
        out[name] = (np.array([a for a, _ in pairs], dtype=int), np.array([b for _, b in pairs], dtype=int))
    return out


def coupling_pairs(numbers, primitives) -> dict[str, tuple[np.ndarray, np.ndarray]]:
    """Per coupling class of :data:`COUPLING_CLASSES`, the (rows, cols) index arrays of its pairs
    of primitives (cached: the fit asks for the same molecule many times)."""
    return _coupling_pairs_cached(tuple(int(z) for z in numbers), tuple(primitives))


def _cumulated_atoms(bonds) -> set[int]:
    doubles: dict[int, int] = {}
    for i, j, o in bonds:
        if float(o) >= 2.0:
            for a in (int(i), int(j)):
                doubles[a] = doubles.get(a, 0) + 1
    return {a for a, c in doubles.items() if c >= 2}


def _carbon_kind(c: int, numbers, orders) -> str:
    """Kind of a C-H bond's carbon: "aldehyde" (C=O on the carbon), "halogenated, one halogen
    on C", "halogenated, 2+ halogens on C", "sp", "sp2", "sp3, next to N or O" or "sp3"."""
    nbrs = [(j if i == c else i, o) for (i, j), o in orders.items() if c in (i, j)]
    if any(int(numbers[n]) == 8 and o >= 2.0 for n, o in nbrs):
        return "aldehyde"
    halogens = sum(int(numbers[n]) in _HALOGENS for n, _ in nbrs)
    if halogens:
        return "halogenated, " + ("one halogen on C" if halogens == 1 else "2+ halogens on C")
    if any(o >= 3.0 for _, o in nbrs) or len(nbrs) == 2:
        return "sp"
    if any(o >= 1.5 for _, o in nbrs) or len(nbrs) == 3:
        return "sp2"
    if any(int(numbers[n]) in (7, 8) for n, _ in nbrs):
        return "sp3, next to N or O"
    return "sp3"


def _c_halogen_type(i: int, j: int, numbers, orders) -> str:
    """"C-Cl stretch (one halogen on C)", "C-F stretch (2+ halogens on C)", ...: by halogen, and
    by whether the carbon carries more halogens (the stretches of CX2, CX3 and CX4 groups couple,
    and GFN2-xTB misplaces them differently from those of a lone C-X bond)."""
    c, x = (i, j) if int(numbers[i]) == 6 else (j, i)
    halogens = sum(int(numbers[k if l == c else l]) in _HALOGENS for k, l in orders if c in (k, l))
    where = "one halogen on C" if halogens <= 1 else "2+ halogens on C"
    return f"C-{chemical_symbols[int(numbers[x])]} stretch ({where})"


def coordinate_types(numbers, bonds, primitives: tuple[Primitive, ...] | list[Primitive]) -> list[str]:
    """Scaling type of each primitive, e.g. "C-H stretch (sp3)", "C=O stretch", "C#N stretch",
    "C=O stretch (cumulated)", "C-Cl stretch (2+ halogens on C)", "heavy-atom-H stretch" (S-H,
    Cl-H, ...), "H-C-X bend", "bend", "bend (halogen end)", "linear bend", "torsion (H)", "out-of-plane"."""
    orders = {(min(int(i), int(j)), max(int(i), int(j))): float(o) for i, j, o in bonds}
    cumulated = _cumulated_atoms(bonds)
    out = []
    for p in primitives:
        a = p.atoms
        if p.kind == STRETCH:
            zi, zj = sorted((int(numbers[a[0]]), int(numbers[a[1]])))
            if zi == 1:
                # First-row hydrides by element; heavier ones (S, Cl, Br, P, ...) share one type:
                # GFN2-xTB places their stretches too low by a similar fraction. C-H stretches by
                # the kind of carbon, whose GFN2-xTB errors differ (aldehyde C-H ~100 cm^-1 low,
                # C-H next to an ether or amine O/N low, CH3X high, CHX2/CHX3 low).
                x = a[1] if int(numbers[a[0]]) == 1 else a[0]
                if zj == 6:
                    out.append(f"C-H stretch ({_carbon_kind(x, numbers, orders)})")
                else:
                    out.append(f"{chemical_symbols[zj]}-H stretch" if zj <= 10 else "heavy-atom-H stretch")
                continue
            order = orders.get((min(a), max(a)), 1.0)
            sym = _SYMBOL.get(order, "-")
            if zi in _HALOGENS or zj in _HALOGENS:
                out.append(_c_halogen_type(a[0], a[1], numbers, orders) if 6 in (zi, zj) else "X-halogen stretch")
                continue
            first, second = (zi, zj) if zi == 6 else ((zj, zi) if zj == 6 else (zj, zi))
            name = f"{chemical_symbols[first]}{sym}{chemical_symbols[second]} stretch"
            if order >= 2.0 and (a[0] in cumulated or a[1] in cumulated):
                name += " (cumulated)"
            out.append(name)
        elif p.kind == BEND:
            ends = (int(numbers[a[0]]), int(numbers[a[2]]))
            if ends == (1, 1):
                out.append(f"H-{chemical_symbols[int(numbers[a[1]])]}-H bend")
            elif 1 in ends:
                out.append(f"H-{chemical_symbols[int(numbers[a[1]])]}-X bend")
            elif ends[0] in _HALOGENS or ends[1] in _HALOGENS:
                # X-C-Cl, Cl-C-Cl, ...: GFN2-xTB misplaces the deformations of halogenated
                # carbons differently from skeletal bends (cross-validated, DEVELOPERS.md)
                out.append("bend (halogen end)")
            else:
                out.append("bend")
        elif p.kind == LINEAR_BEND:
            out.append("linear bend")
        elif p.kind == TORSION:
            out.append("torsion (H)" if 1 in (int(numbers[a[0]]), int(numbers[a[3]])) else "torsion")
        elif p.kind == OUT_OF_PLANE:
            out.append("out-of-plane")
        else:  # pragma: no cover - all kinds are listed above
            out.append(p.kind)
    return out


#: Families of coordinate types. A type's factor is pulled towards its family's in the fit
#: (partial pooling), and a type without data of its own (N=N of N2O, the H-F stretch) uses the
#: family's factor instead of the uniform one.
FAMILY_PREFIX = "family: "
FAMILY_C_H = "family: C-H stretch"
FAMILY_POLAR_H = "family: N-H, O-H, F-H stretch"
FAMILY_HALOGEN = "family: stretch of a bond to a halogen"
FAMILY_TRIPLE = "family: triple-bond stretch"
FAMILY_CUMULATED = "family: cumulated double-bond stretch"
FAMILY_DOUBLE = "family: double and aromatic bond stretch"
FAMILY_SINGLE = "family: single heavy-atom bond stretch"
FAMILY_BEND_H = "family: bend with H"
FAMILY_TORSION = "family: torsion"


def type_family(coordinate_type: str) -> str | None:
    """The family of a coordinate type of :func:`coordinate_types` (None for types of their own:
    heavy-atom bends, linear bends, out-of-plane, heavy-atom-H stretches, the coupling classes)."""
    t = coordinate_type
    if t in COUPLING_CLASSES:
        return None
    if t.startswith("C-H stretch"):
        return FAMILY_C_H
    if t in ("N-H stretch", "O-H stretch", "F-H stretch"):
        return FAMILY_POLAR_H
    if t == "X-halogen stretch" or t.split(" ")[0] in ("C-F", "C-Cl", "C-Br", "C-I"):
        return FAMILY_HALOGEN
    if not t.endswith("stretch") and not t.endswith("(cumulated)"):
        if t.startswith("H-") and t.endswith("bend"):
            return FAMILY_BEND_H
        return FAMILY_TORSION if t.startswith("torsion") else None
    if t.endswith("(cumulated)"):
        return FAMILY_CUMULATED
    if "-H " in t or t.startswith("heavy-atom"):
        return None
    if "#" in t:
        return FAMILY_TRIPLE
    if "=" in t or ":" in t:
        return FAMILY_DOUBLE
    return FAMILY_SINGLE


#: Method name -> the file in vibest/data with its fitted scale models (written by
#: ``benchmarks/fit_scale_factor.py --method KEY --write``).
SCALE_FILES = {"GFN2-xTB": "scale_factors.json", "GFN1-xTB": "scale_factors-gfn1.json",
               "B3LYP-D3(BJ)/6-31G(d)": "scale_factors-b3lyp.json"}
DEFAULT_METHOD_NAME = "GFN2-xTB"


@functools.lru_cache(maxsize=None)
def _shipped(method: str = DEFAULT_METHOD_NAME) -> dict:
    name = SCALE_FILES.get(method)
    path = resources.files("vibest.data").joinpath(name) if name else None
    if path is None or not path.is_file():
        raise InputError(f"no fitted scale factors are shipped for {method}; give a uniform one (--scale-factor)")
    return json.loads(path.read_text())


def _source(fit: dict, what: str, method: str) -> str:
    return f"{what} fitted on {fit.get('train_molecules', fit.get('molecules'))} molecules ({method}), " \
           "benchmarks/fit_scale_factor.py"


def uniform_scale_model(method: str = DEFAULT_METHOD_NAME) -> ScaleModel:
    fit = _shipped(method)["uniform"]
    return ScaleModel(float(fit["factor"]), UNIFORM,
                      f"fitted on {fit['fundamentals']} gas-phase fundamentals of {fit['molecules']} molecules "
                      f"({method}), benchmarks/fit_scale_factor.py")


def _shipped_fit(name: str, method: str) -> tuple[dict, float]:
    """(the shipped fit of model ``name``, the shipped uniform factor); InputError if not shipped."""
    data = _shipped(method)
    fit = data.get(name)
    if fit is None:
        raise InputError(f"no {name} scale factors are shipped for {method}")
    return fit, float(data["uniform"]["factor"])


def per_coordinate_scale_model(method: str = DEFAULT_METHOD_NAME) -> ScaleModel:
    fit, uniform = _shipped_fit(PER_COORDINATE, method)
    return ScaleModel(uniform, PER_COORDINATE, _source(fit, "scaled force field", method),
                      {k: float(v) for k, v in fit["force_constant_factors"].items()})


def region_scale_model(method: str = DEFAULT_METHOD_NAME) -> ScaleModel:
    fit, uniform = _shipped_fit(REGION, method)
    return ScaleModel(uniform, REGION, _source(fit, "region factors", method),
                      region_factors=tuple(float(v) for v in fit["region_factors"]))


SCALE_MODELS = (UNIFORM, REGION, PER_COORDINATE)


def named_scale_model(name: str, method: str = DEFAULT_METHOD_NAME) -> ScaleModel:
    """The shipped model ``name`` of ``method`` (the method that computed the Hessian)."""
    if name == UNIFORM:
        return uniform_scale_model(method)
    if name == REGION:
        return region_scale_model(method)
    if name == PER_COORDINATE:
        return per_coordinate_scale_model(method)
    raise InputError(f"unknown scale model {name!r}; choose one of {', '.join(SCALE_MODELS)}")


def default_scale_model(method: str = DEFAULT_METHOD_NAME) -> ScaleModel:
    """The shipped default model of ``method`` (named in its scale-factor file)."""
    return named_scale_model(_shipped(method).get("default", UNIFORM), method)


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

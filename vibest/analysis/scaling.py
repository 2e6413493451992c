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

from ..errors import InputError
from ..internal_coordinates import BEND, LINEAR_BEND, STRETCH, TORSION, Primitive
from .coordinate_types import CoordinateType, Family, coordinate_types
from .internal_space import InternalSpace

UNIFORM, REGION, PER_COORDINATE, USER = "uniform", "region", "per-coordinate", "user"
#: upper edges (cm^-1, harmonic) of the regions of the ``region`` model; the last region is open.
REGION_EDGES_CM1 = (1000.0, 1600.0, 2000.0, 2700.0)
#: Version of the layout of the scale-factor files (vibest/data/scale_factors*.json); a file of
#: another version is refused, never half read.
SCALE_FILE_FORMAT = 2


@dataclass(frozen=True)
class ForceConstantFactors:
    """Fitted force-constant factors of a per-coordinate model (dimensionless; wavenumbers scale
    roughly as their square roots).

    Attributes:
        types: per coordinate type (name and family), its own factor s_k.
        families: per family, the factor of its types that have none of their own.
        couplings: per coupling class of :data:`COUPLING_CLASSES`, the further factor on the
            off-diagonal force constants of its pairs.
    """

    types: dict[CoordinateType, float] = field(default_factory=dict)
    families: dict[Family, float] = field(default_factory=dict)
    couplings: dict[str, float] = field(default_factory=dict)

    def of(self, coordinate_type: CoordinateType, fallback: float) -> float:
        """The type's own factor, else its family's, else ``fallback``."""
        got = self.types.get(coordinate_type)
        if got is None:
            got = self.families.get(coordinate_type.family, fallback)
        return float(got)

    def to_json(self, digits: int | None = None) -> dict:
        """The layout of the per-coordinate section of a scale-factor file (format
        :data:`SCALE_FILE_FORMAT`): each type with its family, families and couplings by name."""
        r = (lambda v: round(v, digits)) if digits is not None else float
        return {"type_factors": [{"type": t.name, "family": t.family.value if t.family else None, "factor": r(v)}
                                 for t, v in sorted(self.types.items())],
                "family_factors": {f.value: r(v) for f, v in sorted(self.families.items(), key=lambda kv: kv[0].value)},
                "coupling_factors": {k: r(v) for k, v in sorted(self.couplings.items())}}

    @classmethod
    def from_json(cls, data: dict, where: str) -> "ForceConstantFactors":
        """Read :meth:`to_json`'s layout; an unknown family or coupling class is an InputError naming ``where``."""
        try:
            types = {CoordinateType(str(e["type"]), Family(e["family"]) if e["family"] is not None else None):
                     float(e["factor"]) for e in data["type_factors"]}
            families = {Family(k): float(v) for k, v in data["family_factors"].items()}
        except (KeyError, TypeError, ValueError) as exc:
            raise InputError(f"{where}: unreadable per-coordinate factors ({exc})") from None
        unknown = set(data.get("coupling_factors", {})) - set(COUPLING_CLASSES)
        if unknown:
            raise InputError(f"{where}: unknown coupling classes {sorted(unknown)}")
        return cls(types, families, {k: float(v) for k, v in data.get("coupling_factors", {}).items()})


@dataclass(frozen=True)
class ScaleModel:
    """How harmonic wavenumbers are scaled.

    Attributes:
        name: "uniform", "region", "per-coordinate" or "user".
        factor: uniform wavenumber factor (dimensionless); for per-coordinate models the fallback
            (its square scales force constants of coordinate types without a fitted factor).
        source: where the numbers come from.
        force_constants: the fitted force-constant factors (per-coordinate model only).
        region_factors: wavenumber factors of the regions split at :data:`REGION_EDGES_CM1`
            (region model only).
    """

    factor: float
    name: str = UNIFORM
    source: str = ""
    force_constants: ForceConstantFactors = field(default_factory=ForceConstantFactors)
    region_factors: tuple[float, ...] = ()

    @property
    def per_coordinate(self) -> bool:
        return self.name == PER_COORDINATE

    def describe(self) -> str:
        """Short text for reports, e.g. "uniform factor 0.9939" or "per-coordinate scaled force field (37 types, 9 families)"."""
        if self.per_coordinate:
            fc = self.force_constants
            extra = (f", {len(fc.families)} families" if fc.families else "") + \
                (f", {len(fc.couplings)} coupling factors" if fc.couplings else "")
            return f"per-coordinate scaled force field ({len(fc.types)} types{extra})"
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

    def type_factor(self, coordinate_type: CoordinateType) -> float:
        """Force-constant factor of one coordinate type: its own fitted factor, else its
        family's, else the square of the uniform factor."""
        return self.force_constants.of(coordinate_type, self.factor ** 2)

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
            factor = self.force_constants.couplings.get(name)
            if factor is not None and len(rows):
                matrix[rows, cols] *= factor
                matrix[cols, rows] *= factor
        return scale_hessian_matrix(hessian_hartree_bohr2, space, matrix)

    def to_dict(self) -> dict:
        out = {"name": self.name, "factor": self.factor, "source": self.source,
               "region_factors": list(self.region_factors),
               "region_edges_cm1": list(REGION_EDGES_CM1) if self.region_factors else []}
        if self.per_coordinate:
            out["force_constants"] = self.force_constants.to_json()
        return out


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


#: Method name -> the file in vibest/data with its fitted scale models (written by
#: ``benchmarks/fit_scale_factor.py --method KEY --write``).
SCALE_FILES = {"GFN2-xTB": "scale_factors.json", "GFN1-xTB": "scale_factors-gfn1.json",
               "B3LYP-D3(BJ)/6-31G(d)": "scale_factors-b3lyp.json"}
#: Name of the default level (vibest.calculation.methods.DEFAULT_METHOD; a test keeps them equal).
DEFAULT_METHOD_NAME = "GFN1-xTB"
#: Method of a stored record that names none: records were GFN2-xTB before levels were recorded.
UNRECORDED_METHOD_NAME = "GFN2-xTB"


@functools.lru_cache(maxsize=None)
def _shipped(method: str = DEFAULT_METHOD_NAME) -> dict:
    name = SCALE_FILES.get(method)
    path = resources.files("vibest.data").joinpath(name) if name else None
    if path is None or not path.is_file():
        raise InputError(f"no fitted scale factors are shipped for {method}; give a uniform one (--scale-factor)")
    return parse_scale_file(path.read_text(), f"vibest/data/{name}")


def parse_scale_file(text: str, name: str) -> dict:
    """A scale-factor file's content; InputError if it is not of layout :data:`SCALE_FILE_FORMAT`."""
    data = json.loads(text)
    if data.get("format_version") != SCALE_FILE_FORMAT:
        raise InputError(f"{name} has layout version {data.get('format_version')}, this vibest reads "
                         f"{SCALE_FILE_FORMAT}: rewrite it with benchmarks/fit_scale_factor.py --write")
    return data


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
                      ForceConstantFactors.from_json(fit, SCALE_FILES[method]))


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

"""Reference experimental fundamentals, their assignment to computed modes, and model fits (pure).

The reference table ``vibest/data/fundamentals.csv`` carries its provenance on every row
(source, whether written from memory, Shimanouchi's uncertainty grade). Computed modes are paired
with the tabulated fundamentals by symmetry class and mode character
(:mod:`vibest.analysis.assignment`), not by sorted order. Fits use only assigned pairs; the
split into training and held-out data is by molecule.
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from importlib import resources

import numpy as np
from scipy.optimize import linear_sum_assignment


@dataclass(frozen=True)
class ReferenceMolecule:
    """A molecule of the reference set. Per fundamental (expanded by degeneracy, table order):
    wavenumber (cm^-1), description, symmetry label and degeneracy."""

    name: str
    smiles: str
    fundamentals_cm1: np.ndarray
    descriptions: tuple[str, ...]
    symmetries: tuple[str, ...]
    degeneracies: tuple[int, ...]
    source: str
    from_memory: bool


def reference_molecules() -> list[ReferenceMolecule]:
    """Read the shipped reference table, grouped by molecule (file order)."""
    text = resources.files("vibest.data").joinpath("fundamentals.csv").read_text()
    rows = csv.DictReader(line for line in text.splitlines() if not line.startswith("#"))
    grouped: dict[str, list[dict]] = {}
    for row in rows:
        grouped.setdefault(row["molecule"], []).append(row)
    out = []
    for name, rs in grouped.items():
        values, descs, syms, degs = [], [], [], []
        for r in rs:
            d = int(r["degeneracy"])
            for _ in range(d):
                values.append(float(r["wavenumber_cm1"]))
                descs.append(r["description"])
                syms.append(r["symmetry"])
                degs.append(d)
        out.append(ReferenceMolecule(name, rs[0]["smiles"], np.array(values), tuple(descs), tuple(syms),
                                     tuple(degs), rs[0]["source"], rs[0]["from_memory"].strip().lower() == "yes"))
    return out


def error_statistics(predicted_cm1, experimental_cm1) -> dict[str, float]:
    """MAD, RMS and maximum absolute error (cm^-1) and the count."""
    d = np.asarray(predicted_cm1, dtype=float) - np.asarray(experimental_cm1, dtype=float)
    if not len(d):
        return {"mad_cm1": float("nan"), "rms_cm1": float("nan"), "max_cm1": float("nan"), "count": 0}
    return {"mad_cm1": float(np.abs(d).mean()), "rms_cm1": float(np.sqrt((d ** 2).mean())),
            "max_cm1": float(np.abs(d).max()), "count": int(len(d))}


@dataclass(frozen=True)
class CalibrationCase:
    """A reference molecule with its computed record, modes, assignment and the coordinate type
    that dominates each assigned mode (for error tables)."""

    reference: ReferenceMolecule
    record: object  # HessianRecord
    space: object  # InternalSpace
    types: tuple  # CoordinateType per primitive of space
    modes: object  # HarmonicModes (unscaled)
    assignment: object  # Assignment
    dominant_types: tuple[str, ...]  # name of the dominant CoordinateType, per assigned pair

    @property
    def experimental_cm1(self) -> np.ndarray:
        """Experimental wavenumbers of the assigned rows, in pair order."""
        return self.reference.fundamentals_cm1[list(self.assignment.rows)]


def prepare_case(reference: ReferenceMolecule, record, use_symmetry: bool = True) -> CalibrationCase:
    from .assignment import assign_modes
    from .composition import mode_composition
    from .harmonic import harmonic_analysis
    from .internal_space import InternalSpace
    from .scaling import coordinate_types

    space = InternalSpace.build(record.positions_angstrom, record.bonds)
    types = tuple(coordinate_types(record.numbers, record.bonds, space.primitives))
    modes = harmonic_analysis(record.numbers, record.positions_angstrom, record.hessian_hartree_bohr2)
    comp = mode_composition(record.numbers, record.positions_angstrom, record.bonds, record.hessian_hartree_bohr2,
                            modes.displacements, space=space)
    ref = reference
    assignment = assign_modes(record.numbers, record.positions_angstrom, modes, comp, ref.fundamentals_cm1,
                              ref.descriptions, ref.symmetries, ref.degeneracies, use_symmetry=use_symmetry)
    dominant = []
    for m in assignment.modes:
        if len(types):
            per_type: dict[str, float] = {}
            for t, share in zip(types, comp.shares[m]):
                per_type[t.name] = per_type.get(t.name, 0.0) + share
            dominant.append(max(per_type, key=per_type.get))
        else:
            dominant.append("stretch (diatomic)")
    return CalibrationCase(ref, record, space, types, modes, assignment, tuple(dominant))


def _modes_of(record, hessian):
    from .harmonic import harmonic_analysis

    return harmonic_analysis(record.numbers, record.positions_angstrom, hessian)


def predicted_wavenumbers(case: CalibrationCase, model) -> np.ndarray:
    """Scaled wavenumbers (cm^-1) of the case's assigned modes, in pair order, under ``model``.

    For a per-coordinate model the scaled Hessian is diagonalised again and each new mode is
    matched to the unscaled mode it overlaps most (Hungarian method on |<l', l>|)."""
    idx = list(case.assignment.modes)
    w0 = case.modes.wavenumbers_cm1
    if not model.per_coordinate:
        return model.apply(w0)[idx]
    rec = case.record
    h = model.scaled_hessian(rec.numbers, rec.bonds, rec.hessian_hartree_bohr2, case.space)
    scaled = _modes_of(rec, h)
    a = case.modes.modes_mass_weighted.reshape(len(w0), -1)
    b = scaled.modes_mass_weighted.reshape(len(scaled.wavenumbers_cm1), -1)
    r, c = linear_sum_assignment(-np.abs(a @ b.T))
    mapped = np.empty(len(w0))
    mapped[r] = scaled.wavenumbers_cm1[c]
    return mapped[idx]


#: Classes of the stratified split, in order of precedence: a molecule belongs to the first whose
#: SMARTS it matches (a fixed, documented rule; changed once, never to suit a figure).
SPLIT_CLASSES: tuple[tuple[str, str], ...] = (
    ("carbonyl", "[CX3]=[OX1]"),
    ("O-H or N-H", "[#8,#7;!H0]"),
    ("triple bond", "[$(*#*)]"),
    ("halogen", "[F,Cl,Br,I]"),
    ("aromatic", "a"),
    ("double bond", "*=*"),
    ("other", "*"),
)


def split_class(smiles: str) -> str:
    """The class of :data:`SPLIT_CLASSES` a molecule belongs to."""
    from rdkit import Chem

    mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    for name, smarts in SPLIT_CLASSES:
        if mol.HasSubstructMatch(Chem.MolFromSmarts(smarts)):
            return name
    return "other"


def held_out_names(every: int = 4) -> frozenset[str]:
    """The held-out molecules of the reference table: stratified by functional group, within each
    class of :data:`SPLIT_CLASSES` (molecules in file order) every ``every``-th from the 3rd, so
    that they carry C=O, O-H/N-H, triple bonds, halogens ... in the proportions of the whole set.
    Fixed by the table alone (a fit on part of the molecules keeps the same held-out ones)."""
    position: dict[str, int] = {}
    out = set()
    for ref in reference_molecules():
        cls = split_class(ref.smiles)
        k = position.get(cls, 0)
        position[cls] = k + 1
        if k % every == 2:
            out.add(ref.name)
    return frozenset(out)


def split_train_test(cases: list, every: int = 4) -> tuple[list, list]:
    """(training, held-out) cases by :func:`held_out_names`."""
    held = held_out_names(every)
    return [c for c in cases if c.reference.name not in held], [c for c in cases if c.reference.name in held]


def pooled(cases: list, model) -> tuple[np.ndarray, np.ndarray]:
    """(predicted, experimental) over all assigned pairs of ``cases``."""
    p = [predicted_wavenumbers(c, model) for c in cases]
    e = [c.experimental_cm1 for c in cases]
    return (np.concatenate(p) if p else np.zeros(0)), (np.concatenate(e) if e else np.zeros(0))


def fit_uniform(cases: list) -> float:
    """Least-squares factor s through the origin on the assigned pairs."""
    from .scaling import fit_uniform_factor

    calc = np.concatenate([c.modes.wavenumbers_cm1[list(c.assignment.modes)] for c in cases])
    exp = np.concatenate([c.experimental_cm1 for c in cases])
    return fit_uniform_factor(calc, exp)


def fit_regions(cases: list, fallback: float) -> tuple[float, ...]:
    """One factor per region (:data:`vibest.analysis.scaling.REGION_EDGES_CM1`); ``fallback`` for an empty region."""
    from .scaling import REGION_EDGES_CM1, fit_uniform_factor, region_index

    calc = np.concatenate([c.modes.wavenumbers_cm1[list(c.assignment.modes)] for c in cases])
    exp = np.concatenate([c.experimental_cm1 for c in cases])
    region = region_index(calc)
    out = []
    for k in range(len(REGION_EDGES_CM1) + 1):
        sel = region == k
        out.append(fit_uniform_factor(calc[sel], exp[sel]) if sel.sum() >= 3 else fallback)
    return tuple(out)


def soft_l1(residuals_cm1: np.ndarray, scale_cm1: float) -> np.ndarray:
    """Residuals whose squares are the soft-L1 loss 2 f^2 (sqrt(1 + (r/f)^2) - 1): like r for
    |r| << f, growing like sqrt(2 f |r|) beyond, so that a least-squares fit of them weighs large
    errors as an absolute-error fit does."""
    r = np.asarray(residuals_cm1, dtype=float)
    return np.sign(r) * np.sqrt(2.0 * scale_cm1 ** 2 * (np.sqrt(1.0 + (r / scale_cm1) ** 2) - 1.0))


def fit_per_coordinate(train: list[CalibrationCase], uniform_factor: float,
                       prior_cm1: float = 200.0, loss_scale_cm1: float | None = 20.0):
    """Force-constant factors per coordinate type and per type family, minimising the soft-L1
    loss (:func:`soft_l1`, scale ``loss_scale_cm1``; None: squared errors) of the assigned
    pairs with partial pooling (Tikhonov regularisation). The robust loss follows the figure of
    merit, the mean absolute error: a few bands GFN2-xTB gets badly wrong no longer set the
    factors of types they share with well-described bands (chosen, with its scale of 20 cm^-1,
    by the 4-fold cross-validated MAD over the training molecules; figures in DEVELOPERS.md).

    Each family's factor is pulled towards uniform_factor^2 (a residual prior_cm1 * ln(s_F / s_0))
    and each type's factor towards its family's (prior_cm1 * ln(s_k / s_F)); a type without a
    family is pulled towards uniform_factor^2. So a type seen in few modes cannot drift on noise,
    and a type never seen in training takes its family's factor (:meth:`ScaleModel.type_factor`).
    The factors of the coupling classes (:data:`vibest.analysis.scaling.COUPLING_CLASSES`) are
    pulled towards 1. Returns a :class:`vibest.analysis.scaling.ForceConstantFactors`.
    """
    from scipy.optimize import least_squares

    from .scaling import COUPLING_CLASSES, PER_COORDINATE, ForceConstantFactors, ScaleModel, coupling_pairs

    types = sorted({t for c in train for t in c.types})
    couplings = [name for name in COUPLING_CLASSES
                 if any(len(coupling_pairs(c.record.numbers, c.space.primitives)[name][0]) for c in train)]
    families = sorted({t.family for t in types} - {None}, key=lambda f: f.value)
    parent = np.array([-1] * len(families) + [families.index(t.family) if t.family else -1 for t in types]
                      + [-1] * len(couplings))
    base = np.array([np.log(uniform_factor ** 2)] * (len(families) + len(types)) + [0.0] * len(couplings))
    exp = [c.experimental_cm1 for c in train]

    def log_factors(params):
        """Absolute log factors: families first, then each type as its family's plus its own offset."""
        out = base + params
        has = parent >= 0
        out[has] = out[parent[has]] + params[has]
        return out

    def factors_of(params) -> ForceConstantFactors:
        f = np.exp(log_factors(params))
        n, m = len(families), len(families) + len(types)
        return ForceConstantFactors(dict(zip(types, map(float, f[n:m]))), dict(zip(families, map(float, f[:n]))),
                                    dict(zip(couplings, map(float, f[m:]))))

    def residuals(params):
        m = ScaleModel(uniform_factor, PER_COORDINATE, "fit", factors_of(params))
        r = np.concatenate([predicted_wavenumbers(c, m) - e for c, e in zip(train, exp)])
        if loss_scale_cm1:
            r = soft_l1(r, loss_scale_cm1)
        return np.concatenate([r, prior_cm1 * np.asarray(params)])

    sol = least_squares(residuals, np.zeros(len(parent)), method="trf", x_scale=0.05, max_nfev=200)
    return factors_of(sol.x)


def cross_validated_mad(cases: list[CalibrationCase], uniform_factor: float | None = None, folds: int = 4,
                        model_name: str = "per-coordinate") -> float:
    """MAD (cm^-1) of a scale model (``model_name``: "uniform", "region" or "per-coordinate")
    over ``cases`` when each molecule is predicted by a model fitted without its fold (molecule k
    is in fold k % folds; each fold also refits the uniform factor). For choosing coordinate
    types, fit settings and the default model on the training molecules alone, leaving the
    held-out split unseen."""
    from .scaling import PER_COORDINATE, REGION, UNIFORM, ScaleModel

    errors = []
    for k in range(folds):
        fit = [c for i, c in enumerate(cases) if i % folds != k]
        left = [c for i, c in enumerate(cases) if i % folds == k]
        factor = fit_uniform(fit) if uniform_factor is None else uniform_factor
        if model_name == UNIFORM:
            model = ScaleModel(factor, UNIFORM, "cross-validation")
        elif model_name == REGION:
            model = ScaleModel(factor, REGION, "cross-validation", region_factors=fit_regions(fit, factor))
        elif model_name == PER_COORDINATE:
            model = ScaleModel(factor, PER_COORDINATE, "cross-validation", fit_per_coordinate(fit, factor))
        else:
            raise ValueError(f"unknown scale model {model_name!r}")
        predicted, experimental = pooled(left, model)
        errors.append(np.abs(predicted - experimental))
    return float(np.concatenate(errors).mean())

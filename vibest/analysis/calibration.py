"""Reference experimental fundamentals and the matching used to fit scale factors (pure).

The reference table ``vibest/data/fundamentals.csv`` carries its provenance on every row.
Matching here is by sorted order within one molecule: both the computed harmonic wavenumbers
and the experimental fundamentals (each repeated by its degeneracy) are sorted and paired.
This needs the complete set of fundamentals of each molecule (checked: count = 3N-6 or 3N-5).
"""

from __future__ import annotations

import csv
from dataclasses import dataclass
from importlib import resources

import numpy as np


@dataclass(frozen=True)
class ReferenceMolecule:
    """A molecule of the reference set with its experimental fundamentals (cm^-1, expanded by degeneracy)."""

    name: str
    smiles: str
    fundamentals_cm1: np.ndarray
    descriptions: tuple[str, ...]
    source: str


def reference_molecules() -> list[ReferenceMolecule]:
    """Read the shipped reference table, grouped by molecule (file order)."""
    text = resources.files("vibest.data").joinpath("fundamentals.csv").read_text()
    rows = csv.DictReader(line for line in text.splitlines() if not line.startswith("#"))
    grouped: dict[str, list[dict]] = {}
    for row in rows:
        grouped.setdefault(row["molecule"], []).append(row)
    out = []
    for name, rs in grouped.items():
        values, descs = [], []
        for r in rs:
            for _ in range(int(r["degeneracy"])):
                values.append(float(r["wavenumber_cm1"]))
                descs.append(r["description"])
        out.append(ReferenceMolecule(name, rs[0]["smiles"], np.array(values), tuple(descs), rs[0]["source"]))
    return out


def match_sorted(computed_cm1, experimental_cm1) -> tuple[np.ndarray, np.ndarray]:
    """Pair computed and experimental wavenumbers by sorted order; lengths must agree."""
    c = np.sort(np.asarray(computed_cm1, dtype=float))
    e = np.sort(np.asarray(experimental_cm1, dtype=float))
    if len(c) != len(e):
        raise ValueError(f"{len(c)} computed modes but {len(e)} reference fundamentals")
    return c, e


def error_statistics(predicted_cm1, experimental_cm1) -> dict[str, float]:
    """MAD, RMS and maximum absolute error (cm^-1)."""
    d = np.asarray(predicted_cm1, dtype=float) - np.asarray(experimental_cm1, dtype=float)
    return {"mad_cm1": float(np.abs(d).mean()), "rms_cm1": float(np.sqrt((d ** 2).mean())),
            "max_cm1": float(np.abs(d).max()), "count": int(len(d))}


@dataclass(frozen=True)
class CalibrationCase:
    """A reference molecule with its computed record, ready for repeated re-scaling."""

    reference: ReferenceMolecule
    record: object  # HessianRecord
    space: object  # InternalSpace
    types: tuple[str, ...]


def prepare_case(reference: ReferenceMolecule, record) -> CalibrationCase:
    from .internal_space import InternalSpace
    from .scaling import coordinate_types

    space = InternalSpace.build(record.positions_angstrom, record.bonds)
    return CalibrationCase(reference, record, space, tuple(coordinate_types(record.numbers, record.bonds,
                                                                            space.primitives)))


def scaled_wavenumbers(case: CalibrationCase, model) -> np.ndarray:
    """Sorted wavenumbers (cm^-1) of the case under a scale model."""
    from .harmonic import harmonic_analysis

    rec = case.record
    if model.per_coordinate:
        h = model.scaled_hessian(rec.numbers, rec.bonds, rec.hessian_hartree_bohr2, case.space)
        return np.sort(harmonic_analysis(rec.numbers, rec.positions_angstrom, h).wavenumbers_cm1)
    w = harmonic_analysis(rec.numbers, rec.positions_angstrom, rec.hessian_hartree_bohr2).wavenumbers_cm1
    return np.sort(model.apply(w))


def split_train_test(cases: list, every: int = 4) -> tuple[list, list]:
    """Deterministic split by molecule: every ``every``-th molecule (file order, from the 3rd) is held out."""
    test = [c for k, c in enumerate(cases) if k % every == 2]
    train = [c for k, c in enumerate(cases) if k % every != 2]
    return train, test


def fit_per_coordinate(train: list[CalibrationCase], uniform_factor: float,
                       prior_cm1: float = 200.0) -> dict[str, float]:
    """Force-constant factors per coordinate type minimising the squared error of sorted wavenumbers.

    A weak prior pulls each factor towards uniform_factor^2: a residual prior_cm1 * ln(s_k / s_0)
    per type, so a type seen in few modes cannot drift on noise (Tikhonov regularisation).
    """
    from scipy.optimize import least_squares

    from .scaling import PER_COORDINATE, ScaleModel

    types = sorted({t for c in train for t in c.types})
    s0 = uniform_factor ** 2
    exp = [np.sort(c.reference.fundamentals_cm1) for c in train]

    def model_of(logs):
        return ScaleModel(uniform_factor, PER_COORDINATE, "fit",
                          {t: float(s0 * np.exp(v)) for t, v in zip(types, logs)})

    def residuals(logs):
        m = model_of(logs)
        r = [scaled_wavenumbers(c, m) - e for c, e in zip(train, exp)]
        return np.concatenate(r + [prior_cm1 * np.asarray(logs)])

    sol = least_squares(residuals, np.zeros(len(types)), method="trf", x_scale=0.05, max_nfev=200)
    return dict(model_of(sol.x).force_constant_factors)

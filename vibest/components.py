"""A measured spectrum as a non-negative combination of component spectra (mixtures, conversion).

Components are predicted spectra (from SMILES) or measured reference files, mixed freely. On the
range the measured spectrum covers (within 500-3800 cm^-1 by default, 2 cm^-1 steps) the
measured absorbance y is fitted as y ~ sum_k w_k c_k(nu - s_k) with w_k >= 0 (non-negative least
squares, scipy.optimize.nnls) and one small shift s_k per component (within +-20 cm^-1 for a
predicted component, +-4 cm^-1 for a measured one; coordinate search on a 1 cm^-1 grid, in turn,
twice). Each component curve c_k is a predicted spectrum normalised to a maximum of 1, or a
reference's measured absorbance as recorded.

Reported per component:

* **absorbance fraction**: its share of the fitted absorbance area, w_k int c_k / sum_j w_j int c_j;
* **mole fraction** (estimate), when every component allows one: for a predicted component the
  amount is proportional to its fitted area over its predicted integrated intensity in the range
  (sum of the band intensities, km/mol: the integrated absorption coefficient per mole); for a
  reference with a known concentration (``concentration``, any unit common to all references) it
  is w_k times that concentration. Mixing the two kinds needs both on one scale, so then no mole
  fraction is given;
* an uncertainty of each fraction: the standard deviation over a moving-block bootstrap of the
  residuals (blocks of 40 cm^-1, since neighbouring residuals are correlated; 200 resamples,
  fixed seed, shifts held at their fitted values).
"""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np
from scipy.integrate import trapezoid
from scipy.optimize import nnls

from .comparison import DEFAULT_COMPARE_RANGE_CM1, DEFAULT_MAX_SHIFT_CM1, MIN_COMPARE_WIDTH_CM1, predicted_curve
from .errors import InputError
from .measured import MeasuredSpectrum, as_measured, preprocess
from .pipeline import CAUTION, PLOT_CAUTION, Prediction
from .spectrum import grid

STEP_CM1 = 2.0
#: Largest shift (cm^-1) of a measured reference component (same instrument, same phase: small).
MAX_REFERENCE_SHIFT_CM1 = 4.0
BOOTSTRAP_RESAMPLES = 200
BOOTSTRAP_BLOCK_CM1 = 40.0


@dataclass(frozen=True)
class Component:
    """One component: a ``prediction`` or a measured ``reference`` spectrum (exactly one), with a
    display ``name`` and, for a reference, the ``concentration`` it was recorded at (optional)."""

    name: str
    prediction: Prediction | None = None
    reference: MeasuredSpectrum | None = None
    concentration: float | None = None

    @property
    def key(self) -> str:
        """What makes two components the same: the canonical SMILES or the reference file."""
        return f"smiles:{self.prediction.smiles}" if self.prediction is not None else f"file:{self.reference.source}"


@dataclass(frozen=True)
class ComponentShare:
    """A fitted component: weight (absorbance units per unit of its curve), shift (cm^-1),
    absorbance fraction and mole fraction (None when not estimable), each fraction +- one
    bootstrap standard deviation."""

    name: str
    weight: float
    shift_cm1: float
    absorbance_fraction: float
    absorbance_fraction_sd: float
    mole_fraction: float | None
    mole_fraction_sd: float | None

    def to_dict(self) -> dict:
        return dict(self.__dict__)


@dataclass(frozen=True)
class MixtureFit:
    """The fit of one measured spectrum by its components.

    Attributes:
        grid_cm1, measured: the measured absorbance on the fitted range.
        stacked: per component, its fitted absorbance on the grid (weight x shifted curve).
        residual: measured - sum of ``stacked``; ``relative_residual`` = |residual| / |measured|.
    """

    source: str
    shares: tuple[ComponentShare, ...]
    grid_cm1: np.ndarray
    measured: np.ndarray
    stacked: tuple[np.ndarray, ...]
    residual: np.ndarray
    mole_basis: str
    notes: tuple[str, ...] = ()

    @property
    def relative_residual(self) -> float:
        return float(np.linalg.norm(self.residual) / max(np.linalg.norm(self.measured), 1e-300))

    def summary(self) -> str:
        lines = [f"{'component':<28} {'shift':>7} {'absorbance fraction':>21} {'mole fraction (est.)':>22}"]
        for s in self.shares:
            mole = "-" if s.mole_fraction is None else f"{s.mole_fraction:.3f} +- {s.mole_fraction_sd:.3f}"
            lines.append(f"{s.name[:28]:<28} {s.shift_cm1:+7.1f} {s.absorbance_fraction:>12.3f} +- "
                         f"{s.absorbance_fraction_sd:.3f} {mole:>22}")
        lines.append(f"relative residual {self.relative_residual:.3f}; mole fractions: {self.mole_basis}")
        lines += [f"# note: {n}" for n in self.notes]
        return "\n".join(lines)

    def to_dict(self) -> dict:
        return {"caution": CAUTION, "measured": self.source, "components": [s.to_dict() for s in self.shares],
                "relative_residual": self.relative_residual, "mole_basis": self.mole_basis, "notes": list(self.notes)}

    def write_csv(self, path: str | Path) -> None:
        """One row per component (header first); curves are in the plot, the rest in ``<path>.meta.json``."""
        from .files import write_table

        rows = [[s.name, f"{s.weight:.6g}", f"{s.shift_cm1:.1f}", f"{s.absorbance_fraction:.4f}",
                 f"{s.absorbance_fraction_sd:.4f}", "" if s.mole_fraction is None else f"{s.mole_fraction:.4f}",
                 "" if s.mole_fraction_sd is None else f"{s.mole_fraction_sd:.4f}"] for s in self.shares]
        write_table(path, ["component", "weight", "shift_cm1", "absorbance_fraction", "absorbance_fraction_sd",
                           "mole_fraction", "mole_fraction_sd"], rows, {"what": "vibest component fit", **self.to_dict()})


def _check(components: list[Component]) -> None:
    if not components:
        raise InputError("no components given")
    seen: dict[str, str] = {}
    for c in components:
        if (c.prediction is None) == (c.reference is None):
            raise InputError(f"component {c.name!r}: give a prediction or a measured reference, not both or neither")
        if c.key in seen:
            raise InputError(f"component {c.name!r} is the same as {seen[c.key]!r}: list each component once")
        seen[c.key] = c.name
        if c.concentration is not None and not (np.isfinite(c.concentration) and c.concentration > 0):
            raise InputError(f"component {c.name!r}: concentration {c.concentration} must be a positive number")


class _Curves:
    """Component curves on the grid as functions of their shift (cm^-1)."""

    def __init__(self, components: list[Component], g: np.ndarray, gas_phase: bool):
        self.components, self.g, self.gas = components, g, gas_phase
        self.bases = []
        for c in components:
            pad = DEFAULT_MAX_SHIFT_CM1 + 2 * STEP_CM1
            padded = grid(g[0] - pad, g[-1] + pad, STEP_CM1)
            if c.prediction is not None:
                y = predicted_curve(c.prediction, padded, gas_phase=gas_phase)
            else:
                y = preprocess(c.reference, padded, normalise=False)
            self.bases.append((padded, y))

    def max_shift(self, k: int) -> float:
        return DEFAULT_MAX_SHIFT_CM1 if self.components[k].prediction is not None else MAX_REFERENCE_SHIFT_CM1

    def curve(self, k: int, shift: float) -> np.ndarray:
        x, y = self.bases[k]
        return np.interp(self.g - shift, x, y)


def _fit_shifts(curves: _Curves, y: np.ndarray) -> list[float]:
    n = len(curves.components)
    shifts = [0.0] * n
    for _ in range(2):
        for k in range(n):
            best = None
            for s in np.arange(-curves.max_shift(k), curves.max_shift(k) + 0.5, 1.0):
                trial = shifts[:k] + [float(s)] + shifts[k + 1:]
                a = np.column_stack([curves.curve(j, trial[j]) for j in range(n)])
                r = nnls(a, y)[1]
                if best is None or r < best[0] - 1e-12:
                    best = (r, float(s))
            shifts[k] = best[1]
    return shifts


def _fractions(weights: np.ndarray, areas: np.ndarray, per_mole: np.ndarray | None) -> tuple[np.ndarray, np.ndarray | None]:
    absorb = weights * areas
    total = absorb.sum()
    af = absorb / total if total > 0 else np.zeros_like(absorb)
    if per_mole is None:
        return af, None
    amounts = weights * per_mole
    return af, (amounts / amounts.sum() if amounts.sum() > 0 else np.zeros_like(amounts))


def _mole_basis(components: list[Component], g: np.ndarray, areas: np.ndarray) -> tuple[np.ndarray | None, str]:
    """Per component, the amount per unit weight (up to a common factor), or None, and why."""
    predicted = [c.prediction is not None for c in components]
    if all(predicted):
        lo, hi = g[0], g[-1]
        per = []
        for c, area in zip(components, areas):
            nu = c.prediction.wavenumbers_cm1
            inside = (nu >= lo) & (nu <= hi)
            intensity = float(c.prediction.intensities_km_mol[inside].sum())
            if intensity <= 0:
                return None, f"{c.name} has no predicted intensity in {lo:.0f}-{hi:.0f} cm^-1"
            per.append(area / intensity)
        return np.array(per), "predicted integrated intensities (km/mol) in the fitted range"
    if not any(predicted) and all(c.concentration is not None for c in components):
        return np.array([c.concentration for c in components]), "reference concentrations as given"
    return None, ("not estimated: give every reference its concentration" if not any(predicted) else
                  "not estimated: predicted and measured components have no common intensity scale")


def fit_components(measured: MeasuredSpectrum | str, components: list[Component], *,
                   range_cm1: tuple[float, float] = DEFAULT_COMPARE_RANGE_CM1, baseline: bool = False,
                   gas_phase: bool | None = None) -> MixtureFit:
    """Fit ``measured`` (a spectrum or the path of its file) as a non-negative combination of
    ``components`` (see the module docstring)."""
    measured = as_measured(measured)
    _check(components)
    lo, hi = max(range_cm1[0], measured.range_cm1[0]), min(range_cm1[1], measured.range_cm1[1])
    for c in components:
        if c.reference is not None:
            lo, hi = max(lo, c.reference.range_cm1[0]), min(hi, c.reference.range_cm1[1])
    if hi - lo < MIN_COMPARE_WIDTH_CM1:
        raise InputError(f"{measured.source}: the measured spectrum, the references and {range_cm1[0]:.0f}-"
                         f"{range_cm1[1]:.0f} cm^-1 share less than {MIN_COMPARE_WIDTH_CM1:.0f} cm^-1")
    g = grid(lo, hi, STEP_CM1)
    y = preprocess(measured, g, baseline=baseline, normalise=False)
    if y.max() <= 0:
        raise InputError(f"{measured.source}: no absorbance in {lo:.0f}-{hi:.0f} cm^-1")
    curves = _Curves(components, g, measured.phase == "gas" if gas_phase is None else gas_phase)
    for k, c in enumerate(components):
        if curves.curve(k, 0.0).max() <= 0:
            raise InputError(f"component {c.name!r} has no absorbance in {lo:.0f}-{hi:.0f} cm^-1")
    shifts = _fit_shifts(curves, y)
    a = np.column_stack([curves.curve(k, shifts[k]) for k in range(len(components))])
    w, _ = nnls(a, y)
    areas = trapezoid(a, g, axis=0)
    per_mole, basis = _mole_basis(components, g, areas)
    af, mf = _fractions(w, areas, per_mole)
    af_sd, mf_sd = _bootstrap(a, y, w, g, areas, per_mole)
    notes = []
    if measured.phase != "gas" and any(c.prediction is not None for c in components):
        notes.append("predicted components are gas-phase harmonic estimates; a condensed sample shifts and "
                     "broadens bands, so fractions are rough")
    shares = tuple(ComponentShare(c.name, float(w[k]), float(shifts[k]), float(af[k]), float(af_sd[k]),
                                  None if mf is None else float(mf[k]), None if mf_sd is None else float(mf_sd[k]))
                   for k, c in enumerate(components))
    stacked = tuple(a[:, k] * w[k] for k in range(len(components)))
    return MixtureFit(measured.source, shares, g, y, stacked, y - a @ w, basis, tuple(notes))


def _bootstrap(a, y, w, g, areas, per_mole) -> tuple[np.ndarray, np.ndarray | None]:
    fitted = a @ w
    resid = y - fitted
    n = len(y)
    block = max(1, int(BOOTSTRAP_BLOCK_CM1 / STEP_CM1))
    rng = np.random.default_rng(20261204)
    afs, mfs = [], []
    for _ in range(BOOTSTRAP_RESAMPLES):
        starts = rng.integers(0, max(n - block, 1), size=int(np.ceil(n / block)))
        r = np.concatenate([resid[s:s + block] for s in starts])[:n]
        wb, _ = nnls(a, fitted + r)
        af, mf = _fractions(wb, areas, per_mole)
        afs.append(af)
        if mf is not None:
            mfs.append(mf)
    return np.std(afs, axis=0), (np.std(mfs, axis=0) if mfs else None)


def plot_components(fit: MixtureFit, path: str | Path, title: str = "") -> None:
    """Measured spectrum, the fitted components stacked, and the residual below."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    from .files import write_with

    fig, (ax, axr) = plt.subplots(2, 1, figsize=(10, 5.8), dpi=120, sharex=True, gridspec_kw={"height_ratios": [3.2, 1]})
    g = fit.grid_cm1
    base = np.zeros_like(g)
    for s, part in zip(fit.shares, fit.stacked):
        ax.fill_between(g, base, base + part, alpha=0.45, lw=0,
                        label=f"{s.name[:30]} ({s.absorbance_fraction:.0%} of absorbance, {s.shift_cm1:+.0f} cm$^{{-1}}$)")
        base = base + part
    ax.plot(g, fit.measured, color="black", lw=1.0, label=f"measured {Path(fit.source).name}")
    ax.set_ylabel("absorbance")
    ax.legend(loc="upper left", fontsize=7.5, frameon=False)
    ax.set_title(title or f"component fit (relative residual {fit.relative_residual:.2f})", fontsize=9.5)
    axr.plot(g, fit.residual, color="#404040", lw=0.8)
    axr.axhline(0, color="#999999", lw=0.6)
    axr.set_ylabel("residual")
    axr.set_xlabel("wavenumber / cm$^{-1}$")
    axr.set_xlim(max(4000, g[-1]), min(400, g[0]))
    fig.text(0.01, 0.005, PLOT_CAUTION, fontsize=6.5,
             color="#7f7f7f")
    fig.tight_layout(rect=(0, 0.02, 1, 1))
    write_with(path, fig.savefig)
    plt.close(fig)

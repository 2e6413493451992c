"""Output stage: tables, CSV, JSON and plots of a prediction (no science here)."""

from __future__ import annotations

import json
from pathlib import Path

import numpy as np

from .files import atomic_write_text, write_table, write_with
from .pipeline import CAUTION, PLOT_CAUTION, Prediction

#: Below this wavenumber chemists speak of the fingerprint region (common practice, no source).
FINGERPRINT_BELOW_CM1 = 1500.0
PLOT_FORMATS = (".png", ".svg", ".pdf")


def region_of(wavenumber_cm1: float) -> str:
    """'fingerprint' below 1500 cm^-1, else 'group-frequency' (where stretches of X-H bonds and
    multiple bonds, the groups' diagnostic bands, lie; bends such as NH2 scissoring too)."""
    return "fingerprint" if wavenumber_cm1 < FINGERPRINT_BELOW_CM1 else "group-frequency"


def bands_table(pred: Prediction, min_intensity_km_mol: float = 0.0, verbose: bool = False) -> str:
    """A plain-text table of the bands, highest wavenumber first (as spectra are read)."""
    lines = [f"# {pred.smiles}   charge {pred.record.charge}   unpaired electrons {pred.record.uhf}   "
             f"{pred.method_name}, {pred.medium}",
             f"# scaling: {pred.scale.describe()}; "
             f"optimisation {'converged' if pred.converged else 'NOT converged'}"]
    for note in pred.notes:
        lines.append(f"# note: {note}")
    header = f"{'mode':>4}  {'cm-1':>7}  {'harm.':>7}  {'km/mol':>8}  {'region':<15}  {'band':<44}  composition"
    lines += [header, "-" * len(header)]
    for b in sorted(pred.bands, key=lambda b: -b.wavenumber_cm1):
        if b.intensity_km_mol < min_intensity_km_mol:
            continue
        wn = f"{b.wavenumber_cm1:7.1f}" if b.wavenumber_cm1 >= 0 else f"{abs(b.wavenumber_cm1):6.1f}i"
        lines.append(f"{b.index:>4}  {wn}  {b.harmonic_cm1:7.1f}  {b.intensity_km_mol:8.2f}  "
                     f"{region_of(b.wavenumber_cm1):<15}  {b.label:<44}  {b.character}")
    lines.append("# region: 'group-frequency' >= 1500 cm-1, 'fingerprint' below (common practice)")
    if verbose:
        t = pred.record.timings
        coords = f" in {t['optimization_coordinates']} coordinates" if t.get("optimization_coordinates") else ""
        lines.append(f"# optimisation{coords}: {t.get('optimization_gradients')} gradients, "
                     f"{t.get('optimization_seconds', 0):.2f} s; Hessian: {t.get('hessian_gradients')} gradients, "
                     f"{t.get('hessian_seconds', 0):.2f} s on {t.get('hessian_workers')} worker(s); "
                     f"total {t.get('total_seconds', 0):.2f} s")
    lines.append(f"# caution: {CAUTION}")
    return "\n".join(lines)


def prediction_metadata(pred: Prediction, what: str) -> dict:
    """What the sidecar JSON of a prediction's CSV says (vibest.files.write_table)."""
    s = pred.spectrum
    return {"what": what, "smiles": pred.smiles, "method": pred.method_name, "scaling": pred.scale.describe(),
            "line_shape": s.line_shape, "fwhm_cm1": s.fwhm_cm1, "notes": list(pred.notes), "caution": CAUTION}


def write_spectrum_csv(pred: Prediction, path: str | Path) -> None:
    """Columns: wavenumber_cm1, absorption_km_mol_cm1, absorbance_normalised, transmittance_percent;
    what it is in ``<path>.meta.json``."""
    s = pred.spectrum
    rows = ([f"{r[0]:.2f}", f"{r[1]:.6g}", f"{r[2]:.6f}", f"{r[3]:.4f}"] for r in
            zip(s.wavenumbers_cm1, s.absorption_km_mol_cm1, s.absorbance_normalised, s.transmittance_percent))
    write_table(path, ["wavenumber_cm1", "absorption_km_mol_cm1", "absorbance_normalised", "transmittance_percent"],
                rows, prediction_metadata(pred, "vibest predicted IR spectrum"))


def write_bands_csv(pred: Prediction, path: str | Path) -> None:
    """One row per mode; what it is in ``<path>.meta.json``."""
    rows = ([b.index, f"{b.wavenumber_cm1:.2f}", f"{b.harmonic_cm1:.2f}", f"{b.intensity_km_mol:.4f}",
             f"{b.reduced_mass_amu:.4f}", f"{b.force_constant_mdyn_angstrom:.4f}", region_of(b.wavenumber_cm1),
             b.label, b.character] for b in pred.bands)
    write_table(path, ["mode", "wavenumber_cm1", "harmonic_cm1", "intensity_km_mol", "reduced_mass_amu",
                       "force_constant_mdyn_angstrom", "region", "label", "character"], rows,
                prediction_metadata(pred, "vibest predicted IR bands"))


def write_json(pred: Prediction, path: str | Path, extra: dict | None = None) -> None:
    atomic_write_text(path, json.dumps(pred.to_dict() | (extra or {}), indent=1))


def place_labels(positions, heights, widths, x_span: float, levels: int = 6, step: float = 0.075,
                 gap: float = 0.04) -> list[float | None]:
    """Greedy, overlap-free heights for labels over peaks: each label (in the order given, the
    most important first) goes to the lowest level above its peak where no label already placed
    overlaps it horizontally (``widths`` in data units of x) and vertically; None where no level is
    free (the label is left out rather than drawn over another)."""
    placed: list[tuple[float, float, float]] = []  # (left, right, y)
    out: list[float | None] = []
    for x, h, w in zip(positions, heights, widths):
        left, right = x - w / 2 - 0.004 * x_span, x + w / 2 + 0.004 * x_span
        y = None
        for k in range(levels):
            trial = h + gap + k * step
            if all(right < pl or left > pr or abs(trial - py) >= step for pl, pr, py in placed):
                y = trial
                break
        out.append(y)
        if y is not None:
            placed.append((left, right, y))
    return out


def plot_prediction(pred: Prediction, path: str | Path, transmittance: bool = False,
                    label_count: int = 10) -> None:
    """Spectrum plot, wavenumber axis 4000 -> 400 cm^-1, the strongest bands labelled without
    overlaps (greedy placement); format from the suffix. In %T the strongest band is drawn at
    10 % transmittance (absorbance 1), which the axis says."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    s = pred.spectrum
    fig, ax = plt.subplots(figsize=(10, 4.4), dpi=120)
    y = s.transmittance_percent if transmittance else s.absorbance_normalised
    ax.plot(s.wavenumbers_cm1, y, color="#1f4e79", lw=1.2, label=f"spectrum ({s.line_shape}, FWHM {s.fwhm_cm1:g} cm$^{{-1}}$)")
    peak = max(pred.intensities_km_mol.max(), 1e-12)
    lo, hi = s.wavenumbers_cm1[0], s.wavenumbers_cm1[-1]
    inside = [b for b in pred.bands if lo <= b.wavenumber_cm1 <= hi]
    if not transmittance and inside:
        ax.vlines([b.wavenumber_cm1 for b in inside], 0, [b.intensity_km_mol / peak * 0.25 for b in inside],
                  color="#c55a11", lw=0.8, alpha=0.7, label="bands (stick height: intensity, 1/4 scale)")
    chosen = []
    for b in pred.strongest(len(pred.bands)):
        if len(chosen) >= label_count or b.intensity_km_mol < 0.02 * peak:
            break
        if lo <= b.wavenumber_cm1 <= hi and all(abs(b.wavenumber_cm1 - c.wavenumber_cm1) > 0.012 * (hi - lo)
                                                for c in chosen):
            chosen.append(b)
    texts = [f"{b.wavenumber_cm1:.0f}\n{b.label or b.character.split(',')[0].rsplit(' ', 1)[0]}" for b in chosen]
    widths = [max(len(line) for line in t.split("\n")) * 0.0055 * (hi - lo) for t in texts]
    if transmittance:
        heights = [np.interp(b.wavenumber_cm1, s.wavenumbers_cm1, y) for b in chosen]
        for b, t, h in zip(chosen, texts, heights):
            ax.annotate(t, (b.wavenumber_cm1, h), xytext=(0, -24), textcoords="offset points", ha="center",
                        fontsize=6.5, color="#333333")
    else:
        # a label starts above the highest point of the curve under its whole width
        heights = [float(y[(s.wavenumbers_cm1 >= b.wavenumber_cm1 - w / 2) & (s.wavenumbers_cm1 <= b.wavenumber_cm1 + w / 2)]
                         .max(initial=0.0)) for b, w in zip(chosen, widths)]
        for b, t, ty in zip(chosen, texts, place_labels([b.wavenumber_cm1 for b in chosen], heights, widths, hi - lo,
                                                        step=0.1)):
            if ty is not None:
                ax.annotate(t, (b.wavenumber_cm1, ty), ha="center", va="bottom", fontsize=6.5, color="#333333")
                ax.plot([b.wavenumber_cm1, b.wavenumber_cm1], [float(np.interp(b.wavenumber_cm1, s.wavenumbers_cm1, y))
                                                               + 0.01, ty], color="#bbbbbb", lw=0.5)
    ax.set_xlim(hi, lo)
    ax.set_xlabel("wavenumber / cm$^{-1}$")
    if transmittance:
        ax.set_ylabel("transmittance / %\n(strongest band drawn at 10 %)", fontsize=9)
        ax.set_ylim(0, 105)
    else:
        ax.set_ylabel("absorbance (normalised)")
        ax.set_ylim(0, 1.55)
        ax.legend(loc="upper left", fontsize=7.5, frameon=False)
    ax.set_title(f"predicted IR spectrum: {short(pred.smiles, 40)}  ({pred.method_name}, {pred.medium})", fontsize=10)
    fig.text(0.01, 0.01, f"scaling: {pred.scale.describe()}.  {PLOT_CAUTION}", fontsize=6.5, color="#7f7f7f")
    fig.tight_layout(rect=(0, 0.03, 1, 1))
    write_with(path, fig.savefig)
    plt.close(fig)


def short(text: str, n: int) -> str:
    return text if len(text) <= n else text[: n - 3] + "..."


def write_spectrum_jcamp(pred: Prediction, path: str | Path) -> None:
    """The predicted spectrum (normalised absorbance) as JCAMP-DX, readable by other software."""
    from .measured.jcamp import write_jcamp

    s = pred.spectrum
    write_with(path, lambda tmp: write_jcamp(tmp, s.wavenumbers_cm1, s.absorbance_normalised,
                                             title=f"vibest prediction {pred.smiles}", yunits="ABSORBANCE",
                                             extra_labels=_jcamp_labels(pred)))


def _jcamp_labels(pred: Prediction) -> dict:
    s = pred.spectrum
    return {"$VIBEST SMILES": pred.smiles, "$VIBEST SCALING": pred.scale.describe(),
            "$VIBEST LINE SHAPE": f"{s.line_shape} FWHM {s.fwhm_cm1:g} 1/CM",
            "$VIBEST METHOD": pred.method_name, "$VIBEST CAUTION": CAUTION}


def peak_table(comp) -> str:
    """Plain-text peak-match table of a :class:`vibest.comparison.Comparison`."""
    # columns as wide as their longest entry ("unmatched", "group-frequency"), so that rows align
    lines = [f"{'measured':>9} {'height':>6}  {'predicted':>9} {'height':>6}  {'shift':>9}  {'region':<15}  character"]
    for m in comp.matches:
        meas = f"{m.measured_cm1:9.1f} {m.measured_height:6.2f}" if m.measured_cm1 is not None else f"{'-':>9} {'':>6}"
        prd = f"{m.predicted_cm1:9.1f} {m.predicted_height:6.2f}" if m.predicted_cm1 is not None else f"{'-':>9} {'':>6}"
        shift = f"{m.shift_cm1:+9.1f}" if m.shift_cm1 is not None else f"{'unmatched':>9}"
        where = region_of(m.measured_cm1 if m.measured_cm1 is not None else m.predicted_cm1)
        lines.append(f"{meas}  {prd}  {shift}  {where:<15}  {m.character}".rstrip())
    return "\n".join(lines)


def comparison_summary(comp) -> str:
    s = comp.scores
    others = ", ".join(f"{k} {v:.3f}" for k, v in s.items() if k != comp.score_name)
    text = f"{comp.smiles}: {comp.score_name} {comp.score:.4f}  ({others})"
    fitted = []
    if comp.settings.get("fit_scale"):
        fitted.append(f"extra scale {comp.extra_scale:.4f}")
    if comp.settings.get("fit_shift"):
        fitted.append(f"shift {comp.shift_cm1:+.1f} cm-1")
    if fitted:
        text += f"\n  fitted: {', '.join(fitted)}"
    for note in comp.notes:
        text += f"\n  note: {note}"
    st = comp.settings
    text += (f"\n  compared as (absorbance)^{st.get('intensity_power', 1.0):g}"
             + (", predicted bands with gas-phase rotational contours" if st.get("gas_phase") else ""))
    n = sum(m.matched for m in comp.matches)
    nm = sum(m.measured_cm1 is not None for m in comp.matches)
    return text + f"\n  peaks: {n} of {nm} measured peaks matched within {comp.settings['tolerance_cm1']:g} cm-1"


def assessment_lines(assessment) -> list[str]:
    """How sure a ranking is, in plain lines (vibest.confidence.Assessment)."""
    if assessment is None:
        return []
    if assessment.confidence is not None:
        lines = [f"confidence that the first candidate is right: {assessment.confidence:.2f}"
                 + ("" if assessment.confidence >= 0.7 else " (low)")
                 + (f" (note: {assessment.note})" if assessment.note else "")]
    else:
        lines = [f"confidence: not given ({assessment.note})"]
    lines += [f"flag ({f.kind}): {f.message}" for f in assessment.flags]
    return lines


def ranking_table(ranking, assessment=None) -> str:
    lines = [f"# measured: {ranking.measured.source}  ({ranking.measured.title})"]
    for note in ranking.measured.notes:
        lines.append(f"# note: {note}")
    coverage = {n for e in ranking.entries if e.comparison for n in e.comparison.notes if "cover" in n}
    lines += [f"# note: {n}" for n in sorted(coverage)]
    lines.append(f"{'rank':>4}  {'score':>7}  {'margin':>7}  {'shift':>6}  {'peaks':>7}  name (SMILES)")
    for e in ranking.entries:
        if e.error:
            lines.append(f"{'-':>4}  {'failed':>7}  {'':>7}  {'':>6}  {'':>7}  {e.candidate.label}: {e.error}")
            continue
        c = e.comparison
        peaks = f"{sum(m.matched for m in c.matches)}/{sum(m.measured_cm1 is not None for m in c.matches)}"
        margin = f"{e.margin_to_next:7.4f}" if e.margin_to_next is not None else f"{'':>7}"
        shift = f"{c.shift_cm1:+6.1f}" if c.settings.get("fit_shift") else f"{'-':>6}"
        mark = " *" if e.refined else ""
        note = f"  [{e.note}]" if e.note else ""
        lines.append(f"{e.rank:>4}  {e.score:7.4f}  {margin}  {shift}  {peaks:>7}  {e.candidate.marked_label(mark)}{note}")
    lines.append(f"# score: {ranking.score_name}; margin: score minus the next candidate's; shift: fitted shift of "
                 f"the predicted wavenumbers (cm^-1), '-' when not fitted; peaks: measured peaks matched / picked")
    refined = [e for e in ranking.entries if e.refined]
    if refined:
        lines.append(f"# * recomputed at {refined[0].method} and ranked among themselves (the first {len(refined)}); "
                     f"the others at {ranking.screening_method}: scores of two "
                     "levels are not compared with each other, so no margin is given across the line")
    lines += assessment_lines(assessment)
    lines.append(f"# caution: {CAUTION}")
    return "\n".join(lines)


def plot_overlay(comp, path: str | Path, title: str = "", measured_label: str = "measured", name: str = "") -> None:
    """Measured (top, black) and predicted curves on 4000 -> 400, matched peaks marked (legend),
    the candidate's ``name`` and fitted shift in the legend, residual below."""
    import matplotlib

    matplotlib.use("Agg")
    import matplotlib.pyplot as plt

    g, m, p = comp.grid_cm1, comp.measured_curve, comp.predicted_curve
    power = comp.settings.get("intensity_power", 1.0)
    fig, (ax, axr) = plt.subplots(2, 1, figsize=(10, 5.8), dpi=120, sharex=True,
                                  gridspec_kw={"height_ratios": [3.2, 1]})
    ax.plot(g, m, color="black", lw=1.1, label=measured_label)
    shift = f", shifted {comp.shift_cm1:+.1f} cm$^{{-1}}$" if comp.settings.get("fit_shift") else ""
    ax.plot(g, p, color="#c55a11", lw=1.1, label=f"predicted {short(name or comp.smiles, 40)}{shift}")
    matched = [r for r in comp.matches if r.matched]
    unmatched = [r for r in comp.matches if r.measured_cm1 is not None and not r.matched]
    for row in matched:  # peak heights are absorbances: drawn on the compared (powered) scale
        ax.plot([row.measured_cm1, row.predicted_cm1],
                [row.measured_height ** power + 0.04, row.predicted_height ** power + 0.04], color="#1f4e79", lw=0.8)
    if matched:
        ax.plot([r.measured_cm1 for r in matched], [r.measured_height ** power + 0.04 for r in matched], "v",
                color="#1f4e79", ms=3, ls="none", label="measured peak matched (line to its predicted peak)")
    if unmatched:
        ax.plot([r.measured_cm1 for r in unmatched], [r.measured_height ** power + 0.04 for r in unmatched], "x",
                color="#7f7f7f", ms=4, ls="none", label="measured peak without a predicted one")
    ax.set_ylim(0, 1.3)
    ax.set_ylabel("absorbance (normalised)" if power == 1.0 else f"(normalised absorbance)$^{{{power:g}}}$, as compared")
    ax.legend(loc="upper left", fontsize=7.5, frameon=False)
    ax.set_title(title or f"{short(name or comp.smiles, 40)}: {comp.score_name} score {comp.score:.3f}", fontsize=9.5)
    axr.plot(g, m - p, color="#404040", lw=0.8)
    axr.axhline(0, color="#999999", lw=0.6)
    axr.set_ylabel("residual")
    axr.set_xlabel("wavenumber / cm$^{-1}$")
    axr.set_xlim(4000, 400)
    fig.text(0.01, 0.005, PLOT_CAUTION,
             fontsize=6.5, color="#7f7f7f")
    fig.tight_layout(rect=(0, 0.02, 1, 1))
    write_with(path, fig.savefig)
    plt.close(fig)


def atom_numbers(record) -> str:
    """The atoms with the numbers that isotope specifications (13C@3) and composition labels use."""
    from ase.data import chemical_symbols

    return "# atoms: " + ", ".join(f"{k + 1} {chemical_symbols[int(z)]}" for k, z in enumerate(record.numbers))


def isotope_table(spec: str, shifts) -> str:
    lines = [f"# isotopologue {spec}: band shifts from the same Hessian (no new gradients)",
             f"{'mode':>4}  {'parent':>8}  {'isotop.':>8}  {'shift':>7}  {'km/mol':>8} -> {'km/mol':>8}"]
    for s in sorted(shifts, key=lambda s: -s.parent_cm1):
        lines.append(f"{s.parent_index:>4}  {s.parent_cm1:8.1f}  {s.isotopologue_cm1:8.1f}  {s.shift_cm1:+7.1f}  "
                     f"{s.parent_intensity_km_mol:8.2f} -> {s.isotopologue_intensity_km_mol:8.2f}")
    return "\n".join(lines)


def isotope_rows(spec: str, shifts) -> list[list]:
    return [[spec, s.parent_index, f"{s.parent_cm1:.2f}", f"{s.isotopologue_cm1:.2f}", f"{s.shift_cm1:.2f}",
             f"{s.parent_intensity_km_mol:.4f}", f"{s.isotopologue_intensity_km_mol:.4f}"] for s in shifts]


ISOTOPE_HEADER = ["isotopologue", "mode", "parent_cm1", "isotopologue_cm1", "shift_cm1", "parent_intensity_km_mol",
                  "isotopologue_intensity_km_mol"]


def thermo_summary(t) -> str:
    lines = [f"# thermochemistry at {t.temperature_K:g} K, {t.pressure_Pa:g} Pa (ideal gas, rigid rotor, "
             f"{'quasi-RRHO entropy (Grimme 2012)' if t.quasi_harmonic else 'harmonic oscillator'}), "
             f"symmetry number {t.symmetry_number}",
             f"zero-point energy  {t.zero_point_energy_kj_mol:12.3f} kJ/mol",
             f"H - E(electronic)  {t.enthalpy_kj_mol - t.electronic_energy_kj_mol:12.3f} kJ/mol (thermal enthalpy, ZPE included)",
             f"G - E(electronic)  {t.gibbs_energy_kj_mol - t.electronic_energy_kj_mol:12.3f} kJ/mol",
             f"entropy S          {t.entropy_j_mol_k:12.3f} J/(mol K)",
             f"enthalpy H         {t.enthalpy_kj_mol:12.3f} kJ/mol (with the electronic energy)",
             f"Gibbs energy G     {t.gibbs_energy_kj_mol:12.3f} kJ/mol (with the electronic energy)",
             "# absolute H and G carry the method's electronic energy: compare them only between structures "
             "computed the same way (conformers, isomers), as differences"]
    if t.skipped_imaginary_cm1:
        lines.append(f"# left out imaginary modes: {', '.join(f'{v:.0f}' for v in t.skipped_imaginary_cm1)} cm-1")
    return "\n".join(lines)


def ensemble_table(ens) -> str:
    lines = [f"# conformer ensemble of {ens.smiles} at {ens.temperature_K:g} K, weights from "
             f"{'electronic energies' if ens.weighting == 'energy' else 'harmonic free energies'}"]
    lines += [f"# note: {n}" for n in ens.notes]
    lines.append(f"{'conf':>4}  {'dE kcal/mol':>11}  {'weight':>7}  {'gradients':>9}  {'seconds':>7}  strongest band")
    for k, m in enumerate(ens.members, start=1):
        b = m.prediction.strongest(1)[0]
        lines.append(f"{k:>4}  {m.relative_energy_kcal_mol:11.3f}  {m.weight:7.3f}  {m.gradient_calls:>9}  "
                     f"{m.seconds:7.2f}  {b.wavenumber_cm1:.0f} cm-1 {b.label}")
    lines.append(f"# caution: {CAUTION}")
    return "\n".join(lines)


def mass_table(checks) -> str:
    """Candidates against the mass evidence (vibest.ms), one row each."""
    from .ms import table

    return table(list(checks))


def verdict_report(verdict) -> str:
    """The verdict of vibest.verdict.check_structure as text: conclusion, reasons, how sure,
    the ranking, and the evidence by functional group."""
    m = verdict.ranking.measured
    lines = [f"sample: {m.source}" + (f"  ({m.title})" if m.title else ""),
             f"intended structure: {verdict.intended.label}",
             f"verdict: {verdict.conclusion.upper()}"]
    lines += [f"  {r}" for r in verdict.reasons]
    if verdict.assessment.note:
        lines.append(f"  (no calibrated confidence: {verdict.assessment.note})" if verdict.assessment.confidence is None
                     else f"  (note: {verdict.assessment.note})")
    lines.append("")
    n = len(verdict.decoys)
    lines.append(f"ranking ({n} decoy{'' if n == 1 else 's'}: isomers and functional-group changes of the intended "
                 "structure):")
    table = ranking_table(verdict.ranking).splitlines()
    lines += [line for line in table if not line.startswith("# caution")]
    lines.append("")
    lines.append("evidence by functional group (intended structure):")
    width = max(len(e.name) for e in verdict.evidence)
    for e in verdict.evidence:
        if e.in_structure or e.status != "absent":
            lines.append(f"  {e.name:<{width}}  {e.status:<21}  {e.message}")
    absent = [e.name for e in verdict.evidence if not e.in_structure and e.status == "absent"]
    if absent:
        lines.append(f"  no strong band of groups the structure lacks: {', '.join(absent)}")
    if verdict.mass_checks:
        lines += ["", "mass evidence:"] + [f"  {line}" for line in mass_table(verdict.mass_checks).splitlines()]
        lines += [f"  dropped from the ranking: {c.name}" for c in verdict.dropped]
    lines.append(f"# caution: {CAUTION}")
    return "\n".join(lines)

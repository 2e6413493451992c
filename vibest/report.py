"""One self-contained HTML report per prediction, comparison, ranking or verdict.

The page needs no network: plotly.js is embedded once (Plotly, the maintained plotting library
with standalone HTML output; chosen over Bokeh because one figure object carries hover text,
reversed axes and an absorbance/%T switch without custom JavaScript), the structures are SVG
drawn by RDKit, and the only script of our own sorts table columns and records script errors in
``data-errors`` on the page's body (the tests read it in headless Chromium). A print stylesheet
lays the page out for the browser's "print to PDF".

Contents (as far as the result has them): sample and measured-file metadata; the structures;
the ranking or verdict with confidence, flags and mass evidence; interactive overlays of measured
and predicted spectra (zoom, pan, hover with wavenumber, intensity and band label; wavenumber
axis reversed; absorbance or %T); the band table with group labels and composition and the
peak-match table, both sortable; method, scale model, settings, versions, timings, the store key
of each record; and the caution.
"""

from __future__ import annotations

import datetime
import html
import json
from pathlib import Path

import numpy as np

from . import __version__
from .pipeline import CAUTION

_CSS = """
body{font-family:system-ui,-apple-system,Segoe UI,Helvetica,Arial,sans-serif;margin:1.5em auto;max-width:1200px;
color:#222;padding:0 1em}
h1{font-size:1.45em;margin-bottom:.2em} h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #ccc}
.caution{background:#fff4e5;border-left:4px solid #c55a11;padding:.5em .8em;margin:1em 0}
.verdict{font-size:1.2em;font-weight:600} .muted{color:#666;font-size:.9em}
table{border-collapse:collapse;margin:.5em 0;font-size:.86em} th,td{border:1px solid #ddd;padding:3px 7px;
text-align:left;vertical-align:top} th{background:#f3f3f3;cursor:pointer;user-select:none}
th.sorted-asc::after{content:" \\25B2"} th.sorted-desc::after{content:" \\25BC"}
td.num{text-align:right;font-variant-numeric:tabular-nums}
.structures{display:flex;flex-wrap:wrap;gap:12px} .structure{border:1px solid #ddd;padding:4px;text-align:center;
font-size:.85em} dl.meta{display:grid;grid-template-columns:max-content auto;gap:2px 12px;font-size:.9em}
dl.meta dt{color:#555} dl.meta dd{margin:0}
@media print{body{max-width:none;margin:0;font-size:10pt} th{cursor:auto} .modebar,.updatemenu-container{display:none}
h2{break-after:avoid} table,.structure,.plot{break-inside:avoid}}
"""

_SCRIPT = """
window.__errors = [];
window.addEventListener('error', function (e) { window.__errors.push(String(e.message)); });
function sortTable(th) {
  var table = th.closest('table'), body = table.tBodies[0], k = Array.prototype.indexOf.call(th.parentNode.children, th);
  var asc = !th.classList.contains('sorted-asc');
  Array.prototype.forEach.call(th.parentNode.children, function (h) { h.classList.remove('sorted-asc', 'sorted-desc'); });
  th.classList.add(asc ? 'sorted-asc' : 'sorted-desc');
  var rows = Array.prototype.slice.call(body.rows);
  rows.sort(function (a, b) {
    var x = a.cells[k].getAttribute('data-v') || a.cells[k].textContent, y = b.cells[k].getAttribute('data-v') || b.cells[k].textContent;
    var nx = parseFloat(x), ny = parseFloat(y), c = (!isNaN(nx) && !isNaN(ny)) ? nx - ny : x.localeCompare(y);
    return asc ? c : -c;
  });
  rows.forEach(function (r) { body.appendChild(r); });
}
window.addEventListener('load', function () {
  document.body.setAttribute('data-plots', String(document.querySelectorAll('.plot .main-svg').length));
  document.body.setAttribute('data-errors', window.__errors.join(' | '));
  document.body.setAttribute('data-loaded', '1');
});
"""


def _e(text) -> str:
    return html.escape(str(text))


def _table(table_id: str, header: list[str], rows: list[list], numeric: set[int] = frozenset()) -> str:
    """A sortable table; cells of the ``numeric`` columns sort by value."""
    head = "".join(f'<th onclick="sortTable(this)">{_e(h)}</th>' for h in header)
    body = []
    for row in rows:
        cells = []
        for k, v in enumerate(row):
            if k in numeric and isinstance(v, (int, float)) and v is not None:
                cells.append(f'<td class="num" data-v="{v}">{_e(_fmt(v))}</td>')
            else:
                cells.append(f"<td>{_e('' if v is None else v)}</td>")
        body.append("<tr>" + "".join(cells) + "</tr>")
    return f'<table id="{table_id}"><thead><tr>{head}</tr></thead><tbody>{"".join(body)}</tbody></table>'


def _fmt(v) -> str:
    if isinstance(v, float):
        return f"{v:.4g}" if abs(v) < 1e4 else f"{v:.0f}"
    return str(v)


def _meta(pairs) -> str:
    items = "".join(f"<dt>{_e(k)}</dt><dd>{_e(v)}</dd>" for k, v in pairs if v not in (None, ""))
    return f'<dl class="meta">{items}</dl>'


def structure_svg(smiles: str, size: int = 220) -> str:
    """2D depiction of a SMILES as inline SVG (RDKit); an unreadable SMILES gives its text."""
    from rdkit import Chem
    from rdkit.Chem import rdDepictor
    from rdkit.Chem.Draw import rdMolDraw2D

    mol = Chem.MolFromSmiles(smiles)
    if mol is None:
        return f"<div>{_e(smiles)}</div>"
    rdDepictor.Compute2DCoords(mol)
    drawer = rdMolDraw2D.MolDraw2DSVG(size, int(size * 0.75))
    drawer.DrawMolecule(mol)
    drawer.FinishDrawing()
    svg = drawer.GetDrawingText()
    return svg[svg.index("<svg"):]


def _structures(items: list[tuple[str, str]]) -> str:
    cards = "".join(f'<div class="structure">{structure_svg(s)}<div>{_e(n)}</div><div class="muted">{_e(s)}</div>'
                    "</div>" for n, s in items)
    return f'<div class="structures">{cards}</div>'


def _sample(measured) -> str:
    if measured is None:
        return ""
    when = measured.recorded_at.isoformat(sep=" ") if measured.recorded_at else None
    pairs = [("file", measured.source), ("title", measured.title), ("phase", measured.phase or "not stated (condensed)"),
             ("recorded", when), *measured.header, ("range", f"{measured.range_cm1[0]:.0f}-{measured.range_cm1[1]:.0f} cm-1")]
    notes = "".join(f"<li>{_e(n)}</li>" for n in measured.notes)
    return "<h2>Sample</h2>" + _meta(pairs) + (f"<p class='muted'>Reading notes:</p><ul class='muted'>{notes}</ul>"
                                                if notes else "")


def _figure_html(fig) -> str:
    return '<div class="plot">' + fig.to_html(full_html=False, include_plotlyjs=False,
                                               config={"displaylogo": False, "responsive": True}) + "</div>"


def _absorbance_layout(fig, title: str) -> None:
    """Reversed wavenumber axis and an absorbance / %T switch (restyle of every trace's y)."""
    ys_a = [list(t.y) for t in fig.data]
    ys_t = [[None if v is None else 100.0 * 10 ** (-float(v)) for v in y] for y in ys_a]
    fig.update_layout(
        title=title, height=460, margin=dict(l=60, r=20, t=70, b=50), hovermode="closest",
        xaxis=dict(title="wavenumber / cm-1", autorange="reversed"),
        yaxis=dict(title="absorbance (normalised)"), legend=dict(orientation="h", y=-0.18),
        updatemenus=[dict(type="buttons", direction="left", x=1.0, xanchor="right", y=1.15, buttons=[
            dict(label="absorbance", method="update", args=[{"y": ys_a}, {"yaxis.title.text": "absorbance (normalised)"}]),
            dict(label="%T", method="update",
                 args=[{"y": ys_t}, {"yaxis.title.text": "transmittance / % (strongest band at 10 %)"}])])])


def _stick_trace(pred, extra_scale: float, shift: float, name: str, color: str):
    """Predicted bands as hoverable markers at their (aligned) positions, height ~ intensity."""
    import plotly.graph_objects as go

    nu = pred.wavenumbers_cm1 * extra_scale + shift
    inten = pred.intensities_km_mol
    top = max(float(inten.max()), 1e-12)
    keep = inten >= 0.01 * top
    text = [f"{b.label or b.character}<br>{b.intensity_km_mol:.1f} km/mol<br>{b.character}"
            for b, k in zip(pred.bands, keep) if k]
    return go.Scatter(x=nu[keep], y=(inten[keep] / top) * 0.35, mode="markers", name=f"{name}: bands",
                      marker=dict(color=color, size=6, symbol="line-ns-open", line=dict(width=2)),
                      text=text, hovertemplate="%{x:.0f} cm-1<br>%{text}<extra></extra>", visible="legendonly")


_COLORS = ("#c55a11", "#1f77b4", "#2ca02c", "#9467bd", "#8c564b")


def overlay_figure(entries: list[tuple[str, object, object]], title: str):
    """Measured curve and the predicted curve and bands of each (name, Comparison, Prediction),
    as compared (normalised absorbance)."""
    import plotly.graph_objects as go

    fig = go.Figure()
    first = entries[0][1]
    power = first.settings.get("intensity_power", 1.0) or 1.0
    g = first.grid_cm1
    fig.add_trace(go.Scatter(x=g, y=np.clip(first.measured_curve, 0, None) ** (1 / power), name="measured",
                             line=dict(color="black", width=1.3), hovertemplate="%{x:.0f} cm-1: %{y:.3f}<extra>measured</extra>"))
    for k, (name, comp, pred) in enumerate(entries):
        color = _COLORS[k % len(_COLORS)]
        fig.add_trace(go.Scatter(x=comp.grid_cm1, y=np.clip(comp.predicted_curve, 0, None) ** (1 / power),
                                 name=f"{name} (score {comp.score:.3f}, shift {comp.shift_cm1:+.1f} cm-1)",
                                 line=dict(color=color, width=1.1), visible=True if k == 0 else "legendonly",
                                 hovertemplate="%{x:.0f} cm-1: %{y:.3f}<extra>" + _e(name) + "</extra>"))
        if pred is not None:
            fig.add_trace(_stick_trace(pred, comp.extra_scale, comp.shift_cm1, name, color))
    _absorbance_layout(fig, title)
    return fig


def spectrum_figure(pred, title: str):
    import plotly.graph_objects as go

    s = pred.spectrum
    fig = go.Figure(go.Scatter(x=s.wavenumbers_cm1, y=s.absorbance_normalised, name="predicted",
                               line=dict(color="#1f4e79"), hovertemplate="%{x:.0f} cm-1: %{y:.3f}<extra></extra>"))
    fig.add_trace(_stick_trace(pred, 1.0, 0.0, "predicted", "#c55a11"))
    fig.data[-1].visible = True
    _absorbance_layout(fig, title)
    return fig


def band_table(pred, table_id: str = "bands") -> str:
    rows = [[b.index, round(b.wavenumber_cm1, 1), round(b.harmonic_cm1, 1), round(b.intensity_km_mol, 2),
             b.label, b.character] for b in pred.bands]
    return _table(table_id, ["mode", "wavenumber / cm-1", "harmonic / cm-1", "intensity / km/mol", "label",
                             "composition"], rows, numeric={0, 1, 2, 3})


def peak_table(comp, table_id: str = "peaks") -> str:
    rows = [[None if m.measured_cm1 is None else round(m.measured_cm1, 1),
             None if m.predicted_cm1 is None else round(m.predicted_cm1, 1),
             None if m.shift_cm1 is None else round(m.shift_cm1, 1), "yes" if m.matched else "no", m.character]
            for m in comp.matches]
    return _table(table_id, ["measured / cm-1", "predicted / cm-1", "difference / cm-1", "matched", "predicted band"],
                  rows, numeric={0, 1, 2})


def _method(pred, store_key: str | None = None) -> str:
    rec = pred.record
    pairs = [("method", pred.method_name), ("scaling", pred.scale.describe()), ("medium", pred.medium),
             ("band width", f"{pred.spectrum.fwhm_cm1:g} cm-1 {pred.spectrum.line_shape}"),
             ("converged", pred.converged), ("store key", store_key)]
    pairs += [(f"setting: {k}", json.dumps(v) if isinstance(v, (dict, list)) else v) for k, v in rec.settings.items()]
    pairs += [(f"timing: {k}", f"{v:.3g}" if isinstance(v, float) else v) for k, v in rec.timings.items()]
    notes = "".join(f"<li>{_e(n)}</li>" for n in pred.notes)
    return _meta(pairs) + (f"<ul class='muted'>{notes}</ul>" if notes else "")


def _versions() -> str:
    from .pipeline import _versions as versions

    return _meta(sorted(versions().items()))


def page(title: str, body: list[str]) -> str:
    """The whole HTML document: plotly.js embedded once, our script, the body and the caution."""
    from plotly.offline import get_plotlyjs

    made = datetime.datetime.now().replace(microsecond=0).isoformat(sep=" ")
    return ("<!DOCTYPE html><html lang='en'><head><meta charset='utf-8'>"
            f"<meta name='viewport' content='width=device-width'><title>{_e(title)}</title>"
            f"<style>{_CSS}</style><script>{_SCRIPT}</script><script>{get_plotlyjs()}</script></head><body>"
            f"<h1>{_e(title)}</h1><p class='muted'>vibest {__version__}, {made}</p>"
            f"<div class='caution'><b>Caution.</b> {_e(CAUTION)}</div>" + "".join(body) +
            f"<h2>Versions</h2>{_versions()}<div class='caution'>{_e(CAUTION)}</div></body></html>")


def _key(smiles: str, calc) -> str | None:
    if calc is None:
        return None
    from .errors import VibestError
    from .store import RecordStore, structure_identity

    try:
        return RecordStore.key_of(*structure_identity(smiles), calc)
    except VibestError:  # an unreadable structure has no key; the report still shows the rest
        return None


def prediction_report(pred, calc=None) -> str:
    body = [_structures([(pred.smiles, pred.smiles)]), "<h2>Predicted spectrum</h2>",
            _figure_html(spectrum_figure(pred, f"predicted IR spectrum of {pred.smiles} ({pred.method_name})")),
            "<h2>Bands</h2>", band_table(pred), "<h2>Method</h2>", _method(pred, _key(pred.smiles, calc))]
    return page(f"Predicted IR spectrum: {pred.smiles}", body)


def comparison_report(comp, pred, measured, name: str = "", calc=None) -> str:
    label = name or pred.smiles
    summary = _meta([("candidate", f"{label} ({pred.smiles})"), ("score", f"{comp.score_name} {comp.score:.4f}"),
                     ("all scores", ", ".join(f"{k} {v:.3f}" for k, v in comp.scores.items())),
                     ("fitted shift", f"{comp.shift_cm1:+.1f} cm-1"), ("extra scale", f"{comp.extra_scale:.4f}"),
                     ("notes", "; ".join(comp.notes))])
    body = [_sample(measured), "<h2>Structure</h2>", _structures([(label, pred.smiles)]), "<h2>Comparison</h2>", summary,
            _figure_html(overlay_figure([(label, comp, pred)], f"measured vs predicted: {label}")),
            "<h2>Peak matches</h2>", peak_table(comp), "<h2>Predicted bands</h2>", band_table(pred),
            "<h2>Method</h2>", _method(pred, _key(pred.smiles, calc))]
    return page(f"Comparison: {label} against {Path(measured.source).name}", body)


def _ranking_rows(ranking) -> list[list]:
    rows = []
    for e in ranking.entries:
        c = e.comparison
        rows.append([e.rank, e.candidate.name, e.candidate.smiles, None if e.score is None else round(e.score, 4),
                     None if e.margin_to_next is None else round(e.margin_to_next, 4),
                     None if c is None else round(c.shift_cm1, 1),
                     "" if c is None else f"{sum(m.matched for m in c.matches)}/"
                                          f"{sum(m.measured_cm1 is not None for m in c.matches)}",
                     e.method, e.error or e.note or ""])
    return rows


def _assessment(assessment) -> str:
    if assessment is None:
        return ""
    conf = "not given" if assessment.confidence is None else f"{assessment.confidence:.2f}"
    items = "".join(f"<li><b>{_e(f.kind)}</b>: {_e(f.message)}</li>" for f in assessment.flags)
    why = "why no confidence" if assessment.confidence is None else "note on the confidence"
    return (_meta([("confidence that the first is right", conf), (why, assessment.note)])
            + (f"<ul>{items}</ul>" if items else ""))


def _mass(checks) -> str:
    if not checks:
        return ""
    rows = [[c.name, c.formula, c.nominal_mass, round(c.monoisotopic_mass_u, 4), c.status, c.reason] for c in checks]
    return "<h2>Mass evidence</h2>" + _table("mass", ["candidate", "formula", "M", "monoisotopic / u", "status", "why"],
                                             rows, numeric={2, 3})


def _ranking_body(ranking, assessment=None, calc=None, mass_checks=(), top: int = 5) -> list[str]:
    scored = [e for e in ranking.entries if e.comparison is not None]
    body = [_sample(ranking.measured), "<h2>Ranking</h2>",
            _table("ranking", ["rank", "name", "SMILES", "score", "margin", "shift / cm-1", "peaks matched", "method",
                               "note"], _ranking_rows(ranking), numeric={0, 3, 4, 5}),
            f"<p class='muted'>score: {_e(ranking.score_name)}; margin: score minus the next candidate's.</p>",
            _assessment(assessment), _mass(mass_checks), "<h2>Structures</h2>",
            _structures([(e.candidate.name, e.candidate.smiles) for e in scored[:top]])]
    if scored:
        best = scored[0]
        body += ["<h2>Overlays</h2><p class='muted'>Click legend entries to show other candidates and their bands; "
                 "hover a band marker for its label.</p>",
                 _figure_html(overlay_figure([(e.candidate.name, e.comparison, e.prediction) for e in scored[:top]],
                                             f"measured vs the best {min(top, len(scored))} candidates")),
                 f"<h2>Peak matches: {_e(best.candidate.name)}</h2>", peak_table(best.comparison),
                 f"<h2>Predicted bands: {_e(best.candidate.name)}</h2>", band_table(best.prediction),
                 "<h2>Method</h2>", _method(best.prediction, _key(best.candidate.smiles, calc))]
    return body


def ranking_report(ranking, assessment=None, calc=None, mass_checks=(), top: int = 5) -> str:
    return page(f"Ranking against {Path(ranking.measured.source).name}",
                _ranking_body(ranking, assessment, calc, mass_checks, top))


def verdict_report(verdict, calc=None) -> str:
    reasons = "".join(f"<li>{_e(r)}</li>" for r in verdict.reasons)
    evidence = _table("evidence", ["group", "in structure", "status", "message"],
                      [[e.name, "yes" if e.in_structure else "no", e.status, e.message] for e in verdict.evidence
                       if e.in_structure or e.status != "absent"])
    head = [f"<p class='verdict'>Verdict: {_e(verdict.conclusion.upper())}</p><ul>{reasons}</ul>",
            "<h2>Evidence by functional group</h2>", evidence]
    return page(f"Is the sample {verdict.intended.name}?",
                head + _ranking_body(verdict.ranking, verdict.assessment, calc, verdict.mass_checks))


def write_report(path: str | Path, text: str) -> None:
    from .files import atomic_write_text

    atomic_write_text(path, text)


# -- reaction monitoring ---------------------------------------------------------------------

def _xy_figure(traces: list[tuple[str, np.ndarray, np.ndarray, dict]], title: str, x_title: str, y_title: str,
               reversed_x: bool = True):
    import plotly.graph_objects as go

    fig = go.Figure()
    for name, x, y, style in traces:
        fig.add_trace(go.Scatter(x=x, y=y, name=name, **style))
    fig.update_layout(title=title, height=440, margin=dict(l=60, r=20, t=60, b=50), hovermode="closest",
                      xaxis=dict(title=x_title, autorange="reversed" if reversed_x else True),
                      yaxis=dict(title=y_title), legend=dict(orientation="h", y=-0.2))
    return fig


def difference_report(diff) -> str:
    line = {"mode": "lines"}
    fig = _xy_figure([(f"before x {diff.scale:.3f}: {Path(diff.before_source).name}", diff.grid_cm1, diff.before,
                       line | {"line": {"color": "#1f4e79", "width": 1}}),
                      (f"after: {Path(diff.after_source).name}", diff.grid_cm1, diff.after,
                       line | {"line": {"color": "#c55a11", "width": 1}}),
                      ("after - before", diff.grid_cm1, diff.difference, line | {"line": {"color": "#404040", "width": 1}}),
                      ("changes", np.array([c.wavenumber_cm1 for c in diff.changes]),
                       np.array([c.change_absorbance for c in diff.changes]),
                       {"mode": "markers", "text": [c.describe() for c in diff.changes],
                        "hovertemplate": "%{text}<extra></extra>", "marker": {"size": 8, "color": "#2e7d32"}})],
                     "difference spectrum", "wavenumber / cm-1", "absorbance")
    rows = [[round(c.wavenumber_cm1, 1), c.kind, round(c.change_absorbance, 4), c.assigned] for c in diff.changes]
    body = ["<h2>Spectra</h2>", _meta([("before", diff.before_source), ("after", diff.after_source),
                                       ("scale of before", f"{diff.scale:.4f}"), ("scaled on", diff.scaled_on)]),
            _figure_html(fig), "<h2>Band changes</h2>",
            _table("changes", ["wavenumber / cm-1", "change", "difference / A", "assigned to"], rows, numeric={0, 2})]
    body += [f"<p class='muted'>{_e(n)}</p>" for n in diff.notes]
    return page(f"Difference: {Path(diff.after_source).name} - {Path(diff.before_source).name}", body)


def components_report(fit) -> str:
    import plotly.graph_objects as go

    fig = go.Figure()
    for s, part in zip(fit.shares, fit.stacked):
        fig.add_trace(go.Scatter(x=fit.grid_cm1, y=part, name=f"{s.name} ({s.absorbance_fraction:.0%})", stackgroup="c",
                                 mode="lines", line=dict(width=0.5)))
    fig.add_trace(go.Scatter(x=fit.grid_cm1, y=fit.measured, name="measured", line=dict(color="black", width=1)))
    fig.update_layout(title=f"component fit (relative residual {fit.relative_residual:.3f})", height=440,
                      xaxis=dict(title="wavenumber / cm-1", autorange="reversed"), yaxis=dict(title="absorbance"),
                      legend=dict(orientation="h", y=-0.2), margin=dict(l=60, r=20, t=60, b=50))
    rows = [[s.name, round(s.shift_cm1, 1), round(s.absorbance_fraction, 4), round(s.absorbance_fraction_sd, 4),
             None if s.mole_fraction is None else round(s.mole_fraction, 4),
             None if s.mole_fraction_sd is None else round(s.mole_fraction_sd, 4)] for s in fit.shares]
    body = ["<h2>Fit</h2>", _meta([("measured", fit.source), ("mole fractions", fit.mole_basis)]), _figure_html(fig),
            "<h2>Components</h2>", _table("components", ["component", "shift / cm-1", "absorbance fraction", "sd",
                                                         "mole fraction", "sd"], rows, numeric={1, 2, 3, 4, 5})]
    body += [f"<p class='muted'>{_e(n)}</p>" for n in fit.notes]
    return page(f"Components of {Path(fit.source).name}", body)


def series_report(series) -> str:
    t = np.array([p.time for p in series.points])
    fig = _xy_figure([("conversion", t, np.array([p.conversion for p in series.points]),
                       {"mode": "lines+markers", "text": [Path(p.source).name for p in series.points],
                        "hovertemplate": "%{x} " + series.time_unit + ": %{y:.3f}<br>%{text}<extra></extra>"})],
                     "conversion over time", f"time / {series.time_unit}", "conversion", reversed_x=False)
    rows = [[p.time, p.source, round(p.conversion, 4), p.start_band_absorbance, p.product_band_absorbance]
            for p in series.points]
    body = ["<h2>Conversion</h2>", _meta([("how", series.how),
                                         ("product band (check)", series.product_band.describe()
                                          if series.product_band else None)]), _figure_html(fig),
            _table("series", [f"time / {series.time_unit}", "file", "conversion", "start band / A", "product band / A"],
                   rows, numeric={0, 2, 3, 4})]
    body += [f"<p class='muted'>{_e(n)}</p>" for n in series.notes]
    return page("Conversion over time", body)


def result_report(result) -> str:
    """The report of a difference, component fit or series (by the result's type)."""
    from .components import MixtureFit
    from .difference import Difference
    from .series import Series

    for kind, build in ((Difference, difference_report), (MixtureFit, components_report), (Series, series_report)):
        if isinstance(result, kind):
            return build(result)
    raise TypeError(f"no report for {type(result).__name__}")

"""The self-contained HTML report, rendered in a real browser (Debian's headless Chromium).

Checked in the browser with the network made unreachable: the page loads, no script error is
raised, the plots are drawn (plotly's SVG), the tables have the right number of rows, a
screenshot and a PDF print come out. Where no Chromium is installed the browser tests are
skipped with that reason (scripts/setup.sh installs it where apt-get can).
"""

from __future__ import annotations

import re
import shutil
import subprocess
from pathlib import Path

import numpy as np
import pytest

from vibest import report
from vibest.confidence import assess
from vibest.measured import ABSORBANCE, MeasuredSpectrum
from vibest.ranking import Candidate, rank_candidates

from .conftest import prediction_of

OFFLINE = ["--host-resolver-rules=MAP * ~NOTFOUND", "--proxy-server=http://127.0.0.1:9"]


def _browser() -> str:
    for name in ("chromium", "chromium-browser", "google-chrome"):
        path = shutil.which(name)
        if path:
            return path
    pytest.skip("no headless Chromium: install Debian's chromium package (scripts/setup.sh does where apt-get can)")


def _chromium(*args: str) -> subprocess.CompletedProcess:
    cmd = [_browser(), "--headless=new", "--no-sandbox", "--disable-gpu", "--no-first-run", *OFFLINE, *args]
    return subprocess.run(cmd, capture_output=True, text=True, timeout=120)


@pytest.fixture(scope="module")
def ranking_html(tmp_path_factory):
    water = prediction_of("O")
    measured = MeasuredSpectrum(water.spectrum.wavenumbers_cm1, water.spectrum.absorbance_normalised, ABSORBANCE,
                                "constructed-water.csv", "water, constructed from its own prediction")
    ranking = rank_candidates(measured, [Candidate("water", "O"), Candidate("formaldehyde", "C=O"),
                                         Candidate("bad", "C1CC")], condensed_shifts=False)
    path = tmp_path_factory.mktemp("report") / "ranking.html"
    report.write_report(path, report.ranking_report(ranking, assess(ranking, "GFN2-xTB", 16.0)))
    return path, ranking


def test_the_report_holds_everything_it_needs_offline(ranking_html):
    """No file or script is fetched from elsewhere: plotly.js is inside, the caution is there."""
    path, _ = ranking_html
    text = path.read_text()
    assert not re.search(r"<script[^>]+src=", text) and "<link" not in text
    assert "Plotly" in text and "Predicted spectra are estimates" in text
    assert text.count("<svg") >= 2  # two structures drawn (the unreadable one is shown as text)


def test_report_renders_in_headless_chromium_without_network_or_script_errors(ranking_html, tmp_path):
    path, ranking = ranking_html
    dom = _chromium("--virtual-time-budget=10000", "--dump-dom", path.as_uri()).stdout
    body = re.search(r"<body([^>]*)>", dom).group(1)
    assert 'data-loaded="1"' in body and 'data-errors=""' in body, body
    assert int(re.search(r'data-plots="(\d+)"', body).group(1)) >= 1  # plotly drew its SVG
    rows = {tid: len(re.findall(r"<tr>", re.search(rf'<table id="{tid}">(.*?)</table>', dom, re.S).group(1))) - 1
            for tid in ("ranking", "bands", "peaks")}
    first = next(e for e in ranking.entries if e.comparison is not None)
    assert rows == {"ranking": 3, "bands": len(first.prediction.bands), "peaks": len(first.comparison.matches)}
    shot = tmp_path / "report.png"
    _chromium("--window-size=1280,2000", f"--screenshot={shot}", path.as_uri())
    assert shot.exists() and shot.stat().st_size > 20_000
    pdf = tmp_path / "report.pdf"
    _chromium("--virtual-time-budget=10000", f"--print-to-pdf={pdf}", "--no-pdf-header-footer", path.as_uri())
    assert pdf.exists() and pdf.read_bytes()[:4] == b"%PDF" and pdf.stat().st_size > 20_000


def test_band_table_sorts_by_value_in_the_browser(ranking_html, tmp_path):
    """The sort script orders numbers as numbers (a click on 'intensity' puts the weakest first)."""
    path, ranking = ranking_html
    page = tmp_path / "sorted.html"
    page.write_text(path.read_text().replace(
        "</body>", "<script>window.addEventListener('load',function(){var th=document.querySelectorAll("
                   "'#bands th')[3];sortTable(th);document.body.setAttribute('data-first',"
                   "document.querySelector('#bands tbody tr td:nth-child(4)').textContent);});</script></body>"))
    dom = _chromium("--virtual-time-budget=10000", "--dump-dom", page.as_uri()).stdout
    first = float(re.search(r'data-first="([^"]+)"', dom).group(1))
    bands = next(e for e in ranking.entries if e.comparison is not None).prediction.bands
    assert first == pytest.approx(min(round(b.intensity_km_mol, 2) for b in bands), abs=0.01)


def test_cli_report_options(tmp_path):
    from click.testing import CliRunner

    from vibest.cli import main

    store = ["--store", str(tmp_path / "s.sqlite"), "-q"]
    r = CliRunner().invoke(main, ["predict", "O", "--report", str(tmp_path / "water.html"), *store])
    assert r.exit_code == 0 and (tmp_path / "water.html").read_text().startswith("<!DOCTYPE html>")
    r = CliRunner().invoke(main, ["predict", "O", "--report", str(tmp_path / "water.txt"), *store])
    assert r.exit_code == 2 and ".html" in r.output
    water = prediction_of("O")
    csv = tmp_path / "w.csv"
    csv.write_text("wavenumber_cm1,absorbance\n" + "".join(
        f"{x},{y}\n" for x, y in zip(water.spectrum.wavenumbers_cm1, np.round(water.spectrum.absorbance_normalised, 6))))
    r = CliRunner().invoke(main, ["compare", str(csv), "O", "--report", str(tmp_path / "cmp.html"), *store])
    assert r.exit_code == 0, r.output
    assert "Peak matches" in (tmp_path / "cmp.html").read_text()


def test_reaction_reports_render(tmp_path):
    """Difference, component-fit and series reports (constructed Beer-Lambert spectra of
    tests/test_reaction.py) load without script errors and carry their tables."""
    from vibest.components import Component, fit_components
    from vibest.difference import difference_spectrum
    from vibest.series import conversion_series

    from .test_reaction import ALCOHOL, KETONE, _mixture

    start, product = prediction_of(ALCOHOL), prediction_of(KETONE)
    diff = difference_spectrum(_mixture(1, 0, "t0"), _mixture(0.5, 0.5, "t1"), start=start, product=product)
    fit = fit_components(_mixture(0.5, 0.5), [Component("alcohol", start), Component("ketone", product)])
    series = conversion_series([_mixture(1 - c, c, f"s{c}") for c in (0, 0.5, 1)], [0, 5, 10], start, product)
    for result, table, rows in ((diff, "changes", len(diff.changes)), (fit, "components", 2), (series, "series", 3)):
        path = tmp_path / f"{table}.html"
        report.write_report(path, report.result_report(result))
        dom = _chromium("--virtual-time-budget=10000", "--dump-dom", path.as_uri()).stdout
        body = re.search(r"<body([^>]*)>", dom).group(1)
        assert 'data-errors=""' in body and 'data-plots="0"' not in body, (table, body)
        got = len(re.findall(r"<tr>", re.search(rf'<table id="{table}">(.*?)</table>', dom, re.S).group(1))) - 1
        assert got == rows, table


def test_a_note_beside_a_given_confidence_is_not_called_the_reason_for_none():
    """The report's assessment block: a note beside a confidence that is given (the refined
    verdict's calibration note) is labelled as a note, and only a missing confidence gets
    "why no confidence" (vibest's own wording, no source)."""
    from vibest.confidence import Assessment
    from vibest.report import _assessment

    given = _assessment(Assessment(0.9, (), "calibrated without decoy rankings"))
    assert "note on the confidence" in given and "why no confidence" not in given and "0.90" in given
    withheld = _assessment(Assessment(None, (), "gas-phase spectra only"))
    assert "why no confidence" in withheld and "not given" in withheld

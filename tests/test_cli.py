"""Command line: clear one-line errors with exit code 2, outputs written on request."""

import json
import subprocess
import sys

import pytest
from click.testing import CliRunner

from vibest.cli import main


def run(*args):
    return CliRunner().invoke(main, list(args))


@pytest.mark.parametrize("args", [["C1CC"], [""], ["C(C"], ["[Na+].[Cl-]"], ["[U]"], ["CC(=O) C"], ["CCO\u2603"],
                                  ["C1C/C=C/C1"], ["[99CH4]"], ["CCO", "--isotope", "99Xx"],
                                  ["CCO", "--isotope", "2Xx@1"]])
def test_bad_input_exit_2_one_line(args):
    # one line on stderr, no Python traceback and no C++ stack trace from RDKit
    res = subprocess.run([sys.executable, "-m", "vibest.cli", "predict", *args, "-q", "--workers", "1"],
                         capture_output=True, text=True)
    assert res.returncode == 2
    lines = [l for l in res.stderr.splitlines() if l.strip()]
    assert len(lines) == 1 and lines[0].startswith("vibest: error:")
    assert "Traceback" not in res.stderr


def test_bad_option_values_exit_2():
    assert run("predict", "O", "--fwhm", "-3", "-q").exit_code == 2
    assert run("predict", "O", "--scale-factor", "7", "-q").exit_code == 2
    assert run("predict", "O", "--plot", "x.txt", "-q").exit_code == 2


def test_predict_writes_outputs(tmp_path):
    files = {k: tmp_path / f"w.{k}" for k in ("csv", "json", "png", "svg")}
    res = run("predict", "O", "-q", "-v", "--csv", str(files["csv"]), "--json", str(files["json"]),
              "--plot", str(files["png"]), "--workers", "1")
    assert res.exit_code == 0, res.output
    assert "O-H stretch" in res.output and "caution" in res.output and "gradients" in res.output
    data = json.loads(files["json"].read_text())
    assert len(data["bands"]) == 3 and data["settings"]["engine"]["method"] == "GFN2-xTB"
    rows = files["csv"].read_text().splitlines()
    assert rows[2].startswith("wavenumber_cm1") and len(rows) == 3 + 3601
    assert files["png"].stat().st_size > 10000
    assert run("predict", "O", "-q", "--plot", str(files["svg"]), "--transmittance").exit_code == 0
    assert files["svg"].read_text().lstrip().startswith("<?xml")


def test_predict_isotope_and_thermo_output():
    res = run("predict", "Cl", "-q", "--isotope", "D-all", "--thermo", "--quasi-harmonic")
    assert res.exit_code == 0, res.output
    assert "isotopologue D-all" in res.output and "Gibbs energy" in res.output
    assert run("predict", "Cl", "-q", "--isotope", "13C").exit_code == 2  # no carbon in HCl


def _demo_commands() -> list[list[str]]:
    """The vibest command lines of scripts/demo.sh (continuation lines joined), as argument lists."""
    import shlex
    from pathlib import Path

    text = (Path(__file__).resolve().parents[1] / "scripts" / "demo.sh").read_text().replace("\\\n", " ")
    return [shlex.split(line)[1:] for line in text.splitlines() if line.strip().startswith(".venv/bin/vibest ")]


@pytest.mark.slow
def test_the_demo_script_commands_run(tmp_path, monkeypatch):
    """Every vibest call of the README's demo command (scripts/demo.sh) is accepted and succeeds,
    writing its outputs (run here with out/ redirected to a temporary folder)."""
    from pathlib import Path

    commands = _demo_commands()
    assert len(commands) >= 2
    root = Path(__file__).resolve().parents[1]
    (tmp_path / "out" / "demo").mkdir(parents=True)
    (tmp_path / "examples").symlink_to(root / "examples")
    monkeypatch.chdir(tmp_path)
    for args in commands:
        res = run(*args)
        assert res.exit_code == 0, (args, res.output)
    assert (tmp_path / "out" / "demo" / "hx07-ranking.csv").exists()
    assert (tmp_path / "out" / "demo" / "hx07-2-butanone.png").exists()


@pytest.mark.parametrize("args, message", [(["--isotope", "99Xx"], "unknown element"),
                                           (["--isotope", "99C"], "no isotope 99C"),
                                           (["--thermo", "--temperature", "-5"], "temperature"),
                                           (["--thermo", "--pressure", "0"], "pressure")])
def test_analysis_options_are_checked_before_any_calculation(monkeypatch, args, message):
    import vibest.pipeline

    def no_calculation(*a, **k):
        raise AssertionError("computed before checking the options")

    monkeypatch.setattr(vibest.pipeline, "predict", no_calculation)
    res = run("predict", "CCO", "-q", *args)
    assert res.exit_code == 2 and message in res.output, res.output

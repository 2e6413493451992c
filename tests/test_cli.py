"""Command line: clear one-line errors with exit code 2, outputs written on request."""

import csv
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
    assert len(data["bands"]) == 3 and data["settings"]["engine"]["method"] == "GFN1-xTB"
    rows = files["csv"].read_text().splitlines()
    # header row first (spreadsheets read it as a table), what it is in the sidecar JSON
    assert rows[0].startswith("wavenumber_cm1") and len(rows) == 1 + 3601
    meta = json.loads((tmp_path / "w.csv.meta.json").read_text())
    assert meta["smiles"] == "O" and "confirm" in meta["caution"] and meta["method"] == "GFN1-xTB"
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
    writing its outputs (run here with out/ redirected to a temporary folder). The optional
    B3LYP step (--with-dft, ~8 minutes) is only parsed here: its refining path is tested in
    tests/test_dft.py with a small basis."""
    from pathlib import Path

    from vibest.cli import main

    commands = _demo_commands()
    dft = [args for args in commands if "--refine-method" in args]
    commands = [args for args in commands if args not in dft]
    assert len(commands) >= 2 and len(dft) == 1
    main.get_command(None, dft[0][0]).make_context(dft[0][0], list(dft[0][1:]))  # options exist and parse
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


def test_output_paths_are_checked_before_any_calculation(monkeypatch, tmp_path):
    import vibest.ranking

    def no_calculation(*a, **k):
        raise AssertionError("computed before checking the outputs")

    monkeypatch.setattr(vibest.ranking, "compute_record", no_calculation)
    blocker = tmp_path / "a-file"
    blocker.write_text("x")
    same = str(tmp_path / "x.out")
    for args, message in ((["--csv", str(blocker / "sub" / "s.csv")], "cannot create the folder"),
                          (["--csv", same, "--json", same], "give each output its own file"),
                          (["--plot", str(tmp_path / "p.txt")], "file type"),
                          (["--json", str(tmp_path)], "is a folder")):
        res = run("predict", "CCO", "-q", "--no-store", *args)
        assert res.exit_code == 2 and message in res.output, (args, res.output)


def test_a_failing_output_does_not_stop_the_others_and_the_result_is_kept(monkeypatch, tmp_path):
    from vibest import output
    from vibest.store import RecordStore

    def broken(pred, path):
        raise OSError(28, "No space left on device")

    monkeypatch.setattr(output, "write_spectrum_csv", broken)
    store = tmp_path / "store.sqlite"
    res = run("predict", "O", "-q", "--store", str(store), "--csv", str(tmp_path / "s.csv"),
              "--json", str(tmp_path / "s.json"), "--workers", "1")
    assert res.exit_code == 2 and "No space left on device" in res.output
    assert (tmp_path / "s.json").exists() and not (tmp_path / "s.csv").exists()
    assert RecordStore(store).count() == 1  # running the command again costs no calculation


def test_files_are_replaced_whole(tmp_path, monkeypatch):
    """A write that fails midway leaves the previous file as it was (temporary file + rename)."""
    from vibest.files import atomic_write_text

    target = tmp_path / "result.json"
    target.write_text("old and complete")

    class Boom(Exception):
        pass

    def failing_fsync(fd):
        raise Boom()

    monkeypatch.setattr("os.fsync", failing_fsync)
    with pytest.raises(Boom):
        atomic_write_text(target, "new" * 1000)
    assert target.read_text() == "old and complete"
    assert [p.name for p in tmp_path.iterdir()] == ["result.json"]  # no temporary file left behind


def test_isotopologues_go_to_csv_and_json_and_atoms_are_numbered(tmp_path):
    """Ethanol-OD: the O-H stretch moves down by a factor near 0.73 (harmonic O-H/O-D reduced-mass
    ratio, 0.728, common practice); the rows reach the CSV and the JSON, and the table numbers the
    atoms that 13C@N refers to."""
    res = run("predict", "CCO", "-q", "--no-store", "--isotope", "D", "--isotopes-csv", str(tmp_path / "i.csv"),
              "--json", str(tmp_path / "i.json"), "--thermo")
    assert res.exit_code == 0, res.output
    assert "# atoms: 1 C, 2 C, 3 O" in res.output
    assert "compare them only between structures" in res.output
    rows = list(csv.DictReader((tmp_path / "i.csv").read_text().splitlines()))
    oh = max(rows, key=lambda r: float(r["parent_cm1"]))
    assert 0.70 < float(oh["isotopologue_cm1"]) / float(oh["parent_cm1"]) < 0.76
    data = json.loads((tmp_path / "i.json").read_text())
    assert data["isotopologues"][0]["isotopologue"] == "D" and len(data["isotopologues"][0]["shifts"]) == len(rows)
    assert run("predict", "CCO", "-q", "--isotopes-csv", str(tmp_path / "x.csv")).exit_code == 2


def test_every_command_is_there_when_run_as_a_module():
    """`python -m vibest.cli` (how benchmarks/hostile.py runs it) registers every command before
    it starts: a command defined below the __main__ guard was missing there (model logic)."""
    import subprocess
    import sys

    out = subprocess.run([sys.executable, "-m", "vibest.cli", "--help"], capture_output=True, text=True, check=True)
    for command in ("predict", "compare", "rank", "check", "batch", "difference", "components", "series", "store"):
        assert f"  {command}" in out.stdout, command


def test_progress_in_a_log_file_says_what_each_stage_works_on(capsys):
    """Progress written to a file (not a terminal) is a few lines: the first of each stage and
    one every 5 s. Candidates read from the store pass in a blink, so the line naming the
    candidate a long calculation is for would be skipped; it is printed when the stage changes
    (found with `check --refine 5 ... 2> log`: the log named no refined candidate)."""
    from vibest.cli import ProgressLine

    progress = ProgressLine()
    assert not progress.tty  # pytest captures stderr
    for k, name in enumerate(["toluene", "benzene", "ethylbenzene"]):
        progress("candidates", k, 3, f"{k}/3 {name} at B3LYP")
    progress("optimisation", 0, 0, "E = -310.9 Eh")
    progress("optimisation", 1, 0, "E = -311.0 Eh")  # within 5 s: skipped, and no stage follows
    lines = [line.split("] ", 1)[1] for line in capsys.readouterr().err.splitlines()]
    assert lines == ["candidates: 0/3 toluene at B3LYP", "candidates: 2/3 ethylbenzene at B3LYP",
                     "optimisation step 0: E = -310.9 Eh"]

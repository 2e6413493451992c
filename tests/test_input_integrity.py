"""Bad input never gives a wrong answer quietly: measured data that cannot be right, candidate and
batch files with odd bytes, ranges, sizes and signals. Each case failed (silently or with a
traceback) before the checks it tests."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
from click.testing import CliRunner

from vibest.cli import main
from vibest.errors import InputError
from vibest.measured import load_spectrum
from vibest.ranking import read_candidates

X = np.arange(4000.0, 399.0, -4.0)


def write(path, text: str | bytes):
    path.write_bytes(text if isinstance(text, bytes) else text.encode())
    return path


def table(values, header="wavenumber,absorbance") -> str:
    return header + "\n" + "\n".join(f"{x:g},{y:g}" for x, y in zip(X, values)) + "\n"


BAND = 0.05 + 0.9 * (np.abs(X - 1700) < 20)


@pytest.mark.parametrize("values, header, message", [
    (np.zeros_like(X), "wavenumber,absorbance", "all zero"),
    (np.full_like(X, 0.5), "wavenumber,absorbance", "flat"),
    (-1.0 - 0.1 * BAND, "wavenumber,absorbance", "zero or negative"),
    (150 + 20 * BAND, "wavenumber,%T", "cannot be below 0 or far above 100"),
    (-0.5 + 0.1 * BAND, "wavenumber,transmittance", "cannot be below 0"),
])
def test_values_that_cannot_be_a_spectrum_are_refused(tmp_path, values, header, message):
    with pytest.raises(InputError, match=message):
        load_spectrum(write(tmp_path / "m.csv", table(values, header)))


def test_a_csv_header_that_says_transmittance_is_honoured(tmp_path):
    t = 100 - 80 * BAND  # percent transmittance: the guess alone could take it either way
    spec = load_spectrum(write(tmp_path / "m.csv", table(t, "wavenumber,%T")))
    assert spec.kind == "transmittance" and any("header says" in n for n in spec.notes)


def test_jcamp_dx_is_read_by_content_whatever_the_name(tmp_path):
    from vibest.measured.jcamp import write_jcamp

    write_jcamp(tmp_path / "s.jdx", X[::-1], BAND[::-1], title="t")
    disguised = write(tmp_path / "s.txt", (tmp_path / "s.jdx").read_bytes())
    a, b = load_spectrum(tmp_path / "s.jdx"), load_spectrum(disguised)
    assert len(a.values) == len(b.values) == len(X) and np.allclose(a.values, b.values)
    assert any("by its content" in n for n in b.notes)


def test_ambiguous_comma_files_are_refused(tmp_path):
    lines = "\n".join(f"{int(x)},5,0,{k % 9}" if k % 2 else f"{int(x)},0,{k % 9}" for k, x in enumerate(X))
    with pytest.raises(InputError, match="ambiguous"):
        load_spectrum(write(tmp_path / "m.csv", lines))


def test_header_only_and_special_files_are_refused(tmp_path):
    with pytest.raises(InputError, match="no data"):
        load_spectrum(write(tmp_path / "h.csv", "wavenumber,absorbance\n"))
    os.mkfifo(tmp_path / "pipe.csv")
    with pytest.raises(InputError, match="not a regular file"):
        load_spectrum(tmp_path / "pipe.csv")  # would block forever if opened
    with pytest.raises(InputError, match="not a regular file"):
        load_spectrum("/dev/zero")  # would read until memory runs out


def test_partial_coverage_is_reported(tmp_path):
    from vibest.comparison import compare

    from .conftest import prediction_of

    keep = X < 1800
    m = load_spectrum(write(tmp_path / "m.csv", "\n".join(f"{x:g},{y:g}" for x, y in zip(X[keep], BAND[keep]))))
    comp = compare(prediction_of("C=O"), m)
    assert comp.coverage < 0.5 and any("cover" in n for n in comp.notes)


@pytest.mark.parametrize("rng, message", [((500, 501), "narrower"), ((3800, 500), "below the high end"),
                                          ((float("nan"), 100), "below the high end")])
def test_bad_comparison_ranges_say_what_is_wrong(rng, message):
    from vibest.comparison import check_range

    with pytest.raises(InputError, match=message):
        check_range(rng)


def test_candidate_files_with_odd_bytes_fail_row_by_row(tmp_path):
    bom = read_candidates(write(tmp_path / "a.txt", b"\xef\xbb\xbfO water\r\nCO methanol\r\n"))
    assert [(c.smiles, c.name, c.problem) for c in bom] == [("O", "water", ""), ("CO", "methanol", "")]
    bad = read_candidates(write(tmp_path / "b.txt", b"O water\n\xff\xfe bad\nCO methanol\n"))
    assert [bool(c.problem) for c in bad] == [False, True, False] and "UTF-8" in bad[1].problem
    extra = read_candidates(write(tmp_path / "c.csv", b"name,smiles\nwater,O,extra\nmethanol,CO\n"))
    assert [c.smiles for c in extra] == ["O", "CO"]
    empty = read_candidates(write(tmp_path / "d.csv", b"name,smiles\nwater,\nmethanol,CO\n"))
    assert "empty smiles" in empty[0].problem and not empty[1].problem


def test_rank_with_every_candidate_failing_exits_non_zero(tmp_path):
    m = write(tmp_path / "m.csv", table(BAND))
    cands = write(tmp_path / "c.txt", "C1CC broken\nXx nonsense\n")
    res = CliRunner().invoke(main, ["rank", str(m), "--candidates-file", str(cands), "-q", "--no-store"])
    assert res.exit_code == 2 and "no candidate could be ranked" in res.output


def test_batch_row_problems_fail_alone(tmp_path):
    inp = write(tmp_path / "in.txt", b"\xef\xbb\xbfO water\r\n\xff bad\r\nC1CC broken\r\n")
    res = CliRunner().invoke(main, ["batch", str(inp), "--store", str(tmp_path / "s.sqlite"), "--workers", "1", "-q"])
    assert res.exit_code == 0 and "computed 1, from store 0, failed 2" in res.output, res.output


def test_a_molecule_beyond_the_size_limit_is_refused_at_once():
    t = time.perf_counter()
    res = CliRunner().invoke(main, ["predict", "C" * 160, "-q", "--no-store"])
    assert res.exit_code == 2 and "--force" in res.output and time.perf_counter() - t < 10


def test_click_usage_errors_are_one_line_and_a_closed_pipe_is_quiet():
    res = subprocess.run([sys.executable, "-m", "vibest.cli", "predict", "O", "--fwhm", "x"],
                         capture_output=True, text=True)
    assert res.returncode == 2 and res.stderr.strip().count("\n") == 0 and res.stderr.startswith("vibest: error:")
    piped = subprocess.run(f"{sys.executable} -m vibest.cli methods | head -1", shell=True, capture_output=True,
                           text=True)
    assert "rror" not in piped.stderr


def test_output_piped_into_a_reader_that_stopped_still_writes_the_files_asked_for(tmp_path):
    """``vibest compare ... --plot F | true``: the reader is gone before the first line; the
    table goes nowhere, but the plot is written and said, and the exit is normal (until
    2026-12-04 the command ended at the first line, exit 0, no plot)."""
    root = os.path.dirname(os.path.dirname(os.path.abspath(__file__)))
    plot = tmp_path / "x.png"
    cmd = (f"{sys.executable} -m vibest.cli compare {root}/examples/hx07-recovered-solvent.csv O --plot {plot} "
           "--no-store --workers 1 | true")
    res = subprocess.run(cmd, shell=True, capture_output=True, text=True, timeout=300)
    assert plot.is_file() and f"wrote {plot}" in res.stderr, res.stderr
    assert "rror" not in res.stderr


@pytest.mark.slow
def test_sigterm_ends_a_batch_like_ctrl_c(tmp_path):
    """SIGTERM (a scheduler stopping the job) gives the summary and exit 130, like Ctrl-C."""
    inp = write(tmp_path / "in.txt", "\n".join(["CCCCCCCCCCCCCCCC", "CCCCCCCCCCCCCCCCO", "CCCCCCCCCCCCCCCCN"] * 4))
    proc = subprocess.Popen([sys.executable, "-m", "vibest.cli", "batch", str(inp), "--store",
                             str(tmp_path / "s.sqlite"), "--workers", "1"], stdout=subprocess.PIPE,
                            stderr=subprocess.PIPE, text=True, preexec_fn=lambda: signal.signal(signal.SIGINT,
                                                                                                signal.SIG_DFL))
    time.sleep(8)
    proc.send_signal(signal.SIGTERM)
    out, err = proc.communicate(timeout=120)
    assert proc.returncode == 130, err
    assert "not run" in err


@pytest.mark.slow
def test_every_real_spectrum_of_the_benchmark_set_passes_the_value_checks(measured_folder):
    """The checks refuse what cannot be a spectrum, never a real one: all 36 files of
    benchmarks/data/measured_set.csv (transmittance up to 110 % in ethane's digitised file)."""
    import measured_set

    for e in measured_set.entries():
        load_spectrum(measured_folder / e.file)

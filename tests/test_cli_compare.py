"""Command line for comparison and ranking: outputs, errors, exit codes."""

import json
from pathlib import Path

import numpy as np
from click.testing import CliRunner

from vibest.cli import main
from vibest.spectrum import grid, line_shape_values

from .conftest import prediction_of


def _measured_csv(path: Path) -> Path:
    """Synthetic spectrum from facts of the trade for a ketone (common practice, no source)."""
    x = grid(450, 3900, 2)
    y = line_shape_values(x, 1715, 16, "lorentzian") + 0.4 * line_shape_values(x, 1365, 16, "lorentzian")
    path.write_text("wavenumber,absorbance\n" + "\n".join(f"{a:.1f},{b:.6f}" for a, b in zip(x, y)))
    return path


def test_compare_command_writes_overlay_and_json(tmp_path):
    m = _measured_csv(tmp_path / "m.csv")
    res = CliRunner().invoke(main, ["compare", str(m), "CC(C)=O", "-q", "--no-store", "--plot",
                                    str(tmp_path / "o.png"), "--json", str(tmp_path / "c.json")])
    assert res.exit_code == 0, res.output
    assert "regional" in res.output and "pearson" in res.output and "C=O stretch" in res.output and "caution" in res.output
    data = json.loads((tmp_path / "c.json").read_text())
    assert data["peak_matches"] and len(data["grid_cm1"]) == len(data["measured_curve"])
    assert (tmp_path / "o.png").stat().st_size > 10000


def test_rank_command_table_csv_and_plots(tmp_path):
    m = _measured_csv(tmp_path / "m.csv")
    cands = tmp_path / "c.txt"
    cands.write_text("CC(C)=O acetone\nCC(N)C#N aminonitrile\n")
    res = CliRunner().invoke(main, ["rank", str(m), "--candidates-file", str(cands), "-q", "--store",
                                    str(tmp_path / "store.sqlite"), "--csv", str(tmp_path / "r.csv"),
                                    "--plot-dir", str(tmp_path / "plots"), "--top", "2"])
    assert res.exit_code == 0, res.output
    lines = [l for l in res.output.splitlines() if l.strip().startswith("1 ")]
    assert lines and "acetone" in lines[0]
    rows = (tmp_path / "r.csv").read_text().splitlines()
    assert rows[0].startswith("rank") and ",acetone," in rows[1] and "shift_cm1" in rows[0]
    assert sorted(p.name for p in (tmp_path / "plots").iterdir()) == ["rank1.png", "rank2.png"]


def test_rank_table_shows_an_unnamed_candidate_once(tmp_path):
    """An unnamed candidate's name is its SMILES: the table said "CC(C)=O  (CC(C)=O)"."""
    m = _measured_csv(tmp_path / "m.csv")
    res = CliRunner().invoke(main, ["rank", str(m), "CC(C)=O", "-q", "--store", str(tmp_path / "s.sqlite")])
    assert res.exit_code == 0, res.output
    row = next(l for l in res.output.splitlines() if l.strip().startswith("1 "))
    assert row.count("CC(C)=O") == 1 and row.rstrip().endswith("CC(C)=O (SMILES)"), row


def test_missing_measured_file_and_no_candidates_exit_2(tmp_path):
    res = CliRunner().invoke(main, ["rank", str(tmp_path / "none.jdx"), "CC", "-q"])
    assert res.exit_code == 2 and "no such file" in res.output
    m = _measured_csv(tmp_path / "m.csv")
    res = CliRunner().invoke(main, ["rank", str(m), "-q"])
    assert res.exit_code == 2 and "candidate" in res.output


def test_predict_writes_jcamp_that_reads_back(tmp_path):
    from vibest.measured import load_spectrum

    out = tmp_path / "p.jdx"
    res = CliRunner().invoke(main, ["predict", "O", "-q", "--jcamp", str(out)])
    assert res.exit_code == 0, res.output
    spec = load_spectrum(out)
    pred = prediction_of("O").spectrum
    assert spec.kind == "absorbance"
    np.testing.assert_allclose(spec.wavenumbers_cm1, pred.wavenumbers_cm1, atol=1e-6)
    np.testing.assert_allclose(spec.values, pred.absorbance_normalised, atol=1e-6)


def test_compare_computes_hydrogen_bonding_for_a_condensed_sample_unless_told_not_to(tmp_path):
    """A CSV states no phase: taken as condensed, methanol's O-H bands come from its computed
    hydrogen-bonded cluster (said in a note); --no-h-bonds keeps the free molecule's and says
    nothing of clusters."""
    m = _measured_csv(tmp_path / "m.csv")
    store = ["--store", str(tmp_path / "s.sqlite")]
    res = CliRunner().invoke(main, ["compare", str(m), "CO", "-q", *store])
    assert res.exit_code == 0, res.output
    assert "hydrogen bonding computed on the chain trimer" in res.output
    res = CliRunner().invoke(main, ["compare", str(m), "CO", "-q", "--no-h-bonds", *store])
    assert res.exit_code == 0, res.output
    assert "hydrogen bonding" not in res.output

"""Several solvers on the same data, one ranked table: the order is overall
MAE, each solver's score is the one it gets alone, the difference to the
best is the difference of the two MAEs with a bootstrap interval around it,
a solver that fails is listed without a score (exit 1), and a dataset
already written is reused with --dataset."""
import json
import sys

from conftest import ROOT, loadloom

PY = sys.executable
DEMO = ROOT / "scenarios" / "apartment-208.toml"
SHARE = f"{PY} {ROOT / 'tests' / 'python' / 'solvers' / 'share.py'} {{task}} {{estimate}}"
CRASH = f"{PY} {ROOT / 'tests' / 'python' / 'solvers' / 'misbehave.py'} crash {{task}} {{estimate}}"


def board(out, *solvers, extra=(), check=True):
    args = ["roundtrip", DEMO, "--train", "1d", "--test", "2d", "--out", out, *extra]
    for s in solvers:
        args += ["--solver", s]
    return loadloom(*args, check=check)


def test_solvers_are_ranked_by_mae_with_their_difference_to_the_best(tmp_path):
    p = board(tmp_path / "b", "builtin:training-mean", "builtin:combinatorial", SHARE, extra=["--json"])
    r = json.loads(p.stdout)
    assert r["format"] == "loadloom-leaderboard/1" and r["failed"] == []
    maes = [s["overall"]["mae_w"] for s in r["solvers"]]
    assert maes == sorted(maes) and [s["rank"] for s in r["solvers"]] == [1, 2, 3]
    assert {s["solver"]["command"] for s in r["solvers"]} == {"builtin:training-mean", "builtin:combinatorial", SHARE}
    assert r["solvers"][0]["mae_to_best_w"] is None
    for s in r["solvers"][1:]:
        d = s["mae_to_best_w"]
        assert abs(d["delta"] - (s["overall"]["mae_w"] - maes[0])) < 1e-9
        assert d["ci_low"] <= d["delta"] <= d["ci_high"]
    # Each solver's score is the one it gets alone on the same data.
    alone = json.loads(loadloom("roundtrip", DEMO, "--train", "1d", "--test", "2d", "--out", tmp_path / "a", "--solver", "builtin:combinatorial", "--json").stdout)
    ranked = next(s for s in r["solvers"] if s["solver"]["command"] == "builtin:combinatorial")
    assert ranked["overall"] == alone["overall"]
    # Every solver kept its own folder.
    assert len(list((tmp_path / "b" / "apartment-208-roundtrip" / "solvers").iterdir())) == 3


def test_text_and_markdown_tables(tmp_path):
    text = board(tmp_path, "builtin:training-mean", "builtin:combinatorial", extra=["--quiet"])
    assert "MAE − best W (95 %)" in text.stdout and "best" in text.stdout and "MAE W by rank" in text.stdout
    assert text.stderr == ""
    md = board(tmp_path, "builtin:training-mean", "builtin:combinatorial", extra=["--markdown"]).stdout
    assert "| rank | solver | MAE W |" in md and "| MAE W by rank | #1 | #2 |" in md


def test_a_failing_solver_is_listed_without_a_score(tmp_path):
    p = board(tmp_path, "builtin:combinatorial", CRASH, extra=["--json"], check=False)
    assert p.returncode == 1
    r = json.loads(p.stdout)
    assert [s["solver"]["command"] for s in r["solvers"]] == ["builtin:combinatorial"]
    assert r["failed"][0]["solver"] == CRASH and "exit status: 3" in r["failed"][0]["failure"]


def test_a_dataset_is_reused(tmp_path):
    alone = json.loads(board(tmp_path / "a", "builtin:combinatorial", extra=["--json"]).stdout)
    data = tmp_path / "a" / "apartment-208-roundtrip" / "apartment-208"
    p = loadloom("roundtrip", "--dataset", data, "--train", "1d", "--test", "2d", "--out", tmp_path / "b", "--solver", "builtin:combinatorial", "--json")
    assert json.loads(p.stdout)["overall"] == alone["overall"]
    p = loadloom("roundtrip", "--dataset", data, "--train", "2d", "--test", "2d", "--out", tmp_path / "b", "--solver", "builtin:combinatorial", check=False)
    assert p.returncode == 2 and "the dataset has 259200" in p.stderr, p.stderr
    # A dataset changed since it was written is refused before any solver runs.
    (data / "events.parquet").write_bytes(b"changed")
    p = loadloom("roundtrip", "--dataset", data, "--train", "1d", "--test", "1d", "--out", tmp_path / "c", "--solver", "builtin:combinatorial", check=False)
    assert p.returncode == 2 and "events.parquet" in p.stderr, p.stderr

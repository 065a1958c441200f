"""The round trip cannot be cheated: solvers from tests/python/solvers/cheat.py
(written from the task contract alone, sharing no code with the scorer) try
to hand back the training truth, a short or shifted estimate, to read or
overwrite the test truth, to link their estimate to it, or to leave a
daemon behind. Each gets no score, or a score its cheating did not change.
Also: `score` refuses a truth file changed after it was written, and a
manifest whose row counts disagree."""
import json
import os
import pathlib
import sys
import time

import pandas as pd
import pytest

from conftest import ROOT, loadloom

HERE = pathlib.Path(__file__).parent
PY = sys.executable
DEMO = ROOT / "scenarios" / "apartment-208.toml"
CHEAT = HERE / "solvers" / "cheat.py"


def roundtrip(solver, out, *extra, check=False, env=None):
    args = ["roundtrip", DEMO, "--solver", solver, "--train", "1d", "--test", "1d", "--out", out, *extra]
    if env is None:
        return loadloom(*args, check=check)
    import subprocess
    from conftest import BIN
    return subprocess.run([BIN, *map(str, args)], capture_output=True, text=True, env={**os.environ, **env})


def cheat(mode):
    return f"{PY} {CHEAT} {mode} {{task}} {{estimate}}"


@pytest.mark.parametrize("mode,needle", [
    ("train-truth", "extra time 2027-01-04T00:00:00"),   # the training days, not the test day
    ("one-row", "missing time 2027-01-05T00:00:01"),
    ("short", "missing time 2027-01-05T23:59:50"),
    ("shifted", "missing time 2027-01-05T00:00:00"),
    ("early", "extra time 2027-01-04T23:00:00"),
])
def test_estimates_of_other_rows_get_no_score(tmp_path, mode, needle):
    p = roundtrip(cheat(mode), tmp_path)
    assert p.returncode == 1, p.stdout
    assert needle in p.stderr and "no score" in p.stderr, p.stderr
    assert "MAE" not in p.stdout
    # `score` on the same files refuses too, with exit status 2.
    work = tmp_path / "apartment-208-roundtrip"
    s = loadloom("score", "--truth", work / "test-truth", "--estimate", work / "solver" / "estimate.parquet", check=False)
    assert s.returncode == 2 and needle in s.stderr, s.stderr
    # --partial is about appliances, never rows.
    s = loadloom("score", "--truth", work / "test-truth", "--estimate", work / "solver" / "estimate.parquet", "--partial", check=False)
    assert s.returncode == 2 and needle in s.stderr, s.stderr


def score_of(p):
    assert p.returncode == 0, p.stderr
    return json.loads(p.stdout)


def test_a_solver_cannot_read_or_overwrite_the_truth(tmp_path):
    honest = score_of(roundtrip(cheat("honest"), tmp_path / "a", "--json"))
    assert "confined by Landlock" in honest["solver"]["confinement"], "this machine's kernel offers Landlock"
    for mode in ["read-truth", "overwrite-truth"]:
        p = roundtrip(cheat(mode), tmp_path / mode, "--json")
        r = score_of(p)
        log = (tmp_path / mode / "apartment-208-roundtrip" / "solver.log").read_text()
        assert "denied" in log and "read the truth" not in log and "overwrote" not in log, log
        assert r["overall"] == honest["overall"], "the cheating changed nothing"
        assert r["overall"]["mae_w"] > 1


def test_an_unconfined_solver_that_overwrites_the_truth_gets_no_score(tmp_path):
    p = roundtrip(cheat("overwrite-truth"), tmp_path, env={"LOADLOOM_CONFINE": "off"})
    assert p.returncode == 1, p.stdout
    assert "the truth file changed after it was written" in p.stderr, p.stderr
    assert "not confined" in p.stderr
    task = json.loads((tmp_path / "apartment-208-roundtrip" / "task" / "task.json").read_text())
    assert task["log"].startswith("not confined")


def test_an_estimate_linked_to_the_truth_gets_no_score(tmp_path):
    p = roundtrip(cheat("link-truth"), tmp_path, env={"LOADLOOM_CONFINE": "off"})
    assert p.returncode == 1 and "a link, not a file" in p.stderr, p.stderr


def test_a_truth_named_in_the_solver_command_stays_out_of_reach(tmp_path):
    # Hostile: files named in the command are readable, and with --dataset
    # the dataset's whole truth exists before the solver starts.
    ds = tmp_path / "ds"
    loadloom("run", DEMO, "--length", "2d", "--out", ds, "--quiet")
    data = ds / "apartment-208"
    truth = data / "truth.parquet"
    p = loadloom("roundtrip", "--dataset", data, "--solver", cheat("read-named") + f" {truth}",
                 "--train", "1d", "--test", "1d", "--out", tmp_path / "out", "--json", check=False)
    r = score_of(p)
    log = next((tmp_path / "out").rglob("solver.log")).read_text()
    assert "denied" in log and "read the truth" not in log, log
    assert r["overall"]["mae_w"] > 1


def test_a_solver_flooding_its_log_is_stopped(tmp_path):
    p = roundtrip(cheat("flood"), tmp_path)
    assert p.returncode == 1 and "output passed 64 MiB" in p.stderr and "no score" in p.stderr, p.stderr[-2000:]
    log = tmp_path / "apartment-208-roundtrip" / "solver.log"
    # Checked at every 10 ms poll: the overshoot is what it prints in that time.
    assert log.stat().st_size < 128 << 20, log.stat().st_size
    assert len(p.stderr) < 20000, "the report quotes the log's last lines, cut short"


@pytest.mark.parametrize("mode,needle", [
    ("huge", "beyond any reading"),
    ("gigawatt", "beyond 1 GW"),
    ("repeated-column", "appears more than once"),
])
def test_wild_estimates_get_a_report_not_a_panic_or_an_infinity(tmp_path, mode, needle):
    p = roundtrip(cheat(mode), tmp_path)
    assert p.returncode == 1 and needle in p.stderr and "no score" in p.stderr, p.stderr
    assert "panicked" not in p.stderr and "inf" not in p.stdout.split(), p.stdout


def test_a_daemon_left_behind_is_stopped(tmp_path):
    p = roundtrip(cheat("daemon"), tmp_path)
    assert p.returncode == 0, p.stderr
    assert "left running were stopped" in p.stdout or "left running was stopped" in p.stdout, p.stdout
    pid = int((tmp_path / "apartment-208-roundtrip" / "solver" / "scratch" / "daemon.pid").read_text())
    time.sleep(0.2)
    alive = pathlib.Path(f"/proc/{pid}").exists() and "Z" not in (pathlib.Path(f"/proc/{pid}/stat").read_text().split(")")[-1].split()[:1] or ["Z"])
    assert not alive, f"the daemon {pid} outlived the round trip"


def test_placeholders_in_paths_are_not_substituted_twice(tmp_path):
    out = tmp_path / "{estimate}"
    p = roundtrip(cheat("honest"), out, "--json")
    r = score_of(p)
    assert r["period"]["rows"] == 86400


def test_a_planted_log_link_is_not_written_through(tmp_path):
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me\n")
    work = tmp_path / "out" / "apartment-208-roundtrip"
    work.mkdir(parents=True)
    (work / "solver.log").symlink_to(victim)
    for solver in [cheat("honest"), "builtin:training-mean"]:
        score_of(roundtrip(solver, tmp_path / "out", "--json"))
        assert victim.read_text() == "keep me\n"
        assert not (work / "solver.log").is_symlink()
        (work / "solver.log").unlink()
        (work / "solver.log").symlink_to(victim)


@pytest.fixture
def scored(tmp_path):
    p = roundtrip(cheat("honest"), tmp_path, "--json")
    score_of(p)
    work = tmp_path / "apartment-208-roundtrip"
    return work / "test-truth", work / "solver" / "estimate.parquet"


def test_score_refuses_a_truth_changed_after_it_was_written(scored):
    truth, est = scored
    assert loadloom("score", "--truth", truth, "--estimate", est).returncode == 0
    # Rewritten with the same rows and columns, one value changed (pyarrow
    # writes it: not our writer).
    t = pd.read_parquet(truth / "truth.parquet")
    col = [c for c in t.columns if c.endswith("_p_w")][0]
    t.loc[5, col] += 100.0
    t.to_parquet(truth / "truth.parquet")
    p = loadloom("score", "--truth", truth, "--estimate", est, check=False)
    assert p.returncode == 2 and "the truth file changed after it was written" in p.stderr, p.stderr


def test_score_refuses_a_manifest_whose_row_counts_disagree(scored):
    truth, est = scored
    m = json.loads((truth / "manifest.json").read_text())
    m["files"]["truth.parquet"]["rows"] += 1
    (truth / "manifest.json").write_text(json.dumps(m))
    p = loadloom("score", "--truth", truth, "--estimate", est, check=False)
    assert p.returncode == 2 and "row counts disagree" in p.stderr, p.stderr


SLICE_HOME = """
[home]
label = "A two-row-group flat (invented)"
supply = "split-phase"
timezone = "America/New_York"

[run]
start = "2027-01-04T00:00"
length = "13 d"
seed = 5

[meter]
interval = "1 s"

[[appliance]]
id = "fridge"
template = "fridge"

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"
"""


def row_group_starts(path):
    import pyarrow.parquet as pq
    md = pq.ParquetFile(path).metadata
    starts, at = [], 0
    for g in range(md.num_row_groups):
        starts.append(at)
        at += md.row_group(g).num_rows
    return starts


@pytest.mark.parametrize("source", ["scenario", "dataset"])
def test_task_and_scored_truth_are_exact_slices_of_the_dataset(tmp_path, source):
    # From a scenario, the round trip cuts the dataset's row groups at the
    # train/test boundary (each period is copied as encoded); a dataset
    # written by `run` (row groups of 1 Mi rows) has a row group straddling
    # the boundary, re-encoded. pyarrow must read back exactly the
    # dataset's rows either way.
    import pyarrow.parquet as pq
    (tmp_path / "flat.toml").write_text(SLICE_HOME)
    if source == "scenario":
        loadloom("roundtrip", tmp_path / "flat.toml", "--solver", "builtin:combinatorial", "--train", "1d", "--test", "12d", "--out", tmp_path)
        w, ds = tmp_path / "flat-roundtrip", tmp_path / "flat-roundtrip" / "flat"
    else:
        loadloom("run", tmp_path / "flat.toml", "--out", tmp_path / "made")
        ds = tmp_path / "made" / "flat"
        loadloom("roundtrip", "--dataset", ds, "--solver", "builtin:combinatorial", "--train", "1d", "--test", "12d", "--out", tmp_path)
        w = tmp_path / "flat-roundtrip"
    for table in ("meters", "truth"):
        starts = row_group_starts(ds / f"{table}.parquet")
        assert len(starts) >= 2
        assert (86400 in starts) == (source == "scenario"), (table, starts)
    for table, part, dst in [("meters", "train", w / "task" / "train" / "meters.parquet"), ("truth", "train", w / "task" / "train" / "truth.parquet"),
                             ("meters", "test", w / "task" / "test" / "meters.parquet"), ("truth", "test", w / "test-truth" / "truth.parquet")]:
        full = pq.read_table(ds / f"{table}.parquet")
        got = pq.read_table(dst)
        want = full.slice(0, 86400) if part == "train" else full.slice(86400)
        assert got.num_rows == want.num_rows and got.to_pandas().equals(want.to_pandas()), (table, part)
        assert got.schema.field("time").type == full.schema.field("time").type


def test_meters_with_missing_rows_are_refused_before_simulating(tmp_path):
    # The task is cut at the same rows of meters and truth, so dropouts left
    # out of the meters table would shift every test reading: refused, exit 2.
    text = DEMO.read_text().replace(
        "[meter]",
        '[faults]\ndropouts = { rate = "5 %", length = { median = "10 min", spread = 0.8 }, as = "missing" }\n\n[meter]',
        1,
    )
    assert "dropouts" in text
    home = tmp_path / "gapped.toml"
    home.write_text(text)
    out = tmp_path / "out"
    p = loadloom("roundtrip", home, "--solver", "builtin:training-mean", "--train", "1d", "--test", "1d", "--out", out, check=False)
    assert p.returncode == 2, p.stderr
    assert 'as = "missing"' in p.stderr and 'as = "null"' in p.stderr, p.stderr
    assert not out.exists() or not any(out.iterdir())

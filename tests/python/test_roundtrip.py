"""The round trip end to end: an external Python solver and every built-in
solver on every demo scenario; solvers that crash, hang, stay silent or write
a malformed estimate get a report (exit 1), never a score."""
import json
import pathlib
import sys
import time

import pytest

from conftest import ROOT, loadloom

HERE = pathlib.Path(__file__).parent
# The built-in solvers share out the metered total, which in a home with
# rooftop PV or a battery is net of what those make and store: they do not
# model generation, so their energy-error bound below holds for homes
# without it (the PV demo's data is checked in test_pv.py and test_contract.py).
DEMOS = sorted(p for p in (ROOT / "scenarios").glob("*.toml") if "[pv]" not in p.read_text())
PY = sys.executable


def roundtrip(scenario, solver, out, *extra, check=True):
    return loadloom("roundtrip", scenario, "--solver", solver, "--train", "2d", "--test", "1d", "--out", out, *extra, check=check)


@pytest.mark.parametrize("demo", DEMOS, ids=[d.stem for d in DEMOS])
@pytest.mark.parametrize("solver", ["builtin:training-mean", "builtin:combinatorial", "builtin:combinatorial-per-line", "python"])
def test_every_solver_on_every_demo(demo, solver, tmp_path):
    cmd = f"{PY} {HERE / 'solvers' / 'share.py'} {{task}} {{estimate}}" if solver == "python" else solver
    p = roundtrip(demo, cmd, tmp_path, "--json")
    r = json.loads(p.stdout)
    work = tmp_path / f"{demo.stem}-roundtrip"
    task = json.loads((work / "task" / "task.json").read_text())
    assert task["format"] == "loadloom-task/1" and task["train"]["rows"] == 2 * 86400 and task["test"]["rows"] == 86400
    assert r["period"]["rows"] == 86400, "only the test day is scored"
    assert r["period"]["start"] == task["test"]["start"]
    assert len(r["appliances"]) == len(task["appliances"]) >= 15
    o = r["overall"]
    assert 0 <= o["f1"] <= 1 and o["mae_w"] >= 0
    if solver != "builtin:training-mean":
        # Every solver that follows the measured total gets the energy nearly right.
        assert abs(o["energy_error_pct"]) < 15, o


def test_reveal_levels_hide_what_they_should(tmp_path):
    demo = ROOT / "scenarios" / "three-phase-house.toml"
    for level, keys in [("ids", {"id"}), ("wiring", {"id", "label", "wiring", "connections", "conductors"}), ("states", {"id", "label", "wiring", "connections", "conductors", "on_threshold_w", "states"})]:
        roundtrip(demo, "builtin:training-mean", tmp_path, "--reveal", level)
        task = json.loads((tmp_path / "three-phase-house-roundtrip" / "task" / "task.json").read_text())
        assert task["reveal"] == level
        assert all(set(a) == keys for a in task["appliances"]), level
    assert not (tmp_path / "three-phase-house-roundtrip" / "task" / "test" / "truth.parquet").exists()


def test_csv_estimates_from_an_external_solver(tmp_path):
    demo = ROOT / "scenarios" / "apartment-208.toml"
    p = roundtrip(demo, f"{PY} {HERE / 'solvers' / 'share.py'} {{task}} {{estimate}}", tmp_path, "--estimate-format", "csv", "--json")
    assert json.loads(p.stdout)["period"]["rows"] == 86400


@pytest.mark.parametrize("mode,needle", [("crash", "exit status: 3"), ("silent", "without writing its estimate"), ("malformed", "malformed"), ("hang", "time limit")])
def test_misbehaving_solvers_get_a_report_not_a_score(tmp_path, mode, needle):
    demo = ROOT / "scenarios" / "split-phase-house.toml"
    cmd = f"{PY} {HERE / 'solvers' / 'misbehave.py'} {mode} {{task}} {{estimate}}"
    t = time.time()
    # A short limit only where the solver hangs. The others end on their own
    # (a crash, a silent exit, a malformed file) and are given a limit far
    # beyond any machine's start-up, so load cannot turn their report into
    # "time limit": the needle still fails the test if the report is wrong.
    limit = "3s" if mode == "hang" else "300s"
    p = roundtrip(demo, cmd, tmp_path, "--timeout", limit, check=False)
    assert p.returncode == 1, p.stdout
    assert needle in p.stderr, p.stderr
    assert "no score" in p.stderr and "MAE" not in p.stdout
    if mode == "crash":
        assert "about to fail" in p.stderr, "the log's last lines are shown"
    if mode == "hang":
        assert time.time() - t < 60
    else:
        assert "time limit" not in p.stderr, p.stderr


def test_bad_solver_commands_exit_2(tmp_path):
    demo = ROOT / "scenarios" / "split-phase-house.toml"
    for cmd, needle in [("builtin:magic", "no built-in solver"), ("python3 mine.py", "{task} and {estimate}"), ("'unclosed {task} {estimate}", "unclosed quote")]:
        p = roundtrip(demo, cmd, tmp_path, check=False)
        assert p.returncode == 2 and needle in p.stderr, p.stderr


def test_suite_prints_how_scores_degrade(tmp_path):
    demo = ROOT / "scenarios" / "three-phase-house.toml"
    p = loadloom("roundtrip", demo, "--suite", "--solver", "builtin:combinatorial", "--train", "1d", "--test", "1d", "--out", tmp_path, "--json")
    r = json.loads(p.stdout)
    assert r["format"] == "loadloom-suite/1"
    rungs = [x["rung"] for x in r["rows"]]
    assert rungs == ["as written", "noise 1 % + 5 W", "noise 3 % + 15 W", "unmetered 20 %", "interval 10 s", "interval 1 min"]
    acc = [x["overall"]["accuracy"] for x in r["rows"]]
    # Much more meter noise, or a fifth of the energy unlisted, cannot make a
    # combinatorial solver better.
    assert acc[2] <= acc[0] + 0.01 and acc[3] < acc[0] - 0.02
    # Each rung keeps its own folder; the unmetered rung's background draws
    # about a fifth of the energy.
    suite = tmp_path / "three-phase-house-suite"
    m = json.loads((suite / "unmetered-20" / "three-phase-house" / "manifest.json").read_text())
    assert abs(m["summary"]["unmetered_energy_share"] - 0.2) < 0.06, m["summary"]
    assert json.loads((suite / "interval-1-min" / "three-phase-house" / "manifest.json").read_text())["meter"]["interval_s"] == 60
    text = loadloom("roundtrip", demo, "--suite", "--solver", "builtin:training-mean", "--train", "1d", "--test", "1d", "--out", tmp_path).stdout
    assert "accuracy vs as written" in text and "interval 1 min" in text


def test_old_builtin_ids_work_for_one_release_with_a_deprecation_line(tmp_path):
    demo = ROOT / "scenarios" / "apartment-208.toml"
    for old, new in [("mean", "training-mean"), ("co", "combinatorial"), ("co-conductor", "combinatorial-per-line")]:
        p = roundtrip(demo, f"builtin:{old}", tmp_path, "--json")
        assert f"builtin:{old} is renamed builtin:{new}" in p.stderr, p.stderr
        assert json.loads(p.stdout)["solver"]["command"] == f"builtin:{new}"
    p = roundtrip(demo, "builtin:combinatorial", tmp_path, "--json")
    assert "renamed" not in p.stderr

"""Unseen homes: `roundtrip --fleet POP --train-homes N --test-homes M`.

The pooled scores are recomputed from the files alone (each test home's
scored truth and the solver's estimate, read with pyarrow) with
scikit-learn's mean_absolute_error, mean_squared_error and f1_score, and
numpy for NDE (Zhong, Goddard, Sutton, NIPS 2014) and the match rate
(Mayhorn et al., PNNL, 2016). "Pooled" means every (home, appliance, row)
triple counted once; F1 is the average over every home's appliances.
"""
import json
import sys

import numpy as np
import pyarrow.parquet as pq
import pytest
from sklearn.metrics import f1_score, mean_absolute_error, mean_squared_error

from conftest import ROOT, loadloom

POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"
ARGS = ("--train-homes", "3", "--test-homes", "2", "--train", "2d", "--test", "1d")


def crosshome(tmp_path, solver, *extra, check=True):
    p = loadloom("roundtrip", "--fleet", POP, *ARGS, "--solver", solver, "--out", tmp_path, *extra, check=check)
    return p, tmp_path / "mixed-street-crosshome"


def pairs(work, report):
    """(home, id, truth, estimate, threshold) from the files, aligned on time."""
    out = []
    for h in report["test_homes"]:
        name = h["home"]
        truth = pq.read_table(work / "test-truth" / name / "truth.parquet").to_pandas()
        est = pq.read_table(work / "solver" / "estimates" / f"{name}.parquet").to_pandas()
        assert (truth["time"].values == est["time"].values).all(), name
        manifest = json.loads((work / "test-truth" / name / "manifest.json").read_text())
        for a in manifest["appliances"]:
            out.append((name, a["id"], truth[f"{a['id']}_p_w"].to_numpy(np.float64),
                        est[f"{a['id']}_p_w"].to_numpy(np.float64), a["on_threshold_w"]))
    return out


def test_pooled_scores_match_an_outside_computation(tmp_path):
    p, work = crosshome(tmp_path, "builtin:combinatorial", "--json")
    r = json.loads(p.stdout)
    assert r["format"] == "loadloom-crosshome/1"
    assert r["train_homes"] == ["home=00000", "home=00001", "home=00002"]
    assert [h["home"] for h in r["test_homes"]] == ["home=00003", "home=00004"]
    pp = pairs(work, r)
    y = np.concatenate([x[2] for x in pp])
    yh = np.concatenate([x[3] for x in pp])
    o = r["pooled"]["overall"]
    assert o["rows"] == sum(h["report"]["period"]["rows"] for h in r["test_homes"])
    assert o["mae_w"] == pytest.approx(mean_absolute_error(y, yh), rel=1e-9)
    assert o["rmse_w"] == pytest.approx(np.sqrt(mean_squared_error(y, yh)), rel=1e-9)
    assert o["nde"] == pytest.approx(np.sum((y - yh) ** 2) / np.sum(y ** 2), rel=1e-9)
    assert o["match_rate"] == pytest.approx(np.minimum(y, yh).sum() / np.maximum(y, yh).sum(), rel=1e-9)
    f1 = [f1_score(t > thr, e > thr, zero_division=0) for _, _, t, e, thr in pp]
    assert o["f1"] == pytest.approx(np.mean(f1), rel=1e-9)
    # Per appliance id, pooled over the homes that have it.
    for a in r["pooled"]["appliances"]:
        mine = [x for x in pp if x[1] == a["id"]]
        assert a["homes"] == len(mine)
        assert a["mae_w"] == pytest.approx(mean_absolute_error(np.concatenate([x[2] for x in mine]),
                                                              np.concatenate([x[3] for x in mine])), rel=1e-9)
    # Each home's own report is the single-home score of its files.
    for h in r["test_homes"]:
        mine = [x for x in pp if x[0] == h["home"]]
        yy, ee = np.concatenate([x[2] for x in mine]), np.concatenate([x[3] for x in mine])
        assert h["report"]["overall"]["mae_w"] == pytest.approx(mean_absolute_error(yy, ee), rel=1e-9)


def test_the_test_homes_truth_is_outside_the_task(tmp_path):
    _, work = crosshome(tmp_path, "builtin:training-mean", "--quiet")
    task = json.loads((work / "task" / "task.json").read_text())
    assert task["format"] == "loadloom-fleet-task/1"
    assert not list((work / "task" / "test").rglob("truth*")), "test truth inside the task folder"
    assert len(list((work / "task" / "train").rglob("truth.parquet"))) == 3
    for h in task["test"]:
        manifest = json.loads((work / "test-truth" / h["home"] / "manifest.json").read_text())
        assert manifest["files"]["truth.parquet"]["rows"] == h["rows"]
        meters = pq.read_table(work / "task" / h["meters"])
        assert meters.num_rows == h["rows"]


SOLVER = r'''
import json, os, sys
import pyarrow as pa, pyarrow.parquet as pq
task_dir, out = sys.argv[1], sys.argv[2]
task = json.load(open(os.path.join(task_dir, "task.json")))
work = os.path.dirname(task_dir.rstrip("/"))
for h in task["test"]:
    meters = pq.read_table(os.path.join(task_dir, h["meters"]))
    cols = {"time": meters.column("time")}
    # A cheat: the scored truth, if it can be read at all.
    try:
        truth = pq.read_table(os.path.join(work, "test-truth", h["home"], "truth.parquet"))
        print("read the truth", file=sys.stderr)
    except Exception:
        truth = None
    for a in h["appliances"]:
        c = f"{a['id']}_p_w"
        cols[c] = truth.column(c).cast(pa.float64()) if truth is not None else pa.array([1.0] * meters.num_rows)
    pq.write_table(pa.table(cols), os.path.join(out, h["estimate"]))
'''


def test_an_external_solver_is_confined_and_cannot_read_the_truth(tmp_path):
    (tmp_path / "solver.py").write_text(SOLVER)
    p, work = crosshome(tmp_path / "o", f"{sys.executable} {tmp_path / 'solver.py'} {{task}} {{estimate}}", "--json", "--quiet")
    r = json.loads(p.stdout)
    if "confined by Landlock" not in r["solver"]["confinement"]:
        pytest.skip("this kernel offers no Landlock")
    assert "read the truth" not in (work / "solver.log").read_text()
    assert r["pooled"]["overall"]["mae_w"] > 0
    pp = pairs(work, r)
    assert all((x[3] == 1.0).all() for x in pp)


def test_a_missing_estimate_costs_that_home_its_score(tmp_path):
    (tmp_path / "solver.py").write_text(SOLVER.replace('for h in task["test"]:', 'for h in task["test"][:1]:'))
    p, _ = crosshome(tmp_path / "o", f"{sys.executable} {tmp_path / 'solver.py'} {{task}} {{estimate}}", "--json", check=False)
    assert p.returncode == 1, p.stderr
    r = json.loads(p.stdout)
    assert "report" in r["test_homes"][0] and "failure" in r["test_homes"][1]
    assert r["pooled"]["homes"] == 1


@pytest.mark.parametrize("args", [("--train-homes", "0"), ("--test-homes", "0"), ("--train", "0d")])
def test_bad_counts_are_refused(tmp_path, args):
    p = loadloom("roundtrip", "--fleet", POP, "--solver", "builtin:training-mean", "--out", tmp_path, *args, check=False)
    assert p.returncode == 2, p.stderr
    assert p.stderr.startswith("error: ")


def test_homes_without_a_fleet_are_refused(tmp_path):
    p = loadloom("roundtrip", ROOT / "scenarios" / "apartment-208.toml", "--train-homes", "3",
                 "--solver", "builtin:training-mean", "--out", tmp_path, check=False)
    assert p.returncode == 2 and "--fleet" in p.stderr


def test_the_previous_period_spelling_still_works_with_a_warning(tmp_path):
    p = loadloom("roundtrip", ROOT / "scenarios" / "apartment-208.toml", "--train-days", "1", "--test-days", "1",
                 "--solver", "builtin:training-mean", "--out", tmp_path, "--json")
    assert "--train-days is spelled --train now" in p.stderr and "--test-days is spelled --test now" in p.stderr
    assert json.loads(p.stdout)["period"]["rows"] == 86400

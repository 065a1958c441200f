"""Scores checked against scikit-learn (mean_absolute_error, mean_squared_error,
precision_recall_fscore_support) and numpy implementations written from the
cited formulas (README, "Scoring an estimate"), plus known answers and bad estimates."""
import json

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from sklearn.metrics import mean_absolute_error, mean_squared_error, precision_recall_fscore_support

from conftest import loadloom

HOME = """
[home]
supply = "three-phase"
voltage = "230 V"
timezone = "Europe/Madrid"
[run]
start = "2027-03-27T00:00"
length = "3 d"
seed = 5
[meter]
interval = "10 s"

[[appliance]]
id = "kettle"
wiring = "L1-N"
behaviour = "program"
use = { starts_per_day = 6 }
phases = [ { name = "boil", length = "4 min", power = "2.2 kW" } ]

[[appliance]]
id = "fridge"
wiring = "L2-N"
behaviour = "cycle"
load = "motor"
states = [ { name = "idle", power = "3 W", dwell = "18 min" }, { name = "cool", power = "95 W", pf = 0.8, dwell = { median = "11 min", spread = 0.3 } } ]

[[appliance]]
id = "oven"
wiring = "L2-L3"
behaviour = "program"
use = { starts_per_day = 1, hours = "17-20" }
phases = [ { name = "heat", length = "25 min", power = "3 kW" }, { name = "hold", length = "30 min", power = "1.2 kW" } ]
"""


@pytest.fixture
def data(simulate):
    d = simulate(HOME)
    m = json.loads((d / "manifest.json").read_text())
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    return d, m, truth


def score(d, est_path, *extra, check=True):
    p = loadloom("score", "--truth", d, "--estimate", est_path, "--json", *extra, check=check)
    return json.loads(p.stdout) if p.returncode == 0 else p


def noisy_estimate(m, truth, seed=3):
    rng = np.random.default_rng(seed)
    est = pd.DataFrame({"time": truth["time"]})
    for a in m["appliances"]:
        y = truth[f"{a['id']}_p_w"].to_numpy(float)
        y_hat = np.roll(y, 2) * rng.uniform(0.8, 1.2, len(y)) + rng.normal(0, 15, len(y))
        y_hat[rng.random(len(y)) < 0.05] = 0.0
        est[f"{a['id']}_p_w"] = np.clip(y_hat, 0, None)
    return est


def reference(y, y_hat, thr):
    on, on_hat = y > thr, y_hat > thr
    p, r, f, _ = precision_recall_fscore_support(on, on_hat, average="binary", zero_division=0)
    return {
        "mae_w": mean_absolute_error(y, y_hat),
        "rmse_w": np.sqrt(mean_squared_error(y, y_hat)),
        "precision": p,
        "recall": r,
        "f1": f,
        # NDE: Zhong, Goddard, Sutton, NIPS 2014.
        "nde": np.sum((y - y_hat) ** 2) / np.sum(y**2),
        # SAE: Zhang et al., AAAI 2018.
        "sae": abs(y_hat.sum() - y.sum()) / y.sum(),
        # Estimated accuracy: Kolter & Johnson 2011.
        "accuracy": 1 - np.abs(y_hat - y).sum() / (2 * y.sum()),
        # Match rate: Mayhorn et al., PNNL 2016.
        "match_rate": np.minimum(y, y_hat).sum() / np.maximum(y, y_hat).sum(),
    }


def test_scores_equal_scikit_learn_and_the_cited_formulas(data, tmp_path):
    d, m, truth = data
    est = noisy_estimate(m, truth)
    f = tmp_path / "est.parquet"
    est.to_parquet(f)
    r = score(d, f)
    assert r["format"] == "loadloom-score/1"
    assert r["period"]["rows"] == len(truth)
    ys, yhs = [], []
    for a, got in zip(m["appliances"], r["appliances"]):
        assert got["id"] == a["id"]
        y = truth[f"{a['id']}_p_w"].to_numpy(float)
        y_hat = est[f"{a['id']}_p_w"].to_numpy(float)
        for k, v in reference(y, y_hat, a["on_threshold_w"]).items():
            assert got[k] == pytest.approx(v, rel=1e-9, abs=1e-12), (a["id"], k)
        ys.append(y)
        yhs.append(y_hat)
    y, y_hat = np.concatenate(ys), np.concatenate(yhs)
    o = r["overall"]
    assert o["mae_w"] == pytest.approx(mean_absolute_error(y, y_hat), rel=1e-9)
    assert o["rmse_w"] == pytest.approx(np.sqrt(mean_squared_error(y, y_hat)), rel=1e-9)
    assert o["accuracy"] == pytest.approx(1 - np.abs(y_hat - y).sum() / (2 * y.sum()), rel=1e-9)
    assert o["f1"] == pytest.approx(np.mean([a["f1"] for a in r["appliances"]]), rel=1e-12)


def test_daily_sae_uses_local_days(data, tmp_path):
    d, m, truth = data
    est = noisy_estimate(m, truth, seed=9)
    f = tmp_path / "est.parquet"
    est.to_parquet(f)
    r = score(d, f)
    day = truth["time"].dt.tz_convert("Europe/Madrid").dt.date  # includes the DST change of 2027-03-28
    for a, got in zip(m["appliances"], r["appliances"]):
        y = truth[f"{a['id']}_p_w"].astype(float).groupby(day).sum()
        y_hat = est[f"{a['id']}_p_w"].groupby(day).sum()
        assert got["sae_day"] == pytest.approx(np.abs(y_hat - y).sum() / y.sum(), rel=1e-9)


def test_known_answers(data, tmp_path):
    d, m, truth = data
    cols = ["time"] + [f"{a['id']}_p_w" for a in m["appliances"]]
    perfect = truth[cols].astype({c: float for c in cols[1:]})
    perfect.to_parquet(tmp_path / "perfect.parquet")
    r = score(d, tmp_path / "perfect.parquet")
    for a in r["appliances"] + [r["overall"]]:
        assert a["mae_w"] == 0 and a["f1"] == 1 and a["accuracy"] == 1
    zeros = perfect.copy()
    zeros[cols[1:]] = 0.0
    zeros.to_parquet(tmp_path / "zeros.parquet")
    r = score(d, tmp_path / "zeros.parquet")
    for a in r["appliances"]:
        assert a["recall"] == 0 and a["sae"] == 1


def test_coarser_long_and_csv_estimates(data, tmp_path):
    d, m, truth = data
    est = noisy_estimate(m, truth)
    # A 1-minute estimate is compared with the truth averaged to 1 minute.
    coarse = est.set_index("time").resample("1min").mean().reset_index()
    coarse.to_parquet(tmp_path / "coarse.parquet")
    r = score(d, tmp_path / "coarse.parquet")
    assert r["period"]["interval_s"] == 60 and r["period"]["rows"] == len(truth) // 6
    for a, got in zip(m["appliances"], r["appliances"]):
        y = truth[f"{a['id']}_p_w"].to_numpy(float).reshape(-1, 6).mean(axis=1)
        y_hat = coarse[f"{a['id']}_p_w"].to_numpy()
        assert got["mae_w"] == pytest.approx(mean_absolute_error(y, y_hat), rel=1e-9)
        assert got["truth_kwh"] == pytest.approx(truth[f"{a['id']}_p_w"].astype(float).sum() * 10 / 3.6e6, rel=1e-9)
    # Long form and CSV give the same scores as wide Parquet.
    wide = score(d, _write(est, tmp_path / "wide.parquet"))
    long = est.melt(id_vars="time", var_name="appliance", value_name="p_w")
    long["appliance"] = long["appliance"].str.removesuffix("_p_w")
    assert score(d, _write(long, tmp_path / "long.parquet"))["appliances"] == wide["appliances"]
    csv = est.copy()
    csv["time"] = csv["time"].map(lambda t: t.isoformat())
    csv.to_csv(tmp_path / "est.csv", index=False, float_format="%.17g")
    assert score(d, tmp_path / "est.csv")["appliances"] == wide["appliances"]


def _write(df, path):
    df.to_parquet(path)
    return path


BAD = [
    ("missing column", lambda e: e.drop(columns=["oven_p_w"]), "no estimate for oven"),
    ("NaN", lambda e: e.assign(fridge_p_w=e["fridge_p_w"].where(e.index != 7, np.nan)), "row 7"),
    ("negative", lambda e: e.assign(kettle_p_w=e["kettle_p_w"].where(e.index != 11, -5.0)), "negative"),
    ("duplicate time", lambda e: pd.concat([e.iloc[:5], e.iloc[4:]]).reset_index(drop=True), "duplicate time"),
    ("unsorted", lambda e: e.iloc[[0, 2, 1] + list(range(3, len(e)))].reset_index(drop=True), "not sorted"),
    ("gap", lambda e: e.drop(index=[100]).reset_index(drop=True), "spacing changes"),
    ("naive time", lambda e: e.assign(time=e["time"].dt.tz_localize(None)), "no time zone"),
    ("unknown id", lambda e: e.assign(toaster_p_w=1.0), "toaster_p_w"),
    ("no overlap", lambda e: e.assign(time=e["time"] + pd.Timedelta("30d")), "overlap"),
]


@pytest.mark.parametrize("name,change,needle", BAD, ids=[b[0] for b in BAD])
def test_bad_estimates_exit_2_naming_the_place(data, tmp_path, name, change, needle):
    d, m, truth = data
    est = change(noisy_estimate(m, truth))
    f = tmp_path / "bad.parquet"
    est.to_parquet(f)
    p = score(d, f, check=False)
    assert p.returncode == 2, p.stdout
    assert needle in p.stderr and "bad.parquet" in p.stderr and "help:" in p.stderr, p.stderr


def test_partial_scores_only_the_given_appliances(data, tmp_path):
    d, m, truth = data
    est = noisy_estimate(m, truth).drop(columns=["oven_p_w"])
    f = _write(est, tmp_path / "part.parquet")
    r = score(d, f, "--partial")
    assert [a["id"] for a in r["appliances"]] == ["kettle", "fridge"]


def test_per_conductor_columns_and_on_states(data, tmp_path):
    d, m, truth = data
    est = noisy_estimate(m, truth)
    # The oven sits on L2-L3 of a wye: per-conductor truth splits it by the
    # two-wattmeter relation; give the exact split for L2, a biased one for L3.
    est["oven_l2_p_w"] = truth["oven_l2_p_w"].astype(float)
    est["oven_l3_p_w"] = truth["oven_l3_p_w"].astype(float) + 10.0
    # An on-state column replaces "estimate above threshold" for the kettle.
    on = (truth["kettle_p_w"].astype(float) > 0.5 * 2200).astype(int)
    est["kettle_on"] = on
    r = score(d, _write(est, tmp_path / "cond.parquet"))
    oven = next(a for a in r["appliances"] if a["id"] == "oven")
    c = {x["conductor"]: x for x in oven["conductors"]}
    assert c["l2"]["mae_w"] == 0 and c["l2"]["nde"] == 0
    assert c["l3"]["mae_w"] == pytest.approx(10.0, rel=1e-6)
    kettle = next(a for a in r["appliances"] if a["id"] == "kettle")
    y_on = truth["kettle_p_w"].astype(float) > kettle["on_threshold_w"]
    p, rc, f, _ = precision_recall_fscore_support(y_on, on.astype(bool), average="binary", zero_division=0)
    assert kettle["f1"] == pytest.approx(f, rel=1e-12) and kettle["precision"] == pytest.approx(p, rel=1e-12)
    # A per-conductor column on a line the appliance does not draw from is refused.
    est["kettle_l3_p_w"] = 0.0
    p = score(d, _write(est, tmp_path / "bad.parquet"), check=False)
    assert p.returncode == 2 and "draws nothing on l3" in p.stderr

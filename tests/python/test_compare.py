"""score --against: the paired bootstrap over days checked against
scipy.stats.bootstrap (paired, percentile interval) on the same per-day sums,
and its verdicts on estimates that are the same, better or worse."""
import json

import numpy as np
import pandas as pd
import pyarrow.parquet as pq
import pytest
from scipy import stats

from conftest import loadloom

HOME = """
[home]
supply = "split-phase"
timezone = "America/Los_Angeles"
[run]
start = "2027-10-20T00:00"
length = "30 d"
seed = 8
[meter]
interval = "1 min"

[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "markov"
states = [ { name = "off", power = "0 W", dwell = { median = "3 h", spread = 0.8 }, next = { on = 1.0 } },
           { name = "on", power = "1.5 kW", dwell = { median = "40 min", spread = 0.5 }, next = { off = 1.0 } } ]

[[appliance]]
id = "fridge"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "idle", power = "2 W", dwell = "20 min" }, { name = "cool", power = "100 W", dwell = { median = "10 min", spread = 0.3 } } ]
"""


@pytest.fixture
def data(simulate, tmp_path):
    d = simulate(HOME)
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    rng = np.random.default_rng(1)
    paths = {}
    for name, noise in [("good", 20.0), ("bad", 60.0)]:
        est = pd.DataFrame({"time": truth["time"]})
        for app in ["heater", "fridge"]:
            y = truth[f"{app}_p_w"].to_numpy(float)
            est[f"{app}_p_w"] = np.clip(y + rng.normal(0, noise, len(y)) * (rng.random(len(y)) < 0.5), 0, None)
        paths[name] = tmp_path / f"{name}.parquet"
        est.to_parquet(paths[name])
    return d, truth, paths


def compare(d, a, b, *extra):
    p = loadloom("score", "--truth", d, "--estimate", a, "--against", b, "--json", *extra)
    return json.loads(p.stdout)


def row(c, id_, metric):
    r = next(r for r in c["rows"] if r["id"] == id_)
    return next(m for m in r["metrics"] if m["metric"] == metric)


def test_the_same_estimate_shows_no_difference(data):
    d, _, paths = data
    c = compare(d, paths["good"], paths["good"])
    for r in c["rows"]:
        for m in r["metrics"]:
            assert m["delta"] == 0 and m["ci_low"] == 0 and m["ci_high"] == 0, m
            assert m["verdict"] == "no clear difference"


def test_a_better_estimate_is_told_apart(data):
    d, _, paths = data
    c = compare(d, paths["good"], paths["bad"])
    assert c["days"] == 30
    m = row(c, "overall", "mae_w")
    assert m["ci_high"] < 0 and m["verdict"] == "better"
    assert row(c, "overall", "accuracy")["verdict"] == "better"
    assert compare(d, paths["bad"], paths["good"]) ["rows"][-1]["metrics"][0]["verdict"] == "worse"


def test_bootstrap_interval_agrees_with_scipy(data):
    # Reference: scipy.stats.bootstrap, paired resampling of days, percentile
    # interval, on per-day sums of |error| and row counts (MAE difference).
    d, truth, paths = data
    c = compare(d, paths["good"], paths["bad"], "--resamples", "4000")
    day = truth["time"].dt.tz_convert("America/Los_Angeles").dt.date
    y = truth["heater_p_w"].to_numpy(float)
    ea = np.abs(pd.read_parquet(paths["good"])["heater_p_w"].to_numpy() - y)
    eb = np.abs(pd.read_parquet(paths["bad"])["heater_p_w"].to_numpy() - y)
    per_day = pd.DataFrame({"a": ea, "b": eb, "n": 1.0}).groupby(day.values).sum()

    def delta(a, b, n):
        return a.sum() / n.sum() - b.sum() / n.sum()

    ref = stats.bootstrap((per_day["a"].values, per_day["b"].values, per_day["n"].values), delta, paired=True, vectorized=False,
                          n_resamples=4000, method="percentile", confidence_level=0.95, random_state=np.random.default_rng(0))
    got = row(c, "heater", "mae_w")
    assert got["delta"] == pytest.approx(delta(per_day["a"], per_day["b"], per_day["n"]), rel=1e-9)
    width = ref.confidence_interval.high - ref.confidence_interval.low
    assert abs(got["ci_low"] - ref.confidence_interval.low) < 0.1 * width
    assert abs(got["ci_high"] - ref.confidence_interval.high) < 0.1 * width


def test_different_periods_are_refused(data, tmp_path):
    d, _, paths = data
    short = pd.read_parquet(paths["bad"]).iloc[: 24 * 60 * 5]
    short.to_parquet(tmp_path / "short.parquet")
    p = loadloom("score", "--truth", d, "--estimate", paths["good"], "--against", tmp_path / "short.parquet", check=False)
    # Every estimate must cover the whole scored period, so the short one is
    # refused on its own, naming its first missing time.
    assert p.returncode == 2 and "missing time" in p.stderr and "short.parquet" in p.stderr, p.stderr

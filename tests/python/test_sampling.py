"""Sampling checked with scipy.stats (README, "Tests and what they are
checked against"): dwell times follow their declared distributions
(Kolmogorov–Smirnov), start hours follow the declared hour weights
(chi-square)."""
import numpy as np
import pandas as pd
import pyarrow.parquet as pq
from scipy import stats

SCENARIO = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
[run]
start = "2027-01-04T00:00"
length = "120 d"
[meter]
interval = "1 h"

[[appliance]]
id = "freezer"
wiring = "L1-N"
behaviour = "cycle"
states = [
  { name = "rest", power = "2 W", dwell = { median = "13 min", spread = 0.25 } },
  { name = "run", power = "90 W", dwell = { mean = "20 min", shape = 3 } },
]

[[appliance]]
id = "router"
wiring = "L2-N"
behaviour = "markov"
states = [
  { name = "idle", power = "6 W", dwell = { min = "5 min", max = "9 min" }, next = { busy = 1.0 } },
  { name = "busy", power = "9 W", dwell = { median = "2 min", spread = 0.6 }, next = { idle = 1.0 } },
]

[[appliance]]
id = "kettle"
wiring = "L1-N"
behaviour = "program"
use = { starts_per_day = 1.0, hours = [0,0,0,0,0,0,0,2,1,0,0,0,0,0,0,0,0,0,3,2,1,0,0,0] }
phases = [ { name = "boil", length = "3 min", power = "1.5 kW" } ]
"""


def dwell_seconds(events, app, state):
    e = events[events["appliance"] == app].iloc[1:-1]  # the first and last are cut by the run
    e = e[e["state"] == state]
    return (e["end"] - e["start"]).dt.total_seconds().values


def test_dwell_times_follow_the_declared_distributions(simulate):
    d = simulate(SCENARIO)
    events = pq.read_table(d / "events.parquet").to_pandas()
    checks = [
        ("freezer", "rest", stats.lognorm(s=0.25, scale=13 * 60)),
        ("freezer", "run", stats.gamma(a=3, scale=20 * 60 / 3)),
        ("router", "idle", stats.uniform(loc=5 * 60, scale=4 * 60)),
        ("router", "busy", stats.lognorm(s=0.6, scale=2 * 60)),
    ]
    for app, state, dist in checks:
        x = dwell_seconds(events, app, state)
        assert len(x) > 2000, (app, state, len(x))
        # Dwell times are rounded to the 1 s step: a shift of at most 0.5 s.
        res = stats.kstest(x, dist.cdf)
        assert res.pvalue > 1e-3, (app, state, res)
    # And a wrong distribution is told apart (the test can fail).
    x = dwell_seconds(events, "freezer", "rest")
    assert stats.kstest(x, stats.lognorm(s=0.25, scale=14 * 60).cdf).pvalue < 1e-6


def test_start_hours_follow_the_declared_weights(simulate):
    d = simulate(SCENARIO)
    events = pq.read_table(d / "events.parquet").to_pandas()
    boils = events[(events["appliance"] == "kettle") & (events["state"] == "boil")]
    hours = boils["start"].dt.tz_convert("America/Chicago").dt.hour.values
    weights = np.array([0, 0, 0, 0, 0, 0, 0, 2, 1, 0, 0, 0, 0, 0, 0, 0, 0, 0, 3, 2, 1, 0, 0, 0], float)
    assert set(hours) <= set(np.nonzero(weights)[0])
    used = np.nonzero(weights)[0]
    observed = np.array([(hours == h).sum() for h in used])
    expected = weights[used] / weights.sum() * observed.sum()
    assert observed.sum() > 80
    res = stats.chisquare(observed, expected)
    assert res.pvalue > 1e-3, (observed, expected, res)


STARTS = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
[run]
start = "2027-01-04T00:00"
length = "365 d"
step = "1 min"
[meter]
interval = "1 h"

[[appliance]]
id = "washer"
wiring = "L1-N"
behaviour = "program"
use = { starts_per_day = 2.0, hours = "19-20" }
phases = [ { name = "wash", length = "60 min", power = "500 W" }, { name = "spin", length = "30 min", power = "300 W" } ]
"""


def test_starts_per_day_is_the_rate_of_starts_that_happen(simulate):
    # Two starts a day drawn within one evening hour, each program 90 min:
    # nearly every second start falls while the first runs. It must wait
    # and happen, not be dropped: the count of runs over the year is
    # Poisson with mean 2 × 365 (two-sided exact Poisson test; the
    # starts of one run are independent draws, so the total is Poisson).
    d = simulate(STARTS)
    events = pq.read_table(d / "events.parquet").to_pandas()
    runs = int(((events["appliance"] == "washer") & (events["state"] == "wash")).sum())
    mean = 2.0 * 365
    dist = stats.poisson(mean)
    p = 2 * min(dist.cdf(runs), dist.sf(runs - 1))
    assert p > 1e-3, (runs, mean, p)
    # Dropping the starts that overlap would give about (1 − e^−2) + a little
    # a day (about 330 runs): that count is refused.
    assert 2 * dist.cdf(0.5 * mean) < 1e-6

"""No replay between windows: a run is a window onto the home's one
timeline (sim/behaviour/window.rs). Two windows that do not overlap share
no draws, and a long run equals shorter runs of the same home joined."""
import numpy as np
import pandas as pd
import pyarrow.parquet as pq

HOME = """
[home]
supply = "split-phase"
timezone = "America/Denver"
source = {{ variation = "0 %" }}
[run]
start = "{start}"
length = "{length}"
step = "1 min"
seed = 11
[meter]
interval = "1 min"

[[appliance]]
id = "fridge"
wiring = "L1-N"
behaviour = "cycle"
states = [
  {{ name = "idle", power = "2 W", dwell = {{ median = "26 min", spread = 0.25 }} }},
  {{ name = "cooling", power = "115 W", dwell = {{ median = "13 min", spread = 0.2 }} }},
]

[[appliance]]
id = "washer"
wiring = "L2-N"
behaviour = "program"
use = {{ starts_per_day = 0.9, hours = "8-21" }}
phases = [ {{ name = "wash", length = {{ median = "40 min", spread = 0.2 }}, power = "500 W" }} ]

[[appliance]]
id = "tv"
wiring = "L1-N"
behaviour = "markov"
states = [
  {{ name = "off", power = "1 W", dwell = {{ median = "5 h", spread = 0.5 }}, next = {{ on = 1.0 }} }},
  {{ name = "on", power = "90 W", dwell = {{ median = "2 h", spread = 0.5 }}, next = {{ off = 1.0 }} }},
]

[[appliance]]
id = "network"
wiring = "L2-N"
behaviour = "steady"
states = [ {{ name = "on", power = "20 W" }} ]
jitter = 0.05
every = "10 min"

[[appliance]]
id = "car"
wiring = "L1-L2"
behaviour = "modulating"
states = [ {{ name = "resting", power = "0 W" }}, {{ name = "running", power = "7 kW" }} ]
min = 0.5
wander = 0.05
every = "5 min"
use = {{ starts_per_day = 0.5, hours = "18-23" }}
session = {{ median = "3 h", spread = 0.3 }}
"""
APPS = ["fridge", "washer", "tv", "network", "car"]


def truth(simulate, start, length, name, extra=()):
    d = simulate(HOME.format(start=start, length=length), name=name, extra=extra)
    return pq.read_table(d / "truth.parquet").to_pandas().set_index("time")


def test_disjoint_windows_share_no_draws(simulate):
    # Same home, same seed, two consecutive fortnights: the appliance
    # series must be unrelated. Pearson correlation (numpy); with about
    # 20 000 minutes even strongly autocorrelated series give |r| well
    # under 0.1 by chance; the replay this guards against gave 0.99998.
    a = truth(simulate, "2027-03-01T00:00", "14 d", "first")
    # The second through `run --start`, the same scenario text.
    b = truth(simulate, "2027-03-01T00:00", "14 d", "second", ("--start", "2027-03-15T00:00"))
    for app in ["fridge", "tv", "network"]:
        r = np.corrcoef(a[f"{app}_p_w"].values, b[f"{app}_p_w"].values)[0, 1]
        assert abs(r) < 0.1, (app, r)


def test_a_run_is_its_parts_joined(simulate):
    whole = truth(simulate, "2027-03-01T00:00", "28 d", "whole")
    head = truth(simulate, "2027-03-01T00:00", "21 d", "head")
    # Lengths are of elapsed time: 21 d after local midnight on 1 March is
    # 01:00 on the 22nd, past the change to daylight-saving time.
    tail = truth(simulate, "2027-03-22T01:00", "7 d", "tail")
    joined = pd.concat([head, tail])
    assert len(joined) == len(whole)
    assert (joined.index == whole.index).all()
    for app in APPS:
        assert (joined[f"{app}_state"].astype(str).values == whole[f"{app}_state"].astype(str).values).all(), app
        # Powers to float32 rounding: the voltage solve sees the same loads.
        assert np.allclose(joined[f"{app}_p_w"], whole[f"{app}_p_w"], rtol=1e-6, atol=1e-3), app
    # The run crosses a daylight-saving change (2027-03-14 in Denver) and
    # the joint falls inside a block; the series is not constant.
    assert whole["fridge_state"].nunique() == 2


# A home whose state carries from day to day: a building heated by a heat
# pump on a thermostat (its temperature), and a battery charged from the
# roof (its state of charge). Invented home.
STATEFUL = """
[home]
supply = "split-phase"
timezone = "America/Denver"
latitude = 39.7
longitude = -105.0
sky = 0.6
source = {{ variation = "0 %" }}
[run]
start = "{start}"
length = "{length}"
step = "1 min"
seed = 11
[meter]
interval = "1 min"

[weather]
climate = "lakeshore"

[building]
ua = "220 W/K"
mass = "30 MJ/K"
heating = "20.5 °C"
cooling = "24.5 °C"
deadband = "1 K"
setback = {{ hours = "23-5", by = "2 K" }}
gains = "60 %"
aperture = "3 m²"

[pv]
dc = "6 kW"
inverter = "5 kW"
tilt = "30 deg"

[battery]
capacity = "10 kWh"
power = "4 kW"

[[appliance]]
id = "fridge"
wiring = "L1-N"
behaviour = "cycle"
states = [
  {{ name = "idle", power = "2 W", dwell = {{ median = "26 min", spread = 0.25 }} }},
  {{ name = "cooling", power = "115 W", dwell = {{ median = "13 min", spread = 0.2 }} }},
]

[[appliance]]
id = "car"
wiring = "L1-L2"
behaviour = "modulating"
states = [ {{ name = "resting", power = "0 W" }}, {{ name = "running", power = "7 kW" }} ]
min = 0.5
wander = 0.05
every = "5 min"
use = {{ starts_per_day = 0.5, hours = "18-23" }}
session = {{ median = "3 h", spread = 0.3 }}

[[appliance]]
id = "heat_pump"
wiring = "L1-L2"
load = "motor"
behaviour = "thermostat"
role = "heat-pump"
cop = 3.6
cooling_cop = 3.8
states = [ {{ name = "heating", power = "2.8 kW", pf = 0.95 }}, {{ name = "cooling", power = "2.4 kW", pf = 0.95 }} ]

[[appliance]]
id = "air_handler"
wiring = "L1-L2"
load = "motor"
behaviour = "thermostat"
role = "blower"
states = [ {{ name = "running", power = "400 W", pf = 0.8 }} ]

[[appliance]]
id = "strips"
wiring = "L1-L2"
behaviour = "thermostat"
role = "backup"
states = [ {{ name = "heating", power = "5 kW" }} ]
"""
CARRIED = ["heat_pump", "air_handler", "strips", "battery"]


def stateful(simulate, start, length, name):
    d = simulate(STATEFUL.format(start=start, length=length), name=name)
    return pq.read_table(d / "truth.parquet").to_pandas().set_index("time")


def test_the_building_and_the_battery_carry_their_state_across_a_joint(simulate):
    # March in a cold climate: the heat pump cycles, the setback's morning
    # recovery runs it long, the battery fills on sunny days and empties at
    # night. The joint (22 March, 01:00) falls at night with the rooms
    # warm from the day and the battery part charged: a window that began
    # its building at the setpoint or its battery at its reserve would
    # differ from the long run there.
    whole = stateful(simulate, "2027-03-01T00:00", "28 d", "whole")
    head = stateful(simulate, "2027-03-01T00:00", "21 d", "head")
    tail = stateful(simulate, "2027-03-22T01:00", "7 d", "tail")
    joined = pd.concat([head, tail])
    assert (joined.index == whole.index).all()
    for app in CARRIED:
        states = whole[f"{app}_state"].astype(str)
        assert states.nunique() >= 2, app  # the load does something
        assert (joined[f"{app}_state"].astype(str).values == states.values).all(), app
        assert np.allclose(joined[f"{app}_p_w"], whole[f"{app}_p_w"], rtol=1e-6, atol=1e-3), app
    # The state of charge is the same number (float32 of the same value).
    assert (joined["battery_soc"].values == whole["battery_soc"].values).all()
    # The window's first minute: the history's charge, not the reserve
    # (default `initial`), and a state of charge that moves on from there.
    assert tail["battery_soc"].iloc[0] == whole.loc[tail.index[0], "battery_soc"]
    assert whole["battery_soc"].max() > 0.9 and whole["battery_soc"].min() < 0.15
    # The day blocks hand the battery over where both hold the same charge:
    # it never steps. Each minute's change is what the minute's power
    # stores (sqrt of the default 90 % round trip each way) over 10 kWh.
    p = whole["battery_p_w"].values[1:].astype(float)
    eta = 0.9**0.5
    stored = np.where(p > 0, p * eta, p / eta) / 60 / 10_000
    change = np.diff(whole["battery_soc"].values.astype(float))
    assert np.abs(change - stored).max() < 2e-6


def test_a_window_of_the_building_does_not_replay_another(simulate):
    # Two consecutive fortnights of the same home and seed: the blower's
    # minute-by-minute running (which follows the heat pump's cycles) is
    # unrelated between them beyond what the weather and the daily setback
    # give both. Pearson correlation (numpy) of the two series, against
    # the correlation of each with itself shifted by a day (what the daily
    # pattern alone gives): a replay would give 1.
    a = stateful(simulate, "2027-01-04T00:00", "14 d", "first")
    b = stateful(simulate, "2027-01-18T00:00", "14 d", "second")
    x = (a["air_handler_state"].astype(str) == "running").values.astype(float)
    y = (b["air_handler_state"].astype(str) == "running").values.astype(float)
    r = np.corrcoef(x, y)[0, 1]
    day = 1440
    daily = np.corrcoef(x[day:], x[:-day])[0, 1]
    assert r < 0.99 and r <= daily + 0.1, (r, daily)

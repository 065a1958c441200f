"""Adding an appliance leaves every other appliance's truth unchanged
(random streams per appliance; README, "Tests and what they are checked against"). With a stiff source the
columns are identical; with a source impedance the timelines are identical and
the power differs only as the ZIP model says for the sag the new load causes."""
import numpy as np
import pyarrow.parquet as pq

HOME = """
[home]
supply = "split-phase"
timezone = "America/Denver"
{source}
[run]
start = "2027-06-01T00:00"
length = "1 d"
[meter]
noise = {{ relative = "0.5 %", floor = "2 W" }}

[[appliance]]
id = "heater"
wiring = "L1-N"
behaviour = "cycle"
load = "resistive"
states = [ {{ name = "off", power = "0 W", dwell = {{ median = "20 min", spread = 0.3 }} }},
           {{ name = "on", power = "1.2 kW", dwell = {{ median = "10 min", spread = 0.3 }} }} ]

[[appliance]]
id = "fridge"
wiring = "L2-N"
behaviour = "cycle"
load = "motor"
states = [ {{ name = "idle", power = "2 W", dwell = "20 min" }},
           {{ name = "cool", power = "120 W", pf = 0.8, dwell = {{ mean = "12 min", shape = 4 }} }} ]
"""

EXTRA = """
[[appliance]]
id = "dryer"
wiring = "L1-L2"
behaviour = "program"
use = { starts_per_day = 6, hours = "0-24" }
phases = [ { name = "heat", length = "40 min", draws = [ { power = "4.8 kW" }, { wiring = "L1-N", power = "300 W", pf = 0.7, load = "motor" } ] } ]
"""

STIFF = 'source = { variation = 0, r = "0 ohm", x = "0 ohm", neutral_r = "0 ohm", neutral_x = "0 ohm" }'


def truth(simulate, text, name):
    d = simulate(text, name=name)
    return pq.read_table(d / "truth.parquet").to_pandas(), pq.read_table(d / "meters.parquet").to_pandas(), pq.read_table(d / "events.parquet").to_pandas()


def test_adding_an_appliance_leaves_the_others_unchanged_on_a_stiff_source(simulate):
    a, _, ea = truth(simulate, HOME.format(source=STIFF), "a")
    b, _, eb = truth(simulate, HOME.format(source=STIFF) + EXTRA, "b")
    assert (b["dryer_p_w"] > 1000).any(), "the new appliance does run"
    for col in a.columns:
        if col.startswith(("heater_", "fridge_")):
            assert (a[col].values == b[col].values).all(), col
    old = eb[eb["appliance"] != "dryer"].reset_index(drop=True)
    assert (old[["appliance", "state", "start", "end"]].astype(str).values == ea[["appliance", "state", "start", "end"]].astype(str).values).all()


def test_with_source_impedance_only_the_voltage_response_differs(simulate):
    a, ma, _ = truth(simulate, HOME.format(source=""), "c")
    b, mb, _ = truth(simulate, HOME.format(source="") + EXTRA, "d")
    for app in ["heater", "fridge"]:
        assert (a[f"{app}_state"].astype(str).values == b[f"{app}_state"].astype(str).values).all()
    # Resistive: P ∝ V² (ZIP z = 1, Bokhari et al. 2014). The meter noise is
    # drawn from the meter's own streams, the same in both runs, so the
    # relative noise cancels in the ratio of the two runs' voltages.
    on = a["heater_p_w"].values > 100
    ratio = b["heater_p_w"].values[on] / a["heater_p_w"].values[on]
    v_ratio2 = (mb["l1_v_v"].values[on] / ma["l1_v_v"].values[on]) ** 2
    sagged = (b["dryer_p_w"].values[on] > 1000)
    assert sagged.sum() > 100 and (ratio[sagged] < 0.995).all(), "the dryer's load sags the heater's voltage"
    np.testing.assert_allclose(ratio, v_ratio2, rtol=1e-4)

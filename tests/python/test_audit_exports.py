"""The wiring audit on monitor exports as they come, and its loading picture.

Exports are written here by hand (pandas, pyarrow or plain text), never by
the project's writer: real power only, or P and V; naive local times read
in the declared time zone, across the autumn change (the repeated hour) and
the spring one (the skipped hour); bad exports refused with exit 2. The
loading picture is checked against pandas: 15-minute demand as
`resample("15min").mean().max()` of the line current (clock quarter-hours,
as demand meters integrate: common practice, no source), peaks and their
local times by `idxmax`, the loads running then against the simulator's
per-appliance truth, and the neutral against its measured current
(Kirchhoff's current law: the neutral returns minus the sum of the line
currents)."""

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from audit_home import SHORT_ENTRIES, audit, four_load_home, report
from conftest import loadloom

TZ = "America/Chicago"

DECLARED = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "{service}"
{metering}

""" + SHORT_ENTRIES

# Which lines each appliance of the home draws on (its wiring).
LINES_OF = {"water_heater": {"l1", "l2"}, "kettle": {"l2"}, "toaster": {"l1"}, "pump": {"l1", "l2"}}


def home(service="100 A", length="2 d", extra=""):
    """The four-load home over the US autumn change (2027-11-07 02:00 CDT
    goes back to 01:00 CST: 01:00–01:59 happens twice)."""
    return four_load_home(service=service, start="2027-11-06T00:00", length=length, seed=11,
                          interval="10 s", kettle_starts=6, kettle_hours="0-24",
                          toaster_off="40 min", toaster_on="5 min", extra=extra)


def declared(service="100 A", metering=""):
    return DECLARED.format(service=service, metering=metering)


def demand_15min(current):
    """15-minute demand: the largest mean over clock quarter-hours (pandas)."""
    return current.resample("15min").mean().max()


def local(t):
    return t.tz_convert(TZ).strftime("%a %Y-%m-%d %H:%M")


def write_naive_csv(path, m, cols):
    """A monitor's CSV by hand: wall-clock times without an offset, in the
    file order the monitor wrote them (the repeated hour twice over)."""
    wall = m["time"].dt.tz_convert(TZ).dt.strftime("%Y-%m-%d %H:%M:%S")
    with open(path, "w") as f:
        f.write(",".join(["time", *cols]) + "\n")
        for k in range(len(m)):
            f.write(",".join([wall.iloc[k], *(repr(float(m[c].iloc[k])) for c in cols)]) + "\n")


def test_naive_local_times_across_the_autumn_change_read_as_the_same_instants(simulate, tmp_path):
    """A P-only CSV with naive Chicago wall-clock times gives the same
    audit as the same readings with their UTC offsets; the report says how
    the repeated hour was read and what real power alone cannot check."""
    d = simulate(home())
    m = pd.read_parquet(d / "meters.parquet")
    write_naive_csv(tmp_path / "export.csv", m, ["l1_p_w", "l2_p_w"])
    text = (tmp_path / "export.csv").read_text()
    # The repeated hour is in the file twice (360 rows of 10 s each time).
    assert text.count("\n2027-11-07 01:") == 720
    aware = pa.table({"time": pa.array(m["time"]), "l1_p_w": m["l1_p_w"], "l2_p_w": m["l2_p_w"]})
    pq.write_table(aware, tmp_path / "aware.parquet")
    r = report(tmp_path / "export.csv", declared(), tmp_path)
    ref = report(tmp_path / "aware.parquet", declared(), tmp_path)
    assert r["findings"] == ref["findings"] == []
    assert r["steps"] == ref["steps"]
    assert r["loading"]["lines"] == ref["loading"]["lines"]
    [note] = [n for n in r["notes"] if "UTC offset" in n]
    assert TZ in note and "720 rows" in note and "360 in summer time, then 360 in winter time" in note
    assert not any("UTC offset" in n for n in ref["notes"])
    assert any("real power only" in n for n in r["notes"]) and any("no voltages" in n for n in r["notes"])
    # Currents from |P| over the nominal 120 V (no Q, no V): pandas.
    lo = r["loading"]
    assert lo["current_measured"] is False and lo["reactive_measured"] is False
    idx = m.set_index(m["time"].dt.tz_convert("UTC"))
    for line in ["l1", "l2"]:
        cur = idx[f"{line}_p_w"].astype(float).abs() / 120.0
        [got] = [x for x in lo["lines"] if x["conductor"] == line]
        assert got["peak_a"] == pytest.approx(cur.max(), rel=1e-9)
        assert got["peak_time_local"] == local(cur.idxmax())
        assert got["demand_15min_a"] == pytest.approx(demand_15min(cur), rel=1e-9)
        assert got["mean_a"] == pytest.approx(cur.mean(), rel=1e-9)
    out = audit(tmp_path / "export.csv", declared(), tmp_path).stdout
    assert "unity power factor" in out and "not an inspection" in out


def test_a_naive_parquet_with_p_and_v_is_read_in_the_declared_zone(simulate, tmp_path):
    """P and V per line, `time` a timestamp without a zone: read as Chicago
    wall-clock time; each current is |P| / V of its row (no Q: a lower
    bound), checked against pandas."""
    d = simulate(home(length="1 d"))
    m = pd.read_parquet(d / "meters.parquet")
    cols = ["l1_p_w", "l2_p_w", "l1_v_v", "l2_v_v"]
    naive = m["time"].dt.tz_convert(TZ).dt.tz_localize(None)
    t = pa.table({"time": pa.array(naive, pa.timestamp("ms")), **{c: m[c] for c in cols}})
    assert t.schema.field("time").type.tz is None
    pq.write_table(t, tmp_path / "export.parquet")
    r = report(tmp_path / "export.parquet", declared(), tmp_path)
    assert r["findings"] == []
    assert any("real power only" in n for n in r["notes"])
    assert not any("no voltages" in n for n in r["notes"])
    assert any(TZ in n and "wall-clock" in n for n in r["notes"])
    idx = m.set_index(m["time"].dt.tz_convert("UTC"))
    for line in ["l1", "l2"]:
        cur = idx[f"{line}_p_w"].astype(float).abs() / idx[f"{line}_v_v"].astype(float)
        [got] = [x for x in r["loading"]["lines"] if x["conductor"] == line]
        assert got["peak_a"] == pytest.approx(cur.max(), rel=1e-9)
        assert got["peak_time_local"] == local(cur.idxmax())
        assert got["demand_15min_a"] == pytest.approx(demand_15min(cur), rel=1e-9)


SPRING = "time,l1_p_w,l2_p_w\n2027-03-14 01:59:50,100,200\n2027-03-14 02:00:00,100,200\n2027-03-14 02:00:10,100,200\n"


@pytest.mark.parametrize("name, text, says", [
    # US summer time begins 2027-03-14 at 02:00 (second Sunday of March,
    # 15 U.S.C. 260a): 02:00 wall-clock time never happened in Chicago.
    ("spring.csv", SPRING, ["column `time`", "row 1", "skipped", "UTC offset"]),
    ("upper.csv", "time,L1_P_W,L2_P_W\n2027-01-04 00:00:00,1,2\n2027-01-04 00:00:10,1,2\n",
     ["no line power column", "rename L1_P_W → l1_p_w"]),
    ("named.csv", "time,power 1,power 2\n2027-01-04 00:00:00,1,2\n2027-01-04 00:00:10,1,2\n",
     ["no line power column", "`l1_p_w`", "`l1_v_v`"]),
    ("units.csv", "time,l1_p_w,l2_p_w\n2027-01-04 00:00:00,100,200\n2027-01-04 00:00:10,1.2 kW,200\n",
     ["column `l1_p_w`", "row 1", "not a number", "in W"]),
    ("order.csv", "time,l1_p_w,l2_p_w\n2027-01-04 00:00:10,1,2\n2027-01-04 00:00:00,1,2\n2027-01-04 00:00:20,1,2\n",
     ["column `time`", "row 1", "goes back", "sort the rows"]),
    # Hostile: every row earlier than the one before (no forward step to
    # take the interval from), and a column written twice.
    ("reversed.csv", "time,l1_p_w,l2_p_w\n2027-01-04 00:00:20,1,2\n2027-01-04 00:00:10,1,2\n2027-01-04 00:00:00,1,2\n",
     ["column `time`", "row 1", "goes back", "sort the rows"]),
    ("twice.csv", "time,l1_p_w,l2_p_w,l1_p_w\n2027-01-04 00:00:00,1,2,3\n2027-01-04 00:00:10,1,2,3\n",
     ["column `l1_p_w`", "more than once"]),
    ("notime.csv", "when,l1_p_w,l2_p_w\n2027-01-04 00:00:00,1,2\n", ["`time`"]),
    ("oneline.csv", "time,l1_p_w\n2027-01-04 00:00:00,1\n2027-01-04 00:00:10,1\n",
     ["does not fit", "conductor = \"none\""]),
    ("epoch.csv", "time,l1_p_w,l2_p_w\n1700000000,1,2\n1700000010,1,2\n", ["column `time`", "row 0", "ISO-8601"]),
])
def test_a_bad_export_is_refused_with_its_place_and_fix(tmp_path, name, text, says):
    f = tmp_path / name
    f.write_text(text)
    p = audit(f, declared(), tmp_path)
    assert p.returncode == 2 and p.stdout == "", (p.returncode, p.stdout)
    assert name in p.stderr and "help" in p.stderr, p.stderr
    for s in says:
        assert s in p.stderr, (s, p.stderr)


def test_a_naive_parquet_in_the_spring_gap_is_refused(tmp_path):
    t = pa.table({
        "time": pa.array(pd.to_datetime(["2027-03-14 01:59:50", "2027-03-14 02:00:00"]), pa.timestamp("ms")),
        "l1_p_w": [100.0, 100.0], "l2_p_w": [200.0, 200.0]})
    pq.write_table(t, tmp_path / "gap.parquet")
    p = audit(tmp_path / "gap.parquet", declared(), tmp_path)
    assert p.returncode == 2 and p.stdout == ""
    assert "gap.parquet" in p.stderr and "row 1" in p.stderr and "skipped" in p.stderr, p.stderr


def test_the_loading_picture_follows_the_declared_metering(simulate, tmp_path):
    """CTs exchanged on site (channel l1's CT on conductor L2 and the other
    way round) and declared so: line L1 is read on channel l2, its peak is
    that column's; the neutral estimated from the channels, each at its own
    voltage's angle, matches the measured one."""
    fault = '[faults]\nct = [ { conductor = "L1", on = "L2" }, { conductor = "L2", on = "L1" } ]\n'
    d = simulate(home(length="1 d", extra=fault))
    metering = '[metering]\nl1 = { conductor = "L2" }\nl2 = { conductor = "L1" }'
    r = report(d, declared(metering=metering), tmp_path)
    assert [f["kind"] for f in r["findings"]] == [], r["findings"]
    m = pd.read_parquet(d / "meters.parquet")
    lines = {x["conductor"]: x for x in r["loading"]["lines"]}
    assert lines["l1"]["channel"] == "l2" and lines["l2"]["channel"] == "l1"
    assert lines["l1"]["peak_a"] == pytest.approx(m["l2_i_a"].max(), rel=1e-6)
    assert lines["l2"]["peak_a"] == pytest.approx(m["l1_i_a"].max(), rel=1e-6)
    assert r["loading"]["neutral_peak_estimated_a"] == pytest.approx(m["n_i_a"].max(), rel=0.02)
    text = audit(d, declared(metering=metering), tmp_path).stdout
    assert "L1 (channel l2)" in text


def test_a_ct_declared_reversed_is_turned_back_for_the_neutral(simulate, tmp_path):
    """A CT clamped the wrong way on L2, declared so: its readings are
    negated before the neutral is summed (else the legs' currents would
    add instead of cancel)."""
    d = simulate(home(length="1 d", extra='[faults]\nct = [ { conductor = "L2", reversed = true } ]\n'))
    metering = '[metering]\nl2 = { conductor = "L2", orientation = "to-source" }'
    r = report(d, declared(metering=metering), tmp_path)
    m = pd.read_parquet(d / "meters.parquet")
    assert m["l2_p_w"].min() < -1000  # the data really is reversed
    assert r["loading"]["neutral_peak_estimated_a"] == pytest.approx(m["n_i_a"].max(), rel=0.02)


def test_a_channel_declared_without_a_ct_is_not_measured_and_not_summed(simulate, tmp_path):
    """The data has an l2 column, but the declaration says no CT sits on L2
    (e.g. the clamp is on a sub-circuit): L2 is "not measured", and the
    neutral is not estimated from one line."""
    d = simulate(home(length="1 d"))
    metering = '[metering]\nl2 = { conductor = "none" }'
    r = report(d, declared(metering=metering), tmp_path)
    lines = {x["conductor"]: x for x in r["loading"]["lines"]}
    assert lines["l2"]["measured"] is False and "no CT" in lines["l2"]["not_measured_because"]
    assert lines["l1"]["measured"] is True
    assert r["loading"]["neutral_peak_estimated_a"] is None
    for form in [(), ("--markdown",)]:
        out = audit(d, declared(metering=metering), tmp_path, *form).stdout
        assert "L2: not measured" in out and "not estimated" in out and "not an inspection" in out


def test_the_loads_running_at_each_peak_are_the_truths(simulate, tmp_path):
    """At each line's peak row, the declared appliances the audit names as
    running are those the simulator's truth has drawing power on that line."""
    d = simulate(home())
    r = report(d, declared(), tmp_path)
    m = pd.read_parquet(d / "meters.parquet")
    truth = pd.read_parquet(d / "truth.parquet").set_index("time")
    for line in ["l1", "l2"]:
        [got] = [x for x in r["loading"]["lines"] if x["conductor"] == line]
        t = m.loc[m[f"{line}_i_a"].idxmax(), "time"]
        assert got["peak_time_local"] == local(t)
        on = {a for a in LINES_OF if line in LINES_OF[a] and truth.loc[t, f"{a}_p_w"] > 10}
        assert set(got["running_at_peak"]) == on, (line, t, got["running_at_peak"], on)
        assert on, "the peak of a line has something running"


def test_a_15_minute_demand_above_the_rating_is_flagged_in_every_form(simulate, tmp_path):
    """A 20 A service under a steady 1.8 kW heater on L1 (15 A at 120 V):
    any quarter-hour with the water heater (18.75 A per leg at 240 V) on
    takes L1's demand above the rating."""
    extra = ('[[appliance]]\nid = "heater"\nwiring = "L1-N"\nbehaviour = "steady"\nstates = [ { power = "1800 W" } ]\n')
    d = simulate(home(service="20 A", length="1 d", extra=extra))
    decl = declared(service="20 A") + '\n[[appliance]]\nid = "heater"\npower = "1800 W"\nwiring = "L1-N"\n'
    r = report(d, decl, tmp_path)
    m = pd.read_parquet(d / "meters.parquet")
    idx = m.set_index(m["time"].dt.tz_convert("UTC"))
    for line in ["l1", "l2"]:
        want = demand_15min(idx[f"{line}_i_a"].astype(float))
        [got] = [x for x in r["loading"]["lines"] if x["conductor"] == line]
        assert got["demand_15min_a"] == pytest.approx(want, rel=1e-6)
        assert got["demand_above_service"] is bool(want > 20.0)
    [l1] = [x for x in r["loading"]["lines"] if x["conductor"] == "l1"]
    assert l1["demand_above_service"] is True
    q = idx["l1_i_a"].astype(float).resample("15min").mean().idxmax()
    assert l1["demand_quarter_local"] == local(q)
    for form in [(), ("--markdown",)]:
        out = audit(d, decl, tmp_path, *form).stdout
        assert "L1: the 15-minute demand" in out and "above the service rating of 20 A" in out
        assert "not an inspection" in out and "licensed electrician" in out
    assert "not an inspection" in r["caution"]


SHORT_STATES = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "100 A"

[[appliance]]
id = "heater"
states = ["1.2 kW", { power = "2.4 kW" }]
wiring = "{wiring}"

[[appliance]]
id = "toaster"
power = "900 W"
wiring = "L2-N"
"""


def test_a_short_entry_with_states_is_a_complete_entry(simulate, tmp_path):
    """A two-level heater declared as `states = [...]` with no behaviour:
    its steps (off to low, low to high, high to off) are all its own."""
    scenario = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
[run]
start = "2027-01-04T00:00"
length = "1 d"
seed = 3
[meter]
interval = "1 s"
[[appliance]]
id = "heater"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "30 min", spread = 0.4 } }, { name = "low", power = "1200 W", dwell = { median = "6 min", spread = 0.4 } }, { name = "high", power = "2400 W", dwell = { median = "6 min", spread = 0.4 } } ]
[[appliance]]
id = "toaster"
wiring = "L2-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "40 min", spread = 0.4 } }, { name = "on", power = "900 W", dwell = { median = "5 min", spread = 0.4 } } ]
"""
    d = simulate(scenario)
    r = report(d, SHORT_STATES.replace("{wiring}", "L1-N"), tmp_path)
    assert r["findings"] == []
    assert {a["id"]: a["verdict"] for a in r["appliances"]} == {"heater": "as declared", "toaster": "as declared"}
    r = report(d, SHORT_STATES.replace("{wiring}", "L2-N"), tmp_path)
    assert [(f["kind"], f["subject"]) for f in r["findings"]] == [("wrong-line", "heater")]


@pytest.mark.parametrize("entry, says", [
    ('states = [{ power = "1 kW", dwell = "3 min" }]', "`dwell` in a state of a short entry"),
    ('power = "1 kW"\nstates = ["2 kW"]', "`power` or `states`, not both"),
    ('states = []', "not a list of powers"),
    ('states = ["2 kw"]', "kW"),
])
def test_a_bad_short_state_is_refused_with_its_place(tmp_path, entry, says):
    text = f'[home]\nsupply = "split-phase"\ntimezone = "UTC"\n[[appliance]]\nid = "h"\nwiring = "L1-N"\n{entry}\n'
    data = tmp_path / "m.csv"
    data.write_text("time,l1_p_w,l2_p_w\n2027-01-04T00:00:00Z,1,2\n2027-01-04T00:00:10Z,1,2\n")
    p = audit(data, text, tmp_path)
    assert p.returncode == 2 and p.stdout == ""
    assert "declared.toml:" in p.stderr and says in p.stderr, p.stderr


def test_a_partial_declaration_invents_nothing_and_says_how_little_it_explains(simulate, tmp_path):
    """Only the pump declared, the rest said to be unknown: no finding, the
    metering as declared, and a note with the share of steps explained."""
    d = simulate(home(length="1 d"))
    text = ('[home]\nsupply = "split-phase"\ntimezone = "America/Chicago"\n[declaration]\npartial = true\n'
            '[[appliance]]\nid = "pump"\npower = "1100 W"\npf = 0.8\nwiring = "L1-L2"\n')
    r = report(d, text, tmp_path)
    assert r["findings"] == [] and r["possible"] == [], (r["findings"], r["possible"])
    assert [x["found"] for x in r["metering"]] == ["CT on L1", "CT on L2"]
    used, explained = r["steps"]["used"], r["steps"]["explained"]
    assert explained < used / 2
    assert any(f"explains {explained} of {used} steps" in n and "partial" in n for n in r["notes"]), r["notes"]


def test_an_export_with_the_home_alone_declared_gives_its_loading_and_loads(simulate, tmp_path):
    """`[home]` alone (no appliance): nothing is claimed about the loads, so
    the recurring ones found are listed apart, never as mistakes; the
    loading picture is there. A meters file without any declaration is
    refused: it has no supply, rating or time zone."""
    d = simulate(home(length="1 d"))
    m = pd.read_parquet(d / "meters.parquet")
    write_naive_csv(tmp_path / "export.csv", m, ["l1_p_w", "l2_p_w"])
    text = '[home]\nsupply = "split-phase"\ntimezone = "America/Chicago"\nservice = "100 A"\n'
    r = report(tmp_path / "export.csv", text, tmp_path)
    assert r["findings"] == [] and r["appliances"] == []
    sizes = sorted(u["evidence"]["p_w"] for u in r["unlisted_loads"])
    # The 900 W toaster and the 1.1 kW pump, which cycle all day, are among them.
    for size in [900, 1100]:
        assert any(abs(s - size) < 0.1 * size for s in sizes), sizes
    assert [x["measured"] for x in r["loading"]["lines"]] == [True, True]
    p = loadloom("audit", tmp_path / "export.csv", check=False)
    assert p.returncode == 2 and p.stdout == "" and "--declared" in p.stderr and "export.csv" in p.stderr

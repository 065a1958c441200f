"""Two mistakes at once, as the outside validation first met them: two
channels exchanged and an undeclared 4 kW load, at 10 s. The audit must
name the exchange once and the load once, with nothing else (before, it gave
two wrong metering findings). Invented home; the faults are the simulator's
own [faults] section, so the truth is known without reading the audit."""
import json

import pyarrow.parquet as pq
import pytest

from conftest import loadloom

# Invented home: 120 V loads on each line and one 240 V load, 10 s rows.
HOME = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "200 A"
[run]
start = "2027-01-04T00:00"
length = "1 d"
seed = 5
[meter]
interval = "10 s"

[[appliance]]
id = "kettle"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "40 min" }, { name = "on", power = "1500 W", dwell = "5 min" } ]

[[appliance]]
id = "toaster"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "70 min" }, { name = "on", power = "900 W", dwell = "4 min" } ]

[[appliance]]
id = "pump"
wiring = "L2-N"
behaviour = "cycle"
load = "electronic"
states = [ { name = "off", power = "0 W", dwell = "35 min" }, { name = "on", power = "700 W", pf = 0.85, dwell = "10 min" } ]

[[appliance]]
id = "iron"
wiring = "L2-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "60 min" }, { name = "on", power = "1200 W", dwell = "6 min" } ]

[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "50 min" }, { name = "on", power = "3000 W", dwell = "15 min" } ]
"""

EXTRA = """
[[appliance]]
id = "spa_heater"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "45 min" }, { name = "on", power = "4000 W", dwell = "8 min" } ]

[faults]
swap = ["L1", "L2"]
"""


@pytest.fixture(scope="module")
def report(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("two")
    (tmp / "home.toml").write_text(HOME + EXTRA)
    loadloom("run", tmp / "home.toml", "--out", tmp / "out", "--quiet")
    (tmp / "declared.toml").write_text(HOME)
    p = loadloom("audit", tmp / "out" / "home", "--declared", tmp / "declared.toml", "--json")
    # What the load really drew while on (a resistive 4 kW at 120 V draws
    # less as the line's voltage sags under it), from the truth table.
    on = [x for x in pq.read_table(tmp / "out" / "home" / "truth.parquet")
          .column("spa_heater_p_w").to_pylist() if x > 100]
    return json.loads(p.stdout), sum(on) / len(on)


def test_two_channels_exchanged_and_an_undeclared_4_kw_load_at_10_s(report):
    report, drawn = report
    found = [(f["kind"], f["subject"]) for f in report["findings"]]
    metering = [f for f in report["findings"] if f["kind"] != "undeclared-load"]
    loads = [f for f in report["findings"] if f["kind"] == "undeclared-load"]
    # On split-phase (V2 = -V1) two channels exchanged whole read as both CTs
    # on the other conductor and reversed (Kirchhoff, S = V conj(I)): either
    # name is right, once.
    assert len(metering) == 1, found
    assert metering[0]["kind"] in ("channels-exchanged", "cts-exchanged"), found
    assert set(metering[0]["subject"].split("+")) == {"l1", "l2"}, found
    assert len(loads) == 1, found
    ev = loads[0]["evidence"]
    assert ev["wiring"] == "L1-N", found
    assert abs(ev["p_w"] - drawn) <= 0.05 * drawn, (ev["p_w"], drawn)
    assert "not an inspection" in json.dumps(report)

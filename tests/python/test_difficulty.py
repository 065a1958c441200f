"""The difficulty card, recomputed independently from the dataset's own
files with pandas/numpy: coincident switching from events, energy shares
from truth, and ambiguous state pairs from the declared powers."""
import json

import numpy as np
import pandas as pd
import pyarrow.parquet as pq

from conftest import loadloom

HOME = """
[home]
supply = "split-phase"
timezone = "America/Denver"
[run]
start = "2027-04-05T00:00"
length = "3 d"
[meter]
interval = "1 min"
noise = { relative = "1 %", floor = "5 W" }

[[appliance]]
id = "lamp_a"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "12 min", spread = 0.5 } }, { name = "on", power = "60 W", dwell = { median = "7 min", spread = 0.5 } } ]

[[appliance]]
id = "lamp_b"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "9 min", spread = 0.5 } }, { name = "on", power = "63 W", dwell = { median = "5 min", spread = 0.5 } } ]

[[appliance]]
id = "lamp_c"
wiring = "L2-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "20 min" }, { name = "on", power = "61 W", dwell = "10 min" } ]

[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "30 min" }, { name = "on", power = "2 kW", dwell = "15 min" } ]

[[unmetered]]
id = "hidden"
wiring = "L2-N"
behaviour = "steady"
states = [ { power = "100 W" } ]
"""


def test_card_matches_an_independent_count(simulate):
    d = simulate(HOME)
    m = json.loads((d / "manifest.json").read_text())
    card = m["summary"]["difficulty"]
    ev = pq.read_table(d / "events.parquet").to_pandas()
    start = ev["start"].min()
    switches = ev.groupby("appliance", observed=True).apply(lambda e: e.iloc[1:], include_groups=False)
    interval = ((switches["start"] - start).dt.total_seconds() // 60).astype(int)
    per = interval.value_counts()
    rows = 3 * 24 * 60
    assert card["switching_interval_share"] == (len(per) / rows)
    assert abs(card["coincident_switching_share"] - (per >= 2).sum() / len(per)) < 1e-12
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    e = {a["id"]: truth[f"{a['id']}_p_w"].astype(float).sum() for a in m["appliances"]}
    hidden = truth["unmetered_p_w"].astype(float).sum()
    total = sum(e.values()) + hidden
    assert abs(card["line_to_line_energy_share"] - e["heater"] / total) < 1e-3
    assert abs(card["unmetered_energy_share"] - hidden / total) < 1e-3
    # 60 W and 63 W on L1 are within 2·√2·σ (σ = √((1 % · 63)² + 5²) ≈ 5.04 W, so 14.3 W);
    # 61 W sits on L2 alone; the heater's halves (1 kW per leg) match nothing.
    pairs = {(p["conductor"], p["a"]["appliance"], p["b"]["appliance"]) for p in card["ambiguous_pairs"]}
    assert pairs == {("l1", "lamp_a", "lamp_b")}
    assert card["ambiguous_pairs_per_conductor"] == {"l1": 1, "l2": 0}


def test_validate_prints_the_card(tmp_path):
    f = tmp_path / "home.toml"
    f.write_text(HOME)
    out = loadloom("validate", f).stdout
    assert "difficulty:" in out and "ambiguous state pairs on L1" in out and "lamp_a:on 60 W ~ lamp_b:on 63 W" in out
    assert "hidden (unmetered)" in out

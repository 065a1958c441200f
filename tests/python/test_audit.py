"""The audit's loading figures against a hand calculation on a small home
(current from P, Q and voltage; the neutral by Kirchhoff), with the caution
in every output format."""
import json

import numpy as np
import pytest

from conftest import loadloom

HOME = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "100 A"
source = { variation = 0, r = "0 ohm", x = "0 ohm", neutral_r = "0 ohm", neutral_x = "0 ohm" }
[run]
start = "2027-01-04T00:00"
length = "2 h"
[meter]
interval = "10 s"

[[appliance]]
id = "lamp"
wiring = "L1-N"
behaviour = "steady"
states = [ { power = "1200 W" } ]

[[appliance]]
id = "motor"
wiring = "L2-N"
behaviour = "steady"
load = "electronic"
states = [ { power = "600 W", pf = 0.8 } ]

[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "20 min" }, { name = "on", power = "2400 W", dwell = "25 min" } ]
"""


def test_loading_matches_a_hand_calculation(simulate):
    d = simulate(HOME)
    r = json.loads(loadloom("audit", d, "--json").stdout)
    # Hand calculation (phasors, L1 at 0°, L2 at 180°, 120 V):
    # lamp 1200/120 = 10 A on L1; motor 600/(120·0.8) = 6.25 A lagging 36.87° on L2;
    # heater 2400/240 = 10 A out on L1 and back on L2 when on.
    v1, v2 = 120.0, -120.0
    i_lamp = 10.0
    i_motor = (600 - 1j * 600 * np.tan(np.arccos(0.8))) / v2  # conj(S)/conj(V) with V real
    i_heat = 2400 / (v1 - v2)
    on = (i_lamp + i_heat, i_motor - i_heat)
    off = (i_lamp, i_motor)
    lines = {l["conductor"]: l for l in r["lines"]}
    assert lines["l1"]["peak_a"] == pytest.approx(abs(on[0]), rel=1e-4)
    assert lines["l2"]["peak_a"] == pytest.approx(abs(on[1]), rel=1e-4)
    # The heater is on for whole quarter-hours at some point: 15-minute demand = peak.
    assert lines["l1"]["demand_15min_a"] == pytest.approx(abs(on[0]), rel=1e-4)
    assert abs(off[0]) < lines["l1"]["mean_a"] < abs(on[0])
    assert lines["l1"]["peak_share_of_service"] == pytest.approx(abs(on[0]) / 100, rel=1e-4)
    # Neutral by Kirchhoff: I_N = −(I_L1 + I_L2); the heater's current cancels.
    i_n = abs(i_lamp + i_motor)
    assert r["neutral_peak_measured_a"] == pytest.approx(i_n, rel=1e-4)
    assert r["neutral_peak_estimated_a"] == pytest.approx(i_n, rel=1e-3)
    assert "not an inspection" in r["caution"]


def test_the_caution_is_in_every_format(simulate):
    d = simulate(HOME)
    for fmt in [(), ("--markdown",), ("--json",)]:
        out = loadloom("audit", d, *fmt).stdout
        assert "not an inspection" in out and "licensed electrician" in out, fmt
    p = loadloom("audit", d / "nowhere", check=False)
    assert p.returncode == 2 and "manifest" in p.stderr

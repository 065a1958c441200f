"""Shared by the audit tests on exports and on installers' declarations: the
invented four-load home they simulate (a water heater and a pump between
the legs, a kettle on L2, a toaster on L1) and the audit run against a
declaration written to a file."""
import json

from conftest import loadloom

# The home's text; the tests differ in the period, the meter, the service
# and how busy the kettle and the toaster are. Doubled braces are the
# TOML inline tables, single ones the places `four_load_home` fills.
FOUR_LOADS = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "{service}"
[run]
start = "{start}"
length = "{length}"
seed = {seed}
[meter]
interval = "{interval}"

[[appliance]]
id = "water_heater"
template = "water_heater"

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"
use = {{ starts_per_day = {kettle_starts}, weekend_starts_per_day = {kettle_starts}, hours = "{kettle_hours}" }}

[[appliance]]
id = "toaster"
wiring = "L1-N"
load = "resistive"
behaviour = "cycle"
states = [ {{ name = "off", power = "0 W", dwell = {{ median = "{toaster_off}", spread = 0.4 }} }}, {{ name = "on", power = "900 W", dwell = {{ median = "{toaster_on}", spread = 0.4 }} }} ]

[[appliance]]
id = "pump"
wiring = "L1-L2"
load = "motor"
behaviour = "cycle"
states = [ {{ name = "off", power = "0 W", dwell = {{ median = "40 min", spread = 0.4 }} }}, {{ name = "on", power = "1100 W", pf = 0.8, dwell = {{ median = "5 min", spread = 0.4 }} }} ]
{extra}
"""


# The four loads as an installer declares them, in short entries (each
# appliance's power and wiring as the scenario has them); the tests put
# their own [home] table before it.
SHORT_ENTRIES = """[[appliance]]
id = "water_heater"
power = "4500 W"
rated = "240 V"
wiring = "L1-L2"

[[appliance]]
id = "kettle"
power = "1500 W"
wiring = "L2-N"

[[appliance]]
id = "toaster"
power = "900 W"
wiring = "L1-N"

[[appliance]]
id = "pump"
power = "1100 W"
pf = 0.8
wiring = "L1-L2"
"""


def four_load_home(**places):
    """The home's scenario text with every place filled (all are required)."""
    return FOUR_LOADS.format(**places)


def audit(data, text, tmp_path, *args):
    """`loadloom audit DATA --declared declared.toml ARGS...`, the declaration
    `text` written to `tmp_path`; the finished process, whatever its status."""
    decl = tmp_path / "declared.toml"
    decl.write_text(text)
    return loadloom("audit", data, "--declared", decl, *args, check=False)


def report(data, text, tmp_path):
    """The audit's JSON report, the run required to succeed."""
    p = audit(data, text, tmp_path, "--json")
    assert p.returncode == 0, p.stderr
    return json.loads(p.stdout)

"""An outsider's validation of `loadloom audit`: installations the audit has
never seen, declared the way installers write declarations.

It shares no code with the audit or with its fault matrix: it writes
scenario files and declaration files as text, runs the release binary
(`loadloom run`, then `loadloom audit DATA --declared FILE --json`), and
judges the findings against what it injected, reading the truth table with
pyarrow. Homes: the demo scenarios (read as they are at run time: among
them a weather-driven heat pump, a 120/208 V apartment, and rooftop PV with
a battery) and six layouts written here (a cottage with a 240 V well pump,
a three-phase flat, a house with a workshop, a 120/208 V condo, a European
single-phase flat with a split heat pump and a balcony PV, a ranch house
with a weather-driven heat pump and rooftop PV but no battery).
Declarations: complete (the home's own text, with its templates and their
rated voltages), from the library (`template` and the believed wiring only,
nothing of the home's own habits; a short entry where no template fits),
short entries `{ id, power, wiring }` (with `pf` and `rated` where they
apply) for every appliance, and partial ones (only the appliances of 1 kW
or more, marked as partial). Mistakes: each metering kind the audit names
(on a split-phase supply a CT on the other conductor puts both CTs on one
leg), an appliance on the wrong line, line-to-line declared line-to-neutral
and back, three-phase declared single-phase, undeclared recurring loads
sized like declared appliances (as they draw on this supply: on another
line, on the same connection, or the size of one element of a multi-draw
appliance), and two at once. Intervals: 1 s, 10 s, and 1 min with only real
power per line. The data reaches the audit as the dataset folder or as a
monitor's export without a manifest: P and V per line in CSV with naive
local times (10 s), P only in Parquet with zoned times or in CSV with naive
local times (1 min).

    .venv/bin/python tests/python/audit_outside.py --cases 300 --seed 1 [--jobs 2] [--json OUT] [--cutoff NAME=VALUE]…

`--cutoff` hands a cut-off to every audit (as `loadloom audit --cutoff`
does), so one can be swept against the development seeds.

Seeds: 1 (the README's set), 2, 3, 4, 5 and 7 (CI's subset) are the
development seeds the audit may be looked at against (4 and 5 since the
audit of 0f8a627). Held out, each run once to report: 11 and 23, 311 (run
once on main at abeaf6c to describe the classes of failure, with the
generator before its homes and exports grew), 547 and 883, 9137, 5527,
6421, 7919, 4409, 6113, 8807, 3301, 5119, 6271, 7351, 2609 and 4157 (on
80b3395, 47b5fb6 and b5d19ab), all seen since; 6733 (the README's
held-out set, run on the audit of 84a8253, on 91b7cf1, the audit before
it, to tell what that change did, and on b8560e0 for the tally of
possible findings, with the same findings as on 84a8253).

Scoring (common practice in detection tasks, no source): a finding is
correct when it names an injected mistake (kind, subject, and for a wiring
the connection really used) or an undeclared load that is really there
(connection, and power within 20 %). Recall is over the mistakes the data
exercises; one it does not is counted apart with the reason: a metering
mistake needs 300 W on every conductor it involves (a CT moved onto an idle
conductor reads as a missing one, so a metering finding on its channels
counts as correct but the mistake not in recall); a misplaced or
undeclared load needs six state changes in the run and a working CT on its
line; a misplaced one-power entry with an undeclared load of its size
where it is declared reads the same as the declaration (both counted
apart). A mistake whose appliance the audit calls undecidable is counted
apart with its reason. Possible findings are not scored; they are judged
as findings are and tallied apart (`possible_tally`), to show what the
"possible" list holds back.
"""
import argparse
import collections
import concurrent.futures
import json
import os
import pathlib
import random
import re
import subprocess
import sys
import tempfile
import tomllib

import pyarrow as pa
import pyarrow.compute  # noqa: F401  (pa.compute)
import pyarrow.parquet as pq

ROOT = pathlib.Path(__file__).resolve().parents[2]
BIN = os.environ.get("LOADLOOM_BIN", str(ROOT / "target" / "release" / "loadloom"))
LIBRARY = ROOT / "scenarios" / "library"

# ---- homes written here (invented) ------------------------------------------

COTTAGE = """
[home]
label = "A small cottage with a well pump (invented)"
supply = "split-phase"
timezone = "America/Halifax"
service = "100 A"
[run]
start = "2027-02-01T00:00"
length = "2 d"
seed = 1
[meter]
interval = "1 s"
noise = { relative = "0.4 %", floor = "2 W" }

[[appliance]]
id = "well_pump"
label = "Submersible well pump, 240 V"
wiring = "L1-L2"
load = "motor"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "50 min", spread = 0.5 } },
           { name = "on", power = "1150 W", pf = 0.8, rated = "240 V", dwell = { median = "3 min", spread = 0.4 }, inrush = { peak = 4.0, decay = "0.4 s" } } ]

[[appliance]]
id = "water_heater"
template = "water_heater"

[[appliance]]
id = "baseboard"
template = "baseboard_heater"

[[appliance]]
id = "fridge"
template = "fridge"

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"

[[appliance]]
id = "microwave"
template = "microwave"
wiring = "L1-N"

[[appliance]]
id = "lights"
template = "led_lighting"
wiring = "L2-N"
"""

FLAT_3P = """
[home]
label = "A three-phase flat (invented)"
supply = "three-phase"
voltage = "230 V"
service = "25 A"
timezone = "Europe/Vienna"
[run]
start = "2027-03-01T00:00"
length = "2 d"
seed = 1
[meter]
interval = "1 s"

[[appliance]]
id = "storage_heater"
label = "Three-phase storage heater"
wiring = "3P"
load = "resistive"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "70 min", spread = 0.5 } },
           { name = "on", power = "6 kW", dwell = { median = "20 min", spread = 0.4 } } ]

[[appliance]]
id = "boiler"
label = "Water boiler, 400 V element"
wiring = "L1-L2"
load = "resistive"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "90 min", spread = 0.5 } },
           { name = "on", power = "2.2 kW", dwell = { median = "15 min", spread = 0.4 } } ]

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"

[[appliance]]
id = "fridge"
template = "fridge"
wiring = "L3-N"

[[appliance]]
id = "oven_fan"
label = "Oven with fan"
wiring = "L3-N"
load = "resistive"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "80 min", spread = 0.5 } },
           { name = "on", power = "1.6 kW", dwell = { median = "6 min", spread = 0.4 } } ]

[[appliance]]
id = "hair_dryer"
template = "hair_dryer"
wiring = "L1-N"

[[appliance]]
id = "lights"
template = "led_lighting"
wiring = "L1-N"
"""

WORKSHOP = """
[home]
label = "A house with a workshop (invented)"
supply = "split-phase"
timezone = "America/Denver"
service = "150 A"
[run]
start = "2027-01-11T00:00"
length = "2 d"
seed = 1
[meter]
interval = "1 s"

[[appliance]]
id = "compressor"
label = "Air compressor, 240 V"
wiring = "L1-L2"
load = "motor"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "40 min", spread = 0.5 } },
           { name = "on", power = "1.9 kW", pf = 0.82, dwell = { median = "4 min", spread = 0.3 } } ]

[[appliance]]
id = "space_heater"
label = "Portable heater"
wiring = "L2-N"
load = "resistive"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "25 min", spread = 0.4 } },
           { name = "on", power = "1.5 kW", dwell = { median = "9 min", spread = 0.4 } } ]

[[appliance]]
id = "dust_collector"
label = "Dust collector"
wiring = "L1-N"
load = "motor"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "60 min", spread = 0.5 } },
           { name = "on", power = "1.1 kW", pf = 0.8, dwell = { median = "5 min", spread = 0.5 } } ]

[[appliance]]
id = "water_heater"
template = "water_heater"

[[appliance]]
id = "fridge"
template = "fridge"
wiring = "L2-N"

[[appliance]]
id = "toaster"
label = "Toaster"
wiring = "L1-N"
load = "resistive"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "3 h", spread = 0.5 } },
           { name = "on", power = "900 W", dwell = { median = "3 min", spread = 0.3 } } ]

[[appliance]]
id = "lights"
template = "led_lighting"
"""

SMALL_208 = """
[home]
label = "A small 120/208 V condo (invented)"
supply = "three-phase"
voltage = "120 V"
service = "60 A"
timezone = "America/New_York"
[run]
start = "2027-01-18T00:00"
length = "2 d"
seed = 1
[meter]
interval = "1 s"

[[appliance]]
id = "water_heater"
template = "water_heater"
wiring = "L2-L3"

[[appliance]]
id = "wall_heater"
label = "Wall heater, 240 V rated"
wiring = "L1-L2"
load = "resistive"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = { median = "45 min", spread = 0.5 } },
           { name = "on", power = "2 kW", rated = "240 V", dwell = { median = "15 min", spread = 0.4 } } ]

[[appliance]]
id = "fridge"
template = "fridge"
wiring = "L3-N"

[[appliance]]
id = "microwave"
template = "microwave"
wiring = "L1-N"

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"

[[appliance]]
id = "lights"
template = "led_lighting"
wiring = "L3-N"
"""

FLAT_1P_EU = """
[home]
label = "A single-phase flat with a split heat pump and a balcony PV (invented)"
supply = "single-phase"
voltage = "230 V"
service = "40 A"
timezone = "Europe/Amsterdam"
latitude = 52.1
longitude = 5.1
[run]
start = "2027-02-15T00:00"
length = "2 d"
seed = 1
[weather]
climate = "rhineland"
[building]
ua = "85 W/K"
mass = "12 MJ/K"
heating = "20.5 °C"
deadband = "1 K"
[meter]
interval = "1 s"
[pv]
dc = "820 W"
inverter = "600 W"
tilt = "70 deg"
azimuth = "170 deg"
wiring = "L1-N"

[[appliance]]
id = "split_heat_pump"
label = "Air-to-air split heat pump, single-phase"
wiring = "L1-N"
load = "motor"
behaviour = "thermostat"
role = "heat-pump"
cop = 3.4
states = [ { name = "heating", power = "1.1 kW", pf = 0.95 } ]

[[appliance]]
id = "kettle"
template = "kettle_eu"

[[appliance]]
id = "hob"
template = "induction_hob_eu"

[[appliance]]
id = "oven"
template = "oven_eu"

[[appliance]]
id = "water_heater"
template = "water_heater_eu"

[[appliance]]
id = "washer"
template = "washing_machine_eu"

[[appliance]]
id = "fridge"
template = "fridge_freezer_eu"

[[appliance]]
id = "microwave"
template = "microwave_eu"

[[appliance]]
id = "lights"
template = "lighting_eu"
"""

RANCH_HP = """
[home]
label = "A ranch house with a weather-driven heat pump and rooftop PV (invented)"
supply = "split-phase"
service = "200 A"
timezone = "America/New_York"
latitude = 39.3
longitude = -76.6
[run]
start = "2027-03-10T00:00"
length = "2 d"
seed = 1
[weather]
climate = "harbour"
[building]
ua = "210 W/K"
mass = "25 MJ/K"
heating = "20.5 °C"
deadband = "1 K"
[meter]
interval = "1 s"
[pv]
dc = "5.4 kW"
inverter = "5 kW"
tilt = "25 deg"

[[appliance]]
id = "heat_pump"
label = "Heat pump outdoor unit, single stage"
wiring = "L1-L2"
load = "motor"
behaviour = "thermostat"
role = "heat-pump"
cop = 3.3
states = [ { name = "heating", power = "2.6 kW", pf = 0.95, inrush = { peak = 3.0, decay = "0.5 s" } } ]

[[appliance]]
id = "strip_heat"
label = "Backup heat strip"
wiring = "L1-L2"
behaviour = "thermostat"
role = "backup"
states = [ { name = "heating", power = "4800 W", rated = "240 V" } ]

[[appliance]]
id = "range"
template = "electric_range"

[[appliance]]
id = "dryer"
template = "clothes_dryer"

[[appliance]]
id = "water_heater"
template = "water_heater"

[[appliance]]
id = "fridge"
template = "fridge"

[[appliance]]
id = "dishwasher"
template = "dishwasher"
wiring = "L2-N"

[[appliance]]
id = "microwave"
template = "microwave"

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"

[[appliance]]
id = "lights"
template = "led_lighting"
"""

OWN_HOMES = {"cottage": COTTAGE, "flat3p": FLAT_3P, "workshop": WORKSHOP, "condo208": SMALL_208,
             "flat1p-eu": FLAT_1P_EU, "ranch-hp": RANCH_HP}
INTERVALS = {"1s": ("1 s", "2 d"), "10s": ("10 s", "4 d"), "1min-p": ("1 min", "7 d")}
# How the data reaches the audit: the dataset folder; a monitor's export of
# real power and voltage per line in CSV with naive local times (read in the
# declaration's time zone); real power only, in Parquet with zoned times or
# in CSV with naive local times. No manifest in an export.
EXPORTS = {"1s": ["dataset"], "10s": ["dataset", "dataset", "csv-naive-pv"],
           "1min-p": ["parquet-p", "csv-naive-p"]}
METERING = ["reversed-ct", "ct-on-other-conductor", "cts-exchanged", "channels-exchanged", "no-ct"]
WIRING = ["wrong-line", "declared-ln-seen-ll", "declared-ll-seen-ln", "wrong-connection"]
EXERCISED = 6  # state changes in the truth before a mistake counts as shown


def homes():
    """Every home: the demo scenarios as they are now (the solar bungalow
    with its rooftop PV and battery among them, declared with its `[pv]`
    and `[battery]`), and the ones above."""
    out = {p.stem: p.read_text() for p in sorted((ROOT / "scenarios").glob("*.toml"))}
    out.update(OWN_HOMES)
    return out


# ---- reading a home (our own reading, not the simulator's) -----------------

UNITS = {"W": 1.0, "kW": 1e3, "MW": 1e6}


def watts(s):
    v, u = s.split()
    return float(v) * UNITS[u]


def template(name):
    p = LIBRARY / f"{name}.toml"
    return tomllib.loads(p.read_text())["appliance"] if p.exists() else {}


def appliances(text):
    """Per appliance: its wiring, nameplate power, pf, rated voltage, whether
    all its draws share the appliance's wiring (it can be moved whole), its
    template, and its elements: every draw of 500 W or more with its wiring
    and the power it draws on this supply (a rated draw scales with the square
    of the voltage it gets, Ohm's law)."""
    doc = tomllib.loads(text)
    supply = doc["home"]["supply"]
    volts = watts_of_volts(doc["home"].get("voltage", "230 V" if supply != "split-phase" else "120 V"))
    out = []
    for a in doc.get("appliance", []):
        t = dict(template(a["template"])) if "template" in a else {}
        if "states" in a or "phases" in a:
            t.pop("states", None)
            t.pop("phases", None)
        t.update(a)
        wiring = t.get("wiring", "L1-N")
        best, movable, elements = (0.0, 1.0, None, wiring), True, set()
        for st in t.get("states", []) + t.get("phases", []):
            draws = st.get("draws", [st])
            p = sum(watts(d["power"]) for d in draws if "power" in d)
            if any("wiring" in d and d["wiring"] != wiring for d in draws):
                movable = False
            for d in draws:
                if "power" in d and watts(d["power"]) >= 500:
                    w = d.get("wiring", wiring)
                    elements.add((round(drawn(watts(d["power"]), d.get("rated"), w, supply, volts)), w))
            if p > best[0]:
                main = max(draws, key=lambda d: watts(d.get("power", "0 W")))
                best = (p, main.get("pf", 1.0), main.get("rated"), main.get("wiring", wiring))
        out.append({
            "id": a["id"], "wiring": wiring, "power_w": best[0], "pf": best[1],
            "rated": best[2], "main_wiring": best[3], "movable": movable,
            "switches": t.get("behaviour") in ("cycle", "program", "markov", "thermostat", "modulating"),
            "supply": supply, "template": a.get("template"),
            "drawn_w": drawn(best[0], best[2], best[3], supply, volts),
            "elements": sorted(elements),
        })
    return out


def watts_of_volts(s):
    v, u = s.split()
    return float(v) * {"V": 1.0, "kV": 1e3}[u]


def drawn(p, rated, wiring, supply, volts):
    """The power a draw of nameplate `p` (at `rated`, else at its
    connection's nominal voltage) takes on this supply: P (V / V_rated)²
    for a resistive element (Ohm's law); line to line is 2 V on a
    split-phase supply and √3 V on a three-phase one."""
    if not rated:
        return p
    v = volts
    if wiring == "3P" or "N" not in wiring:
        v = volts * (2.0 if supply == "split-phase" else 3 ** 0.5)
    return p * (v / watts_of_volts(rated)) ** 2


def lines_of(supply):
    return {"three-phase": ["L1", "L2", "L3"], "single-phase": ["L1"]}.get(supply, ["L1", "L2"])


def kind_of_wiring(w):
    return "3p" if w == "3P" else ("ll" if "N" not in w else "ln")


# ---- editing scenario text --------------------------------------------------

def set_key(text, section, key, value):
    """Sets `key = value` in the top-level `[section]` of a scenario text."""
    lines = text.split("\n")
    start = lines.index(f"[{section}]")
    end = next((i for i in range(start + 1, len(lines)) if lines[i].startswith("[")), len(lines))
    for i in range(start + 1, end):
        if re.match(rf"{key}\s*=", lines[i]):
            lines[i] = f"{key} = {value}"
            return "\n".join(lines)
    lines.insert(start + 1, f"{key} = {value}")
    return "\n".join(lines)


def blocks(text):
    """The text before the first appliance, and each `[[appliance]]` block."""
    parts = re.split(r"(?m)^(?=\[\[appliance\]\]\s*$)", text)
    return parts[0], parts[1:]


def block_id(block):
    return re.search(r'(?m)^id\s*=\s*"([^"]+)"', block).group(1)


def set_wiring(text, app_id, wiring):
    """The appliance's own wiring line (before any sub-table) set to `wiring`."""
    head, bs = blocks(text)
    out = []
    for b in bs:
        if block_id(b) == app_id:
            cut = re.search(r"(?m)^\[\[appliance\.", b)
            top, rest = (b[: cut.start()], b[cut.start():]) if cut else (b, "")
            if re.search(r"(?m)^wiring\s*=", top):
                top = re.sub(r'(?m)^wiring\s*=\s*"[^"]*"', f'wiring = "{wiring}"', top)
            else:
                top = re.sub(r'(?m)^(id\s*=.*)$', rf'\1\nwiring = "{wiring}"', top, count=1)
            b = top + rest
        out.append(b)
    return head + "".join(out)


def header_only(text):
    head, _ = blocks(text)
    head = re.sub(r"(?ms)^\[faults\].*?(?=^\[|\Z)", "", head)
    return head


def short_entry(a, wiring=None):
    w = wiring or a["main_wiring"]
    s = f'[[appliance]]\nid = "{a["id"]}"\npower = "{a["power_w"]:.0f} W"\nwiring = "{w}"\n'
    if a["pf"] < 1.0:
        s += f"pf = {a['pf']}\n"
    if a["rated"]:
        s += f'rated = "{a["rated"]}"\n'
    return s + "\n"


# ---- a case -----------------------------------------------------------------

def other_line(rng, lines, not_in):
    return rng.choice([l for l in lines if l not in not_in])


def pick_metering(rng, kind, lines):
    """A metering mistake: the channels it names (`subject`) and the
    conductors whose load the data needs to show it (`lines`)."""
    n = len(lines)
    if n < 2 and kind not in ("reversed-ct", "no-ct"):
        return None  # one line: no other conductor or channel to mix it up with
    a, b = rng.sample(range(n), 2) if n > 1 else (0, 0)
    ch = lambda c: f"l{c + 1}"
    if kind == "reversed-ct":
        return {"kind": kind, "subject": {ch(a)}, "lines": [lines[a]], "faults": f'ct = [ {{ conductor = "{lines[a]}", reversed = true }} ]'}
    if kind == "ct-on-other-conductor":
        # On a split-phase supply both CTs then sit on one leg (V2 = -V1: the
        # channel reads that leg's power negated), a mistake of its own.
        return {"kind": kind, "subject": {ch(a)}, "lines": [lines[a], lines[b]], "faults": f'ct = [ {{ conductor = "{lines[a]}", on = "{lines[b]}" }} ]'}
    if kind == "cts-exchanged":
        return {"kind": kind, "subject": {ch(a), ch(b)}, "lines": [lines[a], lines[b]], "faults": f'ct = [ {{ conductor = "{lines[a]}", on = "{lines[b]}" }}, {{ conductor = "{lines[b]}", on = "{lines[a]}" }} ]'}
    if kind == "channels-exchanged":
        return {"kind": kind, "subject": {ch(a), ch(b)}, "lines": [lines[a], lines[b]], "faults": f'swap = ["{lines[a]}", "{lines[b]}"]'}
    return {"kind": kind, "subject": {ch(a)}, "lines": [lines[a]], "faults": f'no_ct = "{lines[a]}"'}


def pick_undeclared(rng, big, apps, lines):
    """A recurring load nobody declared: the size of a declared appliance
    (within 3 %, as drawn on this supply) on another line or on the same
    connection; the size of one element of a multi-draw appliance on that
    element's connection; or any size from 600 W to 4 kW."""
    if not big:
        return None
    parts = [(p, w) for a in apps if len(a["elements"]) > 1 or not a["movable"] for p, w in a["elements"]]
    u = rng.random()
    if parts and u < 0.2:
        p, w = rng.choice(parts)
        return {"kind": "undeclared-load", "subject": "extra_load", "wiring": w, "power_w": p * rng.uniform(0.97, 1.03), "like": "element"}
    like = rng.choice(big)
    p = like["drawn_w"] * rng.uniform(0.97, 1.03)
    ln = kind_of_wiring(like["wiring"]) == "ln"
    same = len(lines) == 1 or (ln and rng.random() < 0.3)
    if same:
        w = like["wiring"]
    elif ln:
        w = f'{other_line(rng, lines, [like["wiring"][:2]])}-N'
    else:
        w = f"{other_line(rng, lines, [])}-N"
    how = "same connection" if same else "other line"
    if rng.random() < 0.3:
        p, how = rng.uniform(600, 4000), "any size"
    return {"kind": "undeclared-load", "subject": "extra_load", "wiring": w, "power_w": p, "like": how}


def pick_mistake(rng, kind, apps, lines):
    """A mistake of `kind` on this home, or None when the home has no subject."""
    if kind in METERING:
        return pick_metering(rng, kind, lines)
    big = [a for a in apps if a["movable"] and a["switches"] and a["power_w"] >= 500]
    if kind == "undeclared-load":
        return pick_undeclared(rng, big, apps, lines)
    several = len(lines) > 1
    pools = {
        "wrong-line": [a for a in big if kind_of_wiring(a["wiring"]) == "ln" and several],
        "declared-ln-seen-ll": [a for a in big if kind_of_wiring(a["wiring"]) == "ll"],
        "declared-ll-seen-ln": [a for a in big if kind_of_wiring(a["wiring"]) == "ln" and several],
        "wrong-connection": [a for a in big if kind_of_wiring(a["wiring"]) == "3p"],
    }
    if not pools[kind]:
        return None
    a = rng.choice(pools[kind])
    w = a["wiring"]
    if kind == "wrong-line":
        decl = f"{other_line(rng, lines, [w[:2]])}-N"
    elif kind == "declared-ln-seen-ll":
        decl = f"{rng.choice(w.split('-'))}-N"
    elif kind == "declared-ll-seen-ln":
        decl = f"{w[:2]}-{other_line(rng, lines, [w[:2]])}"
    else:
        decl = f"{rng.choice(lines)}-N"
    return {"kind": kind, "subject": a["id"], "truth": w, "declared": decl}


def make_case(i, seed):
    """Case i of a run: home, interval, declaration style and mistakes."""
    rng = random.Random(f"{seed}-{i}")
    all_homes = homes()
    name = rng.choice(sorted(all_homes))
    text = all_homes[name]
    apps = appliances(text)
    lines = lines_of(apps[0]["supply"])
    interval = rng.choice(sorted(INTERVALS))
    style = rng.choice(["complete", "complete", "templates", "short", "partial"])
    export = rng.choice(EXPORTS[interval])
    r = rng.random()
    mistakes = []
    if r >= 0.2:
        pool = METERING + WIRING + ["undeclared-load"] * 2 + ["wrong-connection"]
        count = 2 if r > 0.85 else 1
        tries = 0
        while len(mistakes) < count and tries < 40:
            tries += 1
            k = rng.choice(pool)
            if any(m["kind"] in METERING for m in mistakes) and k in METERING:
                continue
            m = pick_mistake(rng, k, apps, lines)
            if m and not any(m.get("subject") == x.get("subject") for x in mistakes):
                mistakes.append(m)
    return {"i": i, "home": name, "interval": interval, "style": style, "export": export,
            "mistakes": mistakes, "seed": rng.randrange(1, 10_000)}


def truth_text(case, text):
    step, length = INTERVALS[case["interval"]]
    t = set_key(text, "run", "length", f'"{length}"')
    t = set_key(t, "run", "seed", str(case["seed"]))
    t = set_key(t, "meter", "interval", f'"{step}"')
    t = re.sub(r"(?m)^step\s*=.*$", "", t)
    faults = [m["faults"] for m in case["mistakes"] if "faults" in m]
    for m in case["mistakes"]:
        if m["kind"] == "undeclared-load":
            t += (f'\n[[appliance]]\nid = "{m["subject"]}"\nwiring = "{m["wiring"]}"\nload = "resistive"\n'
                  'behaviour = "cycle"\nstates = [ { name = "off", power = "0 W", dwell = { median = "45 min", spread = 0.5 } }, '
                  f'{{ name = "on", power = "{m["power_w"]:.0f} W", dwell = {{ median = "8 min", spread = 0.4 }} }} ]\n')
    if faults:
        t += "\n[faults]\n" + "\n".join(faults) + "\n"
    return t


def declaration_text(case, text):
    apps = appliances(text)
    moved = {m["subject"]: m["declared"] for m in case["mistakes"] if "declared" in m}
    if case["style"] == "complete":
        t = header_only(text) + "".join(blocks(text)[1])
        for a, w in moved.items():
            t = set_wiring(t, a, w)
        return re.sub(r"(?ms)^\[faults\].*?(?=^\[|\Z)", "", t)
    head = header_only(text)
    if case["style"] == "partial":
        head += "\n[declaration]\npartial = true\n"
    keep = [a for a in apps if case["style"] in ("short", "templates") or a["power_w"] >= 1000 or a["id"] in moved]
    entry = template_entry if case["style"] == "templates" else short_entry
    return head + "\n" + "".join(entry(a, moved.get(a["id"])) for a in keep)


def template_entry(a, wiring=None):
    """An installer's entry from the library: the template's name and the
    wiring as believed, nothing of the home's own (its habits, its settings);
    an appliance with no template gets a short entry."""
    if not a["template"]:
        return short_entry(a, wiring)
    return f'[[appliance]]\nid = "{a["id"]}"\ntemplate = "{a["template"]}"\nwiring = "{wiring or a["wiring"]}"\n\n'


def line_peak(truth, channel):
    """The largest total appliance power on one conductor (`l2`), W."""
    cols = [c for c in truth.column_names if c.endswith(f"_{channel}_p_w")]
    if not cols:
        return 0.0
    total = pa.compute.add(truth.column(cols[0]), 0)
    for c in cols[1:]:
        total = pa.compute.add(total, truth.column(c))
    return pa.compute.max(total).as_py() or 0.0


def changes(truth, app_id):
    col = truth.column(f"{app_id}_state").to_pylist()
    return sum(1 for a, b in zip(col, col[1:]) if a != b)


def export(case, data, d):
    """The data as the case hands it to the audit: the dataset folder, or a
    monitor's export written here (see EXPORTS)."""
    kind = case.get("export", "dataset")
    if kind == "dataset":
        return data
    m = pq.read_table(data / "meters.parquet")
    pattern = r"l\d_(p_w|v_v)" if kind.endswith("-pv") else r"l\d_p_w"
    cols = [c for c in m.column_names if re.fullmatch(pattern, c)]
    if kind == "parquet-p":
        pq.write_table(m.select(["time"] + cols), d / "meters-p.parquet")
        return d / "meters-p.parquet"
    # Wall-clock times with no offset, as many monitors write them.
    local = pa.compute.strftime(pa.compute.local_timestamp(m.column("time")), format="%Y-%m-%d %H:%M:%S")
    rows = [",".join(["time"] + cols)]
    values = [m.column(c).to_pylist() for c in cols]
    for k, t in enumerate(local.to_pylist()):
        rows.append(",".join([t] + ["" if v[k] is None else repr(float(v[k])) for v in values]))
    (d / "export.csv").write_text("\n".join(rows) + "\n")
    return d / "export.csv"


def run_case(case, work, cutoffs=()):
    text = homes()[case["home"]]
    d = pathlib.Path(work) / f"case{case['i']}"
    d.mkdir(parents=True, exist_ok=True)
    (d / "home.toml").write_text(truth_text(case, text))
    (d / "declared.toml").write_text(declaration_text(case, text))
    p = subprocess.run([BIN, "run", d / "home.toml", "--out", d / "out", "--quiet"], capture_output=True, text=True)
    if p.returncode != 0:
        return {**case, "error": "run: " + p.stderr[-400:]}
    data = d / "out" / "home"
    truth = pq.read_table(data / "truth.parquet")
    data = export(case, data, d)
    cut = [x for c in cutoffs for x in ("--cutoff", c)]
    p = subprocess.run([BIN, "audit", data, "--declared", d / "declared.toml", "--json", *cut],
                       capture_output=True, text=True)
    shown = [shows(m, case, truth) for m in case["mistakes"]]
    out = {**case, "exercised": [why is None for why in shown], "why_not": shown,
           "unlisted": unlisted(case, text), "cutoffs": list(cutoffs)}
    if p.returncode != 0:
        return {**out, "error": "audit: " + p.stderr[-400:]}
    return {**out, "report": json.loads(p.stdout)}


def unread(case):
    """Conductors no CT reads in this case: a missing CT injected, or a CT
    moved onto another conductor, which leaves its own conductor read by
    none (the first of its `lines`)."""
    out = set()
    for m in case["mistakes"]:
        if m["kind"] == "no-ct":
            out |= set(m["lines"])
        elif m["kind"] == "ct-on-other-conductor":
            out.add(m["lines"][0])
    return out


def lookalike(m, case):
    """Whether an undeclared load of this misplaced appliance's size sits on
    the line it is declared on, while the declaration gives it one power and
    no habit (a short entry): the data then reads the same either way."""
    if m["kind"] != "wrong-line" or case["style"] not in ("short", "partial"):
        return False
    size = next(a["drawn_w"] for a in appliances(homes()[case["home"]]) if a["id"] == m["subject"])
    return any(u["kind"] == "undeclared-load" and same_wiring(u["wiring"], m["declared"])
               and abs(u["power_w"] - size) <= 0.2 * size for u in case["mistakes"])


def shows(m, case, truth):
    """None when the data shows mistake `m`, else why it cannot: a metering
    mistake needs load on every conductor it involves; a misplaced or
    undeclared load needs six state changes in the run, a working CT on
    its line, and no look-alike that reads the same."""
    if m["kind"] in METERING:
        idle = [l for l in m["lines"] if line_peak(truth, l.lower()) < 300]
        return f"{'+'.join(idle)} carries under 300 W" if idle else None
    n = changes(truth, m["subject"])
    if n < EXERCISED:
        return f"switched {n} times (under {EXERCISED})"
    wiring = m["wiring"] if m["kind"] == "undeclared-load" else m["truth"]
    if "N" in wiring and wiring[:2] in unread(case):
        return f"on {wiring[:2]}, which no CT reads"
    if m["kind"] == "undeclared-load":
        moved = [x for x in case["mistakes"] if lookalike(x, case)]
        if any(same_wiring(x["declared"], wiring) for x in moved):
            return "a misplaced one-power entry of its size is declared on its line"
    elif lookalike(m, case):
        return "an undeclared load of its size is on the line it is declared on"
    return None


def unlisted(case, text):
    """Real loads the declaration does not list: (wiring, power) pairs."""
    apps = appliances(text)
    listed = set(re.findall(r'(?m)^id\s*=\s*"([^"]+)"', declaration_text(case, text)))
    out = [(a["main_wiring"], a["drawn_w"]) for a in apps if a["id"] not in listed]
    out += [(m["wiring"], m["power_w"]) for m in case["mistakes"] if m["kind"] == "undeclared-load"]
    # A misplaced appliance with a look-alike where it is declared is, read
    # from the data, a load of its size where it really is.
    size = {a["id"]: a["drawn_w"] for a in apps}
    out += [(m["truth"], size[m["subject"]]) for m in case["mistakes"] if lookalike(m, case)]
    return out


# ---- judging ----------------------------------------------------------------

def same_wiring(a, b):
    return a == b or (a and b and "-" in a and set(a.split("-")) == set(b.split("-")))


def judge_finding(f, case, report):
    """Which injected mistake a finding names (its index), 'unlisted' for a
    real undeclared load, or None when it is false."""
    subj = set(f["subject"].split("+"))
    two_lines = lines_of(appliances(homes()[case["home"]])[0]["supply"]) == ["L1", "L2"]
    for k, m in enumerate(case["mistakes"]):
        if m["kind"] in METERING and f["kind"] == m["kind"] and subj == m["subject"]:
            return k
        # A metering mistake on an idle conductor reads as another one (the
        # CT of l2 on an idle L3 reads as no CT on l2): a metering finding on
        # its channels names a real mistake the data shows only in part.
        if m["kind"] in METERING and f["kind"] in METERING and not case["exercised"][k] \
                and subj <= set(m["subject"]):
            return k
        # On a split-phase supply (V2 = -V1) two channels exchanged whole
        # read the same powers as both CTs on the other conductor and
        # reversed: the data cannot tell them apart (Kirchhoff, S = V·conj(I)).
        if two_lines and m["kind"] == "channels-exchanged" and subj <= m["subject"] \
                and f["kind"] in ("ct-on-other-conductor", "cts-exchanged", "reversed-ct"):
            return k
        if m["kind"] in WIRING and f["subject"] == m["subject"]:
            seen = next((a.get("seen") for a in report["appliances"] if a["id"] == m["subject"]), None)
            if same_wiring(seen, m["truth"]) or (seen and m["truth"] in seen.split(" + ")):
                return k
    if f["kind"] == "undeclared-load":
        ev = f.get("evidence", {})
        for k, m in enumerate(case["mistakes"]):
            if m["kind"] == "undeclared-load" and same_wiring(ev.get("wiring"), m["wiring"]) \
                    and abs(ev.get("p_w", 0) - m["power_w"]) <= 0.2 * m["power_w"]:
                return k
        for w, p in case["unlisted"]:
            if same_wiring(ev.get("wiring"), w) and abs(ev.get("p_w", 0) - p) <= 0.25 * p:
                return "unlisted"
    return None


# The groups the table breaks the cases down by, each with its key.
GROUPS = {
    "by interval and declaration": lambda r: f'{r["interval"]} {r["style"]}',
    "by home": lambda r: r["home"],
    "by interval and data handed over": lambda r: f'{r["interval"]} {r.get("export", "dataset")}',
}


class Tally:
    """Counts kept in several groups at once (`by["found"] += 1`)."""

    def __init__(self, counters):
        self.counters = counters

    def __getitem__(self, k):
        return self.counters[0][k]

    def __setitem__(self, k, v):
        delta = v - self.counters[0][k]
        for c in self.counters:
            c[k] += delta


def numbers_out(text):
    """A reason with its counts and sizes replaced by N (line names kept),
    so reasons group."""
    return re.sub(r"(?<![LlN\d])\d+(\.\d+)?(?![P\d])", "N", text)


def score(results):
    per = collections.defaultdict(lambda: collections.Counter())
    reasons = collections.Counter()
    unshown = collections.Counter()
    totals = collections.Counter()
    false = []
    for g in GROUPS:
        totals[g] = collections.defaultdict(collections.Counter)
    for r in results:
        clean = not r["mistakes"] and r["style"] != "partial"
        by = Tally([totals[g][key(r)] for g, key in GROUPS.items()])
        by["cases"] += 1
        by["errors"] += "error" in r
        totals["cases"] += 1
        totals["clean"] += clean
        if "error" in r:
            totals["errors"] += 1
            for m in r["mistakes"]:
                per[m["kind"]]["injected"] += 1
                per[m["kind"]]["missed (error)"] += 1
            continue
        rep = r["report"]
        found = set()
        # A partial declaration lists only some appliances: the loads it
        # leaves out are reported apart ("unlisted"), and an injected load
        # counts as found there (wrong ones there are false like any other).
        for f in rep["findings"] + rep.get("unlisted_loads", []):
            k = judge_finding(f, r, rep)
            kind = f["kind"]
            if k is None or (k != "unlisted" and k in found):
                per[kind]["false"] += 1
                by["false"] += 1
                false.append((r["i"], r["home"], r["interval"], r["style"], kind, f["subject"], f["confidence"]))
            else:
                per[kind]["correct"] += 1
                if k != "unlisted":
                    found.add(k)
        if clean and rep["findings"]:
            totals["clean with a finding"] += 1
        totals["possible"] += len(rep.get("possible", []))
        for k, m in enumerate(r["mistakes"]):
            c = per[m["kind"]]
            c["injected"] += 1
            if not r["exercised"][k]:
                c["not exercised"] += 1
                unshown[(m["kind"], numbers_out(r["why_not"][k]))] += 1
                continue
            by["decided"] += 1
            if k in found:
                c["found"] += 1
                by["found"] += 1
                continue
            verdict = next((a for a in rep["appliances"] if a["id"] == m["subject"]), None)
            if verdict and verdict["verdict"] == "undecidable":
                by["decided"] -= 1
                c["undecidable"] += 1
                reasons[numbers_out(verdict["reason"])] += 1
            else:
                c["missed"] += 1
    totals["not shown"] = unshown
    return per, totals, reasons, false


def why_words(text, n=4):
    """The first `n` words of why a finding is only possible, numbers out:
    the class of its doubt ("it is smaller than", "at N s per"); a finding
    with no doubt is possible for its confidence alone."""
    return " ".join(numbers_out(text).split()[:n]) if text else "confidence below the line"


def possible_tally(results):
    """How often a possible finding would have been right as a finding
    (judged as findings are), per kind, interval and class of doubt:
    {(kind, interval, why): [real, listed]}. What the "possible" list
    holds back, measured; not part of recall or precision."""
    tally = collections.defaultdict(lambda: [0, 0])
    for r in results:
        if "error" in r:
            continue
        rep = r["report"]
        # As in `score`: a mistake named once is found; naming it again,
        # after a finding or another possible one, is no more right.
        found = {judge_finding(f, r, rep) for f in rep["findings"] + rep.get("unlisted_loads", [])}
        for f in rep.get("possible", []):
            t = tally[(f["kind"], r["interval"], why_words(f.get("possible_because")))]
            k = judge_finding(f, r, rep)
            real = k is not None and (k == "unlisted" or k not in found)
            t[0] += real
            t[1] += 1
            found.add(k)
    return tally


def possible_lines(tally, least=5):
    """The tally's groups of `least` possible findings or more, largest
    first, and the rest summed."""
    rows = sorted(tally.items(), key=lambda kv: -kv[1][1])
    out = [f"  {real} of {listed} real: {kind}, {interval}, \"{why} …\""
           for (kind, interval, why), (real, listed) in rows if listed >= least]
    rest = [v for v in tally.values() if v[1] < least]
    if rest:
        out.append(f"  {sum(v[0] for v in rest)} of {sum(v[1] for v in rest)} real: the other groups")
    return out


def table(per, totals, reasons, false):
    out = [f"cases {totals['cases']}, clean {totals['clean']}, clean with a finding {totals['clean with a finding']}, "
           f"refused by the audit {totals['errors']}, listed as possible (not scored) {totals['possible']}", "",
           "| mistake | injected | not exercised | undecidable | decided | found | recall | findings | correct | precision |",
           "|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|"]
    allk = collections.Counter()
    kinds = METERING + WIRING + ["undeclared-load"]
    for kind in kinds + sorted(set(per) - set(kinds)):
        c = per[kind]
        decided = c["injected"] - c["not exercised"] - c["undecidable"]
        fnd = c["correct"] + c["false"]
        for key in ("injected", "not exercised", "undecidable", "found", "correct", "false"):
            allk[key] += c[key]
        out.append(row(kind, c, decided, fnd))
    decided = allk["injected"] - allk["not exercised"] - allk["undecidable"]
    out.append(row("all", allk, decided, allk["correct"] + allk["false"]))
    for g in GROUPS:
        out += ["", f"{g} (cases, refused, decided mistakes found, false findings):"]
        out += [f"  {k}: {v['cases']} cases, {v['errors']} refused, {v['found']}/{v['decided']} found, {v['false']} false"
                for k, v in sorted(totals[g].items())]
    out += ["", "not exercised (the data cannot show the mistake), by reason:"]
    out += [f"  {n} × {k}: {w}" for (k, w), n in sorted(totals["not shown"].items())]
    out += ["", "undecidable, by reason:"] + [f"  {n} × {r}" for r, n in reasons.most_common()]
    out += ["", "false findings (case, home, interval, declaration, kind, subject, confidence):"]
    out += [f"  {x}" for x in false[:60]]
    return "\n".join(out)


def summary(per, totals):
    """The overall figures: decided mistakes, recall, findings, precision,
    clean homes and how many of them got a finding (at or above the
    audit's "possible" line)."""
    found = sum(c["found"] for c in per.values())
    decided = sum(c["injected"] - c["not exercised"] - c["undecidable"] for c in per.values())
    correct = sum(c["correct"] for c in per.values())
    made = correct + sum(c["false"] for c in per.values())
    return {"decided": decided, "found": found, "recall": found / decided if decided else 1.0,
            "findings": made, "correct": correct, "precision": correct / made if made else 1.0,
            "clean": totals["clean"], "clean with a finding": totals["clean with a finding"]}


def row(kind, c, decided, fnd):
    rec = f"{100 * c['found'] / decided:.1f} %" if decided else "–"
    prec = f"{100 * c['correct'] / fnd:.1f} %" if fnd else "–"
    return (f"| {kind} | {c['injected']} | {c['not exercised']} | {c['undecidable']} | {decided} | "
            f"{c['found']} | {rec} | {fnd} | {c['correct']} | {prec} |")


def run(cases, seed, jobs, work, cutoffs=()):
    todo = [make_case(i, seed) for i in range(cases)]
    with concurrent.futures.ThreadPoolExecutor(jobs) as ex:
        return list(ex.map(lambda c: run_case(c, work, cutoffs), todo))


def main():
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--cases", type=int, default=int(os.environ.get("AUDIT_OUTSIDE_CASES", 300)))
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--jobs", type=int, default=2)
    ap.add_argument("--json", help="write every case with its report here")
    ap.add_argument("--keep", help="keep the cases' files in this folder")
    ap.add_argument("--cutoff", action="append", default=[], metavar="NAME=VALUE",
                    help="audit with this cut-off changed (`loadloom audit --cutoff`), to sweep one")
    a = ap.parse_args()
    with tempfile.TemporaryDirectory() as tmp:
        res = run(a.cases, a.seed, a.jobs, a.keep or tmp, a.cutoff)
    print(table(*score(res)))
    print("\npossible findings (not scored) that name a real mistake or load, by kind, interval and why:")
    print("\n".join(possible_lines(possible_tally(res))))
    errs = [r for r in res if "error" in r]
    for r in errs[:10]:
        print("error in case", r["i"], r["home"], r["interval"], r["style"], r["error"].strip().split("\n")[0], file=sys.stderr)
    if a.json:
        pathlib.Path(a.json).write_text(json.dumps(res, default=list, indent=1))


if __name__ == "__main__":
    main()

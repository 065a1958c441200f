"""A hostile tester for the loadloom binary: mutated demo scenarios and
population files, run through `validate`, `validate --quiet`, `run` and
`fleet`, each checked for what issue 18 asks of bad input.

Every case must end with exit status 0 or 2 (never 101, a panic, nor a
signal), within a time limit (no hang), leave no `.NAME.partial-PID/` folder
behind, and when it succeeds, write only finite numbers (read back with
pyarrow, a reference library from the registry, not with our reader).
`validate` and `validate --quiet` must agree on the exit status.

The mutations are made on the TOML text with regular expressions and share
no code with the scenario decoder. Seeded: the same seed gives the same
cases.

    LOADLOOM_BIN=target/release/loadloom .venv/bin/python tests/python/hostile.py --cases 500 --seed 1

prints the counts (cases, panics, hangs, non-finite, leftovers, quiet
mismatches) and the first failures with the mutation that made them.
"""

import argparse
import math
import os
import pathlib
import random
import re
import subprocess
import sys
import tempfile

import pyarrow.parquet as pq

ROOT = pathlib.Path(__file__).resolve().parents[2]
SCENARIOS = ["split-phase-house.toml", "three-phase-house.toml", "apartment-208.toml", "solar-bungalow.toml"]
POPULATION = ROOT / "scenarios" / "fleet" / "mixed-street.toml"

# Extreme numbers a hostile file would hold (issue 18's list and its kin).
EXTREMES = [
    "1e308", "1e-320", "-1", "0", "-0", "1e30", "1e-30", "nan", "inf", "-inf",
    "4294967296", "9.999999e99", "0.000001", "123456789012345678901234567890",
    "1e-7", "5e-324", "1.7976931348623157e308",
]
UNITS = ["W", "kW", "V", "kV", "A", "mA", "s", "ms", "min", "h", "d", "Hz", "%", "ohm", "var", "MW",
         "K", "°C", "W/K", "MJ/K", "kWh", "deg", "m²"]
QUANTITY = re.compile(r'"(-?[0-9][0-9.eE+-]*)\s*([A-Za-z%]+)"')
BARE = re.compile(r"(=\s*)(-?[0-9][0-9._eE+-]*)(\s*[,}\n#])")
IDLINE = re.compile(r'^(\s*(?:id|name)\s*=\s*)"([^"]*)"', re.M)


def mutate_quantity(text, rng):
    hits = list(QUANTITY.finditer(text))
    if not hits:
        return text, "none"
    m = rng.choice(hits)
    num = rng.choice(EXTREMES)
    unit = m.group(2) if rng.random() < 0.8 else rng.choice(UNITS)
    new = f'"{num} {unit}"'
    return text[: m.start()] + new + text[m.end():], f"{m.group(0)} -> {new}"


def mutate_bare(text, rng):
    hits = list(BARE.finditer(text))
    if not hits:
        return text, "none"
    m = rng.choice(hits)
    num = rng.choice(EXTREMES + ["1e-320", "1e308"])
    if num in ("nan", "inf", "-inf") and rng.random() < 0.5:
        num = "+" + num.lstrip("-") if num != "-inf" else num
    new = m.group(1) + num + m.group(3)
    return text[: m.start()] + new + text[m.end():], f"{m.group(2)} -> {num}"


def mutate_name(text, rng):
    hits = list(IDLINE.finditer(text))
    if not hits:
        return text, "none"
    m = rng.choice(hits)
    choice = rng.choice(["long", "long", "conductor", "reserved", "empty", "unicode", "64", "65"])
    name = {
        "long": "a" * 70000,
        "conductor": m.group(2) + rng.choice(["_l1", "_l2", "_l3", "_n"]),
        "reserved": rng.choice(["unmetered", "total", "time"]),
        "empty": "",
        "unicode": "kühl\u202e",
        "64": "a" * 64,
        "65": "a" * 65,
    }[choice]
    return text[: m.start(2)] + name + text[m.end(2):], f"{m.group(1).strip()} {choice}"


SETTINGS = [
    ('step = "1 s"', ['step = "10 ms"', 'step = "1e-30 s"', 'step = "2 min"', 'step = "0.1 s"']),
    ('start = "2027-01-04T00:00"', ['start = "2027-03-14T02:30"', 'start = "2027-01-04T00:00+05:00"',
                                    'start = "2027-01-04T00:00Z"', 'start = "9999-12-31T23:00"',
                                    'start = "2027-02-30T00:00"']),
    ('timezone = "', ['timezone = "Nowhere/Atlantis', 'timezone = "UTC', 'timezone = "Etc/GMT+14']),
    ('service = "', ['service = "1e-320 A', 'service = "1 A']),
]


def mutate_setting(text, rng):
    old, news = rng.choice(SETTINGS)
    if old not in text:
        return text, "none"
    if old.endswith('"') and old.count('"') == 1:  # a prefix: replace the value up to its quote
        i = text.index(old)
        j = text.index('"', i + len(old))
        new = rng.choice(news)
        return text[:i] + new + text[j:], new
    new = rng.choice(news)
    return text.replace(old, new, 1), new


def mutate_source(text, rng):
    """The source impedance of [home] (never a [[reference]]'s `source`, the
    citation of its figure)."""
    imp = rng.choice(["5 ohm", "50 ohm", "1e308 ohm", "1e-320 ohm", "0.5 ohm", "2 ohm"])
    line = f'source = {{ r = "{imp}", x = "{imp}" }}'
    span = table_span(text, "home")
    if span is None:
        return text, "none"
    home = text[span[0]:span[1]]
    if re.search(r"^source = .*$", home, re.M):
        home = re.sub(r"^source = .*$", line, home, count=1, flags=re.M)
    else:
        home = home.replace("[home]\n", "[home]\n" + line + "\n", 1)
    return text[:span[0]] + home + text[span[1]:], line


HEADER = re.compile(r"^\[\[?[A-Za-z0-9_.]+\]\]?$")


def table_span(text, name):
    """The span of the table `[name]` in `text`: its header line to the next
    table header (not an array written across lines) or the end."""
    at, start = 0, None
    for line in text.splitlines(keepends=True):
        bare = line.rstrip()
        if start is not None and HEADER.match(bare):
            return start, at
        if bare == f"[{name}]":
            start = at
        at += len(line)
    return None if start is None else (start, len(text))


def put_tables(text, add):
    """`text` with each table of `add` put in: one the text already has is
    replaced (a second `[weather]` would only be refused as a duplicate),
    the rest and every [[appliance]] appended."""
    chunks = []
    for line in add.splitlines(keepends=True):
        if HEADER.match(line.rstrip()) or not chunks:
            chunks.append("")
        chunks[-1] += line
    appended = ""
    for chunk in chunks:
        head = chunk.split("\n", 1)[0]
        span = None if head.startswith("[[") else table_span(text, head.strip("[]"))
        if span:
            text = text[:span[0]] + chunk.rstrip() + "\n" + text[span[1]:]
        else:
            appended += "\n" + chunk
    return text + appended


def mutate_lines(text, rng):
    lines = text.split("\n")
    k = rng.randrange(len(lines))
    how = rng.choice(["delete", "duplicate", "bytes", "truncate"])
    if how == "delete":
        del lines[k]
    elif how == "duplicate":
        lines.insert(k, lines[k])
    elif how == "truncate":
        return "\n".join(lines[:k]), f"truncate at line {k + 1}"
    else:
        lines[k] = lines[k] + "\udcff\udcfe"  # surrogate-escaped: invalid UTF-8 bytes
    return "\n".join(lines), f"{how} line {k + 1}"


# Sections put in whole (replacing a demo's own), written from the README's
# language: weather, the building and thermostatic loads of each role, PV, a
# battery.
WEATHER = [
    '[weather]\nclimate = "harbour"\ndaily_swing = "9 K"\nspread = { winter = "5.5 K", summer = "2.8 K" }\npersistence = 0.7\n',
    '[weather]\nmonthly = ["-6 °C", "-4 °C", "1 °C", "7 °C", "13 °C", "19 °C", "22 °C", "21 °C", "17 °C", "10 °C", "3 °C", "-3 °C"]\n',
    '[weather]\nmean = "10 °C"\nswing = "20 K"\ncoldest = "January"\n',
]
BUILDING = ('[building]\nua = "220 W/K"\nmass = "25 MJ/K"\nair = "2.5 MJ/K"\ndirect = "35 %"\n'
            'coupling = "2200 W/K"\nheating = "21 °C"\ncooling = "25 °C"\ndeadband = "1 K"\n'
            'second_stage = "1 K"\nsetback = { hours = "22-6", by = "2 K" }\ngains = "70 %"\naperture = "1 m²"\nglazing = [ { aperture = "2 m²", azimuth = "200 deg" } ]\n')
THERMOSTATIC = [
    '[[appliance]]\nid = "sweep_heat_pump"\nwiring = "L1-L2"\nload = "motor"\nbehaviour = "thermostat"\nrole = "heat-pump"\n'
    'cop = 3.4\nlow_capacity = "60 %"\ncooling_cop = 3.6\nlockout = "-18 °C"\ndefrost = { every = "1 h", length = "5 min" }\n'
    'states = [ { name = "heating", power = "2.5 kW", pf = 0.95 }, { name = "cooling", power = "2.2 kW", pf = 0.95 } ]\n\n'
    '[[appliance]]\nid = "sweep_blower"\nwiring = "L1-L2"\nload = "motor"\nbehaviour = "thermostat"\nrole = "blower"\n'
    'states = [ { name = "running", power = "350 W", pf = 0.8 } ]\n\n'
    '[[appliance]]\nid = "sweep_strips"\nwiring = "L1-L2"\nbehaviour = "thermostat"\nrole = "backup"\n'
    'states = [ { name = "heating", power = "5 kW" } ]\n',
    '[[appliance]]\nid = "sweep_baseboard"\nwiring = "L1-L2"\nbehaviour = "thermostat"\nrole = "resistance"\n'
    'states = [ { name = "heating", power = "2 kW" } ]\n',
    '[[appliance]]\nid = "sweep_furnace"\nwiring = "L1-N"\nload = "motor"\nbehaviour = "thermostat"\nrole = "furnace"\n'
    'capacity = "15 kW"\nstates = [ { name = "running", power = "450 W", pf = 0.8 } ]\n\n'
    '[[appliance]]\nid = "sweep_cooler"\nwiring = "L1-L2"\nload = "motor"\nbehaviour = "thermostat"\nrole = "air-conditioner"\n'
    'cop = 3.0\nstates = [ { name = "cooling", power = "2.8 kW", pf = 0.9 } ]\n',
]
PV = '[pv]\ndc = "5 kW"\ninverter = "4.6 kW"\ntilt = "25 deg"\nazimuth = "170 deg"\nalbedo = 0.25\nlosses = "12 %"\nmodule = "thin-film"\nmount = "roof"\n'
BATTERY = '[battery]\ncapacity = "10 kWh"\npower = "4 kW"\nefficiency = "88 %"\nreserve = "15 %"\ninitial = "40 %"\nresponse = "3 s"\n'


def mutate_own_section(text, rng):
    """One value made extreme or of another type inside the demo's own
    [weather], [building], [pv] or [battery]; None if it has none."""
    own = [(n, table_span(text, n)) for n in ["weather", "building", "pv", "battery"]]
    own = [(n, sp) for n, sp in own if sp]
    if not own:
        return None
    name, (a, b) = rng.choice(own)
    table, w = rng.choice([mutate_quantity, mutate_bare, mutate_type])(text[a:b], rng)
    return text[:a] + table + text[b:], f"section [{name}] of the demo, {w}"


def mutate_section(text, rng):
    """Puts in a climate (weather, building, thermostatic loads), PV or a
    battery, replacing the demo's own, then often makes one value inside it
    extreme or of another type; or mutates a section the demo has."""
    if rng.random() < 1 / 3:
        done = mutate_own_section(text, rng)
        if done:
            return done
    kind = rng.choice(["climate", "climate", "climate", "pv", "battery", "weather only"])
    if kind == "climate":
        add = rng.choice(WEATHER) + "\n" + BUILDING + "\n" + "\n".join(rng.sample(THERMOSTATIC, rng.randint(1, 3)))
    elif kind == "weather only":
        add = rng.choice(WEATHER)
    elif kind == "pv":
        add = PV
        if "latitude" not in text:  # a PV array needs the home's place
            text = text.replace("[home]\n", "[home]\nlatitude = 40.7\nlongitude = -74.0\n", 1)
    else:
        add = BATTERY
    what = f"put in {kind}"
    if rng.random() < 0.5:
        add, w = rng.choice([mutate_quantity, mutate_bare, mutate_type])(add, rng)
        what += ", " + w
    return put_tables(text, add), what


WRONG = ['"text"', "42", "true", "[1, 2]", "{ a = 1 }", '""', "1979-05-27T07:32:00Z", "-0.0", '"nan W"', "[]"]
VALUE = re.compile(r"^(\s*[A-Za-z_]+\s*=\s*)(.+)$", re.M)


def mutate_type(text, rng):
    """A value of another type, empty, or a string of 200 000 characters."""
    hits = list(VALUE.finditer(text))
    if not hits:
        return text, "none"
    m = rng.choice(hits)
    new = '"' + "x" * 200_000 + '"' if rng.random() < 0.1 else rng.choice(WRONG)
    return text[: m.start(2)] + new + text[m.end(2):], f"{m.group(1).strip()} -> {len(new)} chars of another type"


MUTATORS = [mutate_quantity, mutate_quantity, mutate_quantity, mutate_bare, mutate_bare,
            mutate_name, mutate_setting, mutate_source, mutate_lines, mutate_section,
            mutate_section, mutate_type]


def make_case(rng):
    base = rng.choice(SCENARIOS)
    text = (ROOT / "scenarios" / base).read_text()
    # Short runs keep a case cheap; a mutation may still change the length.
    text = re.sub(r'^length = ".*"', 'length = "2 h"', text, count=1, flags=re.M)
    what = [base]
    for _ in range(rng.choice([1, 1, 1, 2, 3])):
        text, w = rng.choice(MUTATORS)(text, rng)
        what.append(w)
    return text, what


def make_population_case(rng):
    """A mutated demo population, its homes one hour long."""
    text = POPULATION.read_text().replace('length = "1 d"', 'length = "1 h"')
    what = [POPULATION.name]
    for _ in range(rng.choice([1, 1, 2])):
        text, w = rng.choice(MUTATORS)(text, rng)
        what.append(w)
    return text, what


def check_population(bin_, text, work, timeout):
    """The faults of one population case: `fleet` with three homes."""
    src = work / "street.toml"
    src.write_bytes(text.encode("utf-8", "surrogateescape"))
    out = work / "fleet"
    code, err = run(bin_, ["fleet", str(src), "--homes", "3", "--out", str(out), "--jobs", "1"], timeout)
    if code is None:
        return [("hang", "fleet")]
    faults = []
    if code not in (0, 2):
        faults.append(("panic" if code == 101 or "panicked" in err else f"exit {code}", "fleet: " + err[-300:]))
    if out.exists():
        left = [p.name for p in out.rglob("*") if ".partial" in p.name]
        if left:
            faults.append(("leftover", str(left)))
        for home in sorted(out.glob("*/home=*")) if code == 0 else []:
            bad = finite_dataset(home)
            if bad:
                faults.append(("non-finite", f"{home.parent.name}/{home.name}/{bad}"))
    return faults


def finite_dataset(folder):
    """The first non-finite number of any Parquet table, or None."""
    for f in sorted(folder.glob("*.parquet")):
        t = pq.read_table(f)
        for name, col in zip(t.column_names, t.columns):
            if not (col.type.id in range(2, 13) or str(col.type).startswith(("float", "double", "int"))):
                continue
            for v in col.to_pylist():
                if v is not None and isinstance(v, float) and not math.isfinite(v):
                    return f"{f.name}:{name} = {v}"
    return None


def run(bin_, args, timeout):
    try:
        p = subprocess.run([bin_, *args], capture_output=True, timeout=timeout)
        return p.returncode, p.stderr.decode("utf-8", "replace")
    except subprocess.TimeoutExpired:
        return None, "hang"


def check_case(bin_, text, work, timeout):
    """The faults of one case, as a list of (kind, detail)."""
    src = work / "home.toml"
    src.write_bytes(text.encode("utf-8", "surrogateescape"))
    faults = []
    codes = {}
    for mode in (["validate"], ["validate", "--quiet"], ["run", "--out", str(work / "out"), "--quiet"]):
        code, err = run(bin_, [*mode, str(src)], timeout)
        codes[" ".join(mode[:2])] = code
        if code is None:
            faults.append(("hang", " ".join(mode)))
        elif code not in (0, 2):
            faults.append(("panic" if code == 101 or "panicked" in err else f"exit {code}", " ".join(mode) + ": " + err[-300:]))
    if codes.get("validate") is not None and codes.get("validate --quiet") is not None:
        if codes["validate"] != codes["validate --quiet"]:
            faults.append(("quiet", f"validate {codes['validate']} vs --quiet {codes['validate --quiet']}"))
    out = work / "out"
    if out.exists():
        left = [p.name for p in out.iterdir() if ".partial" in p.name]
        if left:
            faults.append(("leftover", str(left)))
        if codes.get("run --out") == 0:
            bad = finite_dataset(out / "home")
            if bad:
                faults.append(("non-finite", bad))
    return faults


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--cases", type=int, default=200)
    ap.add_argument("--seed", type=int, default=1)
    ap.add_argument("--timeout", type=float, default=60)
    ap.add_argument("--show", type=int, default=12)
    ap.add_argument("--populations", type=int, default=None, help="population cases (default: cases / 8)")
    a = ap.parse_args()
    bin_ = os.environ.get("LOADLOOM_BIN", str(ROOT / "target" / "release" / "loadloom"))
    tally = {}
    shown = [0]

    def record(label, what, faults):
        for kind, detail in faults:
            tally[kind] = tally.get(kind, 0) + 1
            if shown[0] < a.show:
                shown[0] += 1
                print(f"{label} {what}: {kind}: {detail.strip()[:400]}", flush=True)

    rng = random.Random(a.seed)
    for i in range(a.cases):
        text, what = make_case(rng)
        with tempfile.TemporaryDirectory() as d:
            record(f"case {i}", what, check_case(bin_, text, pathlib.Path(d), a.timeout))
    npop = a.cases // 8 if a.populations is None else a.populations
    prng = random.Random(a.seed + 1)
    for i in range(npop):
        text, what = make_population_case(prng)
        with tempfile.TemporaryDirectory() as d:
            record(f"population case {i}", what, check_population(bin_, text, pathlib.Path(d), a.timeout))
    counts = ", ".join(f"{k} {v}" for k, v in sorted(tally.items()))
    print(f"cases {a.cases} and {npop} populations, seed {a.seed}: {counts or 'no faults'}")
    return 1 if tally else 0


if __name__ == "__main__":
    sys.exit(main())

"""The dataset contract checked with the reference readers: pyarrow reads every
file with the schema, units and row counts the manifest states; pandas reads
the CSV form with the same values as the Parquet form (README,
"Tests and what they are checked against")."""
import hashlib
import json
import pathlib

import numpy as np
import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import ROOT

HOMES = {
    "split": ("split-phase", "120 V", "America/Chicago", ["L1-N", "L2-N", "L1-L2"]),
    "wye": ("three-phase", "230 V", "Europe/Berlin", ["L1-N", "L2-N", "L3-N", "L2-L3", "3P"]),
    "single": ("single-phase", "230 V", "Europe/Lisbon", ["L1-N"]),
}


def home(kind):
    supply, volts, tz, wirings = HOMES[kind]
    apps = "".join(
        f"""
[[appliance]]
id = "load{i}"
wiring = "{w}"
behaviour = "cycle"
states = [ {{ name = "off", power = "0 W", dwell = "4 min" }}, {{ name = "on", power = "{300 * (i + 1)} W", pf = 0.9, dwell = "3 min" }} ]
"""
        for i, w in enumerate(wirings)
    )
    return f"""
[home]
supply = "{supply}"
voltage = "{volts}"
timezone = "{tz}"
[run]
start = "2027-03-27T00:00"
length = "2 d"
[meter]
interval = "1 min"
noise = {{ relative = "0.2 %", floor = "1 W" }}
{apps}"""


def check_dataset(d: pathlib.Path, ext="parquet"):
    m = json.loads((d / "manifest.json").read_text())
    assert m["format"] == "loadloom-dataset/1"
    tz = m["time"]["timezone"]
    for table in ["meters", "truth", "events"]:
        f = d / f"{table}.{ext}"
        entry = m["files"][f.name]
        assert hashlib.sha256(f.read_bytes()).hexdigest() == entry["sha256"]
        if ext != "parquet":
            continue
        t = pq.read_table(f)
        assert t.num_rows == entry["rows"], table
        names = [c["name"] for c in m["columns"][table]]
        assert t.schema.names == names, table
        for c in m["columns"][table]:
            field = t.schema.field(c["name"])
            assert field.metadata[b"unit"].decode() == c["unit"], (table, c)
        for tcol in ["time", "start", "end"]:
            if tcol in t.schema.names:
                assert t.schema.field(tcol).type == pa.timestamp("ms", tz=tz)
    return m


@pytest.mark.parametrize("kind", sorted(HOMES))
def test_pyarrow_reads_the_contract(simulate, kind):
    d = simulate(home(kind), name=kind)
    m = check_dataset(d)
    lines = len(m["supply"]["conductors"]) - 1
    meters = pq.read_table(d / "meters.parquet").to_pandas()
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    assert len(meters) == len(truth) == 2 * 24 * 60
    assert (meters["time"] == truth["time"]).all()
    # Interval starts at a one-minute spacing from the local start time.
    assert meters["time"].iloc[0] == pd.Timestamp("2027-03-27T00:00", tz=m["time"]["timezone"])
    assert (meters["time"].diff().dropna() == pd.Timedelta("1min")).all()
    for a in m["appliances"]:
        assert truth[f"{a['id']}_state"].dtype.name == "category"
        assert set(truth[f"{a['id']}_state"].unique()) <= {s["name"] for s in a["states"]}
        per = sum(truth[f"{a['id']}_{c}_p_w"] for c in a["conductors"])
        np.testing.assert_allclose(per, truth[f"{a['id']}_p_w"], rtol=1e-4, atol=1e-3)
    total = sum(meters[f"l{x + 1}_p_w"] for x in range(lines))
    np.testing.assert_allclose(total, meters["total_p_w"], rtol=1e-5, atol=1e-2)
    events = pq.read_table(d / "events.parquet").to_pandas()
    for a in m["appliances"]:
        e = events[events["appliance"] == a["id"]]
        # Events tile the run without gaps, and their energy is the truth's.
        assert (e["start"].iloc[1:].values == e["end"].iloc[:-1].values).all()
        energy_truth = truth[f"{a['id']}_p_w"].astype(float).sum() * 60 / 3600
        assert abs(e["energy_wh"].sum() - energy_truth) <= 1e-4 * max(energy_truth, 1)
        assert abs(a["energy_kwh"] * 1000 - energy_truth) <= 1e-4 * max(energy_truth, 1)


def test_pandas_reads_the_csv_with_the_parquet_values(simulate, tmp_path):
    text = home("wye")
    dp = simulate(text, name="wye")
    src = tmp_path / "csvhome.toml"
    src.write_text(text)
    dc = simulate(path=src, extra=("--format", "csv"))
    check_dataset(dc, ext="csv")
    tz = json.loads((dc / "manifest.json").read_text())["time"]["timezone"]
    for table, times in [("meters", ["time"]), ("truth", ["time"]), ("events", ["start", "end"])]:
        p = pq.read_table(dp / f"{table}.parquet").to_pandas()
        c = pd.read_csv(dc / f"{table}.csv", float_precision="round_trip")
        assert list(c.columns) == list(p.columns)
        for col in p.columns:
            if col in times:
                parsed = pd.to_datetime(c[col], utc=True).dt.tz_convert(tz)
                assert (parsed.values == p[col].values).all(), col
            elif p[col].dtype.name in ("category", "object"):
                assert (c[col].astype(str).values == p[col].astype(str).values).all(), col
            else:
                # float32 written in its shortest round-trip form.
                np.testing.assert_array_equal(c[col].astype(p[col].dtype).values, p[col].values, err_msg=col)


SCENARIOS = sorted((ROOT / "scenarios").glob("*.toml"))


@pytest.mark.parametrize("path", SCENARIOS, ids=[p.stem for p in SCENARIOS])
def test_every_ready_scenario_writes_a_valid_dataset(simulate, path):
    d = simulate(path=path, extra=("--length", "1d"))
    m = check_dataset(d)
    assert len(m["appliances"]) >= 15


def test_unmetered_loads_are_in_the_meters_and_only_summed_in_truth(simulate):
    text = home("split") + """
[[unmetered]]
id = "garage_freezer"
wiring = "L2-N"
behaviour = "cycle"
load = "electronic"
states = [ { name = "off", power = "0 W", dwell = "7 min" }, { name = "on", power = "150 W", dwell = "5 min" } ]

[[unmetered]]
id = "pond_pump"
wiring = "L1-N"
behaviour = "steady"
load = "electronic"
states = [ { power = "60 W" } ]
"""
    d = simulate(text, name="unmetered")
    m = check_dataset(d)
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    meters = pq.read_table(d / "meters.parquet").to_pandas()
    assert not any(c.startswith(("garage_freezer", "pond_pump")) for c in truth.columns)
    assert [u["id"] for u in m["unmetered"]] == ["garage_freezer", "pond_pump"]
    u = truth["unmetered_p_w"].astype(float)
    # Constant-power loads: 60 W always, 210 W with the freezer running.
    assert u.min() >= 60 - 1e-3 and u.max() > 150
    listed = sum(truth[f"{a['id']}_p_w"].astype(float) for a in m["appliances"])
    # Conservation with the noise of the meter (0.2 % + 1 W per line).
    resid = meters["total_p_w"].astype(float) - listed - u
    assert abs(resid.mean()) < 1.0 and resid.abs().max() < 0.01 * meters["total_p_w"].max() + 10
    share = u.sum() / (listed.sum() + u.sum())
    assert abs(m["summary"]["unmetered_energy_share"] - share) < 1e-3
    assert not (pq.read_table(d / "events.parquet").to_pandas()["appliance"].isin(["garage_freezer", "pond_pump"])).any()

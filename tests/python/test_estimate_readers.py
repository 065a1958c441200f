"""Estimates as ordinary tools write them are read as they mean: CSV through
a real CSV reader (quoted fields, commas inside quotes, fully quoted files,
a UTF-8 byte-order mark, CRLF), times as instants whatever their zone or
unit. The files here are written by pandas and pyarrow, not by loadloom;
every variant must give the score of the plain one. Naive times are refused
with the line of pandas that localises them."""
import csv
import json

import pandas as pd
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import loadloom

ZONE = "America/New_York"
HOME = f"""
[home]
label = "A reader-test flat (invented)"
supply = "split-phase"
timezone = "{ZONE}"

[run]
start = "2027-01-04T00:00"
length = "1 d"
seed = 5

[meter]
interval = "10 s"

[[appliance]]
id = "fridge"
behaviour = "cycle"
wiring = "L1-N"
states = [
  {{ name = "idle", power = "3 W", dwell = {{ median = "25 min", spread = 0.2 }} }},
  {{ name = "on, cooling", power = "120 W", pf = 0.85, dwell = {{ median = "12 min", spread = 0.2 }} }},
]

[[appliance]]
id = "kettle"
template = "kettle"
wiring = "L2-N"
"""


@pytest.fixture(scope="module")
def data(tmp_path_factory):
    d = tmp_path_factory.mktemp("readers")
    (d / "flat.toml").write_text(HOME)
    for fmt in ["parquet", "csv"]:
        loadloom("run", d / "flat.toml", "--out", d / fmt, "--format", fmt)
    truth = pd.read_parquet(d / "parquet" / "flat" / "truth.parquet")
    est = pd.DataFrame({"time": truth["time"]})
    for a in ["fridge", "kettle"]:
        # A wobble, so that every score depends on every row's alignment.
        est[f"{a}_p_w"] = truth[f"{a}_p_w"].astype("float64") * 1.1 + (truth.index % 7)
    return d, est


def scored(d, f, fmt="parquet"):
    p = loadloom("score", "--truth", d / fmt / "flat", "--estimate", f, "--json", check=False)
    assert p.returncode == 0, p.stderr
    return json.loads(p.stdout)["overall"]


def test_the_dataset_csv_round_trips_a_state_with_a_comma(data):
    d, est = data
    # pandas reads the quoted state back whole (the writer quotes it) ...
    t = pd.read_csv(d / "csv" / "flat" / "truth.csv")
    assert "on, cooling" in set(t["fridge_state"])
    # ... and so does loadloom: scoring against the CSV dataset reads every
    # column of truth.csv (a split cell would shift the row and be refused).
    f = d / "plain.parquet"
    est.to_parquet(f)
    # truth.csv holds float32 powers in their shortest form, read back as
    # float64: the same scores to float32 precision.
    same(scored(d, f, "csv"), scored(d, f, "parquet"), rel=1e-6)


def same(a, b, rel):
    assert a.keys() == b.keys()
    for key in a:
        if isinstance(a[key], float):
            assert a[key] == pytest.approx(b[key], rel=rel, abs=rel), key
        else:
            assert a[key] == b[key], key


def parquet_variant(est, unit, zone):
    t = est.copy()
    t["time"] = t["time"].dt.tz_convert(zone)
    table = pa.Table.from_pandas(t, preserve_index=False)
    i = table.schema.get_field_index("time")
    return table.set_column(i, "time", table.column("time").cast(pa.timestamp(unit, tz=zone)))


@pytest.mark.parametrize("unit", ["s", "ms", "us", "ns"])
@pytest.mark.parametrize("zone", [ZONE, "UTC", "Asia/Tokyo", "+05:30"])
def test_parquet_times_in_any_zone_and_unit_are_instants(data, tmp_path, unit, zone):
    d, est = data
    ref = tmp_path / "ref.parquet"
    est.to_parquet(ref)
    f = tmp_path / "v.parquet"
    pq.write_table(parquet_variant(est, unit, zone), f)
    # Parquet has no seconds unit: pyarrow stores those as milliseconds.
    assert pq.read_schema(f).field("time").type == pa.timestamp("ms" if unit == "s" else unit, tz=zone)
    assert scored(d, f) == scored(d, ref)


def csv_variants(est):
    """(name, writer) pairs: each writes the estimate as CSV its own way."""
    def pandas_default(t, f):
        t.to_csv(f, index=False)  # "2027-01-04 00:00:00-05:00"

    def utc_iso(t, f):
        t.assign(time=t["time"].dt.tz_convert("UTC").map(lambda x: x.isoformat())).to_csv(f, index=False)

    def india(t, f):
        t.assign(time=t["time"].dt.tz_convert("Asia/Kolkata")).to_csv(f, index=False)

    def quoted_bom_crlf(t, f):
        t.to_csv(f, index=False, quoting=csv.QUOTE_ALL, encoding="utf-8-sig", lineterminator="\r\n")

    return [("pandas default", pandas_default), ("UTC, ISO", utc_iso), ("+05:30", india), ("quoted, BOM, CRLF", quoted_bom_crlf)]


@pytest.mark.parametrize("k", range(4), ids=[n for n, _ in csv_variants(None)])
def test_csv_as_tools_write_it(data, tmp_path, k):
    d, est = data
    ref = tmp_path / "ref.parquet"
    est.to_parquet(ref)
    name, write = csv_variants(est)[k]
    f = tmp_path / "v.csv"
    write(est, f)
    raw = f.read_bytes()
    if name == "quoted, BOM, CRLF":
        assert raw.startswith(b"\xef\xbb\xbf\"time\"") and b"\r\n" in raw
    # Shortest round-trip floats on both sides: the same numbers, the same scores.
    same(scored(d, f), scored(d, ref), rel=1e-12)


def test_naive_times_are_refused_with_the_line_that_localises_them(data, tmp_path):
    d, est = data
    naive = est.assign(time=est["time"].dt.tz_localize(None))
    for f in [tmp_path / "naive.parquet", tmp_path / "naive.csv"]:
        naive.to_parquet(f) if f.suffix == ".parquet" else naive.to_csv(f, index=False)
        p = loadloom("score", "--truth", d / "parquet" / "flat", "--estimate", f, check=False)
        assert p.returncode == 2, p.stdout
        assert f'.dt.tz_localize("{ZONE}")' in p.stderr and "naive" in p.stderr, p.stderr
        assert f.name in p.stderr

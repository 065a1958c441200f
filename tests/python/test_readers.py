"""Every Parquet file of a dataset reads back with the same values in four
independent readers: pyarrow (Apache Arrow's C++ Parquet reader), duckdb
(its own Parquet reader), pandas (its `read_parquet`, pyarrow engine, then
pandas' own conversion of types, zones and nulls) and polars (its own Rust
reader). Each must also count the rows the manifest declares.

The files use zstd, DELTA_BINARY_PACKED time, BYTE_STREAM_SPLIT floats and
dictionary-coded strings (Parquet format specification, apache/parquet-format
Encodings.md), so a reader that decoded any of them wrongly would disagree
with the others here."""
import json
import pathlib

import duckdb
import numpy as np
import pandas as pd
import polars as pl
import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import ROOT

# A small home at 1 s for 12.5 days: 1 080 000 rows, so meters and truth
# span two row groups (1 Mi rows each); dropouts as nulls put nulls in every
# reading; the energy register adds float64 columns.
HOME = """
[home]
supply = "split-phase"
timezone = "America/Toronto"
[run]
start = "2027-03-10T00:00"
length = "12.5 d"
[meter]
interval = "1 s"
[faults]
register = true
dropouts = {{ rate = "2 %", length = "30 s", as = "{form}" }}
[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "cycle"
states = [ {{ name = "off", power = "0 W", dwell = "9 min" }}, {{ name = "on", power = "3 kW", dwell = "6 min" }} ]
[[appliance]]
id = "pump"
wiring = "L1-N"
behaviour = "cycle"
load = "motor"
states = [ {{ name = "idle, waiting", power = "5 W", dwell = "4 min" }}, {{ name = "on", power = "700 W", pf = 0.7, dwell = "3 min" }} ]
"""

# Columns per read, so a wide truth table is never held four times at once.
GROUP = 12


def by_pyarrow(path, cols):
    t = pq.read_table(path, columns=cols)
    return {c: normal(t.column(c).combine_chunks()) for c in cols}


def by_duckdb(path, cols):
    con = duckdb.connect()
    con.execute("SET TimeZone = 'UTC'")
    sel = ", ".join(
        f'epoch_ms("{c}") AS "{c}"' if kind(path, c) == "time" else f'"{c}"' for c in cols
    )
    got = con.execute(f"SELECT {sel} FROM read_parquet('{path}')").fetchnumpy()
    return {c: from_numpy(got[c]) for c in cols}


def by_pandas(path, cols):
    df = pd.read_parquet(path, columns=cols)
    out = {}
    for c in cols:
        s = df[c]
        if isinstance(s.dtype, pd.DatetimeTZDtype):
            out[c] = s.dt.tz_convert("UTC").dt.tz_localize(None).to_numpy().astype("datetime64[ms]").astype(np.int64)
        elif isinstance(s.dtype, pd.CategoricalDtype) or s.dtype == object:
            out[c] = np.array(s.astype(object).tolist(), dtype=object)
        else:
            out[c] = s.to_numpy()
    return out


def by_polars(path, cols):
    df = pl.read_parquet(path, columns=cols)
    out = {}
    for c in cols:
        s = df[c]
        if isinstance(s.dtype, pl.Datetime):
            out[c] = s.dt.epoch("ms").to_numpy()
        elif s.dtype in (pl.Categorical, pl.String) or isinstance(s.dtype, pl.Enum):
            out[c] = np.array(s.cast(pl.String).to_list(), dtype=object)
        else:
            # Nulls become NaN, as in the other readers' float arrays.
            out[c] = s.fill_null(float("nan")).to_numpy()
    return out


def kind(path, col):
    t = pq.read_schema(path).field(col).type
    if pa.types.is_timestamp(t):
        return "time"
    return "float" if pa.types.is_floating(t) else "text"


def normal(a):
    """pyarrow array -> numpy: ms since 1970 UTC, floats with NaN for null, strings."""
    if pa.types.is_timestamp(a.type):
        return a.cast(pa.int64()).to_numpy()
    if pa.types.is_dictionary(a.type):
        a = a.cast(pa.string())
    if pa.types.is_string(a.type):
        return np.array(a.to_pylist(), dtype=object)
    return a.to_numpy(zero_copy_only=False)


def from_numpy(x):
    if isinstance(x, np.ma.MaskedArray):
        x = x.filled(np.nan) if x.dtype.kind == "f" else x.data
    if x.dtype.kind in "OU":
        return np.array([str(v) for v in x], dtype=object)
    return x


def same(a, b):
    """Bit-equal floats (NaN where null, in both), equal times and strings."""
    if a.dtype.kind == "f" or b.dtype.kind == "f":
        if a.dtype != b.dtype:
            return False
        return np.array_equal(a.view(f"u{a.itemsize}"), b.view(f"u{b.itemsize}")) or (
            np.array_equal(np.isnan(a), np.isnan(b)) and np.array_equal(a[~np.isnan(a)], b[~np.isnan(b)])
        )
    return len(a) == len(b) and bool(np.all(a == b))


READERS = {"duckdb": by_duckdb, "pandas": by_pandas, "polars": by_polars}


def check_dataset(d: pathlib.Path):
    manifest = json.loads((d / "manifest.json").read_text())
    files = sorted(d.glob("*.parquet"))
    assert {f.name for f in files} == set(manifest["files"]), "every file the manifest lists, no other"
    for f in files:
        rows = manifest["files"][f.name]["rows"]
        names = pq.read_schema(f).names
        for i in range(0, len(names), GROUP):
            cols = names[i:i + GROUP]
            ref = by_pyarrow(f, cols)
            for c in cols:
                assert len(ref[c]) == rows, (f.name, c, len(ref[c]), rows)
            for reader, read in READERS.items():
                got = read(f, cols)
                for c in cols:
                    assert same(ref[c], got[c]), f"{f.name}:{c}: {reader} reads other values than pyarrow"
    return manifest


@pytest.mark.parametrize("form", ["null", "missing"])
def test_four_readers_agree_on_every_value(simulate, form):
    d = simulate(HOME.format(form=form), name=f"readers_{form}")
    m = check_dataset(d)
    md = pq.ParquetFile(d / "truth.parquet").metadata
    assert md.num_row_groups == 2, "the run spans two row groups"
    meters = pq.read_table(d / "meters.parquet", columns=["l1_p_w"]).column(0)
    if form == "null":
        assert meters.null_count > 0, "dropouts leave null readings"
    else:
        assert m["files"]["meters.parquet"]["rows"] < m["files"]["truth.parquet"]["rows"]


def test_four_readers_agree_on_the_split_phase_demo(simulate):
    d = simulate(path=ROOT / "scenarios" / "split-phase-house.toml", extra=("--length", "1d"))
    check_dataset(d)


def test_string_statistics_are_the_row_groups_min_and_max(simulate):
    """Each dictionary column's chunk statistics (Parquet format spec,
    Statistics min_value/max_value: bytewise for UTF8) hold the least and
    greatest value of that row group, as pyarrow.compute finds them."""
    import pyarrow.compute as pc

    d = simulate(HOME.format(form="null"), name="stats")
    f = pq.ParquetFile(d / "truth.parquet")
    names = [c for c in f.schema_arrow.names if c.endswith("_state")]
    assert names
    for g in range(f.metadata.num_row_groups):
        t = f.read_row_group(g, columns=names)
        for c in names:
            col = f.metadata.row_group(g).column(f.schema_arrow.names.index(c))
            want = pc.min_max(t.column(c).cast(pa.string()))
            assert col.statistics.has_min_max and col.statistics.null_count == 0
            assert (col.statistics.min, col.statistics.max) == (want["min"].as_py(), want["max"].as_py()), c


def test_float_statistics_are_the_row_groups_min_max_and_nulls(simulate):
    """Each float column's chunk statistics (Parquet format spec, Statistics:
    min_value/max_value and null_count; a zero minimum written as -0.0 and a
    zero maximum as +0.0), as duckdb reads them from the footer, hold the
    least and greatest non-null value and the nulls of that row group, as
    pyarrow.compute finds them in the data; nulls come from dropouts."""
    import pyarrow.compute as pc

    d = simulate(HOME.format(form="null"), name="fstats")
    for table in ("meters", "truth"):
        path = d / f"{table}.parquet"
        f = pq.ParquetFile(path)
        floats = [x.name for x in f.schema_arrow if pa.types.is_floating(x.type)]
        assert floats
        stats = {
            (g, c): (lo, hi, n)
            for g, c, lo, hi, n in duckdb.sql(
                "SELECT row_group_id, path_in_schema, stats_min_value, stats_max_value, stats_null_count "
                f"FROM parquet_metadata('{path}')"
            ).fetchall()
        }
        nulls = 0
        for g in range(f.metadata.num_row_groups):
            t = f.read_row_group(g, columns=floats)
            for c in floats:
                want = pc.min_max(t.column(c))
                lo, hi, n = stats[(g, c)]
                assert n == t.column(c).null_count, c
                nulls += n
                # duckdb prints the shortest decimal that reads back as the
                # stored float32 or float64.
                kind = np.float32 if t.schema.field(c).type == pa.float32() else np.float64
                got = (kind(float(lo)), kind(float(hi)))
                assert got == (kind(want["min"].as_py()), kind(want["max"].as_py())), (table, g, c)
                if want["min"].as_py() == 0:
                    assert lo == "-0.0", (c, lo)
                if want["max"].as_py() == 0:
                    assert hi == "0.0", (c, hi)
        assert table == "truth" or nulls > 0, "dropouts left nulls in the meters"

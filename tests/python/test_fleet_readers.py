"""A fleet of split-phase and three-phase homes read as one table per kind by
four readers, each with the one line the README shows (pandas, pyarrow.dataset,
polars, duckdb): every table with the row count each home should give, the
home key a string that joins homes.parquet, times in UTC, and one schema
(a split-phase home's l3 columns present and null)."""
import re

import duckdb
import pandas as pd
import polars as pl
import pyarrow as pa
import pyarrow.dataset as ds
import pyarrow.parquet as pq
import pytest

from conftest import ROOT, loadloom

POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"
README = (ROOT / "README.md").read_text()
# The README's lines, with `out/street/meters` standing for each table.
READERS = {
    "pandas": 'pd.read_parquet("out/street/meters")',
    "pyarrow": 'ds.dataset("out/street/meters", partitioning="hive").to_table()',
    "polars": 'pl.read_parquet("out/street/meters")',
    "duckdb": "duckdb.sql(\"SELECT * FROM read_parquet('out/street/meters/*/*.parquet', hive_partitioning = true)\")",
}
HOMES = 'pd.read_parquet("out/street/homes.parquet")'
TABLES = ["meters", "truth", "events"]


@pytest.fixture(scope="module")
def fleet(tmp_path_factory):
    tmp = tmp_path_factory.mktemp("fleet")
    pop = tmp / "street.toml"
    pop.write_text(POP.read_text().replace('length = "1 d"', 'length = "3 h"'))
    out = tmp / "street"
    loadloom("fleet", pop, "--homes", "12", "--out", out, "--jobs", "2")
    homes = pq.read_table(out / "homes.parquet").to_pandas()
    assert set(homes["supply"]) == {"split-phase", "three-phase"}, "a mixed fleet"
    return out, homes


def expected_rows(out, homes):
    """Rows per home and table, from outside the tables: meters one per
    interval (3 h at 1 min), truth one per interval and appliance
    (homes.parquet's list), events as each home's manifest counts them."""
    rows = {}
    for _, h in homes.iterrows():
        manifest = pd.read_json(out / "manifests" / f"home={h['home']}" / "manifest.json", typ="series")
        events = manifest["files"][f"events/home={h['home']}/events.parquet"]["rows"]
        rows[h["home"]] = {"meters": 180, "truth": 180 * len(h["appliance_ids"].split(",")), "events": events}
    return rows


def read(reader, out, table):
    """The README's line for `reader`, run on `table` of the fleet in `out`,
    as a pandas frame (only to compare; each reader's own result is checked
    for its key type first)."""
    code = READERS[reader].replace("out/street/meters", f"{out}/{table}")
    result = eval(code, {"pd": pd, "ds": ds, "pl": pl, "duckdb": duckdb})
    if reader == "pyarrow":
        assert result.schema.field("home").type == pa.string()
        assert result.schema.field("time" if table != "events" else "start").type.tz == "UTC"
        return result.to_pandas()
    if reader == "polars":
        assert result.schema["home"] == pl.String
        assert result.schema["time" if table != "events" else "start"].time_zone == "UTC"
        return result.to_pandas()
    if reader == "duckdb":
        types = dict(zip(result.columns, map(str, result.dtypes)))
        assert types["home"] == "VARCHAR" and types["start" if table == "events" else "time"] == "TIMESTAMP WITH TIME ZONE"
        # An instant, shown in the session's zone: brought to UTC to compare.
        frame = result.df()
        for c in ["time", "start", "end"]:
            if c in frame:
                frame[c] = frame[c].dt.tz_convert("UTC")
        return frame
    # pandas gives the partition key as a categorical of strings.
    assert result["home"].cat.categories.dtype == object
    return result


def test_the_readme_shows_the_tested_lines_and_spark():
    for line in [*READERS.values(), HOMES]:
        assert line in README, line
    assert re.search(r'spark\.read\.parquet\("out/street/meters"\).*not tested here', README)


@pytest.mark.parametrize("reader", list(READERS))
@pytest.mark.parametrize("table", TABLES)
def test_each_reader_reads_each_table(fleet, reader, table):
    out, homes = fleet
    frame = read(reader, out, table)
    want = expected_rows(out, homes)
    got = frame.groupby(frame["home"].astype(str)).size().to_dict()
    assert got == {h: r[table] for h, r in want.items()}
    # The key joins the index as it comes: no cast, no row lost.
    joined = frame.merge(homes, on="home", how="inner", validate="many_to_one")
    assert len(joined) == len(frame)
    if table == "meters":
        split = joined["supply"] == "split-phase"
        assert joined.loc[split, ["l3_p_w", "l3_v_v"]].isna().all().all()
        assert joined.loc[~split, ["l3_p_w", "l3_v_v"]].notna().all().all()
        assert joined["l1_p_w"].notna().all()
    time = "start" if table == "events" else "time"
    assert str(frame[time].dt.tz) == "UTC"


def test_each_homes_zone_gives_its_local_start(fleet):
    """Times are UTC; homes.parquet's zone turns them into the home's local
    clock: each home's run starts at 2027-01-04 00:00 local."""
    out, homes = fleet
    meters = pd.read_parquet(out / "meters").merge(homes[["home", "timezone"]], on="home")
    for (home, zone), rows in meters.groupby(["home", "timezone"], observed=True):
        assert rows["time"].min().tz_convert(zone).strftime("%Y-%m-%d %H:%M") == "2027-01-04 00:00", home
    assert set(homes["timezone"]) >= {"America/Chicago", "Europe/Berlin"}


def test_a_numeric_key_would_not_join(tmp_path):
    """Why the key is `h00042`: a folder named `home=00042` is read as the
    integer 42 by pyarrow's and polars' partition inference (and so by
    pandas; duckdb 1.1 happens to keep it a string)."""
    d = tmp_path / "t" / "home=00042"
    d.mkdir(parents=True)
    pq.write_table(pa.table({"x": [1.0]}), d / "part.parquet")
    assert ds.dataset(tmp_path / "t", partitioning="hive").to_table().schema.field("home").type == pa.int32()
    assert pl.read_parquet(tmp_path / "t").schema["home"] == pl.Int64
    assert pd.read_parquet(tmp_path / "t")["home"].cat.categories.dtype == "int32"

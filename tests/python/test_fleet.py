"""Fleets: shards united equal the unsharded run byte for byte; a killed and
resumed run equals an uninterrupted one; duckdb reads the fleet as a
Hive-partitioned table; ownership shares follow the declared probabilities
(scipy.stats binomial test); bad populations exit 2 before any home."""
import filecmp
import json
import os
import pathlib
import shutil
import signal
import subprocess
import time

import duckdb
import pyarrow.parquet as pq
import pytest
from scipy import stats

from conftest import BIN, ROOT, loadloom

POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"


def short(tmp_path, length="2 h", extra=""):
    p = tmp_path / "street.toml"
    p.write_text(POP.read_text().replace('length = "1 d"', f'length = "{length}"') + extra)
    return p


def same_tree(a, b):
    fa = sorted(str(p.relative_to(a)) for p in a.rglob("*") if p.is_file())
    fb = sorted(str(p.relative_to(b)) for p in b.rglob("*") if p.is_file())
    assert fa == fb
    for f in fa:
        assert filecmp.cmp(a / f, b / f, shallow=False), f
    return fa


def test_shards_united_equal_the_unsharded_run(tmp_path):
    pop = short(tmp_path)
    loadloom("fleet", pop, "--homes", "10", "--out", tmp_path / "whole", "--jobs", "2")
    united = tmp_path / "united"
    for i in range(3):
        p = loadloom("fleet", pop, "--homes", "10", "--out", tmp_path / f"s{i}", "--shard", f"{i}/3", "--jobs", "1")
        assert "waits for the other shards" in p.stdout
        shutil.copytree(tmp_path / f"s{i}", united, dirs_exist_ok=True)
    # On the united folder a plain run makes no home and writes the index.
    p = loadloom("fleet", pop, "--homes", "10", "--out", united)
    assert "made 0 homes, 10 already complete" in p.stdout
    files = same_tree(tmp_path / "whole", united)
    assert "homes.parquet" in files and "fleet.json" in files and "home=00007/meters.parquet" in files


def test_auto_shard_reads_the_batch_schedulers(tmp_path):
    pop = short(tmp_path)
    env = dict(os.environ, SLURM_ARRAY_TASK_ID="3", SLURM_ARRAY_TASK_MIN="1", SLURM_ARRAY_TASK_COUNT="4")
    p = subprocess.run([BIN, "fleet", pop, "--homes", "8", "--out", tmp_path / "slurm", "--shard", "auto"], env=env, capture_output=True, text=True)
    assert p.returncode == 0 and "shard 2/4" in p.stdout, p.stderr
    assert sorted(x.name for x in (tmp_path / "slurm").iterdir()) == ["home=00002", "home=00006"]
    env = {k: v for k, v in os.environ.items() if not k.startswith("SLURM")}
    env.update(JOB_COMPLETION_INDEX="1", LOADLOOM_SHARDS="4")
    p = subprocess.run([BIN, "fleet", pop, "--homes", "8", "--out", tmp_path / "k8s", "--shard", "auto"], env=env, capture_output=True, text=True)
    assert p.returncode == 0 and sorted(x.name for x in (tmp_path / "k8s").iterdir()) == ["home=00001", "home=00005"]


def test_killed_and_resumed_equals_uninterrupted(tmp_path):
    pop = short(tmp_path, length="1 d")
    loadloom("fleet", pop, "--homes", "40", "--out", tmp_path / "whole", "--jobs", "2")
    out = tmp_path / "resumed"
    proc = subprocess.Popen([BIN, "fleet", pop, "--homes", "40", "--out", out, "--jobs", "1"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    t = time.time()
    # Kill it once a few homes are complete (or after a minute at most).
    while time.time() - t < 60 and proc.poll() is None:
        if out.exists() and len(list(out.glob("home=*"))) >= 5:
            break
        time.sleep(0.005)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert not (out / "fleet.json").exists(), "killed before the end"
    p = loadloom("fleet", pop, "--homes", "40", "--out", out)
    made = int(p.stdout.split("made ")[1].split()[0])
    assert 0 < made < 40
    same_tree(tmp_path / "whole", out)


def test_duckdb_reads_the_fleet_hive_partitioned(tmp_path):
    pop = short(tmp_path)
    out = tmp_path / "f"
    loadloom("fleet", pop, "--homes", "6", "--out", out)
    con = duckdb.connect()
    rows = con.execute(f"SELECT home, count(*) FROM read_parquet('{out}/home=*/meters.parquet', hive_partitioning = true) GROUP BY home ORDER BY home").fetchall()
    index = pq.read_table(out / "homes.parquet").to_pandas()
    assert [r[0] for r in rows] == [int(h) for h in index["home"]] or [str(r[0]).zfill(5) for r in rows] == list(index["home"])
    assert [r[1] for r in rows] == list(index["meter_rows"])
    total = con.execute(f"SELECT sum(total_p_w) FROM read_parquet('{out}/home=*/meters.parquet', hive_partitioning = true)").fetchone()[0]
    assert total > 0


def test_ownership_follows_the_declared_probabilities(tmp_path):
    pop = short(tmp_path, length="10 min")
    out = tmp_path / "k"
    loadloom("fleet", pop, "--homes", "1000", "--out", out, "--jobs", "2")
    index = pq.read_table(out / "homes.parquet").to_pandas()
    owners = lambda t: index["appliance_ids"].str.split(",").map(lambda ids: t in ids)
    for template, p, kinds in [("fridge", 0.98, None), ("kettle", 0.7, None), ("tv", 0.8, None), ("water_heater", 0.5, {"na-house", "na-apartment"}), ("ev_charger", 0.2, {"na-house"})]:
        pool = index if kinds is None else index[index["kind"].isin(kinds)]
        k = int(owners(template)[pool.index].sum())
        assert stats.binomtest(k, len(pool), p).pvalue > 1e-3, (template, k, len(pool))
    weights = {"na-house": 3, "na-apartment": 1, "eu-house": 2}
    for kind, w in weights.items():
        n = int((index["kind"] == kind).sum())
        assert stats.binomtest(n, 1000, w / 6).pvalue > 1e-3, kind
    assert json.loads((out / "fleet.json").read_text())["homes"] == 1000


def test_a_home_rebuilds_alone(tmp_path):
    pop = short(tmp_path)
    out = tmp_path / "f"
    loadloom("fleet", pop, "--homes", "4", "--out", out)
    loadloom("run", out / "home=00003" / "scenario.toml", "--out", tmp_path / "alone")
    for f in ["meters.parquet", "truth.parquet", "events.parquet"]:
        assert filecmp.cmp(out / "home=00003" / f, tmp_path / "alone" / "scenario" / f, shallow=False), f


@pytest.mark.parametrize("change,place", [
    (('probability = 0.98', 'probability = 1.5'), "owns[0].probability"),
    (('template = "tv"', 'template = "hologram"'), "owns[6].template"),
    (('wiring = { "eu-house" = ["L2-N"] }', 'wiring = { "na-house" = ["L3-N"] }'), "owns[1].wiring.na-house"),
    (('weight = 3', 'weight = -1'), "kind[0].weight"),
])
def test_bad_populations_exit_2_before_any_home(tmp_path, change, place):
    p = short(tmp_path)
    p.write_text(p.read_text().replace(*change, 1))
    r = loadloom("fleet", p, "--homes", "5", "--out", tmp_path / "out", check=False)
    assert r.returncode == 2 and place in r.stderr and "street.toml:" in r.stderr, r.stderr
    assert not (tmp_path / "out").exists()


HABITS = """
[home]
supply = "single-phase"
timezone = "Europe/Dublin"
{away}
[run]
start = "2027-03-01T00:00"
length = "28 d"
[meter]
interval = "1 min"

[[appliance]]
id = "kettle"
wiring = "L1-N"
behaviour = "program"
habit_shift = {shift}
use = {{ starts_per_day = 4, hours = "{hours}" }}
phases = [ {{ name = "boil", length = "3 min", power = "2 kW" }} ]
"""


def start_hours(simulate, name, **kw):
    d = simulate(HABITS.format(**kw), name=name)
    ev = pq.read_table(d / "events.parquet").to_pandas()
    s = ev[ev["state"] == "boil"]["start"].dt.tz_convert("Europe/Dublin")
    return s.dt.hour, s.dt.weekday


def test_habit_shift_and_occupancy(simulate):
    h, _ = start_hours(simulate, "plain", away="", shift=0, hours="7-8")
    assert set(h) == {7}
    h, _ = start_hours(simulate, "shifted", away="", shift=2, hours="7-8")
    assert set(h) == {9}, "a shift of 2 h moves the 07:00 habit to 09:00"
    h, _ = start_hours(simulate, "half", away="", shift=0.5, hours="7-8")
    assert set(h) == {7, 8} and 0.3 < (h == 8).mean() < 0.7
    h, wd = start_hours(simulate, "away", away='away = "8-17"', shift=0, hours="0-24")
    weekday = wd < 5
    assert not ((h[weekday] >= 8) & (h[weekday] < 17)).any(), "nobody starts the kettle while away"
    assert ((h[~weekday] >= 8) & (h[~weekday] < 17)).any(), "weekends are not affected"


def test_population_occupancy_is_written_into_each_home(tmp_path):
    pop = short(tmp_path, length="10 min")
    out = tmp_path / "o"
    loadloom("fleet", pop, "--homes", "60", "--out", out)
    texts = [(out / f"home={i:05}" / "scenario.toml").read_text() for i in range(60)]
    away = sum('away = "8-17"' in t for t in texts)
    assert stats.binomtest(away, 60, 3 / 5).pvalue > 1e-3
    assert any("habit_shift" in t for t in texts)

"""Fleets: shards united equal the unsharded run byte for byte; a killed and
resumed run equals an uninterrupted one; ownership shares follow the
declared probabilities (scipy.stats binomial test); a home rebuilds alone
from its scenario.toml (with a population's own template folder too); bad
populations exit 2 before any home. The four readers are in
test_fleet_readers.py."""
import filecmp
import json
import os
import pathlib
import shutil
import signal
import subprocess
import time

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


def homes_in(out):
    """The homes of a fleet folder, as its meters table's partitions."""
    return sorted(x.name for x in (out / "meters").iterdir())


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
    assert "homes.parquet" in files and "fleet.json" in files and "meters/home=h00007/meters.parquet" in files


def test_auto_shard_reads_the_batch_schedulers(tmp_path):
    pop = short(tmp_path)
    env = dict(os.environ, SLURM_ARRAY_TASK_ID="3", SLURM_ARRAY_TASK_MIN="1", SLURM_ARRAY_TASK_COUNT="4")
    p = subprocess.run([BIN, "fleet", pop, "--homes", "8", "--out", tmp_path / "slurm", "--shard", "auto"], env=env, capture_output=True, text=True)
    assert p.returncode == 0 and "shard 2/4" in p.stdout, p.stderr
    assert homes_in(tmp_path / "slurm") == ["home=h00002", "home=h00006"]
    env = {k: v for k, v in os.environ.items() if not k.startswith("SLURM")}
    env.update(JOB_COMPLETION_INDEX="1", LOADLOOM_SHARDS="4")
    p = subprocess.run([BIN, "fleet", pop, "--homes", "8", "--out", tmp_path / "k8s", "--shard", "auto"], env=env, capture_output=True, text=True)
    assert p.returncode == 0 and homes_in(tmp_path / "k8s") == ["home=h00001", "home=h00005"]


def test_killed_and_resumed_equals_uninterrupted(tmp_path):
    pop = short(tmp_path, length="1 d")
    loadloom("fleet", pop, "--homes", "40", "--out", tmp_path / "whole", "--jobs", "2")
    out = tmp_path / "resumed"
    proc = subprocess.Popen([BIN, "fleet", pop, "--homes", "40", "--out", out, "--jobs", "1"], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    t = time.time()
    # Kill it once a few homes are complete (or after a minute at most).
    while time.time() - t < 60 and proc.poll() is None:
        if out.exists() and len(list(out.glob("manifests/home=*"))) >= 5:
            break
        time.sleep(0.005)
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    assert not (out / "fleet.json").exists(), "killed before the end"
    p = loadloom("fleet", pop, "--homes", "40", "--out", out)
    made = int(p.stdout.split("made ")[1].split()[0])
    assert 0 < made < 40
    same_tree(tmp_path / "whole", out)


def test_a_damaged_table_file_makes_its_home_be_redone(tmp_path):
    """Resume checks every table file of a home against its manifest's
    sha256: one changed byte in a home's truth file, and only that home is
    made again, with the bytes of an uninterrupted run."""
    pop = short(tmp_path)
    out = tmp_path / "f"
    loadloom("fleet", pop, "--homes", "3", "--out", out)
    truth = out / "truth" / "home=h00001" / "truth.parquet"
    good = truth.read_bytes()
    truth.write_bytes(good[:100] + bytes([good[100] ^ 1]) + good[101:])
    p = loadloom("fleet", pop, "--homes", "3", "--out", out)
    assert "made 1 homes, 2 already complete" in p.stdout, p.stdout
    assert truth.read_bytes() == good


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


def same_values(fleet, home, alone):
    """The fleet's tables of `home` hold the values of the dataset `alone`
    made from its scenario.toml: meters and events column by column (times
    as instants), truth after pivoting the long table back to one column
    per appliance."""
    part = lambda t: pq.read_table(fleet / t / f"home={home}" / f"{t}.parquet").to_pandas()
    single = lambda t: pq.read_table(alone / f"{t}.parquet").to_pandas()
    m, sm = part("meters"), single("meters")
    assert len(m) == len(sm) and (m["time"] == sm["time"]).all()
    for c in sm.columns.drop("time"):
        assert m[c].equals(sm[c]), c
    lacks = [c for c in m.columns if c not in sm.columns and c != "home"]  # pyarrow adds the key from the path
    assert m[lacks].isna().all().all(), "lines the home lacks are null"
    assert [c for c in m.columns if c != "home"] == [c for c in pq.read_schema(next((fleet / "meters").rglob("*.parquet"))).names], "one schema"
    t, st = part("truth"), single("truth")
    for a, rows in t.groupby("appliance", observed=True):
        rows = rows.reset_index(drop=True)
        assert (rows["time"] == st["time"]).all(), a
        assert rows["p_w"].equals(st[f"{a}_p_w"]) and rows["q_var"].equals(st[f"{a}_q_var"]), a
        assert (rows["state"].astype(str) == st[f"{a}_state"].astype(str)).all(), a
        for line in ["l1", "l2", "l3"]:
            col = f"{a}_{line}_p_w"
            assert rows[f"{line}_p_w"].equals(st[col]) if col in st else rows[f"{line}_p_w"].isna().all(), (a, line)
    assert sorted(t["appliance"].unique()) == sorted(c[: -len("_state")] for c in st.columns if c.endswith("_state"))
    e, se = part("events"), single("events")
    assert len(e) == len(se) and all((e[c].astype(str) == se[c].astype(str)).all() for c in ["appliance", "state"])
    assert (e["start"] == se["start"]).all() and e["energy_wh"].equals(se["energy_wh"])


def test_a_home_rebuilds_alone(tmp_path):
    pop = short(tmp_path)
    out = tmp_path / "f"
    loadloom("fleet", pop, "--homes", "6", "--out", out)
    for home in ["h00003", "h00005"]:  # a split-phase and a three-phase home
        loadloom("run", out / "manifests" / f"home={home}" / "scenario.toml", "--out", tmp_path / home)
        same_values(out, home, tmp_path / home / "scenario")


def test_a_home_with_the_populations_own_templates_rebuilds_alone(tmp_path):
    """A template folder beside the population: each home's scenario.toml
    names it by its absolute path, so the home rebuilds from anywhere."""
    src = tmp_path / "pop"
    (src / "library").mkdir(parents=True)
    (src / "library" / "aquarium.toml").write_text(
        '[appliance]\nlabel = "Aquarium heater (invented)"\nwiring = "L1-N"\nbehaviour = "steady"\n\n'
        '[[appliance.states]]\nname = "on"\npower = "75 W"\n'
    )
    pop = src / "street.toml"
    pop.write_text(short(tmp_path).read_text() + '\n[[owns]]\ntemplate = "aquarium"\nprobability = 1.0\n')
    out = tmp_path / "f"
    loadloom("fleet", pop, "--homes", "3", "--out", out)
    scenario = out / "manifests" / "home=h00001" / "scenario.toml"
    assert f'library = "{(src / "library").resolve()}"' in scenario.read_text()
    moved = tmp_path / "elsewhere" / "scenario.toml"
    moved.parent.mkdir()
    shutil.copy(scenario, moved)
    loadloom("run", moved, "--out", tmp_path / "alone")
    same_values(out, "h00001", tmp_path / "alone" / "scenario")
    assert "aquarium" in set(pq.read_table(out / "truth").column("appliance").to_pylist())


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
    texts = [(out / "manifests" / f"home=h{i:05}" / "scenario.toml").read_text() for i in range(60)]
    away = sum('away = "8-17"' in t for t in texts)
    assert stats.binomtest(away, 60, 3 / 5).pvalue > 1e-3
    assert any("habit_shift" in t for t in texts)

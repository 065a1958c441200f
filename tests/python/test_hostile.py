"""Hostile input and hostile output folders (issue 18), through the real
binary: a fleet resume verifies each home's scenario.toml like its data
files; writes never follow a symbolic link planted in an output folder;
partial folders of dead processes are swept; errors in a population point
at the population file's own line; and a seeded batch of mutated demo
scenarios (tests/python/hostile.py, text mutations that share no code with
the decoder) ends in exit 0 or 2, never a panic, a hang, a leftover or a
non-finite number (read back with pyarrow)."""
import json
import os
import pathlib
import random
import subprocess
import tempfile

from conftest import BIN, ROOT, loadloom
import hostile

POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"


def short_population(tmp_path):
    p = tmp_path / "street.toml"
    p.write_text(POP.read_text().replace('length = "1 d"', 'length = "1 h"'))
    return p


def test_fleet_resume_remakes_a_home_whose_scenario_is_damaged(tmp_path):
    pop = short_population(tmp_path)
    out = tmp_path / "f"
    loadloom("fleet", pop, "--homes", "3", "--out", out)
    home = lambda i: out / "manifests" / f"home=h{i:05}" / "scenario.toml"
    good = home(1).read_text()
    home(1).write_text(good.replace("[home]", "[home]\nvoltage = \"1 kV\"", 1))
    home(2).unlink()
    p = loadloom("fleet", pop, "--homes", "3", "--out", out)
    assert "made 2 homes, 1 already complete" in p.stdout, p.stdout
    assert home(1).read_text() == good
    assert home(2).is_file()


def test_fleet_index_does_not_follow_a_planted_link(tmp_path):
    pop = short_population(tmp_path)
    out = tmp_path / "f"
    out.mkdir()
    victim = tmp_path / "victim.txt"
    victim.write_text("keep me")
    os.symlink(victim, out / "fleet.json")
    os.symlink(victim, out / "homes.parquet")
    loadloom("fleet", pop, "--homes", "2", "--out", out)
    assert victim.read_text() == "keep me"
    assert not (out / "fleet.json").is_symlink() and not (out / "homes.parquet").is_symlink()


def test_fleet_errors_name_the_file_and_keep_their_cause(tmp_path):
    pop = short_population(tmp_path)
    blocker = tmp_path / "a-file"
    blocker.write_text("")
    r = loadloom("fleet", pop, "--homes", "1", "--out", blocker, check=False)
    assert r.returncode == 1, r.stderr
    assert f"--> {blocker}" in r.stderr and "= cause:" in r.stderr and "exists" in r.stderr.lower(), r.stderr
    # A source impedance no home survives: bad input (exit 2), not a failed run.
    text = pop.read_text().replace('service = "200 A"', 'service = "200 A"\nsource = { r = "50 ohm", x = "50 ohm" }')
    pop.write_text(text)
    r = loadloom("fleet", pop, "--homes", "3", "--out", tmp_path / "f", check=False)
    assert r.returncode == 2, r.stderr
    assert "its simulation stopped" in r.stderr and "lower the source impedance" in r.stderr, r.stderr


def dead_pid():
    p = subprocess.Popen(["true"])
    p.wait()
    return p.pid


def test_partial_folders_of_dead_processes_are_swept(tmp_path):
    scenario = tmp_path / "home.toml"
    scenario.write_text((ROOT / "scenarios" / "apartment-208.toml").read_text().replace('length = "7 d"', 'length = "1 h"'))
    out = tmp_path / "out"
    stale = out / f".home.partial-{dead_pid()}"
    (stale / "x").mkdir(parents=True)
    live = out / f".other.partial-{os.getpid()}"  # this test's own process is alive
    live.mkdir()
    loadloom("run", scenario, "--out", out, "--quiet")
    assert not stale.exists() and live.exists()
    assert sorted(p.name for p in out.iterdir()) == [live.name, "home"]


def test_a_population_error_points_at_the_population_line(tmp_path):
    pop = short_population(tmp_path)
    text = pop.read_text().replace('interval = "1 min"', 'interval = "7 min"', 1)
    pop.write_text(text)
    line = next(i for i, l in enumerate(text.splitlines(), 1) if 'interval = "7 min"' in l)
    r = loadloom("fleet", pop, "--homes", "2", "--out", tmp_path / "f", check=False)
    assert r.returncode == 2, r.stderr
    assert f"street.toml:{line}:" in r.stderr and "home-0000" not in r.stderr, r.stderr



def test_seeded_hostile_batch_through_the_binary():
    # A few hundred cases in CI; LOADLOOM_HOSTILE_CASES asks for more.
    cases = int(os.environ.get("LOADLOOM_HOSTILE_CASES", "300"))
    rng = random.Random(18)
    faults = []
    for i in range(cases):
        text, what = hostile.make_case(rng)
        with tempfile.TemporaryDirectory() as d:
            for kind, detail in hostile.check_case(BIN, text, pathlib.Path(d), timeout=60):
                faults.append((i, what, kind, detail[:300]))
    for i in range(cases // 10):
        text, what = hostile.make_population_case(rng)
        with tempfile.TemporaryDirectory() as d:
            for kind, detail in hostile.check_population(BIN, text, pathlib.Path(d), timeout=120):
                faults.append((f"population {i}", what, kind, detail[:300]))
    assert not faults, "\n".join(map(str, faults[:10]))


def test_twelve_equal_monthly_means_give_a_finite_year(tmp_path):
    # Hostile but legal: `monthly` with one value twelve times has no
    # coldest month apart from the warmest; the year's weather, the heat
    # pump's energy and the mean indoor temperature must stay numbers.
    text = (ROOT / "scenarios" / "split-phase-house.toml").read_text()
    start = text.index("[weather]")
    end = text.index("\n[", start + 1)
    same = "[weather]\nmonthly = [" + ", ".join(['"10 °C"'] * 12) + "]\n"
    scenario = tmp_path / "flat-year.toml"
    scenario.write_text(text[:start] + same + text[end:])
    p = loadloom("validate", scenario, "--year")
    words = p.stdout.replace("|", " ").split()
    assert not {"NaN", "inf", "-inf", "NaN%"} & set(words), p.stdout
    # JSON writes a non-finite number as null: every mean must be there.
    found = []

    def means(node):
        if isinstance(node, dict):
            for k, v in node.items():
                if k in ("mean_c", "mean_indoor_c"):
                    found.append((k, v))
                means(v)
        elif isinstance(node, list):
            for v in node:
                means(v)

    means(json.loads(loadloom("validate", scenario, "--year", "--json").stdout))
    assert found and all(isinstance(v, float) for _, v in found), found


def test_a_dataset_with_a_wild_reading_is_refused_by_every_reader(tmp_path):
    # Hostile: a meters file edited to hold an infinity or 1e308 (finite,
    # but its square is not) drew NaN coordinates into the plot and an
    # infinite neutral current into the audit. Refused where it is read.
    import numpy as np
    import pyarrow as pa
    import pyarrow.parquet as pq

    scenario = tmp_path / "home.toml"
    scenario.write_text((ROOT / "scenarios" / "apartment-208.toml").read_text().replace('length = "7 d"', 'length = "2 h"'))
    loadloom("run", scenario, "--out", tmp_path / "out", "--quiet")
    data = tmp_path / "out" / "home"
    meters = data / "meters.parquet"
    good = pq.read_table(meters)
    # (The meters are float32: 1e30 is as wild as it gets there.)
    for wild, says in [(np.inf, "value inf is not a finite number"), (1e30, "beyond any reading")]:
        v = good.column("l1_p_w").to_numpy().copy()
        v[100] = wild
        pq.write_table(good.set_column(good.column_names.index("l1_p_w"), "l1_p_w", pa.array(v)), meters)
        for args in (["plot", data, "--out", tmp_path / "p.svg"], ["audit", data, "--declared", scenario]):
            p = loadloom(*args, check=False)
            assert p.returncode == 2 and p.stdout == "", (args, p.returncode, p.stdout[-500:])
            assert says in p.stderr and "`l1_p_w`" in p.stderr and "row 100" in p.stderr, p.stderr
            assert not (tmp_path / "p.svg").exists()


def test_a_plot_window_ending_before_it_starts_says_so(tmp_path):
    scenario = tmp_path / "home.toml"
    scenario.write_text((ROOT / "scenarios" / "apartment-208.toml").read_text().replace('length = "7 d"', 'length = "1 d"'))
    loadloom("run", scenario, "--out", tmp_path / "out", "--quiet")
    p = loadloom("plot", tmp_path / "out" / "home", "--from", "2027-01-04T10:00", "--to", "2027-01-04T09:00",
                 "--out", tmp_path / "p.svg", check=False)
    assert p.returncode == 2 and "--to is not after --from" in p.stderr, p.stderr

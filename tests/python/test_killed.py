"""A process killed with SIGKILL cannot clean up after itself: its
`.NAME.partial-PID` folder stays behind. The next run into the same folder
must sweep it (the owner is dead), for `run`, `roundtrip` and `fleet` alike.
Each case really kills the binary while its partial folder exists, checks
that the leftover is there (so the test can fail), then runs again."""
import signal
import subprocess
import time

from conftest import BIN, ROOT, loadloom

HOUSE = ROOT / "scenarios" / "split-phase-house.toml"
POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"


def partials(folder):
    return [p for p in folder.rglob("*") if ".partial-" in p.name or ".old-" in p.name]


def kill_when_partial(args, watch, limit=120):
    """Starts loadloom with `args`, SIGKILLs it once a partial folder shows
    under `watch`; returns the leftovers."""
    proc = subprocess.Popen([BIN, *map(str, args)], stdout=subprocess.DEVNULL, stderr=subprocess.DEVNULL)
    t = time.time()
    while time.time() - t < limit and proc.poll() is None:
        if watch.exists() and any(p.is_dir() for p in partials(watch)):
            break
        time.sleep(0.005)
    assert proc.poll() is None, "the process ended before it could be killed mid-write"
    proc.send_signal(signal.SIGKILL)
    proc.wait()
    left = partials(watch)
    assert left, "killed mid-write, so its partial folder must still be there"
    return left


def test_run_sweeps_a_killed_runs_partial_folder(tmp_path):
    out = tmp_path / "out"
    kill_when_partial(["run", HOUSE, "--length", "120d", "--out", out], out)
    loadloom("run", HOUSE, "--length", "1d", "--out", out, "--quiet")
    assert partials(out) == []
    assert (out / "split-phase-house" / "manifest.json").exists()


def test_roundtrip_sweeps_a_killed_round_trips_partial_folder(tmp_path):
    out = tmp_path / "out"
    args = ["roundtrip", HOUSE, "--solver", "builtin:training-mean", "--out", out, "--quiet"]
    kill_when_partial([*args, "--train", "90d", "--test", "30d"], out)
    loadloom(*args, "--train", "1d", "--test", "1d")
    assert partials(out) == []


def test_fleet_sweeps_a_killed_fleets_partial_folders(tmp_path):
    pop = tmp_path / "street.toml"
    pop.write_text(POP.read_text().replace('length = "1 d"', 'length = "8 d"'))
    out = tmp_path / "fleet"
    kill_when_partial(["fleet", pop, "--homes", "4", "--out", out, "--jobs", "2"], out)
    loadloom("fleet", pop, "--homes", "4", "--out", out, "--jobs", "2")
    assert partials(out) == []

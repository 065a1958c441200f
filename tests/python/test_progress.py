"""Progress lines reach terminals only: when standard output and standard
error are pipes (a script, a log file, a scheduler's output file), the long
commands write no escape codes, no carriage returns and no progress lines
there. ECMA-48 (5th edition, 1991) defines the control functions: ESC (0x1B)
begins an escape or control sequence, CR (0x0D) returns the carriage; a log
holding either is what a terminal, not a file, should have received."""
import shutil
import sys

from conftest import BIN, ROOT, loadloom

POP = ROOT / "scenarios" / "fleet" / "mixed-street.toml"


def assert_clean(p):
    for name, text in (("stdout", p.stdout), ("stderr", p.stderr)):
        assert "\x1b" not in text, f"escape code in piped {name}: {text[:200]!r}"
        assert "\r" not in text, f"carriage return in piped {name}: {text[:200]!r}"


def test_fault_matrix_writes_no_escape_codes_into_pipes(tmp_path):
    (tmp_path / "sc").mkdir()
    shutil.copy(ROOT / "scenarios" / "apartment-208.toml", tmp_path / "sc")
    p = loadloom("audit", "--matrix", "--scenarios", tmp_path / "sc", "--runs", "1", "--days", "0.5", "--variant", "1s")
    assert_clean(p)
    # Nothing but the report: the progress messages ("clean run 1", the
    # faults' names) are for terminals.
    assert p.stderr == "", p.stderr[:300]


def test_fleet_writes_no_progress_into_pipes(tmp_path):
    pop = tmp_path / "street.toml"
    pop.write_text(POP.read_text().replace('length = "1 d"', 'length = "1 h"'))
    p = loadloom("fleet", pop, "--homes", "3", "--out", tmp_path / "f", "--jobs", "2")
    assert_clean(p)
    assert p.stderr == "", p.stderr[:300]
    assert p.stdout.startswith("fleet ") and "made 3 homes" in p.stdout


def test_run_writes_no_progress_into_pipes(tmp_path):
    p = loadloom("run", ROOT / "scenarios" / "apartment-208.toml", "--out", tmp_path, "--length", "2h")
    assert_clean(p)
    assert p.stderr == ""
    assert p.stdout.startswith("wrote ")


SLOW_SOLVER = "import sys, time, shutil; time.sleep(2); sys.exit(3)"


def test_roundtrip_writes_no_progress_into_pipes(tmp_path):
    # A solver that fails after two seconds: the run's stderr holds the
    # error report and nothing of the progress line.
    (tmp_path / "slow.py").write_text(SLOW_SOLVER)
    p = loadloom("roundtrip", ROOT / "scenarios" / "apartment-208.toml", "--train", "1h", "--test", "1h",
                 "--solver", f"{sys.executable} {tmp_path / 'slow.py'} {{task}} {{estimate}}", "--out", tmp_path, check=False)
    assert p.returncode == 1
    assert_clean(p)
    assert p.stderr.startswith("error: solver "), p.stderr[:300]
    assert "solver running" not in p.stderr


def test_roundtrip_shows_a_long_solver_running_on_a_terminal(tmp_path):
    # Standard error on a pseudo-terminal (POSIX pty): the progress line
    # names the solver while it runs, and its elapsed time moves.
    import os
    import pty
    import subprocess
    (tmp_path / "slow.py").write_text(SLOW_SOLVER)
    master, slave = pty.openpty()
    p = subprocess.Popen([BIN, "roundtrip", str(ROOT / "scenarios" / "apartment-208.toml"), "--train", "1h", "--test", "1h",
                          "--solver", f"{sys.executable} {tmp_path / 'slow.py'} {{task}} {{estimate}}", "--out", str(tmp_path)],
                         stdout=subprocess.PIPE, stderr=slave)
    os.close(slave)
    seen = b""
    while True:
        try:
            chunk = os.read(master, 4096)
        except OSError:
            break
        if not chunk:
            break
        seen += chunk
    p.wait()
    os.close(master)
    text = seen.decode("utf-8", "replace")
    assert p.returncode == 1
    assert "solver running (time limit 600 s)" in text, text[:500]
    assert "[1s]" in text or "[2s]" in text, "the elapsed time did not move"

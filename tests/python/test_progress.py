"""Progress lines reach terminals only: when standard output and standard
error are pipes (a script, a log file, a scheduler's output file), the long
commands write no escape codes, no carriage returns and no progress lines
there. ECMA-48 (5th edition, 1991) defines the control functions: ESC (0x1B)
begins an escape or control sequence, CR (0x0D) returns the carriage; a log
holding either is what a terminal, not a file, should have received."""
import shutil

from conftest import ROOT, loadloom

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

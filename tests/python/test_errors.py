"""One error model through the real binary (issue 18): every command ends
bad input with exit status 2 and one error on standard error that names the
file (or, for an option, the command line with the option as given), says
what would work, and leaves nothing behind: no output file, no partial
folder. The commands covered here are those whose errors were built as
plain text before: plot, audit, score --against, fleet --shard,
audit --matrix --variant, roundtrip's periods and run's overrides."""
import pathlib

import pyarrow as pa
import pyarrow.parquet as pq
import pytest

from conftest import ROOT, loadloom

DEMO = ROOT / "scenarios" / "apartment-208.toml"


def one_error(p, *needles):
    """Exit status 2, exactly one error printed, with a help line and every needle."""
    assert p.returncode == 2, (p.returncode, p.stderr)
    assert p.stderr.count("error:") == 1, p.stderr
    assert "  --> " in p.stderr and "= help: " in p.stderr, p.stderr
    for n in needles:
        assert str(n) in p.stderr, (n, p.stderr)


def leftovers(folder):
    return [q.name for q in pathlib.Path(folder).rglob("*") if ".partial" in q.name or ".old-" in q.name]


@pytest.fixture(scope="module")
def dataset(tmp_path_factory):
    out = tmp_path_factory.mktemp("ds")
    home = out / "flat.toml"
    home.write_text(DEMO.read_text().replace('length = "7 d"', 'length = "2 d"'))
    loadloom("run", home, "--out", out, "--quiet")
    return out / "flat"


def test_plot_of_a_damaged_meters_table_names_the_table(dataset, tmp_path):
    broken = tmp_path / "broken"
    broken.mkdir()
    for f in dataset.iterdir():
        (broken / f.name).write_bytes(f.read_bytes())
    (broken / "meters.parquet").write_bytes(b"PAR1 not a parquet file PAR1")
    out = tmp_path / "day.svg"
    p = loadloom("plot", broken, "--out", out, check=False)
    one_error(p, broken / "meters.parquet")
    assert not out.exists() and not leftovers(tmp_path), leftovers(tmp_path)


def test_plot_options_are_named_on_the_command_line(dataset, tmp_path):
    out = tmp_path / "day.svg"
    p = loadloom("plot", dataset, "--out", out, "--size", "10x10", check=False)
    one_error(p, "the command line", "--size 10x10", "1400x900")
    p = loadloom("plot", dataset, "--out", out, "--from", "yesterday", check=False)
    one_error(p, dataset, "--from yesterday")
    assert not out.exists() and not leftovers(tmp_path)


def test_audit_of_a_bad_meters_file_names_it(tmp_path):
    meters = tmp_path / "meters.csv"
    meters.write_text("when,l1_p_w\nmonday,12\n")
    decl = tmp_path / "declared.toml"
    decl.write_text(DEMO.read_text())
    p = loadloom("audit", meters, "--declared", decl, check=False)
    one_error(p, meters)
    p = loadloom("audit", meters, check=False)
    one_error(p, meters, "--declared")
    empty = tmp_path / "empty"
    empty.mkdir()
    p = loadloom("audit", empty, check=False)
    one_error(p, empty)


def test_audit_of_a_meters_table_of_one_row_names_it(dataset, tmp_path):
    t = pq.read_table(dataset / "meters.parquet").slice(0, 1)
    one = tmp_path / "one.parquet"
    pq.write_table(t, one)
    decl = tmp_path / "declared.toml"
    decl.write_text(DEMO.read_text())
    p = loadloom("audit", one, "--declared", decl, check=False)
    one_error(p, one, "fewer than two rows")


def estimate(dataset, path, ids):
    """An estimate of some appliances: the truth's own columns (a perfect solver)."""
    t = pq.read_table(dataset / "truth.parquet")
    cols = {"time": t["time"]}
    for i in ids:
        cols[f"{i}_p_w"] = t[f"{i}_p_w"]
    pq.write_table(pa.table(cols), path)
    return path


def test_compare_of_estimates_of_different_appliances_names_the_other_file(dataset, tmp_path):
    import json

    ids = [a["id"] for a in json.loads((dataset / "manifest.json").read_text())["appliances"]]
    a = estimate(dataset, tmp_path / "a.parquet", ids[:3])
    b = estimate(dataset, tmp_path / "b.parquet", ids[:2])
    p = loadloom("score", "--truth", dataset, "--estimate", a, "--against", b, "--partial", check=False)
    one_error(p, b, a, "different appliances", "--partial")
    assert p.stdout == ""


def test_fleet_shard_and_matrix_variant_errors_name_the_option(tmp_path):
    pop = ROOT / "scenarios" / "fleet" / "mixed-street.toml"
    out = tmp_path / "fleet"
    p = loadloom("fleet", pop, "--homes", "2", "--out", out, "--shard", "5/2", check=False)
    one_error(p, "the command line", "--shard 5/2", "I/N")
    p = loadloom("fleet", pop, "--homes", "2", "--out", out, "--shard", "x/2", check=False)
    one_error(p, "--shard x/2", '"x" is not a whole number')
    assert not out.exists()
    p = loadloom("audit", "--matrix", "--variant", "sideways", check=False)
    one_error(p, "--variant sideways", "1s, 10s")


def test_roundtrip_and_run_option_errors_name_the_option_and_write_nothing(tmp_path):
    out = tmp_path / "out"
    p = loadloom("roundtrip", DEMO, "--solver", "builtin:training-mean", "--train", "1d", "--test", "1.5s", "--out", out, check=False)
    one_error(p, "--test", "reporting intervals")
    p = loadloom("roundtrip", DEMO, "--solver", "builtin:training-mean", "--train", "1d", "--test", "0s", "--out", out, check=False)
    one_error(p, "--test 0s", "above zero")
    p = loadloom("run", DEMO, "--length", "7q", "--out", out, check=False)
    one_error(p, "--length 7q", '"12 h"')
    p = loadloom("run", DEMO, "--start", "2027-03-14T02:30", "--out", out, check=False)
    one_error(p, "--start 2027-03-14T02:30", "clock change")
    assert not out.exists() or not any(out.iterdir())


def test_a_scenario_error_keeps_its_line_and_column(tmp_path):
    bad = tmp_path / "bad.toml"
    text = DEMO.read_text().replace('length = "7 d"', 'length = "7 parsecs"', 1)
    bad.write_text(text)
    line = next(i for i, l in enumerate(text.splitlines(), 1) if "parsecs" in l)
    for cmd in (["validate"], ["validate", "--quiet"], ["run", "--out", tmp_path / "o"]):
        p = loadloom(*cmd, bad, check=False)
        one_error(p, f"bad.toml:{line}:")
    assert not (tmp_path / "o").exists() or not any((tmp_path / "o").iterdir())

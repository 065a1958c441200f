"""The audit's cut-offs set from the command line (`--cutoff NAME=VALUE`):
on a generated home with one appliance declared on the wrong line, each
changed cut-off moves the verdict the way its meaning says; the report names
what differs from the standard; bad settings exit 2 listing every name, and
the README's table lists the same names with the standard values the error
gives."""
import json
import pathlib
import re

import pytest

from conftest import ROOT, loadloom

# Invented home: three cycling loads of distinct sizes, 1 s rows.
HOME = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "100 A"
[run]
start = "2027-01-04T00:00"
length = "6 h"
[meter]
interval = "1 s"

[[appliance]]
id = "kettle"
wiring = "L1-N"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "20 min" }, { name = "on", power = "1500 W", dwell = "7 min" } ]

[[appliance]]
id = "pump"
wiring = "L2-N"
behaviour = "cycle"
load = "electronic"
states = [ { name = "off", power = "0 W", dwell = "25 min" }, { name = "on", power = "800 W", pf = 0.85, dwell = "10 min" } ]

[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "cycle"
states = [ { name = "off", power = "0 W", dwell = "30 min" }, { name = "on", power = "3000 W", dwell = "15 min" } ]
"""


@pytest.fixture(scope="module")
def case(tmp_path_factory):
    """The home simulated, and a declaration with the kettle on L2-N."""
    tmp = tmp_path_factory.mktemp("cutoffs")
    (tmp / "home.toml").write_text(HOME)
    loadloom("run", tmp / "home.toml", "--out", tmp / "out")
    wrong = tmp / "wrong.toml"
    wrong.write_text(HOME.replace('wiring = "L1-N"', 'wiring = "L2-N"', 1))
    return tmp / "out" / "home", wrong


def audit(case, *cutoffs):
    data, declared = case
    args = [a for c in cutoffs for a in ("--cutoff", c)]
    return json.loads(loadloom("audit", data, "--declared", declared, "--json", *args).stdout)


def kinds(fs):
    return [(f["kind"], f["subject"]) for f in fs]


def verdict(r, id_):
    return next(a["verdict"] for a in r["appliances"] if a["id"] == id_)


def test_standard_cutoffs_find_the_kettle_on_the_other_line(case):
    r = audit(case)
    assert kinds(r["findings"]) == [("wrong-line", "kettle")]
    assert r["possible"] == [] and r["cutoffs_changed"] == []
    assert r["possible_below"] == 0.5


def test_a_higher_possible_line_lists_the_move_as_possible(case):
    # A move's confidence is n_a / (n_a + n_d + 1) < 1: at possible = 1 it
    # is listed apart, with the same evidence.
    r = audit(case, "possible=1")
    assert r["findings"] == []
    assert kinds(r["possible"]) == [("wrong-line", "kettle")]
    assert r["possible_below"] == 1.0
    assert [(c["name"], c["value"], c["standard"]) for c in r["cutoffs_changed"]] == [("possible", 1.0, 0.5)]


def test_a_larger_decide_size_leaves_the_kettle_unplaced(case):
    # 1.5 kW on every connection it could be on (no rated voltage): under
    # 2 kW the audit does not place it, so no wiring finding names it.
    r = audit(case, "decide_w=2000")
    assert ("wrong-line", "kettle") not in kinds(r["findings"] + r["possible"])
    assert verdict(r, "kettle") == "undecidable"
    assert verdict(r, "heater") == "as declared", "3 kW is still decided"
    # Just under the kettle's size it is placed again.
    assert kinds(audit(case, "decide_w=1400")["findings"]) == [("wrong-line", "kettle")]


def test_the_text_and_markdown_reports_name_the_changed_cutoffs(case):
    data, declared = case
    for form in [(), ("--markdown",)]:
        out = loadloom("audit", data, "--declared", declared, "--cutoff", "decide_w=2000", *form).stdout
        assert "cut-offs changed from the standard ones: decide_w = 2000 (standard 300)" in out, form
        assert "not an inspection" in out
        std = loadloom("audit", data, "--declared", declared, *form).stdout
        assert "cut-offs changed" not in std


BAD = ["nope=1", "possible", "possible=abc", "possible=nan", "possible=inf",
       "possible=1.5", "negative_ok=-0.1", "blind_move=2.5", "decide_w=-1"]


@pytest.mark.parametrize("bad", BAD)
def test_a_bad_cutoff_exits_2_listing_the_names(case, bad):
    data, declared = case
    p = loadloom("audit", data, "--declared", declared, "--cutoff", bad, check=False)
    assert p.returncode == 2, p.stderr
    assert p.stdout == ""
    names = re.findall(r"(\w+) \(standard ([\d.]+),", p.stderr)
    readme = (ROOT / "README.md").read_text()
    rows = re.findall(r"^\| `(\w+)` \| [\d. ]+ \| [^|]+ \| [^|]+ \|$", readme, re.M)
    assert [n for n, _ in names] == rows and len(rows) >= 20, p.stderr


def test_the_readme_lists_every_cutoff_with_its_standard_value(case):
    data, declared = case
    p = loadloom("audit", data, "--declared", declared, "--cutoff", "nope=1", check=False)
    given = {n: float(v) for n, v in re.findall(r"(\w+) \(standard ([\d.]+),", p.stderr)}
    readme = (ROOT / "README.md").read_text()
    table = {n: float(v.replace(" ", "")) for n, v in
             re.findall(r"^\| `(\w+)` \| ([\d. ]+) \| [^|]+ \| [^|]+ \|$", readme, re.M)}
    assert table == given
    # The JSON report's meaning is the README's.
    r = audit(case, "coarse_interval_s=60")
    row = re.search(r"^\| `coarse_interval_s` \|[^|]+\|[^|]+\| ([^|]+) \|$", readme, re.M).group(1)
    assert r["cutoffs_changed"][0]["meaning"] == row.strip()

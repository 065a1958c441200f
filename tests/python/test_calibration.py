"""The demo homes against the published figures they cite: a calendar year
of each (`validate --year`) lands within 0.9 … 1.1 times every
`[[reference]]` figure (the sources are named beside each in the scenario
files), and its busiest month draws at least 1.4 times the quietest per day
(weather-driven heating and cooling). The README's year picture is drawn
again from the demo and must equal the committed file."""
import json
import os
import pathlib
import re

import pytest

from conftest import ROOT, loadloom

DEMOS = ["split-phase-house", "three-phase-house", "apartment-208"]
PICTURE = ROOT / "tests" / "pictures" / "split-phase-house-year.svg"


@pytest.mark.parametrize("demo", DEMOS)
def test_a_year_of_each_demo_lands_near_its_references(demo):
    out = loadloom("validate", "--year", "--json", ROOT / "scenarios" / f"{demo}.toml").stdout
    year = json.loads(out)["year"]
    refs = year["references"]
    assert any(r["ids"] == [] for r in refs), "a figure for the whole home"
    for r in refs:
        assert 0.9 <= r["ratio"] <= 1.1, (demo, r["name"], r["simulated_kwh"], r["published_kwh"])
        assert r["source"], r["name"]
    # Per day, so a short February does not count as quiet.
    per_day = [e / d for e, d in zip(year["monthly_kwh"], [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31])]
    assert max(per_day) / min(per_day) >= 1.4, per_day
    assert abs(year["season_ratio"] - max(per_day) / min(per_day)) < 1e-6


def test_the_readme_year_picture_is_drawn_by_the_current_code(tmp_path):
    """The commands of the README's year section, run here."""
    readme = (ROOT / "README.md").read_text()
    block = re.search(r"```sh\n(sed 's/\^step.*?)```", readme, re.S).group(1)
    sed = re.search(r"sed '([^']*)'", block).group(1)
    text = (ROOT / "scenarios" / "split-phase-house.toml").read_text()
    for cmd in sed.split("; "):
        _, a, b, _ = cmd.split("/")
        text = re.sub(a.replace("^", "(?m)^", 1), b, text, count=1)
    scenario = tmp_path / "split-phase-year.toml"
    scenario.write_text(text)
    loadloom("run", scenario, "--length", "365d", "--out", tmp_path / "out", "--quiet")
    drawn = tmp_path / "year.svg"
    loadloom("plot", tmp_path / "out" / "split-phase-year", "--monthly", "--by", "end-use", "--out", drawn, "--size", "1000x560")
    if os.environ.get("LOADLOOM_UPDATE_PICTURES") == "1":
        PICTURE.write_bytes(drawn.read_bytes())
    assert drawn.read_bytes() == PICTURE.read_bytes(), "redraw with LOADLOOM_UPDATE_PICTURES=1 (DEVELOPERS.md)"

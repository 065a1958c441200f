"""The picture in the README is what the current code draws: this test
draws it again from the demo scenario and fails when the committed file
differs, so a change to the simulator or to the plot that alters it must
commit the new picture too (DEVELOPERS.md, "Pictures"). To refresh it:

    LOADLOOM_UPDATE_PICTURES=1 .venv/bin/python -m pytest -q tests/python/test_readme_picture.py
"""
import os
import xml.etree.ElementTree as ET

from conftest import ROOT, loadloom

PICTURE = ROOT / "tests" / "pictures" / "split-phase-house-day.svg"
# The same command the README shows beside the picture.
RUN = ("run", ROOT / "scenarios" / "split-phase-house.toml", "--length", "1d")
PLOT_SIZE = "800x460"
# Small enough to keep in the repository (a text file git compresses well).
MAX_BYTES = 400_000


def test_the_readme_picture_is_what_the_code_draws(tmp_path):
    loadloom(*RUN, "--out", tmp_path)
    fresh = tmp_path / "day.svg"
    loadloom("plot", tmp_path / "split-phase-house", "--out", fresh, "--size", PLOT_SIZE)
    ET.parse(fresh)  # a well-formed SVG (Python's xml.etree)
    assert fresh.stat().st_size <= MAX_BYTES, fresh.stat().st_size
    if os.environ.get("LOADLOOM_UPDATE_PICTURES") == "1":
        PICTURE.write_bytes(fresh.read_bytes())
    assert PICTURE.exists(), f"{PICTURE} is missing: run this test with LOADLOOM_UPDATE_PICTURES=1"
    assert PICTURE.read_bytes() == fresh.read_bytes(), (
        f"{PICTURE.relative_to(ROOT)} is stale: the current code draws another picture; "
        "refresh it with LOADLOOM_UPDATE_PICTURES=1 (see DEVELOPERS.md) and commit it"
    )


def test_the_readme_shows_the_picture_and_the_commands_that_make_it():
    readme = (ROOT / "README.md").read_text()
    assert f"]({PICTURE.relative_to(ROOT)})" in readme
    assert "loadloom run scenarios/split-phase-house.toml --length 1d" in readme
    assert f"--size {PLOT_SIZE}" in readme

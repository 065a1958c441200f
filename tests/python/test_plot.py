"""Plots: each is a valid SVG of the requested size (parsed with Python's
xml.etree), its legend lists every appliance that drew power in the window,
line-to-line appliances show on both of their lines; completions and the man
page come from the one definition of the flags."""
import json
import xml.etree.ElementTree as ET

import pandas as pd
import pyarrow.parquet as pq
import pytest

from conftest import ROOT, loadloom

NS = {"s": "http://www.w3.org/2000/svg"}
DEMOS = sorted((ROOT / "scenarios").glob("*.toml"))


@pytest.mark.parametrize("demo", DEMOS, ids=[d.stem for d in DEMOS])
def test_plot_of_each_demo(demo, simulate, tmp_path):
    d = simulate(path=demo, extra=("--length", "2d"))
    out = tmp_path / "p.svg"
    loadloom("plot", d, "--out", out, "--size", "1200x800")
    root = ET.parse(out).getroot()
    assert root.tag == "{http://www.w3.org/2000/svg}svg"
    assert (root.get("width"), root.get("height")) == ("1200", "800")
    m = json.loads((d / "manifest.json").read_text())
    lines = [c for c in m["supply"]["conductors"] if c != "n"]
    panels = root.findall("s:g[@class='panel']", NS)
    assert [p.get("data-conductor") for p in panels] == lines
    for p in panels:
        assert p.find("s:path[@class='measured']", NS) is not None
    legend = [t.text for t in root.iter("{http://www.w3.org/2000/svg}text") if t.get("class") == "legend"]
    # The default window is the busiest local day; every appliance with energy in it is listed.
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    tz = m["time"]["timezone"]
    meters = pq.read_table(d / "meters.parquet").to_pandas()
    day = meters["time"].dt.tz_convert(tz).dt.date
    busiest = meters["total_p_w"].groupby(day).sum().idxmax()
    sel = truth["time"].dt.tz_convert(tz).dt.date == busiest
    drew = {a["id"] for a in m["appliances"] if sum(truth.loc[sel, f"{a['id']}_{c}_p_w"].abs().sum() for c in a["conductors"]) > 0}
    assert set(legend) == drew, set(legend) ^ drew
    # A line-to-line appliance is drawn on both of its lines.
    ll = [a for a in m["appliances"] if a["line_to_line"] and a["id"] in drew and len(a["conductors"]) >= 2]
    assert ll, "the demos have line-to-line appliances"
    for a in ll:
        shown = {p.get("data-conductor") for p in panels if p.find(f"s:polygon[@data-appliance='{a['id']}']", NS) is not None}
        assert set(a["conductors"]) <= shown, (a["id"], shown)


def test_plot_window_and_bad_input(simulate, tmp_path):
    d = simulate(path=ROOT / "scenarios" / "three-phase-house.toml", extra=("--length", "1d"))
    out = tmp_path / "w.svg"
    p = loadloom("plot", d, "--from", "2027-01-04T06:00", "--to", "2027-01-04T09:00", "--out", out)
    assert "2027-01-04T06:00" in p.stdout and "2027-01-04T09:00" in p.stdout
    ET.parse(out)
    bad = loadloom("plot", d, "--from", "2030-01-01", "--out", tmp_path / "x.svg", check=False)
    assert bad.returncode == 2 and "outside the dataset" in bad.stderr and not (tmp_path / "x.svg").exists()
    bad = loadloom("plot", d, "--size", "12x8", "--out", tmp_path / "y.svg", check=False)
    assert bad.returncode == 2 and "--size" in bad.stderr


def test_completions_and_man_page_come_from_the_flags():
    for shell in ["bash", "zsh", "fish"]:
        out = loadloom("completions", shell).stdout
        assert "roundtrip" in out and "waveform-rate" in out, shell
    man = loadloom("man").stdout
    assert man.startswith(".ie") or ".TH" in man
    assert "roundtrip" in man and "validate" in man


def test_score_plot_shows_truth_estimate_and_score_bars(simulate, tmp_path):
    d = simulate(path=ROOT / "scenarios" / "apartment-208.toml", extra=("--length", "2d"))
    m = json.loads((d / "manifest.json").read_text())
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    est = pd.DataFrame({"time": truth["time"]})
    for a in m["appliances"]:
        est[f"{a['id']}_p_w"] = truth[f"{a['id']}_p_w"].astype(float) * 0.9
    est.to_parquet(tmp_path / "e.parquet")
    out = tmp_path / "s.svg"
    loadloom("score", "--truth", d, "--estimate", tmp_path / "e.parquet", "--plot", out)
    root = ET.parse(out).getroot()
    groups = root.findall("s:g[@class='appliance']", NS)
    assert [g.get("data-appliance") for g in groups] == [a["id"] for a in m["appliances"]]
    for g in groups:
        assert g.find("s:polygon[@class='truth']", NS) is not None and g.find("s:path[@class='estimate']", NS) is not None
    labels = [t.text for t in root.iter("{http://www.w3.org/2000/svg}text") if t.get("class") == "bar-label"]
    assert labels == [a["id"] for a in m["appliances"]]


def png_size(path):
    # PNG signature, then the IHDR chunk: width and height, big-endian (PNG specification, ISO/IEC 15948).
    data = path.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    return int.from_bytes(data[16:20], "big"), int.from_bytes(data[20:24], "big")


def test_png_plots_of_the_requested_size(simulate, tmp_path):
    import zlib
    d = simulate(path=ROOT / "scenarios" / "split-phase-house.toml", extra=("--length", "1d"))
    out = tmp_path / "p.png"
    loadloom("plot", d, "--out", out, "--size", "1000x700")
    assert png_size(out) == (1000, 700)
    # The image holds a drawing, not a blank page: decompress the IDAT data
    # (zlib, as the PNG specification says) and find more than one byte value.
    data = out.read_bytes()
    idat, pos = b"", 8
    while pos < len(data):
        n = int.from_bytes(data[pos:pos + 4], "big")
        if data[pos + 4:pos + 8] == b"IDAT":
            idat += data[pos + 8:pos + 8 + n]
        pos += 12 + n
    raw = zlib.decompress(idat)
    assert len(set(raw[:200000])) > 10
    bad = loadloom("plot", d, "--out", tmp_path / "p.jpg", check=False)
    assert bad.returncode == 2 and ".svg or .png" in bad.stderr

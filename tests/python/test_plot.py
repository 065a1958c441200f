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


def scaled_estimate(d, path, factor):
    """Writes an estimate that is the truth times `factor`; returns the manifest and the truth."""
    m = json.loads((d / "manifest.json").read_text())
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    est = pd.DataFrame({"time": truth["time"]})
    for a in m["appliances"]:
        est[f"{a['id']}_p_w"] = truth[f"{a['id']}_p_w"].astype(float) * factor
    est.to_parquet(path)
    return m, truth


def test_score_plot_shows_truth_estimate_and_score_bars(simulate, tmp_path):
    d = simulate(path=ROOT / "scenarios" / "apartment-208.toml", extra=("--length", "2d"))
    m, truth = scaled_estimate(d, tmp_path / "e.parquet", 0.9)
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


def texts(root, cls):
    return [t.text for t in root.iter("{http://www.w3.org/2000/svg}text") if t.get("class") == cls]


def test_both_plots_have_local_time_ticks_and_axis_titles_with_units(simulate, tmp_path):
    d = simulate(path=ROOT / "scenarios" / "apartment-208.toml", extra=("--length", "2d"))
    m, truth = scaled_estimate(d, tmp_path / "e.parquet", 1.0)
    loadloom("score", "--truth", d, "--estimate", tmp_path / "e.parquet", "--plot", tmp_path / "s.svg")
    loadloom("plot", d, "--out", tmp_path / "p.svg")
    tz = m["time"]["timezone"]
    for name in ["s.svg", "p.svg"]:
        root = ET.parse(tmp_path / name).getroot()
        titles = texts(root, "axis-title")
        assert "power (W)" in titles, (name, titles)
        assert any(t.startswith("local time") for t in titles), (name, titles)
        # Tick labels are whole local hours ("HH:00") or local midnights ("MM-DD"),
        # placed where pandas puts that local time within the drawn window.
        ticks = texts(root, "tick-label")
        assert len(ticks) >= 4, (name, ticks)
        for t in ticks:
            assert t.endswith(":00") or len(t) == 5 and t[2] == "-", (name, t)
    # In the score plot each panel spans one local day: its first tick is local midnight.
    root = ET.parse(tmp_path / "s.svg").getroot()
    first = root.find("s:g[@class='appliance']", NS)
    labels = [t.text for t in first.iter("{http://www.w3.org/2000/svg}text") if t.get("class") == "tick-label"]
    day = pd.Timestamp(truth["time"].iloc[0]).tz_convert(tz).normalize()
    assert labels[0] in {(day + pd.Timedelta(days=k)).strftime("%m-%d") for k in range(3)}, labels
    assert labels[1:] == [f"{h:02d}:00" for h in range(3, 24, 3)], labels


def test_monthly_energy_bars_match_the_truth(tmp_path):
    # A home with a coarse step, run across a month's end: the bars' energies
    # are the truth's per appliance, summed per local month by pandas.
    text = (ROOT / "scenarios" / "apartment-208.toml").read_text()
    src = tmp_path / "flat.toml"
    src.write_text(
        text.replace('start = "2027-01-04T00:00"', 'start = "2027-01-28T00:00"')
        .replace('step = "1 s"', 'step = "10 s"')
        .replace('interval = "1 s"', 'interval = "10 s"')
    )
    loadloom("run", src, "--out", tmp_path / "out", "--length", "9d", "--seed", "3")
    d = tmp_path / "out" / "flat"
    m = json.loads((d / "manifest.json").read_text())
    out = tmp_path / "m.svg"
    p = loadloom("plot", d, "--monthly", "--out", out, "--size", "900x500")
    assert "wrote" in p.stdout
    root = ET.parse(out).getroot()
    parts = [r for r in root.iter("{http://www.w3.org/2000/svg}rect") if r.get("class") == "part"]
    tz = m["time"]["timezone"]
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    month = truth["time"].dt.tz_convert(tz).dt.strftime("%Y-%m")
    dt_h = m["time"]["interval_s"] / 3600.0
    ids = [a["id"] for a in m["appliances"]]
    want = truth[[f"{i}_p_w" for i in ids]].groupby(month).sum() * dt_h / 1000.0  # kWh
    months = sorted(set(month))
    assert sorted({r.get("data-month") for r in parts}) == months
    assert set(texts(root, "month")) == set(months)
    shown = {r.get("data-appliance") for r in parts}
    for r in parts:
        a, mo, kwh = r.get("data-appliance"), r.get("data-month"), float(r.get("data-kwh"))
        if a in ids:
            assert kwh == pytest.approx(want.loc[mo, f"{a}_p_w"], rel=1e-6, abs=1e-6), (a, mo)
        else:
            # The rest together: every appliance not drawn on its own.
            rest = [i for i in ids if i not in shown]
            assert a == f"{len(rest)} others"
            assert kwh == pytest.approx(sum(want.loc[mo, f"{i}_p_w"] for i in rest), rel=1e-6, abs=1e-6)
    # Each month's bar adds up to the whole home's appliance energy (positive parts).
    for mo in months:
        total = sum(float(r.get("data-kwh")) for r in parts if r.get("data-month") == mo)
        assert total == pytest.approx(want.loc[mo].clip(lower=0).sum(), rel=1e-6)
    assert "energy (kWh)" in texts(root, "axis-title")
    bad = loadloom("plot", d, "--monthly", "--from", "2027-01-04", check=False)
    assert bad.returncode == 2


def test_help_texts_name_both_picture_formats():
    for cmd in (["plot", "--help"], ["score", "--help"]):
        out = loadloom(*cmd).stdout
        assert ".svg" in out and ".png" in out, cmd


def test_monthly_energy_by_end_use_sums_the_appliances_of_each_use(tmp_path):
    # The split-phase demo across a month's end: each end use's part is the
    # sum, by pandas, of the truth of the appliances the manifest gives that use.
    src = tmp_path / "house.toml"
    src.write_text((ROOT / "scenarios" / "split-phase-house.toml").read_text()
                   .replace('step = "1 s"', 'step = "10 s"').replace('interval = "1 s"', 'interval = "1 min"'))
    loadloom("run", src, "--out", tmp_path / "out", "--length", "30d", "--seed", "5")
    d = tmp_path / "out" / "house"
    m = json.loads((d / "manifest.json").read_text())
    use = {a["id"]: a["end_use"] for a in m["appliances"]}
    assert set(use.values()) >= {"heating and cooling", "water heating", "refrigeration", "cooking", "lighting", "ev charging"}
    out = tmp_path / "u.svg"
    p = loadloom("plot", d, "--monthly", "--by", "end-use", "--out", out)
    assert "end uses" in p.stdout
    truth = pq.read_table(d / "truth.parquet").to_pandas()
    month = truth["time"].dt.tz_convert(m["time"]["timezone"]).dt.strftime("%Y-%m")
    kwh = truth[[f"{i}_p_w" for i in use]].groupby(month).sum() * m["time"]["interval_s"] / 3.6e6
    want = kwh.T.groupby([use[c[: -len("_p_w")]] for c in kwh.columns]).sum().T
    parts = [r for r in ET.parse(out).getroot().iter("{http://www.w3.org/2000/svg}rect") if r.get("class") == "part"]
    assert len(parts) == sum((want.loc[mo] > 0).sum() for mo in want.index)
    # `data-kwh` is written with six decimals: equal to within half the last
    # digit, and to a millionth of the value for the float sums' order.
    for r in parts:
        assert float(r.get("data-kwh")) == pytest.approx(want.loc[r.get("data-month"), r.get("data-end-use")], rel=1e-6, abs=5e-7)
    bad = loadloom("plot", d, "--by", "end-use", "--out", out, check=False)
    assert bad.returncode == 2 and "--monthly" in bad.stderr


def test_an_unknown_end_use_is_refused_with_its_place(tmp_path):
    src = tmp_path / "house.toml"
    text = (ROOT / "scenarios" / "split-phase-house.toml").read_text()
    src.write_text(text.replace('end_use = "heating and cooling"', 'end_use = "comfort"', 1))
    r = loadloom("validate", src, check=False)
    assert r.returncode == 2 and "appliance[heat_pump].end_use" in r.stderr and "laundry and dishes" in r.stderr, r.stderr

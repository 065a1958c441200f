"""Waveforms checked with numpy and scipy (README, "Tests and what they are checked against"):
scipy.io.wavfile and soundfile read rate, channels and length; numpy.fft finds the
declared harmonic magnitudes and THD; mean(v·i) over whole cycles equals the
meters' P; i_n = −Σ i_line sample by sample; the two-wattmeter relation holds
in the waveforms too; impossible windows are refused."""
import json

import numpy as np
import pyarrow.parquet as pq
import pytest
import soundfile
from scipy.io import wavfile

from conftest import loadloom

HOME = """
[home]
supply = "{supply}"
voltage = "{volts}"
timezone = "Europe/Vienna"
source = {{ variation = 0, r = "0 ohm", x = "0 ohm", neutral_r = "0 ohm", neutral_x = "0 ohm" }}
[run]
start = "2027-02-01T00:00"
length = "2 min"
[waveform]
rate = "12.8 kHz"
windows = [ {{ start = "2027-02-01T00:00:30", length = "20 s" }} ]
{apps}
"""

PSU = """
[[appliance]]
id = "psu"
wiring = "L1-N"
behaviour = "steady"
load = "electronic"
states = [ { power = "400 W", pf = 0.95, harmonics = [ { order = 3, magnitude = "70 %", phase = "180 deg" }, { order = 5, magnitude = "40 %" }, { order = 7, magnitude = "15 %", phase = "90 deg" } ] } ]
"""

MOTOR_LL = """
[[appliance]]
id = "saw"
wiring = "L2-L3"
behaviour = "steady"
load = "motor"
states = [ { power = "2 kW", pf = 0.6, harmonics = "resistive" } ]

[[appliance]]
id = "boiler"
wiring = "3P"
behaviour = "steady"
states = [ { power = "6 kW" } ]
"""


def wave(simulate, apps, supply="three-phase", volts="230 V", name="w"):
    d = simulate(HOME.format(supply=supply, volts=volts, apps=apps), name=name)
    m = json.loads((d / "manifest.json").read_text())
    rate, data = wavfile.read(d / "waveform-1.wav")
    w = m["waveforms"][0]
    scales = np.array([c["scale"] for c in w["channels"]])
    names = [c["name"] for c in w["channels"]]
    return d, m, rate, data, dict(zip(names, (data * scales).T.astype(float)))


def test_wav_reads_with_the_declared_rate_channels_and_length(simulate):
    d, m, rate, data, ch = wave(simulate, PSU)
    w = m["waveforms"][0]
    assert rate == 12800 and data.dtype == np.float32
    assert data.shape == (20 * 12800, 7) and w["frames"] == data.shape[0]
    assert [c["name"] for c in w["channels"]] == ["l1_v", "l2_v", "l3_v", "l1_i", "l2_i", "l3_i", "n_i"]
    assert np.abs(data).max() < 1.0
    # A second reader (libsndfile through soundfile) agrees on rate, channels and length.
    info = soundfile.info(str(d / "waveform-1.wav"))
    assert (info.samplerate, info.channels, info.frames, info.subtype) == (12800, 7, 20 * 12800, "FLOAT")
    sf_data, _ = soundfile.read(str(d / "waveform-1.wav"), dtype="float32")
    assert (sf_data == data).all()
    # RMS of the voltage is the line-to-neutral voltage.
    v = ch["l1_v"]
    assert np.sqrt(np.mean(v**2)) == pytest.approx(230, rel=0.01)


def test_harmonics_and_thd_match_the_signature(simulate):
    d, m, rate, data, ch = wave(simulate, PSU)
    i = ch["l1_i"][: 12800]  # one second = 50 whole cycles
    spec = np.abs(np.fft.rfft(i)) / len(i) * 2
    f = np.fft.rfftfreq(len(i), 1 / rate)
    at = lambda hz: spec[np.argmin(np.abs(f - hz))]
    h1 = at(50)
    for order, mag in [(3, 0.70), (5, 0.40), (7, 0.15)]:
        assert at(50 * order) / h1 == pytest.approx(mag, abs=0.005), order
    thd = np.sqrt(sum(at(50 * h) ** 2 for h in range(2, 40))) / h1
    assert thd == pytest.approx(np.sqrt(0.7**2 + 0.4**2 + 0.15**2), abs=0.005)
    # Harmonics carry no real power with a sinusoidal voltage: mean v·i over
    # whole seconds equals the meters' P of those seconds within 0.5 %.
    meters = pq.read_table(d / "meters.parquet").to_pandas()
    p = (ch["l1_v"] * ch["l1_i"]).reshape(-1, 12800).mean(axis=1)
    np.testing.assert_allclose(p, meters["l1_p_w"].to_numpy()[30:50], rtol=0.005)


def test_kirchhoff_and_two_wattmeter_in_the_waveforms(simulate):
    d, m, rate, data, ch = wave(simulate, PSU + MOTOR_LL, name="kvl")
    lines = ch["l1_i"] + ch["l2_i"] + ch["l3_i"]
    # i_n = −Σ i_line, sample by sample (float32 samples).
    np.testing.assert_allclose(ch["n_i"], -lines, atol=2e-6 * m["waveforms"][0]["channels"][3]["scale"])
    # Two-wattmeter method (textbook): the saw between L2 and L3 at pf 0.6
    # reads V_LN·I·cos(φ − 30°) on L2 and V_LN·I·cos(φ + 30°) on L3; the
    # balanced boiler adds a third of its 6 kW on each line.
    phi = np.arccos(0.6)
    i = 2000 / 0.6 / (np.sqrt(3) * 230)
    p2 = np.mean(ch["l2_v"] * ch["l2_i"])
    p3 = np.mean(ch["l3_v"] * ch["l3_i"])
    assert p2 == pytest.approx(2000 + 230 * i * np.cos(phi - np.pi / 6), rel=0.01)
    assert p3 == pytest.approx(2000 + 230 * i * np.cos(phi + np.pi / 6), rel=0.01)


def test_inrush_shows_in_the_waveform(simulate):
    apps = """
[[appliance]]
id = "compressor"
wiring = "L1-N"
behaviour = "cycle"
load = "motor"
states = [ { name = "off", power = "0 W", dwell = "5 s" }, { name = "on", power = "800 W", pf = 0.8, dwell = "8 s", inrush = { peak = 6, decay = "0.3 s" } } ]
"""
    d, m, rate, data, ch = wave(simulate, apps, supply="single-phase", name="inrush")
    ev = pq.read_table(d / "events.parquet").to_pandas()
    t0 = ev["start"].min()
    starts = [(s - t0).total_seconds() - 30 for s in ev[ev["state"] == "on"]["start"]]
    # Seconds into the 20 s window, with 50 ms before it and 1.05 s after it
    # inside (a 13 s cycle always has such a start, whatever its phase).
    t_on = next(t for t in starts if 0.05 <= t <= 18.5)
    k = int(round(t_on * rate))
    first = np.abs(ch["l1_i"][k : k + 640]).max()  # the first 50 ms after switch-on
    later = np.abs(ch["l1_i"][k + 12800 : k + 12800 + 640]).max()  # 1 s later (τ = 0.3 s)
    # Peak 6: the first cycles carry about 5 to 6 times the steady current.
    assert first > 4 * later
    assert np.abs(ch["l1_i"][k - 640 : k]).max() < 1e-3 * later, "nothing before switch-on"


@pytest.mark.parametrize("window,place", [('{ start = "2027-02-01T00:01:50", length = "20 s" }', "waveform.windows[0]"), ('{ start = "2027-01-31T23:59:00", length = "5 s" }', "outside the run")])
def test_windows_outside_the_run_exit_2(tmp_path, window, place):
    text = HOME.format(supply="single-phase", volts="230 V", apps=PSU).replace('windows = [ { start = "2027-02-01T00:00:30", length = "20 s" } ]', f"windows = [ {window} ]")
    f = tmp_path / "bad.toml"
    f.write_text(text)
    p = loadloom("run", f, "--out", tmp_path / "out", check=False)
    assert p.returncode == 2 and place in p.stderr and "bad.toml:" in p.stderr, p.stderr


def test_command_line_windows(tmp_path):
    text = HOME.format(supply="single-phase", volts="230 V", apps=PSU).replace('windows = [ { start = "2027-02-01T00:00:30", length = "20 s" } ]', "")
    f = tmp_path / "cli.toml"
    f.write_text(text)
    loadloom("run", f, "--out", tmp_path / "out", "--waveform", "2027-02-01T00:00:10/5s", "--waveform-rate", "6.4kHz")
    rate, data = wavfile.read(tmp_path / "out" / "cli" / "waveform-1.wav")
    assert rate == 6400 and data.shape == (5 * 6400, 3)
    p = loadloom("run", f, "--out", tmp_path / "out2", "--waveform", "2027-02-01T00:05:00/5s", check=False)
    assert p.returncode == 2 and "--waveform" in p.stderr and "outside the run" in p.stderr
    p = loadloom("run", f, "--out", tmp_path / "out3", "--waveform", "2027-02-01T00:00:10/5s", "--waveform-rate", "700Hz", check=False)
    assert p.returncode == 2 and "20 per cycle" in p.stderr

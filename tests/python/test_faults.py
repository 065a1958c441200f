"""Meter faults: each shows its signature in the meters and its record in the
manifest (compared with a clean run of the same home and seed), and
impossible fault settings are refused with the place named."""
import json

import numpy as np
import pyarrow.parquet as pq
import pytest
from scipy import stats

from conftest import loadloom

HOME = """
[home]
supply = "{supply}"
timezone = "America/Toronto"
source = {{ variation = 0 }}
[run]
start = "2027-05-03T00:00"
length = "{length}"
[meter]
interval = "10 s"
{noise}
[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "cycle"
states = [ {{ name = "off", power = "0 W", dwell = "9 min" }}, {{ name = "on", power = "3 kW", dwell = "6 min" }} ]

[[appliance]]
id = "pump"
wiring = "L1-N"
behaviour = "cycle"
load = "motor"
states = [ {{ name = "off", power = "5 W", dwell = "4 min" }}, {{ name = "on", power = "700 W", pf = 0.7, dwell = "3 min" }} ]

[[appliance]]
id = "tv"
wiring = "L2-N"
behaviour = "steady"
load = "electronic"
states = [ {{ power = "120 W", pf = 0.9 }} ]
"""


def run(simulate, faults="", supply="split-phase", length="1 d", noise="", name="home"):
    d = simulate(HOME.format(supply=supply, length=length, noise=noise) + faults, name=name)
    m = json.loads((d / "manifest.json").read_text())
    return m, pq.read_table(d / "meters.parquet").to_pandas(), pq.read_table(d / "truth.parquet").to_pandas()


@pytest.fixture
def clean(simulate):
    return run(simulate, name="clean")


def test_reversed_ct(simulate, clean):
    _, mc, truth = clean
    m, mf, _ = run(simulate, '[faults]\nct = [ { conductor = "L2", reversed = true } ]\n', name="rev")
    assert (mf["l2_p_w"] < 0).mean() > 0.9 and (truth["tv_p_w"] > 0).all()
    np.testing.assert_allclose(mf["l2_p_w"], -mc["l2_p_w"], rtol=1e-6, atol=1e-3)
    np.testing.assert_allclose(mf["l1_p_w"], mc["l1_p_w"], rtol=1e-6)
    assert m["faults"] == [{"kind": "ct", "conductor": "l2", "gain": 0.0, "phase_deg": 0.0, "reversed": True, "clamped_on": None}]


def test_swapped_channels_exchange_columns(simulate, clean):
    _, mc, _ = clean
    m, mf, _ = run(simulate, '[faults]\nswap = ["L2", "L1"]\n', noise='noise = { relative = "0.5 %", floor = "2 W" }', name="swap")
    _, mcn, _ = run(simulate, noise='noise = { relative = "0.5 %", floor = "2 W" }', name="clean_noisy")
    for q in ["p_w", "q_var", "v_v", "i_a"]:
        assert (mf[f"l1_{q}"].values == mcn[f"l2_{q}"].values).all() and (mf[f"l2_{q}"].values == mcn[f"l1_{q}"].values).all(), q
    assert m["faults"][0]["kind"] == "swap" and m["faults"][0]["conductors"] == ["l1", "l2"]


def test_ct_gain_and_phase_error(simulate, clean):
    _, mc, _ = clean
    m, mf, _ = run(simulate, '[faults]\nct = [ { conductor = "L1", gain = "2 %", phase = "3 deg" } ]\n', name="gain")
    # A CT reading I·(1 + g)·e^{jθ}: S' = V·conj(I')= (1 + g)·S·e^{−jθ}, so
    # P' = (1 + g)(P cos θ + Q sin θ), Q' = (1 + g)(Q cos θ − P sin θ) (phasor algebra, textbook).
    th = np.radians(3)
    p, q = mc["l1_p_w"].astype(float), mc["l1_q_var"].astype(float)
    np.testing.assert_allclose(mf["l1_p_w"], 1.02 * (p * np.cos(th) + q * np.sin(th)), rtol=1e-5, atol=1e-2)
    np.testing.assert_allclose(mf["l1_q_var"], 1.02 * (q * np.cos(th) - p * np.sin(th)), rtol=1e-5, atol=1e-2)
    np.testing.assert_allclose(mf["l1_i_a"], 1.02 * mc["l1_i_a"], rtol=1e-5)
    np.testing.assert_allclose(mf["l1_v_v"], mc["l1_v_v"], rtol=1e-6)
    assert m["faults"][0]["gain"] == pytest.approx(0.02) and m["faults"][0]["phase_deg"] == 3


def test_ct_on_the_wrong_conductor(simulate, clean):
    _, mc, _ = clean
    m, mf, _ = run(simulate, '[faults]\nct = [ { conductor = "L1", on = "L2" } ]\n', name="misplaced")
    # Channel L1 multiplies L1's voltage by L2's current: on split-phase
    # (legs 180° apart) that reads about minus L2's power.
    ratio = mf["l1_p_w"].astype(float) / mc["l2_p_w"].astype(float)
    assert np.median(ratio) == pytest.approx(-1, abs=0.02)
    assert m["faults"][0]["clamped_on"] == "l2"


def test_a_line_without_ct(simulate, clean):
    m, mf, _ = run(simulate, '[faults]\nno_ct = "L2"\n', name="noct")
    for q in ["p_w", "q_var", "i_a"]:
        assert mf[f"l2_{q}"].isna().all()
    assert mf["l2_v_v"].notna().all()
    np.testing.assert_allclose(mf["total_p_w"], mf["l1_p_w"], rtol=1e-6)
    assert m["faults"][0]["kind"] == "no_ct"
    # The heater on L1-L2 is seen at half its power on L1 only.
    heater_on = clean[2]["heater_p_w"] > 2000
    assert (mf.loc[heater_on, "l1_p_w"] > 1400).all()


@pytest.mark.parametrize("form", ["null", "missing"])
def test_dropouts_at_the_declared_rate(simulate, form):
    faults = f'[faults]\ndropouts = {{ rate = "5 %", length = "10 s", as = "{form}" }}\n'
    m, mf, truth = run(simulate, faults, length="7 d", name=f"drop_{form}")
    rec = m["faults"][0]
    n = len(truth)
    if form == "null":
        lost = int(mf["l1_p_w"].isna().sum())
        # A lost interval loses every reading, and only those intervals are null.
        assert len(mf) == n and lost == int(mf.drop(columns="time").isna().all(axis=1).sum())
    else:
        lost = n - len(mf)
        assert mf["l1_p_w"].notna().all()
        assert m["files"]["meters.parquet"]["rows"] == len(mf)
    assert rec["rows_lost"] == lost and rec["form"] == form
    # Binomial tolerance on the share of intervals lost (scipy.stats.binomtest).
    assert stats.binomtest(lost, n, 0.05).pvalue > 1e-3, lost / n
    # And gaps are where the manifest says.
    first = rec["intervals"][0]
    if form == "null":
        assert mf["l1_p_w"].iloc[first["first_row"]: first["first_row"] + first["rows"]].isna().all()


def test_clock_offset_and_drift_shift_the_meters_time_only(simulate):
    m, mf, truth = run(simulate, '[faults]\nclock = { offset = "2.5 s", drift = "50 ppm" }\n', name="clock")
    d = (mf["time"] - truth["time"]).dt.total_seconds().to_numpy() * 1000
    elapsed = (truth["time"] - truth["time"].iloc[0]).dt.total_seconds().to_numpy()
    np.testing.assert_allclose(d, 2500 + 50e-6 * elapsed * 1000, atol=0.6)
    assert m["faults"][0]["kind"] == "clock"


def test_energy_register_and_quantisation(simulate):
    m, mf, _ = run(simulate, '[faults]\nregister = true\n', noise='resolution = "5 W"', name="register")
    assert (np.mod(mf["l1_p_w"].astype(float), 5) == 0).all()
    e = mf["l1_energy_wh"].to_numpy()
    assert (np.diff(e) >= -1e-9).all(), "only loads on L1: the register never runs back"
    assert any(c["name"] == "l1_energy_wh" and c["unit"] == "Wh" for c in m["columns"]["meters"])
    # Each interval adds its mean power × 10 s (before noise and quantisation).
    assert e[-1] == pytest.approx(m["summary"]["conductor_energy_kwh"]["l1"] * 1000, rel=1e-6)


BAD = [
    ('[faults]\ndropouts = { rate = "-1 %" }\n', "faults.dropouts.rate"),
    ('[faults]\nct = [ { conductor = "L3", gain = "1 %" } ]\n', "faults.ct[0].conductor"),
    ('[faults]\nswap = ["L1", "L1"]\n', "faults.swap"),
    ('[faults]\nct = [ { conductor = "L1", phase = "45 deg" } ]\n', "faults.ct[0].phase"),
    ('[faults]\nclock = { offset = "3 d" }\n', "faults.clock"),
    ('[faults]\nno_ct = "N"\n', "faults.no_ct"),
    ('[faults]\nmystery = 1\n', "faults.mystery"),
]


@pytest.mark.parametrize("faults,place", BAD, ids=[b[1] for b in BAD])
def test_impossible_faults_exit_2(tmp_path, faults, place):
    f = tmp_path / "bad.toml"
    f.write_text(HOME.format(supply="split-phase", length="1 d", noise="") + faults)
    p = loadloom("run", f, "--out", tmp_path / "out", check=False)
    assert p.returncode == 2 and place in p.stderr and "bad.toml:" in p.stderr, p.stderr
    assert not (tmp_path / "out").exists() or not any((tmp_path / "out").iterdir())

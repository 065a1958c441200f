"""The meter's production channel (`[meter] production = true`): the PV
inverter's output as its own measured column, `production_p_w`, checked
against the truth's `pv_p_w` the simulator writes beside it."""
import numpy as np
import pandas as pd
import pyarrow.parquet as pq
from scipy import stats

from conftest import loadloom

HOME = """
[home]
supply = "split-phase"
timezone = "America/Halifax"
latitude = 44.65
longitude = -63.57
sky = 0.6
[run]
start = "2027-06-14T00:00"
length = "3 d"
step = "10 s"
seed = 4
[meter]
interval = "1 min"
production = true
{noise}
[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "steady"
states = [ {{ power = "1.2 kW" }} ]

[pv]
dc = "6 kW"
inverter = "5 kW"
"""


def tables(simulate, noise, name):
    d = simulate(HOME.format(noise=noise), name=name)
    return (pq.read_table(d / "meters.parquet").to_pandas(),
            pq.read_table(d / "truth.parquet").to_pandas())


def test_a_noiseless_production_channel_reads_the_pvs_output(simulate):
    m, t = tables(simulate, "", "clean")
    assert (m["time"] == t["time"]).all()
    # Positive while producing, where the truth's pv_p_w is negative.
    assert np.allclose(m["production_p_w"], -t["pv_p_w"], rtol=1e-6, atol=1e-3)
    assert m["production_p_w"].max() > 1000 and m["production_p_w"].min() >= -1e-3
    # The channel is its own: the lines still see the export.
    assert (m["total_p_w"] < 0).any()


def test_production_noise_follows_the_meters_noise_model(simulate):
    # Noise of each reading: Gaussian with sd = sqrt((rel·x)² + floor²)
    # (the README's meter model); the standardised residuals against the
    # truth must be N(0, 1): mean within 0.05, sd within 5 %, and a
    # Kolmogorov–Smirnov test (scipy.stats) not rejecting at 1 %.
    rel, floor = 0.004, 2.0
    m, t = tables(simulate, f'noise = {{ relative = "{rel * 100} %", floor = "{floor} W" }}', "noisy")
    x = -t["pv_p_w"].to_numpy(float)
    z = (m["production_p_w"].to_numpy(float) - x) / np.sqrt((rel * x) ** 2 + floor ** 2)
    assert abs(z.mean()) < 0.05 and abs(z.std() - 1) < 0.05, (z.mean(), z.std())
    assert stats.kstest(z, "norm").pvalue > 0.01


def test_a_production_channel_needs_pv(tmp_path):
    p = tmp_path / "home.toml"
    text = HOME.format(noise="")
    p.write_text(text[: text.index("[pv]")])
    r = loadloom("validate", p, check=False)
    assert r.returncode == 2
    line = text.splitlines().index("production = true") + 1
    assert f"home.toml:{line}:" in r.stderr and "no [pv]" in r.stderr, r.stderr

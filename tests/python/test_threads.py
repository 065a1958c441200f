"""The bytes of a dataset do not depend on how many threads encode it
(LOADLOOM_THREADS): two runs with 1 and 2 threads (and 3, more threads than
the machine may have) must give files with the same SHA-256 (FIPS 180-4,
Python's hashlib), over several row groups, nulls and dropped rows."""
import hashlib

import pytest

from conftest import loadloom
from test_readers import HOME


def digests(d):
    return {f.name: hashlib.sha256(f.read_bytes()).hexdigest() for f in sorted(d.iterdir()) if f.is_file()}


@pytest.mark.parametrize("form", ["null", "missing"])
def test_same_bytes_whatever_the_thread_count(tmp_path, monkeypatch, form):
    scenario = tmp_path / "home.toml"
    scenario.write_text(HOME.format(form=form))
    got = {}
    for threads in ("1", "2", "3"):
        monkeypatch.setenv("LOADLOOM_THREADS", threads)
        loadloom("run", scenario, "--out", tmp_path / threads, "--quiet")
        got[threads] = digests(tmp_path / threads / "home")
    assert {"meters.parquet", "truth.parquet", "events.parquet", "manifest.json"} <= set(got["1"])
    assert got["1"] == got["2"] == got["3"]


def test_a_bad_thread_count_is_refused(tmp_path, monkeypatch):
    scenario = tmp_path / "home.toml"
    scenario.write_text(HOME.format(form="null"))
    for bad in ("0", "two", "-1"):
        monkeypatch.setenv("LOADLOOM_THREADS", bad)
        p = loadloom("run", scenario, "--out", tmp_path / "out", check=False)
        assert p.returncode == 2 and "LOADLOOM_THREADS" in p.stderr, p.stderr
        assert not (tmp_path / "out" / "home").exists(), "nothing is left behind"

"""Shared helpers for the cross-checks: run the release binary on a scenario
text or file into a temporary folder and return the dataset folder."""
import os
import pathlib
import subprocess

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[2]
BIN = os.environ.get("LOADLOOM_BIN", str(ROOT / "target" / "release" / "loadloom"))


def loadloom(*args, check=True):
    p = subprocess.run([BIN, *map(str, args)], capture_output=True, text=True)
    if check and p.returncode != 0:
        raise AssertionError(f"loadloom {' '.join(map(str, args))} failed ({p.returncode}):\n{p.stderr}")
    return p


@pytest.fixture
def simulate(tmp_path):
    def run(text=None, path=None, name="home", extra=()):
        if path is None:
            path = tmp_path / f"{name}.toml"
            path.write_text(text)
        out = tmp_path / "out"
        loadloom("run", path, "--out", out, *extra)
        return out / pathlib.Path(path).stem

    return run

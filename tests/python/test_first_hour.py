"""The README's "Your first hour" walk-through, run block by block in a
throw-away folder with the release binary and the test environment's
python3 on the PATH: what the README says is what works."""
import os
import pathlib
import re
import subprocess
import sys

from conftest import BIN, ROOT


def blocks():
    text = (ROOT / "README.md").read_text()
    part = text.split("<!-- first-hour:begin -->")[1].split("<!-- first-hour:end -->")[0]
    return re.findall(r"```(sh|python)\n(.*?)```", part, re.S)


def test_the_first_hour_runs_as_written(tmp_path):
    env = dict(os.environ)
    env["PATH"] = f"{pathlib.Path(BIN).parent}{os.pathsep}{pathlib.Path(sys.executable).parent}{os.pathsep}{env['PATH']}"
    found = blocks()
    kinds = [k for k, _ in found]
    assert kinds.count("sh") >= 4 and "python" in kinds
    cwd = tmp_path
    for k, (kind, code) in enumerate(found):
        if kind == "sh":
            # Blocks share one working folder; `cd` in a block carries over.
            script = f"set -euo pipefail\n{code}\npwd > {tmp_path}/.cwd\n"
            p = subprocess.run(["bash", "-c", script], cwd=cwd, env=env, capture_output=True, text=True)
            cwd = pathlib.Path((tmp_path / ".cwd").read_text().strip()) if p.returncode == 0 else cwd
        else:
            p = subprocess.run([sys.executable, "-c", code], cwd=cwd, env=env, capture_output=True, text=True)
        assert p.returncode == 0, f"block {k} ({kind}) failed:\n{code}\n--- stdout\n{p.stdout}\n--- stderr\n{p.stderr}"
    assert (cwd / "cottage.svg").exists() and (cwd / "out" / "cottage-roundtrip" / "solver" / "estimate.parquet").exists()

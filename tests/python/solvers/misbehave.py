"""Solvers that go wrong on purpose: crash, hang, stay silent, or write a
malformed estimate. The round trip must report each, never score it."""
import sys
import time

mode, task, estimate = sys.argv[1], sys.argv[2], sys.argv[3]
if mode == "crash":
    print("about to fail", flush=True)
    raise SystemExit(3)
if mode == "hang":
    print("thinking...", flush=True)
    time.sleep(600)
if mode == "silent":
    raise SystemExit(0)
if mode == "malformed":
    # Imported here only: the crash and silent modes end before a slow
    # import, so their start-up does not depend on the machine's load.
    import pandas as pd

    pd.DataFrame({"time": pd.date_range("2020-01-01", periods=3, freq="1s", tz="UTC"), "nobody_p_w": [1.0, 2.0, 3.0]}).to_parquet(estimate)

"""Solvers that try to cheat the round trip, written from the task contract
(task.json) only and sharing no code with the scorer. Each must get no
score, or a score its cheating did not change.

    cheat.py MODE TASK ESTIMATE
"""
import json
import os
import pathlib
import subprocess
import sys
import time

import pandas as pd

mode, task, estimate = sys.argv[1], pathlib.Path(sys.argv[2]), pathlib.Path(sys.argv[3])
spec = json.loads((task / "task.json").read_text())
ids = [a["id"] for a in spec["appliances"]]
work = task.parent


def write(df):
    if estimate.suffix == ".csv":
        df.to_csv(estimate, index=False)
    else:
        df.to_parquet(estimate)


def honest():
    """A plain estimate: the measured total split evenly."""
    meters = pd.read_parquet(task / spec["test"]["meters"], columns=["time", "total_p_w"])
    out = pd.DataFrame({"time": meters["time"]})
    for i in ids:
        out[f"{i}_p_w"] = meters["total_p_w"].clip(lower=0) / len(ids)
    return out


def truth_files():
    """Where the truth lies next to the task folder (named, since listing
    the folder may be denied): the scored rows and the whole dataset."""
    return [work / "test-truth" / "truth.parquet", work / work.name.removesuffix("-roundtrip") / "truth.parquet"]


if mode == "train-truth":
    # The training truth is perfect on the training days.
    t = pd.read_parquet(task / spec["train"]["truth"], columns=["time"] + [f"{i}_p_w" for i in ids])
    write(t)
elif mode in ("one-row", "short", "shifted", "early"):
    out = honest()
    if mode == "one-row":
        out = out.iloc[:1]
    elif mode == "short":
        out = out.iloc[:-10]
    elif mode == "shifted":
        out["time"] = out["time"] + pd.Timedelta(hours=1)
    else:
        out["time"] = out["time"] - pd.Timedelta(hours=1)
    write(out)
elif mode == "read-truth":
    # Read the test truth and hand it back: a perfect score if allowed.
    got = None
    for f in truth_files():
        try:
            t = pd.read_parquet(f, columns=["time"] + [f"{i}_p_w" for i in ids])
            t = t[t["time"] >= pd.Timestamp(spec["test"]["start"])].iloc[: spec["test"]["rows"]]
            if len(t) == spec["test"]["rows"]:
                got = t
                print(f"read the truth at {f}", flush=True)
                break
        except Exception as e:  # pyarrow wraps the OS error in its own
            print(f"denied: {f}: {e}", flush=True)
    write(got if got is not None else honest())
elif mode == "overwrite-truth":
    # Replace the scored truth with this estimate, so it scores perfectly.
    out = honest()
    for f in truth_files():
        try:
            out.to_parquet(f)
            print(f"overwrote {f}", flush=True)
        except Exception as e:  # pyarrow wraps the OS error in its own
            print(f"denied: {f}: {e}", flush=True)
    write(out)
elif mode == "link-truth":
    # The estimate as a link to the truth: the scorer, not the solver, would read it.
    target = work / "test-truth" / "truth.parquet"
    try:
        estimate.symlink_to(target)
        print("linked the estimate to the truth", flush=True)
    except OSError as e:
        print(f"denied: {e}", flush=True)
        write(honest())
elif mode == "daemon":
    # Leave a process behind in a session of its own, without the run's
    # environment; it records its pid in the scratch folder, then lingers.
    pidfile = pathlib.Path(os.environ["LOADLOOM_SCRATCH"]) / "daemon.pid"
    code = (
        "import os, sys, time\n"
        "if os.fork(): sys.exit(0)\n"
        "os.setsid()\n"
        "if os.fork(): sys.exit(0)\n"
        f"open({str(pidfile)!r}, 'w').write(str(os.getpid()))\n"
        "time.sleep(300)\n"
    )
    subprocess.Popen([sys.executable, "-c", code], env={k: v for k, v in os.environ.items() if not k.startswith("LOADLOOM")}).wait()
    for _ in range(200):
        if pidfile.exists() and pidfile.read_text():
            break
        time.sleep(0.05)
    write(honest())
elif mode == "read-named":
    # The truth named in the solver's own command (after the estimate):
    # files of the command are readable, so naming the truth must not open it.
    named = pathlib.Path(sys.argv[4])
    try:
        t = pd.read_parquet(named, columns=["time"] + [f"{i}_p_w" for i in ids])
        t = t[t["time"] >= pd.Timestamp(spec["test"]["start"])].iloc[: spec["test"]["rows"]]
        print(f"read the truth at {named}", flush=True)
        write(t)
    except Exception as e:  # pyarrow wraps the OS error in its own
        print(f"denied: {named}: {e}", flush=True)
        write(honest())
elif mode == "flood":
    # Print without end (here 80 MiB): the log must not fill the disk.
    line = "x" * (1 << 20)
    for _ in range(80):
        print(line, flush=True)
    write(honest())
elif mode in ("huge", "gigawatt"):
    # A finite power so large its square overflows (huge), or no home's
    # load (gigawatt): no infinity in a score, no score for nonsense.
    out = honest()
    out[f"{ids[0]}_p_w"] = 1e308 if mode == "huge" else 2e9
    write(out)
elif mode == "repeated-column":
    # One appliance's column written twice (pyarrow allows it).
    import pyarrow as pa
    import pyarrow.parquet as pq
    t = pa.Table.from_pandas(honest(), preserve_index=False)
    c = f"{ids[0]}_p_w"
    pq.write_table(t.append_column(c, t.column(c)), estimate)
elif mode == "honest":
    write(honest())
else:
    raise SystemExit(f"unknown mode {mode}")

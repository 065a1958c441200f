"""A tiny external solver in Python, written only from the task contract
(task.json): each appliance gets the share of the measured total that it had
of the total energy in training. Used by the round-trip tests."""
import json
import pathlib
import sys

import pandas as pd

task = pathlib.Path(sys.argv[1])
estimate = pathlib.Path(sys.argv[2])
spec = json.loads((task / "task.json").read_text())
ids = [a["id"] for a in spec["appliances"]]
truth = pd.read_parquet(task / spec["train"]["truth"], columns=[f"{i}_p_w" for i in ids])
share = truth.sum() / truth.sum().sum()
meters = pd.read_parquet(task / spec["test"]["meters"], columns=["time", "total_p_w"])
out = pd.DataFrame({"time": meters["time"]})
for i in ids:
    out[f"{i}_p_w"] = (meters["total_p_w"].clip(lower=0) * share[f"{i}_p_w"]).astype("float64")
if estimate.suffix == ".csv":
    out["time"] = out["time"].map(lambda t: t.isoformat())
    out.to_csv(estimate, index=False)
else:
    out.to_parquet(estimate)
print(f"wrote {len(out)} rows for {len(ids)} appliances")

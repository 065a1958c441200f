"""The outsider's validation of the wiring audit (audit_outside.py): homes
the audit was not built on, declarations as installers write them, every
mistake kind, at 1 s, 10 s and 1 min with real power only.

CI runs a small subset (48 cases of the development seed 7, a few minutes
on 2 cores); `AUDIT_OUTSIDE_FULL=1` runs the README's set instead (300
cases of seed 1). Seed 23 is held out: it is run only to report, never to
tune the audit (README, "Validation on installations it has never seen").

    AUDIT_OUTSIDE_FULL=1 .venv/bin/python -m pytest -q tests/python/test_audit_outside.py -s

The floors are below what the audit reaches on these cases, less a margin,
so a regression shows; the targets (no finding on a clean home, precision
95 %, recall 90 %) are the project's, reported in the README."""
import os
import tempfile

import audit_outside as ao


def settings():
    if os.environ.get("AUDIT_OUTSIDE_FULL"):
        return 300, 1
    return int(os.environ.get("AUDIT_OUTSIDE_CI_CASES", 48)), 7


def test_the_audit_on_installations_it_has_never_seen():
    n, seed = settings()
    with tempfile.TemporaryDirectory() as tmp:
        res = ao.run(n, seed, 2, tmp)
    per, totals, reasons, false = ao.score(res)
    print(ao.table(per, totals, reasons, false))
    assert totals["errors"] == 0, [r.get("error") for r in res if "error" in r]
    s = ao.summary(per, totals)
    assert s["decided"] >= 20, s
    assert s["recall"] >= FLOORS["recall"], s
    assert s["precision"] >= FLOORS["precision"], s
    assert s["clean with a finding"] <= FLOORS["clean with a finding"] * max(s["clean"], 1), s
    # The common metering kinds are found whenever the data shows them.
    for k in ["reversed-ct", "no-ct"]:
        c = per[k]
        assert c["found"] >= c["injected"] - c["not exercised"] - c["undecidable"] - 1, (k, c)


FLOORS = {"recall": 0.60, "precision": 0.80, "clean with a finding": 0.10}

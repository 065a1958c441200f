"""A small seeded run of the outsider's validation (audit_outside.py): homes
the audit was not built on, declarations as installers write them, every
mistake kind, at 1 s, 10 s and 1 min with real power only. The full run
(300 cases, the README's table) is

    .venv/bin/python tests/python/audit_outside.py --cases 300 --seed 1

The floors below are what the audit reaches on this subset today, less a
margin; the targets of the project (no finding on a clean home, precision
95 %, recall 90 %) are not all met yet (README, "Wiring audit")."""
import os
import tempfile

import audit_outside as ao


def test_the_audit_on_installations_it_has_never_seen():
    n = int(os.environ.get("AUDIT_OUTSIDE_CI_CASES", 36))
    with tempfile.TemporaryDirectory() as tmp:
        res = ao.run(n, 7, 2, tmp)
    per, totals, reasons, false = ao.score(res)
    print(ao.table(per, totals, reasons, false))
    assert totals["errors"] == 0, [r.get("error") for r in res if "error" in r]
    found = sum(c["found"] for c in per.values())
    decided = sum(c["injected"] - c["not exercised"] - c["undecidable"] for c in per.values())
    correct = sum(c["correct"] for c in per.values())
    made = correct + sum(c["false"] for c in per.values())
    assert decided >= 20 and found / decided >= 0.70, (found, decided)
    assert correct / made >= 0.30, (correct, made)
    # Every metering kind the audit names is exercised by the full run; here
    # at least the common ones are found when injected.
    for k in ["reversed-ct", "no-ct"]:
        c = per[k]
        assert c["found"] >= c["injected"] - c["not exercised"] - 1, (k, c)

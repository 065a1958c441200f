"""The outsider's validation of the wiring audit (audit_outside.py): homes
the audit was not built on, declarations as installers write them, every
mistake kind, at 1 s, 10 s and 1 min with real power only.

CI runs a small subset (48 cases of the development seed 7, a few minutes
on 2 cores); `AUDIT_OUTSIDE_FULL=1` runs the README's set instead (300
cases of seed 1). Seeds other than 1, 2, 3, 4, 5 and 7 are held out: each is
run only to report, never to tune the audit (README, "Validation on
installations it has never seen", lists those seen).

    AUDIT_OUTSIDE_FULL=1 .venv/bin/python -m pytest -q tests/python/test_audit_outside.py -s

The floors are below what the audit reaches on these cases, less a margin,
and not above what it reaches on a held-out seed, so a regression shows;
the targets (no finding on a clean home, precision 95 %, recall 90 %) are
the project's, reported in the README."""
import os
import tempfile

import pyarrow as pa

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
    # The common metering kinds are found whenever the data shows them, in
    # homes without generation (where export makes power negative, the
    # metering checks are weaker: README, "where it stands").
    per_bare = ao.score([r for r in res if "[pv]" not in ao.homes()[r["home"]]])[0]
    for k in ["reversed-ct", "no-ct"]:
        c = per_bare[k]
        assert c["found"] >= c["injected"] - c["not exercised"] - c["undecidable"] - 1, (k, c)


def truth_of(**cols):
    """A truth table as the simulator writes one, with the columns given."""
    return pa.table({k: pa.array(v) for k, v in cols.items()})


def test_the_generator_counts_apart_what_the_data_cannot_show():
    # A kettle that ran three times cannot show a move (six changes needed).
    case = {"home": "cottage", "style": "complete", "mistakes": []}
    moved = {"kind": "wrong-line", "subject": "kettle", "truth": "L2-N", "declared": "L1-N"}
    few = truth_of(kettle_state=["off", "on", "off", "on"], kettle_l2_p_w=[0.0, 1500.0, 0.0, 1500.0])
    assert ao.shows(moved, case, few) == "switched 3 times (under 6)"
    many = truth_of(kettle_state=["off", "on"] * 3 + ["off"], kettle_l2_p_w=[0.0, 1500.0] * 3 + [0.0])
    assert ao.shows(moved, case, many) is None
    # ... nor when its real line has no CT.
    no_ct = {"kind": "no-ct", "subject": {"l2"}, "lines": ["L2"]}
    assert ao.shows(moved, {**case, "mistakes": [moved, no_ct]}, many) == "on L2, which no CT reads"
    # ... nor when the CT of its real line sits on another conductor.
    away = {"kind": "ct-on-other-conductor", "subject": {"l2"}, "lines": ["L2", "L1"]}
    assert ao.shows(moved, {**case, "mistakes": [moved, away]}, many) == "on L2, which no CT reads"
    onto = {"kind": "ct-on-other-conductor", "subject": {"l1"}, "lines": ["L1", "L2"]}
    assert ao.shows(moved, {**case, "mistakes": [moved, onto]}, many) is None
    # A CT moved onto a conductor that never carries 300 W reads as a missing CT.
    idle = {"kind": "ct-on-other-conductor", "subject": {"l1"}, "lines": ["L1", "L2"]}
    t = truth_of(a_l1_p_w=[0.0, 900.0], b_l2_p_w=[0.0, 120.0])
    assert ao.shows(idle, case, t) == "L2 carries under 300 W"
    assert ao.shows(idle, case, truth_of(a_l1_p_w=[0.0, 900.0], b_l2_p_w=[0.0, 400.0])) is None
    # A short entry moved with an undeclared look-alike where it is declared:
    # the data reads the same as the declaration, so neither counts.
    extra = {"kind": "undeclared-load", "subject": "extra_load", "wiring": "L1-N", "power_w": 1480.0}
    short = {"home": "cottage", "style": "short", "mistakes": [moved, extra]}
    assert ao.shows(moved, short, many) == "an undeclared load of its size is on the line it is declared on"
    loads = truth_of(extra_load_state=["off", "on"] * 3 + ["off"])
    assert ao.shows(extra, short, loads) == "a misplaced one-power entry of its size is declared on its line"
    assert ao.shows(moved, {**short, "style": "complete"}, many) is None


def test_possible_findings_are_tallied_as_findings_would_be_judged():
    # Judged as findings are (common practice in detection tasks, no
    # source). A cottage at 1 min with a 1.5 kW load nobody declared on
    # L2-N: a possible load of its size there is real, one on L1-N is not,
    # and a second one naming the same load is no more right.
    extra = {"kind": "undeclared-load", "subject": "extra_load", "wiring": "L2-N", "power_w": 1500.0}
    case = {"i": 0, "home": "cottage", "interval": "1min-p", "style": "complete",
            "mistakes": [extra], "exercised": [True], "unlisted": []}

    def load(wiring, why):
        return {"kind": "undeclared-load", "subject": f"1480 W on {wiring}", "confidence": 1.0,
                "possible_because": why, "evidence": {"wiring": wiring, "p_w": 1480.0}}
    why = "at 60 s per row, loads that switch within one row make one step together"
    case["report"] = {"findings": [], "appliances": [],
                      "possible": [load("L2-N", why), load("L1-N", why), load("L1-N", "it is smaller than kettle")]}
    tally = ao.possible_tally([case, {"error": "refused"}])
    assert tally[("undeclared-load", "1min-p", "at N s per")] == [1, 2]
    again = {**case, "report": {**case["report"], "possible": [load("L2-N", why), load("L2-N", why)]}}
    assert ao.possible_tally([again])[("undeclared-load", "1min-p", "at N s per")] == [1, 2]
    found = {**case, "report": {**case["report"], "findings": [load("L2-N", None)], "possible": [load("L2-N", why)]}}
    assert ao.possible_tally([found])[("undeclared-load", "1min-p", "at N s per")] == [0, 1]
    assert tally[("undeclared-load", "1min-p", "it is smaller than")] == [0, 1]
    assert ao.possible_lines(tally, least=2) == [
        '  1 of 2 real: undeclared-load, 1min-p, "at N s per …"', "  0 of 1 real: the other groups"]


FLOORS = {"recall": 0.55, "precision": 0.88, "clean with a finding": 0.0}

"""The wiring audit on declarations as installers write them: a template's
rated voltage on another connection, short entries, partial declarations,
meters with real power only, an undeclared load of a declared appliance's
size, channels exchanged against several appliances moved. Each case is
simulated (the truth is what the scenario says) and audited with the
release binary."""

import pyarrow.parquet as pq
import pytest

from audit_home import SHORT_ENTRIES, audit, four_load_home, report
from conftest import loadloom

HEADER = """
[home]
supply = "split-phase"
timezone = "America/Chicago"
service = "100 A"
"""

SHORT = HEADER + "\n" + SHORT_ENTRIES


def home(interval="1 s", extra=""):
    return four_load_home(service="100 A", start="2027-01-04T00:00", length="2 d", seed=5,
                          interval=interval, kettle_starts=5, kettle_hours="6-22",
                          toaster_off="50 min", toaster_on="4 min", extra=extra)


def kinds(r):
    return sorted((f["kind"], f["subject"]) for f in r["findings"])


def test_a_rated_template_declared_line_to_neutral_is_found_across_the_lines(simulate, tmp_path):
    """The water heater template (4.5 kW at 240 V) declared on L1-N: at
    120 V it would draw a quarter of that (P = V²/R, Ohm's law), so the
    4.5 kW steps across L1-L2 are its own, not an undeclared load."""
    d = simulate(home())
    decl = home().replace('template = "water_heater"', 'template = "water_heater"\nwiring = "L1-N"')
    r = report(d, decl, tmp_path)
    assert kinds(r) == [("declared-ln-seen-ll", "water_heater")]
    assert "breaker" in r["findings"][0]["advice"]
    [w] = [a for a in r["appliances"] if a["id"] == "water_heater"]
    assert w["verdict"] == "finding" and w["seen"] == "L1-L2"


def test_short_entries_are_a_complete_declaration(simulate, tmp_path):
    d = simulate(home())
    r = report(d, SHORT, tmp_path)
    assert kinds(r) == []
    assert {a["id"]: a["verdict"] for a in r["appliances"]} == {
        "water_heater": "as declared", "kettle": "as declared", "toaster": "as declared", "pump": "as declared"}
    # A mistake in a short entry is found like any other.
    r = report(d, SHORT.replace('power = "1500 W"\nwiring = "L2-N"', 'power = "1500 W"\nwiring = "L1-N"'), tmp_path)
    assert kinds(r) == [("wrong-line", "kettle")]


@pytest.mark.parametrize("entry, where, says", [
    ('power = "1500 W"\nwiring = "L3-N"', "declared.toml:16:10", "not a connection"),
    ('power = "1.5 kw"\nwiring = "L2-N"', "declared.toml:15:9", "kW"),
    ('power = "1500 W"\nwiring = "L2-N"\nhabit = 3', "declared.toml:17:9", "short entry"),
])
def test_a_bad_short_entry_is_refused_with_its_place(simulate, tmp_path, entry, where, says):
    d = simulate(home())
    text = SHORT.replace('power = "1500 W"\nwiring = "L2-N"', entry)
    p = audit(d, text, tmp_path, "--json")
    assert p.returncode == 2 and p.stdout == ""
    assert where in p.stderr and says in p.stderr, p.stderr


def test_a_partial_declaration_stays_right(simulate, tmp_path):
    """Only the two big loads declared, the rest said to be unknown: no
    metering or placement finding; what is left over is unlisted loads."""
    d = simulate(home())
    text = HEADER + "\n[declaration]\npartial = true\n" + SHORT.split("[[appliance]]", 1)[0][len(HEADER):] + \
        '[[appliance]]\nid = "water_heater"\npower = "4500 W"\nrated = "240 V"\nwiring = "L1-L2"\n' + \
        '[[appliance]]\nid = "pump"\npower = "1100 W"\npf = 0.8\nwiring = "L1-L2"\n'
    r = report(d, text, tmp_path)
    assert r["findings"] == [], r["findings"]
    assert [m["found"] for m in r["metering"]] == ["CT on L1", "CT on L2"]
    # The kettle (1.5 kW, L2-N) is among the loads the declaration leaves out.
    assert any(u["evidence"]["wiring"] == "L2-N" and abs(u["evidence"]["p_w"] - 1500) < 150
               for u in r["unlisted_loads"]), r["unlisted_loads"]
    assert any("partial" in n for n in r["notes"]) or len(r["unlisted_loads"]) > 0


def test_real_power_only_without_a_manifest(simulate, tmp_path):
    """A monitor export with P per line only, no manifest: the audit runs,
    says what it could not use, and finds the misdeclared kettle. At 1 min
    two loads switching in one row make one step, so a move needs
    `coarse_runs` steps where found (10 by default; here 11), beyond chance
    there and beyond what two declared loads switching together make."""
    d = simulate(home(interval="1 min", extra=""))
    t = pq.read_table(d / "meters.parquet").select(["time", "l1_p_w", "l2_p_w"])
    pq.write_table(t, tmp_path / "export.parquet")
    r = report(tmp_path / "export.parquet", SHORT.replace('power = "1500 W"\nwiring = "L2-N"', 'power = "1500 W"\nwiring = "L1-N"'), tmp_path)
    assert kinds(r) == [("wrong-line", "kettle")], r["possible"]
    moved = r["findings"][0]["evidence"]
    assert (moved["found"], moved["declared"]) == ("L2-N", "L1-N")
    assert moved["steps_as_found"] >= 10, moved  # coarse_runs, by default
    assert any("real power only" in n for n in r["notes"])
    assert r["loading"]["current_measured"] is False and r["loading"]["lines"][0]["peak_a"] > 0
    assert "not an inspection" in r["caution"]


def test_an_undeclared_load_of_a_declared_appliances_size_does_not_move_it(simulate, tmp_path):
    """A 1.5 kW heater on L1-N nobody declared, beside the declared 1.5 kW
    kettle on L2-N that runs as declared: the kettle stays, the heater is
    an undeclared load on L1-N."""
    heater = ('[[appliance]]\nid = "heater"\nwiring = "L1-N"\nload = "resistive"\nbehaviour = "cycle"\n'
              'states = [ { name = "off", power = "0 W", dwell = { median = "12 min", spread = 0.4 } }, '
              '{ name = "on", power = "1500 W", dwell = { median = "6 min", spread = 0.4 } } ]\n')
    d = simulate(home(extra=heater))
    r = report(d, SHORT, tmp_path)
    assert [k for k, _ in kinds(r)] == ["undeclared-load"], kinds(r)
    ev = r["findings"][0]["evidence"]
    assert ev["wiring"] == "L1-N" and ev["p_w"] == pytest.approx(1500, rel=0.1)
    assert 0 < ev["energy_share"] <= 1
    [k] = [a for a in r["appliances"] if a["id"] == "kettle"]
    assert k["verdict"] == "as declared"
    # What to check, with local times of examples (America/Chicago, UTC-6 in
    # January: the first start's UTC time less six hours).
    f = r["findings"][0]
    assert "find the load of about" in f["advice"] and "local time" in f["advice"]
    utc = f["evidence"]["first_starts"][0]
    local = f["evidence"]["first_starts_local"][0]
    hour = (int(utc[11:13]) - 6) % 24
    assert local.endswith(f"{hour:02d}:{utc[14:16]}"), (utc, local)


def test_channels_exchanged_are_one_fault_not_several_appliances_moved(simulate, tmp_path):
    """Channels l1 and l2 exchanged whole: the kettle and the toaster both
    show on the other line. One metering fault explains both; moving both
    appliances is the less simple account (common practice, no source)."""
    d = simulate(home(extra='[faults]\nswap = ["L1", "L2"]\n'))
    r = report(d, SHORT, tmp_path)
    assert kinds(r) == [("channels-exchanged", "l1+l2")], kinds(r)


def test_the_loading_picture_says_what_is_not_measured_and_when_lines_peak(simulate, tmp_path):
    """No CT on L2: its line is "not measured", not a line with 0 A; each
    measured line's peak has its local time (America/Chicago, UTC-6 in
    January), at the row where the truth's L1 current is highest."""
    d = simulate(home(interval="10 s", extra='[faults]\nno_ct = "L2"\n'))
    r = report(d, SHORT, tmp_path)
    lines = {l["conductor"]: l for l in r["loading"]["lines"]}
    assert lines["l2"]["measured"] is False and lines["l1"]["measured"] is True
    m = pq.read_table(d / "meters.parquet").to_pandas()
    t = m.loc[m["l1_i_a"].idxmax(), "time"].tz_convert("America/Chicago")
    assert lines["l1"]["peak_time_local"] == t.strftime("%a %Y-%m-%d %H:%M")
    decl = tmp_path / "d2.toml"
    decl.write_text(SHORT)
    text = loadloom("audit", d, "--declared", decl).stdout
    assert "not measured" in text
    assert "not an inspection" in text

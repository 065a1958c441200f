//! Electrical physics against textbook relations and standards. Each check
//! names its source.

use loadloom::electrical::{nominal_phasors, C64};
use loadloom::scenario::{load_str, Scenario, Wiring};
use loadloom::simulate::simulate;
use std::path::Path;

/// Everything a short run produced, copied out of the chunks.
#[derive(Default)]
struct Run {
    line_p: Vec<Vec<f64>>,
    line_q: Vec<Vec<f64>>,
    line_v: Vec<Vec<f64>>,
    line_i: Vec<Vec<f64>>,
    n_i: Vec<f64>,
    app_p: Vec<Vec<f64>>,
    app_line_p: Vec<Vec<Vec<f64>>>,
}

fn run(toml: &str) -> (Scenario, Run) {
    let s = load_str(Path::new("test.toml"), toml.to_string()).unwrap_or_else(|e| panic!("{e}"));
    let tl = loadloom::loads::timelines(&s, s.run.steps());
    let lines = s.home.supply.lines();
    let mut r = Run {
        line_p: vec![vec![]; lines],
        line_q: vec![vec![]; lines],
        line_v: vec![vec![]; lines],
        line_i: vec![vec![]; lines],
        ..Default::default()
    };
    r.app_p = vec![vec![]; s.appliances.len()];
    r.app_line_p = s
        .appliances
        .iter()
        .map(|a| vec![vec![]; a.lines().len()])
        .collect();
    let f = |v: &Vec<f32>| v.iter().map(|&x| x as f64).collect::<Vec<_>>();
    simulate(&s, &tl, s.intervals(), 1000, |c| -> Result<(), ()> {
        for x in 0..lines {
            r.line_p[x].extend(f(&c.readings.line_p[x]));
            r.line_q[x].extend(f(&c.readings.line_q[x]));
            r.line_v[x].extend(f(&c.readings.line_v[x]));
            r.line_i[x].extend(f(&c.readings.line_i[x]));
        }
        r.n_i.extend(f(&c.readings.n_i));
        for k in 0..c.truth.app_p.len() {
            r.app_p[k].extend(f(&c.truth.app_p[k]));
            for (j, v) in c.truth.app_line_p[k].iter().enumerate() {
                r.app_line_p[k][j].extend(f(v));
            }
        }
        Ok(())
    })
    .unwrap();
    (s, r)
}

/// A home with a stiff, constant source (no impedance, no variation), no meter noise.
fn stiff(supply: &str, voltage: &str, apps: &str) -> String {
    format!(
        r#"
[home]
supply = "{supply}"
voltage = "{voltage}"
timezone = "UTC"
source = {{ variation = 0, r = "0 ohm", x = "0 ohm", neutral_r = "0 ohm", neutral_x = "0 ohm" }}
[run]
start = "2027-01-04T00:00"
length = "20 s"
{apps}
"#
    )
}

fn steady(id: &str, wiring: &str, power: &str, pf: f64, load: &str) -> String {
    format!("[[appliance]]\nid = \"{id}\"\nwiring = \"{wiring}\"\nbehaviour = \"steady\"\nload = \"{load}\"\nstates = [{{ power = \"{power}\", pf = {pf} }}]\n")
}

fn close(a: f64, b: f64, tol: f64) -> bool {
    (a - b).abs() <= tol * b.abs().max(1.0)
}

#[test]
fn supply_voltages_and_the_sqrt3_relation() {
    // ANSI C84.1 nominal system voltages (120/240 V split-phase, 208Y/120,
    // 480Y/277) and IEC 60038 (230/400 V): V_LL = √3·V_LN on a wye supply,
    // 2·V_LN across the legs of split-phase, legs 180° apart.
    for (supply, v_ln, v_ll_nominal, tol) in [
        ("split-phase", "120 V", 240.0, 1e-12),
        ("three-phase", "230 V", 400.0, 0.005),
        ("three-phase", "120 V", 208.0, 0.005),
        ("three-phase", "277 V", 480.0, 0.005),
    ] {
        let (s, _) = run(&stiff(
            supply,
            v_ln,
            &steady("a", "L1-N", "1 W", 1.0, "resistive"),
        ));
        let e = nominal_phasors(&s.home);
        let v_ll = (e[0] - e[1]).abs();
        assert!(
            close(v_ll, v_ll_nominal, tol),
            "{supply} {v_ln}: |V1 - V2| = {v_ll}"
        );
        assert!(close(
            Wiring::LineLine(0, 1).nominal_v(s.home.supply, s.home.voltage_v),
            v_ll,
            1e-12
        ));
        if supply == "three-phase" {
            assert!(close(v_ll, 3f64.sqrt() * s.home.voltage_v, 1e-12));
            assert!(
                close((e[1] - e[2]).abs(), v_ll, 1e-12) && close((e[2] - e[0]).abs(), v_ll, 1e-12)
            );
        } else {
            let angle = (e[1].im.atan2(e[1].re) - e[0].im.atan2(e[0].re))
                .to_degrees()
                .abs();
            assert!(close(angle, 180.0, 1e-12));
        }
    }
}

#[test]
fn two_wattmeter_split_of_a_three_phase_line_to_line_load() {
    // Two-wattmeter method (standard electrical-measurement textbooks): a load
    // between L1 and L2 with angle φ reads P1 = V_LN·I·cos(φ − 30°) on L1 and
    // P2 = V_LN·I·cos(φ + 30°) on L2; P1 + P2 = P; P2 < 0 below pf 0.5.
    for pf in [1.0, 0.866, 0.7, 0.5, 0.3] {
        let (s, r) = run(&stiff(
            "three-phase",
            "230 V",
            &steady("motor", "L1-L2", "3 kW", pf, "resistive"),
        ));
        let phi = f64::acos(pf);
        let i = 3000.0 / pf / (3f64.sqrt() * 230.0);
        let p1 = 230.0 * i * (phi - 30f64.to_radians()).cos();
        let p2 = 230.0 * i * (phi + 30f64.to_radians()).cos();
        let (m1, m2) = (r.line_p[0][5], r.line_p[1][5]);
        assert!(close(m1, p1, 1e-5), "pf {pf}: L1 {m1} vs {p1}");
        assert!(close(m2, p2, 1e-5), "pf {pf}: L2 {m2} vs {p2}");
        assert!(close(m1 + m2, 3000.0, 1e-5));
        assert!(r.line_p[2][5].abs() < 1e-3);
        if pf < 0.5 {
            assert!(m2 < 0.0, "below pf 0.5 one reading is negative");
        }
        // The truth's per-conductor split is the same as the meter's.
        assert!(close(r.app_line_p[0][0][5], p1, 1e-5) && close(r.app_line_p[0][1][5], p2, 1e-5));
        assert_eq!(s.appliances[0].lines(), vec![0, 1]);
    }
}

#[test]
fn split_phase_line_to_line_load_splits_equally() {
    // Common practice: a 240 V load on split-phase draws the same current out
    // of L1 and back on L2, so each leg reads half its P and half its Q.
    let (_, r) = run(&stiff(
        "split-phase",
        "120 V",
        &steady("heater", "L1-L2", "4.5 kW", 0.9, "resistive"),
    ));
    let q = 4500.0 * (1.0f64 - 0.81).sqrt() / 0.9;
    assert!(close(r.line_p[0][3], 2250.0, 1e-5) && close(r.line_p[1][3], 2250.0, 1e-5));
    assert!(close(r.line_q[0][3], q / 2.0, 1e-5) && close(r.line_q[1][3], q / 2.0, 1e-5));
    assert!(
        r.n_i[3] < 1e-4,
        "no neutral current for a 240 V load, got {}",
        r.n_i[3]
    );
}

#[test]
fn neutral_current_balanced_three_phase_and_split_phase() {
    // Kirchhoff's current law: a balanced three-phase load returns nothing on
    // the neutral; resistive split-phase loads leave abs(I_L1 − I_L2) on it.
    let (_, r) = run(&stiff(
        "three-phase",
        "230 V",
        &steady("pump", "3P", "9 kW", 0.85, "motor"),
    ));
    assert!(r.n_i[4] < 1e-4 * r.line_i[0][4], "neutral {} A", r.n_i[4]);
    let i = 9000.0 / 0.85 / (3.0 * 230.0);
    for x in 0..3 {
        assert!(close(r.line_i[x][4], i, 1e-5));
        assert!(close(r.line_p[x][4], 3000.0, 1e-5));
    }
    let apps = steady("a", "L1-N", "1200 W", 1.0, "resistive")
        + &steady("b", "L2-N", "600 W", 1.0, "resistive");
    let (_, r) = run(&stiff("split-phase", "120 V", &apps));
    assert!(close(r.line_i[0][2], 10.0, 1e-5) && close(r.line_i[1][2], 5.0, 1e-5));
    assert!(close(
        r.n_i[2],
        (r.line_i[0][2] - r.line_i[1][2]).abs(),
        1e-5
    ));
}

#[test]
fn conductor_power_sums_to_appliance_power_with_sag_and_zip() {
    // Tellegen's theorem: Σ conductor P = Σ load P, exactly, whatever the
    // voltages; here with source impedance, slow source variation, ZIP loads
    // of every kind, inrush and line-to-line and three-phase draws.
    let apps = [
        steady("heater", "L1-L2", "3 kW", 1.0, "resistive"),
        steady("pc", "L1-N", "150 W", 0.95, "electronic"),
        steady("pump", "3P", "4 kW", 0.8, "motor"),
        steady("lamp", "L3-N", "60 W", 0.9, "lighting"),
        steady("fan", "L2-L3", "800 W", 0.6, "motor"),
        r#"[[appliance]]
id = "fridge"
wiring = "L2-N"
behaviour = "cycle"
load = "motor"
states = [ { power = "3 W", dwell = "7 s" }, { power = "120 W", pf = 0.8, dwell = "5 s", inrush = { peak = 6, decay = "1 s" } } ]
"#
        .to_string(),
    ]
    .concat();
    let toml = format!(
        r#"
[home]
supply = "three-phase"
voltage = "230 V"
timezone = "Europe/Paris"
[run]
start = "2027-01-04T00:00"
length = "2 min"
{apps}"#
    );
    let (_, r) = run(&toml);
    let n = r.n_i.len();
    for t in 0..n {
        let lines: f64 = (0..3).map(|x| r.line_p[x][t]).sum();
        let loads: f64 = r.app_p.iter().map(|p| p[t]).sum();
        assert!(close(lines, loads, 1e-5), "row {t}: {lines} vs {loads}");
        for (k, per) in r.app_line_p.iter().enumerate() {
            let s: f64 = per.iter().map(|v| v[t]).sum();
            assert!(close(s, r.app_p[k][t], 1e-5));
        }
    }
    // The source impedance makes the voltage sag below nominal under load.
    assert!(r.line_v[0].iter().all(|&v| v < 235.0 && v > 200.0));
}

#[test]
fn zip_loads_follow_the_terminal_voltage() {
    // ZIP model (Bokhari et al., IEEE Trans. Power Delivery 29(3), 2014):
    // P = P0·(z·(V/V0)² + i·(V/V0) + p). A big resistive load sags the
    // voltage; each small load's power must follow its ZIP curve at the
    // measured terminal voltage.
    let apps = [
        steady("big", "L1-N", "6 kW", 1.0, "resistive"),
        steady("heat", "L1-N", "1 kW", 1.0, "resistive"),
        steady("psu", "L1-N", "200 W", 1.0, "electronic"),
        "[[appliance]]\nid = \"mix\"\nwiring = \"L1-N\"\nbehaviour = \"steady\"\nstates = [{ power = \"500 W\", zip = { z = 0.5, i = 0.3, p = 0.2 } }]\n".to_string(),
    ]
    .concat();
    let toml = format!(
        r#"
[home]
supply = "single-phase"
voltage = "230 V"
timezone = "UTC"
source = {{ variation = 0, r = "0.4 ohm", x = "0.1 ohm" }}
[run]
start = "2027-01-04T00:00"
length = "10 s"
{apps}"#
    );
    let (_, r) = run(&toml);
    let u = r.line_v[0][5] / 230.0;
    assert!(
        u < 0.93,
        "the load must sag the voltage noticeably, u = {u}"
    );
    assert!(
        close(r.app_p[1][5], 1000.0 * u * u, 1e-5),
        "resistive: {} vs {}",
        r.app_p[1][5],
        1000.0 * u * u
    );
    assert!(
        close(r.app_p[2][5], 200.0, 1e-5),
        "constant power holds: {}",
        r.app_p[2][5]
    );
    let zip = 500.0 * (0.5 * u * u + 0.3 * u + 0.2);
    assert!(
        close(r.app_p[3][5], zip, 1e-5),
        "mixed ZIP: {} vs {zip}",
        r.app_p[3][5]
    );
    // And the source is the terminal voltage plus the drop over line and
    // neutral: E = V + (Z_L + Z_N)·I, with I in phase with V (unity pf loads),
    // Z_N being the 50 Hz default 0.16 + j0.10 Ω.
    let i_total = r.line_i[0][5];
    let p_total: f64 = r.app_p.iter().map(|p| p[5]).sum();
    let v = r.line_v[0][5];
    assert!(close(i_total, p_total / v, 1e-5));
    let e = C64::new(v, 0.0) + C64::new(0.4 + 0.16, 0.1 + 0.1) * C64::new(i_total, 0.0);
    assert!(close(e.abs(), 230.0, 1e-5), "|V + Z·I| = {}", e.abs());
}

#[test]
fn source_voltage_stays_in_the_ansi_range_a_band_without_load() {
    // ANSI C84.1 Range A for 120 V systems: 114–126 V at the service (from memory).
    let toml = r#"
[home]
supply = "split-phase"
timezone = "America/Chicago"
source = { variation = "3 %", period = "10 min" }
[run]
start = "2027-01-04T00:00"
length = "2 d"
step = "10 s"
[[appliance]]
id = "clock"
wiring = "L1-N"
behaviour = "steady"
states = [{ power = "1 W" }]
"#;
    let (_, r) = run(toml);
    for x in 0..2 {
        let (lo, hi) = r.line_v[x]
            .iter()
            .fold((f64::MAX, f64::MIN), |(a, b), &v| (a.min(v), b.max(v)));
        assert!(
            lo >= 114.0 - 0.01 && hi <= 126.0 + 0.01,
            "L{}: {lo}..{hi}",
            x + 1
        );
        assert!(hi - lo > 3.0, "the source voltage does vary: {lo}..{hi}");
    }
}

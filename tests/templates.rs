//! The built-in templates: `loadloom templates` lists each with its
//! voltage, power per state and source; a template used on a supply more
//! than 10 % from its own gets one `validate` warning; `when_dark` is
//! refused where it cannot apply.

use std::path::PathBuf;
use std::process::Output;

mod common;
use common::bin;

fn scratch(name: &str) -> PathBuf {
    common::scratch("templates", name)
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().unwrap()
}

/// A 230/400 V home with a site; `appliances` are its [[appliance]] sections.
fn home(appliances: &str) -> String {
    format!(
        r#"
[home]
supply = "three-phase"
voltage = "230 V"
timezone = "Europe/Berlin"
latitude = 50.1
longitude = 8.7

[run]
start = "2027-03-01T00:00"
length = "1 d"
step = "1 s"
seed = 3

[meter]
interval = "10 s"
{appliances}
"#
    )
}

fn validate_json(name: &str, text: &str) -> serde_json::Value {
    let d = scratch(name);
    let p = d.join("home.toml");
    std::fs::write(&p, text).unwrap();
    let o = run(&["validate", "--json", p.to_str().unwrap()]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let _ = std::fs::remove_dir_all(&d);
    serde_json::from_slice(&o.stdout).unwrap()
}

fn warnings(v: &serde_json::Value) -> Vec<String> {
    v["warnings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|w| w.as_str().unwrap().to_string())
        .collect()
}

#[test]
fn templates_lists_every_built_in_with_voltage_states_and_source() {
    let o = run(&["templates", "--json"]);
    assert_eq!(o.status.code(), Some(0));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["format"], "loadloom-templates/1");
    let list = v["templates"].as_array().unwrap();
    let files = std::fs::read_dir(concat!(env!("CARGO_MANIFEST_DIR"), "/scenarios/library"))
        .unwrap()
        .count();
    assert_eq!(
        list.len(),
        files,
        "every file of scenarios/library is built in"
    );
    for t in list {
        let name = t["name"].as_str().unwrap();
        assert!(!t["source"].as_str().unwrap().is_empty(), "{name}");
        let states = t["states"].as_array().unwrap();
        assert!(!states.is_empty(), "{name}");
        let peak = states
            .iter()
            .map(|s| s["power_w"].as_f64().unwrap())
            .fold(0.0, f64::max);
        assert_eq!(t["peak_w"].as_f64().unwrap(), peak, "{name}");
        // The European templates are written for 230 V and cite their basis.
        if name.ends_with("_eu") || name.contains("_eu_") {
            assert_eq!(t["voltage"], "230 V", "{name}");
        }
    }
    let find = |n: &str| list.iter().find(|t| t["name"] == n).unwrap();
    // 3 x 16 A at 230 V (IEC 61851-1 wallbox currents; arithmetic).
    assert_eq!(find("ev_charger_eu_3p")["peak_w"].as_f64(), Some(11_040.0));
    assert_eq!(find("ev_charger_eu_1p")["peak_w"].as_f64(), Some(7_360.0));
    let text = String::from_utf8_lossy(&run(&["templates"]).stdout).to_string();
    assert!(text.contains("fridge_freezer_eu") && text.contains("2019/2016"));
}

#[test]
fn a_template_for_another_supply_gets_one_warning() {
    let v = validate_json(
        "supply",
        &home(
            r#"
[[appliance]]
id = "na_fridge"
template = "fridge"

[[appliance]]
id = "scaled_fridge"
template = "fridge"
power_scale = 0.6

[[appliance]]
id = "own_fridge"
template = "fridge"
states = [ { name = "on", power = "80 W", dwell = "15 min" }, { name = "off", power = "1 W", dwell = "30 min" } ]

[[appliance]]
id = "eu_fridge"
template = "fridge_freezer_eu"

[[appliance]]
id = "router"
template = "router"

[[appliance]]
id = "tank"
template = "water_heater"
"#,
        ),
    );
    let w = warnings(&v);
    assert_eq!(w.len(), 2, "{w:?}");
    assert!(w[0].starts_with("na_fridge: template \"fridge\" is written for a 120 V supply"));
    // A 240 V element across two lines of a 230/400 V supply: P = V²/R, so
    // 4500 W × (230·√3 / 240)² (textbook resistive load).
    let p = 4500.0 * (230.0 * 3f64.sqrt() / 240.0f64).powi(2);
    assert!(w[1].starts_with("tank: template \"water_heater\" is rated at 240 V"));
    assert!(w[1].contains(&format!("becomes {p:.0} W")), "{} {p}", w[1]);
}

#[test]
fn a_european_template_in_a_120_volt_home_is_warned_about() {
    let text = home("\n[[appliance]]\nid = \"kettle\"\ntemplate = \"kettle_eu\"\n")
        .replace("three-phase", "split-phase")
        .replace("\"230 V\"", "\"120 V\"");
    let w = warnings(&validate_json("na-home", &text));
    assert_eq!(w.len(), 1, "{w:?}");
    assert!(w[0].contains("written for a 230 V supply") && w[0].contains("this home's is 120 V"));
    // Within 10 %: a 220 V home uses the 230 V templates without a word.
    let text = home("\n[[appliance]]\nid = \"kettle\"\ntemplate = \"kettle_eu\"\n")
        .replace("\"230 V\"", "\"220 V\"");
    assert!(warnings(&validate_json("220", &text)).is_empty());
}

#[test]
fn every_european_template_runs_in_a_european_home() {
    let names = [
        "coffee_maker_eu",
        "dishwasher_eu",
        "ev_charger_eu_1p",
        "ev_charger_eu_3p",
        "freezer_eu",
        "fridge_freezer_eu",
        "hair_dryer_eu",
        "heat_pump_eu",
        "induction_hob_eu",
        "kettle_eu",
        "lighting_eu",
        "microwave_eu",
        "oven_eu",
        "tumble_dryer_eu",
        "washing_machine_eu",
        "water_heater_eu",
    ];
    let apps: String = names
        .iter()
        .map(|n| format!("\n[[appliance]]\nid = \"{n}\"\ntemplate = \"{n}\"\n"))
        .collect();
    let text = home(&format!(
        "[weather]\nclimate = \"rhineland\"\n\n[building]\nua = \"160 W/K\"\nmass = \"40 MJ/K\"\n{apps}"
    ))
    .replace("timezone", "service = \"250 A\"\ntimezone");
    let v = validate_json("eu-run", &text);
    assert!(warnings(&v).is_empty(), "{:?}", warnings(&v));
    let d = scratch("eu-run-data");
    let p = d.join("home.toml");
    std::fs::write(&p, &text).unwrap();
    let o = run(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        d.join("out").to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn when_dark_is_refused_where_it_cannot_apply() {
    let lights = "\n[[appliance]]\nid = \"lights\"\ntemplate = \"lighting_eu\"\n";
    let cases = [
        // The template's line is named: that is where when_dark is written.
        (
            home(lights).replace("latitude = 50.1\nlongitude = 8.7\n", ""),
            "the home has no site",
        ),
        (
            home(&format!("{lights}when_dark = \"4 h\"\n")),
            "longer than 3 h",
        ),
        (
            home(&format!("{lights}when_dark = true\n")),
            "says no margin",
        ),
        (
            home("\n[[appliance]]\nid = \"fridge\"\ntemplate = \"fridge_freezer_eu\"\nwhen_dark = \"10 min\"\n"),
            "programs only",
        ),
    ];
    for (k, (text, needle)) in cases.iter().enumerate() {
        let d = scratch(&format!("dark-{k}"));
        let p = d.join("home.toml");
        std::fs::write(&p, text).unwrap();
        let o = run(&["validate", p.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{needle}: {err}");
        let place = if k == 0 {
            "lighting_eu.toml:19:"
        } else {
            "home.toml:"
        };
        assert!(err.contains(needle) && err.contains(place), "{err}");
        let _ = std::fs::remove_dir_all(&d);
    }
    // A template's when_dark turned off: no site needed.
    let text = home(&format!("{lights}when_dark = false\n"))
        .replace("latitude = 50.1\nlongitude = 8.7\n", "");
    assert!(warnings(&validate_json("dark-off", &text)).is_empty());
}

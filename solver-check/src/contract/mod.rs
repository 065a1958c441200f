//! The contract vocabulary: what the simulator writes and everything that
//! reads a dataset agrees on, defined once. The format ids of every file
//! loadloom writes, the conductors' names, the column names of the tables,
//! the complex number of phasors and powers, and the wiring of a load with
//! how its power splits over the lines.
//!
//! The `loadloom` crate builds its datasets and its scenario model from
//! these types; this crate reads datasets and checks declarations with
//! them, and never depends on the simulator.
//!
//! # Example
//!
//! A 4.8 kW dryer between two lines, on a split-phase and on a wye supply:
//!
//! ```
//! use solver_check::contract::{columns, line_name, SupplyKind, Wiring, C64};
//! let dryer = Wiring::parse("L2-L1", 2)?; // either order: one connection
//! assert_eq!(dryer.name(), "L1-L2");
//! assert_eq!(dryer.nominal_v(SupplyKind::SplitPhase, 120.0), 240.0); // V
//!
//! // Unity power factor: 2400 W on each leg of a split-phase supply.
//! let legs = SupplyKind::SplitPhase.split(dryer, C64::new(4800.0, 0.0));
//! assert!((legs[0].re - 2400.0).abs() < 1e-9 && (legs[1].re - 2400.0).abs() < 1e-9);
//!
//! // On a wye the lines still carry P/2 each, with reactive readings of
//! // ∓P/(2√3): the two-wattmeter relation.
//! let lines = SupplyKind::ThreePhase.split(dryer, C64::new(4800.0, 0.0));
//! assert!((lines[0].re - 2400.0).abs() < 1e-9);
//! assert!((lines[0].im + 4800.0 / (2.0 * 3f64.sqrt())).abs() < 1e-9);
//! assert!((lines[1].im - 4800.0 / (2.0 * 3f64.sqrt())).abs() < 1e-9);
//!
//! // The columns that carry it in a dataset.
//! assert_eq!(columns::p(&line_name(0)), "l1_p_w");
//! assert_eq!(columns::p(&columns::on_line("dryer", &line_name(1))), "dryer_l2_p_w");
//! # Ok::<(), solver_check::contract::WiringError>(())
//! ```

pub mod columns;
pub mod complex;
pub mod wiring;

pub use complex::C64;
pub use wiring::{SupplyKind, Wiring, WiringError, Zip};

/// Format id of a dataset's `manifest.json`.
pub const DATASET_FORMAT: &str = "loadloom-dataset/1";
/// Format id of `score --json`.
pub const SCORE_FORMAT: &str = "loadloom-score/1";
/// Format id of a comparison of two estimates (`score --against --json`).
pub const COMPARE_FORMAT: &str = "loadloom-compare/1";
/// Format id of an audit report (`audit --json`).
pub const AUDIT_FORMAT: &str = "loadloom-audit/1";
/// Format id of a round trip's `task.json`.
pub const TASK_FORMAT: &str = "loadloom-task/1";
/// Format id of a ranking of several solvers (`roundtrip --json` with
/// several `--solver`).
pub const LEADERBOARD_FORMAT: &str = "loadloom-leaderboard/1";
/// Format id of a suite's report (`roundtrip --suite --json`).
pub const SUITE_FORMAT: &str = "loadloom-suite/1";
/// Format id of a layout ladder's report (`roundtrip --layouts`, `ladder.json`).
pub const LAYOUTS_FORMAT: &str = "loadloom-layouts/1";
/// Format id of a cross-home round trip's `task.json`.
pub const FLEET_TASK_FORMAT: &str = "loadloom-fleet-task/1";
/// Format id of a cross-home round trip's report (`roundtrip --fleet --json`).
pub const CROSSHOME_FORMAT: &str = "loadloom-crosshome/1";
/// Format id of a fleet's summary (`fleet.json`).
pub const FLEET_FORMAT: &str = "loadloom-fleet/2";

/// Name of the neutral conductor in column names and manifests.
pub const NEUTRAL_NAME: &str = "n";

/// Name of line `x` (0-based) in column names and manifests: `l1`, `l2`, `l3`.
pub fn line_name(x: usize) -> String {
    format!("l{}", x + 1)
}

/// Label of line `x` (0-based) in wirings and printed reports: `L1`, `L2`, `L3`.
pub fn line_label(x: usize) -> String {
    format!("L{}", x + 1)
}

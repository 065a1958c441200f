//! The contract vocabulary: what the simulator writes and everything that
//! reads a dataset agrees on, defined once. The format ids of every file
//! loadloom writes, the conductors' names, the column names of the tables,
//! the complex number of phasors and powers, and the wiring of a load with
//! how its power splits over the lines.
//!
//! The `loadloom` crate builds its datasets and its scenario model from
//! these types; this crate reads datasets and checks declarations with
//! them, and never depends on the simulator.

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

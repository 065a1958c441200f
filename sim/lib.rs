//! loadloom: a household's per-conductor load data, simulated with its exact
//! per-appliance truth.
//!
//! Data flow, one module per arrow: [`scenario`] (text → [`scenario::Scenario`])
//! → [`behaviour`] (→ [`behaviour::Timeline`] per appliance) → [`electrical`]
//! (phasors per step) → [`meter`] (readings per reporting interval) →
//! [`dataset`] (files).
//!
//! The entry points, each with an example: [`scenario::load`] (a scenario
//! file) and [`scenario::load_str`], [`simulate::simulate`] (meters and
//! truth in memory), [`pipeline::write`] (a dataset folder), and
//! [`audit::load_declaration`] (an installer's declaration, audited by
//! `solver_check::audit::audit`). Scoring an estimate is
//! `solver_check::score::score`.

#![warn(missing_docs)]

pub mod audit;
pub mod behaviour;
pub mod crosshome;
pub mod dataset;
pub mod declaration;
pub mod difficulty;
pub mod electrical;
pub mod fleet;
pub mod layouts;
pub mod loads;
pub mod matrix;
pub mod meter;
pub mod pipeline;
pub mod progress;
pub mod rng;
pub mod roundtrip;
pub mod scenario;
pub mod simulate;
pub mod summary;
pub mod sun;
pub mod thermal;
pub mod units;
pub mod waveform;
pub mod weather;
pub mod year;

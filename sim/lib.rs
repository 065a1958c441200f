//! loadloom: a household's per-conductor load data, simulated with its exact
//! per-appliance truth.
//!
//! Data flow, one module per arrow: [`scenario`] (text → [`scenario::Scenario`])
//! → [`behaviour`] (→ [`behaviour::Timeline`] per appliance) → [`electrical`]
//! (phasors per step) → [`meter`] (readings per reporting interval) →
//! [`dataset`] (files).

pub mod scenario;
pub mod units;
pub mod behaviour;
pub mod rng;
pub mod electrical;
pub mod meter;
pub mod simulate;
pub mod dataset;
pub mod summary;
pub mod roundtrip;
pub mod waveform;
pub mod difficulty;
pub mod fleet;
pub mod audit;

//! solver-check: everything that reads loadloom datasets from files only, so
//! it works on any data in the dataset format, including real measurements
//! converted to it. It never depends on the simulator.
//!
//! - [`audit`]: checks of declared metering and wiring against the conductors, and the loading picture of a dataset;
//! - [`contract`]: the vocabulary shared with the simulator (format ids,
//!   conductor and column names, phasors, wiring and its line split);
//! - [`dataset`]: open a dataset folder, check its manifest and files;
//! - [`table`]: read Parquet or CSV tables whole (small ones);
//! - [`stream`]: stream their numeric columns batch by batch;
//! - [`wallclock`]: naive times read as wall-clock times of a named zone;
//! - [`estimate`]: read and check an estimate (wide or long);
//! - [`align`]: match the estimate's intervals with the truth's;
//! - [`metrics`]: the scores, each formula with its source;
//! - [`score`]: all of it together, and the reports ([`score::score`] has an
//!   example on a dataset written by hand);
//! - [`compare`]: two estimates, with a paired bootstrap over days;
//! - [`plot`]: a picture of a dataset's conductors and appliances (SVG);
//! - [`roundtrip`]: task folder, solver run, score; [`solvers`]: the built-in ones;
//!   [`confine`]: Landlock rules for a solver; [`child`]: running it and stopping what it leaves;
//!   [`crosshome`]: training on some homes of a fleet, scoring on others.

#![warn(missing_docs)]

pub mod align;
pub mod audit;
pub mod child;
pub mod compare;
pub mod confine;
pub mod contract;
pub mod crosshome;
pub mod dataset;
pub mod diagnostic;
pub mod estimate;
pub mod leaderboard;
pub mod metrics;
pub mod plot;
pub mod render;
pub mod roundtrip;
pub mod score;
pub mod solvers;
pub mod stream;
pub mod table;
pub mod taskio;
pub mod wallclock;

pub use dataset::{Dataset, DatasetError};

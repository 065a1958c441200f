//! solver-check: everything that reads loadloom datasets from files only, so
//! it works on any data in the dataset format, including real measurements
//! converted to it. It never depends on the simulator.
//!
//! This first part opens a dataset folder: it reads `manifest.json`, checks
//! the format, and verifies each data file against the size and sha256 the
//! manifest records.

pub mod dataset;

pub use dataset::{Dataset, DatasetError};

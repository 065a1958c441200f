//! The scenario language: TOML with units, parsed into a resolved [`Scenario`].

pub mod catalogue;
pub mod decode;
pub mod generation;
pub mod library;
pub mod model;
pub mod overrides;
pub(crate) mod reader;
pub(crate) mod source;
pub mod thermal;
pub mod values;

pub use decode::{load, load_str};
pub use model::*;
pub use source::Error;

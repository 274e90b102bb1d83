//! The portfolio: the queue of tests, the traffic pools and the calendar.
//!
//! `model` holds the validated types every later stage reads. The loader
//! (YAML to raw serde structs to the validated model, with errors that name
//! the file, line and key) is the only code that touches the YAML crate.

pub mod model;

pub use model::*;

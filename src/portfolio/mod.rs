//! The portfolio: the queue of tests, the traffic pools and the calendar.
//!
//! `model` holds the validated types every later stage reads. The loader
//! (YAML to raw serde structs to the validated model, with errors that name
//! the file, line and key) lives in `load`, `raw`, `position` and
//! `validate`, the only code that touches the YAML crates. docs/portfolio.md
//! documents the file.

mod load;
pub mod model;
mod position;
pub mod progress;
pub mod raw;
mod validate;

pub use load::{load, load_str, LoadError};
pub use model::*;
pub use validate::DEFAULT_SHARE_LEVELS;

//! The portfolio: the queue of tests, the traffic pools and the calendar.
//!
//! `model` holds the validated types every later stage reads. The loader
//! (YAML to raw serde structs to the validated model, with errors that name
//! the file, line and key) lives in `load`, `raw`, `position` and
//! `validate`, the only code that touches the YAML crates besides the
//! re-plan's progress file (`crate::replan::progress`), which shares the
//! loader's passes and its `Checker`; `position`, the key-and-value
//! position index, is public for other loaders of YAML files.
//! docs/portfolio.md documents the file.

mod checker;
pub(crate) mod history;
mod load;
pub mod model;
pub mod position;
pub(crate) mod raw;
mod validate;

pub(crate) use checker::Checker;
pub use load::{load, load_str, LoadError};
pub(crate) use load::{prepare, read_text, read_yaml};
pub use model::*;
pub(crate) use validate::resize;
pub use validate::DEFAULT_SHARE_LEVELS;

//! The text reports of the commands that do not plan: `check`,
//! `forecast`, `size` and `detect`. Each module turns its command's report
//! (built by the library) into the text the command prints; the CLI only
//! reads flags and hands the report over.

pub mod check;
pub(crate) mod detect;
pub mod forecast;
pub(crate) mod size;

//! The integration tests, in one binary (one link, one run): each module
//! below is one area, and `util` holds the test command they share.

mod util;

mod advice;
mod board;
mod calendar;
mod check;
mod commands;
mod forecast;
mod keys;
mod numbers;
mod outputs;
mod plan;
mod pools_ramps;
mod ranges;
mod render;
mod replan;
mod safe_files;
mod scenario;
mod size_cli;
mod sizing_properties;
mod sizing_published;

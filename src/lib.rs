//! sluice: plans a queue of A/B tests onto finite traffic.
//!
//! Data flows one way (see DEVELOPERS.md):
//! `portfolio` (YAML to a validated model) -> `sizing` (statistics) ->
//! `forecast` (pool traffic per day) -> `schedule` (options, LP, greedy,
//! verifier) -> `plan` (the result) -> `render` (one module per format).
//! `check` is the first report on a loaded portfolio (sizes, solo fit,
//! pool supply against demand); `diagnostic` renders positioned errors in
//! files users write. The binary in `main.rs` is a thin shell over [`cli`].

pub mod check;
pub mod cli;
pub mod diagnostic;
pub mod diff;
pub mod forecast;
pub mod output;
pub mod plan;
pub mod portfolio;
pub mod render;
pub mod replan;
pub mod schedule;
pub mod share;
pub mod sizing;
pub mod words;

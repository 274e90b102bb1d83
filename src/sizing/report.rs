//! The reports `sluice size` and `sluice detect` print: the design, the
//! sizes or the detectable effect, and what a design with interim looks
//! or a guardrail adds. `--format json` prints them as they are;
//! `render::reports` words them.

use super::sequential::Boundary;
use super::{Correction, Effect, Method, Metric, Sides};
use clap::ValueEnum;
use serde::Serialize;

/// The JSON object `sluice size --format json` prints.
#[derive(Serialize, Debug)]
pub struct SizeReport {
    pub metric: Metric,
    pub effect: Effect,
    /// The treatment arm's rate or mean implied by the effect.
    pub treatment_value: f64,
    pub method: Method,
    pub alpha: f64,
    pub comparison_alpha: f64,
    pub power: f64,
    pub sides: Sides,
    pub arms: u32,
    pub ratio: f64,
    pub correction: Correction,
    pub rho: f64,
    pub control: u64,
    pub treatment: u64,
    pub control_exact: f64,
    pub treatment_exact: f64,
    pub total: u64,
    /// Power at the rounded sizes.
    pub achieved_power: f64,
    /// A guardrail's margin (then `effect` is the assumed true difference, 0).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub margin: Option<Effect>,
    /// A guardrail's treatment value under H0: the baseline less the margin.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub null_value: Option<f64>,
    #[serde(flatten)]
    pub looks: Option<LooksReport>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub daily: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub share: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub days: Option<u64>,
    /// The shortest run in days (`--min-days`); not in the JSON.
    #[serde(skip)]
    pub min_days: u32,
    /// Whether the run is rounded up to whole weeks; not in the JSON.
    #[serde(skip)]
    pub whole_weeks: bool,
}

/// The fields a design with interim looks adds to the JSON.
#[derive(Serialize, Debug)]
pub struct LooksReport {
    pub looks: u32,
    pub boundary: Boundary,
    /// The fixed-horizon control arm, before rounding.
    pub fixed_control_exact: f64,
    /// Maximum over fixed.
    pub inflation: f64,
    /// Information fraction of each look.
    pub information: Vec<f64>,
    /// The efficacy boundary (z) at each look.
    pub boundaries: Vec<f64>,
    /// Type I error spent by each look, cumulative.
    pub alpha_spent: Vec<f64>,
    /// Probability of stopping for efficacy (planned direction) at each look
    /// under the planned effect; they sum to the power.
    pub stop_probabilities: Vec<f64>,
    pub expected_control_exact_h1: f64,
    pub expected_control_exact_h0: f64,
}

/// Which way a guardrail's metric moves when the treatment harms it.
#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Harm {
    /// A fall is the harm (conversion, revenue)
    Fall,
    /// A rise is the harm (refunds, load time)
    Rise,
}

/// A guardrail's part of the report: the margin solved for or given.
#[derive(Serialize, Debug)]
pub struct GuardrailReport {
    /// Which way the harm goes.
    pub harm: Harm,
    /// The margin relative to the baseline, signed as in a portfolio
    /// (positive: a fall is the harm); absent for a mean of zero.
    pub margin: Option<f64>,
    /// The margin as an absolute difference, signed the same way.
    pub margin_abs: f64,
    /// The treatment's rate or mean under H0: the baseline moved by the harm.
    pub null_value: f64,
}

/// A design with interim looks: the sample is its maximum.
#[derive(Serialize, Debug)]
pub struct DetectLooks {
    pub looks: u32,
    pub boundary: Boundary,
    /// The maximum sample over a single read's for the same power.
    pub inflation: f64,
    /// The control units a single read would need to match it: what the
    /// effect is computed from.
    pub single_read_control: f64,
}

/// The JSON object `sluice detect --format json` prints.
#[derive(Serialize, Debug)]
pub struct DetectReport {
    pub metric: Metric,
    /// The detectable (or given) effect, relative to the baseline; absent
    /// for a mean of zero.
    pub mde: Option<f64>,
    /// The same effect as an absolute difference.
    pub mde_abs: f64,
    /// The treatment's rate or mean at that effect.
    pub treatment_value: f64,
    /// The power at that effect: `--power` when the effect was solved for.
    pub power: f64,
    /// Units in the control arm.
    pub control: f64,
    /// Units in each treatment arm.
    pub treatment: f64,
    pub method: Method,
    pub alpha: f64,
    pub comparison_alpha: f64,
    pub sides: Sides,
    pub arms: u32,
    pub ratio: f64,
    pub correction: Correction,
    pub rho: f64,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub daily: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub share: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pub days: Option<f64>,
    /// A design with interim looks.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub looks: Option<DetectLooks>,
    /// A guardrail (non-inferiority) test: then `mde` and `mde_abs` are the
    /// difference at its null, the harm it rules out.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub guardrail: Option<GuardrailReport>,
    /// Whether an effect was given, so `power` is what was asked; not in
    /// the JSON.
    #[serde(skip)]
    pub power_given: bool,
}

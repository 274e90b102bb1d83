//! The reports `sluice size` and `sluice detect` print: the design, the
//! sizes or the detectable effect, and what a design with interim looks
//! or a guardrail adds. `--format json` prints them as they are;
//! `render::reports` words them.

use super::sequential::{self, Boundary, Plan};
use super::{noninferiority, Correction, Design, Effect, Method, Metric, Sides, SizingError};
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

/// What `sluice size` is asked: a design (a guardrail's margin as its
/// effect, built by `noninferiority::design`), any interim looks, and the
/// traffic to turn the sample into days.
#[derive(Debug, Clone, Copy)]
pub struct SizeQuery {
    pub design: Design,
    /// The design is a guardrail (non-inferiority) test.
    pub guardrail: bool,
    pub looks: Option<(u32, Boundary)>,
    pub traffic: Option<Traffic>,
    pub min_days: u32,
    pub whole_weeks: bool,
}

/// Eligible units per day and the share of them that enter the test.
#[derive(Debug, Clone, Copy)]
pub struct Traffic {
    pub daily: f64,
    pub share: f64,
}

/// Which step of a report failed: the design's sizes, the power at the
/// rounded sizes, or the days.
#[derive(Debug, Clone, PartialEq)]
pub enum ReportError {
    Design(SizingError),
    Power(SizingError),
    Duration(SizingError),
}

/// The looks' plan for a design's comparison.
fn looks_plan(design: &Design, looks: u32, boundary: Boundary) -> Plan {
    Plan {
        looks,
        boundary,
        alpha: design.comparison_alpha(),
        power: design.power,
        sides: design.sides,
    }
}

impl SizeReport {
    /// Sizes `q`: the fixed test's sizes (a guardrail's by Blackwelder),
    /// inflated by the looks' design, with the power the rounded sizes
    /// reach and the days at the traffic.
    pub fn of(q: &SizeQuery) -> Result<SizeReport, ReportError> {
        let design = q.design;
        let fixed = if q.guardrail {
            noninferiority::size(&design)
        } else {
            super::sample_size(&design)
        }
        .map_err(ReportError::Design)?;
        let (n, looks, achieved) = match q.looks {
            None => {
                let achieved = if q.guardrail {
                    noninferiority::power(&design, fixed.control as f64)
                } else {
                    super::achieved_power(&design, fixed.control as f64)
                }
                .map_err(ReportError::Power)?;
                (fixed, None, achieved)
            }
            Some((k, boundary)) => {
                let s = sequential::solve_plan(&looks_plan(&design, k, boundary))
                    .map_err(ReportError::Design)?;
                let n = sequential::inflate(&fixed, design.ratio, s.inflation)
                    .map_err(ReportError::Design)?;
                let achieved = s.power_at(n.control as f64 / n.control_exact, design.sides);
                let looks = LooksReport {
                    looks: k,
                    boundary,
                    fixed_control_exact: fixed.control_exact,
                    inflation: s.inflation,
                    expected_control_exact_h1: n.control_exact * s.expected_fraction_h1,
                    expected_control_exact_h0: n.control_exact * s.expected_fraction_h0,
                    information: s.information,
                    boundaries: s.boundaries,
                    alpha_spent: s.alpha_spent,
                    stop_probabilities: s.stop_probabilities,
                };
                (n, Some(looks), achieved)
            }
        };
        let days = match q.traffic {
            Some(t) => Some(
                super::days_needed(n.total, t.daily, t.share, q.min_days, q.whole_weeks)
                    .map_err(ReportError::Duration)?,
            ),
            None => None,
        };
        // A guardrail assumes no true difference; its effect is the margin.
        let (effect, treatment_value, margin, null_value) = if q.guardrail {
            let zero = match design.effect {
                Effect::Relative(_) => Effect::Relative(0.0),
                Effect::Absolute(_) => Effect::Absolute(0.0),
            };
            let null = noninferiority::null_value(&design);
            (
                zero,
                design.metric.control_value(),
                Some(design.effect),
                Some(null),
            )
        } else {
            (design.effect, design.treatment_value(), None, None)
        };
        Ok(SizeReport {
            metric: design.metric,
            effect,
            treatment_value,
            method: design.method,
            alpha: design.alpha,
            comparison_alpha: n.comparison_alpha,
            power: design.power,
            sides: design.sides,
            arms: design.arms,
            ratio: design.ratio,
            correction: design.correction,
            rho: design.rho,
            control: n.control,
            treatment: n.treatment,
            control_exact: n.control_exact,
            treatment_exact: n.treatment_exact,
            total: n.total,
            achieved_power: achieved,
            margin,
            null_value,
            looks,
            daily: q.traffic.map(|t| t.daily),
            share: q.traffic.map(|t| t.share),
            days,
            min_days: q.min_days,
            whole_weeks: q.whole_weeks,
        })
    }
}

/// What `sluice detect` is asked: a design whose effect is either the one
/// to find the power for (`effect_given`) or only a direction, the control
/// arm's units, and any looks or guardrail.
#[derive(Debug, Clone, Copy)]
pub struct DetectQuery {
    pub design: Design,
    /// Whether `design.effect` is given (find the power) or only carries
    /// the direction (find the effect).
    pub effect_given: bool,
    /// A guardrail test, and which way its harm goes.
    pub harm: Option<Harm>,
    /// Units in the control arm.
    pub control: f64,
    pub looks: Option<(u32, Boundary)>,
    /// The traffic and days the control arm's units came from, if they did.
    pub traffic: Option<(Traffic, f64)>,
}

impl DetectReport {
    /// What `q`'s sample detects, or its power for the given effect. With
    /// looks the sample is the design's maximum: the effect is a single
    /// read's at the sample over the inflation, and the power for a given
    /// effect is the sequential design's at the sample's share of its
    /// maximum.
    pub fn of(q: &DetectQuery) -> Result<DetectReport, ReportError> {
        let design = q.design;
        let n = q.control;
        let base = design.metric.control_value();
        let guardrail = q.harm.is_some();
        let sequential = match q.looks {
            Some((k, boundary)) => Some(
                sequential::solve_plan(&looks_plan(&design, k, boundary))
                    .map_err(ReportError::Design)?,
            ),
            None => None,
        };
        let inflation = sequential.as_ref().map_or(1.0, |s| s.inflation);
        let single = n / inflation;
        let design_error = ReportError::Design;
        let (mde_abs, power) = match (q.effect_given, guardrail) {
            (true, false) => {
                design.validate().map_err(design_error)?;
                let power = match &sequential {
                    Some(s) => {
                        let fixed = super::sample_size(&design).map_err(design_error)?;
                        s.power_at(n / (fixed.control_exact * inflation), design.sides)
                    }
                    None => super::achieved_power(&design, n).map_err(design_error)?,
                };
                (design.treatment_value() - base, power)
            }
            (true, true) => {
                let power = match &sequential {
                    Some(s) => {
                        let fixed = noninferiority::size(&design).map_err(design_error)?;
                        s.power_at(n / (fixed.control_exact * inflation), Sides::One)
                    }
                    None => noninferiority::power(&design, n).map_err(design_error)?,
                };
                (noninferiority::null_value(&design) - base, power)
            }
            (false, false) => {
                let e = super::minimum_detectable_effect(&design, single).map_err(design_error)?;
                (e, design.power)
            }
            (false, true) => {
                // In the design's kind (absolute), with the harm's sign.
                let m = noninferiority::smallest_margin(&design, single).map_err(design_error)?;
                (-m, design.power)
            }
        };
        Ok(DetectReport {
            metric: design.metric,
            mde: (base != 0.0).then(|| mde_abs / base.abs()),
            mde_abs,
            treatment_value: base + mde_abs,
            power,
            control: n,
            treatment: n * design.ratio,
            method: design.method,
            alpha: design.alpha,
            comparison_alpha: design.comparison_alpha(),
            sides: design.sides,
            arms: design.arms,
            ratio: design.ratio,
            correction: design.correction,
            rho: design.rho,
            daily: q.traffic.map(|(t, _)| t.daily),
            share: q.traffic.map(|(t, _)| t.share),
            days: q.traffic.map(|(_, days)| days),
            looks: match (&sequential, q.looks) {
                (Some(s), Some((looks, boundary))) => Some(DetectLooks {
                    looks,
                    boundary,
                    inflation: s.inflation,
                    single_read_control: single,
                }),
                _ => None,
            },
            guardrail: q.harm.map(|harm| GuardrailReport {
                harm,
                margin: (base != 0.0).then(|| -mde_abs / base.abs()),
                margin_abs: -mde_abs,
                null_value: base + mde_abs,
            }),
            power_given: q.effect_given,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn design(effect: Effect) -> Design {
        Design::new(Metric::Rate { baseline: 0.04 }, effect)
    }

    /// `detect` is the inverse of `size`: at the sample `size` gives, the
    /// power for the planned effect reaches the planned power, and the
    /// detectable effect is no larger than the planned one; with looks too.
    #[test]
    fn detect_inverts_size() {
        for looks in [None, Some((3, Boundary::SpendingObrienFleming))] {
            let d = design(Effect::Relative(0.1));
            let sized = SizeReport::of(&SizeQuery {
                design: d,
                guardrail: false,
                looks,
                traffic: None,
                min_days: 14,
                whole_weeks: true,
            })
            .unwrap();
            let ask = |effect, given| DetectQuery {
                design: design(effect),
                effect_given: given,
                harm: None,
                control: sized.control as f64,
                looks,
                traffic: None,
            };
            let power = DetectReport::of(&ask(Effect::Relative(0.1), true)).unwrap();
            assert!(
                power.power >= 0.8 && power.power < 0.81,
                "{looks:?}: {}",
                power.power
            );
            let mde = DetectReport::of(&ask(Effect::Absolute(1e-12), false)).unwrap();
            let relative = mde.mde.unwrap();
            assert!(relative <= 0.1 && relative > 0.099, "{looks:?}: {relative}");
        }
    }

    /// A failing step is named: days from no traffic are the duration's
    /// error, not the design's.
    #[test]
    fn a_failing_step_is_named() {
        let q = SizeQuery {
            design: design(Effect::Relative(0.1)),
            guardrail: false,
            looks: None,
            traffic: Some(Traffic {
                daily: 0.0,
                share: 1.0,
            }),
            min_days: 14,
            whole_weeks: true,
        };
        assert!(matches!(SizeReport::of(&q), Err(ReportError::Duration(_))));
        let bad = SizeQuery {
            design: design(Effect::Relative(0.0)),
            ..q
        };
        assert!(matches!(SizeReport::of(&bad), Err(ReportError::Design(_))));
    }
}

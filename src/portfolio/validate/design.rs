//! One metric's design from its keys: the settings a test's metrics
//! share, the metric's kind, baseline, effect (a guardrail's margin),
//! CUPED's `rho` and method, each range-checked; and a sizing failure
//! pointed at the key to change.

use super::super::checker::show;
use super::super::model::*;
use super::super::raw::*;
use super::{
    alpha_ok, power_ok, whole, Ctx, CORRECTIONS, MAX_ARMS, MEAN_METHODS, RATE_METHODS, SIDES,
};
use crate::sizing::{
    noninferiority, Correction, Design, Effect, Method, Metric, Sides, SizingError,
};

/// The settings every metric of an experiment shares.
#[derive(Clone, Copy)]
pub(super) struct Shared {
    pub(super) alpha: f64,
    pub(super) power: f64,
    pub(super) sides: Sides,
    pub(super) arms: u32,
    pub(super) ratio: f64,
    pub(super) correction: Correction,
}

/// The metric keys of one metric: the experiment's own (the short form)
/// or a `metrics` entry's, with the path its keys are reported at.
pub(super) struct MetricKeys<'r> {
    /// `experiments[0]` or `experiments[0].metrics[1]`.
    pub(super) prefix: String,
    metric: &'r Option<Text>,
    baseline: Option<f64>,
    sd: Option<f64>,
    mde: Option<f64>,
    mde_abs: Option<f64>,
    rho: Option<f64>,
    method: &'r Option<Text>,
    margin: Option<f64>,
    margin_abs: Option<f64>,
}

impl<'r> MetricKeys<'r> {
    pub(super) fn short(e: &'r RawExperiment, i: usize) -> MetricKeys<'r> {
        MetricKeys {
            prefix: format!("experiments[{i}]"),
            metric: &e.metric,
            baseline: e.baseline,
            sd: e.sd,
            mde: e.mde,
            mde_abs: e.mde_abs,
            rho: e.rho,
            method: &e.method,
            margin: None,
            margin_abs: None,
        }
    }

    pub(super) fn entry(m: &'r RawMetric, i: usize, j: usize) -> MetricKeys<'r> {
        MetricKeys {
            prefix: format!("experiments[{i}].metrics[{j}]"),
            metric: &m.metric,
            baseline: m.baseline,
            sd: m.sd,
            mde: m.mde,
            mde_abs: m.mde_abs,
            rho: m.rho,
            method: &m.method,
            margin: m.margin,
            margin_abs: m.margin_abs,
        }
    }
}

/// The settings an experiment's metrics share, each range-checked here.
pub(super) fn shared(
    cx: &mut Ctx,
    e: &RawExperiment,
    i: usize,
    who: &str,
    d: &Defaults,
) -> (Shared, bool) {
    let before = cx.errors.len();
    let at = |k: &str| format!("experiments[{i}].{k}");
    let alpha = e.alpha.unwrap_or(d.alpha);
    alpha_ok(cx, &at("alpha"), who, alpha, "the usual alpha is 0.05");
    let power = e.power.unwrap_or(d.power);
    power_ok(cx, &at("power"), who, power, alpha);
    let arms = e.arms.unwrap_or(2.0);
    let arms_ok = cx.number(
        &at("arms"),
        who,
        arms,
        whole(arms, 2.0, MAX_ARMS),
        "a whole number from 2 to 50",
        "arms count the control too: an A/B test has 2",
    );
    let ratio = e.ratio.unwrap_or(1.0);
    cx.number(
        &at("ratio"),
        who,
        ratio,
        ratio > 0.0 && ratio.is_finite() && (1e-3..=1e3).contains(&ratio),
        "in [0.001, 1000]",
        "treatment units per control unit; 1 is an even split",
    );
    let sides = cx.choice(&at("sides"), who, &e.sides, &SIDES, d.sides);
    let correction = cx.choice(
        &at("correction"),
        who,
        &e.correction,
        &CORRECTIONS,
        d.correction,
    );
    let shared = Shared {
        alpha,
        power,
        sides,
        arms: if arms_ok { arms as u32 } else { 2 },
        ratio,
        correction,
    };
    (shared, cx.errors.len() == before)
}

/// The design of one metric: its keys over the defaults and the shared
/// settings, each field range-checked here so that every bad field is
/// reported. A guardrail's effect is its margin, at `guardrail_alpha`,
/// one-sided; a primary's alpha is `alpha` (its share of the split).
#[allow(clippy::too_many_arguments)]
pub(super) fn design(
    cx: &mut Ctx,
    k: &MetricKeys,
    role: Role,
    who: &str,
    what: &str,
    d: &Defaults,
    s: &Shared,
    alpha: f64,
) -> (Design, bool) {
    let before = cx.errors.len();
    let at = |key: &str| format!("{}.{key}", k.prefix);
    let kind = cx.choice(
        &at("metric"),
        who,
        k.metric,
        &[("rate", "rate"), ("mean", "mean")],
        if k.sd.is_some() { "mean" } else { "rate" },
    );
    let baseline = k.baseline.unwrap_or(f64::NAN);
    let metric = if kind == "rate" {
        if k.sd.is_some() {
            cx.err(
                &at("sd"),
                format!("{who}`sd` applies only to mean metrics"),
                "remove `sd`, or set `metric: mean`",
            );
        }
        match k.baseline {
            None => cx.missing(
                &at("baseline"),
                what,
                "give the control's conversion rate, e.g. `baseline: 0.04` for 4%",
            ),
            Some(b) => {
                let hint = if b > 1.0 && b < 100.0 {
                    format!(
                        "{b} looks like a percentage: {b}% is `{}`; for a mean metric set `metric: mean` and give `sd`",
                        b / 100.0
                    )
                } else {
                    "write rates as fractions: 0.04 for 4%; for a mean metric set `metric: mean` and give `sd`".to_string()
                };
                cx.number(
                    &at("baseline"),
                    who,
                    b,
                    b > 0.0 && b < 1.0,
                    "a rate strictly inside (0, 1)",
                    &hint,
                );
            }
        }
        Metric::Rate { baseline }
    } else {
        match k.baseline {
            None => cx.missing(
                &at("baseline"),
                what,
                "give the control's mean, e.g. `baseline: 38.5`",
            ),
            Some(b) => {
                cx.number(
                    &at("baseline"),
                    who,
                    b,
                    b.is_finite() && b.abs() < 1e12,
                    "a finite number",
                    "the control arm's mean per unit",
                );
            }
        }
        let sd = k.sd.unwrap_or(f64::NAN);
        match k.sd {
            None => cx.missing(
                &at("sd"),
                what,
                "a mean metric needs its standard deviation per unit, e.g. `sd: 61`",
            ),
            Some(v) => {
                cx.number(
                    &at("sd"),
                    who,
                    v,
                    v > 0.0 && v.is_finite() && v < 1e12,
                    "> 0",
                    "the standard deviation of the metric per unit",
                );
            }
        }
        Metric::Mean { mean: baseline, sd }
    };
    // A guardrail's effect is its margin; the others' their MDE.
    let (rel, abs, rk, ak) = if role == Role::Guardrail {
        for (v, key) in [(k.mde, "mde"), (k.mde_abs, "mde_abs")] {
            if v.is_some() {
                cx.err(
                    &at(key),
                    format!("{who}a guardrail has no `{key}`"),
                    "a guardrail is sized by the largest harm it accepts: write `margin` (relative) or `margin_abs`",
                );
            }
        }
        (k.margin, k.margin_abs, "margin", "margin_abs")
    } else {
        for (v, key) in [(k.margin, "margin"), (k.margin_abs, "margin_abs")] {
            if v.is_some() {
                cx.err(
                    &at(key),
                    format!("{who}`{key}` applies only to a guardrail metric"),
                    format!(
                        "a {} metric is sized by its effect: write `mde` or `mde_abs`, or set `role: guardrail`",
                        role.name()
                    ),
                );
            }
        }
        (k.mde, k.mde_abs, "mde", "mde_abs")
    };
    let effect = match (rel, abs) {
        (Some(x), None) => Effect::Relative(x),
        (None, Some(x)) => Effect::Absolute(x),
        (Some(x), Some(_)) => {
            cx.err(
                &at(ak),
                format!("{who}both `{rk}` and `{ak}` are given"),
                if role == Role::Guardrail {
                    "give one: `margin` is relative (0.02 = a 2% harm), `margin_abs` absolute"
                } else {
                    "give one: `mde` is relative (0.05 = 5% lift), `mde_abs` absolute"
                },
            );
            Effect::Relative(x)
        }
        // A secondary metric is not sized: the effect only sets the kind
        // and direction of the detectable effect reported.
        (None, None) if role == Role::Secondary => Effect::Relative(1e-6),
        (None, None) if role == Role::Guardrail => {
            cx.missing(
                &at("margin"),
                what,
                "give the largest harm that is acceptable: `margin: 0.02` (2% relative) or `margin_abs: 0.001`",
            );
            Effect::Relative(f64::NAN)
        }
        (None, None) => {
            cx.missing(&at("mde"), what, "give the smallest effect worth detecting: `mde: 0.05` (5% relative) or `mde_abs: 0.002`");
            Effect::Relative(f64::NAN)
        }
    };
    let (ek, ev) = match effect {
        Effect::Relative(x) => (rk, x),
        Effect::Absolute(x) => (ak, x),
    };
    if rel.is_some() || abs.is_some() {
        cx.number(
            &at(ek),
            who,
            ev,
            ev.is_finite() && ev != 0.0,
            "a finite non-zero number",
            "0.05 is 5% relative",
        );
    }
    let rho = k.rho.unwrap_or(0.0);
    cx.number(
        &at("rho"),
        who,
        rho,
        (0.0..1.0).contains(&rho),
        "in [0, 1)",
        "the correlation of the metric with its pre-period value; 0 for none",
    );
    // A guardrail's default (Blackwelder's unpooled variance for a rate)
    // is set by `noninferiority::design` below.
    let default_method = match metric {
        Metric::Rate { .. } => d.rate_method,
        Metric::Mean { .. } => d.mean_method,
    };
    let all_methods: Vec<(&str, Method)> = RATE_METHODS
        .iter()
        .chain(MEAN_METHODS.iter())
        .copied()
        .collect();
    let method = cx.choice(&at("method"), who, k.method, &all_methods, default_method);
    if k.method.is_some() && method.is_for_rates() != matches!(metric, Metric::Rate { .. }) {
        let (kind, allowed) = if matches!(metric, Metric::Rate { .. }) {
            ("rate", "`pooled`, `unpooled`, `corrected`, `arcsine`")
        } else {
            ("mean", "`t`, `z`")
        };
        cx.err(
            &at("method"),
            format!("{who}method `{method}` does not apply to a {kind} metric"),
            format!("use one of {allowed}"),
        );
    }
    let design = Design {
        metric,
        effect,
        alpha,
        power: s.power,
        sides: s.sides,
        arms: s.arms,
        ratio: s.ratio,
        method,
        correction: s.correction,
        rho,
    };
    let design = if role == Role::Guardrail {
        noninferiority::design(design, k.method.is_some().then_some(method))
    } else {
        design
    };
    (design, cx.errors.len() == before)
}

/// A sizing failure after the range checks passed (an effect that leaves
/// (0, 1), a size beyond any traffic), pointed at the key to change.
pub(super) fn sizing_error(cx: &mut Ctx, e: &MetricKeys, who: &str, err: &SizingError) {
    let effect_key = match (e.margin, e.margin_abs) {
        (_, Some(_)) => "margin_abs",
        (Some(_), None) => "margin",
        _ if e.mde_abs.is_some() => "mde_abs",
        _ => "mde",
    };
    let key = match err {
        SizingError::OutOfRange { field, .. } => match *field {
            "mean" => "baseline",
            f => f,
        },
        SizingError::MethodMismatch { .. } => "method",
        _ => effect_key,
    };
    let percent_hint;
    let hint = match err {
        SizingError::TreatmentRateOutside { .. } if e.mde.is_some_and(|m| m >= 1.0) => {
            let m = e.mde.unwrap_or(1.0);
            percent_hint = format!(
                "`mde` {m} is a lift of {}%; write a {m}% lift as `{}`",
                m * 100.0,
                m / 100.0
            );
            percent_hint.as_str()
        }
        SizingError::TreatmentRateOutside { .. } => {
            "the treatment rate must stay strictly between 0 and 1; use a smaller MDE"
        }
        SizingError::NoSolution(_) => "a larger MDE needs fewer units",
        _ => "see docs/portfolio.md for the ranges",
    };
    let message = match err {
        SizingError::TreatmentRateOutside {
            baseline,
            treatment,
        } => format!(
            "{who}the effect moves the rate from {} to {}, outside (0, 1)",
            show(*baseline),
            show((treatment * 1e9).round() / 1e9)
        ),
        SizingError::NoSolution(text) => {
            // Write an astronomically large size compactly.
            let n = text
                .strip_prefix("the design needs ")
                .and_then(|t| t.split(' ').next())
                .and_then(|t| t.parse::<f64>().ok());
            match n {
                Some(n) if n.is_finite() => {
                    format!("{who}the design needs about {n:.1e} units per arm, beyond any traffic")
                }
                Some(_) => format!("{who}the design needs more units than can be counted"),
                None => format!("{who}{err}"),
            }
        }
        _ => format!("{who}{err}"),
    };
    cx.err(&format!("{}.{key}", e.prefix), message, hint);
}

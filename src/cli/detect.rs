//! `sluice detect`: what one test can detect with a given sample, or the
//! power it has for a given effect. The inverse of `sluice size`, from the
//! same formulas (see `sizing`).

use super::size::{
    early_reading, flag_design, EffectArgs, LooksArgs, MetricArgs, TestArgs, TrafficArgs,
};
use super::{Error, TextOrJson};
use crate::sizing::report::{DetectQuery, DetectReport, Harm};
use crate::sizing::{self, Effect, Metric};
use clap::{ArgGroup, Args};

#[derive(Args, Debug)]
#[command(allow_negative_numbers = true)]
#[command(group(ArgGroup::new("sample").required(true).args(["n", "daily"])))]
#[command(group(ArgGroup::new("arrivals").args(["daily"]).requires("days")))]
#[command(after_help = concat!("Examples:\n  \
    sluice detect --baseline 0.04 --n 20000\n  \
    sluice detect --baseline 0.04 --n 20000 --mde 0.1\n  \
    sluice detect --mean 38.5 --sd 61 --daily 8000 --share 0.5 --days 28 --format json\n  \
    sluice detect --baseline 0.04 --n 20000 --looks 3 --boundary pocock\n  \
    sluice detect --baseline 0.41 --n 60000 --guardrail\n  \
    sluice detect --baseline 0.41 --n 60000 --margin 0.02\n\n\
    With --n alone: the smallest effect the test detects at --power. With \
    --n and --mde (or --mde-abs): the power for that effect. With --daily, \
    --share and --days: the smallest effect reachable in that many days, \
    the units split over the arms by --ratio.\n\n\
    With --looks, the sample is the design's maximum, read at each look: \
    what it detects is what a single read of the sample over the looks' \
    inflation would. With --guardrail: the smallest harm a one-sided \
    non-inferiority test of the sample rules out at --power (a fall, or \
    `--guardrail rise`); with --margin (or --margin-abs): its power for \
    that margin, as `sluice size --margin` plans it.\n\n", early_reading!()))]
pub struct DetectArgs {
    #[command(flatten)]
    pub metric: MetricArgs,

    /// Units in the control arm (each treatment arm has ratio x as many)
    #[arg(
        long,
        value_name = "N",
        conflicts_with = "daily",
        help_heading = "Sample"
    )]
    pub n: Option<f64>,
    #[command(flatten)]
    pub traffic: TrafficArgs,
    /// Days the test runs
    #[arg(long, value_name = "T", requires = "daily", help_heading = "Traffic")]
    pub days: Option<f64>,

    // The effect to find the power for (--mde, --mde-abs), or the
    // guardrail's margin to find it for (--margin, --margin-abs).
    #[command(flatten)]
    pub effect: EffectArgs,
    /// Find the smallest detectable fall instead of rise
    #[arg(long, conflicts_with_all = ["mde", "mde_abs", "margin", "margin_abs"], help_heading = "Effect")]
    pub decrease: bool,
    /// Find the smallest harm the sample rules out (a fall unless `rise`)
    #[arg(
        long,
        value_enum,
        value_name = "HARM",
        num_args = 0..=1,
        default_missing_value = "fall",
        conflicts_with_all = ["mde", "mde_abs", "decrease", "margin", "margin_abs"],
        help_heading = "Guardrail"
    )]
    pub guardrail: Option<Harm>,

    /// With --looks the sample is the design's maximum.
    #[command(flatten)]
    pub interim: LooksArgs,

    #[command(flatten)]
    pub test: TestArgs,

    /// Output format
    #[arg(long, value_enum, default_value_t = TextOrJson::Text)]
    pub format: TextOrJson,
}

/// The control arm's units: `--n`, or the units `--daily x --share x
/// --days` bring, split over the arms (whole units, rounded down: the ones
/// that have arrived).
fn control_units(a: &DetectArgs) -> Result<f64, Error> {
    let bad = |field: &'static str, value: f64, expected: &'static str| Error::Design {
        error: sizing::SizingError::OutOfRange {
            field,
            value,
            expected,
        },
        effect: Effect::Absolute(1.0),
    };
    if let Some(n) = a.n {
        return if n > 0.0 && n.is_finite() {
            Ok(n)
        } else {
            Err(bad("n", n, "> 0 units in the control arm"))
        };
    }
    let (Some(daily), Some(days)) = (a.traffic.daily, a.days) else {
        return Err(bad("n", f64::NAN, "given, or --daily with --days"));
    };
    if !(daily > 0.0 && daily.is_finite()) {
        return Err(bad("daily", daily, "> 0 units per day"));
    }
    if !(a.traffic.share > 0.0 && a.traffic.share <= 1.0) {
        return Err(bad("share", a.traffic.share, "in (0, 1]"));
    }
    if !(days > 0.0 && days.is_finite()) {
        return Err(bad("days", days, "> 0"));
    }
    if !(a.test.ratio > 0.0 && a.test.ratio.is_finite()) || a.test.arms < 2 {
        // The design check names the field.
        return Ok(1.0);
    }
    let per_control = 1.0 + f64::from(a.test.arms - 1) * a.test.ratio;
    let n = (daily * a.traffic.share * days / per_control).floor();
    if n < 1.0 {
        return Err(bad(
            "days",
            days,
            "long enough for at least one unit in the control arm",
        ));
    }
    Ok(n)
}

/// `sluice detect`.
pub fn run(a: &DetectArgs) -> Result<Vec<u8>, Error> {
    let metric = match (a.metric.baseline, a.metric.mean, a.metric.sd) {
        (Some(p), None, None) => Metric::Rate { baseline: p },
        (None, Some(mean), Some(sd)) => Metric::Mean { mean, sd },
        _ => return Err(Error::SizeMetric),
    };
    let base = metric.control_value();
    let control = control_units(a)?;
    let harm = match (a.guardrail, a.effect.margin()) {
        (Some(h), _) => Some(h),
        (None, Some(m)) if m < 0.0 => Some(Harm::Rise),
        (None, Some(_)) => Some(Harm::Fall),
        (None, None) => None,
    };
    let sign = match harm {
        Some(Harm::Fall) => 1.0,
        Some(Harm::Rise) => -1.0,
        None if a.decrease => -1.0,
        None => 1.0,
    };
    // Solving for the effect, the design carries only its direction; an
    // absolute effect keeps a mean of zero meaningful.
    let given = a.effect.given();
    let design = flag_design(
        metric,
        given.unwrap_or(Effect::Absolute(sign * 1e-9 * base.abs().max(1e-9))),
        harm.is_some(),
        &a.test,
    );
    let query = DetectQuery {
        design,
        effect_given: given.is_some(),
        harm,
        control,
        looks: a.interim.looks(),
        traffic: a.traffic.traffic().zip(a.days),
    };
    let report = DetectReport::of(&query).map_err(|e| Error::from_report(e, design.effect))?;
    match a.format {
        TextOrJson::Json => super::json_bytes(&report),
        TextOrJson::Text => Ok(crate::render::reports::detect::text(&report).into_bytes()),
    }
}

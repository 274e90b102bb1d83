//! `sluice size`: the size, power and duration of one test.

use super::{Error, TextOrJson};
use crate::sizing::noninferiority;
use crate::sizing::report::{SizeQuery, SizeReport, Traffic};
use crate::sizing::sequential::Boundary;
use crate::sizing::{Correction, Design, Effect, Method, Metric, Sides};
use clap::{Args, ValueEnum};

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
pub enum MethodArg {
    /// rates: pooled variance under H0 (Fleiss), the default for rates
    Pooled,
    /// rates: unpooled normal approximation
    Unpooled,
    /// rates: Fleiss with continuity correction
    Corrected,
    /// rates: arcsine transform (Cohen's h)
    Arcsine,
    /// means: two-sample t-test (noncentral t), the default for means
    T,
    /// means: normal approximation
    Z,
}

impl From<MethodArg> for Method {
    fn from(m: MethodArg) -> Method {
        match m {
            MethodArg::Pooled => Method::Pooled,
            MethodArg::Unpooled => Method::Unpooled,
            MethodArg::Corrected => Method::Corrected,
            MethodArg::Arcsine => Method::Arcsine,
            MethodArg::T => Method::T,
            MethodArg::Z => Method::Z,
        }
    }
}

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
pub enum CorrectionArg {
    /// alpha / k for k treatment arms
    Bonferroni,
    /// 1 - (1 - alpha)^(1/k)
    Sidak,
    /// no correction
    None,
}

impl From<CorrectionArg> for Correction {
    fn from(c: CorrectionArg) -> Correction {
        match c {
            CorrectionArg::Bonferroni => Correction::Bonferroni,
            CorrectionArg::Sidak => Correction::Sidak,
            CorrectionArg::None => Correction::None,
        }
    }
}

#[derive(Copy, Clone, Debug, PartialEq, Eq, ValueEnum)]
pub enum BoundaryArg {
    /// O'Brien-Fleming: strict early, near the fixed test's z at the end
    ObrienFleming,
    /// Pocock: the same z at every look
    Pocock,
    /// Lan-DeMets spending, O'Brien-Fleming type (the default)
    SpendingObrienFleming,
    /// Lan-DeMets spending, Pocock type
    SpendingPocock,
}

impl From<BoundaryArg> for Boundary {
    fn from(b: BoundaryArg) -> Boundary {
        match b {
            BoundaryArg::ObrienFleming => Boundary::ObrienFleming,
            BoundaryArg::Pocock => Boundary::Pocock,
            BoundaryArg::SpendingObrienFleming => Boundary::SpendingObrienFleming,
            BoundaryArg::SpendingPocock => Boundary::SpendingPocock,
        }
    }
}

/// The caution about reading a test early, for `--help` of `size` and
/// `detect` (common practice; the inflation is Armitage, McPherson & Rowe
/// 1969's finding). A macro so `concat!` can put it into help texts.
macro_rules! early_reading {
    () => {
        "Reading a test early: a fixed-horizon test (no --looks) is valid only \
         at its planned size. Checking it before then and stopping when it \
         looks significant inflates false positives well beyond alpha. Only a \
         design with planned looks (sluice size --looks K --boundary NAME) \
         allows stopping early, and only at its boundaries."
    };
}
pub(super) use early_reading;

#[derive(Args, Debug)]
// Negative numbers are values, not flags: `--mean -50` is a real metric, and
// `--alpha -0.1` should reach the range check that names `--alpha`.
#[command(allow_negative_numbers = true)]
#[command(after_help = concat!("Examples:\n  \
    sluice size --baseline 0.04 --mde 0.10\n  \
    sluice size --baseline 0.04 --mde-abs 0.005 --arms 3 --daily 20000 --share 0.5\n  \
    sluice size --mean 38.5 --sd 61 --mde 0.03 --rho 0.4 --format json\n  \
    sluice size --baseline 0.2 --margin 0.05\n  \
    sluice size --baseline 0.1 --mde 0.1 --looks 3 --boundary obrien-fleming\n\n\
    Guardrails: --margin sizes a one-sided non-inferiority test (true \
    difference 0) that the treatment is not worse than the control by more \
    than the margin; a positive margin makes a fall the harm, a negative one \
    a rise.\n\n", early_reading!()))]
pub struct SizeArgs {
    #[command(flatten)]
    pub metric: MetricArgs,

    #[command(flatten)]
    pub effect: EffectArgs,

    #[command(flatten)]
    pub test: TestArgs,

    #[command(flatten)]
    pub interim: LooksArgs,

    #[command(flatten)]
    pub traffic: TrafficArgs,
    /// Shortest run in days
    #[arg(
        long,
        value_name = "D",
        default_value_t = 14,
        help_heading = "Duration"
    )]
    pub min_days: u32,
    /// Do not round the run up to whole weeks
    #[arg(long, help_heading = "Duration")]
    pub no_whole_weeks: bool,

    /// Output format
    #[arg(long, value_enum, default_value_t = TextOrJson::Text)]
    pub format: TextOrJson,
}

/// The interim-look flags `size` and `detect` share.
#[derive(Args, Debug)]
pub struct LooksArgs {
    /// Planned looks, equally spaced in information (1 = fixed horizon)
    #[arg(long, value_name = "K", help_heading = "Interim looks")]
    pub looks: Option<u32>,
    /// Stopping boundary of the looks
    #[arg(
        long,
        value_enum,
        requires = "looks",
        default_value_t = BoundaryArg::SpendingObrienFleming,
        help_heading = "Interim looks"
    )]
    pub boundary: BoundaryArg,
}

impl LooksArgs {
    /// The looks asked for, with their boundary.
    pub fn looks(&self) -> Option<(u32, Boundary)> {
        self.looks.map(|k| (k, self.boundary.into()))
    }
}

/// The effect flags `size` and `detect` share: the effect to plan for or
/// find the power for, or a guardrail's margin. At most one is given.
#[derive(Args, Debug)]
pub struct EffectArgs {
    /// The effect as a relative lift: 0.05 = 5% above the baseline
    #[arg(
        long,
        value_name = "X",
        conflicts_with_all = ["mde_abs", "margin", "margin_abs"],
        help_heading = "Effect"
    )]
    pub mde: Option<f64>,
    /// The effect as an absolute difference (0.005 = half a point)
    #[arg(long, value_name = "X", help_heading = "Effect")]
    pub mde_abs: Option<f64>,
    /// The largest acceptable harm to a guardrail metric, relative (0.02 =
    /// a 2% fall; negative when a rise is the harm)
    #[arg(
        long,
        value_name = "X",
        conflicts_with_all = ["mde_abs", "margin_abs"],
        help_heading = "Guardrail"
    )]
    pub margin: Option<f64>,
    /// The largest acceptable harm as an absolute difference
    #[arg(
        long,
        value_name = "X",
        conflicts_with = "mde_abs",
        help_heading = "Guardrail"
    )]
    pub margin_abs: Option<f64>,
}

impl EffectArgs {
    /// The effect given, if any; a guardrail's is its margin (see
    /// `sizing::noninferiority`).
    pub fn given(&self) -> Option<Effect> {
        match (self.mde, self.mde_abs, self.margin, self.margin_abs) {
            (Some(x), ..) | (_, _, Some(x), _) => Some(Effect::Relative(x)),
            (_, Some(x), ..) | (.., Some(x)) => Some(Effect::Absolute(x)),
            _ => None,
        }
    }

    /// The guardrail's margin, if one is given, in either kind.
    pub fn margin(&self) -> Option<f64> {
        self.margin.or(self.margin_abs)
    }
}

/// The traffic flags `size` and `detect` share.
#[derive(Args, Debug)]
pub struct TrafficArgs {
    /// Eligible units per day
    #[arg(long, value_name = "D", help_heading = "Traffic")]
    pub daily: Option<f64>,
    /// Share of the daily units that enter the test
    #[arg(
        long,
        value_name = "S",
        default_value_t = 1.0,
        requires = "daily",
        help_heading = "Traffic"
    )]
    pub share: f64,
}

impl TrafficArgs {
    /// The traffic, when `--daily` is given.
    pub fn traffic(&self) -> Option<Traffic> {
        self.daily.map(|daily| Traffic {
            daily,
            share: self.share,
        })
    }
}

/// The metric flags `size` and `detect` share.
#[derive(Args, Debug)]
pub struct MetricArgs {
    /// Baseline rate of a rate metric, e.g. 0.04 for 4% conversion
    #[arg(long, value_name = "P", conflicts_with_all = ["mean", "sd"], help_heading = "Metric")]
    pub baseline: Option<f64>,
    /// Baseline mean of a mean metric (needs --sd)
    #[arg(long, value_name = "M", requires = "sd", help_heading = "Metric")]
    pub mean: Option<f64>,
    /// Standard deviation per unit of a mean metric (needs --mean)
    #[arg(long, value_name = "S", requires = "mean", help_heading = "Metric")]
    pub sd: Option<f64>,
}

/// The test-settings flags `size` and `detect` share.
#[derive(Args, Debug)]
pub struct TestArgs {
    /// Type I error rate of the whole test
    #[arg(long, default_value_t = 0.05, help_heading = "Test settings")]
    pub alpha: f64,
    /// Power of each treatment-versus-control comparison
    #[arg(long, default_value_t = 0.8, help_heading = "Test settings")]
    pub power: f64,
    /// Test one direction only (default: two-sided)
    #[arg(long, help_heading = "Test settings")]
    pub one_sided: bool,
    /// Number of arms, control included
    #[arg(
        long,
        default_value_t = 2,
        value_name = "K",
        help_heading = "Test settings"
    )]
    pub arms: u32,
    /// Treatment units per control unit (1 = even split)
    #[arg(
        long,
        default_value_t = 1.0,
        value_name = "R",
        help_heading = "Test settings"
    )]
    pub ratio: f64,
    /// Sample-size method [default: pooled for rates, t for means]
    #[arg(long, value_enum, help_heading = "Test settings")]
    pub method: Option<MethodArg>,
    /// Multiple-comparison correction when there are several treatment arms
    #[arg(long, value_enum, default_value_t = CorrectionArg::Bonferroni, help_heading = "Test settings")]
    pub correction: CorrectionArg,
    /// Correlation with a pre-period covariate (CUPED): size x (1 - rho^2)
    #[arg(long, default_value_t = 0.0, help_heading = "Test settings")]
    pub rho: f64,
}

fn design_from_args(a: &SizeArgs) -> Result<Design, Error> {
    let metric = match (a.metric.baseline, a.metric.mean, a.metric.sd) {
        (Some(p), None, None) => Metric::Rate { baseline: p },
        (None, Some(mean), Some(sd)) => Metric::Mean { mean, sd },
        _ => return Err(Error::SizeMetric),
    };
    let effect = a.effect.given().ok_or(Error::SizeEffect)?;
    let guardrail = a.effect.margin().is_some();
    let design = flag_design(metric, effect, guardrail, &a.test);
    let checked = if guardrail {
        noninferiority::equivalent(&design).map(|_| ())
    } else {
        design.validate()
    };
    checked.map_err(|error| Error::Design {
        error,
        effect: design.effect,
    })?;
    Ok(design)
}

/// The design the flags of `size` and `detect` give, for `metric` and
/// `effect` (a guardrail's margin when `guardrail`): a guardrail is
/// one-sided and, for a rate, takes Blackwelder's unpooled variance at the
/// assumed rates unless `--method` says otherwise.
pub(super) fn flag_design(metric: Metric, effect: Effect, guardrail: bool, t: &TestArgs) -> Design {
    let given = t.method.map(Method::from);
    let base = Design {
        metric,
        effect,
        alpha: t.alpha,
        power: t.power,
        sides: if t.one_sided { Sides::One } else { Sides::Two },
        arms: t.arms,
        ratio: t.ratio,
        method: given.unwrap_or(Method::default_for(&metric)),
        correction: t.correction.into(),
        rho: t.rho,
    };
    if guardrail {
        noninferiority::design(base, given)
    } else {
        base
    }
}

/// `sluice size`.
pub fn run(a: &SizeArgs) -> Result<Vec<u8>, Error> {
    let design = design_from_args(a)?;
    let query = SizeQuery {
        design,
        guardrail: a.effect.margin().is_some(),
        looks: a.interim.looks(),
        traffic: a.traffic.traffic(),
        min_days: a.min_days,
        whole_weeks: !a.no_whole_weeks,
    };
    let report = SizeReport::of(&query).map_err(|e| Error::from_report(e, design.effect))?;
    match a.format {
        TextOrJson::Json => super::json_bytes(&report),
        TextOrJson::Text => Ok(crate::render::reports::size::text(&report).into_bytes()),
    }
}

//! Sizing: how many randomisation units one A/B test needs, the power a
//! given size achieves, and the smallest effect a given size can detect.
//!
//! Pure functions only; no I/O and no dates (day-by-day durations live in
//! `forecast`). Every formula cites its source:
//!
//! * Two proportions, pooled variance under H0 and unpooled under H1 (the
//!   default): Fleiss, Levin & Paik (2003), *Statistical Methods for Rates
//!   and Proportions*, 3rd ed., eq. 4.14 (unequal group sizes), without
//!   continuity correction.
//! * Two proportions, unpooled: the plain normal approximation, e.g. Chow,
//!   Shao & Wang (2008), *Sample Size Calculations in Clinical Research*,
//!   section 4.2.
//! * Two proportions with continuity correction: Fleiss, Tytun & Ury (1980),
//!   "A simple approximation for calculating sample sizes for comparing
//!   independent proportions", *Biometrics* 36, 343-346.
//! * Arcsine transform: Cohen (1988), *Statistical Power Analysis for the
//!   Behavioral Sciences*, 2nd ed., chapter 6 (effect size h).
//! * Two means, z: the normal approximation (Chow, Shao & Wang 2008, 3.2),
//!   counting both tails of a two-sided test as the t method does (and as
//!   statsmodels' `NormalIndPower`); the rate methods count the near tail.
//! * Two means, t: the two-sample t-test with the noncentral t distribution
//!   (Cohen 1988, chapter 2), its CDF by Lenth (1989), Algorithm AS 243,
//!   *Applied Statistics* 38, 185-189.
//! * Multiple treatment arms: Bonferroni (alpha / k) or Sidak
//!   (1 - (1 - alpha)^(1/k)) over the k treatment-versus-control comparisons.
//! * Variance reduction with a pre-period covariate (CUPED): the variance of
//!   the adjusted metric is sigma^2 (1 - rho^2), so the sample shrinks by the
//!   same factor (Deng, Xu, Kohavi & Walker 2013, "Improving the sensitivity
//!   of online controlled experiments by utilizing pre-experiment data",
//!   WSDM '13).
//! * Non-inferiority (guardrail) tests: [`noninferiority`] (Blackwelder
//!   1982 for rates; Chow, Shao & Wang 2008 for means).
//! * Interim looks (group-sequential designs): [`sequential`] (Jennison &
//!   Turnbull 2000; Lan & DeMets 1983; Armitage, McPherson & Rowe 1969).
//!
//! Conventions: `ratio` is treatment units per control unit; a design with
//! `arms` arms has one control and `arms - 1` treatments, each of the
//! treatment size. All sizes are per arm; `total` sums every arm.

mod formulas;
pub mod noninferiority;
pub(crate) mod report;
pub mod sequential;
pub mod srm;

pub use formulas::{
    achieved_power, days_needed, minimum_detectable_effect, noncentral_t_cdf, round_days,
    sample_size,
};
use serde::Serialize;
use std::fmt;

/// What the test measures in the control arm.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Metric {
    /// A rate (conversion): the control's baseline probability, in (0, 1).
    Rate {
        /// The control's probability.
        baseline: f64,
    },
    /// A mean: the control's baseline mean and the per-unit standard deviation.
    Mean {
        /// The control's mean.
        mean: f64,
        /// The standard deviation of one unit's value.
        sd: f64,
    },
}

impl Metric {
    /// The control's rate or mean: what an effect is relative to.
    pub fn control_value(&self) -> f64 {
        match *self {
            Metric::Rate { baseline } => baseline,
            Metric::Mean { mean, .. } => mean,
        }
    }
}

/// The minimum detectable effect: the smallest true change worth finding.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
#[serde(tag = "kind", content = "value", rename_all = "lowercase")]
pub enum Effect {
    /// A relative lift: 0.05 means the treatment is 5% above the baseline.
    Relative(f64),
    /// An absolute difference, in the metric's own units (0.01 = one point
    /// of conversion for a rate).
    Absolute(f64),
}

/// The sample-size method.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, PartialOrd, Ord)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Rates: pooled variance under H0, unpooled under H1 (Fleiss). Default for rates.
    Pooled,
    /// Rates: unpooled variance under both hypotheses.
    Unpooled,
    /// Rates: Fleiss with the continuity correction (Fleiss, Tytun & Ury 1980).
    Corrected,
    /// Rates: arcsine transform, Cohen's h.
    Arcsine,
    /// Means: two-sample t-test, noncentral t. Default for means.
    T,
    /// Means: normal approximation.
    Z,
}

impl Method {
    /// Every method, in the order the help text lists them.
    pub const ALL: [Method; 6] = [
        Method::Pooled,
        Method::Unpooled,
        Method::Corrected,
        Method::Arcsine,
        Method::T,
        Method::Z,
    ];

    /// The name used on the command line and in portfolio files.
    pub fn name(self) -> &'static str {
        match self {
            Method::Pooled => "pooled",
            Method::Unpooled => "unpooled",
            Method::Corrected => "corrected",
            Method::Arcsine => "arcsine",
            Method::T => "t",
            Method::Z => "z",
        }
    }

    /// Parses a method name as written on the command line or in a portfolio.
    pub fn parse(s: &str) -> Option<Method> {
        Method::ALL.into_iter().find(|m| m.name() == s)
    }

    /// Whether the method sizes rate metrics (else mean metrics).
    pub fn is_for_rates(self) -> bool {
        matches!(
            self,
            Method::Pooled | Method::Unpooled | Method::Corrected | Method::Arcsine
        )
    }

    /// The default method for a metric: `pooled` for rates, `t` for means.
    pub fn default_for(metric: &Metric) -> Method {
        match metric {
            Metric::Rate { .. } => Method::Pooled,
            Metric::Mean { .. } => Method::T,
        }
    }
}

impl fmt::Display for Method {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// One- or two-sided test.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, serde::Deserialize)]
#[serde(rename_all = "lowercase")]
pub enum Sides {
    /// One-sided: the alternative lies in the effect's direction.
    One,
    /// Two-sided: a change either way.
    Two,
}

impl Sides {
    /// 1 or 2: how many tails alpha is split over.
    pub fn count(self) -> u32 {
        match self {
            Sides::One => 1,
            Sides::Two => 2,
        }
    }
}

/// Correction of alpha for several treatment-versus-control comparisons.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Correction {
    /// No correction.
    None,
    /// alpha / k for k treatment arms.
    Bonferroni,
    /// 1 - (1 - alpha)^(1/k) for k treatment arms.
    Sidak,
}

impl Correction {
    /// Every correction.
    pub const ALL: [Correction; 3] = [Correction::None, Correction::Bonferroni, Correction::Sidak];

    /// The name in files, flags and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Correction::None => "none",
            Correction::Bonferroni => "bonferroni",
            Correction::Sidak => "sidak",
        }
    }

    /// The correction called `s`.
    pub fn parse(s: &str) -> Option<Correction> {
        Correction::ALL.into_iter().find(|c| c.name() == s)
    }
}

/// Everything that fixes a test's sample size.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Design {
    /// What the test measures.
    pub metric: Metric,
    /// The smallest change worth finding.
    pub effect: Effect,
    /// Type I error rate of the whole test (before the multi-arm correction).
    pub alpha: f64,
    /// 1 - beta, for each treatment-versus-control comparison.
    pub power: f64,
    /// One- or two-sided.
    pub sides: Sides,
    /// Control plus treatments; at least 2.
    pub arms: u32,
    /// Treatment units per control unit; 1 for an even split.
    pub ratio: f64,
    /// The sample-size formula.
    pub method: Method,
    /// Correction for several treatment arms.
    pub correction: Correction,
    /// Correlation of the metric with its pre-period value (CUPED); 0 for none.
    pub rho: f64,
}

impl Design {
    /// A design with the trade's usual defaults: alpha 0.05 two-sided, power
    /// 0.8, two arms split evenly, Bonferroni for more arms, no covariate, and
    /// the metric's default method.
    pub fn new(metric: Metric, effect: Effect) -> Design {
        Design {
            metric,
            effect,
            alpha: 0.05,
            power: 0.8,
            sides: Sides::Two,
            arms: 2,
            ratio: 1.0,
            method: Method::default_for(&metric),
            correction: Correction::Bonferroni,
            rho: 0.0,
        }
    }

    /// The alpha each treatment-versus-control comparison is tested at.
    pub fn comparison_alpha(&self) -> f64 {
        let k = f64::from(self.arms.saturating_sub(1).max(1));
        match self.correction {
            Correction::None => self.alpha,
            Correction::Bonferroni => self.alpha / k,
            Correction::Sidak => 1.0 - (1.0 - self.alpha).powf(1.0 / k),
        }
    }

    /// The treatment arm's metric value (rate or mean) implied by the effect.
    pub fn treatment_value(&self) -> f64 {
        let base = self.metric.control_value();
        match self.effect {
            Effect::Relative(r) => base * (1.0 + r),
            Effect::Absolute(d) => base + d,
        }
    }

    /// Checks every input against its range; the first problem found.
    pub fn validate(&self) -> Result<(), SizingError> {
        self.validate_inputs(true)
    }

    /// As [`Design::validate`]; `check_power` false skips the power field
    /// (for the power inverse, where power is the output).
    fn validate_inputs(&self, check_power: bool) -> Result<(), SizingError> {
        let bad = |field: &'static str, value: f64, expected: &'static str| {
            Err(SizingError::OutOfRange {
                field,
                value,
                expected,
            })
        };
        if !(self.alpha > 0.0 && self.alpha <= 0.5) {
            return bad("alpha", self.alpha, "in (0, 0.5]");
        }
        if check_power && !(self.power > self.alpha && self.power < 1.0) {
            return bad("power", self.power, "in (alpha, 1)");
        }
        if self.arms < 2 {
            return bad("arms", f64::from(self.arms), "a whole number >= 2");
        }
        if !(self.ratio > 0.0 && self.ratio.is_finite()) {
            return bad("ratio", self.ratio, "> 0");
        }
        if !(self.rho >= 0.0 && self.rho < 1.0) {
            return bad("rho", self.rho, "in [0, 1)");
        }
        let (effect_field, effect_value) = match self.effect {
            Effect::Relative(r) => ("mde", r),
            Effect::Absolute(d) => ("mde_abs", d),
        };
        if !effect_value.is_finite() || effect_value == 0.0 {
            return bad(effect_field, effect_value, "a finite non-zero number");
        }
        match self.metric {
            Metric::Rate { baseline } => {
                if !(baseline > 0.0 && baseline < 1.0) {
                    return bad("baseline", baseline, "a rate strictly inside (0, 1)");
                }
                if !self.method.is_for_rates() {
                    return Err(SizingError::MethodMismatch {
                        method: self.method,
                        metric: "rate",
                    });
                }
                let p2 = self.treatment_value();
                if !(p2 > 0.0 && p2 < 1.0) {
                    return Err(SizingError::TreatmentRateOutside {
                        baseline,
                        treatment: p2,
                    });
                }
            }
            Metric::Mean { mean, sd } => {
                if !mean.is_finite() {
                    return bad("mean", mean, "a finite number");
                }
                if !(sd > 0.0 && sd.is_finite()) {
                    return bad("sd", sd, "> 0");
                }
                if self.method.is_for_rates() {
                    return Err(SizingError::MethodMismatch {
                        method: self.method,
                        metric: "mean",
                    });
                }
                if matches!(self.effect, Effect::Relative(_)) && mean == 0.0 {
                    return Err(SizingError::RelativeOfZero);
                }
            }
        }
        Ok(())
    }
}

/// Why a design cannot be sized.
#[derive(Debug, Clone, PartialEq)]
pub enum SizingError {
    /// A field outside its range.
    OutOfRange {
        /// The field, as a portfolio names it.
        field: &'static str,
        /// The value given.
        value: f64,
        /// The range, in words.
        expected: &'static str,
    },
    /// The effect moves a rate outside (0, 1).
    TreatmentRateOutside {
        /// The control's rate.
        baseline: f64,
        /// The treatment's rate the effect gives.
        treatment: f64,
    },
    /// A method for rates on a mean, or for means on a rate.
    MethodMismatch {
        /// The method asked for.
        method: Method,
        /// `rate` or `mean`.
        metric: &'static str,
    },
    /// A relative effect of a zero mean.
    RelativeOfZero,
    /// An inverse found no answer: e.g. no effect inside (0,1) reaches the power.
    NoSolution(Unsolved),
}

/// Why an inverse found no answer, in words; when the words begin with a
/// field (`arms`), the field apart, so the command line can name it as
/// its flag. Reads as its words (`&*unsolved`).
#[derive(Debug, Clone, PartialEq)]
pub struct Unsolved {
    /// The words, the field written as a portfolio names it.
    text: String,
    /// The field the words begin with.
    field: Option<&'static str>,
    /// The words after the field.
    rest: String,
}

impl Unsolved {
    /// Words that begin with `field` (as `` `arms` ``), followed by `rest`.
    pub fn about(field: &'static str, rest: String) -> Unsolved {
        Unsolved {
            text: format!("`{field}`{rest}"),
            field: Some(field),
            rest,
        }
    }
}

impl From<String> for Unsolved {
    fn from(text: String) -> Unsolved {
        Unsolved {
            text,
            field: None,
            rest: String::new(),
        }
    }
}

impl From<&str> for Unsolved {
    fn from(text: &str) -> Unsolved {
        Unsolved::from(text.to_string())
    }
}

impl std::ops::Deref for Unsolved {
    type Target = str;

    fn deref(&self) -> &str {
        &self.text
    }
}

impl SizingError {
    /// The field the error is about, as a portfolio names it (`mde_abs`);
    /// `None` when it names none.
    pub fn field(&self) -> Option<&'static str> {
        match self {
            SizingError::OutOfRange { field, .. } => Some(field),
            SizingError::NoSolution(u) => u.field,
            _ => None,
        }
    }

    /// The message with its field written by `name` (a portfolio's
    /// `` `mde_abs` `` in [`fmt::Display`]; the command line words it as
    /// its flag).
    pub fn worded(&self, name: &dyn Fn(&'static str) -> String) -> String {
        match self {
            SizingError::OutOfRange {
                field,
                value,
                expected,
            } => format!("{} is {value}; it must be {expected}", name(field)),
            SizingError::NoSolution(Unsolved {
                field: Some(field),
                rest,
                ..
            }) => format!("{}{rest}", name(field)),
            other => other.to_string(),
        }
    }
}

impl fmt::Display for SizingError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SizingError::OutOfRange { .. } => {
                f.write_str(&self.worded(&|field| format!("`{field}`")))
            }
            SizingError::TreatmentRateOutside {
                baseline,
                treatment,
            } => write!(
                f,
                "the effect moves the rate from {baseline} to {treatment}, outside (0, 1); use a smaller MDE"
            ),
            SizingError::MethodMismatch { method, metric } => {
                let allowed = if *metric == "rate" {
                    "pooled, unpooled, corrected, arcsine"
                } else {
                    "t, z"
                };
                write!(
                    f,
                    "method `{method}` does not apply to a {metric} metric; use one of: {allowed}"
                )
            }
            SizingError::RelativeOfZero => write!(
                f,
                "a relative MDE of a zero baseline mean is zero; give the effect as an absolute difference"
            ),
            SizingError::NoSolution(why) => f.write_str(why),
        }
    }
}

impl std::error::Error for SizingError {}

/// The size of one test.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct SampleSize {
    /// Units in the control arm, before rounding.
    pub control_exact: f64,
    /// Units in each treatment arm, before rounding.
    pub treatment_exact: f64,
    /// Units in the control arm, rounded up.
    pub control: u64,
    /// Units in each treatment arm, rounded up.
    pub treatment: u64,
    /// Control plus treatments.
    pub arms: u32,
    /// Units over all arms: control + (arms - 1) x treatment.
    pub total: u64,
    /// The alpha of each comparison after the multi-arm correction.
    pub comparison_alpha: f64,
}

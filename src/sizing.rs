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

pub mod noninferiority;
pub(crate) mod report;
pub mod sequential;
pub mod srm;

use serde::Serialize;
use statrs::distribution::{ContinuousCDF, Normal};
use statrs::function::beta::beta_reg;
use statrs::function::gamma::ln_gamma;
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
        let base = match self.metric {
            Metric::Rate { baseline } => baseline,
            Metric::Mean { mean, .. } => mean,
        };
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

fn std_normal() -> Normal {
    Normal::standard()
}

/// Upper quantile of the standard normal: z with P(Z > z) = q.
fn z_upper(q: f64) -> f64 {
    std_normal().inverse_cdf(1.0 - q)
}

/// The two standard deviations of the normal-approximation formulas:
/// n_control = (z_alpha A + z_beta B)^2 / delta^2, with delta the difference
/// on the scale the method tests (rate, arcsine, or mean).
struct NormalForm {
    a: f64,
    b: f64,
    delta: f64,
}

fn normal_form(d: &Design) -> NormalForm {
    let r = d.ratio;
    match d.metric {
        Metric::Rate { baseline: p1 } => {
            let p2 = d.treatment_value();
            let unpooled = (p1 * (1.0 - p1) + p2 * (1.0 - p2) / r).sqrt();
            match d.method {
                Method::Pooled | Method::Corrected => {
                    let pbar = (p1 + r * p2) / (1.0 + r);
                    let pooled = (pbar * (1.0 - pbar) * (1.0 + 1.0 / r)).sqrt();
                    NormalForm {
                        a: pooled,
                        b: unpooled,
                        delta: p2 - p1,
                    }
                }
                Method::Unpooled => NormalForm {
                    a: unpooled,
                    b: unpooled,
                    delta: p2 - p1,
                },
                _ => {
                    // Arcsine: Cohen's h = 2 asin sqrt(p2) - 2 asin sqrt(p1), unit variance.
                    let h = 2.0 * p2.sqrt().asin() - 2.0 * p1.sqrt().asin();
                    let s = (1.0 + 1.0 / r).sqrt();
                    NormalForm {
                        a: s,
                        b: s,
                        delta: h,
                    }
                }
            }
        }
        Metric::Mean { sd, .. } => {
            let s = sd * (1.0 + 1.0 / r).sqrt();
            NormalForm {
                a: s,
                b: s,
                delta: d.treatment_value() - mean_of(d),
            }
        }
    }
}

fn mean_of(d: &Design) -> f64 {
    match d.metric {
        Metric::Mean { mean, .. } => mean,
        Metric::Rate { baseline } => baseline,
    }
}

/// The z quantile for the test's alpha, per comparison and per side.
fn z_alpha(d: &Design) -> f64 {
    z_upper(d.comparison_alpha() / f64::from(d.sides.count()))
}

/// The continuity correction of Fleiss, Tytun & Ury (1980) for unequal
/// groups: n' = n/4 (1 + sqrt(1 + 2(r + 1) / (n r |delta|)))^2.
fn continuity_correct(n: f64, r: f64, delta: f64) -> f64 {
    n / 4.0 * (1.0 + (1.0 + 2.0 * (r + 1.0) / (n * r * delta.abs())).sqrt()).powi(2)
}

/// Inverse of [`continuity_correct`]: n = n'(1 - a / (4 n'))^2 with
/// a = 2(r + 1) / (r |delta|); zero where n' is too small to carry the correction.
fn continuity_uncorrect(n_cc: f64, r: f64, delta: f64) -> f64 {
    let a = 2.0 * (r + 1.0) / (r * delta.abs());
    if n_cc <= a / 4.0 {
        return 0.0;
    }
    n_cc * (1.0 - a / (4.0 * n_cc)).powi(2)
}

/// CDF of the noncentral t distribution, P(T <= t) with `df` degrees of
/// freedom and noncentrality `delta`: Lenth (1989), Algorithm AS 243.
pub fn noncentral_t_cdf(t: f64, df: f64, delta: f64) -> f64 {
    const ITRMAX: u32 = 2000;
    const ERRMAX: f64 = 1e-13;
    if df <= 0.0 || !t.is_finite() || !delta.is_finite() {
        return f64::NAN;
    }
    let (tt, del, negdel) = if t < 0.0 {
        (-t, -delta, true)
    } else {
        (t, delta, false)
    };
    let mut tnc = 0.0;
    let x = tt * tt / (tt * tt + df);
    if x > 0.0 {
        let lambda = del * del;
        let mut p = 0.5 * (-0.5 * lambda).exp();
        let mut q = (2.0 / std::f64::consts::PI).sqrt() * p * del;
        let mut s = 0.5 - p;
        if s < 1e-7 {
            s = -0.5 * (-0.5 * lambda).exp_m1();
        }
        let mut a = 0.5;
        let b = 0.5 * df;
        // (1 - x)^b and ln B(1/2, b) lose digits at large b (df in the
        // millions) when written plainly; these forms keep them.
        let ln_rxb = b * (-x).ln_1p();
        let rxb = ln_rxb.exp();
        let albeta = ln_beta_half(b);
        let mut xodd = beta_reg(a, b, x);
        let mut godd = 2.0 * rxb * (a * x.ln() - albeta).exp();
        let mut xeven = -ln_rxb.exp_m1();
        let mut geven = b * x * rxb;
        tnc = p * xodd + q * xeven;
        let mut en = 1.0;
        loop {
            a += 1.0;
            xodd -= godd;
            xeven -= geven;
            godd *= x * (a + b - 1.0) / a;
            geven *= x * (a + b - 0.5) / (a + 0.5);
            p *= lambda / (2.0 * en);
            q *= lambda / (2.0 * en + 1.0);
            s -= p;
            en += 1.0;
            tnc += p * xodd + q * xeven;
            let errbd = 2.0 * s * (xodd - godd);
            if errbd.abs() <= ERRMAX || en > f64::from(ITRMAX) {
                break;
            }
        }
    }
    tnc += std_normal().cdf(-del);
    let tnc = if negdel { 1.0 - tnc } else { tnc };
    tnc.clamp(0.0, 1.0)
}

/// ln B(1/2, b) = ln Gamma(1/2) + ln Gamma(b) - ln Gamma(b + 1/2). For large b
/// the difference of two huge ln Gamma values cancels (1e-7 lost at
/// b = 5e7), so there it uses the asymptotic series Gamma(b + 1/2) /
/// Gamma(b) = sqrt(b) (1 - 1/(8b) + 1/(128b^2) + 5/(1024b^3) - 21/(32768b^4)),
/// whose next term is below 1e-15 for b > 1000 (Abramowitz & Stegun 1964,
/// 6.1.47, the ratio of gamma functions).
fn ln_beta_half(b: f64) -> f64 {
    let ln_sqrt_pi = std::f64::consts::PI.sqrt().ln();
    if b > 1000.0 {
        let series = 1.0 - 1.0 / (8.0 * b) + 1.0 / (128.0 * b * b) + 5.0 / (1024.0 * b.powi(3))
            - 21.0 / (32768.0 * b.powi(4));
        ln_sqrt_pi - 0.5 * b.ln() - series.ln()
    } else {
        ln_sqrt_pi + ln_gamma(b) - ln_gamma(0.5 + b)
    }
}

/// Upper quantile of Student's t with `df` degrees of freedom: the t with
/// P(T > t) = q, for q in (0, 0.5].
///
/// statrs' `inverse_cdf` (an inverse regularised beta) drifts at large df
/// (at df = 1e7 it gives 1.8266 for the 0.975 quantile, where the answer is
/// 1.959964, which made large t-test sizes too small) and is slow beyond.
/// Instead:
/// * df >= 1e5: the Cornish-Fisher expansion of t in the normal quantile z
///   (Abramowitz & Stegun 1964, *Handbook of Mathematical Functions*,
///   26.7.5), t = z + g1/df + g2/df^2 + g3/df^3, whose next term is below
///   1e-17 here;
/// * smaller df: Newton's method on statrs' survival function (accurate to
///   about 1e-11 there), from the same expansion, kept inside a bracket
///   that bisection falls back to.
fn t_upper(q: f64, df: f64) -> f64 {
    use statrs::distribution::{Continuous, StudentsT};
    if !(q > 0.0 && q <= 0.5) {
        return f64::NAN;
    }
    let Ok(t) = StudentsT::new(0.0, 1.0, df) else {
        return f64::NAN;
    };
    if q == 0.5 {
        return 0.0;
    }
    let z = z_upper(q);
    let (z3, z5, z7) = (z.powi(3), z.powi(5), z.powi(7));
    let expansion = z
        + (z3 + z) / (4.0 * df)
        + (5.0 * z5 + 16.0 * z3 + 3.0 * z) / (96.0 * df * df)
        + (3.0 * z7 + 19.0 * z5 + 17.0 * z3 - 15.0 * z) / (384.0 * df * df * df);
    if df >= 1e5 {
        return expansion;
    }
    // sf falls from 0.5 at 0; grow the upper end until it falls below q.
    // Past 1e150 (df far below 1) the quantile means nothing: no answer.
    let mut lo = 0.0;
    let mut hi = z.max(1.0);
    while t.sf(hi) > q {
        lo = hi;
        hi *= 2.0;
        if hi > 1e150 {
            return f64::NAN;
        }
    }
    let mut x = if expansion > lo && expansion < hi {
        expansion
    } else {
        0.5 * (lo + hi)
    };
    for _ in 0..200 {
        let f = t.sf(x) - q;
        if f == 0.0 {
            return x;
        }
        if f > 0.0 {
            lo = x;
        } else {
            hi = x;
        }
        let mut next = x + f / t.pdf(x);
        if !(next > lo && next < hi) {
            next = 0.5 * (lo + hi);
        }
        if (next - x).abs() <= 4.0 * f64::EPSILON * x.abs().max(1.0) {
            return next;
        }
        x = next;
    }
    x
}

/// Power of the two-sample t-test with `n_control` control units and
/// `ratio x n_control` treatment units, for a (variance-reduced) design.
/// Both tails count when the test is two-sided, as in Cohen (1988).
fn t_power(d: &Design, n_control: f64) -> f64 {
    let Metric::Mean { sd, .. } = d.metric else {
        return f64::NAN;
    };
    let sd = sd * (1.0 - d.rho * d.rho).sqrt();
    let n1 = n_control;
    let n2 = n_control * d.ratio;
    let df = n1 + n2 - 2.0;
    // A t-test needs at least one degree of freedom (three units in all);
    // below that its quantiles run off to infinity.
    if df < 1.0 {
        return 0.0;
    }
    let delta = (d.treatment_value() - mean_of(d)).abs();
    let ncp = delta / (sd * (1.0 / n1 + 1.0 / n2).sqrt());
    let sides = f64::from(d.sides.count());
    let crit = t_upper(d.comparison_alpha() / sides, df);
    if !crit.is_finite() {
        return 0.0;
    }
    // Past a million degrees of freedom the series of AS 243 (through the
    // incomplete beta) loses digits; there the normal approximation of the
    // noncentral t, Abramowitz & Stegun (1964) 26.7.10,
    // P(T <= t) ~ Phi((t (1 - 1/(4 df)) - ncp) / sqrt(1 + t^2 / (2 df))),
    // errs by O(1/df^2), far below what a size can show.
    let cdf = |x: f64| {
        if df > 1e6 {
            std_normal()
                .cdf((x * (1.0 - 1.0 / (4.0 * df)) - ncp) / (1.0 + x * x / (2.0 * df)).sqrt())
        } else {
            noncentral_t_cdf(x, df, ncp)
        }
    };
    let upper = 1.0 - cdf(crit);
    let power = if sides == 2.0 {
        upper + cdf(-crit)
    } else {
        upper
    };
    power.clamp(0.0, 1.0)
}

/// Power of the two-sample z-test on means with `n_control` control units
/// and `ratio x n_control` treatment units. Both tails count when the test
/// is two-sided, as for the t-test (Cohen 1988, chapter 2) and as
/// statsmodels' `NormalIndPower` computes it:
/// Phi(ncp - z) + Phi(-ncp - z), ncp = |delta| / (sd sqrt(1/n1 + 1/n2)).
fn z_power(d: &Design, n_control: f64) -> f64 {
    let Metric::Mean { sd, .. } = d.metric else {
        return f64::NAN;
    };
    let sd = sd * (1.0 - d.rho * d.rho).sqrt();
    let n1 = n_control;
    let n2 = n_control * d.ratio;
    let delta = (d.treatment_value() - mean_of(d)).abs();
    let ncp = delta / (sd * (1.0 / n1 + 1.0 / n2).sqrt());
    let za = z_alpha(d);
    let near = std_normal().cdf(ncp - za);
    match d.sides {
        Sides::Two => (near + std_normal().cdf(-ncp - za)).clamp(0.0, 1.0),
        Sides::One => near,
    }
}

/// Control-arm units before rounding, for a design assumed valid.
fn control_exact(d: &Design) -> Result<f64, SizingError> {
    let reduction = 1.0 - d.rho * d.rho;
    let za = z_alpha(d);
    let zb = z_upper(1.0 - d.power);
    let nf = normal_form(d);
    let n_normal = (za * nf.a + zb * nf.b).powi(2) / (nf.delta * nf.delta) * reduction;
    match d.method {
        Method::Corrected => Ok(continuity_correct(n_normal, d.ratio, nf.delta)),
        // Both tails count for z on means, as for t: the closed form
        // leaves out the far tail, so it is an upper end for the root.
        Method::Z if d.sides == Sides::Two => {
            let f = |n: f64| z_power(d, n) - d.power;
            let lo = f64::MIN_POSITIVE;
            if !(n_normal.is_finite() && n_normal > 0.0) || f(n_normal) < 0.0 {
                return Ok(n_normal);
            }
            Ok(bisect(f, lo, n_normal, 1e-12))
        }
        Method::T => {
            // Smallest real n with t power >= target: bracket from the z answer.
            let f = |n: f64| t_power(d, n) - d.power;
            let lo_start = (2.0 / (1.0 + d.ratio)).max(1.0) + 1e-9;
            let mut lo = lo_start;
            if f(lo) >= 0.0 {
                return Ok(lo);
            }
            let mut hi = (n_normal + 2.0).max(lo * 2.0);
            let mut guard = 0;
            while f(hi) < 0.0 {
                lo = hi;
                hi *= 2.0;
                guard += 1;
                if guard > 200 || !hi.is_finite() {
                    return Err(SizingError::NoSolution(
                        "the t-test power does not reach the target at any size".into(),
                    ));
                }
            }
            Ok(bisect(f, lo, hi, 1e-9))
        }
        _ => Ok(n_normal),
    }
}

/// Root of an increasing function on [lo, hi] by bisection.
fn bisect(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, rel_tol: f64) -> f64 {
    for _ in 0..300 {
        let mid = 0.5 * (lo + hi);
        if f(mid) >= 0.0 {
            hi = mid;
        } else {
            lo = mid;
        }
        if (hi - lo) <= rel_tol * hi.abs().max(1e-12) {
            break;
        }
    }
    hi
}

/// More units than any test could ever see: sizes at or above this are
/// reported as having no solution.
const MAX_UNITS: f64 = 1e15;

/// Units per arm and in total for a design.
pub fn sample_size(d: &Design) -> Result<SampleSize, SizingError> {
    d.validate()?;
    let control_exact = control_exact(d)?;
    let treatment_exact = control_exact * d.ratio;
    for exact in [control_exact, treatment_exact] {
        if !(exact.is_finite() && exact > 0.0 && exact < MAX_UNITS) {
            return Err(SizingError::NoSolution(
                format!(
                "the design needs {exact} units in one arm, beyond any traffic; use a larger MDE"
            )
                .into(),
            ));
        }
    }
    let (control, treatment, total) = whole_arms(control_exact, treatment_exact, d.arms)
        .ok_or_else(|| {
            SizingError::NoSolution(Unsolved::about(
                "arms",
                format!(
                    " is {}: {} units in each treatment arm come to more than \
                     {MAX_UNITS:e} in all, beyond any traffic; use fewer arms or a larger MDE",
                    d.arms,
                    round_up(treatment_exact)
                ),
            ))
        })?;
    Ok(SampleSize {
        control_exact,
        treatment_exact,
        control,
        treatment,
        arms: d.arms,
        total,
        comparison_alpha: d.comparison_alpha(),
    })
}

/// The exact sizes of the control and each treatment arm rounded to
/// whole units, and the total over `arms`; `None` when the total passes
/// [`MAX_UNITS`] (or the sizes are not finite). Power rises with n, so
/// rounding the exact root up gives the smallest whole size that reaches
/// the target (for the t method too); an arm holds at least one unit,
/// however large the effect. The sum is checked: many arms of a large size
/// must not wrap it around.
pub(crate) fn whole_arms(
    control_exact: f64,
    treatment_exact: f64,
    arms: u32,
) -> Option<(u64, u64, u64)> {
    let control = round_up(control_exact).max(1);
    let treatment = round_up(treatment_exact).max(1);
    let total = u64::from(arms - 1)
        .checked_mul(treatment)
        .and_then(|t| t.checked_add(control))
        .filter(|&t| (t as f64) < MAX_UNITS && treatment_exact.is_finite())?;
    Some((control, treatment, total))
}

/// Rounds a size up to whole units, forgiving floating-point noise just
/// above an integer (1e-12 relative: at 1e-9, ten million units could be
/// rounded down by a hundredth of a unit, below the target power).
fn round_up(x: f64) -> u64 {
    let r = x.round();
    if (x - r).abs() <= 1e-12 * x.abs().max(1.0) {
        r as u64
    } else {
        x.ceil() as u64
    }
}

/// The power a design reaches with `n_control` control units (treatment arms
/// at `ratio x n_control`). The design's own `power` field is ignored.
pub fn achieved_power(d: &Design, n_control: f64) -> Result<f64, SizingError> {
    d.validate_inputs(false)?;
    if !(n_control > 0.0 && n_control.is_finite()) {
        return Err(SizingError::OutOfRange {
            field: "n",
            value: n_control,
            expected: "> 0 units per arm",
        });
    }
    let nf = normal_form(d);
    let reduction = 1.0 - d.rho * d.rho;
    let za = z_alpha(d);
    let power = match d.method {
        Method::T => t_power(d, n_control),
        Method::Z => z_power(d, n_control),
        _ => {
            let n_for_normal = match d.method {
                Method::Corrected => continuity_uncorrect(n_control, d.ratio, nf.delta),
                _ => n_control,
            };
            // Solve (za A + zb B)^2 / delta^2 x reduction = n for zb.
            let zb = ((n_for_normal / reduction).sqrt() * nf.delta.abs() - za * nf.a) / nf.b;
            std_normal().cdf(zb)
        }
    };
    // Inputs at the edge of floating point (e.g. a ratio of 1e231) can
    // overflow the arithmetic; say so rather than return NaN.
    if power.is_finite() {
        Ok(power)
    } else {
        Err(SizingError::NoSolution(
            "the power cannot be computed for numbers this extreme; check the design's inputs"
                .into(),
        ))
    }
}

/// The smallest effect (in the design's own effect kind, relative or
/// absolute, with the design's sign) that `n_control` control units detect
/// at the design's power. The design's own effect gives the direction.
pub fn minimum_detectable_effect(d: &Design, n_control: f64) -> Result<f64, SizingError> {
    d.validate()?;
    if !(n_control > 0.0 && n_control.is_finite()) {
        return Err(SizingError::OutOfRange {
            field: "n",
            value: n_control,
            expected: "> 0 units per arm",
        });
    }
    let sign = match d.effect {
        Effect::Relative(x) | Effect::Absolute(x) => x.signum(),
    };
    let with_effect = |e: f64| -> Design {
        let effect = match d.effect {
            Effect::Relative(_) => Effect::Relative(sign * e),
            Effect::Absolute(_) => Effect::Absolute(sign * e),
        };
        Design { effect, ..*d }
    };
    // The largest magnitude the metric allows in this direction.
    let max_mag = match (d.metric, d.effect) {
        (Metric::Rate { baseline }, Effect::Relative(_)) => {
            if sign > 0.0 {
                (1.0 - baseline) / baseline
            } else {
                1.0
            }
        }
        (Metric::Rate { baseline }, Effect::Absolute(_)) => {
            if sign > 0.0 {
                1.0 - baseline
            } else {
                baseline
            }
        }
        (Metric::Mean { sd, mean }, Effect::Absolute(_)) => {
            let _ = mean;
            sd * 1e6
        }
        (Metric::Mean { sd, mean }, Effect::Relative(_)) => sd * 1e6 / mean.abs(),
    };
    let hi_probe = max_mag * (1.0 - 1e-9);
    let power_at = |e: f64| -> f64 { achieved_power(&with_effect(e), n_control).unwrap_or(0.0) };
    if power_at(hi_probe) < d.power {
        return Err(SizingError::NoSolution(
            format!(
            "{n_control:.0} units per arm cannot reach power {} for any effect in this direction",
            d.power
        )
            .into(),
        ));
    }
    let e = bisect(|e| power_at(e) - d.power, 0.0, hi_probe, 1e-10);
    Ok(sign * e)
}

/// Days one test needs at a constant daily rate: `total_units` over all arms,
/// `daily_units` eligible per day, a `share` of them in the test. Never fewer
/// than `min_days`; with `whole_weeks`, rounded up to a multiple of seven so
/// every weekday is covered equally (common practice; Kohavi, Tang & Xu
/// 2020, *Trustworthy Online Controlled Experiments*, ch. 4).
pub fn days_needed(
    total_units: u64,
    daily_units: f64,
    share: f64,
    min_days: u32,
    whole_weeks: bool,
) -> Result<u64, SizingError> {
    if !(daily_units > 0.0 && daily_units.is_finite()) {
        return Err(SizingError::OutOfRange {
            field: "daily",
            value: daily_units,
            expected: "> 0 units per day",
        });
    }
    if !(share > 0.0 && share <= 1.0) {
        return Err(SizingError::OutOfRange {
            field: "share",
            value: share,
            expected: "in (0, 1]",
        });
    }
    let per_day = daily_units * share;
    let raw = (total_units as f64 / per_day).ceil();
    if raw > 1e9 {
        return Err(SizingError::NoSolution(
            format!("{total_units} units at {per_day:.1} a day take more than a million years")
                .into(),
        ));
    }
    Ok(round_days(raw as u64, min_days, whole_weeks))
}

/// Applies the minimum run and whole-week rounding to a run length in days.
pub fn round_days(days: u64, min_days: u32, whole_weeks: bool) -> u64 {
    let d = days.max(u64::from(min_days)).max(1);
    if whole_weeks {
        d.div_ceil(7) * 7
    } else {
        d
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn rate(p: f64, mde: f64) -> Design {
        Design::new(Metric::Rate { baseline: p }, Effect::Relative(mde))
    }

    #[test]
    fn noncentral_t_reduces_to_central_t_at_zero_ncp() {
        use statrs::distribution::StudentsT;
        let t = StudentsT::new(0.0, 1.0, 7.0).unwrap();
        for x in [-3.0, -1.0, 0.5, 2.0, 4.0] {
            assert_abs_diff_eq!(noncentral_t_cdf(x, 7.0, 0.0), t.cdf(x), epsilon = 1e-10);
        }
    }

    #[test]
    fn noncentral_t_matches_reference_values() {
        // (t, df, ncp, scipy.stats.nct.cdf(t, df, ncp) with scipy 1.17.1, tolerance).
        // The last two: millions of degrees of freedom, t = its 0.975
        // quantile, where the plain (1 - x)^b and ln Gamma difference lost 1e-8.
        let cases = [
            (2.0, 10.0, 1.0, 0.8076115625303752, 1e-9),
            (-1.5, 4.0, 0.5, 0.04337356266476112, 1e-9),
            (3.0, 30.0, 2.5, 0.6709221372818337, 1e-9),
            (1.9599642217672055, 1e7, 2.8, 0.20044417208466286, 2e-9),
            (1.9599663568141072, 1e6, 2.8, 0.2004448505306511, 1e-10),
        ];
        for (t, df, ncp, want, eps) in cases {
            assert_abs_diff_eq!(noncentral_t_cdf(t, df, ncp), want, epsilon = eps);
        }
        // Large df approaches the normal: P(T <= 3) with ncp 1 ~ Phi(2).
        assert_abs_diff_eq!(
            noncentral_t_cdf(3.0, 1e6, 1.0),
            std_normal().cdf(2.0),
            epsilon = 1e-4
        );
    }

    #[test]
    fn t_quantile_is_accurate_at_every_df() {
        // scipy.stats.t.isf(q, df), computed with scipy 1.17.1. statrs'
        // own inverse gives 1.8266 at df = 1e7 (the bug this guards).
        let cases = [
            (0.025, 1e7, 1.9599642217672055),
            (0.025, 3.4e6, 1.9599646822671306),
            (0.025, 6e5, 1.9599679383332786),
            (0.025, 1e9, 1.9599639869123253),
            (0.0125, 3.0, 4.176534846104498),
            (0.05, 1.5, 3.7051808200967518),
            (0.005, 40.0, 2.7044592674331622),
        ];
        for (q, df, want) in cases {
            assert_abs_diff_eq!(t_upper(q, df), want, epsilon = 1e-8);
        }
        assert_abs_diff_eq!(t_upper(0.5, 20.0), 0.0, epsilon = 1e-12);
    }

    #[test]
    fn t_sizes_stay_accurate_for_millions_of_units() {
        // d = 0.003 at two-sided alpha 0.05, power 0.8, statsmodels 0.15.0:
        // TTestIndPower().solve_power(0.003, alpha=0.05, power=0.8) =
        // 1744192.184659929 per arm, and the normal test with both tails,
        // NormalIndPower().solve_power(...) = 1744191.2242947044; the t
        // test costs about z^2/4 ~ 1 unit more. Before t_upper was fixed,
        // sluice answered 1741422.7, 2,770 units short.
        let d = Design {
            method: Method::T,
            ..Design::new(Metric::Mean { mean: 0.0, sd: 1.0 }, Effect::Absolute(0.003))
        };
        let n = sample_size(&d).unwrap();
        assert_abs_diff_eq!(n.control_exact, 1744192.184659929, epsilon = 0.5);
        let extra = n.control_exact - 1744191.2242947044;
        assert!((0.5..1.5).contains(&extra), "t costs {extra} units more");
    }

    #[test]
    fn pooled_is_the_default_and_matches_fleiss_closed_form() {
        // p1 = 0.10, p2 = 0.11: the closed form by hand with z(0.975) = 1.959964,
        // z(0.8) = 0.841621, pbar = 0.105.
        let d = rate(0.10, 0.10);
        let n = sample_size(&d).unwrap();
        let pbar: f64 = 0.105;
        let a = (2.0 * pbar * (1.0 - pbar)).sqrt();
        let b = (0.1f64 * 0.9 + 0.11 * 0.89).sqrt();
        let expect = (1.959964 * a + 0.841621 * b).powi(2) / 0.0001;
        assert_abs_diff_eq!(n.control_exact, expect, epsilon = 0.5);
        assert_eq!(n.control, n.treatment);
        assert_eq!(n.total, 2 * n.control);
        assert_eq!(d.method, Method::Pooled);
    }

    #[test]
    fn continuity_correction_round_trips() {
        for n in [50.0, 1000.0, 123456.0] {
            let cc = continuity_correct(n, 1.5, 0.02);
            assert!(cc > n);
            assert_abs_diff_eq!(continuity_uncorrect(cc, 1.5, 0.02), n, epsilon = 1e-6 * n);
        }
    }

    #[test]
    fn power_at_the_exact_size_is_the_target_for_every_method() {
        for method in [
            Method::Pooled,
            Method::Unpooled,
            Method::Corrected,
            Method::Arcsine,
        ] {
            let d = Design {
                method,
                ratio: 2.0,
                arms: 3,
                ..rate(0.05, 0.2)
            };
            let n = sample_size(&d).unwrap();
            assert_abs_diff_eq!(
                achieved_power(&d, n.control_exact).unwrap(),
                0.8,
                epsilon = 1e-6
            );
        }
        for method in [Method::T, Method::Z] {
            let d = Design {
                method,
                ..Design::new(
                    Metric::Mean {
                        mean: 50.0,
                        sd: 20.0,
                    },
                    Effect::Absolute(3.0),
                )
            };
            let n = sample_size(&d).unwrap();
            assert_abs_diff_eq!(
                achieved_power(&d, n.control_exact).unwrap(),
                0.8,
                epsilon = 1e-6
            );
            assert!(achieved_power(&d, n.control as f64).unwrap() >= 0.8);
        }
    }

    #[test]
    fn mde_inverts_sample_size() {
        let designs = [
            rate(0.2, 0.05),
            Design {
                method: Method::Arcsine,
                ..rate(0.3, -0.1)
            },
            Design {
                method: Method::Corrected,
                sides: Sides::One,
                ..rate(0.02, 0.3)
            },
            Design::new(
                Metric::Mean {
                    mean: 12.0,
                    sd: 30.0,
                },
                Effect::Relative(0.04),
            ),
        ];
        for d in designs {
            let n = sample_size(&d).unwrap();
            let e = minimum_detectable_effect(&d, n.control_exact).unwrap();
            let want = match d.effect {
                Effect::Relative(x) | Effect::Absolute(x) => x,
            };
            assert_abs_diff_eq!(e, want, epsilon = 1e-6 * want.abs().max(1.0));
        }
    }

    #[test]
    fn cuped_scales_the_sample_by_one_minus_rho_squared() {
        let base = sample_size(&rate(0.1, 0.1)).unwrap();
        let reduced = sample_size(&Design {
            rho: 0.5,
            ..rate(0.1, 0.1)
        })
        .unwrap();
        assert_abs_diff_eq!(
            reduced.control_exact,
            base.control_exact * 0.75,
            epsilon = 1e-6
        );
    }

    #[test]
    fn multi_arm_corrections() {
        let d = Design {
            arms: 4,
            ..rate(0.1, 0.1)
        };
        assert_abs_diff_eq!(d.comparison_alpha(), 0.05 / 3.0, epsilon = 1e-15);
        let s = Design {
            correction: Correction::Sidak,
            ..d
        };
        assert_abs_diff_eq!(s.comparison_alpha(), 0.016952, epsilon = 1e-6);
        let n = sample_size(&d).unwrap();
        assert_eq!(n.total, 4 * n.control);
        assert!(n.control > sample_size(&rate(0.1, 0.1)).unwrap().control);
    }

    #[test]
    fn invalid_inputs_are_errors_not_panics() {
        let changes: [fn(&mut Design); 8] = [
            |d| d.alpha = 0.0,
            |d| d.alpha = 0.6,
            |d| d.power = 0.04,
            |d| d.power = 1.0,
            |d| d.rho = 1.0,
            |d| d.arms = 1,
            |d| d.ratio = 0.0,
            |d| d.method = Method::T,
        ];
        let changed = changes.into_iter().map(|change| {
            let mut d = rate(0.1, 0.1);
            change(&mut d);
            d
        });
        let bad = [
            rate(0.0, 0.1),
            rate(1.0, 0.1),
            rate(0.95, 0.1),
            rate(0.1, 0.0),
            rate(f64::NAN, 0.1),
            rate(0.1, f64::INFINITY),
        ]
        .into_iter()
        .chain(changed);
        for d in bad {
            assert!(sample_size(&d).is_err(), "{d:?} should be rejected");
        }
        assert!(days_needed(100, 10.0, 0.0, 14, true).is_err());
        assert!(days_needed(100, 10.0, 1.5, 14, true).is_err());
        assert!(days_needed(100, 0.0, 0.5, 14, true).is_err());
    }

    #[test]
    fn sizes_beyond_any_traffic_are_errors_not_wrapped_totals() {
        // 1.05e13 units per arm over 2^32 - 2 treatment arms overflowed u64
        // and wrapped to 7.95e18 in a release build (a panic in debug).
        let many_arms = Design {
            arms: u32::MAX,
            effect: Effect::Absolute(1e-6),
            ..rate(0.1, 0.1)
        };
        let err = sample_size(&many_arms).unwrap_err();
        assert!(err.to_string().contains("`arms`"), "{err}");
        // A huge ratio makes the treatment arm infinite.
        let lopsided = Design {
            ratio: 1e300,
            ..rate(0.1, 0.1)
        };
        assert!(sample_size(&lopsided).is_err());
        // Far from the limit, totals are exact.
        let four = sample_size(&Design {
            arms: 4,
            ratio: 2.0,
            ..rate(0.1, 0.1)
        })
        .unwrap();
        assert_eq!(four.total, four.control + 3 * four.treatment);
    }

    #[test]
    fn days_needed_applies_minimum_run_and_whole_weeks() {
        // 10,000 units at 1,000 a day and 50% share: 20 days, rounded to 21.
        assert_eq!(days_needed(10_000, 1000.0, 0.5, 14, true).unwrap(), 21);
        assert_eq!(days_needed(10_000, 1000.0, 0.5, 14, false).unwrap(), 20);
        // Tiny tests still run the minimum.
        assert_eq!(days_needed(10, 1000.0, 1.0, 14, true).unwrap(), 14);
        assert_eq!(days_needed(10, 1000.0, 1.0, 10, true).unwrap(), 14);
        assert_eq!(days_needed(10, 1000.0, 1.0, 10, false).unwrap(), 10);
    }
}

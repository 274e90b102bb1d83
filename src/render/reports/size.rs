//! The text of `sluice size`: the design, each arm's units, the achieved
//! power, the looks of a group-sequential design and the duration. The
//! report comes from `cli::size` over [`crate::sizing`].

use crate::render::words::{self, EFFECT_DIGITS};
use crate::sizing::report::{LooksReport, SizeReport};
use crate::sizing::{Effect, Metric, Sides};
use crate::words::thousands as fmt_units;
use crate::words::trimmed;

/// The text `sluice size` prints.
pub fn text(r: &SizeReport) -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let metric = match r.metric {
        Metric::Rate { baseline } => format!(
            "rate, baseline {}% -> treatment {}%",
            trimmed(baseline * 100.0, 4),
            trimmed(r.treatment_value * 100.0, 4)
        ),
        Metric::Mean { mean, sd } => format!(
            "mean, baseline {} (sd {}) -> treatment {}",
            trim_float(mean),
            trim_float(sd),
            trim_float(r.treatment_value)
        ),
    };
    let rate = matches!(r.metric, Metric::Rate { .. });
    let effect = |e: Effect| match e {
        Effect::Relative(x) => format!(
            "{} relative",
            words::signed(x, words::relative(x, EFFECT_DIGITS))
        ),
        Effect::Absolute(x) => format!(
            "{} absolute",
            words::signed(x, words::absolute(x, rate, EFFECT_DIGITS))
        ),
    };
    match (r.margin, r.null_value) {
        (Some(margin), Some(null)) => {
            let metric = match r.metric {
                Metric::Rate { baseline } => {
                    format!("rate, baseline {}%", trimmed(baseline * 100.0, 4))
                }
                Metric::Mean { mean, sd } => format!(
                    "mean, baseline {} (sd {})",
                    trim_float(mean),
                    trim_float(sd)
                ),
            };
            let harm = match margin {
                Effect::Relative(x) | Effect::Absolute(x) if x < 0.0 => "a rise",
                _ => "a fall",
            };
            let null = match r.metric {
                Metric::Rate { .. } => format!("{}%", trimmed(null * 100.0, 4)),
                Metric::Mean { .. } => trim_float(null),
            };
            let _ = writeln!(s, "metric      {metric}");
            let _ = writeln!(
                s,
                "guardrail   non-inferiority: margin {} ({harm} is the harm), \
                 H0 treatment at {null}, true difference 0",
                effect(margin).trim_start_matches(['+', '-'])
            );
        }
        _ => {
            let _ = writeln!(s, "metric      {metric}");
            let _ = writeln!(s, "effect      {}", effect(r.effect));
        }
    }
    let sides = match r.sides {
        Sides::One => "one-sided",
        Sides::Two => "two-sided",
    };
    let _ = write!(s, "test        alpha {} {sides}", trim_float(r.alpha));
    if r.arms > 2 {
        let _ = write!(
            s,
            " ({} per comparison, {})",
            trim_float(r.comparison_alpha),
            r.correction.name()
        );
    }
    let _ = writeln!(s, ", power {}, method {}", trim_float(r.power), r.method);
    if r.rho > 0.0 {
        let _ = writeln!(
            s,
            "covariate   rho {} (size x {})",
            trim_float(r.rho),
            trimmed(1.0 - r.rho * r.rho, 4)
        );
    }
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "control     {:>12} units  ({:.2} before rounding)",
        fmt_units(r.control),
        r.control_exact
    );
    let label = if r.arms > 2 {
        format!("treatment x{}", r.arms - 1)
    } else {
        "treatment".to_string()
    };
    let _ = writeln!(
        s,
        "{label:<11} {:>12} units  ({:.2} before rounding, ratio {})",
        fmt_units(r.treatment),
        r.treatment_exact,
        trim_float(r.ratio)
    );
    let _ = writeln!(
        s,
        "total       {:>12} units over {} arms",
        fmt_units(r.total),
        r.arms
    );
    let _ = writeln!(s, "power       {:.4} at these sizes", r.achieved_power);
    if let Some(l) = &r.looks {
        looks_text(&mut s, l, r.ratio);
    }
    if let (Some(days), Some(daily)) = (r.days, r.daily) {
        let weeks = if !r.whole_weeks {
            String::new()
        } else {
            format!(" ({} weeks)", days / 7)
        };
        let _ = writeln!(
            s,
            "duration    {days} days{weeks} at {} units a day x {}% share (minimum {} days)",
            fmt_units(daily.round() as u64),
            trim_float(r.share.unwrap_or(1.0) * 100.0),
            r.min_days
        );
    }
    s
}

/// The looks of a group-sequential design: boundaries, stop chances and
/// the expected sizes.
fn looks_text(s: &mut String, l: &LooksReport, ratio: f64) {
    use std::fmt::Write as _;
    let _ = writeln!(
        s,
        "looks       {} ({}), maximum {:.4} x the fixed {} units per control arm",
        l.looks,
        l.boundary,
        l.inflation,
        fmt_units(l.fixed_control_exact.ceil() as u64)
    );
    let _ = writeln!(
        s,
        "            look  information  control units  boundary z  stop chance"
    );
    let control_max = l.fixed_control_exact * l.inflation;
    for (j, ((t, c), p)) in l
        .information
        .iter()
        .zip(&l.boundaries)
        .zip(&l.stop_probabilities)
        .enumerate()
    {
        let _ = writeln!(
            s,
            "            {:>4}  {:>10.1}%  {:>13}  {:>10.3}  {:>10.1}%",
            j + 1,
            t * 100.0,
            fmt_units((control_max * t).ceil() as u64),
            c,
            p * 100.0
        );
    }
    let _ = writeln!(
        s,
        "expected    {} control units with the planned effect, {} with none (ratio {ratio})",
        fmt_units(l.expected_control_exact_h1.ceil() as u64),
        fmt_units(l.expected_control_exact_h0.ceil() as u64)
    );
}

/// A number as people read it: at most six decimals, no trailing zeros.
fn trim_float(x: f64) -> String {
    trimmed(x, 6)
}

//! The text of `sluice detect`: the design, the sample, the looks or the
//! guardrail, the effect detected (or given) and its power. The report
//! comes from `cli::detect` over [`crate::sizing`].

use crate::render::words::{self, EFFECT_DIGITS};
use crate::sizing::report::{DetectReport, Harm};
use crate::sizing::{Metric, Sides};
use crate::words::{thousands as fmt_units, Count};

/// The text `sluice detect` prints.
pub fn text(r: &DetectReport) -> String {
    let power_asked = r.power_given;
    use std::fmt::Write as _;
    let trim = |x: f64| crate::words::trimmed(x, 6);
    let mut s = String::new();
    let (metric, value) = match r.metric {
        Metric::Rate { baseline } => (
            format!(
                "rate, baseline {}%",
                crate::words::trimmed(baseline * 100.0, 4)
            ),
            format!("{}%", crate::words::trimmed(r.treatment_value * 100.0, 4)),
        ),
        Metric::Mean { mean, sd } => (
            format!("mean, baseline {} (sd {})", trim(mean), trim(sd)),
            trim(r.treatment_value),
        ),
    };
    let _ = writeln!(s, "metric      {metric}");
    let sides = match r.sides {
        Sides::One => "one-sided",
        Sides::Two => "two-sided",
    };
    let _ = write!(s, "test        alpha {} {sides}", r.alpha);
    if r.arms > 2 {
        let _ = write!(
            s,
            " ({} per comparison, {})",
            trim(r.comparison_alpha),
            r.correction.name()
        );
    }
    let _ = writeln!(s, ", method {}", r.method);
    let _ = write!(
        s,
        "sample      {} control, {} in {}",
        fmt_units(r.control.round() as u64),
        fmt_units(r.treatment.round() as u64),
        if r.arms == 2 {
            "the treatment arm".to_string()
        } else {
            format!(
                "each of {} {}",
                r.arms - 1,
                Count("treatment arm", r.arms as usize - 1)
            )
        }
    );
    if let (Some(daily), Some(share), Some(days)) = (r.daily, r.share, r.days) {
        let _ = write!(
            s,
            " ({} days at {} units a day x {}% share)",
            trim(days),
            fmt_units(daily.round() as u64),
            trim(share * 100.0)
        );
    }
    let _ = writeln!(s);
    if let Some(l) = &r.looks {
        let _ = writeln!(
            s,
            "looks       {} ({}): the sample is the maximum, {:.4} x a single read's;\n            \
             it detects what {} control units read once would",
            l.looks,
            l.boundary,
            l.inflation,
            fmt_units(l.single_read_control.round() as u64)
        );
    }
    if let Some(g) = &r.guardrail {
        let _ = writeln!(
            s,
            "guardrail   non-inferiority, one-sided: a {} is the harm",
            match g.harm {
                Harm::Fall => "fall",
                Harm::Rise => "rise",
            }
        );
    }
    let relative = match r.mde {
        Some(m) => format!(
            "{} relative, ",
            words::signed(m, words::relative(m, EFFECT_DIGITS))
        ),
        None => String::new(),
    };
    let rate = matches!(r.metric, Metric::Rate { .. });
    let absolute = format!(
        "{} absolute",
        words::signed(r.mde_abs, words::absolute(r.mde_abs, rate, EFFECT_DIGITS))
    );
    let (label, value_is, asked, found) = match (&r.guardrail, power_asked) {
        (None, true) => ("effect", "treatment", " for this effect", ""),
        (None, false) => (
            "detects",
            "treatment",
            "",
            ": the smallest effect found this often",
        ),
        (Some(_), true) => ("margin", "treatment under H0", " for this margin", ""),
        (Some(_), false) => (
            "rules out",
            "treatment under H0",
            "",
            ": the smallest harm ruled out this often when there is none",
        ),
    };
    let _ = writeln!(s, "{label:<11} {relative}{absolute} ({value_is} {value})");
    let _ = writeln!(s, "power       {:.4}{asked}{found}", r.power);
    s
}

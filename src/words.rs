//! Wording of numbers shared by every layer (reasons, advice, tables,
//! reports, diagnostics), so that a count, a share or a plural reads the
//! same everywhere. Nothing else in the crate formats a percentage, groups
//! thousands or picks a plural ending by hand.

use std::fmt;

/// A whole number with thousands separators: `1234567` -> `1,234,567`.
pub fn thousands(n: u64) -> String {
    let digits = n.to_string();
    let mut out = String::with_capacity(digits.len() + digits.len() / 3);
    for (i, c) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

/// A unit count held as a float, rounded to whole units with separators;
/// `?` for a value that is not a finite count.
pub fn units(x: f64) -> String {
    if x.is_finite() && x >= 0.0 {
        thousands(x.round() as u64)
    } else {
        "?".to_string()
    }
}

/// A share (a fraction, 0.25) as a percentage: whole percent when it is
/// within 0.05 points of one (`25%`), else one decimal (`12.5%`).
pub fn percent(share: f64) -> String {
    let p = share * 100.0;
    if (p - p.round()).abs() < 0.05 {
        format!("{:.0}%", p)
    } else {
        format!("{:.1}%", p)
    }
}

/// A gap as a percentage, as [`percent`] except that a gap that is not
/// zero never reads `0%`: under 0.05 points it keeps one significant digit
/// (`0.03%`).
pub fn percent_gap(share: f64) -> String {
    let p = share * 100.0;
    if p != 0.0 && p.abs() < 0.05 {
        format!("{}%", significant(p, 1))
    } else {
        percent(share)
    }
}

/// A relative change in percent, signed and whole (`+2%`, `-18%`); under
/// half a percent one significant digit (`-0.4%`, `+0.03%`), so that a
/// small change never reads `-0%`, and no change reads `0%`.
pub fn percent_change(pct: f64) -> String {
    if pct == 0.0 {
        "0%".to_string()
    } else if pct.abs() < 0.5 {
        let sign = if pct < 0.0 { "-" } else { "+" };
        format!("{sign}{}%", significant(pct.abs(), 1))
    } else {
        format!("{pct:+.0}%")
    }
}

/// A number rounded to at most `decimals` places, without trailing zeros:
/// `trimmed(33.0, 2)` is `33`, `trimmed(12.50, 2)` is `12.5`,
/// `trimmed(0.1 * 70.0, 6)` is `7`. Negative zero prints as `0`.
pub fn trimmed(x: f64, decimals: usize) -> String {
    let s = format!("{x:.decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.')
    } else {
        s.as_str()
    };
    if s == "-0" {
        "0".to_string()
    } else {
        s.to_string()
    }
}

/// A number to `digits` significant digits, without trailing zeros and
/// never in exponent form: `significant(0.012345, 3)` is `0.0123`,
/// `significant(14.8, 3)` is `14.8`, `significant(1234.6, 3)` is `1235`
/// (whole numbers keep every digit).
pub fn significant(x: f64, digits: usize) -> String {
    if x == 0.0 || !x.is_finite() {
        return trimmed(x, 0);
    }
    let magnitude = x.abs().log10().floor() as i64;
    let decimals = (digits as i64 - 1 - magnitude).clamp(0, 12) as usize;
    trimmed(x, decimals)
}

/// A p-value as a report gives it: `p = 0.013` (two significant digits),
/// or `p < 0.0001` below that.
pub fn p_value(p: f64) -> String {
    if p < 1e-4 {
        "p < 0.0001".to_string()
    } else {
        format!("p = {}", significant(p, 2))
    }
}

/// A noun that agrees with a count, after just's `Count`: `Count("test", 1)`
/// shows `test`, `Count("test", 3)` shows `tests`. For a word whose plural
/// is not a plain `s`, use [`agree`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Count<'a>(pub &'a str, pub usize);

impl fmt::Display for Count<'_> {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.1 == 1 {
            f.write_str(self.0)
        } else {
            write!(f, "{}s", self.0)
        }
    }
}

/// The form of a word that agrees with `n`: `agree("does", "do", n)`.
pub fn agree<'a>(one: &'a str, many: &'a str, n: usize) -> &'a str {
    if n == 1 {
        one
    } else {
        many
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn significant_digits_without_exponents() {
        assert_eq!(significant(0.012345, 3), "0.0123");
        assert_eq!(significant(14.8, 3), "14.8");
        assert_eq!(significant(1234.6, 3), "1235");
        assert_eq!(significant(-0.094, 2), "-0.094");
        assert_eq!(significant(0.0, 3), "0");
    }

    #[test]
    fn groups_digits_in_threes() {
        assert_eq!(thousands(0), "0");
        assert_eq!(thousands(999), "999");
        assert_eq!(thousands(1000), "1,000");
        assert_eq!(thousands(1_234_567), "1,234,567");
        assert_eq!(thousands(u64::MAX), "18,446,744,073,709,551,615");
        assert_eq!(units(629_759.6), "629,760");
        assert_eq!(units(f64::NAN), "?");
        assert_eq!(units(-1.0), "?");
    }

    #[test]
    fn small_gaps_and_changes_never_read_zero() {
        assert_eq!(percent_gap(0.000307), "0.03%");
        assert_eq!(percent_gap(0.003), "0.3%");
        assert_eq!(percent_gap(0.087), "8.7%");
        assert_eq!(percent_gap(0.0), "0%");
        assert_eq!(percent_change(-0.403), "-0.4%");
        assert_eq!(percent_change(0.031), "+0.03%");
        assert_eq!(percent_change(-18.37), "-18%");
        assert_eq!(percent_change(2.0), "+2%");
        assert_eq!(percent_change(0.0), "0%");
    }

    #[test]
    fn percent_drops_needless_decimals() {
        assert_eq!(percent(0.4), "40%");
        assert_eq!(percent(1.0), "100%");
        assert_eq!(percent(0.125), "12.5%");
        assert_eq!(percent(0.3), "30%");
        assert_eq!(percent(0.1204), "12%");
        assert_eq!(percent(0.1 * 0.7), "7%");
        assert_eq!(percent(0.0), "0%");
    }

    #[test]
    fn trimmed_rounds_then_drops_zeros() {
        assert_eq!(trimmed(33.0, 2), "33");
        assert_eq!(trimmed(12.5, 2), "12.5");
        assert_eq!(trimmed(0.1 * 70.0, 6), "7");
        assert_eq!(trimmed(0.123456789, 4), "0.1235");
        assert_eq!(trimmed(1500.0, 0), "1500");
        assert_eq!(trimmed(-0.0001, 2), "0");
    }

    #[test]
    fn counts_agree_with_their_number() {
        assert_eq!(format!("{} {}", 1, Count("test", 1)), "1 test");
        assert_eq!(format!("{} {}", 0, Count("test", 0)), "0 tests");
        assert_eq!(format!("{} {}", 3, Count("problem", 3)), "3 problems");
        assert_eq!(agree("does", "do", 1), "does");
        assert_eq!(agree("does", "do", 2), "do");
    }
}

/// `x` to 12 significant digits: a value formed by one product or
/// quotient of the user's decimals (0.05 x 0.031) prints as the decimal
/// it is (`0.00155`), not with float noise (`0.0015500000000000002`).
pub fn tidy(x: f64) -> f64 {
    if !x.is_finite() || x == 0.0 {
        return x;
    }
    format!("{x:.11e}").parse().unwrap_or(x)
}

#[cfg(test)]
mod tidy_tests {
    use super::tidy;

    #[test]
    fn tidy_drops_float_noise_and_keeps_the_value() {
        assert_eq!(0.05 * 0.031, 0.0015500000000000002);
        assert_eq!(tidy(0.05 * 0.031).to_string(), "0.00155");
        assert_eq!(tidy(0.41 * 0.2).to_string(), "0.082");
        assert_eq!(tidy(1.0 / 3.0), 0.333333333333);
        assert_eq!(tidy(-2.5e-9), -2.5e-9);
        assert_eq!(tidy(0.0), 0.0);
    }
}

//! `--scale POOL=FACTOR[@FROM]`: what-ifs on a pool's traffic. Parsing the
//! argument, and a new portfolio with the scales applied to its forecasts;
//! the portfolio it came from is left as validated.

use super::ReplanError;
use crate::portfolio::{Portfolio, Scale};
use chrono::NaiveDate;

/// `--scale POOL=FACTOR[@FROM]`: a lasting change of a pool's traffic.
#[derive(Debug, Clone, PartialEq)]
pub struct ScaleArg {
    /// The pool's id.
    pub pool: String,
    /// The multiplier, >= 0; 0.7 is a 30% drop.
    pub factor: f64,
    /// From this day on; the re-plan's today when not given.
    pub from: Option<NaiveDate>,
}

impl std::str::FromStr for ScaleArg {
    type Err = String;

    fn from_str(s: &str) -> Result<ScaleArg, String> {
        let hint = "write POOL=FACTOR or POOL=FACTOR@YYYY-MM-DD, e.g. `checkout=0.7@2027-02-01`";
        let (pool, rest) = s
            .split_once('=')
            .ok_or_else(|| format!("`{s}` has no `=`; {hint}"))?;
        let (factor, from) = match rest.split_once('@') {
            Some((f, d)) => (f, Some(d)),
            None => (rest, None),
        };
        let factor: f64 = factor
            .trim()
            .parse()
            .map_err(|_| format!("`{factor}` is not a number; {hint}"))?;
        if !(factor.is_finite() && factor >= 0.0) {
            return Err(format!(
                "the factor must be a number >= 0 (0.7 for a 30% drop); {hint}"
            ));
        }
        let from = match from {
            Some(d) => Some(
                NaiveDate::parse_from_str(d.trim(), "%Y-%m-%d")
                    .map_err(|_| format!("`{d}` is not a date; {hint}"))?,
            ),
            None => None,
        };
        let pool = pool.trim().to_string();
        if pool.is_empty() {
            return Err(format!("the pool is missing; {hint}"));
        }
        Ok(ScaleArg { pool, factor, from })
    }
}

/// A copy of `portfolio` with the `--scale` what-ifs added to its pools'
/// forecasts, in the order given; a scale without a date starts `today`.
/// An unknown pool is an error naming the closest defined ones.
pub fn with_scales(
    portfolio: &Portfolio,
    scales: &[ScaleArg],
    today: NaiveDate,
) -> Result<Portfolio, ReplanError> {
    let mut scaled = portfolio.clone();
    for s in scales {
        let Some(i) = scaled.pool_index(&s.pool) else {
            let ids: Vec<&str> = scaled.pools.iter().map(|p| p.id.as_str()).collect();
            let closest = crate::diagnostic::closest_first(&s.pool, &ids);
            return Err(ReplanError::UnknownScalePool {
                pool: s.pool.clone(),
                closest: closest.into_iter().map(str::to_string).collect(),
            });
        };
        scaled.pools[i].forecast.scales.push(Scale {
            from: s.from.unwrap_or(today),
            factor: s.factor,
        });
    }
    Ok(scaled)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn scale_args_parse_with_and_without_a_date() {
        let s: ScaleArg = "home=0.7@2027-02-03".parse().unwrap();
        assert_eq!(
            s,
            ScaleArg {
                pool: "home".into(),
                factor: 0.7,
                from: NaiveDate::from_ymd_opt(2027, 2, 3),
            }
        );
        let s: ScaleArg = " search = 0 ".parse().unwrap();
        assert_eq!((s.pool.as_str(), s.factor, s.from), ("search", 0.0, None));
        let s: ScaleArg = "app-onboarding=1.25".parse().unwrap();
        assert_eq!(s.factor, 1.25);
    }

    #[test]
    fn bad_scale_args_say_what_is_wrong_and_how_to_write_it() {
        for (arg, says) in [
            ("home", "has no `=`"),
            ("home=lots", "`lots` is not a number"),
            ("home=-0.3", "must be a number >= 0"),
            ("home=NaN", "must be a number >= 0"),
            ("home=inf", "must be a number >= 0"),
            ("home=0.7@next-week", "`next-week` is not a date"),
            ("home=0.7@2027-02-30", "is not a date"),
            ("=0.7", "the pool is missing"),
        ] {
            let e = arg.parse::<ScaleArg>().unwrap_err();
            assert!(e.contains(says), "{arg}: {e}");
            assert!(e.contains("POOL=FACTOR@YYYY-MM-DD"), "{arg}: {e}");
        }
    }
}

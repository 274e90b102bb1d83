//! The sample-ratio check: do a test's per-arm counts fit the split its
//! design asked for?
//!
//! Pearson's chi-square goodness-of-fit test (Pearson 1900, "On the
//! criterion that a given system of deviations from the probable ...",
//! Philosophical Magazine 50(302), 157-175): with `n` units in all and
//! arm weights `w` (control 1, each treatment the design's `ratio`), arm
//! k expects `e_k = n w_k / sum(w)`; the statistic `sum (o_k - e_k)^2 /
//! e_k` is chi-square with `arms - 1` degrees of freedom when the split
//! works as designed. A small p-value is a sample-ratio mismatch: the
//! assignment or the logging is broken, and neither the result nor its
//! date can be trusted until it is explained (common practice; Fabijan
//! et al. 2019, "Diagnosing Sample Ratio Mismatch in Online Controlled
//! Experiments", KDD, cited from memory). The usual threshold is a p-value
//! below 0.001 (common practice, no source): `planning.srm_alpha`.
//!
//! Checked against `scipy.stats.chisquare` on the rows of
//! tests/fixtures/srm-scipy.json (made by
//! tests/reference/make_srm_fixture.py).

use serde::{Deserialize, Serialize};
use statrs::distribution::{ChiSquared, ContinuousCDF};

/// A sample-ratio check of one test's counts.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SampleRatio {
    /// Units per arm, control first, as counted.
    pub counts: Vec<u64>,
    /// Units per arm the design's split expects of the same total.
    pub expected: Vec<f64>,
    /// Pearson's chi-square statistic.
    pub statistic: f64,
    /// Its p-value, with `arms - 1` degrees of freedom.
    pub p_value: f64,
}

/// The check of `counts` (control first) against arm `weights` (control
/// first); `None` without units, or when the lengths differ or fewer than
/// two arms are given.
pub fn check(counts: &[u64], weights: &[f64]) -> Option<SampleRatio> {
    let total: u64 = counts.iter().sum();
    let w: f64 = weights.iter().sum();
    if total == 0 || counts.len() != weights.len() || counts.len() < 2 || w <= 0.0 {
        return None;
    }
    let expected: Vec<f64> = weights.iter().map(|x| total as f64 * x / w).collect();
    let statistic: f64 = counts
        .iter()
        .zip(&expected)
        .map(|(&o, &e)| (o as f64 - e).powi(2) / e)
        .sum();
    let df = (counts.len() - 1) as f64;
    let p_value = ChiSquared::new(df).ok()?.sf(statistic);
    Some(SampleRatio {
        counts: counts.to_vec(),
        expected,
        statistic,
        p_value,
    })
}

/// The arm weights of a design with `arms` arms and `ratio` treatment
/// units per control unit: control 1, each treatment `ratio`.
pub fn weights(arms: u32, ratio: f64) -> Vec<f64> {
    std::iter::once(1.0)
        .chain(std::iter::repeat_n(ratio, arms.saturating_sub(1) as usize))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn agrees_with_scipy_chisquare() {
        let fixture: serde_json::Value =
            serde_json::from_str(include_str!("../../tests/fixtures/srm-scipy.json")).unwrap();
        let rows = fixture["rows"].as_array().unwrap();
        assert!(rows.len() >= 8);
        for row in rows {
            let counts: Vec<u64> = row["counts"]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_u64().unwrap())
                .collect();
            let weights: Vec<f64> = row["weights"]
                .as_array()
                .unwrap()
                .iter()
                .map(|v| v.as_f64().unwrap())
                .collect();
            let r = check(&counts, &weights).unwrap();
            let (stat, p) = (
                row["statistic"].as_f64().unwrap(),
                row["p_value"].as_f64().unwrap(),
            );
            assert!((r.statistic / stat - 1.0).abs() < 1e-12, "{row}: {r:?}");
            assert!((r.p_value / p - 1.0).abs() < 1e-8, "{row}: {r:?}");
        }
    }

    #[test]
    fn an_even_split_within_noise_passes_and_a_lopsided_one_fails() {
        let ok = check(&[50_120, 49_880], &weights(2, 1.0)).unwrap();
        assert!(ok.p_value > 0.4);
        let bad = check(&[27_400, 24_288], &weights(2, 1.0)).unwrap();
        assert!(bad.p_value < 1e-40);
        assert_eq!(bad.expected, vec![25_844.0, 25_844.0]);
        assert_eq!(weights(3, 1.5), vec![1.0, 1.5, 1.5]);
        assert_eq!(check(&[0, 0], &[1.0, 1.0]), None);
        assert_eq!(check(&[1, 2, 3], &[1.0, 1.0]), None);
    }
}

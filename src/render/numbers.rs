//! The numbers behind each test's dates, worded once for every format:
//! its design (baseline, MDE relative and absolute, alpha, power, arms and
//! ratio, looks, the metric that sets its size), its look dates (earliest,
//! expected and latest result), what a test that does not fit could detect
//! with the traffic left, and its secondary metrics' detectable effects.
//!
//! Reads [`TestStatistics`], [`LookDates`] and [`Detectable`] from the plan
//! as they are; numbers go through `crate::words`. Text, Markdown and HTML
//! use the sentences, CSV the cells, Markdown and HTML the table rows.

use crate::plan::{Detectable, LookDates, PlannedExperiment, TestStatistics};
use crate::render::words::{self, signed, EFFECT_DIGITS};
use crate::sizing::Sides;
use crate::words::{percent, significant, units};

/// The baseline: a rate as a percentage, a mean with its standard deviation.
pub fn baseline(s: &TestStatistics) -> String {
    match s.sd {
        None => format!("{}%", significant(s.baseline * 100.0, 3)),
        Some(sd) => format!("{} (sd {})", significant(s.baseline, 4), significant(sd, 3)),
    }
}

/// An absolute effect in the metric's units: points of a rate, or the
/// mean's own units.
pub fn absolute(s: &TestStatistics, abs: f64) -> String {
    signed(abs, words::absolute(abs, s.kind == "rate", EFFECT_DIGITS))
}

/// A relative change as a signed percentage.
pub fn relative(rel: f64) -> String {
    signed(rel, words::relative(rel, EFFECT_DIGITS))
}

/// An effect both ways: `+4% (+0.124 points)`; the absolute one alone when
/// there is no relative one.
pub fn effect(s: &TestStatistics, rel: Option<f64>, abs: f64) -> String {
    match rel {
        Some(r) => format!("{} ({})", relative(r), absolute(s, abs)),
        None => absolute(s, abs),
    }
}

/// `two-sided` or `one-sided`.
fn sides(s: &TestStatistics) -> &'static str {
    match s.sides {
        Sides::One => "one-sided",
        Sides::Two => "two-sided",
    }
}

/// The arms and their split: `2 arms 1:1`, `3 arms 1:2:2`.
pub fn arms(s: &TestStatistics) -> String {
    let treatment = significant(s.ratio, 3);
    let split: Vec<&str> = std::iter::once("1")
        .chain((1..s.arms).map(|_| treatment.as_str()))
        .collect();
    format!("{} arms {}", s.arms, split.join(":"))
}

/// `one look` or `4 looks (obrien-fleming)`.
pub fn looks(s: &TestStatistics) -> String {
    match s.boundary {
        Some(b) if s.looks > 1 => format!("{} looks ({})", s.looks, b.name()),
        _ => "one look".to_string(),
    }
}

/// The design in one sentence.
pub fn design(s: &TestStatistics) -> String {
    let name = if s.metric == "primary" {
        String::new()
    } else {
        format!(" `{}`", s.metric)
    };
    let per_comparison = s.per_comparison.as_ref().map_or(String::new(), |c| {
        format!(
            " ({} per comparison, {})",
            significant(c.alpha, 3),
            c.correction
        )
    });
    format!(
        "{}{name}, baseline {}, MDE {}, alpha {} {}{per_comparison}, power {}, {}, {}; size set by {}.",
        s.kind,
        baseline(s),
        effect(s, s.mde, s.mde_abs),
        significant(s.alpha, 3),
        sides(s),
        percent(s.power),
        arms(s),
        looks(s),
        driver(s)
    )
}

/// The metric that sets the size: `the primary metric` for the short form,
/// else its name in backticks.
pub fn driver(s: &TestStatistics) -> String {
    if s.driver == "primary" {
        "the primary metric".to_string()
    } else {
        format!("`{}`", s.driver)
    }
}

/// The look dates in one sentence.
pub fn look_dates(l: &LookDates) -> String {
    let n = l.dates.len();
    let dates: Vec<String> = l
        .dates
        .iter()
        .map(|d| format!("{} ({})", d.date, percent(d.stop_probability)))
        .collect();
    let planned = n.saturating_sub(1);
    let live = l.interim().count();
    let interim = match (planned, live) {
        (1, 1) => "its interim look may stop it early".to_string(),
        (k, m) if k == m => format!("its {k} interim looks may stop it early"),
        (1, 0) => "its interim look falls on its result day, so it cannot stop early".to_string(),
        (_, 0) => "none of its interim looks has a day of its own before the result, so it cannot stop early".to_string(),
        (k, m) => format!(
            "only {m} of its {k} interim looks {} a day of its own before the result and may stop it early",
            if m == 1 { "has" } else { "have" }
        ),
    };
    format!(
        "Looks on {} (chance of stopping there under the planned effect); \
         earliest result {}, expected {} under the planned effect, latest {}; {interim}.",
        dates.join(", "),
        l.earliest,
        l.expected,
        l.latest,
    )
}

/// What a test that does not fit could detect, in one sentence.
pub fn detectable(d: &Detectable, s: &TestStatistics) -> String {
    let paths = match d.confidence {
        Some(c) => format!(" on {} of traffic paths", percent(c)),
        None => String::new(),
    };
    let head = format!(
        "With the traffic from {} to {} at {} ({} units{paths})",
        d.from,
        d.to,
        d.share,
        units(d.units)
    );
    match d.mde_abs {
        Some(abs) => format!(
            "{head} it could detect {} at power {}; its planned MDE is {}.",
            effect(s, d.mde, abs),
            percent(s.power),
            effect(s, s.mde, s.mde_abs)
        ),
        None => format!("{head} it has too few units to detect any effect at its power."),
    }
}

/// Its secondary metrics with the effect each can detect, as a list
/// (`` `returns` +12% (0.0072)``); `None` without secondary metrics.
pub fn secondary_list(s: &TestStatistics) -> Option<String> {
    if s.secondary.is_empty() {
        return None;
    }
    let parts: Vec<String> = s
        .secondary
        .iter()
        .map(|m| {
            let eff = match (m.mde, m.mde_abs) {
                (Some(r), Some(a)) => format!("{} ({})", relative(r), significant(a, 3)),
                (None, Some(a)) => significant(a, 3),
                _ => "nothing at its power".to_string(),
            };
            format!("`{}` {eff}", m.name)
        })
        .collect();
    Some(parts.join(", "))
}

/// Its secondary metrics' detectable effects in one sentence; `None`
/// without secondary metrics.
pub fn secondaries(s: &TestStatistics) -> Option<String> {
    secondary_list(s)
        .map(|list| format!("Secondary metrics, read once at the end, can detect: {list}."))
}

/// The sentence for a test whose sample size was given rather than sized;
/// `None` for any other test.
pub fn given(e: &PlannedExperiment) -> Option<String> {
    e.sample_size_given.then(|| {
        format!(
            "sample size given: {} units over all arms, no effect sized here.",
            units(e.units_needed as f64)
        )
    })
}

/// Every sentence about `e`'s numbers, in order: its design, its looks,
/// its secondary metrics (tests with a run).
pub fn sentences(e: &PlannedExperiment) -> Vec<String> {
    let Some(s) = &e.statistics else {
        return given(e).into_iter().collect();
    };
    let mut out = vec![design(s)];
    if let Some(l) = &e.looks {
        out.push(look_dates(l));
    }
    out.extend(secondaries(s));
    out
}

/// The CSV columns these numbers add, after the plan's own.
pub const CSV_HEADER: [&str; 17] = [
    "metric",
    "kind",
    "baseline",
    "sd",
    "mde",
    "mde_abs",
    "alpha",
    "power",
    "sides",
    "arms",
    "ratio",
    "looks",
    "driver",
    "look_dates",
    "earliest_result",
    "expected_result",
    "detectable_mde",
];

/// `e`'s cells under [`CSV_HEADER`]: numbers as plain decimals, empty where
/// nothing applies; `look_dates` joins the dates with `;`.
pub fn csv_cells(e: &PlannedExperiment) -> Vec<String> {
    let Some(s) = &e.statistics else {
        return vec![String::new(); CSV_HEADER.len()];
    };
    let opt = |x: Option<f64>| x.map(|x| x.to_string()).unwrap_or_default();
    let l = e.looks.as_ref();
    vec![
        s.metric.clone(),
        s.kind.clone(),
        s.baseline.to_string(),
        opt(s.sd),
        opt(s.mde),
        s.mde_abs.to_string(),
        s.alpha.to_string(),
        s.power.to_string(),
        match s.sides {
            Sides::One => "one".into(),
            Sides::Two => "two".into(),
        },
        s.arms.to_string(),
        s.ratio.to_string(),
        s.looks.to_string(),
        s.driver.clone(),
        l.map(|l| {
            l.dates
                .iter()
                .map(|d| d.date.to_string())
                .collect::<Vec<_>>()
                .join(";")
        })
        .unwrap_or_default(),
        l.map(|l| l.earliest.to_string()).unwrap_or_default(),
        l.map(|l| l.expected.to_string()).unwrap_or_default(),
        opt(e.detectable.as_ref().and_then(|d| d.mde.or(d.mde_abs))),
    ]
}

/// The header of the markup formats' table of numbers.
pub const TABLE_HEADER: [&str; 8] = [
    "Test",
    "Baseline",
    "MDE",
    "Alpha, power",
    "Arms",
    "Looks",
    "Size set by",
    "Results",
];

/// One row of the markup formats' table for each test with a run:
/// id, baseline, MDE, alpha and power, arms, looks, driver, and the
/// earliest / expected / latest result.
pub fn table_rows(tests: &[PlannedExperiment]) -> Vec<Vec<String>> {
    tests
        .iter()
        .filter_map(|e| {
            let run = e.run.as_ref()?;
            let Some(s) = e.statistics.as_ref() else {
                let dash = || "—".to_string();
                return e.sample_size_given.then(|| {
                    vec![
                        e.id.clone(),
                        dash(),
                        "given sample size".to_string(),
                        dash(),
                        dash(),
                        "one look".to_string(),
                        dash(),
                        format!("{}", run.result_date),
                    ]
                });
            };
            let results = match &e.looks {
                Some(l) => format!(
                    "earliest {}, expected {}, latest {}",
                    l.earliest, l.expected, l.latest
                ),
                None => format!("{}", run.result_date),
            };
            Some(vec![
                e.id.clone(),
                baseline(s),
                effect(s, s.mde, s.mde_abs),
                format!(
                    "{} {}, {}",
                    significant(s.alpha, 3),
                    sides(s),
                    percent(s.power)
                ),
                arms(s),
                looks(s),
                s.driver.clone(),
                results,
            ])
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::plan::{LookDate, SecondaryEffect};
    use crate::sizing::sequential::Boundary;
    use chrono::NaiveDate;

    fn stats() -> TestStatistics {
        TestStatistics {
            metric: "primary".into(),
            kind: "rate".into(),
            baseline: 0.031,
            sd: None,
            mde: Some(0.04),
            mde_abs: 0.00124,
            alpha: 0.05,
            power: 0.8,
            sides: Sides::Two,
            arms: 2,
            ratio: 1.0,
            per_comparison: None,
            looks: 1,
            boundary: None,
            driver: "primary".into(),
            secondary: vec![],
        }
    }

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    #[test]
    fn the_design_reads_as_the_trade_writes_it() {
        let s = stats();
        assert_eq!(
            design(&s),
            "rate, baseline 3.1%, MDE +4% (+0.124 points), alpha 0.05 two-sided, \
             power 80%, 2 arms 1:1, one look; size set by the primary metric."
        );
        let mean = TestStatistics {
            kind: "mean".into(),
            baseline: 2.35,
            sd: Some(14.8),
            mde: Some(-0.04),
            mde_abs: -0.094,
            looks: 4,
            boundary: Some(Boundary::Pocock),
            ratio: 2.0,
            ..stats()
        };
        let text = design(&mean);
        assert!(
            text.contains("baseline 2.35 (sd 14.8), MDE -4% (-0.094)"),
            "{text}"
        );
        assert!(text.contains("2 arms 1:2, 4 looks (pocock)"), "{text}");
    }

    #[test]
    fn looks_name_every_date_and_the_three_results() {
        let l = LookDates {
            dates: vec![
                LookDate {
                    look: 1,
                    information: 0.5,
                    date: d("2027-01-18"),
                    stop_probability: 0.3,
                },
                LookDate {
                    look: 2,
                    information: 1.0,
                    date: d("2027-02-01"),
                    stop_probability: 0.5,
                },
            ],
            earliest: d("2027-01-18"),
            expected: d("2027-01-25"),
            latest: d("2027-02-01"),
            idle: vec![],
            added_sample: None,
        };
        let text = look_dates(&l);
        assert!(
            text.contains("2027-01-18 (30%), 2027-02-01 (50%)"),
            "{text}"
        );
        assert!(text.contains("earliest result 2027-01-18, expected 2027-01-25"));
        assert!(text.contains("latest 2027-02-01"));
        assert!(
            text.ends_with("its interim look may stop it early."),
            "{text}"
        );
    }

    #[test]
    fn looks_with_no_day_of_their_own_cannot_stop_a_test() {
        let look = |k: u32, date: &str| LookDate {
            look: k,
            information: f64::from(k) / 3.0,
            date: d(date),
            stop_probability: 0.2,
        };
        let mut l = LookDates {
            dates: vec![
                look(1, "2027-05-03"),
                look(2, "2027-05-03"),
                look(3, "2027-05-03"),
            ],
            earliest: d("2027-05-03"),
            expected: d("2027-05-03"),
            latest: d("2027-05-03"),
            idle: vec![1, 2],
            added_sample: Some(0.12),
        };
        let text = look_dates(&l);
        assert!(
            text.ends_with("none of its interim looks has a day of its own before the result, so it cannot stop early."),
            "{text}"
        );
        l.dates[0].date = d("2027-04-19");
        l.idle = vec![2];
        let text = look_dates(&l);
        assert!(
            text.ends_with("only 1 of its 2 interim looks has a day of its own before the result and may stop it early."),
            "{text}"
        );
    }

    #[test]
    fn secondaries_and_detectable_effects() {
        let mut s = stats();
        assert_eq!(secondaries(&s), None);
        s.secondary.push(SecondaryEffect {
            name: "basket size".into(),
            mde: Some(0.031),
            mde_abs: Some(2.1),
        });
        assert_eq!(
            secondaries(&s).unwrap(),
            "Secondary metrics, read once at the end, can detect: `basket size` +3.1% (2.1)."
        );
        let det = Detectable {
            from: d("2027-01-04"),
            to: d("2027-04-04"),
            share: crate::share::Share::from_fraction(0.5),
            units: 123_456.0,
            mde: Some(0.061),
            mde_abs: Some(0.001891),
            confidence: None,
        };
        assert_eq!(
            detectable(&det, &s),
            "With the traffic from 2027-01-04 to 2027-04-04 at 50% (123,456 units) it could \
             detect +6.1% (+0.189 points) at power 80%; its planned MDE is +4% (+0.124 points)."
        );
        let margin = Detectable {
            confidence: Some(0.8),
            ..det
        };
        assert!(detectable(&margin, &s)
            .starts_with("With the traffic from 2027-01-04 to 2027-04-04 at 50% (123,456 units on 80% of traffic paths) it could"));
    }

    #[test]
    fn a_test_with_several_arms_gives_its_alpha_per_comparison() {
        let s = TestStatistics {
            arms: 3,
            per_comparison: Some(crate::plan::PerComparison {
                alpha: 0.025,
                correction: "bonferroni".into(),
            }),
            ..stats()
        };
        assert!(
            design(&s)
                .contains("alpha 0.05 two-sided (0.025 per comparison, bonferroni), power 80%"),
            "{}",
            design(&s)
        );
        assert!(!design(&stats()).contains("per comparison"));
    }
}

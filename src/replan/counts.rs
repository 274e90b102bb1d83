//! A progress file's `counts`: the daily exposure counts per test and arm
//! that experimentation data usually comes as, in a CSV file with the
//! header `date,experiment,arm,units` (arm 0 is control). Every row before
//! `as_of` is summed into each test's units per arm, and its first day is
//! its start when the progress file leaves `started` out.
//!
//! An unknown experiment, an arm outside its design, a date on or after
//! `as_of`, a repeated `(date, experiment, arm)` or a bad value is an error
//! at its line and column in the CSV file, like a history's (at most 20
//! of them; the file is read as `csv_file` reads every CSV file).

use crate::csv_file::{read_rows, Layout};
use crate::diagnostic::Diagnostic;
use crate::portfolio::Portfolio;
use chrono::NaiveDate;
use std::collections::{HashMap, HashSet};

/// One test's counts from the file.
#[derive(Debug, Clone, PartialEq)]
pub struct Counted {
    /// Its first day in the file.
    pub first: NaiveDate,
    /// Units per arm, control first, summed over the days before `as_of`.
    pub per_arm: Vec<u64>,
    /// The line of its first row (for messages).
    pub line: usize,
}

/// The counts of every test the file names, by index into
/// `Portfolio::experiments`.
pub type Counts = HashMap<usize, Counted>;

/// Parses counts text; `name` is the file in messages.
pub fn parse(
    text: &str,
    name: &str,
    portfolio: &Portfolio,
    as_of: NaiveDate,
) -> Result<Counts, Vec<Diagnostic>> {
    let ids: HashMap<&str, usize> = portfolio
        .experiments
        .iter()
        .enumerate()
        .map(|(i, e)| (e.id.as_str(), i))
        .collect();
    let layout = Layout {
        kind: "counts",
        columns: &["date", "experiment", "arm", "units"],
        row_of: "day, test and arm",
        example: "2027-01-04,hero-copy,0,1520",
    };
    let mut counts = Counts::new();
    let mut seen: HashMap<(NaiveDate, usize, u32), usize> = HashMap::new();
    let mut unknown: HashSet<String> = HashSet::new();
    let problems = read_rows(text, name, &layout, |line, r, problems| {
        let mut at =
            |line, field, message, hint: &str| problems.push(line, field, "", message, hint);
        let field = |k: usize| &r[k];
        let Ok(date) = NaiveDate::parse_from_str(field(0), "%Y-%m-%d") else {
            at(
                line,
                0,
                format!("`{}` is not a date", field(0)),
                "write dates as YYYY-MM-DD",
            );
            return;
        };
        if date >= as_of {
            at(
                line,
                0,
                format!("{date} is on or after `as_of` ({as_of})"),
                "counts are of the days before the progress file's `as_of`; leave later rows out or move `as_of`",
            );
            return;
        }
        let id = field(1);
        let Some(&experiment) = ids.get(id) else {
            if unknown.insert(id.to_string()) {
                let known: Vec<&str> = portfolio
                    .experiments
                    .iter()
                    .map(|e| e.id.as_str())
                    .collect();
                let closest = crate::diagnostic::closest_first(id, &known);
                at(
                    line,
                    1,
                    format!("experiment `{id}` is not in the portfolio"),
                    &format!(
                        "defined experiments, closest first: {}",
                        crate::diagnostic::list(&closest.into_iter().take(8).collect::<Vec<_>>())
                    ),
                );
            }
            return;
        };
        let arms = portfolio.experiments[experiment].design.arms;
        let arm = match field(2).parse::<u32>() {
            Ok(a) if a < arms => a,
            _ => {
                at(
                    line,
                    2,
                    format!(
                        "arm `{}` is not an arm of `{id}`, which has {arms} (0 to {})",
                        field(2),
                        arms - 1
                    ),
                    "number the arms from 0 (control), as the design orders them",
                );
                return;
            }
        };
        let Ok(units) = field(3).parse::<u64>() else {
            at(
                line,
                3,
                format!("units `{}` is not a whole number >= 0", field(3)),
                "the units exposed that day in that arm, e.g. `1520`",
            );
            return;
        };
        if let Some(first) = seen.insert((date, experiment, arm), line) {
            at(
                line,
                0,
                format!("{date}, `{id}`, arm {arm} appears twice (first on line {first})"),
                "give each day, test and arm one row",
            );
            return;
        }
        let c = counts.entry(experiment).or_insert_with(|| Counted {
            first: date,
            per_arm: vec![0; arms as usize],
            line,
        });
        c.per_arm[arm as usize] += units;
        if date < c.first {
            c.first = date;
        }
    });
    if problems.is_empty() {
        Ok(counts)
    } else {
        Err(problems.into_vec())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn quickstart() -> Portfolio {
        let text = include_str!("../../portfolios/quickstart.yaml");
        crate::portfolio::load_str(text, "quickstart.yaml").unwrap()
    }

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    fn problems(text: &str) -> String {
        parse(text, "counts.csv", &quickstart(), d("2027-01-10"))
            .unwrap_err()
            .iter()
            .map(|p| {
                format!(
                    "{}:{} {}",
                    p.line.unwrap_or(0),
                    p.column.unwrap_or(0),
                    p.message
                )
            })
            .collect::<Vec<_>>()
            .join("\n")
    }

    #[test]
    fn rows_sum_per_test_and_arm_from_the_first_day() {
        let c = parse(
            "date,experiment,arm,units\n2027-01-05,bigger-photos,1,90\n2027-01-04,bigger-photos,0,100\n2027-01-04,bigger-photos,1,110\n2027-01-05,bigger-photos,0,95\n",
            "counts.csv",
            &quickstart(),
            d("2027-01-10"),
        )
        .unwrap();
        let b = &c[&0];
        assert_eq!(
            (b.first, b.per_arm.clone(), b.line),
            (d("2027-01-04"), vec![195, 200], 2)
        );
        assert_eq!(c.len(), 1);
    }

    #[test]
    fn bad_rows_are_errors_at_their_line_and_column() {
        let text = "date,experiment,arm,units\n\
                    2027-01-04,bigger-photos,0,100\n\
                    2027-01-04,biger-photos,0,100\n\
                    2027-01-04,bigger-photos,2,100\n\
                    2027-01-10,bigger-photos,1,100\n\
                    2027-01-04,bigger-photos,0,7\n\
                    2027-01-05,bigger-photos,1,lots\n";
        let p = problems(text);
        assert!(
            p.contains("3:12 experiment `biger-photos` is not in the portfolio"),
            "{p}"
        );
        assert!(
            p.contains("4:26 arm `2` is not an arm of `bigger-photos`, which has 2 (0 to 1)"),
            "{p}"
        );
        assert!(
            p.contains("5:1 2027-01-10 is on or after `as_of` (2027-01-10)"),
            "{p}"
        );
        assert!(
            p.contains("6:1 2027-01-04, `bigger-photos`, arm 0 appears twice (first on line 2)"),
            "{p}"
        );
        assert!(
            p.contains("7:28 units `lots` is not a whole number >= 0"),
            "{p}"
        );
        assert!(problems("day,test,arm,units\n").contains("the header is `day,test,arm,units`"));
    }
}

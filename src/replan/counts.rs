//! A progress file's `counts`: the daily exposure counts per test and arm
//! that experimentation data usually comes as, in a CSV file with the
//! header `date,experiment,arm,units` (arm 0 is control). Every row before
//! `as_of` is summed into each test's units per arm, and its first day is
//! its start when the progress file leaves `started` out.
//!
//! An unknown experiment, an arm outside its design, a date on or after
//! `as_of`, a repeated `(date, experiment, arm)` or a bad value is an error
//! at its line and column in the CSV file, like a history's (at most
//! [`MAX_PROBLEMS`] of them). Read as bytes with the `csv` crate, so a
//! million rows take well under a second.

use crate::diagnostic::Diagnostic;
use crate::portfolio::history::{csv_problem, csv_reader};
use crate::portfolio::Portfolio;
use chrono::NaiveDate;
use std::collections::{HashMap, HashSet};

/// Problems reported from one counts file before the rest are left out.
pub const MAX_PROBLEMS: usize = 20;

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
    let body = text.strip_prefix('\u{feff}').unwrap_or(text);
    let line_text = |line: usize| body.lines().nth(line - 1).unwrap_or("").to_string();
    let at = |line: usize, field: usize, message: String, hint: &str| {
        csv_problem(name, &line_text(line), line, field, message, hint)
    };
    let ids: HashMap<&str, usize> = portfolio
        .experiments
        .iter()
        .enumerate()
        .map(|(i, e)| (e.id.as_str(), i))
        .collect();
    let mut reader = csv_reader(body);
    let mut records = reader.byte_records();
    let header_hint = "the first line names the columns: `date,experiment,arm,units`";
    let mut problems = Vec::new();
    match records.next() {
        None => {
            return Err(vec![Diagnostic::new(name, "", "the counts file is empty")
                .with_hint(format!(
                    "{header_hint}, then one row per day, test and arm such as `2027-01-04,hero-copy,0,1520`"
                ))])
        }
        Some(Ok(h)) => {
            let names: Vec<String> = h
                .iter()
                .map(|f| String::from_utf8_lossy(f).to_lowercase())
                .collect();
            if names != ["date", "experiment", "arm", "units"] {
                problems.push(at(
                    1,
                    0,
                    format!("the header is `{}`, not `date,experiment,arm,units`", line_text(1).trim()),
                    header_hint,
                ));
            }
        }
        Some(Err(e)) => problems.push(at(1, 0, format!("cannot read the header: {e}"), header_hint)),
    }
    let mut counts = Counts::new();
    let mut seen: HashMap<(NaiveDate, usize, u32), usize> = HashMap::new();
    let mut unknown: HashSet<String> = HashSet::new();
    for record in records {
        if problems.len() >= MAX_PROBLEMS {
            break;
        }
        let r = match record {
            Ok(r) => r,
            Err(e) => {
                let line = e.position().map_or(1, |p| p.line() as usize);
                problems.push(at(
                    line,
                    0,
                    format!("cannot read the row: {e}"),
                    "write `date,experiment,arm,units`",
                ));
                continue;
            }
        };
        let line = r.position().map_or(1, |p| p.line() as usize);
        if r.len() != 4 {
            problems.push(at(
                line,
                0,
                format!("the row has {} fields, not 4", r.len()),
                "write `date,experiment,arm,units`",
            ));
            continue;
        }
        let field = |k: usize| std::str::from_utf8(&r[k]).unwrap_or("");
        let Ok(date) = NaiveDate::parse_from_str(field(0), "%Y-%m-%d") else {
            problems.push(at(
                line,
                0,
                format!("`{}` is not a date", field(0)),
                "write dates as YYYY-MM-DD",
            ));
            continue;
        };
        if date >= as_of {
            problems.push(at(
                line,
                0,
                format!("{date} is on or after `as_of` ({as_of})"),
                "counts are of the days before the progress file's `as_of`; leave later rows out or move `as_of`",
            ));
            continue;
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
                problems.push(at(
                    line,
                    1,
                    format!("experiment `{id}` is not in the portfolio"),
                    &format!(
                        "defined experiments, closest first: {}",
                        crate::diagnostic::list(&closest.into_iter().take(8).collect::<Vec<_>>())
                    ),
                ));
            }
            continue;
        };
        let arms = portfolio.experiments[experiment].design.arms;
        let arm = match field(2).parse::<u32>() {
            Ok(a) if a < arms => a,
            _ => {
                problems.push(at(
                    line,
                    2,
                    format!(
                        "arm `{}` is not an arm of `{id}`, which has {arms} (0 to {})",
                        field(2),
                        arms - 1
                    ),
                    "number the arms from 0 (control), as the design orders them",
                ));
                continue;
            }
        };
        let Ok(units) = field(3).parse::<u64>() else {
            problems.push(at(
                line,
                3,
                format!("units `{}` is not a whole number >= 0", field(3)),
                "the units exposed that day in that arm, e.g. `1520`",
            ));
            continue;
        };
        if let Some(first) = seen.insert((date, experiment, arm), line) {
            problems.push(at(
                line,
                0,
                format!("{date}, `{id}`, arm {arm} appears twice (first on line {first})"),
                "give each day, test and arm one row",
            ));
            continue;
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
    }
    if problems.is_empty() {
        Ok(counts)
    } else {
        Err(problems)
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

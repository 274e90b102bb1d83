//! A pool's daily history file (`history: FILE.csv`): a header `date,units`
//! and one row per day, ISO dates ascending without gaps or repeats,
//! units a number >= 0. Every problem is reported at its line and column
//! in the CSV file, like the portfolio's own (all of them at once, up to
//! 20; `csv_file` reads it).

use super::checker::Checker;
use super::model::{event_days, Event, History};
use super::raw::{RawEvent, Text};
use crate::csv_file::{read_rows, Layout};
use crate::diagnostic::Diagnostic;
use crate::fit;
use chrono::{Duration, NaiveDate};
use std::path::{Path, PathBuf};

/// A history file read: its first day and units per day.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct Daily {
    pub start: NaiveDate,
    pub units: Vec<f64>,
}

/// Why a history file gives no series.
#[derive(Debug, Clone, PartialEq)]
pub(crate) enum HistoryError {
    /// The file cannot be read (reported at the portfolio's `history` key).
    Unreadable { path: PathBuf, reason: String },
    /// Problems inside the file, each at its line.
    Rows(Vec<Diagnostic>),
}

/// The path of `file` (as the portfolio names it) relative to the folder
/// of `portfolio` (the portfolio file's name as the user gave it).
pub(crate) fn resolve(portfolio: &str, file: &str) -> PathBuf {
    let file = Path::new(file);
    match Path::new(portfolio).parent() {
        Some(dir) if file.is_relative() => dir.join(file),
        _ => file.to_path_buf(),
    }
}

/// Reads the history file at `path`.
pub(crate) fn read(path: &Path) -> Result<Daily, HistoryError> {
    let unreadable = |reason: String| HistoryError::Unreadable {
        path: path.to_path_buf(),
        reason,
    };
    let bytes = std::fs::read(path).map_err(|e| unreadable(e.to_string()))?;
    let text = String::from_utf8(bytes).map_err(|_| unreadable("it is not UTF-8 text".into()))?;
    parse(&text, &path.display().to_string())
}

/// Parses history text; `name` is the file in messages.
pub(crate) fn parse(text: &str, name: &str) -> Result<Daily, HistoryError> {
    let layout = Layout {
        kind: "history",
        columns: &["date", "units"],
        row_of: "day",
        example: "2026-06-01,18250",
    };
    let mut start: Option<NaiveDate> = None;
    let mut units = Vec::new();
    // The last good date and its line.
    let mut last: Option<(NaiveDate, usize)> = None;
    let problems = read_rows(text, name, &layout, |line, r, problems| {
        let date = match NaiveDate::parse_from_str(&r[0], "%Y-%m-%d") {
            Ok(d) => Some(d),
            Err(_) => {
                problems.push(
                    line,
                    0,
                    "date",
                    format!("`{}` is not a date", &r[0]),
                    "write dates as YYYY-MM-DD, e.g. 2026-06-01",
                );
                None
            }
        };
        let value = match r[1].parse::<f64>() {
            Ok(u) if (0.0..1e12).contains(&u) => Some(u),
            _ => {
                problems.push(
                    line,
                    1,
                    "units",
                    format!("units `{}` is not a number >= 0", &r[1]),
                    "the eligible units of that day, e.g. 18250; write 0 for a day without traffic",
                );
                None
            }
        };
        let Some(date) = date else {
            // The next date is not compared with one before the bad one.
            last = None;
            return;
        };
        if let Some((prev, prev_line)) = last {
            if let Some((message, hint)) = out_of_step(prev, prev_line, date) {
                problems.push(line, 0, "date", message, hint);
                if date <= prev {
                    return;
                }
            }
        }
        last = Some((date, line));
        start.get_or_insert(date);
        units.push(value.unwrap_or(0.0));
    });
    if !problems.is_empty() {
        return Err(HistoryError::Rows(problems.into_vec()));
    }
    match start {
        Some(start) => Ok(Daily { start, units }),
        None => Err(HistoryError::Rows(vec![Diagnostic::new(
            name,
            "",
            "the history file has a header but no rows",
        )
        .with_hint("add one row per day such as `2026-06-01,18250`")
        .at_line(problems.first_line(), 1, 1, 1)])),
    }
}

/// What is wrong with `date` following `prev` (on line `prev_line`): a
/// repeat, a step back or a gap, with its hint.
fn out_of_step(
    prev: NaiveDate,
    prev_line: usize,
    date: NaiveDate,
) -> Option<(String, &'static str)> {
    let step = (date - prev).num_days();
    if step == 0 {
        return Some((
            format!("{date} appears twice (first on line {prev_line})"),
            "give one row per day; add the two rows up if both hold part of the day",
        ));
    }
    if step < 0 {
        return Some((
            format!("{date} comes after {prev} (line {prev_line}); dates must ascend"),
            "sort the rows by date",
        ));
    }
    if step == 1 {
        return None;
    }
    let first = prev + Duration::days(1);
    let gap = if step == 2 {
        format!("{first} is missing")
    } else {
        format!(
            "{} days are missing ({first} to {})",
            step - 1,
            date - Duration::days(1)
        )
    };
    Some((
        format!("a gap after {prev} (line {prev_line}): {gap}"),
        "give one row per day; write 0 for a day without traffic",
    ))
}

/// A pool's `history` and `trend` keys (`key` is `pools[i]`): the file read
/// and fitted, every problem recorded on `ck`; `None` without a history or
/// when it has problems.
pub(crate) fn pool_history(
    ck: &mut Checker,
    key: &str,
    who: &str,
    file: Option<&Text>,
    trend: Option<bool>,
    events: Option<&[RawEvent]>,
) -> Option<History> {
    let trend = trend.unwrap_or(false);
    let Some(file) = file else {
        if trend {
            ck.err(
                &format!("{key}.trend"),
                format!("{who}`trend: true` needs a `history` to fit it from"),
                "add `history: FILE.csv` (columns `date,units`), or remove `trend`",
            );
        }
        if events.is_some() {
            ck.err(
                &format!("{key}.events"),
                format!("{who}`events` mark days of a `history`, and this pool has none"),
                "add `history: FILE.csv`, or remove `events` (dated changes of a typed forecast are `adjustments`)",
            );
        }
        return None;
    };
    let path = resolve(ck.file, file.as_str());
    let at = format!("{key}.history");
    let daily = match read(&path) {
        Ok(d) => d,
        Err(HistoryError::Unreadable { path, reason }) => {
            ck.err(
                &at,
                format!(
                    "{who}cannot read the history `{}`: {reason}",
                    path.display()
                ),
                "the path is relative to the portfolio file's folder",
            );
            return None;
        }
        Err(HistoryError::Rows(problems)) => {
            ck.errors.extend(problems);
            return None;
        }
    };
    let last = daily.start + chrono::Duration::days(daily.units.len() as i64 - 1);
    let events = checked_events(ck, key, who, events, daily.start, last)?;
    let skip = event_days(daily.start, daily.units.len(), &events);
    match fit::fit(daily.start, &daily.units, trend, &skip) {
        Ok(fit) => Some(History {
            file: file.as_str().to_string(),
            start: daily.start,
            units: daily.units,
            trend,
            events,
            fit,
        }),
        Err(e) => {
            ck.err(
                &at,
                format!("{who}history `{}`: {e}", file.as_str()),
                "give at least four weeks of daily units, the recent ones with traffic",
            );
            None
        }
    }
}

/// The `events` at `{key}.events` of a history from `first` to `last`:
/// each needs `from` and `to` inside those days, in order; `None` when any
/// has a problem (recorded on `ck`).
pub(crate) fn checked_events(
    ck: &mut Checker,
    key: &str,
    who: &str,
    raw: Option<&[RawEvent]>,
    first: NaiveDate,
    last: NaiveDate,
) -> Option<Vec<Event>> {
    let before = ck.errors.len();
    let mut out = Vec::new();
    for (j, e) in raw.unwrap_or_default().iter().enumerate() {
        let at = |k: &str| format!("{key}.events[{j}].{k}");
        let mut day = |k: &str, v: &Option<Text>| -> Option<NaiveDate> {
            if v.is_none() {
                ck.err(
                    &format!("{key}.events[{j}]"),
                    format!("{who}event {} has no `{k}`", j + 1),
                    "give both days, e.g. `{from: 2026-11-27, to: 2026-11-30, note: autumn sale}`",
                );
                return None;
            }
            let d = ck.date(&at(k), &format!("{who}event `{k}`"), v, "2026-11-27")?;
            if d < first || d > last {
                ck.err(
                    &at(k),
                    format!("{who}event `{k}` {d} is outside the days given, which run from {first} to {last}"),
                    "an event marks days of the file; remove it or correct its date",
                );
                return None;
            }
            Some(d)
        };
        let (from, to) = (day("from", &e.from), day("to", &e.to));
        if let (Some(from), Some(to)) = (from, to) {
            if to < from {
                ck.err(
                    &at("to"),
                    format!("{who}event `to` {to} is before its `from` {from}"),
                    "`to` is the event's last day, on or after `from`",
                );
                continue;
            }
            out.push(Event {
                from,
                to,
                note: e
                    .note
                    .as_ref()
                    .map(|t| t.as_str().to_string())
                    .unwrap_or_default(),
            });
        }
    }
    (ck.errors.len() == before).then_some(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rows(text: &str) -> Vec<Diagnostic> {
        match parse(text, "h.csv") {
            Err(HistoryError::Rows(d)) => d,
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn a_good_file_reads_in_order() {
        let d = parse(
            "\u{feff}date,units\n2026-06-01,100\n2026-06-02, 250.5\n\n2026-06-03,0\n",
            "h.csv",
        )
        .unwrap();
        assert_eq!(d.start, NaiveDate::from_ymd_opt(2026, 6, 1).unwrap());
        assert_eq!(d.units, vec![100.0, 250.5, 0.0]);
    }

    #[test]
    fn gaps_repeats_and_order_are_reported_at_their_lines() {
        let d = rows(
            "date,units\n2026-06-01,100\n2026-06-02,100\n2026-06-02,90\n2026-06-05,80\n2026-06-04,70\n",
        );
        let got: Vec<(Option<usize>, Option<usize>, &str)> = d
            .iter()
            .map(|d| (d.line, d.column, d.message.as_str()))
            .collect();
        assert_eq!(
            got,
            vec![
                (
                    Some(4),
                    Some(1),
                    "2026-06-02 appears twice (first on line 3)"
                ),
                (
                    Some(5),
                    Some(1),
                    "a gap after 2026-06-02 (line 3): 2 days are missing (2026-06-03 to 2026-06-04)"
                ),
                (
                    Some(6),
                    Some(1),
                    "2026-06-04 comes after 2026-06-05 (line 5); dates must ascend"
                ),
            ]
        );
        assert_eq!(d[0].file, "h.csv");
        assert_eq!(d[0].source_line.as_deref(), Some("2026-06-02,90"));
        assert_eq!(d[0].width, 10);
    }

    #[test]
    fn bad_values_point_at_their_field() {
        let d = rows("date,units\n2026-06-01,100\n2026-06-02,-5\n2026-6-3x,7\n2026-06-04,1,234\n");
        assert_eq!(d.len(), 3, "{d:?}");
        assert_eq!(
            (d[0].line, d[0].column, d[0].key.as_str()),
            (Some(3), Some(12), "units")
        );
        assert!(d[0].message.contains("`-5` is not a number >= 0"));
        assert_eq!(
            (d[1].line, d[1].column, d[1].key.as_str()),
            (Some(4), Some(1), "date")
        );
        assert!(d[2].message.contains("3 fields"));
        assert!(d[2].hint.as_deref().unwrap().contains("thousands"));
    }

    #[test]
    fn header_and_empty_files_are_refused() {
        assert!(rows("day,visits\n2026-06-01,1\n")[0]
            .message
            .contains("not `date,units`"));
        assert!(rows("")[0].message.contains("empty"));
        assert!(rows("date,units\n")[0].message.contains("no rows"));
    }

    #[test]
    fn paths_are_relative_to_the_portfolio() {
        assert_eq!(
            resolve("portfolios/demo.yaml", "history/home.csv"),
            Path::new("portfolios/history/home.csv")
        );
        assert_eq!(resolve("demo.yaml", "h.csv"), Path::new("h.csv"));
        assert_eq!(resolve("a/b.yaml", "/abs/h.csv"), Path::new("/abs/h.csv"));
    }
}

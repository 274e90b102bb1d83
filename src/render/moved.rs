//! The words of a re-plan's changes, shared by the text, Markdown and HTML
//! renderers so that each says the same thing: the one-line headline, the
//! "what moved" table's header, columns and cells, the summary lines, each
//! pool's totals, and the running tests' advice in its two groups.
//!
//! Reads only `Plan::changes` and `Plan::running`; JSON carries both inside
//! the plan itself. The experiments that moved come first (no longer fit,
//! later, earlier, new share, now fit), then the rest, each group in the
//! plan's order. How each format lays these out is its own module's job
//! (`text::changes`, `html::changes`, `markdown`).

use super::common::{thousands, units};
use super::markup::Column;
use crate::plan::{ExperimentDiff, Movement, Plan, PlanDiff, PoolDiff, RunningOutlook, Status};
use crate::share::Share;
use std::fmt::Write as _;

/// The heading over the table.
pub const TITLE: &str = "What moved since the previous plan";

fn share(s: Option<Share>) -> String {
    s.map(|s| s.to_string()).unwrap_or_default()
}

fn date(d: Option<chrono::NaiveDate>) -> String {
    d.map(|d| d.to_string()).unwrap_or_else(|| "-".to_string())
}

fn slip(days: Option<i64>) -> String {
    match days {
        Some(0) => "0".to_string(),
        Some(d) => format!("{d:+}"),
        None => String::new(),
    }
}

fn movement(e: &ExperimentDiff) -> String {
    let word = match e.movement {
        Movement::Unchanged if e.new_status.is_some_and(closed) => {
            status_word(e.new_status.unwrap_or(Status::Finished))
        }
        Movement::Unchanged => "unchanged",
        Movement::Later => "later",
        Movement::Earlier => "earlier",
        Movement::Reshared => "new share",
        Movement::NoLongerFits => "no longer fits",
        Movement::NowFits => "now fits",
        Movement::StillOut => "still out",
        Movement::Closed => match e.new_status {
            Some(s) => status_word(s),
            None => "finished or cancelled",
        },
        Movement::Added => "new in the portfolio",
        Movement::NeedsDecision => "needs a decision",
        Movement::Dropped => "gone from the portfolio",
    };
    // A running test cannot be moved, only re-read: say which rows those are.
    if e.new_status == Some(Status::Running) && e.movement != Movement::NeedsDecision {
        format!("{word}, running")
    } else {
        word.to_string()
    }
}

fn closed(s: Status) -> bool {
    matches!(s, Status::Finished | Status::Cancelled)
}

fn status_word(s: Status) -> &'static str {
    match s {
        Status::Finished => "finished",
        Status::Cancelled => "cancelled",
        Status::Running => "running",
        Status::Scheduled => "scheduled",
        Status::Unscheduled => "does not fit",
    }
}

/// Display rank: what moved first, then what did not.
fn rank(m: Movement) -> u8 {
    match m {
        Movement::NeedsDecision => 0,
        Movement::NoLongerFits => 0,
        Movement::Later => 1,
        Movement::Earlier => 2,
        Movement::Reshared => 3,
        Movement::NowFits => 4,
        Movement::Added => 5,
        Movement::Dropped => 6,
        Movement::Unchanged => 7,
        Movement::StillOut => 8,
        Movement::Closed => 9,
    }
}

/// The experiments in display order (stable within a group).
fn ordered(d: &PlanDiff) -> Vec<&ExperimentDiff> {
    let mut rows: Vec<&ExperimentDiff> = d.experiments.iter().collect();
    rows.sort_by_key(|e| rank(e.movement));
    rows
}

fn ids(list: &[String]) -> String {
    if list.is_empty() {
        "none".to_string()
    } else {
        list.join(", ")
    }
}

/// One sentence on what moved: how many results come later (and by how
/// much at most), earlier, no longer or newly fit, or changed share.
pub fn headline(d: &PlanDiff) -> String {
    let count = |m: Movement| d.experiments.iter().filter(|e| e.movement == m).count();
    let later: Vec<i64> = d
        .experiments
        .iter()
        .filter(|e| e.movement == Movement::Later)
        .filter_map(|e| e.slip_days)
        .collect();
    let mut parts = Vec::new();
    match d.needs_decision.len() {
        0 => {}
        1 => parts.push("1 running test needs a decision".to_string()),
        n => parts.push(format!("{n} running tests need a decision")),
    }
    if !later.is_empty() {
        let most = later.iter().copied().max().unwrap_or(0);
        parts.push(format!(
            "{} {} later (by up to {most} days)",
            later.len(),
            crate::words::Count("result", later.len())
        ));
    }
    let n = count(Movement::Earlier);
    if n > 0 {
        parts.push(format!("{n} earlier"));
    }
    if !d.no_longer_fit.is_empty() {
        parts.push(format!("{} no longer fit", d.no_longer_fit.len()));
    }
    if !d.now_fit.is_empty() {
        parts.push(format!("{} now fit", d.now_fit.len()));
    }
    if !d.share_changed.is_empty() {
        parts.push(format!("{} with a new share", d.share_changed.len()));
    }
    let since = |status: Status| {
        d.experiments
            .iter()
            .filter(|e| e.movement == Movement::Closed && e.new_status == Some(status))
            .count()
    };
    let closed: Vec<String> = [
        (since(Status::Finished), "finished"),
        (since(Status::Cancelled), "cancelled"),
    ]
    .iter()
    .filter(|(n, _)| *n > 0)
    .map(|(n, word)| format!("{n} {word}"))
    .collect();
    let tail = if closed.is_empty() {
        String::new()
    } else {
        format!("; {} since", closed.join(" and "))
    };
    if parts.is_empty() {
        format!("Nothing in the calendar moved{tail}.")
    } else {
        format!("{}{tail}.", parts.join(", "))
    }
}

/// One pool's totals before and after, in one line.
pub fn pool_line(p: &PoolDiff) -> String {
    let (b, a) = (&p.before, &p.after);
    let closed = if a.closed > b.closed {
        format!(" ({} finished or cancelled since)", a.closed - b.closed)
    } else {
        String::new()
    };
    let forecast = if (a.forecast_units - b.forecast_units).abs() < 0.5 {
        format!("forecast {} units over the window", units(a.forecast_units))
    } else {
        let change = if b.forecast_units > 0.0 {
            format!(
                " ({})",
                crate::words::percent_change((a.forecast_units / b.forecast_units - 1.0) * 100.0)
            )
        } else {
            String::new()
        };
        format!(
            "forecast {} -> {} units over the window{change}",
            units(b.forecast_units),
            units(a.forecast_units)
        )
    };
    format!(
        "pool {}: in the calendar {} -> {}{closed}, out {} -> {}, units needed {} -> {}, {forecast}",
        p.id,
        b.scheduled,
        a.scheduled,
        b.unscheduled,
        a.unscheduled,
        thousands(b.units_needed),
        thousands(a.units_needed),
    )
}

/// The running tests with advice, in groups (each only when not empty):
/// those that need a decision (they cannot finish inside the window, or
/// their run reaches a `no_running` span), those ready to read, those a
/// re-plan gave a new share so that they finish, and those on a pool the
/// running tests alone overload.
pub fn advice_groups(plan: &Plan) -> Vec<(&'static str, Vec<&RunningOutlook>)> {
    let group = |f: &dyn Fn(&RunningOutlook) -> bool| -> Vec<&RunningOutlook> {
        plan.running
            .iter()
            .filter(|o| o.advice.is_some() && f(o))
            .collect()
    };
    let reshared = |o: &RunningOutlook| o.share_before.is_some_and(|b| b != o.share);
    [
        (
            "Running tests that need a decision",
            group(&|o| o.needs_decision()),
        ),
        (
            "Running tests ready to read",
            group(&|o| !o.needs_decision() && o.past_need() && !reshared(o)),
        ),
        (
            "Running tests given a new share",
            group(&|o| !o.needs_decision() && reshared(o)),
        ),
        (
            "Running tests on an overloaded pool",
            group(&|o| {
                !o.needs_decision()
                    && !o.past_need()
                    && !reshared(o)
                    && o.flags.contains(&crate::plan::RunningFlag::InputOverload)
            }),
        ),
    ]
    .into_iter()
    .filter(|(_, g)| !g.is_empty())
    .collect()
}

/// The table's header, one name a column.
pub const HEADER: [&str; 8] = [
    "experiment",
    "pool",
    "old result",
    "new result",
    "slip (days)",
    "old share",
    "new share",
    "change",
];

/// What each column of [`HEADER`] holds: the id as code, the dates, the
/// slip and the shares as numbers (right-aligned).
pub const COLUMNS: [Column; 8] = [
    Column::Code,
    Column::Text,
    Column::Date,
    Column::Date,
    Column::Number,
    Column::Number,
    Column::Number,
    Column::Text,
];

/// One experiment's cells, a column each of [`HEADER`].
fn cells(e: &ExperimentDiff) -> [String; 8] {
    [
        e.id.clone(),
        e.pools.join(", "),
        date(e.old_result_date),
        date(e.new_result_date),
        slip(e.slip_days),
        share(e.old_share),
        share(e.new_share),
        movement(e),
    ]
}

/// The table's rows in display order.
pub fn rows(d: &PlanDiff) -> Vec<Vec<String>> {
    ordered(d).into_iter().map(|e| cells(e).to_vec()).collect()
}

/// The lines under the table (which running ids need a decision, which
/// ids no longer fit, now fit, changed share; each pool's totals), each
/// after `bullet`. "no longer fit: none" is left out when running tests
/// need a decision: those are what no longer fits as planned.
pub fn summary_lines(s: &mut String, d: &PlanDiff, bullet: &str) {
    if !d.needs_decision.is_empty() {
        let _ = writeln!(s, "{bullet}need a decision: {}", ids(&d.needs_decision));
    }
    if !d.no_longer_fit.is_empty() || d.needs_decision.is_empty() {
        let _ = writeln!(s, "{bullet}no longer fit: {}", ids(&d.no_longer_fit));
    }
    let _ = writeln!(s, "{bullet}now fit: {}", ids(&d.now_fit));
    let _ = writeln!(s, "{bullet}share changed: {}", ids(&d.share_changed));
    for p in &d.pools {
        let _ = writeln!(s, "{bullet}{}", pool_line(p));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn pool_totals_group_digits_and_give_the_forecast_change() {
        let plan = fixture::replanned();
        let d = plan.changes.as_ref().unwrap();
        let before = d.pools[0].before.forecast_units;
        let line = pool_line(&d.pools[0]);
        assert!(line.starts_with("pool storefront: in the calendar 3 -> 2 (1 finished or cancelled since), out 1 -> 1, "), "{line}");
        assert!(
            line.contains(&format!(
                "forecast {} -> {} units over the window (-30%)",
                units(before),
                units(before * 0.7)
            )),
            "{line}"
        );
        assert!(
            before >= 1000.0,
            "the fixture has enough traffic to group digits"
        );
        assert!(line.contains(','), "{line}");
        // An unchanged forecast is given once.
        let search = pool_line(&d.pools[1]);
        assert!(search.ends_with(" units over the window"), "{search}");
    }

    #[test]
    fn the_rows_come_in_display_order_with_a_cell_a_column() {
        let plan = fixture::replanned();
        let rows = rows(plan.changes.as_ref().unwrap());
        let ids: Vec<&str> = rows.iter().map(|r| r[0].as_str()).collect();
        assert_eq!(ids, fixture::MOVED_ORDER);
        assert!(rows.iter().all(|r| r.len() == HEADER.len()));
        assert_eq!(COLUMNS.len(), HEADER.len());
    }
}

//! The changes since a previous plan, and the running tests' outlooks, as
//! text, Markdown and an HTML section: the part of a re-plan that a planner
//! reads first.
//!
//! Reads only `Plan::changes` and `Plan::running`; JSON carries both inside
//! the plan itself. The experiments that moved come first (no longer fit,
//! later, earlier, new share, now fit), then the rest, each group in the
//! plan's order.

use super::common::{percent, thousands, units};
use crate::diff::{ExperimentDiff, Movement, PlanDiff, PoolDiff};
use crate::plan::{Plan, RunningOutlook, Status};
use std::fmt::Write as _;
use unicode_width::UnicodeWidthStr;

/// The text table's style: a rule under the header only, as in the plan's
/// own table.
const TABLE_STYLE: &str = "     ─             ";

fn share(s: Option<f64>) -> String {
    s.map(percent).unwrap_or_default()
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
        Movement::Dropped => "gone from the portfolio",
    };
    // A running test cannot be moved, only re-read: say which rows those are.
    if e.new_status == Some(Status::Running) {
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
fn headline(d: &PlanDiff) -> String {
    let count = |m: Movement| d.experiments.iter().filter(|e| e.movement == m).count();
    let later: Vec<i64> = d
        .experiments
        .iter()
        .filter(|e| e.movement == Movement::Later)
        .filter_map(|e| e.slip_days)
        .collect();
    let mut parts = Vec::new();
    if !later.is_empty() {
        let most = later.iter().copied().max().unwrap_or(0);
        parts.push(format!(
            "{} {} later (by up to {most} days)",
            later.len(),
            if later.len() == 1 {
                "result"
            } else {
                "results"
            }
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

fn pool_line(p: &PoolDiff) -> String {
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
                " ({:+.0}%)",
                (a.forecast_units / b.forecast_units - 1.0) * 100.0
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

/// The running tests with advice, in two groups (each only when not
/// empty): those that cannot finish inside the window, then those a
/// re-plan gave a new share so that they do.
fn advice_groups(plan: &Plan) -> Vec<(&'static str, Vec<&RunningOutlook>)> {
    let with_advice = |fits: bool| -> Vec<&RunningOutlook> {
        plan.running
            .iter()
            .filter(|o| o.advice.is_some() && o.fits_window == fits)
            .collect()
    };
    [
        ("Running tests that need a decision", with_advice(false)),
        ("Running tests given a new share", with_advice(true)),
    ]
    .into_iter()
    .filter(|(_, g)| !g.is_empty())
    .collect()
}

/// Whether there is anything to show before the plan.
pub fn has_any(plan: &Plan) -> bool {
    plan.changes.is_some() || plan.running.iter().any(|o| o.advice.is_some())
}

const HEADER: [&str; 8] = [
    "experiment",
    "pool",
    "old result",
    "new result",
    "slip (days)",
    "old share",
    "new share",
    "change",
];

fn cells(e: &ExperimentDiff) -> [String; 8] {
    [
        e.id.clone(),
        e.pool.clone(),
        date(e.old_result_date),
        date(e.new_result_date),
        slip(e.slip_days),
        share(e.old_share),
        share(e.new_share),
        movement(e),
    ]
}

/// The text table's columns (indices into [`HEADER`]) from the widest
/// layout to the narrowest: the old and new share go first, then the pool,
/// then the old result date (the new one and the slip still give it).
const TEXT_LAYOUTS: [&[usize]; 4] = [
    &[0, 1, 2, 3, 4, 5, 6, 7],
    &[0, 1, 2, 3, 4, 7],
    &[0, 2, 3, 4, 7],
    &[0, 3, 4, 7],
];

/// The "what moved" table with `columns`, fitted to `width` by comfy-table's
/// dynamic arrangement when given, at its natural width otherwise. No
/// column is narrower than its longest word, so cells wrap only between
/// words: an id or a date is never broken.
fn moved_table(d: &PlanDiff, columns: &[usize], width: Option<usize>) -> comfy_table::Table {
    use comfy_table::{Cell, CellAlignment, ColumnConstraint, Table, Width};
    let mut t = Table::new();
    t.load_preset(TABLE_STYLE);
    t.force_no_tty();
    super::common::fit_table(&mut t, width);
    t.set_header(columns.iter().map(|&i| HEADER[i]));
    let rows: Vec<[String; 8]> = ordered(d).into_iter().map(cells).collect();
    for cells in &rows {
        t.add_row(columns.iter().map(|&i| {
            let cell = Cell::new(&cells[i]);
            if (4..=6).contains(&i) {
                cell.set_alignment(CellAlignment::Right)
            } else {
                cell
            }
        }));
    }
    let longest_word = |i: usize| {
        std::iter::once(HEADER[i])
            .chain(rows.iter().map(|r| r[i].as_str()))
            .flat_map(str::split_whitespace)
            .map(UnicodeWidthStr::width)
            .max()
            .unwrap_or(1)
    };
    // The ids keep their content's width. Elsewhere the lower boundary is
    // the longest word plus the two columns of padding: comfy-table 7
    // weighs it against an average that includes the padding, so the bare
    // word width would still let a date be cut.
    t.set_constraints(columns.iter().map(|&i| {
        if i <= 1 {
            ColumnConstraint::ContentWidth
        } else {
            let w = u16::try_from(longest_word(i) + 2).unwrap_or(u16::MAX);
            ColumnConstraint::LowerBoundary(Width::Fixed(w))
        }
    }));
    t
}

/// The "what moved" table at `width`: the widest layout of
/// [`TEXT_LAYOUTS`] that fits unwrapped, else the narrowest with cells
/// wrapped between words. Words are never broken, so a table of very long
/// ids can still run past a very narrow width.
fn moved_table_at(d: &PlanDiff, width: usize) -> comfy_table::Table {
    let natural = |columns: &[usize]| {
        moved_table(d, columns, None)
            .to_string()
            .lines()
            .map(UnicodeWidthStr::width)
            .max()
            .unwrap_or(0)
    };
    let columns = TEXT_LAYOUTS
        .iter()
        .copied()
        .find(|c| natural(c) <= width)
        .unwrap_or(TEXT_LAYOUTS[TEXT_LAYOUTS.len() - 1]);
    moved_table(d, columns, Some(width))
}

/// The changes and outlooks as terminal text (no colour), the table laid
/// out for `width` columns (see `moved_table_at`). The sentences around
/// it are not wrapped.
pub fn text(plan: &Plan, width: usize) -> String {
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(s, "What moved since the previous plan");
        let _ = writeln!(s, "{}", headline(d));
        let _ = writeln!(s);
        let _ = writeln!(s, "{}", moved_table_at(d, width));
        let _ = writeln!(s);
        summary_lines(&mut s, d, "");
        let _ = writeln!(s);
    }
    for (heading, group) in advice_groups(plan) {
        let _ = writeln!(s, "{heading}");
        for o in group {
            let _ = writeln!(s, "  {}: {}", o.id, o.advice.as_deref().unwrap_or(""));
        }
        let _ = writeln!(s);
    }
    s
}

fn summary_lines(s: &mut String, d: &PlanDiff, bullet: &str) {
    let _ = writeln!(s, "{bullet}no longer fit: {}", ids(&d.no_longer_fit));
    let _ = writeln!(s, "{bullet}now fit: {}", ids(&d.now_fit));
    let _ = writeln!(s, "{bullet}share changed: {}", ids(&d.share_changed));
    for p in &d.pools {
        let _ = writeln!(s, "{bullet}{}", pool_line(p));
    }
}

fn md_cell(x: &str) -> String {
    x.replace('|', "\\|")
}

/// The changes and outlooks as Markdown.
pub fn markdown(plan: &Plan) -> String {
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(s, "## What moved since the previous plan\n");
        let _ = writeln!(s, "{}\n", headline(d));
        let _ = writeln!(s, "| {} |", HEADER.join(" | "));
        let _ = writeln!(s, "|---|---|---|---|---:|---:|---:|---|");
        for e in ordered(d) {
            let mut c = cells(e);
            c[0] = format!("`{}`", c[0].replace('`', "'"));
            let c: Vec<String> = c.iter().map(|x| md_cell(x)).collect();
            let _ = writeln!(s, "| {} |", c.join(" | "));
        }
        let _ = writeln!(s);
        summary_lines(&mut s, d, "- ");
        let _ = writeln!(s);
    }
    for (heading, group) in advice_groups(plan) {
        let _ = writeln!(s, "## {heading}\n");
        for o in group {
            let _ = writeln!(
                s,
                "- `{}`: {}",
                o.id.replace('`', "'"),
                md_cell(o.advice.as_deref().unwrap_or(""))
            );
        }
        let _ = writeln!(s);
    }
    s
}

/// The changes and outlooks as HTML sections, for the top of the report.
pub fn html(plan: &Plan) -> String {
    use super::html::esc;
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(
            s,
            r#"<section><h2 id="changes">What moved since the previous plan</h2><p>{}</p>"#,
            esc(&headline(d))
        );
        let _ = write!(s, "<table><thead><tr>");
        for (i, h) in HEADER.iter().enumerate() {
            let class = if (4..=6).contains(&i) {
                r#" class="num""#
            } else {
                ""
            };
            let _ = write!(s, "<th{class}>{}</th>", esc(h));
        }
        let _ = writeln!(s, "</tr></thead><tbody>");
        for e in ordered(d) {
            let _ = write!(s, "<tr>");
            for (i, c) in cells(e).iter().enumerate() {
                let cell = match i {
                    0 => format!("<td><code>{}</code></td>", esc(c)),
                    4..=6 => format!(r#"<td class="num">{}</td>"#, esc(c)),
                    2 | 3 => format!(r#"<td class="date">{}</td>"#, esc(c)),
                    _ => format!("<td>{}</td>", esc(c)),
                };
                s.push_str(&cell);
            }
            let _ = writeln!(s, "</tr>");
        }
        let _ = writeln!(s, "</tbody></table><ul>");
        let mut lines = String::new();
        summary_lines(&mut lines, d, "");
        for l in lines.lines() {
            let _ = writeln!(s, "<li>{}</li>", esc(l));
        }
        let _ = writeln!(s, "</ul></section>");
    }
    for (heading, group) in advice_groups(plan) {
        let id = if group.iter().all(|o| o.fits_window) {
            "reshared"
        } else {
            "decisions"
        };
        let _ = writeln!(
            s,
            r#"<section><h2 id="{id}">{}</h2><ul class="reasons">"#,
            esc(heading)
        );
        for o in group {
            let _ = writeln!(
                s,
                "<li><code>{}</code>: {}</li>",
                esc(&o.id),
                esc(o.advice.as_deref().unwrap_or(""))
            );
        }
        let _ = writeln!(s, "</ul></section>");
    }
    s
}

/// `report` (a whole HTML document) with [`html`]'s sections placed right
/// after its header, before the summary; unchanged when there is nothing
/// to add or no header to place them after.
pub fn into_html_report(plan: &Plan, report: &str) -> String {
    let extra = html(plan);
    match report.find("</header>") {
        Some(i) if !extra.is_empty() => {
            let at = i + "</header>".len();
            format!("{}\n{}{}", &report[..at], extra, &report[at..])
        }
        _ => report.to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;
    use chrono::Duration;

    /// The fixture plan re-made: `hero-copy` finished, `trust-badges` a
    /// week later, `search-synonyms` running at a new share, `recipe-cards`
    /// in, `search-freshness` out, and the storefront's forecast 30% down.
    fn replanned() -> Plan {
        let old = fixture::plan();
        let mut new = old.clone();
        for e in &mut new.experiments {
            match e.id.as_str() {
                "hero-copy" => {
                    e.status = Status::Finished;
                    (e.start, e.end, e.result_date, e.share) = (None, None, None, None);
                }
                "trust-badges" => {
                    e.result_date = e.result_date.map(|d| d + Duration::days(7));
                }
                "search-synonyms" => {
                    e.status = Status::Running;
                    e.share = Some(0.5);
                }
                "recipe-cards" => {
                    e.status = Status::Scheduled;
                    e.result_date = old.experiments[3].result_date;
                    e.share = Some(0.2);
                }
                "search-freshness" => {
                    e.status = Status::Unscheduled;
                    (e.start, e.end, e.result_date, e.share) = (None, None, None, None);
                }
                _ => {}
            }
        }
        for day in &mut new.pools[0].days {
            day.forecast *= 0.7;
        }
        new.changes = Some(crate::diff::diff(&old, &new));
        new
    }

    fn row_of(text: &str, id: &str) -> usize {
        text.lines()
            .position(|l| l.trim_start().starts_with(id) || l.starts_with(&format!("| `{id}`")))
            .unwrap_or_else(|| panic!("no row for {id}:\n{text}"))
    }

    #[test]
    fn what_moved_comes_first_with_a_one_line_summary() {
        let plan = replanned();
        let text = text(&plan, 160);
        assert!(text.contains(
            "\n1 result later (by up to 7 days), 1 no longer fit, 1 now fit, 1 with a new share; 1 finished since.\n"
        ), "{text}");
        let order = [
            "search-freshness",
            "trust-badges",
            "search-synonyms",
            "recipe-cards",
            "free-shipping-bar",
            "gift-wrap-upsell",
            "hero-copy",
        ];
        for pair in order.windows(2) {
            assert!(
                row_of(&text, pair[0]) < row_of(&text, pair[1]),
                "{pair:?}\n{text}"
            );
        }
        assert!(text.contains("new share, running"), "{text}");
        assert!(text.contains("no longer fits"), "{text}");
        let md = markdown(&plan);
        for pair in order.windows(2) {
            assert!(
                row_of(&md, pair[0]) < row_of(&md, pair[1]),
                "{pair:?}\n{md}"
            );
        }
    }

    /// The table's lines in `text`: from the header to the blank line after it.
    fn table_lines(text: &str) -> Vec<&str> {
        text.lines()
            .skip_while(|l| !l.trim_start().starts_with("experiment"))
            .take_while(|l| !l.trim().is_empty())
            .collect()
    }

    #[test]
    fn the_table_fits_the_width_and_drops_shares_then_pool() {
        let plan = replanned();
        let d = plan.changes.as_ref().unwrap();
        let mut headers = Vec::new();
        for width in [60, 100, 160] {
            let out = text(&plan, width);
            let lines = table_lines(&out);
            assert!(lines.len() > d.experiments.len(), "{width}:\n{out}");
            for l in &lines {
                assert!(
                    l.width() <= width,
                    "{width}: {} columns: {l:?}\n{out}",
                    l.width()
                );
            }
            // Every id is in one piece on one line, in its own cell.
            for e in &d.experiments {
                assert!(
                    lines
                        .iter()
                        .any(|l| l.split_whitespace().any(|w| w == e.id)),
                    "{width}: `{}` is not whole:\n{out}",
                    e.id
                );
            }
            headers.push(lines[0].to_string());
        }
        // Every column at 160; narrower, the shares go first, then the
        // pool, then the old result; the id, the new result, the slip and
        // the change always stay.
        let has = |h: &str, name: &str| h.contains(name);
        for name in HEADER {
            assert!(has(&headers[2], name), "{name} in {:?}", headers[2]);
        }
        assert!(!has(&headers[0], "old share") && !has(&headers[0], "new share"));
        for h in &headers {
            assert!(
                has(h, "pool") || !has(h, "share"),
                "pool before shares: {h:?}"
            );
            assert!(
                has(h, "old result") || !has(h, "pool"),
                "old result before pool: {h:?}"
            );
        }
        for pair in headers.windows(2) {
            for name in HEADER {
                assert!(
                    !has(&pair[0], name) || has(&pair[1], name),
                    "{name} at 60 or 100 but not wider: {pair:?}"
                );
            }
        }
        for h in &headers {
            for kept in ["experiment", "new result", "slip", "change"] {
                assert!(has(h, kept), "{kept} in {h:?}");
            }
        }
        // At 160 the whole table fits on one line a row, as before.
        let wide = text(&plan, 160);
        assert_eq!(table_lines(&wide).len(), d.experiments.len() + 2, "{wide}");
    }

    #[test]
    fn ids_stay_whole_even_below_the_narrowest_layout() {
        let plan = replanned();
        let d = plan.changes.as_ref().unwrap();
        let out = text(&plan, 30);
        let lines = table_lines(&out);
        for e in &d.experiments {
            assert!(
                lines
                    .iter()
                    .any(|l| l.split_whitespace().any(|w| w == e.id)),
                "`{}` is broken:\n{out}",
                e.id
            );
        }
    }

    #[test]
    fn pool_totals_group_digits_and_give_the_forecast_change() {
        let plan = replanned();
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
    fn the_html_report_gets_the_changes_after_its_header() {
        let plan = replanned();
        let report =
            "<html><body><main><header>x</header><section>summary</section></main></body></html>";
        let out = into_html_report(&plan, report);
        let changes = out.find(r#"<h2 id="changes">"#).unwrap();
        assert!(out.find("</header>").unwrap() < changes);
        assert!(changes < out.find("summary").unwrap());
        assert!(out.contains("<td><code>search-freshness</code></td>"));
        // Nothing to add: the report is left as it was.
        assert_eq!(into_html_report(&fixture::plan(), report), report);
    }

    #[test]
    fn advice_is_grouped_by_whether_the_test_still_fits() {
        let mut plan = fixture::plan();
        let outlook = |id: &str, fits: bool, advice: &str| RunningOutlook {
            id: id.into(),
            started: plan.window.start,
            share: 0.5,
            collected: 10,
            units_needed: 100,
            end: None,
            fits_window: fits,
            rescue_share: None,
            detectable_effect: None,
            advice: Some(advice.into()),
        };
        plan.running = vec![
            outlook("search-synonyms", true, "re-shared from 10% to 50%"),
            outlook("hero-copy", false, "cannot reach its sample"),
        ];
        let out = text(&plan, 100);
        let decide = out
            .find("Running tests that need a decision\n  hero-copy: cannot")
            .unwrap();
        let reshared = out
            .find("Running tests given a new share\n  search-synonyms: re-shared")
            .unwrap();
        assert!(decide < reshared, "{out}");
        let html = html(&plan);
        assert!(html.contains(r#"<h2 id="decisions">Running tests that need a decision"#));
        assert!(html.contains(r#"<h2 id="reshared">Running tests given a new share"#));
        plan.running.pop();
        assert!(!text(&plan, 100).contains("need a decision"));
    }
}

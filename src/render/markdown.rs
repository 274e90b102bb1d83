//! Markdown: a short summary to paste into a document or a ticket: the
//! result dates in a table, the tests that do not fit with their reasons,
//! and one paragraph of assumptions; a re-plan's changes and advice first.
//! User text is escaped so that it cannot break the table or start markup
//! of its own.

use super::common::{caution, counts, has_ranges, long_date, pools_label, range_words};
use super::markup::{Column, MarkupTable};
use super::moved::{advice_groups, headline, rows, summary_lines, COLUMNS, HEADER, TITLE};
use super::{RenderError, RenderOptions, Renderer};
use crate::plan::Plan;
use std::fmt::Write;

/// The Markdown renderer.
pub struct Markdown;

/// Escapes text for Markdown (CommonMark backslash escapes for ASCII
/// punctuation that can start markup; line breaks become spaces).
pub fn escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    let mut chars = s.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            // `&` only starts an entity (`&amp;`, `&#38;`) before a letter or
            // `#`; "Larkspur & Loom" reads better without a backslash.
            '&' if chars
                .peek()
                .is_some_and(|n| n.is_ascii_alphanumeric() || *n == '#') =>
            {
                out.push_str("\\&");
            }
            '\\' | '`' | '*' | '_' | '[' | ']' | '<' | '>' | '|' | '#' | '~' | '!' => {
                out.push('\\');
                out.push(c);
            }
            c if c.is_control() => out.push(' '),
            _ => out.push(c),
        }
    }
    out
}

/// Escapes text like [`escape`], but keeps `backticked` names (as the
/// scheduler writes them in reasons) as code spans.
pub fn escape_keeping_code(s: &str) -> String {
    let parts: Vec<&str> = s.split('`').collect();
    if parts.len().is_multiple_of(2) {
        return escape(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for (i, part) in parts.iter().enumerate() {
        if i % 2 == 1 && !part.is_empty() {
            out.push('`');
            out.extend(part.chars().map(|c| if c.is_control() { ' ' } else { c }));
            out.push('`');
        } else {
            out.push_str(&escape(part));
        }
    }
    out
}

/// A table cell's text: only `|`, which would end the cell, is escaped.
fn table_cell(x: &str) -> String {
    x.replace('|', "\\|")
}

/// Markdown's table pieces: a pipe table, numbers right-aligned.
impl MarkupTable for Markdown {
    fn header_row(&self, header: &[&str], _columns: &[Column]) -> String {
        let cells: Vec<String> = header.iter().map(|h| table_cell(h)).collect();
        self.row(&cells)
    }

    fn divider(&self, columns: &[Column]) -> String {
        let mut line = String::from("|");
        for &c in columns {
            line.push_str(if c == Column::Number { "---:|" } else { "---|" });
        }
        line.push('\n');
        line
    }

    fn cell(&self, column: Column, text: &str) -> String {
        match column {
            Column::Code => table_cell(&format!("`{}`", text.replace('`', "'"))),
            _ => table_cell(text),
        }
    }

    fn row(&self, cells: &[String]) -> String {
        format!("| {} |\n", cells.join(" | "))
    }
}

/// A re-plan's changes and the running tests' advice, for the top of the
/// summary; empty when the plan has neither.
fn changes(plan: &Plan) -> String {
    let mut s = String::new();
    for (_, title, lines) in super::common::news(plan) {
        let _ = writeln!(s, "## {title}\n");
        for line in lines {
            let _ = writeln!(s, "- {}", escape(&line));
        }
        let _ = writeln!(s);
    }
    if let Some(d) = &plan.changes {
        let _ = writeln!(s, "## {TITLE}\n");
        let _ = writeln!(s, "{}\n", headline(d));
        s.push_str(&Markdown.table(&HEADER, &COLUMNS, &rows(d)));
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
                table_cell(o.advice.as_deref().unwrap_or(""))
            );
        }
        let _ = writeln!(s);
    }
    s
}

/// The numbers behind each test with a run: a table of its design and
/// results, then its look dates and secondary metrics where it has them.
fn numbers(plan: &Plan, w: &mut String) {
    use super::markup::{Column, MarkupTable};
    use super::numbers::{look_dates, secondaries, table_rows, TABLE_HEADER};
    let rows = table_rows(&plan.experiments);
    if rows.is_empty() {
        return;
    }
    let _ = writeln!(w, "### The numbers behind each test\n");
    let mut columns = vec![Column::Code];
    columns.extend([Column::Text; TABLE_HEADER.len() - 1]);
    w.push_str(&Markdown.table(&TABLE_HEADER, &columns, &rows));
    let _ = writeln!(w);
    for e in plan.experiments.iter().filter(|e| e.run.is_some()) {
        let looks = e.looks.as_ref().map(look_dates);
        let more = e.statistics.as_ref().and_then(secondaries);
        for line in looks.iter().chain(&more) {
            let _ = writeln!(
                w,
                "- `{}`: {}",
                e.id.replace('`', "'"),
                escape_keeping_code(line)
            );
        }
    }
    let _ = writeln!(w);
}

/// The result-range column's header cell and divider cell: empty when
/// no test has a range.
fn range_head(plan: &Plan) -> (&'static str, &'static str) {
    if has_ranges(plan) {
        (" Result due (P10–P90) |", "---|")
    } else {
        ("", "")
    }
}

/// `e`'s result-range cell with its trailing ` |` (empty when no test has
/// a range): its dates and on-time share.
fn range_cell(plan: &Plan, e: &crate::plan::PlannedExperiment) -> String {
    if !has_ranges(plan) {
        return String::new();
    }
    let words = e.result_range.as_ref().map_or(String::new(), |r| {
        format!("{} ({})", range_words(r), super::common::chance_words(r))
    });
    format!(" {} |", table_cell(&words))
}

/// A re-plan's actual traffic against the forecast; nothing without it.
fn traffic(plan: &Plan, w: &mut String) {
    let lines = super::common::traffic_lines(plan);
    if lines.is_empty() {
        return;
    }
    let _ = writeln!(w, "### Traffic so far\n");
    for line in lines {
        let _ = writeln!(w, "- {}", escape(&line));
    }
    let _ = writeln!(w);
}

impl Renderer for Markdown {
    fn render(&self, plan: &Plan, _opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let mut md = changes(plan);
        let (fit, not_fit) = counts(plan);
        let w = &mut md;
        // Writing to a String cannot fail.
        let _ = writeln!(w, "## Experiment plan: {}\n", escape(&plan.portfolio));
        let _ = writeln!(
            w,
            "Window {} to {}. {fit} of {} tests fit; {not_fit} {}{}.\n",
            long_date(plan.window.start),
            long_date(plan.window.end),
            plan.experiments.len(),
            super::common::do_not(not_fit),
            super::common::decision_note(plan)
        );
        if let Some(note) = super::common::cut_short_note(plan) {
            let _ = writeln!(w, "> **Cut short.** {}\n", escape_keeping_code(note));
        }
        traffic(plan, w);
        if fit > 0 {
            let (head, rule) = range_head(plan);
            let _ = writeln!(
                w,
                "| Result due |{head} Test | Pool | Runs | Share | Owner |"
            );
            let _ = writeln!(w, "|---|{rule}---|---|---|--:|---|");
            let mut rows: Vec<_> = plan
                .experiments
                .iter()
                .filter_map(|e| e.run.map(|run| (run, e)))
                .collect();
            // Stakeholders read this table by date; ties keep plan order.
            rows.sort_by_key(|(run, _)| run.result_date);
            for (run, e) in rows {
                let _ = writeln!(
                    w,
                    "| {} |{} {} (`{}`) | {} | {} to {} | {} | {} |",
                    long_date(run.result_date),
                    range_cell(plan, e),
                    escape(&e.title),
                    e.id.replace('`', "'"),
                    escape(&pools_label(plan, e)),
                    run.start,
                    run.end,
                    match super::common::ramp_words(e) {
                        Some(ramp) => format!(
                            "{} (after a ramp: {})",
                            super::common::share_words(e, run.share),
                            escape(&ramp)
                        ),
                        None => super::common::share_words(e, run.share),
                    },
                    escape(&e.owner)
                );
            }
            let _ = writeln!(w);
            numbers(plan, w);
        }
        let held: Vec<String> = plan
            .pools
            .iter()
            .filter(|p| p.holdout > 0.0)
            .map(|p| {
                format!(
                    "{} of {}",
                    crate::words::percent(p.holdout),
                    escape(&p.label)
                )
            })
            .collect();
        if !held.is_empty() {
            let _ = writeln!(w, "Held out of every test: {}.\n", held.join("; "));
        }
        if not_fit > 0 {
            let _ = writeln!(w, "### Tests that do not fit\n");
            for e in plan
                .experiments
                .iter()
                .filter(|e| e.status == crate::plan::Status::Unscheduled)
            {
                let _ = writeln!(
                    w,
                    "- **{}** (`{}`, {}): {}",
                    escape(&e.title),
                    e.id.replace('`', "'"),
                    escape(&pools_label(plan, e)),
                    escape_keeping_code(e.reason.as_deref().unwrap_or("no reason given"))
                );
                if let (Some(d), Some(s)) = (&e.detectable, &e.statistics) {
                    let _ = writeln!(
                        w,
                        "  {}",
                        escape_keeping_code(&super::numbers::detectable(d, s))
                    );
                }
            }
            let _ = writeln!(w);
        }
        let closed: Vec<_> = plan
            .experiments
            .iter()
            .filter(|e| {
                matches!(
                    e.status,
                    crate::plan::Status::Finished | crate::plan::Status::Cancelled
                )
            })
            .collect();
        if !closed.is_empty() {
            let _ = writeln!(w, "### Finished and cancelled\n");
            for e in closed {
                let _ = writeln!(
                    w,
                    "- **{}** (`{}`, {}): {}",
                    escape(&e.title),
                    e.id.replace('`', "'"),
                    escape(&pools_label(plan, e)),
                    escape(&super::common::closed_words(e))
                );
            }
            let _ = writeln!(w);
        }
        let _ = writeln!(w, "### Assumptions\n\n{}", caution(plan));
        Ok(md.into_bytes())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn escapes_markup_and_table_breakers() {
        assert_eq!(escape("a|b <c> *d*"), r"a\|b \<c\> \*d\*");
        assert_eq!(escape("two\nlines"), "two lines");
        // `&` is escaped only where it could start an entity.
        assert_eq!(escape("Larkspur & Loom"), "Larkspur & Loom");
        assert_eq!(escape("R&D &amp; &#38; &"), r"R\&D \&amp; \&\#38; &");
    }

    #[test]
    fn keeps_backticked_names_as_code() {
        assert_eq!(
            escape_keeping_code("pool `a_b` is *full*"),
            r"pool `a_b` is \*full\*"
        );
        assert_eq!(escape_keeping_code("odd ` tick"), r"odd \` tick");
    }

    #[test]
    fn lists_results_by_date_and_every_test_that_does_not_fit() {
        let plan = fixture::plan();
        let md =
            String::from_utf8(Markdown.render(&plan, &RenderOptions::default()).unwrap()).unwrap();
        let hero = md.find("Shorter hero headline").unwrap();
        let shipping = md.find("Free-shipping progress bar").unwrap();
        assert!(hero < shipping, "results sorted by date");
        for e in plan.experiments.iter().filter(|e| e.reason.is_some()) {
            assert!(md.contains(&format!("`{}`", e.id)), "{} missing", e.id);
        }
        assert!(md.contains("\\<label\\>"), "title escaped");
        assert!(!md.contains(TITLE), "no changes without a previous plan");
    }

    #[test]
    fn a_replan_starts_with_what_moved_in_a_pipe_table() {
        let plan = fixture::replanned();
        let md =
            String::from_utf8(Markdown.render(&plan, &RenderOptions::default()).unwrap()).unwrap();
        assert!(md.starts_with(&format!("## {TITLE}\n\n")), "{md}");
        assert!(
            md.contains("\n|---|---|---|---|---:|---:|---:|---|\n"),
            "{md}"
        );
        let row_of = |id: &str| {
            md.lines()
                .position(|l| l.starts_with(&format!("| `{id}` |")))
                .unwrap_or_else(|| panic!("no row for {id}:\n{md}"))
        };
        for pair in fixture::MOVED_ORDER.windows(2) {
            assert!(row_of(pair[0]) < row_of(pair[1]), "{pair:?}\n{md}");
        }
        assert!(md.find(TITLE) < md.find("## Experiment plan: "));
    }

    #[test]
    fn table_cells_escape_only_the_pipe_and_show_ids_as_code() {
        assert_eq!(Markdown.cell(Column::Text, "a|b *c*"), r"a\|b *c*");
        assert_eq!(Markdown.cell(Column::Code, "x`y"), "`x'y`");
        assert_eq!(
            Markdown.divider(&[Column::Code, Column::Number]),
            "|---|---:|\n"
        );
    }
}

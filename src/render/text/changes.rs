//! A re-plan's changes and advice as terminal text, before the plan: the
//! "what moved" table fitted to the width, the lines under it, and the
//! running tests that need a decision or were given a new share. The words
//! are [`crate::render::moved`]'s.

use super::TABLE_STYLE;
use crate::plan::{Plan, PlanDiff};
use crate::render::common::fit_table;
use crate::render::markup::Column;
use crate::render::moved::{advice_groups, headline, rows, summary_lines, COLUMNS, HEADER, TITLE};
use comfy_table::{Cell, CellAlignment, ColumnConstraint, Table, Width};
use std::fmt::Write as _;
use unicode_width::UnicodeWidthStr;

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
fn moved_table(d: &PlanDiff, columns: &[usize], width: Option<usize>) -> Table {
    let mut t = Table::new();
    t.load_preset(TABLE_STYLE);
    t.force_no_tty();
    fit_table(&mut t, width);
    t.set_header(columns.iter().map(|&i| HEADER[i]));
    let rows = rows(d);
    for cells in &rows {
        t.add_row(columns.iter().map(|&i| {
            let cell = Cell::new(&cells[i]);
            if COLUMNS[i] == Column::Number {
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
fn moved_table_at(d: &PlanDiff, width: usize) -> Table {
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
/// out for `width` columns (see [`moved_table_at`]); empty when the plan
/// has neither. The sentences around the table are not wrapped.
pub(super) fn section(plan: &Plan, width: usize) -> String {
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(s, "{TITLE}");
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    fn row_of(text: &str, id: &str) -> usize {
        text.lines()
            .position(|l| l.trim_start().starts_with(id) || l.starts_with(&format!("| `{id}`")))
            .unwrap_or_else(|| panic!("no row for {id}:\n{text}"))
    }

    #[test]
    fn what_moved_comes_first_with_a_one_line_summary() {
        let plan = fixture::replanned();
        let text = section(&plan, 160);
        assert!(text.contains(
            "\n1 result later (by up to 7 days), 1 no longer fit, 1 now fit, 1 with a new share; 1 finished since.\n"
        ), "{text}");
        for pair in fixture::MOVED_ORDER.windows(2) {
            assert!(
                row_of(&text, pair[0]) < row_of(&text, pair[1]),
                "{pair:?}\n{text}"
            );
        }
        assert!(text.contains("new share, running"), "{text}");
        assert!(text.contains("no longer fits"), "{text}");
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
        let plan = fixture::replanned();
        let d = plan.changes.as_ref().unwrap();
        let mut headers = Vec::new();
        for width in [60, 100, 160] {
            let out = section(&plan, width);
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
        let wide = section(&plan, 160);
        assert_eq!(table_lines(&wide).len(), d.experiments.len() + 2, "{wide}");
    }

    #[test]
    fn ids_stay_whole_even_below_the_narrowest_layout() {
        let plan = fixture::replanned();
        let d = plan.changes.as_ref().unwrap();
        let out = section(&plan, 30);
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
    fn the_text_report_starts_with_the_changes() {
        use crate::render::{text::Text, RenderOptions, Renderer};
        let opts = RenderOptions {
            width: Some(100),
            colour: false,
        };
        let plan = fixture::replanned();
        let out = String::from_utf8(Text.render(&plan, &opts).unwrap()).unwrap();
        let changes = section(&plan, 100);
        assert!(changes.starts_with(TITLE), "{changes}");
        assert!(out.starts_with(&changes), "{out}");
        assert!(
            out[changes.len()..].starts_with("Experiment plan: "),
            "{out}"
        );
        let plain = String::from_utf8(Text.render(&fixture::plan(), &opts).unwrap()).unwrap();
        assert!(plain.starts_with("Experiment plan: "), "{plain}");
    }

    #[test]
    fn advice_is_grouped_by_whether_the_test_still_fits() {
        let plan = fixture::with_advice();
        let out = section(&plan, 100);
        let decide = out
            .find("Running tests that need a decision\n  hero-copy: cannot")
            .unwrap();
        let reshared = out
            .find("Running tests given a new share\n  search-synonyms: re-shared")
            .unwrap();
        assert!(decide < reshared, "{out}");
        let mut plan = plan;
        plan.running.pop();
        assert!(!section(&plan, 100).contains("need a decision"));
    }
}

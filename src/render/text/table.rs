//! The terminal's tables: the experiments (as many columns as the width
//! allows without breaking an id) and each pool's weekly use.

use super::{fit, FULL, TABLE_STYLE};
use crate::plan::Plan;
use crate::render::common::{fit_table, is_split, out_word, percent, short_date, thousands, weeks};
use comfy_table::{Cell, CellAlignment, Color, ContentArrangement, Table};
use unicode_width::UnicodeWidthStr;

/// A column of the experiment table, in the order the table shows them.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Debug)]
enum Col {
    Test,
    Title,
    Pool,
    Share,
    Start,
    End,
    Due,
    Range,
    Days,
    Units,
    Status,
}

/// The columns every table has, whatever its width.
const ALWAYS: [Col; 4] = [Col::Test, Col::Share, Col::Start, Col::Due];

/// The other columns, most wanted first: each is added while the table
/// still fits, so a column is never shown while one above it is left out.
/// The result range and the pool come before the end and status, and the
/// title, which can be cut, comes last.
const BY_PRIORITY: [Col; 6] = [
    Col::Range,
    Col::Pool,
    Col::End,
    Col::Status,
    Col::Days,
    Col::Units,
];

/// The experiment table at `width`: the columns [`ALWAYS`] shown, then as
/// many of [`BY_PRIORITY`] as fit without wrapping a cell, so an id is
/// never broken across lines while a column could be left out instead;
/// then the titles, cut with `…` to the room left when that is enough to
/// be worth a column. When even the first columns do not fit, they are
/// wrapped to the width.
pub(super) fn experiments(plan: &Plan, width: usize, colour: bool) -> Table {
    let natural = |cols: &[Col], title_room: usize| -> usize {
        let t = table_for(plan, cols, title_room, None, false).to_string();
        t.lines().map(UnicodeWidthStr::width).max().unwrap_or(0)
    };
    let ranges = plan.experiments.iter().any(|e| e.result_range.is_some());
    let mut cols = ALWAYS.to_vec();
    if natural(&cols, 0) > width {
        return table_for(plan, &cols, 0, Some(width), colour);
    }
    for col in BY_PRIORITY {
        if col == Col::Range && !ranges {
            continue;
        }
        let mut more = cols.clone();
        more.push(col);
        more.sort();
        if natural(&more, 0) > width {
            break;
        }
        cols = more;
    }
    if cols.len() == ALWAYS.len() + BY_PRIORITY.len() - usize::from(!ranges) {
        let room = width.saturating_sub(natural(&cols, 0) + 3);
        let mut with_title = cols.clone();
        with_title.push(Col::Title);
        with_title.sort();
        if room >= MIN_TITLE_ROOM && natural(&with_title, room) <= width {
            return table_for(plan, &with_title, room, Some(width), colour);
        }
    }
    table_for(plan, &cols, 0, Some(width), colour)
}

/// Fewest columns worth giving the titles.
const MIN_TITLE_ROOM: usize = 16;

/// The experiment table with the columns `cols` (in [`Col`] order; titles
/// cut to `title_room` columns), wrapped to `width` when given and laid
/// out at its natural width otherwise.
fn table_for(
    plan: &Plan,
    cols: &[Col],
    title_room: usize,
    width: Option<usize>,
    colour: bool,
) -> Table {
    let has = |c: Col| cols.contains(&c);
    let mut t = Table::new();
    t.load_preset(TABLE_STYLE);
    fit_table(&mut t, width);
    if colour {
        t.enforce_styling();
    } else {
        t.force_no_tty();
    }
    let header: Vec<&str> = cols
        .iter()
        .map(|c| match c {
            Col::Test => "test",
            Col::Title => "title",
            Col::Pool => "pool",
            Col::Share => "share",
            Col::Start => "start",
            Col::End => "end",
            Col::Due => "result due",
            Col::Range => "result due (P10–P90)",
            Col::Days => "days",
            Col::Units => "units needed",
            Col::Status => "status",
        })
        .collect();
    t.set_header(header.iter().map(Cell::new));
    let any_marked = plan.experiments.iter().any(|e| e.eligible < 1.0);
    for e in &plan.experiments {
        let run = e.run;
        // A finished or cancelled test shows the days it ran (re-plans).
        let past = crate::render::common::past_run(e);
        let mut row = vec![Cell::new(&e.id)];
        if has(Col::Title) {
            row.push(Cell::new(fit(&e.title, title_room)));
        }
        if has(Col::Pool) {
            row.push(Cell::new(e.pools.join(", ")));
        }
        match run.as_ref().or(past.as_ref()) {
            Some(r) => {
                let share = match &e.ran {
                    Some(ran) if run.is_none() => {
                        ran.share.map_or("—".to_string(), |s| s.to_string())
                    }
                    _ => r.share.to_string(),
                };
                // The mark of the footnote under the table on what its
                // targeting admits; a space in its place keeps the other
                // shares' digits aligned.
                let mark = match (e.eligible < 1.0, any_marked) {
                    (true, _) => "*",
                    (false, true) => " ",
                    (false, false) => "",
                };
                row.push(Cell::new(format!("{share}{mark}")).set_alignment(CellAlignment::Right));
                row.push(Cell::new(r.start));
                if has(Col::End) {
                    row.push(Cell::new(r.end));
                }
                // A past run shows when it ended, not a result to come.
                row.push(match crate::render::common::past_result_cell(e) {
                    Some(cell) => Cell::new(cell),
                    None => Cell::new(r.result_date),
                });
                if has(Col::Range) {
                    row.push(Cell::new(
                        e.result_range.as_ref().map_or(String::new(), range_cell),
                    ));
                }
                if has(Col::Days) {
                    row.push(Cell::new(r.days).set_alignment(CellAlignment::Right));
                }
            }
            None => {
                let pad = if any_marked { " " } else { "" };
                row.push(Cell::new(format!("—{pad}")).set_alignment(CellAlignment::Right));
                // Without a status column, the status goes where the
                // start would be.
                let mut word = Cell::new(if has(Col::Status) { "—" } else { out_word(e) });
                if colour && !has(Col::Status) {
                    word = word.fg(Color::Yellow);
                }
                row.push(word);
                if has(Col::End) {
                    row.push(Cell::new(""));
                }
                row.push(Cell::new(""));
                if has(Col::Range) {
                    row.push(Cell::new(""));
                }
                if has(Col::Days) {
                    row.push(Cell::new(""));
                }
            }
        }
        if has(Col::Units) {
            row.push(Cell::new(thousands(e.units_needed)).set_alignment(CellAlignment::Right));
        }
        if has(Col::Status) {
            let mut status = Cell::new(if run.is_some() {
                e.status.name()
            } else {
                out_word(e)
            });
            if colour {
                status = status.fg(if run.is_some() {
                    Color::Green
                } else {
                    Color::Yellow
                });
            }
            row.push(status);
        }
        t.add_row(row);
    }
    t
}

/// A range's cell: its dates, and with a confidence plan the share of
/// paths on which the result comes by its planned date.
fn range_cell(r: &crate::plan::ResultRange) -> String {
    let words = crate::render::common::range_words(r);
    match r.on_plan {
        Some(p) => format!("{words} (by plan {})", crate::words::percent(p)),
        None => words,
    }
}

/// A bar of `cells` characters filled to `fraction` (clamped to 0..=1),
/// with eighth blocks for the remainder.
fn meter(fraction: f64, cells: usize) -> String {
    const EIGHTHS: [char; 8] = [' ', '▏', '▎', '▍', '▌', '▋', '▊', '▉'];
    let f = if fraction.is_finite() {
        fraction.clamp(0.0, 1.0)
    } else {
        0.0
    };
    let eighths = (f * (cells * 8) as f64).round() as usize;
    let mut out = String::new();
    out.extend(std::iter::repeat_n(FULL, eighths / 8));
    if eighths / 8 < cells {
        out.push(EIGHTHS[eighths % 8]);
        out.extend(std::iter::repeat_n(' ', cells - eighths / 8 - 1));
    }
    out
}

/// Each pool's use per week: the peak day's share in use (split pools) or
/// tests running (overlap pools), with a meter when there is room.
pub(super) fn pool_use(plan: &Plan, width: usize, colour: bool) -> Table {
    let mut t = Table::new();
    t.load_preset(TABLE_STYLE)
        .set_content_arrangement(ContentArrangement::Dynamic)
        .set_width(width as u16);
    if colour {
        t.enforce_styling();
    } else {
        t.force_no_tty();
    }
    let pools = plan.pools.len().max(1);
    // Room per pool column after the date column and borders.
    let per_pool = width.saturating_sub(14) / pools;
    let bar = per_pool.saturating_sub(16).min(12);
    let mut header = vec![Cell::new("week of")];
    for p in &plan.pools {
        let name = if per_pool >= p.label.width() + 12 {
            format!("{} ({})", p.label, p.sharing.name())
        } else {
            p.id.clone()
        };
        header.push(Cell::new(name));
    }
    t.set_header(header);
    for w in weeks(plan) {
        let mut row = vec![Cell::new(short_date(w.start))];
        for p in &plan.pools {
            let days: Vec<_> = p
                .days
                .iter()
                .filter(|d| w.start <= d.date && d.date <= w.end)
                .collect();
            let peak_share = days
                .iter()
                .map(|d| d.share_used.fraction())
                .fold(0.0, f64::max);
            let over = days.iter().any(|d| p.over(d));
            let peak_running = days.iter().map(|d| d.running).max().unwrap_or(0);
            let (fraction, words) = if is_split(p) {
                (peak_share, percent(peak_share))
            } else {
                (
                    f64::from(peak_running) / f64::from(p.max_concurrent.max(1)),
                    format!("{peak_running} of {} tests", p.max_concurrent),
                )
            };
            let text = if bar > 0 {
                format!("{} {words}", meter(fraction, bar))
            } else {
                words
            };
            let mut cell = Cell::new(text);
            if colour && over {
                cell = cell.fg(Color::Red);
            }
            row.push(cell);
        }
        t.add_row(row);
    }
    t
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;
    use crate::render::text::Text;
    use crate::render::{RenderOptions, Renderer};

    #[test]
    fn the_table_leaves_out_columns_rather_than_break_an_id() {
        let plain = fixture::plan();
        let mut long = fixture::plan();
        long.experiments[0].id = "a-rather-long-experiment-identifier".to_string();
        // Where the narrowest table fits, ids stay whole (a 35-character id
        // needs about 72 columns even with the fewest columns).
        let cases = [
            (&plain, 60u16),
            (&plain, 72),
            (&long, 80),
            (&long, 100),
            (&long, 120),
            (&long, 160),
            (&long, 200),
        ];
        for (plan, width) in cases {
            let out = String::from_utf8(
                Text.render(
                    plan,
                    &RenderOptions {
                        width: Some(width),
                        colour: false,
                    },
                )
                .unwrap(),
            )
            .unwrap();
            let table = out.split("\nTimeline").next().unwrap();
            for e in &plan.experiments {
                assert!(
                    table.lines().any(|l| l.starts_with(&format!(" {} ", e.id))),
                    "`{}` whole on one line at {width} columns:\n{table}",
                    e.id
                );
            }
            assert!(
                table.lines().all(|l| l.width() <= usize::from(width)),
                "{table}"
            );
        }
    }

    #[test]
    fn columns_come_by_priority_range_and_pool_before_the_title() {
        use crate::plan::ResultRange;
        let mut plan = fixture::plan();
        for e in plan.experiments.iter_mut().filter(|e| e.run.is_some()) {
            let due = e.run.unwrap().result_date;
            e.result_range = Some(ResultRange {
                p10: Some(due),
                p50: Some(due),
                p90: Some(due + chrono::Duration::days(7)),
                on_time: 0.9,
                on_plan: None,
            });
        }
        let header = |width: u16| {
            let out = String::from_utf8(
                Text.render(
                    &plan,
                    &RenderOptions {
                        width: Some(width),
                        colour: false,
                    },
                )
                .unwrap(),
            )
            .unwrap();
            out.lines()
                .find(|l| l.starts_with(" test "))
                .unwrap()
                .to_string()
        };
        let mut seen_range_without_title = false;
        for width in (60..=220).step_by(10) {
            let h = header(width);
            let has = |c: &str| h.split("  ").any(|cell| cell.trim() == c);
            // A lower column never shows while a higher one is left out.
            let order = [
                "result due (P10–P90)",
                "pool",
                "end",
                "status",
                "days",
                "units needed",
                "title",
            ];
            let shown: Vec<bool> = order.iter().map(|c| has(c)).collect();
            assert!(shown.windows(2).all(|w| w[0] || !w[1]), "{width}: {h}");
            seen_range_without_title |= shown[0] && shown[1] && !shown[6];
        }
        assert!(seen_range_without_title);
        assert!(header(120).contains("result due (P10–P90)"));
        assert!(header(120).contains("pool"));
    }

    #[test]
    fn meter_fills_by_eighths() {
        assert_eq!(meter(0.0, 4), "    ");
        assert_eq!(meter(1.0, 4), "████");
        assert_eq!(meter(0.5, 4), "██  ");
        assert_eq!(meter(0.5625, 4), "██▎ ");
        assert_eq!(meter(2.0, 2), "██");
    }
}

//! The terminal's tables: the experiments (as many columns as the width
//! allows without breaking an id) and each pool's weekly use.

use super::{fit, FULL, TABLE_STYLE};
use crate::plan::Plan;
use crate::render::common::{fit_table, is_split, out_word, percent, short_date, thousands, weeks};
use comfy_table::{Cell, CellAlignment, Color, ContentArrangement, Table};
use unicode_width::UnicodeWidthStr;

/// Which columns the experiment table shows, from fewest to most.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Debug)]
enum Layout {
    /// test, share, start, result due.
    Narrow,
    /// Adds the pool.
    Compact,
    /// Adds days and units needed.
    Medium,
    /// Adds the end day and the status.
    Wide,
    /// Adds the title.
    Widest,
}

impl Layout {
    /// The richest layout worth trying at `width` columns.
    fn for_width(width: usize) -> Layout {
        match width {
            0..=79 => Layout::Compact,
            80..=119 => Layout::Medium,
            120..=159 => Layout::Wide,
            _ => Layout::Widest,
        }
    }

    const ALL: [Layout; 5] = [
        Layout::Widest,
        Layout::Wide,
        Layout::Medium,
        Layout::Compact,
        Layout::Narrow,
    ];
}

/// The experiment table at `width`: the richest layout (up to
/// [`Layout::for_width`]) whose columns fit without wrapping a cell, so an
/// id is never broken across lines while a column could be left out
/// instead; the narrowest layout, wrapped to the width, when none fits.
pub(super) fn experiments(plan: &Plan, width: usize, colour: bool) -> Table {
    let natural = |layout: Layout, title_room: usize| -> usize {
        let t = table_for(plan, layout, title_room, None, false).to_string();
        t.lines().map(UnicodeWidthStr::width).max().unwrap_or(0)
    };
    let most = Layout::for_width(width);
    if most == Layout::Widest {
        // Titles are long: they get the room the wide layout leaves, cut
        // with `…`, when that is enough to be worth a column.
        let room = width.saturating_sub(natural(Layout::Wide, 0) + 2);
        if room >= MIN_TITLE_ROOM && natural(Layout::Widest, room) <= width {
            return table_for(plan, Layout::Widest, room, Some(width), colour);
        }
    }
    for layout in Layout::ALL
        .into_iter()
        .filter(|&l| l <= most.min(Layout::Wide))
    {
        if natural(layout, 0) <= width {
            return table_for(plan, layout, 0, Some(width), colour);
        }
    }
    table_for(plan, Layout::Narrow, 0, Some(width), colour)
}

/// Fewest columns worth giving the titles in the widest table.
const MIN_TITLE_ROOM: usize = 16;

/// The experiment table in `layout` (titles cut to `title_room` columns),
/// wrapped to `width` when given and laid out at its natural width
/// otherwise.
fn table_for(
    plan: &Plan,
    layout: Layout,
    title_room: usize,
    width: Option<usize>,
    colour: bool,
) -> Table {
    let mut t = Table::new();
    t.load_preset(TABLE_STYLE);
    fit_table(&mut t, width);
    if colour {
        t.enforce_styling();
    } else {
        t.force_no_tty();
    }
    let mut header = vec!["test"];
    if layout >= Layout::Widest {
        header.push("title");
    }
    if layout >= Layout::Compact {
        header.push("pool");
    }
    header.extend(["share", "start"]);
    if layout >= Layout::Wide {
        header.push("end");
    }
    header.push("result due");
    // Only plans whose forecasts carry an error have ranges.
    let ranges =
        layout >= Layout::Compact && plan.experiments.iter().any(|e| e.result_range.is_some());
    if ranges {
        header.push("result due (P10–P90)");
    }
    if layout >= Layout::Medium {
        header.extend(["days", "units needed"]);
    }
    if layout >= Layout::Wide {
        header.push("status");
    }
    t.set_header(header.iter().map(Cell::new));
    for e in &plan.experiments {
        let run = e.run;
        // A finished or cancelled test shows the days it ran (re-plans).
        let past = crate::render::common::past_run(e);
        let mut row = vec![Cell::new(&e.id)];
        if layout >= Layout::Widest {
            row.push(Cell::new(fit(&e.title, title_room)));
        }
        if layout >= Layout::Compact {
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
                row.push(Cell::new(share).set_alignment(CellAlignment::Right));
                row.push(Cell::new(r.start));
                if layout >= Layout::Wide {
                    row.push(Cell::new(r.end));
                }
                // A past run shows when it ended, not a result to come.
                row.push(match crate::render::common::past_result_cell(e) {
                    Some(cell) => Cell::new(cell),
                    None => Cell::new(r.result_date),
                });
                if ranges {
                    row.push(Cell::new(
                        e.result_range.as_ref().map_or(String::new(), range_cell),
                    ));
                }
                if layout >= Layout::Medium {
                    row.push(Cell::new(r.days).set_alignment(CellAlignment::Right));
                }
            }
            None => {
                row.push(Cell::new("—").set_alignment(CellAlignment::Right));
                let mut word = Cell::new(if layout >= Layout::Wide {
                    "—"
                } else {
                    out_word(e)
                });
                if colour && layout < Layout::Wide {
                    word = word.fg(Color::Yellow);
                }
                row.push(word);
                if layout >= Layout::Wide {
                    row.push(Cell::new(""));
                }
                row.push(Cell::new(""));
                if ranges {
                    row.push(Cell::new(""));
                }
                if layout >= Layout::Medium {
                    row.push(Cell::new(""));
                }
            }
        }
        if layout >= Layout::Medium {
            row.push(Cell::new(thousands(e.units_needed)).set_alignment(CellAlignment::Right));
        }
        if layout >= Layout::Wide {
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
            let peak_share = days.iter().map(|d| d.share_used).fold(0.0, f64::max);
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
            if colour && fraction > 1.0 + 1e-9 {
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
    fn meter_fills_by_eighths() {
        assert_eq!(meter(0.0, 4), "    ");
        assert_eq!(meter(1.0, 4), "████");
        assert_eq!(meter(0.5, 4), "██  ");
        assert_eq!(meter(0.5625, 4), "██▎ ");
        assert_eq!(meter(2.0, 2), "██");
    }
}

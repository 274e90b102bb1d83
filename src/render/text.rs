//! Terminal text: a table of the experiments (comfy-table), a week-by-week
//! timeline drawn with Unicode block characters and grouped by pool, each
//! pool's weekly share in use, the experiments that do not fit with their
//! reasons, the solver's numbers and the cautions.
//!
//! Everything is laid out for [`RenderOptions::effective_width`] columns:
//! wide terminals get more table columns and a finer timeline (up to one
//! character per day), narrow ones fewer columns and coarser cells (down to
//! several weeks per character). ANSI colour only when the options ask.

use super::common::{
    blackout_covers, counts, experiments_in, is_split, long_date, orphans, percent, short_date,
    solver_sentence, thousands, weeks, Week, CAUTION,
};
use super::{RenderError, RenderOptions, Renderer};
use crate::plan::{BlackoutKind, Plan, PlannedExperiment, PoolPlan, Run};
use chrono::{Duration, NaiveDate};
use comfy_table::{Cell, CellAlignment, Color, ContentArrangement, Table};
use std::fmt::Write;
use unicode_width::UnicodeWidthStr;

/// The terminal text renderer.
pub struct Text;

const FULL: char = '█';
const LEFT_HALF: char = '▌';
const RIGHT_HALF: char = '▐';
const BLACKOUT: char = '░';
const WEEK_MARK: char = '·';
const TODAY: char = '▼';

/// ANSI colours for the pools' bars, in pool order (cycled).
const POOL_COLOURS: [&str; 4] = ["36", "33", "35", "32"];

/// Wraps `s` in an SGR sequence when colour is on.
fn paint(s: &str, sgr: &str, colour: bool) -> String {
    if colour && !s.is_empty() {
        format!("\x1b[{sgr}m{s}\x1b[0m")
    } else {
        s.to_string()
    }
}

/// Word-wraps `text` to `width` columns with `indent` before each line.
fn wrap(text: &str, width: usize, indent: &str) -> String {
    let mut out = String::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && indent.width() + line.width() + 1 + word.width() > width {
            out.push_str(indent);
            out.push_str(&line);
            out.push('\n');
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        out.push_str(indent);
        out.push_str(&line);
        out.push('\n');
    }
    out
}

/// A section heading: wrapped to the width, each line bold when colour is on.
fn heading(text: &str, width: usize, colour: bool) -> String {
    wrap(text, width, "")
        .lines()
        .map(|l| format!("{}\n", paint(l, "1", colour)))
        .collect()
}

/// Word-wraps `text` with a hanging indent: the first line starts with
/// `first`, the following ones with as many spaces.
fn wrap_hanging(first: &str, text: &str, width: usize) -> String {
    let indent = " ".repeat(first.width());
    let wrapped = wrap(text, width, &indent);
    let mut out = String::with_capacity(wrapped.len());
    out.push_str(first);
    out.push_str(&wrapped[indent.len().min(wrapped.len())..]);
    out
}

/// The table style: no vertical lines, one rule under the header.
const TABLE_STYLE: &str = "     ─             ";

/// Cuts `s` to at most `width` columns, marking the cut with `…`.
fn fit(s: &str, width: usize) -> String {
    if s.width() <= width {
        return s.to_string();
    }
    let mut out = String::new();
    for c in s.chars() {
        if out.width() + c.to_string().width() + 1 > width {
            break;
        }
        out.push(c);
    }
    out.push('…');
    out
}

/// The columns of the timeline track: each cell shows a span of days.
struct Track {
    cells: Vec<(NaiveDate, NaiveDate)>,
    /// Index of the cell that starts each displayed week (for the axis).
    week_starts: Vec<(usize, NaiveDate)>,
    /// Short words on the scale, e.g. "1 character = 1 day".
    scale: String,
}

impl Track {
    /// Lays out the window's weeks in at most `room` characters.
    fn new(weeks: &[Week], room: usize) -> Track {
        let room = room.max(1);
        let n = weeks.len().max(1);
        let mut cells = Vec::new();
        let mut week_starts = Vec::new();
        let per_week = room / n;
        let scale;
        if per_week >= 1 {
            let per_week = per_week.min(7);
            scale = match per_week {
                7 => "1 character = 1 day".to_string(),
                1 => "1 character = 1 week".to_string(),
                k => format!("{k} characters = 1 week"),
            };
            for w in weeks {
                let len = (w.end - w.start).num_days() as usize + 1;
                let chars = (per_week * len).div_ceil(7).clamp(1, len);
                week_starts.push((cells.len(), w.start));
                for j in 0..chars {
                    let a = w.start + Duration::days((j * len / chars) as i64);
                    let b = w.start + Duration::days(((j + 1) * len / chars) as i64 - 1);
                    cells.push((a, b));
                }
            }
        } else {
            let k = n.div_ceil(room);
            scale = format!("1 character = {k} weeks");
            for chunk in weeks.chunks(k) {
                week_starts.push((cells.len(), chunk[0].start));
                cells.push((chunk[0].start, chunk[chunk.len() - 1].end));
            }
        }
        Track {
            cells,
            week_starts,
            scale,
        }
    }

    fn len(&self) -> usize {
        self.cells.len()
    }

    /// The axis line: week-start dates where they fit without touching.
    fn axis(&self) -> String {
        let mut line: Vec<char> = vec![' '; self.len()];
        let mut free_from = 0;
        for &(i, date) in &self.week_starts {
            let label: Vec<char> = short_date(date).chars().collect();
            if i >= free_from && i + label.len() <= self.len() {
                line[i..i + label.len()].copy_from_slice(&label);
                free_from = i + label.len() + 1;
            }
        }
        line.into_iter().collect::<String>().trim_end().to_string()
    }

    /// The cell holding `date`, if the window shows it.
    fn cell_of(&self, date: NaiveDate) -> Option<usize> {
        self.cells.iter().position(|&(a, b)| a <= date && date <= b)
    }

    /// The glyphs of one experiment's row (plain, without colour).
    fn row(&self, run: Option<&Run>, blackout: &dyn Fn(NaiveDate, NaiveDate) -> bool) -> Vec<char> {
        let starts: Vec<usize> = self.week_starts.iter().map(|&(i, _)| i).collect();
        self.cells
            .iter()
            .enumerate()
            .map(|(i, &(a, b))| {
                if let Some(r) = run {
                    let lo = r.start.max(a);
                    let hi = r.end.min(b);
                    if lo <= hi {
                        let begins_inside = r.start > a;
                        let ends_inside = r.end < b;
                        return match (begins_inside, ends_inside) {
                            (true, false) => RIGHT_HALF,
                            (false, true) => LEFT_HALF,
                            _ => FULL,
                        };
                    }
                }
                if blackout(a, b) {
                    BLACKOUT
                } else if starts.contains(&i) {
                    WEEK_MARK
                } else {
                    ' '
                }
            })
            .collect()
    }
}

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
fn experiment_table(plan: &Plan, width: usize, colour: bool) -> Result<Table, RenderError> {
    let natural = |layout: Layout, title_room: usize| -> Result<usize, RenderError> {
        let t = table_for(plan, layout, title_room, None, false)?.to_string();
        Ok(t.lines().map(UnicodeWidthStr::width).max().unwrap_or(0))
    };
    let most = Layout::for_width(width);
    if most == Layout::Widest {
        // Titles are long: they get the room the wide layout leaves, cut
        // with `…`, when that is enough to be worth a column.
        let room = width.saturating_sub(natural(Layout::Wide, 0)? + 2);
        if room >= MIN_TITLE_ROOM && natural(Layout::Widest, room)? <= width {
            return table_for(plan, Layout::Widest, room, Some(width), colour);
        }
    }
    for layout in Layout::ALL
        .into_iter()
        .filter(|&l| l <= most.min(Layout::Wide))
    {
        if natural(layout, 0)? <= width {
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
) -> Result<Table, RenderError> {
    let mut t = Table::new();
    t.load_preset(TABLE_STYLE);
    super::common::fit_table(&mut t, width);
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
    if layout >= Layout::Medium {
        header.extend(["days", "units needed"]);
    }
    if layout >= Layout::Wide {
        header.push("status");
    }
    t.set_header(header.iter().map(Cell::new));
    for e in &plan.experiments {
        let run = e.run;
        let mut row = vec![Cell::new(&e.id)];
        if layout >= Layout::Widest {
            row.push(Cell::new(fit(&e.title, title_room)));
        }
        if layout >= Layout::Compact {
            row.push(Cell::new(&e.pool));
        }
        match &run {
            Some(r) => {
                row.push(Cell::new(percent(r.share)).set_alignment(CellAlignment::Right));
                row.push(Cell::new(r.start));
                if layout >= Layout::Wide {
                    row.push(Cell::new(r.end));
                }
                row.push(Cell::new(r.result_date));
                if layout >= Layout::Medium {
                    row.push(Cell::new(r.days).set_alignment(CellAlignment::Right));
                }
            }
            None => {
                row.push(Cell::new("—").set_alignment(CellAlignment::Right));
                let mut word = Cell::new(if layout >= Layout::Wide {
                    "—"
                } else {
                    super::common::out_word(e)
                });
                if colour && layout < Layout::Wide {
                    word = word.fg(Color::Yellow);
                }
                row.push(word);
                if layout >= Layout::Wide {
                    row.push(Cell::new(""));
                }
                row.push(Cell::new(""));
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
                super::common::out_word(e)
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
    Ok(t)
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

fn pool_share_table(plan: &Plan, width: usize, colour: bool) -> Table {
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

fn pool_heading(p: &PoolPlan) -> String {
    if is_split(p) {
        format!(
            "{} · split pool · up to {} at once",
            p.label, p.max_concurrent
        )
    } else {
        format!(
            "{} · overlap pool · up to {} at once",
            p.label, p.max_concurrent
        )
    }
}

fn timeline(plan: &Plan, width: usize, colour: bool, out: &mut String) -> Result<(), RenderError> {
    let ids = plan
        .experiments
        .iter()
        .map(|e| e.id.width())
        .max()
        .unwrap_or(4);
    let label_w = (ids + 2).clamp(10, (width / 4).max(10));
    let room = width.saturating_sub(label_w + 1);
    let track = Track::new(&weeks(plan), room);
    let pad = " ".repeat(label_w);
    let title = format!(
        "Timeline ({}; {FULL} running, {BLACKOUT} blackout, {TODAY} today)",
        track.scale
    );
    let _ = write!(out, "{}", heading(&title, width, colour));
    let _ = writeln!(out, "{pad}{}", track.axis());
    if let Some(i) = track.cell_of(plan.today) {
        let mut marker = format!("{}{TODAY}", " ".repeat(i));
        let words = format!(" today, {}", short_date(plan.today));
        if i + 1 + words.width() <= track.len() {
            marker.push_str(&words);
        }
        let _ = writeln!(out, "{pad}{}", paint(&marker, "1", colour));
    }
    let mut groups: Vec<(String, Vec<&PlannedExperiment>, Option<&PoolPlan>)> = plan
        .pools
        .iter()
        .map(|p| {
            (
                pool_heading(p),
                experiments_in(plan, &p.id).collect(),
                Some(p),
            )
        })
        .collect();
    let lost = orphans(plan);
    if !lost.is_empty() {
        groups.push(("pool not in the plan".to_string(), lost, None));
    }
    for (gi, (heading, exps, pool)) in groups.iter().enumerate() {
        let _ = writeln!(out, "{}", fit(heading, width));
        let pool_id = pool.map(|p| p.id.as_str()).unwrap_or("");
        let blackout = |a: NaiveDate, b: NaiveDate| {
            plan.blackouts
                .iter()
                .any(|bo| blackout_covers(bo, pool_id) && bo.from <= b && a <= bo.to)
        };
        let sgr = POOL_COLOURS[gi % POOL_COLOURS.len()];
        for e in exps {
            let run = e.run;
            let label = format!("  {}", fit(&e.id, label_w - 3));
            let label = format!(
                "{label}{}",
                " ".repeat(label_w.saturating_sub(label.width()))
            );
            let body: String = match run {
                Some(ref r) => {
                    let glyphs = track.row(Some(r), &blackout);
                    let mut s = String::new();
                    for g in glyphs {
                        match g {
                            FULL | LEFT_HALF | RIGHT_HALF => {
                                s.push_str(&paint(&g.to_string(), sgr, colour))
                            }
                            BLACKOUT => s.push_str(&paint(&g.to_string(), "2", colour)),
                            _ => s.push(g),
                        }
                    }
                    s.trim_end().to_string()
                }
                None if e.status == crate::plan::Status::Unscheduled => {
                    paint("does not fit (see below)", "2", colour)
                }
                None => paint(super::common::out_word(e), "2", colour),
            };
            let _ = writeln!(out, "{label} {body}");
        }
    }
    let listed: Vec<_> = plan
        .blackouts
        .iter()
        .map(|b| {
            let kind = match b.kind {
                BlackoutKind::NoStarts => "no new starts",
                BlackoutKind::NoRunning => "nothing runs",
            };
            let pools = if b.pools.is_empty() {
                "all pools".to_string()
            } else {
                b.pools.join(", ")
            };
            format!("{} to {}, {kind} ({pools}): {}", b.from, b.to, b.note)
        })
        .collect();
    if !listed.is_empty() {
        let _ = writeln!(out, "Blackouts:");
        for l in listed {
            let _ = write!(out, "{}", wrap(&l, width, "  "));
        }
    }
    Ok(())
}

/// Replaces control characters (escape sequences, line breaks, tabs) in
/// user text with spaces, so a title cannot move the cursor, recolour the
/// terminal or break the layout.
fn clean(s: &str) -> String {
    s.chars()
        .map(|c| if c.is_control() { ' ' } else { c })
        .collect()
}

/// A copy of the plan with every piece of user text cleaned for a terminal.
fn for_terminal(plan: &Plan) -> Plan {
    let mut p = plan.clone();
    p.portfolio = clean(&p.portfolio);
    for e in &mut p.experiments {
        e.id = clean(&e.id);
        e.title = clean(&e.title);
        e.owner = clean(&e.owner);
        e.pool = clean(&e.pool);
        e.reason = e.reason.as_deref().map(clean);
    }
    for pool in &mut p.pools {
        pool.id = clean(&pool.id);
        pool.label = clean(&pool.label);
    }
    for b in &mut p.blackouts {
        b.note = clean(&b.note);
        b.pools = b.pools.iter().map(|x| clean(x)).collect();
    }
    p.solver.backend = clean(&p.solver.backend);
    p
}

impl Renderer for Text {
    fn render(&self, plan: &Plan, opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let plan = &for_terminal(plan);
        let width = opts.effective_width();
        let colour = opts.colour;
        let mut out = String::new();
        let (fit_n, not_n) = counts(plan);
        let _ = writeln!(
            out,
            "{}",
            paint(&format!("Experiment plan: {}", plan.portfolio), "1", colour)
        );
        let _ = write!(
            out,
            "{}",
            wrap(
                &format!(
                    "Window {} to {} ({} weeks); today {}.",
                    long_date(plan.window.start),
                    long_date(plan.window.end),
                    weeks(plan).len(),
                    long_date(plan.today),
                ),
                width,
                ""
            )
        );
        // The counts on a line of their own, where the eye finds them.
        let _ = write!(
            out,
            "{}",
            wrap(
                &format!(
                    "{fit_n} of {} tests fit, {not_n} {}{}.",
                    plan.experiments.len(),
                    super::common::do_not(not_n),
                    super::common::closed_note(plan)
                ),
                width,
                ""
            )
        );
        let _ = writeln!(out);
        let _ = writeln!(out, "{}", experiment_table(plan, width, colour)?);
        let _ = writeln!(out);
        timeline(plan, width, colour, &mut out)?;
        let _ = writeln!(out);
        let title = "Pool use per week (peak day: share in use for split pools, tests running for overlap pools)";
        let _ = write!(out, "{}", heading(title, width, colour));
        let _ = writeln!(out, "{}", pool_share_table(plan, width, colour));
        if not_n > 0 {
            let _ = writeln!(out);
            let _ = writeln!(out, "{}", paint("Does not fit", "1", colour));
            for e in &plan.experiments {
                if e.status != crate::plan::Status::Unscheduled {
                    continue;
                }
                let reason = e.reason.as_deref().unwrap_or("no reason given");
                let line = format!("{} ({}, {}): {reason}", e.id, e.title, e.pool);
                let _ = write!(out, "{}", wrap_hanging("- ", &line, width));
            }
        }
        let _ = writeln!(out);
        let _ = write!(out, "{}", wrap(&solver_sentence(plan), width, ""));
        let _ = writeln!(out);
        let _ = write!(out, "{}", wrap(CAUTION, width, ""));
        Ok(out.into_bytes())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    fn render_at(width: u16, colour: bool) -> String {
        let opts = RenderOptions {
            width: Some(width),
            colour,
        };
        String::from_utf8(Text.render(&fixture::plan(), &opts).unwrap()).unwrap()
    }

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
    fn every_line_fits_the_width() {
        for width in [40u16, 60, 80, 100, 120, 160, 200] {
            let text = render_at(width, false);
            for line in text.lines() {
                assert!(
                    line.width() <= usize::from(width),
                    "width {width}: {} columns: {line}",
                    line.width()
                );
            }
        }
    }

    #[test]
    fn colour_codes_only_when_asked() {
        assert!(!render_at(100, false).contains('\x1b'));
        assert!(render_at(100, true).contains("\x1b["));
    }

    #[test]
    fn wide_timeline_has_one_character_per_day() {
        let text = render_at(160, false);
        assert!(text.contains("1 character = 1 day"), "{text}");
        // hero-copy runs 4 Jan to 31 Jan: 28 days from the first column.
        let timeline = &text[text.find("Timeline").unwrap()..];
        let row = timeline
            .lines()
            .find(|l| l.trim_start().starts_with("hero-copy "))
            .unwrap();
        assert_eq!(row.matches(FULL).count(), 28, "{row}");
    }

    #[test]
    fn narrow_timeline_compresses_weeks() {
        let weeks = weeks(&fixture::plan());
        let track = Track::new(&weeks, 5);
        assert_eq!(track.len(), 5);
        assert_eq!(track.scale, "1 character = 3 weeks");
        assert_eq!(track.cells[0].0, weeks[0].start);
        assert_eq!(track.cells[4].1, weeks[12].end);
    }

    #[test]
    fn partial_weeks_use_half_blocks() {
        let plan = fixture::plan();
        let track = Track::new(&weeks(&plan), 13);
        // search-freshness starts 11 Jan (week 2) and ends 21 Feb (week 7).
        let e = plan
            .experiments
            .iter()
            .find(|e| e.id == "search-freshness")
            .unwrap();
        let run = e.run.unwrap();
        let row: String = track.row(Some(&run), &|_, _| false).into_iter().collect();
        assert_eq!(row, "·██████······");
        let mut shifted = run;
        shifted.start += Duration::days(3);
        shifted.end -= Duration::days(2);
        let row: String = track
            .row(Some(&shifted), &|_, _| false)
            .into_iter()
            .collect();
        assert_eq!(row, "·▐████▌······");
    }

    #[test]
    fn unscheduled_tests_are_listed_with_reasons() {
        let text = render_at(100, false);
        let tail = &text[text.find("Does not fit").unwrap()..];
        assert!(tail.contains("gift-wrap-upsell"));
        assert!(tail.contains("recipe-cards"));
        assert!(tail.contains("pool `search` already runs"));
    }

    #[test]
    fn user_text_cannot_carry_terminal_escapes() {
        let mut plan = fixture::plan();
        plan.experiments[0].title = "evil\x1b[2J\x1b]0;title\x07".to_string();
        plan.experiments[5].reason = Some("line\nbreak\x1b[31m".to_string());
        plan.portfolio = "q1\rover".to_string();
        let opts = RenderOptions {
            width: Some(160),
            colour: false,
        };
        let text = String::from_utf8(Text.render(&plan, &opts).unwrap()).unwrap();
        assert!(!text.contains('\x1b') && !text.contains('\x07') && !text.contains('\r'));
        assert!(text.contains("line break"));
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

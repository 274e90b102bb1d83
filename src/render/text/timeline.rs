//! The terminal's timeline: a row per experiment on a week grid drawn with
//! Unicode block characters, grouped by pool, with blackouts and today.

use super::{
    fit, heading, paint, wrap, BLACKOUT, FULL, LEFT_HALF, POOL_COLOURS, RAMP, RIGHT_HALF, TODAY,
    WEEK_MARK,
};
use crate::plan::{BlackoutKind, Plan, PlannedExperiment, PoolPlan, Run};
use crate::render::common::{
    also_on, blackout_covers, experiments_in, is_split, orphans, out_word, short_date, weeks, Week,
};
use chrono::{Duration, NaiveDate};
use std::fmt::Write;
use unicode_width::UnicodeWidthStr;

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
    fn row(
        &self,
        run: Option<&Run>,
        full_from: Option<NaiveDate>,
        blackout: &dyn Fn(NaiveDate, NaiveDate) -> bool,
    ) -> Vec<char> {
        let starts: Vec<usize> = self.week_starts.iter().map(|&(i, _)| i).collect();
        self.cells
            .iter()
            .enumerate()
            .map(|(i, &(a, b))| {
                if let Some(r) = run {
                    let lo = r.start.max(a);
                    let hi = r.end.min(b);
                    if lo <= hi {
                        if full_from.is_some_and(|f| b < f) {
                            return RAMP;
                        }
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

fn pool_heading(p: &PoolPlan) -> String {
    let heading = pool_rule(p);
    match super::super::common::holdout_words(p) {
        Some(h) => format!("{heading} · {h}"),
        None => heading,
    }
}

fn pool_rule(p: &PoolPlan) -> String {
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

/// The timeline, its axis, today's marker and the blackouts' list, into `out`.
pub(super) fn draw(plan: &Plan, width: usize, colour: bool, out: &mut String) {
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
    let ramps = plan
        .experiments
        .iter()
        .any(|e| e.run.is_some() && !e.ramp.is_empty());
    let ramp_key = if ramps {
        format!(", {RAMP} ramp")
    } else {
        String::new()
    };
    let title = format!(
        "Timeline ({}; {FULL} running{ramp_key}, {BLACKOUT} blackout, {TODAY} today)",
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
            let past = crate::render::common::past_run(e);
            let run = e.run;
            let label = format!("  {}", fit(&e.id, label_w - 3));
            let label = format!(
                "{label}{}",
                " ".repeat(label_w.saturating_sub(label.width()))
            );
            let body: String = match run {
                Some(ref r) => {
                    let glyphs = track.row(Some(r), e.full_from(), &blackout);
                    let shown = glyphs.iter().collect::<String>().trim_end().width();
                    let room = width.saturating_sub(label_w + 1 + shown + 1);
                    let mut s = String::new();
                    for g in glyphs {
                        match g {
                            FULL | LEFT_HALF | RIGHT_HALF | RAMP => {
                                s.push_str(&paint(&g.to_string(), sgr, colour))
                            }
                            BLACKOUT => s.push_str(&paint(&g.to_string(), "2", colour)),
                            _ => s.push(g),
                        }
                    }
                    let mut s = s.trim_end().to_string();
                    // One test on several pools: each of its rows says
                    // where else it runs, shortened where the line is full.
                    if let Some(also) = also_on(e, pool_id) {
                        let short = format!("(+{} pools)", e.pools.len() - 1);
                        let mark = [also, short].into_iter().find(|m| m.width() <= room);
                        if let Some(mark) = mark {
                            s.push(' ');
                            s.push_str(&paint(&mark, "2", colour));
                        }
                    }
                    s
                }
                None if past.is_some() => {
                    // Drawn where it ran, dim, and marked.
                    let glyphs: String = track
                        .row(
                            past.as_ref(),
                            crate::render::common::past_full_from(e),
                            &blackout,
                        )
                        .into_iter()
                        .collect();
                    format!(
                        "{} {}",
                        paint(glyphs.trim_end(), "2", colour),
                        paint(out_word(e), "2", colour)
                    )
                }
                None if e.status == crate::plan::Status::Unscheduled => {
                    paint("does not fit (see below)", "2", colour)
                }
                None => paint(out_word(e), "2", colour),
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
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;
    use crate::render::text::Text;
    use crate::render::{RenderOptions, Renderer};

    fn render_at(width: u16) -> String {
        let opts = RenderOptions {
            width: Some(width),
            colour: false,
        };
        String::from_utf8(Text.render(&fixture::plan(), &opts).unwrap()).unwrap()
    }

    #[test]
    fn wide_timeline_has_one_character_per_day() {
        let text = render_at(160);
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
        let row: String = track
            .row(Some(&run), None, &|_, _| false)
            .into_iter()
            .collect();
        assert_eq!(row, "·██████······");
        let mut shifted = run;
        shifted.start += Duration::days(3);
        shifted.end -= Duration::days(2);
        let row: String = track
            .row(Some(&shifted), None, &|_, _| false)
            .into_iter()
            .collect();
        assert_eq!(row, "·▐████▌······");
    }
}

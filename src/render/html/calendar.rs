//! The report's calendar: a row per test, grouped by pool, on a week grid
//! that begins on the weekday tests start on.
//!
//! The calendar is HTML rows, not one picture, so that it reads at every
//! width and on paper: each row is the test's name (HTML, kept in view
//! while the calendar scrolls sideways inside its own frame) beside a small
//! inline SVG of its run drawn at its natural size, never shrunk. Rows
//! share the week grid, today's line and each pool's blackouts through
//! `<use>` of definitions drawn once in the axis. A paper page or a page
//! break falls between rows, never through a bar.
//!
//! Every bar carries its text equivalent (the row's `aria-label` and a
//! tooltip); its label, the share and the result date, sits inside the bar
//! only where no interim-look tick crosses it, and outside otherwise. On a
//! phone each pool is also a list of its tests (dates, share, result
//! range); the stylesheet shows that list only there.

use super::svg::{Scale, PATTERNS};
use super::{esc, pool_fill, RunWords};
use crate::plan::{BlackoutKind, Plan, PlannedExperiment, PoolPlan, Run, Status};
use crate::render::common::{
    also_on, blackout_covers, closed_words, experiments_in, is_split, long_date, orphans,
    ramp_words, range_words, short_date, weeks,
};
use chrono::{Duration, NaiveDate};
use std::fmt::Write;

/// Width of a row's drawing in CSS pixels (drawn 1:1).
pub(super) const CAL_W: f64 = 830.0;
/// Left edge of the plotting area in a row's drawing.
const CAL_X0: f64 = 4.0;
/// Right edge of the plotting area (room after it for the last diamond).
const CAL_X1: f64 = 814.0;
/// Height of one row.
const ROW_H: f64 = 34.0;
/// Height of a run's bar.
const BAR_H: f64 = 18.0;
/// Height of the axis band above the rows.
const AXIS_H: f64 = 44.0;
/// A generous width of one character of 11px sans-serif text (wide fonts
/// such as DejaVu Sans included), for deciding where a label fits.
const CHAR_W: f64 = 7.0;

/// A pool's group of rows: its heading, its pool (none for tests whose
/// pool is missing from the plan) and its tests.
struct Group<'a> {
    heading: String,
    pool: Option<&'a PoolPlan>,
    tests: Vec<&'a PlannedExperiment>,
}

fn groups(plan: &Plan) -> Vec<Group<'_>> {
    let mut out: Vec<Group> = plan
        .pools
        .iter()
        .map(|p| Group {
            heading: heading(plan, p),
            pool: Some(p),
            tests: experiments_in(plan, &p.id).collect(),
        })
        .collect();
    let lost = orphans(plan);
    if !lost.is_empty() {
        out.push(Group {
            heading: "Pool not in the plan".to_string(),
            pool: None,
            tests: lost,
        });
    }
    out
}

/// A pool's heading: its name, how it is shared, how many tests at once,
/// and its blackouts in words (the rows shade them with a pattern).
fn heading(plan: &Plan, p: &PoolPlan) -> String {
    let how = if is_split(p) { "split" } else { "overlap" };
    let mut h = format!("{} · {how} · up to {} at once", p.label, p.max_concurrent);
    if let Some(w) = crate::render::common::holdout_words(p) {
        h.push_str(&format!(" · {w}"));
    }
    for b in plan.blackouts.iter().filter(|b| blackout_covers(b, &p.id)) {
        if b.to < plan.window.start || b.from > plan.window.end {
            continue;
        }
        let kind = match b.kind {
            BlackoutKind::NoRunning => "nothing runs",
            BlackoutKind::NoStarts => "no new starts",
        };
        h.push_str(&format!(
            " · blackout {} to {}: {kind}",
            short_date(b.from),
            short_date(b.to)
        ));
    }
    h
}

/// The calendar (phone lists, then the scrolling frame of rows), into `s`.
pub(super) fn calendar(plan: &Plan, s: &mut String) {
    let gs = groups(plan);
    lists(plan, &gs, s);
    let scale = Scale::new(plan, CAL_X0, CAL_X1);
    let (fit, _) = crate::render::common::counts(plan);
    let _ = writeln!(
        s,
        r#"<div class="frame cal" role="region" tabindex="0" aria-label="Calendar, one row per test; it scrolls sideways" aria-describedby="cal-desc"><p class="sr" id="cal-desc">{fit} scheduled tests in {} pools, one row per test, weeks from {} to {}; the table of tests below lists the same facts.</p><div class="cal-inner">"#,
        plan.pools.len(),
        long_date(plan.window.start),
        long_date(plan.window.end)
    );
    axis(plan, &scale, &gs, s);
    for (gi, g) in gs.iter().enumerate() {
        let fill = pool_fill(gi);
        let _ = writeln!(
            s,
            r#"<div class="cal-pool" style="--pool:{fill}"><div class="cal-head"><span>{}</span></div>"#,
            esc(&g.heading)
        );
        let shaded = g.pool.is_some_and(|p| has_blackouts(plan, &p.id));
        for e in &g.tests {
            row(plan, &scale, e, g.pool, gi, shaded, s);
        }
        let _ = writeln!(s, "</div>");
    }
    let _ = writeln!(s, "</div></div>");
}

fn has_blackouts(plan: &Plan, pool: &str) -> bool {
    plan.blackouts
        .iter()
        .any(|b| blackout_covers(b, pool) && b.to >= plan.window.start && b.from <= plan.window.end)
}

/// The axis row: week dates and today's label, and the definitions every
/// row uses (the week grid with today's line, each pool's blackouts, the
/// blackout patterns).
fn axis(plan: &Plan, scale: &Scale, gs: &[Group], s: &mut String) {
    let _ = writeln!(
        s,
        r#"<div class="cal-row cal-axis"><div class="name" aria-hidden="true"></div><svg class="plot" xmlns="http://www.w3.org/2000/svg" width="{CAL_W:.0}" height="{AXIS_H:.0}" viewBox="0 0 {CAL_W:.0} {AXIS_H:.0}" aria-hidden="true">"#
    );
    let _ = writeln!(s, "{PATTERNS}<defs>");
    // The grid of one row, and today's line. A `<use>` copy is out of the
    // stylesheet's reach, so both take the colour of the `<use>` that
    // draws them (`currentColor`).
    let _ = writeln!(
        s,
        r#"<g id="cal-grid" stroke="currentColor" stroke-width="1">"#
    );
    let ws = weeks(plan);
    for w in &ws {
        let x = scale.x(w.start);
        let _ = writeln!(
            s,
            r#"<line x1="{x:.1}" y1="0" x2="{x:.1}" y2="{ROW_H:.0}"/>"#
        );
    }
    let _ = writeln!(
        s,
        r#"<line x1="{CAL_X1:.1}" y1="0" x2="{CAL_X1:.1}" y2="{ROW_H:.0}"/></g>"#
    );
    let today = plan.today >= plan.window.start && plan.today <= plan.window.end;
    if today {
        let x = scale.x(plan.today);
        let _ = writeln!(
            s,
            r#"<line id="cal-today" x1="{x:.1}" y1="0" x2="{x:.1}" y2="{ROW_H:.0}" stroke="currentColor" stroke-width="2" stroke-dasharray="5 3"/>"#
        );
    }
    for (gi, g) in gs.iter().enumerate() {
        let Some(p) = g.pool else { continue };
        if !has_blackouts(plan, &p.id) {
            continue;
        }
        let _ = writeln!(s, r#"<g id="cal-shade-{gi}">"#);
        for b in plan.blackouts.iter().filter(|b| blackout_covers(b, &p.id)) {
            if b.to < plan.window.start || b.from > plan.window.end {
                continue;
            }
            let (x0, x1) = scale.span(b.from, b.to);
            let pattern = match b.kind {
                BlackoutKind::NoRunning => "url(#shade-stop)",
                BlackoutKind::NoStarts => "url(#shade-nostart)",
            };
            let _ = writeln!(
                s,
                r#"<rect x="{x0:.1}" y="0" width="{:.1}" height="{ROW_H:.0}" fill="{pattern}"/>"#,
                x1 - x0
            );
        }
        let _ = writeln!(s, "</g>");
    }
    let _ = writeln!(s, "</defs>");
    // Week dates, thinned so they never touch, on ticks down to the rows.
    let week_px = 7.0 * scale.day_w;
    let every = ((52.0 / week_px).ceil() as usize).max(1);
    for (i, w) in ws.iter().enumerate() {
        let x = scale.x(w.start);
        let _ = writeln!(
            s,
            r#"<line class="rule" x1="{x:.1}" y1="26" x2="{x:.1}" y2="{AXIS_H:.0}"/>"#
        );
        // A short first week's label would crowd the next one.
        let short = (w.end - w.start).num_days() < 4 && i == 0 && ws.len() > 1;
        if i % every == 0 && !short && x + 44.0 <= CAL_W {
            let _ = writeln!(
                s,
                r#"<text class="muted" x="{:.1}" y="{:.1}" font-size="11">{}</text>"#,
                x + 3.0,
                AXIS_H - 6.0,
                esc(&short_date(w.start))
            );
        }
    }
    if today {
        let x = scale.x(plan.today);
        let label = format!("today, {}", short_date(plan.today));
        let width = label.chars().count() as f64 * CHAR_W;
        // The label reads to the right of the line unless it would run off.
        let (lx, anchor) = if x + 3.0 + width <= CAL_W {
            (x + 3.0, "start")
        } else {
            (x - 3.0, "end")
        };
        let _ = writeln!(
            s,
            r#"<g><line class="today" x1="{x:.1}" y1="18" x2="{x:.1}" y2="{AXIS_H:.0}"/><text class="today-label" x="{lx:.1}" y="14" font-size="11" font-weight="700" text-anchor="{anchor}">{}</text><title>Plan made for {}</title></g>"#,
            esc(&label),
            long_date(plan.today)
        );
    }
    let _ = writeln!(s, "</svg></div>");
}

/// A test's result range worded, then laid out by `layout`; empty
/// without a range.
fn range_part(e: &PlannedExperiment, layout: impl Fn(String) -> String) -> String {
    e.result_range
        .as_ref()
        .map(|r| layout(range_words(r)))
        .unwrap_or_default()
}

/// What a row's drawing says in words, for readers who cannot see it.
fn row_words(plan: &Plan, e: &PlannedExperiment) -> String {
    match &e.run {
        Some(r) => {
            let w = RunWords::of(e, r);
            let range = range_part(e, |words| format!("; P10–P90 {words}"));
            let looks = e
                .looks
                .as_ref()
                .map(|l| l.interim().count())
                .filter(|&n| n > 0)
                .map(|n| {
                    format!(
                        "; {} that may stop it early",
                        crate::words::Count("interim look", n)
                    )
                })
                .unwrap_or_default();
            format!(
                "{}{}: {}, runs {} to {}, result due {}{range}{looks}",
                e.id,
                if e.status == Status::Running {
                    " (running)"
                } else {
                    ""
                },
                w.share,
                w.start,
                w.end,
                w.due
            )
        }
        None => format!("{}: {}", e.id, out_words(plan, e)),
    }
}

/// A row without a run: why, in words.
fn out_words(_plan: &Plan, e: &PlannedExperiment) -> String {
    if e.status == Status::Unscheduled {
        "does not fit: see the list below".to_string()
    } else {
        closed_words(e)
    }
}

/// One test's row: its name, and its drawing.
fn row(
    plan: &Plan,
    scale: &Scale,
    e: &PlannedExperiment,
    pool: Option<&PoolPlan>,
    gi: usize,
    shaded: bool,
    s: &mut String,
) {
    let status = match (e.status, &e.run) {
        (Status::Running, Some(_)) => "running",
        (_, Some(_)) => "scheduled",
        (Status::Unscheduled, None) => "out",
        _ => "closed",
    };
    let _ = writeln!(
        s,
        r#"<div class="cal-row {status}" data-test="{}"><div class="name" title="{}"><code>{}</code><span>{}</span></div>"#,
        esc(&e.id),
        esc(&format!("{} ({})", e.title, e.id)),
        esc(&e.id),
        esc(&e.title)
    );
    let _ = writeln!(
        s,
        r#"<svg class="plot" xmlns="http://www.w3.org/2000/svg" width="{CAL_W:.0}" height="{ROW_H:.0}" viewBox="0 0 {CAL_W:.0} {ROW_H:.0}" role="img" aria-label="{}">"#,
        esc(&row_words(plan, e))
    );
    if shaded {
        let _ = writeln!(s, r##"<use href="#cal-shade-{gi}"/>"##);
    }
    let _ = writeln!(s, r##"<use class="grid" href="#cal-grid"/>"##);
    if plan.today >= plan.window.start && plan.today <= plan.window.end {
        let _ = writeln!(s, r##"<use class="today" href="#cal-today"/>"##);
    }
    match &e.run {
        Some(r) => {
            let pool_id = pool.map(|p| p.id.as_str()).unwrap_or("");
            bar(plan, scale, e, r, pool_fill(gi), pool_id, s);
        }
        None if crate::render::common::past_run(e).is_some() => past_bar(scale, e, s),
        None => {
            let _ = writeln!(
                s,
                r#"<text class="muted" x="{:.1}" y="{:.1}" font-size="11" font-style="italic">{}</text>"#,
                CAL_X0 + 6.0,
                ROW_H / 2.0 + 4.0,
                esc(&out_words(plan, e))
            );
        }
    }
    let _ = writeln!(s, "</svg></div>");
}

/// A finished or cancelled test's run as it ran (re-plans): a grey bar
/// over its days, its ramp washed out at the ramp's days, and its words
/// ("finished early at look 2 of 3: better than control, ran ...") after
/// the bar, shortened until they fit, else inside it.
fn past_bar(scale: &Scale, e: &PlannedExperiment, s: &mut String) {
    let Some(r) = crate::render::common::past_run(e) else {
        return;
    };
    let words = closed_words(e);
    let (x0, x1) = scale.span(r.start, r.end);
    let top = (ROW_H - BAR_H) / 2.0;
    let h = BAR_H;
    let _ = writeln!(
        s,
        r##"<g class="past-bar"><rect class="run" x="{x0:.1}" y="{top:.1}" width="{:.1}" height="{h:.1}" rx="3" fill="#8a939d"/>"##,
        (x1 - x0).max(2.0)
    );
    for step in &e.ramp {
        let (r0, r1) = scale.span(step.start, step.end);
        let _ = writeln!(
            s,
            r##"<rect class="ramp" x="{r0:.1}" y="{top:.1}" width="{:.1}" height="{h:.1}" fill="#ffffff" fill-opacity="0.55"/>"##,
            (r1 - r0).max(1.0)
        );
    }
    let short = words.split(", ran ").next().unwrap_or(&words).to_string();
    let width = |t: &str| t.chars().count() as f64 * CHAR_W;
    let (x, text, class) = if x1 + 6.0 + width(&words) <= CAL_X1 {
        (x1 + 6.0, words.as_str(), "muted")
    } else if x1 + 6.0 + width(&short) <= CAL_X1 {
        (x1 + 6.0, short.as_str(), "muted")
    } else {
        (x0 + 6.0, short.as_str(), "on-bar")
    };
    let fill = if class == "on-bar" {
        r##" fill="#ffffff""##
    } else {
        ""
    };
    let _ = writeln!(
        s,
        r#"<text class="{class}" x="{x:.1}" y="{:.1}" font-size="11" font-style="italic"{fill}>{}</text></g>"#,
        top + h / 2.0 + 4.0,
        esc(text)
    );
}

fn bar_tooltip(plan: &Plan, e: &PlannedExperiment, r: &Run) -> String {
    let RunWords {
        share,
        start,
        end,
        days,
        due,
        needed,
        expected,
    } = RunWords::of(e, r);
    let ramp = ramp_words(e)
        .map(|w| format!(" after a ramp: {w}"))
        .unwrap_or_default();
    format!(
        "{} ({})\nPool: {}\nShare: {share}{ramp}\nRuns {start} to {end} ({days} days)\nResult due {due}\nUnits needed {needed}; expected {expected}\nOwner: {}",
        e.title,
        e.id,
        &crate::render::common::pools_label(plan, e),
        e.owner
    )
}

/// Where a bar's label goes.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Place {
    /// Inside the bar, from its left edge (white on the bar).
    Inside(f64),
    /// Right of the bar, after the result's diamond.
    Right(f64),
    /// Left of the bar, ending at the given x.
    Left(f64),
}

/// Where a label of `chars` characters fits on a bar from `x0` to `x1`
/// whose first look tick (if any) is at `tick`: inside the bar before the
/// first tick, else from `after` (past the result's diamond), else before
/// the bar.
fn place(chars: usize, x0: f64, x1: f64, tick: Option<f64>, after: f64) -> Option<Place> {
    let w = chars as f64 * CHAR_W;
    let inside_end = tick.map_or(x1, |t| t - 2.5).min(x1);
    if x0 + 6.0 + w + 4.0 <= inside_end {
        Some(Place::Inside(x0 + 6.0))
    } else if after + w <= CAL_W - 2.0 {
        Some(Place::Right(after))
    } else if x0 - 4.0 - w >= 2.0 {
        Some(Place::Left(x0 - 4.0))
    } else {
        None
    }
}

fn bar(
    plan: &Plan,
    scale: &Scale,
    e: &PlannedExperiment,
    r: &Run,
    fill: &str,
    pool_id: &str,
    s: &mut String,
) {
    let (x0, x1) = scale.span(r.start, r.end);
    let w = (x1 - x0).max(2.0);
    let x1 = x0 + w;
    let top = (ROW_H - BAR_H) / 2.0;
    let h = BAR_H;
    // A test on several pools is one test: each of its rows says where
    // else it runs.
    let also = also_on(e, pool_id)
        .map(|a| format!(" · {}", a.replace('`', "")))
        .unwrap_or_default();
    let running = if e.status == Status::Running {
        "running · "
    } else {
        ""
    };
    let due = short_date(r.result_date);
    let labels = [
        format!("{running}{} · result {due}{also}", r.share),
        format!("{running}{} · result {due}", r.share),
        format!("result {due}"),
    ];
    let ticks = look_ticks(scale, e);
    let first_tick = ticks.iter().map(|(x, _)| *x).find(|&x| x > x0 + 1.0);
    let _ = writeln!(
        s,
        "<g class=\"bar\"><title>{}</title>",
        esc(&bar_tooltip(plan, e, r))
    );
    let _ = writeln!(
        s,
        r#"<rect class="run" x="{x0:.1}" y="{top:.1}" width="{w:.1}" height="{h:.1}" rx="3" fill="{fill}"/>"#
    );
    // A ramp is drawn lighter: the bar washed out until its planned share.
    if let (Some(first), Some(last)) = (e.ramp.first(), e.ramp.last()) {
        let (r0, r1) = scale.span(first.start, last.end);
        let _ = writeln!(
            s,
            r##"<rect class="ramp" x="{r0:.1}" y="{top:.1}" width="{:.1}" height="{h:.1}" fill="#ffffff" fill-opacity="0.55"/>"##,
            (r1 - r0).max(1.0)
        );
    }
    // The result-due day: a diamond just after the bar's end; a label
    // to the right starts past it.
    let mut after = x1 + 16.0;
    if r.result_date <= plan.window.end + Duration::days(1) {
        let xr = scale.x(r.result_date).min(CAL_X1);
        let left = xr - 5.0 + scale.day_w / 2.0;
        after = after.max(left + 10.0 + 6.0);
        let _ = writeln!(
            s,
            r#"<path class="due" d="M{left:.1},{:.1} l5,-5 l5,5 l-5,5 z" stroke="{fill}" stroke-width="2"/>"#,
            top + h / 2.0
        );
    }
    for (x, words) in &ticks {
        let _ = writeln!(
            s,
            r##"<line class="look" x1="{x:.1}" y1="{:.1}" x2="{x:.1}" y2="{:.1}" stroke="#ffffff" stroke-width="3"><title>{}</title></line>"##,
            top - 2.0,
            top + h + 2.0,
            esc(words)
        );
    }
    whisker(plan, scale, e, top + h + 1.5, s);
    let baseline = top + h / 2.0 + 4.0;
    let chosen = labels
        .iter()
        .find_map(|l| place(l.chars().count(), x0, x1, first_tick, after).map(|p| (l, p)));
    let (label, at) = match chosen {
        Some(c) => c,
        // No room anywhere: the shortest words, at the drawing's right end.
        None => (&labels[2], Place::Left(CAL_W - 2.0)),
    };
    let (x, class, anchor) = match at {
        Place::Inside(x) => (x, "on-bar", "start"),
        Place::Right(x) => (x, "ink", "start"),
        Place::Left(x) => (x, "ink", "end"),
    };
    let _ = writeln!(
        s,
        r#"<text class="{class}" x="{x:.1}" y="{baseline:.1}" font-size="11" font-weight="600" text-anchor="{anchor}">{}</text>"#,
        esc(label)
    );
    let _ = writeln!(s, "</g>");
}

/// The x of each interim look's tick (the day before the look's date) with
/// its words; the last look is the result itself and has none.
fn look_ticks(scale: &Scale, e: &PlannedExperiment) -> Vec<(f64, String)> {
    let Some(l) = &e.looks else {
        return Vec::new();
    };
    let n = l.dates.len();
    l.interim()
        .map(|d| {
            (
                scale.x(d.date).clamp(CAL_X0, CAL_X1),
                format!(
                    "interim look {} of {n} on {}: may stop early",
                    d.look, d.date
                ),
            )
        })
        .collect()
}

/// A test's result range as a whisker at height `y`, under its bar: from
/// its P10 to its P90 result day, with a tick at the P50 (nothing without
/// a range; a quantile past the window is drawn at the plot's edge).
fn whisker(plan: &Plan, scale: &Scale, e: &PlannedExperiment, y: f64, s: &mut String) {
    let Some(r) = &e.result_range else {
        return;
    };
    let x = |d: Option<NaiveDate>| match d {
        Some(d) if d <= plan.window.end + Duration::days(1) => {
            (scale.x(d) + scale.day_w / 2.0).min(CAL_X1)
        }
        _ => CAL_X1,
    };
    let (x10, x50, x90) = (x(r.p10), x(r.p50), x(r.p90));
    let _ = writeln!(
        s,
        r#"<g class="range"><title>{}</title><path class="ink-line" d="M{x10:.1},{:.1} v5 M{x10:.1},{y:.1} H{x90:.1} M{x90:.1},{:.1} v5 M{x50:.1},{:.1} v7" stroke-width="1.5" fill="none"/></g>"#,
        esc(&format!(
            "Result range (P10–P90): {}; {}",
            range_words(r),
            crate::render::common::chance_words(r)
        )),
        y - 2.5,
        y - 2.5,
        y - 3.5
    );
}

/// Each pool as a list of its tests, for phones (the stylesheet hides it
/// elsewhere): each test's dates, share, result date and range.
fn lists(plan: &Plan, gs: &[Group], s: &mut String) {
    let _ = writeln!(s, r#"<div class="pool-lists">"#);
    for (gi, g) in gs.iter().enumerate() {
        let _ = writeln!(
            s,
            r#"<h3 class="pool-name"><span class="swatch" style="background:{}"></span>{}</h3><ul class="tests">"#,
            pool_fill(gi),
            esc(&g.heading)
        );
        for e in &g.tests {
            let _ = write!(
                s,
                r#"<li data-test="{}"><strong>{}</strong> <code>{}</code><br/>"#,
                esc(&e.id),
                esc(&e.title),
                esc(&e.id)
            );
            match &e.run {
                Some(r) => {
                    let w = RunWords::of(e, r);
                    let range = range_part(e, |words| {
                        format!(r#"<br/><span class="small">P10–P90 {}</span>"#, esc(&words))
                    });
                    let _ = writeln!(
                        s,
                        r#"{}{} · <span class="nw">{}</span> to <span class="nw">{}</span><br/>result due <strong class="nw">{}</strong>{range}</li>"#,
                        if e.status == Status::Running {
                            "running · "
                        } else {
                            ""
                        },
                        esc(&w.share),
                        short_date(w.start),
                        short_date(w.end),
                        long_date(w.due)
                    );
                }
                None => {
                    let _ = writeln!(
                        s,
                        r#"<span class="muted">{}</span></li>"#,
                        esc(&out_words(plan, e))
                    );
                }
            }
        }
        let _ = writeln!(s, "</ul>");
    }
    let _ = writeln!(s, "</div>");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn a_label_never_sits_under_a_look_tick() {
        // Room for the label in the bar, but a tick at its middle: outside.
        let chars = 20;
        let long = place(chars, 100.0, 400.0, None, 416.0);
        assert_eq!(long, Some(Place::Inside(106.0)));
        let ticked = place(chars, 100.0, 400.0, Some(150.0), 416.0);
        assert_eq!(ticked, Some(Place::Right(416.0)));
        // A tick past the label leaves it inside.
        assert_eq!(
            place(chars, 100.0, 400.0, Some(300.0), 416.0),
            Some(Place::Inside(106.0))
        );
        // No room after the bar: before it.
        assert_eq!(
            place(chars, 500.0, 800.0, Some(520.0), 816.0),
            Some(Place::Left(496.0))
        );
        // No room anywhere.
        assert_eq!(place(200, 100.0, 700.0, Some(120.0), 716.0), None);
    }

    #[test]
    fn every_row_has_words_and_the_weeks_begin_on_the_grid_day() {
        let plan = fixture::plan();
        let mut s = String::new();
        calendar(&plan, &mut s);
        for e in &plan.experiments {
            assert!(
                s.contains(&format!("data-test=\"{}\"", esc(&e.id))),
                "{}",
                e.id
            );
        }
        // Every test's row says its facts in words.
        assert_eq!(
            s.matches(r#"role="img" aria-label=""#).count(),
            s.matches(r#"<div class="cal-row "#).count() - 1
        );
        // The fixture's window starts on a Monday; with tests starting on
        // Wednesdays, the first week is Monday and Tuesday alone.
        use chrono::{Datelike, Weekday};
        let mut wednesday = plan.clone();
        wednesday.window.week_start = Some(Weekday::Wed);
        let weeks = weeks(&wednesday);
        assert_eq!(weeks[0].start, plan.window.start);
        assert_eq!((weeks[0].end - weeks[0].start).num_days(), 1);
        assert!(weeks[1..].iter().all(|w| w.start.weekday() == Weekday::Wed));
        assert!(weeks
            .windows(2)
            .all(|w| w[0].end + Duration::days(1) == w[1].start));
        assert_eq!(weeks.last().unwrap().end, plan.window.end);
        let mut s = String::new();
        calendar(&wednesday, &mut s);
        assert!(s.contains(&format!(">{}</text>", short_date(weeks[1].start))));
    }

    #[test]
    fn scale_maps_window_ends_to_plot_edges() {
        let plan = fixture::plan();
        let scale = Scale::new(&plan, CAL_X0, CAL_X1);
        assert!((scale.x(plan.window.start) - CAL_X0).abs() < 1e-9);
        let (_, end) = scale.span(plan.window.end, plan.window.end);
        assert!((end - CAL_X1).abs() < 1e-9);
    }
}

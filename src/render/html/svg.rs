//! The report's charts in inline SVG: the calendar (a row per test on a
//! week grid, grouped by pool, with today's line, blackouts and a labelled
//! bar per run) and one chart per pool of the traffic in use each day.
//! Coordinates are printed with fixed decimals so the bytes are stable.

use super::{esc, pool_fill, RunWords};
use crate::plan::{BlackoutKind, Plan, PlannedExperiment, PoolPlan, Run};
use crate::render::common::{
    also_on, blackout_covers, counts, experiments_in, is_split, long_date, orphans, percent,
    pools_label, ramp_words, short_date, units, weeks,
};
use chrono::{Duration, NaiveDate};
use std::fmt::Write;

/// Width of the SVG charts in user units; they scale to the page width.
pub(super) const SVG_W: f64 = 1040.0;
/// Left edge of the plotting area (the labels sit to its left).
const PLOT_X0: f64 = 210.0;
/// Right edge of the plotting area.
pub(super) const PLOT_X1: f64 = 1024.0;
/// Height of one experiment row in the calendar chart: its id over its
/// title beside a bar.
const ROW_H: f64 = 34.0;
/// Height of a run's bar.
const BAR_H: f64 = 18.0;
/// Height of the pool heading row in the calendar chart.
const GROUP_H: f64 = 28.0;
/// Height of the axis band above the calendar chart.
const AXIS_H: f64 = 44.0;
/// Rough width of one character of 11px sans-serif text, for deciding
/// whether a label fits inside its bar.
const CHAR_W: f64 = 6.4;

/// The x position of the start of `date` in the plotting area.
struct Scale {
    start: NaiveDate,
    day_w: f64,
}

impl Scale {
    fn new(plan: &Plan) -> Scale {
        let days = ((plan.window.end - plan.window.start).num_days() + 1).max(1) as f64;
        Scale {
            start: plan.window.start,
            day_w: (PLOT_X1 - PLOT_X0) / days,
        }
    }

    fn x(&self, date: NaiveDate) -> f64 {
        PLOT_X0 + (date - self.start).num_days() as f64 * self.day_w
    }

    /// The x span of the days `from..=to`, clipped to the window.
    fn span(&self, from: NaiveDate, to: NaiveDate) -> (f64, f64) {
        let a = self.x(from).clamp(PLOT_X0, PLOT_X1);
        let b = self.x(to + Duration::days(1)).clamp(PLOT_X0, PLOT_X1);
        (a, b)
    }
}

/// Week lines and date labels over the height `top..bottom`; labels above
/// `top` when `labels` is set. Labels are thinned so they never touch.
fn week_grid(plan: &Plan, scale: &Scale, top: f64, bottom: f64, labels: bool, s: &mut String) {
    let ws = weeks(plan);
    let week_px = 7.0 * scale.day_w;
    let every = ((46.0 / week_px).ceil() as usize).max(1);
    let _ = writeln!(s, r#"<g class="grid">"#);
    for (i, w) in ws.iter().enumerate() {
        let x = scale.x(w.start);
        let _ = writeln!(
            s,
            r##"<line x1="{x:.1}" y1="{top:.1}" x2="{x:.1}" y2="{bottom:.1}" stroke="#d5d9de" stroke-width="1"/>"##
        );
        if labels && i % every == 0 {
            let _ = writeln!(
                s,
                r##"<text x="{:.1}" y="{:.1}" font-size="11" fill="#4a525c">{}</text>"##,
                x + 3.0,
                top - 6.0,
                esc(&short_date(w.start))
            );
        }
    }
    let _ = writeln!(
        s,
        r##"<line x1="{PLOT_X1:.1}" y1="{top:.1}" x2="{PLOT_X1:.1}" y2="{bottom:.1}" stroke="#d5d9de" stroke-width="1"/>"##
    );
    let _ = writeln!(s, "</g>");
}

/// Shaded blackout spans covering `pool`, over `top..bottom`.
fn blackout_shades(plan: &Plan, scale: &Scale, pool: &str, top: f64, bottom: f64, s: &mut String) {
    for b in plan.blackouts.iter().filter(|b| blackout_covers(b, pool)) {
        if b.to < plan.window.start || b.from > plan.window.end {
            continue;
        }
        let (x0, x1) = scale.span(b.from, b.to);
        let (pattern, kind) = match b.kind {
            BlackoutKind::NoRunning => ("url(#shade-stop)", "nothing runs"),
            BlackoutKind::NoStarts => ("url(#shade-nostart)", "no new starts"),
        };
        let _ = writeln!(
            s,
            r#"<rect x="{x0:.1}" y="{top:.1}" width="{:.1}" height="{:.1}" fill="{pattern}"><title>{}</title></rect>"#,
            x1 - x0,
            bottom - top,
            esc(&format!(
                "Blackout {} to {}: {kind}. {}",
                b.from, b.to, b.note
            ))
        );
    }
}

/// Patterns shared by the charts (the ids are unique in the document).
const PATTERNS: &str = r##"<defs>
<pattern id="shade-stop" width="8" height="8" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="8" height="8" fill="#eceff2"/><rect width="3" height="8" fill="#b9c0c8"/></pattern>
<pattern id="shade-nostart" width="8" height="8" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect width="8" height="8" fill="#f6f7f9"/><rect width="1.5" height="8" fill="#c9ced5"/></pattern>
</defs>"##;

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
        &pools_label(plan, e),
        e.owner
    )
}

/// A calendar row's label: the test's id, its title under it in grey.
fn row_label(e: &PlannedExperiment, y: f64, s: &mut String) {
    let _ = writeln!(
        s,
        r##"<text x="12" y="{:.1}" font-size="12" fill="#1c2127">{}</text><text x="12" y="{:.1}" font-size="10" fill="#4a525c">{}</text>"##,
        y + 14.0,
        esc(&clip(&e.id, 27)),
        y + 27.0,
        esc(&clip(&e.title, 33))
    );
}

/// A white tick across the bar on the last day of data of each interim
/// look (the day before the look's date).
fn look_marks(scale: &Scale, e: &PlannedExperiment, top: f64, h: f64, s: &mut String) {
    let Some(l) = &e.looks else {
        return;
    };
    let n = l.dates.len();
    for d in l.dates.iter().take(n.saturating_sub(1)) {
        let x = scale.x(d.date).clamp(PLOT_X0, PLOT_X1);
        let _ = writeln!(
            s,
            r##"<line class="look" x1="{x:.1}" y1="{:.1}" x2="{x:.1}" y2="{:.1}" stroke="#ffffff" stroke-width="3"><title>{}</title></line>"##,
            top - 2.0,
            top + h + 2.0,
            esc(&format!(
                "interim look {} of {n} on {}: may stop early",
                d.look, d.date
            ))
        );
    }
}

/// The calendar's legend: what each mark means, as a list under it.
pub(super) fn legend(s: &mut String) {
    let icon = |body: &str| {
        format!(
            r#"<svg class="icon" viewBox="0 0 28 16" width="28" height="16" aria-hidden="true">{body}</svg>"#
        )
    };
    let items = [
        (
            icon(r##"<rect x="1" y="3" width="26" height="10" rx="2" fill="#1f5f8b"/>"##),
            "a test's run, labelled with its share of the pool and its result date",
        ),
        (
            icon(
                r##"<path d="M9,8 l5,-5 l5,5 l-5,5 z" fill="#ffffff" stroke="#1f5f8b" stroke-width="2"/>"##,
            ),
            "the day its result is due",
        ),
        (
            icon(
                r##"<rect x="1" y="3" width="26" height="10" rx="2" fill="#1f5f8b"/><line x1="14" y1="1" x2="14" y2="15" stroke="#ffffff" stroke-width="3"/>"##,
            ),
            "an interim look: the test may stop early there",
        ),
        (
            icon(r##"<rect x="1" y="1" width="26" height="14" fill="url(#shade-stop)"/>"##),
            "blackout: nothing runs",
        ),
        (
            icon(r##"<rect x="1" y="1" width="26" height="14" fill="url(#shade-nostart)"/>"##),
            "blackout: no new starts",
        ),
        (
            icon(
                r##"<line x1="14" y1="0" x2="14" y2="16" stroke="#b3261e" stroke-width="2" stroke-dasharray="5 3"/>"##,
            ),
            "today",
        ),
    ];
    let _ = writeln!(s, r#"<ul class="legend">"#);
    for (icon, words) in items {
        let _ = writeln!(s, "<li>{icon} {words}</li>");
    }
    let _ = writeln!(s, "</ul>");
}

/// The calendar chart, into `s`.
pub(super) fn calendar(plan: &Plan, s: &mut String) {
    let scale = Scale::new(plan);
    let mut groups: Vec<(String, Option<&PoolPlan>, Vec<&PlannedExperiment>)> = plan
        .pools
        .iter()
        .map(|p| {
            (
                p.label.clone(),
                Some(p),
                experiments_in(plan, &p.id).collect(),
            )
        })
        .collect();
    let lost = orphans(plan);
    if !lost.is_empty() {
        groups.push(("Pool not in the plan".to_string(), None, lost));
    }
    let rows: usize = groups.iter().map(|g| g.2.len()).sum();
    let height = AXIS_H + groups.len() as f64 * GROUP_H + rows as f64 * ROW_H + 12.0;
    let (fit, _) = counts(plan);
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {SVG_W:.0} {height:.0}" role="img" aria-labelledby="cal-title cal-desc">"#
    );
    let _ = writeln!(
        s,
        r#"<title id="cal-title">Calendar of the plan</title><desc id="cal-desc">{fit} scheduled tests in {} pools, one row per test, one column per week from {} to {}; the table below lists the same facts.</desc>"#,
        plan.pools.len(),
        plan.window.start,
        plan.window.end
    );
    let _ = writeln!(s, "{PATTERNS}");
    let bottom = height - 12.0;
    // Where each group sits: (top of its heading row, bottom of its rows).
    let mut spans = Vec::with_capacity(groups.len());
    let mut y = AXIS_H;
    for (_, _, exps) in &groups {
        let group_bottom = y + GROUP_H + exps.len() as f64 * ROW_H;
        spans.push((y, group_bottom));
        y = group_bottom;
    }
    // Back to front: blackouts, week grid and today's line, then the pool
    // headings (opaque, so lines pause there), then the rows.
    for ((_, pool, _), &(group_top, group_bottom)) in groups.iter().zip(&spans) {
        let pool_id = pool.map(|p| p.id.as_str()).unwrap_or("");
        blackout_shades(plan, &scale, pool_id, group_top + GROUP_H, group_bottom, s);
    }
    week_grid(plan, &scale, AXIS_H, bottom, true, s);
    if plan.today >= plan.window.start && plan.today <= plan.window.end {
        let x = scale.x(plan.today);
        let _ = writeln!(
            s,
            r##"<g class="today"><line x1="{x:.1}" y1="{:.1}" x2="{x:.1}" y2="{bottom:.1}" stroke="#b3261e" stroke-width="2" stroke-dasharray="5 3"/><text x="{:.1}" y="14" font-size="11" font-weight="700" fill="#b3261e">today, {}</text><title>Plan made for {}</title></g>"##,
            18.0,
            x + 3.0,
            esc(&short_date(plan.today)),
            long_date(plan.today)
        );
    }
    for (gi, ((label, pool, exps), &(group_top, group_bottom))) in
        groups.iter().zip(&spans).enumerate()
    {
        let heading = match pool {
            Some(p) if is_split(p) => {
                format!("{label} · split · up to {} at once", p.max_concurrent)
            }
            Some(p) => format!("{label} · overlap · up to {} at once", p.max_concurrent),
            None => label.clone(),
        };
        let heading = match pool.and_then(crate::render::common::holdout_words) {
            Some(h) => format!("{heading} · {h}"),
            None => heading,
        };
        let _ = writeln!(
            s,
            r##"<rect x="0" y="{group_top:.1}" width="{SVG_W:.0}" height="{GROUP_H:.1}" fill="#f3f5f7"/><rect x="0" y="{group_top:.1}" width="5" height="{:.1}" fill="{}"/><text x="12" y="{:.1}" font-size="13" font-weight="700" fill="#1c2127">{}</text>"##,
            group_bottom - group_top,
            pool_fill(gi),
            group_top + 18.5,
            esc(&heading)
        );
        let mut y = group_top + GROUP_H;
        for e in exps {
            let mid = y + ROW_H / 2.0;
            row_label(e, y, s);
            match &e.run {
                Some(r) => {
                    let pool_id = pool.map(|p| p.id.as_str()).unwrap_or("");
                    bar(plan, &scale, e, r, y, pool_fill(gi), pool_id, s)
                }
                None if crate::render::common::past_run(e).is_some() => {
                    past_bar(&scale, e, y, s);
                }
                None => {
                    let word = if e.status == crate::plan::Status::Unscheduled {
                        "does not fit: see the list below".to_string()
                    } else {
                        esc(&crate::render::common::closed_words(e))
                    };
                    let _ = writeln!(
                        s,
                        r##"<text x="{:.1}" y="{:.1}" font-size="11" font-style="italic" fill="#4a525c">{word}</text>"##,
                        PLOT_X0 + 6.0,
                        mid + 4.0
                    );
                }
            }
            y += ROW_H;
        }
        let _ = writeln!(
            s,
            r##"<line x1="0" y1="{group_bottom:.1}" x2="{SVG_W:.0}" y2="{group_bottom:.1}" stroke="#c4cad1" stroke-width="1"/>"##
        );
    }
    let _ = writeln!(s, "</svg>");
}

/// Most characters of a pool's name per line beside its traffic chart:
/// what 13px bold text fits between the left edge and the axis labels.
const POOL_NAME_CHARS: usize = 19;

/// Breaks `s` into at most `lines` lines of at most `max` characters at
/// spaces; a word longer than a line, or text left over after the last
/// line, is cut with `…`.
fn wrap_label(s: &str, max: usize, lines: usize) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    let mut line = String::new();
    let mut words = s.split_whitespace().peekable();
    while let Some(word) = words.next() {
        let needed = line.chars().count() + usize::from(!line.is_empty()) + word.chars().count();
        if !line.is_empty() && needed > max {
            if out.len() + 1 == lines {
                // No line left: the rest goes on this one, clipped.
                let rest: Vec<&str> = std::iter::once(word).chain(words).collect();
                line = clip(&format!("{line} {}", rest.join(" ")), max);
                break;
            }
            out.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        out.push(clip(&line, max));
    }
    out
}

fn clip(s: &str, max: usize) -> String {
    if s.chars().count() <= max {
        s.to_string()
    } else {
        let mut out: String = s.chars().take(max - 1).collect();
        out.push('…');
        out
    }
}

/// A finished or cancelled test's run as it ran (re-plans): a grey bar
/// over its days, its ramp washed out at the ramp's days, and its words
/// ("finished early at look 2 of 3: better than control, ran ...") after
/// the bar, or inside the row's start when the bar leaves no room.
fn past_bar(scale: &Scale, e: &PlannedExperiment, y: f64, s: &mut String) {
    let Some(r) = crate::render::common::past_run(e) else {
        return;
    };
    let words = crate::render::common::closed_words(e);
    let (x0, x1) = scale.span(r.start, r.end);
    let top = y + (ROW_H - BAR_H) / 2.0;
    let h = BAR_H;
    let _ = writeln!(
        s,
        r##"<g class="past-bar"><title>{}</title><rect x="{x0:.1}" y="{top:.1}" width="{:.1}" height="{h:.1}" rx="3" fill="#8a939d"/>"##,
        esc(&format!("{} ({}): {words}", e.title, e.id)),
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
    // The words after the bar, shortened until they fit: in full, then
    // without the dates (the bar shows them), then inside the bar.
    let short = words.split(", ran ").next().unwrap_or(&words).to_string();
    let width = |t: &str| t.chars().count() as f64 * CHAR_W;
    let (x, text, fill) = if x1 + 6.0 + width(&words) <= PLOT_X1 {
        (x1 + 6.0, words.as_str(), "#4a525c")
    } else if x1 + 6.0 + width(&short) <= PLOT_X1 {
        (x1 + 6.0, short.as_str(), "#4a525c")
    } else {
        (x0 + 6.0, short.as_str(), "#ffffff")
    };
    let _ = writeln!(
        s,
        r##"<text x="{x:.1}" y="{:.1}" font-size="11" font-style="italic" fill="{fill}">{}</text></g>"##,
        top + h / 2.0 + 4.0,
        esc(text)
    );
}

#[allow(clippy::too_many_arguments)]
fn bar(
    plan: &Plan,
    scale: &Scale,
    e: &PlannedExperiment,
    r: &Run,
    y: f64,
    fill: &str,
    pool_id: &str,
    s: &mut String,
) {
    let (x0, x1) = scale.span(r.start, r.end);
    let w = (x1 - x0).max(2.0);
    let top = y + (ROW_H - BAR_H) / 2.0;
    let h = BAR_H;
    // A test already running says so: its start is a fact, not a plan.
    // A test on several pools is one test: each of its rows says where
    // else it runs.
    let also = also_on(e, pool_id)
        .map(|a| format!(" · {}", a.replace('`', "")))
        .unwrap_or_default();
    let label = format!(
        "{}{} · result {}{also}",
        if e.status == crate::plan::Status::Running {
            "running · "
        } else {
            ""
        },
        r.share,
        short_date(r.result_date)
    );
    let text_w = label.chars().count() as f64 * CHAR_W;
    let _ = writeln!(
        s,
        "<g class=\"bar\"><title>{}</title>",
        esc(&bar_tooltip(plan, e, r))
    );
    let _ = writeln!(
        s,
        r#"<rect x="{x0:.1}" y="{top:.1}" width="{w:.1}" height="{h:.1}" rx="3" fill="{fill}"/>"#
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
    // The result-due day: a small mark just after the bar's end.
    if r.result_date <= plan.window.end + Duration::days(1) {
        let xr = scale.x(r.result_date).min(PLOT_X1);
        let _ = writeln!(
            s,
            r##"<path d="M{:.1},{:.1} l5,-5 l5,5 l-5,5 z" fill="#ffffff" stroke="{fill}" stroke-width="2"/>"##,
            xr - 5.0 + scale.day_w / 2.0,
            top + h / 2.0
        );
    }
    look_marks(scale, e, top, h, s);
    whisker(plan, scale, e, top + h + 1.5, s);
    let baseline = top + h / 2.0 + 4.0;
    if text_w + 12.0 <= w {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="{baseline:.1}" font-size="11" font-weight="600" fill="#ffffff">{}</text>"##,
            x0 + 6.0,
            esc(&label)
        );
    } else if x1 + 16.0 + text_w <= PLOT_X1 {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="{baseline:.1}" font-size="11" fill="#1c2127">{}</text>"##,
            x1 + 16.0,
            esc(&label)
        );
    } else {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="{baseline:.1}" font-size="11" fill="#1c2127" text-anchor="end">{}</text>"##,
            x0 - 4.0,
            esc(&label)
        );
    }
    let _ = writeln!(s, "</g>");
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
            (scale.x(d) + scale.day_w / 2.0).min(PLOT_X1)
        }
        _ => PLOT_X1,
    };
    let (x10, x50, x90) = (x(r.p10), x(r.p50), x(r.p90));
    let _ = writeln!(
        s,
        r##"<g class="range"><title>{}</title><path d="M{x10:.1},{:.1} v5 M{x10:.1},{y:.1} H{x90:.1} M{x90:.1},{:.1} v5 M{x50:.1},{:.1} v7" stroke="#1c2127" stroke-width="1.5" fill="none"/></g>"##,
        esc(&format!(
            "Result range (P10–P90): {}; {}",
            crate::render::common::range_words(r),
            crate::render::common::chance_words(r)
        )),
        y - 2.5,
        y - 2.5,
        y - 3.5
    );
}

/// One pool's daily use against its capacity: the share in use for split
/// pools (capacity 100% less the holdout), the number of tests running for overlap pools
/// (capacity: how many may run at once).
pub(super) fn pool_chart(plan: &Plan, index: usize, p: &PoolPlan, s: &mut String) {
    let scale = Scale::new(plan);
    let split = is_split(p);
    let value = |d: &crate::plan::PoolDay| {
        if split {
            d.share_used
        } else {
            f64::from(d.running)
        }
    };
    // A split pool's room is what its holdout leaves.
    let capacity = if split {
        1.0 - p.holdout
    } else {
        f64::from(p.max_concurrent.max(1))
    };
    let peak = p.days.iter().map(value).fold(0.0, f64::max);
    let top_value = capacity.max(peak);
    let (top, bottom) = (30.0, 150.0);
    let height = bottom + 26.0;
    let y = |v: f64| bottom - (v / top_value) * (bottom - top);
    let id = format!("pool-{index}");
    let what = if split {
        format!(
            "share of the pool's units in use each day, against {}",
            percent(capacity)
        )
    } else {
        format!(
            "tests running each day, against the limit of {} at once",
            p.max_concurrent
        )
    };
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 {SVG_W:.0} {height:.0}" role="img" aria-labelledby="{id}-title {id}-desc">"#
    );
    let _ = writeln!(
        s,
        r#"<title id="{id}-title">{}: traffic in use</title><desc id="{id}-desc">{}: {what}; peak {}.</desc>"#,
        esc(&p.label),
        esc(&p.label),
        if split {
            percent(peak)
        } else {
            format!("{peak:.0}")
        }
    );
    blackout_shades(plan, &scale, &p.id, top, bottom, s);
    week_grid(plan, &scale, top, bottom, true, s);
    // Faint guide lines: quarters of a split pool, each test of an overlap pool.
    let guides: Vec<f64> = if split {
        vec![0.25, 0.5, 0.75]
    } else if p.max_concurrent <= 12 {
        (1..p.max_concurrent).map(f64::from).collect()
    } else {
        Vec::new()
    };
    for g in guides {
        let _ = writeln!(
            s,
            r##"<line x1="{PLOT_X0:.1}" y1="{:.1}" x2="{PLOT_X1:.1}" y2="{:.1}" stroke="#e3e6ea" stroke-width="1"/>"##,
            y(g),
            y(g)
        );
    }
    // Y axis labels: 0 and capacity.
    for (v, words) in [
        (
            0.0,
            if split {
                "0%".to_string()
            } else {
                "0".to_string()
            },
        ),
        (
            capacity,
            if split {
                percent(capacity)
            } else {
                format!("{} at once", p.max_concurrent)
            },
        ),
    ] {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="{:.1}" font-size="11" fill="#4a525c" text-anchor="end">{}</text>"##,
            PLOT_X0 - 8.0,
            y(v) + 4.0,
            esc(&words)
        );
    }
    // The pool's name in the column left of the axis labels, on up to two
    // lines so a long name never runs into them.
    let name_lines = wrap_label(&p.label, POOL_NAME_CHARS, 2);
    for (i, line) in name_lines.iter().enumerate() {
        let _ = writeln!(
            s,
            r##"<text x="12" y="{:.1}" font-size="13" font-weight="700" fill="#1c2127">{}</text>"##,
            top + 16.0 + 16.0 * i as f64,
            esc(line)
        );
    }
    let _ = writeln!(
        s,
        r##"<text x="12" y="{:.1}" font-size="11" fill="#4a525c">{}</text>"##,
        top + 16.0 * (name_lines.len() as f64 + 1.0),
        if split { "split pool" } else { "overlap pool" }
    );
    let fill = pool_fill(index);
    // The area: one step path over the days (no seams between days).
    let shown: Vec<&crate::plan::PoolDay> = p
        .days
        .iter()
        .filter(|d| d.date >= plan.window.start && d.date <= plan.window.end)
        .collect();
    let mut path = String::new();
    for d in &shown {
        let (x0, x1) = scale.span(d.date, d.date);
        let yv = y(value(d).min(capacity));
        let _ = write!(path, "M{x0:.1},{bottom:.1}V{yv:.1}H{x1:.1}V{bottom:.1}Z");
    }
    if !path.is_empty() {
        let _ = writeln!(
            s,
            r#"<path d="{path}" fill="{fill}" shape-rendering="crispEdges"/>"#
        );
    }
    // Anything above capacity (a bug upstream) stands out in red.
    for d in shown.iter().filter(|d| value(d) > capacity + 1e-9) {
        let (x0, x1) = scale.span(d.date, d.date);
        let _ = writeln!(
            s,
            r##"<rect x="{x0:.1}" y="{:.1}" width="{:.2}" height="{:.1}" fill="#b3261e"/>"##,
            y(value(d)),
            x1 - x0,
            y(capacity) - y(value(d))
        );
    }
    // Invisible day columns carry the tooltips.
    let _ = writeln!(s, r##"<g class="days" fill="#ffffff" fill-opacity="0">"##);
    for d in &shown {
        let (x0, x1) = scale.span(d.date, d.date);
        let tip = format!(
            "{}: {} in use, {} running, forecast {} units",
            long_date(d.date),
            percent(d.share_used),
            d.running,
            units(d.forecast)
        );
        let _ = writeln!(
            s,
            r#"<rect x="{x0:.1}" y="{top:.1}" width="{:.2}" height="{:.1}"><title>{}</title></rect>"#,
            x1 - x0,
            bottom - top,
            esc(&tip)
        );
    }
    let _ = writeln!(s, "</g>");
    let cy = y(capacity);
    let _ = writeln!(
        s,
        r##"<line x1="{PLOT_X0:.1}" y1="{cy:.1}" x2="{PLOT_X1:.1}" y2="{cy:.1}" stroke="#1c2127" stroke-width="1.5" stroke-dasharray="6 3"/><line x1="{PLOT_X0:.1}" y1="{bottom:.1}" x2="{PLOT_X1:.1}" y2="{bottom:.1}" stroke="#1c2127" stroke-width="1"/>"##
    );
    if plan.today >= plan.window.start && plan.today <= plan.window.end {
        let x = scale.x(plan.today);
        let _ = writeln!(
            s,
            r##"<line x1="{x:.1}" y1="{top:.1}" x2="{x:.1}" y2="{bottom:.1}" stroke="#b3261e" stroke-width="2" stroke-dasharray="5 3"/>"##
        );
    }
    let _ = writeln!(s, "</svg>");
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn long_pool_names_wrap_onto_two_lines_and_then_clip() {
        assert_eq!(wrap_label("Home page", 19, 2), ["Home page"]);
        assert_eq!(
            wrap_label("App onboarding (new installs)", 19, 2),
            ["App onboarding (new", "installs)"]
        );
        let three = wrap_label("Basket, checkout and the payment pages after it", 19, 2);
        assert_eq!(three.len(), 2);
        assert_eq!(three[0], "Basket, checkout");
        assert!(three[1].ends_with('…'), "{three:?}");
        assert!(three.iter().all(|l| l.chars().count() <= 19), "{three:?}");
        let word = wrap_label("Supercalifragilisticexpialidocious", 19, 2);
        assert_eq!(word, ["Supercalifragilist…"]);
        assert!(wrap_label("", 19, 2).is_empty());
    }

    #[test]
    fn scale_maps_window_ends_to_plot_edges() {
        let plan = fixture::plan();
        let scale = Scale::new(&plan);
        assert!((scale.x(plan.window.start) - PLOT_X0).abs() < 1e-9);
        let (_, end) = scale.span(plan.window.end, plan.window.end);
        assert!((end - PLOT_X1).abs() < 1e-9);
    }
}

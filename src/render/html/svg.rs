//! The report's charts in inline SVG: one chart per pool of the traffic in
//! use each day, the date scale and blackout patterns the calendar shares
//! (`calendar.rs` draws the calendar itself), and the calendar's legend.
//! Colours come from the stylesheet's classes, so dark mode and paper
//! recolour them. Coordinates are printed with fixed decimals so the bytes
//! are stable.

use super::{esc, pool_fill};
use crate::plan::{BlackoutKind, Plan, PoolPlan};
use crate::render::common::{
    blackout_covers, is_split, long_date, percent, short_date, units, weeks,
};
use chrono::{Duration, NaiveDate};
use std::fmt::Write;

/// Width of the traffic charts in user units, drawn 1:1 on screen (they
/// scroll inside their frame where the page is narrower) and fitted to the
/// page on paper.
pub(super) const SVG_W: f64 = 1040.0;
/// Left edge of the plotting area (the axis labels sit to its left).
const PLOT_X0: f64 = 210.0;
/// Right edge of the plotting area.
pub(super) const PLOT_X1: f64 = 1024.0;

/// The x position of the start of a date in a plotting area.
pub(super) struct Scale {
    start: NaiveDate,
    x0: f64,
    x1: f64,
    /// Width of one day.
    pub(super) day_w: f64,
}

impl Scale {
    /// The window's days spread over `x0..x1`.
    pub(super) fn new(plan: &Plan, x0: f64, x1: f64) -> Scale {
        let days = ((plan.window.end - plan.window.start).num_days() + 1).max(1) as f64;
        Scale {
            start: plan.window.start,
            x0,
            x1,
            day_w: (x1 - x0) / days,
        }
    }

    /// Where `date` begins.
    pub(super) fn x(&self, date: NaiveDate) -> f64 {
        self.x0 + (date - self.start).num_days() as f64 * self.day_w
    }

    /// The x span of the days `from..=to`, clipped to the window.
    pub(super) fn span(&self, from: NaiveDate, to: NaiveDate) -> (f64, f64) {
        let a = self.x(from).clamp(self.x0, self.x1);
        let b = self.x(to + Duration::days(1)).clamp(self.x0, self.x1);
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
            r#"<line class="rule" x1="{x:.1}" y1="{top:.1}" x2="{x:.1}" y2="{bottom:.1}"/>"#
        );
        // A short first week's label would crowd the next one.
        let short = i == 0 && ws.len() > 1 && (w.end - w.start).num_days() < 4;
        if labels && i % every == 0 && !short && x + 44.0 <= SVG_W {
            let _ = writeln!(
                s,
                r#"<text class="muted" x="{:.1}" y="{:.1}" font-size="11">{}</text>"#,
                x + 3.0,
                top - 6.0,
                esc(&short_date(w.start))
            );
        }
    }
    let _ = writeln!(
        s,
        r#"<line class="rule" x1="{PLOT_X1:.1}" y1="{top:.1}" x2="{PLOT_X1:.1}" y2="{bottom:.1}"/>"#
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

/// The blackout patterns, drawn once in the calendar's axis and used by
/// every chart and the legend (the ids are unique in the document): broad
/// stripes where nothing runs, thin ones where nothing starts, so the two
/// differ by shape as well as shade.
pub(super) const PATTERNS: &str = r#"<defs>
<pattern id="shade-stop" width="8" height="8" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect class="shade-back" width="8" height="8"/><rect class="shade-stripe" width="3" height="8"/></pattern>
<pattern id="shade-nostart" width="8" height="8" patternUnits="userSpaceOnUse" patternTransform="rotate(45)"><rect class="shade-back-light" width="8" height="8"/><rect class="shade-stripe-light" width="1.5" height="8"/></pattern>
</defs>"#;

/// The calendar's legend: what each mark means, as a list under it. The
/// icons are drawn at their own size (28 by 16 pixels).
pub(super) fn legend(s: &mut String) {
    let icon = |body: &str| {
        format!(
            r#"<svg class="icon" xmlns="http://www.w3.org/2000/svg" viewBox="0 0 28 16" width="28" height="16" aria-hidden="true">{body}</svg>"#
        )
    };
    let items = [
        (
            icon(r##"<rect x="1" y="3" width="26" height="10" rx="2" fill="#1f5f8b"/>"##),
            "a test's run, labelled with its share of the pool and its result date",
        ),
        (
            icon(
                r##"<path class="due" d="M9,8 l5,-5 l5,5 l-5,5 z" stroke="#1f5f8b" stroke-width="2"/>"##,
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
            icon(
                r#"<path class="ink-line" d="M3,5 v6 M3,8 H25 M25,5 v6 M12,4 v8" stroke-width="1.5" fill="none"/>"#,
            ),
            "under a bar: the range of its result date (P10 to P90, tick at P50)",
        ),
        (
            icon(r#"<rect x="1" y="1" width="26" height="14" fill="url(#shade-stop)"/>"#),
            "blackout, broad stripes: nothing runs",
        ),
        (
            icon(r#"<rect x="1" y="1" width="26" height="14" fill="url(#shade-nostart)"/>"#),
            "blackout, thin stripes: no new starts",
        ),
        (
            icon(r#"<line class="today" x1="14" y1="0" x2="14" y2="16"/>"#),
            "today",
        ),
    ];
    let _ = writeln!(s, r#"<ul class="legend">"#);
    for (icon, words) in items {
        let _ = writeln!(s, "<li>{icon} {words}</li>");
    }
    let _ = writeln!(
        s,
        r#"<li>rows in italics: tests that finished, were cancelled or do not fit, in words</li></ul>"#
    );
}

/// One pool's daily use against its capacity: the share in use for split
/// pools (capacity 100% less the holdout), the number of tests running for overlap pools
/// (capacity: how many may run at once).
pub(super) fn pool_chart(plan: &Plan, index: usize, p: &PoolPlan, s: &mut String) {
    let scale = Scale::new(plan, PLOT_X0, PLOT_X1);
    let split = is_split(p);
    let value = |d: &crate::plan::PoolDay| {
        if split {
            d.share_used.fraction()
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
        r#"<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="{SVG_W:.0}" height="{height:.0}" viewBox="0 0 {SVG_W:.0} {height:.0}" role="img" aria-labelledby="{id}-title {id}-desc">"#
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
            r#"<line class="guide" x1="{PLOT_X0:.1}" y1="{:.1}" x2="{PLOT_X1:.1}" y2="{:.1}"/>"#,
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
            r#"<text class="muted" x="{:.1}" y="{:.1}" font-size="11" text-anchor="end">{}</text>"#,
            PLOT_X0 - 8.0,
            y(v) + 4.0,
            esc(&words)
        );
    }
    // What the bars count, in the column left of the axis labels (the
    // pool's name is the heading over the chart, whole at any length).
    for (i, line) in [
        if split {
            "share of the"
        } else {
            "tests running"
        },
        if split { "pool in use" } else { "at once" },
    ]
    .iter()
    .enumerate()
    {
        let _ = writeln!(
            s,
            r#"<text class="muted" x="12" y="{:.1}" font-size="11">{line}</text>"#,
            top + 16.0 + 15.0 * i as f64
        );
    }
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
    for d in shown.iter().filter(|d| p.over(d)) {
        let (x0, x1) = scale.span(d.date, d.date);
        let _ = writeln!(
            s,
            r#"<rect class="over" x="{x0:.1}" y="{:.1}" width="{:.2}" height="{:.1}"/>"#,
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
            percent(d.share_used.fraction()),
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
        r#"<line class="ink-line" x1="{PLOT_X0:.1}" y1="{cy:.1}" x2="{PLOT_X1:.1}" y2="{cy:.1}" stroke-width="1.5" stroke-dasharray="6 3"/><line class="ink-line" x1="{PLOT_X0:.1}" y1="{bottom:.1}" x2="{PLOT_X1:.1}" y2="{bottom:.1}" stroke-width="1"/>"#
    );
    if plan.today >= plan.window.start && plan.today <= plan.window.end {
        let x = scale.x(plan.today);
        let _ = writeln!(
            s,
            r#"<line class="today" x1="{x:.1}" y1="{top:.1}" x2="{x:.1}" y2="{bottom:.1}"/>"#
        );
    }
    let _ = writeln!(s, "</svg>");
}

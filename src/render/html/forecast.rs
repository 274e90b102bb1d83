//! The report's forecast charts: for each pool with a history, its last
//! weeks of actual daily units and the forecast over the window, one
//! small inline SVG each, so a reader sees what the dates rest on. Pools
//! without a history get none; a plan without any gets no section.

use super::svg::{PLOT_X1 as X1, SVG_W as W};
use super::{esc, pool_fill};
use crate::plan::{Plan, PoolPlan};
use crate::render::common::{short_date, units};
use chrono::NaiveDate;
use std::fmt::Write;

/// Height of one chart, in user units; its width and right edge are the
/// other charts' (`SVG_W`, `PLOT_X1` in `svg.rs`).
const H: f64 = 170.0;
/// The plotting area.
const X0: f64 = 70.0;
const Y0: f64 = 16.0;
const Y1: f64 = 146.0;

/// The section of forecast charts, into `s`; nothing when no pool has a
/// history.
pub(super) fn section(plan: &Plan, s: &mut String) {
    if plan.pools.iter().all(|p| p.history.is_empty()) {
        return;
    }
    let _ = writeln!(
        s,
        r#"<section><h2 id="forecast">Forecast from history</h2>"#
    );
    for (i, p) in plan.pools.iter().enumerate() {
        if p.history.is_empty() {
            continue;
        }
        let _ = writeln!(
            s,
            r#"<figure><h3>{}</h3><div class="frame" role="region" tabindex="0" aria-label="{}: forecast chart; it scrolls sideways">"#,
            esc(&p.label),
            esc(&p.label)
        );
        chart(p, i, s);
        let _ = writeln!(s, "</div>");
        let _ = writeln!(
            s,
            "<figcaption>{}</figcaption></figure>",
            esc(&format!(
                "{}: grey, the last {} days of actual daily units; coloured, the forecast the plan uses over the window: the fit to that history, with the portfolio's adjustments on top.{}",
                p.label,
                p.history.len(),
                if p.backtest.is_empty() {
                    String::new()
                } else {
                    format!(
                        " Shaded: the backtest, {} four-week {} made by the same fit from earlier days only, each the P10–P90 range of an average day over its four weeks, with a dark line at what came.",
                        p.backtest.len(),
                        crate::words::Count("forecast", p.backtest.len())
                    )
                }
            ))
        );
    }
    let _ = writeln!(s, "</section>");
}

/// One pool's chart: history and forecast on one time axis.
fn chart(p: &PoolPlan, index: usize, s: &mut String) {
    let first = p.history[0].date;
    let last = p
        .days
        .last()
        .map_or(p.history[p.history.len() - 1].date, |d| d.date);
    let span = ((last - first).num_days().max(1)) as f64;
    let x = |d: NaiveDate| X0 + (X1 - X0) * (d - first).num_days() as f64 / span;
    let top = p
        .history
        .iter()
        .map(|h| h.units)
        .chain(p.days.iter().map(|d| d.forecast))
        .fold(0.0_f64, f64::max)
        .max(1.0);
    let y = |u: f64| Y1 - (Y1 - Y0) * (u / top).clamp(0.0, 1.0);
    let line = |points: &mut dyn Iterator<Item = (NaiveDate, f64)>| -> String {
        let mut d = String::new();
        for (k, (date, u)) in points.enumerate() {
            let _ = write!(
                d,
                "{}{:.1},{:.1}",
                if k == 0 { "M" } else { " L" },
                x(date),
                y(u)
            );
        }
        d
    };
    // The backtest's ranges: the average day of each four weeks.
    let mut bands = String::new();
    for r in &p.backtest {
        let days = ((r.to - r.from).num_days() + 1) as f64;
        let (x0, x1) = (x(r.from), x(r.to + chrono::Duration::days(1)));
        let (top_y, bottom_y) = (y(r.high / days), y(r.low / days));
        let _ = write!(
            bands,
            r##"<rect x="{x0:.1}" y="{top_y:.1}" width="{:.1}" height="{:.1}" fill="#8a929c" fill-opacity="0.25"><title>{}</title></rect><line x1="{x0:.1}" y1="{ay:.1}" x2="{x1:.1}" y2="{ay:.1}" class="ink-line" stroke-width="2"/>"##,
            x1 - x0,
            (bottom_y - top_y).max(1.0),
            esc(&format!(
                "forecast from {}: {} to {} a day (P10–P90); came {}",
                short_date(r.from),
                units(r.low / days),
                units(r.high / days),
                units(r.actual / days)
            )),
            ay = y(r.actual / days)
        );
    }
    let history = line(&mut p.history.iter().map(|h| (h.date, h.units)));
    let forecast = line(&mut p.days.iter().map(|d| (d.date, d.forecast)));
    let id = format!("fc-{index}");
    let _ = writeln!(
        s,
        r#"<svg class="chart" xmlns="http://www.w3.org/2000/svg" width="{W:.0}" height="{H:.0}" viewBox="0 0 {W:.0} {H:.0}" role="img" aria-labelledby="{id}-title"><title id="{id}-title">{}: daily units, history and forecast</title>"#,
        esc(&p.label)
    );
    // Axis: the top value and zero, the first day, the window's start and end.
    let _ = writeln!(
        s,
        r##"<line class="rule" x1="{X0:.1}" y1="{Y1:.1}" x2="{X1:.1}" y2="{Y1:.1}"/><text x="{:.1}" y="{:.1}" class="muted" font-size="11" text-anchor="end">{}</text><text x="{:.1}" y="{:.1}" class="muted" font-size="11" text-anchor="end">0</text>"##,
        X0 - 6.0,
        Y0 + 4.0,
        esc(&units(top)),
        X0 - 6.0,
        Y1 + 4.0
    );
    let mut labels = vec![(first, "start")];
    if let Some(d) = p.days.first() {
        labels.push((d.date, "middle"));
        let xs = x(d.date);
        let _ = writeln!(
            s,
            r##"<line x1="{xs:.1}" y1="{Y0:.1}" x2="{xs:.1}" y2="{Y1:.1}" class="muted-line" stroke-dasharray="4 3"/>"##
        );
    }
    labels.push((last, "end"));
    for (date, anchor) in labels {
        let _ = writeln!(
            s,
            r##"<text x="{:.1}" y="{:.1}" class="muted" font-size="11" text-anchor="{anchor}">{}</text>"##,
            x(date),
            Y1 + 16.0,
            esc(&short_date(date))
        );
    }
    s.push_str(&bands);
    let _ = writeln!(
        s,
        r##"<path d="{history}" fill="none" stroke="#8a929c" stroke-width="1.5"/><path d="{forecast}" fill="none" stroke="{}" stroke-width="2"/></svg>"##,
        pool_fill(index)
    );
}

#[cfg(test)]
mod tests {
    use crate::plan::{HistoryDay, Plan};
    use crate::render::fixture;

    fn with_history(plan: &mut Plan) {
        let start = plan.window.start - chrono::Duration::days(14);
        plan.pools[0].history = (0..14)
            .map(|i| HistoryDay {
                date: start + chrono::Duration::days(i),
                units: 1000.0 + i as f64,
            })
            .collect();
    }

    #[test]
    fn a_pool_with_history_gets_a_chart_and_others_none() {
        let mut plan = fixture::plan();
        let mut s = String::new();
        super::section(&plan, &mut s);
        assert!(s.is_empty(), "no history, no section");
        with_history(&mut plan);
        super::section(&plan, &mut s);
        assert_eq!(s.matches("<svg").count(), 1);
        assert!(s.contains("Forecast from history"));
        // Two lines: history from the plot's left edge, forecast to its right.
        assert!(s.contains(r#"<path d="M70.0,"#), "{s}");
        assert!(s.contains(" L1024.0,"), "{s}");
        assert!(!s.contains("<rect"), "no backtest, no bands");
    }

    #[test]
    fn the_backtest_ranges_are_drawn_as_bands_of_an_average_day() {
        let mut plan = fixture::plan();
        with_history(&mut plan);
        let from = plan.pools[0].history[0].date;
        plan.pools[0].backtest = vec![crate::forecast::backtest::OriginRange {
            from,
            to: from + chrono::Duration::days(6),
            forecast: 7000.0,
            low: 6300.0,
            high: 7700.0,
            actual: 7070.0,
        }];
        let mut s = String::new();
        super::section(&plan, &mut s);
        assert_eq!(s.matches("<rect").count(), 1, "{s}");
        assert!(
            s.contains("900 to 1,100 a day (P10–P90); came 1,010"),
            "{s}"
        );
        assert!(
            s.contains("Shaded: the backtest, 1 four-week forecast made"),
            "{s}"
        );
    }
}

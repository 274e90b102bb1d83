//! HTML: one self-contained report file (no external scripts, fonts,
//! styles or images) for people who read the plan in a browser or on paper.
//!
//! Sections: a summary (how many tests fit, how many do not, the solver's
//! value against its bound), a calendar chart in inline SVG (rows grouped by
//! pool on a week grid, today's line, blackouts shaded, each bar labelled
//! and carrying a tooltip of its numbers), one chart per pool of the daily
//! traffic in use against its capacity, the table of tests, the tests that
//! do not fit with their reasons, and the assumptions and cautions. A
//! re-plan's changes and advice come right after the header.
//!
//! The markup is XHTML-compatible (every element closed, only XML's five
//! entities) so that an XML parser can check it, and all user text is
//! escaped. Coordinates are printed with fixed decimals so that the same
//! plan always gives the same bytes. The look is our own: plain, high
//! contrast, and readable when printed.
//!
//! `svg` draws the charts, `table` the table of tests, `changes` a
//! re-plan's sections; the markup helpers and the page are here.

mod calendar;
mod changes;
mod forecast;
mod svg;
mod table;

use super::common::{
    cautions, counts, is_split, long_date, pools_label, solver_sentence, thousands, units,
};
use super::{RenderError, RenderOptions, Renderer};
use crate::plan::{Plan, PlannedExperiment, Run};
use chrono::NaiveDate;
use std::fmt::Write;

/// The HTML report renderer.
pub struct Html;

/// A re-plan's actual traffic against the forecast, as a section of its
/// own; nothing without it.
fn traffic(plan: &Plan, s: &mut String) {
    let lines = crate::render::common::traffic_lines(plan);
    if lines.is_empty() {
        return;
    }
    let _ = writeln!(
        s,
        r#"<section><h2 id="traffic-so-far">Traffic so far</h2><ul>"#
    );
    for line in lines {
        let _ = writeln!(s, "<li>{}</li>", esc(&line));
    }
    let _ = writeln!(s, "</ul></section>");
}

/// Escapes text for XML and HTML content and attribute values.
pub fn esc(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&#39;"),
            // Control characters other than tab and newline are not allowed
            // in XML 1.0 at all; drop them.
            c if (c as u32) < 0x20 && c != '\t' && c != '\n' => {}
            c => out.push(c),
        }
    }
    out
}

/// Escapes text like [`esc`], then shows `backticked` names (as the
/// scheduler writes them in reasons) as code.
pub fn esc_with_code(s: &str) -> String {
    let escaped = esc(s);
    let parts: Vec<&str> = escaped.split('`').collect();
    if parts.len().is_multiple_of(2) {
        // An unpaired backtick: keep the text as it is.
        return escaped;
    }
    let mut out = String::with_capacity(escaped.len() + parts.len() * 7);
    for (i, part) in parts.iter().enumerate() {
        if i % 2 == 1 {
            out.push_str("<code>");
            out.push_str(part);
            out.push_str("</code>");
        } else {
            out.push_str(part);
        }
    }
    out
}

/// Bar colours per pool, in pool order (cycled). Each has a contrast ratio
/// above 4.5:1 against white, so white labels on bars stay readable.
const POOL_FILLS: [&str; 5] = ["#1f5f8b", "#8a4f0a", "#5b3f8c", "#2d6a3e", "#8c2f4b"];

const STYLE: &str = r#"
:root { color-scheme: light dark;
  --bg: #ffffff; --ink: #1c2127; --muted: #4a525c; --rule: #d5d9de; --rule-strong: #c4cad1;
  --band: #f3f5f7; --guide: #e3e6ea; --today: #b3261e; --warn: #a4500f; --focus: #1f5f8b;
  --shade-back: #eceff2; --shade-stripe: #b9c0c8; --shade-back-light: #f6f7f9; --shade-stripe-light: #c9ced5; }
@media (prefers-color-scheme: dark) {
  :root { --bg: #121519; --ink: #e7eaee; --muted: #a9b2bc; --rule: #353d46; --rule-strong: #4a535d;
    --band: #1d2329; --guide: #2a3138; --today: #ff8f85; --warn: #f0a35e; --focus: #8cc4f0;
    --shade-back: #232a31; --shade-stripe: #56606b; --shade-back-light: #1b2026; --shade-stripe-light: #444d57; }
  /* The pools' dark bars keep their shape against the dark page. */
  rect.run { stroke: #c9d3dd; stroke-width: 1.5; }
}
* { box-sizing: border-box; }
html { -webkit-text-size-adjust: 100%; text-size-adjust: 100%; }
body { margin: 0; background: var(--bg); color: var(--ink);
  font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif;
  font-size: 15px; line-height: 1.5; overflow-wrap: break-word; }
main { max-width: 1100px; margin: 0 auto; padding: 28px 28px 48px; }
a { color: var(--focus); }
:focus-visible { outline: 3px solid var(--focus); outline-offset: 2px; }
header.top { border-bottom: 3px solid var(--ink); padding-bottom: 12px; margin-bottom: 12px; }
h1 { font-size: 26px; margin: 0 0 4px; letter-spacing: -0.01em; line-height: 1.25; }
h2 { font-size: 19px; margin: 32px 0 8px; padding-top: 8px; border-top: 1px solid var(--rule); }
h3 { font-size: 15px; margin: 18px 0 4px; }
p.meta { margin: 0; color: var(--muted); }
nav.controls ul { display: flex; flex-wrap: wrap; gap: 4px 16px; list-style: none; margin: 0; padding: 0; font-size: 14px; }
.sr { position: absolute; width: 1px; height: 1px; margin: -1px; padding: 0; overflow: hidden; clip: rect(0 0 0 0); white-space: nowrap; border: 0; }
.summary { display: flex; flex-wrap: wrap; gap: 12px; margin: 8px 0 4px; padding: 0; list-style: none; }
.summary li { flex: 1 1 200px; border: 1px solid var(--rule-strong); border-left: 6px solid var(--ink); padding: 10px 14px; }
.summary li.warn { border-left-color: var(--warn); }
.summary .big { display: block; font-size: 24px; font-weight: 700; line-height: 1.2; }
.summary .small { color: var(--muted); font-size: 13px; }
figure { margin: 8px 0 0; }
figcaption { color: var(--muted); font-size: 13px; margin-top: 4px; }
figure h3 { margin-top: 12px; }
.frame { overflow-x: auto; max-width: 100%; }
svg { display: block; }
svg.icon { display: inline-block; width: 28px; height: 16px; vertical-align: middle; }
svg text { font-family: inherit; }
svg .muted { fill: var(--muted); }
svg .ink { fill: var(--ink); }
svg .on-bar { fill: #ffffff; }
svg .rule { stroke: var(--rule); stroke-width: 1; }
svg .guide { stroke: var(--guide); stroke-width: 1; }
svg .ink-line { stroke: var(--ink); }
svg .muted-line { stroke: var(--muted); }
svg .today { stroke: var(--today); stroke-width: 2; stroke-dasharray: 5 3; }
svg use.grid { color: var(--rule); } svg use.today { color: var(--today); stroke: none; }
svg .today-label { fill: var(--today); }
svg .due { fill: var(--bg); }
svg .over { fill: var(--today); }
svg .shade-back { fill: var(--shade-back); } svg .shade-stripe { fill: var(--shade-stripe); }
svg .shade-back-light { fill: var(--shade-back-light); } svg .shade-stripe-light { fill: var(--shade-stripe-light); }
.cal { margin-top: 8px; border: 1px solid var(--rule); }
.cal-inner { width: max-content; min-width: 100%; }
.cal-row { display: flex; height: 34px; }
.cal-axis { height: 44px; }
.cal-row .name { flex: none; width: 210px; position: sticky; left: 0; z-index: 1; background: var(--bg);
  padding: 1px 8px 0 10px; border-left: 5px solid var(--pool, transparent); border-right: 1px solid var(--rule); line-height: 16px; }
.cal-axis .name { border-left-color: transparent; }
.cal-row .name code, .cal-row .name span { display: block; white-space: nowrap; overflow: hidden; text-overflow: ellipsis; }
.cal-row .name code { font-size: 12px; }
.cal-row .name span { font-size: 11px; color: var(--muted); }
.cal-row.out .name, .cal-row.closed .name { font-style: italic; }
.cal-head { background: var(--band); border-top: 1px solid var(--rule-strong); border-left: 5px solid var(--pool, transparent); font-size: 13px; font-weight: 700; line-height: 1.35; }
.cal-head span { position: sticky; left: 0; display: inline-block; max-width: min(1030px, calc(100vw - 48px)); padding: 5px 10px; }
.pool-lists { display: none; }
.pool-lists ul.tests { list-style: none; margin: 0 0 8px; padding: 0; }
.pool-lists li { padding: 6px 0 6px 10px; border-bottom: 1px solid var(--rule); }
.pool-lists .small, .pool-lists .muted { color: var(--muted); }
.pool-lists .small { font-size: 13px; }
table { border-collapse: collapse; width: 100%; font-size: 14px; overflow-wrap: normal; }
th, td { text-align: left; padding: 6px 10px; border-bottom: 1px solid var(--rule); vertical-align: top; }
th { border-bottom: 2px solid var(--ink); font-weight: 600; }
tbody tr:nth-child(even) { background: var(--band); }
td.num, th.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
td.date { font-variant-numeric: tabular-nums; }
.nw, td.date strong, td code { white-space: nowrap; }
td.date:not(:has(br)) { white-space: nowrap; }
td.test { min-width: 13em; }
td .small { color: var(--muted); font-size: 13px; }
td.muted { color: var(--muted); }
.swatch { display: inline-block; width: 10px; height: 10px; margin-right: 6px; vertical-align: baseline; }
ul.reasons li { margin-bottom: 6px; }
ul.legend { display: flex; flex-wrap: wrap; gap: 6px 18px; list-style: none; padding: 0; margin: 8px 0 0; color: var(--muted); font-size: 13px; }
p.note { color: var(--muted); font-size: 13px; }
code { font-family: ui-monospace, "SFMono-Regular", Menlo, Consolas, monospace; font-size: 0.92em; }
footer { margin-top: 36px; color: var(--muted); font-size: 13px; border-top: 1px solid var(--rule); padding-top: 8px; }
@media (max-width: 1199px) {
  main { padding: 20px 20px 40px; }
}
@media (max-width: 599px) {
  main { padding: 14px 12px 32px; }
  h1 { font-size: 22px; }
  h2 { font-size: 18px; }
  .summary li { flex-basis: 100%; }
  .pool-lists { display: block; }
  .cal-row .name { width: 132px; padding-left: 6px; }
  .cal-head span { max-width: calc(100vw - 40px); }
  td.test { min-width: 10em; }
  .frame > table { min-width: 640px; }
}
@page { size: landscape; margin: 10mm; }
@media print {
  :root { color-scheme: light; --bg: #ffffff; --ink: #000000; --muted: #3d444c; --rule: #c9ced4; --rule-strong: #aab2ba;
    --band: #f1f3f5; --guide: #e3e6ea; --today: #b3261e; --warn: #a4500f;
    --shade-back: #eceff2; --shade-stripe: #b9c0c8; --shade-back-light: #f6f7f9; --shade-stripe-light: #c9ced5; }
  * { -webkit-print-color-adjust: exact; print-color-adjust: exact; }
  body { font-size: 10pt; }
  main { max-width: none; padding: 0; }
  nav.controls, .pool-lists { display: none; }
  .frame { overflow: visible; }
  .cal { border: 0; }
  .cal-inner { width: auto; min-width: 0; }
  .cal-row .name { position: static; width: 150px; }
  .cal-head span { position: static; max-width: none; }
  .cal-pool + .cal-pool { break-before: page; }
  .cal-row, .cal-head, svg, figure, .summary li, tr { break-inside: avoid; }
  .cal-head, h2, h3 { break-after: avoid; }
  svg.chart { width: 100%; height: auto; }
  section.calendar, section.traffic, section.tests, section.cautions { break-before: page; }
  table { font-size: 9pt; }
  td.test { min-width: 11em; }
  td code { white-space: normal; overflow-wrap: anywhere; }
}
"#;
/// A run's facts as the report words them, shared by a bar's tooltip and
/// the table's row.
struct RunWords {
    share: String,
    start: NaiveDate,
    end: NaiveDate,
    days: u32,
    due: NaiveDate,
    needed: String,
    expected: String,
}

impl RunWords {
    fn of(e: &PlannedExperiment, r: &Run) -> RunWords {
        RunWords {
            share: crate::render::common::share_words(e, r.share),
            start: r.start,
            end: r.end,
            days: r.days,
            due: r.result_date,
            needed: thousands(e.units_needed),
            expected: units(r.units_expected),
        }
    }
}

fn pool_fill(index: usize) -> &'static str {
    POOL_FILLS[index % POOL_FILLS.len()]
}

/// The summary tile of the results: the first result due, and how many
/// tests may stop early at an interim look.
fn results_tile(plan: &Plan, s: &mut String) {
    let with_looks = plan
        .experiments
        .iter()
        .filter(|e| {
            e.run.is_some()
                && e.looks
                    .as_ref()
                    .is_some_and(|l| l.interim().next().is_some())
        })
        .count();
    let _ = writeln!(
        s,
        r#"<li><span class="big">{with_looks}</span><span class="small">{} with interim looks that may stop early (dates below)</span></li>"#,
        crate::words::Count("test", with_looks)
    );
}

/// The numbers behind each test with a run: a table of its design and
/// results, then the look dates and secondary metrics where it has them.
fn numbers(plan: &Plan, s: &mut String) {
    use crate::render::markup::{Column, MarkupTable};
    use crate::render::numbers::{look_dates, secondaries, table_rows, TABLE_HEADER};
    let rows = table_rows(&plan.experiments);
    if rows.is_empty() {
        return;
    }
    let _ = writeln!(
        s,
        r#"<section><h2 id="numbers">The numbers behind each test</h2>"#
    );
    let mut columns = vec![Column::Code];
    columns.extend([Column::Text; TABLE_HEADER.len() - 1]);
    s.push_str(&framed(
        "The numbers behind each test",
        &Html.table(&TABLE_HEADER, &columns, &rows),
    ));
    let notes: Vec<String> = plan
        .experiments
        .iter()
        .filter(|e| e.run.is_some())
        .flat_map(|e| {
            let looks = e.looks.as_ref().map(look_dates);
            let more = e.statistics.as_ref().and_then(secondaries);
            looks
                .into_iter()
                .chain(more)
                .map(|line| {
                    format!(
                        "<li><code>{}</code>: {}</li>",
                        esc(&e.id),
                        esc_with_code(&line)
                    )
                })
                .collect::<Vec<_>>()
        })
        .collect();
    if !notes.is_empty() {
        let _ = writeln!(s, r#"<ul class="reasons">{}</ul>"#, notes.join(""));
    }
    let _ = writeln!(s, "</section>");
}

/// The closing note on how the plan was made: the solver's words, kept
/// out of the summary.
fn how_made(plan: &Plan, s: &mut String) {
    let _ = writeln!(
        s,
        r#"<section><h2 id="how-made">How this plan was made</h2><p class="note">{} The plan value counts each test's priority, less a part for a late result; the bound is the most any plan could reach, and the simple priority-order plan is there for comparison.</p></section>"#,
        esc_with_code(&solver_sentence(plan))
    );
}

/// A wide block (a table or a chart) in a frame of its own that scrolls
/// sideways where the page is narrower, so the page itself never does;
/// the frame takes the keyboard's focus so it can be scrolled without a
/// mouse.
pub(super) fn framed(label: &str, inner: &str) -> String {
    format!(
        r#"<div class="frame" role="region" tabindex="0" aria-label="{}; it scrolls sideways">{inner}</div>"#,
        esc(label)
    )
}

/// The links to the report's sections, for the keyboard and for finding
/// one's place (left off paper).
fn nav(plan: &Plan, s: &mut String) {
    let mut links: Vec<(&str, &str)> = Vec::new();
    if plan.changes.is_some() {
        links.push(("changes", "What moved"));
    }
    links.extend([
        ("summary", "Summary"),
        ("calendar", "Calendar"),
        ("traffic", "Traffic"),
        ("tests", "Tests"),
        ("not-fit", "Not fitting"),
        ("assumptions", "Cautions"),
    ]);
    let _ = write!(
        s,
        r#"<nav class="controls" aria-label="Sections of the report"><ul>"#
    );
    for (id, words) in links {
        let _ = write!(s, "<li><a href=\"#{id}\">{words}</a></li>");
    }
    let _ = writeln!(s, "</ul></nav>");
}

impl Renderer for Html {
    fn render(&self, plan: &Plan, _opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let mut s = String::new();
        let (fit, not_fit) = counts(plan);
        let decide = crate::render::common::decision_count(plan);
        let title = format!("Experiment plan: {}", plan.portfolio);
        let _ = writeln!(s, "<!DOCTYPE html>");
        let _ = writeln!(
            s,
            r#"<html xmlns="http://www.w3.org/1999/xhtml" lang="en" xml:lang="en">"#
        );
        let _ = writeln!(
            s,
            r#"<head><meta charset="utf-8"/><meta name="viewport" content="width=device-width, initial-scale=1"/><meta name="generator" content="sluice"/><title>{}</title><style>{STYLE}</style></head>"#,
            esc(&title)
        );
        let _ = writeln!(s, "<body><main>");
        let _ = writeln!(
            s,
            r#"<header class="top"><h1>{}</h1><p class="meta">Window {} to {} · made for {}</p></header>"#,
            esc(&title),
            long_date(plan.window.start),
            long_date(plan.window.end),
            long_date(plan.today)
        );
        nav(plan, &mut s);
        // A re-plan's changes and advice, before the summary.
        for (anchor, title, lines) in crate::render::common::news(plan) {
            let _ = writeln!(
                s,
                r#"<section class="news"><h2 id="{anchor}">{title}</h2><ul>"#
            );
            for line in lines {
                let _ = writeln!(s, "<li>{}</li>", esc(&line));
            }
            let _ = writeln!(s, "</ul></section>");
        }
        let changes = changes::section(plan);
        if !changes.is_empty() {
            s.push_str(&changes);
            s.push('\n');
        }

        // Summary.
        let _ = writeln!(
            s,
            r#"<section><h2 id="summary">Summary</h2><ul class="summary">"#
        );
        let _ = writeln!(
            s,
            r#"<li><span class="big">{fit} of {}</span><span class="small">tests fit in the window{}{}</span></li>"#,
            fit + not_fit + decide,
            match decide {
                0 => String::new(),
                1 => "; 1 running test needs a decision".to_string(),
                n => format!("; {n} running tests need a decision"),
            },
            match plan.experiments.len() - fit - not_fit - decide {
                0 => String::new(),
                1 => "; 1 more has finished or been cancelled".to_string(),
                done => format!("; {done} more have finished or been cancelled"),
            }
        );
        let _ = writeln!(
            s,
            r#"<li class="{}"><span class="big">{not_fit}</span><span class="small">{} not fit (reasons below)</span></li>"#,
            if not_fit > 0 { "warn" } else { "" },
            crate::words::agree("test does", "tests do", not_fit)
        );
        results_tile(plan, &mut s);
        let _ = writeln!(s, "</ul>");
        let next = plan
            .experiments
            .iter()
            .filter_map(|e| e.run.map(|r| (r.result_date, e)))
            .filter(|(d, _)| *d >= plan.today)
            .min_by_key(|(d, _)| *d);
        if let Some((d, e)) = next {
            let _ = writeln!(
                s,
                r#"<p>Next result due: <strong>{}</strong> on {}.</p>"#,
                esc(&e.title),
                long_date(d)
            );
        }
        let _ = writeln!(s, "</section>");
        traffic(plan, &mut s);

        // Calendar.
        let _ = writeln!(
            s,
            r#"<section class="calendar"><h2 id="calendar">Calendar</h2>"#
        );
        calendar::calendar(plan, &mut s);
        let _ = writeln!(
            s,
            r#"<p class="note">One row per test: its id, its title under it, and its run, labelled with its share and result date; a bar's tooltip and the table of tests give its numbers.</p>"#
        );
        svg::legend(&mut s);
        let _ = writeln!(s, "</section>");

        // Pool use.
        let _ = writeln!(
            s,
            r#"<section class="traffic"><h2 id="traffic">Traffic in use per pool</h2>"#
        );
        for (i, p) in plan.pools.iter().enumerate() {
            let _ = writeln!(
                s,
                r#"<figure><h3><span class="swatch" style="background:{}"></span>{}</h3><div class="frame" role="region" tabindex="0" aria-label="{}: traffic in use; it scrolls sideways">"#,
                pool_fill(i),
                esc(&p.label),
                esc(&p.label)
            );
            svg::pool_chart(plan, i, p, &mut s);
            let _ = writeln!(s, "</div>");
            let caption = if is_split(p) {
                format!(
                    "{}: each day's bar is the sum of the shares of the tests running; the dashed line is the whole pool (100%).",
                    p.label
                )
            } else {
                format!(
                    "{}: each test may see every unit, so each day's bar counts the tests running; the dashed line is the limit of {} at once.",
                    p.label, p.max_concurrent
                )
            };
            let caption = match crate::render::common::holdout_words(p) {
                Some(_) if is_split(p) => format!(
                    "{}: each day's bar is the sum of the shares of the tests running; the dashed line is the {} of the pool they may share ({} is held out of every test).",
                    p.label,
                    crate::words::percent(1.0 - p.holdout),
                    crate::words::percent(p.holdout)
                ),
                Some(h) => format!(
                    "{caption} {h}: each test gets {} of the units under its share.",
                    crate::words::percent(1.0 - p.holdout)
                ),
                None => caption,
            };
            let _ = writeln!(s, "<figcaption>{}</figcaption></figure>", esc(&caption));
        }
        let _ = writeln!(s, "</section>");
        forecast::section(plan, &mut s);

        // Table.
        let _ = writeln!(s, r#"<section class="tests"><h2 id="tests">Tests</h2>"#);
        table::tests(plan, &mut s);
        let _ = writeln!(s, "</section>");
        numbers(plan, &mut s);

        // Unscheduled.
        let _ = writeln!(s, r#"<section><h2 id="not-fit">Tests that do not fit</h2>"#);
        if not_fit == 0 {
            let _ = writeln!(s, "<p>Every test fits in the window.</p>");
        } else {
            let _ = writeln!(s, r#"<ul class="reasons">"#);
            for e in &plan.experiments {
                if e.status != crate::plan::Status::Unscheduled {
                    continue;
                }
                let _ = writeln!(
                    s,
                    "<li><strong>{}</strong> (<code>{}</code>, {}): {}</li>",
                    esc(&e.title),
                    esc(&e.id),
                    esc(&pools_label(plan, e)),
                    esc_with_code(e.reason.as_deref().unwrap_or("no reason given"))
                );
                if let (Some(d), Some(st)) = (&e.detectable, &e.statistics) {
                    // Inside the item: drop its closing tag and reopen it.
                    s.truncate(s.len() - "</li>\n".len());
                    let _ = writeln!(
                        s,
                        "<br/><span class=\"small\">{}</span></li>",
                        esc_with_code(&crate::render::numbers::detectable(d, st))
                    );
                }
            }
            let _ = writeln!(s, "</ul>");
        }
        let _ = writeln!(s, "</section>");

        how_made(plan, &mut s);
        // Assumptions and cautions, last (on paper too).
        let _ = writeln!(
            s,
            r#"<section class="cautions"><h2 id="assumptions">Assumptions and cautions</h2><ul>{}</ul></section>"#,
            cautions(plan)
                .iter()
                .map(|c| format!("<li>{}</li>", esc(c)))
                .collect::<String>()
        );

        let _ = writeln!(
            s,
            "<footer>Made by sluice from the portfolio <code>{}</code>.</footer>",
            esc(&plan.portfolio)
        );
        let _ = writeln!(s, "</main></body></html>");
        Ok(s.into_bytes())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    /// The report of the fixture plan.
    fn fixture_report() -> String {
        String::from_utf8(
            Html.render(&fixture::plan(), &RenderOptions::default())
                .unwrap(),
        )
        .unwrap()
    }

    #[test]
    fn a_replan_marks_running_tests_and_counts_only_open_ones() {
        use crate::plan::Status;
        let mut plan = fixture::plan();
        let scheduled: Vec<usize> = (0..plan.experiments.len())
            .filter(|&i| plan.experiments[i].status == Status::Scheduled)
            .collect();
        let total = plan.experiments.len();
        let (fit, not_fit) = crate::render::common::counts(&plan);
        plan.experiments[scheduled[0]].status = Status::Running;
        let running_id = plan.experiments[scheduled[0]].id.clone();
        let done = &mut plan.experiments[scheduled[1]];
        done.status = Status::Finished;
        let html =
            String::from_utf8(Html.render(&plan, &RenderOptions::default()).unwrap()).unwrap();
        assert!(html.contains("running · "), "the running bar says so");
        assert!(html.contains(&running_id));
        assert_eq!(fit + not_fit, total);
        assert!(
            html.contains(&format!(
                "{} of {}</span><span class=\"small\">tests fit in the window; 1 more has finished or been cancelled",
                fit - 1,
                total - 1
            )),
            "the summary counts the open tests"
        );
        let plain = fixture_report();
        assert!(!plain.contains("running · "));
        assert!(plain.contains(&format!(
            "{fit} of {total}</span><span class=\"small\">tests fit in the window</span>"
        )));
    }

    #[test]
    fn escapes_markup_and_quotes() {
        assert_eq!(
            esc(r#"a & b <c> "d" 'e'"#),
            "a &amp; b &lt;c&gt; &quot;d&quot; &#39;e&#39;"
        );
        assert_eq!(esc("bell\u{7}"), "bell");
    }

    #[test]
    fn user_text_never_appears_unescaped() {
        let html = fixture_report();
        assert!(!html.contains("<label>"));
        assert!(html.contains("&lt;label&gt;"));
    }

    #[test]
    fn backticked_names_become_code() {
        assert_eq!(
            esc_with_code("pool `a<b>` is full"),
            "pool <code>a&lt;b&gt;</code> is full"
        );
        assert_eq!(esc_with_code("one ` only"), "one ` only");
    }

    #[test]
    fn self_contained() {
        let html = fixture_report();
        for needle in [
            "<script",
            "<link",
            "src=",
            "@import",
            "url(http",
            "href=\"http",
        ] {
            assert!(!html.contains(needle), "found {needle}");
        }
    }
}

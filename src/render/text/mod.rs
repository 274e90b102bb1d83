//! Terminal text: a table of the experiments (comfy-table), a week-by-week
//! timeline drawn with Unicode block characters and grouped by pool, each
//! pool's weekly share in use, the experiments that do not fit with their
//! reasons, the solver's numbers and the cautions.
//!
//! Everything is laid out for [`RenderOptions::effective_width`] columns:
//! wide terminals get more table columns and a finer timeline (up to one
//! character per day), narrow ones fewer columns and coarser cells (down to
//! several weeks per character). ANSI colour only when the options ask.
//!
//! `table` draws the tables, `timeline` the timeline, `changes` a
//! re-plan's changes and advice, which come first when the plan has them.

mod changes;
mod table;
mod timeline;

use super::common::{caution, counts, long_date, solver_sentence, weeks};
use super::{RenderError, RenderOptions, Renderer};
use crate::plan::Plan;
use std::fmt::Write;
use unicode_width::UnicodeWidthStr;

/// The terminal text renderer.
pub struct Text;

const FULL: char = '█';
const LEFT_HALF: char = '▌';
const RIGHT_HALF: char = '▐';
const BLACKOUT: char = '░';
/// A cell of a run still on its ramp (below its planned share).
const RAMP: char = '▒';
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
pub(crate) fn wrap(text: &str, width: usize, indent: &str) -> String {
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
        e.pools = e.pools.iter().map(|p| clean(p)).collect();
        e.reason = e.reason.as_deref().map(|r| clean(r).into());
        if let Some(s) = &mut e.statistics {
            s.metric = clean(&s.metric);
            s.driver = clean(&s.driver);
            for m in &mut s.secondary {
                m.name = clean(&m.name);
            }
        }
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
    for t in &mut p.traffic {
        t.pool = clean(&t.pool);
    }
    // A re-plan's outlooks and changes may come from a `--previous` file.
    for o in &mut p.running {
        o.id = clean(&o.id);
        o.advice = o.advice.as_deref().map(|a| clean(a).into());
        if let Some(n) = &mut o.no_running {
            n.note = clean(&n.note);
        }
    }
    if let Some(c) = &mut p.changes {
        for e in &mut c.experiments {
            e.id = clean(&e.id);
            for pool in &mut e.pools {
                *pool = clean(pool);
            }
        }
        for list in [
            &mut c.no_longer_fit,
            &mut c.now_fit,
            &mut c.share_changed,
            &mut c.needs_decision,
        ] {
            for id in list.iter_mut() {
                *id = clean(id);
            }
        }
        for pool in &mut c.pools {
            pool.id = clean(&pool.id);
        }
    }
    p
}

/// A re-plan's actual traffic against the forecast, under a heading;
/// nothing without it.
fn traffic(plan: &Plan, width: usize, colour: bool, out: &mut String) {
    let lines = super::common::traffic_lines(plan);
    if lines.is_empty() {
        return;
    }
    let _ = writeln!(out);
    let _ = writeln!(out, "{}", paint("Traffic so far", "1", colour));
    for line in lines {
        let _ = write!(out, "{}", wrap_hanging("- ", &line, width));
    }
}

/// The numbers behind each test with a run, one block a test: its
/// design, its look dates and its secondary metrics, wrapped to the width.
fn numbers(plan: &Plan, width: usize, colour: bool, out: &mut String) {
    let blocks: Vec<(&str, Vec<String>)> = plan
        .experiments
        .iter()
        .filter(|e| e.run.is_some())
        .map(|e| (e.id.as_str(), super::numbers::sentences(e)))
        .filter(|(_, s)| !s.is_empty())
        .collect();
    if blocks.is_empty() {
        return;
    }
    let _ = write!(
        out,
        "{}",
        heading("The numbers behind each test", width, colour)
    );
    for (id, sentences) in blocks {
        let mut sentences = sentences.into_iter();
        let first = sentences.next().unwrap_or_default();
        let _ = write!(
            out,
            "{}",
            wrap_hanging("- ", &format!("{id}: {first}"), width)
        );
        for s in sentences {
            let _ = write!(out, "{}", wrap(&s, width, "  "));
        }
    }
    let _ = writeln!(out);
}

impl Renderer for Text {
    fn render(&self, plan: &Plan, opts: &RenderOptions) -> Result<Vec<u8>, RenderError> {
        let plan = &for_terminal(plan);
        let width = opts.effective_width();
        let colour = opts.colour;
        // A shift of traffic is the news; then a re-plan's changes and
        // advice: what a planner reads first.
        let mut out = String::new();
        for (_, title, lines) in super::common::news(plan) {
            let _ = writeln!(out, "{}", paint(title, "1", colour));
            for line in lines {
                let _ = write!(out, "{}", wrap_hanging("- ", &line, width));
            }
            let _ = writeln!(out);
        }
        out.push_str(&changes::section(plan, width));
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
                    "{fit_n} of {} tests fit, {not_n} {}{}{}.",
                    plan.experiments.len(),
                    super::common::do_not(not_n),
                    super::common::decision_note(plan),
                    super::common::closed_note(plan)
                ),
                width,
                ""
            )
        );
        traffic(plan, width, colour, &mut out);
        let _ = writeln!(out);
        let _ = writeln!(out, "{}", table::experiments(plan, width, colour));
        for e in plan.experiments.iter().filter(|e| e.eligible < 1.0) {
            let line = format!(
                "{} admits {} of {}'s units; its share is of the whole pool.",
                e.id,
                crate::words::percent(e.eligible),
                e.pools.join(", ")
            );
            let _ = write!(out, "{}", wrap_hanging("* ", &line, width));
        }
        let _ = writeln!(out);
        numbers(plan, width, colour, &mut out);
        timeline::draw(plan, width, colour, &mut out);
        let _ = writeln!(out);
        let title = "Pool use per week (peak day: share in use for split pools, tests running for overlap pools)";
        let _ = write!(out, "{}", heading(title, width, colour));
        let _ = writeln!(out, "{}", table::pool_use(plan, width, colour));
        if not_n > 0 {
            let _ = writeln!(out);
            let _ = writeln!(out, "{}", paint("Does not fit", "1", colour));
            for e in &plan.experiments {
                if e.status != crate::plan::Status::Unscheduled {
                    continue;
                }
                let reason = e.reason.as_deref().unwrap_or("no reason given");
                let line = format!("{} ({}, {}): {reason}", e.id, e.title, e.pools.join(", "));
                let _ = write!(out, "{}", wrap_hanging("- ", &line, width));
                if let (Some(d), Some(s)) = (&e.detectable, &e.statistics) {
                    let _ = write!(
                        out,
                        "{}",
                        wrap(&super::numbers::detectable(d, s), width, "  ")
                    );
                }
            }
        }
        let _ = writeln!(out);
        let _ = write!(out, "{}", wrap(&caution(plan), width, ""));
        // Solver words close the report, apart from the plan's facts.
        let _ = writeln!(out);
        let how = format!("How this plan was made: {}", solver_sentence(plan));
        let _ = write!(out, "{}", wrap(&how, width, ""));
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
        plan.experiments[5].reason = Some("line\nbreak\x1b[31m".into());
        plan.portfolio = "q1\rover".to_string();
        let opts = RenderOptions {
            width: Some(160),
            colour: false,
        };
        let text = String::from_utf8(Text.render(&plan, &opts).unwrap()).unwrap();
        assert!(!text.contains('\x1b') && !text.contains('\x07') && !text.contains('\r'));
        assert!(text.contains("line break"));
    }

    /// A `--previous` file is read as it is: its ids reach the changes
    /// section and the advice, and must not reach the terminal raw.
    #[test]
    fn a_previous_plan_cannot_carry_terminal_escapes() {
        let mut plan = fixture::replanned();
        plan.running = fixture::with_advice().running;
        let changes = plan.changes.as_mut().expect("the fixture has changes");
        changes.experiments[0].id = "old\x1b[2Jid".to_string();
        changes.no_longer_fit.push("gone\x1b]0;t\x07".to_string());
        plan.running[0].advice = Some("stop\x1b[31m now".into());
        let opts = RenderOptions {
            width: Some(160),
            colour: false,
        };
        let text = String::from_utf8(Text.render(&plan, &opts).unwrap()).unwrap();
        assert!(!text.contains('\x1b') && !text.contains('\x07'), "{text}");
        assert!(
            text.contains("old [2Jid") && text.contains("stop [31m now"),
            "{text}"
        );
    }
}

//! The changes since a previous plan, and the running tests' outlooks, as
//! text and Markdown: the part of a re-plan that a planner reads first.
//!
//! Reads only `Plan::changes` and `Plan::running`; JSON carries both inside
//! the plan itself.

use crate::diff::{Movement, PlanDiff};
use crate::plan::Plan;
use std::fmt::Write as _;

fn share(s: Option<f64>) -> String {
    s.map(|x| format!("{:.0}%", x * 100.0)).unwrap_or_default()
}

fn date(d: Option<chrono::NaiveDate>) -> String {
    d.map(|d| d.to_string()).unwrap_or_else(|| "-".to_string())
}

fn slip(days: Option<i64>) -> String {
    match days {
        Some(0) => "0".to_string(),
        Some(d) => format!("{d:+}"),
        None => String::new(),
    }
}

fn movement(m: Movement) -> &'static str {
    match m {
        Movement::Unchanged => "unchanged",
        Movement::Later => "later",
        Movement::Earlier => "earlier",
        Movement::Reshared => "new share",
        Movement::NoLongerFits => "no longer fits",
        Movement::NowFits => "now fits",
        Movement::StillOut => "still out",
        Movement::Closed => "finished or cancelled",
        Movement::Added => "new in the portfolio",
        Movement::Dropped => "gone from the portfolio",
    }
}

fn ids(list: &[String]) -> String {
    if list.is_empty() {
        "none".to_string()
    } else {
        list.join(", ")
    }
}

/// Whether there is anything to show before the plan.
pub fn has_any(plan: &Plan) -> bool {
    plan.changes.is_some() || plan.running.iter().any(|o| o.advice.is_some())
}

/// The changes and outlooks as terminal text (no colour).
pub fn text(plan: &Plan) -> String {
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(s, "What moved since the previous plan");
        let _ = writeln!(s);
        let mut t = comfy_table::Table::new();
        t.load_preset(comfy_table::presets::UTF8_BORDERS_ONLY);
        t.set_header(vec![
            "experiment",
            "pool",
            "old result",
            "new result",
            "slip (days)",
            "old share",
            "new share",
            "change",
        ]);
        for e in &d.experiments {
            t.add_row(vec![
                e.id.clone(),
                e.pool.clone(),
                date(e.old_result_date),
                date(e.new_result_date),
                slip(e.slip_days),
                share(e.old_share),
                share(e.new_share),
                movement(e.movement).to_string(),
            ]);
        }
        let _ = writeln!(s, "{t}");
        summary_lines(&mut s, d, "");
        let _ = writeln!(s);
    }
    let troubled: Vec<_> = plan.running.iter().filter(|o| o.advice.is_some()).collect();
    if !troubled.is_empty() {
        let _ = writeln!(s, "Running tests that need a decision");
        for o in troubled {
            let _ = writeln!(s, "  {}: {}", o.id, o.advice.as_deref().unwrap_or(""));
        }
        let _ = writeln!(s);
    }
    s
}

fn summary_lines(s: &mut String, d: &PlanDiff, bullet: &str) {
    let _ = writeln!(s, "{bullet}no longer fit: {}", ids(&d.no_longer_fit));
    let _ = writeln!(s, "{bullet}now fit: {}", ids(&d.now_fit));
    let _ = writeln!(s, "{bullet}share changed: {}", ids(&d.share_changed));
    for p in &d.pools {
        let _ = writeln!(
            s,
            "{bullet}pool {}: {} -> {} tests in the calendar, {} -> {} units needed, forecast {:.0} -> {:.0} units",
            p.id,
            p.before.scheduled,
            p.after.scheduled,
            p.before.units_needed,
            p.after.units_needed,
            p.before.forecast_units,
            p.after.forecast_units
        );
    }
}

fn md_cell(x: &str) -> String {
    x.replace('|', "\\|")
}

/// The changes and outlooks as Markdown.
pub fn markdown(plan: &Plan) -> String {
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(s, "## What moved since the previous plan\n");
        let _ = writeln!(
            s,
            "| experiment | pool | old result | new result | slip (days) | old share | new share | change |"
        );
        let _ = writeln!(s, "|---|---|---|---|---:|---:|---:|---|");
        for e in &d.experiments {
            let _ = writeln!(
                s,
                "| `{}` | {} | {} | {} | {} | {} | {} | {} |",
                e.id.replace('`', "'"),
                md_cell(&e.pool),
                date(e.old_result_date),
                date(e.new_result_date),
                slip(e.slip_days),
                share(e.old_share),
                share(e.new_share),
                movement(e.movement)
            );
        }
        let _ = writeln!(s);
        summary_lines(&mut s, d, "- ");
        let _ = writeln!(s);
    }
    let troubled: Vec<_> = plan.running.iter().filter(|o| o.advice.is_some()).collect();
    if !troubled.is_empty() {
        let _ = writeln!(s, "## Running tests that need a decision\n");
        for o in troubled {
            let _ = writeln!(
                s,
                "- `{}`: {}",
                o.id.replace('`', "'"),
                md_cell(o.advice.as_deref().unwrap_or(""))
            );
        }
        let _ = writeln!(s);
    }
    s
}

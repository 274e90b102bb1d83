//! `sluice plan FILE`: load a portfolio, plan it, and print the calendar
//! (a table of the experiments, the unscheduled with their reasons, and
//! the solver line) or the plan as JSON. Planning is [`crate::schedule`];
//! this file only parses flags and formats the result.

use super::{Failure, TextOrJson};
use crate::plan::{Plan, Status};
use crate::portfolio;
use crate::schedule::{self, Backend, PlanRequest};
use clap::Args;
use comfy_table::{presets, CellAlignment, Table};
use std::path::PathBuf;

#[derive(Args, Debug)]
#[command(after_help = "Examples:\n  \
    sluice plan portfolios/demo.yaml\n  \
    sluice plan portfolios/demo.yaml --format json --no-timing\n  \
    sluice plan portfolios/demo.yaml --time-limit 30\n\n\
    The search runs a fixed amount of work, so the same file gives the same \
    plan; --time-limit only cuts it short on a slow machine.")]
pub struct PlanArgs {
    /// The portfolio file (YAML; docs/portfolio.md lists every key)
    pub file: PathBuf,
    /// Output format
    #[arg(long, value_enum, default_value_t = TextOrJson::Text)]
    pub format: TextOrJson,
    /// Most seconds to spend; the best verified plan so far is returned
    #[arg(long, value_name = "SECONDS", default_value_t = 10.0)]
    pub time_limit: f64,
    /// The LP backend (`microlp`; `highs` in builds with the `highs` feature)
    #[arg(long, value_name = "NAME", default_value = "microlp")]
    pub backend: String,
    /// Write 0 as the solver's seconds, so outputs compare byte for byte
    #[arg(long)]
    pub no_timing: bool,
}

/// `sluice plan`.
pub fn run(a: &PlanArgs) -> Result<Vec<u8>, Failure> {
    if !(a.time_limit.is_finite() && a.time_limit > 0.0) {
        return Err(Failure::invalid(format!(
            "`--time-limit` must be a positive number of seconds, not {}",
            a.time_limit
        )));
    }
    let backend = Backend::from_name(&a.backend).ok_or_else(|| {
        let names: Vec<&str> = Backend::available().iter().map(|b| b.name()).collect();
        Failure::invalid(format!(
            "backend `{}` is not in this build; available: {}{}",
            a.backend,
            names.join(", "),
            if a.backend == "highs" {
                " (build with `--features highs` for HiGHS)"
            } else {
                ""
            }
        ))
    })?;
    let p = portfolio::load(&a.file).map_err(|e| Failure {
        code: super::EXIT_INVALID,
        message: e.to_string(),
    })?;
    let request = PlanRequest {
        time_limit: a.time_limit,
        backend,
        ..PlanRequest::default()
    };
    let mut plan = schedule::plan(&p, &request);
    if a.no_timing {
        plan.solver.seconds = 0.0;
    }
    match a.format {
        TextOrJson::Json => {
            let mut s =
                serde_json::to_string_pretty(&plan).map_err(|e| Failure::invalid(e.to_string()))?;
            s.push('\n');
            Ok(s.into_bytes())
        }
        TextOrJson::Text => Ok(text(&plan).into_bytes()),
    }
}

fn percent(share: f64) -> String {
    let p = share * 100.0;
    if (p - p.round()).abs() < 1e-6 {
        format!("{}%", p.round() as i64)
    } else {
        format!("{p:.1}%")
    }
}

fn number(x: f64) -> String {
    if (x - x.round()).abs() < 1e-9 {
        format!("{}", x.round() as i64)
    } else {
        format!("{x:.2}")
    }
}

/// The text plan: a header, the calendar, the unscheduled, the solver line.
pub fn text(plan: &Plan) -> String {
    let mut out = String::new();
    let placed = plan
        .experiments
        .iter()
        .filter(|e| matches!(e.status, Status::Scheduled | Status::Running))
        .count();
    out.push_str(&format!(
        "{}: window {} to {}, {} of {} experiments scheduled\n\n",
        plan.portfolio,
        plan.window.start,
        plan.window.end,
        placed,
        plan.experiments.len()
    ));
    let mut t = Table::new();
    t.load_preset(presets::UTF8_BORDERS_ONLY);
    t.set_header(vec![
        "experiment",
        "pool",
        "priority",
        "start",
        "end",
        "days",
        "share",
        "units needed",
    ]);
    let mut rows: Vec<_> = plan
        .experiments
        .iter()
        .filter(|e| e.start.is_some())
        .collect();
    rows.sort_by(|a, b| a.start.cmp(&b.start).then(a.id.cmp(&b.id)));
    for e in rows {
        t.add_row(vec![
            e.id.clone(),
            e.pool.clone(),
            number(e.priority),
            e.start.map(|d| d.to_string()).unwrap_or_default(),
            e.end.map(|d| d.to_string()).unwrap_or_default(),
            e.days.map(|d| d.to_string()).unwrap_or_default(),
            e.share.map(percent).unwrap_or_default(),
            super::check::units(e.units_needed),
        ]);
    }
    for c in [2, 5, 6, 7] {
        if let Some(col) = t.column_mut(c) {
            col.set_cell_alignment(CellAlignment::Right);
        }
    }
    out.push_str(&t.to_string());
    out.push('\n');
    let left: Vec<_> = plan
        .experiments
        .iter()
        .filter(|e| e.start.is_none())
        .collect();
    if !left.is_empty() {
        out.push_str(&format!("\nnot scheduled ({}):\n", left.len()));
        for e in left {
            out.push_str(&format!(
                "  {} ({}, priority {}): {}\n",
                e.id,
                e.pool,
                number(e.priority),
                e.reason.as_deref().unwrap_or("no reason recorded")
            ));
        }
    }
    let s = &plan.solver;
    out.push_str(&format!(
        "\nsolver {}: {}, value {:.2}, bound {:.2}, gap {:.1}%, greedy {:.2}, {:.2} s\n",
        s.backend,
        s.status,
        s.value,
        s.bound,
        100.0 * s.gap,
        plan.greedy_value,
        s.seconds
    ));
    out
}

//! The planning board: a thin local server over the library pipeline, for
//! the planning meeting that changes the queue and watches the calendar
//! re-plan.
//!
//! The state is the starting portfolio ([`Base`], never changed) and the
//! meeting's list of edits ([`History`], with undo and redo). Every change
//! plans again on the server through [`crate::scenario::Applied`], the
//! same function `--scenario` uses, so a saved scenario gives the same
//! plan on the command line. The answer carries the HTML report of the new
//! plan, with what moved against the starting plan (the re-plan's
//! wording), so the page holds no second copy of the calendar drawing.
//! [`server`] is the HTTP side and its safety rules.

pub mod server;

use crate::plan::Plan;
use crate::portfolio::Portfolio;
use crate::render::{self, Format, RenderOptions};
use crate::replan::{self, Progress, ReplanError};
use crate::scenario::{self, Applied, Edit, RawEdit};
use crate::schedule::{self, PlanRequest};
use chrono::NaiveDate;
use serde_json::{json, Value};

/// What the board starts from and never changes: the validated portfolio,
/// a re-plan's progress and today when given, and the starting plan.
pub struct Base {
    /// The portfolio as loaded.
    pub portfolio: Portfolio,
    /// The portfolio file as the command line named it (for the scenario's
    /// comment; never opened by the board).
    pub file: String,
    /// A re-plan's progress and today; `None` plans from the window's start.
    pub replan: Option<(Progress, NaiveDate)>,
    /// The request every plan starts from (today, time limit, backend).
    pub request: PlanRequest,
    /// The plan without edits: what every later plan is compared with.
    pub start: Plan,
}

impl Base {
    /// The board's starting point; plans the portfolio once.
    pub fn new(
        portfolio: Portfolio,
        file: String,
        replan: Option<(Progress, NaiveDate)>,
        request: PlanRequest,
    ) -> Result<Base, ReplanError> {
        let request = PlanRequest {
            today: replan.as_ref().map(|(_, t)| *t).or(request.today),
            ..request
        };
        let start = plan_with(&portfolio, replan.as_ref(), &request, &[])?;
        Ok(Base {
            portfolio,
            file,
            replan,
            request,
            start,
        })
    }

    /// The plan with `edits` applied, as `sluice plan --scenario` (or
    /// `replan --scenario`) makes it, with the solver's seconds at 0 so
    /// that the same edits give the same bytes.
    pub fn plan(&self, edits: &[Edit]) -> Result<Plan, ReplanError> {
        plan_with(&self.portfolio, self.replan.as_ref(), &self.request, edits)
    }

    /// The scenario file of `edits` (docs/scenario.md).
    pub fn scenario_yaml(&self, edits: &[Edit]) -> String {
        scenario::to_yaml(edits, &self.file)
    }

    /// What the page shows for a state: the plan's tests and the controls'
    /// current values, the edits so far, what moved against the starting
    /// plan, and the HTML report of the plan with those changes.
    pub fn view(&self, state: &Snapshot, plan: &Plan) -> Value {
        let applied = Applied::new(&self.portfolio, &self.request, &state.edits);
        let p = &applied.portfolio;
        let mut shown = plan.clone();
        let moved = crate::diff::diff(&self.start, plan);
        let report = {
            shown.changes = Some(moved.clone());
            render::render(&shown, Format::Html, &RenderOptions::for_file())
                .map(|b| String::from_utf8_lossy(&b).into_owned())
                .unwrap_or_default()
        };
        let tests: Vec<Value> = plan
            .experiments
            .iter()
            .map(|e| {
                let i = p.experiment_index(&e.id);
                let ex = i.map(|i| &p.experiments[i]);
                let pin = i.and_then(|i| applied.request.pinned.iter().find(|x| x.experiment == i));
                let mde = ex.and_then(|ex| {
                    ex.metrics
                        .iter()
                        .find(|m| m.role == crate::portfolio::Role::Primary)
                        .and_then(|m| match m.design.effect {
                            crate::sizing::Effect::Relative(r) => Some(r),
                            crate::sizing::Effect::Absolute(_) => None,
                        })
                });
                let detectable = match (&e.detectable, &e.statistics) {
                    (Some(d), Some(s)) => Some(render::numbers::detectable(d, s)),
                    _ => None,
                };
                json!({
                    "id": e.id,
                    "title": e.title,
                    "owner": e.owner,
                    "pools": e.pools,
                    "status": e.status.name(),
                    "start": e.run.map(|r| r.start),
                    "result_date": e.run.map(|r| r.result_date),
                    "share": e.run.map(|r| r.share.fraction()),
                    "share_words": e.run.map(|r| r.share.to_string()),
                    "reason": e.reason,
                    "detectable": detectable,
                    "left_out": i.is_some_and(|i| applied.left_out.contains(&i)),
                    "priority": ex.map(|x| x.priority),
                    "mde": mde,
                    "sized": ex.is_some_and(|x| !x.sample_size_given && !x.metrics.is_empty()),
                    "max_share": ex.map(|x| x.max_share.fraction()),
                    "earliest_start": ex.and_then(|x| x.earliest_start),
                    "deadline": ex.and_then(|x| x.deadline),
                    "pinned": pin.map(|x| x.start),
                })
            })
            .collect();
        let pools: Vec<Value> = p
            .pools
            .iter()
            .map(|pool| {
                let scale = pool.forecast.scales.last();
                json!({
                    "id": pool.id,
                    "label": pool.label,
                    "scale": scale.map(|s| s.factor),
                    "from": scale.map(|s| s.from),
                })
            })
            .collect();
        let mut lines = String::new();
        render::moved::summary_lines(&mut lines, &moved, "");
        let (fit, out) = render::common::counts(plan);
        json!({
            "version": state.version,
            "name": plan.portfolio,
            "window": plan.window,
            "today": plan.today,
            "replan": self.replan.is_some(),
            "grid_weekday": match p.planning.grid {
                crate::portfolio::StartGrid::Weekly => Some(p.planning.start_weekday.num_days_from_monday()),
                crate::portfolio::StartGrid::Daily => None,
            },
            "summary": format!("{fit} of {} tests fit, {out} do not.", fit + out),
            "confidence": p.planning.confidence,
            "steps": state.steps,
            "can_undo": state.can_undo,
            "can_redo": state.can_redo,
            "moved": {
                "headline": render::moved::headline(&moved),
                "header": render::moved::HEADER,
                "rows": render::moved::rows(&moved),
                "lines": lines.lines().collect::<Vec<_>>(),
            },
            "tests": tests,
            "pools": pools,
            "report": report,
        })
    }
}

/// The plan of `portfolio` (re-planned from `replan` when given) with
/// `edits` applied; the solver's seconds at 0.
fn plan_with(
    portfolio: &Portfolio,
    replan: Option<&(Progress, NaiveDate)>,
    request: &PlanRequest,
    edits: &[Edit],
) -> Result<Plan, ReplanError> {
    let applied = Applied::new(portfolio, request, edits);
    let mut plan = match replan {
        None => schedule::plan(&applied.portfolio, &applied.request),
        Some((progress, today)) => {
            let progress = applied.progress(progress, *today);
            replan::replan(&applied.portfolio, &progress, *today, &applied.request).0
        }
    };
    applied.finish(&mut plan);
    plan.solver.seconds = 0.0;
    Ok(plan)
}

/// The meeting's edits: each step is one change made on the page (one or
/// more edits), with the steps undone kept for redo. Every change counts
/// the version up, so an answer for an older state can be told apart.
#[derive(Debug, Clone, Default)]
pub struct History {
    steps: Vec<Vec<Edit>>,
    undone: Vec<Vec<Edit>>,
    version: u64,
}

/// One state of the board: its version, its edits in order, and what the
/// page lists.
#[derive(Debug, Clone, PartialEq)]
pub struct Snapshot {
    /// Counts every change from 0.
    pub version: u64,
    /// Every edit in order.
    pub edits: Vec<Edit>,
    /// Each step in words.
    pub steps: Vec<String>,
    /// Whether there is a step to undo.
    pub can_undo: bool,
    /// Whether there is a step to redo.
    pub can_redo: bool,
}

impl History {
    /// Checks `raw` against the portfolio and adds it as a step; a new
    /// step clears what could be redone. The error words every problem.
    pub fn edit(&mut self, base: &Base, raw: &RawEdit) -> Result<(), String> {
        let edits = scenario::check_edit(raw, &base.portfolio).map_err(|problems| {
            problems
                .iter()
                .map(|d| match &d.hint {
                    Some(h) => format!("{}; {h}", d.message),
                    None => d.message.clone(),
                })
                .collect::<Vec<_>>()
                .join("\n")
        })?;
        self.steps.push(edits);
        self.undone.clear();
        self.version += 1;
        Ok(())
    }

    /// Takes back the last step; `false` when there is none.
    pub fn undo(&mut self) -> bool {
        match self.steps.pop() {
            Some(step) => {
                self.undone.push(step);
                self.version += 1;
                true
            }
            None => false,
        }
    }

    /// Makes the last undone step again; `false` when there is none.
    pub fn redo(&mut self) -> bool {
        match self.undone.pop() {
            Some(step) => {
                self.steps.push(step);
                self.version += 1;
                true
            }
            None => false,
        }
    }

    /// The current version.
    pub fn version(&self) -> u64 {
        self.version
    }

    /// The state as it stands.
    pub fn snapshot(&self) -> Snapshot {
        Snapshot {
            version: self.version,
            edits: self.steps.iter().flatten().cloned().collect(),
            steps: self
                .steps
                .iter()
                .map(|s| s.iter().map(Edit::describe).collect::<Vec<_>>().join("; "))
                .collect(),
            can_undo: !self.steps.is_empty(),
            can_redo: !self.undone.is_empty(),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn base() -> Base {
        let p = crate::portfolio::load(std::path::Path::new(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/portfolios/quickstart.yaml"
        )))
        .unwrap();
        Base::new(p, "quickstart.yaml".into(), None, PlanRequest::default()).unwrap()
    }

    fn raw(json: &str) -> RawEdit {
        serde_json::from_str(json).unwrap()
    }

    #[test]
    fn undo_and_redo_walk_the_steps_and_a_new_step_clears_redo() {
        let b = base();
        let mut h = History::default();
        h.edit(&b, &raw(r#"{"test": "bigger-photos", "leave_out": true}"#))
            .unwrap();
        h.edit(&b, &raw(r#"{"pool": "product", "scale": 0.7}"#))
            .unwrap();
        assert_eq!(h.snapshot().edits.len(), 2);
        assert!(h.undo());
        assert_eq!(h.snapshot().steps, vec!["bigger-photos: left out"]);
        assert!(h.snapshot().can_redo);
        assert!(h.redo());
        assert_eq!(h.snapshot().edits.len(), 2);
        assert!(h.undo());
        h.edit(&b, &raw(r#"{"confidence": "none"}"#)).unwrap();
        assert!(!h.snapshot().can_redo);
        assert!(!h.redo());
        assert_eq!(h.version(), 6);
        assert!(h.undo() && h.undo() && !h.undo());
    }

    #[test]
    fn a_bad_edit_changes_nothing_and_says_why() {
        let b = base();
        let mut h = History::default();
        let e = h
            .edit(&b, &raw(r#"{"test": "bigger-photo", "priority": 2}"#))
            .unwrap_err();
        assert!(
            e.contains("test `bigger-photo` is not in the portfolio"),
            "{e}"
        );
        assert!(e.contains("did you mean `bigger-photos`?"), "{e}");
        assert_eq!(h.version(), 0);
    }

    #[test]
    fn the_view_shows_the_edit_and_what_moved() {
        let b = base();
        let mut h = History::default();
        h.edit(&b, &raw(r#"{"test": "bigger-photos", "leave_out": true}"#))
            .unwrap();
        let s = h.snapshot();
        let plan = b.plan(&s.edits).unwrap();
        let v = b.view(&s, &plan);
        let t = v["tests"].as_array().unwrap();
        assert_eq!(t[0]["id"], "bigger-photos");
        assert_eq!(t[0]["left_out"], true);
        assert_eq!(t[0]["reason"], scenario::LEFT_OUT);
        assert!(v["moved"]["headline"]
            .as_str()
            .unwrap()
            .contains("no longer fit"));
        assert!(v["report"].as_str().unwrap().contains("What moved"));
    }
}

//! Scenarios: a planning meeting's "what if" as a small list of edits by
//! test or pool id (leave a test out, change its priority, MDE, largest
//! share, pin its start, move its earliest start or deadline; scale a
//! pool's traffic from a date; plan to a confidence), applied in order to
//! the validated portfolio before planning. The user's portfolio file is
//! never rewritten: the edits live in their own file (docs/scenario.md).
//!
//! `sluice plan --scenario`, `sluice replan --scenario` and the planning
//! board all go through [`Applied::new`] and [`Applied::finish`], so they
//! cannot disagree. [`load`] reads a scenario file with positioned errors;
//! [`to_yaml`] writes the board's edits back as one.

mod load;

pub use load::{check_edit, load, load_str, RawEdit};

use crate::plan::{Plan, Status};
use crate::portfolio::{Portfolio, Scale};
use crate::replan::progress::{Entry, Progress, State};
use crate::schedule::{Excluded, Pin, PlanRequest};
use crate::share::Share;
use crate::sizing::Effect;
use chrono::NaiveDate;
use serde::Serialize;

/// The reason a test left out by a scenario shows in the plan.
pub const LEFT_OUT: &str = "left out by the scenario";

/// One change to one test.
#[derive(Debug, Clone, PartialEq)]
pub enum TestChange {
    /// `leave_out: true` leaves the test out of the plan (a running test
    /// in a re-plan is cancelled); `false` keeps it in again.
    LeaveOut(bool),
    /// Its weight in the objective.
    Priority(f64),
    /// Its first primary metric's smallest effect worth detecting, as a
    /// relative lift (it is sized again).
    Mde(f64),
    /// The largest share of its pools it may take.
    MaxShare(Share),
    /// The only day it may start; `None` lifts an earlier pin.
    Start(Option<NaiveDate>),
    /// The first day it may start; `None` lifts the file's.
    EarliestStart(Option<NaiveDate>),
    /// The last day its data may run to; `None` lifts the file's.
    Deadline(Option<NaiveDate>),
}

/// One checked edit.
#[derive(Debug, Clone, PartialEq)]
pub enum Edit {
    /// A change to the test with this id.
    Test {
        /// The test's id.
        id: String,
        /// What changes.
        change: TestChange,
    },
    /// The pool's traffic multiplied by `factor` from `from` on (the
    /// plan's first day when `None`), as `--scale` does.
    Pool {
        /// The pool's id.
        id: String,
        /// The multiplier, >= 0; 0.7 is a 30% drop.
        factor: f64,
        /// The first day it applies to.
        from: Option<NaiveDate>,
    },
    /// `planning.confidence`; `None` plans on the forecast as it is.
    Confidence(Option<f64>),
}

impl Edit {
    /// The edit in a few words, for the board's list of edits.
    pub fn describe(&self) -> String {
        let day = |d: &Option<NaiveDate>, none: &str| match d {
            Some(d) => d.to_string(),
            None => none.to_string(),
        };
        match self {
            Edit::Test { id, change } => {
                let what = match change {
                    TestChange::LeaveOut(true) => "left out".to_string(),
                    TestChange::LeaveOut(false) => "kept in".to_string(),
                    TestChange::Priority(p) => format!("priority {}", crate::words::trimmed(*p, 3)),
                    TestChange::Mde(m) => format!("MDE {}", crate::words::percent(*m)),
                    TestChange::MaxShare(s) => format!("largest share {s}"),
                    TestChange::Start(d) => format!("starts {}", day(d, "when it fits")),
                    TestChange::EarliestStart(d) => {
                        format!("earliest start {}", day(d, "none"))
                    }
                    TestChange::Deadline(d) => format!("deadline {}", day(d, "none")),
                };
                format!("{id}: {what}")
            }
            Edit::Pool { id, factor, from } => format!(
                "{id}: traffic x{}{}",
                crate::words::trimmed(*factor, 3),
                match from {
                    Some(d) => format!(" from {d}"),
                    None => String::new(),
                }
            ),
            Edit::Confidence(Some(c)) => {
                format!("plan to {} confidence", crate::words::percent(*c))
            }
            Edit::Confidence(None) => "plan on the forecast as it is".to_string(),
        }
    }
}

/// A portfolio and plan request with a scenario's edits applied.
#[derive(Debug, Clone)]
pub struct Applied {
    /// The edited copy of the portfolio.
    pub portfolio: Portfolio,
    /// The request with the scenario's pins and left-out tests.
    pub request: PlanRequest,
    /// Indices of the tests the scenario leaves out, ascending.
    pub left_out: Vec<usize>,
}

impl Applied {
    /// Applies `edits` in order to a copy of `portfolio` and to `request`
    /// (a later edit of the same thing wins). A pool scale without a date
    /// starts on the request's today, else the window's first day. Edits
    /// naming ids the portfolio lacks are skipped: [`load`] and
    /// [`check_edit`] refuse them before they get here.
    pub fn new(portfolio: &Portfolio, request: &PlanRequest, edits: &[Edit]) -> Applied {
        let mut p = portfolio.clone();
        let mut request = request.clone();
        let today = request.today.unwrap_or(p.window.start);
        let mut left_out = std::collections::BTreeSet::new();
        for edit in edits {
            match edit {
                Edit::Test { id, change } => {
                    let Some(i) = p.experiment_index(id) else {
                        continue;
                    };
                    let ex = &mut p.experiments[i];
                    match change {
                        TestChange::LeaveOut(true) => {
                            left_out.insert(i);
                        }
                        TestChange::LeaveOut(false) => {
                            left_out.remove(&i);
                        }
                        TestChange::Priority(v) => ex.priority = *v,
                        TestChange::Mde(m) => {
                            if let Ok(sized) = crate::portfolio::resize(ex, Effect::Relative(*m)) {
                                *ex = sized;
                            }
                        }
                        TestChange::MaxShare(s) => ex.max_share = *s,
                        TestChange::Start(d) => {
                            request.pinned.retain(|pin| pin.experiment != i);
                            if let Some(start) = d {
                                request.pinned.push(Pin {
                                    experiment: i,
                                    start: *start,
                                });
                            }
                        }
                        TestChange::EarliestStart(d) => ex.earliest_start = *d,
                        TestChange::Deadline(d) => ex.deadline = *d,
                    }
                }
                Edit::Pool { id, factor, from } => {
                    if let Some(k) = p.pool_index(id) {
                        p.pools[k].forecast.scales.push(Scale {
                            from: from.unwrap_or(today),
                            factor: *factor,
                        });
                    }
                }
                Edit::Confidence(c) => p.planning.confidence = *c,
            }
        }
        request.pinned.sort_by_key(|pin| pin.experiment);
        let left_out: Vec<usize> = left_out.into_iter().collect();
        for &i in &left_out {
            if !request.excluded.iter().any(|x| x.experiment == i) {
                request.excluded.push(Excluded {
                    experiment: i,
                    ended: None,
                    reason: crate::reason::Reason::LeftOut,
                    ran: None,
                });
            }
        }
        Applied {
            portfolio: p,
            request,
            left_out,
        }
    }

    /// A re-plan's progress with the left-out tests as the re-plan reads
    /// them: a running test left out is cancelled (its data ends the day
    /// before `today`), a test not yet started is cancelled before it
    /// began; finished and cancelled tests stay as they were.
    pub fn progress(&self, progress: &Progress, today: NaiveDate) -> Progress {
        let mut out = progress.clone();
        for &i in &self.left_out {
            match out.entries.iter_mut().find(|e| e.experiment == i) {
                Some(entry) => {
                    if let State::Running { started, share, .. } = entry.state {
                        entry.state = State::Cancelled {
                            note: LEFT_OUT.to_string(),
                            started: Some(started),
                            ended: Some((today - chrono::Duration::days(1)).max(started)),
                            share: Some(share),
                        };
                    }
                }
                None => out.entries.push(Entry {
                    experiment: i,
                    state: State::Cancelled {
                        note: LEFT_OUT.to_string(),
                        started: None,
                        ended: None,
                        share: None,
                    },
                }),
            }
        }
        out
    }

    /// The plan as the scenario means it: a left-out test that had not
    /// started is a test without a place (`unscheduled`) whose reason is
    /// [`LEFT_OUT`], not a cancelled one.
    pub fn finish(&self, plan: &mut Plan) {
        for &i in &self.left_out {
            let id = &self.portfolio.experiments[i].id;
            let Some(e) = plan.experiments.iter_mut().find(|e| &e.id == id) else {
                continue;
            };
            if e.status == Status::Cancelled && e.ran.is_none() {
                e.status = Status::Unscheduled;
                e.reason = Some(crate::reason::Reason::LeftOut.into());
            }
        }
    }
}

/// A scenario file's edit as written back (one change per entry).
#[derive(Serialize, Default)]
struct OutEdit {
    #[serde(skip_serializing_if = "Option::is_none")]
    test: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    pool: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    leave_out: Option<bool>,
    #[serde(skip_serializing_if = "Option::is_none")]
    priority: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    mde: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    max_share: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    start: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    earliest_start: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    deadline: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    scale: Option<f64>,
    #[serde(skip_serializing_if = "Option::is_none")]
    from: Option<String>,
    #[serde(skip_serializing_if = "Option::is_none")]
    confidence: Option<String>,
}

#[derive(Serialize)]
struct OutScenario {
    edits: Vec<OutEdit>,
}

/// `edits` as a scenario file (docs/scenario.md), opening with a comment
/// that names the portfolio it was made for; [`load_str`] reads it back
/// to the same edits.
pub fn to_yaml(edits: &[Edit], portfolio_file: &str) -> String {
    let date = |d: &Option<NaiveDate>| Some(d.map_or("none".to_string(), |d| d.to_string()));
    let out: Vec<OutEdit> = edits
        .iter()
        .map(|edit| match edit {
            Edit::Test { id, change } => {
                let mut o = OutEdit {
                    test: Some(id.clone()),
                    ..OutEdit::default()
                };
                match change {
                    TestChange::LeaveOut(b) => o.leave_out = Some(*b),
                    TestChange::Priority(v) => o.priority = Some(*v),
                    TestChange::Mde(v) => o.mde = Some(*v),
                    TestChange::MaxShare(s) => o.max_share = Some(s.fraction()),
                    TestChange::Start(d) => o.start = date(d),
                    TestChange::EarliestStart(d) => o.earliest_start = date(d),
                    TestChange::Deadline(d) => o.deadline = date(d),
                }
                o
            }
            Edit::Pool { id, factor, from } => OutEdit {
                pool: Some(id.clone()),
                scale: Some(*factor),
                from: from.map(|d| d.to_string()),
                ..OutEdit::default()
            },
            Edit::Confidence(c) => OutEdit {
                confidence: Some(c.map_or("none".to_string(), |c| c.to_string())),
                ..OutEdit::default()
            },
        })
        .collect();
    let body = serde_yaml::to_string(&OutScenario { edits: out })
        .unwrap_or_else(|_| "edits: []\n".to_string());
    let file = portfolio_file.replace(['\n', '\r'], " ");
    format!(
        "# A sluice scenario: edits to {file}, applied in order (docs/scenario.md).\n\
         # sluice plan {file} --scenario THIS_FILE\n{body}"
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn quickstart() -> Portfolio {
        crate::portfolio::load(std::path::Path::new(concat!(
            env!("CARGO_MANIFEST_DIR"),
            "/portfolios/quickstart.yaml"
        )))
        .unwrap()
    }

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    #[test]
    fn written_edits_read_back_the_same() {
        let p = quickstart();
        let test = |change| Edit::Test {
            id: "bigger-photos".into(),
            change,
        };
        let edits = vec![
            test(TestChange::LeaveOut(true)),
            test(TestChange::LeaveOut(false)),
            test(TestChange::Priority(2.5)),
            test(TestChange::Mde(0.07)),
            test(TestChange::MaxShare(Share::from_fraction(0.33))),
            test(TestChange::Start(Some(d("2027-02-01")))),
            test(TestChange::Start(None)),
            test(TestChange::EarliestStart(Some(d("2027-01-11")))),
            test(TestChange::Deadline(None)),
            Edit::Pool {
                id: "product".into(),
                factor: 0.7,
                from: Some(d("2027-02-01")),
            },
            Edit::Pool {
                id: "checkout".into(),
                factor: 1.1,
                from: None,
            },
            Edit::Confidence(Some(0.8)),
            Edit::Confidence(None),
        ];
        let yaml = to_yaml(&edits, "portfolios/quickstart.yaml");
        assert!(yaml.starts_with("# A sluice scenario: edits to portfolios/quickstart.yaml"));
        let back = load_str(&yaml, "saved.yaml", &p).unwrap();
        assert_eq!(back, edits);
    }

    #[test]
    fn later_edits_win_and_unknown_ids_are_skipped() {
        let p = quickstart();
        let edits = vec![
            Edit::Test {
                id: "bigger-photos".into(),
                change: TestChange::Priority(7.0),
            },
            Edit::Test {
                id: "bigger-photos".into(),
                change: TestChange::Priority(2.0),
            },
            Edit::Test {
                id: "no-such-test".into(),
                change: TestChange::LeaveOut(true),
            },
        ];
        let a = Applied::new(&p, &PlanRequest::default(), &edits);
        assert_eq!(a.portfolio.experiments[0].priority, 2.0);
        assert!(a.left_out.is_empty());
        assert!(a.request.excluded.is_empty());
    }

    #[test]
    fn describe_words_each_edit() {
        let e = Edit::Pool {
            id: "product".into(),
            factor: 0.7,
            from: Some(d("2027-02-01")),
        };
        assert_eq!(e.describe(), "product: traffic x0.7 from 2027-02-01");
        let e = Edit::Test {
            id: "a".into(),
            change: TestChange::Mde(0.05),
        };
        assert_eq!(e.describe(), "a: MDE 5%");
        assert_eq!(
            Edit::Confidence(Some(0.8)).describe(),
            "plan to 80% confidence"
        );
    }
}

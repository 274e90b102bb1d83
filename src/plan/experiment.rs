//! One test in the plan: its status, run, statistics, looks, result
//! range, what it could detect, and what it ran.

use super::*;

/// One experiment's outcome.
///
/// In JSON the run is not nested: its six facts are keys of the experiment
/// (`start`, `end`, `result_date`, `share`, `days` before `units_needed`,
/// `units_expected` after it), each `null` when there is no run. A private
/// wire struct keeps that layout (`#[serde(flatten)]` could not put
/// `units_needed` between them). Reading a plan refuses half a run, and a
/// run that disagrees with the status.
#[derive(Debug, Clone, PartialEq, Default, Serialize, Deserialize)]
#[serde(into = "ExperimentJson", try_from = "ExperimentJson")]
pub struct PlannedExperiment {
    /// The experiment's id.
    pub id: String,
    /// Its title.
    pub title: String,
    /// Who owns it.
    pub owner: String,
    /// The ids of every pool it runs on (one for most tests), in the
    /// portfolio's order for the test: the same dates and share on each.
    pub pools: Vec<String>,
    /// Its weight in the objective.
    pub priority: f64,
    /// Whether it got a place in the calendar.
    pub status: Status,
    /// Its place in the calendar: present exactly when the status is
    /// scheduled or running ([`Status::in_calendar`]).
    pub run: Option<Run>,
    /// Its run's ramp: each step's dates and share, in order, before the
    /// run holds its share; empty without a ramp or a run.
    pub ramp: Vec<RampDays>,
    /// Units over all arms the test needs.
    pub units_needed: u64,
    /// Whether the portfolio gave its control arm's units (`sample_size`)
    /// rather than sizing it from a baseline and an MDE.
    pub sample_size_given: bool,
    /// The fraction of its pool's units its targeting admits, in (0, 1];
    /// it still holds its whole share of a split pool.
    pub eligible: f64,
    /// Why it is not scheduled, as facts ([`Reason`]); in JSON the
    /// string of `render::words::reason`.
    pub reason: Option<Said<Reason>>,
    /// Re-plans only: what a finished or cancelled test ran, as the
    /// progress file gives it; `None` for every other test, and for a
    /// finished or cancelled test whose `started` the file does not give.
    pub ran: Option<Ran>,
    /// Scheduled tests on a pool with an uncertain forecast: when the
    /// result may come, over simulated traffic; `None` otherwise.
    pub result_range: Option<ResultRange>,
    /// The statistics behind its size (see [`TestStatistics`]); `None`
    /// only in plans written before they were recorded.
    pub statistics: Option<TestStatistics>,
    /// Tests with interim looks that hold a run: each look's date and the
    /// earliest, expected and latest result dates; `None` otherwise.
    pub looks: Option<LookDates>,
    /// Unscheduled tests only: what the traffic left by the window's end
    /// could detect at its maximum share; `None` otherwise, and when no
    /// day is left.
    pub detectable: Option<Detectable>,
}

/// The statistics behind a test's size, from its first primary metric,
/// as every format shows them.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TestStatistics {
    /// The primary metric's name (`primary` for the short form).
    pub metric: String,
    /// `rate` or `mean`.
    pub kind: String,
    /// The control's rate or mean.
    pub baseline: f64,
    /// A mean's standard deviation per unit; `None` for a rate.
    pub sd: Option<f64>,
    /// The MDE as a relative change (0.04 = 4%); `None` for an absolute
    /// MDE of a zero baseline.
    pub mde: Option<f64>,
    /// The MDE in the metric's own units.
    pub mde_abs: f64,
    /// The primary's alpha (its share of the test's alpha when several
    /// primaries split it), before the multi-arm correction.
    pub alpha: f64,
    /// The planned power.
    pub power: f64,
    /// `one` or `two`.
    pub sides: crate::sizing::Sides,
    /// Control plus treatments.
    pub arms: u32,
    /// Treatment units per control unit.
    pub ratio: f64,
    /// With more than two arms: the alpha of each treatment-versus-control
    /// comparison after the multi-arm correction, and the correction
    /// (`bonferroni`, `sidak` or `none`); left out of JSON otherwise.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub per_comparison: Option<PerComparison>,
    /// Planned looks; 1 for a single read at the end.
    pub looks: u32,
    /// The boundary of a test with looks; `None` for one look.
    pub boundary: Option<crate::sizing::sequential::Boundary>,
    /// The metric whose need sizes the test.
    pub driver: String,
    /// Each secondary metric with the effect it can detect at the test's
    /// sample, in file order.
    pub secondary: Vec<SecondaryEffect>,
}

/// A several-armed test's alpha per treatment-versus-control comparison.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PerComparison {
    /// The corrected alpha of one comparison.
    pub alpha: f64,
    /// The correction's name.
    pub correction: String,
}

/// A secondary metric and the effect the test's sample can detect on it.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SecondaryEffect {
    /// The metric's name.
    pub name: String,
    /// Detectable relative change; `None` for a zero baseline.
    pub mde: Option<f64>,
    /// Detectable change in the metric's units; `None` when the sample is
    /// too small for any at the planned power.
    pub mde_abs: Option<f64>,
}

/// The dates of a test read at planned interim looks.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LookDates {
    /// Every look in order, the last at the run's end.
    pub dates: Vec<LookDate>,
    /// The earliest possible result: the first look's date.
    pub earliest: NaiveDate,
    /// The result date expected under the planned effect: the day after
    /// the expected sample is collected.
    pub expected: NaiveDate,
    /// The latest result date: the run's `result_date`.
    pub latest: NaiveDate,
    /// The interim looks that cannot stop the test early: each falls on
    /// the day of a later look or of the result, so it has no read of its
    /// own (a run too short for the looks planned). Empty when every look
    /// has a day of its own.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub idle: Vec<u32>,
    /// With idle looks, the sample all the looks add over a single read
    /// at the end, as a fraction (the group-sequential inflation factor
    /// less 1): what fewer looks would save.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub added_sample: Option<f64>,
}

impl LookDates {
    /// The interim looks that can stop the test early: every look but the
    /// last, which is the result, and but those with no day of their own
    /// ([`LookDates::idle`]).
    pub fn interim(&self) -> impl Iterator<Item = &LookDate> {
        let last = self.dates.len().saturating_sub(1);
        self.dates[..last]
            .iter()
            .filter(|l| !self.idle.contains(&l.look))
    }

    /// Every interim look of the design, those with no day of their own
    /// included: every look but the last.
    pub fn all_interim(&self) -> &[LookDate] {
        &self.dates[..self.dates.len().saturating_sub(1)]
    }

    /// The reads the run holds on days of their own, the result included.
    pub fn held(&self) -> usize {
        self.dates.len() - self.idle.len()
    }
}

/// One planned look.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LookDate {
    /// 1 to the number of looks.
    pub look: u32,
    /// The information fraction it reads at (k / K).
    pub information: f64,
    /// The day its data is in and it can be read: the day after the run
    /// has collected that fraction of its maximum sample.
    pub date: NaiveDate,
    /// Under the planned effect, the probability that the test stops for
    /// efficacy at this look.
    pub stop_probability: f64,
}

/// What an unscheduled test could detect with the traffic left.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Detectable {
    /// The first day it could run.
    pub from: NaiveDate,
    /// The last day of data: its deadline or the window's end.
    pub to: NaiveDate,
    /// The share it assumes: its largest share level.
    pub share: Share,
    /// Units over all arms the forecast gives it from `from` to `to`.
    pub units: f64,
    /// The detectable relative effect; `None` for a zero baseline, or too
    /// few units for any.
    pub mde: Option<f64>,
    /// The detectable effect in the metric's units; `None` when too few
    /// units for any at the planned power.
    pub mde_abs: Option<f64>,
    /// With `planning.confidence`: `units` are what the traffic delivers
    /// on that share of its simulated paths (the plan's margin taken off),
    /// not the expected forecast.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub confidence: Option<f64>,
}

/// When a scheduled test's result may come, over simulated traffic paths
/// (see [`crate::forecast::uncertainty`]).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ResultRange {
    /// The result date (the day after the last day of data) by which 10%
    /// of paths have it; `None` when that falls past the simulated span.
    pub p10: Option<NaiveDate>,
    /// The median result date.
    pub p50: Option<NaiveDate>,
    /// The result date by which 90% of paths have it.
    pub p90: Option<NaiveDate>,
    /// The share of paths whose run ends by its deadline, or by the
    /// window's last day without one.
    pub on_time: f64,
    /// With `planning.confidence`: the share of paths whose run ends by
    /// its planned end, so its result comes by its planned result date.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub on_plan: Option<f64>,
}

/// What a finished or cancelled test ran before today: kept in a re-plan
/// so every format can still show it, marked by its status.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Ran {
    /// Its first day of data.
    pub start: NaiveDate,
    /// Its last day of data.
    pub end: NaiveDate,
    /// The share of its pool it ran at, when the progress file gives it.
    pub share: Option<Share>,
    /// A finished test that an interim look stopped early: that look,
    /// from 1 (`stopped_at_look` in the progress file).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub stopped_at_look: Option<u32>,
    /// The looks its design planned, the final read included, when it
    /// has interim looks; with `stopped_at_look` it says "look 2 of 3".
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub looks: Option<u32>,
    /// What a finished test found, when the progress file says.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub outcome: Option<Outcome>,
    /// The sample-ratio check of its per-arm counts against its design's
    /// split, when the progress file gives `units_per_arm`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sample_ratio: Option<crate::sizing::srm::SampleRatio>,
    /// Whether that check fell below `planning.srm_alpha`.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub sample_ratio_mismatch: bool,
}

impl Ran {
    /// A run from `start` to `end` at `share`, with nothing more known.
    pub fn new(start: NaiveDate, end: NaiveDate, share: Option<Share>) -> Ran {
        Ran {
            start,
            end,
            share,
            stopped_at_look: None,
            looks: None,
            outcome: None,
            sample_ratio: None,
            sample_ratio_mismatch: false,
        }
    }

    /// The day its result came: the day after its last day of data.
    pub fn result_date(&self) -> NaiveDate {
        self.end.succ_opt().unwrap_or(self.end)
    }
}

/// What a finished test found, in the trade's plain words.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Outcome {
    /// The treatment did better than control on the primary metric.
    Better,
    /// The treatment did worse than control on the primary metric.
    Worse,
    /// No difference the test could tell.
    NoDifference,
    /// A guardrail showed harm.
    Harm,
    /// The data settled nothing.
    Inconclusive,
}

impl Outcome {
    /// Every outcome, in the order the docs list them.
    pub const ALL: [Outcome; 5] = [
        Outcome::Better,
        Outcome::Worse,
        Outcome::NoDifference,
        Outcome::Harm,
        Outcome::Inconclusive,
    ];

    /// The name in the progress file and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Outcome::Better => "better",
            Outcome::Worse => "worse",
            Outcome::NoDifference => "no_difference",
            Outcome::Harm => "harm",
            Outcome::Inconclusive => "inconclusive",
        }
    }
}

/// The facts of one run in the calendar, as the scheduler fixed them.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Run {
    /// First day of the run.
    pub start: NaiveDate,
    /// Last day of data; the result is due the day after.
    pub end: NaiveDate,
    /// The day the result is due: the day after `end`.
    pub result_date: NaiveDate,
    /// Constant share of the pool, in (0, 1].
    pub share: Share,
    /// Days from start to end inclusive.
    pub days: u32,
    /// Units the forecast delivers to it from start to end, summed over
    /// its pools (ramp days only when they count).
    pub units_expected: f64,
}

/// One ramp step of a run: from `start` to `end` it holds `share` of each
/// of its pools.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct RampDays {
    /// The step's first day.
    pub start: NaiveDate,
    /// The step's last day.
    pub end: NaiveDate,
    /// Its share of each pool.
    pub share: Share,
}

impl PlannedExperiment {
    /// Its run's share on `date`: a ramp step's share on the step's days,
    /// else the run's share (callers check the run's span); `None`
    /// without a run.
    pub fn share_on(&self, date: NaiveDate) -> Option<Share> {
        let r = self.run?;
        Some(
            self.ramp
                .iter()
                .find(|s| s.start <= date && date <= s.end)
                .map_or(r.share, |s| s.share),
        )
    }

    /// A finished or cancelled test's share on `date` as it ran: a ramp
    /// step's share on the step's days, else the share the progress file
    /// gives; `None` outside what it ran or when the share is unknown.
    pub fn ran_share_on(&self, date: NaiveDate) -> Option<Share> {
        let r = self
            .ran
            .as_ref()
            .filter(|r| r.start <= date && date <= r.end)?;
        self.ramp
            .iter()
            .find(|s| s.start <= date && date <= s.end)
            .map(|s| s.share)
            .or(r.share)
    }

    /// The first day its run holds its planned share (its start without a
    /// ramp); `None` without a run.
    pub fn full_from(&self) -> Option<NaiveDate> {
        let r = self.run?;
        Some(
            self.ramp
                .last()
                .map_or(r.start, |s| s.end + chrono::Duration::days(1)),
        )
    }
}

/// [`PlannedExperiment`] as it stands in JSON: the run's facts one key
/// each, in the documented key order.
#[derive(Serialize, Deserialize)]
struct ExperimentJson {
    id: String,
    title: String,
    owner: String,
    /// Plans written before multi-pool tests name one `pool`; read only.
    #[serde(default, skip_serializing)]
    pool: Option<String>,
    #[serde(default)]
    pools: Vec<String>,
    priority: f64,
    status: Status,
    start: Option<NaiveDate>,
    end: Option<NaiveDate>,
    result_date: Option<NaiveDate>,
    share: Option<Share>,
    #[serde(default)]
    ramp: Vec<RampDays>,
    days: Option<u32>,
    units_needed: u64,
    units_expected: Option<f64>,
    #[serde(default)]
    sample_size_given: bool,
    #[serde(default = "whole_pool")]
    eligible: f64,
    reason: Option<Said<Reason>>,
    #[serde(default)]
    ran: Option<Ran>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    result_range: Option<ResultRange>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    statistics: Option<TestStatistics>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    looks: Option<LookDates>,
    #[serde(default, skip_serializing_if = "Option::is_none")]
    detectable: Option<Detectable>,
}

/// What a plan without `eligible` means: every unit is admitted.
fn whole_pool() -> f64 {
    1.0
}

impl From<PlannedExperiment> for ExperimentJson {
    fn from(e: PlannedExperiment) -> ExperimentJson {
        let r = e.run;
        ExperimentJson {
            id: e.id,
            title: e.title,
            owner: e.owner,
            pool: None,
            pools: e.pools,
            priority: e.priority,
            status: e.status,
            start: r.map(|r| r.start),
            end: r.map(|r| r.end),
            result_date: r.map(|r| r.result_date),
            share: r.map(|r| r.share),
            ramp: e.ramp,
            days: r.map(|r| r.days),
            units_needed: e.units_needed,
            units_expected: r.map(|r| r.units_expected),
            sample_size_given: e.sample_size_given,
            eligible: e.eligible,
            reason: e.reason,
            ran: e.ran,
            result_range: e.result_range,
            statistics: e.statistics,
            looks: e.looks,
            detectable: e.detectable,
        }
    }
}

impl TryFrom<ExperimentJson> for PlannedExperiment {
    type Error = String;

    fn try_from(j: ExperimentJson) -> Result<PlannedExperiment, String> {
        let facts = [
            ("start", j.start.is_some()),
            ("end", j.end.is_some()),
            ("result_date", j.result_date.is_some()),
            ("share", j.share.is_some()),
            ("days", j.days.is_some()),
            ("units_expected", j.units_expected.is_some()),
        ];
        let run = match (
            j.start,
            j.end,
            j.result_date,
            j.share,
            j.days,
            j.units_expected,
        ) {
            (
                Some(start),
                Some(end),
                Some(result_date),
                Some(share),
                Some(days),
                Some(units_expected),
            ) => Some(Run {
                start,
                end,
                result_date,
                share,
                days,
                units_expected,
            }),
            _ => None,
        };
        let status = j.status.name();
        match (j.status.in_calendar(), run.is_some()) {
            (true, false) => {
                let missing = facts.iter().find(|(_, has)| !has).map_or("start", |f| f.0);
                return Err(format!(
                    "experiment `{}` is {status} but has no `{missing}`",
                    j.id
                ));
            }
            (false, _) => {
                if let Some((given, _)) = facts.iter().find(|(_, has)| *has) {
                    return Err(format!(
                        "experiment `{}` is {status} but has a `{given}`; only scheduled and running experiments have a run",
                        j.id
                    ));
                }
            }
            (true, true) => {}
        }
        Ok(PlannedExperiment {
            id: j.id,
            title: j.title,
            owner: j.owner,
            pools: if j.pools.is_empty() {
                j.pool.into_iter().collect()
            } else {
                j.pools
            },
            priority: j.priority,
            status: j.status,
            run,
            ramp: j.ramp,
            units_needed: j.units_needed,
            sample_size_given: j.sample_size_given,
            eligible: j.eligible,
            reason: j.reason,
            ran: j.ran,
            result_range: j.result_range,
            statistics: j.statistics,
            looks: j.looks,
            detectable: j.detectable,
        })
    }
}

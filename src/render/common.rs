//! Helpers shared by the renderers: number and date wording, the week grid
//! used for display, and the cautions text.
//!
//! Nothing here computes a schedule fact: runs, shares and result dates are
//! read from the plan as they are.

use crate::plan::{
    Plan, PlanBlackout, PlannedExperiment, PoolPlan, ResultRange, Sharing, SolverStatus, Status,
};
pub(crate) use crate::words::{percent, thousands, units};
use chrono::{Datelike, Duration, NaiveDate};

/// How to name an experiment with no run in this plan: "does not fit", or
/// (in re-plans) "finished" / "cancelled".
pub fn out_word(e: &PlannedExperiment) -> &'static str {
    match e.status {
        Status::Finished => "finished",
        Status::Cancelled => "cancelled",
        _ => "does not fit",
    }
}

/// A finished or cancelled test's past run as a [`Run`], for drawing its
/// bar where it ran (re-plans): `None` unless the plan keeps what it ran.
/// Its share is the one the progress file gives, else the whole pool
/// (only the dates are drawn); its result date is the day after its end.
pub fn past_run(e: &PlannedExperiment) -> Option<crate::plan::Run> {
    let r = e.ran.as_ref()?;
    if e.run.is_some() {
        return None;
    }
    Some(crate::plan::Run {
        start: r.start,
        end: r.end,
        result_date: r.end + Duration::days(1),
        share: r.share.unwrap_or(crate::share::Share::WHOLE),
        days: ((r.end - r.start).num_days() + 1) as u32,
        units_expected: 0.0,
    })
}

/// "finished, ran 2027-01-04 to 2027-01-24 at 25%" for a finished or
/// cancelled test whose run the plan keeps, with the look that stopped it
/// and what it found when the progress file says ("finished early at look
/// 2 of 3: better than control, ran ..."); else [`out_word`].
pub fn closed_words(e: &PlannedExperiment) -> String {
    match (&e.run, &e.ran) {
        (None, Some(r)) => {
            let what = match (stop_words(r), r.outcome) {
                (Some(stop), Some(o)) => format!("{}: {}", stop, outcome_words(o)),
                (Some(stop), None) => stop,
                (None, Some(o)) => format!("{}: {}", out_word(e), outcome_words(o)),
                (None, None) => out_word(e).to_string(),
            };
            format!(
                "{what}, ran {} to {}{}",
                r.start,
                r.end,
                r.share.map(|s| format!(" at {s}")).unwrap_or_default()
            )
        }
        _ => out_word(e).to_string(),
    }
}

/// "finished early at look 2 of 3" when an interim look stopped it.
pub fn stop_words(r: &crate::plan::Ran) -> Option<String> {
    let k = r.stopped_at_look?;
    Some(match r.looks {
        Some(n) => format!("finished early at look {k} of {n}"),
        None => format!("finished early at look {k}"),
    })
}

/// What a finished test found, in words.
pub fn outcome_words(o: crate::plan::Outcome) -> &'static str {
    use crate::plan::Outcome;
    match o {
        Outcome::Better => "better than control",
        Outcome::Worse => "worse than control",
        Outcome::NoDifference => "no difference found",
        Outcome::Harm => "harm on a guardrail",
        Outcome::Inconclusive => "inconclusive",
    }
}

/// A past run's result cell: "ended 2027-05-23", with the look that
/// stopped it and what it found when known ("ended 2027-05-23, look 2,
/// better"); a cancelled test "stopped 2027-05-23".
pub fn past_result_cell(e: &PlannedExperiment) -> Option<String> {
    let r = e.ran.as_ref().filter(|_| e.run.is_none())?;
    if e.status == Status::Cancelled {
        return Some(format!("stopped {}", r.end));
    }
    let mut cell = format!("ended {}", r.end);
    if let Some(k) = r.stopped_at_look {
        cell.push_str(&format!(", look {k}"));
    }
    if let Some(o) = r.outcome {
        cell.push_str(&format!(", {}", o.name().replace('_', " ")));
    }
    Some(cell)
}

/// The first day a past run held its full share (after its ramp).
pub fn past_full_from(e: &PlannedExperiment) -> Option<NaiveDate> {
    let r = e.ran.as_ref().filter(|_| e.run.is_none())?;
    Some(e.ramp.last().map_or(r.start, |s| s.end + Duration::days(1)))
}

/// How many experiments left the queue (finished or cancelled; re-plans).
pub fn closed_count(plan: &Plan) -> usize {
    plan.experiments
        .iter()
        .filter(|e| matches!(e.status, Status::Finished | Status::Cancelled))
        .count()
}

/// "do not" or, for one test, "does not".
pub fn do_not(n: usize) -> &'static str {
    crate::words::agree("does not", "do not", n)
}

/// ", 3 finished or cancelled" when any did, else "".
pub fn closed_note(plan: &Plan) -> String {
    match closed_count(plan) {
        0 => String::new(),
        n => format!(", {n} finished or cancelled"),
    }
}

/// Whether `e` is a running test that needs a decision (re-plans): it
/// cannot finish inside the window, or its run reaches a `no_running` span.
pub fn needs_decision(plan: &Plan, e: &PlannedExperiment) -> bool {
    e.status == Status::Running
        && plan
            .running
            .iter()
            .any(|o| o.id == e.id && o.needs_decision())
}

/// How many running tests need a decision (re-plans).
pub fn decision_count(plan: &Plan) -> usize {
    plan.experiments
        .iter()
        .filter(|e| needs_decision(plan, e))
        .count()
}

/// ", 2 running tests need a decision" when any do, else "".
pub fn decision_note(plan: &Plan) -> String {
    match decision_count(plan) {
        0 => String::new(),
        1 => ", 1 running test needs a decision".to_string(),
        n => format!(", {n} running tests need a decision"),
    }
}

/// Counts of experiments in the calendar (scheduled or running) and of
/// those left out; finished and cancelled ones (re-plans) count in
/// neither, nor do running tests that need a decision (see
/// [`decision_count`]): they are counted apart.
pub fn counts(plan: &Plan) -> (usize, usize) {
    let fit = plan
        .experiments
        .iter()
        .filter(|e| e.status.in_calendar() && !needs_decision(plan, e))
        .count();
    let out = plan
        .experiments
        .iter()
        .filter(|e| e.status == Status::Unscheduled)
        .count();
    (fit, out)
}

/// The experiments of `pool`, in plan order.
pub fn experiments_in<'a>(
    plan: &'a Plan,
    pool: &'a str,
) -> impl Iterator<Item = &'a PlannedExperiment> + 'a {
    plan.experiments
        .iter()
        .filter(move |e| e.pools.iter().any(|p| p == pool))
}

/// The labels of every pool of `e`, joined: "Home page, Search".
pub fn pools_label(plan: &Plan, e: &PlannedExperiment) -> String {
    e.pools
        .iter()
        .map(|p| pool_label(plan, p))
        .collect::<Vec<_>>()
        .join(", ")
}

/// A run's ramp in words, "5% 2027-01-04 to 2027-01-05, 20% 2027-01-06
/// to 2027-01-08"; `None` without a ramp.
pub fn ramp_words(e: &PlannedExperiment) -> Option<String> {
    (!e.ramp.is_empty()).then(|| {
        e.ramp
            .iter()
            .map(|s| format!("{} {} to {}", s.share, s.start, s.end))
            .collect::<Vec<_>>()
            .join(", ")
    })
}

/// For a test on several pools drawn under `pool`: "also on `search`,
/// `product`"; `None` for a test on one pool.
pub fn also_on(e: &PlannedExperiment, pool: &str) -> Option<String> {
    let others: Vec<String> = e
        .pools
        .iter()
        .filter(|p| *p != pool)
        .map(|p| format!("`{p}`"))
        .collect();
    (e.pools.len() > 1).then(|| format!("also on {}", others.join(", ")))
}

/// Experiments whose pool is not among the plan's pools (should not happen,
/// but a renderer must not silently drop them).
pub fn orphans(plan: &Plan) -> Vec<&PlannedExperiment> {
    plan.experiments
        .iter()
        .filter(|e| {
            e.pools
                .iter()
                .any(|q| !plan.pools.iter().any(|p| &p.id == q))
        })
        .collect()
}

/// The pool's label, or its id when the plan does not know it.
pub fn pool_label<'a>(plan: &'a Plan, pool: &'a str) -> &'a str {
    plan.pools
        .iter()
        .find(|p| p.id == pool)
        .map(|p| p.label.as_str())
        .unwrap_or(pool)
}

/// Whether a blackout covers `pool` (an empty pool list covers every pool).
pub fn blackout_covers(b: &PlanBlackout, pool: &str) -> bool {
    b.pools.is_empty() || b.pools.iter().any(|p| p == pool)
}

/// A test's share in words, with the fraction its targeting admits when
/// that is not all of the pool: `50%`, or `50% (30% eligible)`.
pub fn share_words(e: &PlannedExperiment, share: crate::share::Share) -> String {
    if e.eligible < 1.0 {
        format!("{share} ({} eligible)", crate::words::percent(e.eligible))
    } else {
        share.to_string()
    }
}

/// A pool's holdout in words (`5% held out`), or `None` without one.
pub fn holdout_words(pool: &PoolPlan) -> Option<String> {
    (pool.holdout > 0.0).then(|| format!("{} held out", crate::words::percent(pool.holdout)))
}

/// Whether the pool's capacity is a share (split) rather than a count.
pub fn is_split(pool: &PoolPlan) -> bool {
    pool.sharing == Sharing::Split
}

/// One display week of the window: seven days from `start`, the last one
/// cut at the window's end.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Week {
    pub start: NaiveDate,
    pub end: NaiveDate,
}

/// The window cut into weeks that begin on the weekday tests start on
/// (`window.week_start`; the days before the first make a short week), or
/// from its first day when the plan has no weekly grid.
pub fn weeks(plan: &Plan) -> Vec<Week> {
    let mut out = Vec::new();
    let mut start = plan.window.start;
    // Weeks begin on the weekday tests start on; the days before the
    // first such day make a short first week.
    if let Some(day) = plan.window.week_start {
        let ahead = (7 + i64::from(day.num_days_from_monday())
            - i64::from(start.weekday().num_days_from_monday()))
            % 7;
        if ahead > 0 {
            let end = (start + Duration::days(ahead - 1)).min(plan.window.end);
            out.push(Week { start, end });
            start += Duration::days(ahead);
        }
    }
    while start <= plan.window.end {
        let end = (start + Duration::days(6)).min(plan.window.end);
        out.push(Week { start, end });
        start += Duration::days(7);
    }
    out
}

/// A date as `Mon 4 Jan 2027`.
pub fn long_date(d: NaiveDate) -> String {
    d.format("%a %-d %b %Y").to_string()
}

/// A date as `4 Jan`.
pub fn short_date(d: NaiveDate) -> String {
    d.format("%-d %b").to_string()
}

/// What every format says of a plan the time limit cut short
/// (`solver.cut_short`); `None` for a plan the work budget decided.
pub fn cut_short_note(plan: &Plan) -> Option<&'static str> {
    plan.solver.cut_short.then_some(
        "The time limit cut the search short before its work budget was spent, so this plan \
         may differ from run to run on a busy machine; plan again with a larger `--time-limit`.",
    )
}

/// The solver's numbers in one sentence (two when the search was cut short).
pub fn solver_sentence(plan: &Plan) -> String {
    let s = &plan.solver;
    let status = match s.status {
        SolverStatus::Optimal => "proved optimal",
        SolverStatus::Feasible => "a feasible plan, not proved optimal",
        SolverStatus::Greedy => "the greedy fallback (the solver gave no plan)",
    };
    let sentence = format!(
        "solver `{}`: {status}; plan value {:.1} against a bound of {:.1} (gap {:.1}%); greedy baseline {:.1}.",
        s.backend,
        s.value,
        s.bound,
        s.gap * 100.0,
        plan.greedy_value
    );
    match cut_short_note(plan) {
        Some(note) => format!("{sentence} {note}"),
        None => sentence,
    }
}

/// The cautions every output carries, one sentence group each: HTML lists
/// them, the other formats print [`caution`]'s paragraph.
pub const CAUTIONS: [&str; 4] = [
    "This calendar is an estimate. The sample sizes assume independent randomisation units: \
     each unit is counted once and does not affect the others.",
    "A test planned with one look is read once, at its planned end: reading it earlier, or \
     checking it daily and stopping when it first looks significant, inflates false positives; \
     only a test planned with interim looks may stop early, and only at those looks.",
    "The dates assume the traffic forecast holds, and real traffic always differs from a \
     forecast, so leave a margin and re-plan when traffic moves.",
    "Tests that touch pricing, health or vulnerable users go through your organisation's own \
     review, whatever this plan says fits.",
];

/// What result ranges cover, after [`CAUTIONS`] in plans that have them.
pub const RANGES_CAUTION: &str = "The result ranges (P10 to P90) come from simulated traffic \
around the forecast: they cover the forecast being off, for a whole run or day to day, and \
nothing else. They do not cover a wrong baseline rate or variance, or an effect other than the \
one planned for: those change how many units a test needs, which every simulated path takes \
as given.";

/// The cautions for `plan`: [`CAUTIONS`], and [`RANGES_CAUTION`] when any
/// test has a result range.
pub fn cautions(plan: &Plan) -> Vec<&'static str> {
    let mut out = CAUTIONS.to_vec();
    if has_ranges(plan) {
        out.push(RANGES_CAUTION);
    }
    out
}

/// [`cautions`] as one paragraph.
pub fn caution(plan: &Plan) -> String {
    cautions(plan).join(" ")
}

/// Whether any test of `plan` has a result range.
pub fn has_ranges(plan: &Plan) -> bool {
    plan.experiments.iter().any(|e| e.result_range.is_some())
}

/// A re-plan's actual traffic, one paragraph per pool, pools with a
/// shift first (they are the news): any shift, how far the traffic ran
/// from its forecast over the last 14 days and since it began, and how the
/// new forecast was made.
pub fn traffic_lines(plan: &Plan) -> Vec<String> {
    let pools = by_news(plan);
    pools
        .into_iter()
        .map(|t| {
            let away = |d: f64| {
                format!(
                    "{} {}",
                    crate::words::percent_gap(d.abs()),
                    if d < 0.0 { "below" } else { "above" }
                )
            };
            let news = t.shift.map_or(String::new(), |s| format!("{}; ", shift_words(s)));
            let days = (t.to - t.from).num_days() + 1;
            let recent = if days > crate::replan::traffic::RECENT_DAYS as i64 {
                format!("over the last 14 days it ran {} its forecast, and ", away(t.last_14_days))
            } else {
                String::new()
            };
            let how = match t.refit {
                crate::plan::Refit::HistoryAndTraffic => {
                    "its forecast is fitted again from its history and this traffic"
                }
                crate::plan::Refit::Traffic => "its forecast is fitted from this traffic",
                crate::plan::Refit::Level => {
                    "too short to fit: its forecast's level is scaled by actual over forecast units"
                }
            };
            let level = match t.level {
                crate::plan::LevelRule::Recent => "",
                crate::plan::LevelRule::SinceShift => ", with the level from the days since the shift",
                crate::plan::LevelRule::ShortSinceShift => {
                    ", with the level from the days since the shift (under a week of them: a rough level)"
                }
            };
            format!(
                "{} ({}): {news}{recent}{} from {} to {} ({} units against {} forecast); {how}{level}.",
                pool_label(plan, &t.pool),
                t.pool,
                away(t.difference),
                short_date(t.from),
                short_date(t.to),
                units(t.units),
                units(t.forecast),
            )
        })
        .collect()
}

/// What a re-plan says before anything else, in this order, each only
/// when there is something to say: `(anchor, title, lines)` for a traffic
/// shift ([`shift_news`]), for running tests whose arms are out of
/// balance ([`sample_ratio_lines`]) and for tests the progress file leaves
/// out ([`missing_progress_lines`]).
pub fn news(plan: &Plan) -> Vec<(&'static str, &'static str, Vec<String>)> {
    [
        ("traffic-shift", "Traffic shift", shift_news(plan)),
        (
            "sample-ratio",
            "Tests with a sample-ratio mismatch",
            sample_ratio_lines(plan),
        ),
        (
            "missing-progress",
            "Tests the progress file leaves out",
            missing_progress_lines(plan),
        ),
        (
            "idle-looks",
            "Interim looks that cannot stop a test early",
            idle_look_lines(plan),
        ),
    ]
    .into_iter()
    .filter(|(_, _, lines)| !lines.is_empty())
    .collect()
}

/// The tests in the calendar with interim looks that have no day of their
/// own (see [`crate::plan::LookDates::idle`]), one sentence each: which
/// looks, how many reads the run holds, what the looks cost and what to do.
pub fn idle_look_lines(plan: &Plan) -> Vec<String> {
    plan.experiments
        .iter()
        .filter(|e| e.status.in_calendar())
        .filter_map(|e| Some((e, e.looks.as_ref().filter(|l| !l.idle.is_empty())?)))
        .map(|(e, l)| look_advice(&e.id, l))
        .collect()
}

/// One sentence on a test whose looks `l` include idle ones.
pub fn look_advice(id: &str, l: &crate::plan::LookDates) -> String {
    let planned = l.dates.len().saturating_sub(1);
    let idle = l.idle.len();
    let on: Vec<String> = l
        .dates
        .iter()
        .filter(|d| l.idle.contains(&d.look))
        .map(|d| format!("look {} on {}", d.look, d.date))
        .collect();
    let held = l.held();
    let holds = match held {
        1 => "only its final read, so it cannot stop early".to_string(),
        h => format!("{h} reads on days of their own"),
    };
    let cost = l
        .added_sample
        .map(|a| format!(", while the looks add {} to its sample", percent(a)))
        .unwrap_or_default();
    let fix = if held <= 1 {
        "a single read (leave out `looks`)".to_string()
    } else {
        format!("`looks: {held}`")
    };
    format!(
        "{id}: {idle} of its {planned} {} {} on the day of a later look or of its result ({}); its run holds {holds}{cost}. Plan it with {fix}, or lower its `max_share` so that its run is long enough for its looks.",
        crate::words::Count("interim look", planned),
        crate::words::agree("falls", "fall", idle),
        on.join(", "),
    )
}

/// The tests the previous plan ended before today that the progress file
/// does not mention, one sentence each.
pub fn missing_progress_lines(plan: &Plan) -> Vec<String> {
    plan.missing_progress
        .iter()
        .map(|id| {
            format!(
                "{id}: the previous plan ended it before today, but the progress file does not mention it, so it is planned again from today as if it had never run. Add it with `state: finished` (or `cancelled`)."
            )
        })
        .collect()
}

/// The running tests, then the finished ones, whose per-arm counts miss
/// their design's split, one sentence each: the counts, the split expected, the p-value and what to
/// do about it.
pub fn sample_ratio_lines(plan: &Plan) -> Vec<String> {
    let running = plan
        .running
        .iter()
        .filter(|o| {
            o.flags
                .contains(&crate::plan::RunningFlag::SampleRatioMismatch)
        })
        .filter_map(|o| {
            Some((
                o.id.as_str(),
                o.sample_ratio.as_ref()?,
                "its result or its date",
            ))
        });
    let finished = plan.experiments.iter().filter_map(|e| {
        let ran = e.ran.as_ref().filter(|r| r.sample_ratio_mismatch)?;
        Some((e.id.as_str(), ran.sample_ratio.as_ref()?, "its result"))
    });
    running
        .chain(finished)
        .filter_map(|(id, r, what)| {
            let counts: Vec<String> = r.counts.iter().map(|&c| thousands(c)).collect();
            let expected: Vec<String> = r.expected.iter().map(|&e| units(e)).collect();
            let base = r.expected.first().copied().filter(|&e| e > 0.0)?;
            let split: Vec<String> = r
                .expected
                .iter()
                .map(|e| crate::words::significant(e / base, 3))
                .collect();
            Some(format!(
                "{}: its arms have {} units where its {} split expects {} (Pearson's chi-square, {}): a sample-ratio mismatch. Check how units are assigned and logged before trusting {what}.",
                id,
                counts.join(" and "),
                split.join(":"),
                expected.join(" and "),
                crate::words::p_value(r.p_value)
            ))
        })
        .collect()
}

/// A shift in words: `traffic fell 19% from 18 Jan and stayed there`.
fn shift_words(s: crate::plan::TrafficShift) -> String {
    format!(
        "traffic {} {} from {} and stayed there",
        if s.change < 0.0 { "fell" } else { "rose" },
        percent(s.change.abs()),
        short_date(s.date)
    )
}

/// A re-plan's traffic, the pools with a shift first, the largest first,
/// then the rest in the file's order.
fn by_news(plan: &Plan) -> Vec<&crate::plan::TrafficSoFar> {
    let mut pools: Vec<&crate::plan::TrafficSoFar> = plan.traffic.iter().collect();
    pools.sort_by(|a, b| {
        let size = |t: &crate::plan::TrafficSoFar| t.shift.map_or(0.0, |s| s.change.abs());
        size(b).total_cmp(&size(a))
    });
    pools
}

/// The news of a re-plan's traffic, one line per pool whose level shifted,
/// the largest first: what every format says first.
pub fn shift_news(plan: &Plan) -> Vec<String> {
    by_news(plan)
        .into_iter()
        .filter_map(|t| {
            t.shift.map(|s| {
                format!(
                    "{} ({}): {}; the re-plan plans on the new level.",
                    pool_label(plan, &t.pool),
                    t.pool,
                    shift_words(s)
                )
            })
        })
        .collect()
}

/// A result range in words: `P10 – P90`, one date when they agree, and
/// `later` for a quantile past the simulated span.
pub fn range_words(r: &ResultRange) -> String {
    let day = |d: Option<NaiveDate>| d.map_or("later".to_string(), |d| d.to_string());
    if r.p10 == r.p90 {
        day(r.p10)
    } else {
        format!("{} – {}", day(r.p10), day(r.p90))
    }
}

/// "on time 83%", and with a confidence plan "by plan 81%".
pub fn chance_words(r: &ResultRange) -> String {
    let mut s = format!("on time {}", percent(r.on_time));
    if let Some(p) = r.on_plan {
        s.push_str(&format!(", by plan {}", percent(p)));
    }
    s
}

/// Lays `t` out to fit `width` columns (comfy-table's dynamic arrangement),
/// or at its natural width when there is no width to fit.
pub fn fit_table(t: &mut comfy_table::Table, width: Option<usize>) {
    use comfy_table::ContentArrangement;
    match width {
        Some(w) => {
            t.set_content_arrangement(ContentArrangement::Dynamic)
                .set_width(u16::try_from(w).unwrap_or(u16::MAX));
        }
        None => {
            t.set_content_arrangement(ContentArrangement::Disabled);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::fixture;

    #[test]
    fn weeks_cover_the_window_exactly() {
        let plan = fixture::plan();
        let w = weeks(&plan);
        assert_eq!(w.len(), 13);
        assert_eq!(w[0].start, plan.window.start);
        assert_eq!(w[12].end, plan.window.end);
        for pair in w.windows(2) {
            assert_eq!(pair[0].end + Duration::days(1), pair[1].start);
        }
    }
}

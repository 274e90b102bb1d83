//! Re-planning mid-quarter: the tests that run keep their start and share
//! (the trade's practice: a running test is never paused, and its arms'
//! split never changes), finished and cancelled tests free their pool, and
//! every other test is planned again from today around the running ones.
//!
//! This module turns a [`Progress`] into a [`PlanRequest`] (each running
//! test's new end from its remaining need and the forecast from the day the
//! counts were read), calls the scheduler, marks the statuses, and says for
//! every running test that can no longer finish inside the window when it
//! would, and the smallest change that would rescue it: a larger share, or
//! the effect it can still detect by the window's end (the sizing inverse).

use crate::forecast::units_on;
use crate::plan::{Plan, RunningOutlook, Status};
use crate::portfolio::progress::{Progress, State};
use crate::portfolio::{Portfolio, Scale};
use crate::schedule::{self, Excluded, FixedRun, PlanRequest};
use crate::sizing::{self, round_days};
pub(crate) use crate::words::thousands;
use chrono::{Duration, NaiveDate};
use std::fmt;

/// How far past the window a running test's end is searched (ten years).
const HORIZON_DAYS: i64 = 3653;

/// `--scale POOL=FACTOR[@FROM]`: a lasting change of a pool's traffic.
#[derive(Debug, Clone, PartialEq)]
pub struct ScaleArg {
    /// The pool's id.
    pub pool: String,
    /// The multiplier, >= 0; 0.7 is a 30% drop.
    pub factor: f64,
    /// From this day on; the re-plan's today when not given.
    pub from: Option<NaiveDate>,
}

impl std::str::FromStr for ScaleArg {
    type Err = String;

    fn from_str(s: &str) -> Result<ScaleArg, String> {
        let hint = "write POOL=FACTOR or POOL=FACTOR@YYYY-MM-DD, e.g. `checkout=0.7@2027-02-01`";
        let (pool, rest) = s
            .split_once('=')
            .ok_or_else(|| format!("`{s}` has no `=`; {hint}"))?;
        let (factor, from) = match rest.split_once('@') {
            Some((f, d)) => (f, Some(d)),
            None => (rest, None),
        };
        let factor: f64 = factor
            .trim()
            .parse()
            .map_err(|_| format!("`{factor}` is not a number; {hint}"))?;
        if !(factor.is_finite() && factor >= 0.0) {
            return Err(format!(
                "the factor must be a number >= 0 (0.7 for a 30% drop); {hint}"
            ));
        }
        let from = match from {
            Some(d) => Some(
                NaiveDate::parse_from_str(d.trim(), "%Y-%m-%d")
                    .map_err(|_| format!("`{d}` is not a date; {hint}"))?,
            ),
            None => None,
        };
        let pool = pool.trim().to_string();
        if pool.is_empty() {
            return Err(format!("the pool is missing; {hint}"));
        }
        Ok(ScaleArg { pool, factor, from })
    }
}

/// Why a re-plan could not be made.
#[derive(Debug, Clone, PartialEq)]
pub struct ReplanError(pub String);

impl fmt::Display for ReplanError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for ReplanError {}

/// Applies `--scale` what-ifs to the portfolio's forecasts.
pub fn apply_scales(
    portfolio: &mut Portfolio,
    scales: &[ScaleArg],
    today: NaiveDate,
) -> Result<(), ReplanError> {
    for s in scales {
        let Some(i) = portfolio.pool_index(&s.pool) else {
            let ids: Vec<&str> = portfolio.pools.iter().map(|p| p.id.as_str()).collect();
            let ids = crate::diagnostic::closest_first(&s.pool, &ids);
            return Err(ReplanError(format!(
                "`--scale`: pool `{}` is not defined; defined pools, closest first: {}",
                s.pool,
                crate::diagnostic::list(&ids)
            )));
        };
        portfolio.pools[i].forecast.scales.push(Scale {
            from: s.from.unwrap_or(today),
            factor: s.factor,
        });
    }
    Ok(())
}

/// A running test as the progress file gives it.
#[derive(Debug, Clone, Copy)]
struct Run {
    /// Index into `Portfolio::experiments`.
    experiment: usize,
    start: NaiveDate,
    /// The share it has run at so far.
    share: f64,
    /// Units over all arms collected up to the end of the day before `as_of`.
    collected: u64,
    as_of: NaiveDate,
}

impl Run {
    /// Its share on `day` when it runs at `from_today` from `today` on.
    fn share_on(&self, day: NaiveDate, from_today: f64, today: NaiveDate) -> f64 {
        if day < today {
            self.share
        } else {
            from_today
        }
    }
}

/// A running test's last day of data when it runs at `share` from `today`
/// on (at its old share before): counted from `as_of` with the units
/// already collected, never before `today`, at least its minimum run from
/// its start, and whole weeks from its start when asked. A test already
/// past its need therefore ends today, or on the last day of the week (from
/// its start) that today falls in. `None` past the ten-year horizon.
fn running_end(
    portfolio: &Portfolio,
    run: &Run,
    share: f64,
    today: NaiveDate,
) -> Option<NaiveDate> {
    let e = &portfolio.experiments[run.experiment];
    let pool = &portfolio.pools[e.pool];
    let need = e.need.total.saturating_sub(run.collected) as f64;
    let first = run.as_of.max(run.start);
    let mut reached = first - Duration::days(1);
    if need > 0.0 {
        let mut total = 0.0;
        let mut day = first;
        let limit = first + Duration::days(HORIZON_DAYS);
        loop {
            total += run.share_on(day, share, today) * units_on(pool, day);
            if total >= need * (1.0 - 1e-9) {
                break;
            }
            day += Duration::days(1);
            if day > limit {
                return None;
            }
        }
        reached = day;
    }
    let end = reached.max(today);
    let days = (end - run.start).num_days() as u64 + 1;
    let days = round_days(days, e.min_days, e.whole_weeks);
    Some(run.start + Duration::days(days as i64 - 1))
}

/// Units a running test will have by the window's end at `share` from today.
fn units_by_window_end(portfolio: &Portfolio, run: &Run, share: f64, today: NaiveDate) -> f64 {
    let e = &portfolio.experiments[run.experiment];
    let pool = &portfolio.pools[e.pool];
    let mut day = run.as_of.max(run.start);
    let mut total = run.collected as f64;
    while day <= portfolio.window.end {
        total += run.share_on(day, share, today) * units_on(pool, day);
        day += Duration::days(1);
    }
    total
}

fn percent(share: f64) -> String {
    format!("{:.0}%", share * 100.0)
}

/// The outlook of one running test at `share` from today, and a rescue
/// when it cannot finish inside the window.
fn outlook(portfolio: &Portfolio, run: &Run, share: f64, today: NaiveDate) -> RunningOutlook {
    let e = &portfolio.experiments[run.experiment];
    let end = running_end(portfolio, run, share, today);
    let fits = end.is_some_and(|d| d <= portfolio.window.end);
    let mut outlook = RunningOutlook {
        id: e.id.clone(),
        started: run.start,
        share,
        collected: run.collected,
        units_needed: e.need.total,
        end,
        fits_window: fits,
        rescue_share: None,
        detectable_effect: None,
        advice: None,
    };
    if fits {
        return outlook;
    }
    // The smallest allowed share level above the current one that ends in time.
    outlook.rescue_share = portfolio
        .share_levels
        .iter()
        .copied()
        .filter(|&s| s > share + 1e-9 && s <= e.max_share + 1e-9)
        .find(|&s| {
            running_end(portfolio, run, s, today).is_some_and(|d| d <= portfolio.window.end)
        });
    // The effect the units in hand by the window's end can detect.
    let by_end = units_by_window_end(portfolio, run, share, today);
    let d = &e.design;
    let per_control = by_end / (1.0 + f64::from(d.arms - 1) * d.ratio);
    outlook.detectable_effect = sizing::minimum_detectable_effect(d, per_control).ok();
    let when = match end {
        Some(day) => format!(
            "at {} it would reach its {} units on {day}",
            percent(share),
            thousands(e.need.total)
        ),
        None => format!(
            "at {} it would not reach its {} units within ten years",
            percent(share),
            thousands(e.need.total)
        ),
    };
    let mut advice = format!(
        "cannot reach its sample by the window's end ({}): {when}",
        portfolio.window.end
    );
    match outlook.rescue_share {
        Some(s) => advice.push_str(&format!(
            "; a share of {} from today would finish it in time",
            percent(s)
        )),
        None => advice.push_str(&format!(
            "; no share up to its maximum of {} finishes it in time",
            percent(e.max_share)
        )),
    }
    match outlook.detectable_effect {
        Some(effect) => {
            let (kind, planned) = match d.effect {
                sizing::Effect::Relative(x) => (
                    format!("a relative effect of {:.1}%", effect * 100.0),
                    format!("{:.1}%", x * 100.0),
                ),
                sizing::Effect::Absolute(x) => {
                    (format!("an absolute effect of {effect:.4}"), format!("{x}"))
                }
            };
            advice.push_str(&format!(
                "; stopped at the window's end it can detect {kind} (planned MDE: {planned})"
            ));
        }
        None => advice.push_str(
            "; stopped at the window's end it has too few units to detect any effect at the planned power",
        ),
    }
    outlook.advice = Some(advice);
    outlook
}

/// Re-plans `portfolio` (with any `--scale` already applied) from `today`
/// given `progress`. Running tests keep their start and share, unless the
/// portfolio allows re-sharing running tests: then a test that cannot
/// finish in the window takes the smallest share level that rescues it,
/// from today, where its pool has room.
pub fn replan(
    portfolio: &Portfolio,
    progress: &Progress,
    today: NaiveDate,
    base: &PlanRequest,
) -> Result<(Plan, PlanRequest), ReplanError> {
    let mut request = PlanRequest {
        today: Some(today),
        fixed: Vec::new(),
        excluded: Vec::new(),
        ..base.clone()
    };
    let mut outlooks = Vec::new();
    for entry in &progress.entries {
        match &entry.state {
            State::Running {
                started,
                share,
                units,
                ..
            } => {
                let run = Run {
                    experiment: entry.experiment,
                    start: *started,
                    share: *share,
                    collected: *units,
                    as_of: progress.as_of,
                };
                let mut o = outlook(portfolio, &run, *share, today);
                let mut run_share = *share;
                if !o.fits_window && portfolio.planning.reshare_running {
                    if let Some(s) = o.rescue_share {
                        run_share = s;
                        o = outlook(portfolio, &run, s, today);
                        o.advice = Some(format!(
                            "re-shared from {} to {} from {today} so it finishes in the window; the arms' split is unchanged",
                            percent(*share),
                            percent(s)
                        ));
                    }
                }
                // Past the horizon it still holds its traffic to the window's end.
                let end = o
                    .end
                    .unwrap_or(portfolio.window.end + Duration::days(HORIZON_DAYS));
                request.fixed.push(FixedRun {
                    experiment: entry.experiment,
                    start: *started,
                    share: run_share,
                    end,
                });
                outlooks.push(o);
            }
            State::Finished { ended, .. } => request.excluded.push(Excluded {
                experiment: entry.experiment,
                ended: Some(ended.unwrap_or(today - Duration::days(1))),
                reason: format!(
                    "finished{}",
                    match ended {
                        Some(d) => format!(" on {d}"),
                        None => String::new(),
                    }
                ),
            }),
            State::Cancelled { note } => request.excluded.push(Excluded {
                experiment: entry.experiment,
                ended: None,
                reason: if note.is_empty() {
                    "cancelled".to_string()
                } else {
                    format!("cancelled: {note}")
                },
            }),
        }
    }
    let mut plan = schedule::plan(portfolio, &request);
    for entry in &progress.entries {
        let pe = &mut plan.experiments[entry.experiment];
        pe.status = match entry.state {
            State::Running { .. } => Status::Running,
            State::Finished { .. } => Status::Finished,
            State::Cancelled { .. } => Status::Cancelled,
        };
        let id = &portfolio.experiments[entry.experiment].id;
        if let Some(advice) = outlooks
            .iter()
            .find(|o| &o.id == id)
            .and_then(|o| o.advice.clone())
        {
            pe.reason = Some(advice);
        }
    }
    plan.running = outlooks;
    Ok((plan, request))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::portfolio::progress::Entry;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    /// One flat pool of 1,000 units a day (no weekday pattern, no
    /// adjustments), so every expected date below is plain arithmetic.
    fn flat(whole_weeks: bool, min_days: u32, reshare: bool) -> Portfolio {
        let text = format!(
            "name: flat\nwindow: {{start: 2027-01-04, end: 2027-04-04}}\n\
             defaults: {{min_days: {min_days}, whole_weeks: {whole_weeks}}}\n\
             planning: {{reshare_running: {reshare}}}\n\
             pools:\n  - {{id: shop, daily: 1000, sharing: split, max_concurrent: 2}}\n\
             experiments:\n  - {{id: hero, pool: shop, baseline: 0.1, mde: 0.1}}\n\
             \x20 - {{id: banner, pool: shop, baseline: 0.1, mde: 0.2}}\n"
        );
        crate::portfolio::load_str(&text, "flat.yaml").unwrap()
    }

    fn need(p: &Portfolio) -> u64 {
        p.experiments[0].need.total
    }

    fn run(start: &str, share: f64, collected: u64, as_of: &str) -> Run {
        Run {
            experiment: 0,
            start: d(start),
            share,
            collected,
            as_of: d(as_of),
        }
    }

    #[test]
    fn scale_args_parse_with_and_without_a_date() {
        let s: ScaleArg = "home=0.7@2027-02-03".parse().unwrap();
        assert_eq!(
            s,
            ScaleArg {
                pool: "home".into(),
                factor: 0.7,
                from: Some(d("2027-02-03")),
            }
        );
        let s: ScaleArg = " search = 0 ".parse().unwrap();
        assert_eq!((s.pool.as_str(), s.factor, s.from), ("search", 0.0, None));
        let s: ScaleArg = "app-onboarding=1.25".parse().unwrap();
        assert_eq!(s.factor, 1.25);
    }

    #[test]
    fn bad_scale_args_say_what_is_wrong_and_how_to_write_it() {
        for (arg, says) in [
            ("home", "has no `=`"),
            ("home=lots", "`lots` is not a number"),
            ("home=-0.3", "must be a number >= 0"),
            ("home=NaN", "must be a number >= 0"),
            ("home=inf", "must be a number >= 0"),
            ("home=0.7@next-week", "`next-week` is not a date"),
            ("home=0.7@2027-02-30", "is not a date"),
            ("=0.7", "the pool is missing"),
        ] {
            let e = arg.parse::<ScaleArg>().unwrap_err();
            assert!(e.contains(says), "{arg}: {e}");
            assert!(e.contains("POOL=FACTOR@YYYY-MM-DD"), "{arg}: {e}");
        }
    }

    #[test]
    fn apply_scales_names_an_unknown_pool_and_defaults_to_today() {
        let mut p = flat(false, 1, false);
        let e = apply_scales(&mut p, &["shoop=0.5".parse().unwrap()], d("2027-02-01")).unwrap_err();
        assert!(e.0.contains("pool `shoop` is not defined"), "{e}");
        assert!(e.0.contains("`shop`"), "{e}");
        apply_scales(&mut p, &["shop=0.5".parse().unwrap()], d("2027-02-01")).unwrap();
        let pool = &p.pools[0];
        assert_eq!(units_on(pool, d("2027-01-31")), 1000.0);
        assert_eq!(units_on(pool, d("2027-02-01")), 500.0);
    }

    #[test]
    fn running_end_counts_the_remaining_need_from_as_of() {
        // 500 units a day at 50%; 10 days of need left from 2027-02-01 are
        // in on 2027-02-10, day 38 from the start on 2027-01-04.
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 5000, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-01")),
            Some(d("2027-02-10"))
        );
        // Whole weeks: 38 days round up to 42, the last on 2027-02-14.
        let p = flat(true, 14, false);
        let r = run("2027-01-04", 0.5, need(&p) - 5000, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-01")),
            Some(d("2027-02-14"))
        );
    }

    #[test]
    fn running_end_projects_from_the_day_the_counts_were_read() {
        // Counts read on 2027-01-30 with 5 days left: in on 2027-02-03,
        // even though the re-plan is made on 2027-02-01.
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 2500, "2027-01-30");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-01")),
            Some(d("2027-02-03"))
        );
        // The same counts read on the day of the re-plan end two days later.
        let r = run("2027-01-04", 0.5, need(&p) - 2500, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-01")),
            Some(d("2027-02-05"))
        );
    }

    #[test]
    fn a_new_share_applies_from_today_not_from_as_of() {
        // Read on 2027-01-30 with 4,000 units to go; at 50% until today
        // (2027-02-01: 1,000 in two days), then 100%: 3,000 more by 2027-02-03.
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 4000, "2027-01-30");
        assert_eq!(
            running_end(&p, &r, 1.0, d("2027-02-01")),
            Some(d("2027-02-03"))
        );
    }

    #[test]
    fn running_end_keeps_the_minimum_run_from_the_start() {
        // Started 2027-01-25 and nearly done: the 14-day minimum from its
        // start ends it on 2027-02-07, not on 2027-02-01.
        let p = flat(false, 14, false);
        let r = run("2027-01-25", 0.5, need(&p) - 100, "2027-02-01");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-01")),
            Some(d("2027-02-07"))
        );
    }

    #[test]
    fn a_test_past_its_need_ends_today_or_at_the_end_of_its_week() {
        // docs/progress.md: "A test already past its need therefore ends
        // today, or at the end of the week it is in."
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) + 10, "2027-02-03");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-03")),
            Some(d("2027-02-03"))
        );
        // Whole weeks from its Monday start: today (Wednesday, day 31) is in
        // its fifth week, which ends on Sunday 2027-02-07.
        let p = flat(true, 14, false);
        let r = run("2027-01-04", 0.5, need(&p) + 10, "2027-02-03");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-03")),
            Some(d("2027-02-07"))
        );
        // Exactly at its need: the same.
        let r = run("2027-01-04", 0.5, need(&p), "2027-02-03");
        assert_eq!(
            running_end(&p, &r, 0.5, d("2027-02-03")),
            Some(d("2027-02-07"))
        );
    }

    #[test]
    fn a_pool_without_traffic_never_finishes_a_run() {
        let mut p = flat(false, 1, false);
        apply_scales(&mut p, &["shop=0".parse().unwrap()], d("2027-02-01")).unwrap();
        let r = run("2027-01-04", 0.5, need(&p) / 2, "2027-02-01");
        assert_eq!(running_end(&p, &r, 0.5, d("2027-02-01")), None);
        let o = outlook(&p, &r, 0.5, d("2027-02-01"));
        assert!(!o.fits_window);
        assert_eq!(o.rescue_share, None);
        let advice = o.advice.unwrap();
        assert!(advice.contains("within ten years"), "{advice}");
        assert!(
            advice.contains("no share up to its maximum of 100%"),
            "{advice}"
        );
    }

    /// Started 2027-01-04 at 10% (100 a day) with 28 days in: far from
    /// done by the window's end on 2027-04-04.
    fn slow() -> Run {
        run("2027-01-04", 0.1, 2800, "2027-02-01")
    }

    #[test]
    fn a_test_that_cannot_finish_gets_its_date_a_rescue_share_and_its_detectable_effect() {
        let p = flat(false, 1, false);
        let today = d("2027-02-01");
        let r = slow();
        let remaining = need(&p) - 2800;
        let o = outlook(&p, &r, 0.1, today);
        assert!(!o.fits_window);
        // At 100 a day, the need is in after ceil(remaining / 100) days.
        let days = remaining.div_ceil(100) as i64;
        assert_eq!(o.end, Some(today + Duration::days(days - 1)));
        assert!(o.end.unwrap() > p.window.end);
        // The window has 63 days from today (2027-02-01..2027-04-04): the
        // smallest level with share x 1,000 x 63 >= remaining rescues it.
        let left = 63.0 * 1000.0;
        let rescue = p
            .share_levels
            .iter()
            .copied()
            .find(|s| s * left >= remaining as f64)
            .expect("some level fits");
        assert_eq!(o.rescue_share, Some(rescue));
        let below: Vec<f64> = p
            .share_levels
            .iter()
            .copied()
            .filter(|s| *s > 0.1 && *s < rescue)
            .collect();
        for s in below {
            assert!(running_end(&p, &r, s, today).unwrap() > p.window.end, "{s}");
        }
        // By the window's end it has 2,800 + 63 x 100 = 9,100 units, 4,550
        // an arm: the effect those detect at the planned power, cross-checked
        // by the forward formula giving back (about) the same units.
        let mde = o.detectable_effect.unwrap();
        let design = &p.experiments[0].design;
        assert_eq!(
            mde,
            sizing::minimum_detectable_effect(design, 4550.0).unwrap()
        );
        assert!(mde > 0.1, "a larger effect than planned: {mde}");
        let back = sizing::sample_size(&sizing::Design {
            effect: sizing::Effect::Relative(mde),
            ..*design
        })
        .unwrap();
        assert!(
            (4550..=4551).contains(&back.control),
            "sample_size of the detectable effect gives {} an arm",
            back.control
        );
        let advice = o.advice.unwrap();
        assert!(
            advice.contains(&format!("on {}", o.end.unwrap())),
            "{advice}"
        );
        assert!(
            advice.contains(&format!(
                "a share of {:.0}% from today would finish it in time",
                rescue * 100.0
            )),
            "{advice}"
        );
        assert!(
            advice.contains(&format!("a relative effect of {:.1}%", mde * 100.0)),
            "{advice}"
        );
        assert!(advice.contains("(planned MDE: 10.0%)"), "{advice}");
    }

    #[test]
    fn a_test_that_fits_gets_no_advice() {
        let p = flat(false, 1, false);
        let r = run("2027-01-04", 0.5, need(&p) - 5000, "2027-02-01");
        let o = outlook(&p, &r, 0.5, d("2027-02-01"));
        assert!(o.fits_window);
        assert_eq!(o.advice, None);
        assert_eq!(o.rescue_share, None);
        assert_eq!(o.detectable_effect, None);
    }

    fn progress_of(r: &Run) -> Progress {
        Progress {
            as_of: r.as_of,
            entries: vec![Entry {
                experiment: r.experiment,
                state: State::Running {
                    started: r.start,
                    share: r.share,
                    units: r.collected,
                    units_per_arm: None,
                },
            }],
            warnings: Vec::new(),
        }
    }

    #[test]
    fn reshare_running_applies_the_rescue_share_only_where_allowed() {
        let today = d("2027-02-01");
        // Not allowed: the test keeps 10% and runs past the window.
        let p = flat(false, 1, false);
        let r = slow();
        let rescue = outlook(&p, &r, 0.1, today).rescue_share.unwrap();
        let (plan, request) = replan(&p, &progress_of(&r), today, &PlanRequest::default()).unwrap();
        assert_eq!(request.fixed[0].share, 0.1);
        assert!(request.fixed[0].end > p.window.end);
        assert_eq!(plan.experiments[0].status, Status::Running);
        assert_eq!(plan.experiments[0].start, Some(d("2027-01-04")));
        assert_eq!(plan.experiments[0].share, Some(0.1));
        assert!(!plan.running[0].fits_window);
        assert!(plan.experiments[0]
            .reason
            .as_deref()
            .unwrap()
            .contains("cannot reach its sample"));
        schedule::verify(&p, &request, &plan).unwrap();

        // Allowed: it takes the rescue share from today and ends in time.
        let p = flat(false, 1, true);
        let (plan, request) = replan(&p, &progress_of(&r), today, &PlanRequest::default()).unwrap();
        let fixed = &request.fixed[0];
        assert_eq!(fixed.share, rescue);
        assert_eq!(fixed.start, d("2027-01-04"));
        assert_eq!(Some(fixed.end), running_end(&p, &r, rescue, today));
        assert!(fixed.end <= p.window.end);
        assert_eq!(plan.experiments[0].share, Some(rescue));
        assert_eq!(plan.experiments[0].start, Some(d("2027-01-04")));
        let o = &plan.running[0];
        assert!(o.fits_window);
        assert_eq!(o.share, rescue);
        assert!(o.advice.as_deref().unwrap().contains(&format!(
            "re-shared from 10% to {:.0}% from 2027-02-01",
            rescue * 100.0
        )));
        schedule::verify(&p, &request, &plan).unwrap();
    }

    #[test]
    fn finished_and_cancelled_tests_free_their_pool() {
        let p = flat(false, 1, false);
        let today = d("2027-02-01");
        let progress = Progress {
            as_of: today,
            entries: vec![
                Entry {
                    experiment: 0,
                    state: State::Finished {
                        started: Some(d("2027-01-04")),
                        ended: None,
                    },
                },
                Entry {
                    experiment: 1,
                    state: State::Cancelled {
                        note: "legal review".into(),
                    },
                },
            ],
            warnings: Vec::new(),
        };
        let (plan, request) = replan(&p, &progress, today, &PlanRequest::default()).unwrap();
        assert_eq!(plan.experiments[0].status, Status::Finished);
        assert_eq!(plan.experiments[1].status, Status::Cancelled);
        assert_eq!(request.excluded[0].ended, Some(d("2027-01-31")));
        assert_eq!(request.excluded[1].reason, "cancelled: legal review");
        assert!(plan.pools[0].days.iter().all(|day| day.running == 0));
        schedule::verify(&p, &request, &plan).unwrap();
    }
}

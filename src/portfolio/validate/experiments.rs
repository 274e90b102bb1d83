//! Every experiment's own keys, checked in one order: its pools, its
//! sizing (a given `sample_size`, or its metrics with the interim looks),
//! its limits (`eligible`, `priority`, `max_share`, `min_days`), its
//! dates, `after`, `not_with` and `ramp`. Then the pairs kept apart are
//! made to hold both ways, and the `after` order is worked out once; a
//! cycle in it is reported.

use super::super::model::*;
use super::super::raw::*;
use super::design::shared;
use super::metrics::{looks_count, metrics, short_form_keys, size_metrics, BOUNDARIES};
use super::relations::{after, apart, cycles, keep_apart_both_ways};
use super::{days_ok, ids, inside, is_share, text_or, whole, Ctx, Entry, Names};
use crate::diagnostic;
use crate::share::{Share, ShareLevels};
use crate::sizing::{Design, Effect, Metric, SampleSize};
use chrono::NaiveDate;

/// What every experiment is read against: the file's pools, experiments,
/// window, defaults and share levels.
struct Scope<'a> {
    pool_ids: &'a Names<'a>,
    /// The experiments' ids, for `after` and `not_with`.
    id_refs: &'a Names<'a>,
    window: Option<Window>,
    d: &'a Defaults,
    /// Whether the defaults were read without a problem.
    defaults_ok: bool,
    share_levels: &'a ShareLevels,
}

/// Checks every experiment; returns them with the `after` order (None
/// when the `after` graph has a cycle, which is reported).
pub(super) fn experiments(
    cx: &mut Ctx,
    raw: Vec<RawExperiment>,
    pool_ids: &Names,
    window: Option<Window>,
    d: &Defaults,
    defaults_ok: bool,
    share_levels: &ShareLevels,
) -> (Vec<Experiment>, Option<Vec<usize>>) {
    let ids = ids(
        cx,
        "experiments",
        "experiment",
        raw.iter().map(|e| e.id.as_ref()).collect(),
    );
    let id_refs = Names::new(ids.iter().map(|s| s.as_str()));
    let scope = Scope {
        pool_ids,
        id_refs: &id_refs,
        window,
        d,
        defaults_ok,
        share_levels,
    };
    let mut out = Vec::new();
    for (i, (e, id)) in raw.iter().zip(&ids).enumerate() {
        let entry = Entry {
            e,
            i,
            id,
            who: format!("experiment `{id}`: "),
            what: format!("experiment `{id}`"),
        };
        out.push(experiment(cx, &entry, &scope));
    }
    keep_apart_both_ways(&mut out);
    // The order every later stage reads; only a cycle stops it.
    let order = after_order(&out);
    if order.is_none() {
        cycles(cx, &out);
    }
    (out, order)
}

/// One experiment, its keys checked in the order its problems are told.
fn experiment(cx: &mut Ctx, t: &Entry, scope: &Scope) -> Experiment {
    let (e, d) = (t.e, scope.d);
    let pools = experiment_pools(cx, e, t.i, &t.who, &t.what, scope.pool_ids);
    let sized = sizing(cx, t, scope);
    let limits = limits(cx, t, scope);
    let (earliest, deadline) = dates(cx, t, scope.window);
    let after = after(cx, t, scope.id_refs);
    let (not_with, apart_traffic) = apart(cx, t, scope.id_refs);
    let ramp = ramp(
        cx,
        e,
        t.i,
        &t.who,
        scope.window,
        limits.max_share,
        scope.share_levels,
    );
    Experiment {
        id: t.id.to_string(),
        title: text_or(&e.title, t.id),
        owner: text_or(&e.owner, ""),
        pools,
        ramp,
        ramp_counts: e.ramp_counts.unwrap_or(false),
        design: sized.design,
        need: sized.need,
        sample_size_given: e.sample_size.is_some(),
        eligible: limits.eligible,
        looks: sized.looks,
        metrics: sized.metrics,
        driver: sized.driver,
        priority: limits.priority,
        earliest_start: earliest,
        deadline,
        max_share: Share::from_fraction(limits.max_share),
        min_days: limits.min_days,
        whole_weeks: e.whole_weeks.unwrap_or(d.whole_weeks),
        after,
        not_with,
        apart_traffic,
    }
}

/// What sizing makes of one experiment: its design, its need, its looks,
/// its metrics' plans and the driving metric's name.
struct Sized {
    design: Design,
    need: SampleSize,
    looks: Option<Looks>,
    metrics: Vec<MetricPlan>,
    driver: String,
}

/// An experiment sized: from a given `sample_size`, or from its metrics
/// with its looks (its own or the defaults'); a placeholder design and
/// an empty need after a problem.
fn sizing(cx: &mut Ctx, t: &Entry, scope: &Scope) -> Sized {
    let (e, d) = (t.e, scope.d);
    let looks_given = e.looks.is_some();
    let count = looks_count(cx, &t.at("looks"), &t.who, e.looks);
    let boundary = cx.choice(
        &t.at("boundary"),
        &t.who,
        &e.boundary,
        &BOUNDARIES,
        d.boundary,
    );
    let count = if looks_given { count } else { Some(d.looks) };
    let given = e
        .sample_size
        .and_then(|n| given_size(cx, e, t.i, &t.who, n, d, scope.defaults_ok));
    let sized = if e.sample_size.is_some() {
        None
    } else {
        metrics(cx, e, t.i, &t.who, &t.what, d, scope.defaults_ok)
    };
    let (design, need, looks, metrics, driver) = match (sized, count) {
        _ if e.sample_size.is_some() => (
            given.map(|g| g.0),
            given.map(|g| g.1),
            None,
            Vec::new(),
            String::new(),
        ),
        (Some(m), Some(count)) => size_metrics(cx, m, count, boundary, &t.who),
        (Some(m), None) => {
            let design = m.first().map(|(_, plan)| plan.design);
            (design, None, None, Vec::new(), String::new())
        }
        (None, _) => (None, None, None, Vec::new(), String::new()),
    };
    let design = design.unwrap_or_else(|| {
        Design::new(
            Metric::Rate { baseline: f64::NAN },
            Effect::Relative(f64::NAN),
        )
    });
    Sized {
        design,
        need: need.unwrap_or(SampleSize {
            control_exact: 0.0,
            treatment_exact: 0.0,
            control: 0,
            treatment: 0,
            arms: design.arms,
            total: 0,
            comparison_alpha: 0.0,
        }),
        looks,
        metrics,
        driver,
    }
}

/// An experiment's limits, each checked (a bad value falls back to its
/// default where the model needs one).
struct Limits {
    eligible: f64,
    priority: f64,
    /// As written: the ramp is checked against it.
    max_share: f64,
    min_days: u32,
}

/// `eligible`, `priority`, `max_share` (not below the smallest share
/// level) and `min_days`, in that order.
fn limits(cx: &mut Ctx, t: &Entry, scope: &Scope) -> Limits {
    let (e, d, who) = (t.e, scope.d, t.who.as_str());
    let eligible = e.eligible.unwrap_or(1.0);
    let eligible_ok = cx.number(
        &t.at("eligible"),
        who,
        eligible,
        eligible > 0.0 && eligible <= 1.0,
        "in (0, 1]",
        "the fraction of the pool's units its targeting admits, e.g. 0.3 for logged-in visitors only; 1 admits all",
    );
    let priority = e.priority.unwrap_or(1.0);
    cx.number(
        &t.at("priority"),
        who,
        priority,
        priority > 0.0 && priority.is_finite() && priority <= 1e9,
        "a positive weight",
        "higher means more valuable; 1 is the default",
    );
    let max_share = e.max_share.unwrap_or(1.0);
    if cx.number(
        &t.at("max_share"),
        who,
        max_share,
        is_share(max_share),
        "a share in (0, 1]",
        "the largest fraction of the pool this test may take; 1 for no limit",
    ) {
        if let Some(lowest) = scope.share_levels.lowest() {
            if Share::from_fraction(max_share) < lowest {
                cx.err(
                    &t.at("max_share"),
                    format!("{who}`max_share` {max_share} is below the smallest share level {}; the planner could never run it", lowest.fraction()),
                    format!("raise `max_share` to at least {}, or add a smaller value to `share_levels`", lowest.fraction()),
                );
            }
        }
    }
    let min_days = e.min_days.unwrap_or(f64::from(d.min_days));
    let min_ok = days_ok(
        cx,
        &t.at("min_days"),
        who,
        min_days,
        "two weeks (14) is common practice",
    );
    Limits {
        eligible: if eligible_ok { eligible } else { 1.0 },
        priority,
        max_share,
        min_days: if min_ok { min_days as u32 } else { d.min_days },
    }
}

/// `earliest_start` and `deadline`, each inside the window, the deadline
/// not before the earliest start.
fn dates(
    cx: &mut Ctx,
    t: &Entry,
    window: Option<Window>,
) -> (Option<NaiveDate>, Option<NaiveDate>) {
    let (e, who) = (t.e, t.who.as_str());
    let earliest = cx.date(&t.at("earliest_start"), who, &e.earliest_start);
    let earliest = inside(cx, &t.at("earliest_start"), who, earliest, window);
    let deadline = cx.date(&t.at("deadline"), who, &e.deadline);
    let deadline = inside(cx, &t.at("deadline"), who, deadline, window);
    if let (Some(s), Some(dl)) = (earliest, deadline) {
        if dl < s {
            cx.err(
                &t.at("deadline"),
                format!("{who}`deadline` {dl} is before `earliest_start` {s}"),
                "the deadline is the last day its data may run to; it must come after the earliest start",
            );
        }
    }
    (earliest, deadline)
}

/// The keys `sample_size` replaces, as the file names them.
fn sizing_keys(e: &RawExperiment) -> Vec<&'static str> {
    let mut keys = short_form_keys(e);
    keys.extend(
        [
            ("metrics", e.metrics.is_some()),
            ("alpha", e.alpha.is_some()),
            ("power", e.power.is_some()),
            ("sides", e.sides.is_some()),
            ("correction", e.correction.is_some()),
            ("looks", e.looks.is_some()),
            ("boundary", e.boundary.is_some()),
            ("guardrail_alpha", e.guardrail_alpha.is_some()),
        ]
        .into_iter()
        .filter_map(|(k, given)| given.then_some(k)),
    );
    keys
}

/// A test whose control arm's units are given (`sample_size`): the
/// design (only its arms and ratio mean anything) and the need, each
/// treatment arm `ratio` x the control; None after a problem.
fn given_size(
    cx: &mut Ctx,
    e: &RawExperiment,
    i: usize,
    who: &str,
    n: f64,
    d: &Defaults,
    defaults_ok: bool,
) -> Option<(Design, SampleSize)> {
    let before = cx.errors.len();
    let key = format!("experiments[{i}].sample_size");
    cx.number(
        &key,
        who,
        n,
        whole(n, 1.0, 1e12),
        "a whole number of units from 1 to a trillion",
        "the control arm's units, known from elsewhere, e.g. `sample_size: 40000`",
    );
    let conflicts = sizing_keys(e);
    if let Some(first) = conflicts.first() {
        cx.err(
            &format!("experiments[{i}].{first}"),
            format!(
                "{who}both `sample_size` and {} are given",
                diagnostic::list(&conflicts)
            ),
            "`sample_size` gives the control arm's units and replaces the sizing keys; \
             remove the sizing keys, or remove `sample_size` to size the test from them",
        );
    }
    let (s, _) = shared(cx, e, i, who, d);
    if cx.errors.len() != before || !defaults_ok {
        return None;
    }
    let mut design = Design::new(
        Metric::Rate { baseline: f64::NAN },
        Effect::Relative(f64::NAN),
    );
    design.arms = s.arms;
    design.ratio = s.ratio;
    let treatment_exact = s.ratio * n;
    // Rounding noise must not add a unit: 0.1 x 30 is 3, not 4.
    let treatment = (treatment_exact - 1e-9 * treatment_exact).ceil() as u64;
    let need = SampleSize {
        control_exact: n,
        treatment_exact,
        control: n as u64,
        treatment,
        arms: s.arms,
        total: n as u64 + u64::from(s.arms - 1) * treatment,
        comparison_alpha: 0.0,
    };
    Some((design, need))
}

/// The pools an experiment runs on: `pool`, or every entry of `pools`
/// (one of the two, each pool once).
fn experiment_pools(
    cx: &mut Ctx,
    e: &RawExperiment,
    i: usize,
    who: &str,
    what: &str,
    pool_ids: &Names,
) -> Vec<usize> {
    let at = |k: &str| format!("experiments[{i}].{k}");
    match (&e.pool, &e.pools) {
        (Some(_), Some(_)) => {
            cx.err(
                &at("pools"),
                format!("{who}gives both `pool` and `pools`"),
                "keep one: `pool: home` for one pool, `pools: [home, search]` for several",
            );
            Vec::new()
        }
        (Some(p), None) => cx
            .reference(&at("pool"), who, p.as_str().trim(), "pool", pool_ids)
            .into_iter()
            .collect(),
        (None, Some(list)) => {
            if list.is_empty() {
                cx.err(
                    &at("pools"),
                    format!("{who}`pools` is empty"),
                    "name every pool it runs on, e.g. `pools: [home, search]`",
                );
            }
            let mut out: Vec<usize> = Vec::new();
            for (j, p) in list.iter().enumerate() {
                let key = format!("experiments[{i}].pools[{j}]");
                let id = p.as_str().trim();
                if let Some(k) = cx.reference(&key, who, id, "pool", pool_ids) {
                    if out.contains(&k) {
                        cx.err(
                            &key,
                            format!("{who}pool `{id}` is listed twice in `pools`"),
                            "list each pool once",
                        );
                    } else {
                        out.push(k);
                    }
                }
            }
            out
        }
        (None, None) => {
            cx.missing(
                &at("pool"),
                what,
                "name the pool whose traffic it uses, e.g. `pool: home`, or `pools: [home, search]` for several",
            );
            Vec::new()
        }
    }
}

/// The steps of an experiment's `ramp`: each share in (0, `max_share`]
/// with a share level at or above it that the test may take, each a whole
/// number of days, the whole ramp shorter than the window.
fn ramp(
    cx: &mut Ctx,
    e: &RawExperiment,
    i: usize,
    who: &str,
    window: Option<Window>,
    max_share: f64,
    share_levels: &ShareLevels,
) -> Vec<RampStep> {
    let mut out = Vec::new();
    let mut total = 0u64;
    let top = share_levels.largest_up_to(Share::from_fraction(max_share.clamp(0.0, 1.0)));
    for (j, step) in e.ramp.iter().flatten().enumerate() {
        let at = |k: &str| format!("experiments[{i}].ramp[{j}].{k}");
        let what = format!("ramp step {} of experiment `{}`", j + 1, leaf_id(who));
        let Some(share) = step.share else {
            cx.missing(
                &at("share"),
                &what,
                "give the step's share, e.g. `share: 0.05`",
            );
            continue;
        };
        let Some(days) = step.days else {
            cx.missing(
                &at("days"),
                &what,
                "give the step's length in days, e.g. `days: 2`",
            );
            continue;
        };
        let share_ok = cx.number(
            &at("share"),
            who,
            share,
            is_share(share),
            "a share in (0, 1]",
            "a ramp step's share of each of the test's pools, e.g. 0.05",
        );
        if share_ok {
            let s = Share::from_fraction(share);
            if top.is_none_or(|t| s > t) {
                let limit = top.map_or(0.0, Share::fraction);
                cx.err(
                    &at("share"),
                    format!(
                        "{who}ramp share {share} is above the largest share it may take ({limit})"
                    ),
                    "a ramp runs below the planned share: lower the step, or raise `max_share`",
                );
            }
        }
        let days_ok = days_ok(
            cx,
            &at("days"),
            who,
            days,
            "how many days the step holds its share, e.g. 2",
        );
        if share_ok && days_ok {
            total += days as u64;
            out.push(RampStep {
                share: Share::from_fraction(share),
                days: days as u32,
            });
        }
    }
    if let Some(w) = window {
        if !out.is_empty() && total >= w.days() as u64 {
            cx.err(
                &format!("experiments[{i}].ramp"),
                format!(
                    "{who}the ramp lasts {total} days, but the window has only {}",
                    w.days()
                ),
                "shorten the ramp: the test needs at least one day at its planned share",
            );
        }
    }
    out
}

/// The id inside a `who` prefix ("experiment `x`: ").
fn leaf_id(who: &str) -> &str {
    who.split('`').nth(1).unwrap_or(who)
}

#[cfg(test)]
mod calendar_key_tests {
    use crate::portfolio::load_str;
    use crate::share::Share;

    /// Three pools and two experiments; the first ends with `first` (its
    /// keys at four spaces from line 8), the second is `other` on `home`.
    fn file(first: &str) -> String {
        format!(
            "name: keys\nwindow: {{start: 2027-01-04, end: 2027-01-31}}\n\
             pools:\n  - {{id: home, daily: 10000, max_concurrent: 2}}\n\
             \x20 - {{id: search, daily: 5000, max_concurrent: 2, sharing: overlap}}\n\
             \x20 - {{id: product, daily: 5000, max_concurrent: 2}}\n\
             experiments:\n  - id: t\n    baseline: 0.1\n    mde: 0.1\n{first}\
             \x20 - id: other\n    pool: home\n    baseline: 0.1\n    mde: 0.1\n"
        )
    }

    fn error(first: &str) -> String {
        load_str(&file(first), "k.yaml").unwrap_err().to_string()
    }

    #[test]
    fn pools_list_every_pool_and_pool_is_its_short_form() {
        let p = load_str(&file("    pools: [search, home, product]\n"), "k.yaml").unwrap();
        assert_eq!(p.experiments[0].pools, vec![1, 0, 2]);
        assert_eq!(p.experiments[1].pools, vec![0]);
        let p = load_str(&file("    pool: search\n"), "k.yaml").unwrap();
        assert_eq!(p.experiments[0].pools, vec![1]);
    }

    #[test]
    fn bad_pools_name_the_key_and_line() {
        let err = error("    pool: home\n    pools: [home, search]\n");
        assert!(err.contains("k.yaml:12:"), "{err}");
        assert!(err.contains("gives both `pool` and `pools`"), "{err}");
        assert!(err.contains("keep one"), "{err}");
        let err = error("    pools: [home, serch]\n");
        assert!(err.contains("k.yaml:11:"), "{err}");
        assert!(err.contains("pool `serch` is not defined"), "{err}");
        assert!(err.contains("closest first: `search`"), "{err}");
        let err = error("    pools: [home, home]\n");
        assert!(
            err.contains("pool `home` is listed twice in `pools`"),
            "{err}"
        );
        let err = error("    pools: []\n");
        assert!(err.contains("`pools` is empty"), "{err}");
    }

    #[test]
    fn a_ramp_is_read_in_order_with_ramp_counts() {
        let p = load_str(
            &file(
                "    pool: home\n    ramp:\n      - {share: 0.05, days: 2}\n      - {share: 0.2, days: 3}\n    ramp_counts: true\n",
            ),
            "k.yaml",
        )
        .unwrap();
        let e = &p.experiments[0];
        assert_eq!(e.ramp.len(), 2);
        assert_eq!(e.ramp[0].share, Share::from_fraction(0.05));
        assert_eq!((e.ramp[0].days, e.ramp[1].days), (2, 3));
        assert!(e.ramp_counts);
        assert_eq!(e.ramp_days(), 5);
        // Day by day: the steps, then the planned share.
        let half = Share::from_fraction(0.5);
        assert_eq!(e.share_on_day(1, half), Share::from_fraction(0.05));
        assert_eq!(e.share_on_day(2, half), Share::from_fraction(0.2));
        assert_eq!(e.share_on_day(5, half), half);
        assert!(!p.experiments[1].ramp_counts);
    }

    #[test]
    fn bad_ramps_name_the_key_and_line() {
        let err = error("    pool: home\n    ramp:\n      - {share: 1.5, days: 2}\n");
        assert!(err.contains("k.yaml:13:"), "{err}");
        assert!(
            err.contains("`share` is 1.5; it must be a share in (0, 1]"),
            "{err}"
        );
        let err =
            error("    pool: home\n    max_share: 0.5\n    ramp:\n      - {share: 0.6, days: 2}\n");
        assert!(err.contains("k.yaml:14:"), "{err}");
        assert!(
            err.contains("ramp share 0.6 is above the largest share it may take (0.5)"),
            "{err}"
        );
        let err = error("    pool: home\n    ramp:\n      - {share: 0.1, days: 20}\n      - {share: 0.2, days: 8}\n");
        assert!(
            err.contains("the ramp lasts 28 days, but the window has only 28"),
            "{err}"
        );
        assert!(err.contains("k.yaml:13:"), "{err}");
        let err = error("    pool: home\n    ramp:\n      - {share: 0.1}\n");
        assert!(err.contains("has no `days`"), "{err}");
        let err = error("    pool: home\n    ramp:\n      - {share: 0.1, days: 2, hold: 1}\n");
        assert!(err.contains("unknown key `hold`"), "{err}");
    }

    #[test]
    fn not_with_entries_keep_apart_in_time_or_on_traffic() {
        let p = load_str(
            &file("    pool: home\n    not_with:\n      - {id: other, apart: traffic}\n"),
            "k.yaml",
        )
        .unwrap();
        assert_eq!(p.experiments[0].apart_traffic, vec![1]);
        assert_eq!(p.experiments[1].apart_traffic, vec![0], "symmetric");
        assert!(p.experiments[0].not_with.is_empty());
        for entry in ["other", "{id: other, apart: time}", "{id: other}"] {
            let p = load_str(
                &file(&format!("    pool: home\n    not_with: [{entry}]\n")),
                "k.yaml",
            )
            .unwrap();
            assert_eq!(p.experiments[0].not_with, vec![1], "{entry}");
            assert!(p.experiments[0].apart_traffic.is_empty(), "{entry}");
        }
        let err = error("    pool: home\n    not_with:\n      - {id: other, apart: trafic}\n");
        assert!(err.contains("k.yaml:13:"), "{err}");
        assert!(
            err.contains("`apart` is `trafic`; it must be one of"),
            "{err}"
        );
        assert!(err.contains("did you mean `traffic`?"), "{err}");
        let err = error("    pool: home\n    not_with:\n      - {apart: traffic}\n");
        assert!(err.contains("has no `id`"), "{err}");
    }
}

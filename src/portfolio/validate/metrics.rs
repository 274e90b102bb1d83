//! An experiment's metrics sized: the list and its roles, alpha split
//! across the primaries, each metric's need with the test's interim looks,
//! the driving metric and the secondaries' detectable effects; and the
//! same sizing again for a scenario's `mde` edit ([`resize`]).

use super::super::model::*;
use super::super::raw::*;
use super::design::{design, shared, sizing_error, MetricKeys};
use super::{whole, Ctx};
use crate::diagnostic;
use crate::sizing::{
    self, noninferiority,
    sequential::{self, Boundary},
    Correction, Design, Effect, SampleSize, SizingError,
};

/// Every boundary by its name in a file.
pub(super) const BOUNDARIES: [(&str, Boundary); 4] = [
    ("obrien-fleming", Boundary::ObrienFleming),
    ("pocock", Boundary::Pocock),
    ("spending-obrien-fleming", Boundary::SpendingObrienFleming),
    ("spending-pocock", Boundary::SpendingPocock),
];

/// A `looks` key: a whole number from 1 to 10, or None (reported) when not.
pub(super) fn looks_count(cx: &mut Ctx, key: &str, who: &str, v: Option<f64>) -> Option<u32> {
    let v = v?;
    cx.number(
        key,
        who,
        v,
        whole(v, 1.0, f64::from(sequential::MAX_LOOKS)),
        "a whole number from 1 to 10",
        "looks equally spaced in information; 1 reads the test once, at its end",
    )
    .then_some(v as u32)
}

/// A design with `count` looks: the maximum sample (the fixed size times
/// the inflation factor) and the looks' design; the fixed size itself for
/// one look.
fn with_looks(
    design: &Design,
    fixed: SampleSize,
    count: u32,
    boundary: Boundary,
) -> Result<(SampleSize, Option<Looks>), SizingError> {
    if count <= 1 {
        return Ok((fixed, None));
    }
    let plan = sequential::Plan {
        looks: count,
        boundary,
        alpha: design.comparison_alpha(),
        power: design.power,
        sides: design.sides,
    };
    let solved = sequential::solve_plan(&plan)?;
    let max = sequential::inflate(&fixed, design.ratio, solved.inflation)?;
    Ok((
        max,
        Some(Looks {
            boundary,
            fixed,
            design: solved,
        }),
    ))
}

/// Every role by its name in a file.
const ROLES: [(&str, Role); 3] = [
    ("primary", Role::Primary),
    ("guardrail", Role::Guardrail),
    ("secondary", Role::Secondary),
];

/// The metric keys written on an experiment (the short form of one
/// primary metric), with the names they have in the file.
pub(super) fn short_form_keys(e: &RawExperiment) -> Vec<&'static str> {
    [
        ("metric", e.metric.is_some()),
        ("baseline", e.baseline.is_some()),
        ("sd", e.sd.is_some()),
        ("mde", e.mde.is_some()),
        ("mde_abs", e.mde_abs.is_some()),
        ("rho", e.rho.is_some()),
        ("method", e.method.is_some()),
    ]
    .into_iter()
    .filter_map(|(k, given)| given.then_some(k))
    .collect()
}

/// An experiment's metrics, each with its keys and its design (the need
/// still unset); None when any key was wrong (every problem reported).
pub(super) fn metrics<'r>(
    cx: &mut Ctx,
    e: &'r RawExperiment,
    i: usize,
    who: &str,
    what: &str,
    d: &Defaults,
    defaults_ok: bool,
) -> Option<Vec<(MetricKeys<'r>, MetricPlan)>> {
    let before = cx.errors.len();
    let (s, _) = shared(cx, e, i, who, d);
    let guardrail_alpha = e.guardrail_alpha.unwrap_or(d.guardrail_alpha);
    let key = format!("experiments[{i}].guardrail_alpha");
    cx.number(
        &key,
        who,
        guardrail_alpha,
        guardrail_alpha > 0.0 && guardrail_alpha <= 0.5,
        "in (0, 0.5]",
        "the one-sided alpha of the guardrails; 0.05 is the default",
    );
    let Some(list) = &e.metrics else {
        let keys = MetricKeys::short(e, i);
        let (design, _) = design(cx, &keys, Role::Primary, who, what, d, &s, s.alpha);
        let plan = MetricPlan {
            name: "primary".into(),
            role: Role::Primary,
            design,
            need: None,
            detectable: None,
        };
        return (cx.errors.len() == before && defaults_ok).then(|| vec![(keys, plan)]);
    };
    let short = short_form_keys(e);
    if let Some(first) = short.first() {
        cx.err(
            &format!("experiments[{i}].{first}"),
            format!(
                "{who}both `metrics` and the short form's {} are given",
                diagnostic::list(&short)
            ),
            "the metric keys on the experiment are the short form of one primary metric; \
             move them into a `metrics` entry with `role: primary`",
        );
    }
    // Roles and names first: the primaries' count splits alpha.
    let mut roles = Vec::new();
    let mut names: Vec<String> = Vec::new();
    for (j, m) in list.iter().enumerate() {
        let at = |k: &str| format!("experiments[{i}].metrics[{j}].{k}");
        let entry = format!("metric {} of {what}", j + 1);
        let name = match &m.name {
            Some(n) => n.as_str().trim().to_string(),
            None => {
                cx.missing(
                    &at("name"),
                    &entry,
                    "name the metric, e.g. `name: revenue per visitor`",
                );
                format!("metric {}", j + 1)
            }
        };
        if m.name.is_some() && name.is_empty() {
            cx.err(
                &at("name"),
                format!("{who}a metric's `name` is empty"),
                "name the metric, e.g. `name: conversion`",
            );
        } else if m.name.is_some() && names.contains(&name) {
            cx.err(
                &at("name"),
                format!("{who}two metrics are named `{name}`"),
                "give each metric of a test its own name",
            );
        }
        names.push(name);
        let role = match &m.role {
            Some(_) => cx.choice(&at("role"), who, &m.role, &ROLES, Role::Secondary),
            None => {
                cx.missing(
                    &at("role"),
                    &entry,
                    "say what the metric does: `role: primary`, `guardrail` or `secondary`",
                );
                Role::Secondary
            }
        };
        roles.push(role);
    }
    let primaries = roles.iter().filter(|r| **r == Role::Primary).count();
    if primaries == 0 && !list.is_empty() && roles.len() == list.len() {
        cx.err(
            &format!("experiments[{i}].metrics"),
            format!("{what} has no primary metric"),
            "give one entry `role: primary`: the effect the test is run to detect",
        );
    } else if list.is_empty() {
        cx.err(
            &format!("experiments[{i}].metrics"),
            format!("{what} lists no metrics"),
            "list at least one metric with `role: primary`, or write its keys on the experiment",
        );
    }
    let alpha = primary_alpha(s.alpha, s.correction, primaries);
    let mut out = Vec::new();
    for (j, (m, (name, role))) in list.iter().zip(names.into_iter().zip(roles)).enumerate() {
        let keys = MetricKeys::entry(m, i, j);
        let mwho = format!("{who}metric `{name}`: ");
        let mwhat = format!("metric `{name}` of {what}");
        let alpha = match role {
            Role::Primary => alpha,
            Role::Guardrail => guardrail_alpha,
            Role::Secondary => s.alpha,
        };
        let (design, _) = design(cx, &keys, role, &mwho, &mwhat, d, &s, alpha);
        out.push((
            keys,
            MetricPlan {
                name,
                role,
                design,
                need: None,
                detectable: None,
            },
        ));
    }
    (cx.errors.len() == before && defaults_ok).then_some(out)
}

/// What sizing makes of an experiment's metrics: the primary design, the
/// need (the largest over the primary and guardrail metrics, with looks),
/// its looks, every metric's plan and the driving metric's name.
#[allow(clippy::type_complexity)]
pub(super) fn size_metrics(
    cx: &mut Ctx,
    list: Vec<(MetricKeys, MetricPlan)>,
    count: u32,
    boundary: Boundary,
    who: &str,
) -> (
    Option<Design>,
    Option<SampleSize>,
    Option<Looks>,
    Vec<MetricPlan>,
    String,
) {
    let primary = list
        .iter()
        .find(|(_, p)| p.role == Role::Primary)
        .map(|(_, p)| p.design);
    let mut ok = true;
    let mut best: Option<(SampleSize, Option<Looks>, String)> = None;
    let mut plans = Vec::new();
    for (keys, mut plan) in list {
        let mwho = if keys.prefix.contains(".metrics[") {
            format!("{who}metric `{}`: ", plan.name)
        } else {
            who.to_string()
        };
        let Some(sized) = size_one(&plan, count, boundary) else {
            plans.push((keys, plan));
            continue;
        };
        match sized {
            Ok((n, looks)) => {
                plan.need = Some(n);
                let larger = best
                    .as_ref()
                    .is_none_or(|(b, _, _)| (n.total, n.control) > (b.total, b.control));
                if larger {
                    best = Some((n, looks, plan.name.clone()));
                }
            }
            Err(err) => {
                sizing_error(cx, &keys, &mwho, &err);
                ok = false;
            }
        }
        plans.push((keys, plan));
    }
    let Some((need, looks, driver)) = best.filter(|_| ok) else {
        let plans = plans.into_iter().map(|(_, p)| p).collect();
        return (primary, None, None, plans, String::new());
    };
    let mut out = Vec::new();
    for (keys, mut plan) in plans {
        if plan.role == Role::Secondary {
            match sizing::minimum_detectable_effect(&plan.design, need.control_exact) {
                Ok(x) => plan.detectable = Some(x),
                Err(err) => {
                    let mwho = format!("{who}metric `{}`: ", plan.name);
                    sizing_error(cx, &keys, &mwho, &err);
                }
            }
        }
        out.push(plan);
    }
    (primary, Some(need), looks, out, driver)
}

/// One metric's need with `count` looks (the maximum sample) and the
/// looks' design; `None` for a secondary metric, which is not sized.
fn size_one(
    plan: &MetricPlan,
    count: u32,
    boundary: Boundary,
) -> Option<Result<(SampleSize, Option<Looks>), SizingError>> {
    let fixed = match plan.role {
        Role::Primary => size(&plan.design),
        Role::Guardrail => noninferiority::size(&plan.design),
        Role::Secondary => return None,
    };
    Some(fixed.and_then(|n| {
        // Looks inflate by the design the sample is sized with: a
        // guardrail's one-sided equivalent.
        let at = match plan.role {
            Role::Guardrail => noninferiority::equivalent(&plan.design)?,
            _ => plan.design,
        };
        with_looks(&at, n, count, boundary)
    }))
}

/// `ex` sized again with `effect` as its first primary metric's smallest
/// effect worth detecting (a scenario's `mde` edit): every need, the
/// looks, the driving metric and the secondaries' detectable effects
/// follow, by the same rules as the file's own sizing. A test whose
/// `sample_size` was given has no effect to change: it comes back as it
/// was (the caller refuses such an edit).
pub(crate) fn resize(ex: &Experiment, effect: Effect) -> Result<Experiment, SizingError> {
    let mut out = ex.clone();
    let (count, boundary) = match &ex.looks {
        Some(l) => (l.design.information.len() as u32, l.boundary),
        None => (1, Boundary::SpendingObrienFleming),
    };
    let first = out.metrics.iter().position(|m| m.role == Role::Primary);
    let Some(first) = first.filter(|_| !ex.sample_size_given) else {
        return Ok(out);
    };
    out.metrics[first].design.effect = effect;
    out.design = out.metrics[first].design;
    let mut best: Option<(SampleSize, Option<Looks>, String)> = None;
    for plan in &mut out.metrics {
        if let Some(sized) = size_one(plan, count, boundary) {
            let (n, looks) = sized?;
            plan.need = Some(n);
            if best
                .as_ref()
                .is_none_or(|(b, _, _)| (n.total, n.control) > (b.total, b.control))
            {
                best = Some((n, looks, plan.name.clone()));
            }
        }
    }
    let Some((need, looks, driver)) = best else {
        return Ok(out);
    };
    for plan in &mut out.metrics {
        if plan.role == Role::Secondary {
            plan.detectable = Some(sizing::minimum_detectable_effect(
                &plan.design,
                need.control_exact,
            )?);
        }
    }
    out.need = need;
    out.looks = looks;
    out.driver = driver;
    Ok(out)
}

/// The alpha of each of `primaries` primary metrics: the experiment's
/// alpha split by its correction, as across arms (Bonferroni alpha / m,
/// Sidak 1 - (1 - alpha)^(1/m), none alpha).
pub fn primary_alpha(alpha: f64, correction: Correction, primaries: usize) -> f64 {
    let m = primaries.max(1) as f64;
    match correction {
        Correction::None => alpha,
        Correction::Bonferroni => alpha / m,
        Correction::Sidak => 1.0 - (1.0 - alpha).powf(1.0 / m),
    }
}

/// The sample size of a design.
fn size(design: &Design) -> Result<SampleSize, SizingError> {
    sizing::sample_size(design)
}

#[cfg(test)]
mod looks_tests {
    use super::super::super::load::load_str;
    use crate::sizing::sequential::Boundary;

    fn file(defaults: &str, experiment: &str) -> String {
        format!(
            "name: looks\nwindow: {{start: 2027-01-04, end: 2027-03-28}}\n{defaults}\
             pools:\n  - {{id: home, daily: 10000, max_concurrent: 2}}\n\
             experiments:\n  - id: fixed\n    pool: home\n    baseline: 0.1\n    mde: 0.1\n\
             \x20 - id: looked\n    pool: home\n    baseline: 0.1\n    mde: 0.1\n{experiment}"
        )
    }

    #[test]
    fn looks_inflate_the_need_and_keep_the_fixed_size() {
        let text = file("", "    looks: 3\n    boundary: obrien-fleming\n");
        let p = load_str(&text, "looks.yaml").unwrap_or_else(|e| panic!("{e}"));
        let (fixed, looked) = (&p.experiments[0], &p.experiments[1]);
        assert!(fixed.looks.is_none());
        let looks = looked.looks.as_ref().expect("three looks");
        assert_eq!(looks.boundary, Boundary::ObrienFleming);
        assert_eq!(looks.fixed, fixed.need);
        assert_eq!(looks.design.boundaries.len(), 3);
        // Jennison & Turnbull (2000) Table 2.4, from memory: R_B(3) = 1.017
        // at power 0.8 (cross-checked in tests/reference/check_stats.py).
        let r = looks.design.inflation;
        assert!((r - 1.017).abs() < 1e-3, "{r}");
        let want = (fixed.need.control_exact * r).ceil() as u64;
        assert_eq!(looked.need.control, want);
        assert_eq!(looked.need.total, 2 * want);
    }

    #[test]
    fn defaults_give_every_test_its_looks() {
        let text = file("defaults: {looks: 4, boundary: pocock}\n", "    looks: 1\n");
        let p = load_str(&text, "looks.yaml").unwrap_or_else(|e| panic!("{e}"));
        let looks = p.experiments[0].looks.as_ref().expect("the default looks");
        assert_eq!(looks.boundary, Boundary::Pocock);
        assert_eq!(looks.design.information.len(), 4);
        // One look written on the test overrides the default.
        assert!(p.experiments[1].looks.is_none());
        assert_eq!(p.experiments[1].need, looks.fixed);
    }

    #[test]
    fn bad_looks_and_boundaries_name_the_key_and_line() {
        let text = file("", "    looks: 12\n    boundary: pocok\n");
        let err = load_str(&text, "looks.yaml").unwrap_err().to_string();
        assert!(err.contains("`looks` is 12"), "{err}");
        assert!(err.contains("looks.yaml:14"), "{err}");
        assert!(err.contains("did you mean `pocock`?"), "{err}");
        let text = file("defaults: {looks: 2.5}\n", "");
        let err = load_str(&text, "looks.yaml").unwrap_err().to_string();
        assert!(err.contains("a whole number from 1 to 10"), "{err}");
    }
}

#[cfg(test)]
mod metrics_tests {
    use super::super::super::load::load_str;
    use super::*;
    use crate::share::Share;
    use crate::sizing::{Method, Sides};

    /// A file whose one experiment ends with `experiment` (its keys at
    /// four spaces, starting on line 6).
    fn file(experiment: &str) -> String {
        format!(
            "name: metrics\nwindow: {{start: 2027-01-04, end: 2027-03-28}}\n\
             pools:\n  - {{id: home, daily: 10000, max_concurrent: 2}}\n\
             experiments:\n  - id: t\n    pool: home\n{experiment}"
        )
    }

    fn load(experiment: &str) -> Portfolio {
        load_str(&file(experiment), "m.yaml").unwrap_or_else(|e| panic!("{e}"))
    }

    fn error(experiment: &str) -> String {
        load_str(&file(experiment), "m.yaml")
            .unwrap_err()
            .to_string()
    }

    #[test]
    fn a_given_sample_size_is_the_control_and_ratio_times_it_each_treatment() {
        // 40,000 control units, two treatment arms at ratio 0.5: 20,000
        // each, 80,000 in total.
        let p = load("    sample_size: 40000\n    arms: 3\n    ratio: 0.5\n");
        let e = &p.experiments[0];
        assert!(e.sample_size_given);
        assert_eq!(
            (e.need.control, e.need.treatment, e.need.total),
            (40_000, 20_000, 80_000)
        );
        assert!(e.metrics.is_empty());
        // Ratio 1/3 of 30 units is 10, not 11: no unit from rounding noise.
        let p = load("    sample_size: 30\n    ratio: 0.3333333333333333\n");
        assert_eq!(p.experiments[0].need.treatment, 10);
        let p = load("    baseline: 0.1\n    mde: 0.1\n    eligible: 0.3\n");
        assert_eq!(p.experiments[0].eligible, 0.3);
        assert!(!p.experiments[0].sample_size_given);
    }

    #[test]
    fn a_given_sample_size_refuses_the_keys_it_replaces() {
        let err = error("    sample_size: 40000\n    mde: 0.1\n");
        assert!(
            err.contains("both `sample_size` and `mde` are given"),
            "{err}"
        );
        let err = error("    sample_size: 40000\n    power: 0.9\n    looks: 2\n");
        assert!(
            err.contains("both `sample_size` and `power`, `looks` are given"),
            "{err}"
        );
        for bad in ["0", "12.5", "-3"] {
            let err = error(&format!("    sample_size: {bad}\n"));
            assert!(err.contains("`sample_size` is"), "{err}");
        }
        let err = error("    baseline: 0.1\n    mde: 0.1\n    eligible: 0\n");
        assert!(
            err.contains("`eligible` is 0; it must be in (0, 1]"),
            "{err}"
        );
    }

    #[test]
    fn holdouts_come_from_the_pool_or_the_defaults() {
        let text = "name: h\nwindow: {start: 2027-01-04, end: 2027-03-28}\n\
                    defaults: {holdout: 0.1}\n\
                    pools:\n  - {id: a, daily: 100, max_concurrent: 2}\n\
                    \x20 - {id: b, daily: 100, max_concurrent: 2, holdout: 0.05}\n\
                    \x20 - {id: c, daily: 100, max_concurrent: 2}\n";
        let p = load_str(text, "h.yaml").unwrap_or_else(|e| panic!("{e}"));
        assert_eq!((p.pools[0].holdout, p.pools[1].holdout), (0.1, 0.05));
        assert_eq!(p.pools[1].capacity(), Share::from_fraction(0.95));
        // A default that leaves no room is reported once, at `defaults`.
        let text = text.replace("holdout: 0.1", "holdout: 0.95");
        let err = load_str(&text, "h.yaml").unwrap_err().to_string();
        assert!(err.contains("key: defaults.holdout"), "{err}");
        assert!(err.contains("leaves 5% of the pool"), "{err}");
        assert_eq!(err.matches("key: defaults.holdout").count(), 1, "{err}");
    }

    #[test]
    fn the_short_form_is_one_primary_that_drives() {
        let p = load("    baseline: 0.1\n    mde: 0.1\n");
        let e = &p.experiments[0];
        assert_eq!(e.driver, "primary");
        assert_eq!(e.metrics.len(), 1);
        assert_eq!(e.metrics[0].role, Role::Primary);
        assert_eq!(e.metrics[0].need, Some(e.need));
        // `sluice size --baseline 0.1 --mde 0.1`: 14,751 per arm.
        assert_eq!(e.need.control, 14_751);
    }

    #[test]
    fn a_guardrail_with_a_tight_margin_drives_the_need() {
        let p = load(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin_abs: 0.008}\n",
        );
        let e = &p.experiments[0];
        // Blackwelder (1982), one-sided at 0.05, power 0.8:
        // (1.644854 + 0.841621)^2 x 0.1 x 0.9 x 2 / 0.008^2 = 17,388.4.
        let want = (1.644854f64 + 0.841621).powi(2) * 0.09 * 2.0 / 0.008f64.powi(2);
        assert!(
            (e.need.control_exact - want).abs() < 0.5,
            "{}",
            e.need.control_exact
        );
        assert_eq!(e.need.control, 17_389);
        assert_eq!(e.driver, "refunds");
        let guard = &e.metrics[1];
        assert_eq!(guard.design.sides, Sides::One);
        assert_eq!(guard.design.alpha, 0.05);
        assert_eq!(guard.design.method, Method::Unpooled);
        // The primary keeps its own, smaller need and the model's design.
        assert_eq!(e.metrics[0].need.map(|n| n.control), Some(14_751));
        assert_eq!(e.design, e.metrics[0].design);
        // A wide margin leaves the primary in charge.
        let p = load(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin_abs: 0.01}\n",
        );
        assert_eq!(p.experiments[0].driver, "orders");
        assert_eq!(p.experiments[0].need.control, 14_751);
        assert_eq!(
            p.experiments[0].metrics[1].need.map(|n| n.control),
            Some(11_129)
        );
    }

    #[test]
    fn looks_inflate_every_sized_metric() {
        let p = load(
            "    looks: 3\n    boundary: pocock\n    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin_abs: 0.008}\n",
        );
        let e = &p.experiments[0];
        // Each above its fixed size (14,751 and 17,389 per arm).
        for (m, fixed) in e.metrics.iter().zip([14_751, 17_389]) {
            let n = m.need.expect("sized");
            assert!(n.control > fixed, "{}: {}", m.name, n.control);
        }
        let driving = e.metrics.iter().find(|m| m.name == e.driver).unwrap();
        assert_eq!(driving.need, Some(e.need));
        let looks = e.looks.as_ref().expect("looks");
        assert_eq!(
            e.need.control,
            (looks.fixed.control_exact * looks.design.inflation).ceil() as u64
        );
    }

    #[test]
    fn guardrail_alpha_comes_from_the_experiment_or_the_defaults() {
        let guard = "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin_abs: 0.008}\n";
        let text = file(guard).replace("pools:", "defaults: {guardrail_alpha: 0.025}\npools:");
        let p = load_str(&text, "m.yaml").unwrap_or_else(|e| panic!("{e}"));
        let g = &p.experiments[0].metrics[1];
        assert_eq!(g.design.alpha, 0.025);
        // (1.959964 + 0.841621)^2 x 0.09 x 2 / 0.008^2 = 22,074.97.
        assert_eq!(g.need.map(|n| n.control), Some(22_075));
        let p = load(&format!("    guardrail_alpha: 0.1\n{guard}"));
        assert_eq!(p.experiments[0].metrics[1].design.alpha, 0.1);
        // The primaries' alpha is not touched.
        assert_eq!(p.experiments[0].metrics[0].design.alpha, 0.05);
    }

    #[test]
    fn two_primaries_split_alpha_by_the_correction() {
        let two = "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: signups, role: primary, baseline: 0.2, mde: 0.1}\n";
        let p = load(two);
        let e = &p.experiments[0];
        // Bonferroni: each at 0.05 / 2 = 0.025, as `sluice size --alpha
        // 0.025` sizes them: 17,864 and 7,884 per arm.
        assert_eq!(e.metrics[0].design.alpha, 0.025);
        assert_eq!(e.metrics[1].design.alpha, 0.025);
        assert_eq!(e.metrics[0].need.map(|n| n.control), Some(17_864));
        assert_eq!(e.metrics[1].need.map(|n| n.control), Some(7_884));
        assert_eq!(e.driver, "orders");
        assert_eq!(e.need.control, 17_864);
        // Sidak: 1 - 0.95^(1/2) = 0.0253206; none: the full 0.05.
        let p = load(&format!("    correction: sidak\n{two}"));
        let a = p.experiments[0].metrics[1].design.alpha;
        assert!((a - 0.025_320_6).abs() < 1e-7, "{a}");
        let p = load(&format!("    correction: none\n{two}"));
        assert_eq!(p.experiments[0].metrics[0].design.alpha, 0.05);
        assert_eq!(p.experiments[0].need.control, 14_751);
    }

    #[test]
    fn a_secondary_keeps_what_the_tests_sample_detects() {
        let p = load(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: basket, role: secondary, metric: mean, baseline: 38.5, sd: 61, method: z, mde_abs: 1}\n",
        );
        let e = &p.experiments[0];
        assert_eq!(e.driver, "orders");
        let s = &e.metrics[1];
        assert_eq!(s.need, None);
        // The z test's MDE at n per arm: (z_0.975 + z_0.8) x sd x sqrt(2 / n).
        let n = e.need.control_exact;
        let want = (1.959_964 + 0.841_621) * 61.0 * (2.0 / n).sqrt();
        let got = s.detectable.expect("a detectable effect");
        assert!((got - want).abs() < 1e-4, "{got} vs {want}");
        assert!((got - 1.99).abs() < 0.01, "{got}");
        // Without an MDE the effect is relative: the same over the mean.
        let p = load(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: basket, role: secondary, metric: mean, baseline: 38.5, sd: 61, method: z}\n",
        );
        let rel = p.experiments[0].metrics[1].detectable.unwrap();
        assert!((rel - want / 38.5).abs() < 1e-5, "{rel}");
    }

    #[test]
    fn bad_metrics_name_the_key_and_line() {
        let err = error(
            "    baseline: 0.1\n    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n",
        );
        assert!(err.contains("m.yaml:8:"), "{err}");
        assert!(
            err.contains("both `metrics` and the short form's `baseline` are given"),
            "{err}"
        );
        let err = error(
            "    metrics:\n\
             \x20     - {name: orders, role: primry, baseline: 0.1, mde: 0.1}\n",
        );
        assert!(err.contains("m.yaml:9:"), "{err}");
        assert!(err.contains("`role` is `primry`"), "{err}");
        assert!(err.contains("did you mean `primary`?"), "{err}");
        let err = error(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1}\n",
        );
        assert!(err.contains("m.yaml:10:"), "{err}");
        assert!(err.contains("has no `margin`"), "{err}");
        let err = error(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1, margin: 0.02}\n",
        );
        assert!(
            err.contains("metric `orders`: `margin` applies only to a guardrail metric"),
            "{err}"
        );
        let err = error(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: orders, role: secondary, baseline: 0.1}\n",
        );
        assert!(err.contains("m.yaml:10:"), "{err}");
        assert!(err.contains("two metrics are named `orders`"), "{err}");
        let err = error(
            "    metrics:\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin: 0.1}\n",
        );
        assert!(err.contains("has no primary metric"), "{err}");
        let err = error(
            "    guardrail_alpha: 0.7\n    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n",
        );
        assert!(err.contains("`guardrail_alpha` is 0.7"), "{err}");
        let err = error(
            "    metrics:\n\
             \x20     - {name: orders, role: primary, baseline: 0.1, mde: 0.1}\n\
             \x20     - {name: refunds, role: guardrail, baseline: 0.1, margin: 0.02, method: pooled}\n",
        );
        assert!(err.contains("metric `refunds`:"), "{err}");
        assert!(err.contains("unpooled"), "{err}");
    }
}

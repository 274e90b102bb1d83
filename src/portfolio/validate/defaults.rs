//! The `defaults` every test and pool falls back on, and the share
//! levels the planner may give a test.

use super::super::model::*;
use super::super::raw::*;
use super::metrics::{looks_count, BOUNDARIES};
use super::{
    alpha_ok, days_ok, is_holdout, is_share, power_ok, Ctx, CORRECTIONS, DEFAULT_SHARE_LEVELS,
    MEAN_METHODS, RATE_METHODS, SIDES,
};
use crate::share::{Share, ShareLevels};

pub(super) fn defaults(cx: &mut Ctx, d: RawDefaults) -> (Defaults, bool) {
    let before = cx.errors.len();
    let fallback = Defaults::default();
    let alpha = d.alpha.unwrap_or(fallback.alpha);
    alpha_ok(cx, "defaults.alpha", "", alpha, "the usual alpha is 0.05");
    let power = d.power.unwrap_or(fallback.power);
    power_ok(cx, "defaults.power", "", power, alpha);
    let sides = cx.choice("defaults.sides", "", &d.sides, &SIDES, fallback.sides);
    let rate_method = cx.choice(
        "defaults.rate_method",
        "",
        &d.rate_method,
        &RATE_METHODS,
        fallback.rate_method,
    );
    let mean_method = cx.choice(
        "defaults.mean_method",
        "",
        &d.mean_method,
        &MEAN_METHODS,
        fallback.mean_method,
    );
    let correction = cx.choice(
        "defaults.correction",
        "",
        &d.correction,
        &CORRECTIONS,
        fallback.correction,
    );
    let min_days = d.min_days.unwrap_or(f64::from(fallback.min_days));
    let min_ok = days_ok(
        cx,
        "defaults.min_days",
        "",
        min_days,
        "two weeks (14) is common practice",
    );
    let guardrail_alpha = d.guardrail_alpha.unwrap_or(fallback.guardrail_alpha);
    alpha_ok(
        cx,
        "defaults.guardrail_alpha",
        "",
        guardrail_alpha,
        "the one-sided alpha of the guardrails; 0.05 is the default",
    );
    let holdout = d.holdout.unwrap_or(fallback.holdout);
    let holdout_ok = cx.number(
        "defaults.holdout",
        "",
        holdout,
        is_holdout(holdout),
        "in [0, 1)",
        "the fraction of every pool's units kept out of all tests, e.g. 0.05; 0 keeps none",
    );
    let defaults = Defaults {
        holdout: if holdout_ok { holdout } else { 0.0 },
        guardrail_alpha,
        alpha,
        power,
        sides,
        rate_method,
        mean_method,
        correction,
        min_days: if min_ok {
            min_days as u32
        } else {
            fallback.min_days
        },
        whole_weeks: d.whole_weeks.unwrap_or(fallback.whole_weeks),
        looks: looks_count(cx, "defaults.looks", "", d.looks).unwrap_or(fallback.looks),
        boundary: cx.choice(
            "defaults.boundary",
            "",
            &d.boundary,
            &BOUNDARIES,
            fallback.boundary,
        ),
    };
    (defaults, cx.errors.len() == before)
}

pub(super) fn share_levels(cx: &mut Ctx, raw: Option<Vec<f64>>) -> ShareLevels {
    let Some(levels) = raw else {
        return ShareLevels::from_fractions(&DEFAULT_SHARE_LEVELS);
    };
    if levels.is_empty() {
        cx.err(
            "share_levels",
            "`share_levels` is empty",
            "list the shares the planner may give a test, e.g. [0.25, 0.5, 1.0], or remove the key for the default",
        );
        return ShareLevels::from_fractions(&DEFAULT_SHARE_LEVELS);
    }
    let mut out = Vec::new();
    for (i, &s) in levels.iter().enumerate() {
        if cx.number(
            &format!("share_levels[{i}]"),
            "",
            s,
            is_share(s),
            "a share in (0, 1]",
            "write shares as fractions: 0.25 for a quarter of the pool",
        ) {
            out.push(Share::from_fraction(s));
        }
    }
    ShareLevels::new(out)
}

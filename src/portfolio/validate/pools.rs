//! Every pool: its traffic (a `daily` level or a fitted `history`, the
//! weekday pattern, dated adjustments), sharing, concurrency, uncertainty
//! and holdout.

use super::super::checker::show;
use super::super::model::*;
use super::super::raw::*;
use super::{ids, is_holdout, text_or, whole, Ctx};
use crate::share::{Share, ShareLevels};

/// Checks every pool; returns them in file order.
pub(super) fn pools(
    cx: &mut Ctx,
    raw: Vec<RawPool>,
    d: &Defaults,
    levels: &ShareLevels,
) -> Vec<Pool> {
    let ids = ids(
        cx,
        "pools",
        "pool",
        raw.iter().map(|p| p.id.as_ref()).collect(),
    );
    let mut out = Vec::new();
    for (i, (p, id)) in raw.into_iter().zip(ids).enumerate() {
        let at = |k: &str| format!("pools[{i}].{k}");
        let who = format!("pool `{id}`: ");
        let history = super::super::history::pool_history(
            &mut cx.ck,
            &format!("pools[{i}]"),
            &who,
            p.history.as_ref(),
            p.trend,
            p.events.as_deref(),
        );
        let daily = match p.daily {
            Some(d) => {
                cx.number(
                    &at("daily"),
                    &who,
                    d,
                    d >= 0.0 && d.is_finite() && d < 1e12,
                    "a number of units per day, >= 0 and below a trillion",
                    "eligible units (visitors, users or sessions) on an average day",
                );
                d
            }
            None if p.history.is_some() => history.as_ref().map_or(0.0, |h| h.fit.level),
            None => {
                cx.missing(
                    &at("daily"),
                    &format!("pool `{id}`"),
                    "give the eligible units on an average day, e.g. `daily: 20000`, or a `history` file",
                );
                0.0
            }
        };
        let weekday = weekday(
            cx,
            i,
            &who,
            p.weekday_pattern,
            history.as_ref().map_or([1.0; 7], |h| h.fit.weekday_pattern),
        );
        let adjustments = adjustments(cx, i, &id, &who, p.adjustments.unwrap_or_default());
        let sharing = cx.choice(
            &at("sharing"),
            &who,
            &p.sharing,
            &[("split", Sharing::Split), ("overlap", Sharing::Overlap)],
            Sharing::Split,
        );
        let max_concurrent = max_concurrent(cx, i, &id, &who, p.max_concurrent);
        let uncertainty = p.uncertainty.as_ref().map(|u| uncertainty(cx, i, &who, u));
        let holdout = pool_holdout(cx, &at("holdout"), &who, p.holdout, d, sharing, levels);
        out.push(Pool {
            holdout,
            label: text_or(&p.label, &id),
            id,
            forecast: Forecast {
                daily,
                weekday,
                adjustments,
                scales: Vec::new(),
                level_path: history.as_ref().and_then(|h| h.fit.path.clone()),
                history,
                uncertainty,
            },
            sharing,
            max_concurrent,
        });
    }
    out
}

/// A pool's holdout (its own or the defaults'), checked: in [0, 1), and
/// on a split pool leaving room for the smallest share level.
#[allow(clippy::too_many_arguments)]
fn pool_holdout(
    cx: &mut Ctx,
    key: &str,
    who: &str,
    given: Option<f64>,
    d: &Defaults,
    sharing: Sharing,
    levels: &ShareLevels,
) -> f64 {
    let holdout = given.unwrap_or(d.holdout);
    // A bad default is reported once, at `defaults.holdout`.
    let key = if given.is_some() {
        key
    } else {
        "defaults.holdout"
    };
    if given.is_some()
        && !cx.number(
            key,
            who,
            holdout,
            is_holdout(holdout),
            "in [0, 1)",
            "the fraction of the pool's units kept out of every test, e.g. 0.05; 0 keeps none",
        )
    {
        return 0.0;
    }
    let room = Share::from_fraction(1.0 - holdout);
    if let (Sharing::Split, Some(lowest)) = (sharing, levels.lowest()) {
        let told = cx.errors.iter().any(|e| e.key == key);
        if lowest > room && told {
            return 0.0;
        }
        if lowest > room {
            cx.err(
                key,
                format!(
                    "{who}a `holdout` of {} leaves {room} of the pool, less than the smallest share level {lowest}; no test could run on it",
                    show(holdout)
                ),
                format!(
                    "lower the holdout so at least {lowest} of the pool stays open, or add a share level of at most {room} to `share_levels`"
                ),
            );
            return 0.0;
        }
    }
    holdout
}

/// The weekday pattern: the one given (seven multipliers, Monday first),
/// each good value over `fitted` (the history's, or flat).
fn weekday(
    cx: &mut Ctx,
    i: usize,
    who: &str,
    given: Option<Vec<f64>>,
    fitted: [f64; 7],
) -> [f64; 7] {
    let mut weekday = fitted;
    if let Some(pattern) = given {
        if pattern.len() != 7 {
            cx.err(
                &format!("pools[{i}].weekday_pattern"),
                format!(
                    "{who}`weekday_pattern` has {} values; it must have exactly 7",
                    pattern.len()
                ),
                "one multiplier per weekday, Monday first, e.g. [1.05, 1.1, 1.1, 1.05, 0.95, 0.8, 0.85]",
            );
        }
        for (j, &m) in pattern.iter().enumerate() {
            if cx.number(
                &format!("pools[{i}].weekday_pattern[{j}]"),
                who,
                m,
                m >= 0.0 && m.is_finite() && m <= 1e6,
                "a multiplier >= 0",
                "1.0 keeps the daily level, 0.8 is 20% below it",
            ) && j < 7
            {
                weekday[j] = m;
            }
        }
    }
    weekday
}

/// The pool's dated `adjustments`, each with its dates in order and one
/// change, `multiply` or `level`; an adjustment with a bad date is left out.
fn adjustments(
    cx: &mut Ctx,
    i: usize,
    id: &str,
    who: &str,
    raw: Vec<RawAdjustment>,
) -> Vec<Adjustment> {
    let mut adjustments = Vec::new();
    for (j, a) in raw.into_iter().enumerate() {
        let at = |k: &str| format!("pools[{i}].adjustments[{j}].{k}");
        let what = format!("adjustment {} of pool `{id}`", j + 1);
        if a.from.is_none() {
            cx.missing(
                &at("from"),
                &what,
                "give the first day it applies, e.g. `from: 2027-02-14`",
            );
        }
        if a.to.is_none() {
            cx.missing(
                &at("to"),
                &what,
                "give the last day it applies (inclusive), e.g. `to: 2027-02-20`",
            );
        }
        let from = cx.date(&at("from"), who, &a.from);
        let to = cx.date(&at("to"), who, &a.to);
        if let (Some(f), Some(t)) = (from, to) {
            if t < f {
                cx.err(
                    &at("to"),
                    format!("{who}adjustment `to` {t} is before its `from` {f}"),
                    "dates run from `from` to `to`, both inclusive",
                );
            }
        }
        let change = match (a.multiply, a.level) {
            (Some(m), None) => {
                cx.number(
                    &at("multiply"),
                    who,
                    m,
                    m >= 0.0 && m.is_finite() && m <= 1e6,
                    "a multiplier >= 0",
                    "0.6 is a 40% dip, 1.3 a 30% rise",
                );
                Change::Multiply(m)
            }
            (None, Some(l)) => {
                cx.number(
                    &at("level"),
                    who,
                    l,
                    l >= 0.0 && l.is_finite() && l < 1e12,
                    "a number of units per day, >= 0",
                    "`level` replaces the day's forecast with this many units",
                );
                Change::Level(l)
            }
            (Some(_), Some(_)) => {
                cx.err(
                    &at("level"),
                    format!("{what} has both `multiply` and `level`"),
                    "give one: `multiply` scales the forecast, `level` replaces it",
                );
                Change::Multiply(1.0)
            }
            (None, None) => {
                cx.missing(
                    &at("multiply"),
                    &what,
                    "give `multiply: 0.6` (scale the forecast) or `level: 5000` (replace it)",
                );
                Change::Multiply(1.0)
            }
        };
        if let (Some(from), Some(to)) = (from, to) {
            adjustments.push(Adjustment {
                from,
                to,
                change,
                note: text_or(&a.note, ""),
            });
        }
    }
    adjustments
}

/// The most tests that may run on the pool at once (1 after a problem).
fn max_concurrent(cx: &mut Ctx, i: usize, id: &str, who: &str, given: Option<f64>) -> u32 {
    let at = |k: &str| format!("pools[{i}].{k}");
    match given {
        Some(m) => {
            if cx.number(
                &at("max_concurrent"),
                who,
                m,
                whole(m, 1.0, 10_000.0),
                "a whole number from 1 to 10000",
                "the most tests that may run on this pool at once",
            ) {
                m as u32
            } else {
                1
            }
        }
        None => {
            cx.missing(
                &at("max_concurrent"),
                &format!("pool `{id}`"),
                "give the most tests that may run on this pool at once, e.g. `max_concurrent: 3`",
            );
            1
        }
    }
}

/// The pool's given `uncertainty`: each coefficient of variation from 0
/// to 10 (0 when missing or bad).
fn uncertainty(cx: &mut Ctx, i: usize, who: &str, u: &RawUncertainty) -> Uncertainty {
    let at = |k: &str| format!("pools[{i}].{k}");
    let mut cv = |name: &str, v: Option<f64>| {
        let v = v.unwrap_or(0.0);
        if cx.number(
            &at(&format!("uncertainty.{name}")),
            who,
            v,
            v.is_finite() && (0.0..=10.0).contains(&v),
            "from 0 to 10",
            "a coefficient of variation: 0.1 means traffic typically strays 10% from the forecast",
        ) {
            v
        } else {
            0.0
        }
    };
    Uncertainty {
        level_cv: cv("level_cv", u.level_cv),
        daily_cv: cv("daily_cv", u.daily_cv),
        growth: 0.0,
        origin: None,
    }
}

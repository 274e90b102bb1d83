//! The portfolio's calendar: its window, its `planning` settings (the
//! start grid, the start weekday, the simulated paths) and its blackouts.

use super::super::model::*;
use super::super::raw::*;
use super::{inside, text_or, whole, Ctx, Names, MAX_WINDOW_DAYS};
use chrono::Weekday;

pub(super) fn window(cx: &mut Ctx, raw: Option<&RawWindow>) -> Option<Window> {
    let hint = "give the planning window as `window: {start: 2027-01-04, end: 2027-04-04}`";
    let Some(w) = raw else {
        cx.missing("window", "the portfolio", hint);
        return None;
    };
    if w.start.is_none() {
        cx.missing("window.start", "`window`", hint);
    }
    if w.end.is_none() {
        cx.missing("window.end", "`window`", hint);
    }
    let start = cx.date("window.start", "", &w.start)?;
    let end = cx.date("window.end", "", &w.end)?;
    if end < start {
        cx.err(
            "window.end",
            format!("`window.end` {end} is before `window.start` {start}"),
            "the window runs from `start` to `end`, both inclusive",
        );
        return None;
    }
    if (end - start).num_days() >= MAX_WINDOW_DAYS {
        cx.err(
            "window.end",
            format!(
                "the window spans {} days; sluice plans at most {MAX_WINDOW_DAYS} days (three years)",
                (end - start).num_days() + 1
            ),
            "plan a quarter or a year at a time",
        );
        return None;
    }
    Some(Window { start, end })
}

pub(super) fn planning(cx: &mut Ctx, p: RawPlanning, d: &Defaults) -> Planning {
    let fallback = Planning::default();
    let default_grid = if d.whole_weeks {
        fallback.grid
    } else {
        StartGrid::Daily
    };
    let grid = cx.choice(
        "planning.start_grid",
        "",
        &p.start_grid,
        &[("weekly", StartGrid::Weekly), ("daily", StartGrid::Daily)],
        default_grid,
    );
    let start_weekday = cx.choice(
        "planning.start_weekday",
        "",
        &p.start_weekday,
        &[
            ("monday", Weekday::Mon),
            ("tuesday", Weekday::Tue),
            ("wednesday", Weekday::Wed),
            ("thursday", Weekday::Thu),
            ("friday", Weekday::Fri),
            ("saturday", Weekday::Sat),
            ("sunday", Weekday::Sun),
            ("mon", Weekday::Mon),
            ("tue", Weekday::Tue),
            ("wed", Weekday::Wed),
            ("thu", Weekday::Thu),
            ("fri", Weekday::Fri),
            ("sat", Weekday::Sat),
            ("sun", Weekday::Sun),
        ],
        fallback.start_weekday,
    );
    let lateness_weight = p.lateness_weight.unwrap_or(fallback.lateness_weight);
    cx.number(
        "planning.lateness_weight",
        "",
        lateness_weight,
        (0.0..1.0).contains(&lateness_weight),
        "in [0, 1)",
        "0 ignores when results arrive; 0.5 (the default) halves the value of a result on the window's last day",
    );
    let seed = whole_setting(
        cx,
        "planning.seed",
        p.seed,
        (0, 4_294_967_295),
        "any number picks the simulated traffic behind result ranges; the same seed gives the same ranges",
    )
    .unwrap_or(fallback.seed);
    let paths = whole_setting(
        cx,
        "planning.paths",
        p.paths,
        (100, 100_000),
        "how many simulated traffic paths result ranges rest on; 2000 (the default) is plenty",
    )
    .map_or(fallback.paths, |n| n as u32);
    let confidence = p.confidence.filter(|&c| {
        cx.number(
            "planning.confidence",
            "",
            c,
            (0.5..1.0).contains(&c),
            "in [0.5, 1)",
            "0.8 plans every test so that its result comes by its planned date on 80% of simulated traffic paths; leave it out to plan on the forecast as it is",
        )
    });
    let srm_alpha = p.srm_alpha.unwrap_or(fallback.srm_alpha);
    let srm_alpha = if cx.number(
        "planning.srm_alpha",
        "",
        srm_alpha,
        srm_alpha > 0.0 && srm_alpha < 1.0,
        "a number in (0, 1)",
        "the p-value below which per-arm counts that miss the design's split are flagged; 0.001 (the default) is the usual threshold",
    ) {
        srm_alpha
    } else {
        fallback.srm_alpha
    };
    Planning {
        grid,
        start_weekday,
        lateness_weight,
        reshare_running: p.reshare_running.unwrap_or(fallback.reshare_running),
        seed,
        paths,
        confidence: confidence.or(fallback.confidence),
        srm_alpha,
    }
}

pub(super) fn blackouts(
    cx: &mut Ctx,
    raw: Vec<RawBlackout>,
    pool_ids: &Names,
    window: Option<Window>,
) -> Vec<Blackout> {
    let mut out = Vec::new();
    for (i, b) in raw.into_iter().enumerate() {
        let at = |k: &str| format!("blackouts[{i}].{k}");
        let what = format!("blackout {}", i + 1);
        let who = format!("blackout {}: ", i + 1);
        if b.from.is_none() {
            cx.missing(
                &at("from"),
                &what,
                "give its first day, e.g. `from: 2027-02-01`",
            );
        }
        if b.to.is_none() {
            cx.missing(
                &at("to"),
                &what,
                "give its last day (inclusive), e.g. `to: 2027-02-07`",
            );
        }
        let from = cx.date(&at("from"), &who, &b.from);
        let to = cx.date(&at("to"), &who, &b.to);
        let mut dates_ok = from.is_some() && to.is_some();
        if let (Some(f), Some(t)) = (from, to) {
            if t < f {
                cx.err(
                    &at("to"),
                    format!("{who}`to` {t} is before `from` {f}"),
                    "dates run from `from` to `to`, both inclusive",
                );
                dates_ok = false;
            }
        }
        if dates_ok {
            dates_ok &= inside(cx, &at("from"), &who, from, window).is_some();
            dates_ok &= inside(cx, &at("to"), &who, to, window).is_some();
        }
        let kind = match &b.kind {
            None => {
                cx.missing(
                    &at("kind"),
                    &what,
                    "`kind: no_starts` (no test may start) or `kind: no_running` (no test may run)",
                );
                BlackoutKind::NoStarts
            }
            Some(_) => cx.choice(
                &at("kind"),
                &who,
                &b.kind,
                &[
                    ("no_starts", BlackoutKind::NoStarts),
                    ("no_running", BlackoutKind::NoRunning),
                ],
                BlackoutKind::NoStarts,
            ),
        };
        let mut pools = Vec::new();
        for (j, p) in b.pools.iter().flatten().enumerate() {
            if let Some(k) = cx.reference(
                &format!("blackouts[{i}].pools[{j}]"),
                &who,
                p.as_str().trim(),
                "pool",
                pool_ids,
            ) {
                pools.push(k);
            }
        }
        pools.sort_unstable();
        pools.dedup();
        if let (true, Some(from), Some(to)) = (dates_ok, from, to) {
            out.push(Blackout {
                from,
                to,
                kind,
                note: text_or(&b.note, ""),
                pools,
            });
        }
    }
    out
}

/// A whole number at `key` within `lo..=hi`, when given and valid.
fn whole_setting(
    cx: &mut Ctx,
    key: &str,
    v: Option<f64>,
    (lo, hi): (u64, u64),
    hint: &str,
) -> Option<u64> {
    let v = v?;
    cx.number(
        key,
        "",
        v,
        whole(v, lo as f64, hi as f64),
        &format!("a whole number from {lo} to {hi}"),
        hint,
    )
    .then_some(v as u64)
}

//! Raw structs -> the validated [`Portfolio`]: defaults, ranges, ids,
//! references, the `after` graph, dates against the window, and the sample
//! size of every experiment.
//!
//! Every check runs, whatever failed before it, so one run reports every
//! problem; the model is returned only when there is none. Positions come
//! from the [`PositionIndex`] by the key's path.

use super::checker::{show, Checker};
use super::model::*;
use super::position::PositionIndex;
use super::raw::*;
use crate::diagnostic::{self, Diagnostic};
use crate::share::{Share, ShareLevels};
use crate::sizing::{
    self, noninferiority,
    sequential::{self, Boundary},
    Correction, Design, Effect, Method, Metric, SampleSize, Sides, SizingError,
};
use chrono::{NaiveDate, Weekday};
use std::collections::{BTreeMap, BTreeSet, HashMap};

/// The share levels used when the file gives none.
pub const DEFAULT_SHARE_LEVELS: [f64; 7] = [0.10, 0.20, 0.25, 0.33, 0.50, 0.75, 1.00];
/// The longest planning window accepted, in days (three years).
pub const MAX_WINDOW_DAYS: i64 = 1096;
/// The most arms one test may have.
pub const MAX_ARMS: f64 = 50.0;
/// The longest minimum run or analysis gap accepted, in days.
pub const MAX_DAYS_SETTING: f64 = 366.0;

/// The shared [`Checker`] (every problem at its key and line) plus the
/// budget of the "closest first" hints.
struct Ctx<'a> {
    ck: Checker<'a>,
    /// Ids compared so far for "closest first" hints.
    ranked: usize,
}

impl<'a> std::ops::Deref for Ctx<'a> {
    type Target = Checker<'a>;
    fn deref(&self) -> &Checker<'a> {
        &self.ck
    }
}

impl std::ops::DerefMut for Ctx<'_> {
    fn deref_mut(&mut self) -> &mut Self::Target {
        &mut self.ck
    }
}

impl Ctx<'_> {
    /// A required key that is missing (points at its mapping).
    fn missing(&mut self, key: &str, what: &str, hint: impl Into<String>) {
        let leaf = key.rsplit(['.', ']']).next().unwrap_or(key);
        self.push(
            key,
            format!("{what} has no `{leaf}`"),
            Some(hint.into()),
            true,
        );
    }

    /// Checks a number against a rule; `expected` completes "it must be ...".
    fn number(
        &mut self,
        key: &str,
        who: &str,
        value: f64,
        ok: bool,
        expected: &str,
        hint: &str,
    ) -> bool {
        self.ck.number(key, who, value, ok, expected, hint)
    }

    /// The date at `key`, if given and valid.
    fn date(&mut self, key: &str, who: &str, v: &Option<Text>) -> Option<NaiveDate> {
        let name = format!("{who}`{}`", leaf(key));
        self.ck.date(key, &name, v, "2027-01-04")
    }

    fn choice<T: Copy>(
        &mut self,
        key: &str,
        who: &str,
        v: &Option<Text>,
        options: &[(&str, T)],
        default: T,
    ) -> T {
        let Some(t) = v else { return default };
        let s = t.as_str().trim().to_lowercase();
        if let Some((_, x)) = options.iter().find(|(n, _)| *n == s) {
            return *x;
        }
        let names: Vec<&str> = options.iter().map(|(n, _)| *n).collect();
        let hint = match diagnostic::suggestion(&s, &names) {
            Some(c) => format!("did you mean `{c}`?"),
            None => format!("write one of {}", diagnostic::list(&names)),
        };
        self.err(
            key,
            format!(
                "{who}`{}` is `{}`; it must be one of {}",
                leaf(key),
                t.as_str(),
                diagnostic::list(&names)
            ),
            hint,
        );
        default
    }

    /// An id that must name one of `names`; `what` is `pool` or
    /// `experiment`.
    fn reference(
        &mut self,
        key: &str,
        who: &str,
        id: &str,
        what: &str,
        names: &Names,
    ) -> Option<usize> {
        if let Some(&i) = names.index.get(id) {
            return Some(i);
        }
        let hint = if names.list.is_empty() {
            format!("no {what} is defined; add one under `{what}s`")
        } else if self.ranked + names.list.len() > RANKING_BUDGET {
            // Ranking costs a pass over every id; past this budget a plain
            // hint keeps a huge broken file quick to report.
            format!("{} {what}s are defined", names.list.len())
        } else {
            self.ranked += names.list.len();
            let ranked = diagnostic::closest_first(id, &names.list);
            let shown: Vec<&str> = ranked.iter().take(8).copied().collect();
            let more = if ranked.len() > shown.len() {
                format!(" and {} more", ranked.len() - shown.len())
            } else {
                String::new()
            };
            format!(
                "defined {what}s, closest first: {}{more}",
                diagnostic::list(&shown)
            )
        };
        self.err(key, format!("{who}{what} `{id}` is not defined"), hint);
        None
    }
}

/// Ids compared, over all unknown references, before the hints stop
/// ranking the defined ids by similarity.
const RANKING_BUDGET: usize = 200_000;

/// Defined ids: each once, in file order, and their first index.
struct Names<'a> {
    list: Vec<&'a str>,
    index: HashMap<&'a str, usize>,
}

impl<'a> Names<'a> {
    fn new(ids: impl IntoIterator<Item = &'a str>) -> Names<'a> {
        let mut list = Vec::new();
        let mut index = HashMap::new();
        for (i, id) in ids.into_iter().enumerate() {
            if let std::collections::hash_map::Entry::Vacant(v) = index.entry(id) {
                v.insert(i);
                list.push(id);
            }
        }
        Names { list, index }
    }
}

fn leaf(key: &str) -> &str {
    key.rsplit('.').next().unwrap_or(key)
}

fn whole(x: f64, lo: f64, hi: f64) -> bool {
    x.is_finite() && x.fract() == 0.0 && x >= lo && x <= hi
}

fn text_or(v: &Option<Text>, default: &str) -> String {
    v.as_ref()
        .map(|t| t.as_str().to_string())
        .unwrap_or_else(|| default.to_string())
}

const SIDES: [(&str, Sides); 2] = [("two", Sides::Two), ("one", Sides::One)];
const RATE_METHODS: [(&str, Method); 4] = [
    ("pooled", Method::Pooled),
    ("unpooled", Method::Unpooled),
    ("corrected", Method::Corrected),
    ("arcsine", Method::Arcsine),
];
const MEAN_METHODS: [(&str, Method); 2] = [("t", Method::T), ("z", Method::Z)];
const CORRECTIONS: [(&str, Correction); 3] = [
    ("bonferroni", Correction::Bonferroni),
    ("sidak", Correction::Sidak),
    ("none", Correction::None),
];

/// Validates `raw`; `text` and `index` locate problems.
pub fn validate(
    raw: RawPortfolio,
    text: &str,
    file: &str,
    index: Option<&PositionIndex>,
) -> Result<Portfolio, Vec<Diagnostic>> {
    let mut cx = Ctx {
        ck: Checker::new(file, text, index),
        ranked: 0,
    };
    let stem = std::path::Path::new(file)
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    let name = raw
        .name
        .as_ref()
        .map(|t| t.as_str().to_string())
        .unwrap_or_else(|| stem.clone());
    let id = match raw.id.as_ref().map(|t| t.as_str().trim().to_string()) {
        None => stem,
        Some(id) => {
            if id.is_empty() {
                cx.err(
                    "id",
                    "the portfolio's `id` is empty",
                    "leave `id` out to use the file name's stem, or give a short fixed name such as `shop-q1`",
                );
            } else if id.chars().any(char::is_control) {
                cx.err(
                    "id",
                    "the portfolio's `id` contains a line break or another control character",
                    "write the id on one line with letters, digits and dashes, e.g. `shop-q1`",
                );
            }
            id
        }
    };
    let window = window(&mut cx, raw.window.as_ref());
    let (defaults, defaults_ok) = defaults(&mut cx, raw.defaults.unwrap_or_default());
    let share_levels = share_levels(&mut cx, raw.share_levels);
    let planning = planning(&mut cx, raw.planning.unwrap_or_default(), &defaults);
    let pools = pools(
        &mut cx,
        raw.pools.unwrap_or_default(),
        &defaults,
        &share_levels,
    );
    let pool_ids = Names::new(pools.iter().map(|p| p.id.as_str()));
    let (experiments, after_order) = experiments(
        &mut cx,
        raw.experiments.unwrap_or_default(),
        &pool_ids,
        window,
        &defaults,
        defaults_ok,
        &share_levels,
    );
    let blackouts = blackouts(
        &mut cx,
        raw.blackouts.unwrap_or_default(),
        &pool_ids,
        window,
    );
    if !cx.errors.is_empty() {
        let mut diags = cx.ck.errors;
        // The portfolio's own problems first, then those in history files.
        diags.sort_by_key(|d| (d.file != file, d.line.is_none(), d.line, d.column));
        return Err(diags);
    }
    let window = window.expect("a window without diagnostics is valid");
    let after_order = after_order.expect("an `after` graph without diagnostics is acyclic");
    Ok(Portfolio {
        id,
        name,
        window,
        defaults,
        share_levels,
        planning,
        pools,
        experiments,
        blackouts,
        after_order,
    })
}

fn window(cx: &mut Ctx, raw: Option<&RawWindow>) -> Option<Window> {
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

fn defaults(cx: &mut Ctx, d: RawDefaults) -> (Defaults, bool) {
    let before = cx.errors.len();
    let fallback = Defaults::default();
    let alpha = d.alpha.unwrap_or(fallback.alpha);
    cx.number(
        "defaults.alpha",
        "",
        alpha,
        alpha > 0.0 && alpha <= 0.5,
        "in (0, 0.5]",
        "the usual alpha is 0.05",
    );
    let power = d.power.unwrap_or(fallback.power);
    cx.number(
        "defaults.power",
        "",
        power,
        power > alpha && power < 1.0,
        "in (alpha, 1)",
        "the usual power is 0.8",
    );
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
    let min_ok = cx.number(
        "defaults.min_days",
        "",
        min_days,
        whole(min_days, 1.0, MAX_DAYS_SETTING),
        "a whole number of days from 1 to 366",
        "two weeks (14) is common practice",
    );
    let guardrail_alpha = d.guardrail_alpha.unwrap_or(fallback.guardrail_alpha);
    cx.number(
        "defaults.guardrail_alpha",
        "",
        guardrail_alpha,
        guardrail_alpha > 0.0 && guardrail_alpha <= 0.5,
        "in (0, 0.5]",
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

fn share_levels(cx: &mut Ctx, raw: Option<Vec<f64>>) -> ShareLevels {
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

/// A share the model can hold: in (0, 1] and not below one millionth.
/// Whether `h` is a holdout: in [0, 1) and leaving at least a millionth.
fn is_holdout(h: f64) -> bool {
    (0.0..1.0).contains(&h) && !Share::from_fraction(1.0 - h).is_zero()
}

fn is_share(s: f64) -> bool {
    s > 0.0 && s <= 1.0 && !Share::from_fraction(s).is_zero()
}

fn planning(cx: &mut Ctx, p: RawPlanning, d: &Defaults) -> Planning {
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
    let seed = p.seed.unwrap_or(fallback.seed as f64);
    let seed = if cx.number(
        "planning.seed",
        "",
        seed,
        whole(seed, 0.0, 4_294_967_295.0),
        "a whole number from 0 to 4294967295",
        "any number picks the simulated traffic behind result ranges; the same seed gives the same ranges",
    ) {
        seed as u64
    } else {
        fallback.seed
    };
    let paths = p.paths.unwrap_or(f64::from(fallback.paths));
    let paths = if cx.number(
        "planning.paths",
        "",
        paths,
        whole(paths, 100.0, 100_000.0),
        "a whole number from 100 to 100000",
        "how many simulated traffic paths result ranges rest on; 2000 (the default) is plenty",
    ) {
        paths as u32
    } else {
        fallback.paths
    };
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

/// Checks ids for presence and uniqueness; returns the ids (a placeholder
/// where missing) in order.
fn ids(cx: &mut Ctx, section: &str, what: &str, raw: Vec<Option<&Text>>) -> Vec<String> {
    let mut seen: BTreeMap<String, usize> = BTreeMap::new();
    let mut out = Vec::new();
    for (i, id) in raw.into_iter().enumerate() {
        let key = format!("{section}[{i}].id");
        let Some(id) = id else {
            cx.missing(
                &key,
                &format!("{what} number {}", i + 1),
                format!("give every {what} a unique `id`"),
            );
            out.push(format!("#{}", i + 1));
            continue;
        };
        let id = id.as_str().trim().to_string();
        if id.is_empty() {
            cx.err(
                &key,
                format!("{what} number {} has an empty `id`", i + 1),
                format!("give every {what} a unique `id`"),
            );
        } else if id.chars().any(char::is_control) {
            cx.err(
                &key,
                format!(
                    "{what} number {} has an `id` with a line break or another control character",
                    i + 1
                ),
                "write the id on one line, e.g. `hero-copy`; every output format shows it",
            );
        } else if let Some(&first) = seen.get(&id) {
            let first_line = cx
                .index
                .and_then(|ix| ix.locate(&format!("{section}[{first}].id")))
                .map(|s| format!(" (line {})", s.line))
                .unwrap_or_default();
            cx.err(
                &key,
                format!("duplicate {what} id `{id}`"),
                format!(
                    "it is first defined as {what} number {}{first_line}; ids must be unique",
                    first + 1
                ),
            );
        } else {
            seen.insert(id.clone(), i);
        }
        out.push(id);
    }
    out
}

fn pools(cx: &mut Ctx, raw: Vec<RawPool>, d: &Defaults, levels: &ShareLevels) -> Vec<Pool> {
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
        let history = super::history::pool_history(
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
        let mut weekday = history.as_ref().map_or([1.0; 7], |h| h.fit.weekday_pattern);
        if let Some(pattern) = p.weekday_pattern {
            if pattern.len() != 7 {
                cx.err(
                    &at("weekday_pattern"),
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
                    &who,
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
        let mut adjustments = Vec::new();
        for (j, a) in p.adjustments.unwrap_or_default().into_iter().enumerate() {
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
            let from = cx.date(&at("from"), &who, &a.from);
            let to = cx.date(&at("to"), &who, &a.to);
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
                        &who,
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
                        &who,
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
        let sharing = cx.choice(
            &at("sharing"),
            &who,
            &p.sharing,
            &[("split", Sharing::Split), ("overlap", Sharing::Overlap)],
            Sharing::Split,
        );
        let max_concurrent = match p.max_concurrent {
            Some(m) => {
                if cx.number(
                    &at("max_concurrent"),
                    &who,
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
        };
        let uncertainty = p.uncertainty.as_ref().map(|u| {
            let mut cv = |name: &str, v: Option<f64>| {
                let v = v.unwrap_or(0.0);
                if cx.number(
                    &at(&format!("uncertainty.{name}")),
                    &who,
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
        });
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

/// A date that must lie inside the window.
fn inside(
    cx: &mut Ctx,
    key: &str,
    who: &str,
    date: Option<NaiveDate>,
    window: Option<Window>,
) -> Option<NaiveDate> {
    let (Some(d), Some(w)) = (date, window) else {
        return date;
    };
    if !w.contains(d) {
        let side = if d < w.start {
            "before the window starts"
        } else {
            "after the window ends"
        };
        cx.err(
            key,
            format!("{who}`{}` {d} is {side}", leaf(key)),
            format!(
                "the window runs from {} to {}; move the date inside it or widen `window`",
                w.start, w.end
            ),
        );
        return None;
    }
    Some(d)
}

#[allow(clippy::too_many_arguments)]
/// Every boundary by its name in a file.
const BOUNDARIES: [(&str, Boundary); 4] = [
    ("obrien-fleming", Boundary::ObrienFleming),
    ("pocock", Boundary::Pocock),
    ("spending-obrien-fleming", Boundary::SpendingObrienFleming),
    ("spending-pocock", Boundary::SpendingPocock),
];

/// A `looks` key: a whole number from 1 to 10, or None (reported) when not.
fn looks_count(cx: &mut Ctx, key: &str, who: &str, v: Option<f64>) -> Option<u32> {
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

fn experiments(
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
    let mut out = Vec::new();
    for (i, (e, id)) in raw.iter().zip(&ids).enumerate() {
        let at = |k: &str| format!("experiments[{i}].{k}");
        let who = format!("experiment `{id}`: ");
        let what = format!("experiment `{id}`");
        let pools = experiment_pools(cx, e, i, &who, &what, pool_ids);
        let looks_given = e.looks.is_some();
        let count = looks_count(cx, &at("looks"), &who, e.looks);
        let boundary = cx.choice(&at("boundary"), &who, &e.boundary, &BOUNDARIES, d.boundary);
        let count = if looks_given { count } else { Some(d.looks) };
        let given = e
            .sample_size
            .and_then(|n| given_size(cx, e, i, &who, n, d, defaults_ok));
        let sized = if e.sample_size.is_some() {
            None
        } else {
            metrics(cx, e, i, &who, &what, d, defaults_ok)
        };
        let (design, need, looks, metrics, driver) = match (sized, count) {
            _ if e.sample_size.is_some() => (
                given.map(|g| g.0),
                given.map(|g| g.1),
                None,
                Vec::new(),
                String::new(),
            ),
            (Some(m), Some(count)) => size_metrics(cx, m, count, boundary, &who),
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
        let eligible = e.eligible.unwrap_or(1.0);
        let eligible_ok = cx.number(
            &at("eligible"),
            &who,
            eligible,
            eligible > 0.0 && eligible <= 1.0,
            "in (0, 1]",
            "the fraction of the pool's units its targeting admits, e.g. 0.3 for logged-in visitors only; 1 admits all",
        );
        let priority = e.priority.unwrap_or(1.0);
        cx.number(
            &at("priority"),
            &who,
            priority,
            priority > 0.0 && priority.is_finite() && priority <= 1e9,
            "a positive weight",
            "higher means more valuable; 1 is the default",
        );
        let max_share = e.max_share.unwrap_or(1.0);
        if cx.number(
            &at("max_share"),
            &who,
            max_share,
            is_share(max_share),
            "a share in (0, 1]",
            "the largest fraction of the pool this test may take; 1 for no limit",
        ) {
            if let Some(lowest) = share_levels.lowest() {
                if Share::from_fraction(max_share) < lowest {
                    cx.err(
                        &at("max_share"),
                        format!("{who}`max_share` {max_share} is below the smallest share level {}; the planner could never run it", lowest.fraction()),
                        format!("raise `max_share` to at least {}, or add a smaller value to `share_levels`", lowest.fraction()),
                    );
                }
            }
        }
        let min_days = e.min_days.unwrap_or(f64::from(d.min_days));
        let min_ok = cx.number(
            &at("min_days"),
            &who,
            min_days,
            whole(min_days, 1.0, MAX_DAYS_SETTING),
            "a whole number of days from 1 to 366",
            "two weeks (14) is common practice",
        );
        let earliest = cx.date(&at("earliest_start"), &who, &e.earliest_start);
        let earliest = inside(cx, &at("earliest_start"), &who, earliest, window);
        let deadline = cx.date(&at("deadline"), &who, &e.deadline);
        let deadline = inside(cx, &at("deadline"), &who, deadline, window);
        if let (Some(s), Some(dl)) = (earliest, deadline) {
            if dl < s {
                cx.err(
                    &at("deadline"),
                    format!("{who}`deadline` {dl} is before `earliest_start` {s}"),
                    "the deadline is the last day its data may run to; it must come after the earliest start",
                );
            }
        }
        let mut after: Vec<Prerequisite> = Vec::new();
        for (j, a) in e.after.iter().flatten().enumerate() {
            let (ref_id, gap, key, gap_key) = match a {
                RawAfter::Id(t) => (Some(t), 0.0, format!("experiments[{i}].after[{j}]"), None),
                RawAfter::WithGap(g) => {
                    let key = format!("experiments[{i}].after[{j}].id");
                    if g.id.is_none() {
                        cx.missing(
                            &key,
                            &format!("`after` entry {} of {what}", j + 1),
                            "give the id of the experiment that must end first",
                        );
                    }
                    (
                        g.id.as_ref(),
                        g.gap_days.unwrap_or(0.0),
                        key,
                        Some(format!("experiments[{i}].after[{j}].gap_days")),
                    )
                }
            };
            let gap_ok = match &gap_key {
                Some(k) => cx.number(
                    k,
                    &who,
                    gap,
                    whole(gap, 0.0, MAX_DAYS_SETTING),
                    "a whole number of days from 0 to 366",
                    "days left free after the earlier test ends, e.g. for its analysis",
                ),
                None => true,
            };
            let Some(ref_id) = ref_id else { continue };
            let ref_id = ref_id.as_str().trim();
            if ref_id == id {
                cx.err(
                    &key,
                    format!("{who}lists itself in `after`"),
                    "an experiment cannot wait for its own end; remove the entry",
                );
                continue;
            }
            if let Some(k) = cx.reference(&key, &who, ref_id, "experiment", &id_refs) {
                if after.iter().any(|p| p.experiment == k) {
                    cx.err(
                        &key,
                        format!("{who}`{ref_id}` is listed twice in `after`"),
                        "list each prerequisite once",
                    );
                } else if gap_ok {
                    after.push(Prerequisite {
                        experiment: k,
                        gap_days: gap as u32,
                    });
                }
            }
        }
        let mut not_with = Vec::new();
        let mut apart_traffic = Vec::new();
        for (j, entry) in e.not_with.iter().flatten().enumerate() {
            let (t, key, traffic) = match entry {
                RawNotWith::Id(t) => (Some(t), format!("experiments[{i}].not_with[{j}]"), false),
                RawNotWith::Apart(a) => {
                    let key = format!("experiments[{i}].not_with[{j}].id");
                    if a.id.is_none() {
                        cx.missing(
                            &key,
                            &format!("`not_with` entry {} of {what}", j + 1),
                            "give the id of the experiment to keep apart",
                        );
                    }
                    let traffic = cx.choice(
                        &format!("experiments[{i}].not_with[{j}].apart"),
                        &who,
                        &a.apart,
                        &APART,
                        false,
                    );
                    (a.id.as_ref(), key, traffic)
                }
            };
            let Some(t) = t else { continue };
            let other = t.as_str().trim();
            if other == id {
                cx.err(
                    &key,
                    format!("{who}lists itself in `not_with`"),
                    "remove the entry; `not_with` names other experiments",
                );
                continue;
            }
            if let Some(k) = cx.reference(&key, &who, other, "experiment", &id_refs) {
                if traffic {
                    apart_traffic.push(k);
                } else {
                    not_with.push(k);
                }
            }
        }
        let ramp = ramp(cx, e, i, &who, window, max_share, share_levels);
        out.push(Experiment {
            id: id.clone(),
            title: text_or(&e.title, id),
            owner: text_or(&e.owner, ""),
            pools,
            ramp,
            ramp_counts: e.ramp_counts.unwrap_or(false),
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
            sample_size_given: e.sample_size.is_some(),
            eligible: if eligible_ok { eligible } else { 1.0 },
            looks,
            metrics,
            driver,
            priority,
            earliest_start: earliest,
            deadline,
            max_share: Share::from_fraction(max_share),
            min_days: if min_ok { min_days as u32 } else { d.min_days },
            whole_weeks: e.whole_weeks.unwrap_or(d.whole_weeks),
            after,
            not_with,
            apart_traffic,
        });
    }
    // `not_with` holds both ways, sorted, without duplicates; so does
    // `apart_traffic`.
    let pairs: Vec<(usize, usize)> = out
        .iter()
        .enumerate()
        .flat_map(|(i, e)| e.not_with.iter().map(move |&j| (i, j)))
        .collect();
    for (i, j) in pairs {
        out[j].not_with.push(i);
    }
    let pairs: Vec<(usize, usize)> = out
        .iter()
        .enumerate()
        .flat_map(|(i, e)| e.apart_traffic.iter().map(move |&j| (i, j)))
        .collect();
    for (i, j) in pairs {
        out[j].apart_traffic.push(i);
    }
    for e in &mut out {
        e.not_with.sort_unstable();
        e.not_with.dedup();
        e.apart_traffic.sort_unstable();
        e.apart_traffic.dedup();
        // Apart in time is the stronger rule: a pair named both ways keeps it.
        let time = e.not_with.clone();
        e.apart_traffic.retain(|k| !time.contains(k));
    }
    // The order every later stage reads; only a cycle stops it.
    let order = after_order(&out);
    if order.is_none() {
        cycles(cx, &out);
    }
    (out, order)
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

/// Every `apart` value by its name in a file: true for traffic.
const APART: [(&str, bool); 2] = [("time", false), ("traffic", true)];

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
        let days_ok = cx.number(
            &at("days"),
            who,
            days,
            whole(days, 1.0, MAX_DAYS_SETTING),
            "a whole number of days from 1 to 366",
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

/// Every role by its name in a file.
const ROLES: [(&str, Role); 3] = [
    ("primary", Role::Primary),
    ("guardrail", Role::Guardrail),
    ("secondary", Role::Secondary),
];

/// The metric keys written on an experiment (the short form of one
/// primary metric), with the names they have in the file.
fn short_form_keys(e: &RawExperiment) -> Vec<&'static str> {
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
fn metrics<'r>(
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
fn size_metrics(
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

/// The settings every metric of an experiment shares.
#[derive(Clone, Copy)]
struct Shared {
    alpha: f64,
    power: f64,
    sides: Sides,
    arms: u32,
    ratio: f64,
    correction: Correction,
}

/// The metric keys of one metric: the experiment's own (the short form)
/// or a `metrics` entry's, with the path its keys are reported at.
struct MetricKeys<'r> {
    /// `experiments[0]` or `experiments[0].metrics[1]`.
    prefix: String,
    metric: &'r Option<Text>,
    baseline: Option<f64>,
    sd: Option<f64>,
    mde: Option<f64>,
    mde_abs: Option<f64>,
    rho: Option<f64>,
    method: &'r Option<Text>,
    margin: Option<f64>,
    margin_abs: Option<f64>,
}

impl<'r> MetricKeys<'r> {
    fn short(e: &'r RawExperiment, i: usize) -> MetricKeys<'r> {
        MetricKeys {
            prefix: format!("experiments[{i}]"),
            metric: &e.metric,
            baseline: e.baseline,
            sd: e.sd,
            mde: e.mde,
            mde_abs: e.mde_abs,
            rho: e.rho,
            method: &e.method,
            margin: None,
            margin_abs: None,
        }
    }

    fn entry(m: &'r RawMetric, i: usize, j: usize) -> MetricKeys<'r> {
        MetricKeys {
            prefix: format!("experiments[{i}].metrics[{j}]"),
            metric: &m.metric,
            baseline: m.baseline,
            sd: m.sd,
            mde: m.mde,
            mde_abs: m.mde_abs,
            rho: m.rho,
            method: &m.method,
            margin: m.margin,
            margin_abs: m.margin_abs,
        }
    }
}

/// The settings an experiment's metrics share, each range-checked here.
fn shared(cx: &mut Ctx, e: &RawExperiment, i: usize, who: &str, d: &Defaults) -> (Shared, bool) {
    let before = cx.errors.len();
    let at = |k: &str| format!("experiments[{i}].{k}");
    let alpha = e.alpha.unwrap_or(d.alpha);
    cx.number(
        &at("alpha"),
        who,
        alpha,
        alpha > 0.0 && alpha <= 0.5,
        "in (0, 0.5]",
        "the usual alpha is 0.05",
    );
    let power = e.power.unwrap_or(d.power);
    cx.number(
        &at("power"),
        who,
        power,
        power > alpha && power < 1.0,
        "in (alpha, 1)",
        "the usual power is 0.8",
    );
    let arms = e.arms.unwrap_or(2.0);
    let arms_ok = cx.number(
        &at("arms"),
        who,
        arms,
        whole(arms, 2.0, MAX_ARMS),
        "a whole number from 2 to 50",
        "arms count the control too: an A/B test has 2",
    );
    let ratio = e.ratio.unwrap_or(1.0);
    cx.number(
        &at("ratio"),
        who,
        ratio,
        ratio > 0.0 && ratio.is_finite() && (1e-3..=1e3).contains(&ratio),
        "in [0.001, 1000]",
        "treatment units per control unit; 1 is an even split",
    );
    let sides = cx.choice(&at("sides"), who, &e.sides, &SIDES, d.sides);
    let correction = cx.choice(
        &at("correction"),
        who,
        &e.correction,
        &CORRECTIONS,
        d.correction,
    );
    let shared = Shared {
        alpha,
        power,
        sides,
        arms: if arms_ok { arms as u32 } else { 2 },
        ratio,
        correction,
    };
    (shared, cx.errors.len() == before)
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

/// The design of one metric: its keys over the defaults and the shared
/// settings, each field range-checked here so that every bad field is
/// reported. A guardrail's effect is its margin, at `guardrail_alpha`,
/// one-sided; a primary's alpha is `alpha` (its share of the split).
#[allow(clippy::too_many_arguments)]
fn design(
    cx: &mut Ctx,
    k: &MetricKeys,
    role: Role,
    who: &str,
    what: &str,
    d: &Defaults,
    s: &Shared,
    alpha: f64,
) -> (Design, bool) {
    let before = cx.errors.len();
    let at = |key: &str| format!("{}.{key}", k.prefix);
    let kind = cx.choice(
        &at("metric"),
        who,
        k.metric,
        &[("rate", "rate"), ("mean", "mean")],
        if k.sd.is_some() { "mean" } else { "rate" },
    );
    let baseline = k.baseline.unwrap_or(f64::NAN);
    let metric = if kind == "rate" {
        if k.sd.is_some() {
            cx.err(
                &at("sd"),
                format!("{who}`sd` applies only to mean metrics"),
                "remove `sd`, or set `metric: mean`",
            );
        }
        match k.baseline {
            None => cx.missing(
                &at("baseline"),
                what,
                "give the control's conversion rate, e.g. `baseline: 0.04` for 4%",
            ),
            Some(b) => {
                let hint = if b > 1.0 && b < 100.0 {
                    format!(
                        "{b} looks like a percentage: {b}% is `{}`; for a mean metric set `metric: mean` and give `sd`",
                        b / 100.0
                    )
                } else {
                    "write rates as fractions: 0.04 for 4%; for a mean metric set `metric: mean` and give `sd`".to_string()
                };
                cx.number(
                    &at("baseline"),
                    who,
                    b,
                    b > 0.0 && b < 1.0,
                    "a rate strictly inside (0, 1)",
                    &hint,
                );
            }
        }
        Metric::Rate { baseline }
    } else {
        match k.baseline {
            None => cx.missing(
                &at("baseline"),
                what,
                "give the control's mean, e.g. `baseline: 38.5`",
            ),
            Some(b) => {
                cx.number(
                    &at("baseline"),
                    who,
                    b,
                    b.is_finite() && b.abs() < 1e12,
                    "a finite number",
                    "the control arm's mean per unit",
                );
            }
        }
        let sd = k.sd.unwrap_or(f64::NAN);
        match k.sd {
            None => cx.missing(
                &at("sd"),
                what,
                "a mean metric needs its standard deviation per unit, e.g. `sd: 61`",
            ),
            Some(v) => {
                cx.number(
                    &at("sd"),
                    who,
                    v,
                    v > 0.0 && v.is_finite() && v < 1e12,
                    "> 0",
                    "the standard deviation of the metric per unit",
                );
            }
        }
        Metric::Mean { mean: baseline, sd }
    };
    // A guardrail's effect is its margin; the others' their MDE.
    let (rel, abs, rk, ak) = if role == Role::Guardrail {
        for (v, key) in [(k.mde, "mde"), (k.mde_abs, "mde_abs")] {
            if v.is_some() {
                cx.err(
                    &at(key),
                    format!("{who}a guardrail has no `{key}`"),
                    "a guardrail is sized by the largest harm it accepts: write `margin` (relative) or `margin_abs`",
                );
            }
        }
        (k.margin, k.margin_abs, "margin", "margin_abs")
    } else {
        for (v, key) in [(k.margin, "margin"), (k.margin_abs, "margin_abs")] {
            if v.is_some() {
                cx.err(
                    &at(key),
                    format!("{who}`{key}` applies only to a guardrail metric"),
                    format!(
                        "a {} metric is sized by its effect: write `mde` or `mde_abs`, or set `role: guardrail`",
                        role.name()
                    ),
                );
            }
        }
        (k.mde, k.mde_abs, "mde", "mde_abs")
    };
    let effect = match (rel, abs) {
        (Some(x), None) => Effect::Relative(x),
        (None, Some(x)) => Effect::Absolute(x),
        (Some(x), Some(_)) => {
            cx.err(
                &at(ak),
                format!("{who}both `{rk}` and `{ak}` are given"),
                if role == Role::Guardrail {
                    "give one: `margin` is relative (0.02 = a 2% harm), `margin_abs` absolute"
                } else {
                    "give one: `mde` is relative (0.05 = 5% lift), `mde_abs` absolute"
                },
            );
            Effect::Relative(x)
        }
        // A secondary metric is not sized: the effect only sets the kind
        // and direction of the detectable effect reported.
        (None, None) if role == Role::Secondary => Effect::Relative(1e-6),
        (None, None) if role == Role::Guardrail => {
            cx.missing(
                &at("margin"),
                what,
                "give the largest harm that is acceptable: `margin: 0.02` (2% relative) or `margin_abs: 0.001`",
            );
            Effect::Relative(f64::NAN)
        }
        (None, None) => {
            cx.missing(&at("mde"), what, "give the smallest effect worth detecting: `mde: 0.05` (5% relative) or `mde_abs: 0.002`");
            Effect::Relative(f64::NAN)
        }
    };
    let (ek, ev) = match effect {
        Effect::Relative(x) => (rk, x),
        Effect::Absolute(x) => (ak, x),
    };
    if rel.is_some() || abs.is_some() {
        cx.number(
            &at(ek),
            who,
            ev,
            ev.is_finite() && ev != 0.0,
            "a finite non-zero number",
            "0.05 is 5% relative",
        );
    }
    let rho = k.rho.unwrap_or(0.0);
    cx.number(
        &at("rho"),
        who,
        rho,
        (0.0..1.0).contains(&rho),
        "in [0, 1)",
        "the correlation of the metric with its pre-period value; 0 for none",
    );
    // Blackwelder's guardrail formula for rates is the unpooled one.
    let default_method = match metric {
        Metric::Rate { .. } if role == Role::Guardrail => Method::Unpooled,
        Metric::Rate { .. } => d.rate_method,
        Metric::Mean { .. } => d.mean_method,
    };
    let all_methods: Vec<(&str, Method)> = RATE_METHODS
        .iter()
        .chain(MEAN_METHODS.iter())
        .copied()
        .collect();
    let method = cx.choice(&at("method"), who, k.method, &all_methods, default_method);
    if k.method.is_some() && method.is_for_rates() != matches!(metric, Metric::Rate { .. }) {
        let (kind, allowed) = if matches!(metric, Metric::Rate { .. }) {
            ("rate", "`pooled`, `unpooled`, `corrected`, `arcsine`")
        } else {
            ("mean", "`t`, `z`")
        };
        cx.err(
            &at("method"),
            format!("{who}method `{method}` does not apply to a {kind} metric"),
            format!("use one of {allowed}"),
        );
    }
    let design = Design {
        metric,
        effect,
        alpha,
        power: s.power,
        sides: if role == Role::Guardrail {
            Sides::One
        } else {
            s.sides
        },
        arms: s.arms,
        ratio: s.ratio,
        method,
        correction: s.correction,
        rho,
    };
    (design, cx.errors.len() == before)
}

/// The sample size of a design.
fn size(design: &Design) -> Result<SampleSize, SizingError> {
    sizing::sample_size(design)
}

/// A sizing failure after the range checks passed (an effect that leaves
/// (0, 1), a size beyond any traffic), pointed at the key to change.
fn sizing_error(cx: &mut Ctx, e: &MetricKeys, who: &str, err: &SizingError) {
    let effect_key = match (e.margin, e.margin_abs) {
        (_, Some(_)) => "margin_abs",
        (Some(_), None) => "margin",
        _ if e.mde_abs.is_some() => "mde_abs",
        _ => "mde",
    };
    let key = match err {
        SizingError::OutOfRange { field, .. } => match *field {
            "mean" => "baseline",
            f => f,
        },
        SizingError::MethodMismatch { .. } => "method",
        _ => effect_key,
    };
    let percent_hint;
    let hint = match err {
        SizingError::TreatmentRateOutside { .. } if e.mde.is_some_and(|m| m >= 1.0) => {
            let m = e.mde.unwrap_or(1.0);
            percent_hint = format!(
                "`mde` {m} is a lift of {}%; write a {m}% lift as `{}`",
                m * 100.0,
                m / 100.0
            );
            percent_hint.as_str()
        }
        SizingError::TreatmentRateOutside { .. } => {
            "the treatment rate must stay strictly between 0 and 1; use a smaller MDE"
        }
        SizingError::NoSolution(_) => "a larger MDE needs fewer units",
        _ => "see docs/portfolio.md for the ranges",
    };
    let message = match err {
        SizingError::TreatmentRateOutside {
            baseline,
            treatment,
        } => format!(
            "{who}the effect moves the rate from {} to {}, outside (0, 1)",
            show(*baseline),
            show((treatment * 1e9).round() / 1e9)
        ),
        SizingError::NoSolution(text) => {
            // Write an astronomically large size compactly.
            let n = text
                .strip_prefix("the design needs ")
                .and_then(|t| t.split(' ').next())
                .and_then(|t| t.parse::<f64>().ok());
            match n {
                Some(n) if n.is_finite() => {
                    format!("{who}the design needs about {n:.1e} units per arm, beyond any traffic")
                }
                Some(_) => format!("{who}the design needs more units than can be counted"),
                None => format!("{who}{err}"),
            }
        }
        _ => format!("{who}{err}"),
    };
    cx.err(&format!("{}.{key}", e.prefix), message, hint);
}

/// Reports every cycle of the `after` graph once, as `a -> b -> a`.
fn cycles(cx: &mut Ctx, exps: &[Experiment]) {
    // Edge e -> p: e waits for p.
    let n = exps.len();
    let mut state = vec![0u8; n]; // 0 new, 1 on the stack, 2 done
    let mut reported: BTreeSet<Vec<usize>> = BTreeSet::new();
    for root in 0..n {
        if state[root] != 0 {
            continue;
        }
        // Iterative DFS: (node, next edge index).
        let mut stack: Vec<(usize, usize)> = vec![(root, 0)];
        state[root] = 1;
        while let Some(&mut (v, ref mut k)) = stack.last_mut() {
            if *k < exps[v].after.len() {
                let w = exps[v].after[*k].experiment;
                *k += 1;
                match state[w] {
                    0 => {
                        state[w] = 1;
                        stack.push((w, 0));
                    }
                    1 => {
                        let pos = stack.iter().position(|&(x, _)| x == w).unwrap_or(0);
                        let cycle: Vec<usize> = stack[pos..].iter().map(|&(x, _)| x).collect();
                        let mut canon = cycle.clone();
                        let m = canon
                            .iter()
                            .enumerate()
                            .min_by_key(|(_, &x)| x)
                            .map_or(0, |(i, _)| i);
                        canon.rotate_left(m);
                        if reported.insert(canon) {
                            let mut names: Vec<&str> =
                                cycle.iter().map(|&x| exps[x].id.as_str()).collect();
                            names.push(exps[w].id.as_str());
                            let entry = exps[v]
                                .after
                                .iter()
                                .position(|p| p.experiment == w)
                                .unwrap_or(0);
                            // The entry's key: a plain id or the `id` of a mapping.
                            let plain = format!("experiments[{v}].after[{entry}]");
                            let key = match cx.index.and_then(|ix| ix.get(&format!("{plain}.id"))) {
                                Some(_) => format!("{plain}.id"),
                                None => plain,
                            };
                            cx.err(
                                &key,
                                format!("`after` forms a cycle: {}", names.join(" -> ")),
                                "each test in the cycle waits for the next to end, so none can start; remove one of these `after` entries",
                            );
                        }
                    }
                    _ => {}
                }
            } else {
                state[v] = 2;
                stack.pop();
            }
        }
    }
}

fn blackouts(
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

#[cfg(test)]
mod looks_tests {
    use super::super::load::load_str;
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
    use super::super::load::load_str;
    use super::*;

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

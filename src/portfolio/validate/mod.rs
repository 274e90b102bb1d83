//! Raw structs -> the validated [`Portfolio`]: defaults, ranges, ids,
//! references, the `after` graph, dates against the window, and the sample
//! size of every experiment.
//!
//! Every check runs, whatever failed before it, so one run reports every
//! problem; the model is returned only when there is none. Positions come
//! from the [`PositionIndex`] by the key's path.
//!
//! The stages run in this order, each in its own file: the window
//! ([`calendar`]), the [`defaults`] and share levels, the `planning`
//! settings ([`calendar`]), the [`pools`], the [`experiments`] (each
//! test's own keys; its metrics sized in [`metrics`], each metric's
//! design read in [`design`], its `after` and `not_with` and the cycles of
//! `after` in [`relations`]) and last the blackouts ([`calendar`]). This
//! file holds the entry point and the helpers every stage shares.

mod calendar;
mod defaults;
mod design;
mod experiments;
mod metrics;
mod pools;
mod relations;

pub(crate) use metrics::resize;

use super::checker::Checker;
use super::model::*;
use super::position::PositionIndex;
use super::raw::*;
use crate::diagnostic::{self, Diagnostic};
use crate::share::Share;
use crate::sizing::{Correction, Method, Sides};
use chrono::NaiveDate;
use std::collections::{BTreeMap, HashMap};

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

/// One experiment being read: its keys, its place in the file and its id,
/// with the words its problems begin with.
struct Entry<'a> {
    e: &'a RawExperiment,
    i: usize,
    id: &'a str,
    /// "experiment `id`: ", the start of a problem's message.
    who: String,
    /// "experiment `id`", the subject of a missing key.
    what: String,
}

impl Entry<'_> {
    /// The path of the experiment's key `k`.
    fn at(&self, k: &str) -> String {
        format!("experiments[{}].{k}", self.i)
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

/// An alpha at `key`: in (0, 0.5].
fn alpha_ok(cx: &mut Ctx, key: &str, who: &str, alpha: f64, hint: &str) -> bool {
    cx.number(
        key,
        who,
        alpha,
        alpha > 0.0 && alpha <= 0.5,
        "in (0, 0.5]",
        hint,
    )
}

/// A power at `key`: above the test's alpha, below 1.
fn power_ok(cx: &mut Ctx, key: &str, who: &str, power: f64, alpha: f64) -> bool {
    cx.number(
        key,
        who,
        power,
        power > alpha && power < 1.0,
        "in (alpha, 1)",
        "the usual power is 0.8",
    )
}

/// A whole number of days at `key`, from 1 to 366.
fn days_ok(cx: &mut Ctx, key: &str, who: &str, days: f64, hint: &str) -> bool {
    cx.number(
        key,
        who,
        days,
        whole(days, 1.0, MAX_DAYS_SETTING),
        "a whole number of days from 1 to 366",
        hint,
    )
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
    let window = calendar::window(&mut cx, raw.window.as_ref());
    let (defaults, defaults_ok) = defaults::defaults(&mut cx, raw.defaults.unwrap_or_default());
    let share_levels = defaults::share_levels(&mut cx, raw.share_levels);
    let planning = calendar::planning(&mut cx, raw.planning.unwrap_or_default(), &defaults);
    let pools = pools::pools(
        &mut cx,
        raw.pools.unwrap_or_default(),
        &defaults,
        &share_levels,
    );
    let pool_ids = Names::new(pools.iter().map(|p| p.id.as_str()));
    let (experiments, after_order) = experiments::experiments(
        &mut cx,
        raw.experiments.unwrap_or_default(),
        &pool_ids,
        window,
        &defaults,
        defaults_ok,
        &share_levels,
    );
    let blackouts = calendar::blackouts(
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

/// A share the model can hold: in (0, 1] and not below one millionth.
/// Whether `h` is a holdout: in [0, 1) and leaving at least a millionth.
fn is_holdout(h: f64) -> bool {
    (0.0..1.0).contains(&h) && !Share::from_fraction(1.0 - h).is_zero()
}

fn is_share(s: f64) -> bool {
    s > 0.0 && s <= 1.0 && !Share::from_fraction(s).is_zero()
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

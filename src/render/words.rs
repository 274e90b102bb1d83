//! The sentences of sluice: the one place that puts the library's facts
//! into words, one function per family of facts. [`reason`] words why a
//! test is out of the calendar ([`Reason`]), for every format and for the
//! `reason` key of a plan's JSON and of `check --format json`; [`advice`]
//! words a running test's outlook ([`Advice`]) for the `advice` key and
//! every format. Numbers
//! inside the sentences are worded by `crate::words`.

use crate::advice::{Advice, Detect, Note, Rescue};
use crate::check::PoolNote;
use crate::portfolio::Sharing;
use crate::reason::{BlackoutSpan, Helps, Limit, Needs, Reason, ShareOf, SoloFrom, Span, Words};
use crate::words::{percent, significant, thousands, trimmed};

impl Words for Reason {
    fn words(&self) -> String {
        reason(self)
    }

    fn read(words: String) -> Reason {
        Reason::Worded(words)
    }
}

/// Why a test is out of the calendar, in words a planner can act on.
pub fn reason(r: &Reason) -> String {
    match r {
        Reason::Worded(s) => s.clone(),
        Reason::Running(a) => advice(a),
        Reason::Finished { ended: Some(d) } => format!("finished on {d}"),
        Reason::Finished { ended: None } => "finished".to_string(),
        Reason::Cancelled { note } if note.is_empty() => "cancelled".to_string(),
        Reason::Cancelled { note } => format!("cancelled: {note}"),
        Reason::LeftOut => crate::scenario::LEFT_OUT.to_string(),
        Reason::PrerequisiteLeft { prerequisite } => {
            format!("depends on `{prerequisite}`, which left the queue without finishing")
        }
        Reason::PrerequisiteUnscheduled { prerequisite } => {
            format!("depends on `{prerequisite}`, which is not scheduled")
        }
        Reason::NoShareLevel { max_share } => format!(
            "no share level is at or below its maximum share of {max_share}; add a smaller level or raise it"
        ),
        Reason::EarliestStartPastWindow { earliest } => {
            format!("its earliest possible start, {earliest}, is past the window")
        }
        Reason::NoStartDayAfter { after } => {
            format!("no start day on the grid is left after {after}")
        }
        Reason::NeverDelivers { units, at } => format!(
            "needs {} units; at {} the forecast does not deliver them within three years",
            thousands(*units),
            share_of(at)
        ),
        Reason::DeadlineFromFirstDay { deadline, at, end } => format!(
            "deadline {deadline} cannot be met: at its maximum share of {}{} the earliest end is {end}",
            at.share,
            limits(at)
        ),
        Reason::DeadlineTooClose {
            deadline, start, ..
        } if start > deadline => format!(
            "deadline {deadline} cannot be met: its earliest start, {start}, is after it"
        ),
        Reason::DeadlineTooClose {
            deadline,
            days,
            at,
            start,
            left,
        } => format!(
            "deadline {deadline} cannot be met: needs {days} days at {}; from its earliest start on {start} to its deadline there are {left}",
            share_of(at)
        ),
        Reason::LongerThanWindow {
            days,
            at,
            from: None,
            left,
        } => format!("needs {days} days at {}; the window has {left}", share_of(at)),
        Reason::LongerThanWindow {
            days,
            at,
            from: Some(start),
            left,
        } => format!(
            "needs {days} days at {}; from its earliest start on {start} the window has {left}",
            share_of(at)
        ),
        Reason::PoolFull {
            pool,
            from,
            to,
            gaps,
            higher,
            holders,
            apart,
        } => {
            let names: Vec<String> = holders
                .iter()
                .map(|h| format!("{} ({})", h.id, trimmed(h.priority, 3)))
                .collect();
            let whom = if *higher {
                "tests of higher priority"
            } else {
                "tests worth more to the plan together"
            };
            let gaps = if *gaps {
                " (with gaps too short for it)"
            } else {
                ""
            };
            let mut text = format!(
                "fits alone, but `{pool}` is full from {from} to {to}{gaps} with {whom}: {}",
                names.join(", ")
            );
            if !apart.is_empty() {
                text.push_str(&format!(
                    "; it also must not run alongside {}",
                    ticked(apart).join(", ")
                ));
            }
            text
        }
        Reason::KeptApartInTime { partners } => format!(
            "fits alone, but must not run alongside {}, which the plan keeps",
            spans(partners)
        ),
        Reason::KeptApartOnTraffic { partners } => format!(
            "fits alone, but is kept apart on traffic from {}, which the plan keeps, and no share level fits beside it",
            spans(partners)
        ),
        Reason::WaitsFor { prerequisites } => {
            let ps: Vec<String> = prerequisites
                .iter()
                .map(|(id, end)| format!("`{id}` (ends {end})"))
                .collect();
            format!(
                "must wait for {}, which leaves too little time after it",
                ps.join(", ")
            )
        }
        Reason::NoRunFits => "no run fits beside the scheduled tests".to_string(),
        Reason::RunningHold {
            pools,
            holders,
            until,
            past_window,
            alone_from,
        } => {
            let on = pools_named(pools);
            if holders.is_empty() {
                return format!("the tests already running on {on} leave no room for it in time");
            }
            let when = match until {
                Some(u) if *past_window => format!("past the window's end (until {u})"),
                Some(u) => format!("until {u}"),
                None => String::new(),
            };
            format!(
                "the running tests {} hold {on} {when}, leaving no room for it in time; alone it could run from {alone_from}",
                ticked(holders).join(", ")
            )
        }
        Reason::BlackoutInTheWay {
            limit,
            spans,
            helps,
        } => format!(
            "every run that ends by {} meets a no-running blackout ({}){}",
            its_limit(limit),
            blackouts(spans),
            would_help(helps)
        ),
        Reason::NoFreeStartDay { from, spans, limit } => format!(
            "no start day from {from} is free of the no-starts blackouts ({}) in time for {}",
            blackouts(spans),
            its_limit(limit)
        ),
        Reason::NoRunByLimit {
            limit,
            share,
            helps,
        } => format!(
            "no run from an allowed start ends by {} at its largest share of {share}{}",
            its_limit(limit),
            would_help(helps)
        ),
        Reason::Margin {
            share,
            from,
            to,
            units,
            need,
            confidence,
            asked,
        } => format!(
            "the room the plan leaves holds it on the expected forecast ({share} from {from} to {to}, \
             {} units against the {} it needs), but not with the margin for {} confidence, \
             which plans it as {} units; lower `planning.confidence` or free its pool",
            thousands(*units),
            thousands(*need),
            percent(*confidence),
            thousands(*asked)
        ),
        Reason::AtConfidence {
            reason: inner,
            confidence,
            units,
        } => format!(
            "{} (planned at {} confidence as {} units)",
            reason(inner),
            percent(*confidence),
            thousands(*units)
        ),
        Reason::PrerequisiteMisfit { prerequisite } => {
            format!("it runs after `{prerequisite}`, which cannot fit even alone")
        }
        Reason::StartsTooLate {
            first,
            after: Some(pre),
            until,
        } => format!(
            "it may start only on {first}, after `{pre}` ends and the gap, later than {}",
            its_limit(until)
        ),
        Reason::StartsTooLate {
            first,
            after: None,
            until,
        } => format!(
            "it may start only on {first}, later than {}",
            its_limit(until)
        ),
        Reason::NoAllowedStart { from, to } => {
            format!("no allowed start day between {from} and {to} (start grid, freezes)")
        }
        Reason::SoloCrossesBlackout { share, until } => format!(
            "every run at {share} that ends by {} crosses a no-running blackout",
            its_limit(until)
        ),
        Reason::SoloTooLong {
            share,
            needs,
            from,
            until,
        } => {
            let start = match from {
                SoloFrom::AfterPrerequisite(day, pre) => {
                    format!(" even from {day}, after `{pre}` ends")
                }
                SoloFrom::EarliestStart(day) => format!(" even from its earliest start {day}"),
                SoloFrom::FirstStartDay(day) => format!(" from the first start day, {day}"),
                SoloFrom::WindowStart => String::new(),
            };
            match needs {
                Needs::Days { days, end } => format!(
                    "at {share} it needs {days} days{start}, ending {end}, after {}",
                    its_limit(until)
                ),
                Needs::Years(years) => {
                    format!("at {share} it needs more than {years} years{start}")
                }
            }
        }
        Reason::NoSoloRun { share, until } => {
            format!("no run at {share} ends by {}", its_limit(until))
        }
    }
}

/// "`a`, `b`".
fn ticked(ids: &[String]) -> Vec<String> {
    ids.iter().map(|id| format!("`{id}`")).collect()
}

/// The pools of a test as a reason names them: "`home`", or
/// "each of `home`, `search`".
fn pools_named(pools: &[String]) -> String {
    let names = ticked(pools);
    if names.len() == 1 {
        names[0].clone()
    } else {
        format!("each of {}", names.join(", "))
    }
}

/// What limits the units a test collects beside its share, as
/// ` (30% of its units eligible, 5% held out)`, or nothing.
fn limits(at: &ShareOf) -> String {
    let mut notes = Vec::new();
    if at.eligible < 1.0 {
        notes.push(format!("{} of its units eligible", percent(at.eligible)));
    }
    if at.held_out > 0.0 {
        notes.push(format!("{} held out", percent(at.held_out)));
    }
    if notes.is_empty() {
        String::new()
    } else {
        format!(" ({})", notes.join(", "))
    }
}

/// `75% of `product``, or `75% of each of `home`, `search``, with its
/// [`limits`].
fn share_of(at: &ShareOf) -> String {
    format!("{} of {}{}", at.share, pools_named(&at.pools), limits(at))
}

/// "`x` (2027-01-04 to 2027-01-17)" for each test.
fn spans(list: &[Span]) -> String {
    list.iter()
        .map(|s| format!("`{}` ({} to {})", s.id, s.from, s.to))
        .collect::<Vec<_>>()
        .join(", ")
}

/// "2027-02-01..2027-02-07, launch; ..." for each blackout.
fn blackouts(list: &[BlackoutSpan]) -> String {
    list.iter()
        .map(|b| {
            if b.note.is_empty() {
                format!("{}..{}", b.from, b.to)
            } else {
                format!("{}..{}, {}", b.from, b.to, b.note)
            }
        })
        .collect::<Vec<_>>()
        .join("; ")
}

/// "its deadline 2027-03-01" or "the window's end 2027-03-31".
fn its_limit(limit: &Limit) -> String {
    match limit {
        Limit::Deadline(d) => format!("its deadline {d}"),
        Limit::WindowEnd(d) => format!("the window's end {d}"),
    }
}

/// "; a larger `max_share` than 50% or a later deadline would help", or
/// nothing.
fn would_help(helps: &Helps) -> String {
    let mut list: Vec<String> = Vec::new();
    if let Some(top) = helps.larger_than {
        list.push(format!("a larger `max_share` than {top}"));
    }
    if helps.later_deadline {
        list.push("a later deadline".to_string());
    }
    if list.is_empty() {
        String::new()
    } else {
        format!("; {} would help", list.join(" or "))
    }
}

impl Words for Advice {
    fn words(&self) -> String {
        advice(self)
    }

    fn read(words: String) -> Advice {
        Advice::Worded(words)
    }
}

/// A running test's advice: its notes, joined by "; ".
pub fn advice(a: &Advice) -> String {
    match a {
        Advice::Worded(s) => s.clone(),
        Advice::Notes(notes) => notes.iter().map(note).collect::<Vec<_>>().join("; "),
    }
}

/// "`home`" or "`home`, `search`" for the pools of a running test.
fn pools_ticked(pools: &[String]) -> String {
    ticked(pools).join(", ")
}

/// One note of a running test's advice.
fn note(n: &Note) -> String {
    match n {
        Note::Reshared { from, to, today } => format!(
            "re-shared from {from} to {to} from {today} so it finishes in the window; the arms' split is unchanged"
        ),
        Note::ReadyToRead {
            collected,
            needed,
            last_day,
            share,
            pools,
        } => format!(
            "ready to read: {} of its {} units are in; its last day of data was {last_day}, and its {share} of {} is free from today",
            thousands(*collected),
            thousands(*needed),
            pools_ticked(pools)
        ),
        Note::RunsToMinimum {
            collected,
            needed,
            min_days,
            end,
        } => format!(
            "has its sample ({} of {} units) but runs to its minimum of {min_days} days, to {end}",
            thousands(*collected),
            thousands(*needed)
        ),
        Note::CannotFinish {
            window_end,
            share,
            need,
            end,
            rescue,
            detect,
        } => {
            let when = match end {
                Some(day) => format!(
                    "at {share} it would reach its {} units on {day}",
                    thousands(*need)
                ),
                None => format!(
                    "at {share} it would not reach its {} units within ten years",
                    thousands(*need)
                ),
            };
            let mut text =
                format!("cannot reach its sample by the window's end ({window_end}): {when}");
            match rescue {
                Rescue::Share(s) => text.push_str(&format!(
                    "; a share of {s} from today would finish it in time"
                )),
                Rescue::NoRoom {
                    needed,
                    pools,
                    holders,
                } => {
                    let held: Vec<String> = holders
                        .iter()
                        .map(|(id, s)| format!("`{id}` {s}"))
                        .collect();
                    text.push_str(&format!(
                        "; a share of {needed} from today would finish it, but {} has no room for it (running from today: {}); one of them would have to stop to make room",
                        pools_ticked(pools),
                        held.join(", ")
                    ));
                }
                Rescue::Nothing { max_share } => text.push_str(&format!(
                    "; no share up to its maximum of {max_share} finishes it in time"
                )),
                Rescue::Unsaid => {}
            }
            text.push_str(&format!(
                "; stopped at the window's end {}",
                can_detect(detect)
            ));
            text
        }
        Note::NoRunning {
            from,
            to,
            note,
            pools,
            stop_end,
            detect,
            end,
        } => {
            let note = if note.is_empty() {
                String::new()
            } else {
                format!(" ({note})")
            };
            let later = match end {
                Some(end) => format!("ends on {end}"),
                None => "does not end within ten years".to_string(),
            };
            format!(
                "its run reaches the no-running span {from}..{to} of {}{note}, whose units do not count: stopped on {stop_end}, {}; or, with those days left out, it {later}",
                pools_ticked(pools),
                can_detect(detect)
            )
        }
        Note::Overload {
            pools,
            from,
            peak_share,
            peak_count,
            max_concurrent,
        } => format!(
            "the running tests on {} alone already overload it from {from}, at the shares the progress file gives them (up to {} of it and {peak_count} tests; at most {max_concurrent} may run)",
            pools_ticked(pools),
            percent(*peak_share)
        ),
    }
}

/// A running test's advice words a relative effect to one decimal.
const ADVICE_DIGITS: Digits = Digits::Fixed(1);

/// "it can detect a relative effect of 8.7% (planned MDE: 8.0%)", or that
/// it has too few units for any.
fn can_detect(d: &Detect) -> String {
    match d {
        Detect::SampleGiven => "its sample size was given, not sized from an effect, so no detectable effect is worked out".to_string(),
        Detect::Effect { effect, planned } => {
            let (kind, planned) = match planned {
                crate::sizing::Effect::Relative(x) => (
                    format!("a relative effect of {}", relative(*effect, ADVICE_DIGITS)),
                    relative(*x, ADVICE_DIGITS),
                ),
                crate::sizing::Effect::Absolute(x) => (
                    format!("an absolute effect of {}", number(*effect, Digits::Fixed(4))),
                    format!("{x}"),
                ),
            };
            format!("it can detect {kind} (planned MDE: {planned})")
        }
        Detect::TooFew => "it has too few units to detect any effect at the planned power".to_string(),
    }
}

/// How an effect's number is rounded.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Digits {
    /// To this many significant digits, without trailing zeros: the plan's
    /// statistics, `size` and `detect`.
    Significant(usize),
    /// To this many decimals, zeros kept: a running test's advice.
    Fixed(usize),
}

/// The plan's rounding of an effect: three significant digits.
pub const EFFECT_DIGITS: Digits = Digits::Significant(3);

/// `x` rounded as `digits` says.
pub fn number(x: f64, digits: Digits) -> String {
    match digits {
        Digits::Significant(n) => significant(x, n),
        Digits::Fixed(n) => format!("{x:.n$}"),
    }
}

/// A relative effect as a percentage of the baseline: `4%`, `-8.7%`.
pub fn relative(rel: f64, digits: Digits) -> String {
    format!("{}%", number(rel * 100.0, digits))
}

/// An absolute effect in the metric's units: points of a rate
/// (`0.124 points`), or the mean's own units (`-0.07`).
pub fn absolute(abs: f64, rate: bool, digits: Digits) -> String {
    if rate {
        format!("{} points", number(abs * 100.0, digits))
    } else {
        number(abs, digits)
    }
}

/// `word` for the value `x`, with a `+` when `x` is above zero: `+4%`,
/// `-0.5 points`.
pub fn signed(x: f64, word: String) -> String {
    if x > 0.0 {
        format!("+{word}")
    } else {
        word
    }
}

impl Words for PoolNote {
    fn words(&self) -> String {
        pool_note(self)
    }

    fn read(words: String) -> PoolNote {
        PoolNote::Worded(words)
    }
}

/// How to read a pool's needed-over-offered ratio in `check`.
pub fn pool_note(n: &PoolNote) -> String {
    match n {
        PoolNote::Worded(s) => s.clone(),
        PoolNote::Ratio {
            sharing,
            max_concurrent,
            holdout,
        } => {
            let mut note = match sharing {
                Sharing::Split => {
                    "split: tests take disjoint slices, so above 1 not all can finish in the window"
                        .to_string()
                }
                Sharing::Overlap => format!(
                    "overlap: each test may see every unit and up to {max_concurrent} run at once, so a ratio up to {max_concurrent} can fit"
                ),
            };
            if *holdout > 0.0 {
                note.push_str(&format!(
                    "; {} of its units are held out of every test and not offered",
                    percent(*holdout)
                ));
            }
            note
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use chrono::NaiveDate;

    fn day(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").expect("a date")
    }

    /// A deadline that falls before the test's earliest start is said so,
    /// rather than counting "0" days to it; a deadline after it counts
    /// the days.
    #[test]
    fn a_deadline_before_the_earliest_start_is_named_as_such() {
        let at = ShareOf {
            share: crate::share::Share::WHOLE,
            pools: vec!["basket".into()],
            eligible: 1.0,
            held_out: 0.0,
        };
        let too_close = |start: &str, left: i64| Reason::DeadlineTooClose {
            deadline: day("2027-01-31"),
            days: 28,
            at: at.clone(),
            start: day(start),
            left,
        };
        assert_eq!(
            reason(&too_close("2027-02-08", 0)),
            "deadline 2027-01-31 cannot be met: its earliest start, 2027-02-08, is after it"
        );
        assert_eq!(
            reason(&too_close("2027-01-18", 14)),
            "deadline 2027-01-31 cannot be met: needs 28 days at 100% of `basket`; \
             from its earliest start on 2027-01-18 to its deadline there are 14"
        );
    }
}

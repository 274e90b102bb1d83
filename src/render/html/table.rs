//! The report's table of tests: a row per experiment in plan order with
//! its pool, share, run, result date, units and owner.

use super::{esc, pool_fill, RunWords};
use crate::plan::Plan;
use crate::render::common::{pools_label, thousands};
use std::fmt::Write;

/// Under a result date: its range and on-time share, when it has a range.
fn range_line(e: &crate::plan::PlannedExperiment) -> String {
    e.result_range.as_ref().map_or(String::new(), |r| {
        format!(
            r#"<br/><span class="small">P10–P90 {}<br/>{}</span>"#,
            esc(&crate::render::common::range_words(r)),
            esc(&crate::render::common::chance_words(r))
        )
    })
}

/// The table of tests, into `s`.
pub(super) fn tests(plan: &Plan, s: &mut String) {
    let _ = writeln!(
        s,
        r#"<div class="frame" role="region" tabindex="0" aria-label="Table of tests; it scrolls sideways"><table><thead><tr><th>Test</th><th>Pool</th><th class="num">Share</th><th>Runs</th><th>Result due</th><th class="num">Units needed</th><th class="num">Units expected</th><th>Owner</th></tr></thead><tbody>"#
    );
    for e in &plan.experiments {
        let pool_index = plan
            .pools
            .iter()
            .position(|p| e.pools.first() == Some(&p.id));
        let swatch = match pool_index {
            Some(i) => format!(
                r#"<span class="swatch" style="background:{}"></span>"#,
                pool_fill(i)
            ),
            None => String::new(),
        };
        let _ = write!(
            s,
            r#"<tr data-test="{}"><td class="test"><strong>{}</strong><br/><code>{}</code></td><td class="pool">{swatch}{}</td>"#,
            esc(&e.id),
            esc(&e.title),
            esc(&e.id),
            esc(&pools_label(plan, e))
        );
        match &e.run {
            Some(r) => {
                let w = RunWords::of(e, r);
                let _ = write!(s, r#"<td class="num">{}</td>"#, w.share);
                let _ = write!(
                    s,
                    r#"<td class="date"><span class="nw">{}</span> to <span class="nw">{}</span><br/><span class="small">{} days</span></td>"#,
                    w.start, w.end, w.days
                );
                let _ = write!(
                    s,
                    r#"<td class="date"><strong>{}</strong>{}</td>"#,
                    w.due,
                    range_line(e)
                );
                let _ = write!(
                    s,
                    r#"<td class="num">{}</td><td class="num">{}</td>"#,
                    w.needed, w.expected
                );
            }
            None => {
                let _ = write!(
                    s,
                    r#"<td class="num">—</td><td class="muted" colspan="2">{}</td><td class="num">{}</td><td class="num">—</td>"#,
                    esc(&crate::render::common::closed_words(e)),
                    thousands(e.units_needed)
                );
            }
        }
        let _ = writeln!(s, "<td>{}</td></tr>", esc(&e.owner));
    }
    let _ = writeln!(s, "</tbody></table></div>");
}

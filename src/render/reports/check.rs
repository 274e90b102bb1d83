//! The text of `sluice check`: a header, the experiment table (its
//! columns chosen by priority for the width), the reasons, the pool table.
//! The facts come from [`crate::check`].

use crate::check::{self, CheckReport};
use crate::portfolio;
use crate::words::thousands as units;
use crate::words::Count;
use comfy_table::{presets, CellAlignment, Table};

fn table() -> Table {
    let mut t = Table::new();
    t.load_preset(presets::UTF8_BORDERS_ONLY);
    t
}

fn right(t: &mut Table, columns: &[usize]) {
    for &c in columns {
        if let Some(col) = t.column_mut(c) {
            col.set_cell_alignment(CellAlignment::Right);
        }
    }
}

/// A table of `header` over `rows` at `width` columns: the columns in
/// `priority` (indexes, most wanted first) are kept while the table fits
/// without wrapping a cell, in their own order, and the rest left out; what
/// is kept is wrapped to the width when even the first two do not fit.
/// `numbers` are the right-aligned columns.
fn fitted(
    header: &[&str],
    rows: &[Vec<String>],
    priority: &[usize],
    numbers: &[usize],
    width: usize,
) -> Table {
    let build = |keep: &[usize], wrap: bool| {
        let mut keep = keep.to_vec();
        keep.sort_unstable();
        let mut t = table();
        crate::render::common::fit_table(&mut t, wrap.then_some(width));
        t.set_header(keep.iter().map(|&c| header[c]));
        for row in rows {
            t.add_row(keep.iter().map(|&c| row[c].clone()));
        }
        let aligned: Vec<usize> = keep
            .iter()
            .enumerate()
            .filter(|(_, c)| numbers.contains(c))
            .map(|(i, _)| i)
            .collect();
        right(&mut t, &aligned);
        t
    };
    let fits = |keep: &[usize]| {
        build(keep, false)
            .to_string()
            .lines()
            .all(|l| unicode_width::UnicodeWidthStr::width(l) <= width)
    };
    let mut keep = priority[..2.min(priority.len())].to_vec();
    for &c in &priority[keep.len()..] {
        let mut more = keep.clone();
        more.push(c);
        if !fits(&more) {
            break;
        }
        keep = more;
    }
    build(&keep, true)
}

/// The text report at `width` columns: a header, the experiment table
/// (its columns chosen by priority for the width), the reasons, the pool
/// table.
pub fn text(r: &CheckReport, width: usize) -> String {
    let mut out = String::new();
    out.push_str(&format!(
        "{}: window {} to {} ({} days), {} {}\n\n",
        r.name,
        r.window_start,
        r.window_end,
        r.window_days,
        r.experiments.len(),
        Count("experiment", r.experiments.len())
    ));
    let mut notes = Vec::new();
    if r.first_start != r.window_start {
        notes.push(format!(
            "Each test's days count from its first start day (the window's is {}).",
            r.first_start
        ));
    }
    if let Some(c) = r.confidence {
        notes.push(format!(
            "At {} confidence, as the plan is made: each test's days are those \
             that collect its units on the forecast's lower quantile.",
            crate::words::percent(c)
        ));
    }
    if !notes.is_empty() {
        out.push_str(&crate::render::text::wrap(&notes.join(" "), width, ""));
        out.push('\n');
    }
    let header = [
        "experiment",
        "pool",
        "metric",
        "arms",
        "units per arm",
        "total units",
        "share",
        "days from start",
        "alone",
    ];
    let mut rows = Vec::with_capacity(r.experiments.len());
    for e in &r.experiments {
        let per_arm = if e.treatment_units == e.control_units {
            units(e.control_units)
        } else {
            format!("{} / {}", units(e.control_units), units(e.treatment_units))
        };
        let days = match (e.days_from_first_start, e.end_from_first_start) {
            (Some(d), Some(end)) => format!("{d} (to {end})"),
            _ => format!("over {} years", check::HORIZON_DAYS / 365),
        };
        rows.push(vec![
            e.id.clone(),
            e.pools.join(", "),
            e.metric.clone(),
            e.arms.to_string(),
            per_arm,
            units(e.total_units),
            if e.eligible < 1.0 {
                format!(
                    "{} ({} eligible)",
                    e.share,
                    crate::words::percent(e.eligible)
                )
            } else {
                e.share.to_string()
            },
            days,
            if let (true, Some(start)) = (e.fits_alone, e.solo_start) {
                format!("fits alone from {start}")
            } else {
                "cannot fit even alone".to_string()
            },
        ]);
    }
    // The test and whether it fits first, then its days, share and pool,
    // then its size.
    let t = fitted(
        &header,
        &rows,
        &[0, 8, 7, 6, 1, 5, 4, 3, 2],
        &[3, 4, 5, 6, 7],
        width,
    );
    out.push_str(&t.to_string());
    out.push('\n');
    out.push_str(&format!(
        "\n{} of {} fit the window alone; {} cannot fit even alone.\n",
        r.fit_alone,
        r.experiments.len(),
        r.cannot_fit
    ));
    // Prose is wrapped to the width, each item's later lines indented.
    let item = |text: &str, indent: &str| {
        let wrapped = crate::render::text::wrap(text, width, indent);
        let more = format!("{indent}  ");
        let mut lines = wrapped.lines();
        let first = lines.next().unwrap_or_default().to_string();
        let rest: String = lines.map(|l| format!("{}\n", l.trim_start())).collect();
        let rest = crate::render::text::wrap(&rest, width, &more);
        format!("{first}\n{rest}")
    };
    for e in r.experiments.iter().filter(|e| !e.fits_alone) {
        if let Some(why) = &e.reason {
            out.push_str(&item(&format!("`{}`: {why}", e.id), "  "));
        }
        if let (Some(d), Some(s)) = (&e.detectable, &e.statistics) {
            let line = crate::render::numbers::detectable(d, s);
            out.push_str(&item(&line, "    "));
        }
    }
    let idle: Vec<String> = r
        .experiments
        .iter()
        .filter_map(|e| {
            let l = e.looks.as_ref().filter(|l| !l.idle.is_empty())?;
            let line = crate::render::common::look_advice(&format!("`{}`", e.id), l);
            Some(item(&line, "  "))
        })
        .collect();
    if !idle.is_empty() {
        out.push_str("\nInterim looks that cannot stop a test early, even alone:\n");
        out.extend(idle);
    }
    let secondary: Vec<String> = r
        .experiments
        .iter()
        .filter_map(|e| {
            let line = crate::render::numbers::secondary_list(e.statistics.as_ref()?)?;
            Some(item(&format!("`{}`: {line}", e.id), "  "))
        })
        .collect();
    if !secondary.is_empty() {
        out.push_str("\nSecondary metrics are not sized; each test's sample can detect on them:\n");
        out.extend(secondary);
    }
    out.push('\n');
    let mut t = table();
    crate::render::common::fit_table(&mut t, Some(width));
    t.set_header(vec![
        "pool",
        "sharing",
        "cap",
        "tests",
        "units offered",
        "units needed",
        "needed / offered",
    ]);
    for p in &r.pools {
        t.add_row(vec![
            p.id.clone(),
            match p.sharing {
                portfolio::Sharing::Split => "split".to_string(),
                portfolio::Sharing::Overlap => "overlap".to_string(),
            },
            p.max_concurrent.to_string(),
            p.experiments.to_string(),
            units(p.offered_units.round() as u64),
            units(p.needed_units),
            if p.ratio.is_finite() {
                format!("{:.2}", p.ratio)
            } else {
                "no traffic".to_string()
            },
        ]);
    }
    right(&mut t, &[2, 3, 4, 5, 6]);
    out.push_str(&t.to_string());
    out.push('\n');
    for p in &r.pools {
        out.push_str(&item(
            &format!("`{}` ({}): {}", p.id, p.label, p.note),
            "  ",
        ));
    }
    out
}

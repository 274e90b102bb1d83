//! A re-plan's sections of the report, right after its header: what moved
//! since the previous plan (the headline, the table, the lines under it)
//! and the running tests that need a decision or were given a new share.
//! The words are [`crate::render::moved`]'s; the table is laid out by
//! [`MarkupTable::table`] with the HTML pieces below.

use super::{esc, Html};
use crate::plan::Plan;
use crate::render::markup::{Column, MarkupTable};
use crate::render::moved::{advice_groups, headline, rows, summary_lines, COLUMNS, HEADER, TITLE};
use std::fmt::Write;

/// HTML's table pieces: numbers right-aligned and dates kept whole by the
/// report's `num` and `date` classes, ids as code.
impl MarkupTable for Html {
    fn header_row(&self, header: &[&str], columns: &[Column]) -> String {
        let mut s = String::from("<table><thead><tr>");
        for (h, &c) in header.iter().zip(columns) {
            let class = if c == Column::Number {
                r#" class="num""#
            } else {
                ""
            };
            let _ = write!(s, "<th{class}>{}</th>", esc(h));
        }
        s.push_str("</tr></thead><tbody>\n");
        s
    }

    fn cell(&self, column: Column, text: &str) -> String {
        match column {
            Column::Code => format!("<td><code>{}</code></td>", esc(text)),
            Column::Number => format!(r#"<td class="num">{}</td>"#, esc(text)),
            Column::Date => format!(r#"<td class="date">{}</td>"#, esc(text)),
            Column::Text => format!("<td>{}</td>", esc(text)),
        }
    }

    fn row(&self, cells: &[String]) -> String {
        format!("<tr>{}</tr>\n", cells.concat())
    }

    fn footer(&self) -> String {
        "</tbody></table>".to_string()
    }
}

/// The changes and outlooks as HTML sections; empty when the plan has
/// neither.
pub(super) fn section(plan: &Plan) -> String {
    let mut s = String::new();
    if let Some(d) = &plan.changes {
        let _ = writeln!(
            s,
            r#"<section><h2 id="changes">{}</h2><p>{}</p>"#,
            esc(TITLE),
            esc(&headline(d))
        );
        s.push_str(&super::framed(
            TITLE,
            &Html.table(&HEADER, &COLUMNS, &rows(d)),
        ));
        let _ = writeln!(s, "<ul>");
        let mut lines = String::new();
        summary_lines(&mut lines, d, "");
        for l in lines.lines() {
            let _ = writeln!(s, "<li>{}</li>", esc(l));
        }
        let _ = writeln!(s, "</ul></section>");
    }
    for (heading, group) in advice_groups(plan) {
        let id = if group.iter().all(|o| o.fits_window) {
            "reshared"
        } else {
            "decisions"
        };
        let _ = writeln!(
            s,
            r#"<section><h2 id="{id}">{}</h2><ul class="reasons">"#,
            esc(heading)
        );
        for o in group {
            let _ = writeln!(
                s,
                "<li><code>{}</code>: {}</li>",
                esc(&o.id),
                esc(o.advice.as_deref().unwrap_or(""))
            );
        }
        let _ = writeln!(s, "</ul></section>");
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::{fixture, RenderOptions, Renderer};

    fn report(plan: &Plan) -> String {
        String::from_utf8(Html.render(plan, &RenderOptions::default()).unwrap()).unwrap()
    }

    #[test]
    fn the_report_gets_the_changes_after_its_header() {
        let out = report(&fixture::replanned());
        let changes = out.find(r#"<h2 id="changes">"#).unwrap();
        assert!(out.find("</header>").unwrap() < changes);
        assert!(changes < out.find(r#"<h2 id="summary">"#).unwrap());
        assert!(out.contains("<td><code>search-freshness</code></td>"));
        assert!(out.contains(r#"<th class="num">slip (days)</th>"#));
        // Nothing to add: no section, and the summary follows the header.
        let plain = report(&fixture::plan());
        assert!(!plain.contains(r#"id="changes""#));
        assert!(plain.contains("</ul></nav>\n<section><h2 id=\"summary\">"));
        assert!(section(&fixture::plan()).is_empty());
    }

    #[test]
    fn advice_is_grouped_by_whether_the_test_still_fits() {
        let html = section(&fixture::with_advice());
        let decide = html
            .find(r#"<h2 id="decisions">Running tests that need a decision"#)
            .unwrap();
        let reshared = html
            .find(r#"<h2 id="reshared">Running tests given a new share"#)
            .unwrap();
        assert!(decide < reshared, "{html}");
    }

    #[test]
    fn table_cells_are_escaped_and_marked_by_kind() {
        assert_eq!(
            Html.cell(Column::Code, "a<b"),
            "<td><code>a&lt;b</code></td>"
        );
        assert_eq!(
            Html.cell(Column::Number, "+7"),
            r#"<td class="num">+7</td>"#
        );
        assert_eq!(
            Html.table(&["x"], &[Column::Date], &[vec!["2027-01-04".into()]]),
            "<table><thead><tr><th>x</th></tr></thead><tbody>\n<tr><td class=\"date\">2027-01-04</td></tr>\n</tbody></table>"
        );
    }
}

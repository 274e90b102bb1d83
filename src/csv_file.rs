//! A CSV file a user writes (a pool's history, a progress file's counts):
//! its header checked against the columns it must have, its rows handed
//! over one by one, and every problem reported at its line and column like
//! the portfolio's own, up to [`MAX_PROBLEMS`]. Read as bytes with the
//! `csv` crate, so a million rows take well under a second.

use crate::diagnostic::Diagnostic;

/// Problems reported from one file before the rest are left out.
pub const MAX_PROBLEMS: usize = 20;

/// What a kind of CSV file must hold.
pub(crate) struct Layout<'a> {
    /// The file's kind in messages: "history", "counts".
    pub kind: &'a str,
    /// The columns, lower case, in order.
    pub columns: &'a [&'a str],
    /// What one row is of: "day", "day, test and arm".
    pub row_of: &'a str,
    /// One row as an example: `2026-06-01,18250`.
    pub example: &'a str,
}

/// The problems found in one file so far; a row pushes its own.
pub(crate) struct Problems<'a> {
    name: &'a str,
    /// The file's text, read for a problem's line only: a problem is rare
    /// and a counts file may hold a million rows.
    body: &'a str,
    list: Vec<Diagnostic>,
}

/// One row of the file, its fields trimmed, `row[k]` the field of column
/// `k`; borrowed from the reader, so no row is copied.
pub(crate) struct Row<'r>(&'r csv::ByteRecord);

impl std::ops::Index<usize> for Row<'_> {
    type Output = str;

    /// The text is UTF-8 and the csv crate splits at ASCII commas, so
    /// every field is UTF-8 too.
    fn index(&self, k: usize) -> &str {
        std::str::from_utf8(&self.0[k]).unwrap_or("")
    }
}

impl Problems<'_> {
    /// A problem at `line` (1-based) in column `field` (0-based); `key`
    /// names the column in the message's `key` line, or is empty.
    pub fn push(&mut self, line: usize, field: usize, key: &str, message: String, hint: &str) {
        let source = self.body.lines().nth(line.wrapping_sub(1)).unwrap_or("");
        let (column, width) = field_span(source, field);
        self.list.push(
            Diagnostic::new(self.name, key, message)
                .with_hint(hint)
                .at_line(Some(source), line, column, width),
        );
    }

    /// Whether any problem was found.
    pub fn is_empty(&self) -> bool {
        self.list.is_empty()
    }

    /// The text of the file's first line.
    pub fn first_line(&self) -> Option<&str> {
        self.body.lines().next()
    }

    /// The problems, in the order they were found.
    pub fn into_vec(self) -> Vec<Diagnostic> {
        self.list
    }
}

/// Reads `text` (file `name`) as a file of `layout`: checks its header and
/// calls `row(line, fields, problems)` for every row with one field per
/// column (fields trimmed; blank rows skipped). Stops reading once
/// [`MAX_PROBLEMS`] are found. An empty file is one problem.
pub(crate) fn read_rows<'a>(
    text: &'a str,
    name: &'a str,
    layout: &Layout,
    mut row: impl FnMut(usize, &Row, &mut Problems<'a>),
) -> Problems<'a> {
    let body = text.strip_prefix('\u{feff}').unwrap_or(text);
    let columns = layout.columns.join(",");
    let mut problems = Problems {
        name,
        body,
        list: Vec::new(),
    };
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .trim(csv::Trim::All)
        .from_reader(body.as_bytes());
    let mut records = reader.byte_records();
    let header_hint = format!("the first line names the columns: `{columns}`");
    match records.next() {
        None => {
            problems.list.push(
                Diagnostic::new(name, "", format!("the {} file is empty", layout.kind)).with_hint(
                    format!(
                        "{header_hint}, then one row per {} such as `{}`",
                        layout.row_of, layout.example
                    ),
                ),
            );
            return problems;
        }
        Some(Ok(h)) => {
            let names: Vec<String> = h
                .iter()
                .map(|f| String::from_utf8_lossy(f).to_lowercase())
                .collect();
            if names != layout.columns {
                let first = problems.first_line().unwrap_or("").trim().to_string();
                let message = format!("the header is `{first}`, not `{columns}`");
                problems.push(1, 0, "", message, &header_hint);
            }
        }
        Some(Err(e)) => problems.push(
            1,
            0,
            "",
            format!("cannot read the header: {e}"),
            &header_hint,
        ),
    }
    for record in records {
        if problems.list.len() >= MAX_PROBLEMS {
            break;
        }
        let r = match record {
            Ok(r) => r,
            Err(e) => {
                let line = e
                    .position()
                    .map_or_else(|| body.lines().count().max(1), |p| p.line() as usize);
                let hint = format!("write `{columns}`");
                problems.push(line, 0, "", format!("cannot read the row: {e}"), &hint);
                continue;
            }
        };
        let line = r.position().map_or(1, |p| p.line() as usize);
        // The text is UTF-8 and the csv crate splits at ASCII commas, so
        // every field is UTF-8 too.
        let fields: Vec<&str> = r
            .iter()
            .map(|f| std::str::from_utf8(f).unwrap_or(""))
            .collect();
        if fields.iter().all(|f| f.is_empty()) {
            continue;
        }
        if fields.len() != layout.columns.len() {
            let message = format!(
                "the row has {} fields; it needs {} (`{columns}`)",
                fields.len(),
                layout.columns.len()
            );
            let hint = "one value per column, separated by commas; write numbers without thousands separators";
            problems.push(line, 0, "", message, hint);
            continue;
        }
        row(line, &Row(&r), &mut problems);
    }
    problems
}

/// The 1-based column and width of comma-separated field `field` in `line`.
pub(crate) fn field_span(line: &str, field: usize) -> (usize, usize) {
    let mut column = 1;
    for (i, part) in line.split(',').enumerate() {
        let lead = part.chars().take_while(|c| c.is_whitespace()).count();
        let width = part.trim().chars().count();
        if i == field {
            return (column + lead, width.max(1));
        }
        column += part.chars().count() + 1;
    }
    (column, 1)
}

#[cfg(test)]
mod tests {
    use super::*;

    const PAIRS: Layout = Layout {
        kind: "pairs",
        columns: &["day", "n"],
        row_of: "day",
        example: "1,2",
    };

    /// The rows of `text`, and the problems as `line:column message`.
    fn read(text: &str) -> (Vec<(usize, String)>, Vec<String>) {
        let mut rows = Vec::new();
        let problems = read_rows(text, "p.csv", &PAIRS, |line, r, _| {
            rows.push((line, format!("{}|{}", &r[0], &r[1])))
        });
        let problems = problems
            .into_vec()
            .iter()
            .map(|d| {
                let (line, column) = (d.line.unwrap_or(0), d.column.unwrap_or(0));
                format!("{line}:{column} {}", d.message)
            })
            .collect();
        (rows, problems)
    }

    #[test]
    fn rows_come_trimmed_with_their_lines_and_blank_rows_skipped() {
        let (rows, problems) = read("\u{feff}Day,N\n1, 2\n\n , \n3 ,4\n");
        assert!(problems.is_empty(), "{problems:?}");
        assert_eq!(rows, [(2, "1|2".to_string()), (5, "3|4".to_string())]);
    }

    #[test]
    fn the_header_the_width_and_an_empty_file_are_problems_at_their_place() {
        let (rows, problems) = read("day,count\n1,2,3\n4,5\n");
        assert_eq!(rows, [(3, "4|5".to_string())]);
        assert_eq!(
            problems,
            [
                "1:1 the header is `day,count`, not `day,n`",
                "2:1 the row has 3 fields; it needs 2 (`day,n`)",
            ]
        );
        let (_, empty) = read("");
        assert_eq!(empty, ["0:0 the pairs file is empty"]);
    }

    #[test]
    fn reading_stops_after_the_most_problems() {
        let text = format!("day,n\n{}", "1\n".repeat(MAX_PROBLEMS + 5));
        assert_eq!(read(&text).1.len(), MAX_PROBLEMS);
    }

    #[test]
    fn a_field_span_is_its_trimmed_text() {
        assert_eq!(field_span("ab, cd ,e", 1), (5, 2));
        assert_eq!(field_span("ab,cd", 0), (1, 2));
        assert_eq!(field_span("ab", 3), (4, 1));
    }
}

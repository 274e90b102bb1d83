//! One table layout for every markup format (Markdown, HTML).
//!
//! [`MarkupTable::table`] lays a table out once: the header, the divider
//! under it, a row per entry, the footer. Each format supplies only its
//! pieces: how a header row, a divider, a cell of each [`Column`] kind and
//! a row are written, with its own escaping. The terminal's tables are
//! comfy-table's and fit a width instead.

/// What a column holds: decides its alignment and its cells' markup.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Column {
    /// An identifier, shown as code.
    Code,
    /// Plain text, left-aligned.
    Text,
    /// A date, left-aligned.
    Date,
    /// A number, right-aligned.
    Number,
}

/// A markup format's table pieces; [`MarkupTable::table`] puts them together.
pub trait MarkupTable {
    /// The table with `header` over `rows`, one cell a column of `columns`.
    fn table(&self, header: &[&str], columns: &[Column], rows: &[Vec<String>]) -> String {
        let mut out = self.header_row(header, columns);
        out.push_str(&self.divider(columns));
        for row in rows {
            let cells: Vec<String> = row
                .iter()
                .zip(columns)
                .map(|(text, &column)| self.cell(column, text))
                .collect();
            out.push_str(&self.row(&cells));
        }
        out.push_str(&self.footer());
        out
    }

    /// The header row (and whatever opens the table), with its line end.
    fn header_row(&self, header: &[&str], columns: &[Column]) -> String;

    /// The line between the header and the rows; none by default.
    fn divider(&self, _columns: &[Column]) -> String {
        String::new()
    }

    /// One cell of `column`, `text` escaped for the format.
    fn cell(&self, column: Column, text: &str) -> String;

    /// One row of cells made by [`MarkupTable::cell`], with its line end.
    fn row(&self, cells: &[String]) -> String;

    /// Whatever closes the table; nothing by default.
    fn footer(&self) -> String {
        String::new()
    }
}

//! Where each key and value sits in the YAML text.
//!
//! serde gives positions only for its own errors; the checks that run after
//! deserialising (unknown pool ids, cycles, dates outside the window) need
//! them too. This module walks the event stream of a marker-keeping YAML
//! parser (`yaml-rust2`) and records, for every node, its path in the same
//! form serde_yaml uses in its messages (`experiments[2].after[0].id`),
//! the position of its key and of its value, and the keys of every
//! mapping. It reads only the first document and never fails the load: a
//! text it cannot index simply has no positions.

use std::collections::BTreeMap;
use yaml_rust2::parser::{Event, MarkedEventReceiver, Parser};
use yaml_rust2::scanner::{Marker, TScalarStyle};

/// A position in the text: 1-based line and column (in characters), and
/// how many characters the token spans on its line.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Span {
    /// 1-based line.
    pub line: usize,
    /// 1-based column, in characters.
    pub column: usize,
    /// Characters the token spans on its line (at least 1).
    pub width: usize,
}

/// One node of the document.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Node {
    /// Where its key is written (mapping values only).
    pub key: Option<Span>,
    /// Where its value starts.
    pub value: Span,
    /// The keys of a mapping, in file order, with their positions.
    pub keys: Option<Vec<(String, Span)>>,
}

/// Every node of the document by path.
#[derive(Debug, Clone, Default)]
pub struct PositionIndex {
    nodes: BTreeMap<String, Node>,
}

impl PositionIndex {
    /// Indexes `text`; `None` when the parser rejects it or it nests
    /// too deep.
    #[cfg(test)]
    pub fn build(text: &str) -> Option<PositionIndex> {
        match PositionIndex::scan(text) {
            Scan::Indexed(ix) => Some(ix),
            _ => None,
        }
    }

    /// Indexes `text`, telling a text that nests deeper than [`MAX_DEPTH`]
    /// (with where it first does) from one the parser rejects.
    pub fn scan(text: &str) -> Scan {
        let mut builder = Builder {
            index: PositionIndex::default(),
            stack: Vec::new(),
            anchored: false,
            too_deep: None,
        };
        // Pull events one by one: the parser's own `load` recurses once
        // per nesting level and can overflow the stack on hostile input.
        let mut parser = Parser::new_from_str(text);
        let parsed = loop {
            match parser.next_token() {
                Err(e) => break Err(e),
                Ok((Event::StreamEnd | Event::DocumentEnd, _)) => break Ok(()),
                Ok((ev, mark)) => builder.on_event(ev, mark),
            }
            if builder.too_deep.is_some() {
                break Ok(());
            }
        };
        match (builder.too_deep, parsed) {
            (Some(span), _) => Scan::TooDeep(span),
            (None, Ok(())) => Scan::Indexed(builder.index),
            // The parser's own limit on flow nesting.
            (None, Err(e)) if e.info().contains("recursion limit") => {
                Scan::TooDeep(span_of(*e.marker(), 1))
            }
            (None, Err(_)) => Scan::Unparsable,
        }
    }

    /// The node at `path` (`""` is the document root).
    pub fn get(&self, path: &str) -> Option<&Node> {
        self.nodes.get(path)
    }

    /// Every mapping: its path and its keys.
    pub fn mappings(&self) -> impl Iterator<Item = (&str, &[(String, Span)])> {
        self.nodes
            .iter()
            .filter_map(|(p, n)| n.keys.as_deref().map(|k| (p.as_str(), k)))
    }

    /// The best position for a problem with `path`: its value, else the
    /// closest enclosing node that exists (a missing key points at its
    /// mapping).
    pub fn locate(&self, path: &str) -> Option<Span> {
        let mut p = path;
        loop {
            if let Some(n) = self.nodes.get(p) {
                return Some(n.value);
            }
            if p.is_empty() {
                return None;
            }
            p = parent(p);
        }
    }

    /// The position of the key itself (for unknown or misplaced keys).
    pub fn locate_key(&self, path: &str) -> Option<Span> {
        self.nodes
            .get(path)
            .and_then(|n| n.key)
            .or_else(|| self.locate(path))
    }
}

/// The path one level up: `a.b[2]` -> `a.b`, `a.b` -> `a`, `a` -> ``.
pub fn parent(path: &str) -> &str {
    match path.rfind(['.', '[']) {
        Some(i) => &path[..i],
        None => "",
    }
}

/// A path with every index replaced by `[]`: `pools[3].adjustments[0]` ->
/// `pools[].adjustments[]`.
pub fn shape(path: &str) -> String {
    let mut out = String::with_capacity(path.len());
    let mut in_index = false;
    for c in path.chars() {
        match c {
            '[' => {
                in_index = true;
                out.push('[');
            }
            ']' => {
                in_index = false;
                out.push(']');
            }
            _ if in_index => {}
            _ => out.push(c),
        }
    }
    out
}

enum Frame {
    Mapping {
        path: String,
        /// The key read and waiting for its value.
        pending: Option<(String, Span)>,
    },
    Sequence {
        path: String,
        next: usize,
    },
}

struct Builder {
    index: PositionIndex,
    stack: Vec<Frame>,
    /// Set once the root value has been seen; later documents are ignored.
    anchored: bool,
    /// Where nesting first passes [`MAX_DEPTH`]; the index is then dropped
    /// (no portfolio nests that deep, paths would grow quadratically, and
    /// serde_yaml's parser slows quadratically with depth).
    too_deep: Option<Span>,
}

/// What [`PositionIndex::scan`] found.
#[derive(Debug)]
pub enum Scan {
    /// Every key and value, with its position.
    Indexed(PositionIndex),
    /// Nested deeper than [`MAX_DEPTH`]: where the limit was passed.
    TooDeep(Span),
    /// Not YAML the scanner can read; serde's error says where.
    Unparsable,
}

/// Deepest nesting indexed; a portfolio needs five levels.
pub const MAX_DEPTH: usize = 64;

fn span_of(mark: Marker, width: usize) -> Span {
    Span {
        line: mark.line(),
        column: mark.col() + 1,
        width: width.max(1),
    }
}

fn join(parent: &str, key: &str) -> String {
    if parent.is_empty() {
        key.to_string()
    } else {
        format!("{parent}.{key}")
    }
}

impl Builder {
    /// Handles a value (scalar, alias or collection start) at `span`;
    /// returns its path, or `None` when it was a mapping key.
    fn value(&mut self, span: Span, scalar: Option<&str>) -> Option<String> {
        match self.stack.last_mut() {
            None => {
                if self.anchored {
                    return None;
                }
                self.anchored = true;
                self.index.nodes.insert(
                    String::new(),
                    Node {
                        key: None,
                        value: span,
                        keys: None,
                    },
                );
                Some(String::new())
            }
            Some(Frame::Mapping { path, pending }) => match pending.take() {
                None => {
                    // A key. Complex keys (collections) get a placeholder.
                    let name = scalar.unwrap_or("?").to_string();
                    if let Some(Node {
                        keys: Some(keys),
                        value,
                        ..
                    }) = self.index.nodes.get_mut(path.as_str())
                    {
                        // The parser marks a block mapping's start after its
                        // first key; the first key is where a reader looks.
                        if keys.is_empty() {
                            *value = span;
                        }
                        keys.push((name.clone(), span));
                    }
                    *pending = Some((name, span));
                    None
                }
                Some((key, key_span)) => {
                    let p = join(path, &key);
                    self.index.nodes.insert(
                        p.clone(),
                        Node {
                            key: Some(key_span),
                            value: span,
                            keys: None,
                        },
                    );
                    Some(p)
                }
            },
            Some(Frame::Sequence { path, next }) => {
                let p = format!("{path}[{next}]");
                *next += 1;
                self.index.nodes.insert(
                    p.clone(),
                    Node {
                        key: None,
                        value: span,
                        keys: None,
                    },
                );
                Some(p)
            }
        }
    }
}

impl MarkedEventReceiver for Builder {
    fn on_event(&mut self, ev: Event, mark: Marker) {
        if self.too_deep.is_some() {
            return;
        }
        if self.stack.len() > MAX_DEPTH {
            self.too_deep = Some(span_of(mark, 1));
            return;
        }
        match ev {
            Event::Scalar(text, style, _, _) => {
                let quoted = matches!(
                    style,
                    TScalarStyle::SingleQuoted | TScalarStyle::DoubleQuoted
                );
                let width = text.chars().count() + if quoted { 2 } else { 0 };
                self.value(span_of(mark, width), Some(&text));
            }
            Event::Alias(_) => {
                self.value(span_of(mark, 1), None);
            }
            Event::MappingStart(..) => {
                let path = match self.value(span_of(mark, 1), None) {
                    Some(p) => p,
                    // A complex key or a later document: index under a
                    // path no schema uses.
                    None => format!("?{}", self.stack.len()),
                };
                if let Some(n) = self.index.nodes.get_mut(&path) {
                    n.keys = Some(Vec::new());
                } else {
                    self.index.nodes.insert(
                        path.clone(),
                        Node {
                            key: None,
                            value: span_of(mark, 1),
                            keys: Some(Vec::new()),
                        },
                    );
                }
                self.stack.push(Frame::Mapping {
                    path,
                    pending: None,
                });
            }
            Event::SequenceStart(..) => {
                let path = self
                    .value(span_of(mark, 1), None)
                    .unwrap_or_else(|| format!("?{}", self.stack.len()));
                self.stack.push(Frame::Sequence { path, next: 0 });
            }
            Event::MappingEnd | Event::SequenceEnd => {
                self.stack.pop();
            }
            _ => {}
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const TEXT: &str = "\
name: Demo
window:
  start: 2027-01-04
  end: \"2027-04-04\"
experiments:
  - id: a
    after: [b, {id: c, gap_days: 3}]
  - id: b
";

    #[test]
    fn records_keys_and_values_with_one_based_positions() {
        let ix = PositionIndex::build(TEXT).unwrap();
        let n = ix.get("window.start").unwrap();
        assert_eq!(
            n.key,
            Some(Span {
                line: 3,
                column: 3,
                width: 5
            })
        );
        assert_eq!(
            n.value,
            Span {
                line: 3,
                column: 10,
                width: 10
            }
        );
        // Quoted scalars underline their quotes too.
        assert_eq!(ix.get("window.end").unwrap().value.width, 12);
        assert_eq!(ix.get("experiments[1].id").unwrap().value.line, 8);
        let gap = ix.get("experiments[0].after[1].gap_days").unwrap();
        assert_eq!((gap.value.line, gap.value.column), (7, 34));
        let flow = ix.get("experiments[0].after[0]").unwrap();
        assert_eq!((flow.value.line, flow.value.column), (7, 13));
    }

    #[test]
    fn lists_the_keys_of_every_mapping() {
        let ix = PositionIndex::build(TEXT).unwrap();
        let maps: Vec<(&str, Vec<&str>)> = ix
            .mappings()
            .map(|(p, k)| (p, k.iter().map(|(n, _)| n.as_str()).collect()))
            .collect();
        assert!(maps.contains(&("", vec!["name", "window", "experiments"])));
        assert!(maps.contains(&("experiments[0].after[1]", vec!["id", "gap_days"])));
    }

    #[test]
    fn a_missing_key_is_located_at_its_mapping() {
        let ix = PositionIndex::build(TEXT).unwrap();
        let s = ix.locate("experiments[1].pool").unwrap();
        assert_eq!((s.line, s.column), (8, 5));
        assert_eq!(ix.locate_key("window.end").unwrap().column, 3);
    }

    #[test]
    fn paths_go_up_and_lose_their_indices() {
        assert_eq!(parent("a.b[2]"), "a.b");
        assert_eq!(parent("a.b"), "a");
        assert_eq!(parent("a"), "");
        assert_eq!(
            shape("pools[3].adjustments[10].to"),
            "pools[].adjustments[].to"
        );
    }

    #[test]
    fn deep_block_nesting_neither_overflows_nor_indexes() {
        let lines: Vec<String> = (0..5000).map(|i| format!("{}a:", " ".repeat(i))).collect();
        match PositionIndex::scan(&lines.join("\n")) {
            Scan::TooDeep(at) => assert_eq!(at.line, MAX_DEPTH + 1),
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn deep_nesting_has_no_index() {
        let deep = format!("a: {}{}", "[".repeat(100), "]".repeat(100));
        assert!(PositionIndex::build(&deep).is_none());
        let fine = format!("a: {}{}", "[".repeat(10), "]".repeat(10));
        assert!(PositionIndex::build(&fine).is_some());
    }

    #[test]
    fn broken_yaml_has_no_index() {
        assert!(PositionIndex::build("a: [1, 2\nb: {").is_none());
    }
}

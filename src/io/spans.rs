//! Where things are in a TOML document: byte offsets to 1-based lines, and dotted keys
//! (`edges.top.temperature`) to the line that holds them.
//!
//! The typed parse (serde) reports a byte span; the validation that follows reports a dotted
//! field. Both become a file/line/field [`crate::error::Location`] through this index, which
//! is built from toml's spanned document tree.

use std::ops::Range;
use toml::de::{DeTable, DeValue};

/// One key of the document with the spans of the key itself and of its value (for a table
/// opened by a `[header]`, the value span covers the header only).
#[derive(Debug, Clone)]
struct Entry {
    path: String,
    key: Range<usize>,
    value: Range<usize>,
}

/// Line and key index of one TOML document.
#[derive(Debug, Clone)]
pub(crate) struct TomlSpans {
    line_starts: Vec<usize>,
    entries: Vec<Entry>,
    parsed: bool,
}

impl TomlSpans {
    /// Index `text`. A document that does not parse as TOML gets a line index only.
    pub(crate) fn new(text: &str) -> Self {
        let mut line_starts = vec![0];
        line_starts.extend(text.match_indices('\n').map(|(i, _)| i + 1));
        let mut entries = Vec::new();
        let parsed = match DeTable::parse(text) {
            Ok(doc) => {
                collect(doc.get_ref(), "", &mut entries);
                true
            }
            Err(_) => false,
        };
        TomlSpans {
            line_starts,
            entries,
            parsed,
        }
    }

    /// Whether the document parsed as TOML (and so has a key index).
    pub(crate) fn parsed(&self) -> bool {
        self.parsed
    }

    /// The 1-based line holding byte `offset`.
    pub(crate) fn line(&self, offset: usize) -> usize {
        self.line_starts.partition_point(|&s| s <= offset).max(1)
    }

    /// The dotted key whose key or value holds byte `offset` (the innermost one).
    pub(crate) fn field_at(&self, offset: usize) -> Option<&str> {
        self.entries
            .iter()
            .filter(|e| {
                e.key.contains(&offset)
                    || e.value.contains(&offset)
                    || (e.value.is_empty() && e.value.start == offset)
            })
            .max_by_key(|e| e.path.matches('.').count())
            .map(|e| e.path.as_str())
    }

    /// The line of a dotted key, if the document has it.
    pub(crate) fn line_of_key(&self, path: &str) -> Option<usize> {
        self.entries
            .iter()
            .find(|e| e.path == path)
            .map(|e| self.line(e.key.start))
    }

    /// The line to point at for a problem with field `path`: the key's own line, else the
    /// line of its enclosing section (`edges.top` for `edges.top.profile`). A missing
    /// section (`edges.left`) has no line: pointing at a neighbour would mislead.
    pub(crate) fn line_for_field(&self, path: &str) -> Option<usize> {
        let mut p = path;
        loop {
            if let Some(line) = self.line_of_key(p) {
                return Some(line);
            }
            match p.rsplit_once('.') {
                Some((parent, _)) if p.matches('.').count() >= 2 => {
                    p = parent;
                }
                _ => return None,
            }
        }
    }
}

fn collect(table: &DeTable<'_>, prefix: &str, out: &mut Vec<Entry>) {
    for (key, value) in table.iter() {
        let path = if prefix.is_empty() {
            key.get_ref().to_string()
        } else {
            format!("{prefix}.{}", key.get_ref())
        };
        out.push(Entry {
            path: path.clone(),
            key: key.span(),
            value: value.span(),
        });
        if let DeValue::Table(inner) = value.get_ref() {
            collect(inner, &path, out);
        }
    }
}

/// For a document that does not parse: the key a line defines, guessed from the text
/// (`[section]` headers before it and `key =` on it). Used only to word syntax errors.
pub(crate) fn guess_field_on_line(text: &str, line: usize) -> Option<String> {
    let lines: Vec<&str> = text.lines().collect();
    let here = lines.get(line.checked_sub(1)?)?.trim();
    if let Some(h) = header_name(here) {
        return Some(h);
    }
    let section = lines[..line - 1]
        .iter()
        .rev()
        .find_map(|l| header_name(l.trim()));
    let key = here
        .split_once('=')
        .map(|(k, _)| k.trim().trim_matches('"').to_string())
        .filter(|k| !k.is_empty());
    match (section, key) {
        (Some(s), Some(k)) => Some(format!("{s}.{k}")),
        (None, Some(k)) => Some(k),
        (Some(s), None) => Some(s),
        (None, None) => None,
    }
}

/// `[edges.top]` → `edges.top`; `[[a]]` → `a`; anything else → `None`.
pub(crate) fn header_name(line: &str) -> Option<String> {
    let line = line.split('#').next()?.trim();
    let inner = line.strip_prefix('[')?.strip_suffix(']')?;
    let inner = inner.trim_start_matches('[').trim_end_matches(']');
    let name: Vec<&str> = inner
        .split('.')
        .map(|p| p.trim().trim_matches('"'))
        .collect();
    Some(name.join("."))
}

#[cfg(test)]
mod tests {
    use super::*;

    const DOC: &str =
        "[plate]\nwidth = 150.0\n\n[edges.top]\ncondition = \"fixed\"\ntemperature = 25\n";

    #[test]
    fn lines_and_keys() {
        let s = TomlSpans::new(DOC);
        assert_eq!(s.line(0), 1);
        assert_eq!(s.line(8), 2);
        assert_eq!(s.line_of_key("plate.width"), Some(2));
        assert_eq!(s.line_of_key("edges.top"), Some(4));
        assert_eq!(s.line_of_key("edges.top.temperature"), Some(6));
        // a missing key falls back to its section, a missing section has no line
        assert_eq!(s.line_for_field("edges.top.profile"), Some(4));
        assert_eq!(s.line_for_field("edges.left"), None);
        assert_eq!(s.line_for_field("edges.left.condition"), None);
        let off = DOC.find("25").unwrap();
        assert_eq!(s.field_at(off), Some("edges.top.temperature"));
    }

    #[test]
    fn guesses_fields_in_broken_documents() {
        let text = "[plate]\nwidth = = 3\n[edges.top]\n";
        assert_eq!(guess_field_on_line(text, 2).as_deref(), Some("plate.width"));
        assert_eq!(guess_field_on_line(text, 3).as_deref(), Some("edges.top"));
        assert_eq!(guess_field_on_line(text, 9), None);
        assert_eq!(
            header_name("[ edges . \"top\" ] # c").as_deref(),
            Some("edges.top")
        );
    }
}

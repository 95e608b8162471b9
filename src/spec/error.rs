//! Errors in a spec: where (file, line, column, key), what, and a hint.

use std::fmt;
use std::ops::Range;

/// A problem with a spec, located in its file.
#[derive(Debug, Clone, PartialEq)]
pub struct SpecError {
    /// The file as the user named it (or `built-in default`).
    pub origin: String,
    /// 1-based line and column, when the problem has a place in the file.
    pub line: Option<(usize, usize)>,
    /// Dotted key path, e.g. `sweep.sizes` or `algorithm[2].beta`.
    pub key: Option<String>,
    pub message: String,
    pub hint: Option<String>,
}

impl std::error::Error for SpecError {}

impl fmt::Display for SpecError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "spec {}", self.origin)?;
        if let Some((l, c)) = self.line {
            write!(f, ", line {l}, column {c}")?;
        }
        if let Some(k) = &self.key {
            write!(f, ", key `{k}`")?;
        }
        write!(f, ": {}", self.message)?;
        if let Some(h) = &self.hint {
            write!(f, "\n  hint: {h}")?;
        }
        Ok(())
    }
}

/// Builds errors for one spec text.
pub(crate) struct Locator<'a> {
    pub origin: &'a str,
    pub text: &'a str,
}

impl Locator<'_> {
    /// 1-based (line, column) of a byte offset.
    pub fn line_col(&self, offset: usize) -> (usize, usize) {
        let offset = offset.min(self.text.len());
        let before = &self.text[..offset];
        let line = before.matches('\n').count() + 1;
        let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
        (line, col)
    }

    pub fn at(
        &self,
        span: Option<Range<usize>>,
        key: impl Into<String>,
        message: impl Into<String>,
        hint: Option<String>,
    ) -> SpecError {
        SpecError {
            origin: self.origin.to_string(),
            line: span.map(|s| self.line_col(s.start)),
            key: Some(key.into()),
            message: message.into(),
            hint,
        }
    }

    /// The dotted key path at a byte offset, read off the text: the enclosing `[table]` or
    /// `[[array]]` header (with the array index) and the key on the line.
    pub fn key_path_at(&self, offset: usize) -> Option<String> {
        let offset = offset.min(self.text.len());
        let line_start = self.text[..offset].rfind('\n').map_or(0, |i| i + 1);
        let line_end = self.text[offset..]
            .find('\n')
            .map_or(self.text.len(), |i| offset + i);
        let line = self.text[line_start..line_end].trim();
        if let Some(h) = header_name(line) {
            return Some(h.0);
        }
        let key = line
            .split_once('=')
            .map(|(k, _)| k.trim().trim_matches('"').to_string());
        let mut table: Option<String> = None;
        let mut counts: std::collections::HashMap<String, usize> = Default::default();
        for l in self.text[..line_start].lines() {
            if let Some((name, array)) = header_name(l.trim()) {
                if array {
                    let c = counts.entry(name.clone()).or_insert(0);
                    *c += 1;
                    table = Some(format!("{name}[{}]", *c));
                } else {
                    table = Some(name);
                }
            }
        }
        match (table, key) {
            (Some(t), Some(k)) => Some(format!("{t}.{k}")),
            (None, Some(k)) => Some(k),
            (Some(t), None) => Some(t),
            (None, None) => None,
        }
    }
}

/// `[name]` → (name, false); `[[name]]` → (name, true).
fn header_name(line: &str) -> Option<(String, bool)> {
    let line = line.split('#').next()?.trim();
    if let Some(r) = line.strip_prefix("[[") {
        return Some((r.strip_suffix("]]")?.trim().to_string(), true));
    }
    if let Some(r) = line.strip_prefix('[') {
        return Some((r.strip_suffix(']')?.trim().to_string(), false));
    }
    None
}

/// Levenshtein distance between two short strings.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.chars().collect();
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    for (i, ca) in a.iter().enumerate() {
        let mut cur = vec![i + 1; b.len() + 1];
        for (j, cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        prev = cur;
    }
    prev[b.len()]
}

/// The closest candidate, if it is close enough to be a plausible typo.
pub fn closest<'a>(word: &str, candidates: impl IntoIterator<Item = &'a str>) -> Option<&'a str> {
    let best = candidates
        .into_iter()
        .map(|c| (edit_distance(word, c), c))
        .min_by_key(|&(d, _)| d)?;
    let limit = (word.chars().count() / 3).max(2);
    (best.0 <= limit).then_some(best.1)
}

/// A hint naming the closest valid choice, or listing all of them.
pub fn choice_hint(word: &str, candidates: &[&str]) -> String {
    match closest(word, candidates.iter().copied()) {
        Some(c) => format!("did you mean `{c}`?"),
        None => format!(
            "expected one of {}",
            candidates
                .iter()
                .map(|c| format!("`{c}`"))
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn distances() {
        assert_eq!(edit_distance("sizs", "sizes"), 1);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(closest("sizs", ["sizes", "seeds"]), Some("sizes"));
        assert_eq!(closest("zzzzzz", ["sizes", "seeds"]), None);
    }

    #[test]
    fn key_paths() {
        let text =
            "[experiment]\nname = \"x\"\n[[algorithm]]\nkind = 1\n[[algorithm]]\nlabel = 2\n";
        let l = Locator { origin: "t", text };
        assert_eq!(
            l.key_path_at(text.find("name").unwrap()).as_deref(),
            Some("experiment.name")
        );
        assert_eq!(
            l.key_path_at(text.find("kind").unwrap()).as_deref(),
            Some("algorithm[1].kind")
        );
        assert_eq!(
            l.key_path_at(text.find("label").unwrap()).as_deref(),
            Some("algorithm[2].label")
        );
        assert_eq!(l.line_col(text.find("label").unwrap()), (6, 1));
    }
}

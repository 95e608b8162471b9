//! Errors in a spec: where (file, line, column, key), what, and a hint.

use std::fmt;
use std::ops::Range;

/// A problem with a spec, located in its file.
#[derive(Debug, Clone, PartialEq)]
pub struct SpecError {
    /// The file as the user named it (or `built-in default`).
    pub origin: String,
    /// 1-based line and column, when the problem has a place in the file.
    pub line: Option<(u32, u32)>,
    /// Dotted key path, e.g. `sweep.sizes` or `algorithm[2].beta`.
    pub key: Option<String>,
    pub message: String,
    pub hint: Option<String>,
    /// Further problems found in the same spec (reported together, up to [`MAX_REPORTED`]).
    /// Boxed: every `Result<_, SpecError>` stays small, and most errors have none.
    pub also: Option<Box<Vec<SpecError>>>,
}

/// Most problems one message lists.
pub const MAX_REPORTED: usize = 12;

impl SpecError {
    /// One error holding all of `errors` (the first leads, the others follow), or None.
    pub fn gather(mut errors: Vec<SpecError>) -> Option<SpecError> {
        if errors.is_empty() {
            return None;
        }
        let mut rest: Vec<SpecError> = errors.split_off(1);
        let mut first = errors.pop().expect("one");
        // Flatten: an error that already gathered others brings them along.
        let mut flat: Vec<SpecError> = first.also.take().map_or_else(Vec::new, |b| *b);
        for mut e in rest.drain(..) {
            let more = e.also.take().map_or_else(Vec::new, |b| *b);
            flat.push(e);
            flat.extend(more);
        }
        first.also = (!flat.is_empty()).then(|| Box::new(flat));
        Some(first)
    }

    /// The further problems (none for most errors).
    pub fn further(&self) -> &[SpecError] {
        self.also.as_deref().map_or(&[], |v| v.as_slice())
    }
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
        let total = 1 + self.further().len();
        for e in self.further().iter().take(MAX_REPORTED - 1) {
            // Each further problem on its own line, in the same form.
            write!(f, "\nerror: {e}")?;
        }
        if total > MAX_REPORTED {
            write!(
                f,
                "\n({} more problems in this spec not shown; fix these first)",
                total - MAX_REPORTED
            )?;
        } else if total > 1 {
            write!(f, "\n({total} problems in this spec)")?;
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
    /// [`Self::line_col`] as stored in an error (a spec has at most 4 MiB).
    pub fn line_col32(&self, offset: usize) -> (u32, u32) {
        let (l, c) = self.line_col(offset);
        (l as u32, c as u32)
    }

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
            line: span.map(|s| self.line_col32(s.start)),
            key: Some(key.into()),
            message: message.into(),
            hint,
            also: None,
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

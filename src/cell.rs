//! Identity of a cell: a canonical, versioned encoding of everything that determines its
//! numbers, and its SHA-256.
//!
//! Invariants:
//! - Keys of maps are sorted (a `BTreeMap`), so the order of fields in a spec never matters.
//! - Numbers are normalised by their schema type: an integer setting is always an integer, a
//!   real setting is always printed with Rust's shortest round-trip form (`{:?}`), and `-0.0`
//!   becomes `0.0`. So `beta = [0.1, 4]` and `beta = [0.10, 4.0]` give the same key.
//! - Labels, notes and the experiment name are *not* part of any key: renaming reruns nothing.
//! - The encoding starts with a format tag; the model and algorithm revisions are fields.

use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::fmt::Write as _;

/// Format tag of the canonical encoding. Changing the encoding changes every key.
pub const KEY_FORMAT: &str = "kiln-cell/1";

/// A canonical value: the typed, normalised form of a piece of a cell's identity.
#[derive(Clone, Debug, PartialEq)]
pub enum Canon {
    Str(String),
    Int(i64),
    Real(f64),
    Bool(bool),
    List(Vec<Canon>),
    Map(BTreeMap<String, Canon>),
}

impl Canon {
    /// An empty map, to be filled with [`Canon::with`].
    pub fn map() -> Self {
        Canon::Map(BTreeMap::new())
    }

    /// Adds a field to a map (panics on a non-map: a programming error, not user input).
    /// Adds the entry only when `cond` holds (so an option at its default changes no hash).
    pub fn with_if(self, cond: bool, key: &str, value: impl Into<Canon>) -> Self {
        if cond { self.with(key, value) } else { self }
    }

    pub fn with(mut self, key: &str, value: impl Into<Canon>) -> Self {
        match &mut self {
            Canon::Map(m) => {
                m.insert(key.to_string(), value.into());
            }
            _ => unreachable!("Canon::with on a non-map"),
        }
        self
    }

    /// The canonical text: JSON-like, sorted keys, no whitespace.
    pub fn encode(&self) -> String {
        let mut s = String::new();
        self.write(&mut s);
        s
    }

    fn write(&self, out: &mut String) {
        match self {
            Canon::Str(s) => {
                out.push('"');
                for c in s.chars() {
                    match c {
                        '"' => out.push_str("\\\""),
                        '\\' => out.push_str("\\\\"),
                        c if (c as u32) < 0x20 => {
                            let _ = write!(out, "\\u{:04x}", c as u32);
                        }
                        c => out.push(c),
                    }
                }
                out.push('"');
            }
            Canon::Int(i) => {
                let _ = write!(out, "{i}");
            }
            Canon::Real(x) => {
                let x = if *x == 0.0 { 0.0 } else { *x };
                let _ = write!(out, "{x:?}");
            }
            Canon::Bool(b) => out.push_str(if *b { "true" } else { "false" }),
            Canon::List(xs) => {
                out.push('[');
                for (i, x) in xs.iter().enumerate() {
                    if i > 0 {
                        out.push(',');
                    }
                    x.write(out);
                }
                out.push(']');
            }
            Canon::Map(m) => {
                out.push('{');
                for (i, (k, v)) in m.iter().enumerate() {
                    if i > 0 {
                        out.push(',');
                    }
                    Canon::Str(k.clone()).write(out);
                    out.push(':');
                    v.write(out);
                }
                out.push('}');
            }
        }
    }

    /// SHA-256 of `KEY_FORMAT`, a NUL, a domain tag, a NUL and the canonical text.
    pub fn hash(&self, domain: &str) -> [u8; 32] {
        let mut h = Sha256::new();
        h.update(KEY_FORMAT.as_bytes());
        h.update([0]);
        h.update(domain.as_bytes());
        h.update([0]);
        h.update(self.encode().as_bytes());
        h.finalize().into()
    }
}

impl From<&str> for Canon {
    fn from(s: &str) -> Self {
        Canon::Str(s.to_string())
    }
}
impl From<String> for Canon {
    fn from(s: String) -> Self {
        Canon::Str(s)
    }
}
impl From<u64> for Canon {
    fn from(i: u64) -> Self {
        Canon::Int(i as i64)
    }
}
impl From<u32> for Canon {
    fn from(i: u32) -> Self {
        Canon::Int(i as i64)
    }
}
impl From<usize> for Canon {
    fn from(i: usize) -> Self {
        Canon::Int(i as i64)
    }
}
impl From<f64> for Canon {
    fn from(x: f64) -> Self {
        Canon::Real(x)
    }
}
impl From<bool> for Canon {
    fn from(b: bool) -> Self {
        Canon::Bool(b)
    }
}
impl<T: Into<Canon>> From<Vec<T>> for Canon {
    fn from(xs: Vec<T>) -> Self {
        Canon::List(xs.into_iter().map(Into::into).collect())
    }
}

/// The content hash naming a cell (or an instance, or a run), printed as 64 hex digits.
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub struct Key(pub [u8; 32]);

impl Key {
    pub fn hex(&self) -> String {
        hex::encode(self.0)
    }
    pub fn from_hex(s: &str) -> Option<Key> {
        let v = hex::decode(s).ok()?;
        Some(Key(v.try_into().ok()?))
    }
}

impl std::fmt::Debug for Key {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Key({})", &self.hex()[..12])
    }
}

impl std::fmt::Display for Key {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.hex())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn map_order_does_not_matter() {
        let a = Canon::map().with("b", 1u64).with("a", 0.5);
        let b = Canon::map().with("a", 0.5).with("b", 1u64);
        assert_eq!(a.encode(), b.encode());
        assert_eq!(a.encode(), r#"{"a":0.5,"b":1}"#);
    }

    #[test]
    fn reals_are_normalised() {
        assert_eq!(Canon::Real(4.0).encode(), "4.0");
        assert_eq!(Canon::Real(-0.0).encode(), "0.0");
        assert_eq!(Canon::Real(0.1).encode(), "0.1");
        assert_eq!(Canon::Real("0.10".parse().unwrap()).encode(), "0.1");
        assert_ne!(Canon::Real(4.0).encode(), Canon::Int(4).encode());
    }

    #[test]
    fn strings_are_escaped() {
        assert_eq!(Canon::from("a\"b\\c\n").encode(), r#""a\"b\\c\u000a""#);
    }

    /// The hash is SHA-256 of the documented layout, pinned to a digest computed outside kiln
    /// (Python's hashlib: sha256(b"kiln-cell/1\0cell\0{\"n\":4}")), so a change to the key
    /// format, the encoding or the domain tag fails here; and domains separate hashes.
    #[test]
    fn hash_is_the_documented_layout() {
        let c = Canon::map().with("n", 4u64);
        assert_eq!(
            hex::encode(c.hash("cell")),
            "b44bc50abcc5413c573baf663e4c7c66e137bdbc9b240790a399a0ed99d9deaa"
        );
        assert_ne!(c.hash("instance"), c.hash("cell"));
    }

    #[test]
    fn key_hex_round_trip() {
        let k = Key(Canon::Int(1).hash("x"));
        assert_eq!(Key::from_hex(&k.hex()), Some(k));
        assert_eq!(Key::from_hex("zz"), None);
    }
}

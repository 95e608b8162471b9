//! The settings of one `[[algorithm]]` table, as a kind reads them.
//!
//! The table is kept as parsed TOML with the position of every value, so a kind's own parser
//! (in its file under `algo/`) can ask for a key with the type and range it wants and every
//! refusal names the file, the line and the key `algorithm[i].key`. Which keys a kind accepts
//! comes from its declared [`crate::algo::Key`] list: a key outside the list is refused before
//! the kind's parser runs, and asking for an undeclared key is a programming error caught by the
//! registry's own test.

use std::collections::BTreeMap;
use std::ops::Range;

use toml::Spanned;
use toml::Value;

use super::SpecError;
use super::error::Locator;

/// One algorithm table's settings (everything but `kind` and `label`), with positions.
pub struct Settings<'a> {
    pub(crate) at: String,
    pub(crate) loc: &'a Locator<'a>,
    pub(crate) values: &'a BTreeMap<String, Spanned<Value>>,
    /// Where a missing key is reported (the table's `kind` or `family`).
    pub(crate) anchor: Option<Range<usize>>,
}

impl Settings<'_> {
    /// `algorithm[i]`, the prefix of every key this table names in messages.
    pub fn at(&self) -> &str {
        &self.at
    }

    fn get(&self, key: &str) -> Option<&Spanned<Value>> {
        self.values.get(key)
    }

    /// The raw value of a key, for a kind or family that reads a structured value itself.
    pub fn value(&self, key: &str) -> Option<&Value> {
        self.get(key).map(|v| v.get_ref())
    }

    /// The error for a required key that is absent, reported where the table names its kind.
    pub fn missing(
        &self,
        key: &str,
        message: impl Into<String>,
        hint: impl Into<String>,
    ) -> SpecError {
        self.loc.at(
            self.anchor.clone(),
            format!("{}.{key}", self.at),
            message,
            Some(hint.into()),
        )
    }

    /// A located error about the entry `sub` of the table-valued `key`.
    pub fn fail_sub(
        &self,
        key: &str,
        sub: &str,
        message: impl Into<String>,
        hint: impl Into<String>,
    ) -> SpecError {
        self.loc.at(
            self.span(key),
            format!("{}.{key}.{sub}", self.at),
            message,
            Some(hint.into()),
        )
    }

    /// A located error about `key` (at its value when it is present).
    pub fn fail(
        &self,
        key: &str,
        message: impl Into<String>,
        hint: impl Into<String>,
    ) -> SpecError {
        let span = self.get(key).map(|v| v.span());
        self.loc.at(
            span,
            format!("{}.{key}", self.at),
            message,
            Some(hint.into()),
        )
    }

    fn span(&self, key: &str) -> Option<Range<usize>> {
        self.get(key).map(|v| v.span())
    }

    fn wrong_type(&self, key: &str, v: &Value, expected: &str, example: &str) -> SpecError {
        self.fail(
            key,
            format!("invalid type: {} `{v}`, expected {expected}", v.type_str()),
            format!("e.g. {key} = {example}"),
        )
    }

    /// A whole number in [1, max].
    pub fn count(&self, key: &str, max: u64) -> Result<Option<u64>, SpecError> {
        let Some(v) = self.get(key) else {
            return Ok(None);
        };
        let x = match v.get_ref() {
            Value::Integer(x) => *x,
            other => return Err(self.wrong_type(key, other, "a whole number", "10")),
        };
        if x < 1 {
            return Err(self.loc.at(
                self.span(key),
                format!("{}.{key}", self.at),
                format!("{x} is not allowed here"),
                Some("give a whole number ≥ 1".into()),
            ));
        }
        if x as u64 > max {
            return Err(self.loc.at(
                self.span(key),
                format!("{}.{key}", self.at),
                format!("{x} is larger than the limit {max}"),
                None,
            ));
        }
        Ok(Some(x as u64))
    }

    /// A number (an integer is read as a float).
    pub fn number(&self, key: &str) -> Result<Option<f64>, SpecError> {
        match self.get(key).map(|v| v.get_ref()) {
            None => Ok(None),
            Some(Value::Float(x)) => Ok(Some(*x)),
            Some(Value::Integer(x)) => Ok(Some(*x as f64)),
            Some(other) => Err(self.wrong_type(key, other, "a number", "0.5")),
        }
    }

    /// A tolerance in (0, 1).
    pub fn tolerance(&self, key: &str) -> Result<Option<f64>, SpecError> {
        let Some(x) = self.number(key)? else {
            return Ok(None);
        };
        if !(x > 0.0 && x < 1.0) {
            return Err(self.fail(
                key,
                format!("tolerance {x} is not in (0, 1)"),
                "a small positive number, e.g. tol = 1e-8",
            ));
        }
        Ok(Some(x))
    }

    /// A number in [0, max].
    pub fn nonnegative(&self, key: &str, max: f64) -> Result<Option<f64>, SpecError> {
        let Some(x) = self.number(key)? else {
            return Ok(None);
        };
        if x.is_finite() && (0.0..=max).contains(&x) {
            Ok(Some(x))
        } else {
            Err(self.fail(
                key,
                format!("{x} is out of range"),
                format!("give a number between 0 and {max}"),
            ))
        }
    }

    /// A number in (0, max].
    pub fn positive_number(
        &self,
        key: &str,
        max: f64,
        hint: &str,
    ) -> Result<Option<f64>, SpecError> {
        let Some(x) = self.number(key)? else {
            return Ok(None);
        };
        if x > 0.0 && x <= max {
            Ok(Some(x))
        } else {
            Err(self.fail(
                key,
                format!("{key} = {x} is not a number in (0, {max}]"),
                hint,
            ))
        }
    }

    /// true or false.
    pub fn flag(&self, key: &str) -> Result<Option<bool>, SpecError> {
        match self.get(key).map(|v| v.get_ref()) {
            None => Ok(None),
            Some(Value::Boolean(b)) => Ok(Some(*b)),
            Some(other) => Err(self.wrong_type(key, other, "true or false", "true")),
        }
    }

    /// One of `names`; returns its index.
    pub fn choice(
        &self,
        key: &str,
        what: &str,
        names: &[&str],
    ) -> Result<Option<usize>, SpecError> {
        let s = match self.get(key).map(|v| v.get_ref()) {
            None => return Ok(None),
            Some(Value::String(s)) => s,
            Some(other) => {
                return Err(self.wrong_type(key, other, "a string", &format!("\"{}\"", names[0])));
            }
        };
        match names.iter().position(|n| n == s) {
            Some(i) => Ok(Some(i)),
            None => Err(self.fail(
                key,
                format!("unknown {what} `{s}`"),
                super::error::choice_hint(s, names),
            )),
        }
    }

    /// One inverse temperature in (0, 100].
    pub fn beta_one(&self, key: &str) -> Result<Option<f64>, SpecError> {
        match self.get(key).map(|v| v.get_ref()) {
            None => Ok(None),
            Some(Value::Array(_)) => Err(self.fail(
                key,
                "this kind takes one inverse temperature, not a schedule",
                "write beta = 1.5",
            )),
            Some(_) => {
                let v = self.number(key)?.unwrap_or(f64::NAN);
                if v.is_finite() && v > 0.0 && v <= 100.0 {
                    Ok(Some(v))
                } else {
                    Err(self.fail(
                        key,
                        format!("beta = {v} is not an inverse temperature in (0, 100]"),
                        "e.g. beta = 1.5",
                    ))
                }
            }
        }
    }

    /// A schedule `[start, end]`: finite, start ≥ 0, increasing.
    pub fn beta_range(&self, key: &str) -> Result<Option<[f64; 2]>, SpecError> {
        let items = match self.get(key).map(|v| v.get_ref()) {
            None => return Ok(None),
            Some(Value::Array(items)) => items,
            Some(Value::Float(_) | Value::Integer(_)) => {
                let x = self.number(key)?.unwrap_or(f64::NAN);
                return Err(self.fail(
                    key,
                    format!("beta = {x} is one number; this kind needs a schedule"),
                    format!("beta = [start, end], e.g. [0.1, {x}]"),
                ));
            }
            Some(other) => return Err(self.wrong_type(key, other, "[start, end]", "[0.1, 4.0]")),
        };
        let mut v = Vec::with_capacity(items.len());
        for x in items {
            v.push(match x {
                Value::Float(x) => *x,
                Value::Integer(x) => *x as f64,
                other => return Err(self.wrong_type(key, other, "a number", "[0.1, 4.0]")),
            });
        }
        if v.len() != 2 {
            return Err(self.fail(
                key,
                format!("expected two numbers, got {}", v.len()),
                "beta = [start, end], e.g. [0.1, 4.0]",
            ));
        }
        if !(v[0].is_finite() && v[1].is_finite() && v[0] >= 0.0) {
            return Err(self.fail(
                key,
                format!("beta = [{}, {}] is not a schedule", v[0], v[1]),
                "both ends must be finite and the start ≥ 0",
            ));
        }
        if v[1] <= v[0] {
            return Err(self.fail(
                key,
                format!("beta is not increasing: {} then {}", v[0], v[1]),
                "annealing cools: give beta = [start, end] with end > start",
            ));
        }
        Ok(Some([v[0], v[1]]))
    }
}

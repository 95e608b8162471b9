//! Experiment specs: the TOML schema, validation, and expansion into a plan of cells.
//!
//! Two stages, no I/O in either: [`parse`] turns text into a [`Spec`] (every value checked,
//! defaults filled in, each problem reported with file, line, key and a hint), and
//! [`plan::expand`] turns a `Spec` into the ordered list of cells with their keys.

pub mod error;
mod model;
pub mod plan;
mod reference;
pub mod settings;
pub mod shard;
mod sweep;

use crate::algo::AlgoSpec;
use crate::model::ModelSpec;
pub use error::SpecError;
use error::{Locator, choice_hint, closest};
pub use reference::{listing, reference};
use serde::Deserialize;
pub use settings::Settings;
use std::collections::BTreeMap;
use std::ops::Range;
use std::path::Path;
use toml::Spanned;

/// The built-in default experiment (the same file as `experiments/default.toml`).
pub const DEFAULT_SPEC: &str = include_str!("../../experiments/default.toml");
/// How the built-in default is named in messages and manifests.
pub const DEFAULT_ORIGIN: &str = "built-in default (experiments/default.toml)";

/// Largest number of cells one spec may expand to.
pub const MAX_CELLS: u128 = 1_000_000;
/// Largest number of instance seeds.
pub const MAX_SEEDS: u64 = 1_000_000;
/// Largest size n accepted by the parser (memory is checked separately, per machine).
pub const MAX_N: i64 = 1 << 32;

// ---------------------------------------------------------------- raw schema (serde)

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSpec {
    experiment: RawExperiment,
    model: Spanned<model::RawModel>,
    sweep: RawSweep,
    #[serde(default)]
    algorithm: Vec<Spanned<RawAlgorithm>>,
    #[serde(default)]
    fit: Option<RawFit>,
}

/// `[fit]`: defaults for `kiln fit` and `kiln plot` (command-line flags override them).
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFit {
    #[serde(default)]
    omega: Option<Spanned<toml::Value>>,
    #[serde(default)]
    terms: Option<Spanned<i64>>,
    #[serde(default)]
    min_n: Option<Spanned<i64>>,
    #[serde(default)]
    bootstrap: Option<Spanned<i64>>,
    #[serde(default)]
    epsilon: Option<Spanned<String>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawExperiment {
    name: Spanned<String>,
    #[serde(default)]
    note: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSweep {
    sizes: Spanned<Vec<Spanned<i64>>>,
    seeds: Spanned<toml::Value>,
    #[serde(default)]
    epsilons: Option<Spanned<Vec<Spanned<f64>>>>,
    #[serde(default)]
    replicas: Option<Spanned<i64>>,
}

/// One `[[algorithm]]` table, kept as parsed values with their positions: which keys apply
/// depends on the kind, and each kind reads its own (see [`crate::algo::Kind`]).
type RawAlgorithm = BTreeMap<String, Spanned<toml::Value>>;

/// Largest degree p of a mixture term.
pub use crate::model::families::MAX_P;

// ---------------------------------------------------------------- resolved spec

/// Fit settings of a spec (`[fit]`); `None` means the command's default.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FitSettings {
    /// `Some(None)` = fit ω; `Some(Some(x))` = fixed at x.
    pub omega: Option<Option<f64>>,
    pub terms: Option<usize>,
    pub min_n: Option<u64>,
    pub bootstrap: Option<usize>,
    /// Fit only the reference runs (ε = 0) instead of every ε level.
    pub reference_only: bool,
}

/// One algorithm of a spec: its label (not part of any key) and its resolved settings.
#[derive(Clone, Debug, PartialEq)]
pub struct AlgoEntry {
    pub label: String,
    pub algo: AlgoSpec,
}

/// A validated experiment spec with every default filled in.
#[derive(Clone, Debug)]
pub struct Spec {
    /// Where it came from, as shown in messages.
    pub origin: String,
    /// The exact text (recorded in the manifest).
    pub text: String,
    pub name: String,
    pub note: String,
    pub model: ModelSpec,
    /// Sizes with their place in the file (for messages about a size).
    pub sizes: Vec<(u64, Range<usize>)>,
    pub seeds: Vec<u64>,
    /// Stability levels; always starts with 0 (the reference run).
    pub epsilons: Vec<f64>,
    /// Independent algorithm runs per instance at ε = 0 (1 = just the reference run).
    pub replicas: u32,
    pub algorithms: Vec<AlgoEntry>,
    pub fit: FitSettings,
}

impl Spec {
    /// The error for a problem with size `n` (memory refusal), pointing at its line.
    pub fn size_error(&self, n: u64, message: String, hint: Option<String>) -> SpecError {
        let loc = Locator {
            origin: &self.origin,
            text: &self.text,
        };
        let span = self.sizes.iter().find(|s| s.0 == n).map(|s| s.1.clone());
        loc.at(span, "sweep.sizes", message, hint)
    }
}

/// Reads and parses a spec file.
pub fn load(path: &Path) -> Result<Spec, SpecError> {
    let origin = path.display().to_string();
    let text = std::fs::read_to_string(path).map_err(|e| SpecError {
        origin: origin.clone(),
        line: None,
        key: None,
        message: format!("cannot read the file: {e}"),
        hint: Some(if e.kind() == std::io::ErrorKind::NotFound {
            "check the path; `kiln run` with no spec runs the built-in default".into()
        } else {
            "check that the file is readable UTF-8 text".into()
        }),
    })?;
    parse(&text, &origin)
}

/// The built-in default experiment.
pub fn default_spec() -> Spec {
    parse(DEFAULT_SPEC, DEFAULT_ORIGIN).expect("the built-in default spec is valid")
}

/// Parses and validates spec text. `origin` names it in messages.
pub fn parse(text: &str, origin: &str) -> Result<Spec, SpecError> {
    let loc = Locator { origin, text };
    let raw: RawSpec = toml::from_str(text).map_err(|e| serde_error(&loc, &e))?;
    validate(raw, &loc)
}

/// Resolves a `[model]` table given as its body (`family = "cube"`, `xi = { … }`, …), with the
/// same checks as in a spec: for programs and tests that need a model without a whole spec.
pub fn model_of(body: &str) -> Result<ModelSpec, SpecError> {
    #[derive(Deserialize)]
    struct Doc {
        model: Spanned<model::RawModel>,
    }
    let text = format!("[model]\n{body}\n");
    let loc = Locator {
        origin: "[model]",
        text: &text,
    };
    let doc: Doc = toml::from_str(&text).map_err(|e| serde_error(&loc, &e))?;
    model::resolve(&doc.model, &loc)
}

/// Turns a deserialisation error into a located one, with a suggestion for unknown keys.
fn serde_error(loc: &Locator, e: &toml::de::Error) -> SpecError {
    let msg = e.message().trim().to_string();
    let span = e.span();
    let key = span.as_ref().and_then(|s| loc.key_path_at(s.start));
    let hint;
    let mut message = msg.clone();
    if let Some(rest) = msg.strip_prefix("unknown field `") {
        let (word, tail) = rest.split_once('`').unwrap_or((rest, ""));
        let expected: Vec<&str> = tail.split('`').skip(1).step_by(2).collect();
        message = format!("unknown key `{word}`");
        hint = Some(match closest(word, expected.iter().copied()) {
            Some(c) => format!("did you mean `{c}`?"),
            None if !expected.is_empty() => format!(
                "valid keys here: {}",
                expected
                    .iter()
                    .map(|c| format!("`{c}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
            None => "see the spec reference in README.md".into(),
        });
    } else if let Some(rest) = msg.strip_prefix("missing field `") {
        let word = rest.split('`').next().unwrap_or(rest);
        message = format!("missing key `{word}`");
        hint = Some("see the spec reference in README.md for the required keys".into());
    } else if msg.starts_with("invalid type") || msg.starts_with("invalid value") {
        hint = Some("see the spec reference in README.md for the type of each key".into());
    } else {
        hint = Some("the file is not valid TOML here".into());
    }
    SpecError {
        origin: loc.origin.to_string(),
        line: span.map(|s| loc.line_col(s.start)),
        key,
        message,
        hint,
    }
}

fn validate(raw: RawSpec, loc: &Locator) -> Result<Spec, SpecError> {
    // [experiment]
    let name = raw.experiment.name.get_ref().clone();
    let name_ok = !name.is_empty()
        && name.len() <= 80
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
    if !name_ok {
        return Err(loc.at(
            Some(raw.experiment.name.span()),
            "experiment.name",
            format!("`{name}` cannot name a results folder"),
            Some("use 1 to 80 letters, digits, `-`, `_` or `.`, not starting with `.`".into()),
        ));
    }

    // [model]
    let model = model::resolve(&raw.model, loc)?;

    // [sweep]
    let sizes = sweep::sizes(&raw.sweep.sizes, &model, loc)?;
    let seeds = seeds_from(&raw.sweep.seeds, loc)?;
    let replicas = match &raw.sweep.replicas {
        None => 1,
        Some(r) => positive(r, loc, "sweep.replicas", 64)? as u32,
    };
    let epsilons = sweep::epsilons(raw.sweep.epsilons.as_ref(), loc)?;

    // [[algorithm]]
    if raw.algorithm.is_empty() {
        return Err(SpecError {
            origin: loc.origin.to_string(),
            line: None,
            key: Some("algorithm".into()),
            message: "no algorithm given".into(),
            hint: Some("add at least one [[algorithm]] table with a `kind`".into()),
        });
    }
    let mut algorithms: Vec<AlgoEntry> = Vec::new();
    let mut label_spans: Vec<Range<usize>> = Vec::new();
    for (i, a) in raw.algorithm.iter().enumerate() {
        let (entry, lspan) = algorithm_entry(i, a, &model, &sizes, loc)?;
        if let Some(j) = algorithms.iter().position(|e| e.label == entry.label) {
            let (line, _) = loc.line_col(label_spans[j].start);
            return Err(loc.at(
                Some(lspan),
                format!("algorithm[{}].label", i + 1),
                format!(
                    "label `{}` is already used by algorithm[{}] (line {line})",
                    entry.label,
                    j + 1
                ),
                Some("labels name table rows: give each algorithm its own".into()),
            ));
        }
        label_spans.push(lspan);
        algorithms.push(entry);
    }

    let cells = sizes.len() as u128
        * seeds.len() as u128
        * (epsilons.len() as u128 + replicas as u128 - 1)
        * algorithms.len() as u128;
    if cells > MAX_CELLS {
        return Err(loc.at(
            Some(raw.sweep.sizes.span()),
            "sweep",
            format!("the sweep expands to {cells} cells, more than the {MAX_CELLS} kiln accepts in one spec"),
            Some("split the study into several specs, or use fewer seeds, sizes or ε levels".into()),
        ));
    }

    let fit = match &raw.fit {
        None => FitSettings::default(),
        Some(f) => fit_settings(f, loc)?,
    };

    Ok(Spec {
        fit,
        origin: loc.origin.to_string(),
        text: loc.text.to_string(),
        name,
        note: raw.experiment.note.unwrap_or_default(),
        model,
        sizes,
        seeds,
        epsilons,
        replicas,
        algorithms,
    })
}

/// One `[[algorithm]]` table: its kind from the registry, the kind's own keys, the model and
/// size checks; returns the entry and the span its label is reported at.
fn algorithm_entry(
    i: usize,
    table: &Spanned<RawAlgorithm>,
    model: &ModelSpec,
    sizes: &[(u64, Range<usize>)],
    loc: &Locator,
) -> Result<(AlgoEntry, Range<usize>), SpecError> {
    let at = format!("algorithm[{}]", i + 1);
    let values = table.get_ref();
    let text = |key: &str| -> Result<Option<(String, Range<usize>)>, SpecError> {
        match values.get(key) {
            None => Ok(None),
            Some(v) => match v.get_ref() {
                toml::Value::String(s) => Ok(Some((s.clone(), v.span()))),
                other => Err(loc.at(
                    Some(v.span()),
                    format!("{at}.{key}"),
                    format!(
                        "invalid type: {} `{other}`, expected a string",
                        other.type_str()
                    ),
                    Some(format!("e.g. {key} = \"descent\"")),
                )),
            },
        }
    };
    let Some((kind, kspan)) = text("kind")? else {
        return Err(loc.at(
            Some(table.span()),
            at.clone(),
            "missing key `kind`",
            Some(format!(
                "every [[algorithm]] names its kind: {}",
                quoted(&crate::algo::kind_names())
            )),
        ));
    };
    let Some(k) = crate::algo::find(&kind) else {
        return Err(loc.at(
            Some(kspan),
            format!("{at}.kind"),
            format!("unknown algorithm kind `{kind}`"),
            Some(choice_hint(&kind, &crate::algo::kind_names())),
        ));
    };
    let mut settings = BTreeMap::new();
    for (key, v) in values {
        if key == "kind" || key == "label" {
            continue;
        }
        if !k.keys.iter().any(|x| x.name == key) {
            let elsewhere = crate::algo::kinds()
                .iter()
                .any(|o| o.keys.iter().any(|x| x.name == key));
            let own: Vec<&str> = k.keys.iter().map(|x| x.name).collect();
            let message = if elsewhere {
                format!("`{key}` does not apply to kind `{kind}`")
            } else {
                format!("unknown key `{key}`")
            };
            let hint = match closest(key, own.iter().copied()) {
                Some(c) if !elsewhere => format!("did you mean `{c}`?"),
                _ if own.is_empty() => format!("`{kind}` takes no settings"),
                _ => format!("settings of `{kind}`: {}", quoted(&own)),
            };
            return Err(loc.at(Some(v.span()), format!("{at}.{key}"), message, Some(hint)));
        }
        settings.insert(key.clone(), v.clone());
    }
    let algo = (k.parse)(&Settings {
        at: at.clone(),
        loc,
        values: &settings,
        anchor: Some(kspan.clone()),
    })?;
    for (n, span) in sizes {
        if let Some((message, hint)) = algo.size_problem(*n) {
            return Err(loc.at(
                Some(span.clone()),
                "sweep.sizes",
                format!("{message} ({at})"),
                Some(hint),
            ));
        }
    }
    if let Some(why) = algo.unsupported(model) {
        return Err(loc.at(
            Some(kspan),
            format!("{at}.kind"),
            format!(
                "`{kind}` cannot run on the `{}` family: {why}",
                model.family.name()
            ),
            Some(format!(
                "kinds for this family: {}",
                quoted(&crate::algo::kinds_for(model))
            )),
        ));
    }
    let (label, lspan) = text("label")?.unwrap_or((kind.clone(), kspan));
    if label.trim().is_empty() {
        return Err(loc.at(
            Some(lspan),
            format!("{at}.label"),
            "empty label",
            Some("give a short name, or leave `label` out to use the kind".into()),
        ));
    }
    Ok((AlgoEntry { label, algo }, lspan))
}

/// `a`, `b`, `c`.
fn quoted(names: &[&str]) -> String {
    names
        .iter()
        .map(|c| format!("`{c}`"))
        .collect::<Vec<_>>()
        .join(", ")
}

fn fit_settings(f: &RawFit, loc: &Locator) -> Result<FitSettings, SpecError> {
    let mut out = FitSettings::default();
    if let Some(o) = &f.omega {
        out.omega = Some(match o.get_ref() {
            toml::Value::String(s) if s == "fit" => None,
            toml::Value::Float(x) if *x > 0.0 && x.is_finite() => Some(*x),
            toml::Value::Integer(x) if *x > 0 => Some(*x as f64),
            other => {
                return Err(loc.at(
                    Some(o.span()),
                    "fit.omega",
                    format!("`{other}` is not a correction exponent"),
                    Some("give a positive number (e.g. 0.6667) or \"fit\"".into()),
                ));
            }
        });
    }
    if let Some(t) = &f.terms {
        let v = positive(t, loc, "fit.terms", 2)?;
        out.terms = Some(v as usize);
    }
    if let Some(m) = &f.min_n {
        out.min_n = Some(positive(m, loc, "fit.min_n", MAX_N)?);
    }
    if let Some(b) = &f.bootstrap {
        let x = *b.get_ref();
        if !(0..=1_000_000).contains(&x) {
            return Err(loc.at(
                Some(b.span()),
                "fit.bootstrap",
                format!("{x} bootstrap replicates"),
                Some("give 0 (no bootstrap) to 1000000".into()),
            ));
        }
        out.bootstrap = Some(x as usize);
    }
    if let Some(e) = &f.epsilon {
        out.reference_only = match e.get_ref().as_str() {
            "each" => false,
            "reference" => true,
            other => {
                return Err(loc.at(
                    Some(e.span()),
                    "fit.epsilon",
                    format!("unknown choice `{other}`"),
                    Some(choice_hint(other, &["each", "reference"])),
                ));
            }
        };
    }
    Ok(out)
}

fn positive(v: &Spanned<i64>, loc: &Locator, key: &str, max: i64) -> Result<u64, SpecError> {
    let x = *v.get_ref();
    if x < 1 {
        return Err(loc.at(
            Some(v.span()),
            key,
            format!("{x} is not allowed here"),
            Some("give a whole number ≥ 1".into()),
        ));
    }
    if x > max {
        return Err(loc.at(
            Some(v.span()),
            key,
            format!("{x} is larger than the limit {max}"),
            None,
        ));
    }
    Ok(x as u64)
}

/// `seeds = 16` (0..16), `seeds = [0, 4, 9]`, or `seeds = "10..20"` (half-open).
fn seeds_from(v: &Spanned<toml::Value>, loc: &Locator) -> Result<Vec<u64>, SpecError> {
    let key = "sweep.seeds";
    let hint = || {
        Some(
            "give a count (seeds = 16), a list (seeds = [0, 4, 9]) or a range (seeds = \"10..20\")"
                .to_string(),
        )
    };
    let err = |m: String| loc.at(Some(v.span()), key, m, hint());
    match v.get_ref() {
        toml::Value::Integer(k) => {
            if *k < 1 {
                return Err(err(format!("seeds = {k} gives no instances")));
            }
            if *k as u64 > MAX_SEEDS {
                return Err(err(format!(
                    "seeds = {k} is more than the {MAX_SEEDS} kiln accepts"
                )));
            }
            Ok((0..*k as u64).collect())
        }
        toml::Value::Array(xs) => {
            if xs.is_empty() {
                return Err(err("the seed list is empty".into()));
            }
            if xs.len() as u64 > MAX_SEEDS {
                return Err(err(format!(
                    "{} seeds is more than the {MAX_SEEDS} kiln accepts",
                    xs.len()
                )));
            }
            let mut out = Vec::with_capacity(xs.len());
            for x in xs {
                match x {
                    toml::Value::Integer(s) if *s >= 0 => {
                        if out.contains(&(*s as u64)) {
                            return Err(err(format!("seed {s} is listed twice")));
                        }
                        out.push(*s as u64)
                    }
                    other => {
                        return Err(err(format!("`{other}` is not a seed (a whole number ≥ 0)")));
                    }
                }
            }
            Ok(out)
        }
        toml::Value::String(s) => {
            let parsed = s.split_once("..").and_then(|(a, b)| {
                Some((a.trim().parse::<u64>().ok()?, b.trim().parse::<u64>().ok()?))
            });
            match parsed {
                Some((a, b)) if a < b => {
                    if b - a > MAX_SEEDS {
                        return Err(err(format!(
                            "the range {s} holds {} seeds, more than the {MAX_SEEDS} kiln accepts",
                            b - a
                        )));
                    }
                    Ok((a..b).collect())
                }
                Some((a, b)) => Err(err(format!("the range \"{s}\" is empty ({a} ≥ {b})"))),
                None => Err(err(format!("\"{s}\" is not a seed range"))),
            }
        }
        other => Err(err(format!("`{other}` is not a seed count, list or range"))),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = r#"
[experiment]
name = "t"
[model]
family = "sk"
[sweep]
sizes = [8, 16]
seeds = 3
epsilons = [0.1]
[[algorithm]]
kind = "descent"
[[algorithm]]
label = "a"
kind = "anneal"
sweeps = 10
beta = [0.1, 4]
"#;

    #[test]
    fn default_spec_parses() {
        let s = default_spec();
        assert!(!s.algorithms.is_empty());
    }

    #[test]
    fn good_spec_resolves_defaults() {
        let s = parse(GOOD, "t.toml").unwrap();
        assert_eq!(s.seeds, vec![0, 1, 2]);
        assert_eq!(s.epsilons, vec![0.0, 0.1]);
        assert_eq!(s.algorithms[0].label, "descent");
        assert_eq!(
            s.algorithms[0].algo,
            AlgoSpec::new(crate::algo::descent::Params::default())
        );
        let p = s.algorithms[1]
            .algo
            .params::<crate::algo::anneal::Params>()
            .expect("an annealer");
        assert_eq!(p.beta, [0.1, 4.0]);
        assert_eq!(p.sweeps, 10);
    }

    fn err_of(text: &str) -> SpecError {
        parse(text, "t.toml").unwrap_err()
    }

    #[test]
    fn seeds_forms() {
        let s = parse(&GOOD.replace("seeds = 3", "seeds = \"5..8\""), "t").unwrap();
        assert_eq!(s.seeds, vec![5, 6, 7]);
        let s = parse(&GOOD.replace("seeds = 3", "seeds = [9, 2]"), "t").unwrap();
        assert_eq!(s.seeds, vec![9, 2]);
        let e = err_of(&GOOD.replace("seeds = 3", "seeds = \"8..5\""));
        assert!(e.message.contains("empty"), "{e}");
    }

    #[test]
    fn unknown_key_suggests() {
        let e = err_of(&GOOD.replace("sizes =", "sizs ="));
        assert_eq!(e.key.as_deref(), Some("sweep.sizs"));
        assert_eq!(e.hint.as_deref(), Some("did you mean `sizes`?"));
        assert_eq!(e.line.unwrap().0, 7);
    }

    #[test]
    fn wrong_kind_key() {
        let e = err_of(&GOOD.replace("sweeps = 10", "order = \"random\""));
        assert_eq!(e.key.as_deref(), Some("algorithm[2].order"));
        assert!(e.message.contains("does not apply"), "{e}");
    }

    #[test]
    fn too_many_cells() {
        let e = err_of(
            &GOOD
                .replace("seeds = 3", "seeds = 1000000")
                .replace("[8, 16]", "[8, 16, 32]"),
        );
        assert!(e.message.contains("12000000 cells"), "{e}");
    }
}

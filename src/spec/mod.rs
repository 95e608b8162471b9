//! Experiment specs: the TOML schema, validation, and expansion into a plan of cells.
//!
//! Two stages, no I/O in either: [`parse`] turns text into a [`Spec`] (every value checked,
//! defaults filled in, each problem reported with file, line, key and a hint), and
//! [`plan::expand`] turns a `Spec` into the ordered list of cells with their keys.

mod algorithms;
pub mod error;
mod fit_settings;
mod model;
pub mod plan;
mod reference;
pub mod settings;
pub mod shard;
mod sweep;

use crate::algo::AlgoSpec;
use crate::model::ModelSpec;
pub use error::SpecError;
use error::{Locator, closest};
pub use reference::{key_table, listing, reference};
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
/// Largest spec file kiln reads, in bytes.
pub const MAX_SPEC_BYTES: u64 = 4 << 20;
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
    sizes: Spanned<Vec<Spanned<toml::Value>>>,
    seeds: Spanned<toml::Value>,
    #[serde(default)]
    epsilons: Option<Spanned<Vec<Spanned<toml::Value>>>>,
    #[serde(default)]
    replicas: Option<Spanned<toml::Value>>,
    #[serde(default)]
    densities: Option<Spanned<Vec<Spanned<toml::Value>>>>,
}

/// How a TOML value's type reads in a message.
pub(crate) fn type_words(v: &toml::Value) -> String {
    match v {
        toml::Value::String(s) => format!("the text \"{s}\""),
        toml::Value::Integer(i) => format!("the whole number {i}"),
        toml::Value::Float(x) => format!("the number {x}"),
        toml::Value::Boolean(b) => format!("`{b}`"),
        toml::Value::Datetime(d) => format!("the date {d}"),
        toml::Value::Array(_) => "a list".into(),
        toml::Value::Table(_) => "a table".into(),
    }
}

/// The elements of a list that `read` accepts (each located) and whether it accepted every
/// one; the others' errors ("… is not `what`", a hint naming `plural` with `example`) are
/// kept for the report.
fn list_of<T>(
    raw: &Spanned<Vec<Spanned<toml::Value>>>,
    key: &str,
    loc: &Locator,
    errs: &mut Vec<SpecError>,
    (what, plural, example): (&str, &str, &str),
    read: impl Fn(&toml::Value) -> Option<T>,
) -> (Spanned<Vec<Spanned<T>>>, bool) {
    let mut out = Vec::new();
    let mut ok = true;
    for v in raw.get_ref() {
        match read(v.get_ref()) {
            Some(x) => out.push(Spanned::new(v.span(), x)),
            None => {
                ok = false;
                errs.push(loc.at(
                    Some(v.span()),
                    key,
                    format!("{} is not {what}", type_words(v.get_ref())),
                    Some(format!("`{key}` lists {plural}, e.g. {example}")),
                ));
            }
        }
    }
    (Spanned::new(raw.span(), out), ok)
}

/// A list of whole numbers ([`list_of`]).
fn whole_list(
    raw: &Spanned<Vec<Spanned<toml::Value>>>,
    key: &str,
    loc: &Locator,
    errs: &mut Vec<SpecError>,
) -> (Spanned<Vec<Spanned<i64>>>, bool) {
    list_of(
        raw,
        key,
        loc,
        errs,
        ("a whole number", "whole numbers", "[64, 128, 256]"),
        |v| v.as_integer(),
    )
}

/// A list of numbers, whole numbers read as numbers ([`list_of`]); None if any element is not.
fn number_list(
    raw: &Spanned<Vec<Spanned<toml::Value>>>,
    key: &str,
    loc: &Locator,
    errs: &mut Vec<SpecError>,
) -> Option<Spanned<Vec<Spanned<f64>>>> {
    let (list, ok) = list_of(
        raw,
        key,
        loc,
        errs,
        ("a number", "numbers", "[0.01, 0.1]"),
        |v| match v {
            toml::Value::Integer(i) => Some(*i as f64),
            toml::Value::Float(x) => Some(*x),
            _ => None,
        },
    );
    ok.then_some(list)
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
    /// The model (at the first density when the sweep lists densities).
    pub model: ModelSpec,
    /// The model at each density of `[sweep] densities`, in the listed order; just `model`
    /// when the sweep has no densities. Cells name theirs by index ([`plan::Cell::model`]).
    pub models: Vec<ModelSpec>,
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
    /// The estimated cost of computing a cell: its instance's sampling and its algorithm's run
    /// (units of [`crate::algo::Algorithm::cost`]). Orders the work, sizes shards and Slurm
    /// tasks, and gives `kiln check` its time.
    pub fn cell_cost(&self, c: &plan::Cell) -> f64 {
        let m = &self.models[c.model];
        self.algorithms[c.algo].algo.cost(c.n, m.flip_cost(c.n)) + m.sample_cost(c.n)
    }

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
    let refuse = |message: String, hint: &str| SpecError {
        origin: origin.clone(),
        line: None,
        key: None,
        message,
        hint: Some(hint.into()),
        also: None,
    };
    let unreadable = |e: std::io::Error| {
        refuse(
            format!("cannot read the file: {e}"),
            if e.kind() == std::io::ErrorKind::NotFound {
                "check the path; `kiln run` with no spec runs the built-in default"
            } else {
                "check that the file is readable UTF-8 text"
            },
        )
    };
    // A device, a FIFO or a folder would block or grow without end: only regular files, and
    // no larger than MAX_SPEC_BYTES (the largest useful spec is a few hundred kilobytes).
    let meta = std::fs::metadata(path).map_err(unreadable)?;
    if !meta.is_file() {
        return Err(refuse(
            "not a regular file".into(),
            "give the path of a TOML spec file",
        ));
    }
    if meta.len() > MAX_SPEC_BYTES {
        return Err(refuse(
            format!(
                "the file has {} bytes, more than the {MAX_SPEC_BYTES} a spec may have",
                meta.len()
            ),
            "list seeds as a count or a range (seeds = 1000, seeds = \"0..1000\") rather than one by one",
        ));
    }
    let mut text = String::new();
    use std::io::Read;
    std::fs::File::open(path)
        .and_then(|f| f.take(MAX_SPEC_BYTES + 1).read_to_string(&mut text))
        .map_err(unreadable)?;
    if text.len() as u64 > MAX_SPEC_BYTES {
        return Err(refuse(
            format!(
                "the file grew past the {MAX_SPEC_BYTES} bytes a spec may have while it was read"
            ),
            "give a spec file that is not being written",
        ));
    }
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
    model::resolve(&doc.model, &loc, None)
}

/// The first line (1-based) where nesting is deepest, and that depth: dots of a dotted key or
/// table header plus the brackets and braces open at that point (strings skipped).
fn deepest_line(text: &str) -> (usize, usize) {
    let (mut best, mut open) = ((1, 0), 0usize);
    for (i, line) in text.lines().enumerate() {
        let (mut dots, mut quote, mut in_key, mut deepest) = (0, None, true, open);
        for c in line.chars() {
            match (quote, c) {
                (Some(q), c) if c == q => quote = None,
                (Some(_), _) => {}
                (None, '"' | '\'') => quote = Some(c),
                (None, '#') => break,
                (None, '=') => in_key = false,
                (None, '.') if in_key => dots += 1,
                (None, '[' | '{') => {
                    open += 1;
                    deepest = deepest.max(open);
                }
                (None, ']' | '}') => open = open.saturating_sub(1),
                _ => {}
            }
        }
        let depth = deepest + dots;
        if depth > best.1 {
            best = (i + 1, depth);
        }
    }
    best
}

/// A reader's type message in the user's words: "invalid type: string \"x\", expected i64"
/// becomes "the text \"x\" where a whole number is expected".
fn in_user_words(msg: &str) -> String {
    let Some(rest) = msg
        .strip_prefix("invalid type: ")
        .or_else(|| msg.strip_prefix("invalid value: "))
    else {
        return msg.to_string();
    };
    let (got, want) = rest.rsplit_once(", expected ").unwrap_or((rest, ""));
    let got = if let Some(s) = got.strip_prefix("string ") {
        format!("the text {s}")
    } else if let Some(i) = got.strip_prefix("integer `") {
        format!("the whole number {}", i.trim_end_matches('`'))
    } else if let Some(x) = got.strip_prefix("floating point `") {
        format!("the number {}", x.trim_end_matches('`'))
    } else if let Some(b) = got.strip_prefix("boolean `") {
        format!("`{}`", b.trim_end_matches('`'))
    } else {
        match got {
            "sequence" => "a list".to_string(),
            "map" => "a table".to_string(),
            other => other.to_string(),
        }
    };
    let want = match want.trim() {
        "i64" | "u64" | "i32" | "u32" | "usize" => "a whole number",
        "f64" | "f32" => "a number",
        "a string" | "string" => "text in quotes",
        "a boolean" | "bool" => "true or false",
        "a sequence" => "a list [ … ]",
        "a map" | "struct" => "a table",
        "" => "another value",
        other => other,
    };
    format!("{got} where {want} is expected")
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
            None => "`kiln draft <family>` writes a spec with every key".into(),
        });
    } else if let Some(rest) = msg.strip_prefix("missing field `") {
        let word = rest.split('`').next().unwrap_or(rest);
        message = format!("missing key `{word}`");
        hint = Some("`kiln draft <family>` writes a spec with every required key filled in".into());
    } else if msg.starts_with("invalid type") || msg.starts_with("invalid value") {
        message = in_user_words(&msg);
        hint = Some("`kiln kinds` lists every key with its type".into());
    } else if span.is_none() && msg.contains("recursion limit") {
        // The reader gives no position for this one: find the deepest line ourselves.
        let (line, depth) = deepest_line(loc.text);
        return SpecError {
            origin: loc.origin.to_string(),
            line: Some((line as u32, 1)),
            key: None,
            message: format!("keys or values nest {depth} levels deep here, too deep to read"),
            hint: Some("a spec needs at most three levels (`[model.xi]`, `a.b.c = …`)".into()),
            also: None,
        };
    } else {
        hint = Some("the file is not valid TOML here".into());
    }
    SpecError {
        origin: loc.origin.to_string(),
        line: span.map(|s| loc.line_col32(s.start)),
        key,
        message,
        hint,
        also: None,
    }
}

/// `Ok` of a result, or None with its error kept for the report.
fn keep<T>(r: Result<T, SpecError>, errs: &mut Vec<SpecError>) -> Option<T> {
    r.map_err(|e| errs.push(e)).ok()
}

/// Checks every section and reports all problems found at once: sections that do not depend on
/// each other are checked even after one fails (the algorithms need a valid model and sizes,
/// so they are checked only with those).
fn validate(raw: RawSpec, loc: &Locator) -> Result<Spec, SpecError> {
    let mut errs: Vec<SpecError> = Vec::new();
    // [experiment]
    let name = raw.experiment.name.get_ref().clone();
    let name_ok = !name.is_empty()
        && name.len() <= 80
        && !name.starts_with('.')
        && name
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || matches!(c, '-' | '_' | '.'));
    if !name_ok {
        errs.push(loc.at(
            Some(raw.experiment.name.span()),
            "experiment.name",
            format!("`{name}` cannot name a results folder"),
            Some("use 1 to 80 letters, digits, `-`, `_` or `.`, not starting with `.`".into()),
        ));
    }

    // [model], and the sweep's densities
    let axis = raw
        .sweep
        .densities
        .as_ref()
        .and_then(|d| number_list(d, "sweep.densities", loc, &mut errs));
    let model = keep(
        model::resolve(
            &raw.model,
            loc,
            axis.as_ref().and_then(|d| d.get_ref().first()),
        ),
        &mut errs,
    );
    let models = match (&model, &axis) {
        (Some(m), None) => Some(vec![m.clone()]),
        (Some(m), Some(d)) => keep(sweep::densities(d, m, loc), &mut errs),
        (None, _) => None,
    };

    // [sweep]
    let (raw_sizes, sizes_ok) = whole_list(&raw.sweep.sizes, "sweep.sizes", loc, &mut errs);
    let mut sizes = None;
    // With some sizes unreadable, the algorithms are still checked against the readable ones.
    let mut partial_sizes = None;
    if let Some(models) = &models {
        for m in models {
            if sizes_ok {
                sizes = keep(sweep::sizes(&raw_sizes, m, loc), &mut errs);
                if sizes.is_none() {
                    break;
                }
            } else {
                partial_sizes = sweep::sizes(&raw_sizes, m, loc).ok();
            }
        }
    }
    let seeds = keep(sweep::seeds_from(&raw.sweep.seeds, loc), &mut errs);
    let replicas = match &raw.sweep.replicas {
        None => Some(1),
        Some(r) => match r.get_ref() {
            toml::Value::Integer(i) => keep(
                positive(&Spanned::new(r.span(), *i), loc, "sweep.replicas", 64),
                &mut errs,
            )
            .map(|x| x as u32),
            other => {
                errs.push(loc.at(
                    Some(r.span()),
                    "sweep.replicas",
                    format!("{} is not a whole number", type_words(other)),
                    Some("give a whole number from 1 to 64".into()),
                ));
                None
            }
        },
    };
    let epsilons = match &raw.sweep.epsilons {
        None => keep(sweep::epsilons(None, loc), &mut errs),
        Some(e) => number_list(e, "sweep.epsilons", loc, &mut errs)
            .and_then(|e| keep(sweep::epsilons(Some(&e), loc), &mut errs)),
    };

    // [[algorithm]]
    if raw.algorithm.is_empty() {
        errs.push(SpecError {
            origin: loc.origin.to_string(),
            line: None,
            key: Some("algorithm".into()),
            message: "no algorithm given".into(),
            hint: Some(
                "add at least one [[algorithm]] table with a `kind` (`kiln kinds` lists them)"
                    .into(),
            ),
            also: None,
        });
    }
    let mut algorithms: Vec<AlgoEntry> = Vec::new();
    if let (Some(model), Some(sizes)) = (&model, sizes.as_ref().or(partial_sizes.as_ref())) {
        let mut label_spans: Vec<Range<usize>> = Vec::new();
        // Label → index, so that many algorithms validate in linear time.
        let mut seen: std::collections::HashMap<String, usize> = std::collections::HashMap::new();
        for (i, a) in raw.algorithm.iter().enumerate() {
            let Some((entry, lspan)) = keep(
                algorithms::algorithm_entry(i, a, model, sizes, loc),
                &mut errs,
            ) else {
                continue;
            };
            if let Some(&j) = seen.get(&entry.label) {
                let (line, _) = loc.line_col(label_spans[j].start);
                errs.push(loc.at(
                    Some(lspan),
                    format!("algorithm[{}].label", i + 1),
                    format!(
                        "label `{}` is already used by algorithm[{}] (line {line})",
                        entry.label,
                        j + 1
                    ),
                    Some("labels name table rows: give each algorithm its own".into()),
                ));
                continue;
            }
            seen.insert(entry.label.clone(), algorithms.len());
            label_spans.push(lspan);
            algorithms.push(entry);
        }
    }

    let fit = match &raw.fit {
        None => Some(FitSettings::default()),
        Some(f) => keep(fit_settings::fit_settings(f, loc), &mut errs),
    };

    if let Some(e) = SpecError::gather(errs) {
        return Err(e);
    }
    let (
        Some(model),
        Some(models),
        Some(sizes),
        Some(seeds),
        Some(replicas),
        Some(epsilons),
        Some(fit),
    ) = (model, models, sizes, seeds, replicas, epsilons, fit)
    else {
        // Every section without an error has a value; should one not, refuse rather than panic.
        return Err(loc.at(
            None,
            "sweep",
            "the spec could not be read completely",
            Some("run `kiln check` on it and report this message".into()),
        ));
    };

    let cells = sizes.len() as u128
        * models.len() as u128
        * seeds.len() as u128
        * epsilons.len() as u128
        * replicas as u128
        * algorithms.len() as u128;
    if cells > MAX_CELLS {
        return Err(loc.at(
            Some(raw.sweep.sizes.span()),
            "sweep",
            format!("the sweep expands to {cells} cells, more than the {MAX_CELLS} kiln accepts in one spec"),
            Some("split the study into several specs, or use fewer seeds, sizes or ε levels".into()),
        ));
    }

    Ok(Spec {
        fit,
        origin: loc.origin.to_string(),
        text: loc.text.to_string(),
        name,
        note: raw.experiment.note.unwrap_or_default(),
        model,
        models,
        sizes,
        seeds,
        epsilons,
        replicas,
        algorithms,
    })
}

/// `a`, `b`, `c`.
pub(crate) fn quoted(names: &[&str]) -> String {
    names
        .iter()
        .map(|c| format!("`{c}`"))
        .collect::<Vec<_>>()
        .join(", ")
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

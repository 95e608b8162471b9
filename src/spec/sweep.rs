//! `[sweep]`: sizes (read through the family, which knows what a size means for it) and ε
//! levels. Every check is linear in the length of the list.

use std::collections::HashSet;
use std::ops::Range;

use toml::Spanned;

use super::error::Locator;
use super::{MAX_N, MAX_SEEDS, SpecError};
use crate::model::ModelSpec;

/// The sizes n of the sweep, each with its place in the file.
pub(super) fn sizes(
    raw: &Spanned<Vec<Spanned<i64>>>,
    model: &ModelSpec,
    loc: &Locator,
) -> Result<Vec<(u64, Range<usize>)>, SpecError> {
    if raw.get_ref().is_empty() {
        return Err(loc.at(
            Some(raw.span()),
            "sweep.sizes",
            "no sizes given",
            Some("list at least one size, e.g. sizes = [64, 128]".into()),
        ));
    }
    let mut sizes = Vec::with_capacity(raw.get_ref().len());
    let mut seen = HashSet::with_capacity(raw.get_ref().len());
    for s in raw.get_ref() {
        let refuse = |message: String, hint: String| {
            loc.at(Some(s.span()), "sweep.sizes", message, Some(hint))
        };
        let written = *s.get_ref();
        if written < 2 {
            return Err(refuse(
                format!("size {written} is too small"),
                "every size n must be at least 2".into(),
            ));
        }
        if written > MAX_N {
            return Err(refuse(
                format!("size {written} is larger than kiln supports ({MAX_N})"),
                "sizes are numbers of spins; use a smaller n".into(),
            ));
        }
        let n = model
            .family
            .size(written as u64)
            .map_err(|(m, h)| refuse(m, h))?;
        if !seen.insert(n) {
            return Err(refuse(
                format!("size {n} is listed twice"),
                "list each size once".into(),
            ));
        }
        if let Some((m, h)) = model.family.size_problem(n) {
            return Err(refuse(m, h));
        }
        sizes.push((n, s.span()));
    }
    Ok(sizes)
}

/// The ε levels: always 0 first (the reference run), then each listed level once.
pub(super) fn epsilons(
    raw: Option<&Spanned<Vec<Spanned<f64>>>>,
    loc: &Locator,
) -> Result<Vec<f64>, SpecError> {
    let mut epsilons = vec![0.0];
    let mut seen = HashSet::new();
    for e in raw.map_or(&[][..], |e| e.get_ref()) {
        let x = *e.get_ref();
        if !(0.0..1.0).contains(&x) {
            return Err(loc.at(
                Some(e.span()),
                "sweep.epsilons",
                format!("ε = {x} is outside [0, 1)"),
                Some("ε is one minus the correlation of the perturbed disorder: 0 ≤ ε < 1".into()),
            ));
        }
        if x == 0.0 {
            continue;
        }
        if !seen.insert(x.to_bits()) {
            return Err(loc.at(
                Some(e.span()),
                "sweep.epsilons",
                format!("ε = {x} is listed twice"),
                Some("list each ε once".into()),
            ));
        }
        epsilons.push(x);
    }
    Ok(epsilons)
}

/// `seeds = 16` (0..16), `seeds = [0, 4, 9]`, or `seeds = "10..20"` (half-open).
pub(super) fn seeds_from(v: &Spanned<toml::Value>, loc: &Locator) -> Result<Vec<u64>, SpecError> {
    let key = "sweep.seeds";
    let hint = || {
        Some(
            "give a count (seeds = 16, the same as \"0..16\"), a list (seeds = [0, 4, 9]) or a range (seeds = \"10..20\": seeds 10 to 19; a range's end is never included)"
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
            let mut seen = HashSet::with_capacity(xs.len());
            for x in xs {
                match x {
                    toml::Value::Integer(s) if *s >= 0 => {
                        if !seen.insert(*s as u64) {
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
                None if s.contains("..=") => Err(err(format!(
                    "\"{s}\": kiln writes ranges one way, \"a..b\" with b excluded (\"0..16\" is seeds 0 to 15)"
                ))),
                None => Err(err(format!("\"{s}\" is not a seed range"))),
            }
        }
        other => Err(err(format!("`{other}` is not a seed count, list or range"))),
    }
}

/// `[sweep] densities`: the model at each listed density α (each in (0, 10⁴], listed once), in
/// order. Only a family with a density (k-SAT) takes them.
pub(super) fn densities(
    raw: &Spanned<Vec<Spanned<f64>>>,
    model: &ModelSpec,
    loc: &Locator,
) -> Result<Vec<ModelSpec>, SpecError> {
    let key = "sweep.densities";
    if model.family.density().is_none() {
        let owners: Vec<&str> = crate::model::families()
            .iter()
            .filter(|f| f.keys.iter().any(|k| k.name == "density"))
            .map(|f| f.name)
            .collect();
        return Err(loc.at(
            Some(raw.span()),
            key,
            format!("the `{}` family has no constraint density", model.name()),
            Some(format!(
                "densities are an axis of {}; remove the list",
                super::quoted(&owners)
            )),
        ));
    }
    if raw.get_ref().is_empty() {
        return Err(loc.at(
            Some(raw.span()),
            key,
            "no densities given",
            Some("list at least one density α = m/n, e.g. densities = [3.8, 4.2]".into()),
        ));
    }
    let mut seen = HashSet::new();
    let mut models = Vec::new();
    for a in raw.get_ref() {
        let x = *a.get_ref();
        if !(x > 0.0 && x <= 1e4) {
            return Err(loc.at(
                Some(a.span()),
                key,
                format!("density {x} is not in (0, 10⁴]"),
                Some("α = m/n is the number of constraints per variable, e.g. 4.2".into()),
            ));
        }
        if !seen.insert(x.to_bits()) {
            return Err(loc.at(
                Some(a.span()),
                key,
                format!("density {x} is listed twice"),
                Some("list each density once".into()),
            ));
        }
        let family = model
            .family
            .at_density(x)
            .expect("a family with a density moves along it");
        models.push(ModelSpec {
            family,
            couplings: model.couplings,
            field: model.field,
        });
    }
    Ok(models)
}

//! `[model]`: the family from the registry, its coupling law, and the family's own keys, each
//! read by the family's parser (in its file under `model/families/`).

use std::collections::BTreeMap;
use std::ops::Range;

use toml::Spanned;

use super::error::{Locator, choice_hint, closest};
use super::{Settings, SpecError};
use crate::model::{Couplings, ModelSpec};

/// The `[model]` table, kept as parsed values with their positions.
pub(super) type RawModel = BTreeMap<String, Spanned<toml::Value>>;

/// A string-valued key of the table, with its span.
fn text(
    raw: &RawModel,
    key: &str,
    loc: &Locator,
) -> Result<Option<(String, Range<usize>)>, SpecError> {
    match raw.get(key) {
        None => Ok(None),
        Some(v) => match v.get_ref() {
            toml::Value::String(s) => Ok(Some((s.clone(), v.span()))),
            other => Err(loc.at(
                Some(v.span()),
                format!("model.{key}"),
                format!(
                    "invalid type: {} `{other}`, expected a string",
                    other.type_str()
                ),
                Some(format!("e.g. {key} = \"sk\"")),
            )),
        },
    }
}

/// Resolves `[model]`. `axis` is the first of `[sweep] densities`, if the sweep lists them: it
/// stands for the family's `density`, which the table must then not give itself.
pub(super) fn resolve(
    raw: &Spanned<RawModel>,
    loc: &Locator,
    axis: Option<&Spanned<f64>>,
) -> Result<ModelSpec, SpecError> {
    let table = raw.get_ref();
    let names = crate::model::family_names();
    let Some((name, fspan)) = text(table, "family", loc)? else {
        return Err(loc.at(
            Some(raw.span()),
            "model.family",
            "missing key `family`",
            Some(format!("name the family: {}", super::quoted(&names))),
        ));
    };
    let Some(entry) = crate::model::find(&name) else {
        return Err(loc.at(
            Some(fspan),
            "model.family",
            format!("unknown family `{name}`"),
            Some(choice_hint(&name, &names)),
        ));
    };
    let couplings = match text(table, "couplings", loc)? {
        None => entry
            .couplings
            .first()
            .copied()
            .unwrap_or(Couplings::Gaussian),
        Some((c, span)) => {
            let law = Couplings::parse(&c).ok_or_else(|| {
                loc.at(
                    Some(span.clone()),
                    "model.couplings",
                    format!("unknown coupling law `{c}`"),
                    Some(choice_hint(&c, &Couplings::NAMES)),
                )
            })?;
            if !entry.couplings.contains(&law) {
                let takes: Vec<&str> = entry.couplings.iter().map(|c| c.name()).collect();
                let graphs: Vec<&str> = crate::model::families()
                    .iter()
                    .filter(|f| f.couplings.contains(&law))
                    .map(|f| f.name)
                    .collect();
                return Err(loc.at(
                    Some(span),
                    "model.couplings",
                    format!("`{c}` does not apply to the `{name}` family"),
                    Some(format!(
                        "`{c}` couplings are for {}; `{name}` takes {}",
                        super::quoted(&graphs),
                        super::quoted(&takes)
                    )),
                ));
            }
            law
        }
    };
    let mut settings = BTreeMap::new();
    let mut field_raw = None;
    for (key, v) in table {
        if key == "family" || key == "couplings" {
            continue;
        }
        if key == "field" {
            field_raw = Some(v);
            continue;
        }
        if !entry.keys.iter().any(|k| k.name == key) {
            let owners: Vec<&str> = crate::model::families()
                .iter()
                .filter(|f| f.keys.iter().any(|k| k.name == key))
                .map(|f| f.name)
                .collect();
            let err = if owners.is_empty() {
                let mut known = vec!["family", "couplings"];
                for f in crate::model::families() {
                    known.extend(f.keys.iter().map(|k| k.name));
                }
                loc.at(
                    Some(v.span()),
                    format!("model.{key}"),
                    format!("unknown key `{key}`"),
                    Some(match closest(key, known) {
                        Some(c) => format!("did you mean `{c}`?"),
                        None => "`kiln kinds` lists every family with its keys".into(),
                    }),
                )
            } else {
                loc.at(
                    Some(v.span()),
                    format!("model.{key}"),
                    format!("`{key}` does not apply to the `{name}` family"),
                    Some(format!(
                        "`{key}` belongs to {}; remove it",
                        super::quoted(&owners)
                    )),
                )
            };
            return Err(err);
        }
        settings.insert(key.clone(), v.clone());
    }
    if let Some(a) = axis {
        if let Some(v) = settings.get("density") {
            return Err(loc.at(
                Some(v.span()),
                "model.density",
                "the density is given both here and as `[sweep] densities`",
                Some("give one density here, or the list under [sweep]; not both".into()),
            ));
        }
        if entry.keys.iter().any(|k| k.name == "density") {
            // Pointed at the list's entry, so messages name the sweep's line.
            let v = Spanned::new(a.span(), toml::Value::Float(*a.get_ref()));
            settings.insert("density".into(), v);
        }
    }
    let family = (entry.parse)(&Settings {
        at: "model".into(),
        loc,
        values: &settings,
        anchor: Some(fspan),
    })?;
    let field = match field_raw {
        Some(v) => read_field(v, family.takes_field(), &name, loc)?,
        None => 0.0,
    };
    Ok(ModelSpec {
        family,
        couplings,
        field,
    })
}

/// The uniform field h of `field = h`: a finite number with |h| ≤ 100, on a ±1 family.
fn read_field(
    v: &Spanned<toml::Value>,
    spins: bool,
    family: &str,
    loc: &Locator,
) -> Result<f64, SpecError> {
    let h = match v.get_ref() {
        toml::Value::Float(x) => *x,
        toml::Value::Integer(x) => *x as f64,
        other => {
            return Err(loc.at(
                Some(v.span()),
                "model.field",
                format!(
                    "invalid type: {} `{other}`, expected a number",
                    other.type_str()
                ),
                Some("e.g. field = 0.5 (H + h Σσ_i)".into()),
            ));
        }
    };
    if !spins {
        return Err(loc.at(
            Some(v.span()),
            "model.field",
            format!("`field` does not apply to the `{family}` family"),
            Some("the uniform field h Σσ_i is for the ±1 spin-glass families (not the sphere, not constraint families); remove it".into()),
        ));
    }
    if !(h.is_finite() && h.abs() <= 100.0) {
        return Err(loc.at(
            Some(v.span()),
            "model.field",
            format!("field {h} is out of range"),
            Some("give a number with |h| ≤ 100 (0, the default, is no field)".into()),
        ));
    }
    Ok(h)
}

//! `[[algorithm]]`: each table's kind from the registry, its own keys read by the kind's
//! parser (in the kind's file under `algo/`), and the checks against the model and the sizes.

use std::collections::BTreeMap;
use std::ops::Range;

use toml::Spanned;

use super::error::{Locator, choice_hint, closest};
use super::{AlgoEntry, RawAlgorithm, Settings, SpecError, quoted};
use crate::model::ModelSpec;

/// Longest label: labels are printed in tables, legends and file names.
pub const MAX_LABEL_CHARS: usize = 80;

/// One `[[algorithm]]` table: its kind from the registry, the kind's own keys, the model and
/// size checks; returns the entry and the span its label is reported at.
pub(super) fn algorithm_entry(
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
    let settings = own_keys(&at, &kind, &k, values, loc)?;
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
    let chars = label.chars().count();
    if chars > MAX_LABEL_CHARS || label.chars().any(char::is_control) {
        return Err(loc.at(
            Some(lspan),
            format!("{at}.label"),
            if chars > MAX_LABEL_CHARS {
                format!("the label has {chars} characters, more than {MAX_LABEL_CHARS}")
            } else {
                "the label contains a control character (a line break or tab?)".to_string()
            },
            Some("labels name table rows and legend entries: keep them short, e.g. label = \"anneal-slow\"".into()),
        ));
    }
    Ok((AlgoEntry { label, algo }, lspan))
}

/// The table's settings (all but `kind` and `label`), each checked to be a key of the kind:
/// a key of another kind is named as such, an unknown one gets the closest valid name.
fn own_keys(
    at: &str,
    kind: &str,
    k: &crate::algo::Kind,
    values: &RawAlgorithm,
    loc: &Locator,
) -> Result<RawAlgorithm, SpecError> {
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
    Ok(settings)
}

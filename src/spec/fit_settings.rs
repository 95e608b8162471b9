//! `[fit]`: the spec's defaults for `kiln fit` and `kiln plot`.

use super::error::{Locator, choice_hint};
use super::{FitSettings, MAX_N, RawFit, SpecError, positive};

pub(super) fn fit_settings(f: &RawFit, loc: &Locator) -> Result<FitSettings, SpecError> {
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

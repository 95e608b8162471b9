//! Shared by the commands that read an experiment's table (`fit`, `plot`): which experiment
//! and folder a command argument names, and the table's columns as plain vectors.

use super::InputError;
use crate::spec::FitSettings;
use std::path::{Path, PathBuf};

/// An experiment's results folder, as named by a spec, a folder, or the built-in default.
pub struct Experiment {
    pub name: String,
    pub dir: PathBuf,
    pub fit: FitSettings,
    /// The model, when the spec is known (given, built in, or recorded in the manifest).
    pub model: Option<crate::model::ModelSpec>,
    /// Each sampler's label with the inverse temperature it samples at.
    pub sampler_betas: std::collections::BTreeMap<String, f64>,
    /// Each sampler's label with its kind.
    pub sampler_kinds: std::collections::BTreeMap<String, String>,
}

/// Each sampler of the spec by label, with its kind.
fn sampler_kinds(spec: &crate::spec::Spec) -> std::collections::BTreeMap<String, String> {
    spec.algorithms
        .iter()
        .filter(|a| a.algo.gibbs_beta().is_some())
        .map(|a| (a.label.clone(), a.algo.kind().to_string()))
        .collect()
}

/// Each sampler of the spec by label, with its β.
fn sampler_betas(spec: &crate::spec::Spec) -> std::collections::BTreeMap<String, f64> {
    spec.algorithms
        .iter()
        .filter_map(|a| Some((a.label.clone(), a.algo.gibbs_beta()?)))
        .collect()
}

/// The spec recorded in a results folder's manifest, if it parses.
fn manifest_spec(dir: &Path) -> Option<crate::spec::Spec> {
    let text = std::fs::read_to_string(dir.join("manifest.toml")).ok()?;
    let v: toml::Table = toml::from_str(&text).ok()?;
    let spec = v.get("spec")?.as_str()?;
    crate::spec::parse(spec, &dir.join("manifest.toml").display().to_string()).ok()
}

impl Experiment {
    /// `arg` is a spec file or a results folder holding `cells.parquet`; none means the
    /// built-in default experiment.
    pub fn resolve(arg: Option<&PathBuf>, results: &Path) -> anyhow::Result<Experiment> {
        Ok(match arg {
            Some(p) if p.is_dir() => {
                let spec = manifest_spec(p);
                Experiment {
                    name: p
                        .file_name()
                        .and_then(|s| s.to_str())
                        .unwrap_or("results")
                        .to_string(),
                    dir: p.clone(),
                    fit: FitSettings::default(),
                    sampler_betas: spec.as_ref().map_or_else(Default::default, sampler_betas),
                    sampler_kinds: spec.as_ref().map_or_else(Default::default, sampler_kinds),
                    model: spec.map(|s| s.model),
                }
            }
            Some(p) => {
                let s = crate::spec::load(p)?;
                Experiment {
                    sampler_betas: sampler_betas(&s),
                    sampler_kinds: sampler_kinds(&s),
                    dir: results.join(&s.name),
                    name: s.name,
                    fit: s.fit,
                    model: Some(s.model),
                }
            }
            None => {
                let s = crate::spec::default_spec();
                Experiment {
                    sampler_betas: sampler_betas(&s),
                    sampler_kinds: sampler_kinds(&s),
                    dir: results.join(&s.name),
                    name: s.name,
                    fit: s.fit,
                    model: Some(s.model),
                }
            }
        })
    }

    /// The distinct inverse temperatures of the samplers, increasing.
    pub fn gibbs_betas(&self) -> Vec<f64> {
        let mut b: Vec<f64> = self.sampler_betas.values().copied().collect();
        b.sort_by(f64::total_cmp);
        b.dedup();
        b
    }

    /// The table's path, or an input error saying to run the experiment first.
    pub fn table(&self) -> anyhow::Result<PathBuf> {
        let p = self.dir.join("cells.parquet");
        if !p.is_file() {
            return Err(InputError(format!(
                "no table at {}: run the experiment first (kiln run)",
                p.display()
            ))
            .into());
        }
        Ok(p)
    }

    /// The spec hash recorded in the manifest, or `unknown`.
    pub fn spec_hash(&self) -> String {
        std::fs::read_to_string(self.dir.join("manifest.toml"))
            .ok()
            .and_then(|t| t.parse::<toml::Table>().ok())
            .and_then(|t| {
                t.get("spec_hash")
                    .and_then(|v| v.as_str().map(String::from))
            })
            .unwrap_or_else(|| "unknown".into())
    }
}

/// The correction exponent of `kiln fit` and `kiln plot`: the `--omega` flag (a positive
/// number or `fit`), else the spec's `[fit] omega` (`Some(None)`: fitted), else 2/3.
pub fn omega(
    flag: Option<&str>,
    spec: Option<Option<f64>>,
) -> Result<crate::fit::Omega, InputError> {
    use crate::fit::Omega;
    Ok(match flag {
        None => match spec {
            Some(None) => Omega::Fitted,
            Some(Some(x)) => Omega::Fixed(x),
            None => Omega::Fixed(2.0 / 3.0),
        },
        Some("fit") => Omega::Fitted,
        Some(x) => match x.parse::<f64>() {
            Ok(v) if v > 0.0 && v.is_finite() => Omega::Fixed(v),
            _ => {
                return Err(InputError(format!(
                    "--omega {x}: give a positive number or `fit`"
                )));
            }
        },
    })
}

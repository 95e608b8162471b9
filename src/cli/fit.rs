//! `kiln fit`: finite-size-scaling extrapolation of energy per spin, per (model, algorithm, ε),
//! from an experiment's `cells.parquet`. Writes `extrapolation.parquet`, `differences.parquet`
//! (paired bootstrap differences between algorithms) and `extrapolation.tex` (booktabs).

use super::{InputError, out};
use crate::fit::{self, Omega, Params, format::with_error};
use crate::store::{fits, write_atomic};
use anyhow::Context;
use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct FitArgs {
    /// Experiment spec, or a results folder holding cells.parquet. Default: the built-in
    /// default experiment.
    pub spec: Option<PathBuf>,
    /// Results folder (where results/<experiment>/cells.parquet is).
    #[arg(long, value_name = "DIR", default_value = "results")]
    pub results: PathBuf,
    /// Correction exponent: a number, or `fit` to fit it. Default: the spec's `[fit] omega`,
    /// else 2/3 (SK, Boettcher 2005).
    #[arg(long, value_name = "X|fit")]
    pub omega: Option<String>,
    /// Correction terms: 1 (a n^-ω) or 2 (adds b n^-2ω). Default: `[fit] terms`, else 1.
    #[arg(long)]
    pub terms: Option<usize>,
    /// Drop sizes below N. Default: `[fit] min_n`, else none.
    #[arg(long, value_name = "N")]
    pub min_n: Option<u64>,
    /// Drop sizes above N (to see what the fit would say without the largest sizes, on the
    /// same seeds). Default: none.
    #[arg(long, value_name = "N")]
    pub max_n: Option<u64>,
    /// Bootstrap replicates over instance seeds (0 to skip). Default: `[fit] bootstrap`,
    /// else 1000.
    #[arg(long, value_name = "B")]
    pub bootstrap: Option<usize>,
    /// Cache folder: where `kiln theory` and `kiln plot` stored the model's Parisi value and
    /// algorithmic threshold, printed beside the fits when present (fit never solves them).
    /// Default: `<results>/.cache`.
    #[arg(long, value_name = "DIR")]
    pub cache: Option<PathBuf>,
    /// Print a JSON summary instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// The cube model's stored theory values (best Parisi bound with its solution, algorithmic
/// threshold), as the figures draw them; nothing for other families or with a field.
fn stored_theory(
    model: Option<&crate::model::ModelSpec>,
    cache: &std::path::Path,
) -> anyhow::Result<crate::theory::cached::Stored> {
    let Some((m, xi)) = model.and_then(|m| Some(m).zip(m.mixture())) else {
        return Ok((None, None));
    };
    if !m.family.spins() || m.field != 0.0 {
        return Ok((None, None));
    }
    let store = crate::store::cache::Cache::new(cache);
    Ok(crate::theory::cached::stored(&store, xi)?)
}

fn theory_text(parisi: &Option<(f64, String)>, alg: Option<f64>, has_model: bool) -> String {
    match (parisi, alg) {
        (Some((v, which)), alg) => {
            let mut s = format!("theory (from the cache): Parisi value {v:.7} ({which})");
            if let Some(a) = alg.filter(|a| v - a > 1e-5) {
                s += &format!(", algorithmic threshold {a:.7}");
            }
            s + "\n"
        }
        (None, _) if has_model => {
            "theory: not in the cache yet (`kiln theory <spec>` or `kiln plot` computes and stores it)\n".into()
        }
        _ => String::new(),
    }
}

pub fn run(a: &FitArgs) -> anyhow::Result<ExitCode> {
    let exp = super::cells::Experiment::resolve(a.spec.as_ref(), &a.results)?;
    let (name, dir, settings) = (exp.name.clone(), exp.dir.clone(), exp.fit.clone());
    let terms = a.terms.or(settings.terms).unwrap_or(1);
    let min_n = a.min_n.or(settings.min_n).unwrap_or(0);
    let bootstrap = a.bootstrap.or(settings.bootstrap).unwrap_or(1000);
    let table_path = exp.table()?;
    let omega = super::cells::omega(a.omega.as_deref(), settings.omega)?;
    if !(1..=2).contains(&terms) {
        return Err(InputError(format!("--terms {terms}: give 1 or 2")).into());
    }
    let params = Params {
        omega,
        terms,
        ..Params::default()
    };

    let cache = a.cache.clone().unwrap_or_else(|| a.results.join(".cache"));
    let (parisi, alg) = stored_theory(exp.model.as_ref(), &cache)?;
    let cube_model = exp
        .model
        .as_ref()
        .is_some_and(|m| m.family.spins() && m.mixture().is_some() && m.field == 0.0);
    let cells = crate::store::table::Cells::read(&table_path)?;
    let sizes = min_n..=a.max_n.unwrap_or(u64::MAX);
    let study = fit::study::extrapolate(&cells, &params, sizes, settings.reference_only, bootstrap);
    let (rows, diffs, problems) = (&study.rows, &study.differences, &study.problems);
    // The threshold view of a constraint family swept over densities.
    let solved = fit::study::solved(&cells);
    if rows.is_empty() && !solved.is_empty() {
        // No size series to extrapolate (one size, say), but the threshold view stands alone.
        if a.json {
            let v = serde_json::json!({
                "experiment": name, "solved": solved_json(&solved), "fits": [],
                "differences": [], "problems": problems,
            });
            out(&format!("{v}\n"));
        } else {
            let mut s = solved_text(&solved);
            s += &format!("no extrapolation: {}\n", problems.join("; "));
            out(&s);
        }
        return Ok(ExitCode::SUCCESS);
    }
    if rows.is_empty() {
        return Err(InputError(format!(
            "nothing to fit in {}: {}",
            table_path.display(),
            problems.join("; ")
        ))
        .into());
    }

    // Outputs.
    let ext_path = dir.join("extrapolation.parquet");
    fits::write_extrapolation(&ext_path, rows, params.omega == Omega::Fitted)?;
    let diff_path = dir.join("differences.parquet");
    fits::write_differences(&diff_path, diffs)?;
    let tex_path = dir.join("extrapolation.tex");
    write_atomic(
        &tex_path,
        fit::latex::latex(&name, rows, &params).as_bytes(),
    )
    .context("writing the LaTeX table")?;

    if a.json {
        let v = serde_json::json!({
            "experiment": name,
            "solved": solved_json(&solved),
            "fits": rows.iter().map(|r| serde_json::json!({
                "family": r.family, "couplings": r.couplings, "algorithm": r.algorithm,
                "epsilon": r.epsilon, "sizes": r.sizes, "e_inf": r.fit.e_inf,
                "e_inf_se": r.fit.e_inf_se, "e_inf_se_bootstrap": r.boot_se,
                "a": r.fit.a, "omega": r.fit.omega, "omega_se": r.fit.omega_se,
                "chi2": r.fit.chi2, "dof": r.fit.dof,
                "e_inf_drop_smallest": r.drop.as_ref().map(|d| d.e_inf),
                "warnings": r.fit.warnings,
            })).collect::<Vec<_>>(),
            "differences": diffs.iter().map(|d| serde_json::json!({
                "epsilon": d.epsilon, "a": d.a, "b": d.b, "difference": d.difference,
                "se_bootstrap": d.se,
            })).collect::<Vec<_>>(),
            "problems": problems,
            "theory": serde_json::json!({
                "parisi": parisi.as_ref().map(|p| p.0),
                "parisi_solution": parisi.as_ref().map(|p| p.1.clone()),
                "algorithmic": alg,
            }),
            "extrapolation": ext_path.display().to_string(),
            "latex": tex_path.display().to_string(),
        });
        out(&format!("{v}\n"));
    } else {
        // A sweep over densities fits each density apart: name the model on each row.
        let models = rows.iter().any(|r| r.family != rows[0].family);
        let mut s = String::new();
        if models {
            s += &format!("{:<16} ", "model");
        }
        s += &format!(
            "{:<14} {:>6} {:>5}  {:<16} {:<14} {:<12} {:>9}  {:<14}\n",
            "algorithm", "ε", "sizes", "e∞ (fit)", "e∞ (boot se)", "ω", "χ²/dof", "drop smallest"
        );
        for r in rows {
            if models {
                s += &format!("{:<16} ", r.family);
            }
            let omega = if params.omega == Omega::Fitted {
                with_error(r.fit.omega, r.fit.omega_se)
            } else {
                format!("{:.4} fixed", r.fit.omega)
            };
            s += &format!(
                "{:<14} {:>6} {:>5}  {:<16} {:<14} {:<12} {:>9}  {:<14}\n",
                r.algorithm,
                r.epsilon,
                r.sizes,
                with_error(r.fit.e_inf, r.fit.e_inf_se),
                r.boot_se.map_or("-".into(), |b| format!("{b:.2e}")),
                omega,
                if r.fit.dof > 0 {
                    format!("{:.2}", r.fit.chi2 / r.fit.dof as f64)
                } else {
                    "-".into()
                },
                r.drop
                    .as_ref()
                    .map_or("-".into(), |d| with_error(d.e_inf, d.e_inf_se)),
            );
        }
        if !solved.is_empty() {
            s += "\n";
            s += &solved_text(&solved);
            s += "\n";
        }
        s += &theory_text(&parisi, alg, cube_model);
        for d in diffs {
            s += &format!(
                "difference {} − {} at ε = {}: {}\n",
                d.a,
                d.b,
                d.epsilon,
                with_error(d.difference, d.se)
            );
        }
        s += &format!(
            "wrote {}, {}, {}\n",
            ext_path.display(),
            diff_path.display(),
            tex_path.display()
        );
        out(&s);
        for r in rows {
            for w in &r.fit.warnings {
                eprintln!("warning: {} at ε = {}: {w}", r.algorithm, r.epsilon);
            }
        }
    }
    for p in problems {
        eprintln!("not fitted: {p}");
    }
    Ok(ExitCode::SUCCESS)
}

/// The threshold view on screen: per algorithm, density and n, the instances solved.
fn solved_text(solved: &[fit::study::Solved]) -> String {
    let mut s = format!(
        "fraction of instances solved at ε = 0 (± binomial se):\n{:<14} {:>8} {:>8} {:>9}  {:<14}\n",
        "algorithm", "α", "n", "solved", "fraction"
    );
    for r in solved {
        let (p, se) = r.fraction();
        s += &format!(
            "{:<14} {:>8} {:>8} {:>9}  {p:.3} ± {se:.3}\n",
            r.algorithm,
            r.density,
            r.n,
            format!("{}/{}", r.solved, r.formulas)
        );
    }
    s
}

/// The threshold view as JSON rows.
fn solved_json(solved: &[fit::study::Solved]) -> Vec<serde_json::Value> {
    solved
        .iter()
        .map(|r| {
            let (p, se) = r.fraction();
            serde_json::json!({"algorithm": r.algorithm, "n": r.n, "density": r.density,
                "solved": r.solved, "formulas": r.formulas, "fraction": p, "fraction_se": se})
        })
        .collect()
}

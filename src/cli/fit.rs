//! `kiln fit`: finite-size-scaling extrapolation of energy per spin, per (model, algorithm, ε),
//! from an experiment's `cells.parquet`. Writes `extrapolation.parquet`, `differences.parquet`
//! (paired bootstrap differences between algorithms) and `extrapolation.tex` (booktabs).

use super::{InputError, out};
use crate::cell::Canon;
use crate::fit::{self, Fit, Omega, Params, Point, format::with_error};
use crate::rng::{Purpose, stream};
use crate::store::write_atomic;
use anyhow::Context;
use clap::Args;
use polars::prelude::*;
use std::collections::BTreeMap;
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
    /// Bootstrap replicates over instance seeds (0 to skip). Default: `[fit] bootstrap`,
    /// else 1000.
    #[arg(long, value_name = "B")]
    pub bootstrap: Option<usize>,
    /// Print a JSON summary instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// (family, couplings, ε bits) → algorithm label → (n → seed → energy).
type Groups = BTreeMap<(String, String, u64), BTreeMap<String, BTreeMap<u64, BTreeMap<u64, f64>>>>;

struct Row {
    family: String,
    couplings: String,
    epsilon: f64,
    algorithm: String,
    sizes: usize,
    min_n: u64,
    max_n: u64,
    fit: Fit,
    boot_se: Option<f64>,
    drop: Option<Fit>,
}

fn points_of(by_n: &BTreeMap<u64, BTreeMap<u64, f64>>) -> Vec<Point> {
    let samples: Vec<(u64, f64)> = by_n
        .iter()
        .flat_map(|(&n, seeds)| seeds.values().map(move |&e| (n, e)))
        .collect();
    fit::points(&samples)
}

pub fn run(a: &FitArgs) -> anyhow::Result<ExitCode> {
    let exp = super::cells::Experiment::resolve(a.spec.as_ref(), &a.results)?;
    let (name, dir, settings) = (exp.name.clone(), exp.dir.clone(), exp.fit.clone());
    let terms = a.terms.or(settings.terms).unwrap_or(1);
    let min_n = a.min_n.or(settings.min_n).unwrap_or(0);
    let bootstrap = a.bootstrap.or(settings.bootstrap).unwrap_or(1000);
    let table_path = exp.table()?;
    let omega = match a.omega.as_deref() {
        None => match settings.omega {
            Some(None) => Omega::Fitted,
            Some(Some(x)) => Omega::Fixed(x),
            None => Omega::Fixed(2.0 / 3.0),
        },
        Some("fit") => Omega::Fitted,
        Some(x) => match x.parse::<f64>() {
            Ok(v) if v > 0.0 && v.is_finite() => Omega::Fixed(v),
            _ => {
                return Err(
                    InputError(format!("--omega {x}: give a positive number or `fit`")).into(),
                );
            }
        },
    };
    if !(1..=2).contains(&terms) {
        return Err(InputError(format!("--terms {terms}: give 1 or 2")).into());
    }
    let params = Params {
        omega,
        terms,
        ..Params::default()
    };

    let cells = super::cells::Cells::read(&table_path)?;
    let (fam, coup, alg) = (&cells.family, &cells.couplings, &cells.algorithm);
    let (ns, seeds, eps) = (&cells.n, &cells.seed, &cells.epsilon);
    let energy = &cells.energy_perturbed;
    let mut groups: Groups = BTreeMap::new();
    for i in 0..cells.len() {
        if ns[i] < min_n || (settings.reference_only && eps[i] != 0.0) {
            continue;
        }
        groups
            .entry((fam[i].clone(), coup[i].clone(), eps[i].to_bits()))
            .or_default()
            .entry(alg[i].clone())
            .or_default()
            .entry(ns[i])
            .or_default()
            .insert(seeds[i], energy[i]);
    }

    let mut rows: Vec<Row> = Vec::new();
    let mut diffs: Vec<(String, String, f64, String, String, f64, f64)> = Vec::new();
    let mut problems: Vec<String> = Vec::new();
    for ((family, couplings, eps_bits), algs) in &groups {
        let epsilon = f64::from_bits(*eps_bits);
        let mut fits: BTreeMap<&String, Fit> = BTreeMap::new();
        for (label, by_n) in algs {
            let pts = points_of(by_n);
            match fit::fit(&pts, &params) {
                Ok(f) => {
                    let drop = (pts.len() > 1)
                        .then(|| fit::fit(&pts[1..], &params).ok())
                        .flatten();
                    fits.insert(label, f.clone());
                    rows.push(Row {
                        family: family.clone(),
                        couplings: couplings.clone(),
                        epsilon,
                        algorithm: label.clone(),
                        sizes: pts.len(),
                        min_n: pts.first().map_or(0, |p| p.n as u64),
                        max_n: pts.last().map_or(0, |p| p.n as u64),
                        fit: f,
                        boot_se: None,
                        drop,
                    });
                }
                Err(e) => problems.push(format!("{family}/{label}/ε={epsilon}: {e}")),
            }
        }
        if bootstrap == 0 || fits.is_empty() {
            continue;
        }
        // Paired bootstrap: one draw of seeds per size, shared by all algorithms of the group.
        let id = Canon::map()
            .with("family", family.as_str())
            .with("couplings", couplings.as_str())
            .with("epsilon", epsilon)
            .hash("bootstrap");
        let labels: Vec<&String> = fits.keys().copied().collect();
        let mut reps: BTreeMap<&String, Vec<f64>> = BTreeMap::new();
        // Per size, the seeds of the group (from its first algorithm), and each algorithm's
        // original points: fixed across replicates, so computed once.
        let seeds_by_n: Vec<(u64, Vec<u64>)> = labels
            .iter()
            .flat_map(|l| algs[*l].keys().copied())
            .collect::<std::collections::BTreeSet<u64>>()
            .into_iter()
            .filter_map(|n| {
                let seeds: Vec<u64> = algs[labels[0]].get(&n)?.keys().copied().collect();
                (!seeds.is_empty()).then_some((n, seeds))
            })
            .collect();
        let originals: Vec<Vec<Point>> = labels.iter().map(|l| points_of(&algs[*l])).collect();
        for b in 0..bootstrap {
            let mut rng = stream(&id, Purpose::Bootstrap, b as u64);
            // Per size: the group's seeds resampled with replacement.
            let draw: BTreeMap<u64, Vec<u64>> = seeds_by_n
                .iter()
                .map(|(n, seeds)| {
                    let d = (0..seeds.len())
                        .map(|_| seeds[rng.below(seeds.len() as u64) as usize])
                        .collect();
                    (*n, d)
                })
                .collect();
            for (&l, original) in labels.iter().zip(&originals) {
                let pts: Vec<Point> = original
                    .iter()
                    .filter_map(|p| {
                        let n = p.n as u64;
                        let m = algs[l].get(&n)?;
                        let d = draw.get(&n)?;
                        let xs: Vec<f64> = d.iter().filter_map(|s| m.get(s).copied()).collect();
                        (!xs.is_empty()).then(|| Point {
                            mean: xs.iter().sum::<f64>() / xs.len() as f64,
                            ..p.clone()
                        })
                    })
                    .collect();
                if let Ok(f) = fit::fit(&pts, &params) {
                    reps.entry(l).or_default().push(f.e_inf);
                }
            }
        }
        let sd = |xs: &[f64]| {
            let m = xs.iter().sum::<f64>() / xs.len() as f64;
            (xs.iter().map(|x| (x - m) * (x - m)).sum::<f64>() / (xs.len() as f64 - 1.0)).sqrt()
        };
        for r in rows.iter_mut().filter(|r| {
            r.family == *family && r.couplings == *couplings && r.epsilon.to_bits() == *eps_bits
        }) {
            if let Some(v) = reps.get(&r.algorithm)
                && v.len() > 1
            {
                r.boot_se = Some(sd(v));
            }
        }
        for i in 0..labels.len() {
            for j in i + 1..labels.len() {
                let (x, y) = (&reps.get(labels[i]), &reps.get(labels[j]));
                if let (Some(x), Some(y)) = (x, y)
                    && x.len() == y.len()
                    && x.len() > 1
                {
                    let d: Vec<f64> = x.iter().zip(y.iter()).map(|(p, q)| p - q).collect();
                    diffs.push((
                        family.clone(),
                        couplings.clone(),
                        epsilon,
                        labels[i].clone(),
                        labels[j].clone(),
                        fits[labels[i]].e_inf - fits[labels[j]].e_inf,
                        sd(&d),
                    ));
                }
            }
        }
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
    let mut ext = df![
        "family" => rows.iter().map(|r| r.family.clone()).collect::<Vec<_>>(),
        "couplings" => rows.iter().map(|r| r.couplings.clone()).collect::<Vec<_>>(),
        "algorithm" => rows.iter().map(|r| r.algorithm.clone()).collect::<Vec<_>>(),
        "epsilon" => rows.iter().map(|r| r.epsilon).collect::<Vec<_>>(),
        "sizes" => rows.iter().map(|r| r.sizes as u64).collect::<Vec<_>>(),
        "min_n" => rows.iter().map(|r| r.min_n).collect::<Vec<_>>(),
        "max_n" => rows.iter().map(|r| r.max_n).collect::<Vec<_>>(),
        "e_inf" => rows.iter().map(|r| r.fit.e_inf).collect::<Vec<_>>(),
        "e_inf_se" => rows.iter().map(|r| r.fit.e_inf_se).collect::<Vec<_>>(),
        "e_inf_se_bootstrap" => rows.iter().map(|r| r.boot_se).collect::<Vec<_>>(),
        "a" => rows.iter().map(|r| r.fit.a).collect::<Vec<_>>(),
        "a_se" => rows.iter().map(|r| r.fit.a_se).collect::<Vec<_>>(),
        "b" => rows.iter().map(|r| r.fit.b.map(|b| b.0)).collect::<Vec<_>>(),
        "b_se" => rows.iter().map(|r| r.fit.b.map(|b| b.1)).collect::<Vec<_>>(),
        "omega" => rows.iter().map(|r| r.fit.omega).collect::<Vec<_>>(),
        "omega_se" => rows.iter().map(|r| r.fit.omega_se).collect::<Vec<_>>(),
        "omega_fitted" => rows.iter().map(|_| params.omega == Omega::Fitted).collect::<Vec<_>>(),
        "chi2" => rows.iter().map(|r| r.fit.chi2).collect::<Vec<_>>(),
        "dof" => rows.iter().map(|r| r.fit.dof as u64).collect::<Vec<_>>(),
        "e_inf_drop_smallest" => rows.iter().map(|r| r.drop.as_ref().map(|d| d.e_inf)).collect::<Vec<_>>(),
        "drop_shift_sigma" => rows.iter().map(|r| r.drop.as_ref().map(|d| (r.fit.e_inf - d.e_inf).abs() / d.e_inf_se.max(f64::MIN_POSITIVE))).collect::<Vec<_>>(),
        "warnings" => rows.iter().map(|r| r.fit.warnings.join("; ")).collect::<Vec<_>>(),
    ]?;
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf).finish(&mut ext)?;
    let ext_path = dir.join("extrapolation.parquet");
    write_atomic(&ext_path, &buf)?;
    let mut dd = df![
        "family" => diffs.iter().map(|d| d.0.clone()).collect::<Vec<_>>(),
        "couplings" => diffs.iter().map(|d| d.1.clone()).collect::<Vec<_>>(),
        "epsilon" => diffs.iter().map(|d| d.2).collect::<Vec<_>>(),
        "algorithm_a" => diffs.iter().map(|d| d.3.clone()).collect::<Vec<_>>(),
        "algorithm_b" => diffs.iter().map(|d| d.4.clone()).collect::<Vec<_>>(),
        "e_inf_difference" => diffs.iter().map(|d| d.5).collect::<Vec<_>>(),
        "difference_se_bootstrap" => diffs.iter().map(|d| d.6).collect::<Vec<_>>(),
    ]?;
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf).finish(&mut dd)?;
    let diff_path = dir.join("differences.parquet");
    write_atomic(&diff_path, &buf)?;
    let tex_path = dir.join("extrapolation.tex");
    write_atomic(&tex_path, latex(&name, &rows, &params).as_bytes())
        .context("writing the LaTeX table")?;

    if a.json {
        let v = serde_json::json!({
            "experiment": name,
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
                "epsilon": d.2, "a": d.3, "b": d.4, "difference": d.5, "se_bootstrap": d.6,
            })).collect::<Vec<_>>(),
            "problems": problems,
            "extrapolation": ext_path.display().to_string(),
            "latex": tex_path.display().to_string(),
        });
        out(&format!("{v}\n"));
    } else {
        let mut s = format!(
            "{:<14} {:>6} {:>5}  {:<16} {:<14} {:<12} {:>9}  {:<14}\n",
            "algorithm", "ε", "sizes", "e∞ (fit)", "e∞ (boot se)", "ω", "χ²/dof", "drop smallest"
        );
        for r in &rows {
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
        for d in &diffs {
            s += &format!(
                "difference {} − {} at ε = {}: {}\n",
                d.3,
                d.4,
                d.2,
                with_error(d.5, d.6)
            );
        }
        s += &format!(
            "wrote {}, {}, {}\n",
            ext_path.display(),
            diff_path.display(),
            tex_path.display()
        );
        out(&s);
        for r in &rows {
            for w in &r.fit.warnings {
                eprintln!("warning: {} at ε = {}: {w}", r.algorithm, r.epsilon);
            }
        }
    }
    for p in &problems {
        eprintln!("not fitted: {p}");
    }
    Ok(ExitCode::SUCCESS)
}

fn latex(name: &str, rows: &[Row], params: &Params) -> String {
    let mut s = String::new();
    s += "% kiln fit: finite-size-scaling extrapolation (needs \\usepackage{booktabs})\n";
    s += "\\begin{table}\n\\centering\n\\begin{tabular}{llrlll}\n\\toprule\n";
    s += "algorithm & $\\varepsilon$ & sizes & $e_\\infty$ & $a$ & $\\omega$ \\\\\n\\midrule\n";
    for r in rows {
        let omega = if params.omega == Omega::Fitted {
            with_error(r.fit.omega, r.fit.omega_se)
        } else {
            format!("{:.4}", r.fit.omega)
        };
        s += &format!(
            "{} & {} & {} & {} & {} & {} \\\\\n",
            r.algorithm.replace('_', "\\_").replace('&', "\\&"),
            r.epsilon,
            r.sizes,
            with_error(r.fit.e_inf, r.fit.e_inf_se),
            with_error(r.fit.a, r.fit.a_se),
            omega
        );
    }
    s += "\\bottomrule\n\\end{tabular}\n";
    s += &format!(
        "\\caption{{Energy per spin extrapolated to $n\\to\\infty$ with $e(n) = e_\\infty + a\\,n^{{-\\omega}}$, weighted least squares over the per-size means; 1$\\sigma$ errors in parentheses. Experiment \\texttt{{{}}}.}}\n",
        name.replace('_', "\\_")
    );
    s += "\\end{table}\n";
    s
}

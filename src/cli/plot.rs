//! `kiln plot`: publication figures from an experiment's table, each in SVG, PNG (300 dpi)
//! and PDF, each with a CSV sidecar holding exactly the data drawn and the spec hash.
//!
//! Figures: `energy-<family>-<couplings>` (energy per spin against n^{-ω} at ε = 0, per
//! algorithm, with the fitted line, its 1σ band, the extrapolated point at n = ∞, and the
//! reference value of the model) and `stability-<algorithm>` (mean distance against ε on
//! log–log axes, one curve per n, with fitted slopes).

use super::{InputError, out};
use crate::fit::{self, Omega, Params};
use crate::plot::figures::{self, EnergyFigure, EnergySeries, StabilityFigure, StabilitySeries};
use crate::plot::{self as kplot, Size};
use crate::store::write_atomic;
use clap::Args;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct PlotArgs {
    /// Experiment spec, or a results folder holding cells.parquet. Default: the built-in
    /// default experiment.
    pub spec: Option<PathBuf>,
    /// Results folder (where results/<experiment>/cells.parquet is).
    #[arg(long, value_name = "DIR", default_value = "results")]
    pub results: PathBuf,
    /// Correction exponent of the energy figures' fits: a number, or `fit` to fit it per series
    /// (the x axis then uses the median fitted ω). Default: the spec's `[fit] omega`, else 2/3,
    /// so the figure draws the fit `kiln fit` reports (with the spec's `terms` and `min_n`).
    #[arg(long, value_name = "X|fit")]
    pub omega: Option<String>,
    /// Cache folder (theory solutions are cached under `<cache>/theory`). Default:
    /// `<results>/.cache`.
    #[arg(long, value_name = "DIR")]
    pub cache: Option<PathBuf>,
    /// Figure width: `one` column (3.4 in) or `two` columns (7 in).
    #[arg(long, value_name = "one|two", default_value = "one")]
    pub width: String,
    /// Print the written files as JSON.
    #[arg(long)]
    pub json: bool,
}

/// q-intervals of the spherical ground-state solver used for figures and `kiln theory`.
pub const SPHERE_INTERVALS: usize = 64;

/// The large-density asymptote of MAX-k-SAT on a k-SAT energy figure (group `ksat α=…`),
/// where it is below 0 (√α > c_k); an asymptote in α, and the caption says so.
fn ksat_line(
    model: Option<&crate::model::ModelSpec>,
    group: &str,
    cache: &Path,
) -> anyhow::Result<Vec<(f64, String, String)>> {
    let Some(f) = model.and_then(|m| {
        m.family
            .as_any()
            .downcast_ref::<crate::model::families::ksat::Ksat>()
    }) else {
        return Ok(vec![]);
    };
    let Some(("ksat", alpha)) = crate::store::table::density_of(group) else {
        return Ok(vec![]);
    };
    let k = f.k as u32;
    let store = crate::store::cache::Cache::new(cache);
    let (c, how) = crate::theory::ksat::parisi_value(&store, k, crate::theory::ksat::MAX_STEPS)?;
    let e = crate::theory::ksat::asymptote(k, alpha, c);
    if e >= 0.0 {
        return Ok(vec![]);
    }
    Ok(vec![(
        e,
        format!("large-α asymptote: {e:.4}"),
        format!(
            "Dashed: the large-density asymptote −(α − √α·c_k)/2^k = {e:.6} of MAX-{k}-SAT at α = {alpha}, c_{k} = {c:.6} the zero-temperature Parisi value of ξ_k(q) = (1 + q)^k − 1 computed by kiln ({how}; Panchenko 2018, arXiv:1608.06256): a limit as α → ∞ with o(√α) corrections, not a finite-α value."
        ),
    )])
}

/// The perceptron's capacity as a vertical line on its threshold figure, with its caption
/// sentence: Gardner's α_c(κ) on the sphere at κ ≥ 0, the RS zero-entropy capacity on the
/// cube (see [`crate::theory::perceptron`]); None for other models.
fn capacity_line(model: Option<&crate::model::ModelSpec>) -> Option<(f64, String, String)> {
    let p = model?
        .family
        .as_any()
        .downcast_ref::<crate::model::families::perceptron::Perceptron>()?;
    let (k, sphere) = (p.margin, p.domain == crate::model::Domain::Sphere);
    let a = crate::theory::perceptron::capacity(sphere, k)?;
    let source = if sphere {
        format!(
            "the capacity α = 1/E[(Z + κ)²; Z ≥ −κ] = {a:.6} of the spherical perceptron at κ = {k}, Z standard normal (Gardner 1988, J. Phys. A 21, 257)"
        )
    } else {
        format!(
            "the capacity α = {a:.6} of the binary perceptron at κ = {k}, where the replica-symmetric entropy of solutions vanishes (Gardner & Derrida 1988; Krauth & Mézard 1989)"
        )
    };
    let tail = if sphere {
        ""
    } else {
        "; finite-n curves cross above it"
    };
    Some((
        a,
        format!("capacity α = {a:.4}"),
        format!(" Dashed: {source}, computed by kiln{tail}."),
    ))
}

/// Theory lines for a model (value, legend, caption text), computed by kiln itself: on the
/// cube (and SK) the Parisi value and, where it lies below, the algorithmic threshold; on the sphere the ground state and the algorithmic
/// value. Graph and lattice families have no line.
fn reference_lines(
    model: Option<&crate::model::ModelSpec>,
    cache: &Path,
    gibbs_betas: &[f64],
) -> anyhow::Result<Vec<(f64, String, String)>> {
    let Some((m, xi)) = model.and_then(|m| Some(m).zip(m.mixture())) else {
        return Ok(vec![]);
    };
    Ok(if m.family.spins() {
        let store = crate::store::cache::Cache::new(cache);
        let mut gibbs = Vec::new();
        let h = m.field;
        let with_field = if h != 0.0 {
            format!(" with field h = {h}")
        } else {
            String::new()
        };
        for &beta in gibbs_betas {
            let (_, e) = crate::theory::cached::at_temperature(&store, xi, beta, h)?;
            gibbs.push((
                e,
                format!("Gibbs energy at β = {beta}: {e:.4}"),
                format!(
                    "Gibbs mean energy per spin at β = {beta}{with_field}: {e:.6}, dP/dβ of kiln's Parisi free energy at β (the samplers' target; Talagrand 2006, Panchenko 2013)."
                ),
            ));
        }
        if h != 0.0 {
            // kiln's zero-temperature values are for the model without a field.
            return Ok(gibbs);
        }
        let (value, which) = crate::theory::cached::parisi_best(&store, xi)?;
        let mut caption = format!(
            "Parisi value {value:.6} computed by kiln: the least of its full-RSB (free breakpoints) and 1- and 2-step RSB minima of the Auffinger–Chen functional (arXiv:1606.05335), attained by {which}."
        );
        if *xi == crate::theory::Mixture::sk() {
            caption += " Published: 0.7631667 (Crisanti & Rizzo, Phys. Rev. E 65, 046137 (2002)).";
        }
        let (alg, _) = crate::theory::cached::algorithmic(&store, xi)?;
        let mut lines = vec![];
        // Below 1e-5 the two lines would print on top of each other: the caption says so.
        if value - alg.value > 1e-5 {
            lines.push((
                alg.value,
                format!("algorithmic {:.5}", alg.value),
                format!(
                    "Algorithmic threshold {:.6} computed by kiln: the infimum of the same functional over γ positive but not necessarily monotone (El Alaoui, Montanari & Sellke, arXiv:2001.00904; Huang & Sellke, arXiv:2110.07847).",
                    alg.value
                ),
            ));
        } else {
            caption += &format!(
                " kiln's algorithmic threshold (the infimum over non-monotone γ) is {:.6}, within 1e-5 of it.",
                alg.value
            );
        }
        lines.insert(0, (value, format!("Parisi value {value:.5}"), caption));
        lines.extend(gibbs);
        lines
    } else {
        {
            let full = crate::theory::sphere::ground_state_full(xi, SPHERE_INTERVALS);
            let gs = full.value;
            let (alg, equal) = crate::theory::sphere::algorithmic(xi);
            let mut v = vec![(
                gs,
                format!("ground state {gs:.4}"),
                format!(
                    "Ground state {gs:.6} from kiln's zero-temperature Crisanti–Sommers solution over step order parameters on {SPHERE_INTERVALS} q-intervals ({}; Crisanti & Sommers 1992; Chen & Sen 2017).",
                    full.structure()
                ),
            )];
            if !equal || (alg - gs).abs() > 1e-6 {
                v.push((
                    alg,
                    format!("algorithmic {alg:.4}"),
                    format!("Algorithmic value ∫₀¹ √ξ''(q) dq = {alg:.6} computed by kiln (Subag, arXiv:1812.04588)."),
                ));
            }
            for &beta in gibbs_betas {
                if let Some(e) = crate::theory::sphere::gibbs_energy_pure2(xi, beta) {
                    v.push((
                        e,
                        format!("Gibbs energy at β = {beta}: {e:.4}"),
                        format!(
                            "Gibbs mean energy per spin at β = {beta}: {e:.6}, the closed form of spherical SK (Kosterlitz, Thouless & Jones 1976)."
                        ),
                    ));
                }
            }
            v
        }
    })
}

/// A sampler's Parisi order parameter at its β: β, q_max and the corners (q, x) of the step
/// graph of x(q) on [0, 1].
struct OrderParameter {
    beta: f64,
    q_max: f64,
    corners: Vec<(f64, f64)>,
}

/// The corners of the step graph of x(q) = m[j] on [q[j], q[j+1]), x = 1 from q_max on.
fn order_parameter_corners(sol: &crate::theory::full::FullRsb) -> Vec<(f64, f64)> {
    let mut v = vec![(0.0, 0.0)];
    for (j, &m) in sol.m.iter().enumerate() {
        let m = m.clamp(0.0, 1.0);
        v.push((sol.q[j], m));
        v.push((sol.q[j + 1].min(1.0), m));
        if m >= 1.0 - 1e-6 {
            break;
        }
    }
    v.push((1.0, 1.0));
    v
}

/// What kiln's theory says at a sampler's β: the Gibbs mean energy per spin E(β) and, on the
/// cube, the Parisi order parameter.
struct SamplerTheory {
    beta: f64,
    energy: f64,
    order: Option<OrderParameter>,
}

/// For each sampler with a theory line: on a cube model `theory --beta`'s cached solution
/// (E = dP/dβ and the order parameter), on spherical SK the closed-form E(β); none elsewhere.
fn sampler_theory(
    model: Option<&crate::model::ModelSpec>,
    cache: &Path,
    samplers: &BTreeMap<String, f64>,
) -> anyhow::Result<BTreeMap<String, SamplerTheory>> {
    let Some((m, xi)) = model.and_then(|m| Some(m).zip(m.mixture())) else {
        return Ok(BTreeMap::new());
    };
    let store = crate::store::cache::Cache::new(cache);
    let mut out = BTreeMap::new();
    for (label, &beta) in samplers {
        let theory = if m.family.spins() {
            let (sol, energy) = crate::theory::cached::at_temperature(&store, xi, beta, m.field)?;
            Some(SamplerTheory {
                beta,
                energy,
                order: Some(OrderParameter {
                    beta,
                    q_max: crate::theory::full::largest_overlap(&sol),
                    corners: order_parameter_corners(&sol),
                }),
            })
        } else {
            crate::theory::sphere::gibbs_energy_pure2(xi, beta).map(|energy| SamplerTheory {
                beta,
                energy,
                order: None,
            })
        };
        if let Some(t) = theory {
            out.insert(label.clone(), t);
        }
    }
    Ok(out)
}

/// `traces-<algorithm>`: the energy trace of one instance per n (the smallest seed, replica
/// 0), against sweeps on a log axis; for samplers on the cube, a dashed line at E(β).
fn trace_figures(
    path: &Path,
    figdir: &Path,
    size: Size,
    name: &str,
    spec_hash: &str,
    theory: &BTreeMap<String, SamplerTheory>,
) -> anyhow::Result<Vec<PathBuf>> {
    let df = crate::store::table::read(path)?;
    let (algs, units) = (col_str(&df, "algorithm")?, col_str(&df, "time_unit")?);
    let (ns, seeds, ends) = (
        col_u64(&df, "n")?,
        col_u64(&df, "seed")?,
        col_u64(&df, "time_end")?,
    );
    let reps: Vec<u32> = df
        .column("replica")?
        .u32()?
        .iter()
        .map(|x| x.unwrap_or(0))
        .collect();
    let es = col_f64(&df, "energy")?;
    // algorithm → n → (seed, points) of the smallest seed's replica 0.
    type Traces = BTreeMap<u64, (u64, Vec<(f64, f64)>)>;
    let mut by: BTreeMap<String, Traces> = BTreeMap::new();
    let mut unit_of: BTreeMap<String, String> = BTreeMap::new();
    for i in 0..es.len() {
        if reps[i] != 0 {
            continue;
        }
        unit_of.insert(algs[i].clone(), units[i].clone());
        let slot = by
            .entry(algs[i].clone())
            .or_default()
            .entry(ns[i])
            .or_insert((seeds[i], Vec::new()));
        if seeds[i] < slot.0 {
            *slot = (seeds[i], Vec::new());
        }
        if seeds[i] == slot.0 {
            slot.1.push((ends[i] as f64, es[i]));
        }
    }
    let mut written = Vec::new();
    for (label, per_n) in &by {
        let unit = unit_of.get(label).map_or("sweep", |u| u.as_str());
        let mut csv = format!(
            "# kiln figure data: energy traces, one instance per n; experiment={name}; spec_hash={spec_hash}; time_unit={unit}\nalgorithm,n,seed,time_end,energy\n"
        );
        let series = per_n
            .iter()
            .map(|(n, (seed, pts))| {
                for &(t, e) in pts {
                    csv += &csv_line(&[
                        label.clone(),
                        n.to_string(),
                        seed.to_string(),
                        format!("{t}"),
                        format!("{e:?}"),
                    ]);
                }
                figures::TraceSeries {
                    label: format!("n = {n}"),
                    points: pts.clone(),
                }
            })
            .collect();
        let block = per_n
            .values()
            .filter_map(|(_, p)| p.first().map(|x| x.0))
            .fold(0.0f64, f64::max);
        let mut caption = format!(
            "Energy per spin along one run of the sampler on one instance per n (the smallest seed, replica 0): means over blocks of consecutive {unit}s (at most {} blocks; up to {block} {unit}s per block), plotted at each block's end.",
            crate::algo::EnergyTrace::POINTS
        );
        let target = theory.get(label).map(|t| {
            let (beta, e) = (t.beta, t.energy);
            caption += &format!(
                " Dashed: the Gibbs mean energy per spin E(β) = {e:.4} at β = {beta} (kiln's theory: dP/dβ of the Parisi free energy on the cube, the closed form on spherical SK)."
            );
            csv = csv.replacen(
                "\nalgorithm,n,",
                &format!("; gibbs_energy={e:?}; beta={beta:?}\nalgorithm,n,"),
                1,
            );
            (e, format!("E(β = {beta}) = {e:.4}"))
        });
        let fig = figures::TraceFigure {
            title: label.clone(),
            unit: unit.to_string(),
            series,
            caption,
            target,
        };
        written.extend(write_all(
            &figdir.join(format!("traces-{}", file_safe(label))),
            size,
            &csv,
            &fig,
        )?);
    }
    Ok(written)
}

/// `overlaps-<algorithm>`: histograms of the pairwise replica overlaps, one outline per n;
/// for samplers on the cube, dashed lines at ±q_max of the Parisi order parameter at their β.
fn overlap_figures(
    path: &Path,
    figdir: &Path,
    size: Size,
    name: &str,
    spec_hash: &str,
    theory: &BTreeMap<String, SamplerTheory>,
    (symmetric, spins): (bool, bool),
) -> anyhow::Result<Vec<PathBuf>> {
    let df = crate::store::table::read(path)?;
    let (algs, ns) = (col_str(&df, "algorithm")?, col_u64(&df, "n")?);
    let (qs, sym) = (col_f64(&df, "overlap")?, col_f64(&df, "overlap_sym")?);
    let mut by: BTreeMap<String, BTreeMap<u64, Vec<f64>>> = BTreeMap::new();
    let mut by_sym: BTreeMap<String, BTreeMap<u64, Vec<f64>>> = BTreeMap::new();
    for i in 0..qs.len() {
        by.entry(algs[i].clone())
            .or_default()
            .entry(ns[i])
            .or_default()
            .push(qs[i]);
        by_sym
            .entry(algs[i].clone())
            .or_default()
            .entry(ns[i])
            .or_default()
            .push(sym[i]);
    }
    let mut written = Vec::new();
    for (label, per_n) in &by {
        let mut csv = format!(
            "# kiln figure data: replica overlap histograms; experiment={name}; spec_hash={spec_hash}\nkind,algorithm,n,q_lo,q_hi,value\n"
        );
        let series: Vec<figures::OverlapSeries> = per_n
            .iter()
            .map(|(n, v)| {
                // ±1 overlaps lie on the lattice 2k/n − 1; on the sphere they are continuous.
                let lattice = spins.then(|| 2.0 / *n as f64);
                let bins =
                    figures::histogram_width(v, figures::overlap_bin_width(v, lattice), lattice);
                for b in &bins {
                    csv += &csv_line(&[
                        "density".into(),
                        label.clone(),
                        n.to_string(),
                        format!("{:?}", b.0),
                        format!("{:?}", b.1),
                        format!("{:?}", b.2),
                    ]);
                }
                figures::OverlapSeries {
                    label: format!("n = {n} ({} pairs)", v.len()),
                    bins,
                }
            })
            .collect();
        let mut caption = "Histogram (density) of the overlaps σᵃ·σᵇ/n between independent runs of the algorithm on the same instance (replicas), pooled over instance seeds, one outline per n; bin width by the Freedman–Diaconis rule, for ±1 states rounded to whole lattice steps 2/n.".to_string();
        let theory = theory.get(label).and_then(|t| t.order.as_ref());
        let markers = theory.map(|o| {
            let (beta, q) = (o.beta, o.q_max);
            caption += &format!(
                " Dashed: ±q_max = ±{q:.4}, the largest overlap of kiln's Parisi order parameter x(q) at β = {beta} (the support of the limiting overlap distribution ends there; Talagrand 2006, Panchenko 2013)."
            );
            // In the header line, so the data rows stay one histogram bin each.
            csv = csv.replacen(
                "\nkind,algorithm,",
                &format!("; q_max={q:?}; q_max_beta={beta:?}\nkind,algorithm,"),
                1,
            );
            (vec![-q, q], format!("±q_max (Parisi, β = {beta})"))
        });
        let distribution = theory.map(|o| {
            let what = if symmetric { "|R|" } else { "R" };
            caption += &format!(
                " Right: the empirical distribution function of {what} per n (same colours) and, dashed, x(q) at β = {}: the distribution function of the limiting overlap{} (kiln's full-RSB solution, a step function).",
                o.beta,
                if symmetric {
                    " modulo the global flip"
                } else {
                    ""
                }
            );
            for (q, x) in &o.corners {
                csv += &csv_line(&[
                    "parisi_x".into(),
                    label.clone(),
                    "inf".into(),
                    format!("{q:?}"),
                    format!("{q:?}"),
                    format!("{x:?}"),
                ]);
            }
            figures::OverlapDistribution {
                samples: by_sym[label]
                    .values()
                    .map(|v| {
                        let mut v = v.clone();
                        v.sort_by(f64::total_cmp);
                        v
                    })
                    .collect(),
                parisi: (o.corners.clone(), format!("x(q), β = {}", o.beta)),
                axis: format!("overlap {what}"),
            }
        });
        let fig = figures::OverlapFigure {
            title: label.clone(),
            series,
            caption,
            markers,
            distribution,
        };
        written.extend(write_all(
            &figdir.join(format!("overlaps-{}", file_safe(label))),
            size,
            &csv,
            &fig,
        )?);
    }
    Ok(written)
}

/// The threshold view of a constraint family swept over densities: per algorithm, the
/// fraction of formulas whose output satisfies every constraint (energy 0) at ε = 0 against
/// the density α, one curve per n, with binomial standard errors. Where the curves for
/// growing n cross is the finite-size estimate of the algorithm's threshold.
#[allow(clippy::too_many_arguments)]
fn threshold_figures(
    model: Option<&crate::model::ModelSpec>,
    cells: &crate::store::table::Cells,
    order: &[String],
    figdir: &Path,
    size: Size,
    name: &str,
    spec_hash: &str,
) -> anyhow::Result<Vec<PathBuf>> {
    // label → n → [(α, solved, formulas)], from the fit's threshold view (one counting).
    let mut counts: BTreeMap<&str, BTreeMap<u64, Vec<&crate::fit::study::Solved>>> =
        BTreeMap::new();
    let view = crate::fit::study::solved(cells);
    for r in &view {
        counts
            .entry(r.algorithm.as_str())
            .or_default()
            .entry(r.n)
            .or_default()
            .push(r);
    }
    let capacity = capacity_line(model);
    let mut written = Vec::new();
    for label in order.iter().filter(|l| counts.contains_key(l.as_str())) {
        let by_n = &counts[label.as_str()];
        if by_n.values().all(|m| m.len() < 2) {
            continue;
        }
        let mut csv = format!(
            "# kiln figure data: fraction of instances solved against the density; experiment={name}; spec_hash={spec_hash}; algorithm={label}\nn,density,solved,instances,fraction,fraction_se\n"
        );
        let mut series = Vec::new();
        for (n, rows) in by_n {
            let mut pts = Vec::new();
            for r in rows {
                let (p, se) = r.fraction();
                csv += &csv_line(&[
                    n.to_string(),
                    format!("{:?}", r.density),
                    r.solved.to_string(),
                    r.formulas.to_string(),
                    format!("{p:?}"),
                    format!("{se:?}"),
                ]);
                pts.push((r.density, p, se));
            }
            series.push((format!("n = {n}"), pts));
        }
        let fig = figures::ScanFigure {
            panels: vec![figures::ScanPanel {
                x_label: "density α = m/n".into(),
                y_label: "fraction solved".into(),
                series,
                theory: capacity
                    .as_ref()
                    .map(|(a, legend, _)| (vec![(*a, 0.0), (*a, 1.0)], legend.clone())),
            }],
            caption: format!(
                "{label}: fraction of instances whose output satisfies every constraint, against the density α, at ε = 0; error bars 1 binomial SE; one curve per n.{}",
                capacity.as_ref().map_or("", |c| c.2.as_str())
            ),
        };
        let base = figdir.join(format!("threshold-{}", file_safe(label)));
        written.extend(write_all(&base, size, &csv, &fig)?);
    }
    Ok(written)
}

/// `scan-<kind>`: for a sampler kind run at three or more inverse temperatures, the mean
/// coupled distance at the smallest ε > 0 and the mean energy per spin against β, one curve per
/// n, with the Gibbs energy E(β) kiln computes (cube: dP/dβ of the Parisi free energy; spherical
/// SK: the closed form) joined over the sampled β.
#[allow(clippy::too_many_arguments)]
fn scan_figures(
    exp: &super::cells::Experiment,
    energies: &crate::store::table::EnergySamples,
    distances: &crate::store::table::DistanceSamples,
    targets: &BTreeMap<String, SamplerTheory>,
    figdir: &Path,
    size: Size,
    name: &str,
    spec_hash: &str,
) -> anyhow::Result<Vec<PathBuf>> {
    let mut by_kind: BTreeMap<&str, Vec<(f64, &String)>> = BTreeMap::new();
    for (label, kind) in &exp.sampler_kinds {
        if let Some(&b) = exp.sampler_betas.get(label) {
            by_kind.entry(kind).or_default().push((b, label));
        }
    }
    let modulo_flip = exp.model.as_ref().is_some_and(|m| m.symmetric());
    let mut written = Vec::new();
    for (kind, mut members) in by_kind {
        members.sort_by(|a, b| a.0.total_cmp(&b.0));
        members.dedup_by(|a, b| a.0 == b.0);
        if members.len() < 3 {
            continue;
        }
        let mut csv = format!(
            "# kiln figure data: {kind} against inverse temperature; experiment={name}; spec_hash={spec_hash}\npanel,n,beta,value,se,seeds\n"
        );
        let eps = members
            .iter()
            .filter_map(|(_, l)| distances.get(*l))
            .flat_map(|by_n| by_n.values().flat_map(|m| m.keys().copied()))
            .map(f64::from_bits)
            .filter(|&e| e > 0.0)
            .fold(f64::INFINITY, f64::min);
        let mut dist: BTreeMap<u64, Vec<(f64, f64, f64)>> = BTreeMap::new();
        let mut energy: BTreeMap<u64, Vec<(f64, f64, f64)>> = BTreeMap::new();
        for &(beta, label) in &members {
            if let Some(by_n) = distances.get(label) {
                for (n, by_eps) in by_n {
                    if let Some(ds) = by_eps.get(&eps.to_bits()) {
                        let (m, se) = fit::mean_se(ds);
                        csv += &csv_line(&[
                            "distance".into(),
                            n.to_string(),
                            format!("{beta:?}"),
                            format!("{m:?}"),
                            format!("{se:?}"),
                            ds.len().to_string(),
                        ]);
                        dist.entry(*n).or_default().push((beta, m, se));
                    }
                }
            }
            for by_label in energies.values() {
                for p in by_label
                    .get(label)
                    .map(|es| fit::points(es))
                    .unwrap_or_default()
                {
                    let n = p.n as u64;
                    csv += &csv_line(&[
                        "energy".into(),
                        n.to_string(),
                        format!("{beta:?}"),
                        format!("{:?}", p.mean),
                        format!("{:?}", p.se),
                        p.count.to_string(),
                    ]);
                    energy.entry(n).or_default().push((beta, p.mean, p.se));
                }
            }
        }
        let theory: Vec<(f64, f64)> = members
            .iter()
            .filter_map(|(b, l)| targets.get(*l).map(|t| (*b, t.energy)))
            .collect();
        for (b, e) in &theory {
            csv += &csv_line(&[
                "gibbs_energy".into(),
                "inf".into(),
                format!("{b:?}"),
                format!("{e:?}"),
                String::new(),
                String::new(),
            ]);
        }
        let series = |m: BTreeMap<u64, Vec<(f64, f64, f64)>>| -> Vec<figures::ScanSeries> {
            m.into_iter()
                .map(|(n, v)| (format!("n = {n}"), v))
                .collect()
        };
        let mut panels = Vec::new();
        if eps.is_finite() {
            panels.push(figures::ScanPanel {
                x_label: "inverse temperature β".into(),
                y_label: format!(
                    "distance at ε = {eps}{}",
                    if modulo_flip { "  (mod ±)" } else { "" }
                ),
                series: series(dist),
                theory: None,
            });
        }
        panels.push(figures::ScanPanel {
            x_label: "inverse temperature β".into(),
            y_label: "energy per spin H/n (maximised)".into(),
            series: series(energy),
            theory: (!theory.is_empty()).then(|| (theory.clone(), "E(β), kiln's theory".into())),
        });
        let caption = format!(
            "{kind} at {} inverse temperatures. {}Right: mean energy per spin at ε = 0 over seeds (1 SE){}.",
            members.len(),
            if eps.is_finite() {
                format!(
                    "Left: mean distance {} between the samples on the original and on the 1 − ε correlated disorder with the same sampler randomness (coupled runs), ε = {eps}, 1 SE over seeds, one curve per n. ",
                    if modulo_flip {
                        "min(‖σ − σ'‖, ‖σ + σ'‖)/√n"
                    } else {
                        "‖σ − σ'‖/√n"
                    }
                )
            } else {
                String::new()
            },
            if theory.is_empty() {
                String::new()
            } else {
                "; dashed: the Gibbs mean energy E(β) kiln computes at each β (cube: dP/dβ of the Parisi free energy; spherical SK: the closed form)".into()
            }
        );
        let fig = figures::ScanFigure { panels, caption };
        written.extend(write_all(
            &figdir.join(format!("scan-{}", file_safe(kind))),
            size,
            &csv,
            &fig,
        )?);
    }
    Ok(written)
}

/// A string column of a side table (nulls as "").
fn col_str(df: &polars::prelude::DataFrame, name: &str) -> anyhow::Result<Vec<String>> {
    Ok(df
        .column(name)?
        .str()?
        .iter()
        .map(|x| x.unwrap_or("").to_string())
        .collect())
}

/// An unsigned column of a side table (nulls as 0).
fn col_u64(df: &polars::prelude::DataFrame, name: &str) -> anyhow::Result<Vec<u64>> {
    Ok(df
        .column(name)?
        .u64()?
        .iter()
        .map(|x| x.unwrap_or(0))
        .collect())
}

/// A float column of a side table (nulls as NaN).
fn col_f64(df: &polars::prelude::DataFrame, name: &str) -> anyhow::Result<Vec<f64>> {
    Ok(df
        .column(name)?
        .f64()?
        .iter()
        .map(|x| x.unwrap_or(f64::NAN))
        .collect())
}

/// A label as a file-name part: letters, digits, `-` and `_` kept, anything else `_`.
/// A group's name in a file name: `ksat α=4.2` as `ksat-density-4_2`, others by [`file_safe`].
fn density_file_name(label: &str) -> String {
    match crate::store::table::density_of(label) {
        Some((name, a)) => file_safe(&format!("{name}-density-{a}")),
        None => file_safe(label),
    }
}

fn file_safe(label: &str) -> String {
    label
        .chars()
        .map(|c| {
            if c.is_ascii_alphanumeric() || c == '-' || c == '_' {
                c
            } else {
                '_'
            }
        })
        .collect()
}

fn csv_line(fields: &[String]) -> String {
    fields.join(",") + "\n"
}

pub fn run(a: &PlotArgs) -> anyhow::Result<ExitCode> {
    let exp = super::cells::Experiment::resolve(a.spec.as_ref(), &a.results)?;
    let (name, dir) = (exp.name.clone(), exp.dir.clone());
    let size = match a.width.as_str() {
        "one" => Size::OneColumn,
        "two" => Size::TwoColumn,
        w => return Err(InputError(format!("--width {w}: give `one` or `two`")).into()),
    };
    // The fit settings of `kiln fit`: the flag, else the spec's [fit], else ω = 2/3, one term,
    // every size.
    let omega = super::cells::omega(a.omega.as_deref(), exp.fit.omega)?;
    let terms = exp.fit.terms.unwrap_or(1);
    let min_n = exp.fit.min_n.unwrap_or(0);
    let table_path = exp.table()?;
    let cache = a.cache.clone().unwrap_or_else(|| a.results.join(".cache"));
    let spec_hash = exp.spec_hash();
    let cells = crate::store::table::Cells::read(&table_path)?;
    // Stability figures draw `distance_sym`, which is modulo the global flip for symmetric
    // models (tables written before it existed give the raw distance).
    let modulo_flip = cells.distance_is_sym && exp.model.as_ref().is_some_and(|m| m.symmetric());
    let (order, energies, distances) = cells.groups();
    let figdir = dir.join("figures");
    let mut written: Vec<PathBuf> = Vec::new();
    let params = Params {
        omega,
        terms,
        ..Params::default()
    };
    for ((family, couplings), by_alg) in &energies {
        let mut series = Vec::new();
        let labels: Vec<&String> = order.iter().filter(|l| by_alg.contains_key(*l)).collect();
        // Fits on the sizes `kiln fit` uses (n ≥ min_n); every size is drawn.
        let fits: Vec<(Vec<fit::Point>, Option<fit::Fit>)> = labels
            .iter()
            .map(|l| {
                let pts = fit::points(&by_alg[*l]);
                let used: Vec<fit::Point> = pts
                    .iter()
                    .filter(|p| p.n >= min_n as f64)
                    .cloned()
                    .collect();
                let f = fit::fit(&used, &params).ok();
                (pts, f)
            })
            .collect();
        // The axis: the fixed ω, or with ω fitted the median of the series' fitted values.
        let axis = match omega {
            Omega::Fixed(x) => x,
            Omega::Fitted => {
                let mut ws: Vec<f64> = fits
                    .iter()
                    .filter_map(|(_, f)| f.as_ref())
                    .map(|f| f.omega)
                    .collect();
                ws.sort_by(f64::total_cmp);
                ws.get(ws.len() / 2).copied().unwrap_or(2.0 / 3.0)
            }
        };
        let mut csv = format!(
            "# kiln figure data: energy per spin against n^-omega; experiment={name}; spec_hash={spec_hash}; omega={axis}{}\nseries,kind,n,x,y,y_se\n",
            match omega {
                Omega::Fitted => "; omega fitted per series, axis at the median",
                Omega::Fixed(_) => "",
            }
        );
        for (label, (pts, f)) in labels.iter().copied().zip(fits) {
            for p in &pts {
                csv += &csv_line(&[
                    label.clone(),
                    "mean".into(),
                    format!("{}", p.n),
                    format!("{:?}", p.n.powf(-axis)),
                    format!("{:?}", p.mean),
                    format!("{:?}", p.se),
                ]);
            }
            if let Some(f) = &f {
                csv += &csv_line(&[
                    label.clone(),
                    "extrapolated".into(),
                    "inf".into(),
                    "0.0".into(),
                    format!("{:?}", f.e_inf),
                    format!("{:?}", f.e_inf_se),
                ]);
            }
            series.push(EnergySeries {
                label: label.clone(),
                points: pts.iter().map(|p| (p.n, p.mean, p.se)).collect(),
                fit: f,
            });
        }
        let refs = if *family == exp.model.as_ref().map_or("", |m| m.family.name()) {
            reference_lines(exp.model.as_ref(), &cache, &exp.gibbs_betas())?
        } else {
            ksat_line(exp.model.as_ref(), family, &cache)?
        };
        for (v, l, _) in &refs {
            csv += &csv_line(&[
                format!("\"{l}\""),
                "reference".into(),
                "inf".into(),
                "".into(),
                format!("{v:?}"),
                "".into(),
            ]);
        }
        let how = match omega {
            Omega::Fixed(x) => format!("ω = {x:.3}"),
            Omega::Fitted => format!("ω fitted per series (axis at the median, {axis:.3})"),
        };
        let how = format!(
            "{how}{}{}",
            if terms == 2 {
                ", with a second term b n^-2ω"
            } else {
                ""
            },
            if min_n > 0 {
                format!(", on sizes n ≥ {min_n}")
            } else {
                String::new()
            }
        );
        let caption = format!(
            "{} ({} couplings): mean energy per spin over seeds at ε = 0, error bars 1 SE; lines: fits e∞ + a n^-ω with {how} and 1σ bands; points at n^-ω = 0: extrapolations. {}",
            crate::model::find(family).map_or(family.as_str(), |f| f.title),
            couplings,
            refs.iter()
                .map(|r| r.2.clone())
                .collect::<Vec<_>>()
                .join(" ")
        );
        let fig = EnergyFigure {
            omega: axis,
            series,
            theory: refs.iter().map(|r| (r.0, r.1.clone())).collect(),
            caption,
        };
        let base = figdir.join(format!("energy-{}-{couplings}", density_file_name(family)));
        written.extend(write_all(&base, size, &csv, &fig)?);
    }
    let before = cells.point_distances();
    // (ε, mean, se) per ε of one (label, n), with the CSV rows of `series` written as it goes.
    let mean_by_eps = |by_eps: &std::collections::BTreeMap<u64, Vec<f64>>,
                       series: &str,
                       n: u64,
                       csv: &mut String|
     -> Vec<(f64, f64, f64)> {
        by_eps
            .iter()
            .map(|(e, ds)| {
                let p = &fit::points(&ds.iter().map(|&d| (0u64, d)).collect::<Vec<_>>())[0];
                *csv += &csv_line(&[
                    series.to_string(),
                    n.to_string(),
                    format!("{:?}", f64::from_bits(*e)),
                    format!("{:?}", p.mean),
                    format!("{:?}", p.se),
                    p.count.to_string(),
                ]);
                (f64::from_bits(*e), p.mean, p.se)
            })
            .collect()
    };
    let distance_words = if modulo_flip {
        "min(‖σ − σ'‖, ‖σ + σ'‖)/√n (σ and −σ are one state of this model; column distance_sym)"
    } else {
        "‖σ − σ'‖/√n"
    };
    let stability_caption = |what: &str| {
        format!(
            "{what}: mean distance {distance_words} between the output on the original disorder and the output, with the same algorithm randomness, on disorder correlated at 1 − ε; error bars 1 SE over seeds; dotted lines with open markers: the same distance between the points before rounding (column distance_point{}), where the algorithm has one; dashed: √2, the distance of two unrelated outputs (overlap 0). Slopes: weighted least-squares fits of log distance on log ε, printed with their error where at least three ε levels fit a line (χ²/dof ≤ 3) and the slope is at least two errors from 0.",
            if modulo_flip { "_sym" } else { "" }
        )
    };
    for label in order.iter().filter(|l| distances.contains_key(*l)) {
        let mut series = Vec::new();
        let mut csv = format!(
            "# kiln figure data: mean distance against epsilon; experiment={name}; spec_hash={spec_hash}; algorithm={label}\nseries,n,epsilon,distance,distance_se,seeds\n"
        );
        for (n, by_eps) in &distances[label] {
            let pts = mean_by_eps(by_eps, &format!("n={n}"), *n, &mut csv);
            let before_rounding = before
                .get(label)
                .and_then(|b| b.get(n))
                .map_or_else(Vec::new, |b| {
                    mean_by_eps(b, &format!("n={n} before rounding"), *n, &mut csv)
                });
            let slope = figures::loglog_fit(&pts);
            series.push(StabilitySeries {
                label: format!("n = {n}"),
                points: pts,
                before_rounding,
                slope,
            });
        }
        let fig = StabilityFigure {
            title: format!("stability of {label}"),
            series,
            caption: stability_caption(&format!("Stability of {label} at each n")),
            modulo_flip,
        };
        let base = figdir.join(format!("stability-{}", density_file_name(label)));
        match write_all(&base, size, &csv, &fig) {
            Ok(w) => written.extend(w),
            Err(e) => eprintln!("note: no stability figure for {label}: {e}"),
        }
    }
    // The comparison a threshold paper makes: every algorithm at one n, the largest that all
    // of them ran (each at its own largest when they share none).
    let stable: Vec<&String> = order
        .iter()
        .filter(|l| distances.contains_key(*l))
        .collect();
    if stable.len() >= 2 {
        let common = distances[stable[0]]
            .keys()
            .rev()
            .find(|n| stable.iter().all(|l| distances[*l].contains_key(n)))
            .copied();
        let mut csv = format!(
            "# kiln figure data: mean distance against epsilon per algorithm at the largest n; experiment={name}; spec_hash={spec_hash}\nseries,n,epsilon,distance,distance_se,seeds\n"
        );
        let mut series = Vec::new();
        for label in &stable {
            let by_n = &distances[*label];
            let Some(n) = common.or_else(|| by_n.keys().next_back().copied()) else {
                continue;
            };
            let pts = mean_by_eps(&by_n[&n], label, n, &mut csv);
            let before_rounding = before
                .get(*label)
                .and_then(|b| b.get(&n))
                .map_or_else(Vec::new, |b| {
                    mean_by_eps(b, &format!("{label} before rounding"), n, &mut csv)
                });
            let slope = figures::loglog_fit(&pts);
            series.push(StabilitySeries {
                label: if common.is_some() {
                    (*label).clone()
                } else {
                    format!("{label} (n = {n})")
                },
                points: pts,
                before_rounding,
                slope,
            });
        }
        let at = common.map_or("each algorithm's largest n".to_string(), |n| {
            format!("n = {n}")
        });
        let fig = StabilityFigure {
            title: format!("stability of the algorithms at {at}"),
            series,
            caption: stability_caption(&format!("Stability of each algorithm at {at}")),
            modulo_flip,
        };
        match write_all(&figdir.join("stability-algorithms"), size, &csv, &fig) {
            Ok(w) => written.extend(w),
            Err(e) => eprintln!("note: no algorithm comparison figure: {e}"),
        }
    }
    if exp
        .model
        .as_ref()
        .is_some_and(|m| m.family.solved_at_zero())
    {
        written.extend(threshold_figures(
            exp.model.as_ref(),
            &cells,
            &order,
            &figdir,
            size,
            &name,
            &spec_hash,
        )?);
    }
    let theory = sampler_theory(exp.model.as_ref(), &cache, &exp.sampler_betas)?;
    written.extend(scan_figures(
        &exp, &energies, &distances, &theory, &figdir, size, &name, &spec_hash,
    )?);
    let overlaps_path = dir.join("overlaps.parquet");
    if overlaps_path.is_file() {
        let symmetric = exp.model.as_ref().is_none_or(|m| m.symmetric());
        let spins = exp.model.as_ref().is_none_or(|m| m.family.spins());
        written.extend(overlap_figures(
            &overlaps_path,
            &figdir,
            size,
            &name,
            &spec_hash,
            &theory,
            (symmetric, spins),
        )?);
    }
    let traces_path = dir.join("traces.parquet");
    if traces_path.is_file() {
        written.extend(trace_figures(
            &traces_path,
            &figdir,
            size,
            &name,
            &spec_hash,
            &theory,
        )?);
    }
    if a.json {
        let v = serde_json::json!({ "experiment": name, "files": written.iter().map(|p| p.display().to_string()).collect::<Vec<_>>() });
        out(&format!("{v}\n"));
    } else {
        let mut s = String::new();
        for p in &written {
            s += &format!("wrote {}\n", p.display());
        }
        out(&s);
    }
    Ok(ExitCode::SUCCESS)
}

/// Writes base.svg, base.png, base.pdf and base.csv.
fn write_all(
    base: &Path,
    size: Size,
    csv: &str,
    fig: &impl kplot::Figure,
) -> anyhow::Result<Vec<PathBuf>> {
    let svg = kplot::to_svg(size, fig).map_err(anyhow::Error::msg)?;
    let png = kplot::to_png(size, fig).map_err(anyhow::Error::msg)?;
    let pdf = kplot::svg_to_pdf(&svg).map_err(anyhow::Error::msg)?;
    // The caption beside the image: as LaTeX for the manuscript, and at the end of the CSV's
    // first (comment) line, so the numbers and their description travel together and the
    // column header stays the second line.
    let caption = fig.caption();
    let name = base
        .file_name()
        .map_or(String::new(), |n| n.to_string_lossy().into_owned());
    let tex = format!(
        "% kiln figure caption for {name}.pdf\n\\caption{{{}}}\n",
        crate::fit::latex::text(&caption)
    );
    let flat = caption.replace('\n', " ");
    let csv = match csv.split_once('\n') {
        Some((first, rest)) => format!("{first}; caption={flat}\n{rest}"),
        None => format!("{csv}; caption={flat}\n"),
    };
    let mut out = Vec::new();
    for (ext, bytes) in [
        ("svg", svg.as_bytes()),
        ("png", &png[..]),
        ("pdf", &pdf[..]),
        ("csv", csv.as_bytes()),
        ("tex", tex.as_bytes()),
    ] {
        let p = base.with_extension(ext);
        write_atomic(&p, bytes)?;
        out.push(p);
    }
    Ok(out)
}

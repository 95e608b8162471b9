//! `kiln theory`: theory values for a mixture ξ — on the cube the replica-symmetric,
//! constant-γ, k-step and full RSB values of the zero-temperature Parisi functional; on the sphere
//! the one-step Crisanti–Sommers ground state and the algorithmic value ∫₀¹ √ξ''.

use super::{InputError, out};
use crate::theory::{Mixture, cube, sphere};
use clap::Args;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct TheoryArgs {
    /// Experiment spec whose model to use (SK: ξ = q²/2). Default: the built-in default.
    pub spec: Option<PathBuf>,
    /// A mixture instead of a spec: `p:c2,…` with ξ(q) = Σ c2·q^p, e.g. `2:0.5,4:0.25`.
    #[arg(long, value_name = "p:c2,…")]
    pub mixture: Option<String>,
    /// Largest number of RSB steps on the cube.
    #[arg(long, value_name = "K", default_value_t = 3)]
    pub k: usize,
    /// Also solve full RSB at finer settings, this many rounds (each doubles the x-grid and
    /// adds 8 q-intervals; each round takes several times the previous one): the sequence
    /// shows how far the printed value is from converged. 0 to 3.
    #[arg(long, value_name = "ROUNDS", default_value_t = 0)]
    pub refine: usize,
    /// Also the Parisi free energy (and the replica-symmetric bound) at these inverse
    /// temperatures (comma-separated).
    #[arg(long, value_name = "β,…", value_delimiter = ',')]
    pub beta: Vec<f64>,
    /// A uniform field h (H + h Σσ_i) for the --beta values: the replica-symmetric q(β, h),
    /// the de Almeida–Thouless test and the Parisi free energy with the field. Default: the
    /// spec's `field` (0 with --mixture).
    #[arg(long, value_name = "h")]
    pub field: Option<f64>,
    /// The order parameters go to `<results>/<experiment>/theory.csv` (or
    /// `<results>/theory-<hash>.csv` for a --mixture); solutions are cached under
    /// `<cache>/theory`.
    #[command(flatten)]
    pub folders: super::Folders,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

fn parse_mixture(s: &str) -> Result<Mixture, InputError> {
    let mut terms = Vec::new();
    for part in s.split(',') {
        let (p, c) = part
            .split_once(':')
            .ok_or_else(|| InputError(format!("--mixture: `{part}` is not p:c2")))?;
        let p: u32 = p
            .trim()
            .parse()
            .map_err(|_| InputError(format!("--mixture: `{p}` is not a degree p")))?;
        let c: f64 = c
            .trim()
            .parse()
            .map_err(|_| InputError(format!("--mixture: `{c}` is not a weight c2")))?;
        if !((1..=30).contains(&p) && c >= 0.0 && c.is_finite()) {
            return Err(InputError(format!(
                "--mixture: term {p}:{c} needs 1 ≤ p ≤ 30 and c2 ≥ 0 (p = 1 is a Gaussian field of variance c2)"
            )));
        }
        terms.push((p, c));
    }
    if terms.iter().all(|t| t.1 == 0.0) {
        return Err(InputError("--mixture: all weights are zero".into()));
    }
    Ok(Mixture { terms })
}

/// Runs one solve with a status line on the terminal ("kiln theory │ solving … │ 3 s"),
/// cleared when it returns; nothing when `quiet` (JSON output) or stderr is not a terminal.
fn solving<T>(quiet: bool, what: &str, f: impl FnOnce() -> T) -> T {
    let bar = if quiet {
        indicatif::ProgressBar::hidden()
    } else {
        indicatif::ProgressBar::with_draw_target(None, indicatif::ProgressDrawTarget::stderr())
    };
    bar.set_style(
        indicatif::ProgressStyle::with_template("kiln theory │ {msg} │ {elapsed} so far")
            .expect("valid template"),
    );
    bar.set_message(format!("{what} (read from the cache when stored)"));
    bar.enable_steady_tick(std::time::Duration::from_millis(250));
    let r = f();
    bar.finish_and_clear();
    r
}

/// How long a solution took, or "from the cache" when it was read back (no solve of these
/// takes under 50 ms, while a cached one reads in about a millisecond).
fn took(secs: f64) -> String {
    if secs < 0.05 {
        "from the cache".into()
    } else {
        format!("{secs:.1} s")
    }
}

/// `kiln theory` on a perceptron spec: the capacity at the spec's margin (Gardner's formula on
/// the sphere at κ ≥ 0, the RS zero-entropy density on the cube), and on the sphere at κ = 0
/// Cover's exact finite-n probability of a solution at the spec's sizes and densities (see
/// [`crate::theory::perceptron`]).
fn perceptron(
    a: &TheoryArgs,
    spec: &crate::spec::Spec,
    p: &crate::model::families::perceptron::Perceptron,
) -> anyhow::Result<ExitCode> {
    use crate::theory::perceptron as th;
    if !a.beta.is_empty() || a.field.is_some() {
        return Err(InputError(
            "--beta and --field are for mean-field mixtures; a perceptron spec gives its capacity"
                .into(),
        )
        .into());
    }
    let sphere = p.domain == crate::model::Domain::Sphere;
    let k = p.margin;
    let capacity = th::capacity(sphere, k);
    let alphas: Vec<f64> = spec
        .models
        .iter()
        .filter_map(|m| m.family.density())
        .collect();
    let cover: Vec<(u64, f64, f64)> = if sphere && k == 0.0 {
        spec.sizes
            .iter()
            .flat_map(|&(n, _)| {
                alphas.iter().map(move |&al| {
                    let m = crate::model::perceptron::patterns_at(n, al);
                    (n, al, th::cover_probability(n, m))
                })
            })
            .collect()
    } else {
        vec![]
    };
    let domain = if sphere { "sphere" } else { "cube" };
    if a.json {
        let v = serde_json::json!({
            "perceptron": {
                "domain": domain,
                "margin": k,
                "capacity": capacity,
                "solvable": cover.iter().map(|(n, al, pr)| serde_json::json!({"n": n, "density": al, "probability": pr})).collect::<Vec<_>>(),
            }
        });
        out(&format!("{v}\n"));
        return Ok(ExitCode::SUCCESS);
    }
    let mut o = format!(
        "{}: perceptron on the {domain}, margin κ = {k}\n",
        spec.name
    );
    match (sphere, capacity) {
        (true, Some(c)) => {
            o += &format!(
                "  capacity α_c = {c:.6}  (1/∫_{{−κ}}^∞ (t + κ)² Dt; Gardner 1988, J. Phys. A 21, 257)\n"
            )
        }
        (true, None) => {
            o +=
                "  capacity: no formula kiln trusts at κ < 0 (the solutions are not convex there)\n"
        }
        (false, Some(c)) => {
            o += &format!(
                "  capacity α_c = {c:.6}  (the replica-symmetric entropy of solutions vanishes; Gardner & Derrida 1988,\n  Krauth & Mézard 1989; not the q → 1 limit of the same equations, {:.4} at κ = 0)\n",
                4.0 / std::f64::consts::PI
            )
        }
        (false, None) => {}
    }
    if !cover.is_empty() {
        o += "\n  exact at finite n, κ = 0: P(a solution exists) = 2^{1−m} Σ_{k<n} C(m − 1, k), m = round(α·n) (Cover 1965)\n";
        o += &format!("  {:>8}  {:>8}  {:>10}\n", "n", "α", "P");
        for (n, al, pr) in &cover {
            o += &format!("  {n:>8}  {al:>8}  {pr:>10.6}\n");
        }
    }
    out(&o);
    Ok(ExitCode::SUCCESS)
}

/// The widths k for which `kiln theory` on a k-SAT spec prints c_k.
const KSAT_WIDTHS: std::ops::RangeInclusive<u32> = 2..=5;

/// `kiln theory` on a k-SAT spec: c_k, the zero-temperature Parisi value of ξ_k(q) = (1 + q)^k
/// − 1 (a mixture with a p = 1 term), for k = 2…5, and the large-density asymptote at the
/// spec's densities (see [`crate::theory::ksat`]).
fn ksat(a: &TheoryArgs, spec: &crate::spec::Spec, k: u32) -> anyhow::Result<ExitCode> {
    if !a.beta.is_empty() || a.field.is_some() {
        return Err(InputError(
            "--beta and --field are for mean-field mixtures; a k-SAT spec gives its zero-temperature asymptote"
                .into(),
        )
        .into());
    }
    if !(1..=6).contains(&a.k) {
        return Err(InputError(format!("--k {}: give 1 to 6", a.k)).into());
    }
    let cache = crate::store::cache::Cache::new(a.folders.cache_dir());
    let mut rows = Vec::new();
    for w in KSAT_WIDTHS.chain(std::iter::once(k)) {
        if rows.iter().any(|r: &(u32, f64, String)| r.0 == w) {
            continue;
        }
        let (c, how) = crate::theory::ksat::parisi_value(&cache, w, a.k)?;
        rows.push((w, c, how));
    }
    let c_k = rows.iter().find(|r| r.0 == k).expect("the spec's k").1;
    let alphas: Vec<f64> = spec
        .models
        .iter()
        .filter_map(|m| m.family.density())
        .collect();
    if a.json {
        let v = serde_json::json!({
            "ksat": {
                "k": k,
                "c": rows.iter().map(|(w, c, how)| serde_json::json!({"k": w, "value": c, "solution": how})).collect::<Vec<_>>(),
                "asymptote": alphas.iter().map(|&al| serde_json::json!({"density": al, "energy": crate::theory::ksat::asymptote(k, al, c_k)})).collect::<Vec<_>>(),
            }
        });
        out(&format!("{v}\n"));
        return Ok(ExitCode::SUCCESS);
    }
    let mut o = String::from(
        "random k-SAT at large density: fewest unsatisfied clauses per variable\n  α/2^k − √α·c_k/2^k + o(√α), c_k the zero-temperature Parisi value of ξ_k(q) = (1 + q)^k − 1\n  (Panchenko 2018, arXiv:1608.06256)\n\n",
    );
    o += &format!("  {:>3}  {:>10}  {}\n", "k", "c_k", "lowest of");
    for (w, c, how) in &rows {
        let mark = if *w == k { "  ← the spec's k" } else { "" };
        o += &format!("  {w:>3}  {c:>10.7}  {how}{mark}\n");
    }
    o += &format!(
        "\n{}: k = {k}; energy = −unsatisfied/n on the asymptote (a large-α limit, not a finite-α value)\n",
        spec.name
    );
    o += &format!("  {:>8}  {:>12}\n", "α", "energy");
    for al in &alphas {
        let e = crate::theory::ksat::asymptote(k, *al, c_k);
        if e < 0.0 {
            o += &format!("  {al:>8}  {e:>12.6}\n");
        } else {
            o += &format!("  {al:>8}  {:>12}\n", "—");
        }
    }
    if alphas.iter().any(|&al| al.sqrt() <= c_k) {
        o += &format!(
            "  (—: α ≤ c_k² = {:.3}, where the asymptote is not below 0 and says nothing)\n",
            c_k * c_k
        );
    }
    out(&o);
    Ok(ExitCode::SUCCESS)
}

pub fn run(a: &TheoryArgs) -> anyhow::Result<ExitCode> {
    let mut spec_field = 0.0;
    let (xi, experiment) = match &a.mixture {
        Some(m) => (parse_mixture(m)?, None),
        None => {
            let spec = match &a.spec {
                Some(p) => crate::spec::load(p)?,
                None => crate::spec::default_spec(),
            };
            if let Some(f) = spec
                .model
                .family
                .as_any()
                .downcast_ref::<crate::model::families::ksat::Ksat>()
            {
                return ksat(a, &spec, f.k as u32);
            }
            if let Some(p) = spec
                .model
                .family
                .as_any()
                .downcast_ref::<crate::model::families::perceptron::Perceptron>()
            {
                return perceptron(a, &spec, p);
            }
            let Some(xi) = spec.model.mixture().cloned() else {
                return Err(InputError(format!(
                    "`kiln theory` computes Parisi values for mean-field mixtures (families sk, cube, sphere), the k-SAT asymptote (ksat) and the perceptron's capacity (perceptron); {} is `{}`",
                    spec.origin,
                    spec.model.name()
                ))
                .into());
            };
            spec_field = spec.model.field;
            (xi, Some(spec.name))
        }
    };
    if !(1..=6).contains(&a.k) {
        return Err(InputError(format!("--k {}: give 1 to 6", a.k)).into());
    }
    // A p = 1 term (a Gaussian field on every spin) is solved by the cube's zero-temperature
    // functionals; the positive-temperature and spherical ones do not take it yet.
    let field_term = xi.d1(0.0) > 0.0;
    if field_term && !a.beta.is_empty() {
        return Err(InputError(
            "--beta: the positive-temperature functionals do not take a p = 1 term yet; drop --beta for the zero-temperature values".into(),
        )
        .into());
    }
    if a.beta.iter().any(|b| !(*b > 0.0 && b.is_finite())) {
        return Err(InputError("--beta: give positive inverse temperatures".into()).into());
    }
    let field = a.field.unwrap_or(spec_field);
    if !(field.is_finite() && field.abs() <= 100.0) {
        return Err(InputError(format!("--field {field}: give a number with |h| ≤ 100")).into());
    }
    if a.field.is_some_and(|h| h != 0.0) && a.beta.is_empty() {
        return Err(InputError(
            "--field: the field's values are at positive temperature; give --beta too".into(),
        )
        .into());
    }
    let cache = crate::store::cache::Cache::new(a.folders.cache_dir());
    let s = cube::Settings::default();
    let rs = cube::replica_symmetric(&xi);
    let cg = cube::constant_gamma(&xi);
    let full_t = std::time::Instant::now();
    let quiet = a.json;
    let full = solving(quiet, "full RSB, 16 free q-intervals", || {
        crate::theory::cached::full_rsb(&cache, &xi)
    })?;
    let full_secs = full_t.elapsed().as_secs_f64();
    let mut ks = Vec::new();
    for k in 1..=a.k {
        let t = std::time::Instant::now();
        let sol = solving(quiet, &format!("{k}-step RSB"), || {
            crate::theory::cached::k_rsb(&cache, &xi, k, &s)
        })?;
        ks.push((k, sol, t.elapsed().as_secs_f64()));
    }
    if a.refine > 3 {
        return Err(InputError(format!("--refine {}: give 0 to 3 rounds", a.refine)).into());
    }
    // Each round warm-starts from the previous one (not cached: asked for explicitly).
    type Round = (
        crate::theory::full::FullSettings,
        crate::theory::full::FullRsb,
        f64,
    );
    let mut refined: Vec<Round> = Vec::new();
    for r in 1..=a.refine {
        let d = crate::theory::full::FullSettings::default();
        let fs = crate::theory::full::FullSettings {
            grid: (d.grid - 1) * (1 << r) + 1,
            levels: d.levels + 8 * r,
            max_iterations: 600,
            ..d
        };
        let t = std::time::Instant::now();
        let prev = refined.last().map_or(&full, |r| &r.1);
        let sol = solving(quiet, &format!("full RSB, refinement round {r}"), || {
            crate::theory::full::full_rsb_free_from(
                &xi,
                &fs,
                prev,
                crate::theory::full::FREE_ROUNDS,
            )
        });
        refined.push((fs, sol, t.elapsed().as_secs_f64()));
    }
    // k-step values as printed: re-evaluated on the full-RSB lattice (None: not resolved).
    let k_values: Vec<Option<f64>> = ks
        .iter()
        .map(|(_, sol, _)| crate::theory::cached::k_step_value(&xi, sol))
        .collect();
    let alg_t = std::time::Instant::now();
    let alg_settings = crate::theory::cached::alg_settings(&xi);
    let alg_zoom = alg_settings.zoom;
    let alg_what = if alg_zoom > 1 {
        "algorithmic threshold, three starts, then the boundary layer at q = 0 (a minute or more)"
    } else {
        "algorithmic threshold, three starts"
    };
    let (calg, alg_starts) = solving(quiet, alg_what, || {
        crate::theory::cached::algorithmic(&cache, &xi)
    })?;
    let alg_secs = alg_t.elapsed().as_secs_f64();
    let alg_diag = crate::theory::full::diagnostic(&xi, &alg_settings, &calg);
    // Every line is an upper bound on the Parisi value (the infimum of the functional); the
    // best kiln has is the least of them, and it names the solution that attains it.
    let best = crate::theory::cached::least(
        std::iter::once((full.value, "full RSB".to_string()))
            .chain(refined.iter().map(|(fs, r, _)| {
                (
                    r.value,
                    format!("full RSB (x-grid {}, {} q-intervals)", fs.grid, r.m.len()),
                )
            }))
            .chain(
                ks.iter()
                    .zip(&k_values)
                    .filter_map(|((k, _, _), v)| v.map(|v| (v, format!("{k}-step RSB")))),
            ),
    );
    // The order parameters, for incremental AMP and for plots.
    let mut csv = format!(
        "# kiln theory: zero-temperature step order parameters gamma = m on [q_start, q_end); xi(q) = {}\nsolution,k,value,q_start,q_end,m\n",
        xi.terms
            .iter()
            .map(|(p, c)| format!("{c}*q^{p}"))
            .collect::<Vec<_>>()
            .join(" + ")
    );
    for j in 0..full.m.len() {
        csv += &format!(
            "full,{},{:?},{:?},{:?},{:?}\n",
            full.m.len(),
            full.value,
            full.q[j],
            full.q[j + 1],
            full.m[j]
        );
    }
    for (k, sol, _) in &ks {
        let qs = &sol.steps.q;
        for j in 0..qs.len() {
            let end = if j + 1 < qs.len() { qs[j + 1] } else { 1.0 };
            csv += &format!(
                "{k}rsb,{k},{:?},{:?},{end:?},{:?}\n",
                sol.value, qs[j], sol.steps.m[j]
            );
        }
    }
    let tag = xi.canon().hash("mixture");
    let csv_path = match &experiment {
        Some(name) => a.folders.results.join(name).join("theory.csv"),
        None => a
            .folders
            .results
            .join(format!("theory-{}.csv", &hex::encode(tag)[..12])),
    };
    crate::store::write_atomic(&csv_path, csv.as_bytes())?;
    let (gs, l, m, q0) = sphere::ground_state(&xi);
    let full_cs = sphere::ground_state_full(&xi, super::plot::SPHERE_INTERVALS);
    let (alg, condition) = sphere::algorithmic(&xi);
    type AtBeta = (
        f64,
        crate::theory::temperature::RsField,
        crate::theory::full::FullRsb,
        f64,
    );
    let temps: Vec<AtBeta> = a
        .beta
        .iter()
        .map(|&b| {
            let rs = crate::theory::temperature::rs_field(&xi, b, field);
            let (sol, e) = crate::theory::cached::at_temperature(&cache, &xi, b, field)?;
            Ok((b, rs, sol, e))
        })
        .collect::<Result<_, crate::store::StoreError>>()?;
    let mixture = xi
        .terms
        .iter()
        .map(|(p, c)| format!("{c}·q^{p}"))
        .collect::<Vec<_>>()
        .join(" + ");
    if a.json {
        let mut v = serde_json::json!({
            "mixture": xi.terms,
            "cube": {
                "replica_symmetric": rs,
                "constant_gamma": {"value": cg.value, "m": cg.steps.m[0]},
                "rsb": ks.iter().zip(&k_values).map(|((k, sol, secs), v)| serde_json::json!({
                    "k": k, "value": v, "value_quadrature": sol.value, "q": sol.steps.q, "m": sol.steps.m, "seconds": secs,
                })).collect::<Vec<_>>(),
                "full_rsb": {"value": full.value, "intervals": full.m.len(), "q": full.q, "m": full.m, "seconds": full_secs},
                "full_rsb_refined": refined.iter().map(|(fs, r, secs)| serde_json::json!({"value": r.value, "grid": fs.grid, "intervals": r.m.len(), "q": r.q, "m": r.m, "seconds": secs})).collect::<Vec<_>>(),
                "algorithmic": {"value": calg.value, "q": calg.q, "m": calg.m, "starts": alg_starts,
                    "structure": crate::theory::full::describe_runs(&calg), "diagnostic": alg_diag, "seconds": alg_secs,
                    "near_zero_zoom": (alg_zoom > 1).then_some(alg_zoom)},
                "best": {"value": best.0, "solution": best.1},
            },
            "order_parameters": csv_path.display().to_string(),
            "field": field,
            "temperature_rs": temps.iter().map(|(b, rs, _, _)| serde_json::json!({"beta": b, "field": field, "free_energy": rs.free_energy, "q": rs.q, "magnetisation": rs.magnetisation, "at": rs.at, "replica_symmetric_stable": rs.at <= 1.0})).collect::<Vec<_>>(),
            "temperature": temps.iter().map(|(b, _, f, e)| serde_json::json!({"beta": b, "field": field, "free_energy": f.value, "energy": e, "q_max": crate::theory::full::largest_overlap(f), "q": f.q, "x": f.m})).collect::<Vec<_>>(),
            "sphere": {
                "ground_state_one_step": gs, "L": l, "m": m, "q0": q0,
                "ground_state": {"value": full_cs.value, "structure": full_cs.structure(),
                    "intervals": full_cs.m.len(), "B": full_cs.b, "q": full_cs.q, "m": full_cs.m},
                "algorithmic": alg, "algorithmic_equals_ground_state": condition,
            },
        });
        if field_term {
            v["sphere"] = serde_json::Value::Null;
        }
        out(&format!("{v}\n"));
    } else {
        let mut o = format!(
            "ξ(q) = {mixture}\n\ncube, zero temperature (lim max H/n; Auffinger–Chen functional)\n"
        );
        o += &format!("  replica symmetric        {rs:.7}\n");
        o += &format!(
            "  constant γ (q₀ = 0)      {:.7}   m = {:.4}\n",
            cg.value, cg.steps.m[0]
        );
        for ((k, sol, secs), v) in ks.iter().zip(&k_values) {
            let q: Vec<String> = sol.steps.q[1..].iter().map(|x| format!("{x:.4}")).collect();
            let m: Vec<String> = sol.steps.m[1..].iter().map(|x| format!("{x:.4}")).collect();
            let value = match v {
                Some(v) => format!("{v:.7}"),
                None => format!("({:.7})", sol.value),
            };
            o += &format!(
                "  {k}-step RSB               {value:<9}   q = [{}]  m = [{}]  ({})\n",
                q.join(", "),
                m.join(", "),
                took(*secs)
            );
        }
        if k_values.iter().any(|v| v.is_none()) {
            o += "  (in parentheses: a step narrower than the x-grid; the quadrature value is not trusted and not used as a bound)\n";
        }
        o += &format!(
            "  full RSB                 {:.7}   γ on {} free q-intervals, γ(0+) = {:.4}, γ(1−) = {:.3}{}  ({})\n",
            full.value,
            full.m.len(),
            full.m[0],
            full.m[full.m.len() - 1],
            // γ diverges at q → 1; the grid resolves the last step only while m·dx ≤ 1.
            if full.m[full.m.len() - 1]
                * crate::theory::full::spacing(&xi, &crate::theory::full::FullSettings::default())
                > 0.999
            {
                " (the x-grid's bound)"
            } else {
                ""
            },
            took(full_secs)
        );
        for (fs, r, secs) in &refined {
            o += &format!(
                "  full RSB, finer          {:.7}   x-grid {}, {} q-intervals  ({secs:.1} s)\n",
                r.value,
                fs.grid,
                r.m.len()
            );
        }
        let (best_value, best_name) = &best;
        if best_name.contains("step") && full.value > *best_value {
            o += &format!("  (the {best_name} solution is lower than the full-RSB one)\n");
        }
        o += &format!(
            "  best upper bound         {best_value:.7}   attained by the {best_name} solution\n"
        );
        if xi == Mixture::sk() {
            o += "  (published full-RSB value for SK: 0.7631667, Crisanti & Rizzo 2002)\n";
        }
        let (dlo, dhi) = alg_diag
            .iter()
            .filter(|d| d.is_finite())
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &d| {
                (a.min(d), b.max(d))
            });
        o += &format!(
            "  algorithmic threshold    {:.7}   γ positive, not nec. monotone ({} q-intervals; {}): {}\n",
            calg.value,
            calg.m.len(),
            took(alg_secs),
            crate::theory::full::describe_runs(&calg)
        );
        o += &format!(
            "                           {:.2e} below the full-RSB value at the same settings; ξ''·E[(∂ₓₓΦ)²] in [{dlo:.3}, {dhi:.3}] (1 where full-RSB type); starts reached {}{}\n",
            full.value - calg.value,
            alg_starts
                .iter()
                .map(|v| format!("{v:.7}"))
                .collect::<Vec<_>>()
                .join(", "),
            if alg_zoom > 1 {
                format!(
                    ", then the boundary layer of ξ''(0) = 0 on a {alg_zoom}× finer x-lattice (first interval q < {:.2e}, γ {:.0} there)",
                    calg.q[1], calg.m[0]
                )
            } else {
                String::new()
            }
        );
        if !temps.is_empty() {
            o += "\ncube, positive temperature: free energy lim (1/n) E log Σ e^{βH} (Parisi, x on 16 q-intervals\nrefined below q_max) and the replica-symmetric bound; Gibbs mean energy per spin E = dP/dβ;\nlargest overlap q_max of the Parisi order parameter\n";
            if field != 0.0 {
                o += &format!(
                    "with the field h = {field} (H + h Σσ_i; the cavity field is βh + β√ξ'(q) Z, so a paper's field h' in\ne^{{βH + h'Σσ}} is βh here); m = E tanh(βh + β√ξ'(q) Z) is the RS magnetisation; AT = β²ξ''(q)·E sech⁴(…):\nreplica symmetry is stable (above the de Almeida–Thouless line) when AT ≤ 1\n"
                );
            }
            for (b, rs, f, e) in &temps {
                o += &format!(
                    "  β = {b:<8} Parisi {:.8}   E {e:.6}   q_max {:.4}   RS {:.8} (q = {:.6})",
                    f.value,
                    crate::theory::full::largest_overlap(f),
                    rs.free_energy,
                    rs.q
                );
                if field != 0.0 {
                    o += &format!(
                        "   m = {:.6}   AT {:.4} ({})",
                        rs.magnetisation,
                        rs.at,
                        if rs.at <= 1.0 {
                            "above the AT line"
                        } else {
                            "below the AT line: RSB"
                        }
                    );
                }
                o += "\n";
            }
        }
        if field_term {
            o +=
                "\nsphere: not computed (the spherical functionals do not take a p = 1 term yet)\n";
            o += &format!("\norder parameters: {}\n", csv_path.display());
            out(&o);
            return Ok(ExitCode::SUCCESS);
        }
        o += &format!(
            "\nsphere, zero temperature\n  ground state (one-step Crisanti–Sommers)   {gs:.7}   L = {l:.4}, m = {m:.4}, q₀ = {q0:.4}\n"
        );
        o += &format!(
            "  ground state (full Crisanti–Sommers)      {:.7}   {} q-intervals: {}\n",
            full_cs.value,
            full_cs.m.len(),
            full_cs.structure()
        );
        o += &format!(
            "  algorithmic value ∫₀¹ √ξ''                {alg:.7}   {}\n",
            if condition {
                "= ground state (ξ''^-1/2 is concave: Subag 2018)"
            } else {
                "a lower bound (ξ''^-1/2 is not concave on (0, 1])"
            }
        );
        o += &format!("\norder parameters: {}\n", csv_path.display());
        out(&o);
    }
    Ok(ExitCode::SUCCESS)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mixtures_parse() {
        assert_eq!(
            parse_mixture("2:0.5,4:0.25").unwrap().terms,
            vec![(2, 0.5), (4, 0.25)]
        );
        assert_eq!(parse_mixture("1:1").unwrap().terms, vec![(1, 1.0)]);
        assert!(parse_mixture("0:1").is_err());
        assert!(parse_mixture("2:-1").is_err());
        assert!(parse_mixture("x").is_err());
        assert!(parse_mixture("3:0").is_err());
    }
}

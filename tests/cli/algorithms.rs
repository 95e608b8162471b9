//! Published algorithms against exact answers and their papers' claims.

use crate::util::id;
use kiln::algo::{
    AlgoSpec, amp, anneal, descent, exhaustive, gradient, iamp, lowrank, spectral, tempering,
};
use kiln::model::{Couplings, ModelSpec};
use kiln::rng::{Purpose, stream};

/// Parallel tempering with its default settings reaches the exact ground state (exhaustive
/// Gray-code search) on at least 95% of n = 24 SK instances (the issue's acceptance level;
/// replica exchange is the standard ground-state baseline at moderate n: Hukushima & Nemoto
/// 1996). Energies compared to 1e-9 (rounding of two sums of 276 terms; common practice).
#[test]
fn tempering_finds_exact_ground_states_at_n_24() {
    let m = ModelSpec::sk(Couplings::Gaussian);
    let pt = AlgoSpec::new(tempering::Params::default());
    let ex = AlgoSpec::new(exhaustive::Params {});
    let total = 40;
    let mut hits = 0;
    for t in 0..total {
        let inst = m.sample(24, &id("pt", t), 0.0);
        let exact = inst.energy(
            &ex.run(&inst, &mut stream(&id("x", t), Purpose::Algorithm, 0))
                .unwrap()
                .spins,
        );
        let got = inst.energy(
            &pt.run(&inst, &mut stream(&id("r", t), Purpose::Algorithm, 0))
                .unwrap()
                .spins,
        );
        assert!(
            got <= exact + 1e-9,
            "instance {t}: tempering {got} beats the exact maximum {exact}"
        );
        if got >= exact - 1e-9 {
            hits += 1;
        }
    }
    assert!(hits * 100 >= 95 * total, "{hits}/{total} ground states");
}

/// Exhaustive search is exact: no other ±1 algorithm beats it, on SK instances with n ≤ 16
/// (and it equals brute force there: tested in the exhaustive module).
#[test]
fn no_algorithm_beats_exhaustive_search() {
    let m = ModelSpec::sk(Couplings::Pm1);
    let ex = AlgoSpec::new(exhaustive::Params {});
    let others = [
        AlgoSpec::new(tempering::Params {
            sweeps: 50,
            ..Default::default()
        }),
        AlgoSpec::new(spectral::Params::default()),
        AlgoSpec::new(gradient::Params::default()),
        AlgoSpec::new(lowrank::Params::default()),
        AlgoSpec::new(descent::Params::default()),
        AlgoSpec::new(anneal::Params::default()),
        AlgoSpec::new(amp::Params::default()),
        AlgoSpec::new(iamp::Params::default()),
    ];
    for t in 0..10 {
        for n in [8usize, 12, 16] {
            let inst = m.sample(n, &id("ex", t), 0.0);
            let exact = inst.energy(
                &ex.run(&inst, &mut stream(&id("x", t), Purpose::Algorithm, 0))
                    .unwrap()
                    .spins,
            );
            for a in &others {
                let e = inst.energy(
                    &a.run(&inst, &mut stream(&id("o", t), Purpose::Algorithm, 0))
                        .unwrap()
                        .spins,
                );
                assert!(
                    e <= exact + 1e-9,
                    "{} beats exhaustive at n {n}: {e} > {exact}",
                    a.kind()
                );
            }
        }
    }
}

/// Low-rank relaxation on SK: the relaxation value per spin never exceeds λ_max/2 (exact:
/// Σ A_ij⟨v_i, v_j⟩ = tr(A VVᵀ) ≤ λ_max·tr(VVᵀ) = λ_max·n; λ_max from nalgebra's symmetric
/// eigendecomposition), it approaches 1 from below as n grows (Montanari & Sen 2016,
/// arXiv:1504.05910: the SDP value per spin → 1; the gap must shrink by a quarter per fourfold
/// n), and the rounded energy lies below the relaxation.
#[test]
fn lowrank_relaxation_below_the_spectral_bound_and_towards_one() {
    let m = ModelSpec::sk(Couplings::Gaussian);
    let algo = AlgoSpec::new(lowrank::Params::default());
    let mut means = Vec::new();
    for n in [50usize, 200, 800] {
        let mut vals = Vec::new();
        for t in 0..4 {
            let inst = m.sample(n, &id("bm", t), 0.0);
            let out = algo
                .run(&inst, &mut stream(&id("bmr", t), Purpose::Algorithm, 0))
                .unwrap();
            let relax = out.info.relaxation.expect("a relaxation value");
            let lmax = crate::util::reference_top(&inst);
            assert!(
                relax <= lmax / 2.0 + 1e-9,
                "n {n}: {relax} > λ/2 = {}",
                lmax / 2.0
            );
            let e = inst.energy(&out.spins) / n as f64;
            assert!(
                e <= relax + 1e-12,
                "rounded {e} above the relaxation {relax}"
            );
            vals.push(relax);
        }
        let mean = vals.iter().sum::<f64>() / vals.len() as f64;
        eprintln!("lowrank SK n = {n}: relaxation per spin {mean:.4}");
        means.push(mean);
    }
    // Measured: 0.809, 0.889, 0.936 (the gap 1 − value shrinks like n^{-0.4}); the solver is
    // converged (tol 1e-11 and rank 120 change the n = 800 value by 4e-6).
    assert!(
        means[0] < means[1] && means[1] < means[2] && means[2] < 1.0,
        "{means:?}"
    );
    assert!(1.0 - means[2] < 0.75 * (1.0 - means[1]), "{means:?}");
    assert!(1.0 - means[1] < 0.75 * (1.0 - means[0]), "{means:?}");
}

/// Hessian ascent (Subag, arXiv:1812.04588). On a quadratic sphere model one step is the top
/// eigenvector: the energy equals the spectral method's λ_max/2 to 1e-8 (a property of the
/// construction). On the pure spherical 3-spin it stays below the ground state 1.657
/// (Crisanti & Sommers 1992) and improves with n towards the threshold 2·sqrt(2/3) ≈ 1.633;
/// the finite-size gap is large at these n (measured 1.44 at n = 100 and 1.54 at n = 300
/// with 40 steps), so the test asserts the direction, not the limit.
#[test]
fn hessian_ascent_on_the_sphere() {
    use kiln::algo::hessian;
    let m2 = ModelSpec::sphere(kiln::theory::Mixture::sk(), Couplings::Gaussian);
    let inst = m2.sample(150, &id("h2", 0), 0.0);
    let one = AlgoSpec::new(hessian::Params {
        steps: 1,
        tol: 1e-12,
        polish: false,
    });
    let x = one
        .run(&inst, &mut stream(&id("h2r", 0), Purpose::Algorithm, 0))
        .unwrap()
        .point
        .unwrap();
    let sp = AlgoSpec::new(spectral::Params::default())
        .run(&inst, &mut stream(&id("h2s", 0), Purpose::Algorithm, 0))
        .unwrap()
        .point
        .unwrap();
    assert!((inst.value(&x) - inst.value(&sp)).abs() / 150.0 < 1e-8);

    let m3 = ModelSpec::sphere(kiln::theory::Mixture::pure(3), Couplings::Gaussian);
    // Pure spherical 3-spin: every output below the ground state 1.657 (Crisanti & Sommers,
    // Z. Phys. B 87, 341 (1992)); the means at n = 100, 200, 400 (4 instances each),
    // extrapolated by weighted least squares in n^{-2/3} (the finite-size exponent of
    // mean-field ground states, common practice), reach 2·sqrt(2/3) = 1.633 (Subag,
    // arXiv:1812.04588) within 3 standard errors of the intercept (propagated from the
    // per-size standard errors). Measured: 1.489, 1.568, 1.585 (→ ≈ 1.64).
    let algo = AlgoSpec::new(hessian::Params::default());
    let (mut xs, mut ys, mut ws) = (Vec::new(), Vec::new(), Vec::new());
    for n in [100usize, 200, 400] {
        // The four instances are independent: run them side by side (same numbers).
        use rayon::prelude::*;
        let e: Vec<f64> = (0..4u64)
            .into_par_iter()
            .map(|t| {
                let inst = m3.sample(n, &id("h3", t), 0.0);
                let out = algo
                    .run(&inst, &mut stream(&id("h3r", t), Purpose::Algorithm, 0))
                    .unwrap();
                inst.value(out.point.as_ref().unwrap()) / n as f64
            })
            .collect();
        for v in &e {
            assert!(*v < 1.657, "n {n}: {v} above the ground state");
        }
        let (mean, se) = crate::util::mean_se(&e);
        eprintln!("Hessian ascent, pure 3-spin, n = {n}: {mean:.4} ± {se:.4}");
        xs.push((n as f64).powf(-2.0 / 3.0));
        ys.push(mean);
        ws.push(1.0 / (se * se).max(1e-12));
    }
    // Weighted least squares y = a + b x and the standard error of a.
    let sw: f64 = ws.iter().sum();
    let sx: f64 = ws.iter().zip(&xs).map(|(w, x)| w * x).sum();
    let sy: f64 = ws.iter().zip(&ys).map(|(w, y)| w * y).sum();
    let sxx: f64 = ws.iter().zip(&xs).map(|(w, x)| w * x * x).sum();
    let sxy: f64 = ws
        .iter()
        .zip(xs.iter().zip(&ys))
        .map(|(w, (x, y))| w * x * y)
        .sum();
    let det = sw * sxx - sx * sx;
    let a = (sxx * sy - sx * sxy) / det;
    let se_a = (sxx / det).sqrt();
    let alg = 2.0 * (2.0f64 / 3.0).sqrt();
    eprintln!("extrapolated: {a:.4} ± {se_a:.4} (threshold {alg:.4})");
    assert!((a - alg).abs() < 3.0 * se_a, "{a} ± {se_a} vs {alg}");
}

/// Replica overlaps (`sweep.replicas = 3`): two extra independent runs per (instance,
/// algorithm) at ε = 0; the main table keeps its rows and keys (adding replicas recomputes
/// nothing already cached); `overlaps.parquet` holds every pair (values σ^a·σ^b/n: in [−1, 1]
/// and multiples of 2/n; `overlap_sym` = |overlap| on SK); `triples.parquet` every triple with
/// q_min ≤ q_mid ≤ q_max (and the sorted |q|); and a rerun gives identical files.
#[test]
fn replica_overlaps_and_sorted_triples() {
    use crate::util::{SMALL, Work, counts};
    use kiln::store::table;
    let w = Work::new();
    let plain = w.spec("s.toml", SMALL);
    w.run_json(&plain, &[]);
    let before = table::read(&w.path().join("results/small/cells.parquet")).unwrap();
    let rep = w.spec(
        "r.toml",
        &SMALL.replace(
            "epsilons = [0.0, 0.1]",
            "epsilons = [0.0, 0.1]\nreplicas = 3",
        ),
    );
    let v = w.run_json(&rep, &[]);
    // 2 algorithms × 2 sizes × 3 seeds: 2 new replicas at ε = 0 and 2 at ε = 0.1 (48), and
    // the 12 ε = 0.1 cells once more, which now keep their outputs for `chaos.parquet` (their
    // numbers and keys are unchanged); the 12 references are cached.
    assert_eq!(counts(&v), (60, 12));
    let after = table::read(&w.path().join("results/small/cells.parquet")).unwrap();
    assert_eq!(
        before.column("cell_key").unwrap(),
        after.column("cell_key").unwrap()
    );
    let pairs = table::read(&w.path().join("results/small/overlaps.parquet")).unwrap();
    assert_eq!(pairs.height(), 12 * 3);
    let q: Vec<f64> = pairs
        .column("overlap")
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .map(|x| x.unwrap())
        .collect();
    assert!(q.iter().all(|x| (-1.0..=1.0).contains(x)));
    // Overlaps are of ±1 vectors of length n: multiples of 2/n.
    let ns: Vec<u64> = pairs
        .column("n")
        .unwrap()
        .u64()
        .unwrap()
        .iter()
        .map(|x| x.unwrap())
        .collect();
    for (&x, &n) in q.iter().zip(&ns) {
        let n = n as f64;
        assert!(
            ((x * n / 2.0) - (x * n / 2.0).round()).abs() < 1e-9,
            "{x} at n {n}"
        );
    }
    let triples = table::read(&w.path().join("results/small/triples.parquet")).unwrap();
    assert_eq!(triples.height(), 12);
    let col = |c: &str| -> Vec<f64> {
        triples
            .column(c)
            .unwrap()
            .f64()
            .unwrap()
            .iter()
            .map(|x| x.unwrap())
            .collect()
    };
    let (lo, mid, hi) = (col("q_min"), col("q_mid"), col("q_max"));
    for i in 0..12 {
        assert!(lo[i] <= mid[i] && mid[i] <= hi[i]);
    }
    // SK: σ and −σ are one state, so the `_sym` columns hold |q| (sorted within a triple).
    let qsym: Vec<f64> = pairs
        .column("overlap_sym")
        .unwrap()
        .f64()
        .unwrap()
        .into_no_null_iter()
        .collect();
    assert!(q.iter().zip(&qsym).all(|(a, b)| a.abs() == *b));
    let (slo, smid, shi) = (col("q_sym_min"), col("q_sym_mid"), col("q_sym_max"));
    for i in 0..12 {
        let mut v = [lo[i].abs(), mid[i].abs(), hi[i].abs()];
        v.sort_by(f64::total_cmp);
        assert_eq!(v, [slo[i], smid[i], shi[i]]);
    }
    // `kiln plot` draws the histograms; each n's density integrates to 1.
    let o = w.kiln(&["plot", rep.to_str().unwrap()]);
    assert!(o.status.success(), "{}", crate::util::stderr(&o));
    let csv =
        std::fs::read_to_string(w.path().join("results/small/figures/overlaps-d.csv")).unwrap();
    let mut mass = std::collections::BTreeMap::<String, f64>::new();
    for l in csv.lines().skip(2) {
        let f: Vec<&str> = l.split(',').collect();
        assert_eq!(f[0], "density", "{l}");
        let (lo, hi, d): (f64, f64, f64) = (
            f[3].parse().unwrap(),
            f[4].parse().unwrap(),
            f[5].parse().unwrap(),
        );
        *mass.entry(f[2].to_string()).or_default() += (hi - lo) * d;
    }
    assert_eq!(mass.len(), 2, "{csv}");
    assert!(mass.values().all(|m| (m - 1.0).abs() < 1e-9), "{mass:?}");
    assert!(
        w.path()
            .join("results/small/figures/overlaps-d.png")
            .is_file()
    );
    // Deterministic: a second run (all cached) rewrites identical replica tables.
    let read = |f: &str| std::fs::read(w.path().join("results/small").join(f)).unwrap();
    let first = (read("overlaps.parquet"), read("chaos.parquet"));
    let v = w.run_json(&rep, &[]);
    assert_eq!(counts(&v), (0, 72));
    assert_eq!(first, (read("overlaps.parquet"), read("chaos.parquet")));
    // One chaos row per (algorithm, n, seed) at ε = 0.1, from K = 3 samples on each instance.
    let chaos = table::read(&w.path().join("results/small/chaos.parquet")).unwrap();
    assert_eq!(chaos.height(), 12);
    assert!(
        chaos
            .column("replicas")
            .unwrap()
            .u32()
            .unwrap()
            .iter()
            .all(|r| r == Some(3))
    );
}

/// Spectral rounding on SK. Its eigenvalue matches nalgebra's symmetric eigendecomposition to
/// 1e-8 at n = 400 (H(√n v)/n = λ_max/2 on the point before rounding); the rounded energy per
/// spin at n = 2000, averaged over 4 seeds, lies in the range of shared/REFERENCES.md: below
/// 2/π = 0.63662 ("sign of the top eigenvector → 2/π; finite n lies slightly below", a standard
/// derivation) by at most 0.02 + 3 SE (the finite-n allowance is our choice, stated here).
#[test]
fn spectral_on_sk() {
    let m = ModelSpec::sk(Couplings::Gaussian);
    let algo = AlgoSpec::new(spectral::Params::default());
    let n = 400;
    let inst = m.sample(n, &id("sp", 0), 0.0);
    let out = algo
        .run(&inst, &mut stream(&id("spr", 0), Purpose::Algorithm, 0))
        .unwrap();
    let lmax = crate::util::reference_top(&inst);
    let kiln::model::Instance::Sk(d) = &inst else {
        unreachable!()
    };
    let x = out.point.unwrap();
    let quad: f64 = {
        let mut y = vec![0.0; n];
        d.matvec(&x, &mut y);
        x.iter().zip(&y).map(|(a, b)| a * b).sum::<f64>() / n as f64
    };
    assert!((quad - lmax).abs() < 1e-8, "{quad} vs {lmax}");

    let n = 2000;
    let e: Vec<f64> = (0..4)
        .map(|t| {
            let inst = m.sample(n, &id("sp2", t), 0.0);
            let out = algo
                .run(&inst, &mut stream(&id("sp2r", t), Purpose::Algorithm, 0))
                .unwrap();
            inst.energy(&out.spins) / n as f64
        })
        .collect();
    let (mean, se) = crate::util::mean_se(&e);
    let two_over_pi = 2.0 / std::f64::consts::PI;
    assert!(
        mean < two_over_pi + 3.0 * se && mean > two_over_pi - 0.02 - 3.0 * se,
        "{mean} ± {se}"
    );
}

/// Every algorithm is deterministic given its stream (the same cell twice gives identical
/// output), and every key its kind declares is part of its canonical settings (so of every
/// cache key): a setting left out of `canon` would let two different runs share a cell.
#[test]
fn every_algorithm_is_deterministic_and_keyed_by_its_revision() {
    use kiln::algo::hessian;
    let cube = ModelSpec::sk(Couplings::Pm1);
    let sphere = ModelSpec::sphere(kiln::theory::Mixture::pure(3), Couplings::Gaussian);
    let cases: Vec<(ModelSpec, AlgoSpec)> = vec![
        (cube.clone(), AlgoSpec::new(descent::Params::default())),
        (cube.clone(), AlgoSpec::new(anneal::Params::default())),
        (cube.clone(), AlgoSpec::new(exhaustive::Params {})),
        (cube.clone(), AlgoSpec::new(spectral::Params::default())),
        (cube.clone(), AlgoSpec::new(tempering::Params::default())),
        (cube.clone(), AlgoSpec::new(lowrank::Params::default())),
        (cube.clone(), AlgoSpec::new(gradient::Params::default())),
        (sphere.clone(), AlgoSpec::new(gradient::Params::default())),
        (sphere.clone(), AlgoSpec::new(hessian::Params::default())),
        (cube.clone(), AlgoSpec::new(amp::Params::default())),
        (
            // AMP's Onsager term with ξ'' on a mixture (p = 2 and 3 terms).
            ModelSpec::cube(
                kiln::theory::Mixture {
                    terms: vec![(2, 0.5), (3, 0.25)],
                },
                Couplings::Pm1,
            ),
            AlgoSpec::new(amp::Params::default()),
        ),
        (cube.clone(), AlgoSpec::new(iamp::Params::default())),
        (
            // The start at overlap δ with the field from t = δ (ξ''(0) = 0).
            ModelSpec::cube(kiln::theory::Mixture::pure(3), Couplings::Gaussian),
            AlgoSpec::new(iamp::Params::default()),
        ),
        (
            cube.clone(),
            AlgoSpec::new(kiln::algo::glauber::Params::default()),
        ),
        (
            sphere.clone(),
            AlgoSpec::new(kiln::algo::langevin::Params::default()),
        ),
        (
            cube.clone(),
            AlgoSpec::new(kiln::algo::localization::Params::default()),
        ),
        (
            kiln::spec::model_of("family = \"ksat\"\nk = 3\ndensity = 4.5").expect("a model"),
            AlgoSpec::new(kiln::algo::walksat::Params::default()),
        ),
        (
            kiln::spec::model_of(
                "family = \"perceptron\"\ndomain = \"sphere\"\ndensity = 1.5\nmargin = 0.2",
            )
            .expect("a model"),
            AlgoSpec::new(kiln::algo::least_distance::Params {}),
        ),
        (
            kiln::spec::model_of(
                "family = \"perceptron\"\ndomain = \"sphere\"\nconstraint = \"quadratic\"\ndensity = 1.5",
            )
            .expect("a model"),
            AlgoSpec::new(kiln::algo::langevin::Params::default()),
        ),
    ];
    let mut kinds = std::collections::BTreeSet::new();
    for (m, a) in &cases {
        let inst = m.sample(20, &id("det", 0), 0.0);
        let run = || {
            a.run(&inst, &mut stream(&id("detr", 0), Purpose::Algorithm, 0))
                .unwrap()
        };
        let (x, y) = (run(), run());
        assert_eq!(x.spins, y.spins, "{}", a.kind());
        assert_eq!(x.info, y.info, "{}", a.kind());
        let bits = |p: &Option<Vec<f64>>| {
            p.as_ref()
                .map(|v| v.iter().map(|f| f.to_bits()).collect::<Vec<_>>())
        };
        assert_eq!(bits(&x.point), bits(&y.point), "{}", a.kind());
        let settings = a.settings();
        let kind = kiln::algo::find(a.kind()).expect("a registered kind");
        for key in kind.keys {
            // tempering's `temperatures` is canonically "replicas", its name before a rename
            // (kept so cache keys did not change); its `output` enters only when it is not the
            // default "best" (so the keys of cells from before the sampling mode did not
            // change): checked with `output = "sample"` below; so does iamp's `start` (keys
            // from before it existed), checked with `start = 0.02` below.
            let canonical = match (a.kind(), key.name) {
                ("tempering", "temperatures") => "replicas",
                ("tempering", "output") | ("iamp", "start") => continue,
                (_, name) => name,
            };
            assert!(
                settings.contains(&format!("\"{canonical}\":")),
                "{}: `{}` is not in the canonical settings {settings}",
                a.kind(),
                key.name
            );
        }
        kinds.insert(a.kind());
    }
    let sampling = AlgoSpec::new(tempering::Params {
        sample: true,
        ..Default::default()
    });
    assert!(sampling.settings().contains("\"output\":\"sample\""));
    let started = AlgoSpec::new(iamp::Params {
        start: Some(0.02),
        ..Default::default()
    });
    assert!(started.settings().contains("\"start\":0.02"));
    assert_ne!(
        sampling.settings(),
        AlgoSpec::new(tempering::Params::default()).settings()
    );
    assert_eq!(
        kinds.len(),
        kiln::algo::builtin().len(),
        "every kind is covered"
    );
}

/// AMP at (β, h) on the replica-symmetric side of the AT line converges, and the value of its
/// fixed point is the state-evolution prediction H(m)/n = βq(1 − q), q = E tanh²(h + β√q Z)
/// (Bolthausen, Commun. Math. Phys. 325 (2014), arXiv:1201.2891: the iterates' empirical law is
/// m = tanh(h + β√q Z); then ⟨m, Am⟩/n = ⟨m, z⟩/n + β(1 − q)q with z the Onsager-corrected
/// field, and Stein's lemma gives E[m·√q Z] = βq(1 − q); derived here, common practice).
/// q is solved independently of kiln (Simpson's rule, 4000 panels on [−10, 10]). Tolerance:
/// 4 SE of the mean over 4 instances at n = 3000 plus 0.005 for the O(n^{-1/2}) finite-size
/// bias of state evolution (common practice). Also: AMP's output moves much less than
/// annealing's under ε = 0.01 (stable vs unstable), before and after rounding.
#[test]
fn amp_matches_state_evolution_and_is_stable() {
    let (beta, h) = (1.2, 0.8);
    let q_star = {
        let (steps, z0) = (4000, 10.0);
        let hh = 2.0 * z0 / steps as f64;
        let e = |q: f64| -> f64 {
            (0..=steps)
                .map(|i| {
                    let z = -z0 + i as f64 * hh;
                    let w = if i == 0 || i == steps {
                        1.0
                    } else if i % 2 == 1 {
                        4.0
                    } else {
                        2.0
                    };
                    w * (-0.5 * z * z).exp() * (h + beta * q.sqrt() * z).tanh().powi(2)
                })
                .sum::<f64>()
                * hh
                / 3.0
                / (2.0 * std::f64::consts::PI).sqrt()
        };
        let mut q: f64 = 1.0;
        for _ in 0..500 {
            q = e(q);
        }
        q
    };
    let want = beta * q_star * (1.0 - q_star);
    let m = ModelSpec::sk(Couplings::Gaussian);
    let algo = AlgoSpec::new(amp::Params {
        beta,
        field: h,
        ..Default::default()
    });
    let n = 3000;
    let values: Vec<f64> = (0..4)
        .map(|t| {
            let inst = m.sample(n, &id("amp", t), 0.0);
            let out = algo
                .run(&inst, &mut stream(&id("ampr", t), Purpose::Algorithm, 0))
                .unwrap();
            assert!(out.info.converged, "instance {t}: {:?}", out.info);
            out.info.relaxation.unwrap()
        })
        .collect();
    let (mean, se) = crate::util::mean_se(&values);
    eprintln!("AMP H(m)/n = {mean:.5} ± {se:.5}, state evolution {want:.5} (q = {q_star:.5})");
    assert!(
        (mean - want).abs() < 4.0 * se + 0.005,
        "{mean} ± {se} vs {want}"
    );

    // Stability at n = 1000, ε = 0.01, 3 instances: mean distance of AMP's spins below half
    // of annealing's (measured 0.41 vs 1.3 at n = 2000), its point's below a quarter.
    let n = 1000;
    let anneal = AlgoSpec::new(anneal::Params::default());
    let (mut d_amp, mut d_point, mut d_anneal) = (0.0, 0.0, 0.0);
    for t in 0..3 {
        let a = m.sample(n, &id("amps", t), 0.0);
        let b = m.sample(n, &id("amps", t), 0.01);
        let run = |algo: &AlgoSpec, inst: &kiln::model::Instance| {
            algo.run(inst, &mut stream(&id("ampsr", t), Purpose::Algorithm, 0))
                .unwrap()
        };
        let (x, y) = (run(&algo, &a), run(&algo, &b));
        d_amp += kiln::measure::distance(&x.spins, &y.spins) / 3.0;
        d_point +=
            kiln::measure::distance_points(x.point.as_ref().unwrap(), y.point.as_ref().unwrap())
                / 3.0;
        let (x, y) = (run(&anneal, &a), run(&anneal, &b));
        d_anneal += kiln::measure::distance(&x.spins, &y.spins) / 3.0;
    }
    eprintln!("distance at ε = 0.01: AMP {d_amp:.3} (point {d_point:.3}), annealing {d_anneal:.3}");
    assert!(d_amp < 0.5 * d_anneal && d_point < 0.25 * d_anneal);
}

/// Incremental AMP on SK, driven by kiln's own full-RSB solution: the energy of sign(m)
/// approaches the Parisi value P* = 0.7631667 (Crisanti & Rizzo, Phys. Rev. E 65, 046137
/// (2002)); Montanari (arXiv:1812.10897) proves (1 − ε)P* for large n and small δ. At n = 3000
/// with the default δ = 0.01 it must beat 0.97·P* = 0.7403 (measured 0.744 at n = 4000) and
/// single-flip descent on the same instances (≈ 0.69, REFERENCES: common practice) by
/// 4 SE; the pre-rounding value H(m)/n must lie below P* + 4 SE + 0.02 (m is a point of the
/// cube's hull up to the Euler overshoot of the martingale, |m_i| slightly above 1 at the end;
/// measured 0.769 at n = 4000). 3 instances.
#[test]
fn iamp_approaches_the_parisi_value() {
    let m = ModelSpec::sk(Couplings::Gaussian);
    let algo = AlgoSpec::new(iamp::Params::default());
    let desc = AlgoSpec::new(descent::Params::default());
    let n = 3000;
    // The three instances are independent: run side by side, collected in order.
    use rayon::prelude::*;
    let runs: Vec<(f64, f64, f64)> = (0..3u64)
        .into_par_iter()
        .map(|t| {
            let inst = m.sample(n, &id("iamp", t), 0.0);
            let out = algo
                .run(&inst, &mut stream(&id("iampr", t), Purpose::Algorithm, 0))
                .unwrap();
            let d = desc
                .run(&inst, &mut stream(&id("iampd", t), Purpose::Algorithm, 0))
                .unwrap();
            (
                inst.energy(&out.spins) / n as f64,
                inst.energy(&d.spins) / n as f64,
                out.info.relaxation.unwrap(),
            )
        })
        .collect();
    let e: Vec<f64> = runs.iter().map(|r| r.0).collect();
    let dsc: Vec<f64> = runs.iter().map(|r| r.1).collect();
    let relax: Vec<f64> = runs.iter().map(|r| r.2).collect();
    let (me, se) = crate::util::mean_se(&e);
    let (md, sd) = crate::util::mean_se(&dsc);
    let (mr, sr) = crate::util::mean_se(&relax);
    eprintln!("IAMP n = {n}: sign(m) {me:.4} ± {se:.4}, H(m)/n {mr:.4} ± {sr:.4}; descent {md:.4}");
    let p_star = 0.7631667;
    assert!(me > 0.97 * p_star - 4.0 * se, "{me} ± {se}");
    assert!(
        me - md > 4.0 * (se * se + sd * sd).sqrt(),
        "IAMP {me} vs descent {md}"
    );
    assert!(mr < p_star + 4.0 * sr + 0.02, "{mr} ± {sr}");

    // The same construction on a mixture, ξ = q²/2 + q³/4 (tensor AMP with ξ'' in the
    // Onsager sum; El Alaoui, Montanari & Sellke, arXiv:2001.00904), driven by kiln's full-RSB
    // solution for that ξ (0.96626, tests/cli/theory.rs). At n = 400 (10 instances) sign(m) must
    // beat descent by 4 SE of the paired difference (descent scatters by 0.03 per instance) and
    // reach 0.9 of the Parisi value (measured 0.901–0.911; finite-size loss at this n is
    // several percent, cf. annealing 0.919).
    let mix = ModelSpec::cube(
        kiln::theory::Mixture {
            terms: vec![(2, 0.5), (3, 0.25)],
        },
        Couplings::Gaussian,
    );
    let n = 400;
    let (mut e, mut dsc) = (Vec::new(), Vec::new());
    for t in 0..10 {
        let inst = mix.sample(n, &id("iampx", t), 0.0);
        let out = algo
            .run(&inst, &mut stream(&id("iampxr", t), Purpose::Algorithm, 0))
            .unwrap();
        e.push(inst.energy(&out.spins) / n as f64);
        let d = desc
            .run(&inst, &mut stream(&id("iampxd", t), Purpose::Algorithm, 0))
            .unwrap();
        dsc.push(inst.energy(&d.spins) / n as f64);
    }
    let (me, se) = crate::util::mean_se(&e);
    // Paired over instances: the instance-to-instance scatter cancels.
    let diff: Vec<f64> = e.iter().zip(&dsc).map(|(a, b)| a - b).collect();
    let (md, sd) = crate::util::mean_se(&diff);
    eprintln!("IAMP mixture n = {n}: {me:.4} ± {se:.4}; IAMP − descent {md:.4} ± {sd:.4}");
    assert!(me > 0.9 * 0.96626, "{me} ± {se}");
    assert!(md > 4.0 * sd, "IAMP − descent {md} ± {sd}");
}

/// Exhaustive search is exact on instances without the σ → −σ symmetry: on the pure 3-spin
/// cube (H(−σ) = −H(σ)) its maximum equals a brute force over all 2^n states written here
/// (each state's energy from scratch), at n = 10 over 5 instances. Before revision 2 it fixed
/// the last spin and could return the minimum's mirror instead (exact comparison: the same
/// sums, common practice).
#[test]
fn exhaustive_is_exact_without_the_global_flip_symmetry() {
    let m = ModelSpec::cube(kiln::theory::Mixture::pure(3), Couplings::Gaussian);
    let ex = AlgoSpec::new(exhaustive::Params {});
    let n = 10;
    let mut differs = 0;
    for t in 0..5 {
        let inst = m.sample(n, &id("odd", t), 0.0);
        let out = ex
            .run(&inst, &mut stream(&id("oddr", t), Purpose::Algorithm, 0))
            .unwrap();
        let mut best = f64::MIN;
        let mut best_fixed = f64::MIN;
        for code in 0u32..(1 << n) {
            let s: Vec<i8> = (0..n)
                .map(|i| if code >> i & 1 == 1 { -1 } else { 1 })
                .collect();
            let e = inst.energy(&s);
            best = best.max(e);
            if s[n - 1] == 1 {
                best_fixed = best_fixed.max(e);
            }
        }
        let got = inst.energy(&out.spins);
        assert!(
            (got - best).abs() <= 1e-9 * best.abs().max(1.0),
            "{got} vs {best}"
        );
        differs += usize::from(best_fixed < best - 1e-9);
    }
    assert!(
        differs > 0,
        "the half-enumeration would have been exact on every instance"
    );
}

/// Incremental AMP follows its state evolution on the pure 3-spin cube ξ = q³/2, where
/// ξ''(0) = 0. The k-th gradient is taken at m^{k−1}, whose ‖·‖²/n state evolution sets to
/// t = q₀ + (k − 1)δ: each increment of m has ‖·‖²/n = δ (the rescaling c_k) and is
/// independent of the iterate it is added to (El Alaoui, Montanari & Sellke 2021,
/// arXiv:2001.00904, the state evolution of their iteration). With `decorrelate` (the default)
/// the largest departure |‖m‖²/n − t| at n = 300 stays below 0.03 for t ≤ 1/2 and below 0.1
/// over the whole run, on each of 3 instances. What is left is the sum of the cross terms
/// 2⟨m^j − m^{j−1}, m^{j−1}⟩/n, each of order n^−1/2; measured on these instances it reaches
/// 0.02 by t = 1/2 and 0.07 at the end, where ∂ₓₓΦ is large. Without it the iteration
/// oscillates along m (0.15 to 0.2 measured by t = 1/2 at this n), which the test also asserts
/// on at least one instance, so the check can fail.
#[test]
fn iamp_stays_on_its_state_evolution_on_the_pure_3_spin_cube() {
    use kiln::model::Instance;
    let xi = kiln::theory::Mixture {
        terms: vec![(3, 0.5)],
    };
    let model = ModelSpec::cube(xi.clone(), Couplings::Gaussian);
    let n = 300;
    // (largest departure for t ≤ 1/2, largest over the run)
    let departure = |inst: &Instance, decorrelate: bool, t: u64| -> (f64, f64) {
        let Instance::Cube(m) = inst else {
            panic!("a cube instance")
        };
        let p = iamp::Params {
            decorrelate,
            ..Default::default()
        };
        let mut qs = Vec::new();
        let grad = |x: &[f64], g: &mut [f64]| {
            qs.push(x.iter().map(|v| v * v).sum::<f64>() / n as f64);
            m.value_grad(x, g)
        };
        iamp::run(
            &p,
            n,
            &xi,
            grad,
            &mut stream(&id("se-r", t), Purpose::Algorithm, 0),
        )
        .unwrap();
        // q₀ = δ on the pure model: the k-th call (from 1) is at m^{k−1}, t = kδ; the last call
        // is H(m) at the end, not a step.
        qs.pop();
        let (mut half, mut all) = (0.0f64, 0.0f64);
        for (i, q) in qs.iter().enumerate() {
            let t = (i + 1) as f64 * p.step;
            all = all.max((q - t).abs());
            if t <= 0.5 {
                half = half.max((q - t).abs());
            }
        }
        (half, all)
    };
    let mut plain_left = false;
    for t in 0..3u64 {
        let inst = model.sample(n, &id("se", t), 0.0);
        let (h, a) = departure(&inst, true, t);
        let (ph, pa) = departure(&inst, false, t);
        eprintln!(
            "instance {t}: largest |‖m‖²/n − t| decorrelated {h:.4} (t ≤ 1/2), {a:.4} (all); plain {ph:.4}, {pa:.4}"
        );
        assert!(h < 0.03 && a < 0.1, "instance {t}: departure {h}, {a}");
        plain_left |= ph > 0.1;
    }
    assert!(
        plain_left,
        "the plain iteration stayed on its state evolution too"
    );
}

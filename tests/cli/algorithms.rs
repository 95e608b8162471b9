//! Published algorithms against exact answers and their papers' claims.

use crate::util::id;
use kiln::algo::{AlgoSpec, exhaustive, spectral, tempering};
use kiln::model::{Couplings, ModelSpec};
use kiln::rng::{Purpose, stream};

/// Parallel tempering with its default settings reaches the exact ground state (exhaustive
/// Gray-code search) on at least 95% of n = 24 SK instances (the issue's acceptance level;
/// replica exchange is the standard ground-state baseline at moderate n: Hukushima & Nemoto
/// 1996). Energies compared to 1e-9 (rounding of two sums of 276 terms; common practice).
#[test]
fn tempering_finds_exact_ground_states_at_n_24() {
    let m = ModelSpec::sk(Couplings::Gaussian);
    let pt = AlgoSpec::Tempering(tempering::Params::default());
    let ex = AlgoSpec::Exhaustive(exhaustive::Params {});
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
    let ex = AlgoSpec::Exhaustive(exhaustive::Params {});
    let others = [
        AlgoSpec::Tempering(tempering::Params {
            sweeps: 50,
            ..Default::default()
        }),
        AlgoSpec::Spectral(spectral::Params::default()),
        AlgoSpec::Gradient(Default::default()),
        AlgoSpec::Lowrank(Default::default()),
        AlgoSpec::Descent(Default::default()),
        AlgoSpec::Anneal(Default::default()),
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
    use kiln::algo::lowrank;
    let m = ModelSpec::sk(Couplings::Gaussian);
    let algo = AlgoSpec::Lowrank(lowrank::Params::default());
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
    use kiln::model::Family;
    let mut m2 = ModelSpec::sk(Couplings::Gaussian);
    m2.family = Family::Sphere;
    let inst = m2.sample(150, &id("h2", 0), 0.0);
    let one = AlgoSpec::Hessian(hessian::Params {
        steps: 1,
        tol: 1e-12,
    });
    let x = one
        .run(&inst, &mut stream(&id("h2r", 0), Purpose::Algorithm, 0))
        .unwrap()
        .point
        .unwrap();
    let sp = AlgoSpec::Spectral(spectral::Params::default())
        .run(&inst, &mut stream(&id("h2s", 0), Purpose::Algorithm, 0))
        .unwrap()
        .point
        .unwrap();
    assert!((inst.value(&x) - inst.value(&sp)).abs() / 150.0 < 1e-8);

    let mut m3 = m2.clone();
    m3.xi = kiln::theory::Mixture {
        terms: vec![(3, 1.0)],
    };
    let algo = AlgoSpec::Hessian(hessian::Params::default());
    let mut means = Vec::new();
    for n in [100usize, 300] {
        let mut e = 0.0;
        for t in 0..2 {
            let inst = m3.sample(n, &id("h3", t), 0.0);
            let out = algo
                .run(&inst, &mut stream(&id("h3r", t), Purpose::Algorithm, 0))
                .unwrap();
            let v = inst.value(out.point.as_ref().unwrap()) / n as f64;
            assert!(v < 1.657, "n {n}: {v} above the ground state");
            e += v / 2.0;
        }
        eprintln!("Hessian ascent, pure 3-spin, n = {n}: {e:.4}");
        means.push(e);
    }
    assert!(means[1] > means[0] && means[0] > 1.4, "{means:?}");
}

/// Replica overlaps (`sweep.replicas = 3`): two extra independent runs per (instance,
/// algorithm) at ε = 0; the main table keeps its rows and keys (adding replicas recomputes
/// nothing already cached); `overlaps.parquet` holds every pair (values σ^a·σ^b/n: in [−1, 1]
/// and multiples of 2/n); `triples.parquet` every triple with q_min ≤ q_mid ≤ q_max; and a
/// rerun gives identical files.
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
    // 2 algorithms × 2 sizes × 3 seeds × 2 new replicas computed; the rest cached.
    assert_eq!(counts(&v), (24, 24));
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
    // `kiln plot` draws the histograms; each n's density integrates to 1.
    let o = w.kiln(&["plot", rep.to_str().unwrap()]);
    assert!(o.status.success(), "{}", crate::util::stderr(&o));
    let csv =
        std::fs::read_to_string(w.path().join("results/small/figures/overlaps-d.csv")).unwrap();
    let mut mass = std::collections::BTreeMap::<String, f64>::new();
    for l in csv.lines().skip(2) {
        let f: Vec<&str> = l.split(',').collect();
        let (lo, hi, d): (f64, f64, f64) = (
            f[2].parse().unwrap(),
            f[3].parse().unwrap(),
            f[4].parse().unwrap(),
        );
        *mass.entry(f[1].to_string()).or_default() += (hi - lo) * d;
    }
    assert_eq!(mass.len(), 2, "{csv}");
    assert!(mass.values().all(|m| (m - 1.0).abs() < 1e-9), "{mass:?}");
    assert!(
        w.path()
            .join("results/small/figures/overlaps-d.png")
            .is_file()
    );
    // Deterministic: a second run (all cached) rewrites identical overlap tables.
    let first = std::fs::read(w.path().join("results/small/overlaps.parquet")).unwrap();
    let v = w.run_json(&rep, &[]);
    assert_eq!(counts(&v), (0, 48));
    assert_eq!(
        first,
        std::fs::read(w.path().join("results/small/overlaps.parquet")).unwrap()
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
    let algo = AlgoSpec::Spectral(spectral::Params::default());
    let n = 400;
    let inst = m.sample(n, &id("sp", 0), 0.0);
    let out = algo
        .run(&inst, &mut stream(&id("spr", 0), Purpose::Algorithm, 0))
        .unwrap();
    let lmax = crate::util::reference_top(&inst);
    let kiln::model::Instance::Dense(d) = &inst else {
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
/// output), and its kind and revision are part of its canonical settings (so of every cache
/// key).
#[test]
fn every_algorithm_is_deterministic_and_keyed_by_its_revision() {
    use kiln::algo::{anneal, descent, gradient, hessian, lowrank};
    use kiln::model::Family;
    let cube = ModelSpec::sk(Couplings::Pm1);
    let mut sphere = ModelSpec::sk(Couplings::Gaussian);
    sphere.family = Family::Sphere;
    sphere.xi = kiln::theory::Mixture {
        terms: vec![(3, 1.0)],
    };
    let cases: Vec<(ModelSpec, AlgoSpec)> = vec![
        (cube.clone(), AlgoSpec::Descent(descent::Params::default())),
        (cube.clone(), AlgoSpec::Anneal(anneal::Params::default())),
        (cube.clone(), AlgoSpec::Exhaustive(exhaustive::Params {})),
        (
            cube.clone(),
            AlgoSpec::Spectral(spectral::Params::default()),
        ),
        (
            cube.clone(),
            AlgoSpec::Tempering(tempering::Params::default()),
        ),
        (cube.clone(), AlgoSpec::Lowrank(lowrank::Params::default())),
        (
            cube.clone(),
            AlgoSpec::Gradient(gradient::Params::default()),
        ),
        (
            sphere.clone(),
            AlgoSpec::Gradient(gradient::Params::default()),
        ),
        (
            sphere.clone(),
            AlgoSpec::Hessian(hessian::Params::default()),
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
        assert!(
            settings.contains("revision") && settings.contains(a.kind()),
            "{settings}"
        );
        kinds.insert(a.kind());
    }
    assert_eq!(kinds.len(), AlgoSpec::KINDS.len(), "every kind is covered");
}

//! Model families (cube and sphere mixtures, sparse graphs, lattices): the defining properties
//! of each, checked against their sources, and every example spec run end to end.

use crate::util::{Work, stderr};
use crate::util::{id, mean_se, reference_top};
use kiln::algo::{AlgoSpec, exhaustive, spectral};
use kiln::model::sparse::{self, Graph};
use kiln::model::{Couplings, ModelSpec};
use kiln::rng::{Purpose, stream};
use kiln::theory::Mixture;
use std::collections::HashSet;

fn mixed(family: &str, terms: &[(u32, f64)]) -> ModelSpec {
    let xi = Mixture {
        terms: terms.to_vec(),
    };
    match family {
        "cube" => ModelSpec::cube(xi, Couplings::Gaussian),
        _ => ModelSpec::sphere(xi, Couplings::Gaussian),
    }
}

fn binom(n: u64, k: u64) -> f64 {
    if k > n {
        return 0.0;
    }
    (0..k).fold(1.0, |c, r| c * (n - r) as f64 / (r + 1) as f64)
}

/// E[H(σ)H(σ')]/n for kiln's distinct-index sums: Σ_p c_p² p! e_p(τ)/n^p, where τ = σ∘σ' has
/// `a` entries −1 and n − a entries +1, so e_p(τ) = Σ_k (−1)^k C(a,k) C(n−a, p−k).
fn exact_covariance(xi: &Mixture, n: u64, a: u64) -> f64 {
    xi.terms
        .iter()
        .map(|&(p, c2)| {
            let p = p as u64;
            let e: f64 = (0..=p)
                .map(|k| (if k % 2 == 0 { 1.0 } else { -1.0 }) * binom(a, k) * binom(n - a, p - k))
                .sum();
            let fact: f64 = (1..=p).map(|x| x as f64).product();
            c2 * fact * e / (n as f64).powi(p as i32)
        })
        .sum()
}

/// Acceptance 1 of the model issue. The defining property of the mixed p-spin model:
/// E[H(σ)H(σ')] = n·ξ(R(σ, σ')) (Talagrand 2011, Mean Field Models for Spin Glasses, vol. I,
/// §1.1). kiln sums over distinct indices (documented), which gives the exact finite-n value
/// Σ_p c_p² p! e_p(σ∘σ')/n^{p−1} → n·ξ(R). Over 12 000 instances at n = 24 the empirical mean of
/// H(σ)H(σ')/n must lie within 4 standard errors of that value, for p = 2, 3, 4 and a
/// mixture, at R = 0, 0.5, 1 (4 SE ≈ 0.05·ξ(1): a 5% error in the covariance is caught); and the
/// exact value is within O(p²/n) of ξ(R).
#[test]
fn covariance_is_xi_of_the_overlap() {
    let n = 24u64;
    let samples = 12_000;
    let cases: Vec<Vec<(u32, f64)>> = vec![
        vec![(2, 1.0)],
        vec![(3, 1.0)],
        vec![(4, 1.0)],
        vec![(2, 0.5), (3, 0.3), (4, 0.2)],
    ];
    for terms in cases {
        let m = mixed("cube", &terms);
        let s: Vec<i8> = vec![1; n as usize];
        let flips = [n / 2, n / 4, 0]; // R = 0, 0.5, 1
        // Samples are independent: drawn side by side, collected in order (same numbers).
        use rayon::prelude::*;
        let per_sample: Vec<[f64; 3]> = (0..samples)
            .into_par_iter()
            .map(|t| {
                let inst = m.sample(n as usize, &id(&format!("{terms:?}"), t), 0.0);
                let h0 = inst.energy(&s);
                flips.map(|a| {
                    let mut s2 = s.clone();
                    s2[..a as usize].iter_mut().for_each(|x| *x = -1);
                    h0 * inst.energy(&s2) / n as f64
                })
            })
            .collect();
        let prods: Vec<Vec<f64>> = (0..3)
            .map(|r| per_sample.iter().map(|p| p[r]).collect())
            .collect();
        let xi = m.mixture().unwrap();
        for (r, &a) in flips.iter().enumerate() {
            let (mean, se) = mean_se(&prods[r]);
            let exact = exact_covariance(m.mixture().unwrap(), n, a);
            let big_r = 1.0 - 2.0 * a as f64 / n as f64;
            let p_max = terms.iter().map(|t| t.0).max().unwrap() as f64;
            assert!(
                (mean - exact).abs() < 4.0 * se,
                "{terms:?} R = {big_r}: mean {mean} vs exact {exact} (se {se})"
            );
            assert!(
                (exact - xi.xi(big_r)).abs() <= p_max * p_max / n as f64 * xi.xi(1.0),
                "{terms:?}: diagonal correction too large"
            );
        }
    }
}

/// `family = "sk"` and `family = "cube"` with ξ = q²/2 are the same model: same couplings,
/// same energies, bit for bit (documented in the README).
#[test]
fn sk_and_the_sk_mixture_agree() {
    let sk = ModelSpec::sk(Couplings::Gaussian);
    let cube = mixed("cube", &[(2, 0.5)]);
    assert_eq!(
        sk.disorder_canon().hash("x"),
        cube.disorder_canon().hash("x")
    );
    let a = sk.sample(50, &id("same", 0), 0.0);
    let b = cube.sample(50, &id("same", 0), 0.0);
    let mut r = stream(&id("spins", 0), Purpose::Algorithm, 0);
    for _ in 0..20 {
        let s: Vec<i8> = (0..50).map(|_| r.sign() as i8).collect();
        assert_eq!(a.energy(&s).to_bits(), b.energy(&s).to_bits());
    }
}

/// Acceptance 2. On the sphere with ξ = q²/2, max H/n = λ_max(A)/2 (H = ½xᵀAx, ‖x‖² = n;
/// Rayleigh quotient, common practice). kiln's spectral method reaches it: its energy equals
/// half nalgebra's top eigenvalue to 1e-8 at n = 300. And λ_max → 2, the semicircle edge
/// (Füredi & Komlós, Combinatorica 1 (1981)); fluctuations are on the n^{−2/3} scale
/// (Tracy–Widom), so each λ_max must lie within 4·n^{−2/3} of 2.
#[test]
fn sphere_quadratic_maximum_is_half_the_top_eigenvalue() {
    let m = mixed("sphere", &[(2, 0.5)]);
    let algo = AlgoSpec::new(spectral::Params::default());
    for (n, seeds) in [(300usize, 3u64), (1000, 2)] {
        for seed in 0..seeds {
            let inst = m.sample(n, &id("sphere2", seed), 0.0);
            let out = algo
                .run(&inst, &mut stream(&id("run", seed), Purpose::Algorithm, 0))
                .unwrap();
            assert!(out.info.converged);
            let x = out.point.unwrap();
            let norm2: f64 = x.iter().map(|v| v * v).sum();
            assert!((norm2 / n as f64 - 1.0).abs() < 1e-12);
            let kiln = inst.value(&x) / n as f64;
            let lambda = reference_top(&inst);
            if n == 300 {
                assert!(
                    (kiln - lambda / 2.0).abs() < 1e-8,
                    "n {n}: kiln {kiln} vs λ/2 {}",
                    lambda / 2.0
                );
            }
            let scale = (n as f64).powf(-2.0 / 3.0);
            assert!((lambda - 2.0).abs() < 4.0 * scale, "n {n}: λ_max {lambda}");
        }
    }
}

fn check_simple_regular(g: &Graph, d: usize) {
    for i in 0..g.n() {
        assert_eq!(g.degree(i), d, "vertex {i}");
        let (nb, _) = g.adj(i);
        assert!(nb.iter().all(|&j| j as usize != i), "loop at {i}");
        assert!(nb.windows(2).all(|w| w[0] < w[1]), "repeated edge at {i}");
    }
}

/// Acceptance 3, regular graphs: every degree exactly d, no loops, no repeated edges, at
/// n = 10⁶ (the time is printed; no timed assertion).
#[test]
fn regular_graphs_at_a_million_vertices() {
    for d in [3usize, 4] {
        let t = std::time::Instant::now();
        let g = sparse::regular(1_000_000, d, Couplings::Pm1, &id("reg", d as u64), 0.0);
        let secs = t.elapsed().as_secs_f64();
        eprintln!("random {d}-regular graph, n = 10⁶: {secs:.2} s");
        assert_eq!(g.edges(), 1_000_000 * d / 2);
        check_simple_regular(&g, d);
    }
    // Larger d at smaller n, where the configuration model alone is rarely simple.
    let g = sparse::regular(2000, 20, Couplings::Gaussian, &id("reg", 20), 0.0);
    check_simple_regular(&g, 20);
}

/// Acceptance 3, Erdős–Rényi: the degree histogram of G(n, d/n) at n = 2·10⁵, d = 5 passes
/// Pearson's chi-square test against Poisson(d) (the degree law of sparse G(n, d/n), common
/// practice) at level 0.001: bins 0…12 and ≥ 13, 13 degrees of freedom, critical value 34.53
/// (chi-square table, recalled from memory).
#[test]
fn erdos_renyi_degrees_are_poisson() {
    let (n, d) = (200_000usize, 5.0);
    let g = sparse::erdos_renyi(n, d, Couplings::Pm1, &id("er", 0), 0.0);
    let mut counts = [0u64; 14];
    for i in 0..n {
        counts[g.degree(i).min(13)] += 1;
    }
    let mut pk = vec![(-d).exp()];
    for k in 1..13 {
        let prev = pk[k - 1];
        pk.push(prev * d / k as f64);
    }
    pk.push(1.0 - pk.iter().sum::<f64>());
    let chi2: f64 = counts
        .iter()
        .zip(&pk)
        .map(|(&o, &p)| {
            let e = p * n as f64;
            (o as f64 - e).powi(2) / e
        })
        .sum();
    assert!(chi2 < 34.53, "chi-square {chi2}");
    // Mean degree: 2m/n within 5 standard errors of d(n−1)/n (m ~ Binomial).
    let m = g.edges() as f64;
    let mean_m = d * (n as f64 - 1.0) / 2.0;
    assert!((m - mean_m).abs() < 5.0 * mean_m.sqrt(), "m = {m}");
}

fn max_cut(n: usize, edges: &[(u32, u32)]) -> usize {
    let list: Vec<(u32, u32, f64)> = edges.iter().map(|&(a, b)| (a, b, -1.0)).collect();
    let g = Graph::from_edges(n, &list);
    let out = exhaustive::run(&exhaustive::Params {}, &g);
    let h = g.energy(&out.spins);
    ((edges.len() as f64 + h) / 2.0).round() as usize
}

/// Acceptance 4: exhaustive max-cut on graphs with known values (common practice: textbook
/// graph facts): cycle C_n has max cut n (n even) or n − 1 (n odd); K_n has ⌊n²/4⌋; the
/// Petersen graph has 12.
#[test]
fn exhaustive_max_cut_on_known_graphs() {
    for n in 3..=12usize {
        let cycle: Vec<(u32, u32)> = (0..n).map(|i| (i as u32, ((i + 1) % n) as u32)).collect();
        assert_eq!(
            max_cut(n, &cycle),
            if n % 2 == 0 { n } else { n - 1 },
            "C_{n}"
        );
        let complete: Vec<(u32, u32)> = (0..n)
            .flat_map(|i| (i + 1..n).map(move |j| (i as u32, j as u32)))
            .collect();
        assert_eq!(max_cut(n, &complete), n * n / 4, "K_{n}");
    }
    // Petersen: outer 5-cycle, inner pentagram, spokes.
    let mut petersen = Vec::new();
    for i in 0..5u32 {
        petersen.push((i, (i + 1) % 5));
        petersen.push((5 + i, 5 + (i + 2) % 5));
        petersen.push((i, 5 + i));
    }
    assert_eq!(max_cut(10, &petersen), 12);
}

/// Acceptance 5: on periodic L^D lattices every site has the 2D neighbours x ± e_a (mod L),
/// and the sum of all couplings has mean 0 and variance D·n (D·n independent unit-variance
/// couplings; common practice). Over 600 instances: mean within 4 SE, sample variance within
/// 4 SE (SE of a sample variance ≈ σ²·sqrt(2/(N−1)) for near-normal sums).
#[test]
fn lattices_have_the_right_neighbours_and_couplings() {
    for (l, dim) in [(3usize, 2usize), (5, 2), (4, 3)] {
        let g = sparse::lattice(l, dim, Couplings::Gaussian, &id("lat", l as u64), 0.0);
        let n = l.pow(dim as u32);
        assert_eq!(g.n(), n);
        assert_eq!(g.edges(), dim * n);
        for i in 0..n {
            let mut want = HashSet::new();
            for a in 0..dim {
                let st = l.pow(a as u32);
                let x = (i / st) % l;
                want.insert(i - x * st + ((x + 1) % l) * st);
                want.insert(i - x * st + ((x + l - 1) % l) * st);
            }
            let got: HashSet<usize> = g.adj(i).0.iter().map(|&j| j as usize).collect();
            assert_eq!(got, want, "L {l} D {dim} site {i}");
            assert_eq!(g.degree(i), 2 * dim);
        }
    }
    for c in [Couplings::Gaussian, Couplings::Pm1] {
        let (l, dim) = (6usize, 2usize);
        let n = l * l;
        let sums: Vec<f64> = (0..600)
            .map(|t| {
                let g = sparse::lattice(l, dim, c, &id("latsum", t), 0.0);
                g.edge_list().iter().map(|e| e.2).sum()
            })
            .collect();
        let (mean, se) = mean_se(&sums);
        let var = sums.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (sums.len() - 1) as f64;
        let want = (dim * n) as f64;
        assert!(mean.abs() < 4.0 * se, "{c:?}: mean {mean}");
        let var_se = want * (2.0 / (sums.len() - 1) as f64).sqrt();
        assert!(
            (var - want).abs() < 4.0 * var_se,
            "{c:?}: variance {var} vs {want}"
        );
    }
}

/// Pearson correlation of paired couplings.
fn corr(pairs: &[(f64, f64)]) -> f64 {
    let n = pairs.len() as f64;
    let (mx, my) = (
        pairs.iter().map(|p| p.0).sum::<f64>() / n,
        pairs.iter().map(|p| p.1).sum::<f64>() / n,
    );
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for &(x, y) in pairs {
        sxy += (x - mx) * (y - my);
        sxx += (x - mx).powi(2);
        syy += (y - my).powi(2);
    }
    sxy / (sxx * syy).sqrt()
}

fn graph_pairs(a: &Graph, b: &Graph) -> Vec<(f64, f64)> {
    a.edge_list()
        .iter()
        .zip(b.edge_list())
        .map(|(x, y)| {
            assert_eq!((x.0, x.1), (y.0, y.1), "the graph must be kept");
            (x.2, y.2)
        })
        .collect()
}

/// Acceptance 6: correlated resampling gives correlation 1 − ε for every family: coupling
/// correlation within 5/sqrt(m) (the standard error of a sample correlation is ≤ 1/sqrt(m),
/// common practice); for `cut` graphs the fraction of kept edges within 5 binomial standard
/// errors (Erdős–Rényi) or within 2/m + 10⁻³ of 1 − ε (regular: round(εm/2) switches of untouched
/// edges), and the copy stays in its family.
#[test]
fn correlated_copies_have_correlation_one_minus_epsilon() {
    let inst = id("corr", 0);
    for eps in [0.05, 0.3] {
        // Cube and sphere p ≥ 3 tensors (the p = 2 matrix is the SK sampler, tested there).
        let t0 = kiln::model::tensor::Tensor::sample(60, 3, 1.0, Couplings::Pm1, &inst, 0.0);
        let t1 = kiln::model::tensor::Tensor::sample(60, 3, 1.0, Couplings::Pm1, &inst, eps);
        let pairs: Vec<(f64, f64)> = t0
            .entries()
            .iter()
            .copied()
            .zip(t1.entries().iter().copied())
            .collect();
        let c = corr(&pairs);
        assert!(
            (c - (1.0 - eps)).abs() < 5.0 / (pairs.len() as f64).sqrt(),
            "tensor ε {eps}: {c}"
        );
        for c in [Couplings::Gaussian, Couplings::Pm1] {
            for (name, g0, g1) in [
                (
                    "erdos-renyi",
                    sparse::erdos_renyi(20_000, 4.0, c, &inst, 0.0),
                    sparse::erdos_renyi(20_000, 4.0, c, &inst, eps),
                ),
                (
                    "regular",
                    sparse::regular(20_000, 3, c, &inst, 0.0),
                    sparse::regular(20_000, 3, c, &inst, eps),
                ),
                (
                    "lattice",
                    sparse::lattice(100, 2, c, &inst, 0.0),
                    sparse::lattice(100, 2, c, &inst, eps),
                ),
            ] {
                let pairs = graph_pairs(&g0, &g1);
                let r = corr(&pairs);
                assert!(
                    (r - (1.0 - eps)).abs() < 5.0 / (pairs.len() as f64).sqrt(),
                    "{name} {c:?} ε {eps}: {r}"
                );
            }
        }
        // cut: rewiring.
        let kept = |a: &Graph, b: &Graph| {
            let e0: HashSet<(u32, u32)> = a.edge_list().iter().map(|e| (e.0, e.1)).collect();
            b.edge_list()
                .iter()
                .filter(|e| e0.contains(&(e.0, e.1)))
                .count() as f64
                / a.edges() as f64
        };
        let g0 = sparse::erdos_renyi(50_000, 4.0, Couplings::Cut, &inst, 0.0);
        let g1 = sparse::erdos_renyi(50_000, 4.0, Couplings::Cut, &inst, eps);
        let m0 = g0.edges() as f64;
        let f = kept(&g0, &g1);
        assert!(
            (f - (1.0 - eps)).abs() < 5.0 * (eps * (1.0 - eps) / m0).sqrt(),
            "ER cut ε {eps}: kept {f}"
        );
        let mean_m = 4.0 * 49_999.0 / 2.0;
        assert!(
            (g1.edges() as f64 - mean_m).abs() < 5.0 * mean_m.sqrt(),
            "ER copy has {} edges",
            g1.edges()
        );
        let g0 = sparse::regular(50_000, 3, Couplings::Cut, &inst, 0.0);
        let g1 = sparse::regular(50_000, 3, Couplings::Cut, &inst, eps);
        check_simple_regular(&g1, 3);
        let f = kept(&g0, &g1);
        assert!(
            (f - (1.0 - eps)).abs() < 2.0 / g0.edges() as f64 + 1e-3,
            "regular cut ε {eps}: kept {f}"
        );
    }
}

/// Acceptance 8: a dense p = 4 cell at n = 10⁴ (C(10⁴, 4)·8 B ≈ 3 PB) is refused by `check`
/// and `run` with the estimate, before anything is allocated.
#[test]
fn oversized_tensor_cells_are_refused() {
    let w = Work::new();
    let spec = w.spec(
        "big.toml",
        "[experiment]\nname = \"big\"\n[model]\nfamily = \"cube\"\nxi = { 4 = 1.0 }\n[sweep]\nsizes = [10000]\nseeds = 1\n[[algorithm]]\nkind = \"descent\"\n",
    );
    for cmd in ["check", "run"] {
        let o = w.kiln(&[cmd, spec.to_str().unwrap()]);
        assert!(!o.status.success(), "{cmd} accepted it");
        let err = stderr(&o);
        assert!(
            err.contains("n = 10000 needs about") && err.contains("PiB"),
            "{cmd}: {err}"
        );
    }
    assert!(
        !w.path()
            .join("results")
            .join("big")
            .join("cells.parquet")
            .exists()
    );
}

/// Acceptance 7: every example spec in experiments/ runs end to end, and its numbers are in
/// their family's range.
#[test]
fn every_example_spec_runs() {
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("experiments");
    let mut names: Vec<_> = std::fs::read_dir(&root)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|e| e == "toml"))
        .collect();
    names.sort();
    let w = Work::new();
    let (mut kinds, mut families) = (
        std::collections::BTreeSet::new(),
        std::collections::BTreeSet::new(),
    );
    for spec in &names {
        let parsed = kiln::spec::load(spec).expect("an example parses");
        families.insert(parsed.model.family.name());
        kinds.extend(parsed.algorithms.iter().map(|a| a.algo.kind()));
        let v = w.run_json(spec, &["--results", "r", "--cache", "c"]);
        let cells = &v["cells"];
        assert_eq!(cells["failed"].as_u64(), Some(0), "{}", spec.display());
        assert_eq!(
            cells["computed"].as_u64().unwrap() + cells["cached"].as_u64().unwrap(),
            cells["total"].as_u64().unwrap(),
            "{}",
            spec.display()
        );
    }
    for k in kiln::algo::builtin() {
        assert!(
            kinds.contains(k.name),
            "kind `{}` is in no example spec",
            k.name
        );
    }
    for f in kiln::model::builtin() {
        assert!(
            families.contains(f.name),
            "family `{}` is in no example spec",
            f.name
        );
    }
}

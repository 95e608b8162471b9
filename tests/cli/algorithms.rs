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
            let kiln::model::Instance::Dense(d) = &inst else {
                unreachable!()
            };
            let mat = nalgebra::DMatrix::from_fn(n, n, |i, j| d.row(i)[j]);
            let lmax = nalgebra::SymmetricEigen::new(mat)
                .eigenvalues
                .iter()
                .cloned()
                .fold(f64::MIN, f64::max);
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

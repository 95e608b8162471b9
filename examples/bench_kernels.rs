//! Times kiln's dense SK kernels the way the C references in shared/perf-ref time theirs
//! (same n, sweeps and schedule; kiln's own couplings), and prints key=value lines:
//!
//! - descent: sequential single-flip descent from a random start, including the initial
//!   O(n²) fields (the reference's t_total);
//! - anneal: Metropolis annealing, linear β from 0.1 to 5.0 over 500 sweeps, no quench,
//!   attempts per second (the reference times the sweeps only; kiln's time also holds the
//!   initial fields, under 1% of the work here).
//!
//! Instances are generated outside the timed region. `cargo run --release --example
//! bench_kernels -- [n=2048] [reps=5]`; scripts/bench.sh runs it next to the references.

use kiln::algo::{anneal, descent};
use kiln::model::Couplings;
use kiln::model::sk::sample;
use kiln::rng::{Purpose, stream};
use std::time::Instant;

fn median(xs: &mut [f64]) -> f64 {
    xs.sort_by(f64::total_cmp);
    xs[xs.len() / 2]
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let n: usize = args.get(1).and_then(|s| s.parse().ok()).unwrap_or(2048);
    let reps: usize = args.get(2).and_then(|s| s.parse().ok()).unwrap_or(5);
    let mut t_desc = Vec::new();
    let mut flips = Vec::new();
    let mut rate = Vec::new();
    for r in 0..reps {
        let d = sample(n, Couplings::Gaussian, &[r as u8 + 1; 32], 0.0);
        let p = descent::Params {
            order: descent::Order::Sequential,
            ..descent::Params::default()
        };
        let t = Instant::now();
        let out = descent::run(
            &p,
            &d,
            &mut stream(&[r as u8 + 100; 32], Purpose::Algorithm, 0),
        );
        t_desc.push(t.elapsed().as_secs_f64());
        flips.push(out.info.iterations as f64);
        let p = anneal::Params {
            sweeps: 500,
            beta: [0.1, 5.0],
            quench: false,
        };
        let t = Instant::now();
        let _ = anneal::run(
            &p,
            &d,
            &mut stream(&[r as u8 + 200; 32], Purpose::Algorithm, 0),
        );
        rate.push((n * 500) as f64 / t.elapsed().as_secs_f64());
    }
    let (lo, hi) = (
        t_desc.iter().cloned().fold(f64::MAX, f64::min),
        t_desc.iter().cloned().fold(0.0, f64::max),
    );
    println!(
        "prog=kiln_descent n={n} reps={reps} t_total_med_ms={:.3} t_total_min_ms={:.3} t_total_max_ms={:.3} flips_med={:.0}",
        median(&mut t_desc) * 1e3,
        lo * 1e3,
        hi * 1e3,
        median(&mut flips)
    );
    let (rlo, rhi) = (
        rate.iter().cloned().fold(f64::MAX, f64::min),
        rate.iter().cloned().fold(0.0, f64::max),
    );
    println!(
        "prog=kiln_anneal n={n} sweeps=500 reps={reps} attempts_per_s_med={:.3e} attempts_per_s_min={rlo:.3e} attempts_per_s_max={rhi:.3e}",
        median(&mut rate)
    );
}

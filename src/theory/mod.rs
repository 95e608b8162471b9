//! Theory values computed in-tool: the zero-temperature Parisi functional on the cube
//! (replica-symmetric and k-step replica-symmetry-breaking solutions) and the spherical
//! ground state and algorithmic value.
//!
//! Normalisation (as everywhere in kiln): E[H(σ)H(τ)] = n·ξ(R(σ,τ)), ξ(q) = Σ_p c_p² q^p;
//! SK is ξ(q) = q²/2. Values are lim max H/n (maximisation).

pub mod cached;
pub mod cube;
pub mod full;
pub mod ksat;
pub mod perceptron;
pub mod quad;
pub mod sphere;
pub mod temperature;

/// A mixture ξ(q) = Σ_p c_p² q^p, given by its (p, c_p²) terms.
#[derive(Clone, Debug, PartialEq)]
pub struct Mixture {
    pub terms: Vec<(u32, f64)>,
}

impl Mixture {
    /// SK in kiln's normalisation: ξ(q) = q²/2.
    pub fn sk() -> Mixture {
        Mixture {
            terms: vec![(2, 0.5)],
        }
    }

    /// Pure p-spin, ξ(q) = q^p.
    pub fn pure(p: u32) -> Mixture {
        Mixture {
            terms: vec![(p, 1.0)],
        }
    }

    /// Canonical identity: the (p, c_p²) terms in the order given.
    pub fn canon(&self) -> crate::cell::Canon {
        use crate::cell::Canon;
        Canon::List(
            self.terms
                .iter()
                .map(|&(p, c)| Canon::List(vec![Canon::Int(p as i64), Canon::Real(c)]))
                .collect(),
        )
    }

    pub fn xi(&self, q: f64) -> f64 {
        self.terms.iter().map(|&(p, c)| c * q.powi(p as i32)).sum()
    }

    /// ξ'(q).
    pub fn d1(&self, q: f64) -> f64 {
        self.terms
            .iter()
            .map(|&(p, c)| c * p as f64 * q.powi(p as i32 - 1))
            .sum()
    }

    /// ξ''(q).
    pub fn d2(&self, q: f64) -> f64 {
        self.terms
            .iter()
            .filter(|&&(p, _)| p >= 2)
            .map(|&(p, c)| c * (p * (p - 1)) as f64 * q.powi(p as i32 - 2))
            .sum()
    }

    /// ξ'''(q).
    pub fn d3(&self, q: f64) -> f64 {
        self.terms
            .iter()
            .filter(|&&(p, _)| p >= 3)
            .map(|&(p, c)| c * (p * (p - 1) * (p - 2)) as f64 * q.powi(p as i32 - 3))
            .sum()
    }
}

/// Golden-section search for the minimum of a unimodal `f` on [lo, hi] (`iters` steps, each
/// shrinking the bracket by 0.618).
pub fn golden_section<F: Fn(f64) -> f64>(f: F, mut lo: f64, mut hi: f64, iters: usize) -> f64 {
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..iters {
        let c = hi - g * (hi - lo);
        let d = lo + g * (hi - lo);
        if f(c) < f(d) {
            hi = d;
        } else {
            lo = c;
        }
    }
    0.5 * (lo + hi)
}

/// L-BFGS minimisation (Nocedal & Wright, Numerical Optimization, Algorithm 7.4; memory 12)
/// with a backtracking Armijo line search (at most 40 halvings), of `f` returning (value,
/// gradient; an infeasible point returns +∞), from `x0`. A direction that does not descend,
/// or a failed line search, restarts from steepest descent. Stops after `iters` iterations,
/// when the largest gradient entry is below `gtol`, or when steepest descent no longer moves
/// f. Returns (point, value, gradient, iterations).
pub fn lbfgs<F: Fn(&[f64]) -> (f64, Vec<f64>)>(
    f: F,
    x0: &[f64],
    iters: usize,
    gtol: f64,
) -> (Vec<f64>, f64, Vec<f64>, usize) {
    use crate::kernels::dot_sequential as dot;
    let mut x = x0.to_vec();
    let (mut fx, mut g) = f(&x);
    let mut hist: Vec<(Vec<f64>, Vec<f64>, f64)> = Vec::new();
    let mut it = 0;
    while it < iters {
        it += 1;
        // Two-loop recursion.
        let mut d: Vec<f64> = g.iter().map(|v| -v).collect();
        let mut alphas = Vec::with_capacity(hist.len());
        for (sv, yv, rho) in hist.iter().rev() {
            let a = rho * dot(sv, &d);
            d.iter_mut().zip(yv).for_each(|(x, y)| *x -= a * y);
            alphas.push(a);
        }
        if let Some((sv, yv, _)) = hist.last() {
            let scale = dot(sv, yv) / dot(yv, yv);
            d.iter_mut().for_each(|x| *x *= scale);
        } else {
            let gn = dot(&g, &g).sqrt().max(1e-12);
            d.iter_mut().for_each(|x| *x *= 0.1 / gn);
        }
        for ((sv, yv, rho), a) in hist.iter().zip(alphas.iter().rev()) {
            let b = rho * dot(yv, &d);
            d.iter_mut().zip(sv).for_each(|(x, s)| *x += (a - b) * s);
        }
        let slope = dot(&g, &d);
        if slope >= 0.0 {
            hist.clear();
            continue;
        }
        let mut step = 1.0;
        let mut accepted = None;
        for _ in 0..40 {
            let xn: Vec<f64> = x.iter().zip(&d).map(|(a, b)| a + step * b).collect();
            let (fnew, gnew) = f(&xn);
            if fnew <= fx + 1e-4 * step * slope {
                accepted = Some((xn, fnew, gnew));
                break;
            }
            step *= 0.5;
        }
        let Some((xn, fnew, gnew)) = accepted else {
            if hist.is_empty() {
                break;
            }
            hist.clear();
            continue;
        };
        let sv: Vec<f64> = xn.iter().zip(&x).map(|(a, b)| a - b).collect();
        let yv: Vec<f64> = gnew.iter().zip(&g).map(|(a, b)| a - b).collect();
        let sy = dot(&sv, &yv);
        if sy > 1e-18 {
            hist.push((sv, yv, 1.0 / sy));
            if hist.len() > 12 {
                hist.remove(0);
            }
        }
        let change = fx - fnew;
        x = xn;
        fx = fnew;
        g = gnew;
        let gmax = g.iter().fold(0.0f64, |a, b| a.max(b.abs()));
        if gmax < gtol || (change.abs() < 1e-15 && hist.is_empty()) {
            break;
        }
    }
    (x, fx, g, it)
}

/// Nelder–Mead minimisation (Nelder & Mead 1965) of `f` from `x0` with initial step `step`.
/// Returns the best point and value after `iters` iterations or when the simplex's values
/// agree to `tol`.
pub fn nelder_mead<F: Fn(&[f64]) -> f64>(
    f: F,
    x0: &[f64],
    step: f64,
    iters: usize,
    tol: f64,
) -> (Vec<f64>, f64) {
    let d = x0.len();
    let mut simplex: Vec<(Vec<f64>, f64)> = (0..=d)
        .map(|i| {
            let mut x = x0.to_vec();
            if i > 0 {
                x[i - 1] += step;
            }
            let v = f(&x);
            (x, v)
        })
        .collect();
    for _ in 0..iters {
        simplex.sort_by(|a, b| a.1.total_cmp(&b.1));
        if (simplex[d].1 - simplex[0].1).abs() < tol {
            break;
        }
        let centroid: Vec<f64> = (0..d)
            .map(|j| simplex[..d].iter().map(|s| s.0[j]).sum::<f64>() / d as f64)
            .collect();
        let along = |t: f64| -> Vec<f64> {
            (0..d)
                .map(|j| centroid[j] + t * (simplex[d].0[j] - centroid[j]))
                .collect()
        };
        let xr = along(-1.0);
        let fr = f(&xr);
        if fr < simplex[0].1 {
            let xe = along(-2.0);
            let fe = f(&xe);
            simplex[d] = if fe < fr { (xe, fe) } else { (xr, fr) };
        } else if fr < simplex[d - 1].1 {
            simplex[d] = (xr, fr);
        } else {
            let xc = if fr < simplex[d].1 {
                along(-0.5)
            } else {
                along(0.5)
            };
            let fc = f(&xc);
            if fc < simplex[d].1.min(fr) {
                simplex[d] = (xc, fc);
            } else {
                let best = simplex[0].0.clone();
                for s in simplex.iter_mut().skip(1) {
                    let x: Vec<f64> =
                        s.0.iter()
                            .zip(&best)
                            .map(|(a, b)| b + 0.5 * (a - b))
                            .collect();
                    let v = f(&x);
                    *s = (x, v);
                }
            }
        }
    }
    simplex.sort_by(|a, b| a.1.total_cmp(&b.1));
    let (x, v) = simplex.swap_remove(0);
    (x, v)
}

/// Uniform numbers in [0, 1) from a fixed linear congruential stream (Knuth's MMIX constants),
/// for tests that draw random mixtures.
#[cfg(test)]
pub(crate) fn test_uniform(seed: u64) -> impl FnMut() -> f64 {
    let mut state = seed;
    move || {
        state = state
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (state >> 11) as f64 / (1u64 << 53) as f64
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mixture_derivatives() {
        let m = Mixture {
            terms: vec![(2, 0.5), (4, 0.25)],
        };
        let h = 1e-6;
        for q in [0.1, 0.5, 0.9] {
            assert!(((m.xi(q + h) - m.xi(q - h)) / (2.0 * h) - m.d1(q)).abs() < 1e-8);
            assert!(((m.d1(q + h) - m.d1(q - h)) / (2.0 * h) - m.d2(q)).abs() < 1e-7);
        }
    }

    #[test]
    fn nelder_mead_finds_a_quadratic_minimum() {
        let (x, v) = nelder_mead(
            |x| (x[0] - 1.0).powi(2) + 3.0 * (x[1] + 2.0).powi(2),
            &[0.0, 0.0],
            0.5,
            2000,
            1e-16,
        );
        assert!((x[0] - 1.0).abs() < 1e-5 && (x[1] + 2.0).abs() < 1e-5 && v < 1e-10);
    }
}

//! Couplings recomputed on demand: the `storage = "implicit"` SK instance keeps no matrix.
//!
//! Every coupling J_ij (i < j) is a fixed function of (instance, i, j), computed by the
//! counter-based generator Philox4x32-10 (Salmon, Moraes, Dror & Shaw 2011, "Parallel random
//! numbers: as easy as 1, 2, 3", SC'11). Why this generator: it is published with known-answer
//! vectors, it needs only 32×32→64-bit integer multiplies, xors and additions (exact on every
//! machine and in every language), and any entry can be computed without the ones before it,
//! so rows, blocks of a product and single couplings can be generated in any order, on any
//! number of threads, with identical bits.
//!
//! Layout of one draw: key = the first 8 bytes of the instance id (two little-endian u32),
//! counter = (i, j, attempt, the id's bytes 8..12). From the four output words:
//! - gaussian: Marsaglia's polar method (as [`crate::rng::Stream::normal`]) on
//!   u = 2U(w0, w1) − 1, v = 2U(w2, w3) − 1, where U(hi, lo) takes the top 53 bits of the
//!   64-bit word hi·2³² + lo; a rejected pair moves to the next attempt. The accepted pair
//!   gives two independent N(0, 1): J = u·m and G = v·m, G being the fresh part of the
//!   correlated copy (J' = (1 − ε)J + sqrt(1 − (1 − ε)²)G), so the copy costs nothing extra;
//! - pm1: J = the sign of w0's top bit (0: +1), and the copy's uniform U(w1, w2) and fresh sign
//!   (w3's top bit): J' = the fresh sign when U < ε, else J.
//!
//! The law is exactly that of the stored (f64/f32) instance, but the numbers are not: an
//! implicit instance and a stored one with the same seed are different instances of the same
//! law. `log` is `libm`'s (pure Rust), so the numbers are the same on every machine.

use super::Couplings;
use crate::rng::Id;

/// Philox4x32's multipliers and Weyl key increments (Salmon et al. 2011, Table 2 / Random123).
const M0: u32 = 0xD251_1F53;
const M1: u32 = 0xCD9E_8D57;
const W0: u32 = 0x9E37_79B9;
const W1: u32 = 0xBB67_AE85;

/// Philox4x32 with ten rounds: the 128-bit block for `counter` under `key`.
#[inline(always)]
pub fn philox4x32_10(counter: [u32; 4], key: [u32; 2]) -> [u32; 4] {
    let mut c = counter;
    let mut k = key;
    for round in 0..10 {
        if round > 0 {
            k[0] = k[0].wrapping_add(W0);
            k[1] = k[1].wrapping_add(W1);
        }
        let p0 = (M0 as u64) * (c[0] as u64);
        let p1 = (M1 as u64) * (c[2] as u64);
        let (hi0, lo0) = ((p0 >> 32) as u32, p0 as u32);
        let (hi1, lo1) = ((p1 >> 32) as u32, p1 as u32);
        c = [hi1 ^ c[1] ^ k[0], lo1, hi0 ^ c[3] ^ k[1], lo0];
    }
    c
}

/// Uniform on [0, 1) from the top 53 bits of hi·2³² + lo (as `Stream::uniform`).
#[inline(always)]
fn unit(hi: u32, lo: u32) -> f64 {
    ((((hi as u64) << 32) | lo as u64) >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
}

/// The coupling generator of one instance (or of its correlated copy): A_ij = scale·J_ij
/// (or scale·J'_ij), recomputed on every call.
#[derive(Clone, Debug)]
pub struct Generator {
    key: [u32; 2],
    tag: u32,
    couplings: Couplings,
    scale: f64,
    epsilon: f64,
    keep: f64,
    fresh: f64,
}

impl Generator {
    /// The generator of `instance` (ε = 0) or its copy correlated at 1 − ε, scaled by `scale`.
    pub fn new(couplings: Couplings, instance: &Id, epsilon: f64, scale: f64) -> Generator {
        let word = |k: usize| u32::from_le_bytes(instance[k..k + 4].try_into().expect("4 bytes"));
        Generator {
            key: [word(0), word(4)],
            tag: word(8),
            couplings,
            scale,
            epsilon,
            keep: 1.0 - epsilon,
            fresh: (epsilon * (2.0 - epsilon)).sqrt(),
        }
    }

    /// (J_ij, J'_ij) before scaling, for i < j (the caller orders the pair).
    #[inline(always)]
    pub fn pair(&self, i: u32, j: u32) -> (f64, f64) {
        match self.couplings {
            Couplings::Gaussian => {
                let mut attempt = 0u32;
                loop {
                    let w = philox4x32_10([i, j, attempt, self.tag], self.key);
                    let u = 2.0 * unit(w[0], w[1]) - 1.0;
                    let v = 2.0 * unit(w[2], w[3]) - 1.0;
                    let s = u * u + v * v;
                    if s < 1.0 && s > 0.0 {
                        let m = (-2.0 * libm::log(s) / s).sqrt();
                        let (z, g) = (u * m, v * m);
                        return (z, self.keep * z + self.fresh * g);
                    }
                    attempt += 1;
                }
            }
            Couplings::Pm1 => {
                let w = philox4x32_10([i, j, 0, self.tag], self.key);
                let z = if w[0] >> 31 == 0 { 1.0 } else { -1.0 };
                let s = if w[3] >> 31 == 0 { 1.0 } else { -1.0 };
                (
                    z,
                    if unit(w[1], w[2]) < self.epsilon {
                        s
                    } else {
                        z
                    },
                )
            }
            Couplings::Cut => (-1.0, -1.0),
        }
    }

    /// A_ij (= A_ji; 0 on the diagonal): the scaled coupling of this instance or copy.
    #[inline(always)]
    pub fn a(&self, i: usize, j: usize) -> f64 {
        if i == j {
            return 0.0;
        }
        let (lo, hi) = if i < j { (i, j) } else { (j, i) };
        let (z, zc) = self.pair(lo as u32, hi as u32);
        self.scale * if self.epsilon > 0.0 { zc } else { z }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Random123's known-answer vectors for Philox4x32-10 (its tests/kat_vectors, distributed
    /// with Salmon et al. 2011): counter and key zero, all ones, and the digits of π. Recalled
    /// from memory and confirmed against several independent implementations' test files.
    #[test]
    fn known_answers() {
        assert_eq!(
            philox4x32_10([0, 0, 0, 0], [0, 0]),
            [0x6627e8d5, 0xe169c58d, 0xbc57ac4c, 0x9b00dbd8]
        );
        assert_eq!(
            philox4x32_10([u32::MAX; 4], [u32::MAX; 2]),
            [0x408f276d, 0x41c83b0e, 0xa20bc7c6, 0x6d5451fd]
        );
        assert_eq!(
            philox4x32_10(
                [0x243f6a88, 0x85a308d3, 0x13198a2e, 0x03707344],
                [0xa4093822, 0x299f31d0]
            ),
            [0xd16cfe09, 0x94fdcceb, 0x5001e420, 0x24126ea1]
        );
    }

    /// Over 10⁶ couplings of one instance: mean 0 and variance 1 within 4 standard errors
    /// (SE of the mean 1/√m, of the variance √(2/m) for N(0, 1); for ±1 the variance is 1
    /// exactly), symmetry A_ij = A_ji exactly, and the correlated copy's sample correlation
    /// within 4/√m of 1 − ε (its SE is at most 1/√m). Common practice for moment checks.
    #[test]
    fn implicit_couplings_have_the_law() {
        let n = 1415usize; // n(n−1)/2 ≈ 10⁶ pairs
        let m = (n * (n - 1) / 2) as f64;
        let id = [7u8; 32];
        for couplings in [Couplings::Gaussian, Couplings::Pm1] {
            let g = Generator::new(couplings, &id, 0.0, 1.0);
            let eps = 0.3;
            let c = Generator::new(couplings, &id, eps, 1.0);
            let (mut s1, mut s2, mut sxy, mut syy) = (0.0, 0.0, 0.0, 0.0);
            for i in 0..n {
                for j in i + 1..n {
                    let (x, y) = (g.a(i, j), c.a(i, j));
                    assert_eq!(x.to_bits(), g.a(j, i).to_bits());
                    s1 += x;
                    s2 += x * x;
                    sxy += x * y;
                    syy += y * y;
                }
            }
            assert_eq!(g.a(5, 5), 0.0);
            let mean = s1 / m;
            let var = s2 / m - mean * mean;
            assert!(mean.abs() < 4.0 / m.sqrt(), "{couplings:?}: mean {mean}");
            assert!(
                (var - 1.0).abs() < 4.0 * (2.0 / m).sqrt(),
                "{couplings:?}: var {var}"
            );
            let corr = sxy / (s2 * syy).sqrt();
            assert!(
                (corr - (1.0 - eps)).abs() < 4.0 / m.sqrt(),
                "{couplings:?}: corr {corr}"
            );
        }
    }

    /// Value stability: the first couplings of a seeded implicit instance and of its copy.
    #[test]
    fn pinned_first_couplings() {
        let g = Generator::new(Couplings::Gaussian, &[6; 32], 0.0, 1.0);
        let c = Generator::new(Couplings::Gaussian, &[6; 32], 0.25, 1.0);
        let got: Vec<u64> = [(0, 1), (0, 2), (1, 2), (5, 9)]
            .iter()
            .flat_map(|&(i, j)| [g.a(i, j).to_bits(), c.a(i, j).to_bits()])
            .collect();
        assert_eq!(got, PINNED, "{got:?}");
    }
    const PINNED: [u64; 8] = [
        4613010890292690962,
        4608996652327788524,
        13831399422385471582,
        13835590614308095940,
        4608997867572248666,
        4607084825448842236,
        4604238962311887692,
        4607260696495473646,
    ];
}

//! Pinned outputs: what a seed gives, for every algorithm kind and for every family's sample and
//! correlated copy, at one small size.
//!
//! A failure here means a change altered the numbers a seed produces. If that is what you meant:
//! bump the kind's or the family's `REVISION` (so cached cells are recomputed), add a line to
//! CHANGELOG.md under "Changes that alter numbers", and paste the new pin the failure prints.
//! If it is not what you meant, the change has a bug.
//!
//! A pin holds the energy per spin in its shortest round-trip form (exact) and
//! the first 16 hex digits of the SHA-256 of the output (spins as bytes, then the pre-rounding
//! point's f64 bits, little-endian), so a change in any spin or in the last bit of the point fails.

use crate::util::id;
use kiln::algo::{AlgoSpec, Output};
use kiln::model::{Couplings, ModelSpec};
use kiln::rng::{Purpose, stream};
use sha2::{Digest, Sha256};

/// (kind, revision, family, n, energy per spin, output digest).
type Pin = (
    &'static str,
    u32,
    &'static str,
    usize,
    &'static str,
    &'static str,
);

/// One pin per kind (gradient twice: on the cube and on the sphere; iamp twice: with and
/// without a p = 2 term).
const ALGORITHM_PINS: &[Pin] = &[
    (
        "descent",
        1,
        "sk",
        24,
        "0.6088778769072176",
        "f016bbe10e0531a3",
    ),
    (
        "anneal",
        1,
        "sk",
        24,
        "0.6226103018494511",
        "1bc50c78cb780056",
    ),
    (
        "exhaustive",
        2,
        "sk",
        16,
        "0.569961689463128",
        "34207c525877f7d3",
    ),
    (
        "spectral",
        2,
        "sk",
        24,
        "0.567414759446812",
        "685303ae7203e2e8",
    ),
    (
        "gradient",
        1,
        "sk",
        24,
        "0.5863186426916422",
        "087e6f6e1384c2a2",
    ),
    (
        "gradient",
        1,
        "sphere",
        24,
        "0.6568691614452834",
        "34e99d0fbb90fde5",
    ),
    (
        "tempering",
        1,
        "sk",
        24,
        "0.6226103018494511",
        "1bc50c78cb780056",
    ),
    (
        "lowrank",
        2,
        "sk",
        24,
        "0.6226103018494511",
        "3f9684f20674bd24",
    ),
    (
        "hessian",
        2,
        "sphere",
        24,
        "0.7619441265899849",
        "968d51b6cf1cc933",
    ),
    ("amp", 1, "sk", 24, "0.2311010712331977", "3b278dcecffcba17"),
    (
        "iamp",
        4,
        "cube",
        24,
        // Revision 4 (`decorrelate`: each increment of Z loses its component along m) moved
        // the signs from 0.5115 (revision 3).
        "0.6735414707156399",
        "557c11790dc5b222",
    ),
    // The pure 3-spin cube (ξ''(0) = 0): the start at q₀ = δ with the field from t = δ.
    (
        "iamp",
        4,
        "cube-pure3",
        24,
        "0.640097038247695",
        "5231ec3fad6381e2",
    ),
    (
        "glauber",
        2,
        "sk",
        24,
        "0.6226103018494511",
        "1367990900fcac77",
    ),
    (
        "langevin",
        2,
        "sphere",
        24,
        "0.2148125853226299",
        "a140970981280ef9",
    ),
    (
        "localization",
        1,
        "sk",
        24,
        "0.038895251188661294",
        "76a80fe1deb7c0da",
    ),
    ("walksat", 1, "ksat", 24, "0.0", "353e1607881689cb"),
    (
        "least-distance",
        1,
        "perceptron-sphere",
        24,
        "-0.20833333333333334",
        "3dff24609ca05905",
    ),
];

/// The model of a pin: its family with the parameters of the pin table, through the spec
/// parser (so the pins also cover how `[model]` is read). `perceptron-sphere` is the
/// perceptron family on the sphere.
fn model(family: &str, couplings: Couplings) -> ModelSpec {
    let (family, params) = match family {
        "perceptron-sphere" => (
            "perceptron",
            "density = 1.0\nmargin = 0.25\ndomain = \"sphere\"",
        ),
        "sk-f32" => ("sk", "storage = \"f32\""),
        "cube-pure3" => ("cube", "xi = { 3 = 0.5 }"),
        "sk-implicit" => ("sk", "storage = \"implicit\""),
        "cube-f32" => ("cube", "xi = { 2 = 0.5, 3 = 0.25 }\nstorage = \"f32\""),
        "sphere-implicit" => (
            "sphere",
            "xi = { 2 = 0.5, 3 = 0.25 }\nstorage = \"implicit\"",
        ),
        f => (f, params_of(f)),
    };
    kiln::spec::model_of(&format!(
        "family = \"{family}\"\ncouplings = \"{}\"\n{params}",
        couplings.name()
    ))
    .expect("a model")
}

/// The `[model]` parameters of a family's pins.
fn params_of(family: &str) -> &'static str {
    match family {
        "cube" | "sphere" => "xi = { 2 = 0.5, 3 = 0.25 }",
        "erdos-renyi" | "regular" => "degree = 3",
        "lattice" => "dimension = 2",
        "ksat" => "k = 3\ndensity = 4.5",
        "perceptron" => "density = 0.9\nmargin = 0.1",
        _ => "",
    }
}

/// The coupling law of an algorithm pin's model: gaussian, or the family's only law.
fn model_law(family: &str) -> Couplings {
    let family = family.strip_suffix("-sphere").unwrap_or(family);
    let family = family.strip_suffix("-pure3").unwrap_or(family);
    let entry = kiln::model::find(family).expect("a family");
    if entry.couplings.contains(&Couplings::Gaussian) {
        Couplings::Gaussian
    } else {
        entry.couplings[0]
    }
}

pub fn digest(out: &Output) -> String {
    let mut h = Sha256::new();
    h.update(out.spins.iter().map(|&s| s as u8).collect::<Vec<_>>());
    if let Some(p) = &out.point {
        for x in p {
            h.update(x.to_bits().to_le_bytes());
        }
    }
    hex::encode(&h.finalize()[..8])
}

fn settings_of(kind: &str) -> AlgoSpec {
    let k = kiln::algo::builtin()
        .iter()
        .find(|k| k.name == kind)
        .expect("a built-in kind");
    kiln::algo::default_settings(k).expect("defaults parse")
}

fn check(pins: &[Pin], got: &[String], what: &str) {
    let mut bad = Vec::new();
    for (p, g) in pins.iter().zip(got) {
        let want = format!("{:?}", (p.0, p.1, p.2, p.3, p.4, p.5));
        if &want != g {
            bad.push(format!("  pinned {want}\n  now    {g}"));
        }
    }
    assert!(
        bad.is_empty(),
        "{what}: a seed now gives other numbers.\n{}\nIf intended: bump the REVISION, add a CHANGELOG \
         line under \"Changes that alter numbers\", and paste the new pins:\n{}",
        bad.join("\n"),
        got.iter()
            .map(|g| format!("    {g},"))
            .collect::<Vec<_>>()
            .join("\n")
    );
}

/// Every built-in kind has a pin, and each pin's output is what the kind gives today.
#[test]
fn every_kind_gives_its_pinned_output() {
    for k in kiln::algo::builtin() {
        assert!(
            ALGORITHM_PINS.iter().any(|p| p.0 == k.name),
            "kind `{}` has no pinned output: add one to ALGORITHM_PINS",
            k.name
        );
    }
    let got: Vec<String> = ALGORITHM_PINS
        .iter()
        .map(|&(kind, _, family, n, _, _)| {
            let algo = settings_of(kind);
            let m = model(family, model_law(family));
            let inst = m.sample(n, &id("pin-instance", 0), 0.0);
            let out = algo
                .run(
                    &inst,
                    &mut stream(&id("pin-algorithm", 0), Purpose::Algorithm, 0),
                )
                .expect("runs");
            let e = inst.energy(&out.spins) / n as f64;
            format!(
                "{:?}",
                (
                    kind,
                    algo.revision(),
                    family,
                    n,
                    format!("{e:?}").as_str(),
                    digest(&out).as_str()
                )
            )
        })
        .collect();
    check(ALGORITHM_PINS, &got, "algorithm pins");
}

/// (family, couplings, revision, n, energy per spin of a fixed σ on the sample, on its copy
/// correlated at 1 − ε with ε = 0.3, digest of the copy's energies at 8 random σ).
type CopyPin = (
    &'static str,
    &'static str,
    u32,
    usize,
    &'static str,
    &'static str,
    &'static str,
);

const COPY_PINS: &[CopyPin] = &[
    // The mixtures' p = 2 term in the compact storages (the p = 3 tensor stays f64).
    (
        "cube-f32",
        "gaussian",
        1,
        24,
        "0.2668274040044568",
        "0.05134517747110526",
        "3388d7d24bc02935",
    ),
    (
        "sphere-implicit",
        "gaussian",
        1,
        24,
        "0.05829321920551885",
        "-0.09254281316854528",
        "e7a151594d7e4bfe",
    ),
    // SK's compact storages: the f32 triangle (the f64 instance rounded) and the implicit
    // generator (another instance of the same law).
    (
        "sk-f32",
        "gaussian",
        1,
        24,
        "0.2045422260680425",
        "0.048615514914369364",
        "79647fe58aafe437",
    ),
    (
        "sk-implicit",
        "gaussian",
        1,
        24,
        "-0.003991958730895473",
        "-0.0952724757252812",
        "76f1453c936e9857",
    ),
    (
        "sk-implicit",
        "pm1",
        1,
        24,
        "0.06804138174397716",
        "-0.11907241805196005",
        "d9311d69cbd00137",
    ),
    (
        "sk",
        "gaussian",
        1,
        24,
        "0.2045422251267551",
        "0.048615519723537164",
        "de2c07b9dc3b1d6b",
    ),
    (
        "sk",
        "pm1",
        1,
        24,
        "-0.27216552697590873",
        "-0.2551551815399144",
        "abf0b22b31dd343e",
    ),
    (
        "cube",
        "gaussian",
        1,
        24,
        "0.2668274030631694",
        "0.05134518228027305",
        "c36b9ad589ad9877",
    ),
    (
        "sphere",
        "gaussian",
        1,
        24,
        "0.2668274030631694",
        "0.051345182280273065",
        "7c79feda9a8a76db",
    ),
    (
        "erdos-renyi",
        "gaussian",
        1,
        24,
        "-0.11749097959629888",
        "-0.378174207312878",
        "b07e0755d756c11f",
    ),
    (
        "erdos-renyi",
        "cut",
        1,
        24,
        "0.2916666666666667",
        "0.08333333333333333",
        "18e708afa1ce22d3",
    ),
    (
        "regular",
        "pm1",
        1,
        24,
        "-0.16666666666666666",
        "-0.08333333333333333",
        "93010de9b21eb45a",
    ),
    (
        "lattice",
        "gaussian",
        1,
        25,
        "-0.06401104041339106",
        "0.09502005088667705",
        "5a7232e703eda126",
    ),
    (
        "ksat",
        "pm1",
        1,
        24,
        "-0.7083333333333334",
        "-0.6666666666666666",
        "42ec62b6c1b98cf2",
    ),
    (
        "perceptron",
        "gaussian",
        1,
        24,
        "-0.5",
        "-0.5833333333333334",
        "2936783d3f827bce",
    ),
];

/// Every family's sample and correlated copy give their pinned energies.
#[test]
fn every_family_copy_gives_its_pinned_energies() {
    for f in kiln::model::builtin() {
        assert!(
            COPY_PINS.iter().any(|p| p.0 == f.name),
            "family `{}` has no pinned correlated copy: add one to COPY_PINS",
            f.name
        );
    }
    let got: Vec<String> = COPY_PINS
        .iter()
        .map(|&(family, law, _, n, _, _, _)| {
            let m = model(family, Couplings::parse(law).expect("a law"));
            let a = m.sample(n, &id("pin-copy", 0), 0.0);
            let b = m.sample(n, &id("pin-copy", 0), 0.3);
            let mut r = stream(&id("pin-sigma", 0), Purpose::Algorithm, 0);
            let sigmas: Vec<Vec<i8>> = (0..9)
                .map(|_| (0..n).map(|_| r.sign() as i8).collect())
                .collect();
            let mut h = Sha256::new();
            for s in &sigmas[1..] {
                h.update(b.energy(s).to_bits().to_le_bytes());
            }
            let e0 = a.energy(&sigmas[0]) / n as f64;
            let e1 = b.energy(&sigmas[0]) / n as f64;
            format!(
                "{:?}",
                (
                    family,
                    law,
                    m.revision(),
                    n,
                    format!("{e0:?}").as_str(),
                    format!("{e1:?}").as_str(),
                    hex::encode(&h.finalize()[..8]).as_str()
                )
            )
        })
        .collect();
    let mut bad = Vec::new();
    for (p, g) in COPY_PINS.iter().zip(&got) {
        let want = format!("{:?}", p);
        if &want != g {
            bad.push(format!("  pinned {want}\n  now    {g}"));
        }
    }
    assert!(
        bad.is_empty(),
        "correlated-copy pins: a seed now gives other disorder.\n{}\nIf intended: bump the \
         family's REVISION, add a CHANGELOG line under \"Changes that alter numbers\", and paste \
         the new pins:\n{}",
        bad.join("\n"),
        got.iter()
            .map(|g| format!("    {g},"))
            .collect::<Vec<_>>()
            .join("\n")
    );
}

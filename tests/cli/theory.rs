//! `kiln theory` end to end: values with their sources, the order-parameter table, caching.

use crate::util::{Work, stderr};

#[test]
fn theory_for_the_default_model() {
    let w = Work::new();
    let o = w.kiln(&["theory", "--k", "1", "--beta", "0.5", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    // SK replica symmetric √(2/π) (Sherrington & Kirkpatrick, PRL 35, 1792 (1975)).
    assert!((v["cube"]["replica_symmetric"].as_f64().unwrap() - 0.7978845608).abs() < 1e-9);
    // One-step RSB ≈ 0.7652 (Parisi 1979/1980; from memory, shared references).
    let one = v["cube"]["rsb"][0]["value"].as_f64().unwrap();
    assert!((one - 0.7652).abs() < 5e-4, "{one}");
    // Full RSB: the Parisi value 0.7631667 (Crisanti & Rizzo, Phys. Rev. E 65, 046137 (2002),
    // arXiv:cond-mat/0111037) to 1e-5, and below the one-step value (k-step values decrease
    // towards it).
    let full = v["cube"]["full_rsb"]["value"].as_f64().unwrap();
    assert!((full - 0.7631667).abs() < 1e-5, "full RSB {full}");
    assert!(full < one - 1e-3, "full {full} vs 1RSB {one}");
    eprintln!(
        "full RSB {full:.7} in {:.1} s",
        v["cube"]["full_rsb"]["seconds"].as_f64().unwrap()
    );
    // Sphere, SK normalisation: the full zero-temperature Crisanti–Sommers ground state is 1,
    // half the semicircle edge (Füredi & Komlós 1981), with γ ≈ 0.
    let sphere = &v["sphere"]["ground_state"];
    assert!(
        (sphere["value"].as_f64().unwrap() - 1.0).abs() < 1e-9,
        "{sphere}"
    );
    assert!(
        sphere["structure"]
            .as_str()
            .unwrap()
            .contains("replica symmetric")
    );
    // High temperature: log 2 + β²/4 (Aizenman, Lebowitz & Ruelle 1987; from memory).
    let p = v["temperature_rs"][0]["free_energy"].as_f64().unwrap();
    assert!((p - (std::f64::consts::LN_2 + 0.0625)).abs() < 1e-10);
    let p = v["temperature"][0]["free_energy"].as_f64().unwrap();
    assert!(
        (p - (std::f64::consts::LN_2 + 0.0625)).abs() < 1e-6,
        "Parisi at β = 0.5: {p}"
    );
    // Its β-derivative, the Gibbs mean energy per spin: β/2 (same source); no overlap.
    let e = v["temperature"][0]["energy"].as_f64().unwrap();
    assert!((e - 0.25).abs() < 1e-6, "E(0.5) = {e}");
    assert_eq!(v["temperature"][0]["q_max"].as_f64(), Some(0.0));
    // The order parameter table and the cached solution.
    let csv = std::fs::read_to_string(w.path().join("results/default/theory.csv")).unwrap();
    assert!(csv.lines().any(|l| l.starts_with("1rsb,1,")), "{csv}");
    assert_eq!(
        csv.lines().filter(|l| l.starts_with("full,16,")).count(),
        16
    );
    let cached: Vec<_> = std::fs::read_dir(w.path().join("results/.cache/theory"))
        .unwrap()
        .collect();
    assert_eq!(
        cached.len(),
        4,
        "the 1RSB, the full-RSB, the algorithmic-threshold and the β = 0.5 solutions"
    );
    // A second run reads the cache and reports the same numbers.
    let o = w.kiln(&["theory", "--k", "1", "--json"]);
    let again: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        again["cube"]["rsb"][0]["value"],
        v["cube"]["rsb"][0]["value"]
    );
    assert_eq!(
        again["cube"]["full_rsb"]["value"],
        v["cube"]["full_rsb"]["value"]
    );

    // Cached solutions are checksummed like every cache entry: a changed byte is caught by
    // `kiln verify` (exit 1, moved to quarantine/) and by `kiln theory`, which solves again
    // and prints the same value.
    let dir = w.path().join("results/.cache/theory");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    files.sort();
    let mut bytes = std::fs::read(&files[0]).unwrap();
    let at = bytes.len() - 5;
    bytes[at] = if bytes[at] == b'1' { b'2' } else { b'1' };
    std::fs::write(&files[0], &bytes).unwrap();
    let o = w.kiln(&["verify", "--json"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    let r: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        (r["theory"].as_u64(), r["damaged"].as_u64()),
        (Some(4), Some(1)),
        "{r}"
    );
    assert!(w.path().join("results/.cache/quarantine").is_dir());
    let o = w.kiln(&["theory", "--k", "1", "--json"]);
    let third: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        third["cube"]["rsb"][0]["value"],
        v["cube"]["rsb"][0]["value"]
    );
    assert_eq!(
        third["cube"]["full_rsb"]["value"],
        v["cube"]["full_rsb"]["value"]
    );
    let o = w.kiln(&["verify"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
}

/// A mixture end to end (ξ(q) = q²/2 + q³/4, our demo choice): the figure of measured
/// energies of two algorithms carries the Parisi line kiln computes for that ξ (the same number
/// `kiln theory` prints), and the full-RSB value lies below the k-step ones. On the sphere
/// (pure 3-spin) the lines are the ground state and the algorithmic value 2·sqrt(2/3) (Subag,
/// arXiv:1812.04588).
#[test]
fn figures_carry_computed_theory_lines() {
    let w = Work::new();
    let cube = w.spec(
        "mix.toml",
        "[experiment]\nname = \"mix\"\n[model]\nfamily = \"cube\"\nxi = { 2 = 0.5, 3 = 0.25 }\n[sweep]\nsizes = [16, 24, 32]\nseeds = 3\n[[algorithm]]\nkind = \"descent\"\n[[algorithm]]\nkind = \"anneal\"\nsweeps = 20\n",
    );
    w.run_json(&cube, &[]);
    // `kiln fit` never solves: before any theory is stored it says so, and afterwards it
    // prints the value the figure draws (the same cache, read by key).
    let o = w.kiln(&["fit", cube.to_str().unwrap(), "--json"]);
    let before: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert!(before["theory"]["parisi"].is_null(), "{before}");
    let o = w.kiln(&["plot", cube.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let o = w.kiln(&["fit", cube.to_str().unwrap(), "--json"]);
    let after: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let fitted_line = after["theory"]["parisi"]
        .as_f64()
        .expect("stored Parisi value");
    let o = w.kiln(&["theory", cube.to_str().unwrap(), "--k", "2", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let full = v["cube"]["full_rsb"]["value"].as_f64().unwrap();
    let two = v["cube"]["rsb"][1]["value"].as_f64().unwrap();
    let one = v["cube"]["rsb"][0]["value"].as_f64().unwrap();
    assert!(full < two && two < one, "{full} {two} {one}");
    let csv = std::fs::read_to_string(
        w.path()
            .join("results/mix/figures/energy-cube-gaussian.csv"),
    )
    .unwrap();
    let line: f64 = csv
        .lines()
        .find(|l| l.contains(",reference,"))
        .and_then(|l| l.split(',').nth(4))
        .and_then(|x| x.parse().ok())
        .expect("a reference row");
    assert_eq!(line, full, "{csv}");
    assert_eq!(fitted_line, full);
    assert!(csv.lines().filter(|l| l.contains(",mean,")).count() >= 6);

    let sphere = w.spec(
        "sph.toml",
        "[experiment]\nname = \"sph\"\n[model]\nfamily = \"sphere\"\nxi = { 3 = 1.0 }\n[sweep]\nsizes = [12, 16]\nseeds = 2\n[[algorithm]]\nkind = \"gradient\"\nstep = 0.2\n",
    );
    w.run_json(&sphere, &[]);
    let o = w.kiln(&["plot", sphere.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(
        w.path()
            .join("results/sph/figures/energy-sphere-gaussian.csv"),
    )
    .unwrap();
    let refs: Vec<f64> = csv
        .lines()
        .filter(|l| l.contains(",reference,"))
        .filter_map(|l| l.split(',').nth(4)?.parse().ok())
        .collect();
    assert_eq!(refs.len(), 2, "{csv}");
    // Crisanti & Sommers (1992): 1.657; Subag (2018): 2·sqrt(2/3).
    assert!((refs[0] - 1.657).abs() < 1e-3, "{refs:?}");
    assert!(
        (refs[1] - 2.0 * (2.0f64 / 3.0).sqrt()).abs() < 1e-6,
        "{refs:?}"
    );
}

#[test]
fn theory_refuses_bad_mixtures() {
    let w = Work::new();
    for bad in ["0:1", "31:1", "2:-0.5", "two:1"] {
        let o = w.kiln(&["theory", "--mixture", bad]);
        assert_eq!(o.status.code(), Some(2), "{bad}: {}", stderr(&o));
        assert!(stderr(&o).contains("--mixture"), "{}", stderr(&o));
    }
    // A p = 1 term (a random field) is taken at zero temperature only.
    let o = w.kiln(&["theory", "--mixture", "1:0.5,2:0.25", "--beta", "1"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("p = 1"), "{}", stderr(&o));
}

/// `--beta` is refused before anything is written.
#[test]
fn theory_refusals_write_nothing() {
    let w = Work::new();
    let o = w.kiln(&["theory", "--mixture", "2:0.5", "--k", "1", "--beta", "-1"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(!w.path().join("results").exists(), "a refusal wrote files");
}

/// Every printed value is an upper bound on the Parisi value, so kiln reports the least as the
/// best. On the pure 3-spin cube (ξ = q³/2) γ is flat up to q ≈ 0.95 and then grows; with free
/// breakpoints the full-RSB value (measured 0.8131702) lies below the 2-step one (0.8132537 from
/// the quadrature solver, whose first step is narrower than the lattice's spacing: printed in
/// parentheses, JSON `value` null, not used as a bound). Both lie within 1e-3 of ≈ 0.8132, the
/// value usually quoted for this model in this normalisation (recalled from the literature, not
/// read). The algorithmic threshold lies clearly below (measured gap 0.0132; strict
/// suboptimality is conjectured for p = 3, proven for even p ≥ 4: Huang & Sellke 2021,
/// arXiv:2110.07847); bound 5e-3 here.
#[test]
fn free_breakpoints_give_the_best_bound_on_pure_p3_and_the_threshold_lies_below() {
    let w = Work::new();
    let o = w.kiln(&["theory", "--mixture", "3:0.5", "--k", "2", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let full = v["cube"]["full_rsb"]["value"].as_f64().unwrap();
    let two = v["cube"]["rsb"][1]["value_quadrature"].as_f64().unwrap();
    let best = v["cube"]["best"]["value"].as_f64().unwrap();
    assert!(full < two - 5e-5, "full {full} vs 2-step {two}");
    assert!(
        v["cube"]["rsb"][1]["value"].is_null(),
        "{}",
        v["cube"]["rsb"][1]
    );
    assert_eq!(best, full);
    assert_eq!(v["cube"]["best"]["solution"], "full RSB");
    assert!((best - 0.8132).abs() < 1e-3, "{best}");
    let alg = v["cube"]["algorithmic"]["value"].as_f64().unwrap();
    assert!(alg < best - 5e-3, "ALG {alg} vs {best}");
    // The value tests/cli/fitting.rs compares incremental AMP with: kiln's own, an upper bound
    // that the zoom's sequence (32, 64, 128) places about 4e-7 above its zoom limit and that
    // 1601 x-points with 24 q-intervals lower by 3.3e-6 (README, "The boundary layer at
    // q = 0"); the solve is deterministic, so 1e-7 allows only for the platform's libm.
    assert!((alg - crate::fitting::ALG_PURE3).abs() < 1e-7, "ALG {alg}");
    let o = w.kiln(&["theory", "--mixture", "3:0.5", "--k", "2"]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains("attained by the full RSB solution")
            && text.contains("in parentheses")
            && text.contains("algorithmic threshold"),
        "{text}"
    );
}

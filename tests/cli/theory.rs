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
    // High temperature: log 2 + β²/4 (Aizenman, Lebowitz & Ruelle 1987; from memory).
    let p = v["temperature_rs"][0]["free_energy"].as_f64().unwrap();
    assert!((p - (std::f64::consts::LN_2 + 0.0625)).abs() < 1e-10);
    // The order parameter table and the cached solution.
    let csv = std::fs::read_to_string(w.path().join("results/default/theory.csv")).unwrap();
    assert!(csv.lines().any(|l| l.starts_with("1rsb,1,")), "{csv}");
    let cached: Vec<_> = std::fs::read_dir(w.path().join("results/.cache/theory"))
        .unwrap()
        .collect();
    assert_eq!(cached.len(), 1);
    // A second run reads the cache and reports the same numbers.
    let o = w.kiln(&["theory", "--k", "1", "--json"]);
    let again: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        again["cube"]["rsb"][0]["value"],
        v["cube"]["rsb"][0]["value"]
    );
}

#[test]
fn theory_refuses_bad_mixtures() {
    let w = Work::new();
    for bad in ["1:1", "2:-0.5", "two:1"] {
        let o = w.kiln(&["theory", "--mixture", bad]);
        assert_eq!(o.status.code(), Some(2), "{bad}: {}", stderr(&o));
        assert!(stderr(&o).contains("--mixture"), "{}", stderr(&o));
    }
}

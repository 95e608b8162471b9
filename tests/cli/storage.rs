//! SK's compact storages (`[model] storage = "f32" | "implicit"`): every kind that runs on SK
//! runs on each storage, tables are bit-identical whatever `--jobs`, the storage is part of the
//! cell key (and f64, the default, keeps the keys it always had), and the memory refusal counts
//! the storage's bytes.

use crate::util::{Work, numbers, stderr, strings};

/// Every kind that runs on SK, at settings that keep the test short (iamp's Parisi order solves
/// in a fraction of the extended one's time).
const KINDS: &str = r#"
[[algorithm]]
kind = "descent"
[[algorithm]]
kind = "anneal"
sweeps = 60
[[algorithm]]
kind = "exhaustive"
[[algorithm]]
kind = "spectral"
[[algorithm]]
kind = "tempering"
sweeps = 60
[[algorithm]]
kind = "lowrank"
[[algorithm]]
kind = "gradient"
[[algorithm]]
kind = "amp"
[[algorithm]]
kind = "iamp"
order = "parisi"
[[algorithm]]
kind = "glauber"
sweeps = 60
[[algorithm]]
kind = "localization"
"#;

fn spec(storage: Option<&str>, sizes: &str) -> String {
    let line = storage.map_or(String::new(), |s| format!("storage = \"{s}\"\n"));
    format!(
        "[experiment]\nname = \"held\"\n[model]\nfamily = \"sk\"\n{line}[sweep]\nsizes = {sizes}\nseeds = 2\nepsilons = [0.0, 0.2]\n{KINDS}"
    )
}

fn table(w: &Work, results: &str) -> std::path::PathBuf {
    w.path().join(results).join("held/cells.parquet")
}

#[test]
fn every_kind_runs_on_every_storage_and_jobs_do_not_matter() {
    let w = Work::new();
    let mut keys = Vec::new();
    for storage in ["f64", "f32", "implicit"] {
        let s = w.spec(&format!("{storage}.toml"), &spec(Some(storage), "[12, 20]"));
        for jobs in ["1", "2"] {
            let tag = format!("{storage}-{jobs}");
            w.run_json(
                &s,
                &[
                    "--jobs",
                    jobs,
                    "--cache",
                    &format!("cache-{tag}"),
                    "--results",
                    &format!("results-{tag}"),
                ],
            );
        }
        let (one, two) = (
            table(&w, &format!("results-{storage}-1")),
            table(&w, &format!("results-{storage}-2")),
        );
        assert_eq!(numbers(&one), numbers(&two), "{storage}: --jobs 1 vs 2");
        let df = kiln::store::table::read(&one).unwrap();
        let kinds: std::collections::BTreeSet<String> = strings(&df, "kind").into_iter().collect();
        assert_eq!(kinds.len(), 11, "{storage}: {kinds:?}");
        let mut k = strings(&df, "cell_key");
        k.sort();
        keys.push(k);
    }
    // The storage is in every cell key: no key is shared between storages.
    for a in 0..3 {
        for b in a + 1..3 {
            assert!(keys[a].iter().all(|k| !keys[b].contains(k)), "{a} {b}");
        }
    }
    // f64 written out is the default: the same keys as a spec without `storage`.
    let bare = w.spec("bare.toml", &spec(None, "[12, 20]"));
    w.run_json(
        &bare,
        &["--cache", "cache-bare", "--results", "results-bare"],
    );
    let mut k = strings(
        &kiln::store::table::read(&table(&w, "results-bare")).unwrap(),
        "cell_key",
    );
    k.sort();
    assert_eq!(k, keys[0]);
}

/// The f32 instance is the f64 one rounded: descent from the same start on the same seeds
/// ends at energies within 1e-4 of each other unless the rounding changed a decision (then
/// anywhere): at n = 60 over 8 seeds most runs take the same path, so at least half agree to
/// 1e-5 (on one path, rounding each coupling by at most 2⁻²⁴ relative moves the energy per
/// spin by about 1e-8; common practice), and the rounding is visible in some last bits.
#[test]
fn f32_storage_is_the_f64_instance_rounded() {
    let w = Work::new();
    let text = |st: &str| {
        format!(
            "[experiment]\nname = \"held\"\n[model]\nfamily = \"sk\"\nstorage = \"{st}\"\n[sweep]\nsizes = [60]\nseeds = 8\nepsilons = [0.0]\n[[algorithm]]\nkind = \"descent\"\n"
        )
    };
    let energies = |st: &str| {
        let s = w.spec(&format!("{st}.toml"), &text(st));
        w.run_json(
            &s,
            &[
                "--cache",
                &format!("c-{st}"),
                "--results",
                &format!("r-{st}"),
            ],
        );
        crate::util::floats(
            &kiln::store::table::read(&table(&w, &format!("r-{st}"))).unwrap(),
            "energy",
        )
    };
    let (a, b) = (energies("f64"), energies("f32"));
    let same = a
        .iter()
        .zip(&b)
        .filter(|(x, y)| (*x - *y).abs() < 1e-5)
        .count();
    assert!(same >= 4, "{a:?} vs {b:?}");
    assert!(
        a.iter().zip(&b).any(|(x, y)| x != y),
        "f32 changed nothing: {a:?}"
    );
}

/// The refusal by memory estimate counts the storage: at n = 20 000 and a 1 GiB budget, f64
/// (3.2 GB) is refused with its estimate, f32 (0.8 GB) and implicit (10 MB) are accepted.
#[test]
fn memory_refusal_counts_the_storage() {
    let w = Work::new();
    for (st, ok) in [("f64", false), ("f32", true), ("implicit", true)] {
        let s = w.spec(
            &format!("{st}.toml"),
            &format!(
                "[experiment]\nname = \"held\"\n[model]\nfamily = \"sk\"\nstorage = \"{st}\"\n[sweep]\nsizes = [20000]\nseeds = 1\n[[algorithm]]\nkind = \"descent\"\n"
            ),
        );
        let o = w.kiln(&["check", s.to_str().unwrap(), "--max-memory", "1G"]);
        assert_eq!(o.status.success(), ok, "{st}: {}", stderr(&o));
        if !ok {
            assert!(stderr(&o).contains("needs about 3.0 GiB"), "{}", stderr(&o));
        }
    }
}

/// The mixture families hold their p = 2 term in the same three storages: on the cube and on
/// the sphere every kind that runs there runs on each storage, `--jobs` does not matter, the
/// storage is in the keys (f64 written out keeps the bare spec's keys), and a cube with
/// ξ = q²/2 in f32 or implicit storage is SK's instance in that storage, bit for bit (the
/// same sampler with c₂² = 1/2).
#[test]
fn mixtures_hold_their_p2_term_in_each_storage() {
    let w = Work::new();
    let families = [
        (
            "cube",
            "{ 2 = 0.3, 3 = 0.2 }",
            "[[algorithm]]\nkind = \"descent\"\n[[algorithm]]\nkind = \"anneal\"\nsweeps = 30\n[[algorithm]]\nkind = \"amp\"\n[[algorithm]]\nkind = \"gradient\"\n",
        ),
        (
            "sphere",
            "{ 2 = 0.5, 4 = 0.1 }",
            "[[algorithm]]\nkind = \"gradient\"\n[[algorithm]]\nkind = \"langevin\"\n[[algorithm]]\nkind = \"hessian\"\n",
        ),
    ];
    for (family, xi, kinds) in families {
        let mut keys = Vec::new();
        for storage in [None, Some("f64"), Some("f32"), Some("implicit")] {
            let line = storage.map_or(String::new(), |s| format!("storage = \"{s}\"\n"));
            let text = format!(
                "[experiment]\nname = \"held\"\n[model]\nfamily = \"{family}\"\nxi = {xi}\n{line}[sweep]\nsizes = [12, 16]\nseeds = 2\nepsilons = [0.0, 0.2]\n{kinds}"
            );
            let tag = format!("{family}-{}", storage.unwrap_or("bare"));
            let s = w.spec(&format!("{tag}.toml"), &text);
            let mut tables = Vec::new();
            for jobs in ["1", "2"] {
                let r = format!("results-{tag}-{jobs}");
                w.run_json(
                    &s,
                    &[
                        "--jobs",
                        jobs,
                        "--cache",
                        &format!("cache-{tag}-{jobs}"),
                        "--results",
                        &r,
                    ],
                );
                tables.push(table(&w, &r));
            }
            assert_eq!(
                numbers(&tables[0]),
                numbers(&tables[1]),
                "{tag}: --jobs 1 vs 2"
            );
            let mut k = strings(&kiln::store::table::read(&tables[0]).unwrap(), "cell_key");
            k.sort();
            keys.push(k);
        }
        assert_eq!(
            keys[0], keys[1],
            "{family}: f64 written out changed the keys"
        );
        for a in 1..4 {
            for b in a + 1..4 {
                assert!(
                    keys[a].iter().all(|k| !keys[b].contains(k)),
                    "{family} {a} {b}"
                );
            }
        }
    }
    // ξ = q²/2 on the cube is SK, storage included.
    for storage in ["f32", "implicit"] {
        let energies = |family: &str, xi: &str| {
            let text = format!(
                "[experiment]\nname = \"held\"\n[model]\nfamily = \"{family}\"\n{xi}storage = \"{storage}\"\n[sweep]\nsizes = [30]\nseeds = 3\nepsilons = [0.0, 0.3]\n[[algorithm]]\nkind = \"descent\"\n"
            );
            let tag = format!("same-{family}-{storage}");
            let s = w.spec(&format!("{tag}.toml"), &text);
            let r = format!("results-{tag}");
            w.run_json(&s, &["--cache", &format!("cache-{tag}"), "--results", &r]);
            let df = kiln::store::table::read(&table(&w, &r)).unwrap();
            (
                crate::util::floats(&df, "energy"),
                crate::util::floats(&df, "energy_perturbed"),
            )
        };
        assert_eq!(
            energies("cube", "xi = { 2 = 0.5 }\n"),
            energies("sk", ""),
            "{storage}"
        );
    }
}

/// A compact storage holds the p = 2 term, so a mixture without one refuses it, naming the
/// key and what to do.
#[test]
fn storage_without_a_p2_term_is_refused() {
    let w = Work::new();
    let s = w.spec(
        "pure.toml",
        "[experiment]\nname = \"held\"\n[model]\nfamily = \"cube\"\nxi = { 3 = 0.5 }\nstorage = \"f32\"\n[sweep]\nsizes = [12]\nseeds = 1\n[[algorithm]]\nkind = \"descent\"\n",
    );
    let o = w.kiln(&["check", s.to_str().unwrap()]);
    assert!(!o.status.success());
    let e = stderr(&o);
    assert!(e.contains("storage") && e.contains("xi has none"), "{e}");
    assert!(e.contains("add a p = 2 term"), "{e}");
}

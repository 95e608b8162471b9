//! Caching rules: what a rerun computes after each kind of edit.

use crate::util::{SMALL, Work, counts};
use std::path::Path;

#[test]
fn rerun_rules() {
    let w = Work::new();
    let spec = w.spec("s.toml", SMALL);
    // 2 sizes × 3 seeds × 2 ε × 2 algorithms.
    assert_eq!(counts(&w.run_json(&spec, &[])), (24, 0));
    // Same spec: everything cached.
    assert_eq!(counts(&w.run_json(&spec, &[])), (0, 24));

    // One algorithm's setting changes: only its 12 cells rerun.
    let text = SMALL.replace("sweeps = 20", "sweeps = 21");
    let spec = w.spec("s.toml", &text);
    assert_eq!(counts(&w.run_json(&spec, &[])), (12, 12));

    // A new size: 2 algorithms × 3 seeds × 2 ε.
    let text = text.replace("sizes = [16, 32]", "sizes = [16, 32, 24]");
    let spec = w.spec("s.toml", &text);
    assert_eq!(counts(&w.run_json(&spec, &[])), (12, 24));

    // A new seed: 2 algorithms × 3 sizes × 2 ε.
    let text = text.replace("seeds = 3", "seeds = 4");
    let spec = w.spec("s.toml", &text);
    assert_eq!(counts(&w.run_json(&spec, &[])), (12, 36));

    // A new ε: 2 algorithms × 3 sizes × 4 seeds, and no reference run again.
    let text = text.replace("epsilons = [0.0, 0.1]", "epsilons = [0.0, 0.1, 0.3]");
    let spec = w.spec("s.toml", &text);
    assert_eq!(counts(&w.run_json(&spec, &[])), (24, 48));

    // Reordered tables and keys, renamed labels, a new note and name: nothing reruns.
    let reordered = r#"
[[algorithm]]
kind = "anneal"
beta = [0.1, 3.0]
sweeps = 21
label = "annealing, renamed"

[[algorithm]]
order = "random"
kind = "descent"
label = "descent, renamed"

[sweep]
epsilons = [0.3, 0.1, 0]
seeds = [3, 2, 1, 0]
sizes = [24, 32, 16]

[model]
couplings = "gaussian"
family = "sk"

[experiment]
note = "another note"
name = "renamed"
"#;
    let spec = w.spec("r.toml", reordered);
    assert_eq!(counts(&w.run_json(&spec, &[])), (0, 72));
    // Writing a default value explicitly changes nothing either.
    let explicit = reordered.replace(
        "order = \"random\"",
        "order = \"random\"\nmax_sweeps = 100000",
    );
    let spec = w.spec("r.toml", &explicit);
    assert_eq!(counts(&w.run_json(&spec, &[])), (0, 72));
}

/// Two experiments share the cache: identical cells are computed once.
#[test]
fn experiments_share_the_cache() {
    let w = Work::new();
    let a = w.spec("a.toml", SMALL);
    let b = w.spec(
        "b.toml",
        &SMALL.replace("name = \"small\"", "name = \"other\""),
    );
    assert_eq!(counts(&w.run_json(&a, &[])), (24, 0));
    assert_eq!(counts(&w.run_json(&b, &[])), (0, 24));
    assert!(w.path().join("results/small/cells.parquet").is_file());
    assert!(w.path().join("results/other/cells.parquet").is_file());
}

/// `kiln check` of a spec with `extra` arguments: its screen (the command must succeed).
fn check_screen(w: &Work, spec: &Path, extra: &[&str]) -> String {
    let mut a = vec!["check", spec.to_str().unwrap()];
    a.extend_from_slice(extra);
    let o = w.kiln(&a);
    assert!(o.status.success(), "{}", crate::util::stderr(&o));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// `kiln check --json` of a spec with `extra` arguments.
fn check_json(w: &Work, spec: &Path, extra: &[&str]) -> serde_json::Value {
    let mut a = vec!["--json"];
    a.extend_from_slice(extra);
    serde_json::from_str(&check_screen(w, spec, &a)).unwrap()
}

/// `kiln check`'s time bound follows how cells run: an instance's ε cell starts only after
/// the instance's own cell, so a plan of one of each takes as long on two jobs as on one, and
/// the bound says so (a bound that divided the total by the jobs would halve). It counts the
/// sampling of each instance: a cheap algorithm on a large sparse graph still costs time.
#[test]
fn check_time_follows_the_phases() {
    let w = Work::new();
    let spec = r#"
[experiment]
name = "phases"
[model]
family = "regular"
degree = 3
[sweep]
sizes = [200000]
seeds = 1
epsilons = [0.1]
[[algorithm]]
kind = "descent"
"#;
    let s = w.spec("s.toml", spec);
    let bound = |jobs: &str| {
        let v = check_json(&w, &s, &["--jobs", jobs]);
        // One instance cell, then its ε cell: never two busy at once.
        assert_eq!(v["time"]["busy_jobs"], 1, "{v}");
        v["time"]["upper_bound_seconds"].as_f64().unwrap()
    };
    let (one, two) = (bound("1"), bound("2"));
    assert!(one > 0.0);
    assert!(
        (one - two).abs() <= 1e-12 * one,
        "1 job {one} s, 2 jobs {two} s"
    );
    // Sampling alone is 150n units per cell (50 per neighbour, 3n neighbours), and the bound
    // counts both cells' samplings: at least 2·150n / 2e8 s (the old model, without sampling,
    // gave 0.006 s here).
    assert!(one >= 2.0 * 150.0 * 200000.0 / 2e8, "{one}");
    // The words say so too.
    let text = check_screen(&w, &s, &["--jobs", "2"]);
    assert!(text.contains("on 2 jobs, at most 1 busy at once"), "{text}");
}

/// With some of the plan's cells cached on this host, `kiln check` also gives the time at the
/// speed they ran at (each algorithm's cells at its largest cached size); with none, it gives
/// only the cost model's bound. A plan with every cell cached says there is nothing to run.
#[test]
fn check_time_from_cached_cells() {
    let w = Work::new();
    let spec = |sizes: &str| {
        format!(
            "[experiment]\nname = \"speed\"\n[model]\nfamily = \"sk\"\n[sweep]\nsizes = [{sizes}]\nseeds = 2\n[[algorithm]]\nkind = \"anneal\"\nsweeps = 40000\n"
        )
    };
    let first = w.spec("a.toml", &spec("400"));
    let time = |s: &Path| check_json(&w, s, &[])["time"].clone();
    let t = time(&first);
    assert!(t["measured_seconds"].is_null(), "{t}");
    assert_eq!(t["measured_from_cells"], 0, "{t}");
    w.run_json(&first, &[]);
    let text = check_screen(&w, &first, &[]);
    assert!(
        text.contains("nothing to run: every cell is cached"),
        "{text}"
    );
    // One more size: its two cells at the speed the two cached ones ran at (each well over the
    // 0.05 s a cell must take to count).
    let more = w.spec("b.toml", &spec("400, 500"));
    let t = time(&more);
    assert_eq!(t["measured_from_cells"], 2, "{t}");
    let m = t["measured_seconds"].as_f64().unwrap();
    assert!(m > 0.0 && m.is_finite(), "{t}");
    let text = check_screen(&w, &more, &[]);
    assert!(
        text.contains("at the speed 2 cached cells of this plan ran at on this host"),
        "{text}"
    );
}

/// `--cache` and `--results` move the folders.
#[test]
fn folders_can_be_moved() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let v = w.run_json(&s, &["--results", "out", "--cache", "store"]);
    assert_eq!(counts(&v), (24, 0));
    assert!(w.path().join("out/small/cells.parquet").is_file());
    assert!(w.path().join("out/small/manifest.toml").is_file());
    assert!(w.path().join("store/records").is_dir());
    assert!(!w.path().join("results").exists());
}

/// `kiln check` reports totals and cached counts and writes nothing.
#[test]
fn check_reports_the_plan() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let v = check_json(&w, &s, &[]);
    assert_eq!(v["cells"]["total"], 24);
    assert_eq!(v["cells"]["cached"], 0);
    // 32×32 f64 matrix plus work space plus the 1 MiB margin.
    assert!(v["memory"]["largest_cell_bytes"].as_u64().unwrap() > 8 * 32 * 32);
    // The time estimate from the cost model: positive while cells are to run, 0 once all
    // are cached (how it compares with real runs is measured in the README, not timed here).
    let bound = v["time"]["upper_bound_seconds"].as_f64().unwrap();
    assert!(bound > 0.0, "{v}");
    assert!(!w.path().join("results").exists(), "check wrote something");
    w.run_json(&s, &[]);
    let text = check_screen(&w, &s, &[]);
    assert!(
        text.contains("24 in total · 24 cached · 0 to run"),
        "{text}"
    );
    // With everything cached nothing is left to time, and the line says so (it read "at most
    // about 0 s … at most 0 busy at once" before).
    assert!(
        text.contains("time        nothing to run: every cell is cached"),
        "{text}"
    );
    assert!(!text.contains("at most about"), "{text}");
}

//! Sharded runs, status, the Slurm scripts and table comparison (the real cluster test is
//! scripts/slurm-e2e.sh, run by .ci/run).

use crate::util::{SMALL, Work, counts, stderr};

#[test]
fn shards_cover_the_plan_once_and_write_no_table() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let mut computed = 0;
    for i in 0..3 {
        let v = w.run_json(&s, &["--shard", &format!("{i}/3")]);
        assert_eq!(v["shard"], format!("{i}/3"));
        computed += counts(&v).0;
    }
    assert_eq!(computed, 24, "shards overlap or leave gaps");
    assert!(!w.path().join("results/small/cells.parquet").exists());
    // Rerunning a shard computes nothing; the assembling run finds everything cached.
    assert_eq!(counts(&w.run_json(&s, &["--shard", "1/3"])).0, 0);
    assert_eq!(counts(&w.run_json(&s, &[])), (0, 24));
    // And the assembled table equals a single-process run.
    w.run_json(&s, &["--results", "single", "--cache", "single-cache"]);
    let o = w.kiln(&[
        "compare",
        "results/small/cells.parquet",
        "single/small/cells.parquet",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
}

#[test]
fn bad_shard_is_refused() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    for bad in ["3/3", "1/0", "x"] {
        let o = w.kiln(&["run", s.to_str().unwrap(), "--shard", bad]);
        assert_eq!(o.status.code(), Some(2), "{bad}: {}", stderr(&o));
        assert!(stderr(&o).contains("--shard"), "{}", stderr(&o));
    }
    assert!(!w.path().join("results").exists());
}

#[test]
fn status_counts_done_and_missing_per_shard() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    w.run_json(&s, &["--shard", "0/2"]);
    let o = w.kiln(&["status", s.to_str().unwrap(), "--shards", "2", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let shard0 = &v["shards"][0];
    let shard1 = &v["shards"][1];
    assert_eq!(shard0["missing"], 0);
    assert_eq!(shard0["done"], shard0["cells"]);
    assert_eq!(shard1["done"], 0);
    assert_eq!(shard1["missing"], shard1["cells"]);
    assert_eq!(v["all"]["cells"], 24);
}

#[test]
fn slurm_scripts_name_shards_cache_and_dependency() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let o = w.kiln(&[
        "slurm",
        s.to_str().unwrap(),
        "--tasks",
        "4",
        "--cache",
        "shared",
        "--partition",
        "short",
        "--cpus",
        "2",
    ]);
    let text = String::from_utf8_lossy(&o.stdout).into_owned();
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(text.contains("bash '"), "{text}");
    let dir = w.path().join("results/small/slurm");
    let array = std::fs::read_to_string(dir.join("array.sbatch")).unwrap();
    for want in [
        "#SBATCH --array=0-3",
        "#SBATCH --cpus-per-task=2",
        "#SBATCH --partition=short",
        "--shard \"$SLURM_ARRAY_TASK_ID/4\"",
        "/shared'",
    ] {
        assert!(array.contains(want), "{want:?} not in\n{array}");
    }
    let submit = std::fs::read_to_string(dir.join("submit.sh")).unwrap();
    assert!(submit.contains("--dependency=afterok:$array"), "{submit}");
    assert_eq!(
        std::fs::read_to_string(dir.join("spec.toml")).unwrap(),
        SMALL
    );
    // The memory request derives from the plan: largest cell (n = 32, ~1 MiB) × 2 CPUs + 512.
    assert!(array.contains("#SBATCH --mem=514M"), "{array}");
}

#[test]
fn compare_tells_tables_apart() {
    let w = Work::new();
    let a = w.spec("a.toml", SMALL);
    let b = w.spec("b.toml", &SMALL.replace("sweeps = 20", "sweeps = 21"));
    w.run_json(&a, &["--results", "a"]);
    w.run_json(&b, &["--results", "b"]);
    let o = w.kiln(&["compare", "a/small/cells.parquet", "b/small/cells.parquet"]);
    assert_eq!(o.status.code(), Some(1));
    let err = stderr(&o);
    assert!(err.contains("column `settings` differs"), "{err}");
    let o = w.kiln(&["compare", "a/small/cells.parquet", "a/small/cells.parquet"]);
    assert!(o.status.success());
}

//! Runs split into parts, status, the Slurm scripts and table comparison (the real cluster test is
//! scripts/slurm-e2e.sh, run by .ci/run).

use crate::util::{SMALL, Work, counts, stderr};

#[test]
fn parts_cover_the_plan_once_and_write_no_table() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let mut computed = 0;
    // Parts count from 1: 1/3, 2/3, 3/3.
    for i in 1..=3 {
        let v = w.run_json(&s, &["--part", &format!("{i}/3")]);
        assert_eq!(v["part"], format!("{i}/3"));
        computed += counts(&v).0;
    }
    assert_eq!(computed, 24, "parts overlap or leave gaps");
    assert!(!w.path().join("results/small/cells.parquet").exists());
    // Rerunning a part computes nothing; the assembling run finds everything cached.
    assert_eq!(counts(&w.run_json(&s, &["--part", "2/3"])).0, 0);
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
fn bad_part_is_refused() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    // 0/3 is refused because parts count from 1 (the message says so).
    for bad in ["0/3", "4/3", "1/0", "x"] {
        let o = w.kiln(&["run", s.to_str().unwrap(), "--part", bad]);
        assert_eq!(o.status.code(), Some(2), "{bad}: {}", stderr(&o));
        assert!(stderr(&o).contains("--part"), "{}", stderr(&o));
    }
    let o = w.kiln(&["run", s.to_str().unwrap(), "--part", "0/3"]);
    assert!(stderr(&o).contains("counted from 1"), "{}", stderr(&o));
    assert!(!w.path().join("results").exists());
}

#[test]
fn status_counts_done_and_missing_per_part() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    w.run_json(&s, &["--part", "1/2"]);
    let o = w.kiln(&["status", s.to_str().unwrap(), "--parts", "2", "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let shard0 = &v["parts"][0];
    let shard1 = &v["parts"][1];
    assert_eq!(shard0["part"], "1/2");
    assert_eq!(shard0["missing"], 0);
    assert_eq!(shard0["done"], shard0["cells"]);
    assert_eq!(shard1["done"], 0);
    assert_eq!(shard1["missing"], shard1["cells"]);
    assert_eq!(v["all"]["cells"], 24);
}

#[test]
fn slurm_scripts_name_parts_cache_and_dependency() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let o = w.kiln(&[
        "slurm",
        s.to_str().unwrap(),
        "--parts",
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
        "#SBATCH --array=1-4",
        "#SBATCH --cpus-per-task=2",
        "#SBATCH --partition=short",
        "--part \"$SLURM_ARRAY_TASK_ID/4\"",
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
    assert!(err.contains("column `settings` differs in "), "{err}");
    // The first differing values are listed with both sides.
    assert!(
        err.contains("\"sweeps\":20") && err.contains("\"sweeps\":21"),
        "{err}"
    );
    let o = w.kiln(&["compare", "a/small/cells.parquet", "a/small/cells.parquet"]);
    assert!(o.status.success());

    // The same cells under another experiment name are the same numbers; folders are read
    // as their cells.parquet.
    let c = w.spec(
        "c.toml",
        &SMALL.replace("name = \"small\"", "name = \"other\""),
    );
    w.run_json(&c, &["--results", "a"]);
    let o = w.kiln(&["compare", "a/small", "a/other"]);
    assert!(o.status.success(), "{}", stderr(&o));
    // Paired by key: a row that changed names its key prefix, the column and both values.
    let d = w.spec(
        "d.toml",
        &SMALL.replace("sizes = [16, 32]", "sizes = [16, 24]"),
    );
    w.run_json(&d, &["--results", "d"]);
    let o = w.kiln(&["compare", "a/small", "d/small"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(stderr(&o).contains("rows only in A"), "{}", stderr(&o));
    // A folder without a table is bad input (exit 2), not a failed comparison.
    let o = w.kiln(&["compare", "a", "a/small"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("without cells.parquet"),
        "{}",
        stderr(&o)
    );
}

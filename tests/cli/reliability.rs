//! Crash safety, verified cache, concurrent runners and refusals.

use crate::util::{Lcg, Work, counts, numbers, stderr};
use kiln::store::table;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

fn slow() -> String {
    crate::util::slow_spec("rel")
}

fn files_under(dir: &Path) -> Vec<PathBuf> {
    let mut out = Vec::new();
    if let Ok(rd) = std::fs::read_dir(dir) {
        for e in rd.flatten() {
            let p = e.path();
            if p.is_dir() {
                out.extend(files_under(&p));
            } else {
                out.push(p);
            }
        }
    }
    out.sort();
    out
}

fn reference_table(w: &Work, spec: &Path) -> Vec<u8> {
    let v = w.run_json(spec, &["--results", "reference"]);
    assert_eq!(v["cells"]["failed"], 0);
    numbers(&w.path().join("reference/rel/cells.parquet"))
}

/// SIGKILL at 20 random moments, resuming each time: the final table equals an uninterrupted
/// run, bit for bit, and the cache holds no damaged entry.
#[test]
fn kill_9_and_resume_twenty_times() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow());
    let want = reference_table(&w, &spec);
    let mut rng = Lcg(20261202);
    let mut landed = 0;
    for _ in 0..20 {
        let mut child = Command::new(env!("CARGO_BIN_EXE_kiln"))
            .args(["run", spec.to_str().unwrap(), "--quiet"])
            .current_dir(w.path())
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        std::thread::sleep(Duration::from_millis(20 + rng.next(180)));
        if child.try_wait().unwrap().is_none() {
            landed += 1;
        }
        child.kill().unwrap(); // SIGKILL
        child.wait().unwrap();
    }
    assert!(landed >= 5, "only {landed} kills landed mid-run");
    // kill -9 leaves no record half-written: every file in the cache verifies.
    let o = w.kiln(&["verify", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["damaged"], 0, "{v}");
    let last = w.run_json(&spec, &[]);
    assert_eq!(last["cells"]["failed"], 0);
    assert_eq!(numbers(&w.path().join("results/rel/cells.parquet")), want);
    // Nothing is left behind: no temporary files, no claims.
    let leftovers: Vec<PathBuf> = files_under(&w.path().join("results/.cache"))
        .into_iter()
        .filter(|p| {
            let n = p.file_name().unwrap().to_str().unwrap();
            n.contains(".tmp-") || n.ends_with(".claim")
        })
        .collect();
    assert!(leftovers.is_empty(), "{leftovers:?}");
}

/// Ctrl-C: the cells in flight finish, the table of what is done is written, the message says
/// how to resume, the exit status is 130; the resumed run completes the same table.
#[test]
fn sigint_writes_what_is_done_and_resumes() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow());
    let want = reference_table(&w, &spec);
    let child = Command::new(env!("CARGO_BIN_EXE_kiln"))
        .args(["run", spec.to_str().unwrap(), "--json"])
        .current_dir(w.path())
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(400));
    let st = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(st.success());
    let o = child.wait_with_output().unwrap();
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(130), "{err}");
    assert!(
        err.contains("Run the same command again to resume"),
        "{err}"
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["interrupted"], true);
    let done = v["rows"].as_u64().unwrap();
    let total = v["cells"]["total"].as_u64().unwrap();
    assert!(done < total, "the run finished before the interrupt");
    let df = table::read(&w.path().join("results/rel/cells.parquet")).unwrap();
    assert_eq!(df.height() as u64, done);
    let rest = w.run_json(&spec, &[]);
    assert_eq!(counts(&rest).1, done, "resume recomputed finished cells");
    assert_eq!(numbers(&w.path().join("results/rel/cells.parquet")), want);
}

/// 100 random cache files damaged three ways (truncated, a byte flipped, replaced by another
/// entry of the same kind): all detected, moved aside, recomputed; the table is unchanged.
#[test]
fn corruption_is_detected_and_repaired() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow().replace("sweeps = 2500", "sweeps = 50"));
    let first = w.run_json(&spec, &[]);
    let total = first["cells"]["total"].as_u64().unwrap();
    let want = numbers(&w.path().join("results/rel/cells.parquet"));
    let cache = w.path().join("results/.cache");
    let mut files: Vec<PathBuf> = files_under(&cache.join("records"));
    files.extend(files_under(&cache.join("spins")));
    assert!(files.len() >= 100, "only {} files", files.len());
    let mut rng = Lcg(7);
    // Choose 100 distinct files.
    let mut chosen = files.clone();
    for i in 0..chosen.len() {
        let j = i + rng.next((chosen.len() - i) as u64) as usize;
        chosen.swap(i, j);
    }
    chosen.truncate(100);
    let originals: Vec<Vec<u8>> = files.iter().map(|f| std::fs::read(f).unwrap()).collect();
    for (i, f) in chosen.iter().enumerate() {
        let mut b = std::fs::read(f).unwrap();
        match i % 3 {
            0 => b.truncate(rng.next(b.len() as u64) as usize),
            1 => {
                let k = rng.next(b.len() as u64) as usize;
                b[k] ^= 1 << rng.next(8);
            }
            _ => {
                // Another valid entry of the same kind, put under this name.
                let same_kind: Vec<usize> = (0..files.len())
                    .filter(|&j| files[j] != *f && files[j].extension() == f.extension())
                    .collect();
                b = originals[same_kind[rng.next(same_kind.len() as u64) as usize]].clone();
            }
        }
        std::fs::write(f, b).unwrap();
    }
    let second = w.run_json(&spec, &[]);
    let damaged = second["damaged"].as_array().unwrap();
    assert_eq!(damaged.len(), 100, "{:?}", &damaged[..damaged.len().min(3)]);
    for f in &chosen {
        assert!(
            damaged.iter().any(|d| d
                .as_str()
                .unwrap()
                .contains(f.strip_prefix(w.path()).unwrap().to_str().unwrap())),
            "not reported: {}",
            f.display()
        );
    }
    assert_eq!(files_under(&cache.join("quarantine")).len(), 100);
    let (computed, cached) = counts(&second);
    assert_eq!(computed + cached, total);
    assert!(computed > 0);
    assert_eq!(numbers(&w.path().join("results/rel/cells.parquet")), want);
    // Everything is whole again.
    let o = w.kiln(&["verify"]);
    assert!(o.status.success(), "{}", stderr(&o));
}

/// Two runners on one spec and cache at once: every cell is computed exactly once (counted
/// from the records' provenance) and both tables hold every cell exactly once.
#[test]
fn concurrent_runners_compute_each_cell_once() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow());
    let spawn = |results: &str| {
        Command::new(env!("CARGO_BIN_EXE_kiln"))
            .args(["run", spec.to_str().unwrap(), "--json", "--jobs", "1"])
            .args(["--results", results, "--cache", "shared-cache"])
            .current_dir(w.path())
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap()
    };
    let a = spawn("a");
    let b = spawn("b");
    let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
    assert!(a.status.success(), "{}", stderr(&a));
    assert!(b.status.success(), "{}", stderr(&b));
    let va: serde_json::Value = serde_json::from_slice(&a.stdout).unwrap();
    let vb: serde_json::Value = serde_json::from_slice(&b.stdout).unwrap();
    let total = va["cells"]["total"].as_u64().unwrap();
    let (ca, cb) = (counts(&va).0, counts(&vb).0);
    assert_eq!(ca + cb, total, "a computed {ca}, b computed {cb}");
    assert!(ca > 0 && cb > 0, "the runners did not overlap: {ca} / {cb}");
    for dir in ["a", "b"] {
        let df = table::read(&w.path().join(dir).join("rel/cells.parquet")).unwrap();
        assert_eq!(df.height() as u64, total);
        let keys = df.column("cell_key").unwrap().str().unwrap().clone();
        let mut ks: Vec<&str> = keys.iter().map(|k| k.unwrap()).collect();
        ks.sort_unstable();
        ks.dedup();
        assert_eq!(ks.len() as u64, total, "{dir}: duplicate rows");
        // Provenance: each record was computed by exactly one of the two processes, and the
        // per-process counts match what each runner reported.
        let by = df.column("computed_by").unwrap().str().unwrap().clone();
        let mut per: std::collections::HashMap<String, u64> = Default::default();
        for x in by.iter() {
            *per.entry(x.unwrap().to_string()).or_default() += 1;
        }
        let mut got: Vec<u64> = per.values().copied().collect();
        got.sort_unstable();
        let mut want = vec![ca, cb];
        want.sort_unstable();
        assert_eq!(got, want, "{dir}: {per:?}");
    }
    assert_eq!(
        numbers(&w.path().join("a/rel/cells.parquet")),
        numbers(&w.path().join("b/rel/cells.parquet"))
    );
}

/// A cache that cannot be written: a clear error naming the path, exit status 1.
#[test]
fn unwritable_cache_names_the_path() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow().replace("sweeps = 2500", "sweeps = 5"));
    std::fs::write(
        w.path().join("blocked"),
        b"a file where the cache should be",
    )
    .unwrap();
    let o = w.kiln(&[
        "run",
        spec.to_str().unwrap(),
        "--cache",
        "blocked",
        "--quiet",
    ]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("cannot write blocked/records"), "{err}");
    assert!(!w.path().join("results/rel/cells.parquet").exists());
}

/// A record that cannot be written after its cell was computed (the write-behind path): the
/// run stops with the path named, writes no table and leaves no claim behind. Every record
/// shard folder is a dangling symbolic link: reading finds nothing (so the cells are
/// computed), creating the folder fails, so only the writer fails.
#[test]
fn failed_record_write_stops_the_run() {
    let w = Work::new();
    let spec = w.spec("s.toml", &slow().replace("sweeps = 2500", "sweeps = 5"));
    let records = w.path().join("cache/records");
    std::fs::create_dir_all(&records).unwrap();
    for b in 0..=255u8 {
        std::os::unix::fs::symlink(w.path().join("nowhere"), records.join(format!("{b:02x}")))
            .unwrap();
    }
    let o = w.kiln(&["run", spec.to_str().unwrap(), "--cache", "cache", "--quiet"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("cannot write cache/records/"), "{err}");
    assert!(!w.path().join("results/rel/cells.parquet").exists());
    let claims: Vec<PathBuf> = files_under(&w.path().join("cache/claims"))
        .into_iter()
        .filter(|p| p.extension().is_some_and(|e| e == "claim"))
        .collect();
    assert!(claims.is_empty(), "claims left behind: {claims:?}");
}

/// When two cells at once would not fit, kiln runs one at a time and says so.
#[test]
fn jobs_are_lowered_to_fit_memory() {
    let w = Work::new();
    // n = 2048: 32 MiB of couplings plus work space, about 33.2 MiB a cell.
    let spec = w.spec(
        "s.toml",
        "[experiment]\nname = \"m\"\n[model]\nfamily = \"sk\"\n[sweep]\nsizes = [2048]\nseeds = 2\n[[algorithm]]\nkind = \"descent\"\n",
    );
    let o = w.kiln(&[
        "run",
        spec.to_str().unwrap(),
        "--jobs",
        "2",
        "--max-memory",
        "50M",
    ]);
    let err = stderr(&o);
    assert!(o.status.success(), "{err}");
    assert!(
        err.contains("running 1 cells at a time instead of 2"),
        "{err}"
    );
    let v = w.run_json(
        &spec,
        &["--jobs", "2", "--max-memory", "70M", "--results", "r2"],
    );
    assert_eq!(v["jobs"], 2);
}

#[test]
fn absurd_sizes_and_counts_are_refused() {
    let w = Work::new();
    let base = "[experiment]\nname = \"x\"\n[model]\nfamily = \"sk\"\n[sweep]\nsizes = [16]\nseeds = 2\n[[algorithm]]\nkind = \"descent\"\n";
    for (text, fragment) in [
        (
            base.replace("[16]", "[1000000000000]"),
            "size 1000000000000 is larger than kiln supports",
        ),
        (
            base.replace("seeds = 2", "seeds = 1000000000000"),
            "more than the 1000000 kiln accepts",
        ),
        (
            base.replace("seeds = 2", "seeds = 1000000\nepsilons = [0.1, 0.2, 0.3]")
                .replace("[16]", "[16, 17, 18, 19, 20, 21, 22, 23, 24, 25]"),
            "the sweep expands to 40000000 cells",
        ),
    ] {
        let spec = w.spec("s.toml", &text);
        let o = w.kiln(&["check", spec.to_str().unwrap()]);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains(fragment), "{fragment:?} not in {err}");
    }
    assert!(!w.path().join("results").exists());
}

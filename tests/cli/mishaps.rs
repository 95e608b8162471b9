//! Small mishaps a cache and a results folder meet: folders where files go, a `quarantine`
//! that is a file, a results path that is a file, dead runners' claims, absurd settings,
//! hostile spec shapes.

use crate::util::{Work, stderr};
use std::path::Path;

const SPEC: &str = r#"[experiment]
name = "mis"
[model]
family = "sk"
[sweep]
sizes = [30, 50]
seeds = 3
epsilons = [0.0, 0.2]
[[algorithm]]
kind = "descent"
"#;

fn first_record(cache: &Path) -> std::path::PathBuf {
    let shard = std::fs::read_dir(cache.join("records"))
        .unwrap()
        .flatten()
        .next()
        .unwrap()
        .path();
    std::fs::read_dir(shard)
        .unwrap()
        .flatten()
        .next()
        .unwrap()
        .path()
}

/// A folder where a record should be is damage like any other: moved to quarantine/, the cell
/// recomputed, the run succeeds.
#[test]
fn a_folder_in_a_records_place_is_quarantined() {
    let w = Work::new();
    let spec = w.spec("s.toml", SPEC);
    w.run_json(&spec, &[]);
    let cache = w.path().join("results/.cache");
    let rec = first_record(&cache);
    std::fs::remove_file(&rec).unwrap();
    std::fs::create_dir(&rec).unwrap();
    let v = w.run_json(&spec, &[]);
    assert_eq!(v["cells"]["computed"], 1, "{v}");
    let d = v["damaged"][0].as_str().unwrap();
    assert!(d.contains("a folder where a file should be"), "{d}");
    assert!(rec.is_file());
}

/// When `quarantine` is a file, a damaged entry cannot be moved aside: the run stops naming
/// both paths, and the damaged entry is left as it was (never overwritten).
#[test]
fn a_quarantine_that_is_a_file_stops_the_run() {
    let w = Work::new();
    let spec = w.spec("s.toml", SPEC);
    w.run_json(&spec, &[]);
    let cache = w.path().join("results/.cache");
    std::fs::write(cache.join("quarantine"), b"not a folder").unwrap();
    let rec = first_record(&cache);
    let mut b = std::fs::read(&rec).unwrap();
    let k = b.len() - 5;
    b[k] ^= 1;
    std::fs::write(&rec, &b).unwrap();
    let o = w.kiln(&["run", "s.toml", "--quiet"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains("cannot be moved aside") && err.contains(".cache/quarantine"),
        "{err}"
    );
    assert_eq!(std::fs::read(&rec).unwrap(), b, "the damaged entry changed");
    let o = w.kiln(&["verify"]);
    assert_eq!(o.status.code(), Some(1), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("cannot be moved aside"),
        "{}",
        stderr(&o)
    );
}

/// `results/<name>` is a file: the run refuses before computing anything and names it.
#[test]
fn a_results_path_that_is_a_file_is_refused_up_front() {
    let w = Work::new();
    w.spec("s.toml", SPEC);
    std::fs::create_dir_all(w.path().join("results")).unwrap();
    std::fs::write(w.path().join("results/mis"), b"a file").unwrap();
    let o = w.kiln(&["run", "s.toml", "--quiet"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(
        err.contains("results folder results/mis cannot be written; nothing was computed"),
        "{err}"
    );
    assert!(
        !w.path().join("results/.cache/records").exists() || {
            std::fs::read_dir(w.path().join("results/.cache/records"))
                .unwrap()
                .next()
                .is_none()
        }
    );
}

/// A dead runner's claim (its PID gone) is not counted as running by `kiln status`, and
/// `kiln verify` removes it and counts it once.
#[test]
fn dead_runners_claims_are_neither_running_nor_kept() {
    let w = Work::new();
    let spec = w.spec("s.toml", SPEC);
    let s = kiln::spec::load(&spec).unwrap();
    let plan = kiln::spec::plan::expand(&s);
    let key = plan.distinct().next().unwrap().key.hex();
    let mut gone = std::process::Command::new("true").spawn().unwrap();
    let pid = gone.id();
    gone.wait().unwrap();
    let dir = w.path().join("results/.cache/claims").join(&key[..2]);
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(
        dir.join(format!("{key}.0.claim")),
        format!(
            "kiln-claim 2 host={} pid={pid} start=5 boot=- nonce=00 lease=600 owner=gone\n",
            kiln::store::this_host()
        ),
    )
    .unwrap();
    let o = w.kiln(&["status", "s.toml", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["all"]["running"], 0, "{v}");
    let o = w.kiln(&["verify", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["stale_claims_removed"], 1, "{v}");
    assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 0);
}

/// Settings that can only give non-finite numbers are refused up front (a gradient step of
/// 1e308 once wrote NaN, stored as null, read back as damage on every later run).
#[test]
fn absurd_step_sizes_are_refused() {
    let w = Work::new();
    let spec = w.spec(
        "s.toml",
        &SPEC.replace("kind = \"descent\"", "kind = \"gradient\"\nstep = 1e308"),
    );
    let o = w.kiln(&["check", spec.to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("algorithm[1].step") && err.contains("(0, 1000]"),
        "{err}"
    );
}

/// Hostile spec shapes: keys nested thousands deep are located by line; a 65,536-character
/// label is refused at its line (it once panicked the summary after the table was written);
/// 50,000 algorithms validate (linear: the label check is a hash map).
#[test]
fn hostile_spec_shapes_are_located_or_refused() {
    let w = Work::new();
    let deep = format!(
        "[experiment]\nname = \"x\"\n{}b = 1\n[model]\nfamily = \"sk\"\n",
        "a.".repeat(5000)
    );
    let o = w.kiln(&["check", w.spec("deep.toml", &deep).to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("deep.toml, line 3") && err.contains("nest"),
        "{err}"
    );
    let label = SPEC.replace(
        "kind = \"descent\"",
        &format!("kind = \"descent\"\nlabel = \"{}\"", "L".repeat(65_536)),
    );
    let o = w.kiln(&["check", w.spec("label.toml", &label).to_str().unwrap()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("line 11") && err.contains("65536 characters"),
        "{err}"
    );
    let mut many = SPEC.replace("[[algorithm]]\nkind = \"descent\"\n", "");
    for i in 0..50_000 {
        many += &format!("[[algorithm]]\nkind = \"descent\"\nlabel = \"d{i}\"\n");
    }
    let o = w.kiln(&["check", w.spec("many.toml", &many).to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
}

//! `kiln replay` and `kiln bundle`: a reader recomputes a sample of a results folder and checks
//! a deposit archive. Every check here compares kiln with itself (the same spec recomputed
//! from scratch), so no outside source is involved.

use crate::util::{SMALL, Work};
use polars::prelude::*;
use std::path::Path;

fn json(o: &std::process::Output) -> serde_json::Value {
    serde_json::from_slice(&o.stdout).unwrap_or_else(|_| {
        panic!(
            "JSON summary expected\nstdout: {}\nstderr: {}",
            String::from_utf8_lossy(&o.stdout),
            String::from_utf8_lossy(&o.stderr)
        )
    })
}

/// Rewrites `dir/cells.parquet` through `edit` with a plain Parquet writer (the same schema,
/// no kiln metadata) and updates the checksum its manifest records, as a careful forger would:
/// only recomputing the cells can tell.
fn forge(dir: &Path, edit: impl FnOnce(&mut DataFrame)) {
    use sha2::{Digest, Sha256};
    let path = dir.join("cells.parquet");
    let before = hex::encode(Sha256::digest(std::fs::read(&path).unwrap()));
    let mut df = kiln::store::table::read(&path).unwrap();
    edit(&mut df);
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf).finish(&mut df).unwrap();
    std::fs::write(&path, &buf).unwrap();
    let after = hex::encode(Sha256::digest(&buf));
    let m = dir.join("manifest.toml");
    let text = std::fs::read_to_string(&m).unwrap();
    assert!(text.contains(&before));
    std::fs::write(&m, text.replace(&before, &after)).unwrap();
}

/// Changes the energy of row `row` by one unit in the last place.
fn nudge_energy(df: &mut DataFrame, row: usize) {
    let e: Vec<Option<f64>> = df
        .column("energy")
        .unwrap()
        .f64()
        .unwrap()
        .iter()
        .enumerate()
        .map(|(i, v)| {
            v.map(|x| {
                if i == row {
                    f64::from_bits(x.to_bits() + 1)
                } else {
                    x
                }
            })
        })
        .collect();
    df.replace("energy", Column::new("energy".into(), e))
        .unwrap();
}

fn cell_key(dir: &Path, row: usize) -> String {
    let df = kiln::store::table::read(&dir.join("cells.parquet")).unwrap();
    df.column("cell_key")
        .unwrap()
        .str()
        .unwrap()
        .get(row)
        .unwrap()
        .to_string()
}

#[test]
fn replay_passes_on_every_committed_example() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("results");
    let w = Work::new();
    for e in [
        "default",
        "sk-algorithms",
        "sk-stability",
        "cube-mixture",
        "sk-gibbs-transition",
        "ksat-walk-threshold",
        "perceptron-sphere-capacity",
        "perceptron-binary-capacity",
        "sk-large-n",
        "cube-pure3-iamp",
        "sk-iamp-steps",
        "cube-pure3-iamp-half-step",
        "cube-pure3-iamp-quarter-step",
        "cube-mixture-iamp",
    ] {
        let dir = root.join(e);
        // Committed numbers come from a committed tree: the manifest names a clean revision.
        let manifest = std::fs::read_to_string(dir.join("manifest.toml")).unwrap();
        let revision = manifest
            .lines()
            .find_map(|l| l.strip_prefix("git_revision = "))
            .unwrap_or_else(|| panic!("{e}: no git_revision in the manifest"));
        assert!(
            !revision.contains("dirty") && revision.len() > 2,
            "{e}: computed from an uncommitted tree ({revision})"
        );
        let o = w.kiln(&[
            "replay",
            dir.to_str().unwrap(),
            "--cells",
            "3",
            "--budget",
            "5",
            "--json",
        ]);
        let v = json(&o);
        assert_eq!(o.status.code(), Some(0), "{e}: {v}");
        assert_eq!(v["revisions"], "agree", "{e}");
        assert_eq!(v["revisions_judged"], "by the manifest's list", "{e}");
        assert_eq!(v["different"], 0, "{e}");
        assert!(v["replayed"].as_u64().unwrap() >= 3, "{e}: {v}");
        assert_eq!(v["integrity"].as_array().unwrap().len(), 0, "{e}: {v}");
    }
}

#[test]
fn the_sample_covers_every_algorithm_size_and_epsilon_and_depends_only_on_the_seed() {
    let w = Work::new();
    let spec = w.spec("small.toml", SMALL);
    w.run_json(&spec, &[]);
    let strata = |seed: &str| {
        let o = w.kiln(&[
            "replay",
            "results/small",
            "--cells",
            "2",
            "--seed",
            seed,
            "--json",
        ]);
        assert_eq!(o.status.code(), Some(0));
        let v = json(&o);
        assert_eq!(v["chosen"], 2);
        v["strata"]
            .as_array()
            .unwrap()
            .iter()
            .filter(|s| s["replayed"].as_u64().unwrap() > 0)
            .map(|s| {
                (
                    s["algorithm"].as_str().unwrap().to_string(),
                    s["n"].as_u64().unwrap(),
                    s["epsilon"].as_f64().unwrap().to_bits(),
                )
            })
            .collect::<Vec<_>>()
    };
    // 2 algorithms × 2 sizes × 2 ε: two chosen cells must between them name each value.
    let a = strata("7");
    for (what, got) in [
        (
            "algorithms",
            a.iter().map(|s| s.0.clone()).collect::<Vec<_>>(),
        ),
        ("sizes", a.iter().map(|s| s.1.to_string()).collect()),
        ("epsilons", a.iter().map(|s| s.2.to_string()).collect()),
    ] {
        let distinct: std::collections::BTreeSet<_> = got.into_iter().collect();
        assert_eq!(distinct.len(), 2, "{what} not all covered: {a:?}");
    }
    assert_eq!(a, strata("7"), "the same seed picks the same cells");
}

#[test]
fn a_changed_number_is_caught_when_its_cell_is_replayed() {
    let w = Work::new();
    let spec = w.spec("small.toml", SMALL);
    w.run_json(&spec, &[]);
    let dir = w.path().join("results/small");
    let row = 13;
    let key = cell_key(&dir, row);
    forge(&dir, |df| nudge_energy(df, row));
    // The forged table passes kiln's own reading checks (checksum updated, no digest)…
    kiln::store::table::read(&dir.join("cells.parquet")).unwrap();
    // …but not a replay of every cell.
    let o = w.kiln(&["replay", "results/small", "--cells", "1000", "--json"]);
    let v = json(&o);
    assert_eq!(o.status.code(), Some(1), "{v}");
    assert_eq!(v["different"], 1, "{v}");
    let d = &v["differences"][0];
    assert_eq!(d["column"], "energy");
    assert_eq!(d["cell_key"], key.as_str());
    assert_ne!(d["folder"], d["replay"]);
    assert_eq!(v["integrity"].as_array().unwrap().len(), 0);
}

#[test]
fn bundles_are_reproducible_and_their_checksums_catch_any_change() {
    let w = Work::new();
    let spec = w.spec("small.toml", SMALL);
    w.run_json(&spec, &[]);
    let dir = w.path().join("results/small");
    let ok = w.kiln(&["bundle", "results/small", "-o", "one.tar"]);
    assert!(ok.status.success(), "{}", crate::util::stderr(&ok));
    // File times do not enter the archive.
    let later = std::time::SystemTime::now() + std::time::Duration::from_secs(3600);
    for f in ["cells.parquet", "manifest.toml"] {
        std::fs::File::options()
            .append(true)
            .open(dir.join(f))
            .unwrap()
            .set_modified(later)
            .unwrap();
    }
    assert!(
        w.kiln(&["bundle", "results/small", "-o", "two.tar"])
            .status
            .success()
    );
    let one = std::fs::read(w.path().join("one.tar")).unwrap();
    assert_eq!(
        one,
        std::fs::read(w.path().join("two.tar")).unwrap(),
        "two bundles of one folder differ"
    );

    // What the archive holds: the spec as run, the guide, and a checksum of every other file.
    let unpacked = w.path().join("unpacked");
    tar::Archive::new(&one[..]).unpack(&unpacked).unwrap();
    let inner = unpacked.join("small");
    assert_eq!(
        std::fs::read_to_string(inner.join("spec.toml")).unwrap(),
        SMALL
    );
    let sums = std::fs::read_to_string(inner.join("CHECKSUMS.sha256")).unwrap();
    for f in ["cells.parquet", "manifest.toml", "README.txt", "spec.toml"] {
        assert!(sums.contains(&format!("  {f}\n")), "{f} not listed");
    }
    let guide = std::fs::read_to_string(inner.join("README.txt")).unwrap();
    assert!(guide.contains("kiln replay small.tar --checksums-only"));

    // Verifying the bundle: checksums, then a replay of the unpacked folder.
    let o = w.kiln(&["replay", "one.tar", "--json"]);
    let v = json(&o);
    assert_eq!(o.status.code(), Some(0), "{v}");
    assert_eq!(v["checksums"]["failed"], 0);
    assert!(v["replayed"].as_u64().unwrap() > 0);

    // A forged table inside the unpacked bundle: the checksum list catches it whatever the
    // sample, even a sample of one cell that does not hold the change.
    forge(&inner, |df| nudge_energy(df, 0));
    let o = w.kiln(&["replay", "unpacked/small", "--checksums-only"]);
    assert_eq!(o.status.code(), Some(1));
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.contains("cells.parquet: content differs"), "{text}");
    assert!(text.contains("manifest.toml: content differs"), "{text}");
    let o = w.kiln(&["replay", "unpacked/small", "--cells", "1", "--json"]);
    let v = json(&o);
    assert_eq!(o.status.code(), Some(1), "{v}");
    assert!(
        v["integrity"]
            .as_array()
            .unwrap()
            .iter()
            .any(|f| f.as_str().unwrap().starts_with("cells.parquet")),
        "{v}"
    );
}

#[test]
fn a_folder_of_another_revision_is_named_and_gets_its_own_status() {
    let w = Work::new();
    let spec = w.spec("small.toml", SMALL);
    w.run_json(&spec, &[]);
    let dir = w.path().join("results/small");
    let m = dir.join("manifest.toml");
    let text = std::fs::read_to_string(&m).unwrap();
    let line = text
        .lines()
        .find(|l| l.starts_with("\"kind.anneal\" = "))
        .expect("the manifest lists the anneal revision")
        .to_string();
    let rev: u32 = line
        .trim_start_matches("\"kind.anneal\" = ")
        .trim_matches('"')
        .parse()
        .unwrap();

    // The manifest says another revision made it.
    std::fs::write(
        &m,
        text.replace(&line, &format!("\"kind.anneal\" = \"{}\"", rev + 1)),
    )
    .unwrap();
    let o = w.kiln(&["replay", "results/small"]);
    assert_eq!(o.status.code(), Some(3));
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains(&format!(
            "kind.anneal: {} in the folder, {rev} in this kiln",
            rev + 1
        )),
        "{out}"
    );

    // A folder from before manifests listed revisions: the settings column tells.
    let start = text.find("[revisions]").unwrap();
    let end = text[start + 1..]
        .find("\n[")
        .map_or(text.len(), |e| start + 1 + e + 1);
    std::fs::write(&m, format!("{}{}", &text[..start], &text[end..])).unwrap();
    forge(&dir, |df| {
        let s: Vec<Option<String>> = df
            .column("settings")
            .unwrap()
            .str()
            .unwrap()
            .iter()
            .map(|s| {
                s.map(|s| {
                    s.replace(
                        &format!("\"revision\":{rev},"),
                        &format!("\"revision\":{},", rev + 1),
                    )
                })
            })
            .collect();
        df.replace("settings", Column::new("settings".into(), s))
            .unwrap();
    });
    let o = w.kiln(&["replay", "results/small", "--json"]);
    let v = json(&o);
    assert_eq!(o.status.code(), Some(3), "{v}");
    assert_eq!(v["revisions"], "differ");
    assert!(
        v["mismatches"]
            .as_array()
            .unwrap()
            .iter()
            .any(|x| x.as_str().unwrap().starts_with("kind.anneal:")),
        "{v}"
    );
}

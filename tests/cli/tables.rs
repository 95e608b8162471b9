//! The table and manifest: contents, determinism, and an independent reader.

use crate::util::{SMALL, Work, counts};
use kiln::store::table::{self, PROVENANCE_COLUMNS};
use parquet::file::reader::{FileReader, SerializedFileReader};
use parquet::record::Field;
use polars::prelude::*;
use std::path::Path;

/// The table without its provenance columns, serialised: equal bytes ⇔ bit-identical values.
fn numbers_bytes(path: &Path) -> Vec<u8> {
    let df = table::read(path).unwrap();
    let mut df = df.drop_many(PROVENANCE_COLUMNS);
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf).finish(&mut df).unwrap();
    buf
}

#[test]
fn jobs_do_not_change_the_numbers() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    let one = w.run_json(&s, &["--jobs", "1", "--results", "one"]);
    let two = w.run_json(&s, &["--jobs", "2", "--results", "two"]);
    assert_eq!(counts(&one), (24, 0));
    assert_eq!(counts(&two), (24, 0));
    let a = numbers_bytes(&w.path().join("one/small/cells.parquet"));
    let b = numbers_bytes(&w.path().join("two/small/cells.parquet"));
    assert_eq!(a, b, "--jobs 1 and --jobs 2 give different numbers");
    // And the provenance really is the only difference: the thread counts differ.
    let t1 = table::read(&w.path().join("one/small/cells.parquet")).unwrap();
    assert_eq!(t1.column("threads").unwrap().u32().unwrap().get(0), Some(1));
}

/// A rerun from the cache writes the same numbers as the first run.
#[test]
fn cached_rerun_gives_the_same_table() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    w.run_json(&s, &[]);
    let p = w.path().join("results/small/cells.parquet");
    let first = std::fs::read(&p).unwrap();
    let v = w.run_json(&s, &[]);
    assert_eq!(counts(&v), (0, 24));
    assert_eq!(
        first,
        std::fs::read(&p).unwrap(),
        "cached rerun changed the file"
    );
}

/// The arrow-rs `parquet` crate, an implementation independent of the writer, reads the
/// table; its values equal the records kiln wrote to its cache.
#[test]
fn independent_reader_sees_what_was_written() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    w.run_json(&s, &[]);
    let f = std::fs::File::open(w.path().join("results/small/cells.parquet")).unwrap();
    let reader = SerializedFileReader::new(f).unwrap();
    let meta = reader.metadata().file_metadata();
    let kv = meta.key_value_metadata().expect("key-value metadata");
    let convention = kv.iter().find(|k| k.key == "kiln.convention").unwrap();
    assert!(convention.value.as_deref().unwrap().contains("maximises H"));
    let mut rows = 0;
    for row in reader.get_row_iter(None).unwrap() {
        let row = row.unwrap();
        let mut key = String::new();
        let mut got = std::collections::HashMap::new();
        for (name, field) in row.get_column_iter() {
            match field {
                Field::Str(s) if name == "cell_key" => key = s.clone(),
                Field::Double(x) => {
                    got.insert(name.clone(), *x);
                }
                Field::ULong(x) => {
                    got.insert(name.clone(), *x as f64);
                }
                _ => {}
            }
        }
        let rec_path = w
            .path()
            .join("results/.cache/records")
            .join(&key[..2])
            .join(format!("{key}.rec"));
        let text = std::fs::read_to_string(rec_path).unwrap();
        let body: serde_json::Value =
            serde_json::from_str(text.split_once('\n').unwrap().1).unwrap();
        for col in [
            "energy",
            "energy_perturbed",
            "overlap",
            "distance",
            "epsilon",
        ] {
            let want = body[col].as_f64().unwrap();
            assert_eq!(got[col].to_bits(), want.to_bits(), "{col} of {key}");
        }
        for col in ["n", "seed", "iterations", "sweeps"] {
            assert_eq!(
                got[col],
                body[col].as_u64().unwrap() as f64,
                "{col} of {key}"
            );
        }
        rows += 1;
    }
    assert_eq!(rows, 24);
}

#[test]
fn table_has_the_promised_columns_and_manifest() {
    let w = Work::new();
    let s = w.spec("s.toml", SMALL);
    w.run_json(&s, &[]);
    let df = table::read(&w.path().join("results/small/cells.parquet")).unwrap();
    for c in [
        "experiment",
        "family",
        "couplings",
        "n",
        "seed",
        "algorithm",
        "kind",
        "settings",
        "epsilon",
        "energy",
        "energy_perturbed",
        "overlap",
        "distance",
        "iterations",
        "sweeps",
        "converged",
        "wall_seconds",
        "cell_key",
    ] {
        assert!(df.column(c).is_ok(), "missing column {c}");
    }
    assert_eq!(df.height(), 24);
    // ε = 0 rows: the run is its own reference.
    let eps = df.column("epsilon").unwrap().f64().unwrap().clone();
    let ov = df.column("overlap").unwrap().f64().unwrap().clone();
    let dist = df.column("distance").unwrap().f64().unwrap().clone();
    for i in 0..df.height() {
        let (e, o, d) = (
            eps.get(i).unwrap(),
            ov.get(i).unwrap(),
            dist.get(i).unwrap(),
        );
        if e == 0.0 {
            assert_eq!((o, d), (1.0, 0.0));
        }
        // distance² = 2(1 − overlap) for ±1 vectors.
        assert!((d * d - 2.0 * (1.0 - o)).abs() < 1e-12);
    }
    let m = std::fs::read_to_string(w.path().join("results/small/manifest.toml")).unwrap();
    let m: toml::Table = toml::from_str(&m).unwrap();
    for k in [
        "spec_hash",
        "kiln_version",
        "git_revision",
        "rustc",
        "host",
        "threads",
        "started",
        "finished",
    ] {
        assert!(m.contains_key(k), "manifest lacks {k}");
    }
    assert_eq!(m["spec"].as_str().unwrap(), SMALL);
    // A rerun that computes nothing keeps the record of the run that did: the run log.
    w.run_json(&s, &[]);
    let m = std::fs::read_to_string(w.path().join("results/small/manifest.toml")).unwrap();
    let m: toml::Table = toml::from_str(&m).unwrap();
    let runs = m["runs"].as_array().unwrap();
    assert_eq!(runs.len(), 2);
    assert_eq!(runs[0]["computed"].as_integer(), Some(24));
    assert_eq!(runs[1]["computed"].as_integer(), Some(0));
    assert_eq!(runs[1]["cached"].as_integer(), Some(24));
}

/// The README's first command: the built-in default experiment runs and writes its table.
#[test]
fn default_experiment_runs() {
    let w = Work::new();
    let o = w.kiln(&["run", "--json"]);
    assert!(o.status.success(), "{}", crate::util::stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let total = v["cells"]["total"].as_u64().unwrap();
    assert_eq!(v["cells"]["computed"].as_u64().unwrap(), total);
    let df = table::read(&w.path().join("results/default/cells.parquet")).unwrap();
    assert_eq!(df.height() as u64, total);
    let o = w.kiln(&["run", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(counts(&v), (0, total));
}

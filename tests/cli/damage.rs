//! Damaged tables: refused with the file named, never a panic, never numbers that changed.

use crate::util::{Lcg, Work, stderr};
use kiln::store::table;
use std::path::Path;

const SPEC: &str = r#"[experiment]
name = "dmg"
[model]
family = "sk"
[sweep]
sizes = [40, 60, 80]
seeds = 6
epsilons = [0.0, 0.2]
[[algorithm]]
kind = "descent"
[[algorithm]]
kind = "anneal"
sweeps = 30
"#;

/// One random mutation of a file: a flipped bit in the footer (the last 1 KiB, where the
/// Parquet metadata lives), a flipped bit anywhere, a changed byte anywhere, or a truncation.
fn mutate(bytes: &[u8], rng: &mut Lcg) -> Vec<u8> {
    let mut b = bytes.to_vec();
    let len = b.len() as u64;
    match rng.next(4) {
        0 => {
            let k = (len - 1 - rng.next(1024.min(len))) as usize;
            b[k] ^= 1 << rng.next(8);
        }
        1 => {
            let k = rng.next(len) as usize;
            b[k] ^= 1 << rng.next(8);
        }
        2 => {
            let k = rng.next(len) as usize;
            b[k] = b[k].wrapping_add(1 + rng.next(255) as u8);
        }
        _ => b.truncate(rng.next(len) as usize),
    }
    b
}

/// Reads `count` mutated copies of a table through the reader `fit`, `plot` and `compare`
/// use, with the manifest beside it (its checksum is checked before decoding) or without
/// (the decoder and the content digest must catch everything). Returns (refused, read
/// intact); panics if a mutated file is read with changed content or the reader panics.
fn fuzz(table_bytes: &[u8], manifest: Option<&str>, count: u64, seed: u64) -> (u64, u64) {
    let d = tempfile::tempdir().unwrap();
    let path = d.path().join("cells.parquet");
    if let Some(m) = manifest {
        std::fs::write(d.path().join("manifest.toml"), m).unwrap();
    }
    let want = {
        std::fs::write(&path, table_bytes).unwrap();
        table::content_digest(&table::read(&path).unwrap())
    };
    let mut rng = Lcg(seed);
    let (mut refused, mut intact) = (0, 0);
    for i in 0..count {
        let bad = mutate(table_bytes, &mut rng);
        std::fs::write(&path, &bad).unwrap();
        if std::env::var_os("KILN_TABLE_FUZZ_KEEP").is_some() {
            // For a crash that is not a panic (an abort): the last file tried stays behind.
            std::fs::write(std::env::temp_dir().join("kiln-fuzz-last.parquet"), &bad).unwrap();
        }
        match table::read(&path) {
            Err(e) => {
                let text = e.to_string();
                assert!(text.contains("cells.parquet"), "{text}");
                refused += 1;
            }
            Ok(df) => {
                assert_eq!(
                    table::content_digest(&df),
                    want,
                    "mutation {i} was read with changed content"
                );
                intact += 1;
            }
        }
    }
    (refused, intact)
}

fn mutations() -> u64 {
    std::env::var("KILN_TABLE_MUTATIONS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(400)
}

/// Mutated tables, with and without their manifest: no panic, no changed number read. The
/// count is `KILN_TABLE_MUTATIONS` per mode (400 in the suite; `scripts/fuzz-tables.sh`
/// runs 10,000).
#[test]
fn mutated_tables_are_refused_never_misread() {
    let w = Work::new();
    let spec = w.spec("s.toml", SPEC);
    w.run_json(&spec, &[]);
    let dir = w.path().join("results/dmg");
    let bytes = std::fs::read(dir.join("cells.parquet")).unwrap();
    let manifest = std::fs::read_to_string(dir.join("manifest.toml")).unwrap();
    let n = mutations();
    let (r1, i1) = fuzz(&bytes, Some(&manifest), n, 1);
    let (r2, i2) = fuzz(&bytes, None, n, 2);
    eprintln!(
        "{n} mutations with the manifest: {r1} refused, {i1} intact; without: {r2} refused, {i2} intact"
    );
    // With the manifest every change of the bytes is refused (a truncation to the full
    // length is the only mutation that changes nothing).
    assert!(r1 + 5 >= n, "{r1} of {n} refused with the manifest");
}

/// One changed byte in the footer: `fit`, `plot` and `compare` exit 1 naming the file and
/// saying what to do, and no panic (exit 101). A table whose numbers were changed in place
/// (and its manifest checksum updated, as a careless edit would not) is still refused by
/// the content digest.
#[test]
fn commands_refuse_a_damaged_table() {
    let w = Work::new();
    let spec = w.spec("s.toml", SPEC);
    w.run_json(&spec, &[]);
    let dir = w.path().join("results/dmg");
    let path = dir.join("cells.parquet");
    let good = std::fs::read(&path).unwrap();
    std::fs::copy(&path, w.path().join("good.parquet")).unwrap();
    let mut bad = good.clone();
    let k = bad.len() - 40;
    bad[k] ^= 0x10;
    std::fs::write(&path, &bad).unwrap();
    let table = path.to_str().unwrap();
    for args in [
        vec!["fit", "s.toml"],
        vec!["plot", "s.toml"],
        vec!["compare", table, "good.parquet"],
    ] {
        let o = w.kiln(&args);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(1), "{args:?}: {err}");
        assert!(
            err.contains("results/dmg/cells.parquet") && err.contains("damaged"),
            "{args:?}: {err}"
        );
        assert!(!err.contains("panicked"), "{args:?}: {err}");
    }
    // Without the manifest, the decoder or the digest must stop it; if the flipped byte
    // was in text that does not reach the numbers (the writer's name), fit may go on.
    std::fs::remove_file(dir.join("manifest.toml")).unwrap();
    let o = w.kiln(&["fit", "s.toml"]);
    assert!(matches!(o.status.code(), Some(0 | 1)), "{}", stderr(&o));
    assert!(!stderr(&o).contains("panicked"));
    // Numbers changed, the file re-encoded (so it decodes): the content digest kiln wrote no
    // longer matches.
    edit_one_energy(&w.path().join("good.parquet"), &path);
    let o = w.kiln(&["fit", "s.toml"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(1), "{err}");
    assert!(err.contains("does not match the digest"), "{err}");
}

/// Rewrites `from` into `to` with the first energy changed, keeping kiln's metadata but the
/// pages checksum (which would refuse it first), so the content digest is what is tested.
fn edit_one_energy(from: &Path, to: &Path) {
    use polars::prelude::*;
    let f = std::fs::File::open(from).unwrap();
    let mut reader = ParquetReader::new(f);
    let meta: Vec<(String, String)> = reader
        .get_metadata()
        .unwrap()
        .key_value_metadata()
        .clone()
        .unwrap()
        .into_iter()
        .filter(|k| k.key != table::PAGES_KEY)
        .map(|k| (k.key, k.value.unwrap_or_default()))
        .collect();
    let mut df = reader.finish().unwrap();
    let mut e: Vec<f64> = df
        .column("energy")
        .unwrap()
        .f64()
        .unwrap()
        .into_no_null_iter()
        .collect();
    e[0] += 1e-9;
    df.replace("energy", Column::new("energy".into(), e))
        .unwrap();
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf)
        .with_key_value_metadata(Some(KeyValueMetadata::from_static(meta)))
        .finish(&mut df)
        .unwrap();
    std::fs::write(to, buf).unwrap();
}

//! `kiln rows` (a table's rows, filtered, on screen or exported) and `kiln cell` (one cell of the
//! cache by the first digits of its key).

use crate::util::{SMALL, Work, floats, stderr, strings, unsigned};
use kiln::store::table;

fn ran() -> Work {
    let w = Work::new();
    let s = w.spec("small.toml", SMALL);
    w.run_json(&s, &[]);
    w
}

/// Exports hold every row and column, numbers exact: the CSV's energies parse back to the
/// table's bits, the JSON lines have one object per row; filters keep exactly the matching
/// rows (numbers as numbers, keys by prefix); bad filters and columns are refused (exit 2).
#[test]
fn rows_export_exactly_and_filter() {
    let w = ran();
    let df = table::read(&w.path().join("results/small/cells.parquet")).unwrap();
    let energy = floats(&df, "energy");
    let o = w.kiln(&["rows", "small.toml", "--format", "csv", "-o", "cells.csv"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let csv = std::fs::read_to_string(w.path().join("cells.csv")).unwrap();
    let mut lines = csv.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    assert_eq!(header.len(), df.width());
    let at = header.iter().position(|h| *h == "energy").unwrap();
    let key_at = header.iter().position(|h| *h == "cell_key").unwrap();
    // `settings` is quoted JSON with commas: split by a CSV-aware reader of our own.
    let parse = |l: &str| -> Vec<String> {
        let (mut out, mut cur, mut quoted, mut chars) =
            (Vec::new(), String::new(), false, l.chars().peekable());
        while let Some(c) = chars.next() {
            match (c, quoted) {
                ('"', true) if chars.peek() == Some(&'"') => {
                    cur.push('"');
                    chars.next();
                }
                ('"', _) => quoted = !quoted,
                (',', false) => out.push(std::mem::take(&mut cur)),
                (c, _) => cur.push(c),
            }
        }
        out.push(cur);
        out
    };
    let rows: Vec<Vec<String>> = lines.map(parse).collect();
    assert_eq!(rows.len(), df.height());
    let keys = strings(&df, "cell_key");
    for (i, r) in rows.iter().enumerate() {
        assert_eq!(r.len(), header.len(), "row {i}");
        assert_eq!(r[at].parse::<f64>().unwrap().to_bits(), energy[i].to_bits());
        assert_eq!(r[key_at], keys[i]);
    }
    let o = w.kiln(&["rows", "small.toml", "--format", "jsonl"]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(text.lines().count(), df.height());
    let first: serde_json::Value = serde_json::from_str(text.lines().next().unwrap()).unwrap();
    assert_eq!(
        first["energy"].as_f64().unwrap().to_bits(),
        energy[0].to_bits()
    );
    // Filters.
    let ns = unsigned(&df, "n");
    let eps = floats(&df, "epsilon");
    let want = (0..df.height())
        .filter(|&i| ns[i] == 32 && eps[i] > 0.0)
        .count();
    let o = w.kiln(&[
        "rows",
        "small.toml",
        "--where",
        "n=32",
        "--where",
        "epsilon>0",
        "--format",
        "jsonl",
    ]);
    assert_eq!(String::from_utf8_lossy(&o.stdout).lines().count(), want);
    let o = w.kiln(&[
        "rows",
        "small.toml",
        "--where",
        &format!("cell_key={}", &keys[3][..10]),
    ]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(
        text.contains(&keys[3][..12]) && text.contains("1 of"),
        "{text}"
    );
    for bad in [
        vec!["--where", "nn=3"],
        vec!["--where", "=3"],
        vec!["--columns", "energy,bogus"],
        vec!["--table", "nothing"],
        vec!["--format", "xml"],
    ] {
        let mut args = vec!["rows", "small.toml"];
        args.extend(bad.iter().copied());
        let o = w.kiln(&args);
        assert_eq!(o.status.code(), Some(2), "{bad:?}: {}", stderr(&o));
    }
}

/// `kiln cell` finds a cell by a prefix of its key and shows its record and artifacts; a
/// prefix too short, not hex, or matching nothing is refused with exit 2.
#[test]
fn one_cell_by_key_prefix() {
    let w = ran();
    let df = table::read(&w.path().join("results/small/cells.parquet")).unwrap();
    let keys = strings(&df, "cell_key");
    let energy = floats(&df, "energy");
    let o = w.kiln(&["cell", &keys[0][..12], "--json"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["key"], keys[0].as_str());
    assert_eq!(v["energy"].as_f64().unwrap().to_bits(), energy[0].to_bits());
    assert!(
        std::path::Path::new(&w.path().join(v["artifacts"]["spins"].as_str().unwrap())).is_file()
    );
    let o = w.kiln(&["cell", &keys[0][..12]]);
    let text = String::from_utf8_lossy(&o.stdout);
    for part in ["what ran", "settings", "who computed it", "artifacts"] {
        assert!(text.contains(part), "{text}");
    }
    for bad in ["ab", "zzzzzz", "0000000000"] {
        let o = w.kiln(&["cell", bad]);
        assert_eq!(o.status.code(), Some(2), "{bad}: {}", stderr(&o));
    }
}

/// `kiln check` lists every algorithm with all its settings, defaults filled in (the string the
/// table's `settings` column holds), on screen and in JSON.
#[test]
fn check_shows_settings_with_defaults() {
    let w = Work::new();
    let s = w.spec("small.toml", SMALL);
    let o = w.kiln(&["check", "small.toml"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = String::from_utf8_lossy(&o.stdout).into_owned();
    // SMALL gives anneal only `sweeps` and `beta`: `quench` is a default.
    assert!(
        text.contains("\"quench\":true") && text.contains("\"sweeps\":20"),
        "{text}"
    );
    let o = w.kiln(&["check", "small.toml", "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    w.run_json(&s, &[]);
    let df = table::read(&w.path().join("results/small/cells.parquet")).unwrap();
    let settings = strings(&df, "settings");
    for a in v["algorithms"].as_array().unwrap() {
        let want = a["settings"].as_str().unwrap();
        assert!(
            settings.iter().any(|x| x == want),
            "{want} not in the table"
        );
    }
}

/// A bare `kiln` is a one-screen start (exit 0) naming the default run and the starter.
#[test]
fn bare_kiln_is_a_start_screen() {
    let w = Work::new();
    let o = w.kiln(&[]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let text = String::from_utf8_lossy(&o.stdout);
    for want in ["kiln run ", "kiln draft", "kiln check", "kiln kinds"] {
        assert!(text.contains(want), "{want:?} not in\n{text}");
    }
    assert!(text.lines().count() <= 24, "more than a screen:\n{text}");
}

/// `kiln draft` writes a valid, commented spec for every family (its keys and its kinds' keys
/// named), which `kiln check` accepts and a small run completes; it never overwrites a file,
/// refuses kinds that cannot run on the family with the kinds that can, and names the families
/// when given an unknown one.
#[test]
fn drafts_are_valid_specs_for_every_family() {
    let w = Work::new();
    // The built-in list: other tests of this process register toy families the binary lacks.
    for f in kiln::model::builtin() {
        let file = format!("{}.toml", f.name);
        let o = w.kiln(&["draft", f.name, "-o", &file]);
        assert!(o.status.success(), "{}: {}", f.name, stderr(&o));
        let text = std::fs::read_to_string(w.path().join(&file)).unwrap();
        for k in f.keys {
            assert!(
                text.contains(&format!("{} = ", k.name)),
                "{}: key {} missing",
                f.name,
                k.name
            );
        }
        assert!(text.contains("[[algorithm]]"), "{text}");
        let o = w.kiln(&["check", &file]);
        assert!(o.status.success(), "{}: {}", f.name, stderr(&o));
    }
    // Chosen kinds, and a run of the draft at one small size.
    let o = w.kiln(&["draft", "sk", "-a", "descent,tempering", "--name", "mine"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let text = String::from_utf8_lossy(&o.stdout).into_owned();
    assert!(
        text.contains("kind = \"tempering\"") && text.contains("# temperatures = "),
        "{text}"
    );
    let small = text
        .replace("sizes = [64, 128, 256, 512]", "sizes = [16]")
        .replace("seeds = 16", "seeds = 2");
    let s = w.spec("mine.toml", &small);
    w.run_json(&s, &[]);
    assert!(w.path().join("results/mine/cells.parquet").exists());
    // Refusals: an existing file, a kind the family cannot run, an unknown family.
    let o = w.kiln(&["draft", "sk", "-o", "mine.toml"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("does not overwrite"), "{}", stderr(&o));
    assert_eq!(std::fs::read_to_string(&s).unwrap(), small);
    let o = w.kiln(&["draft", "sphere", "-a", "descent"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("gradient"), "{}", stderr(&o));
    let o = w.kiln(&["draft", "glass"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("perceptron"), "{}", stderr(&o));
}

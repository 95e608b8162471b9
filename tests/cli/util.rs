//! Helpers: a temporary workspace, running the binary, reading its JSON summary.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

pub const SMALL: &str = r#"# a small sweep for tests
[experiment]
name = "small"
note = "test sweep"

[model]
family = "sk"
couplings = "gaussian"

[sweep]
sizes = [16, 32]
seeds = 3
epsilons = [0.0, 0.1]

[[algorithm]]
label = "d"
kind = "descent"
order = "random"

[[algorithm]]
label = "a"
kind = "anneal"
sweeps = 20
beta = [0.1, 3.0]
"#;

pub struct Work {
    pub dir: tempfile::TempDir,
}

impl Work {
    pub fn new() -> Work {
        Work {
            dir: tempfile::tempdir().expect("temp dir"),
        }
    }

    pub fn path(&self) -> &Path {
        self.dir.path()
    }

    pub fn spec(&self, name: &str, text: &str) -> PathBuf {
        let p = self.path().join(name);
        std::fs::write(&p, text).expect("write spec");
        p
    }

    /// Runs kiln in the workspace (cwd = workspace).
    pub fn kiln(&self, args: &[&str]) -> Output {
        Command::new(env!("CARGO_BIN_EXE_kiln"))
            .args(args)
            .current_dir(self.path())
            .output()
            .expect("run kiln")
    }

    /// `kiln run SPEC --json [extra…]`, asserting success; returns the summary.
    pub fn run_json(&self, spec: &Path, extra: &[&str]) -> serde_json::Value {
        let mut args = vec!["run", spec.to_str().unwrap(), "--json"];
        args.extend_from_slice(extra);
        let o = self.kiln(&args);
        assert!(
            o.status.success(),
            "kiln run failed: {}\n{}",
            String::from_utf8_lossy(&o.stderr),
            String::from_utf8_lossy(&o.stdout)
        );
        serde_json::from_slice(&o.stdout).expect("JSON summary")
    }
}

/// (computed, cached) from a summary.
pub fn counts(v: &serde_json::Value) -> (u64, u64) {
    (
        v["cells"]["computed"].as_u64().unwrap(),
        v["cells"]["cached"].as_u64().unwrap(),
    )
}

pub fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// A test identity (an instance or run id) named by a tag and an index.
pub fn id(tag: &str, i: u64) -> [u8; 32] {
    kiln::cell::Canon::map()
        .with("t", tag)
        .with("i", i)
        .hash("test")
}

/// Mean and its standard error.
pub fn mean_se(xs: &[f64]) -> (f64, f64) {
    let m = xs.iter().sum::<f64>() / xs.len() as f64;
    let v = xs.iter().map(|x| (x - m).powi(2)).sum::<f64>() / (xs.len() - 1) as f64;
    (m, (v / xs.len() as f64).sqrt())
}

/// The top eigenvalue of an instance's p = 2 coupling matrix by a general-purpose eigen-solver
/// (nalgebra's symmetric eigendecomposition), the reference kiln's own Lanczos is checked against.
pub fn reference_top(inst: &kiln::model::Instance) -> f64 {
    use kiln::model::Instance;
    let d = match inst {
        Instance::Sphere(m) | Instance::Cube(m) => m.dense().expect("a p = 2 term"),
        Instance::Sk(d) => d,
        Instance::Graph(_)
        | Instance::Spins(_)
        | Instance::Fielded(..)
        | Instance::Clauses(_)
        | Instance::Patterns(..) => {
            panic!("reference_top takes dense instances without a field")
        }
    };
    let n = d.n();
    let mat = nalgebra::DMatrix::from_fn(n, n, |i, j| d.coupling(i, j));
    nalgebra::SymmetricEigen::new(mat)
        .eigenvalues
        .iter()
        .cloned()
        .fold(f64::MIN, f64::max)
}

/// About 1.5 s of work on two cores: 144 cells of a few to 40 ms each (crash-safety and claim
/// tests interrupt it), under the experiment name given.
pub fn slow_spec(name: &str) -> String {
    format!(
        r#"[experiment]
name = "{name}"
[model]
family = "sk"
[sweep]
sizes = [150, 250, 350]
seeds = 8
epsilons = [0.0, 0.05, 0.3]
[[algorithm]]
kind = "descent"
[[algorithm]]
kind = "anneal"
sweeps = 2500
"#
    )
}

/// A table's numbers (provenance columns dropped), serialised for a bitwise comparison.
pub fn numbers(path: &Path) -> Vec<u8> {
    use polars::prelude::*;
    let df = kiln::store::table::read(path).unwrap();
    let mut df = df.drop_many(kiln::store::table::PROVENANCE_COLUMNS);
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf).finish(&mut df).unwrap();
    buf
}

/// A small deterministic generator for test choices (not for results).
pub struct Lcg(pub u64);
impl Lcg {
    pub fn next(&mut self, n: u64) -> u64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 33) % n.max(1)
    }
}

/// A string column of a table.
pub fn strings(df: &polars::prelude::DataFrame, name: &str) -> Vec<String> {
    df.column(name)
        .unwrap()
        .str()
        .unwrap()
        .iter()
        .map(|s| s.unwrap_or("").to_string())
        .collect()
}

/// A float column of a table without nulls.
pub fn floats(df: &polars::prelude::DataFrame, name: &str) -> Vec<f64> {
    df.column(name)
        .unwrap()
        .f64()
        .unwrap()
        .into_no_null_iter()
        .collect()
}

/// An unsigned column of a table without nulls.
pub fn unsigned(df: &polars::prelude::DataFrame, name: &str) -> Vec<u64> {
    df.column(name)
        .unwrap()
        .u64()
        .unwrap()
        .into_no_null_iter()
        .collect()
}

/// Each spec is refused by `kiln check` and `kiln run` with exit 2, an error naming the file
/// with a hint and containing every expected fragment, and nothing written.
pub fn assert_refused(cases: &[(String, &[&str])]) {
    for (text, expected) in cases {
        let w = Work::new();
        let spec = w.spec("bad.toml", text);
        let o = w.kiln(&["check", spec.to_str().unwrap()]);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{expected:?}: {err}");
        assert!(err.contains("bad.toml") && err.contains("hint:"), "{err}");
        for e in *expected {
            assert!(err.contains(e), "expected {e:?} in:\n{err}");
        }
        let o = w.kiln(&["run", spec.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(2), "{expected:?}: {}", stderr(&o));
        assert!(
            !w.path().join("results").exists(),
            "{expected:?}: wrote results"
        );
    }
}

//! The results table: `cells.parquet`, one row per cell of a plan, in plan order.
//!
//! Every column except the provenance ones (`wall_seconds`, `host`, `threads`,
//! `computed_by`) is a pure function of the spec: bit-identical whatever the thread count,
//! shard split or machine. The file carries key–value metadata: the energy convention, the
//! spec hash and the table format.

use super::cache::Record;
use super::{StoreError, write_atomic};
use polars::prelude::*;
use std::collections::BTreeMap;
use std::path::Path;

/// Version of the table layout (2: `energy_reduced`, `cut_fraction` and `relaxation` added;
/// 3: `distance_point`).
pub const TABLE_FORMAT: &str = "kiln-cells/3";

/// The energy convention, written into the file's metadata and the README.
pub const CONVENTION: &str = "kiln maximises H. energy = H(sigma)/n of the reference run (epsilon = 0) on the original disorder; energy_perturbed = H'(sigma')/n of the run with the same algorithm randomness on the disorder correlated at 1 - epsilon; overlap = sigma.sigma'/n; distance = |sigma - sigma'|/sqrt(n); distance_point = |x - x'|/sqrt(n) of the pre-rounding points (|x|^2 = n) of algorithms that have one; relaxation = value per spin of the pre-rounding point or relaxation. SK: H(sigma) = n^(-1/2) sum_{i<j} J_ij sigma_i sigma_j; cube and sphere: E[H(x)H(y)] = n xi(x.y/n), xi(q) = sum_p c_p^2 q^p, sums over distinct indices; graphs and lattices: H = sum_{edges} J_ij sigma_i sigma_j, energy_reduced = energy/sqrt(d), cut_fraction = cut edges/edges; sphere: overlap and distance of the points x, |x|^2 = n.";

/// Columns that record how a cell was computed, not what it computed.
pub const PROVENANCE_COLUMNS: [&str; 4] = ["wall_seconds", "host", "threads", "computed_by"];

/// One row: the experiment, the algorithm's label, and the cell's record.
pub struct Row<'a> {
    pub experiment: &'a str,
    pub label: &'a str,
    pub record: &'a Record,
}

/// Builds the table as a DataFrame (column order is part of the format).
pub fn frame(rows: &[Row]) -> PolarsResult<DataFrame> {
    macro_rules! col {
        ($name:expr, $f:expr) => {
            Column::new($name.into(), rows.iter().map($f).collect::<Vec<_>>())
        };
    }
    DataFrame::new_infer_height(vec![
        col!("experiment", |r: &Row| r.experiment.to_string()),
        col!("family", |r: &Row| r.record.family.clone()),
        col!("couplings", |r: &Row| r.record.couplings.clone()),
        col!("n", |r: &Row| r.record.n),
        col!("seed", |r: &Row| r.record.seed),
        col!("algorithm", |r: &Row| r.label.to_string()),
        col!("kind", |r: &Row| r.record.kind.clone()),
        col!("settings", |r: &Row| r.record.settings.clone()),
        col!("epsilon", |r: &Row| r.record.epsilon),
        col!("energy", |r: &Row| r.record.energy),
        col!("energy_perturbed", |r: &Row| r.record.energy_perturbed),
        col!("overlap", |r: &Row| r.record.overlap),
        col!("distance", |r: &Row| r.record.distance),
        col!("iterations", |r: &Row| r.record.iterations),
        col!("sweeps", |r: &Row| r.record.sweeps),
        col!("converged", |r: &Row| r.record.converged),
        col!("energy_reduced", |r: &Row| r.record.energy_reduced),
        col!("cut_fraction", |r: &Row| r.record.cut_fraction),
        col!("relaxation", |r: &Row| r.record.relaxation),
        col!("distance_point", |r: &Row| r.record.distance_point),
        col!("cell_key", |r: &Row| r.record.key.clone()),
        col!("base_key", |r: &Row| r.record.base.clone()),
        col!("kiln_version", |r: &Row| r.record.kiln_version.clone()),
        col!("wall_seconds", |r: &Row| r.record.wall_seconds),
        col!("host", |r: &Row| r.record.host.clone()),
        col!("threads", |r: &Row| r.record.threads),
        col!("computed_by", |r: &Row| r.record.computed_by.clone()),
    ])
}

/// Writes the table atomically to `path`.
pub fn write(path: &Path, rows: &[Row], spec_hash: &str) -> Result<(), StoreError> {
    let terr = |e: PolarsError| StoreError::Table {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    let mut df = frame(rows).map_err(terr)?;
    let meta = KeyValueMetadata::from_static(vec![
        ("kiln.format".into(), TABLE_FORMAT.into()),
        ("kiln.convention".into(), CONVENTION.into()),
        ("kiln.spec_hash".into(), spec_hash.into()),
    ]);
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf)
        .with_key_value_metadata(Some(meta))
        .finish(&mut df)
        .map_err(terr)?;
    write_atomic(path, &buf)
}

/// Reads a table back (for `fit`, `plot` and tests).
pub fn read(path: &Path) -> Result<DataFrame, StoreError> {
    let f = std::fs::File::open(path).map_err(|source| StoreError::Read {
        path: path.to_path_buf(),
        source,
    })?;
    ParquetReader::new(f)
        .finish()
        .map_err(|e| StoreError::Table {
            path: path.to_path_buf(),
            message: e.to_string(),
        })
}

/// Pairwise overlaps of replica outputs: one row per (algorithm, n, seed, a < b).
#[derive(Default)]
pub struct Overlaps {
    algorithm: Vec<String>,
    n: Vec<u64>,
    seed: Vec<u64>,
    a: Vec<u32>,
    b: Vec<u32>,
    overlap: Vec<f64>,
}

impl Overlaps {
    pub fn push(&mut self, algorithm: &str, n: u64, seed: u64, a: u32, b: u32, q: f64) {
        self.algorithm.push(algorithm.into());
        self.n.push(n);
        self.seed.push(seed);
        self.a.push(a);
        self.b.push(b);
        self.overlap.push(q);
    }

    pub fn write(&self, path: &Path, experiment: &str) -> Result<(), StoreError> {
        let mut cols = group_columns(experiment, &self.algorithm, &self.n, &self.seed);
        cols.extend([
            Column::new("replica_a".into(), self.a.clone()),
            Column::new("replica_b".into(), self.b.clone()),
            Column::new("overlap".into(), self.overlap.clone()),
        ]);
        write_frame(path, DataFrame::new_infer_height(cols))
    }
}

/// Overlaps of replica triples, sorted q_min ≤ q_mid ≤ q_max (ultrametricity: q_min = q_mid).
#[derive(Default)]
pub struct Triples {
    algorithm: Vec<String>,
    n: Vec<u64>,
    seed: Vec<u64>,
    r: [Vec<u32>; 3],
    q: [Vec<f64>; 3],
}

impl Triples {
    pub fn push(&mut self, algorithm: &str, n: u64, seed: u64, r: [u32; 3], q: [f64; 3]) {
        self.algorithm.push(algorithm.into());
        self.n.push(n);
        self.seed.push(seed);
        for i in 0..3 {
            self.r[i].push(r[i]);
            self.q[i].push(q[i]);
        }
    }

    pub fn write(&self, path: &Path, experiment: &str) -> Result<(), StoreError> {
        let mut cols = group_columns(experiment, &self.algorithm, &self.n, &self.seed);
        cols.extend([
            Column::new("replica_a".into(), self.r[0].clone()),
            Column::new("replica_b".into(), self.r[1].clone()),
            Column::new("replica_c".into(), self.r[2].clone()),
            Column::new("q_min".into(), self.q[0].clone()),
            Column::new("q_mid".into(), self.q[1].clone()),
            Column::new("q_max".into(), self.q[2].clone()),
        ]);
        write_frame(path, DataFrame::new_infer_height(cols))
    }
}

/// The columns naming a replica group: experiment, algorithm, n, seed.
fn group_columns(experiment: &str, algorithm: &[String], n: &[u64], seed: &[u64]) -> Vec<Column> {
    vec![
        Column::new("experiment".into(), vec![experiment.to_string(); n.len()]),
        Column::new("algorithm".into(), algorithm.to_vec()),
        Column::new("n".into(), n.to_vec()),
        Column::new("seed".into(), seed.to_vec()),
    ]
}

pub(crate) fn write_frame(path: &Path, df: PolarsResult<DataFrame>) -> Result<(), StoreError> {
    let terr = |e: PolarsError| StoreError::Table {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    let mut df = df.map_err(terr)?;
    let mut buf = Vec::new();
    ParquetWriter::new(&mut buf).finish(&mut df).map_err(terr)?;
    write_atomic(path, &buf)
}

/// (family, couplings) → algorithm → (n, energy) samples at ε = 0.
pub type EnergySamples = BTreeMap<(String, String), BTreeMap<String, Vec<(u64, f64)>>>;
/// algorithm → n → ε bits → distances.
pub type DistanceSamples = BTreeMap<String, BTreeMap<u64, BTreeMap<u64, Vec<f64>>>>;

/// The columns `fit` and `plot` use, one entry per row.
pub struct Cells {
    pub family: Vec<String>,
    pub couplings: Vec<String>,
    pub algorithm: Vec<String>,
    pub n: Vec<u64>,
    pub seed: Vec<u64>,
    pub epsilon: Vec<f64>,
    pub energy: Vec<f64>,
    pub energy_perturbed: Vec<f64>,
    pub distance: Vec<f64>,
}

impl Cells {
    pub fn read(path: &Path) -> Result<Cells, StoreError> {
        let df = read(path)?;
        let bad = |c: &str, e: PolarsError| StoreError::Table {
            path: path.to_path_buf(),
            message: format!("column `{c}`: {e}"),
        };
        let strs = |c: &str| -> Result<Vec<String>, StoreError> {
            Ok(df
                .column(c)
                .and_then(|x| x.str())
                .map_err(|e| bad(c, e))?
                .iter()
                .map(|s| s.unwrap_or("").to_string())
                .collect())
        };
        let u64s = |c: &str| -> Result<Vec<u64>, StoreError> {
            Ok(df
                .column(c)
                .and_then(|x| x.u64())
                .map_err(|e| bad(c, e))?
                .iter()
                .map(|x| x.unwrap_or(0))
                .collect())
        };
        let f64s = |c: &str| -> Result<Vec<f64>, StoreError> {
            Ok(df
                .column(c)
                .and_then(|x| x.f64())
                .map_err(|e| bad(c, e))?
                .iter()
                .map(|x| x.unwrap_or(f64::NAN))
                .collect())
        };
        Ok(Cells {
            family: strs("family")?,
            couplings: strs("couplings")?,
            algorithm: strs("algorithm")?,
            n: u64s("n")?,
            seed: u64s("seed")?,
            epsilon: f64s("epsilon")?,
            energy: f64s("energy")?,
            energy_perturbed: f64s("energy_perturbed")?,
            distance: f64s("distance")?,
        })
    }

    pub fn len(&self) -> usize {
        self.n.len()
    }

    pub fn is_empty(&self) -> bool {
        self.n.is_empty()
    }

    /// The rows grouped for figures: the algorithm labels in table order; (family, couplings)
    /// → label → (n, energy) samples at ε = 0; label → n → ε bits → distances at ε > 0.
    pub fn groups(&self) -> (Vec<String>, EnergySamples, DistanceSamples) {
        let mut energies: EnergySamples = BTreeMap::new();
        let mut distances: DistanceSamples = BTreeMap::new();
        let mut order: Vec<String> = Vec::new();
        let mut seen = std::collections::HashSet::new();
        for i in 0..self.len() {
            let label = &self.algorithm[i];
            if seen.insert(label.clone()) {
                order.push(label.clone());
            }
            if self.epsilon[i] == 0.0 {
                energies
                    .entry((self.family[i].clone(), self.couplings[i].clone()))
                    .or_default()
                    .entry(label.clone())
                    .or_default()
                    .push((self.n[i], self.energy[i]));
            } else {
                distances
                    .entry(label.clone())
                    .or_default()
                    .entry(self.n[i])
                    .or_default()
                    .entry(self.epsilon[i].to_bits())
                    .or_default()
                    .push(self.distance[i]);
            }
        }
        (order, energies, distances)
    }
}

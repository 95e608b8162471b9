//! The results table: `cells.parquet`, one row per cell of a plan, in plan order.
//!
//! Every column except the provenance ones (`wall_seconds`, `host`, `threads`,
//! `computed_by`) is a pure function of the spec: bit-identical whatever the thread count,
//! shard split or machine. The file carries key–value metadata: the energy convention, the
//! spec hash and the table format.

use super::cache::Record;
use super::{StoreError, write_atomic};
use crate::measure::{distance_sym, overlap_sym};
use polars::prelude::*;
use sha2::{Digest, Sha256};
use std::collections::BTreeMap;
use std::path::Path;

/// Version of the table layout (2: `energy_reduced`, `cut_fraction` and `relaxation` added;
/// 3: `distance_point`; 4: `overlap_sym`, `distance_sym`, `distance_point_sym`;
/// 5: `autocorrelation_time`, `overlap_initial`; 6: `field`, `magnetisation`; 7: `density`,
/// `unsatisfied`, `satisfied`).
pub const TABLE_FORMAT: &str = "kiln-cells/7";

/// The energy convention, written into the file's metadata and the README.
pub const CONVENTION: &str = "kiln maximises H. energy = H(sigma)/n of the reference run (epsilon = 0) on the original disorder; energy_perturbed = H'(sigma')/n of the run with the same algorithm randomness on the disorder correlated at 1 - epsilon; overlap = sigma.sigma'/n; distance = |sigma - sigma'|/sqrt(n); distance_point = |x - x'|/sqrt(n) of the pre-rounding points (|x|^2 = n) of algorithms that have one; for models with H(-x) = H(x) (no field, no odd-p term), where x and -x are one state, overlap_sym = |overlap|, distance_sym = min(|sigma - sigma'|, |sigma + sigma'|)/sqrt(n) and distance_point_sym likewise, and for other models the _sym columns equal the raw ones; relaxation = value per spin of the pre-rounding point or relaxation; samplers: autocorrelation_time = integrated autocorrelation time of the energy over the second half of the reference run (sweeps, Sokal windowing), overlap_initial = overlap of the reference output with the chain's start. field = the uniform field h of the model (H includes h sum_i sigma_i; 0 for none); magnetisation = sum_i sigma_i/n of the reference output (+-1 families). Constraint families (ksat, perceptron): H = -(unsatisfied constraints), so energy = -unsatisfied/n (the perceptron's quadratic constraint: H = -1/2 sum_a (kappa - t_a)_+^2 instead, and no unsatisfied column); density = alpha = m/n; unsatisfied = the reference output's count; satisfied = (energy = 0), every constraint holds. SK: H(sigma) = n^(-1/2) sum_{i<j} J_ij sigma_i sigma_j; cube and sphere: E[H(x)H(y)] = n xi(x.y/n), xi(q) = sum_p c_p^2 q^p, sums over distinct indices; graphs and lattices: H = sum_{edges} J_ij sigma_i sigma_j, energy_reduced = energy/sqrt(d), cut_fraction = cut edges/edges; sphere: overlap and distance of the points x, |x|^2 = n.";

/// Columns that record how a cell was computed, not what it computed.
pub const PROVENANCE_COLUMNS: [&str; 4] = ["wall_seconds", "host", "threads", "computed_by"];

/// One row: the experiment, the algorithm's label, and the cell's record.
pub struct Row<'a> {
    /// Whether the model has the global-flip symmetry (see [`crate::model::Family::symmetric`]).
    pub symmetric: bool,
    /// The model's uniform field h (0 for none).
    pub field: f64,
    /// Whether H = −(violated constraints) (the `unsatisfied` column).
    pub violations: bool,
    /// Whether H = 0 exactly at a solution (the `satisfied` column).
    pub solved_at_zero: bool,
    pub experiment: &'a str,
    pub label: &'a str,
    pub record: &'a Record,
}

/// The reference output's violated constraints, −energy·n (exact: H is an integer), for a
/// constraint family.
fn unsatisfied(r: &Row) -> Option<u64> {
    r.violations
        .then(|| (-r.record.energy * r.record.n as f64).round().max(0.0) as u64)
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
        col!("overlap_sym", |r: &Row| overlap_sym(
            r.record.overlap,
            r.symmetric
        )),
        col!("distance_sym", |r: &Row| distance_sym(
            r.record.distance,
            r.symmetric
        )),
        col!("distance_point_sym", |r: &Row| r
            .record
            .distance_point
            .map(|d| distance_sym(d, r.symmetric))),
        col!("autocorrelation_time", |r: &Row| r
            .record
            .autocorrelation_time),
        col!("overlap_initial", |r: &Row| r.record.overlap_initial),
        col!("field", |r: &Row| r.field),
        col!("magnetisation", |r: &Row| r.record.magnetisation),
        col!("density", |r: &Row| r.record.density),
        col!("unsatisfied", |r: &Row| unsatisfied(r)),
        col!("satisfied", |r: &Row| r
            .solved_at_zero
            .then_some(r.record.energy == 0.0)),
        col!("cell_key", |r: &Row| r.record.key.clone()),
        col!("base_key", |r: &Row| r.record.base.clone()),
        col!("kiln_version", |r: &Row| r.record.kiln_version.clone()),
        col!("wall_seconds", |r: &Row| r.record.wall_seconds),
        col!("host", |r: &Row| r.record.host.clone()),
        col!("threads", |r: &Row| r.record.threads),
        col!("computed_by", |r: &Row| r.record.computed_by.clone()),
    ])
}

/// Encodes the cells table: Parquet with kiln's metadata and a digest of its content.
pub fn encode(path: &Path, rows: &[Row], spec_hash: &str) -> Result<Vec<u8>, StoreError> {
    encode_frame(
        path,
        frame(rows),
        vec![
            ("kiln.format".into(), TABLE_FORMAT.into()),
            ("kiln.convention".into(), CONVENTION.into()),
            ("kiln.spec_hash".into(), spec_hash.into()),
        ],
    )
}

/// Writes the cells table atomically to `path`.
pub fn write(path: &Path, rows: &[Row], spec_hash: &str) -> Result<(), StoreError> {
    write_atomic(path, &encode(path, rows, spec_hash)?)
}

/// Metadata key of the content digest: SHA-256 over every column's name, type and values
/// (see [`content_digest`]). A reader recomputes it, so a table whose numbers changed after
/// kiln wrote it is refused even when it still parses.
pub const DIGEST_KEY: &str = "kiln.content_sha256";

/// Encodes a frame as Parquet with `meta` and the content digest in its key–value metadata.
fn encode_frame(
    path: &Path,
    df: PolarsResult<DataFrame>,
    mut meta: Vec<(String, String)>,
) -> Result<Vec<u8>, StoreError> {
    let terr = |e: PolarsError| StoreError::Table {
        path: path.to_path_buf(),
        message: e.to_string(),
    };
    let mut df = df.map_err(terr)?;
    meta.push((DIGEST_KEY.into(), content_digest(&df)));
    let mut encode = |meta: Vec<(String, String)>| -> Result<Vec<u8>, StoreError> {
        let mut buf = Vec::new();
        ParquetWriter::new(&mut buf)
            .with_key_value_metadata(Some(KeyValueMetadata::from_static(meta)))
            .finish(&mut df)
            .map_err(terr)?;
        Ok(buf)
    };
    // The pages come before the footer and do not depend on the metadata: encode once to
    // learn their bytes, then again with their checksum in the metadata.
    let first = encode(meta.clone())?;
    let end = pages_end(&first).expect("a table kiln just wrote has a footer");
    meta.push((PAGES_KEY.into(), hex::encode(Sha256::digest(&first[..end]))));
    let second = encode(meta)?;
    if second.get(..end) != Some(&first[..end]) {
        return Err(StoreError::Table {
            path: path.to_path_buf(),
            message: "the Parquet writer gave different pages for the same data".into(),
        });
    }
    Ok(second)
}

/// Metadata key of the SHA-256 of the bytes before the footer (every data page). A reader
/// checks it after decoding only the footer, so damaged pages never reach the page decoder
/// (whose reaction to a damaged page header can be an allocation of exabytes).
pub const PAGES_KEY: &str = "kiln.pages_sha256";

/// Where a Parquet file's footer starts (the file ends with the footer, its length as u32
/// LE, and `PAR1`).
fn pages_end(bytes: &[u8]) -> Option<usize> {
    let n = bytes.len();
    if n < 12 || &bytes[n - 4..] != b"PAR1" {
        return None;
    }
    let footer = u32::from_le_bytes(bytes[n - 8..n - 4].try_into().ok()?) as usize;
    (n - 8).checked_sub(footer).filter(|&e| e >= 4)
}

/// SHA-256 (hex) over the frame's height and, per column, its name, type and values (numbers
/// by their bits, nulls marked), so any change of a stored number changes it.
pub fn content_digest(df: &DataFrame) -> String {
    let mut h = Sha256::new();
    h.update((df.height() as u64).to_le_bytes());
    for col in df.columns() {
        h.update(col.name().as_bytes());
        h.update([0]);
        h.update(col.dtype().to_string().as_bytes());
        h.update([0]);
        let s = col.as_materialized_series();
        let mut put = |v: Option<&[u8]>| match v {
            Some(b) => {
                h.update([1]);
                h.update((b.len() as u64).to_le_bytes());
                h.update(b);
            }
            None => h.update([0]),
        };
        match s.dtype() {
            DataType::Float64 => s.f64().expect("f64").iter().for_each(|v| {
                put(v
                    .map(|x| x.to_bits().to_le_bytes())
                    .as_ref()
                    .map(|b| &b[..]))
            }),
            DataType::UInt64 => s
                .u64()
                .expect("u64")
                .iter()
                .for_each(|v| put(v.map(|x| x.to_le_bytes()).as_ref().map(|b| &b[..]))),
            DataType::UInt32 => s
                .u32()
                .expect("u32")
                .iter()
                .for_each(|v| put(v.map(|x| x.to_le_bytes()).as_ref().map(|b| &b[..]))),
            DataType::Boolean => s
                .bool()
                .expect("bool")
                .iter()
                .for_each(|v| put(v.map(|x| [x as u8]).as_ref().map(|b| &b[..]))),
            DataType::String => s
                .str()
                .expect("str")
                .iter()
                .for_each(|v| put(v.map(str::as_bytes))),
            _ => (0..s.len()).for_each(|i| {
                let v = s.get(i).map(|v| format!("{v:?}")).unwrap_or_default();
                put(Some(v.as_bytes()))
            }),
        }
    }
    hex::encode(h.finalize())
}

/// How many table reads are running: while any is, the panic hook stays quiet (a damaged
/// file can make the Parquet decoder panic; the panic is caught and reported as damage).
static READING: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

fn quiet_panics_while_reading() {
    static HOOK: std::sync::Once = std::sync::Once::new();
    HOOK.call_once(|| {
        let default = std::panic::take_hook();
        std::panic::set_hook(Box::new(move |info| {
            if READING.load(std::sync::atomic::Ordering::SeqCst) == 0 {
                default(info);
            }
        }));
    });
}

/// The SHA-256 that the `manifest.toml` beside a table records for it, if any.
fn manifest_checksum(path: &Path) -> Option<String> {
    let name = path.file_name()?.to_str()?;
    let text = std::fs::read_to_string(path.with_file_name("manifest.toml")).ok()?;
    let v: toml::Table = text.parse().ok()?;
    Some(v.get("tables")?.get(name)?.as_str()?.to_string())
}

/// Reads a table back (for `fit`, `plot`, `compare` and tests), refusing a damaged one with
/// a message that names the file: its bytes must match the checksum in the `manifest.toml`
/// beside it (when there is one, checked before decoding), it must decode (a panic of the
/// decoder is caught), and its content must match the digest in its metadata (when it has
/// one; tables written before the digest existed have none).
pub fn read(path: &Path) -> Result<DataFrame, StoreError> {
    let bytes = read_bytes(path)?;
    if manifest_mismatch(path, &bytes) {
        return Err(damaged(path, CHECKSUM_MISMATCH));
    }
    let (df, digest_ok) = decode(path, &bytes)?;
    if !digest_ok {
        return Err(damaged(path, DIGEST_MISMATCH));
    }
    Ok(df)
}

/// What [`read`] refuses and [`read_lenient`] reports.
const CHECKSUM_MISMATCH: &str = "its bytes do not match the checksum its manifest.toml records";
const DIGEST_MISMATCH: &str = "its content does not match the digest kiln wrote into it";

/// Whether the checksum the `manifest.toml` beside the table records differs from `bytes`.
fn manifest_mismatch(path: &Path, bytes: &[u8]) -> bool {
    manifest_checksum(path).is_some_and(|want| hex::encode(Sha256::digest(bytes)) != want)
}

fn read_bytes(path: &Path) -> Result<Vec<u8>, StoreError> {
    std::fs::read(path).map_err(|source| StoreError::Read {
        path: path.to_path_buf(),
        source,
    })
}

fn damaged(path: &Path, why: impl Into<String>) -> StoreError {
    StoreError::Damaged {
        path: path.to_path_buf(),
        message: why.into(),
    }
}

/// Reads a table that decodes, and lists what does not match instead of refusing it: the
/// checksum its `manifest.toml` records, and the content digest in its metadata. `kiln replay`
/// reads a folder this way, so it can report a changed table *and* recompute its cells. Data
/// pages that do not match the checksum in the footer are still refused: they are not
/// decoded at all.
pub fn read_lenient(path: &Path) -> Result<(DataFrame, Vec<String>), StoreError> {
    let bytes = read_bytes(path)?;
    let mut findings = Vec::new();
    if manifest_mismatch(path, &bytes) {
        findings.push(CHECKSUM_MISMATCH.to_string());
    }
    let (df, digest_ok) = decode(path, &bytes)?;
    if !digest_ok {
        findings.push(DIGEST_MISMATCH.into());
    }
    Ok((df, findings))
}

/// Decodes a table's bytes: refused if its data pages do not match the checksum in its footer
/// (checked before they are decoded) or if the decoder fails (a panic is caught). Returns the
/// frame and whether its content matches the digest in its metadata (true without one).
fn decode(path: &Path, bytes: &[u8]) -> Result<(DataFrame, bool), StoreError> {
    quiet_panics_while_reading();
    READING.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
    let decoded = std::panic::catch_unwind(
        || -> PolarsResult<(DataFrame, Option<String>, String)> {
            let mut reader = ParquetReader::new(std::io::Cursor::new(bytes));
            let kv = reader.get_metadata()?.key_value_metadata().clone();
            let value = |key: &str| {
                kv.as_ref()
                    .and_then(|kv| kv.iter().find(|k| k.key == key))
                    .and_then(|k| k.value.clone())
            };
            if let Some(want) = value(PAGES_KEY) {
                let end = pages_end(bytes);
                if end.is_none_or(|e| hex::encode(Sha256::digest(&bytes[..e])) != want) {
                    polars_bail!(ComputeError: "its data pages do not match the checksum in its footer");
                }
            }
            let digest = value(DIGEST_KEY);
            let df = reader.finish()?;
            let got = content_digest(&df);
            Ok((df, digest, got))
        },
    );
    READING.fetch_sub(1, std::sync::atomic::Ordering::SeqCst);
    match decoded {
        Ok(Ok((df, digest, got))) => Ok((df, digest.is_none_or(|want| got == want))),
        Ok(Err(e)) => Err(damaged(path, format!("not a readable Parquet table ({e})"))),
        Err(_) => Err(damaged(path, "the Parquet decoder failed on it")),
    }
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

    /// `symmetric`: the model's σ and −σ are one state, so `overlap_sym` = |overlap|
    /// (otherwise it equals `overlap`).
    pub fn encode(
        &self,
        path: &Path,
        experiment: &str,
        symmetric: bool,
    ) -> Result<Vec<u8>, StoreError> {
        let mut cols = group_columns(experiment, &self.algorithm, &self.n, &self.seed);
        let sym: Vec<f64> = self
            .overlap
            .iter()
            .map(|&q| overlap_sym(q, symmetric))
            .collect();
        cols.extend([
            Column::new("replica_a".into(), self.a.clone()),
            Column::new("replica_b".into(), self.b.clone()),
            Column::new("overlap".into(), self.overlap.clone()),
            Column::new("overlap_sym".into(), sym),
        ]);
        encode_frame(path, DataFrame::new_infer_height(cols), Vec::new())
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

    /// `symmetric`: also the sorted |q| of each triple (`q_sym_min` ≤ `q_sym_mid` ≤
    /// `q_sym_max`; otherwise they equal the raw ones).
    pub fn encode(
        &self,
        path: &Path,
        experiment: &str,
        symmetric: bool,
    ) -> Result<Vec<u8>, StoreError> {
        let mut cols = group_columns(experiment, &self.algorithm, &self.n, &self.seed);
        let mut sym: [Vec<f64>; 3] = Default::default();
        for i in 0..self.n.len() {
            // The raw triple is sorted already, so sorting changes nothing without the symmetry.
            let mut q =
                [self.q[0][i], self.q[1][i], self.q[2][i]].map(|q| overlap_sym(q, symmetric));
            q.sort_by(f64::total_cmp);
            for k in 0..3 {
                sym[k].push(q[k]);
            }
        }
        cols.extend([
            Column::new("replica_a".into(), self.r[0].clone()),
            Column::new("replica_b".into(), self.r[1].clone()),
            Column::new("replica_c".into(), self.r[2].clone()),
            Column::new("q_min".into(), self.q[0].clone()),
            Column::new("q_mid".into(), self.q[1].clone()),
            Column::new("q_max".into(), self.q[2].clone()),
        ]);
        let [s0, s1, s2] = sym;
        cols.extend([
            Column::new("q_sym_min".into(), s0),
            Column::new("q_sym_mid".into(), s1),
            Column::new("q_sym_max".into(), s2),
        ]);
        encode_frame(path, DataFrame::new_infer_height(cols), Vec::new())
    }
}

/// Disorder chaos: per (algorithm, n, seed, ε > 0), mean overlaps of K independent samples on
/// J and K on the correlated J' (see [`crate::measure::chaos_overlaps`]).
#[derive(Default)]
pub struct Chaos {
    algorithm: Vec<String>,
    n: Vec<u64>,
    seed: Vec<u64>,
    epsilon: Vec<f64>,
    replicas: Vec<u32>,
    q: [Vec<f64>; 4],
}

impl Chaos {
    #[allow(clippy::too_many_arguments)]
    pub fn push(
        &mut self,
        algorithm: &str,
        n: u64,
        seed: u64,
        epsilon: f64,
        replicas: u32,
        q: [f64; 4],
    ) {
        self.algorithm.push(algorithm.into());
        self.n.push(n);
        self.seed.push(seed);
        self.epsilon.push(epsilon);
        self.replicas.push(replicas);
        for (v, x) in self.q.iter_mut().zip(q) {
            v.push(x);
        }
    }

    /// `symmetric`: whether the overlaps are |R| (σ and −σ one state) or R; recorded in a
    /// column so nobody confuses them.
    pub fn encode(
        &self,
        path: &Path,
        experiment: &str,
        symmetric: bool,
    ) -> Result<Vec<u8>, StoreError> {
        let mut cols = group_columns(experiment, &self.algorithm, &self.n, &self.seed);
        let [w, wp, c, k] = self.q.clone();
        cols.extend([
            Column::new("epsilon".into(), self.epsilon.clone()),
            Column::new("replicas".into(), self.replicas.clone()),
            Column::new("overlap_within".into(), w),
            Column::new("overlap_within_perturbed".into(), wp),
            Column::new("overlap_cross".into(), c),
            Column::new("overlap_coupled".into(), k),
            Column::new("modulo_flip".into(), vec![symmetric; self.n.len()]),
        ]);
        encode_frame(path, DataFrame::new_infer_height(cols), Vec::new())
    }
}

/// Samplers' energy traces: one row per (algorithm, n, seed, replica, block), the block's
/// mean energy per spin and the time at which it ends, in the unit of `time_unit` (`sweep`
/// for spin samplers, `step` for Langevin).
#[derive(Default)]
pub struct Traces {
    algorithm: Vec<String>,
    n: Vec<u64>,
    seed: Vec<u64>,
    replica: Vec<u32>,
    end: Vec<u64>,
    block: Vec<u64>,
    energy: Vec<f64>,
    unit: Vec<&'static str>,
}

impl Traces {
    #[allow(clippy::too_many_arguments)]
    pub fn push(
        &mut self,
        algorithm: &str,
        n: u64,
        seed: u64,
        replica: u32,
        unit: &'static str,
        t: &crate::algo::EnergyTrace,
    ) {
        for (i, &e) in t.energy.iter().enumerate() {
            self.unit.push(unit);
            self.algorithm.push(algorithm.into());
            self.n.push(n);
            self.seed.push(seed);
            self.replica.push(replica);
            self.end.push((i as u64 + 1) * t.block);
            self.block.push(t.block);
            self.energy.push(e);
        }
    }

    pub fn is_empty(&self) -> bool {
        self.n.is_empty()
    }

    pub fn encode(&self, path: &Path, experiment: &str) -> Result<Vec<u8>, StoreError> {
        let mut cols = group_columns(experiment, &self.algorithm, &self.n, &self.seed);
        cols.extend([
            Column::new("replica".into(), self.replica.clone()),
            Column::new("time_end".into(), self.end.clone()),
            Column::new("block".into(), self.block.clone()),
            Column::new("time_unit".into(), self.unit.clone()),
            Column::new("energy".into(), self.energy.clone()),
        ]);
        encode_frame(path, DataFrame::new_infer_height(cols), Vec::new())
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

/// Writes a frame atomically, with the content digest in its metadata.
pub(crate) fn write_frame(path: &Path, df: PolarsResult<DataFrame>) -> Result<(), StoreError> {
    write_atomic(path, &encode_frame(path, df, Vec::new())?)
}

/// (family, couplings) → algorithm → (n, energy) samples at ε = 0.
pub type EnergySamples = BTreeMap<(String, String), BTreeMap<String, Vec<(u64, f64)>>>;
/// algorithm → n → ε bits → distances.
pub type DistanceSamples = BTreeMap<String, BTreeMap<u64, BTreeMap<u64, Vec<f64>>>>;

/// A name at a density, as groups of figures and fits name a model or an algorithm in a sweep
/// over densities: `ksat α=4.2`. [`density_of`] reads it back.
pub fn with_density(name: &str, density: f64) -> String {
    format!("{name} α={density}")
}

/// The name and the density of a name written by [`with_density`].
pub fn density_of(label: &str) -> Option<(&str, f64)> {
    let (name, a) = label.rsplit_once(" α=")?;
    Some((name, a.parse().ok()?))
}

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
    /// `distance_sym` (modulo the global flip where the model has it), or `distance` for a
    /// table written before that column existed.
    pub distance: Vec<f64>,
    /// Whether `distance` was read from `distance_sym`.
    pub distance_is_sym: bool,
    /// `distance_point_sym` (or `distance_point`): the distance between the algorithm's points
    /// before rounding, NaN where the algorithm has none.
    pub distance_point: Vec<f64>,
    /// The clause density α of constraint families (k-SAT); None elsewhere and in tables
    /// written before the column.
    pub density: Vec<Option<f64>>,
}

impl Cells {
    pub fn read(path: &Path) -> Result<Cells, StoreError> {
        let df = read(path)?;
        let sym = df.column("distance_sym").is_ok();
        let bad = |c: &str, e: PolarsError| StoreError::Unusable {
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
        let density: Vec<Option<f64>> = match df.column("density") {
            Ok(c) => c.f64().map_err(|e| bad("density", e))?.iter().collect(),
            Err(_) => vec![None; df.height()],
        };
        Ok(Cells {
            density,
            family: strs("family")?,
            couplings: strs("couplings")?,
            algorithm: strs("algorithm")?,
            n: u64s("n")?,
            seed: u64s("seed")?,
            epsilon: f64s("epsilon")?,
            energy: f64s("energy")?,
            energy_perturbed: f64s("energy_perturbed")?,
            distance: f64s(if sym { "distance_sym" } else { "distance" })?,
            distance_is_sym: sym,
            distance_point: ["distance_point_sym", "distance_point"]
                .iter()
                .find(|c| df.column(c).is_ok())
                .map_or_else(|| Ok(vec![f64::NAN; df.height()]), |c| f64s(c))?,
        })
    }

    pub fn len(&self) -> usize {
        self.n.len()
    }

    /// How row i's model is named in groups of figures: the family, with its density when it
    /// has one (`ksat α=4.2`), so rows at different densities are never pooled.
    pub fn model(&self, i: usize) -> String {
        match self.density[i] {
            Some(a) => with_density(&self.family[i], a),
            None => self.family[i].clone(),
        }
    }

    pub fn is_empty(&self) -> bool {
        self.n.is_empty()
    }

    /// The rows grouped for figures: the algorithm labels in table order; (model, couplings)
    /// → label → (n, energy) samples at ε = 0; label → n → ε bits → distances at ε > 0 (the
    /// label with its density, `walksat α=4`, for a sweep over densities; listed in the order
    /// too).
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
            let stability_label = self.stability_label(i);
            if self.epsilon[i] != 0.0 && seen.insert(stability_label.clone()) {
                order.push(stability_label.clone());
            }
            if self.epsilon[i] == 0.0 {
                energies
                    .entry((self.model(i), self.couplings[i].clone()))
                    .or_default()
                    .entry(label.clone())
                    .or_default()
                    .push((self.n[i], self.energy[i]));
            } else {
                self.push_distance(&mut distances, i, stability_label, self.distance[i]);
            }
        }
        (order, energies, distances)
    }

    /// How row i's algorithm is named in stability figures: per (algorithm, density) when the
    /// sweep has densities (`walksat α=4`).
    fn stability_label(&self, i: usize) -> String {
        match self.density[i] {
            Some(a) => with_density(&self.algorithm[i], a),
            None => self.algorithm[i].clone(),
        }
    }

    /// Files distance `d` of row i under label → n → ε.
    fn push_distance(&self, into: &mut DistanceSamples, i: usize, label: String, d: f64) {
        into.entry(label)
            .or_default()
            .entry(self.n[i])
            .or_default()
            .entry(self.epsilon[i].to_bits())
            .or_default()
            .push(d);
    }

    /// As the distances of [`Cells::groups`], for the distances before rounding: only the
    /// (label, n, ε) that have them.
    pub fn point_distances(&self) -> DistanceSamples {
        let mut out: DistanceSamples = BTreeMap::new();
        for i in 0..self.len() {
            if self.epsilon[i] == 0.0 || !self.distance_point[i].is_finite() {
                continue;
            }
            self.push_distance(&mut out, i, self.stability_label(i), self.distance_point[i]);
        }
        out
    }
}

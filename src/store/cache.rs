//! The content-addressed cache: one record per cell, one spins artifact per reference run.
//!
//! Layout under the cache root: `records/<k0k1>/<key>.rec` and `spins/<k0k1>/<key>.spins`,
//! where `<key>` is the 64-hex cell key and `<k0k1>` its first two digits. Damaged entries are
//! moved to `quarantine/` (never deleted) and reported.
//!
//! Record file: the line `kiln-record 1 sha256=<hex of the rest>` then a JSON body. The body
//! names its own key, so a valid record copied under another name is detected as foreign.
//! Spins file: `KILNSPN1`, the 32-byte key, n as u64 LE, the spins packed 8 per byte (bit set
//! = −1), then the SHA-256 of everything before it.

pub use super::claims::{Claim, ClaimGuard};
use super::{StoreError, claims, write_atomic};
use crate::cell::Key;
use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};
use std::path::{Path, PathBuf};
use std::time::Duration;

/// Version of the record body.
pub const RECORD_FORMAT: u32 = 1;
const RECORD_MAGIC: &str = "kiln-record 1 sha256=";
const SPINS_MAGIC: &[u8; 8] = b"KILNSPN1";
const POINT_MAGIC: &[u8; 8] = b"KILNPNT1";
const TRACE_MAGIC: &[u8; 8] = b"KILNTRC1";

/// Everything kiln keeps about one computed cell. Identity fields, the numbers, and provenance.
#[derive(Clone, Debug, Serialize, Deserialize, PartialEq)]
pub struct Record {
    pub format: u32,
    pub key: String,
    pub base: String,
    pub family: String,
    pub couplings: String,
    pub n: u64,
    pub seed: u64,
    pub kind: String,
    pub settings: String,
    #[serde(with = "nonfinite")]
    pub epsilon: f64,
    /// H(σ)/n of the reference run (ε = 0) on the original disorder.
    #[serde(with = "nonfinite")]
    pub energy: f64,
    /// H'(σ')/n of the run on the perturbed disorder (equals `energy` at ε = 0).
    #[serde(with = "nonfinite")]
    pub energy_perturbed: f64,
    /// σ·σ'/n (sphere: x·x'/n).
    #[serde(with = "nonfinite")]
    pub overlap: f64,
    /// ‖σ − σ'‖/√n.
    #[serde(with = "nonfinite")]
    pub distance: f64,
    pub iterations: u64,
    pub sweeps: u64,
    pub converged: bool,
    /// energy/√d on sparse graphs and lattices (d the (mean) degree); absent elsewhere.
    #[serde(default, with = "nonfinite_opt")]
    pub energy_reduced: Option<f64>,
    /// Cut edges / all edges of the reference output, for `cut` couplings.
    #[serde(default, with = "nonfinite_opt")]
    pub cut_fraction: Option<f64>,
    /// Value per spin of the relaxation an algorithm solved before rounding (lowrank).
    #[serde(default, with = "nonfinite_opt")]
    pub relaxation: Option<f64>,
    /// ‖x − x'‖/√n of the pre-rounding points (norm √n each), for algorithms that return one;
    /// on the sphere it equals `distance`.
    #[serde(default, with = "nonfinite_opt")]
    pub distance_point: Option<f64>,
    /// Samplers: integrated autocorrelation time of the energy, in sweeps (reference run).
    #[serde(default, with = "nonfinite_opt")]
    pub autocorrelation_time: Option<f64>,
    /// Samplers: overlap of the output with the chain's start (reference run).
    #[serde(default, with = "nonfinite_opt")]
    pub overlap_initial: Option<f64>,
    /// Σσ_i/n of the reference output (±1 families; absent from records written before it).
    #[serde(default, with = "nonfinite_opt")]
    pub magnetisation: Option<f64>,
    /// The constraint density α = m/n of a constraint family (k-SAT); absent elsewhere.
    #[serde(default, with = "nonfinite_opt")]
    pub density: Option<f64>,
    /// 0 for the reference run and ε cells; r ≥ 1 for an extra replica run at ε = 0.
    #[serde(default)]
    pub replica: u32,
    // provenance (not part of the numbers)
    #[serde(with = "nonfinite")]
    pub wall_seconds: f64,
    pub host: String,
    pub threads: u32,
    pub kiln_version: String,
    /// `host:pid:start` of the process that computed it.
    pub computed_by: String,
}

/// Numbers as JSON numbers when finite and as the strings `NaN`, `inf`, `-inf` otherwise
/// (JSON has no non-finite numbers; a plain writer would store null and the record would
/// read as damaged).
mod nonfinite {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
        if x.is_finite() {
            s.serialize_f64(*x)
        } else if x.is_nan() {
            s.serialize_str("NaN")
        } else if *x > 0.0 {
            s.serialize_str("inf")
        } else {
            s.serialize_str("-inf")
        }
    }

    #[derive(Deserialize)]
    #[serde(untagged)]
    enum Num {
        Finite(f64),
        Text(String),
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        match Num::deserialize(d)? {
            Num::Finite(x) => Ok(x),
            Num::Text(t) => match t.as_str() {
                "NaN" => Ok(f64::NAN),
                "inf" => Ok(f64::INFINITY),
                "-inf" => Ok(f64::NEG_INFINITY),
                _ => Err(serde::de::Error::custom(format!("not a number: {t:?}"))),
            },
        }
    }
}

/// [`nonfinite`] for optional numbers (null: absent).
mod nonfinite_opt {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(x: &Option<f64>, s: S) -> Result<S::Ok, S::Error> {
        match x {
            Some(x) => super::nonfinite::serialize(x, s),
            None => s.serialize_none(),
        }
    }

    #[derive(Deserialize)]
    struct Wrap(#[serde(with = "super::nonfinite")] f64);

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<Option<f64>, D::Error> {
        Ok(Option::<Wrap>::deserialize(d)?.map(|w| w.0))
    }
}

/// The outcome of a cache lookup.
#[derive(Debug)]
pub enum Lookup<T> {
    Hit(T),
    Missing,
    /// The entry existed but failed verification; it was moved to `moved_to` (an entry that
    /// cannot be moved aside is an error, never overwritten).
    Damaged {
        path: PathBuf,
        reason: String,
        moved_to: PathBuf,
    },
}

/// A cache rooted at a folder (created on first write).
#[derive(Clone, Debug)]
pub struct Cache {
    root: PathBuf,
    /// The lease of this process's claims (see [`super::claims`]).
    lease: Duration,
}

impl Cache {
    pub fn new(root: impl Into<PathBuf>) -> Cache {
        Cache {
            root: root.into(),
            lease: claims::DEFAULT_LEASE,
        }
    }

    /// The same cache, with claims leased for `lease`.
    pub fn with_lease(mut self, lease: Duration) -> Cache {
        self.lease = lease;
        self
    }

    pub fn root(&self) -> &Path {
        &self.root
    }

    /// `<root>/<folder>/<first two hex digits>/<key>.<ext>`.
    fn entry(&self, key: &Key, folder: &str, ext: &str) -> PathBuf {
        let h = key.hex();
        self.root
            .join(folder)
            .join(&h[..2])
            .join(format!("{h}.{ext}"))
    }

    pub fn record_path(&self, key: &Key) -> PathBuf {
        self.entry(key, "records", "rec")
    }

    pub fn spins_path(&self, key: &Key) -> PathBuf {
        self.entry(key, "spins", "spins")
    }

    pub fn point_path(&self, key: &Key) -> PathBuf {
        self.entry(key, "points", "point")
    }

    pub fn trace_path(&self, key: &Key) -> PathBuf {
        self.entry(key, "traces", "trace")
    }

    /// Creates the cache folders, so that an unusable location is reported up front.
    pub fn prepare(&self) -> Result<(), StoreError> {
        for sub in ["records", "spins", "points", "traces", "claims"] {
            let path = self.root.join(sub);
            std::fs::create_dir_all(&path).map_err(|source| StoreError::Write { path, source })?;
        }
        Ok(())
    }

    /// The folder holding a cell's claims.
    pub fn claims_dir(&self, key: &Key) -> PathBuf {
        self.root.join("claims").join(&key.hex()[..2])
    }

    /// Claims a cell for computation (a lease; see [`super::claims`]).
    pub fn claim(&self, key: &Key, owner: &str) -> Result<Claim, StoreError> {
        claims::claim(&self.claims_dir(key), key, self.lease, owner)
    }

    /// Whether a cell is claimed, and whether that claim is live.
    pub fn claim_state(&self, key: &Key) -> Result<claims::State, StoreError> {
        claims::state(&self.claims_dir(key), key, self.lease)
    }

    /// Removes every stale claim in the cache; returns how many.
    pub fn sweep_stale_claims(&self) -> Result<u64, StoreError> {
        claims::sweep(&self.root.join("claims"), self.lease)
    }

    /// Removes a cell's claim if it is stale; true if it was.
    pub fn clear_stale_claim(&self, key: &Key) -> Result<bool, StoreError> {
        claims::clear_if_stale(&self.claims_dir(key), key, self.lease)
    }

    pub fn failure_path(&self, key: &Key) -> PathBuf {
        self.entry(key, "failed", "txt")
    }

    /// Notes that a cell failed (for `kiln status`); cleared when it is computed.
    pub fn mark_failed(&self, key: &Key, message: &str) -> Result<(), StoreError> {
        write_atomic(&self.failure_path(key), message.as_bytes())
    }

    pub fn clear_failed(&self, key: &Key) {
        let _ = std::fs::remove_file(self.failure_path(key));
    }

    /// Whether a record file exists (no verification).
    pub fn has_record(&self, key: &Key) -> bool {
        self.record_path(key).is_file()
    }

    pub fn write_record(&self, r: &Record) -> Result<(), StoreError> {
        let key = Key::from_hex(&r.key).expect("records carry valid keys");
        let body = serde_json::to_string(r).expect("records serialise");
        let sum = hex::encode(Sha256::digest(body.as_bytes()));
        let text = format!("{RECORD_MAGIC}{sum}\n{body}\n");
        write_atomic(&self.record_path(&key), text.as_bytes())
    }

    pub fn read_record(&self, key: &Key) -> Result<Lookup<Record>, StoreError> {
        let path = self.record_path(key);
        self.read_entry(path, |b| decode_record(b, key))
    }

    pub fn write_spins(&self, key: &Key, spins: &[i8]) -> Result<(), StoreError> {
        let mut buf = Vec::with_capacity(8 + 32 + 8 + spins.len() / 8 + 1 + 32);
        buf.extend_from_slice(SPINS_MAGIC);
        buf.extend_from_slice(&key.0);
        buf.extend_from_slice(&(spins.len() as u64).to_le_bytes());
        for chunk in spins.chunks(8) {
            let mut b = 0u8;
            for (i, &s) in chunk.iter().enumerate() {
                if s < 0 {
                    b |= 1 << i;
                }
            }
            buf.push(b);
        }
        let sum = Sha256::digest(&buf);
        buf.extend_from_slice(&sum);
        write_atomic(&self.spins_path(key), &buf)
    }

    pub fn read_spins(&self, key: &Key) -> Result<Lookup<Vec<i8>>, StoreError> {
        let path = self.spins_path(key);
        self.read_entry(path, |b| decode_spins(b, key))
    }

    /// Writes the continuous output point of a reference run: `KILNPNT1`, the key, n as u64
    /// LE, n f64 LE, then the SHA-256 of everything before it.
    pub fn write_point(&self, key: &Key, x: &[f64]) -> Result<(), StoreError> {
        let mut buf = Vec::with_capacity(8 + 32 + 8 + 8 * x.len() + 32);
        buf.extend_from_slice(POINT_MAGIC);
        buf.extend_from_slice(&key.0);
        buf.extend_from_slice(&(x.len() as u64).to_le_bytes());
        for v in x {
            buf.extend_from_slice(&v.to_le_bytes());
        }
        let sum = Sha256::digest(&buf);
        buf.extend_from_slice(&sum);
        write_atomic(&self.point_path(key), &buf)
    }

    pub fn read_point(&self, key: &Key) -> Result<Lookup<Vec<f64>>, StoreError> {
        let path = self.point_path(key);
        self.read_entry(path, |b| decode_point(b, key))
    }

    /// Writes a sampler's energy trace: `KILNTRC1`, the key, the number of points m as u64 LE,
    /// the block length as u64 LE, m f64 LE, then the SHA-256 of everything before it.
    pub fn write_trace(&self, key: &Key, t: &crate::algo::EnergyTrace) -> Result<(), StoreError> {
        let mut buf = Vec::with_capacity(8 + 32 + 16 + 8 * t.energy.len() + 32);
        buf.extend_from_slice(TRACE_MAGIC);
        buf.extend_from_slice(&key.0);
        buf.extend_from_slice(&(t.energy.len() as u64).to_le_bytes());
        buf.extend_from_slice(&t.block.to_le_bytes());
        for v in &t.energy {
            buf.extend_from_slice(&v.to_le_bytes());
        }
        let sum = Sha256::digest(&buf);
        buf.extend_from_slice(&sum);
        write_atomic(&self.trace_path(key), &buf)
    }

    pub fn read_trace(&self, key: &Key) -> Result<Lookup<crate::algo::EnergyTrace>, StoreError> {
        let path = self.trace_path(key);
        self.read_entry(path, |b| decode_trace(b, key))
    }

    /// Reads an entry through `decode`: missing, a hit, or damaged (moved aside). A folder
    /// where the file should be counts as damage too.
    pub(crate) fn read_entry<T>(
        &self,
        path: PathBuf,
        decode: impl FnOnce(&[u8]) -> Result<T, String>,
    ) -> Result<Lookup<T>, StoreError> {
        let bytes = match std::fs::read(&path) {
            Ok(b) => b,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Lookup::Missing),
            Err(_) if path.is_dir() => {
                return self.quarantine(path, "a folder where a file should be".into());
            }
            Err(source) => return Err(StoreError::Read { path, source }),
        };
        match decode(&bytes) {
            Ok(x) => Ok(Lookup::Hit(x)),
            Err(reason) => self.quarantine(path, reason),
        }
    }

    /// Moves a damaged file (or folder) to `quarantine/` under a unique name. If it cannot be
    /// moved (say `quarantine` is a file), the error names the path: damaged entries are
    /// evidence, and are never overwritten in place.
    pub(crate) fn quarantine<T>(
        &self,
        path: PathBuf,
        reason: String,
    ) -> Result<Lookup<T>, StoreError> {
        let dir = self.root.join("quarantine");
        let name = path.file_name().and_then(|s| s.to_str()).unwrap_or("entry");
        let stamp = std::time::SystemTime::now()
            .duration_since(std::time::UNIX_EPOCH)
            .map_or(0, |d| d.as_nanos());
        let target = dir.join(format!("{name}.{stamp}.{}", std::process::id()));
        std::fs::create_dir_all(&dir)
            .and_then(|_| std::fs::rename(&path, &target))
            .map_err(|source| StoreError::Quarantine {
                path: path.clone(),
                reason: reason.clone(),
                to: dir.clone(),
                source,
            })?;
        Ok(Lookup::Damaged {
            path,
            reason,
            moved_to: target,
        })
    }
}

/// The body of a text entry `<magic><sha256 of body>\n<body>\n` whose checksum matches.
pub(crate) fn checked_body<'a>(
    bytes: &'a [u8],
    magic: &str,
    what: &str,
) -> Result<&'a str, String> {
    let text = std::str::from_utf8(bytes).map_err(|_| "not UTF-8 text".to_string())?;
    let (head, body) = text
        .split_once('\n')
        .ok_or_else(|| "no header line (truncated?)".to_string())?;
    let sum = head
        .strip_prefix(magic)
        .ok_or_else(|| format!("not a kiln {what} header"))?;
    let body = body
        .strip_suffix('\n')
        .ok_or_else(|| "truncated body".to_string())?;
    if hex::encode(Sha256::digest(body.as_bytes())) != sum {
        return Err("checksum mismatch".into());
    }
    Ok(body)
}

fn decode_record(bytes: &[u8], key: &Key) -> Result<Record, String> {
    let body = checked_body(bytes, RECORD_MAGIC, "record")?;
    let r: Record = serde_json::from_str(body).map_err(|e| format!("unreadable body: {e}"))?;
    if r.format != RECORD_FORMAT {
        return Err(format!(
            "record format {} (expected {RECORD_FORMAT})",
            r.format
        ));
    }
    if r.key != key.hex() {
        return Err(format!("foreign record: it belongs to cell {}", r.key));
    }
    Ok(r)
}

/// Checks an artifact's checksum, magic and key; returns (n, body).
fn open_artifact<'a>(
    bytes: &'a [u8],
    magic: &[u8; 8],
    what: &str,
    key: &Key,
) -> Result<(usize, &'a [u8]), String> {
    if bytes.len() < 8 + 32 + 8 + 32 {
        return Err("truncated".into());
    }
    let (data, sum) = bytes.split_at(bytes.len() - 32);
    if Sha256::digest(data).as_slice() != sum {
        return Err("checksum mismatch".into());
    }
    if &data[..8] != magic {
        return Err(format!("not a kiln {what} artifact"));
    }
    if data[8..40] != key.0 {
        return Err(format!(
            "foreign artifact: it belongs to cell {}",
            hex::encode(&data[8..40])
        ));
    }
    let n = u64::from_le_bytes(data[40..48].try_into().expect("8 bytes")) as usize;
    Ok((n, &data[48..]))
}

fn decode_spins(bytes: &[u8], key: &Key) -> Result<Vec<i8>, String> {
    let (n, packed) = open_artifact(bytes, SPINS_MAGIC, "spins", key)?;
    if packed.len() != n.div_ceil(8) {
        return Err("length does not match n".into());
    }
    Ok((0..n)
        .map(|i| {
            if packed[i / 8] >> (i % 8) & 1 == 1 {
                -1
            } else {
                1
            }
        })
        .collect())
}

fn decode_point(bytes: &[u8], key: &Key) -> Result<Vec<f64>, String> {
    let (n, body) = open_artifact(bytes, POINT_MAGIC, "point", key)?;
    if body.len() != 8 * n {
        return Err("length does not match n".into());
    }
    Ok(body
        .chunks_exact(8)
        .map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes")))
        .collect())
}

fn decode_trace(bytes: &[u8], key: &Key) -> Result<crate::algo::EnergyTrace, String> {
    let (m, body) = open_artifact(bytes, TRACE_MAGIC, "trace", key)?;
    if body.len() != 8 + 8 * m {
        return Err("length does not match the number of points".into());
    }
    let block = u64::from_le_bytes(body[..8].try_into().expect("8 bytes"));
    Ok(crate::algo::EnergyTrace {
        block,
        energy: body[8..]
            .chunks_exact(8)
            .map(|c| f64::from_le_bytes(c.try_into().expect("8 bytes")))
            .collect(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cell::Canon;

    fn key(i: u64) -> Key {
        Key(Canon::Int(i as i64).hash("test"))
    }

    fn record(k: Key) -> Record {
        Record {
            format: RECORD_FORMAT,
            key: k.hex(),
            base: k.hex(),
            family: "sk".into(),
            couplings: "gaussian".into(),
            n: 8,
            seed: 1,
            kind: "descent".into(),
            settings: "{}".into(),
            epsilon: 0.1,
            energy: 0.1 + 0.2,
            energy_perturbed: -1e-300,
            overlap: 1.0 / 3.0,
            distance: 2.0f64.sqrt(),
            iterations: 3,
            sweeps: 2,
            converged: true,
            energy_reduced: None,
            cut_fraction: None,
            relaxation: None,
            distance_point: None,
            autocorrelation_time: None,
            overlap_initial: None,
            magnetisation: None,
            density: None,
            replica: 0,
            wall_seconds: 0.5,
            host: "h".into(),
            threads: 2,
            kiln_version: "0".into(),
            computed_by: "h:1:0".into(),
        }
    }

    #[test]
    fn record_round_trip_is_bit_exact() {
        let d = tempfile::tempdir().unwrap();
        let c = Cache::new(d.path());
        let r = record(key(1));
        c.write_record(&r).unwrap();
        match c.read_record(&key(1)).unwrap() {
            Lookup::Hit(got) => {
                assert_eq!(got, r);
                assert_eq!(got.energy.to_bits(), r.energy.to_bits());
                assert_eq!(got.overlap.to_bits(), r.overlap.to_bits());
            }
            other => panic!("{other:?}"),
        }
        assert!(matches!(c.read_record(&key(2)).unwrap(), Lookup::Missing));
    }

    /// NaN and infinities survive the JSON record bit for bit (a NaN once came back as
    /// null, and the record was then read as damaged on every run).
    #[test]
    fn non_finite_numbers_round_trip() {
        let d = tempfile::tempdir().unwrap();
        let c = Cache::new(d.path());
        let mut r = record(key(3));
        r.overlap = f64::NAN;
        r.distance = f64::INFINITY;
        r.energy_perturbed = f64::NEG_INFINITY;
        r.relaxation = Some(f64::NAN);
        c.write_record(&r).unwrap();
        match c.read_record(&key(3)).unwrap() {
            Lookup::Hit(got) => {
                assert!(got.overlap.is_nan());
                assert_eq!(got.distance, f64::INFINITY);
                assert_eq!(got.energy_perturbed, f64::NEG_INFINITY);
                assert!(got.relaxation.unwrap().is_nan());
                assert_eq!(got.energy.to_bits(), r.energy.to_bits());
                assert_eq!(got.distance_point, None);
            }
            other => panic!("{other:?}"),
        }
    }

    #[test]
    fn damaged_records_are_detected_and_moved() {
        let d = tempfile::tempdir().unwrap();
        let c = Cache::new(d.path());
        for (i, damage) in ["truncate", "flip", "foreign"].iter().enumerate() {
            let k = key(10 + i as u64);
            c.write_record(&record(k)).unwrap();
            let p = c.record_path(&k);
            let mut b = std::fs::read(&p).unwrap();
            match *damage {
                "truncate" => b.truncate(b.len() / 2),
                "flip" => {
                    let m = b.len() - 10;
                    b[m] ^= 0x01;
                }
                _ => {
                    c.write_record(&record(key(99))).unwrap();
                    b = std::fs::read(c.record_path(&key(99))).unwrap();
                }
            }
            std::fs::write(&p, b).unwrap();
            match c.read_record(&k).unwrap() {
                Lookup::Damaged { moved_to, .. } => {
                    assert!(moved_to.is_file());
                    assert!(!p.exists());
                }
                other => panic!("{damage}: {other:?}"),
            }
        }
    }

    #[test]
    fn spins_round_trip_and_damage() {
        let d = tempfile::tempdir().unwrap();
        let c = Cache::new(d.path());
        let s: Vec<i8> = (0..13).map(|i| if i % 3 == 0 { -1 } else { 1 }).collect();
        c.write_spins(&key(5), &s).unwrap();
        match c.read_spins(&key(5)).unwrap() {
            Lookup::Hit(got) => assert_eq!(got, s),
            other => panic!("{other:?}"),
        }
        let p = c.spins_path(&key(5));
        let mut b = std::fs::read(&p).unwrap();
        b[50] ^= 0x80;
        std::fs::write(&p, b).unwrap();
        assert!(matches!(
            c.read_spins(&key(5)).unwrap(),
            Lookup::Damaged { .. }
        ));
    }
}

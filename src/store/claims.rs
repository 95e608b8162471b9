//! Claims: which runner is computing a cell, as leases on files that runners on any number of
//! hosts share.
//!
//! A claim is the file `claims/<k0k1>/<key>.<generation>.claim`, created with create-new
//! semantics (a hard link of a temporary file that already holds the line, so no reader sees
//! it empty). Its one line names the holder: host, PID, the process's start time (clock ticks
//! since boot), the boot id, a nonce drawn once per process, the lease in seconds, and the
//! owner text. While the holder computes, a heartbeat thread rewrites the line every sixth of
//! the lease (and syncs it, so a shared file system sees it), which renews the file's
//! modification time. The heartbeat does not depend on the cell's progress, so a long cell
//! does not need a long lease, and a stopped runner (SIGSTOP, a suspended job) loses its
//! claims one lease after it stopped.
//!
//! The claim with the highest generation is the cell's claim. It is stale when
//! - its lease has expired: its modification time is older than its lease, on the file
//!   system's own clock (measured with a probe file, so clock skew between hosts does not
//!   matter) — on any host;
//! - on this host: the boot id differs (the host restarted), no process has the PID, the
//!   process with that PID started at another time (the PID was reused), or the PID and start
//!   time are this process's but the nonce is not (a claim written by a shell that then
//!   exec'd kiln, or by another program that had this PID before);
//! - it is empty or unreadable and older than [`UNREADABLE_GRACE`] (damaged, or written on a
//!   file system without hard links by a writer that died between create and write).
//!
//! Taking over is atomic: a stale claim of generation g is taken by creating generation g + 1
//! with create-new semantics, which exactly one of several runners can do. Nobody removes a
//! claim but its holder, except that the taker removes the generations below its own (which
//! nobody holds any more). A legacy claim `<key>.claim` (host, PID, owner) counts as
//! generation 0 with the reader's lease.

use super::StoreError;
use crate::cell::Key;
use std::collections::BTreeMap;
use std::fs::File;
use std::io::{Read, Write};
use std::os::unix::fs::FileExt;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Mutex, OnceLock};
use std::time::{Duration, SystemTime};

/// The lease a run gives its claims unless told otherwise (`kiln run --lease`).
pub const DEFAULT_LEASE: Duration = Duration::from_secs(120);
/// How old an empty or unreadable claim must be before it counts as abandoned.
pub const UNREADABLE_GRACE: Duration = Duration::from_secs(5);
const MAGIC: &str = "kiln-claim 2";

/// Who this process is, as claims name it.
#[derive(Clone, Debug, PartialEq)]
pub struct Identity {
    pub host: String,
    pub pid: u32,
    /// Start time of the process in clock ticks since boot (Linux), if known.
    pub start: Option<u64>,
    /// `/proc/sys/kernel/random/boot_id` (Linux), if known.
    pub boot: Option<String>,
    /// Random, drawn once per process: tells this process from an earlier image with its PID.
    pub nonce: String,
}

/// This process's identity.
pub fn me() -> &'static Identity {
    static ME: OnceLock<Identity> = OnceLock::new();
    ME.get_or_init(|| {
        let pid = std::process::id();
        let mut seed = [0u8; 8];
        rand::fill(&mut seed);
        Identity {
            host: super::this_host().to_string(),
            pid,
            start: start_time(pid),
            boot: boot_id(),
            nonce: hex::encode(seed),
        }
    })
}

/// The start time (field 22 of `/proc/<pid>/stat`) of a process, if it exists and /proc does.
pub fn start_time(pid: u32) -> Option<u64> {
    let stat = std::fs::read_to_string(format!("/proc/{pid}/stat")).ok()?;
    // The command name (field 2) is in parentheses and may contain spaces.
    let rest = &stat[stat.rfind(')')? + 1..];
    rest.split_whitespace().nth(19)?.parse().ok()
}

fn boot_id() -> Option<String> {
    std::fs::read_to_string("/proc/sys/kernel/random/boot_id")
        .ok()
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
}

/// What a claim file says.
#[derive(Clone, Debug, PartialEq)]
pub struct Holder {
    pub id: Identity,
    pub lease: Duration,
    pub owner: String,
}

impl Holder {
    fn line(&self) -> String {
        let i = &self.id;
        format!(
            "{MAGIC} host={} pid={} start={} boot={} nonce={} lease={} owner={}\n",
            i.host,
            i.pid,
            i.start.map_or("-".into(), |s| s.to_string()),
            i.boot.as_deref().unwrap_or("-"),
            i.nonce,
            self.lease.as_secs_f64(),
            self.owner.replace(['\n', ' '], "_"),
        )
    }

    /// Parses a claim line: the current form, or the legacy `host pid owner` (no start time,
    /// boot id or nonce; given `legacy_lease`).
    pub fn parse(text: &str, legacy_lease: Duration) -> Option<Holder> {
        let line = text.lines().next()?;
        if let Some(rest) = line.strip_prefix(MAGIC) {
            let mut f: BTreeMap<&str, &str> = BTreeMap::new();
            for word in rest.split_whitespace() {
                let (k, v) = word.split_once('=')?;
                f.insert(k, v);
            }
            let opt = |v: &str| (v != "-").then(|| v.to_string());
            let lease: f64 = f.get("lease")?.parse().ok()?;
            if !(lease.is_finite() && lease > 0.0) {
                return None;
            }
            return Some(Holder {
                id: Identity {
                    host: f.get("host")?.to_string(),
                    pid: f.get("pid")?.parse().ok()?,
                    start: opt(f.get("start")?).map(|s| s.parse()).transpose().ok()?,
                    boot: opt(f.get("boot")?),
                    nonce: f.get("nonce")?.to_string(),
                },
                lease: Duration::from_secs_f64(lease.min(1e9)),
                owner: f.get("owner").unwrap_or(&"").to_string(),
            });
        }
        let mut w = line.split_whitespace();
        let (host, pid) = (w.next()?, w.next()?.parse().ok()?);
        Some(Holder {
            id: Identity {
                host: host.into(),
                pid,
                start: None,
                boot: None,
                nonce: String::new(),
            },
            lease: legacy_lease,
            owner: w.next().unwrap_or("").into(),
        })
    }

    fn describe(&self) -> String {
        format!("{} pid {} ({})", self.id.host, self.id.pid, self.owner)
    }
}

/// Whether a claim is held or abandoned, and why.
#[derive(Clone, Debug, PartialEq)]
pub enum Verdict {
    /// Held; the text names the holder.
    Live(String),
    /// Abandoned; the text says why.
    Stale(String),
}

/// Judges a claim's holder and age (time since its last heartbeat on the file system's clock).
pub fn judge(holder: Option<&Holder>, age: Duration, me: &Identity) -> Verdict {
    let Some(h) = holder else {
        return if age > UNREADABLE_GRACE {
            Verdict::Stale(format!(
                "empty or unreadable claim, {:.0} s old",
                age.as_secs_f64()
            ))
        } else {
            Verdict::Live("a claim being written".into())
        };
    };
    if age > h.lease {
        return Verdict::Stale(format!(
            "lease of {} expired: no heartbeat for {:.0} s",
            h.describe(),
            age.as_secs_f64()
        ));
    }
    if h.id.host == me.host {
        if let (Some(a), Some(b)) = (&h.id.boot, &me.boot)
            && a != b
        {
            return Verdict::Stale(format!(
                "{} is from before this host restarted",
                h.describe()
            ));
        }
        if h.id.pid == me.pid {
            if h.id.nonce != me.nonce {
                return Verdict::Stale(format!(
                    "{} names this process's PID but was not written by it",
                    h.describe()
                ));
            }
        } else if Path::new("/proc/self/stat").exists() {
            match start_time(h.id.pid) {
                None => return Verdict::Stale(format!("{}: no such process", h.describe())),
                Some(now) if h.id.start.is_some_and(|s| s != now) => {
                    return Verdict::Stale(format!(
                        "{}: that PID now belongs to another process",
                        h.describe()
                    ));
                }
                Some(_) => {}
            }
        }
    }
    Verdict::Live(h.describe())
}

/// The claim files of one cell: (generation, path), highest last.
fn generations(dir: &Path, key: &Key) -> Result<Vec<(u64, PathBuf)>, StoreError> {
    let hex = key.hex();
    let entries = match std::fs::read_dir(dir) {
        Ok(e) => e,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(Vec::new()),
        Err(source) => {
            return Err(StoreError::Read {
                path: dir.to_path_buf(),
                source,
            });
        }
    };
    let mut out = Vec::new();
    for e in entries.flatten() {
        let name = e.file_name();
        let Some(name) = name.to_str() else { continue };
        let Some(rest) = name.strip_prefix(hex.as_str()) else {
            continue;
        };
        let generation = match rest.strip_suffix(".claim") {
            Some("") => 0,
            Some(g) => match g.strip_prefix('.').and_then(|g| g.parse().ok()) {
                Some(g) => g,
                None => continue,
            },
            None => continue,
        };
        out.push((generation, e.path()));
    }
    out.sort();
    Ok(out)
}

/// The path of a claim generation.
pub fn claim_file(dir: &Path, key: &Key, generation: u64) -> PathBuf {
    dir.join(format!("{}.{generation}.claim", key.hex()))
}

/// The file system's idea of "now" minus this host's, per folder, refreshed each minute.
fn clock_offset(dir: &Path) -> f64 {
    static OFFSETS: Mutex<BTreeMap<PathBuf, (SystemTime, f64)>> = Mutex::new(BTreeMap::new());
    let local = SystemTime::now();
    if let Some(&(when, off)) = OFFSETS.lock().expect("lock").get(dir)
        && local
            .duration_since(when)
            .is_ok_and(|d| d < Duration::from_secs(60))
    {
        return off;
    }
    let probe = super::temp_path(dir, "clock");
    let measured = (|| {
        let mut f = File::create(&probe).ok()?;
        f.write_all(b"t").ok()?;
        f.sync_data().ok()?;
        let m = f.metadata().ok()?.modified().ok()?;
        let now = SystemTime::now();
        Some(secs_between(now, m))
    })();
    let _ = std::fs::remove_file(&probe);
    let off = measured.unwrap_or(0.0);
    OFFSETS
        .lock()
        .expect("lock")
        .insert(dir.to_path_buf(), (local, off));
    off
}

/// `later − earlier` in seconds, negative if `later` is earlier.
fn secs_between(earlier: SystemTime, later: SystemTime) -> f64 {
    match later.duration_since(earlier) {
        Ok(d) => d.as_secs_f64(),
        Err(e) => -e.duration().as_secs_f64(),
    }
}

/// Reads a claim file: its holder (None if unreadable) and its age. None if it is gone.
fn read_claim(path: &Path, lease: Duration) -> Option<(Option<Holder>, Duration)> {
    // Opening (not only stat) makes a shared file system revalidate the file's attributes.
    let mut f = File::open(path).ok()?;
    let modified = f.metadata().ok()?.modified().ok()?;
    let mut text = String::new();
    let holder = Read::by_ref(&mut f)
        .take(4096)
        .read_to_string(&mut text)
        .ok()
        .and_then(|_| Holder::parse(&text, lease));
    let dir = path.parent().unwrap_or(Path::new("."));
    let age = secs_between(modified, SystemTime::now()) + clock_offset(dir);
    Some((holder, Duration::from_secs_f64(age.max(0.0))))
}

/// The state of a cell's claim.
#[derive(Clone, Debug, PartialEq)]
pub enum State {
    Unclaimed,
    Held(Verdict),
}

/// Looks at a cell's claim without touching it.
pub fn state(dir: &Path, key: &Key, lease: Duration) -> Result<State, StoreError> {
    for _ in 0..4 {
        let Some((_, top)) = generations(dir, key)?.pop() else {
            return Ok(State::Unclaimed);
        };
        if let Some((holder, age)) = read_claim(&top, lease) {
            return Ok(State::Held(judge(holder.as_ref(), age, me())));
        }
    }
    Ok(State::Unclaimed)
}

/// The outcome of trying to claim a cell.
#[derive(Debug)]
pub enum Claim {
    /// This process holds the claim until the guard is dropped; `took_over` says why the
    /// claim it replaced was stale.
    Acquired {
        guard: ClaimGuard,
        took_over: Option<String>,
    },
    /// Another runner holds it; the text names the holder.
    HeldByOther(String),
}

/// Claims a cell: creates generation 0 if there is no claim, or generation g + 1 over a stale
/// claim of generation g. `lease` is this claim's lease and the one assumed for legacy claims.
pub fn claim(dir: &Path, key: &Key, lease: Duration, owner: &str) -> Result<Claim, StoreError> {
    let werr = |path: &Path, source| StoreError::Write {
        path: path.to_path_buf(),
        source,
    };
    std::fs::create_dir_all(dir).map_err(|e| werr(dir, e))?;
    let holder = Holder {
        id: me().clone(),
        lease,
        owner: owner.to_string(),
    };
    for _ in 0..16 {
        let existing = generations(dir, key)?;
        let (next, took_over) = match existing.last() {
            None => (0, None),
            Some((g, top)) => match read_claim(top, lease) {
                // Released meanwhile: look again.
                None => continue,
                Some((h, age)) => match judge(h.as_ref(), age, me()) {
                    Verdict::Live(who) => return Ok(Claim::HeldByOther(who)),
                    Verdict::Stale(why) => (g + 1, Some(why)),
                },
            },
        };
        let path = claim_file(dir, key, next);
        let line = holder.line();
        match create_with(&path, &line) {
            Ok(f) => {
                for (g, old) in &existing {
                    if *g < next {
                        let _ = std::fs::remove_file(old);
                    }
                }
                let slot = heartbeat::keep(f, line.clone(), path.clone(), lease);
                return Ok(Claim::Acquired {
                    guard: ClaimGuard { path, line, slot },
                    took_over,
                });
            }
            // Another runner created this generation first: look again.
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
            Err(e) => return Err(werr(&path, e)),
        }
    }
    Ok(Claim::HeldByOther("a claim that keeps changing".into()))
}

/// Creates `path` holding `line`, failing with `AlreadyExists` if it exists, so that no
/// reader ever sees it empty: the line goes to a temporary file that is then hard-linked to
/// `path` (where the file system cannot link, create-new and write). Returns the file opened
/// for writing (for the heartbeat).
fn create_with(path: &Path, line: &str) -> std::io::Result<File> {
    let dir = path.parent().unwrap_or(Path::new("."));
    let tmp = super::temp_path(dir, "claim");
    std::fs::write(&tmp, line)?;
    let linked = std::fs::hard_link(&tmp, path);
    let _ = std::fs::remove_file(&tmp);
    match linked {
        Ok(()) => {}
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => return Err(e),
        Err(_) => {
            let mut f = std::fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(path)?;
            f.write_all(line.as_bytes())?;
        }
    }
    // Opened after it was written and closed, so a shared file system has the line.
    std::fs::OpenOptions::new().write(true).open(path)
}

/// Removes a cell's claim if it is stale (takes it over, then releases it). True if it was.
pub fn clear_if_stale(dir: &Path, key: &Key, lease: Duration) -> Result<bool, StoreError> {
    // Claiming judges the claim: a live one is left alone, a stale one is taken over (and
    // counts), and a cell whose claim was released meanwhile is claimed afresh (and does not).
    Ok(match claim(dir, key, lease, "sweep")? {
        Claim::Acquired { took_over, .. } => took_over.is_some(),
        Claim::HeldByOther(_) => false,
    })
}

/// Removes every stale claim under a cache's `claims/` folder (a killed runner's claims on
/// cells that are done, which no runner would otherwise touch again); returns how many.
pub fn sweep(claims: &Path, lease: Duration) -> Result<u64, StoreError> {
    let mut keys = std::collections::BTreeSet::new();
    if let Ok(shards) = std::fs::read_dir(claims) {
        for shard in shards.flatten() {
            if let Ok(files) = std::fs::read_dir(shard.path()) {
                for f in files.flatten() {
                    let name = f.file_name();
                    let name = name.to_string_lossy();
                    if let Some(key) = name
                        .strip_suffix(".claim")
                        .and_then(|s| s.get(..64))
                        .and_then(Key::from_hex)
                    {
                        keys.insert(key);
                    }
                }
            }
        }
    }
    let mut removed = 0;
    for key in keys {
        let dir = claims.join(&key.hex()[..2]);
        if clear_if_stale(&dir, &key, lease)? {
            removed += 1;
        }
    }
    Ok(removed)
}

/// A held claim: renewed by the heartbeat, removed when dropped (if it is still this one).
#[derive(Debug)]
pub struct ClaimGuard {
    path: PathBuf,
    line: String,
    slot: u64,
}

impl ClaimGuard {
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for ClaimGuard {
    fn drop(&mut self) {
        heartbeat::forget(self.slot);
        release(&self.path, &self.line);
    }
}

/// Removes a claim file if it still says `line` (a taker may have replaced it meanwhile).
fn release(path: &Path, line: &str) {
    if std::fs::read_to_string(path).is_ok_and(|t| t == line) {
        let _ = std::fs::remove_file(path);
    }
}

/// Releases every claim this process holds (for a run that leaves before its cells finish).
pub fn release_all() {
    for (path, line) in heartbeat::drain() {
        release(&path, &line);
    }
}

/// One thread per process renews every held claim.
mod heartbeat {
    use super::*;

    struct Held {
        file: std::sync::Arc<File>,
        line: String,
        path: PathBuf,
    }

    static HELD: Mutex<BTreeMap<u64, Held>> = Mutex::new(BTreeMap::new());
    static NEXT: AtomicU64 = AtomicU64::new(0);
    /// Milliseconds between beats: a sixth of the shortest lease seen.
    static EVERY_MS: AtomicU64 = AtomicU64::new(u64::MAX);

    pub(super) fn keep(file: File, line: String, path: PathBuf, lease: Duration) -> u64 {
        let every = (lease.as_millis() as u64 / 6).max(20);
        EVERY_MS.fetch_min(every, Ordering::Relaxed);
        static THREAD: OnceLock<()> = OnceLock::new();
        THREAD.get_or_init(|| {
            std::thread::Builder::new()
                .name("kiln-heartbeat".into())
                .spawn(beat)
                .expect("heartbeat thread");
        });
        let slot = NEXT.fetch_add(1, Ordering::Relaxed);
        let file = std::sync::Arc::new(file);
        HELD.lock()
            .expect("lock")
            .insert(slot, Held { file, line, path });
        slot
    }

    pub(super) fn forget(slot: u64) {
        HELD.lock().expect("lock").remove(&slot);
    }

    pub(super) fn drain() -> Vec<(PathBuf, String)> {
        std::mem::take(&mut *HELD.lock().expect("lock"))
            .into_values()
            .map(|h| (h.path, h.line))
            .collect()
    }

    fn beat() {
        loop {
            std::thread::sleep(Duration::from_millis(EVERY_MS.load(Ordering::Relaxed)));
            let held: Vec<(std::sync::Arc<File>, String)> = HELD
                .lock()
                .expect("lock")
                .values()
                .map(|h| (h.file.clone(), h.line.clone()))
                .collect();
            for (file, line) in held {
                // Rewriting the line renews the modification time; the sync makes a shared
                // file system's server see it. A failed beat only shortens the lease.
                if file.write_all_at(line.as_bytes(), 0).is_ok() {
                    let _ = file.sync_data();
                }
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cell::Canon;

    fn key(i: i64) -> Key {
        Key(Canon::Int(i).hash("claims-test"))
    }

    fn holder(host: &str, pid: u32, start: Option<u64>, nonce: &str, lease: f64) -> Holder {
        Holder {
            id: Identity {
                host: host.into(),
                pid,
                start,
                boot: me().boot.clone(),
                nonce: nonce.into(),
            },
            lease: Duration::from_secs_f64(lease),
            owner: "t".into(),
        }
    }

    /// The verdicts, case by case (the end-to-end cases are in tests/cli/leases.rs).
    #[test]
    fn judge_cases() {
        let me = me();
        let young = Duration::from_secs(1);
        // This process's own claim: live.
        let own = holder(&me.host, me.pid, me.start, &me.nonce, 60.0);
        assert!(matches!(judge(Some(&own), young, me), Verdict::Live(_)));
        // Its PID and start time but another nonce: written before an exec.
        let exec = holder(&me.host, me.pid, me.start, "other", 60.0);
        assert!(matches!(judge(Some(&exec), young, me), Verdict::Stale(_)));
        // Another host: live until its lease runs out, then stale.
        let far = holder("elsewhere", 1, Some(1), "x", 10.0);
        assert!(matches!(judge(Some(&far), young, me), Verdict::Live(_)));
        assert!(matches!(
            judge(Some(&far), Duration::from_secs(11), me),
            Verdict::Stale(_)
        ));
        // Unreadable: live for a moment (being written), stale after the grace.
        assert!(matches!(judge(None, young, me), Verdict::Live(_)));
        assert!(matches!(
            judge(None, UNREADABLE_GRACE + young, me),
            Verdict::Stale(_)
        ));
        // The line round-trips, and the legacy form parses with the reader's lease.
        let parsed = Holder::parse(&own.line(), Duration::from_secs(5)).unwrap();
        assert_eq!(parsed, own);
        let legacy = Holder::parse("h 42 h:42:t\n", Duration::from_secs(7)).unwrap();
        assert_eq!((legacy.id.pid, legacy.lease), (42, Duration::from_secs(7)));
    }

    /// Only a claim that is stale when it is taken over counts as cleared: no claim (say one
    /// released while `kiln verify` ran) and a live claim count as nothing; a stale one is
    /// replaced by a higher generation, then released, leaving no file.
    #[test]
    fn only_stale_claims_count_as_cleared() {
        let d = tempfile::tempdir().unwrap();
        let lease = Duration::from_secs(60);
        assert!(!clear_if_stale(d.path(), &key(1), lease).unwrap());
        let Claim::Acquired { guard, took_over } = claim(d.path(), &key(2), lease, "t").unwrap()
        else {
            panic!("a free cell is claimed");
        };
        assert!(took_over.is_none());
        assert!(!clear_if_stale(d.path(), &key(2), lease).unwrap());
        assert!(guard.path().is_file());
        drop(guard);
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 0);
        let stale = holder("elsewhere", 1, Some(1), "x", 1.0);
        let path = claim_file(d.path(), &key(3), 4);
        std::fs::write(&path, stale.line()).unwrap();
        let old = SystemTime::now() - Duration::from_secs(30);
        File::options()
            .write(true)
            .open(&path)
            .unwrap()
            .set_modified(old)
            .unwrap();
        assert!(clear_if_stale(d.path(), &key(3), lease).unwrap());
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 0);
    }
}

//! Storage: the content-addressed cache of records and artifacts, atomic file writes, the
//! Parquet table and the manifest. Nothing here knows about numerics.

pub mod bundle;
pub mod cache;
pub mod claims;
pub mod fits;
pub mod manifest;
pub mod table;
pub mod theory;
pub mod verify;

use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

/// A storage failure, naming the path.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    #[error("cannot write {path}: {source}")]
    Write {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("cannot read {path}: {source}")]
    Read {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("cannot write the table {path}: {message}")]
    Table { path: PathBuf, message: String },
    #[error(
        "the table {path} is damaged: {message}. Rewrite it with the `kiln run` that made it (its cells come from the cache)"
    )]
    Damaged { path: PathBuf, message: String },
    #[error(
        "damaged cache entry {path} ({reason}) cannot be moved aside to {to}: {source}. Make {to} a writable folder (move away what is there) and run again"
    )]
    Quarantine {
        path: PathBuf,
        reason: String,
        to: PathBuf,
        #[source]
        source: std::io::Error,
    },
    #[error("cannot use the table {path}: {message}")]
    Unusable { path: PathBuf, message: String },
}

/// This machine's host name (cached), used to tell own leftovers from other hosts' files.
/// `KILN_HOST` overrides it: for containers that share a host name, and to stand in for a
/// second host in tests.
pub fn this_host() -> &'static str {
    static HOST: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    HOST.get_or_init(|| {
        std::env::var("KILN_HOST")
            .ok()
            .filter(|s| !s.trim().is_empty())
            .or_else(|| std::fs::read_to_string("/proc/sys/kernel/hostname").ok())
            .map(|s| s.trim().to_string())
            .filter(|s| !s.is_empty())
            .or_else(|| std::env::var("HOSTNAME").ok())
            .unwrap_or_else(|| "unknown".into())
            .replace(['/', ' '], "_")
    })
}

/// For a temporary file name written by [`write_atomic`], whether its writer is known to be
/// dead (same host, no such process).
pub fn temp_is_orphan(file_name: &str) -> bool {
    let Some((_, tail)) = file_name.rsplit_once(".tmp-") else {
        return false;
    };
    // tail = {host}-{pid}-{counter}; the host may itself contain '-'.
    let mut parts = tail.rsplitn(3, '-');
    let _counter = parts.next();
    let pid = parts.next().and_then(|p| p.parse::<u32>().ok());
    match (parts.next(), pid) {
        (Some(h), Some(pid)) if h == this_host() => !Path::new(&format!("/proc/{pid}")).exists(),
        _ => false,
    }
}

static TMP_COUNTER: AtomicU64 = AtomicU64::new(0);

/// A unique temporary name in `dir` for a file about to become `name`:
/// `.{name}.tmp-{host}-{pid}-{counter}`, the form [`temp_is_orphan`] recognises, so `kiln
/// verify` removes it if its writer dies before renaming or removing it.
pub(crate) fn temp_path(dir: &Path, name: &str) -> PathBuf {
    dir.join(format!(
        ".{name}.tmp-{}-{}-{}",
        this_host(),
        std::process::id(),
        TMP_COUNTER.fetch_add(1, Ordering::Relaxed)
    ))
}

/// A temporary file beside `path`, written and synced, waiting to be renamed over it.
struct Staged {
    tmp: PathBuf,
    path: PathBuf,
}

fn stage(path: &Path, bytes: &[u8]) -> Result<Staged, StoreError> {
    let err = |source| StoreError::Write {
        path: path.to_path_buf(),
        source,
    };
    let dir = path.parent().unwrap_or(Path::new("."));
    std::fs::create_dir_all(dir).map_err(err)?;
    let name = path.file_name().and_then(|s| s.to_str()).unwrap_or("file");
    let tmp = temp_path(dir, name);
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()
    })();
    match result {
        Ok(()) => Ok(Staged {
            tmp,
            path: path.to_path_buf(),
        }),
        Err(e) => {
            let _ = std::fs::remove_file(&tmp);
            Err(err(e))
        }
    }
}

/// Whether files can be written into `dir` (created if missing): a temporary file is
/// written, synced and removed. The error names the path.
pub fn check_writable(dir: &Path) -> Result<(), StoreError> {
    let staged = stage(&dir.join("write-check"), b"")?;
    let _ = std::fs::remove_file(&staged.tmp);
    Ok(())
}

/// Writes `bytes` to `path` so that readers see either the old file or the whole new one:
/// a temporary file in the same folder, fsync, rename, fsync of the folder. On error the
/// temporary file is removed.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), StoreError> {
    write_all_atomic(&[(path, bytes)])
}

/// Writes several files all or none: every one is first written and synced to a temporary
/// file; only when all are down are they renamed into place (renames need no space, so a
/// full disk stops the write before any file changes). On error the temporary files are
/// removed.
pub fn write_all_atomic(files: &[(&Path, &[u8])]) -> Result<(), StoreError> {
    // A folder in a file's place would make its rename fail after others were done.
    for (path, _) in files {
        if path.is_dir() {
            return Err(StoreError::Write {
                path: path.to_path_buf(),
                source: std::io::Error::new(
                    std::io::ErrorKind::IsADirectory,
                    "a folder is where this file goes",
                ),
            });
        }
    }
    let mut staged = Vec::with_capacity(files.len());
    for (path, bytes) in files {
        match stage(path, bytes) {
            Ok(s) => staged.push(s),
            Err(e) => {
                for s in &staged {
                    let _ = std::fs::remove_file(&s.tmp);
                }
                return Err(e);
            }
        }
    }
    for (i, s) in staged.iter().enumerate() {
        if let Err(source) = std::fs::rename(&s.tmp, &s.path) {
            for rest in &staged[i..] {
                let _ = std::fs::remove_file(&rest.tmp);
            }
            return Err(StoreError::Write {
                path: s.path.clone(),
                source,
            });
        }
    }
    let mut dirs: Vec<&Path> = staged
        .iter()
        .map(|s| s.path.parent().unwrap_or(Path::new(".")))
        .collect();
    dirs.dedup();
    for d in dirs {
        if let Ok(d) = std::fs::File::open(d) {
            let _ = d.sync_all();
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_replaces_whole_file_and_leaves_no_temp() {
        let d = tempfile::tempdir().unwrap();
        let p = d.path().join("sub/x.bin");
        write_atomic(&p, b"first").unwrap();
        write_atomic(&p, b"second").unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"second");
        let names: Vec<_> = std::fs::read_dir(d.path().join("sub")).unwrap().collect();
        assert_eq!(names.len(), 1);
    }

    /// All or none: a second file that cannot be written (a folder in its place) leaves the
    /// first one unchanged and no temporary file behind.
    #[test]
    fn files_written_together_are_all_or_none() {
        let d = tempfile::tempdir().unwrap();
        let (a, b) = (
            d.path().join("cells.parquet"),
            d.path().join("manifest.toml"),
        );
        write_atomic(&a, b"old").unwrap();
        std::fs::create_dir(&b).unwrap();
        let e = write_all_atomic(&[(&a, b"new"), (&b, b"m")]).unwrap_err();
        assert!(e.to_string().contains("manifest.toml"), "{e}");
        assert_eq!(std::fs::read(&a).unwrap(), b"old");
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 2);
    }

    #[test]
    fn atomic_write_names_the_path_on_error() {
        let d = tempfile::tempdir().unwrap();
        let blocker = d.path().join("file");
        std::fs::write(&blocker, b"x").unwrap();
        let e = write_atomic(&blocker.join("below"), b"y").unwrap_err();
        assert!(e.to_string().contains("file/below"), "{e}");
    }
}

//! Storage: the content-addressed cache of records and artifacts, atomic file writes, the
//! Parquet table and the manifest. Nothing here knows about numerics.

pub mod cache;
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
}

/// This machine's host name (cached), used to tell own leftovers from other hosts' files.
pub fn this_host() -> &'static str {
    static HOST: std::sync::OnceLock<String> = std::sync::OnceLock::new();
    HOST.get_or_init(|| {
        std::fs::read_to_string("/proc/sys/kernel/hostname")
            .ok()
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

/// Writes `bytes` to `path` so that readers see either the old file or the whole new one:
/// a temporary file in the same folder, fsync, rename, fsync of the folder. On error the
/// temporary file is removed.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), StoreError> {
    let err = |source| StoreError::Write {
        path: path.to_path_buf(),
        source,
    };
    let dir = path.parent().unwrap_or(Path::new("."));
    std::fs::create_dir_all(dir).map_err(err)?;
    let name = path.file_name().and_then(|s| s.to_str()).unwrap_or("file");
    let tmp = dir.join(format!(
        ".{name}.tmp-{}-{}-{}",
        this_host(),
        std::process::id(),
        TMP_COUNTER.fetch_add(1, Ordering::Relaxed)
    ));
    let result = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        drop(f);
        std::fs::rename(&tmp, path)?;
        if let Ok(d) = std::fs::File::open(dir) {
            let _ = d.sync_all();
        }
        Ok(())
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.map_err(err)
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

    #[test]
    fn atomic_write_names_the_path_on_error() {
        let d = tempfile::tempdir().unwrap();
        let blocker = d.path().join("file");
        std::fs::write(&blocker, b"x").unwrap();
        let e = write_atomic(&blocker.join("below"), b"y").unwrap_err();
        assert!(e.to_string().contains("file/below"), "{e}");
    }
}

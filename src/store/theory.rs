//! Solved order parameters in the cache (`<cache>/theory/<key>.json`), checksummed like every
//! other entry: a header line `kiln-theory 1 sha256=<sum of the body>`, then the JSON body,
//! which names its own key. A damaged or foreign entry is moved to `quarantine/` and solved
//! again; it is never used.

use std::path::PathBuf;

use sha2::{Digest, Sha256};

use super::cache::{Cache, Lookup};
use super::{StoreError, write_atomic};

const THEORY_MAGIC: &str = "kiln-theory 1 sha256=";

/// Where the entry with this key lives.
pub fn path(cache: &Cache, hex_key: &str) -> PathBuf {
    cache.root().join("theory").join(format!("{hex_key}.json"))
}

/// Writes a solution: `body` must carry `"key": hex_key`.
pub fn write(cache: &Cache, hex_key: &str, body: &serde_json::Value) -> Result<(), StoreError> {
    let body = body.to_string();
    let sum = hex::encode(Sha256::digest(body.as_bytes()));
    let text = format!("{THEORY_MAGIC}{sum}\n{body}\n");
    write_atomic(&path(cache, hex_key), text.as_bytes())
}

/// Reads and checks a solution.
pub fn read(cache: &Cache, hex_key: &str) -> Result<Lookup<serde_json::Value>, StoreError> {
    let path = path(cache, hex_key);
    cache.read_entry(path, |b| decode(b, hex_key))
}

fn decode(bytes: &[u8], hex_key: &str) -> Result<serde_json::Value, String> {
    let body = super::cache::checked_body(bytes, THEORY_MAGIC, "theory entry")?;
    let v: serde_json::Value =
        serde_json::from_str(body).map_err(|e| format!("unreadable body: {e}"))?;
    if v["key"] != hex_key {
        return Err("foreign entry: it names another key".into());
    }
    Ok(v)
}

//! `manifest.toml`: the exact spec and the environment of a run.

use serde::Serialize;

/// What a run records about itself.
#[derive(Serialize, Debug, Clone)]
pub struct Manifest {
    pub experiment: String,
    pub note: String,
    pub spec_origin: String,
    pub spec_hash: String,
    pub kiln_version: String,
    pub git_revision: String,
    pub rustc: String,
    pub host: String,
    pub threads: u32,
    pub started: String,
    pub finished: String,
    pub cells: CellCounts,
    /// SHA-256 of each table written with this manifest, by file name; readers check it.
    pub tables: std::collections::BTreeMap<String, String>,
    /// The revisions and formats that decide the numbers (see [`revisions`]): `kiln replay`
    /// compares them with the running binary's before it recomputes anything.
    pub revisions: std::collections::BTreeMap<String, String>,
    /// The exact spec text.
    pub spec: String,
}

/// Counts of a run.
#[derive(Serialize, Debug, Clone, Default, PartialEq)]
pub struct CellCounts {
    pub total: u64,
    pub cached: u64,
    pub computed: u64,
    pub failed: u64,
    pub skipped: u64,
}

/// What decides a spec's numbers besides the spec itself, by name: the cell-key, record and
/// table formats, the family's sampler revision (`family.<name>`), the dense kernels' revision
/// (`kernels`, mean-field families only) and each algorithm kind's revision (`kind.<name>`).
/// Two binaries with the same map give the same numbers for the spec, bit for bit.
pub fn revisions(spec: &crate::spec::Spec) -> std::collections::BTreeMap<String, String> {
    let mut r = std::collections::BTreeMap::new();
    r.insert("key_format".into(), crate::cell::KEY_FORMAT.into());
    r.insert(
        "record_format".into(),
        crate::store::cache::RECORD_FORMAT.to_string(),
    );
    r.insert(
        "table_format".into(),
        crate::store::table::TABLE_FORMAT.into(),
    );
    r.insert(
        format!("family.{}", spec.model.name()),
        spec.model.revision().to_string(),
    );
    if spec.model.mixture().is_some() {
        r.insert("kernels".into(), crate::kernels::REVISION.to_string());
    }
    for a in &spec.algorithms {
        r.insert(
            format!("kind.{}", a.algo.kind()),
            a.algo.revision().to_string(),
        );
    }
    r
}

impl Manifest {
    pub fn to_toml(&self) -> String {
        toml::to_string(self).expect("manifest serialises")
    }
}

/// UTC time as `YYYY-MM-DDTHH:MM:SSZ` (no time-zone database needed).
pub fn utc_now() -> String {
    let secs = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .map_or(0, |d| d.as_secs()) as i64;
    format_utc(secs)
}

/// Formats Unix seconds as UTC (days-to-civil, Hinnant's algorithm).
pub fn format_utc(secs: i64) -> String {
    let days = secs.div_euclid(86_400);
    let rem = secs.rem_euclid(86_400);
    let z = days + 719_468;
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097);
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365;
    let y = yoe + era * 400;
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100);
    let mp = (5 * doy + 2) / 153;
    let d = doy - (153 * mp + 2) / 5 + 1;
    let m = if mp < 10 { mp + 3 } else { mp - 9 };
    let y = if m <= 2 { y + 1 } else { y };
    format!(
        "{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z",
        rem / 3600,
        rem % 3600 / 60,
        rem % 60
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utc_format() {
        assert_eq!(format_utc(0), "1970-01-01T00:00:00Z");
        assert_eq!(format_utc(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(format_utc(1_798_761_599), "2026-12-31T23:59:59Z");
    }
}

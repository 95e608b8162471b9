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
    /// Every run that wrote this folder for this spec, oldest first (see [`run_log`]): a
    /// rerun that computes nothing keeps the record of when the numbers were made.
    pub runs: Vec<toml::Value>,
}

/// Most entries kept in a manifest's run log: the first run and the latest ones.
pub const RUN_LOG_LIMIT: usize = 100;

/// The run log for a manifest about to replace `previous` (the text of the manifest in the
/// folder, if any): its runs if it was written for the same spec hash (for a manifest from
/// before the log existed, one entry made from its own fields), then `this`. A different spec
/// hash starts a new log. Beyond [`RUN_LOG_LIMIT`] entries the oldest after the first go.
pub fn run_log(previous: Option<&str>, spec_hash: &str, this: toml::Value) -> Vec<toml::Value> {
    let old: Option<toml::Table> = previous
        .and_then(|t| t.parse().ok())
        .filter(|t: &toml::Table| t.get("spec_hash").and_then(|v| v.as_str()) == Some(spec_hash));
    let mut runs: Vec<toml::Value> = match old {
        Some(t) => match t.get("runs").and_then(|r| r.as_array()) {
            Some(r) => r.clone(),
            None if t.get("started").is_none() => Vec::new(),
            None => {
                let mut e = toml::Table::new();
                for k in [
                    "started",
                    "finished",
                    "host",
                    "git_revision",
                    "kiln_version",
                    "threads",
                ] {
                    if let Some(v) = t.get(k) {
                        e.insert(k.into(), v.clone());
                    }
                }
                if let Some(c) = t.get("cells").and_then(|c| c.as_table()) {
                    for (k, v) in c {
                        e.insert(k.clone(), v.clone());
                    }
                }
                vec![toml::Value::Table(e)]
            }
        },
        None => Vec::new(),
    };
    runs.push(this);
    if runs.len() > RUN_LOG_LIMIT {
        let cut = runs.len() - RUN_LOG_LIMIT;
        runs.drain(1..1 + cut);
    }
    runs
}

/// This run's entry of the log.
pub fn run_entry(m: &Manifest) -> toml::Value {
    let mut e = toml::Table::new();
    e.insert("started".into(), m.started.clone().into());
    e.insert("finished".into(), m.finished.clone().into());
    e.insert("host".into(), m.host.clone().into());
    e.insert("git_revision".into(), m.git_revision.clone().into());
    e.insert("kiln_version".into(), m.kiln_version.clone().into());
    e.insert("threads".into(), i64::from(m.threads).into());
    for (k, v) in [
        ("total", m.cells.total),
        ("cached", m.cells.cached),
        ("computed", m.cells.computed),
        ("failed", m.cells.failed),
        ("skipped", m.cells.skipped),
    ] {
        e.insert(k.into(), (v as i64).into());
    }
    toml::Value::Table(e)
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

    /// A rerun of the same spec appends to the log (a legacy manifest becomes its first entry);
    /// another spec starts a new one; the log keeps the first run when it is cut.
    #[test]
    fn the_run_log_keeps_the_first_computation() {
        let legacy =
            "spec_hash = \"a\"\nstarted = \"2026-01-01T00:00:00Z\"\n[cells]\ncomputed = 96\n";
        let entry = |s: &str| {
            let mut t = toml::Table::new();
            t.insert("started".into(), s.into());
            toml::Value::Table(t)
        };
        let log = run_log(Some(legacy), "a", entry("x"));
        assert_eq!(log.len(), 2);
        assert_eq!(log[0]["computed"].as_integer(), Some(96));
        assert_eq!(log[0]["started"].as_str(), Some("2026-01-01T00:00:00Z"));
        assert_eq!(run_log(Some(legacy), "b", entry("x")).len(), 1);
        let mut text = String::from("spec_hash = \"a\"\n");
        let mut runs = vec![];
        for i in 0..RUN_LOG_LIMIT + 5 {
            runs = run_log(Some(&text), "a", entry(&i.to_string()));
            let mut t = toml::Table::new();
            t.insert("spec_hash".into(), "a".into());
            t.insert("runs".into(), toml::Value::Array(runs.clone()));
            text = toml::to_string(&t).unwrap();
        }
        assert_eq!(runs.len(), RUN_LOG_LIMIT);
        assert_eq!(runs[0]["started"].as_str(), Some("0"));
        assert_eq!(runs[RUN_LOG_LIMIT - 1]["started"].as_str(), Some("104"));
    }

    #[test]
    fn utc_format() {
        assert_eq!(format_utc(0), "1970-01-01T00:00:00Z");
        assert_eq!(format_utc(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(format_utc(1_798_761_599), "2026-12-31T23:59:59Z");
    }
}

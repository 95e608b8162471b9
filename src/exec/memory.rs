//! Memory estimates and the machine's budget.

use crate::spec::{Spec, SpecError};

/// Peak bytes of one cell of size n for algorithm `algo` (instance at the spec's largest
/// density + work space + a margin of 1 MiB for the rest).
pub fn cell_bytes(spec: &Spec, algo: usize, n: u64) -> u128 {
    let instance = spec
        .models
        .iter()
        .map(|m| m.instance_bytes(n))
        .max()
        .unwrap_or(0);
    instance + spec.algorithms[algo].algo.work_bytes(n) + (1 << 20)
}

/// The largest cell of the spec: (bytes, n).
pub fn largest_cell(spec: &Spec) -> (u128, u64) {
    let mut best = (0u128, 0u64);
    for a in 0..spec.algorithms.len() {
        for &(n, _) in &spec.sizes {
            let b = cell_bytes(spec, a, n);
            if b > best.0 {
                best = (b, n);
            }
        }
    }
    best
}

/// Memory available to kiln: `--max-memory` if given, else MemAvailable from /proc/meminfo.
pub fn budget(max_memory: Option<u64>) -> Option<u64> {
    max_memory.or_else(|| {
        let text = std::fs::read_to_string("/proc/meminfo").ok()?;
        let line = text.lines().find(|l| l.starts_with("MemAvailable:"))?;
        let kb: u64 = line.split_whitespace().nth(1)?.parse().ok()?;
        Some(kb * 1024)
    })
}

/// Human-readable bytes (binary units).
pub fn human(bytes: u128) -> String {
    const UNITS: [&str; 7] = ["B", "KiB", "MiB", "GiB", "TiB", "PiB", "EiB"];
    let mut x = bytes as f64;
    let mut u = 0;
    while x >= 1024.0 && u + 1 < UNITS.len() {
        x /= 1024.0;
        u += 1;
    }
    if u == 0 {
        format!("{bytes} B")
    } else {
        format!("{x:.1} {}", UNITS[u])
    }
}

/// Parses `512M`, `8G`, `1.5GiB`, `1000000` (bytes).
pub fn parse_size(s: &str) -> Result<u64, String> {
    let t = s.trim();
    let split = t
        .find(|c: char| !(c.is_ascii_digit() || c == '.'))
        .unwrap_or(t.len());
    let (num, unit) = t.split_at(split);
    let x: f64 = num
        .parse()
        .map_err(|_| format!("`{s}` is not a size (try 512M or 8G)"))?;
    let mult: f64 = match unit.trim().to_ascii_lowercase().as_str() {
        "" | "b" => 1.0,
        "k" | "kb" | "kib" => 1024.0,
        "m" | "mb" | "mib" => 1024.0 * 1024.0,
        "g" | "gb" | "gib" => 1024.0 * 1024.0 * 1024.0,
        "t" | "tb" | "tib" => 1024.0f64.powi(4),
        other => {
            return Err(format!(
                "unknown unit `{other}` in `{s}` (use K, M, G or T)"
            ));
        }
    };
    Ok((x * mult) as u64)
}

/// Refuses a spec whose largest cell cannot fit in `budget`; otherwise the number of cells
/// that fit side by side (at least 1).
pub fn cells_that_fit(spec: &Spec, budget: Option<u64>) -> Result<usize, SpecError> {
    let (bytes, n) = largest_cell(spec);
    match budget {
        Some(b) if bytes > b as u128 => Err(spec.size_error(
            n,
            format!(
                "a cell with n = {n} needs about {} of memory; {} is available",
                human(bytes),
                human(b as u128)
            ),
            Some("use a smaller size, run on a larger machine, or raise --max-memory if the estimate is too cautious".into()),
        )),
        Some(b) => Ok(((b as u128 / bytes.max(1)) as usize).max(1)),
        None => Ok(usize::MAX),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_parse() {
        assert_eq!(parse_size("512M").unwrap(), 512 << 20);
        assert_eq!(parse_size("8G").unwrap(), 8 << 30);
        assert_eq!(parse_size("1.5GiB").unwrap(), 3 << 29);
        assert_eq!(parse_size("1000").unwrap(), 1000);
        assert!(parse_size("lots").is_err());
        assert!(parse_size("3X").is_err());
    }

    #[test]
    fn human_units() {
        assert_eq!(human(512), "512 B");
        assert_eq!(human(3 << 29), "1.5 GiB");
    }
}

//! `kiln compare A B`: whether two tables hold the same numbers, bit for bit, ignoring the
//! provenance columns (wall time, host, threads, computing process) and the experiment's name
//! (a label: the same cells run under two names are the same numbers). A and B are Parquet
//! tables or results folders holding `cells.parquet`. Exit 0 if identical, 1 if not, with the
//! first differing rows named (key, column, both values), 2 if an argument is not a table.

use super::{InputError, out};
use crate::store::table::{self, PROVENANCE_COLUMNS};
use clap::Args;
use polars::prelude::*;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct CompareArgs {
    /// The first table: a Parquet file, or a results folder holding `cells.parquet`.
    pub a: PathBuf,
    /// The second table, as A.
    pub b: PathBuf,
    /// Compare only the columns both tables have (say, a table from before a format added
    /// columns); the others are listed.
    #[arg(long)]
    pub shared_columns: bool,
    /// How many differing values to list (by key, then column).
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub show: usize,
}

/// Columns that label rather than measure: ignored beside the provenance columns.
const LABEL_COLUMNS: [&str; 1] = ["experiment"];

/// A table argument: the file itself, or `<folder>/cells.parquet`.
fn table_path(p: &Path) -> Result<PathBuf, InputError> {
    if p.is_dir() {
        let t = p.join("cells.parquet");
        if t.is_file() {
            return Ok(t);
        }
        return Err(InputError(format!(
            "{} is a folder without cells.parquet: give a Parquet table, or a results folder (`results/<experiment>`) after `kiln run` wrote its table",
            p.display()
        )));
    }
    if !p.exists() {
        return Err(InputError(format!(
            "{} does not exist: give a Parquet table or a results folder",
            p.display()
        )));
    }
    Ok(p.to_path_buf())
}

/// One value as text, floats with every digit (so two that differ print differently).
fn show(v: AnyValue) -> String {
    match v {
        AnyValue::Float64(x) => format!("{x:?}"),
        AnyValue::Float32(x) => format!("{x:?}"),
        AnyValue::Null => "null".into(),
        AnyValue::String(s) => s.to_string(),
        AnyValue::StringOwned(s) => s.to_string(),
        other => format!("{other}"),
    }
}

fn prefix(k: &str) -> String {
    k.chars().take(12).collect()
}

/// Same value, floats by bit pattern (-0.0 ≠ 0.0, identical NaNs equal).
fn same(x: &AnyValue, y: &AnyValue) -> bool {
    match (x, y) {
        (AnyValue::Float64(p), AnyValue::Float64(q)) => p.to_bits() == q.to_bits(),
        (AnyValue::Float32(p), AnyValue::Float32(q)) => p.to_bits() == q.to_bits(),
        _ => x == y,
    }
}

/// Columns that place a row in the plan: the model, the size, the seed, the algorithm's
/// label and ε. Rows are paired on these, so a change of settings shows as differing values
/// (the key among them), not as rows missing on both sides.
const PLACE_COLUMNS: [&str; 8] = [
    "family",
    "couplings",
    "density",
    "field",
    "n",
    "seed",
    "algorithm",
    "epsilon",
];

/// The rows of A and B paired by their place in the plan ([`PLACE_COLUMNS`] present in both;
/// by position when there are none), labelled by A's key prefix (12 digits, which `kiln cell`
/// accepts) or `row i`. Also the labels of rows only in A and only in B.
type Pairs = (Vec<(String, usize, usize)>, Vec<String>, Vec<String>);

fn pairs(a: &DataFrame, b: &DataFrame) -> anyhow::Result<Pairs> {
    let place: Vec<&str> = PLACE_COLUMNS
        .iter()
        .copied()
        .filter(|c| a.column(c).is_ok() && b.column(c).is_ok())
        .collect();
    if place.is_empty() {
        let n = a.height().min(b.height());
        return Ok((
            (0..n).map(|i| (format!("row {i}"), i, i)).collect(),
            vec![],
            vec![],
        ));
    }
    let places = |d: &DataFrame| -> anyhow::Result<Vec<String>> {
        let cols: Vec<&Column> = place
            .iter()
            .map(|c| d.column(c))
            .collect::<PolarsResult<_>>()?;
        (0..d.height())
            .map(|i| {
                let parts: PolarsResult<Vec<String>> =
                    cols.iter().map(|c| Ok(show(c.get(i)?))).collect();
                Ok(parts?.join(" "))
            })
            .collect()
    };
    let label = |d: &DataFrame, i: usize, place: &str| -> String {
        match d.column("cell_key").ok().and_then(|c| c.get(i).ok()) {
            Some(AnyValue::String(k)) => prefix(k),
            Some(AnyValue::StringOwned(k)) => prefix(k.as_str()),
            _ => place.to_string(),
        }
    };
    let (pa, pb) = (places(a)?, places(b)?);
    let ib: BTreeMap<&str, usize> = pb
        .iter()
        .enumerate()
        .map(|(i, k)| (k.as_str(), i))
        .collect();
    let ia: BTreeMap<&str, usize> = pa
        .iter()
        .enumerate()
        .map(|(i, k)| (k.as_str(), i))
        .collect();
    let both = pa
        .iter()
        .enumerate()
        .filter_map(|(i, k)| ib.get(k.as_str()).map(|&j| (label(a, i, k), i, j)))
        .collect();
    // The rows of one side whose place the other lacks.
    let only = |d: &DataFrame, mine: &[String], other: &BTreeMap<&str, usize>| -> Vec<String> {
        mine.iter()
            .enumerate()
            .filter(|(_, k)| !other.contains_key(k.as_str()))
            .map(|(i, k)| label(d, i, k))
            .collect()
    };
    let (only_a, only_b) = (only(a, &pa, &ib), only(b, &pb, &ia));
    Ok((both, only_a, only_b))
}

pub fn run(args: &CompareArgs) -> anyhow::Result<ExitCode> {
    let (pa, pb) = (table_path(&args.a)?, table_path(&args.b)?);
    let mut a = table::read(&pa)?
        .drop_many(PROVENANCE_COLUMNS)
        .drop_many(LABEL_COLUMNS);
    let mut b = table::read(&pb)?
        .drop_many(PROVENANCE_COLUMNS)
        .drop_many(LABEL_COLUMNS);
    let mut problems = Vec::new();
    let mut note = String::new();
    if args.shared_columns {
        let names = |d: &DataFrame| -> Vec<String> {
            d.get_column_names().iter().map(|c| c.to_string()).collect()
        };
        let (na, nb) = (names(&a), names(&b));
        let only_a: Vec<&String> = na.iter().filter(|c| !nb.contains(c)).collect();
        let only_b: Vec<&String> = nb.iter().filter(|c| !na.contains(c)).collect();
        for (side, cols) in [("A", &only_a), ("B", &only_b)] {
            if !cols.is_empty() {
                note += &format!(
                    "; only in {side}: {}",
                    cols.iter()
                        .map(|c| c.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                );
            }
        }
        a = a.drop_many(only_a.iter().map(|c| c.as_str()).collect::<Vec<_>>());
        b = b.drop_many(only_b.iter().map(|c| c.as_str()).collect::<Vec<_>>());
    }
    if a.get_column_names() != b.get_column_names() {
        problems.push(format!(
            "columns differ: {:?} vs {:?}",
            a.get_column_names(),
            b.get_column_names()
        ));
    } else {
        let (both, only_a, only_b) = pairs(&a, &b)?;
        for (side, keys) in [("A", &only_a), ("B", &only_b)] {
            if !keys.is_empty() {
                problems.push(format!(
                    "{} rows only in {side} (first: {})",
                    keys.len(),
                    keys.iter().take(3).cloned().collect::<Vec<_>>().join(", ")
                ));
            }
        }
        if both.is_empty() && a.height() != b.height() {
            problems.push(format!("{} rows vs {} rows", a.height(), b.height()));
        }
        let mut shown = 0usize;
        let mut differing: BTreeMap<String, usize> = BTreeMap::new();
        let mut lines = Vec::new();
        let columns: Vec<String> = a.get_column_names().iter().map(|c| c.to_string()).collect();
        let cols: Vec<(&Column, &Column)> = columns
            .iter()
            .map(|n| Ok((a.column(n)?, b.column(n)?)))
            .collect::<PolarsResult<_>>()?;
        for (key, i, j) in &both {
            for (name, (x, y)) in columns.iter().zip(&cols) {
                let (u, v) = (x.get(*i)?, y.get(*j)?);
                if !same(&u, &v) {
                    *differing.entry(name.clone()).or_default() += 1;
                    if shown < args.show {
                        shown += 1;
                        lines.push(format!("  {key}  {name}: {} | {}", show(u), show(v)));
                    }
                }
            }
        }
        for (name, count) in &differing {
            problems.push(format!("column `{name}` differs in {count} rows"));
        }
        if !lines.is_empty() {
            problems.push(format!(
                "first differing values (key  column: A | B):\n{}",
                lines.join("\n")
            ));
        }
    }
    if problems.is_empty() {
        out(&format!(
            "identical: {} rows, {} columns compared (provenance columns and the experiment name ignored){note}\n",
            a.height(),
            a.width()
        ));
        Ok(ExitCode::SUCCESS)
    } else {
        for p in &problems {
            eprintln!("different: {p}");
        }
        Ok(ExitCode::from(1))
    }
}

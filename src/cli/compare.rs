//! `kiln compare A.parquet B.parquet`: whether two tables hold the same numbers, bit for bit,
//! ignoring the provenance columns (wall time, host, threads, computing process). Exit 0 if
//! identical, 1 if not, with the first differences named.

use super::out;
use crate::store::table::{self, PROVENANCE_COLUMNS};
use clap::Args;
use polars::prelude::*;
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct CompareArgs {
    pub a: PathBuf,
    pub b: PathBuf,
    /// Compare only the columns both tables have (say, a table from before a format added
    /// columns); the others are listed.
    #[arg(long)]
    pub shared_columns: bool,
}

pub fn run(args: &CompareArgs) -> anyhow::Result<ExitCode> {
    let mut a = table::read(&args.a)?.drop_many(PROVENANCE_COLUMNS);
    let mut b = table::read(&args.b)?.drop_many(PROVENANCE_COLUMNS);
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
    } else if a.height() != b.height() {
        problems.push(format!("{} rows vs {} rows", a.height(), b.height()));
    } else {
        for name in a.get_column_names() {
            let (x, y) = (a.column(name)?, b.column(name)?);
            // Compare bit patterns for floats, so -0.0 ≠ 0.0 and NaN = NaN when identical.
            let same = match (x.dtype(), y.dtype()) {
                (DataType::Float64, DataType::Float64) => {
                    let (x, y) = (x.f64()?, y.f64()?);
                    x.iter()
                        .zip(y.iter())
                        .all(|(p, q)| p.map(f64::to_bits) == q.map(f64::to_bits))
                }
                _ => x
                    .as_materialized_series()
                    .equals_missing(y.as_materialized_series()),
            };
            if !same {
                problems.push(format!("column `{name}` differs"));
            }
        }
    }
    if problems.is_empty() {
        out(&format!(
            "identical: {} rows, {} columns compared (provenance columns ignored){note}\n",
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

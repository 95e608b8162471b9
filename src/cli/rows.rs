//! `kiln rows`: the rows of a results table on screen, filtered by any column, or exported as
//! CSV or JSON lines (every column, numbers in their shortest exact form).

use super::{InputError, out};
use crate::store::write_atomic;
use clap::Args;
use polars::prelude::{AnyValue, DataFrame};
use std::path::PathBuf;
use std::process::ExitCode;

#[derive(Args, Debug)]
pub struct RowsArgs {
    /// Experiment spec, or a results folder. Default: the built-in default experiment.
    pub spec: Option<PathBuf>,
    /// Results folder (where results/<experiment>/ is).
    #[arg(long, value_name = "DIR", default_value = "results")]
    pub results: PathBuf,
    /// Which table of the folder: cells, overlaps, triples, chaos, traces, extrapolation,
    /// differences.
    #[arg(long, value_name = "NAME", default_value = "cells")]
    pub table: String,
    /// Keep rows where a column compares so with a value: `COL=V`, `COL!=V`, `COL<V`,
    /// `COL<=V`, `COL>V`, `COL>=V` (numbers compared as numbers; `=` on a `*_key` column
    /// matches a prefix). Repeat for several; all must hold.
    #[arg(long = "where", value_name = "COL=V")]
    pub filters: Vec<String>,
    /// Columns to show, comma-separated. Default on screen: a short set; in exports: all.
    #[arg(long, value_name = "A,B,…", value_delimiter = ',')]
    pub columns: Vec<String>,
    /// `screen` (aligned text), `csv` or `jsonl` (one JSON object per line).
    #[arg(long, value_name = "FORMAT", default_value = "screen")]
    pub format: String,
    /// Write the export to this file (atomically) instead of standard output.
    #[arg(long, short = 'o', value_name = "FILE")]
    pub output: Option<PathBuf>,
}

const TABLES: [&str; 7] = [
    "cells",
    "overlaps",
    "triples",
    "chaos",
    "traces",
    "extrapolation",
    "differences",
];

/// The columns shown on screen when none are asked for (those the table has).
const SCREEN: [&str; 10] = [
    "cell_key",
    "algorithm",
    "density",
    "n",
    "seed",
    "epsilon",
    "energy",
    "unsatisfied",
    "distance_sym",
    "converged",
];

#[derive(Clone, Copy, Debug, PartialEq)]
enum Op {
    Eq,
    Ne,
    Lt,
    Le,
    Gt,
    Ge,
}

struct Filter {
    column: String,
    op: Op,
    value: String,
}

fn parse_filter(s: &str) -> Result<Filter, InputError> {
    for (tok, op) in [
        ("!=", Op::Ne),
        ("<=", Op::Le),
        (">=", Op::Ge),
        ("=", Op::Eq),
        ("<", Op::Lt),
        (">", Op::Gt),
    ] {
        if let Some((c, v)) = s.split_once(tok) {
            let column = c.trim().to_string();
            if column.is_empty() {
                break;
            }
            return Ok(Filter {
                column,
                op,
                value: v.trim().to_string(),
            });
        }
    }
    Err(InputError(format!(
        "--where {s}: give COLUMN=VALUE (or !=, <, <=, >, >=), e.g. --where n=256"
    )))
}

/// A value as text: strings bare, numbers in their shortest exact form, null empty.
fn text(v: &AnyValue) -> String {
    match v {
        AnyValue::Null => String::new(),
        AnyValue::String(s) => s.to_string(),
        AnyValue::StringOwned(s) => s.to_string(),
        AnyValue::Float64(x) => format!("{x:?}"),
        AnyValue::Float32(x) => format!("{x:?}"),
        AnyValue::Boolean(b) => b.to_string(),
        other => other.to_string(),
    }
}

fn number(v: &AnyValue) -> Option<f64> {
    match v {
        AnyValue::Float64(x) => Some(*x),
        AnyValue::Float32(x) => Some(*x as f64),
        AnyValue::UInt64(x) => Some(*x as f64),
        AnyValue::UInt32(x) => Some(*x as f64),
        AnyValue::Int64(x) => Some(*x as f64),
        AnyValue::Int32(x) => Some(*x as f64),
        _ => None,
    }
}

fn json(v: &AnyValue) -> serde_json::Value {
    match v {
        AnyValue::Null => serde_json::Value::Null,
        AnyValue::Boolean(b) => serde_json::Value::Bool(*b),
        AnyValue::UInt64(x) => (*x).into(),
        AnyValue::UInt32(x) => (*x).into(),
        AnyValue::Int64(x) => (*x).into(),
        AnyValue::Int32(x) => (*x).into(),
        AnyValue::Float64(x) if x.is_finite() => (*x).into(),
        AnyValue::Float32(x) if x.is_finite() => (*x as f64).into(),
        other => serde_json::Value::String(text(other)),
    }
}

impl Filter {
    fn keeps(&self, v: &AnyValue) -> bool {
        if let (Some(x), Ok(y)) = (number(v), self.value.parse::<f64>()) {
            return match self.op {
                Op::Eq => x == y,
                Op::Ne => x != y,
                Op::Lt => x < y,
                Op::Le => x <= y,
                Op::Gt => x > y,
                Op::Ge => x >= y,
            };
        }
        let t = text(v);
        let prefix = self.column.ends_with("_key");
        match self.op {
            Op::Eq if prefix => t.starts_with(&self.value),
            Op::Eq => t == self.value,
            Op::Ne => t != self.value,
            Op::Lt => t < self.value,
            Op::Le => t <= self.value,
            Op::Gt => t > self.value,
            Op::Ge => t >= self.value,
        }
    }
}

/// One CSV line (RFC 4180): a field with a comma, a quote or a line break is quoted, its
/// quotes doubled (the `settings` column is canonical JSON).
fn csv_line(fields: &[String]) -> String {
    let quoted: Vec<String> = fields
        .iter()
        .map(|f| {
            if f.contains([',', '"', '\n', '\r']) {
                format!("\"{}\"", f.replace('"', "\"\""))
            } else {
                f.clone()
            }
        })
        .collect();
    quoted.join(",") + "\n"
}

pub fn run(a: &RowsArgs) -> anyhow::Result<ExitCode> {
    if !TABLES.contains(&a.table.as_str()) {
        return Err(InputError(format!(
            "--table {}: give one of {}",
            a.table,
            TABLES.join(", ")
        ))
        .into());
    }
    let format = a.format.as_str();
    if !["screen", "csv", "jsonl"].contains(&format) {
        return Err(InputError(format!("--format {format}: give screen, csv or jsonl")).into());
    }
    let filters = a
        .filters
        .iter()
        .map(|f| parse_filter(f))
        .collect::<Result<Vec<_>, _>>()?;
    let exp = super::cells::Experiment::resolve(a.spec.as_ref(), &a.results)?;
    let path = exp.dir.join(format!("{}.parquet", a.table));
    if !path.is_file() {
        return Err(InputError(format!(
            "{} has no {} table ({} is missing){}",
            exp.dir.display(),
            a.table,
            path.display(),
            if a.table == "cells" {
                "; run the spec first"
            } else {
                ""
            }
        ))
        .into());
    }
    let df: DataFrame = crate::store::table::read(&path)?;
    let names: Vec<String> = df
        .get_column_names()
        .iter()
        .map(|s| s.to_string())
        .collect();
    for f in &filters {
        if !names.contains(&f.column) {
            return Err(InputError(format!(
                "--where {}: {} has no column `{}`; it has {}",
                f.column,
                a.table,
                f.column,
                names.join(", ")
            ))
            .into());
        }
    }
    let shown: Vec<String> = if !a.columns.is_empty() {
        for c in &a.columns {
            if !names.contains(c) {
                return Err(InputError(format!(
                    "--columns: {} has no column `{c}`; it has {}",
                    a.table,
                    names.join(", ")
                ))
                .into());
            }
        }
        a.columns.clone()
    } else if format == "screen" && a.table == "cells" {
        SCREEN
            .iter()
            .filter(|c| names.iter().any(|n| n == *c))
            .filter(|c| {
                // Columns that are empty in every row say nothing on screen.
                df.column(c).is_ok_and(|s| s.null_count() < s.len())
            })
            .map(|c| c.to_string())
            .collect()
    } else {
        names.clone()
    };
    let cols: Vec<&polars::prelude::Column> = shown
        .iter()
        .map(|c| df.column(c).expect("checked"))
        .collect();
    let filter_cols: Vec<&polars::prelude::Column> = filters
        .iter()
        .map(|f| df.column(&f.column).expect("checked"))
        .collect();
    let mut kept: Vec<usize> = Vec::new();
    for i in 0..df.height() {
        let ok = filters
            .iter()
            .zip(&filter_cols)
            .all(|(f, c)| c.get(i).is_ok_and(|v| f.keeps(&v)));
        if ok {
            kept.push(i);
        }
    }
    fn cell(c: &polars::prelude::Column, i: usize) -> AnyValue<'_> {
        c.get(i).unwrap_or(AnyValue::Null)
    }
    let body = match format {
        "csv" => {
            let mut s = csv_line(&shown);
            for &i in &kept {
                let row: Vec<String> = cols.iter().map(|c| text(&cell(c, i))).collect();
                s += &csv_line(&row);
            }
            s
        }
        "jsonl" => {
            let mut s = String::new();
            for &i in &kept {
                let mut m = serde_json::Map::new();
                for (name, c) in shown.iter().zip(&cols) {
                    m.insert(name.clone(), json(&cell(c, i)));
                }
                s += &serde_json::Value::Object(m).to_string();
                s.push('\n');
            }
            s
        }
        _ => {
            let rows: Vec<Vec<String>> = kept
                .iter()
                .map(|&i| {
                    shown
                        .iter()
                        .zip(&cols)
                        .map(|(name, c)| match cell(c, i) {
                            // Reals with a common number of decimals on screen.
                            AnyValue::Float64(x) => format!("{x:.6}"),
                            // Keys by their first 12 digits, as messages name cells.
                            v if name.ends_with("_key") => text(&v).chars().take(12).collect(),
                            v => text(&v),
                        })
                        .collect()
                })
                .collect();
            let widths: Vec<usize> = shown
                .iter()
                .enumerate()
                .map(|(j, h)| {
                    rows.iter()
                        .map(|r| r[j].chars().count())
                        .chain(std::iter::once(h.chars().count()))
                        .max()
                        .unwrap_or(0)
                })
                .collect();
            let line = |r: &[String]| {
                r.iter()
                    .zip(&widths)
                    .map(|(t, w)| format!("{t:<w$}"))
                    .collect::<Vec<_>>()
                    .join("  ")
                    .trim_end()
                    .to_string()
                    + "\n"
            };
            let mut s = line(&shown);
            for r in &rows {
                s += &line(r);
            }
            s += &format!(
                "{} of {} rows of {}\n",
                kept.len(),
                df.height(),
                path.display()
            );
            s
        }
    };
    match &a.output {
        Some(p) => {
            write_atomic(p, body.as_bytes())?;
            eprintln!("wrote {} rows to {}", kept.len(), p.display());
        }
        None => out(&body),
    }
    Ok(ExitCode::SUCCESS)
}

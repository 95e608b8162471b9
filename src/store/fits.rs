//! The fit tables: `extrapolation.parquet` (one row per fit) and `differences.parquet` (paired
//! differences between algorithms), written atomically.

use super::StoreError;
use super::table::write_frame as write;
use crate::fit::study::{Difference, Row};
use polars::prelude::*;
use std::path::Path;

/// One row per fit; `omega_fitted` says whether ω was fitted or fixed.
pub fn write_extrapolation(
    path: &Path,
    rows: &[Row],
    omega_fitted: bool,
) -> Result<(), StoreError> {
    let df = df![
        "family" => rows.iter().map(|r| r.family.clone()).collect::<Vec<_>>(),
        "couplings" => rows.iter().map(|r| r.couplings.clone()).collect::<Vec<_>>(),
        "algorithm" => rows.iter().map(|r| r.algorithm.clone()).collect::<Vec<_>>(),
        "epsilon" => rows.iter().map(|r| r.epsilon).collect::<Vec<_>>(),
        "sizes" => rows.iter().map(|r| r.sizes as u64).collect::<Vec<_>>(),
        "min_n" => rows.iter().map(|r| r.min_n).collect::<Vec<_>>(),
        "max_n" => rows.iter().map(|r| r.max_n).collect::<Vec<_>>(),
        "e_inf" => rows.iter().map(|r| r.fit.e_inf).collect::<Vec<_>>(),
        "e_inf_se" => rows.iter().map(|r| r.fit.e_inf_se).collect::<Vec<_>>(),
        "e_inf_se_bootstrap" => rows.iter().map(|r| r.boot_se).collect::<Vec<_>>(),
        "a" => rows.iter().map(|r| r.fit.a).collect::<Vec<_>>(),
        "a_se" => rows.iter().map(|r| r.fit.a_se).collect::<Vec<_>>(),
        "b" => rows.iter().map(|r| r.fit.b.map(|b| b.0)).collect::<Vec<_>>(),
        "b_se" => rows.iter().map(|r| r.fit.b.map(|b| b.1)).collect::<Vec<_>>(),
        "omega" => rows.iter().map(|r| r.fit.omega).collect::<Vec<_>>(),
        "omega_se" => rows.iter().map(|r| r.fit.omega_se).collect::<Vec<_>>(),
        "omega_fitted" => rows.iter().map(|_| omega_fitted).collect::<Vec<_>>(),
        "chi2" => rows.iter().map(|r| r.fit.chi2).collect::<Vec<_>>(),
        "dof" => rows.iter().map(|r| r.fit.dof as u64).collect::<Vec<_>>(),
        "e_inf_drop_smallest" => rows.iter().map(|r| r.drop.as_ref().map(|d| d.e_inf)).collect::<Vec<_>>(),
        "drop_shift_sigma" => rows.iter().map(|r| r.drop.as_ref().map(|d| (r.fit.e_inf - d.e_inf).abs() / d.e_inf_se.max(f64::MIN_POSITIVE))).collect::<Vec<_>>(),
        "warnings" => rows.iter().map(|r| r.fit.warnings.join("; ")).collect::<Vec<_>>(),
    ];
    write(path, df)
}

/// One row per pair of algorithms in a group.
pub fn write_differences(path: &Path, diffs: &[Difference]) -> Result<(), StoreError> {
    let df = df![
        "family" => diffs.iter().map(|d| d.family.clone()).collect::<Vec<_>>(),
        "couplings" => diffs.iter().map(|d| d.couplings.clone()).collect::<Vec<_>>(),
        "epsilon" => diffs.iter().map(|d| d.epsilon).collect::<Vec<_>>(),
        "algorithm_a" => diffs.iter().map(|d| d.a.clone()).collect::<Vec<_>>(),
        "algorithm_b" => diffs.iter().map(|d| d.b.clone()).collect::<Vec<_>>(),
        "e_inf_difference" => diffs.iter().map(|d| d.difference).collect::<Vec<_>>(),
        "difference_se_bootstrap" => diffs.iter().map(|d| d.se).collect::<Vec<_>>(),
    ];
    write(path, df)
}

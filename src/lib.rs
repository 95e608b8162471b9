//! kiln: reproducible threshold studies of optimisation algorithms on random landscapes.
//!
//! Data flow (one direction): spec text → [`spec::Spec`] → [`spec::plan::Plan`] → cache lookup
//! → [`exec`] runs the missing cells ([`model`] samples, [`algo`] optimises, [`measure`]
//! measures) → records in the [`store::cache`] → the Parquet table and manifest.

pub mod algo;
pub mod cell;
pub mod cli;
pub mod exec;
pub mod fit;
pub mod kernels;
pub mod linalg;
pub mod measure;
pub mod model;
pub mod plot;
pub mod registry;
pub mod rng;
pub mod spec;
pub mod store;
pub mod theory;

/// kiln's version, recorded (not hashed) in every record and manifest.
pub const VERSION: &str = env!("CARGO_PKG_VERSION");
/// The git revision kiln was built from (`unknown` outside a checkout).
pub const GIT_REVISION: &str = env!("KILN_GIT_REVISION");
/// The compiler that built kiln.
pub const RUSTC: &str = env!("KILN_RUSTC");

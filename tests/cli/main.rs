//! End-to-end tests of the `kiln` binary: one test binary, a module per theme, a temporary
//! folder per test.

mod util;

mod algorithms;
mod bad_input;
mod cluster;
mod damage;
mod families;
mod field;
mod fitting;
mod hostile;
mod leases;
mod mishaps;
mod numbers;
mod perceptron;
mod pins;
mod plotting;
mod registry;
mod reliability;
mod replay;
mod rerun;
mod samplers;
mod satisfiability;
mod storage;
mod tables;
mod theory;
mod views;

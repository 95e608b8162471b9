//! Command line: one file per command. Parsing and printing only; the work is elsewhere.
//!
//! Exit status: 0 success, 1 failure (a cell failed, the disk refused a write), 2 bad input
//! (spec or arguments), 130 interrupted by SIGINT (Ctrl-C), 143 by SIGTERM.

mod bundle;
mod cell;
mod cells;
mod check;
mod compare;
mod draft;
mod fit;
mod kinds;
mod plot;
mod replay;
mod rows;
mod run;
mod signals;
mod slurm;
mod status;
mod summary;
mod theory;
mod verify;

use crate::spec::{self, Spec, SpecError};
use clap::{Args, Parser, Subcommand};
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

/// Reproducible threshold studies of optimisation algorithms on random landscapes.
#[derive(Parser, Debug)]
#[command(name = "kiln", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

/// What a bare `kiln` prints: where to start, in one screen.
const START: &str =
    "kiln: reproducible threshold studies of optimisation algorithms on random landscapes

  kiln run                      run the built-in default experiment (SK, descent and annealing,
                                n = 64 to 512, 16 seeds, four stability levels) into results/
  kiln draft sk -o study.toml   start a spec of your own: every key of a family and of its
                                algorithms, commented (`-a descent,anneal` to choose them)
  kiln check study.toml         its plan: cells, what is cached, time and memory estimates
  kiln run study.toml           compute what is missing; then `kiln fit` and `kiln plot`
  kiln kinds                    the families and algorithm kinds with their keys and defaults
  kiln help <command>           the options of one command; `kiln --help` lists them all
";

#[derive(Subcommand, Debug)]
enum Command {
    /// Validate a spec and print its plan: cells, cached, to run, memory.
    Check(CommonArgs),
    /// Write a commented starter spec for a family and a set of algorithm kinds.
    Draft(draft::DraftArgs),
    /// Run the missing cells of a spec and write its table and manifest.
    Run(RunArgs),
    /// Check every entry of a cache; move damaged ones aside; clear leftovers of killed runs.
    Verify(verify::VerifyArgs),
    /// Count cells done, running (claimed), failed and missing, per part.
    Status(status::StatusArgs),
    /// Write a Slurm job array that runs a spec in parts over a shared cache.
    Slurm(slurm::SlurmArgs),
    /// Whether two tables hold the same numbers, bit for bit (provenance ignored).
    Compare(compare::CompareArgs),
    /// Recompute a sample of a results folder's (or a bundle's) cells and compare them bit for bit.
    Replay(replay::ReplayArgs),
    /// Write a results folder as one reproducible archive for a data deposit.
    Bundle(bundle::BundleArgs),
    /// The rows of a results table, filtered by any column; or exported as CSV or JSON lines.
    Rows(rows::RowsArgs),
    /// One cell of the cache by the first digits of its key: what ran, what it measured, who
    /// computed it, where its artifacts are.
    Cell(cell::CellArgs),
    /// Extrapolate energy per spin to n → ∞ (finite-size scaling) with error bars.
    Fit(fit::FitArgs),
    /// Draw publication figures (SVG, PNG, PDF) with their data.
    Plot(plot::PlotArgs),
    /// Theory values for the model: Parisi functional (RS, k-step RSB), sphere, algorithmic.
    Theory(theory::TheoryArgs),
    /// List the model families and algorithm kinds with their keys and defaults.
    Kinds(kinds::KindsArgs),
}

/// Where results and the cache live; shared by every command that touches them.
#[derive(Args, Debug, Clone)]
pub struct Folders {
    /// Folder for tables and manifests (`results/<experiment>/…`).
    #[arg(long, value_name = "DIR", default_value = "results")]
    pub results: PathBuf,
    /// Cache folder, shared by experiments. Default: `<results>/.cache`.
    #[arg(long, value_name = "DIR")]
    pub cache: Option<PathBuf>,
}

impl Folders {
    pub fn cache_dir(&self) -> PathBuf {
        self.cache
            .clone()
            .unwrap_or_else(|| self.results.join(".cache"))
    }
}

/// Arguments shared by commands that read a spec.
#[derive(Args, Debug, Clone)]
pub struct CommonArgs {
    /// Experiment spec (TOML). Without it, the built-in default experiment.
    pub spec: Option<PathBuf>,
    #[command(flatten)]
    pub folders: Folders,
    /// Cells run in parallel. Default: the number of cores.
    #[arg(long, short = 'j', value_name = "N")]
    pub jobs: Option<usize>,
    /// Memory kiln may use (e.g. 8G). Default: the memory available now.
    #[arg(long, value_name = "SIZE")]
    pub max_memory: Option<String>,
    /// Print a machine-readable JSON summary on stdout instead of text.
    #[arg(long)]
    pub json: bool,
}

/// Arguments of commands that read a spec and a cache but compute nothing (no `--jobs`,
/// no `--max-memory`: they would be ignored).
#[derive(Args, Debug, Clone)]
pub struct SpecArgs {
    /// Experiment spec (TOML). Without it, the built-in default experiment.
    pub spec: Option<PathBuf>,
    #[command(flatten)]
    pub folders: Folders,
    /// Print a machine-readable JSON summary on stdout instead of text.
    #[arg(long)]
    pub json: bool,
}

impl SpecArgs {
    pub fn load_spec(&self) -> Result<Spec, SpecError> {
        match &self.spec {
            Some(p) => spec::load(p),
            None => Ok(spec::default_spec()),
        }
    }
}

#[derive(Args, Debug)]
pub struct RunArgs {
    #[command(flatten)]
    pub common: CommonArgs,
    /// No progress bar and no summary text (errors are still printed).
    #[arg(long, short = 'q')]
    pub quiet: bool,
    /// Run only part i of N of the plan (counted from 1: 1/4 is the first of four, 4/4 the
    /// last), parts balanced by estimated cost; writes to the cache only. A plain `kiln run`
    /// afterwards assembles the table.
    #[arg(long, value_name = "i/N")]
    pub part: Option<String>,
    /// Lease of this runner's cell claims, in seconds: another runner (on any host) takes over
    /// a claim not renewed for this long. The renewal runs every sixth of it.
    #[arg(
        long,
        value_name = "SECONDS",
        default_value_t = 120.0,
        env = "KILN_LEASE"
    )]
    pub lease: f64,
    /// After SIGTERM or Ctrl-C, how long to let the cells in flight finish, in seconds. A cell
    /// whose pace says it cannot stops at its next sweep at once, the others when the time is
    /// up; nothing of a stopped cell is recorded, its claim is released, the table is written.
    #[arg(
        long,
        value_name = "SECONDS",
        default_value_t = 20.0,
        env = "KILN_GRACE"
    )]
    pub grace: f64,
}

/// Largest `--jobs`: one thread per cell in flight.
pub const MAX_JOBS: usize = 1024;

/// An error caused by the user's input: exit status 2.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct InputError(pub String);

impl CommonArgs {
    pub fn load_spec(&self) -> Result<Spec, SpecError> {
        match &self.spec {
            Some(p) => spec::load(p),
            None => Ok(spec::default_spec()),
        }
    }

    pub fn max_memory(&self) -> Result<Option<u64>, InputError> {
        self.max_memory
            .as_deref()
            .map(|s| {
                crate::exec::memory::parse_size(s)
                    .map_err(|m| InputError(format!("--max-memory: {m}")))
            })
            .transpose()
    }

    pub fn jobs(&self) -> Result<usize, InputError> {
        jobs(self.jobs)
    }
}

/// `--jobs`: at least 1, at most [`MAX_JOBS`]; the number of cores when not given.
pub fn jobs(given: Option<usize>) -> Result<usize, InputError> {
    match given {
        Some(0) => Err(InputError("--jobs 0: give at least 1".into())),
        Some(j) if j > MAX_JOBS => Err(InputError(format!(
            "--jobs {j}: at most {MAX_JOBS} cells run at once (each has its own thread)"
        ))),
        Some(j) => Ok(j),
        None => Ok(std::thread::available_parallelism().map_or(1, |n| n.get())),
    }
}

/// Parses the command line, runs the command, prints errors, and returns the exit status.
pub fn main() -> ExitCode {
    main_from(std::env::args_os())
}

/// [`main`] with the arguments given (the first is the program name): lets a program that
/// links kiln as a library, after registering its own kinds, run any command in-process.
pub fn main_from<I, T>(args: I) -> ExitCode
where
    I: IntoIterator<Item = T>,
    T: Into<std::ffi::OsString> + Clone,
{
    let cli = match Cli::try_parse_from(args) {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return match e.kind() {
                clap::error::ErrorKind::DisplayHelp | clap::error::ErrorKind::DisplayVersion => {
                    ExitCode::SUCCESS
                }
                _ => ExitCode::from(2),
            };
        }
    };
    let Some(command) = cli.command else {
        out(START);
        return ExitCode::SUCCESS;
    };
    let result = match command {
        Command::Check(a) => check::run(&a),
        Command::Draft(a) => draft::run(&a),
        Command::Run(a) => run::run(&a),
        Command::Verify(a) => verify::run(&a),
        Command::Status(a) => status::run(&a),
        Command::Slurm(a) => slurm::run(&a),
        Command::Compare(a) => compare::run(&a),
        Command::Replay(a) => replay::run(&a),
        Command::Bundle(a) => bundle::run(&a),
        Command::Rows(a) => rows::run(&a),
        Command::Cell(a) => cell::run(&a),
        Command::Fit(a) => fit::run(&a),
        Command::Plot(a) => plot::run(&a),
        Command::Theory(a) => theory::run(&a),
        Command::Kinds(a) => kinds::run(&a),
    };
    match result {
        Ok(code) => code,
        Err(e) => {
            let stderr = std::io::stderr();
            let mut w = stderr.lock();
            let _ = writeln!(w, "error: {e}");
            for cause in e.chain().skip(1) {
                let _ = writeln!(w, "  caused by: {cause}");
            }
            if e.downcast_ref::<SpecError>().is_some() || e.downcast_ref::<InputError>().is_some() {
                ExitCode::from(2)
            } else {
                ExitCode::from(1)
            }
        }
    }
}

/// Writes to stdout, treating a closed pipe as success.
pub fn out(text: &str) {
    let stdout = std::io::stdout();
    let mut w = stdout.lock();
    let _ = w.write_all(text.as_bytes());
    let _ = w.flush();
}

//! Execution of a plan: cache lookup, scheduling on a rayon pool, progress, interruption,
//! and assembly of the table.
//!
//! Order of work: reference cells (ε = 0) first, then the perturbed cells, which read the
//! reference output from the cache. Within a phase cells run largest first. Results never
//! depend on this order: every number comes from streams named by the cell's identity.

pub mod memory;
pub mod overlaps;
pub mod progress;
pub mod traces;

use crate::cell::Key;
use crate::measure;
use crate::rng::{Purpose, stream};
use crate::spec::Spec;
use crate::spec::plan::{Cell, Plan};
use crate::store::StoreError;
use crate::store::cache::{Cache, Claim, ClaimGuard, Lookup, RECORD_FORMAT, Record};
use crate::store::manifest::CellCounts;
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use rayon::prelude::*;
use std::collections::{BTreeMap, HashMap};
use std::sync::Mutex;
use std::sync::atomic::{AtomicBool, AtomicU64, Ordering};
use std::sync::mpsc::{Receiver, SendError, SyncSender};
use std::time::Instant;

/// Set by the SIGINT handler: stop handing out new cells.
pub static INTERRUPTED: AtomicBool = AtomicBool::new(false);

/// Who computes: recorded in every record as provenance.
#[derive(Clone, Debug)]
pub struct Provenance {
    pub host: String,
    pub kiln_version: String,
    pub threads: u32,
    pub computed_by: String,
}

/// How to execute.
#[derive(Clone, Debug)]
pub struct Options {
    pub jobs: usize,
    pub progress: bool,
    /// Shown on the progress line (e.g. why fewer cells run at once than asked).
    pub note: Option<String>,
}

/// What happened.
#[derive(Debug, Default)]
pub struct Report {
    pub counts: CellCounts,
    /// Records by key, for every plan cell that has one.
    pub records: HashMap<Key, Record>,
    /// (cell key, message) of failed cells.
    pub failures: Vec<(String, String)>,
    /// Damaged cache entries found (and moved aside).
    pub damaged: Vec<String>,
    /// Stale claims of other runners taken over, with the reason.
    pub takeovers: Vec<String>,
    pub interrupted: bool,
    /// Cells that a stop signal made leave at a step boundary, described with where they were.
    pub stopped: Vec<String>,
}

/// The verified cache entry of a cell: its record and, for a reference cell, its spins
/// artifact too (later ε levels need it). Damaged entries are moved aside and noted.
fn cached_record(
    spec: &Spec,
    cache: &Cache,
    cell: &Cell,
    damaged: &Mutex<Vec<String>>,
) -> Result<Option<Record>, StoreError> {
    // A reference cell (with replicas, every cell) keeps its output too; check it even when
    // the record is gone, so a damaged artifact is reported and moved aside rather than
    // silently overwritten.
    let keeps_output = cell.is_base() || spec.replicas > 1;
    let spins_ok = !keeps_output
        || verified(cache.read_spins(&cell.key)?, damaged)
            .is_some_and(|s| s.len() as u64 == cell.n);
    let point_ok = !keeps_output
        || !keeps_point(spec, cell)
        || verified(cache.read_point(&cell.key)?, damaged)
            .is_some_and(|x| x.len() as u64 == cell.n);
    let record = verified(cache.read_record(&cell.key)?, damaged);
    // An ε cell of a point-returning algorithm recorded before `distance_point` existed is
    // recomputed rather than served without it.
    let complete =
        |r: &Record| cell.is_base() || !keeps_point(spec, cell) || r.distance_point.is_some();
    Ok(record.filter(|r| spins_ok && point_ok && complete(r)))
}

/// Whether outputs are measured on their continuous points (the sphere) rather than spins.
fn needs_point(spec: &Spec) -> bool {
    !spec.model.family.spins()
}

/// Whether the cell's reference keeps its continuous point: always on the sphere, and on the
/// cube for algorithms with a pre-rounding point (so ε cells can report its distance).
fn keeps_point(spec: &Spec, cell: &Cell) -> bool {
    needs_point(spec) || spec.algorithms[cell.algo].algo.has_point()
}

/// A hit, or None after noting a damaged entry (the cache has already moved it aside).
fn verified<T>(l: Lookup<T>, damaged: &Mutex<Vec<String>>) -> Option<T> {
    match l {
        Lookup::Hit(x) => Some(x),
        Lookup::Missing => None,
        Lookup::Damaged {
            path,
            reason,
            moved_to,
        } => {
            damaged
                .lock()
                .expect("lock")
                .push(describe_damage(&path, &reason, &moved_to));
            None
        }
    }
}

/// Looks up every distinct cell of the plan. Returns records found and keys missing.
pub fn lookup(
    spec: &Spec,
    plan: &Plan,
    cache: &Cache,
    damaged: &Mutex<Vec<String>>,
) -> Result<(HashMap<Key, Record>, Vec<Key>), StoreError> {
    let cells: Vec<&Cell> = plan.distinct().collect();
    let found: Vec<Result<Option<Record>, StoreError>> = cells
        .par_iter()
        .map(|c| cached_record(spec, cache, c, damaged))
        .collect();
    let mut records = HashMap::new();
    let mut missing = Vec::new();
    for (c, r) in cells.into_iter().zip(found) {
        match r? {
            Some(r) => {
                records.insert(c.key, r);
            }
            None => missing.push(c.key),
        }
    }
    Ok((records, missing))
}

fn describe_damage(path: &std::path::Path, reason: &str, moved_to: &std::path::Path) -> String {
    format!(
        "damaged cache entry {} ({reason}); moved to {}; recomputing",
        path.display(),
        moved_to.display()
    )
}

/// Runs every missing cell of the plan and returns the records of all cells.
pub fn execute(
    spec: &Spec,
    plan: &Plan,
    cache: &Cache,
    opts: &Options,
    prov: &Provenance,
) -> Result<Report, StoreError> {
    let damaged = Mutex::new(Vec::new());
    let takeovers = Mutex::new(Vec::new());
    let (mut records, missing) = lookup(spec, plan, cache, &damaged)?;
    let by_key: BTreeMap<Key, &Cell> = plan.cells.iter().map(|c| (c.key, c)).collect();
    let total = by_key.len() as u64;
    let cached = records.len() as u64;

    let bar = if opts.progress {
        ProgressBar::with_draw_target(None, ProgressDrawTarget::stderr())
    } else {
        ProgressBar::hidden()
    };
    // kiln's own line: every number on it is composed in one place from the same counters
    // (see `progress::Line`), so the finished count and its parts always agree.
    bar.set_style(ProgressStyle::with_template("{msg}").expect("valid template"));
    let computed = AtomicU64::new(0);
    let failed = AtomicU64::new(0);
    let skipped = AtomicU64::new(0);
    let cached_later = AtomicU64::new(0);
    let cost_done = AtomicU64::new(0.0f64.to_bits());
    let phase = Mutex::new(String::from("reference runs"));
    let waiting = AtomicU64::new(0);
    let board = progress::Board::default();
    let mut phase_base: Vec<&Cell> = missing
        .iter()
        .map(|k| by_key[k])
        .filter(|c| c.is_base())
        .collect();
    let mut phase_eps: Vec<&Cell> = missing
        .iter()
        .map(|k| by_key[k])
        .filter(|c| !c.is_base())
        .collect();
    let cost = |c: &&Cell| spec.cell_cost(c);
    phase_base.sort_by(|a, b| cost(b).total_cmp(&cost(a)).then(a.key.cmp(&b.key)));
    phase_eps.sort_by(|a, b| cost(b).total_cmp(&cost(a)).then(a.key.cmp(&b.key)));
    let line = progress::Line {
        experiment: &spec.name,
        total,
        cached,
        computed: &computed,
        reused: &cached_later,
        failed: &failed,
        cost_done: &cost_done,
        cost_all: phase_base.iter().chain(&phase_eps).map(cost).sum(),
        phase: &phase,
        waiting: &waiting,
        note: opts.note.as_deref(),
        started: Instant::now(),
    };
    bar.set_message(line.compose(&board));
    let eps_count = phase_eps.len();

    let new_records: Mutex<Vec<Record>> = Mutex::new(Vec::new());
    let failures: Mutex<Vec<(String, String)>> = Mutex::new(Vec::new());
    let stopped: Mutex<Vec<String>> = Mutex::new(Vec::new());
    let fatal: Mutex<Option<StoreError>> = Mutex::new(None);
    let abort = AtomicBool::new(false);
    let running = AtomicBool::new(true);

    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(opts.jobs.max(1))
        .build()
        .expect("thread pool");
    // Finished cells go to one write-behind thread, so compute threads never wait on fsync
    // (measured: 128 tempering cells of 15 ms spent 0.2 s of their 2.3 s in fsync). The
    // queue is short: a kill -9 loses at most the cells in flight and 2 queued per job.
    let (writes, queue) = std::sync::mpsc::sync_channel::<WriteJob>(2 * opts.jobs.max(1));
    let (abort, fatal) = (&abort, &fatal);
    std::thread::scope(|scope| {
        scope.spawn(move || write_behind(queue, cache, abort, fatal));
        if opts.progress {
            let (bar, line, board, running) = (&bar, &line, &board, &running);
            scope.spawn(move || {
                while running.load(Ordering::Relaxed) {
                    bar.set_message(line.compose(board));
                    std::thread::sleep(std::time::Duration::from_millis(250));
                }
            });
        }
        pool.install(|| {
            for (i, cells) in [phase_base, phase_eps].into_iter().enumerate() {
                if i == 1 && eps_count == 0 {
                    continue;
                }
                *phase.lock().expect("phase") =
                    ["reference runs", "perturbed runs (ε > 0)"][i].into();
                let mut pending = cells;
                loop {
                    let deferred: Mutex<Vec<&Cell>> = Mutex::new(Vec::new());
                    pending.par_iter().with_max_len(1).for_each(|cell| {
                        if INTERRUPTED.load(Ordering::Relaxed) || abort.load(Ordering::Relaxed) {
                            skipped.fetch_add(1, Ordering::Relaxed);
                            return;
                        }
                        let entered = board.enter(
                            format!("{} n = {}", spec.algorithms[cell.algo].label, cell.n),
                            cost(cell),
                        );
                        let result =
                            attempt(spec, cell, cache, prov, &damaged, &takeovers, &writes);
                        drop(entered);
                        match result {
                            Ok(Outcome::Computed(r)) => {
                                new_records.lock().expect("lock").push(r);
                                progress::add(&cost_done, cost(cell));
                                computed.fetch_add(1, Ordering::Relaxed);
                            }
                            Ok(Outcome::Cached(r)) => {
                                new_records.lock().expect("lock").push(r);
                                progress::add(&cost_done, cost(cell));
                                cached_later.fetch_add(1, Ordering::Relaxed);
                            }
                            Ok(Outcome::Deferred) => deferred.lock().expect("lock").push(cell),
                            Ok(Outcome::Stopped(at)) => {
                                skipped.fetch_add(1, Ordering::Relaxed);
                                stopped.lock().expect("lock").push(format!(
                                    "{} n = {} (cell {}) left at {} {} of {}",
                                    spec.algorithms[cell.algo].label,
                                    cell.n,
                                    &cell.key.hex()[..12],
                                    at.unit,
                                    at.done,
                                    at.total
                                ));
                            }
                            Ok(Outcome::Failed(m)) => {
                                failures.lock().expect("lock").push((cell.key.hex(), m));
                                progress::add(&cost_done, cost(cell));
                                failed.fetch_add(1, Ordering::Relaxed);
                            }
                            Err(e) => {
                                abort.store(true, Ordering::Relaxed);
                                fatal.lock().expect("lock").get_or_insert(e);
                                failed.fetch_add(1, Ordering::Relaxed);
                            }
                        }
                        bar.set_message(line.compose(&board));
                    });
                    pending = deferred.into_inner().expect("lock");
                    waiting.store(pending.len() as u64, Ordering::Relaxed);
                    if pending.is_empty() {
                        // The next phase reads this one's outputs from the cache.
                        flush(&writes);
                        break;
                    }
                    if INTERRUPTED.load(Ordering::Relaxed) || abort.load(Ordering::Relaxed) {
                        skipped.fetch_add(pending.len() as u64, Ordering::Relaxed);
                        flush(&writes);
                        break;
                    }
                    std::thread::sleep(std::time::Duration::from_millis(150));
                }
            }
        });
        // Closing the queue ends the writer; the scope waits until it has written everything.
        drop(writes);
        running.store(false, Ordering::Relaxed);
    });
    bar.finish_and_clear();
    if let Some(e) = fatal.lock().expect("lock").take() {
        return Err(e);
    }
    // Claims that killed runners left on cells that are done: nobody would touch them again.
    // Best effort: the run's results do not depend on it, and `kiln verify` sweeps too.
    if !INTERRUPTED.load(Ordering::Relaxed) {
        let _ = cache.sweep_stale_claims();
    }
    for r in new_records.into_inner().expect("lock") {
        let k = Key::from_hex(&r.key).expect("valid key");
        records.insert(k, r);
    }
    let mut failures = failures.into_inner().expect("lock");
    failures.sort();
    Ok(Report {
        counts: CellCounts {
            total,
            cached: cached + cached_later.into_inner(),
            computed: computed.into_inner(),
            failed: failed.into_inner(),
            skipped: skipped.into_inner(),
        },
        records,
        failures,
        damaged: damaged.into_inner().expect("lock"),
        takeovers: takeovers.into_inner().expect("lock"),
        interrupted: INTERRUPTED.load(Ordering::Relaxed),
        stopped: {
            let mut v = stopped.into_inner().expect("lock");
            v.sort();
            v
        },
    })
}

/// Work for the write-behind thread.
enum WriteJob {
    /// A computed cell's files, written under its claim (released once the record is down).
    Cell(Box<CellFiles>, ClaimGuard),
    /// Answered once every earlier job is written.
    Flush(std::sync::mpsc::Sender<()>),
}

/// Writes finished cells in the order they were queued; the first store error stops the
/// run (as it would have on a compute thread).
fn write_behind(
    queue: Receiver<WriteJob>,
    cache: &Cache,
    abort: &AtomicBool,
    fatal: &Mutex<Option<StoreError>>,
) {
    for job in queue {
        match job {
            WriteJob::Cell(files, _claim) => {
                if let Err(e) = files.persist(cache) {
                    abort.store(true, Ordering::Relaxed);
                    fatal.lock().expect("lock").get_or_insert(e);
                }
            }
            WriteJob::Flush(done) => {
                let _ = done.send(());
            }
        }
    }
}

/// Waits until the writer has written every cell queued so far.
fn flush(writes: &SyncSender<WriteJob>) {
    let (done, wait) = std::sync::mpsc::channel();
    if writes.send(WriteJob::Flush(done)).is_ok() {
        let _ = wait.recv();
    }
}

/// What a computed cell leaves in the cache: its record and, for a reference cell, its
/// output (spins, and the point where later ε cells need it).
struct CellFiles {
    record: Record,
    spins: Option<Vec<i8>>,
    point: Option<Vec<f64>>,
    /// A sampler's energy trace on the reference instance.
    trace: Option<crate::algo::EnergyTrace>,
}

impl CellFiles {
    /// Writes the outputs first and the record last (a record means the cell is done), then
    /// clears an earlier failure note.
    fn persist(&self, cache: &Cache) -> Result<(), StoreError> {
        let key = Key::from_hex(&self.record.key).expect("records carry valid keys");
        if let Some(x) = &self.point {
            cache.write_point(&key, x)?;
        }
        if let Some(s) = &self.spins {
            cache.write_spins(&key, s)?;
        }
        if let Some(t) = &self.trace {
            cache.write_trace(&key, t)?;
        }
        cache.write_record(&self.record)?;
        cache.clear_failed(&key);
        Ok(())
    }
}

enum Outcome {
    Computed(Record),
    /// Another runner computed it meanwhile.
    Cached(Record),
    /// Another live runner holds its claim: try again later.
    Deferred,
    Failed(String),
    /// Left at a step boundary after a stop signal (nothing recorded).
    Stopped(progress::Stopped),
}

/// Claims a cell, rechecks the cache under the claim, and computes it if still missing.
fn attempt(
    spec: &Spec,
    cell: &Cell,
    cache: &Cache,
    prov: &Provenance,
    damaged: &Mutex<Vec<String>>,
    takeovers: &Mutex<Vec<String>>,
    writes: &SyncSender<WriteJob>,
) -> Result<Outcome, StoreError> {
    let guard = match cache.claim(&cell.key, &prov.computed_by)? {
        Claim::Acquired { guard, took_over } => {
            if let Some(why) = took_over {
                takeovers
                    .lock()
                    .expect("lock")
                    .push(format!("took over cell {}: {why}", &cell.key.hex()[..12]));
            }
            guard
        }
        Claim::HeldByOther(_) => return Ok(Outcome::Deferred),
    };
    if let Some(r) = cached_record(spec, cache, cell, damaged)? {
        return Ok(Outcome::Cached(r));
    }
    // A stop signal makes a long cell leave at a step boundary (see `progress`): nothing of it
    // is recorded, and dropping the guard releases its claim. Any other panic goes on.
    let computed = std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| {
        compute_cell(spec, cell, cache, prov, damaged)
    }));
    let computed = match computed {
        Ok(c) => c,
        Err(payload) => match payload.downcast::<progress::Stopped>() {
            Ok(stopped) => return Ok(Outcome::Stopped(*stopped)),
            Err(other) => std::panic::resume_unwind(other),
        },
    };
    match computed {
        Ok(files) => {
            let record = files.record.clone();
            let job = WriteJob::Cell(Box::new(files), guard);
            if let Err(SendError(WriteJob::Cell(files, _claim))) = writes.send(job) {
                // The writer is gone (it cannot be, short of a panic): write here.
                files.persist(cache)?;
            }
            Ok(Outcome::Computed(record))
        }
        Err(CellError::Failed(m)) => {
            cache.mark_failed(&cell.key, &m)?;
            Ok(Outcome::Failed(m))
        }
        Err(CellError::Store(e)) => Err(e),
    }
}

enum CellError {
    /// The cache cannot be written: stop the run.
    Store(StoreError),
    /// This cell failed (numerics, missing reference); others go on.
    Failed(String),
}

impl From<StoreError> for CellError {
    fn from(e: StoreError) -> Self {
        CellError::Store(e)
    }
}

/// The reference output of a cell's (instance, algorithm): from the cache, else recomputed.
struct Reference {
    spins: Vec<i8>,
    point: Option<Vec<f64>>,
    energy: f64,
}

/// Σσ_i/n of a ±1 output (None on the sphere).
fn magnetisation(spec: &Spec, spins: &[i8]) -> Option<f64> {
    spec.model
        .family
        .spins()
        .then(|| measure::magnetisation(spins))
}

/// H/n of an output: at the point on the sphere, at the spins elsewhere.
fn energy_of(spec: &Spec, inst: &crate::model::Instance, out: &crate::algo::Output) -> f64 {
    let n = inst.n() as f64;
    match (&out.point, needs_point(spec)) {
        (Some(x), true) => inst.value(x) / n,
        _ => inst.energy(&out.spins) / n,
    }
}

fn run_reference(
    spec: &Spec,
    cell: &Cell,
) -> Result<(crate::algo::Output, f64, Extras), CellError> {
    let n = cell.n as usize;
    let model = &spec.models[cell.model];
    let inst = model.sample(n, &cell.instance, 0.0);
    let mut rng = stream(&cell.run, Purpose::Algorithm, cell.replica as u64);
    let out = spec.algorithms[cell.algo]
        .algo
        .run(&inst, &mut rng)
        .map_err(|e| CellError::Failed(e.to_string()))?;
    if needs_point(spec) && out.point.is_none() {
        return Err(CellError::Failed(
            "the algorithm returned no point on the sphere".into(),
        ));
    }
    let energy = energy_of(spec, &inst, &out);
    let extras = model.extras(&inst, energy);
    Ok((out, energy, extras))
}

/// Family-specific columns of the reference output: (energy_reduced, cut_fraction).
type Extras = (Option<f64>, Option<f64>);

fn compute_cell(
    spec: &Spec,
    cell: &Cell,
    cache: &Cache,
    prov: &Provenance,
    damaged: &Mutex<Vec<String>>,
) -> Result<CellFiles, CellError> {
    let start = Instant::now();
    let n = cell.n as usize;
    let algo = &spec.algorithms[cell.algo].algo;
    let mut record = Record {
        format: RECORD_FORMAT,
        key: cell.key.hex(),
        base: cell.base.hex(),
        family: spec.model.family.name().into(),
        couplings: spec.model.couplings.name().into(),
        n: cell.n,
        seed: cell.seed,
        kind: algo.kind().into(),
        settings: algo.settings(),
        epsilon: cell.epsilon,
        energy: 0.0,
        energy_perturbed: 0.0,
        overlap: 1.0,
        distance: 0.0,
        iterations: 0,
        sweeps: 0,
        converged: false,
        energy_reduced: None,
        cut_fraction: None,
        relaxation: None,
        distance_point: None,
        autocorrelation_time: None,
        overlap_initial: None,
        magnetisation: None,
        density: spec.models[cell.model].family.density(),
        replica: cell.replica,
        wall_seconds: 0.0,
        host: prov.host.clone(),
        threads: prov.threads,
        kiln_version: prov.kiln_version.clone(),
        computed_by: prov.computed_by.clone(),
    };
    let (mut spins, mut point, mut trace) = (None, None, None);
    if cell.is_base() {
        let (out, energy, (reduced, cut)) = run_reference(spec, cell)?;
        record.energy = energy;
        record.energy_perturbed = energy;
        record.energy_reduced = reduced;
        record.cut_fraction = cut;
        record.relaxation = out.info.relaxation;
        record.autocorrelation_time = out.info.autocorrelation_time;
        record.overlap_initial = out.info.overlap_initial;
        record.iterations = out.info.iterations;
        record.sweeps = out.info.sweeps;
        record.converged = out.info.converged;
        trace = out.info.trace;
        record.magnetisation = magnetisation(spec, &out.spins);
        spins = Some(out.spins);
        point = out.point;
    } else {
        let reference = load_reference(spec, cell, cache, damaged)?;
        let (reference, reduced, cut, relaxation) = match reference {
            Some(r) => {
                let (rd, ct) = (
                    spec.model.reduced_scale().map(|s| r.reference.energy / s),
                    r.cut,
                );
                (r.reference, rd, ct, r.relaxation)
            }
            None => {
                let (out, energy, (rd, ct)) = run_reference(spec, cell)?;
                let relaxation = out.info.relaxation;
                (
                    Reference {
                        spins: out.spins,
                        point: out.point,
                        energy,
                    },
                    rd,
                    ct,
                    relaxation,
                )
            }
        };
        let inst = spec.models[cell.model].sample(n, &cell.instance, cell.epsilon);
        let mut rng = stream(&cell.run, Purpose::Algorithm, cell.replica as u64);
        let out = algo
            .run(&inst, &mut rng)
            .map_err(|e| CellError::Failed(e.to_string()))?;
        record.energy = reference.energy;
        record.magnetisation = magnetisation(spec, &reference.spins);
        record.energy_perturbed = energy_of(spec, &inst, &out);
        record.energy_reduced = reduced;
        record.cut_fraction = cut;
        record.relaxation = relaxation;
        match (needs_point(spec), &reference.point, &out.point) {
            (true, Some(a), Some(b)) => {
                record.overlap = measure::overlap_points(a, b);
                record.distance = measure::distance_points(a, b);
            }
            (true, _, _) => {
                return Err(CellError::Failed(
                    "the algorithm returned no point on the sphere".into(),
                ));
            }
            _ => {
                record.overlap = measure::overlap(&reference.spins, &out.spins);
                record.distance = measure::distance(&reference.spins, &out.spins);
            }
        }
        if let (Some(a), Some(b)) = (&reference.point, &out.point) {
            record.distance_point = Some(measure::distance_points(a, b));
        }
        record.iterations = out.info.iterations;
        record.sweeps = out.info.sweeps;
        record.converged = out.info.converged;
        // With replicas, the outputs on J' are kept for the disorder-chaos table.
        if spec.replicas > 1 {
            spins = Some(out.spins);
            point = out.point.filter(|_| keeps_point(spec, cell));
        }
    }
    // A non-finite energy is not a result: the cell fails with the reason (shown by the run
    // and by `kiln status`), keeps no record, and is tried again by the next run.
    if !(record.energy.is_finite() && record.energy_perturbed.is_finite()) {
        return Err(CellError::Failed(format!(
            "{} produced a non-finite energy per spin ({}, perturbed {}); no record is kept — check its settings",
            algo.kind(),
            record.energy,
            record.energy_perturbed
        )));
    }
    record.wall_seconds = start.elapsed().as_secs_f64();
    Ok(CellFiles {
        record,
        spins,
        point,
        trace,
    })
}

/// A cached reference with the reference record's cut fraction and relaxation value.
struct CachedReference {
    reference: Reference,
    cut: Option<f64>,
    relaxation: Option<f64>,
}

fn load_reference(
    spec: &Spec,
    cell: &Cell,
    cache: &Cache,
    damaged: &Mutex<Vec<String>>,
) -> Result<Option<CachedReference>, CellError> {
    // The reference cell: same instance and algorithm at ε = 0. Its record and artifacts are
    // verified (and damage reported) by the same lookup the run starts with.
    let base = Cell {
        key: cell.base,
        epsilon: 0.0,
        ..cell.clone()
    };
    let Some(record) = cached_record(spec, cache, &base, damaged)? else {
        return Ok(None);
    };
    let spins = match cache.read_spins(&cell.base)? {
        Lookup::Hit(spins) if spins.len() as u64 == cell.n => spins,
        _ => return Ok(None),
    };
    let point = if keeps_point(spec, cell) {
        match cache.read_point(&cell.base)? {
            Lookup::Hit(x) if x.len() as u64 == cell.n => Some(x),
            _ => return Ok(None),
        }
    } else {
        None
    };
    Ok(Some(CachedReference {
        reference: Reference {
            spins,
            point,
            energy: record.energy,
        },
        cut: record.cut_fraction,
        relaxation: record.relaxation,
    }))
}

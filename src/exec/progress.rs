//! The run's progress line, in kiln's own words, and progress inside one cell.
//!
//! A cell's algorithm reports its own steps with [`step`] (sweeps, matrix–vector products,
//! iterations) at natural boundaries; the call costs a thread-local lookup and two relaxed
//! stores, so it is made once per sweep, never per spin. The executor enters each cell on
//! the thread that runs it ([`Board::enter`]); a ticker thread composes the line from the
//! run's counters and the longest-running cell in flight.
//!
//! Nothing here touches a result: the reports are read only for display, and to stop a cell
//! at a step boundary once a stop signal has come ([`request_stop`]): a cell whose own reports
//! say it cannot finish within the grace, or that is still running when the grace is over,
//! leaves at its next report by unwinding with [`Stopped`], which the executor catches. Nothing
//! of such a cell is recorded; its claim is released like any other.

use std::cell::RefCell;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Arc, Mutex, OnceLock};
use std::time::{Duration, Instant};

/// One cell in flight.
pub struct Slot {
    what: String,
    /// The cell's estimated cost (the cost model's units).
    cost: f64,
    started: Instant,
    done: AtomicU64,
    total: AtomicU64,
    unit: OnceLock<&'static str>,
}

/// What a cell unwinds with when a stop makes it leave at a step boundary: where it was.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Stopped {
    pub done: u64,
    pub total: u64,
    pub unit: &'static str,
}

/// When the grace after a stop signal ends (unset: no stop requested, or an infinite grace).
static STOP_AT: OnceLock<Instant> = OnceLock::new();

/// Asks the cells in flight to leave at their next step once `grace` has passed, or at once
/// if their own progress says they would not finish by then. Called by the signal handler;
/// only the first call counts.
pub fn request_stop(grace: Duration) {
    let _ = STOP_AT.set(Instant::now() + grace);
}

/// Whether a cell started at `started`, having done `done` of `total` units (`exact`: the
/// total is the real count, not a cap the loop may stop short of), should leave now, given
/// the end of the grace. Reached only after a stop signal.
fn should_stop(started: Instant, done: u64, total: u64, exact: bool, end: Instant) -> bool {
    let now = Instant::now();
    if now >= end {
        return true;
    }
    if !exact || done == 0 || total <= done {
        return false;
    }
    // At the pace so far the whole run takes elapsed × total / done from its start.
    let whole = now.duration_since(started).as_secs_f64() * total as f64 / done as f64;
    whole > end.duration_since(started).as_secs_f64()
}

thread_local! {
    /// The cell this thread is computing (a stack through [`Entered`], since a thread that waits
    /// inside a parallel kernel may start another cell meanwhile).
    static CURRENT: RefCell<Option<Arc<Slot>>> = const { RefCell::new(None) };
}

/// Reports that the cell on this thread has done `done` of `total` units (`unit` names
/// them: "sweep", "product", "iteration"), `total` being the exact count the loop runs. A
/// no-op outside a run (tests, library use). After a stop signal this is where a cell
/// leaves (see the module notes): call it only where leaving loses nothing but the cell.
pub fn step(done: u64, total: u64, unit: &'static str) {
    report(done, total, unit, true);
}

/// As [`step`], for a loop that may end before `total` (a cap: descent's `max_sweeps`, an
/// iteration limit): a stop waits for the grace to end rather than judging from the pace.
pub fn step_upto(done: u64, cap: u64, unit: &'static str) {
    report(done, cap, unit, false);
}

fn report(done: u64, total: u64, unit: &'static str, exact: bool) {
    let leave = CURRENT.with(|c| {
        let c = c.borrow();
        let s = c.as_ref()?;
        s.done.store(done, Ordering::Relaxed);
        s.total.store(total, Ordering::Relaxed);
        let _ = s.unit.set(unit);
        let end = STOP_AT.get()?;
        should_stop(s.started, done, total, exact, *end).then_some(Stopped { done, total, unit })
    });
    if let Some(stopped) = leave {
        // Not a panic: no message, no hook; the executor catches exactly this payload.
        std::panic::resume_unwind(Box::new(stopped));
    }
}

/// The cells in flight of one run.
#[derive(Default)]
pub struct Board {
    slots: Mutex<Vec<Arc<Slot>>>,
}

/// While alive, the thread's steps go to this cell's slot.
pub struct Entered<'a> {
    board: &'a Board,
    slot: Arc<Slot>,
    previous: Option<Arc<Slot>>,
}

impl Board {
    /// Enters a cell (`what` describes it, e.g. "anneal n = 4096"; `cost` its estimated
    /// cost) on this thread.
    pub fn enter(&self, what: String, cost: f64) -> Entered<'_> {
        let slot = Arc::new(Slot {
            what,
            cost,
            started: Instant::now(),
            done: AtomicU64::new(0),
            total: AtomicU64::new(0),
            unit: OnceLock::new(),
        });
        self.slots.lock().expect("board").push(slot.clone());
        let previous = CURRENT.with(|c| c.borrow_mut().replace(slot.clone()));
        Entered {
            board: self,
            slot,
            previous,
        }
    }

    /// The cost the cells in flight have done so far, by their own reports (cost × share).
    pub fn in_flight(&self) -> f64 {
        let slots = self.slots.lock().expect("board");
        slots
            .iter()
            .map(|s| {
                let (d, t) = (
                    s.done.load(Ordering::Relaxed),
                    s.total.load(Ordering::Relaxed),
                );
                if t > 0 {
                    s.cost * (d.min(t) as f64 / t as f64)
                } else {
                    0.0
                }
            })
            .sum()
    }

    /// The longest-running cell in flight that has reported steps, as text: "anneal n = 4096:
    /// sweep 140 of 300", or just its description and age when it reports none.
    pub fn longest(&self) -> Option<String> {
        let slots = self.slots.lock().expect("board");
        let s = slots.iter().min_by_key(|s| s.started)?;
        let age = s.started.elapsed();
        if age < Duration::from_secs(2) {
            return None;
        }
        let (done, total) = (
            s.done.load(Ordering::Relaxed),
            s.total.load(Ordering::Relaxed),
        );
        Some(match s.unit.get() {
            Some(unit) if total > 0 => {
                format!("{}: {unit} {done} of {total}", s.what)
            }
            _ => format!("{}: running for {}", s.what, duration(age)),
        })
    }
}

impl Drop for Entered<'_> {
    fn drop(&mut self) {
        CURRENT.with(|c| *c.borrow_mut() = self.previous.take());
        let mut slots = self.board.slots.lock().expect("board");
        if let Some(i) = slots.iter().position(|s| Arc::ptr_eq(s, &self.slot)) {
            slots.swap_remove(i);
        }
    }
}

/// A duration as a person reads it: "42 s", "3 min 05 s", "2 h 10 min".
pub fn duration(d: Duration) -> String {
    let s = d.as_secs();
    if s < 60 {
        format!("{s} s")
    } else if s < 3600 {
        format!("{} min {:02} s", s / 60, s % 60)
    } else {
        format!("{} h {:02} min", s / 3600, (s % 3600) / 60)
    }
}

/// The counters the line is composed from (read, never written, by the composer).
pub struct Line<'a> {
    pub experiment: &'a str,
    pub total: u64,
    pub cached: u64,
    pub computed: &'a AtomicU64,
    pub reused: &'a AtomicU64,
    pub failed: &'a AtomicU64,
    /// Estimated cost of the cells computed so far, and of all the cells to compute (f64 bits).
    pub cost_done: &'a AtomicU64,
    pub cost_all: f64,
    pub phase: &'a Mutex<String>,
    /// Cells of this phase held by other runners, waited for.
    pub waiting: &'a AtomicU64,
    pub note: Option<&'a str>,
    pub started: Instant,
}

impl Line<'_> {
    /// The line: experiment, phase, cells finished of all, how (new, reused, failed), time
    /// left from the cost model's share done, the longest cell's own progress.
    pub fn compose(&self, board: &Board) -> String {
        let computed = self.computed.load(Ordering::Relaxed);
        let reused = self.cached + self.reused.load(Ordering::Relaxed);
        let failed = self.failed.load(Ordering::Relaxed);
        let finished = computed + reused + failed;
        let mut s = format!(
            "kiln {} │ {} │ {finished} of {} cells: {computed} new, {reused} reused",
            self.experiment,
            self.phase.lock().expect("phase"),
            self.total
        );
        if failed > 0 {
            s += &format!(", {failed} failed");
        }
        let waiting = self.waiting.load(Ordering::Relaxed);
        if waiting > 0 {
            s += &format!(" │ waiting for {waiting} cells claimed by other runners");
        }
        // Finished cells plus the shares the cells in flight report of themselves.
        let done = f64::from_bits(self.cost_done.load(Ordering::Relaxed)) + board.in_flight();
        let elapsed = self.started.elapsed().as_secs_f64();
        if done > 0.0 && self.cost_all > done {
            let left = elapsed * (self.cost_all - done) / done;
            s += &format!(" │ about {} left", duration(Duration::from_secs_f64(left)));
        } else if finished < self.total {
            s += " │ time left: estimating";
        }
        if let Some(l) = board.longest() {
            s += &format!(" │ {l}");
        }
        if let Some(n) = self.note {
            s += &format!(" │ {n}");
        }
        s
    }
}

/// Adds `x` to an f64 kept as bits in an atomic.
pub fn add(a: &AtomicU64, x: f64) {
    let _ = a.fetch_update(Ordering::Relaxed, Ordering::Relaxed, |b| {
        Some((f64::from_bits(b) + x).to_bits())
    });
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Steps land in the slot of the cell entered on this thread, a nested cell's in its own,
    /// and leaving restores the outer one; outside any cell a step is a no-op.
    #[test]
    fn steps_go_to_the_cell_on_this_thread() {
        step(1, 2, "sweep");
        let board = Board::default();
        let outer = board.enter("outer".into(), 10.0);
        step(3, 10, "sweep");
        {
            let _inner = board.enter("inner".into(), 5.0);
            step(1, 5, "product");
            assert_eq!(board.slots.lock().unwrap().len(), 2);
            // 3 of 10 of a cost of 10, 1 of 5 of a cost of 5.
            assert!((board.in_flight() - 4.0).abs() < 1e-12);
        }
        step(4, 10, "sweep");
        assert_eq!(outer.slot.done.load(Ordering::Relaxed), 4);
        assert_eq!(outer.slot.total.load(Ordering::Relaxed), 10);
        assert_eq!(board.slots.lock().unwrap().len(), 1);
        drop(outer);
        assert!(board.slots.lock().unwrap().is_empty());
        assert!(board.longest().is_none());
        assert_eq!(duration(Duration::from_secs(185)), "3 min 05 s");
    }

    /// The stop rule: past the end of the grace every cell leaves; before it, only a cell
    /// with an exact total whose pace projects it past the end; a cell that has reported no
    /// work, or has a cap rather than a total, waits for the end.
    #[test]
    fn cells_leave_when_they_cannot_finish_in_the_grace() {
        let now = Instant::now();
        let started = now - Duration::from_secs(10);
        let end = now + Duration::from_secs(20);
        // 10 s for 1 of 100: 1000 s in all, far past the end.
        assert!(should_stop(started, 1, 100, true, end));
        assert!(!should_stop(started, 1, 100, false, end));
        // 10 s for 90 of 100: about 11 s in all, within the grace.
        assert!(!should_stop(started, 90, 100, true, end));
        assert!(!should_stop(started, 0, 100, true, end));
        assert!(should_stop(started, 90, 100, true, now));
        assert!(should_stop(
            started,
            0,
            100,
            false,
            now - Duration::from_secs(1)
        ));
    }

    /// The line's finished count is the sum of its parts (they are read from the same
    /// counters), and the time left waits for the first work done.
    #[test]
    fn line_counts_agree() {
        let (computed, reused, failed) = (AtomicU64::new(5), AtomicU64::new(2), AtomicU64::new(1));
        let cost_done = AtomicU64::new(0.0f64.to_bits());
        let phase = Mutex::new("reference runs".to_string());
        let waiting = AtomicU64::new(0);
        let line = Line {
            experiment: "demo",
            total: 20,
            cached: 3,
            computed: &computed,
            reused: &reused,
            failed: &failed,
            cost_done: &cost_done,
            cost_all: 100.0,
            phase: &phase,
            waiting: &waiting,
            note: None,
            started: Instant::now(),
        };
        let board = Board::default();
        let text = line.compose(&board);
        assert!(
            text.contains("11 of 20 cells: 5 new, 5 reused, 1 failed"),
            "{text}"
        );
        assert!(text.contains("estimating"), "{text}");
        add(&cost_done, 50.0);
        assert!(line.compose(&board).contains("left"));
        waiting.store(4, Ordering::Relaxed);
        assert!(line.compose(&board).contains("waiting for 4 cells"));
    }
}

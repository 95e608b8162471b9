//! SIGINT (Ctrl-C) and SIGTERM (what Slurm sends at a time limit or on `scancel`, and what
//! `kill` sends by default) stop a run the same way: no new cells start; a cell in flight
//! finishes if its own progress says it can within the grace, and otherwise leaves at its next
//! step boundary (a sweep, a product) without recording anything; then the claims still held
//! are released and the table is written from what is done. A cell that reports no steps and
//! is still running [`AFTER_GRACE`] past the grace is abandoned with the process. A second
//! signal leaves at once (claims released). The exit status is 128 + the signal: 130 after
//! SIGINT, 143 after SIGTERM.

use crate::exec::INTERRUPTED;
use signal_hook::consts::{SIGINT, SIGTERM};
use std::sync::atomic::{AtomicI32, Ordering};

/// How long past the grace the run waits for its cells to reach a step boundary before it
/// abandons the ones still running (a sweep of the largest cells takes seconds).
pub const AFTER_GRACE: std::time::Duration = std::time::Duration::from_secs(10);

/// The first stopping signal received (0: none).
static RECEIVED: AtomicI32 = AtomicI32::new(0);

/// The exit status for an interrupted run: 128 + the signal (130 if none was recorded).
pub fn exit_status() -> u8 {
    match RECEIVED.load(Ordering::SeqCst) {
        0 => 130,
        s => (128 + s) as u8,
    }
}

/// Whether a stopping signal has arrived.
pub fn received() -> bool {
    RECEIVED.load(Ordering::SeqCst) != 0
}

/// A number of seconds as a person writes it: "20", "0.3".
fn seconds(s: f64) -> String {
    let t = format!("{s:.1}");
    t.strip_suffix(".0").map(str::to_string).unwrap_or(t)
}

fn name(sig: i32) -> &'static str {
    if sig == SIGTERM {
        "SIGTERM"
    } else {
        "interrupt"
    }
}

/// Installs the handlers (once per process; later calls do nothing). `then` says what the
/// command does once the cells in flight are done (printed when a signal comes); an infinite
/// grace is not printed.
pub fn install(grace_seconds: f64, then: &'static str) {
    static ONCE: std::sync::Once = std::sync::Once::new();
    ONCE.call_once(|| {
        let mut signals = match signal_hook::iterator::Signals::new([SIGINT, SIGTERM]) {
            Ok(s) => s,
            Err(e) => {
                eprintln!("warning: cannot watch for SIGINT/SIGTERM ({e}); a stop signal will end kiln at once");
                return;
            }
        };
        std::thread::Builder::new()
            .name("kiln-signals".into())
            .spawn(move || {
                for sig in signals.forever() {
                    if INTERRUPTED.swap(true, Ordering::SeqCst) {
                        // A second signal: leave now. Records are written atomically, so
                        // nothing is torn; held claims are released so others need not wait.
                        crate::store::claims::release_all();
                        eprintln!("{}: leaving at once", name(sig));
                        std::process::exit(128 + sig);
                    }
                    RECEIVED.store(sig, Ordering::SeqCst);
                    let how = if grace_seconds.is_finite() {
                        crate::exec::progress::request_stop(std::time::Duration::from_secs_f64(
                            grace_seconds,
                        ));
                        format!(
                            "cells in flight finish if they can within {} s, the others stop at their next sweep or step;",
                            seconds(grace_seconds)
                        )
                    } else {
                        "finishing the cells in flight,".to_string()
                    };
                    eprintln!(
                        "\n{}: {how} then {then} (a second signal leaves at once)",
                        name(sig)
                    );
                }
            })
            .expect("signal thread");
    });
}

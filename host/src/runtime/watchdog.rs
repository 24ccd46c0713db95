//! The watchdog that advances the engine's epoch, so that runaway calls
//! are interrupted.
//!
//! Why this exists: a module with an endless loop must never hang a run.
//! Every call sets an epoch deadline a number of ticks ahead; this thread
//! advances the epoch once per tick, and wasmtime traps the call when the
//! deadline passes. Epoch checks cost far less than fuel counting, which
//! stays available as an option for budgets that must be reproducible.

use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::thread::JoinHandle;
use std::time::Duration;

use wasmtime::Engine;

/// A thread that increments the engine epoch every `tick` until dropped.
pub struct Watchdog {
    stop: Arc<AtomicBool>,
    thread: Option<JoinHandle<()>>,
    tick: Duration,
}

impl Watchdog {
    /// Start ticking `engine` every `tick` (wall time).
    pub fn start(engine: Engine, tick: Duration) -> Watchdog {
        let stop = Arc::new(AtomicBool::new(false));
        let flag = stop.clone();
        let thread = std::thread::Builder::new()
            .name("exobound-watchdog".to_string())
            .spawn(move || {
                while !flag.load(Ordering::Relaxed) {
                    std::thread::sleep(tick);
                    engine.increment_epoch();
                }
            })
            .ok();
        Watchdog { stop, thread, tick }
    }

    /// The tick length, wall time.
    pub fn tick(&self) -> Duration {
        self.tick
    }

    /// Epoch ticks that cover `budget`, rounded up, plus one because the
    /// first tick may come at any moment after the call starts.
    pub fn ticks_for(&self, budget: Duration) -> u64 {
        let t = self.tick.as_nanos().max(1);
        (budget.as_nanos().div_ceil(t) as u64).saturating_add(1)
    }
}

impl Drop for Watchdog {
    fn drop(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

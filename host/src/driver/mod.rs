//! Driving a scenario from start to finish: the step loop over the whole
//! run, averaging windows, spin-up, checkpoints, interruption and the
//! staging directory that becomes the output directory.
//!
//! Why this exists: the engine advances one step; a modeller runs a
//! lunation. This module owns what lies between: which steps count towards
//! the averaged products (after the spin-up), the per-window time series,
//! atomic checkpoints that a resumed run continues bit for bit, a clean
//! stop on Ctrl-C, and writing every product into a staging directory that
//! is renamed into place only when the run has finished.

pub mod windows;

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use crate::checkpoint::{self, Checkpoint, ScenarioSource};
use crate::engine::{EngineError, Simulation};
use crate::output::{self, Performance, Staging};
use crate::runtime::Runtime;
use crate::scenario::{Scenario, ScenarioError};
pub use windows::{Averages, BodyPosition, RunRecord, WindowRecord};

/// Why a run stopped without products.
#[derive(Debug)]
pub enum RunError {
    /// The scenario is unusable.
    Scenario(ScenarioError),
    /// The engine or a module failed.
    Engine(EngineError),
    /// A checkpoint could not be read or does not fit.
    Checkpoint(String),
    /// The output could not be written.
    Output(String),
}

impl std::fmt::Display for RunError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            RunError::Scenario(e) => write!(f, "{e}"),
            RunError::Engine(e) => write!(f, "{e}"),
            RunError::Checkpoint(m) => write!(f, "checkpoint: {m}"),
            RunError::Output(m) => write!(f, "output: {m}"),
        }
    }
}

impl std::error::Error for RunError {}

impl From<ScenarioError> for RunError {
    fn from(e: ScenarioError) -> Self {
        RunError::Scenario(e)
    }
}

impl From<EngineError> for RunError {
    fn from(e: EngineError) -> Self {
        RunError::Engine(e)
    }
}

/// Where a run stands, for a progress display.
#[derive(Clone, Copy, Debug)]
pub struct Progress {
    /// Steps done.
    pub step: u64,
    /// Steps in the run.
    pub steps: u64,
    /// Simulated time, s.
    pub time: f64,
    /// Simulated duration of the run, s.
    pub duration: f64,
    /// Super-particles in flight.
    pub particles: usize,
    /// Wall time of this session so far, s.
    pub wall: f64,
    /// Steps done when this session started (after a resume), for the ETA.
    pub first_step: u64,
}

/// How a run ended.
#[derive(Debug)]
pub enum Outcome {
    /// The run finished; its products are in `dir`.
    Finished {
        /// The output directory.
        dir: PathBuf,
        /// What the run found (the same numbers as the files in `dir`).
        result: Box<crate::output::results::RunResult>,
    },
    /// Stopped on request after writing a checkpoint into `staging`.
    Interrupted {
        /// The staging directory holding the checkpoint.
        staging: PathBuf,
        /// Steps done.
        step: u64,
    },
}

/// Options of one session of a run.
pub struct Session<'a> {
    /// Set to stop at the next step boundary (after a checkpoint).
    pub stop: Arc<AtomicBool>,
    /// Called after every step.
    pub progress: Option<&'a mut dyn FnMut(&Progress)>,
}

/// Start the run of `scenario` (described by `source`) into `out`.
pub fn start(
    scenario: Scenario,
    source: ScenarioSource,
    out: &Path,
    session: Session<'_>,
) -> Result<Outcome, RunError> {
    let staging = Staging::create(out).map_err(RunError::Output)?;
    let sim = Simulation::new(
        scenario.model.clone(),
        scenario.processes.clone(),
        scenario.config.clone(),
    )?;
    let record = RunRecord::default();
    let result = drive(&scenario, &source, sim, record, 0.0, &staging, session);
    if result.is_err() && !staging.has_checkpoint() {
        staging.discard();
    }
    result
}

/// Continue the interrupted run whose output directory was `out`.
pub fn resume(
    out: &Path,
    runtime: &Arc<Runtime>,
    extra_overrides: &[String],
    session: Session<'_>,
) -> Result<Outcome, RunError> {
    let staging = Staging::existing(out).map_err(RunError::Checkpoint)?;
    let ck = checkpoint::read(&staging.checkpoint_path()).map_err(RunError::Checkpoint)?;
    let mut source = ck.source.clone();
    source.overrides.extend(extra_overrides.iter().cloned());
    let scenario = source.load(runtime)?;
    let now: Vec<(String, String)> =
        scenario.modules.iter().map(|m| (m.name.clone(), m.sha256.clone())).collect();
    for ((name, then), (_, now)) in ck.module_digests.iter().zip(&now) {
        if then != now {
            return Err(RunError::Checkpoint(format!(
                "module `{name}` changed since the checkpoint (sha256 {then} then, {now} now); \
                 restore the original module or start a new run"
            )));
        }
    }
    if ck.module_digests.len() != now.len() {
        return Err(RunError::Checkpoint(
            "the scenario's module list differs from the checkpoint's".into(),
        ));
    }
    let mut sim = Simulation::new(
        scenario.model.clone(),
        scenario.processes.clone(),
        scenario.config.clone(),
    )?;
    sim.restore(ck.engine)?;
    drive(&scenario, &source, sim, ck.record, ck.wall_seconds, &staging, session)
}

fn drive(
    scenario: &Scenario,
    source: &ScenarioSource,
    mut sim: Simulation,
    mut record: RunRecord,
    wall_before: f64,
    staging: &Staging,
    mut session: Session<'_>,
) -> Result<Outcome, RunError> {
    let plan = &scenario.plan;
    let clock = Instant::now();
    let first_step = sim.steps();
    let save = |sim: &Simulation, record: &RunRecord, wall: f64| -> Result<(), RunError> {
        let ck = Checkpoint {
            source: source.clone(),
            module_digests: scenario
                .modules
                .iter()
                .map(|m| (m.name.clone(), m.sha256.clone()))
                .collect(),
            engine: sim.state(),
            record: record.clone(),
            wall_seconds: wall,
        };
        checkpoint::write(&staging.checkpoint_path(), &ck).map_err(RunError::Output)
    };
    while sim.steps() < plan.steps {
        if session.stop.load(Ordering::SeqCst) {
            save(&sim, &record, wall_before + clock.elapsed().as_secs_f64())?;
            return Ok(Outcome::Interrupted {
                staging: staging.dir().to_path_buf(),
                step: sim.steps(),
            });
        }
        sim.step()?;
        let s = sim.steps();
        if s - record.window_start_step == plan.window_steps
            || s == plan.spin_up_steps
            || s == plan.steps
        {
            record.close_window(&mut sim, plan);
        }
        if let Some(every) = plan.checkpoint_steps
            && s.is_multiple_of(every)
            && s < plan.steps
        {
            save(&sim, &record, wall_before + clock.elapsed().as_secs_f64())?;
        }
        if let Some(p) = session.progress.as_mut() {
            p(&Progress {
                step: s,
                steps: plan.steps,
                time: sim.time(),
                duration: plan.steps as f64 * scenario.config.dt,
                particles: sim.particles().len(),
                wall: clock.elapsed().as_secs_f64(),
                first_step,
            });
        }
    }
    let perf = Performance {
        wall_seconds: wall_before + clock.elapsed().as_secs_f64(),
        hops: sim.ledger().rows.iter().map(|r| r.hops).sum(),
        threads: scenario.config.threads,
    };
    let result = output::write_all(staging.dir(), scenario, source, &sim, &record, &perf)
        .map_err(RunError::Output)?;
    let dir = staging.finish().map_err(RunError::Output)?;
    Ok(Outcome::Finished { dir, result: Box::new(result) })
}

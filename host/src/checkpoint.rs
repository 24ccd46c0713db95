//! Checkpoints: the whole state of an unfinished run, written atomically,
//! from which a resumed run continues bit for bit.
//!
//! Why this exists: runs over a lunation take long enough to be killed.
//! A checkpoint holds the scenario as given (text, overrides, input
//! directory), the module digests, the engine state and the driver's
//! record. It is written to a temporary file, fsynced and renamed over the
//! previous one, so a crash at any moment leaves either the old or the new
//! checkpoint, never a torn one. The file starts with a one-line JSON
//! header (format and engine version), read before anything else, so a
//! checkpoint from an incompatible version is refused with a clear message
//! instead of a decoding error.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use serde::{Deserialize, Serialize};

use crate::driver::RunRecord;
use crate::engine::EngineState;
use crate::runtime::Runtime;
use crate::scenario::{Inputs, Scenario, ScenarioError};

/// Checkpoint layout version; bump on any change to what is saved or to
/// how a saved state continues (format 2: random keys carry the step, so a
/// format-1 state would not continue as its run would have; format 3: the
/// particle bank keeps each particle's planned path, and the budget one
/// launch goal for all sources; format 4: the ledger books atoms leaving
/// bound apart from escape, unbound atoms fly by default, each window
/// record carries the body's position on its orbit, and Mercury spins in
/// exact 3:2 resonance, so a format-3 Mercury state would continue on
/// another spin).
pub const FORMAT: u32 = 4;

/// How to rebuild the scenario of a run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ScenarioSource {
    /// Where it came from, for messages.
    pub origin: String,
    /// The scenario text as read at the start.
    pub text: String,
    /// Directory of its input files, or `None` for the built-in demo.
    pub input_dir: Option<PathBuf>,
    /// `KEY=VALUE` overrides, in order.
    pub overrides: Vec<String>,
}

impl ScenarioSource {
    /// The source of a scenario file at `path` with `overrides`.
    pub fn file(path: &Path, overrides: &[String]) -> Result<ScenarioSource, ScenarioError> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            ScenarioError(format!("cannot read the scenario file `{}`: {e}", path.display()))
        })?;
        let dir = path.parent().map(Path::to_path_buf).unwrap_or_default();
        let dir = if dir.as_os_str().is_empty() { PathBuf::from(".") } else { dir };
        let dir = std::fs::canonicalize(&dir).unwrap_or(dir);
        Ok(ScenarioSource {
            origin: path.display().to_string(),
            text,
            input_dir: Some(dir),
            overrides: overrides.to_vec(),
        })
    }

    /// The source of the built-in demo.
    pub fn demo(quick: bool, overrides: &[String]) -> ScenarioSource {
        ScenarioSource {
            origin: if quick { "built-in demo (quick)" } else { "built-in demo" }.to_string(),
            text: crate::scenario::demo::scenario_text(quick),
            input_dir: None,
            overrides: overrides.to_vec(),
        }
    }

    /// Validate it into a scenario, loading modules into `runtime`.
    pub fn load(&self, runtime: &Arc<Runtime>) -> Result<Scenario, ScenarioError> {
        let inputs = match &self.input_dir {
            Some(d) => Inputs::Dir(d.clone()),
            None => Inputs::Demo,
        };
        Scenario::from_text(&self.text, &self.origin, inputs, &self.overrides, runtime)
    }
}

/// Everything saved at a checkpoint.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Checkpoint {
    /// The scenario.
    pub source: ScenarioSource,
    /// (module name, SHA-256) in scenario order.
    pub module_digests: Vec<(String, String)>,
    /// The engine.
    pub engine: EngineState,
    /// The driver's averages and windows.
    pub record: RunRecord,
    /// Wall time spent so far, s.
    pub wall_seconds: f64,
}

#[derive(Serialize, Deserialize)]
struct Header {
    kind: String,
    format: u32,
    engine: String,
}

const KIND: &str = "exobound checkpoint";

/// Write `ck` to `path` atomically.
pub fn write(path: &Path, ck: &Checkpoint) -> Result<(), String> {
    let header = Header {
        kind: KIND.to_string(),
        format: FORMAT,
        engine: env!("CARGO_PKG_VERSION").to_string(),
    };
    let mut bytes = serde_json::to_vec(&header).map_err(|e| e.to_string())?;
    bytes.push(b'\n');
    let body = rmp_serde::to_vec(ck).map_err(|e| format!("cannot encode the checkpoint: {e}"))?;
    bytes.extend_from_slice(&body);
    crate::output::atomic_write(path, &bytes)
        .map_err(|e| format!("cannot write the checkpoint `{}`: {e}", path.display()))
}

/// Read the checkpoint at `path`, refusing another format or engine version.
pub fn read(path: &Path) -> Result<Checkpoint, String> {
    let bytes = std::fs::read(path)
        .map_err(|e| format!("cannot read the checkpoint `{}`: {e}", path.display()))?;
    let nl = bytes.iter().position(|&b| b == b'\n').ok_or_else(|| {
        format!("`{}` is not an exobound checkpoint (no header line)", path.display())
    })?;
    let header: Header = serde_json::from_slice(&bytes[..nl]).map_err(|_| {
        format!("`{}` is not an exobound checkpoint (unreadable header)", path.display())
    })?;
    let engine = env!("CARGO_PKG_VERSION");
    if header.kind != KIND {
        return Err(format!("`{}` is not an exobound checkpoint", path.display()));
    }
    if header.format != FORMAT || header.engine != engine {
        return Err(format!(
            "`{}` was written by exobound {} (checkpoint format {}); this is exobound {engine} \
             (format {FORMAT}), which cannot continue it. Resume with the version that wrote it, \
             or start the run again",
            path.display(),
            header.engine,
            header.format
        ));
    }
    rmp_serde::from_slice(&bytes[nl + 1..])
        .map_err(|e| format!("the checkpoint `{}` is damaged: {e}", path.display()))
}

//! `exobound provenance RUN_DIR`: which modules made a run, and are they
//! still the same files?
//!
//! Why this exists: `provenance.json` records every module's name,
//! version, role, file and SHA-256. Months later, someone holding the
//! output wants to know whether the modules at those paths are still the
//! ones that made it. This reads the record and re-hashes each module file
//! that is present; a standard module recorded as `embedded:NAME` is
//! compared with the one this `exobound` carries.

use std::path::Path;

use serde::Serialize;

use super::ShareError;
use crate::output::PROVENANCE_FILE;
use crate::runtime::module::sha256_hex;
use crate::scenario::ModuleOrigin;
use crate::text::printable;

/// What re-hashing a recorded module found.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case", tag = "status", content = "sha256_now")]
pub enum FileState {
    /// The file is present and has the recorded digest.
    Same,
    /// The file is present with another digest (given).
    Changed(String),
    /// No file at the recorded path.
    Missing,
}

/// One module of a run.
#[derive(Clone, Debug, Serialize)]
pub struct TracedModule {
    /// Manifest name.
    pub name: String,
    /// Manifest version.
    pub version: String,
    /// Role it played.
    pub role: String,
    /// The scenario's `module` key.
    pub spec: String,
    /// The file used.
    pub path: String,
    /// The recorded SHA-256.
    pub sha256: String,
    /// What is at the path now.
    pub now: FileState,
}

/// A run's module record, re-checked.
#[derive(Clone, Debug, Serialize)]
pub struct Trace {
    /// The run directory.
    pub run_dir: String,
    /// Engine and version that made the run.
    pub engine: String,
    /// Where the scenario came from.
    pub scenario_origin: String,
    /// The run seed.
    pub seed: u64,
    /// The modules, in scenario order.
    pub modules: Vec<TracedModule>,
}

impl Trace {
    /// Whether any present module file changed.
    pub fn any_changed(&self) -> bool {
        self.modules.iter().any(|m| matches!(m.now, FileState::Changed(_)))
    }
}

/// Read `RUN_DIR/provenance.json` and re-hash the module files it names.
pub fn trace(run_dir: &Path) -> Result<Trace, ShareError> {
    let path = run_dir.join(PROVENANCE_FILE);
    let text = std::fs::read_to_string(&path).map_err(|e| {
        ShareError(format!(
            "cannot read `{}`: {e} (is `{}` the output directory of a finished run?)",
            path.display(),
            run_dir.display()
        ))
    })?;
    let v: serde_json::Value = serde_json::from_str(&text)
        .map_err(|e| ShareError(format!("`{}` is not valid JSON: {e}", path.display())))?;
    let s = |v: &serde_json::Value, k: &str| {
        v.get(k).and_then(|x| x.as_str()).unwrap_or("").to_string()
    };
    let modules = v
        .get("modules")
        .and_then(|m| m.as_array())
        .ok_or_else(|| ShareError(format!("`{}` has no `modules` list", path.display())))?;
    let mut out = Vec::new();
    for m in modules {
        let file = s(m, "path");
        let recorded = s(m, "sha256");
        let bytes = match file.strip_prefix(ModuleOrigin::EMBEDDED_PREFIX) {
            Some(name) => crate::standard::embedded(name).map(<[u8]>::to_vec),
            None => std::fs::read(&file).ok(),
        };
        let now = match bytes {
            None => FileState::Missing,
            Some(bytes) => {
                let d = sha256_hex(&bytes);
                if d == recorded { FileState::Same } else { FileState::Changed(d) }
            }
        };
        out.push(TracedModule {
            name: s(m, "name"),
            version: s(m, "version"),
            role: s(m, "role"),
            spec: s(m, "spec"),
            path: file,
            sha256: recorded,
            now,
        });
    }
    Ok(Trace {
        run_dir: run_dir.display().to_string(),
        engine: format!("{} {}", s(&v, "engine"), s(&v, "engine_version")),
        scenario_origin: s(&v, "scenario_origin"),
        seed: v.get("seed").and_then(|x| x.as_u64()).unwrap_or(0),
        modules: out,
    })
}

/// The trace as text.
pub fn render_text(t: &Trace) -> String {
    // Every string here was read from `provenance.json`, which anyone may
    // have edited, and names come from module manifests: print them safely.
    let p = |x: &str| printable(x).into_owned();
    let mut s = format!(
        "run {} made by {} from {} (seed {})\n",
        p(&t.run_dir),
        p(&t.engine),
        p(&t.scenario_origin),
        t.seed
    );
    for m in &t.modules {
        let embedded = m.path.starts_with(ModuleOrigin::EMBEDDED_PREFIX);
        let state = match (&m.now, embedded) {
            (FileState::Same, false) => "present, same digest".to_string(),
            (FileState::Same, true) => "embedded in this exobound, same digest".to_string(),
            (FileState::Changed(d), false) => {
                format!("CHANGED: the file now has sha256 {}", p(d))
            }
            (FileState::Changed(d), true) => {
                format!("CHANGED: the copy embedded in this exobound has sha256 {}", p(d))
            }
            (FileState::Missing, false) => "not present (cannot re-verify)".to_string(),
            (FileState::Missing, true) => {
                "not embedded in this exobound (cannot re-verify)".to_string()
            }
        };
        s += &format!(
            "  {:<22} {:<8} {:<20} sha256 {}\n  {:<22} {} ({})\n",
            p(&m.name),
            p(&m.version),
            p(&m.role),
            p(&m.sha256),
            "",
            p(&m.path),
            state
        );
    }
    s
}

//! `exobound.lock`: the module digests a scenario was run with.
//!
//! Why this exists: a scenario names modules by path or `name@version`,
//! and either can come to mean another file (a rebuilt module, a replaced
//! catalog file). The lock file next to the scenario pins each module's
//! SHA-256; `exobound run` refuses a module whose digest differs from its
//! pin, naming the module and both digests, until `--update-lock` renews
//! the pins. The first run writes the lock; a module added to the
//! scenario later is pinned on its first run. Layout (TOML):
//!
//! ```toml
//! # exobound.lock: module digests pinned by `exobound run` (see docs/sharing.md).
//! format = 1
//! [[module]]
//! spec = "photoionization@1.0.0"    # the scenario's `module` key as written
//! name = "photoionization"
//! version = "1.0.0"
//! sha256 = "<64 hex>"
//! ```

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::{ShareError, write_atomic};
use crate::scenario::ModuleUse;

/// File name of the lock, next to the scenario file.
pub const LOCK_FILE: &str = "exobound.lock";
/// Layout version of the lock.
pub const LOCK_FORMAT: u32 = 1;

/// One pinned module.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Pin {
    /// The scenario's `module` key as written.
    pub spec: String,
    /// Manifest name.
    pub name: String,
    /// Manifest version.
    pub version: String,
    /// SHA-256 of the module file, lowercase hex.
    pub sha256: String,
}

/// The lock file.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Lock {
    /// [`LOCK_FORMAT`].
    pub format: u32,
    /// The pins, in scenario order.
    #[serde(default, rename = "module")]
    pub modules: Vec<Pin>,
}

/// What a lock check did.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum LockAction {
    /// Every module matched its pin; the file was left alone.
    Unchanged,
    /// The lock did not exist and was written.
    Created,
    /// New modules were pinned (their specs).
    Added(Vec<String>),
    /// `--update-lock` rewrote the pins.
    Updated,
}

/// The lock path for the scenario file `scenario`.
pub fn path_for(scenario: &Path) -> PathBuf {
    scenario
        .parent()
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or(Path::new("."))
        .join(LOCK_FILE)
}

/// Read a lock file.
pub fn read(path: &Path) -> Result<Lock, ShareError> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| ShareError(format!("cannot read the lock file `{}`: {e}", path.display())))?;
    let lock: Lock = toml::from_str(&text).map_err(|e| {
        ShareError(format!(
            "`{}` is not a valid lock file: {}; fix it or rerun with --update-lock",
            path.display(),
            e.message()
        ))
    })?;
    if lock.format != LOCK_FORMAT {
        return Err(ShareError(format!(
            "`{}` has format {}, this exobound writes format {LOCK_FORMAT}; rerun with --update-lock",
            path.display(),
            lock.format
        )));
    }
    Ok(lock)
}

fn pins(modules: &[ModuleUse]) -> Vec<Pin> {
    let mut out: Vec<Pin> = Vec::new();
    for m in modules {
        if !out.iter().any(|p| p.spec == m.spec) {
            out.push(Pin {
                spec: m.spec.clone(),
                name: m.name.clone(),
                version: m.version.clone(),
                sha256: m.sha256.clone(),
            });
        }
    }
    out
}

fn write(path: &Path, lock: &Lock) -> Result<(), ShareError> {
    let body = toml::to_string(lock).map_err(|e| ShareError(e.to_string()))?;
    let text = format!(
        "# exobound.lock: module digests pinned by `exobound run` (see docs/sharing.md).\n\
         # Renew with `exobound run SCENARIO --update-lock`.\n{body}"
    );
    write_atomic(path, text.as_bytes(), false)
}

/// Check the scenario's `modules` against the lock at `path`, writing or
/// renewing it as described in the module docs. On a mismatch nothing is
/// written and the error names each changed module with both digests.
pub fn enforce(path: &Path, modules: &[ModuleUse], update: bool) -> Result<LockAction, ShareError> {
    let now = pins(modules);
    if update {
        write(path, &Lock { format: LOCK_FORMAT, modules: now })?;
        return Ok(LockAction::Updated);
    }
    if !path.exists() {
        write(path, &Lock { format: LOCK_FORMAT, modules: now })?;
        return Ok(LockAction::Created);
    }
    let mut lock = read(path)?;
    let mut changed = Vec::new();
    let mut added = Vec::new();
    for pin in &now {
        match lock.modules.iter().find(|p| p.spec == pin.spec) {
            Some(old) if old.sha256 != pin.sha256 => {
                let file = modules
                    .iter()
                    .find(|m| m.spec == pin.spec)
                    .map(|m| m.path.display().to_string())
                    .unwrap_or_default();
                changed.push(format!(
                    "module `{}` ({} {}, file `{file}`) changed since it was locked: locked \
                     sha256 {}, now {}",
                    pin.spec, pin.name, pin.version, old.sha256, pin.sha256
                ));
            }
            Some(_) => {}
            None => added.push(pin.clone()),
        }
    }
    if !changed.is_empty() {
        return Err(ShareError(format!(
            "{}: {}. If the change is intended, run again with --update-lock",
            path.display(),
            changed.join("; ")
        )));
    }
    if added.is_empty() {
        return Ok(LockAction::Unchanged);
    }
    let specs = added.iter().map(|p| p.spec.clone()).collect();
    lock.modules.extend(added);
    write(path, &lock)?;
    Ok(LockAction::Added(specs))
}

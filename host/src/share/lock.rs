//! `exobound.lock`: the module digests a scenario was run with.
//!
//! Why this exists: a scenario names modules by path or `name@version`,
//! and either can come to mean another file (a rebuilt module, a replaced
//! catalog file). The lock file next to the scenario pins each module's
//! SHA-256; every command that runs the scenario (`run`, `compare`, `sweep`,
//! `fit`) refuses a module whose digest differs from its pin, naming the
//! module and both digests, until `--update-lock` renews the pins. The
//! first use writes the lock; a module added to the scenario later is
//! pinned on its first use. A module given by path and marked `unlocked =
//! true` in the scenario (work in progress, rebuilt often) is not pinned;
//! the run's provenance records it as unlocked. Layout (TOML):
//!
//! ```toml
//! # exobound.lock: module digests pinned by exobound (see docs/sharing.md).
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
use crate::checkpoint::ScenarioSource;
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

/// The lock path of a scenario source: next to its file, `None` for the
/// built-in demo (which has no lock).
pub fn path_for_source(source: &ScenarioSource) -> Option<PathBuf> {
    source.input_dir.as_ref().map(|d| d.join(LOCK_FILE))
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
    for m in modules.iter().filter(|m| !m.unlocked) {
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
        "# exobound.lock: module digests pinned by exobound (see docs/sharing.md).\n\
         # Renew with `exobound run SCENARIO --update-lock`.\n{body}"
    );
    write_atomic(path, text.as_bytes(), false)
}

/// Check the scenario's `modules` against the lock at `path`, writing or
/// renewing it as described in the module docs. Modules marked `unlocked`
/// are left out. On a mismatch nothing is written and the error names each
/// changed module with both digests, and the fix.
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
    let mut by_path = false;
    let mut added = Vec::new();
    for pin in &now {
        match lock.modules.iter().find(|p| p.spec == pin.spec) {
            Some(old) if old.sha256 != pin.sha256 => {
                let m = modules.iter().find(|m| m.spec == pin.spec);
                let origin = m.map(|m| m.origin.to_string()).unwrap_or_default();
                by_path |= m.is_some_and(|m| {
                    !m.spec.starts_with("standard:")
                        && crate::share::catalog::parse_ref(&m.spec).is_none()
                });
                changed.push(format!(
                    "module `{}` ({} {}, from `{origin}`) changed since it was locked: locked \
                     sha256 {}, now {}",
                    pin.spec, pin.name, pin.version, old.sha256, pin.sha256
                ));
            }
            Some(_) => {}
            None => added.push(pin.clone()),
        }
    }
    if !changed.is_empty() {
        let develop = if by_path {
            "; or, while you are developing a module given by path, mark its [[processes]] \
             entry `unlocked = true` so that it is not pinned"
        } else {
            ""
        };
        return Err(ShareError(format!(
            "{}: {}. If the change is intended, run again with --update-lock{develop}",
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

/// Check every scenario a command is about to run against its lock: the
/// scenarios are grouped by lock file (one per scenario directory; the
/// demo has none), and each lock is checked against the union of its
/// scenarios' modules as [`enforce`] does. Returns what was done to each
/// lock; stops at the first refusal.
pub fn enforce_all(
    scenarios: &[(&ScenarioSource, &[ModuleUse])],
    update: bool,
) -> Result<Vec<(PathBuf, LockAction)>, ShareError> {
    let mut groups: Vec<(PathBuf, Vec<ModuleUse>)> = Vec::new();
    for (source, modules) in scenarios {
        let Some(path) = path_for_source(source) else { continue };
        match groups.iter_mut().find(|(p, _)| *p == path) {
            Some((_, all)) => all.extend(modules.iter().cloned()),
            None => groups.push((path, modules.to_vec())),
        }
    }
    let mut out = Vec::new();
    for (path, modules) in groups {
        let action = enforce(&path, &modules, update)?;
        out.push((path, action));
    }
    Ok(out)
}

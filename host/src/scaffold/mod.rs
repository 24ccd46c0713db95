//! `exobound module new`: a ready-to-edit module crate for one role.
//!
//! Why this exists: the fastest way for a laboratory group to turn a
//! measured yield into a module is to start from a crate that already
//! builds to wasm, carries a complete manifest with a reference point, and
//! passes its own unit test. The generated crate is its own cargo
//! workspace, so it builds wherever it is put.

use std::path::{Path, PathBuf};

use exobound_sdk::Role;

/// Why a scaffold could not be written.
#[derive(Debug)]
pub enum ScaffoldError {
    /// The module name is not usable as a crate name.
    BadName(String),
    /// The target directory already exists and is not empty.
    Exists(PathBuf),
    /// A file could not be written.
    Io(PathBuf, std::io::Error),
}

impl std::fmt::Display for ScaffoldError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ScaffoldError::BadName(n) => write!(
                f,
                "`{n}` is not a valid module name: use lowercase ASCII letters, digits and \
                 '-', starting with a letter (e.g. `lab-psd-yield`)"
            ),
            ScaffoldError::Exists(p) => write!(
                f,
                "{} already exists and is not empty; choose another --dir or name",
                p.display()
            ),
            ScaffoldError::Io(p, e) => write!(f, "cannot write {}: {e}", p.display()),
        }
    }
}

impl std::error::Error for ScaffoldError {}

/// Where the SDK sources are for the generated `path` dependency: the
/// `EXOBOUND_SDK_DIR` environment variable, else the SDK this binary was built from.
pub fn default_sdk_dir() -> PathBuf {
    std::env::var_os("EXOBOUND_SDK_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("EXOBOUND_SDK_DIR")))
}

/// `lab-psd-yield` -> `LabPsdYield`.
fn type_name(name: &str) -> String {
    name.split(['-', '_'])
        .filter(|p| !p.is_empty())
        .map(|p| {
            let mut c = p.chars();
            match c.next() {
                Some(f) => f.to_ascii_uppercase().to_string() + c.as_str(),
                None => String::new(),
            }
        })
        .collect()
}

fn valid_name(name: &str) -> bool {
    let mut chars = name.chars();
    matches!(chars.next(), Some(c) if c.is_ascii_lowercase())
        && name.chars().all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-')
        && !name.ends_with('-')
}

fn template(role: Role) -> &'static str {
    match role {
        Role::Source => include_str!("templates/source.rs.tmpl"),
        Role::Loss => include_str!("templates/loss.rs.tmpl"),
        Role::SurfaceInteraction => include_str!("templates/surface-interaction.rs.tmpl"),
        Role::ReservoirProcess => include_str!("templates/reservoir-process.rs.tmpl"),
    }
}

/// Write a module crate named `name` for `role` into `dir` (created; must be
/// absent or empty), depending on the SDK at `sdk`. Returns the files written.
pub fn new_module(
    name: &str,
    role: Role,
    dir: &Path,
    sdk: &Path,
) -> Result<Vec<PathBuf>, ScaffoldError> {
    if !valid_name(name) {
        return Err(ScaffoldError::BadName(name.to_string()));
    }
    if dir.exists() && std::fs::read_dir(dir).map(|mut d| d.next().is_some()).unwrap_or(true) {
        return Err(ScaffoldError::Exists(dir.to_path_buf()));
    }
    let fill = |t: &str| {
        t.replace("{{NAME}}", name)
            .replace("{{TYPE}}", &type_name(name))
            .replace("{{ROLE}}", role.as_str())
            .replace("{{SDK}}", &sdk.display().to_string().replace('\\', "/"))
    };
    let files = [
        (dir.join("Cargo.toml"), fill(include_str!("templates/Cargo.toml.tmpl"))),
        (dir.join("src").join("lib.rs"), fill(template(role))),
        (dir.join(".gitignore"), "/target\n".to_string()),
    ];
    let mut written = Vec::new();
    for (path, text) in files {
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| ScaffoldError::Io(parent.to_path_buf(), e))?;
        }
        std::fs::write(&path, text).map_err(|e| ScaffoldError::Io(path.clone(), e))?;
        written.push(path);
    }
    Ok(written)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names() {
        assert_eq!(type_name("lab-psd-yield"), "LabPsdYield");
        assert!(valid_name("psd2"));
        assert!(!valid_name("2psd"));
        assert!(!valid_name("Psd"));
        assert!(!valid_name("psd-"));
    }
}

//! `exobound module new`: a ready-to-edit module crate for one role.
//!
//! Why this exists: the fastest way for a laboratory group to turn a
//! measured yield into a module is to start from a crate that already
//! builds to wasm, carries a complete manifest with a reference point, and
//! passes its own unit test. The generated crate is its own cargo
//! workspace and carries a copy of the SDK (see [`sdk`]), so it builds
//! wherever it is put, to the same bytes.

pub mod sdk;

use std::path::{Component, Path, PathBuf};

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
    /// The SDK directory given is not the SDK, or the embedded SDK's
    /// Cargo.toml could not be made standalone.
    Sdk(String),
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
            ScaffoldError::Sdk(e) => write!(f, "{e}"),
        }
    }
}

impl std::error::Error for ScaffoldError {}

/// Where the SDK sources this binary was built from lay at build time (the
/// `EXOBOUND_SDK_DIR` environment variable overrides it): for `--sdk` in a
/// checkout, and for tests.
pub fn default_sdk_dir() -> PathBuf {
    std::env::var_os("EXOBOUND_SDK_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| PathBuf::from(env!("EXOBOUND_SDK_DIR")))
}

/// How a scaffolded crate reaches the SDK.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum SdkSource {
    /// A copy of the SDK this binary embeds, written into the crate as
    /// `exobound-sdk/` (the default): the module builds to the same bytes
    /// wherever the crate is put, and the crate needs nothing beside it.
    Copy,
    /// The SDK crate in this directory, by a path relative to the crate:
    /// for work on the SDK itself. cargo hashes where such a dependency
    /// lies into the module's code, so the bytes then depend on it.
    Path(PathBuf),
}

/// The path of `to` relative to the directory `from` (both absolute and
/// free of `..`), or `None` if they share no root (another drive).
pub fn relative_path(from: &Path, to: &Path) -> Option<PathBuf> {
    let (f, t): (Vec<Component>, Vec<Component>) =
        (from.components().collect(), to.components().collect());
    if f.first() != t.first() {
        return None;
    }
    let common = f.iter().zip(&t).take_while(|(a, b)| a == b).count();
    let mut rel = PathBuf::new();
    for _ in common..f.len() {
        rel.push("..");
    }
    for c in &t[common..] {
        rel.push(c.as_os_str());
    }
    Some(if rel.as_os_str().is_empty() { PathBuf::from(".") } else { rel })
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
/// absent or empty), reaching the SDK as `sdk` says. Returns the files
/// written.
pub fn new_module(
    name: &str,
    role: Role,
    dir: &Path,
    sdk: &SdkSource,
) -> Result<Vec<PathBuf>, ScaffoldError> {
    if !valid_name(name) {
        return Err(ScaffoldError::BadName(name.to_string()));
    }
    if dir.exists() && std::fs::read_dir(dir).map(|mut d| d.next().is_some()).unwrap_or(true) {
        return Err(ScaffoldError::Exists(dir.to_path_buf()));
    }
    let existed = dir.exists();
    std::fs::create_dir_all(dir).map_err(|e| ScaffoldError::Io(dir.to_path_buf(), e))?;
    let result = write_crate(name, role, dir, sdk);
    if result.is_err() {
        // Leave nothing half-written behind.
        if existed {
            if let Ok(entries) = std::fs::read_dir(dir) {
                for e in entries.flatten() {
                    let _ = std::fs::remove_dir_all(e.path())
                        .or_else(|_| std::fs::remove_file(e.path()));
                }
            }
        } else {
            let _ = std::fs::remove_dir_all(dir);
        }
    }
    result
}

fn write_crate(
    name: &str,
    role: Role,
    dir: &Path,
    sdk: &SdkSource,
) -> Result<Vec<PathBuf>, ScaffoldError> {
    let mut files: Vec<(PathBuf, String)> = Vec::new();
    let (sdk_path, sdk_version, sdk_note) = match sdk {
        SdkSource::Copy => {
            let manifest = sdk::manifest_text()
                .map_err(|e| ScaffoldError::Sdk(format!("cannot write the SDK copy: {e}")))?;
            let copy = dir.join(sdk::COPY_DIR);
            files.push((copy.join("Cargo.toml"), manifest));
            for (path, text) in sdk::SOURCES {
                files.push((copy.join(path), text.to_string()));
            }
            (
                sdk::COPY_DIR.to_string(),
                format!(", version = \"{}\"", sdk::version()),
                "# exobound-sdk/ is a copy of the SDK inside this crate, so that the module\n\
                 # builds to the same bytes wherever the crate is put. Publish it (and\n\
                 # Cargo.lock) with your source."
                    .to_string(),
            )
        }
        SdkSource::Path(at) => {
            let here =
                std::fs::canonicalize(dir).map_err(|e| ScaffoldError::Io(dir.to_path_buf(), e))?;
            let there = std::fs::canonicalize(at)
                .ok()
                .filter(|p| p.join("Cargo.toml").is_file())
                .ok_or_else(|| {
                ScaffoldError::Sdk(format!(
                    "{} is not the exobound-sdk crate (no Cargo.toml there); pass the \
                         `process-sdk` directory of an exobound checkout to --sdk, or leave \
                         --sdk out to copy the SDK into the crate",
                    at.display()
                ))
            })?;
            let rel = relative_path(&here, &there).unwrap_or(there);
            (
                rel.display().to_string().replace('\\', "/"),
                String::new(),
                "# The SDK by a path relative to this crate (`module new --sdk`): the .wasm\n\
                 # then depends on where the SDK lies. For a module you publish, use the\n\
                 # default, a copy of the SDK inside the crate."
                    .to_string(),
            )
        }
    };
    let fill = |t: &str| {
        t.replace("{{NAME}}", name)
            .replace("{{TYPE}}", &type_name(name))
            .replace("{{ROLE}}", role.as_str())
            .replace("{{SDK_NOTE}}", &sdk_note)
            .replace("{{SDK_VERSION}}", &sdk_version)
            .replace("{{SDK}}", &sdk_path)
    };
    files.push((dir.join("Cargo.toml"), fill(include_str!("templates/Cargo.toml.tmpl"))));
    files.push((dir.join("src").join("lib.rs"), fill(template(role))));
    files.push((dir.join(".gitignore"), "/target\n".to_string()));
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

    #[test]
    fn relative_paths() {
        let rel = |a: &str, b: &str| relative_path(Path::new(a), Path::new(b));
        assert_eq!(
            rel("/w/mods/lab", "/w/exobound/process-sdk"),
            Some("../../exobound/process-sdk".into())
        );
        assert_eq!(rel("/w/mods/lab", "/w/mods/lab/exobound-sdk"), Some("exobound-sdk".into()));
        assert_eq!(rel("/w/a", "/w/a"), Some(".".into()));
    }
}

//! The standard process modules: carried inside the `exobound` binary.
//!
//! Why this exists: a scenario names a standard module `standard:NAME`, and
//! an installed binary (`cargo install --path host`, or a copy on a cluster
//! node) must find it with no source tree or build directory around. The
//! build script embeds every module of `processes/` (`include_bytes!` of
//! the very `.wasm` files it built), so the bytes the runtime loads, and so
//! the SHA-256 a lock or a provenance record holds, are those of the built
//! file. `$EXOBOUND_MODULE_DIR`, when set at run time, overrides the
//! embedded modules with the `NAME.wasm` files of that directory. A binary
//! built with `EXOBOUND_SKIP_WASM_BUILD=1` embeds nothing and looks in the
//! build's `target/modules/` instead, with an error naming the fix when the
//! file is not there.

use std::path::{Path, PathBuf};

use crate::runtime::HostError;

include!(concat!(env!("OUT_DIR"), "/standard_modules.rs"));

/// The run-time variable naming a directory of standard modules that
/// replaces the embedded ones.
pub const OVERRIDE_VAR: &str = "EXOBOUND_MODULE_DIR";

/// Where the bytes of a standard module come from.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Found {
    /// Embedded in this binary.
    Embedded(&'static [u8]),
    /// A file: `$EXOBOUND_MODULE_DIR/NAME.wasm`, or the build's copy when
    /// nothing is embedded.
    File(PathBuf),
}

/// Names of the standard modules embedded in this binary, sorted (empty
/// when it was built with `EXOBOUND_SKIP_WASM_BUILD=1`).
pub fn embedded_names() -> Vec<&'static str> {
    EMBEDDED.iter().map(|(n, _)| *n).collect()
}

/// The embedded bytes of the standard module `name`, if this binary has it.
pub fn embedded(name: &str) -> Option<&'static [u8]> {
    EMBEDDED.iter().find(|(n, _)| *n == name).map(|(_, b)| *b)
}

/// Find the standard module `name` (as in `standard:NAME`): the file in
/// `$EXOBOUND_MODULE_DIR` if that variable is set, else the embedded
/// bytes, else (a binary that embeds nothing) the build's copy. The error
/// names what was looked for and the fix.
pub fn find(name: &str) -> Result<Found, String> {
    if let Some(dir) = std::env::var_os(OVERRIDE_VAR).filter(|d| !d.is_empty()) {
        let file = PathBuf::from(dir).join(format!("{name}.wasm"));
        if file.is_file() {
            return Ok(Found::File(file));
        }
        return Err(format!(
            "standard module `{name}`: ${OVERRIDE_VAR} is set, and `{}` does not exist; \
             build it there, or unset {OVERRIDE_VAR} to use the standard modules built into \
             this exobound",
            file.display()
        ));
    }
    if let Some(bytes) = embedded(name) {
        return Ok(Found::Embedded(bytes));
    }
    if EMBEDDED.is_empty() {
        let file = crate::standard_module(name);
        if file.is_file() {
            return Ok(Found::File(file));
        }
        return Err(format!(
            "standard module `{name}`: this exobound was built without its standard modules \
             (EXOBOUND_SKIP_WASM_BUILD was set) and `{}` does not exist; set {OVERRIDE_VAR} \
             to a directory holding `{name}.wasm`, or rebuild without EXOBOUND_SKIP_WASM_BUILD",
            file.display()
        ));
    }
    Err(format!(
        "there is no standard module `{name}`; the standard modules are {}",
        embedded_names().join(", ")
    ))
}

/// The bytes of the module that `path` names for `inspect` and `vet`: the
/// standard module `standard:NAME` (see [`find`]) or a file; with the path
/// to show for it (`embedded:NAME` for bytes embedded in this binary).
pub fn read_module(path: &Path) -> Result<(PathBuf, Vec<u8>), HostError> {
    let Some(name) = path.to_str().and_then(|p| p.strip_prefix("standard:")) else {
        return Ok((path.to_path_buf(), crate::runtime::module::read_file(path)?));
    };
    match find(name) {
        Ok(Found::Embedded(b)) => Ok((PathBuf::from(format!("embedded:{name}")), b.to_vec())),
        Ok(Found::File(p)) => {
            let bytes = crate::runtime::module::read_file(&p)?;
            Ok((p, bytes))
        }
        Err(detail) => Err(HostError::Read {
            path: path.to_path_buf(),
            source: std::io::Error::new(std::io::ErrorKind::NotFound, detail),
        }),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_embedded_module_is_the_built_file() {
        // Embedded and built copies are the same bytes, so digests agree.
        for (name, bytes) in EMBEDDED {
            let file = std::fs::read(crate::standard_module(name)).unwrap();
            assert!(file == *bytes, "{name}: embedded bytes differ from the built file");
        }
    }

    #[test]
    fn an_unknown_name_lists_the_standard_modules() {
        if EMBEDDED.is_empty() || std::env::var_os(OVERRIDE_VAR).is_some() {
            return;
        }
        let e = find("no-such-law").unwrap_err();
        assert!(e.contains("no-such-law") && e.contains("photoionization"), "{e}");
    }
}

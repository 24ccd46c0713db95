//! Building module crates to `.wasm` with cargo and the wasm32 target.
//!
//! Why this exists: three places build process modules from source: the
//! host's build script (the standard modules in `processes/`), the test
//! crate's build script (hostile fixtures) and `exobound module build`. They
//! must drive cargo the same way, so the logic lives here, using only
//! `std` so that build scripts can include this file with `#[path]`.

use std::fmt;
use std::path::{Path, PathBuf};
use std::process::Command;

/// The target triple modules are built for.
pub const WASM_TARGET: &str = "wasm32-unknown-unknown";

/// Why a module build failed.
#[derive(Debug)]
pub enum BuildError {
    /// The wasm32 target is not installed for the active toolchain.
    TargetMissing,
    /// cargo could not be started.
    Spawn(String),
    /// cargo ran and failed; its diagnostics.
    Cargo(String),
    /// The crate's Cargo.toml could not be read or has no package name.
    Manifest(String),
    /// cargo succeeded but the expected `.wasm` file is absent.
    NoArtifact(PathBuf),
}

impl fmt::Display for BuildError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            BuildError::TargetMissing => write!(
                f,
                "the {WASM_TARGET} target is not installed; run \
                 `rustup target add {WASM_TARGET}` and build again"
            ),
            BuildError::Spawn(e) => write!(f, "could not run cargo: {e}"),
            BuildError::Cargo(log) => write!(f, "cargo failed to build the module:\n{log}"),
            BuildError::Manifest(e) => write!(f, "{e}"),
            BuildError::NoArtifact(p) => write!(
                f,
                "cargo finished but {} was not produced; is the crate a `cdylib` \
                 (`[lib] crate-type = [\"cdylib\", \"rlib\"]`)?",
                p.display()
            ),
        }
    }
}

/// The library name cargo uses for artifacts of the crate at `manifest`
/// (the `[lib] name`, else the package name with `-` replaced by `_`).
pub fn lib_name(manifest: &Path) -> Result<String, BuildError> {
    let text = std::fs::read_to_string(manifest)
        .map_err(|e| BuildError::Manifest(format!("cannot read {}: {e}", manifest.display())))?;
    let mut section = String::new();
    let (mut package, mut lib) = (None, None);
    for line in text.lines() {
        let line = line.trim();
        if line.starts_with('[') {
            section = line.trim_matches(|c| c == '[' || c == ']').trim().to_string();
            continue;
        }
        let Some((key, value)) = line.split_once('=') else { continue };
        if key.trim() != "name" {
            continue;
        }
        let value = value.trim().trim_matches('"').to_string();
        match section.as_str() {
            "package" if package.is_none() => package = Some(value),
            "lib" if lib.is_none() => lib = Some(value),
            _ => {}
        }
    }
    lib.or(package).map(|n| n.replace('-', "_")).ok_or_else(|| {
        BuildError::Manifest(format!("{} has no [package] name", manifest.display()))
    })
}

/// Whether the active toolchain has the wasm32 standard library.
pub fn wasm_target_installed() -> bool {
    let rustc = std::env::var("RUSTC").unwrap_or_else(|_| "rustc".to_string());
    let Ok(out) = Command::new(rustc).args(["--print", "sysroot"]).output() else {
        return false;
    };
    let sysroot = String::from_utf8_lossy(&out.stdout).trim().to_string();
    Path::new(&sysroot).join("lib/rustlib").join(WASM_TARGET).join("lib").is_dir()
}

/// Where cargo puts the release `.wasm` of library `lib` under `target_dir`.
pub fn artifact_path(target_dir: &Path, lib: &str) -> PathBuf {
    target_dir.join(WASM_TARGET).join("release").join(format!("{lib}.wasm"))
}

/// Build the crates named by `manifests` (paths to their Cargo.toml) to
/// wasm32 in release mode, into `target_dir`, and return the `.wasm` paths.
///
/// `packages` selects packages of one workspace (`-p NAME`) when the
/// manifest is a workspace root; leave it empty to build the one crate.
/// The environment that cargo gives build scripts (target flags, wrappers)
/// is removed so that the nested build is an ordinary wasm32 build.
pub fn build(manifest: &Path, packages: &[String], target_dir: &Path) -> Result<(), BuildError> {
    if !wasm_target_installed() {
        return Err(BuildError::TargetMissing);
    }
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".to_string());
    let mut cmd = Command::new(cargo);
    cmd.arg("build")
        .arg("--release")
        .arg("--target")
        .arg(WASM_TARGET)
        .arg("--manifest-path")
        .arg(manifest)
        .arg("--target-dir")
        .arg(target_dir);
    for p in packages {
        cmd.arg("-p").arg(p);
    }
    // Modules ship as single files: optimise across crates (SDK, libm, law).
    cmd.env("CARGO_PROFILE_RELEASE_LTO", "fat")
        .env("CARGO_PROFILE_RELEASE_CODEGEN_UNITS", "1")
        .env("CARGO_PROFILE_RELEASE_OPT_LEVEL", "3")
        .env("CARGO_PROFILE_RELEASE_PANIC", "abort");
    for var in [
        "CARGO_ENCODED_RUSTFLAGS",
        "RUSTFLAGS",
        "CARGO_BUILD_RUSTFLAGS",
        "CARGO_BUILD_TARGET",
        "CARGO_TARGET_DIR",
        "CARGO_BUILD_TARGET_DIR",
        "RUSTC_WORKSPACE_WRAPPER",
        "CARGO_PRIMARY_PACKAGE",
        "CARGO_MANIFEST_DIR",
        "CARGO_MANIFEST_PATH",
    ] {
        cmd.env_remove(var);
    }
    let out = cmd.output().map_err(|e| BuildError::Spawn(e.to_string()))?;
    if !out.status.success() {
        let log = String::from_utf8_lossy(&out.stderr).to_string();
        if log.contains("target may not be installed")
            || log.contains("can't find crate for `core`")
        {
            return Err(BuildError::TargetMissing);
        }
        return Err(BuildError::Cargo(log));
    }
    Ok(())
}

/// Build the module crate in `dir` to wasm and return the `.wasm` path.
/// The target directory is `$CARGO_TARGET_DIR` if set, else `dir/target`.
pub fn build_crate(dir: &Path) -> Result<PathBuf, BuildError> {
    let manifest = dir.join("Cargo.toml");
    let lib = lib_name(&manifest)?;
    let target_dir = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| dir.join("target"));
    build(&manifest, &[], &target_dir)?;
    let artifact = artifact_path(&target_dir, &lib);
    if artifact.is_file() { Ok(artifact) } else { Err(BuildError::NoArtifact(artifact)) }
}

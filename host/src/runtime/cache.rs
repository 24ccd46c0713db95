//! The on-disk cache of compiled modules.
//!
//! Why this exists: compiling a module with Cranelift takes a noticeable
//! fraction of a second, and sweeps start many runs of the same modules. The
//! compiled artifact is kept on disk, keyed by the module's SHA-256 and by a
//! hash of the engine's version and configuration, and written atomically
//! (temporary file, fsync, rename) so that a crash never leaves half an
//! artifact for the next run to load.
//!
//! Caution: loading a cached artifact runs native code that wasmtime wrote
//! earlier; wasmtime checks its header and configuration but cannot tell a
//! maliciously edited artifact from a genuine one. The cache directory must
//! be writable by you alone (by default it is under your home directory).

use std::hash::{Hash, Hasher};
use std::io::Write;
use std::path::{Path, PathBuf};

use wasmtime::{Engine, Module};

use super::error::HostError;

/// The default cache directory: `$EXOBOUND_CACHE_DIR`, else
/// `$XDG_CACHE_HOME/exobound/modules`, else `$HOME/.cache/exobound/modules`.
pub fn default_dir() -> Option<PathBuf> {
    if let Some(d) = std::env::var_os("EXOBOUND_CACHE_DIR") {
        return Some(PathBuf::from(d));
    }
    if let Some(d) = std::env::var_os("XDG_CACHE_HOME") {
        return Some(PathBuf::from(d).join("exobound").join("modules"));
    }
    std::env::var_os("HOME")
        .map(|h| PathBuf::from(h).join(".cache").join("exobound").join("modules"))
}

/// A 64-bit FNV-1a hasher: stable across runs and Rust versions, unlike
/// `DefaultHasher`, so cache keys stay valid.
struct Fnv(u64);

impl Hasher for Fnv {
    fn finish(&self) -> u64 {
        self.0
    }
    fn write(&mut self, bytes: &[u8]) {
        for &b in bytes {
            self.0 ^= b as u64;
            self.0 = self.0.wrapping_mul(0x0100_0000_01b3);
        }
    }
}

/// A key that changes whenever the engine would compile differently.
pub fn engine_key(engine: &Engine) -> String {
    let mut h = Fnv(0xcbf2_9ce4_8422_2325);
    env!("CARGO_PKG_VERSION").hash(&mut h);
    engine.precompile_compatibility_hash().hash(&mut h);
    format!("{:016x}", h.finish())
}

/// The cache file for a module digest under `dir`.
pub fn artifact_path(dir: &Path, sha256: &str, engine: &Engine) -> PathBuf {
    dir.join(format!("{sha256}-{}.cwasm", engine_key(engine)))
}

/// Compile `bytes`, or load the compiled artifact from `dir` if one exists.
/// A stale or unreadable artifact is recompiled and replaced.
pub fn compile_cached(
    engine: &Engine,
    dir: Option<&Path>,
    name: &str,
    sha256: &str,
    bytes: &[u8],
) -> Result<Module, HostError> {
    let compile_err =
        |e: wasmtime::Error| HostError::Compile { module: name.to_string(), detail: e.to_string() };
    let Some(dir) = dir else {
        return Module::from_binary(engine, bytes).map_err(compile_err);
    };
    let path = artifact_path(dir, sha256, engine);
    // Read the artifact into memory rather than mapping the file: a mapped
    // file truncated by another process would crash this one (SIGBUS).
    if let Ok(artifact) = std::fs::read(&path) {
        // SAFETY: the artifact was written by this cache (see the module
        // caution); wasmtime verifies that it matches this engine.
        if let Ok(m) = unsafe { Module::deserialize(engine, &artifact) } {
            return Ok(m);
        }
    }
    let artifact = engine.precompile_module(bytes).map_err(compile_err)?;
    // A cache that cannot be written is not fatal: the module still runs.
    let _ = write_atomic(dir, &path, &artifact);
    // SAFETY: `artifact` was produced by `precompile_module` on this engine.
    unsafe { Module::deserialize(engine, &artifact) }.map_err(compile_err)
}

/// Write `data` to `path` atomically: temporary file in the same directory,
/// fsync, rename.
pub fn write_atomic(dir: &Path, path: &Path, data: &[u8]) -> Result<(), HostError> {
    let err =
        |e: std::io::Error| HostError::Cache { path: path.to_path_buf(), detail: e.to_string() };
    std::fs::create_dir_all(dir).map_err(err)?;
    let tmp = dir.join(format!(
        ".{}.{}.tmp",
        path.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default(),
        std::process::id()
    ));
    let mut f = std::fs::File::create(&tmp).map_err(err)?;
    f.write_all(data).map_err(err)?;
    f.sync_all().map_err(err)?;
    drop(f);
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        err(e)
    })
}

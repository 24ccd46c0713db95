//! The on-disk cache of compiled modules, and why its entries can be trusted.
//!
//! Why this exists: compiling a module with Cranelift takes a noticeable
//! fraction of a second, and sweeps start many runs of the same modules. The
//! compiled artifact is kept on disk, keyed by the module's SHA-256 and by a
//! hash of the engine's version and configuration, and written atomically
//! (temporary file, fsync, rename) so that a crash never leaves half an
//! artifact for the next run to load.
//!
//! A cache entry is native code that the host will execute, so it is never
//! loaded on trust. Each entry carries an HMAC-SHA256 tag (RFC 2104; Krawczyk,
//! Bellare & Canetti 1997) over the module's digest, the engine key and the
//! artifact, under a 256-bit key that is made once per cache directory and
//! kept in it at mode 0600. An entry whose tag does not verify (a flipped
//! byte, a truncated file, an entry copied from another module's slot, an
//! entry from another cache) is reported in one line and recompiled; its
//! bytes are never handed to the loader. The cache directory is created at
//! mode 0700, and one that other users can write, or that another user
//! owns, is refused with a message naming it and the fix.
//!
//! What this does not protect against: someone who can already read the
//! key file (your own account, or root) can forge entries.

use std::hash::{Hash, Hasher};
use std::io::Write;
use std::os::unix::fs::{DirBuilderExt, MetadataExt, OpenOptionsExt, PermissionsExt};
use std::path::{Path, PathBuf};
use std::sync::mpsc;

use sha2::{Digest, Sha256};
use wasmtime::{Engine, Module};

use super::error::HostError;
use super::limits::CompileLimits;

/// First bytes of every cache entry: the format of this cache.
const MAGIC: &[u8; 16] = b"exobound-cwasm2\n";
/// Length of the HMAC-SHA256 tag, bytes.
const TAG_LEN: usize = 32;
/// Name of the key file inside the cache directory.
pub const KEY_FILE: &str = "cache.key";

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

/// HMAC-SHA256 of `parts` (concatenated) under `key` (RFC 2104, with
/// SHA-256 as H and a 64-byte block).
pub fn hmac_sha256(key: &[u8], parts: &[&[u8]]) -> [u8; 32] {
    let mut k = [0u8; 64];
    if key.len() > 64 {
        k[..32].copy_from_slice(&Sha256::digest(key));
    } else {
        k[..key.len()].copy_from_slice(key);
    }
    let mut inner = Sha256::new();
    inner.update(k.map(|b| b ^ 0x36));
    for p in parts {
        inner.update(p);
    }
    let mut outer = Sha256::new();
    outer.update(k.map(|b| b ^ 0x5c));
    outer.update(inner.finalize());
    outer.finalize().into()
}

/// Constant-time equality of two tags.
fn tags_equal(a: &[u8], b: &[u8]) -> bool {
    a.len() == b.len() && a.iter().zip(b).fold(0u8, |acc, (x, y)| acc | (x ^ y)) == 0
}

/// An open, checked cache directory with its key.
pub struct Cache {
    dir: PathBuf,
    key: [u8; 32],
}

impl std::fmt::Debug for Cache {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        // Never print the key.
        write!(f, "Cache({})", self.dir.display())
    }
}

/// The effective user id of this process.
fn current_uid() -> u32 {
    // SAFETY: geteuid has no preconditions and cannot fail.
    unsafe { libc::geteuid() }
}

impl Cache {
    /// Open (creating at mode 0700 if needed) the cache directory `dir`,
    /// and read or make its key. A directory that another user owns or
    /// that others may write is refused (the outer error); one that cannot
    /// be created or read (a read-only home on a cluster node, say) gives
    /// the inner error, a reason to run without a cache.
    pub fn open(dir: &Path) -> Result<Result<Cache, String>, HostError> {
        let unusable = |what: &str, e: std::io::Error| {
            Ok(Err(format!(
                "compiled-module cache at {}: {what}: {e}; modules are compiled in memory for \
                 this run (set EXOBOUND_CACHE_DIR to a writable directory to keep them)",
                dir.display()
            )))
        };
        if !dir.exists() {
            if let Some(parent) = dir.parent().filter(|p| !p.as_os_str().is_empty())
                && let Err(e) = std::fs::create_dir_all(parent)
            {
                return unusable("cannot create its parent directory", e);
            }
            match std::fs::DirBuilder::new().mode(0o700).create(dir) {
                Ok(()) => {}
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {}
                Err(e) => return unusable("cannot create the directory", e),
            }
        }
        let meta = match std::fs::metadata(dir) {
            Ok(m) => m,
            Err(e) => return unusable("cannot read it", e),
        };
        if !meta.is_dir() {
            let e = std::io::Error::new(std::io::ErrorKind::NotADirectory, "not a directory");
            return unusable("it is not a directory", e);
        }
        check_private(dir, &meta, "directory", 0o022, 0o700)?;
        let key = read_or_make_key(dir)?;
        Ok(Ok(Cache { dir: dir.to_path_buf(), key }))
    }

    /// The directory.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The tag of an entry for module `sha256` on engine `engine_key`.
    fn tag(&self, sha256: &str, engine_key: &str, artifact: &[u8]) -> [u8; 32] {
        hmac_sha256(
            &self.key,
            &[MAGIC, sha256.as_bytes(), b"\0", engine_key.as_bytes(), b"\0", artifact],
        )
    }

    /// The verified artifact of an entry's bytes, or why it was rejected.
    fn verify<'a>(
        &self,
        sha256: &str,
        engine_key: &str,
        entry: &'a [u8],
    ) -> Result<&'a [u8], &'static str> {
        let rest =
            entry.strip_prefix(MAGIC.as_slice()).ok_or("not an entry of this cache format")?;
        if rest.len() < TAG_LEN {
            return Err("truncated");
        }
        let (tag, artifact) = rest.split_at(TAG_LEN);
        if !tags_equal(tag, &self.tag(sha256, engine_key, artifact)) {
            return Err("its keyed digest does not match: corrupted, or not made for this module");
        }
        Ok(artifact)
    }

    /// The bytes of an entry holding `artifact`.
    fn seal(&self, sha256: &str, engine_key: &str, artifact: &[u8]) -> Vec<u8> {
        let mut v = Vec::with_capacity(MAGIC.len() + TAG_LEN + artifact.len());
        v.extend_from_slice(MAGIC);
        v.extend_from_slice(&self.tag(sha256, engine_key, artifact));
        v.extend_from_slice(artifact);
        v
    }
}

/// Refuse `path` unless this user owns it and no bits of `forbidden` are set
/// in its mode; `fix_mode` is the mode the fix suggests.
fn check_private(
    path: &Path,
    meta: &std::fs::Metadata,
    what: &str,
    forbidden: u32,
    fix_mode: u32,
) -> Result<(), HostError> {
    let uid = current_uid();
    let err = |detail: String| HostError::Cache { path: path.to_path_buf(), detail };
    if meta.uid() != uid {
        return Err(err(format!(
            "the {what} belongs to user id {}, not to you (user id {uid}), so its compiled \
             code cannot be trusted; set EXOBOUND_CACHE_DIR to a directory of your own",
            meta.uid()
        )));
    }
    let mode = meta.permissions().mode() & 0o777;
    if mode & forbidden != 0 {
        return Err(err(format!(
            "the {what} has mode {mode:04o}, so other users could plant compiled code in it; \
             run `chmod {fix_mode:o} {}` or set EXOBOUND_CACHE_DIR to a private directory",
            path.display()
        )));
    }
    Ok(())
}

/// Read the cache key, or make one (32 random bytes at mode 0600, published
/// by a hard link so that a concurrent process never reads half a key).
fn read_or_make_key(dir: &Path) -> Result<[u8; 32], HostError> {
    let path = dir.join(KEY_FILE);
    let err = |detail: String| HostError::Cache { path: path.clone(), detail };
    if !path.exists() {
        let mut key = [0u8; 32];
        getrandom::fill(&mut key)
            .map_err(|e| err(format!("no randomness for a new cache key: {e}")))?;
        let tmp = dir.join(format!(".{KEY_FILE}.tmp-{}", std::process::id()));
        let _ = std::fs::remove_file(&tmp);
        let mut f = std::fs::OpenOptions::new()
            .write(true)
            .create_new(true)
            .mode(0o600)
            .open(&tmp)
            .map_err(|e| err(format!("cannot write a new key: {e}")))?;
        f.write_all(&key).and_then(|_| f.sync_all()).map_err(|e| {
            let _ = std::fs::remove_file(&tmp);
            err(format!("cannot write a new key: {e}"))
        })?;
        drop(f);
        // A concurrent process may have published its key first; then use that one.
        let linked = std::fs::hard_link(&tmp, &path);
        let _ = std::fs::remove_file(&tmp);
        if let Err(e) = linked
            && e.kind() != std::io::ErrorKind::AlreadyExists
        {
            return Err(err(format!("cannot publish a new key: {e}")));
        }
    }
    let meta = std::fs::symlink_metadata(&path).map_err(|e| err(format!("cannot read it: {e}")))?;
    if !meta.is_file() {
        return Err(err("the cache key is not a regular file; delete it".to_string()));
    }
    check_private(&path, &meta, "cache key", 0o077, 0o600)?;
    let bytes = std::fs::read(&path).map_err(|e| err(format!("cannot read it: {e}")))?;
    bytes.try_into().map_err(|_| {
        err("the cache key is not 32 bytes long; delete it and the cache's entries".to_string())
    })
}

/// Compile `bytes` under the compile backstop of `limits`, in a helper
/// thread so that a compiler that never returns cannot hang the host.
fn compile(
    engine: &Engine,
    name: &str,
    bytes: &[u8],
    limits: &CompileLimits,
) -> Result<Vec<u8>, HostError> {
    let (tx, rx) = mpsc::channel();
    let engine = engine.clone();
    let owned = bytes.to_vec();
    std::thread::Builder::new()
        .name("exobound-compile".to_string())
        .spawn(move || {
            let _ = tx.send(engine.precompile_module(&owned));
        })
        .map_err(|e| HostError::Compile {
            module: name.to_string(),
            detail: format!("cannot start the compiler thread: {e}"),
        })?;
    match rx.recv_timeout(limits.compile_backstop) {
        Ok(r) => {
            r.map_err(|e| HostError::Compile { module: name.to_string(), detail: e.to_string() })
        }
        Err(_) => Err(HostError::CompileLimit {
            module: name.to_string(),
            what: "compile time (the wall-time backstop), s",
            found: limits.compile_backstop.as_secs(),
            limit: limits.compile_backstop.as_secs(),
        }),
    }
}

/// Compile `bytes`, or load the verified compiled artifact from `cache`.
/// An entry that fails verification is reported through `notice` and
/// recompiled; it is never loaded.
pub fn compile_cached(
    engine: &Engine,
    cache: Option<&Cache>,
    name: &str,
    sha256: &str,
    bytes: &[u8],
    limits: &CompileLimits,
    notice: &dyn Fn(String),
) -> Result<Module, HostError> {
    let compile_err =
        |e: wasmtime::Error| HostError::Compile { module: name.to_string(), detail: e.to_string() };
    let Some(cache) = cache else {
        let artifact = compile(engine, name, bytes, limits)?;
        // SAFETY: `artifact` was produced by `precompile_module` on this engine.
        return unsafe { Module::deserialize(engine, &artifact) }.map_err(compile_err);
    };
    let ekey = engine_key(engine);
    let path = artifact_path(cache.dir(), sha256, engine);
    // Read the entry into memory rather than mapping the file: a mapped
    // file truncated by another process would crash this one (SIGBUS).
    if let Ok(entry) = std::fs::read(&path) {
        match cache.verify(sha256, &ekey, &entry) {
            Ok(artifact) => {
                // SAFETY: the artifact's keyed digest verifies, so this cache
                // wrote it for exactly this module and engine; wasmtime also
                // checks that it matches this engine's configuration.
                if let Ok(m) = unsafe { Module::deserialize(engine, artifact) } {
                    return Ok(m);
                }
            }
            Err(why) => notice(format!(
                "compiled-module cache entry {} for module `{name}` was rejected ({why}); \
                 recompiling it",
                path.display()
            )),
        }
    }
    let artifact = compile(engine, name, bytes, limits)?;
    // A cache that cannot be written is not fatal: the module still runs.
    let _ = write_atomic(cache.dir(), &path, &cache.seal(sha256, &ekey, &artifact));
    // SAFETY: `artifact` was produced by `precompile_module` on this engine.
    unsafe { Module::deserialize(engine, &artifact) }.map_err(compile_err)
}

/// Write `data` to `path` atomically: temporary file in the same directory
/// (mode 0600), fsync, rename.
pub fn write_atomic(dir: &Path, path: &Path, data: &[u8]) -> Result<(), HostError> {
    let err =
        |e: std::io::Error| HostError::Cache { path: path.to_path_buf(), detail: e.to_string() };
    let tmp = dir.join(format!(
        ".{}.{}.tmp",
        path.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default(),
        std::process::id()
    ));
    let mut f = std::fs::OpenOptions::new()
        .write(true)
        .create(true)
        .truncate(true)
        .mode(0o600)
        .open(&tmp)
        .map_err(err)?;
    f.write_all(data).map_err(err)?;
    f.sync_all().map_err(err)?;
    drop(f);
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        err(e)
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hmac_sha256_matches_rfc_4231() {
        // RFC 4231 (Nystrom 2005), test case 2: key "Jefe", data "what do ya
        // want for nothing?"; also reproduced with Python's hmac module.
        let tag = hmac_sha256(b"Jefe", &[b"what do ya ", b"want for nothing?"]);
        let hex: String = tag.iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(hex, "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843");
        // RFC 4231 test case 6: a 131-byte key (longer than the block) of 0xaa.
        let tag =
            hmac_sha256(&[0xaa; 131], &[b"Test Using Larger Than Block-Size Key - Hash Key First"]);
        let hex: String = tag.iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(hex, "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54");
    }

    #[test]
    fn an_entry_verifies_only_for_its_own_module_and_bytes() {
        let c = Cache { dir: PathBuf::from("/nonexistent"), key: [7; 32] };
        let sealed = c.seal("aa", "e1", b"native code");
        assert_eq!(c.verify("aa", "e1", &sealed), Ok(&b"native code"[..]));
        assert!(c.verify("bb", "e1", &sealed).is_err(), "copied to another module's slot");
        assert!(c.verify("aa", "e2", &sealed).is_err(), "another engine");
        let mut flipped = sealed.clone();
        *flipped.last_mut().unwrap() ^= 1;
        assert!(c.verify("aa", "e1", &flipped).is_err(), "one flipped bit");
        assert!(c.verify("aa", "e1", &sealed[..20]).is_err(), "truncated");
        let other = Cache { dir: PathBuf::from("/nonexistent"), key: [8; 32] };
        assert!(other.verify("aa", "e1", &sealed).is_err(), "another cache's key");
    }
}

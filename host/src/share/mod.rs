//! Sharing modules between institutions: keys, signatures, catalogs, trust
//! policies, lock files and the re-verification of a run's provenance.
//!
//! Why this exists: a module travels as one `.wasm` file identified by its
//! SHA-256 digest. A receiving group needs to know that the file is the
//! one a trusted colleague vetted ([`signature`], [`keys`]), to find it by
//! `name@version` in a shared directory that enforces its own rules
//! ([`catalog`], [`policy`]), to be sure a scenario keeps running the same
//! files ([`lock`]), and to check later which files made a result
//! ([`trace`]). `docs/sharing.md` describes every file layout.
//!
//! None of this shows that a module's physics is right: a valid signature
//! and a passing vet show that the module is well formed, behaves within
//! bounds, and is the very file a colleague vetted.

pub mod catalog;
pub mod keys;
pub mod lock;
pub mod policy;
pub mod signature;
pub mod trace;

use std::io::Write;
use std::path::Path;

/// A sharing operation that cannot proceed, with a message naming the
/// file or key and the fix.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ShareError(pub String);

impl std::fmt::Display for ShareError {
    /// The message, with control and bidirectional characters escaped: it
    /// may quote signature files, catalogs and manifests made by others.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&crate::text::printable_lines(&self.0))
    }
}

impl std::error::Error for ShareError {}

/// Lowercase hex of `bytes`.
pub fn hex(bytes: &[u8]) -> String {
    bytes.iter().map(|b| format!("{b:02x}")).collect()
}

/// Bytes of an even-length hex string (either case), or `None`.
pub fn unhex(s: &str) -> Option<Vec<u8>> {
    let s = s.trim();
    if !s.len().is_multiple_of(2) || !s.is_ascii() {
        return None;
    }
    (0..s.len()).step_by(2).map(|i| u8::from_str_radix(&s[i..i + 2], 16).ok()).collect()
}

/// Write `bytes` to `path` atomically (temporary file, fsync, rename);
/// `private` makes the file readable by its owner only (Unix).
pub fn write_atomic(path: &Path, bytes: &[u8], private: bool) -> Result<(), ShareError> {
    let fail = |e: std::io::Error| ShareError(format!("cannot write `{}`: {e}", path.display()));
    if let Some(dir) = path.parent().filter(|d| !d.as_os_str().is_empty()) {
        std::fs::create_dir_all(dir).map_err(fail)?;
    }
    if !private {
        return crate::output::atomic_write(path, bytes).map_err(fail);
    }
    let dir = path.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    let result = (|| -> std::io::Result<()> {
        let mut opts = std::fs::OpenOptions::new();
        opts.write(true).create_new(true);
        #[cfg(unix)]
        {
            use std::os::unix::fs::OpenOptionsExt;
            opts.mode(0o600);
        }
        let mut f = opts.open(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result.map_err(fail)
}

#[cfg(test)]
mod tests {
    use super::{hex, unhex};

    #[test]
    fn hex_round_trip() {
        let b = [0u8, 1, 0xab, 0xff];
        assert_eq!(hex(&b), "0001abff");
        assert_eq!(unhex("0001ABff").unwrap(), b);
        assert!(unhex("abc").is_none() && unhex("zz").is_none());
    }
}

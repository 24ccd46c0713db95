//! `exobound module verify --rebuild`: does this source build to that module?
//!
//! Why this exists: a signature says who vetted a file, not what source it
//! came from. A partner who has the published source can rebuild it and
//! compare digests, and because `exobound module build` is reproducible
//! (see [`crate::modbuild`]), equal digests show that the published file is
//! what the source says. The rebuild runs in a fresh copy of the source in
//! another directory, with a target directory of its own, so that nothing
//! left by an earlier build (the author's `target/`) can stand in for it.

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use crate::modbuild::{self, BuildError};
use crate::runtime::module::sha256_hex;
use crate::text::printable;

/// Directories of a source tree that are not copied for a rebuild: build
/// output and version-control data.
const SKIPPED_DIRS: [&str; 3] = ["target", ".git", ".hg"];
/// Deepest directory nesting copied (a guard against symbolic-link loops).
const MAX_DEPTH: usize = 64;
/// Longest value of a build record quoted in a message, characters.
const MAX_QUOTED: usize = 120;

/// Why a rebuild could not be compared.
#[derive(Debug)]
pub enum RebuildError {
    /// The source directory holds no Cargo.toml.
    NotCrate(PathBuf),
    /// A file could not be read, copied or created.
    Io(PathBuf, std::io::Error),
    /// The copy did not build.
    Build(PathBuf, BuildError),
    /// No module was given and none was built in the source directory.
    NoPublished(PathBuf),
}

impl std::fmt::Display for RebuildError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            RebuildError::NotCrate(p) => write!(
                f,
                "{} is not a module crate (it has no Cargo.toml); pass the directory of the \
                 published source",
                p.display()
            ),
            RebuildError::Io(p, e) => write!(f, "{}: {e}", p.display()),
            RebuildError::Build(src, e) => {
                write!(f, "the source in {} did not rebuild: {e}", src.display())
            }
            RebuildError::NoPublished(p) => write!(
                f,
                "no module to compare with: {} does not exist; pass the published .wasm file \
                 after the source directory",
                p.display()
            ),
        }
    }
}

impl std::error::Error for RebuildError {}

/// The outcome of a rebuild: both digests and both build records.
#[derive(Clone, Debug)]
pub struct Rebuild {
    /// The source directory rebuilt.
    pub source: PathBuf,
    /// The module compared with.
    pub published: PathBuf,
    /// SHA-256 of the published module, lowercase hex.
    pub published_sha256: String,
    /// SHA-256 of the rebuilt module, lowercase hex.
    pub rebuilt_sha256: String,
    /// The published module's `exobound:build` record, if it has one.
    pub published_build: Option<String>,
    /// The rebuilt module's `exobound:build` record.
    pub rebuilt_build: Option<String>,
    /// Whether the source carries a Cargo.lock (else the rebuild chose
    /// dependency versions afresh).
    pub locked: bool,
}

/// `key: value` lines of a build record, in order.
fn record_fields(record: &str) -> Vec<(String, String)> {
    record
        .lines()
        .filter_map(|l| l.split_once(':'))
        .map(|(k, v)| (k.trim().to_string(), v.trim().to_string()))
        .collect()
}

/// A value from a module's build record, safe and short enough to print.
fn quoted(s: &str) -> String {
    let short: String = s.chars().take(MAX_QUOTED).collect();
    let more = if s.chars().count() > MAX_QUOTED { "..." } else { "" };
    format!("{}{more}", printable(&short))
}

impl Rebuild {
    /// Whether the rebuilt module is byte for byte the published one.
    pub fn matches(&self) -> bool {
        self.published_sha256 == self.rebuilt_sha256
    }

    /// The entries of the two build records that differ: (key, published
    /// value, rebuilt value), `(none)` for an entry one of them lacks.
    pub fn differences(&self) -> Vec<(String, String, String)> {
        let (Some(p), Some(r)) = (&self.published_build, &self.rebuilt_build) else {
            return Vec::new();
        };
        let (p, r) = (record_fields(p), record_fields(r));
        let get = |fields: &[(String, String)], key: &str| {
            fields.iter().find(|(k, _)| k == key).map(|(_, v)| v.clone())
        };
        let mut keys: Vec<&String> = r.iter().map(|(k, _)| k).collect();
        keys.extend(p.iter().map(|(k, _)| k).filter(|k| !r.iter().any(|(rk, _)| rk == *k)));
        keys.into_iter()
            .filter_map(|k| {
                let (a, b) = (get(&p, k), get(&r, k));
                (a != b).then(|| {
                    let none = || "(none)".to_string();
                    (k.clone(), a.unwrap_or_else(none), b.unwrap_or_else(none))
                })
            })
            .collect()
    }

    /// What the comparison found, naming both digests; on a mismatch, why
    /// it probably differs and what to do.
    pub fn summary(&self) -> String {
        let (src, published) = (self.source.display(), self.published.display());
        let mut s = if self.matches() {
            format!(
                "the rebuild matches: {published} and a fresh build of the source in {src}, \
                 made in another directory, both have sha256 {}\n",
                self.published_sha256
            )
        } else {
            format!(
                "the rebuild of the source in {src} does not match {published}:\n  \
                 published sha256 {}\n  rebuilt   sha256 {}\n",
                self.published_sha256, self.rebuilt_sha256
            )
        };
        if let Some(r) = &self.rebuilt_build {
            let fields = record_fields(r);
            let pick = |key: &str| {
                fields.iter().find(|(k, _)| k == key).map(|(_, v)| v.as_str()).unwrap_or("?")
            };
            s += &format!(
                "  rebuilt with rustc {} (commit {}), exobound-sdk {}\n",
                pick("rustc"),
                pick("rustc-commit"),
                pick("exobound-sdk")
            );
        }
        if !self.locked {
            s += "  the source has no Cargo.lock, so the rebuild chose dependency versions \
                  afresh; publish Cargo.lock with the source\n";
        }
        if self.matches() {
            return s;
        }
        let differences = self.differences();
        if self.published_build.is_none() {
            s += &format!(
                "  {published} has no `{}` section: it was not written by `exobound module \
                 build` (a plain cargo build neither remaps paths nor records the toolchain), \
                 so no rebuild can match it; ask for the file that `exobound module build` wrote\n",
                modbuild::BUILD_SECTION
            );
        } else if !differences.is_empty() {
            s += "  the two builds differ in:\n";
            for (key, p, r) in &differences {
                s += &format!(
                    "    {}: published {}, rebuilt {}\n",
                    quoted(key),
                    quoted(p),
                    quoted(r)
                );
            }
            if differences.iter().any(|(k, _, _)| k.starts_with("rustc") || k == "llvm") {
                s += "  rebuild with the published toolchain: `rustup toolchain install \
                      VERSION`, then `RUSTUP_TOOLCHAIN=VERSION exobound module verify --rebuild \
                      ...` (or a rust-toolchain.toml in the source)\n";
            }
        } else {
            s += "  the toolchain and SDK version are the same, so the source (or its \
                  Cargo.lock) is not the one that built the published module\n";
        }
        s
    }
}

/// The module `exobound module build` leaves for the crate in `src`: in
/// `$CARGO_TARGET_DIR` if set, else in `src/target`.
pub fn built_module(src: &Path) -> Result<PathBuf, RebuildError> {
    let manifest = src.join("Cargo.toml");
    if !manifest.is_file() {
        return Err(RebuildError::NotCrate(src.to_path_buf()));
    }
    let lib =
        modbuild::lib_name(&manifest).map_err(|e| RebuildError::Build(src.to_path_buf(), e))?;
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| src.join("target"));
    let path = modbuild::artifact_path(&target, &lib);
    if path.is_file() { Ok(path) } else { Err(RebuildError::NoPublished(path)) }
}

/// A fresh directory under the system's temporary directory, removed
/// (with everything in it) when dropped.
struct WorkDir(PathBuf);

impl WorkDir {
    fn new() -> Result<WorkDir, RebuildError> {
        static N: AtomicU64 = AtomicU64::new(0);
        let base = std::env::temp_dir();
        loop {
            let n = N.fetch_add(1, Ordering::Relaxed);
            let p = base.join(format!("exobound-rebuild-{}-{n}", std::process::id()));
            match std::fs::create_dir(&p) {
                Ok(()) => return Ok(WorkDir(p)),
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => continue,
                Err(e) => return Err(RebuildError::Io(p, e)),
            }
        }
    }
}

impl Drop for WorkDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Copy the source tree `from` into `to`, leaving out [`SKIPPED_DIRS`] and
/// following symbolic links (a crate may link its SDK copy).
fn copy_tree(from: &Path, to: &Path, depth: usize) -> Result<(), RebuildError> {
    if depth > MAX_DEPTH {
        return Err(RebuildError::Io(
            from.to_path_buf(),
            std::io::Error::other("directories nested too deep (a symbolic-link loop?)"),
        ));
    }
    std::fs::create_dir_all(to).map_err(|e| RebuildError::Io(to.to_path_buf(), e))?;
    let entries = std::fs::read_dir(from).map_err(|e| RebuildError::Io(from.to_path_buf(), e))?;
    for entry in entries {
        let entry = entry.map_err(|e| RebuildError::Io(from.to_path_buf(), e))?;
        let (src, dst) = (entry.path(), to.join(entry.file_name()));
        if src.is_dir() {
            let name = entry.file_name();
            if SKIPPED_DIRS.iter().any(|s| name == *s) {
                continue;
            }
            copy_tree(&src, &dst, depth + 1)?;
        } else {
            std::fs::copy(&src, &dst).map_err(|e| RebuildError::Io(src.clone(), e))?;
        }
    }
    Ok(())
}

/// Rebuild the module crate in `src` in a fresh copy in another directory,
/// with its own target directory, and compare the result with the module
/// file `published`. A mismatch is an `Ok` whose [`Rebuild::matches`] is
/// false; errors are failures to read, copy or build.
pub fn rebuild_and_compare(src: &Path, published: &Path) -> Result<Rebuild, RebuildError> {
    if !src.join("Cargo.toml").is_file() {
        return Err(RebuildError::NotCrate(src.to_path_buf()));
    }
    let published_bytes =
        std::fs::read(published).map_err(|e| RebuildError::Io(published.to_path_buf(), e))?;
    let work = WorkDir::new()?;
    let copy = work.0.join("source");
    copy_tree(src, &copy, 0)?;
    let wasm = modbuild::build_crate_in(&copy, &work.0.join("target"))
        .map_err(|e| RebuildError::Build(src.to_path_buf(), e))?;
    let rebuilt = std::fs::read(&wasm).map_err(|e| RebuildError::Io(wasm.clone(), e))?;
    Ok(Rebuild {
        source: src.to_path_buf(),
        published: published.to_path_buf(),
        published_sha256: sha256_hex(&published_bytes),
        rebuilt_sha256: sha256_hex(&rebuilt),
        published_build: modbuild::read_build_section(&published_bytes),
        rebuilt_build: modbuild::read_build_section(&rebuilt),
        locked: src.join("Cargo.lock").is_file(),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn report(published: Option<&str>, rebuilt: &str, same: bool) -> Rebuild {
        Rebuild {
            source: "src".into(),
            published: "m.wasm".into(),
            published_sha256: "aa".repeat(32),
            rebuilt_sha256: if same { "aa".repeat(32) } else { "bb".repeat(32) },
            published_build: published.map(str::to_string),
            rebuilt_build: Some(rebuilt.to_string()),
            locked: true,
        }
    }

    #[test]
    fn a_mismatch_names_both_digests_and_the_toolchain() {
        let r = report(
            Some("rustc: 1.94.0\nrustc-commit: abc\nexobound-sdk: 0.1.0\n"),
            "rustc: 1.95.0\nrustc-commit: def\nexobound-sdk: 0.1.0\n",
            false,
        );
        let s = r.summary();
        assert!(s.contains(&"aa".repeat(32)) && s.contains(&"bb".repeat(32)), "{s}");
        assert!(s.contains("rustc: published 1.94.0, rebuilt 1.95.0"), "{s}");
        assert!(s.contains("RUSTUP_TOOLCHAIN"), "{s}");
        assert_eq!(r.differences().len(), 2);
    }

    #[test]
    fn a_mismatch_with_the_same_toolchain_blames_the_source() {
        let rec = "rustc: 1.95.0\nexobound-sdk: 0.1.0\n";
        let s = report(Some(rec), rec, false).summary();
        assert!(s.contains("source (or its Cargo.lock) is not the one"), "{s}");
        let s = report(None, rec, false).summary();
        assert!(s.contains("has no `exobound:build` section"), "{s}");
        let s = report(Some(rec), rec, true).summary();
        assert!(s.starts_with("the rebuild matches"), "{s}");
    }

    #[test]
    fn a_hostile_build_record_prints_safely() {
        let r = report(Some("rustc: \u{1b}[2J1.0\n"), "rustc: 1.95.0\n", false);
        let s = r.summary();
        assert!(!s.contains('\u{1b}'), "{s}");
        assert!(s.contains("\\u{1b}[2J1.0"), "{s}");
    }
}

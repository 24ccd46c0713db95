//! Building module crates to `.wasm` with cargo and the wasm32 target,
//! reproducibly.
//!
//! Why this exists: three places build process modules from source: the
//! host's build script (the standard modules in `processes/`), the test
//! crate's build script (hostile fixtures) and `exobound module build`. They
//! must drive cargo the same way, so the logic lives here, using only
//! `std` so that build scripts can include this file with `#[path]`.
//!
//! A build must give the same bytes for the same source, dependency
//! versions and toolchain wherever it runs, because a module is known by its
//! SHA-256 digest. So every build fixes the release profile (fat LTO, one
//! codegen unit, `panic = abort`, no debug information) and remaps every
//! absolute path rustc could embed (panic locations name source files) to a
//! fixed name: the crate's workspace root, path dependencies outside it,
//! `$CARGO_HOME` (registry sources), the target directory and the
//! toolchain's sysroot. `exobound module build` then appends an
//! `exobound:build` custom section that records the toolchain and SDK
//! version, so that a rebuild that differs can say why.
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
    /// `rustc -vV` could not be run or did not name a release and commit.
    Toolchain(String),
    /// The built `.wasm` file could not be read, parsed or rewritten.
    Stamp(PathBuf, String),
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
            BuildError::Toolchain(e) => write!(f, "cannot identify the Rust toolchain: {e}"),
            BuildError::Stamp(p, e) => write!(
                f,
                "cannot record the toolchain in the `{BUILD_SECTION}` section of {}: {e}",
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

/// The custom section `exobound module build` appends to a module: the
/// toolchain and SDK version that built it, as UTF-8 `key: value` lines.
pub const BUILD_SECTION: &str = "exobound:build";

/// The release profile of every module build, as `CARGO_PROFILE_RELEASE_*`
/// overrides of whatever the crate's own `[profile.release]` says. Modules
/// ship as single files: optimise across crates (SDK, libm, law), and keep
/// nothing that depends on the build machine (no debug information).
pub const PROFILE: [(&str, &str); 7] = [
    ("OPT_LEVEL", "3"),
    ("LTO", "fat"),
    ("CODEGEN_UNITS", "1"),
    ("PANIC", "abort"),
    ("DEBUG", "false"),
    ("STRIP", "debuginfo"),
    ("INCREMENTAL", "false"),
];

/// Variables that the caller's environment (or an outer cargo running a
/// build script) may set and that would change the nested build.
const CLEARED_ENV: [&str; 10] = [
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
];

fn rustc() -> String {
    std::env::var("RUSTC").unwrap_or_else(|_| "rustc".to_string())
}

fn cargo() -> String {
    std::env::var("CARGO").unwrap_or_else(|_| "cargo".to_string())
}

/// `path` made absolute against the current directory (not canonicalised,
/// so that a path through a symbolic link stays the path cargo sees).
fn absolute(path: &Path) -> PathBuf {
    let joined = if path.is_absolute() {
        path.to_path_buf()
    } else {
        std::env::current_dir().map(|d| d.join(path)).unwrap_or_else(|_| path.to_path_buf())
    };
    // `dir/.` and `dir` must remap alike.
    joined.components().filter(|c| !matches!(c, std::path::Component::CurDir)).collect()
}

/// The sysroot of the toolchain that rustup selects in `dir`.
fn sysroot(dir: &Path) -> Option<PathBuf> {
    let out = Command::new(rustc()).args(["--print", "sysroot"]).current_dir(dir).output().ok()?;
    let text = String::from_utf8_lossy(&out.stdout).trim().to_string();
    (out.status.success() && !text.is_empty()).then(|| PathBuf::from(text))
}

/// Whether the toolchain that rustup selects in `dir` has the wasm32
/// standard library.
pub fn wasm_target_installed(dir: &Path) -> bool {
    let Some(sysroot) = sysroot(dir) else { return false };
    sysroot.join("lib/rustlib").join(WASM_TARGET).join("lib").is_dir()
}

/// Where cargo puts the release `.wasm` of library `lib` under `target_dir`.
pub fn artifact_path(target_dir: &Path, lib: &str) -> PathBuf {
    target_dir.join(WASM_TARGET).join("release").join(format!("{lib}.wasm"))
}

/// Where cargo keeps registry and git sources: `$CARGO_HOME`, else
/// `.cargo` in the home directory.
pub fn cargo_home() -> Option<PathBuf> {
    if let Some(h) = std::env::var_os("CARGO_HOME") {
        return Some(absolute(Path::new(&h)));
    }
    std::env::var_os("HOME")
        .or_else(|| std::env::var_os("USERPROFILE"))
        .map(|h| PathBuf::from(h).join(".cargo"))
}

/// The root directory of the cargo workspace that holds `manifest` (the
/// crate's own directory when, like a scaffolded module, it is its own
/// workspace).
pub fn workspace_root(manifest: &Path) -> PathBuf {
    let fallback = manifest.parent().map(Path::to_path_buf).unwrap_or_default();
    let out = Command::new(cargo())
        .args(["locate-project", "--workspace", "--message-format", "plain", "--manifest-path"])
        .arg(manifest)
        .output();
    match out {
        Ok(o) if o.status.success() => {
            let text = String::from_utf8_lossy(&o.stdout).trim().to_string();
            Path::new(&text).parent().map(Path::to_path_buf).unwrap_or(fallback)
        }
        _ => fallback,
    }
}

/// The path remappings of a build, as (absolute prefix, fixed name).
///
/// rustc applies the last remapping that matches, so the list is ordered
/// from the shortest prefix to the longest: a target directory inside the
/// crate is named `target`, not `workspace/target`.
pub fn path_remaps(
    root: &Path,
    target_dir: &Path,
    outside: &[PathBuf],
    sysroot: Option<&Path>,
) -> Vec<(PathBuf, String)> {
    let mut remaps = vec![(root.to_path_buf(), "workspace".to_string())];
    for dir in outside {
        let name = dir.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default();
        remaps.push((dir.clone(), format!("path-dependency/{name}")));
    }
    if let Some(home) = cargo_home() {
        remaps.push((home, "cargo-home".to_string()));
    }
    if let Some(sysroot) = sysroot {
        remaps.push((sysroot.to_path_buf(), "rust-sysroot".to_string()));
    }
    remaps.push((target_dir.to_path_buf(), "target".to_string()));
    remaps.sort_by_key(|(from, _)| from.as_os_str().len());
    let mut unique: Vec<(PathBuf, String)> = Vec::with_capacity(remaps.len());
    for r in remaps {
        if !unique.iter().any(|u| u.0 == r.0) {
            unique.push(r);
        }
    }
    unique
}

/// `CARGO_ENCODED_RUSTFLAGS` for `remaps`: one `--remap-path-prefix` each,
/// separated by the unit separator (0x1f) as cargo expects.
pub fn encoded_rustflags(remaps: &[(PathBuf, String)]) -> String {
    remaps
        .iter()
        .map(|(from, to)| format!("--remap-path-prefix={}={to}", from.display()))
        .collect::<Vec<_>>()
        .join("\u{1f}")
}

/// Build the crates named by `manifest` (a Cargo.toml) to wasm32 in release
/// mode, into `target_dir`.
///
/// `packages` selects packages of one workspace (`-p NAME`) when the
/// manifest is a workspace root; leave it empty to build the one crate.
/// The environment that cargo gives build scripts (target flags, wrappers)
/// is removed so that the nested build is an ordinary wasm32 build, with
/// the fixed [`PROFILE`] and the workspace, `$CARGO_HOME`, sysroot and
/// target paths remapped.
pub fn build(manifest: &Path, packages: &[String], target_dir: &Path) -> Result<(), BuildError> {
    let manifest = absolute(manifest);
    let root = workspace_root(&manifest);
    build_with(&manifest, packages, &absolute(target_dir), &root, &[])
}

/// [`build`] with the workspace root known and path dependencies outside
/// it (`outside`, their package directories) remapped too.
fn build_with(
    manifest: &Path,
    packages: &[String],
    target_dir: &Path,
    root: &Path,
    outside: &[PathBuf],
) -> Result<(), BuildError> {
    if !wasm_target_installed(root) {
        return Err(BuildError::TargetMissing);
    }
    let sysroot = sysroot(root);
    let remaps = path_remaps(root, target_dir, outside, sysroot.as_deref());
    let mut cmd = Command::new(cargo());
    cmd.arg("build")
        .arg("--release")
        .arg("--target")
        .arg(WASM_TARGET)
        .arg("--manifest-path")
        .arg(manifest)
        .arg("--target-dir")
        .arg(target_dir)
        // rustup picks the toolchain from the directory a command runs in.
        .current_dir(root);
    for p in packages {
        cmd.arg("-p").arg(p);
    }
    for var in CLEARED_ENV {
        cmd.env_remove(var);
    }
    for (key, value) in PROFILE {
        cmd.env(format!("CARGO_PROFILE_RELEASE_{key}"), value);
    }
    cmd.env("CARGO_ENCODED_RUSTFLAGS", encoded_rustflags(&remaps));
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

/// Package directories of the dependencies of `manifest` that lie neither
/// in the workspace at `root` nor under `$CARGO_HOME`: path dependencies
/// outside the crate, whose absolute paths would otherwise reach the
/// module. Empty if `cargo metadata` fails (the build then reports why).
fn outside_path_packages(manifest: &Path, root: &Path) -> Vec<PathBuf> {
    let mut cmd = Command::new(cargo());
    cmd.args(["metadata", "--format-version", "1", "--filter-platform", WASM_TARGET])
        .arg("--manifest-path")
        .arg(manifest)
        .current_dir(root);
    for var in CLEARED_ENV {
        cmd.env_remove(var);
    }
    let Ok(out) = cmd.output() else { return Vec::new() };
    if !out.status.success() {
        return Vec::new();
    }
    let json = String::from_utf8_lossy(&out.stdout);
    let home = cargo_home();
    let mut dirs: Vec<PathBuf> = json_strings_after(&json, "\"manifest_path\":")
        .into_iter()
        .filter_map(|m| Path::new(&m).parent().map(Path::to_path_buf))
        .filter(|d| !d.starts_with(root) && !home.as_ref().is_some_and(|h| d.starts_with(h)))
        .collect();
    dirs.sort();
    dirs.dedup();
    dirs
}

/// Every JSON string value that directly follows `key` in `json` (a
/// minimal reader for `cargo metadata`, which this std-only file cannot
/// parse with a JSON library).
fn json_strings_after(json: &str, key: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut rest = json;
    while let Some(i) = rest.find(key) {
        rest = rest[i + key.len()..].trim_start();
        let Some(body) = rest.strip_prefix('"') else { continue };
        let mut s = String::new();
        let mut chars = body.char_indices();
        let mut end = body.len();
        while let Some((j, c)) = chars.next() {
            match c {
                '"' => {
                    end = j + 1;
                    break;
                }
                '\\' => match chars.next().map(|(_, e)| e) {
                    Some('n') => s.push('\n'),
                    Some('t') => s.push('\t'),
                    Some('r') => s.push('\r'),
                    Some('b') => s.push('\u{8}'),
                    Some('f') => s.push('\u{c}'),
                    Some('u') => {
                        let hex: String = chars.by_ref().take(4).map(|(_, h)| h).collect();
                        let unit = u32::from_str_radix(&hex, 16).unwrap_or(0xfffd);
                        s.push(char::from_u32(unit).unwrap_or('\u{fffd}'));
                    }
                    Some(other) => s.push(other),
                    None => break,
                },
                c => s.push(c),
            }
        }
        out.push(s);
        rest = &body[end.min(body.len())..];
    }
    out
}

/// What built a module: the toolchain and the SDK version, recorded in its
/// [`BUILD_SECTION`]. Nothing here depends on the machine or directory.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct BuildInfo {
    /// rustc release, e.g. `1.95.0`.
    pub rustc: String,
    /// rustc commit hash (`unknown` for a toolchain built without one).
    pub rustc_commit: String,
    /// LLVM version rustc was built with, if it says.
    pub llvm: Option<String>,
    /// Versions of `exobound-sdk` in the crate's Cargo.lock (empty if none).
    pub sdk: Vec<String>,
}

impl BuildInfo {
    /// Ask the toolchain that rustup selects in `dir`, and read the SDK
    /// version from the Cargo.lock of the workspace at `root`.
    pub fn probe(dir: &Path, root: &Path) -> Result<BuildInfo, BuildError> {
        let out = Command::new(rustc())
            .arg("-vV")
            .current_dir(dir)
            .output()
            .map_err(|e| BuildError::Toolchain(format!("cannot run `{} -vV`: {e}", rustc())))?;
        let text = String::from_utf8_lossy(&out.stdout).to_string();
        let field = |key: &str| {
            text.lines()
                .find_map(|l| l.strip_prefix(key))
                .map(|v| v.trim().to_string())
                .filter(|v| !v.is_empty())
        };
        let rustc = field("release:").ok_or_else(|| {
            BuildError::Toolchain(format!("`rustc -vV` printed no `release:` line:\n{text}"))
        })?;
        let lock = std::fs::read_to_string(root.join("Cargo.lock")).unwrap_or_default();
        Ok(BuildInfo {
            rustc,
            rustc_commit: field("commit-hash:").unwrap_or_else(|| "unknown".to_string()),
            llvm: field("LLVM version:"),
            sdk: locked_versions(&lock, "exobound-sdk"),
        })
    }

    /// The section's text: one `key: value` line each.
    pub fn to_text(&self) -> String {
        let sdk = if self.sdk.is_empty() { "none".to_string() } else { self.sdk.join(", ") };
        let profile =
            PROFILE.iter().map(|(k, v)| format!("{}={v}", k.to_lowercase().replace('_', "-")));
        let mut s = format!("rustc: {}\nrustc-commit: {}\n", self.rustc, self.rustc_commit);
        if let Some(llvm) = &self.llvm {
            s += &format!("llvm: {llvm}\n");
        }
        s += &format!("exobound-sdk: {sdk}\ntarget: {WASM_TARGET}\n");
        s += &format!("profile: release, {}\n", profile.collect::<Vec<_>>().join(", "));
        s
    }
}

/// The versions of package `name` in the text of a Cargo.lock.
fn locked_versions(lock: &str, name: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut current: Option<&str> = None;
    for line in lock.lines().map(str::trim) {
        if line == "[[package]]" {
            current = None;
        } else if let Some(v) = line.strip_prefix("name = ") {
            current = Some(v.trim_matches('"'));
        } else if let Some(v) = line.strip_prefix("version = ")
            && current == Some(name)
        {
            out.push(v.trim_matches('"').to_string());
        }
    }
    out.sort();
    out.dedup();
    out
}

/// One custom section of a wasm binary.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CustomSection {
    /// Its name.
    pub name: String,
    /// Byte range of its payload (after the name) in the file.
    pub data: std::ops::Range<usize>,
    /// Byte range of the whole section (id, size, name, payload).
    pub whole: std::ops::Range<usize>,
}

/// Read an unsigned LEB128 number of at most 32 bits at `*pos`.
fn read_leb_u32(bytes: &[u8], pos: &mut usize) -> Option<u32> {
    let mut value: u64 = 0;
    for shift in (0..35).step_by(7) {
        let b = *bytes.get(*pos)?;
        *pos += 1;
        value |= u64::from(b & 0x7f) << shift;
        if b & 0x80 == 0 {
            return u32::try_from(value).ok();
        }
    }
    None
}

/// Append `n` as unsigned LEB128.
fn write_leb_u32(out: &mut Vec<u8>, mut n: u32) {
    loop {
        let byte = (n & 0x7f) as u8;
        n >>= 7;
        if n == 0 {
            out.push(byte);
            return;
        }
        out.push(byte | 0x80);
    }
}

/// The custom sections (id 0) of the wasm binary `bytes`, in file order.
/// Checks the header and that every section's size fits the file.
pub fn custom_sections(bytes: &[u8]) -> Result<Vec<CustomSection>, String> {
    if bytes.len() < 8 || &bytes[..4] != b"\0asm" || bytes[4..8] != [1, 0, 0, 0] {
        return Err("not a WebAssembly 1.0 module (bad magic number or version)".to_string());
    }
    let mut pos = 8;
    let mut out = Vec::new();
    while pos < bytes.len() {
        let start = pos;
        let id = bytes[pos];
        pos += 1;
        let size = read_leb_u32(bytes, &mut pos)
            .ok_or_else(|| format!("section at byte {start} has a malformed size"))?;
        let end = pos
            .checked_add(size as usize)
            .filter(|&e| e <= bytes.len())
            .ok_or_else(|| format!("section at byte {start} runs past the end of the file"))?;
        if id == 0 {
            let mut p = pos;
            let len = read_leb_u32(bytes, &mut p)
                .ok_or_else(|| format!("custom section at byte {start} has a malformed name"))?;
            let name_end = p
                .checked_add(len as usize)
                .filter(|&e| e <= end)
                .ok_or_else(|| format!("custom section at byte {start} has a name too long"))?;
            let name = String::from_utf8_lossy(&bytes[p..name_end]).to_string();
            out.push(CustomSection { name, data: name_end..end, whole: start..end });
        }
        pos = end;
    }
    Ok(out)
}

/// The text of the module's [`BUILD_SECTION`], if it has one (the first, if
/// a malformed file has several).
pub fn read_build_section(bytes: &[u8]) -> Option<String> {
    let sections = custom_sections(bytes).ok()?;
    let s = sections.into_iter().find(|s| s.name == BUILD_SECTION)?;
    Some(String::from_utf8_lossy(&bytes[s.data]).to_string())
}

/// `bytes` with every [`BUILD_SECTION`] removed and one holding `text`
/// appended at the end. Custom sections may appear anywhere and mean
/// nothing to the runtime, so the code and the other sections are unchanged.
pub fn with_build_section(bytes: &[u8], text: &str) -> Result<Vec<u8>, String> {
    let sections = custom_sections(bytes)?;
    let mut out = Vec::with_capacity(bytes.len() + text.len() + 32);
    let mut from = 0;
    for s in sections.iter().filter(|s| s.name == BUILD_SECTION) {
        out.extend_from_slice(&bytes[from..s.whole.start]);
        from = s.whole.end;
    }
    out.extend_from_slice(&bytes[from..]);
    let too_long = |_| "the build record is too long".to_string();
    let mut payload = Vec::new();
    write_leb_u32(&mut payload, u32::try_from(BUILD_SECTION.len()).map_err(too_long)?);
    payload.extend_from_slice(BUILD_SECTION.as_bytes());
    payload.extend_from_slice(text.as_bytes());
    out.push(0);
    write_leb_u32(&mut out, u32::try_from(payload.len()).map_err(too_long)?);
    out.extend_from_slice(&payload);
    Ok(out)
}

/// Rewrite the module at `path` with a [`BUILD_SECTION`] holding `text`,
/// through a temporary file so that a reader never sees half a module (and
/// so that a hard link cargo keeps to the file is left as cargo wrote it).
pub fn stamp(path: &Path, text: &str) -> Result<(), BuildError> {
    let fail = |e: String| BuildError::Stamp(path.to_path_buf(), e);
    let bytes = std::fs::read(path).map_err(|e| fail(e.to_string()))?;
    let stamped = with_build_section(&bytes, text).map_err(fail)?;
    let name = path.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.tmp"));
    std::fs::write(&tmp, stamped).map_err(|e| fail(e.to_string()))?;
    std::fs::rename(&tmp, path).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        fail(e.to_string())
    })
}

/// Build the module crate in `dir` to wasm in `target_dir`, record the
/// toolchain and SDK version in its [`BUILD_SECTION`], and return the
/// `.wasm` path. The same source, dependency versions (Cargo.lock) and
/// toolchain give the same bytes wherever `dir` and `target_dir` lie.
pub fn build_crate_in(dir: &Path, target_dir: &Path) -> Result<PathBuf, BuildError> {
    let dir = absolute(dir);
    let target_dir = absolute(target_dir);
    let manifest = dir.join("Cargo.toml");
    let lib = lib_name(&manifest)?;
    let root = workspace_root(&manifest);
    let outside = outside_path_packages(&manifest, &root);
    build_with(&manifest, &[], &target_dir, &root, &outside)?;
    let artifact = artifact_path(&target_dir, &lib);
    if !artifact.is_file() {
        return Err(BuildError::NoArtifact(artifact));
    }
    let info = BuildInfo::probe(&dir, &root)?;
    stamp(&artifact, &info.to_text())?;
    Ok(artifact)
}

/// [`build_crate_in`] with the target directory `$CARGO_TARGET_DIR` if set,
/// else `dir/target`.
pub fn build_crate(dir: &Path) -> Result<PathBuf, BuildError> {
    let target_dir = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| dir.join("target"));
    build_crate_in(dir, &target_dir)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The smallest valid module: magic, version 1, no sections.
    const EMPTY: [u8; 8] = [0, b'a', b's', b'm', 1, 0, 0, 0];

    #[test]
    fn leb128_round_trips() {
        // Unsigned LEB128 as the WebAssembly Core Specification 1.0 (W3C
        // 2019, §5.2.2) defines it; the examples are those of the DWARF
        // Debugging Information Format, Version 4 (2010), §7.6, Figure 22
        // (from memory): 2, 127, 128, 129, 130 and 12857.
        for (n, bytes) in [
            (2, &[0x02][..]),
            (127, &[0x7f]),
            (128, &[0x80, 0x01]),
            (129, &[0x81, 0x01]),
            (130, &[0x82, 0x01]),
            (12_857, &[0xb9, 0x64]),
        ] {
            let mut out = Vec::new();
            write_leb_u32(&mut out, n);
            assert_eq!(out, bytes, "{n}");
        }
        for n in [0, 1, 127, 128, 16_383, 16_384, u32::MAX] {
            let mut out = Vec::new();
            write_leb_u32(&mut out, n);
            let mut pos = 0;
            assert_eq!(read_leb_u32(&out, &mut pos), Some(n));
            assert_eq!(pos, out.len());
        }
        // Six bytes, or a value above 32 bits, is malformed.
        assert_eq!(read_leb_u32(&[0x80, 0x80, 0x80, 0x80, 0x80, 0x00], &mut 0), None);
        assert_eq!(read_leb_u32(&[0xff, 0xff, 0xff, 0xff, 0x7f], &mut 0), None);
    }

    #[test]
    fn build_section_is_appended_and_replaced() {
        let once = with_build_section(&EMPTY, "rustc: 1.0.0\n").unwrap();
        // A custom section: id 0, payload size, name length, name, bytes
        // (WebAssembly Core Specification 1.0, §5.5.3).
        let mut expected = EMPTY.to_vec();
        let text = b"rustc: 1.0.0\n";
        expected.push(0);
        expected.push((1 + BUILD_SECTION.len() + text.len()) as u8);
        expected.push(BUILD_SECTION.len() as u8);
        expected.extend_from_slice(BUILD_SECTION.as_bytes());
        expected.extend_from_slice(text);
        assert_eq!(once, expected);
        assert_eq!(read_build_section(&once).as_deref(), Some("rustc: 1.0.0\n"));
        // Stamping again replaces the record: there is never a second one.
        let twice = with_build_section(&once, "rustc: 2.0.0\n").unwrap();
        assert_eq!(twice, with_build_section(&EMPTY, "rustc: 2.0.0\n").unwrap());
        let names: Vec<String> =
            custom_sections(&twice).unwrap().into_iter().map(|s| s.name).collect();
        assert_eq!(names, vec![BUILD_SECTION.to_string()]);
        // Not wasm, or a section running past the end, is refused.
        assert!(with_build_section(b"\x7fELF\x02\x01\x01\x00", "x").is_err());
        let mut cut = once.clone();
        cut.truncate(cut.len() - 1);
        assert!(custom_sections(&cut).is_err());
    }

    #[test]
    fn build_record_names_toolchain_and_sdk() {
        let lock = "[[package]]\nname = \"exobound-sdk\"\nversion = \"0.1.0\"\n\n\
                    [[package]]\nname = \"libm\"\nversion = \"0.2.15\"\n";
        assert_eq!(locked_versions(lock, "exobound-sdk"), vec!["0.1.0"]);
        let info = BuildInfo {
            rustc: "1.95.0".into(),
            rustc_commit: "59807616e1fa2540724bfbac14d7976d7e4a3860".into(),
            llvm: Some("22.1.2".into()),
            sdk: locked_versions(lock, "exobound-sdk"),
        };
        let text = info.to_text();
        assert!(text.starts_with("rustc: 1.95.0\nrustc-commit: 59807616e1fa"), "{text}");
        assert!(text.contains("exobound-sdk: 0.1.0\n"), "{text}");
        assert!(text.contains("lto=fat") && text.contains("codegen-units=1"), "{text}");
    }

    #[test]
    fn remaps_run_from_general_to_specific() {
        let root = Path::new("/a/crate");
        let target = Path::new("/a/crate/target");
        let remaps = path_remaps(root, target, &[PathBuf::from("/b/sdk")], None);
        let pos = |name: &str| remaps.iter().position(|(_, to)| to == name).unwrap();
        // rustc applies the last match, so the target dir must come after its crate.
        assert!(pos("workspace") < pos("target"));
        assert!(remaps.iter().any(|(from, to)| from == Path::new("/b/sdk") && to.ends_with("sdk")));
        let flags = encoded_rustflags(&remaps);
        assert!(flags.contains("--remap-path-prefix=/a/crate=workspace\u{1f}"));
    }

    #[test]
    fn json_strings_are_decoded() {
        let json = r#"{"packages":[{"manifest_path":"/x/a b/Cargo.toml"},{"manifest_path": "/y/q\"\\\u00e9/Cargo.toml"}]}"#;
        assert_eq!(
            json_strings_after(json, "\"manifest_path\":"),
            vec!["/x/a b/Cargo.toml".to_string(), "/y/q\"\\\u{e9}/Cargo.toml".to_string()]
        );
    }
}

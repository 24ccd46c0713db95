//! The compiled-module cache: one verified artifact per digest and engine,
//! reused; corrupted, swapped or foreign entries are never executed; the
//! directory is private.

use std::os::unix::fs::PermissionsExt;
use std::path::{Path, PathBuf};

use exobound::runtime::{HostError, Runtime, RuntimeConfig};

use crate::support::*;

fn config(dir: &Path) -> RuntimeConfig {
    RuntimeConfig { cache_dir: Some(dir.to_path_buf()), ..Default::default() }
}

/// The cache entries (not the key) in `dir`.
fn entries(dir: &Path) -> Vec<PathBuf> {
    let mut v: Vec<PathBuf> = std::fs::read_dir(dir)
        .unwrap()
        .flatten()
        .map(|e| e.path())
        .filter(|p| p.extension().is_some_and(|x| x == "cwasm"))
        .collect();
    v.sort();
    v
}

/// Load `name` into a fresh runtime on `dir`; the runtime's warnings.
fn load_and_run(dir: &Path, name: &str) -> Vec<String> {
    let rt = Runtime::new(config(dir)).unwrap();
    rt.load(&exobound::standard_module(name)).unwrap();
    assert_host_still_works(&rt);
    rt.notices()
}

#[test]
fn compiled_module_is_cached_on_disk_and_reused() {
    let dir = TempDir::new("cache");
    let cache = dir.path().join("modules");
    let path = exobound::standard_module("photoionization");
    let digest = {
        let rt = Runtime::new(config(&cache)).unwrap();
        let m = rt.load(&path).unwrap();
        // Within one runtime the same digest is compiled once.
        let again = rt.load(&path).unwrap();
        assert!(std::sync::Arc::ptr_eq(&m, &again));
        m.sha256().to_string()
    };
    let files = entries(&cache);
    assert_eq!(files.len(), 1, "{files:?}");
    let name = files[0].file_name().unwrap().to_string_lossy().to_string();
    assert!(name.starts_with(&digest), "{name}");
    // The directory is made private, the key file too.
    let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
    assert_eq!(mode(&cache), 0o700);
    assert_eq!(mode(&cache.join(exobound::runtime::cache::KEY_FILE)), 0o600);
    // A new runtime loads the verified artifact without a warning.
    let before = std::fs::read(&files[0]).unwrap();
    assert!(load_and_run(&cache, "photoionization").is_empty());
    assert_eq!(std::fs::read(&files[0]).unwrap(), before, "a good entry is reused as is");
}

#[test]
fn a_corrupted_entry_is_detected_reported_and_recompiled() {
    let dir = TempDir::new("cache-flip");
    let cache = dir.path().join("modules");
    assert!(load_and_run(&cache, "photoionization").is_empty());
    let entry = entries(&cache).remove(0);
    let good = std::fs::read(&entry).unwrap();
    // Flip one byte in the middle of the native code: before this cache
    // verified its entries, this gave SIGILL on every later run.
    let mut bad = good.clone();
    let mid = bad.len() / 2;
    bad[mid] ^= 0x40;
    std::fs::write(&entry, &bad).unwrap();
    let notices = load_and_run(&cache, "photoionization");
    assert_eq!(notices.len(), 1, "{notices:?}");
    assert!(
        notices[0].contains("rejected") && notices[0].contains("photoionization"),
        "{notices:?}"
    );
    assert!(!notices[0].contains('\n'));
    // The entry was rewritten with a good artifact, which verifies again.
    assert_eq!(std::fs::read(&entry).unwrap(), good);
    assert!(load_and_run(&cache, "photoionization").is_empty());
    // Plain garbage and a truncated entry are refused the same way.
    std::fs::write(&entry, b"garbage").unwrap();
    assert_eq!(load_and_run(&cache, "photoionization").len(), 1);
    std::fs::write(&entry, &good[..good.len() / 3]).unwrap();
    assert_eq!(load_and_run(&cache, "photoionization").len(), 1);
}

#[test]
fn an_entry_swapped_from_another_module_is_never_executed() {
    let dir = TempDir::new("cache-swap");
    let cache = dir.path().join("modules");
    load_and_run(&cache, "photoionization");
    let ion = entries(&cache).remove(0);
    load_and_run(&cache, "surface-accommodation");
    let all = entries(&cache);
    let stick = all.iter().find(|p| **p != ion).unwrap().clone();
    // Copy the sticking module's verified entry into photoionization's slot.
    std::fs::copy(&stick, &ion).unwrap();
    let rt = Runtime::new(config(&cache)).unwrap();
    let m = rt.load(&exobound::standard_module("photoionization")).unwrap();
    let notices = rt.notices();
    assert_eq!(notices.len(), 1, "{notices:?}");
    // What runs is photoionization's own law: it has the loss role and gives
    // the photoionization rate, not the sticking module's outcomes.
    let mut inst = rt.instantiate(&m, &Default::default()).unwrap().unwrap();
    let ps = particles(4);
    let mut out = vec![0.0; 4];
    inst.loss_rate(&ps, &mut out).unwrap().unwrap();
    assert!(out.iter().all(|&r| r > 1.0e-6 && r < 1.0e-3), "{out:?}");
}

#[test]
fn an_entry_from_another_cache_is_not_trusted() {
    let a = TempDir::new("cache-a");
    let b = TempDir::new("cache-b");
    let (ca, cb) = (a.path().join("m"), b.path().join("m"));
    load_and_run(&ca, "photoionization");
    load_and_run(&cb, "photoionization");
    let (ea, eb) = (entries(&ca).remove(0), entries(&cb).remove(0));
    // Same module, same engine, but signed with b's key: a rejects it.
    std::fs::copy(&eb, &ea).unwrap();
    assert_eq!(load_and_run(&ca, "photoionization").len(), 1);
}

#[test]
fn a_cache_directory_others_can_write_is_refused() {
    let dir = TempDir::new("cache-mode");
    let cache = dir.path().join("shared");
    std::fs::create_dir(&cache).unwrap();
    std::fs::set_permissions(&cache, std::fs::Permissions::from_mode(0o777)).unwrap();
    let e = Runtime::new(config(&cache)).err().expect("refused");
    assert!(matches!(e, HostError::Cache { .. }), "{e}");
    let msg = e.to_string();
    assert!(msg.contains(&cache.display().to_string()), "{msg}");
    assert!(msg.contains("0777") && msg.contains("chmod 700"), "{msg}");
    assert!(entries(&cache).is_empty(), "nothing compiled into it");
    // Group-writable is refused too; the fix in the message works.
    std::fs::set_permissions(&cache, std::fs::Permissions::from_mode(0o770)).unwrap();
    assert!(Runtime::new(config(&cache)).is_err());
    std::fs::set_permissions(&cache, std::fs::Permissions::from_mode(0o700)).unwrap();
    assert!(load_and_run(&cache, "photoionization").is_empty());
    // A key file others can read is refused.
    let key = cache.join(exobound::runtime::cache::KEY_FILE);
    std::fs::set_permissions(&key, std::fs::Permissions::from_mode(0o644)).unwrap();
    let e = Runtime::new(config(&cache)).err().expect("refused");
    assert!(e.to_string().contains("chmod 600"), "{e}");
}

#[test]
fn a_cache_directory_of_another_user_is_refused() {
    let dir = TempDir::new("cache-owner");
    // SAFETY: geteuid has no preconditions.
    let cache = if unsafe { libc::geteuid() } == 0 {
        // As root: a private directory handed to the user `nobody`.
        let c = dir.path().join("theirs");
        std::fs::create_dir(&c).unwrap();
        std::fs::set_permissions(&c, std::fs::Permissions::from_mode(0o700)).unwrap();
        std::os::unix::fs::chown(&c, Some(65534), Some(65534)).unwrap();
        c
    } else {
        // As anyone else: a system directory, which root owns.
        PathBuf::from("/usr/share")
    };
    let owner = std::os::unix::fs::MetadataExt::uid(&std::fs::metadata(&cache).unwrap());
    let e = Runtime::new(config(&cache)).err().expect("refused");
    let msg = e.to_string();
    assert!(msg.contains(&format!("user id {owner}")), "{msg}");
    assert!(msg.contains("EXOBOUND_CACHE_DIR"), "{msg}");
}

#[test]
fn a_cache_directory_that_cannot_be_made_means_no_cache_not_no_run() {
    // A read-only home on a cluster node, say: here, a path below a file.
    let dir = TempDir::new("cache-unusable");
    let file = dir.path().join("a-file");
    std::fs::write(&file, b"not a directory").unwrap();
    let rt = Runtime::new(config(&file.join("modules"))).expect("runs without a cache");
    let notices = rt.notices();
    assert_eq!(notices.len(), 1, "{notices:?}");
    assert!(notices[0].contains("EXOBOUND_CACHE_DIR"), "{notices:?}");
    rt.load(&exobound::standard_module("photoionization")).unwrap();
    assert_host_still_works(&rt);
}

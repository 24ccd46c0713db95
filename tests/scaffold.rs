//! `module new` writes a crate that builds to wasm, inspects, and passes its
//! own test; `module build` gives the same bytes wherever the crate lies, and
//! `module verify --rebuild` tells a module built from its source from one
//! that was not.

use std::path::Path;
use std::process::Command;

use exobound::scaffold::SdkSource;
use exobound::{inspect, modbuild, rebuild, scaffold};
use exobound_sdk::Role;

use crate::support::*;

#[test]
fn scaffold_builds_inspects_and_passes_its_test() {
    let tmp = TempDir::new("scaffold");
    let sdk = SdkSource::Copy;
    // Share the workspace's lock file so the scaffold resolves to the same
    // dependency versions, and a target dir so they are compiled once.
    let root = workspace_root();
    let target = exobound::standard_module_dir().parent().unwrap().join("scaffold");
    for (name, role) in [("lab-psd-yield", Role::Source), ("lab-burial", Role::ReservoirProcess)] {
        let dir = tmp.path().join(name);
        scaffold::new_module(name, role, &dir, &sdk).unwrap();
        std::fs::copy(root.join("Cargo.lock"), dir.join("Cargo.lock")).unwrap();
        let wasm =
            modbuild::build_crate_in(&dir, &target).unwrap_or_else(|e| panic!("{name}: {e}"));
        let report = inspect::inspect(&wasm).unwrap();
        assert_eq!(report.name, name);
        assert_eq!(report.roles, vec![role.as_str().to_string()]);
        assert_eq!(report.manifest.reference_points.len(), 1);
        // The scaffold's reference point holds in the sandbox.
        let rt = runtime();
        let m = rt.load(&wasm).unwrap();
        for r in exobound::runtime::reference::run_reference_points(&rt, &m).unwrap() {
            assert!(r.passed, "{name}: {r:?}");
        }
        // And its own unit tests pass natively.
        let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
        let out = Command::new(cargo)
            .args(["test", "--release", "--quiet", "--manifest-path"])
            .arg(dir.join("Cargo.toml"))
            .env("CARGO_TARGET_DIR", &target)
            .output()
            .unwrap();
        assert!(out.status.success(), "{name}: {}", String::from_utf8_lossy(&out.stderr));
    }
    // Every role has a template that writes.
    for role in Role::ALL {
        let dir = tmp.path().join(format!("only-{}", role.as_str()));
        scaffold::new_module(&format!("only-{}", role.as_str()), role, &dir, &sdk).unwrap();
    }
    // A bad name and an occupied directory are refused.
    assert!(scaffold::new_module("Bad Name", Role::Loss, &tmp.path().join("x"), &sdk).is_err());
    assert!(
        scaffold::new_module("lab-burial", Role::Loss, &tmp.path().join("lab-burial"), &sdk)
            .is_err()
    );
    // `--sdk DIR` depends on that SDK by a relative path, which still leads
    // to the SDK from the crate; a directory that is not the SDK is refused
    // and leaves nothing behind.
    let dir = tmp.path().join("deep").join("by-path");
    let sdk_dir = scaffold::default_sdk_dir();
    scaffold::new_module("by-path", Role::Loss, &dir, &SdkSource::Path(sdk_dir.clone())).unwrap();
    let manifest = std::fs::read_to_string(dir.join("Cargo.toml")).unwrap();
    let line = manifest.lines().find(|l| l.starts_with("exobound-sdk = ")).unwrap();
    let rel = line.split('"').nth(1).unwrap();
    assert!(rel.starts_with(".."), "{line}");
    assert_eq!(
        std::fs::canonicalize(dir.join(rel)).unwrap(),
        std::fs::canonicalize(&sdk_dir).unwrap()
    );
    let not_sdk = SdkSource::Path(tmp.path().join("deep"));
    let e = scaffold::new_module("stray", Role::Loss, &tmp.path().join("stray"), &not_sdk)
        .expect_err("a directory without Cargo.toml is not the SDK");
    assert!(e.to_string().contains("not the exobound-sdk crate"), "{e}");
    assert!(!tmp.path().join("stray").exists());
}

fn workspace_root() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).parent().unwrap().to_path_buf()
}

/// Copy a crate's source (everything but `target/`) from `from` to `to`.
fn copy_source(from: &Path, to: &Path) {
    std::fs::create_dir_all(to).unwrap();
    for entry in std::fs::read_dir(from).unwrap().flatten() {
        let (src, dst) = (entry.path(), to.join(entry.file_name()));
        if src.is_dir() {
            if entry.file_name() != "target" {
                copy_source(&src, &dst);
            }
        } else {
            std::fs::copy(&src, &dst).unwrap();
        }
    }
}

/// Whether `bytes` hold the text `needle` anywhere.
fn holds(bytes: &[u8], needle: &Path) -> bool {
    let needle = needle.to_string_lossy();
    !needle.is_empty() && bytes.windows(needle.len()).any(|w| w == needle.as_bytes())
}

/// A scaffolded crate built in one directory and rebuilt by `verify
/// --rebuild` in another (a fresh copy under the system temp dir, with a
/// fresh target directory) gives the same bytes; the same source with one
/// line changed does not, and the refusal names both digests.
///
/// Builds: the published module may reuse the dependencies compiled by
/// `scaffold_builds_inspects_and_passes_its_test` (a shared target): that
/// is the author's build, and reuse there could only make the digests
/// differ, never agree falsely. Each rebuild gets a target of its own, so
/// nothing of the first build can stand in for the second.
#[test]
fn a_module_rebuilds_to_the_same_bytes_elsewhere_and_a_changed_line_does_not() {
    let tmp = TempDir::new("reproducible");
    let root = workspace_root();
    let author = tmp.path().join("author").join("lab-photo-loss");
    scaffold::new_module("lab-photo-loss", Role::Loss, &author, &SdkSource::Copy).unwrap();
    // The workspace's lock file pins the dependency versions this
    // (offline) machine holds; a published source carries its own.
    std::fs::copy(root.join("Cargo.lock"), author.join("Cargo.lock")).unwrap();
    let shared = exobound::standard_module_dir().parent().unwrap().join("scaffold");
    let published = modbuild::build_crate_in(&author, &shared).unwrap_or_else(|e| panic!("{e}"));
    let bytes = std::fs::read(&published).unwrap();

    // No absolute path of this machine reaches the module: not the crate's
    // directory, the workspace, $CARGO_HOME, the toolchain or the home dir.
    let sysroot = Command::new("rustc").args(["--print", "sysroot"]).output().unwrap();
    let sysroot = String::from_utf8_lossy(&sysroot.stdout).trim().to_string();
    let mut machine_paths = vec![tmp.path().to_path_buf(), root.clone(), sysroot.into()];
    machine_paths.extend(modbuild::cargo_home());
    let home = std::env::var_os("HOME").map(std::path::PathBuf::from);
    machine_paths.extend(home.filter(|h| h.as_os_str().len() > 1));
    for p in &machine_paths {
        assert!(!holds(&bytes, p), "the module holds the path {}", p.display());
    }

    // The build record names the toolchain and the SDK, and the host still
    // reads, digests and runs the module with it.
    let report = inspect::inspect(&published).unwrap();
    let record = report.build.clone().expect("module build records the toolchain");
    let rustc = Command::new("rustc").arg("-vV").output().unwrap();
    let release = String::from_utf8_lossy(&rustc.stdout)
        .lines()
        .find_map(|l| l.strip_prefix("release: ").map(str::to_string))
        .unwrap();
    assert!(record.contains(&format!("rustc: {release}\n")), "{record}");
    assert!(record.contains(&format!("exobound-sdk: {}\n", scaffold::sdk::version())), "{record}");
    assert_eq!(report.sha256, exobound::runtime::module::sha256_hex(&bytes));
    let rt = runtime();
    let m = rt.load(&published).unwrap();
    for r in exobound::runtime::reference::run_reference_points(&rt, &m).unwrap() {
        assert!(r.passed, "{r:?}");
    }

    // The same source, rebuilt in another directory: the same bytes.
    let same = rebuild::rebuild_and_compare(&author, &published).unwrap();
    assert!(same.matches(), "{}", same.summary());
    assert_eq!(same.rebuilt_sha256, report.sha256);

    // One line of the law changed, in yet another directory: the command
    // refuses, naming both digests.
    let changed = tmp.path().join("partner").join("checkout").join("changed");
    copy_source(&author, &changed);
    let law = std::fs::read_to_string(changed.join("src/lib.rs")).unwrap();
    let line = "let r2 = p.helio_distance * p.helio_distance;";
    assert!(law.contains(line), "the loss template changed; update this test");
    let law = law.replace(line, "let r2 = p.helio_distance * p.helio_distance * (1.0 + 1e-3);");
    std::fs::write(changed.join("src/lib.rs"), law).unwrap();
    let out = Command::new(exobound_binary())
        .args(["module", "verify", "--rebuild"])
        .arg(&changed)
        .arg(&published)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{stderr}");
    assert!(stderr.contains("does not match"), "{stderr}");
    assert!(stderr.contains(&format!("published sha256 {}", report.sha256)), "{stderr}");
    let rebuilt = stderr
        .lines()
        .find_map(|l| l.trim().strip_prefix("rebuilt   sha256 "))
        .unwrap_or_else(|| panic!("no rebuilt digest in: {stderr}"));
    assert_eq!(rebuilt.len(), 64, "{stderr}");
    assert_ne!(rebuilt, report.sha256);
    assert!(stderr.contains("the toolchain and SDK version are the same"), "{stderr}");
}

//! `module new` writes a crate that builds to wasm, inspects, and passes its own test.

use std::process::Command;

use exobound::{inspect, modbuild, scaffold};
use exobound_sdk::Role;

use crate::support::*;

#[test]
fn scaffold_builds_inspects_and_passes_its_test() {
    let tmp = TempDir::new("scaffold");
    let sdk = scaffold::default_sdk_dir();
    // Share the workspace's lock file so the scaffold resolves to the same
    // dependency versions, and a target dir so they are compiled once.
    let root = sdk.parent().unwrap().to_path_buf();
    let target = exobound::standard_module_dir().parent().unwrap().join("scaffold");
    for (name, role) in [("lab-psd-yield", Role::Source), ("lab-burial", Role::ReservoirProcess)] {
        let dir = tmp.path().join(name);
        scaffold::new_module(name, role, &dir, &sdk).unwrap();
        std::fs::copy(root.join("Cargo.lock"), dir.join("Cargo.lock")).unwrap();
        // Safe: this test is the only one that reads CARGO_TARGET_DIR.
        unsafe { std::env::set_var("CARGO_TARGET_DIR", &target) };
        let wasm = modbuild::build_crate(&dir).unwrap_or_else(|e| panic!("{name}: {e}"));
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
}

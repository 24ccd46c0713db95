//! One lock for every command: `compare`, `sweep` and `fit` refuse a module
//! whose digest differs from its pin in `exobound.lock`, as `run` does,
//! naming the module and both digests and leaving the lock and the output
//! untouched; a module given by path and marked `unlocked = true` runs
//! without a pin and the provenance says so; only path modules can be
//! unlocked; and `--set` reaches a process by its manifest name. Digests
//! are SHA-256 (FIPS 180-4) computed here with the `sha2` crate.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::Arc;

use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::scenario::Scenario;
use exobound::scenario::demo;
use exobound::share::lock::{self, LockAction};
use exobound_sdk::ParamValue;
use sha2::{Digest, Sha256};

use crate::support::{TempDir, exobound_binary};

fn sha256(bytes: &[u8]) -> String {
    Sha256::digest(bytes).iter().map(|b| format!("{b:02x}")).collect()
}

fn rt() -> Arc<Runtime> {
    Arc::new(Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap())
}

/// The module's bytes with one more custom section appended: still a valid
/// module, with another digest (a rebuild that changed nothing the host
/// reads).
fn rebuilt(bytes: &[u8]) -> Vec<u8> {
    let name = b"test:rebuilt";
    let payload = b"another build";
    let mut out = bytes.to_vec();
    out.push(0); // custom section id
    out.push((1 + name.len() + payload.len()) as u8); // size (< 128: one LEB128 byte)
    out.push(name.len() as u8);
    out.extend_from_slice(name);
    out.extend_from_slice(payload);
    out
}

/// The quick demo in `dir`, shortened to a few seconds of work, with the
/// photoionization module given by path as `photo_ionisation.wasm` (the
/// underscore form cargo writes), `extra` added to its entry. Returns the
/// scenario path and the module path.
fn scenario(dir: &Path, extra: &str) -> (PathBuf, PathBuf) {
    demo::write(dir).unwrap();
    let module = dir.join("photo_ionisation.wasm");
    std::fs::copy(exobound::standard_module("photoionization"), &module).unwrap();
    let quick = std::fs::read_to_string(dir.join("demo-quick.toml")).unwrap();
    let entry = "module = \"standard:photoionization\"\nrole = \"loss\"\n";
    assert!(quick.contains(entry));
    let text = quick
        .replace(entry, &format!("module = \"photo_ionisation.wasm\"\nrole = \"loss\"\n{extra}"))
        .replace("duration = \"1.5 d\"", "duration = \"12 h\"")
        .replace("spin_up = \"6 h\"", "spin_up = \"0 s\"")
        .replace("particles = 8000", "particles = 600");
    let path = dir.join("lab.toml");
    std::fs::write(&path, text).unwrap();
    (path, module)
}

fn exobound(dir: &Path, args: &[&str]) -> Output {
    Command::new(exobound_binary()).args(args).current_dir(dir).output().expect("start exobound")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn compare_sweep_and_fit_refuse_a_changed_locked_module_naming_both_digests() {
    let tmp = TempDir::new("lock-commands");
    let dir = tmp.path();
    let (path, module) = scenario(dir, "");
    // Pin the modules as `run` would on its first use.
    let s = Scenario::load(&path, &[], &rt()).unwrap();
    let lock_path = lock::path_for(&path);
    assert_eq!(lock::enforce(&lock_path, &s.modules, false).unwrap(), LockAction::Created);
    let pinned = std::fs::read_to_string(&lock_path).unwrap();
    let original = std::fs::read(&module).unwrap();
    let old = sha256(&original);
    assert!(pinned.contains(&old), "{pinned}");

    let changed = rebuilt(&original);
    std::fs::write(&module, &changed).unwrap();
    let new = sha256(&changed);
    assert_ne!(old, new);

    std::fs::write(
        dir.join("plan.toml"),
        "scenario = \"lab.toml\"\nseeds = [1]\n[[parameters]]\n\
         key = \"processes.impact-vapor.parameters.flux\"\n\
         values = [\"1e4 cm^-2 s^-1\", \"2e4 cm^-2 s^-1\"]\n",
    )
    .unwrap();
    std::fs::write(
        dir.join("obs.csv"),
        "kind,coordinate,value,uncertainty,unit\nequator_column,10.5 h,1.2e9,1.0e8,cm^-2\n",
    )
    .unwrap();
    let commands: [(&str, Vec<&str>, &str); 3] = [
        (
            "compare",
            vec!["compare", "lab.toml", "--variant", "b:run.dt=\"600 s\"", "--out", "cmp"],
            "cmp",
        ),
        ("sweep", vec!["sweep", "plan.toml", "--out", "sw"], "sw"),
        (
            "fit",
            vec![
                "fit",
                "lab.toml",
                "--observed",
                "obs.csv",
                "--free",
                "processes.impact-vapor.parameters.flux=5e3..1e5 cm^-2 s^-1",
                "--out",
                "fit",
            ],
            "fit",
        ),
    ];
    for (what, args, out) in commands {
        let o = exobound(dir, &args);
        let e = stderr(&o);
        assert_eq!(o.status.code(), Some(1), "{what} was not refused: {e}");
        for part in [
            "photo_ionisation.wasm",
            "photoionization 1.0.0",
            old.as_str(),
            new.as_str(),
            "--update-lock",
            "unlocked = true",
        ] {
            assert!(e.contains(part), "{what}: `{part}` missing from: {e}");
        }
        assert_eq!(
            std::fs::read_to_string(&lock_path).unwrap(),
            pinned,
            "{what}: a refusal leaves the lock as it was"
        );
        assert!(!dir.join(out).exists(), "{what} wrote output before refusing");
    }
}

#[test]
fn an_unlocked_module_runs_unpinned_and_the_provenance_says_so() {
    let tmp = TempDir::new("lock-unlocked");
    let dir = tmp.path();
    let (_, module) = scenario(dir, "unlocked = true\n");
    let o = exobound(dir, &["run", "lab.toml", "--out", "first"]);
    assert!(o.status.success(), "{}", stderr(&o));
    assert!(stderr(&o).contains("`photo_ionisation.wasm`") && stderr(&o).contains("unlocked"));
    // The other modules are pinned; the unlocked one is not.
    let pinned = std::fs::read_to_string(dir.join("exobound.lock")).unwrap();
    assert!(pinned.contains("standard:impact-vapor"), "{pinned}");
    assert!(!pinned.contains("photo_ionisation.wasm"), "{pinned}");

    // A rebuild runs without --update-lock, and the record holds its digest.
    let changed = rebuilt(&std::fs::read(&module).unwrap());
    std::fs::write(&module, &changed).unwrap();
    let o = exobound(dir, &["run", "lab.toml", "--out", "second"]);
    assert!(o.status.success(), "{}", stderr(&o));
    let prov: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(dir.join("second/provenance.json")).unwrap())
            .unwrap();
    for m in prov["modules"].as_array().unwrap() {
        let unlocked = m["spec"] == "photo_ionisation.wasm";
        assert_eq!(m["unlocked"], unlocked, "{m}");
        if unlocked {
            assert_eq!(m["sha256"].as_str(), Some(sha256(&changed).as_str()));
        }
    }
    assert_eq!(std::fs::read_to_string(dir.join("exobound.lock")).unwrap(), pinned);
}

#[test]
fn only_a_module_given_by_path_can_be_unlocked() {
    let set = ["processes.photoionization.unlocked=true".to_string()];
    let e = Scenario::demo(true, &set, &rt()).unwrap_err().0;
    assert!(
        e.contains("processes[4].unlocked") && e.contains("only a module given by path"),
        "{e}"
    );
}

#[test]
fn set_reaches_a_process_by_its_manifest_name_or_file_name() {
    let tmp = TempDir::new("lock-select");
    let (path, _) = scenario(tmp.path(), "");
    let rt = rt();
    let rate = |s: &Scenario| {
        let m = s.modules.iter().find(|m| m.spec == "photo_ionisation.wasm").unwrap();
        m.parameters.get("rate_1au").cloned()
    };
    // The manifest calls the module `photoionization`; the file is
    // `photo_ionisation.wasm`, reached with either separator.
    for (key, x) in [
        ("processes.photoionization", 6.0e-6),
        ("processes.photo_ionisation", 6.5e-6),
        ("processes.photo-ionisation", 7.0e-6),
    ] {
        let set = [format!("{key}.parameters.rate_1au=\"{x:e} s^-1\"")];
        let s = Scenario::load(&path, &set, &rt).unwrap();
        assert_eq!(rate(&s), Some(ParamValue::Number(x)), "{key}");
    }
    let set = ["processes.photo-ionization-law.role=loss".to_string()];
    let e = Scenario::load(&path, &set, &rt).unwrap_err().0;
    assert!(e.contains("`photo_ionisation.wasm` (photoionization)"), "{e}");
}

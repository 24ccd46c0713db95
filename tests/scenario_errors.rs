//! Bad scenarios are refused with messages that point at the problem:
//! malformed TOML (file:line:column), unknown keys (with the nearest valid
//! one), a missing module file (its path), a parameter out of range (name,
//! value, range, unit), an unreadable or malformed map (file and problem),
//! and a checkpoint from another version.

use std::path::Path;
use std::sync::Arc;

use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::scenario::{Inputs, Scenario, demo};

use crate::support::TempDir;

fn runtime() -> Arc<Runtime> {
    Arc::new(Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap())
}

/// The quick demo written into `dir`, with `edit` applied to its text; the error.
fn refuse(dir: &Path, edit: impl Fn(String) -> String) -> String {
    demo::write(dir).unwrap();
    let path = dir.join("demo-quick.toml");
    let text = edit(std::fs::read_to_string(&path).unwrap());
    std::fs::write(&path, &text).unwrap();
    match Scenario::load(&path, &[], &runtime()) {
        Ok(_) => panic!("the edited scenario was accepted"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn the_unedited_demo_loads() {
    let tmp = TempDir::new("demo-ok");
    demo::write(tmp.path()).unwrap();
    for f in ["demo.toml", "demo-quick.toml"] {
        let s = Scenario::load(&tmp.path().join(f), &[], &runtime()).unwrap();
        assert_eq!(s.modules.len(), 5);
        // The enriched patch from the map file reaches the reservoir.
        let max = s.model.reservoir.bulk_abundance.iter().cloned().fold(0.0, f64::max);
        assert!(max > 1.5, "{max}");
    }
}

#[test]
fn malformed_toml_names_file_line_and_column() {
    let tmp = TempDir::new("bad-toml");
    let e = refuse(tmp.path(), |t| t.replace("name = \"sodium\"", "name = \"sodium"));
    let line =
        demo::scenario_text(true).lines().position(|l| l.contains("name = \"sodium\"")).unwrap()
            + 1;
    assert!(e.contains(&format!("demo-quick.toml:{line}:")), "{e}");
}

#[test]
fn unknown_key_names_it_and_the_nearest_valid_one() {
    let tmp = TempDir::new("bad-key");
    let e = refuse(tmp.path(), |t| t.replace("spin_up =", "spinup ="));
    assert!(e.contains("unknown key `spinup`") && e.contains("did you mean `spin_up`?"), "{e}");
    assert!(e.contains("demo-quick.toml:") && e.contains("[run]"), "{e}");
    let e = refuse(tmp.path(), |t| t.replace("[outputs]", "[output]"));
    assert!(e.contains("`output`") && e.contains("did you mean `outputs`?"), "{e}");
}

#[test]
fn missing_module_file_names_the_path() {
    let tmp = TempDir::new("bad-module");
    let e = refuse(tmp.path(), |t| {
        t.replace("standard:photoionization", "modules/photo-ionisation.wasm")
    });
    assert!(e.contains("processes[4].module"), "{e}");
    assert!(e.contains("modules/photo-ionisation.wasm") && e.contains("not found"), "{e}");
}

#[test]
fn parameter_out_of_range_names_value_range_and_unit() {
    let tmp = TempDir::new("bad-param");
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapor_temperature = \"90000 K\"")
    });
    assert!(e.contains("vapor_temperature") && e.contains("90000"), "{e}");
    assert!(e.contains("K") && e.contains("range"), "{e}");
    // A dimensional parameter without its unit is refused with the unit to use.
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapor_temperature = 3000")
    });
    assert!(e.contains("give the unit") && e.contains("\"3000 K\""), "{e}");
    // A unit that is not the module's.
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapor_temperature = \"3000 C\"")
    });
    assert!(e.contains("unit `C` does not match"), "{e}");
    // An unknown parameter gets the nearest name.
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapour_temperature = \"3000 K\"")
    });
    assert!(e.contains("did you mean `vapor_temperature`?"), "{e}");
}

#[test]
fn unreadable_or_malformed_map_names_the_file_and_problem() {
    let tmp = TempDir::new("bad-map");
    let e = refuse(tmp.path(), |t| t.replace("maps/bulk-sodium.csv", "maps/none.csv"));
    assert!(e.contains("maps/none.csv") && e.contains("cannot read"), "{e}");
    let map = tmp.path().join("maps/bulk-sodium.csv");
    let e = refuse(tmp.path(), |t| {
        let m = std::fs::read_to_string(&map).unwrap();
        std::fs::write(&map, m.replacen(",1\n", ",one\n", 1)).unwrap();
        t
    });
    assert!(e.contains("bulk-sodium.csv: line") && e.contains("`one`"), "{e}");
}

#[test]
fn quantities_without_units_are_refused() {
    let tmp = TempDir::new("bad-unit");
    let e = refuse(tmp.path(), |t| t.replace("dt = \"900 s\"", "dt = \"900\""));
    assert!(e.contains("run.dt") && e.contains("no unit"), "{e}");
}

#[test]
fn overrides_apply_and_are_checked() {
    let rt = runtime();
    let s = Scenario::demo(true, &["run.seed=7".into(), "run.dt=\"30 min\"".into()], &rt).unwrap();
    assert_eq!(s.config.seed, 7);
    assert_eq!(s.config.dt, 1800.0);
    let e = Scenario::demo(true, &["run.sead=7".into()], &rt).unwrap_err().to_string();
    assert!(e.contains("did you mean `seed`?"), "{e}");
    let _ = Inputs::Demo;
}

#[test]
fn checkpoint_from_another_version_is_refused() {
    let tmp = TempDir::new("old-checkpoint");
    let out = tmp.path().join("run");
    let staging = exobound::output::staging_path(&out);
    std::fs::create_dir_all(&staging).unwrap();
    std::fs::write(
        staging.join(exobound::output::CHECKPOINT_FILE),
        b"{\"kind\":\"exobound checkpoint\",\"format\":999,\"engine\":\"0.0.1\"}\n\x00\x01",
    )
    .unwrap();
    let session = exobound::driver::Session {
        stop: Arc::new(std::sync::atomic::AtomicBool::new(false)),
        progress: None,
    };
    let e = exobound::driver::resume(&out, &runtime(), &[], session).unwrap_err().to_string();
    assert!(e.contains("exobound 0.0.1") && e.contains("cannot continue it"), "{e}");
}

//! Numeric guards: a module or scenario value that overflows stops the run
//! with an error naming the step, the quantity and the module, and leaves
//! no output behind.
//!
//! Why this exists: a source that returned a finite but huge release rate
//! (1e300 atoms cm^-2 s^-1) once gave a run that exited 0 with NaN in every
//! ledger row and `null` in the summary. rate x area x dt overflows at its
//! source, and the engine now catches it there.

use std::process::Command;

use exobound::scenario::demo;

use crate::support::*;

/// A source module whose release rate is `rate` atoms cm^-2 s^-1 in every
/// cell and whose launches go straight up at 1 km/s.
fn source_module(name: &str, rate: &str) -> Vec<u8> {
    let m = manifest_bytes(name, &["source"]);
    let release = constant_rate_export("exobound_release_rate", rate);
    let body = format!(
        r#"{release}
  (func (export "exobound_launch") (param $in i32) (param $n i32) (param $out i32) (result i32)
    (local $i i32) (local $p i32)
    (block $done (loop $fill
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $p (i32.add (local.get $out) (i32.mul (local.get $i) (i32.const 24))))
        (f64.store (local.get $p) (f64.const 0))
        (f64.store offset=8 (local.get $p) (f64.const 0))
        (f64.store offset=16 (local.get $p) (f64.const 1000))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $fill)))
    (local.get $n))"#
    );
    wat(Some("1.0.0"), Some(&m), "", &body)
}

/// The quick demo written into `dir`, with the module file `module` added
/// as one more source; returns the scenario path.
fn scenario_with_source(dir: &std::path::Path, module: &[u8]) -> std::path::PathBuf {
    demo::write(dir).unwrap();
    std::fs::write(dir.join("extra-source.wasm"), module).unwrap();
    let path = dir.join("demo-quick.toml");
    let mut text = std::fs::read_to_string(&path).unwrap();
    text.push_str("\n[[processes]]\nmodule = \"extra-source.wasm\"\nrole = \"source\"\n");
    std::fs::write(&path, text).unwrap();
    path
}

#[test]
fn a_module_whose_release_overflows_stops_the_run_naming_it() {
    let tmp = TempDir::new("overflow-rate");
    let scenario = scenario_with_source(tmp.path(), &source_module("huge-rate", "1e300"));
    let out = tmp.path().join("out");
    let run = Command::new(exobound_binary())
        .arg("run")
        .arg(&scenario)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&run.stderr);
    let code = run.status.code().unwrap_or(-1);
    assert!((1..=99).contains(&code), "exit {code}: {stderr}");
    // The step, the quantity with its numbers, and the module.
    assert!(stderr.contains("step 0"), "{stderr}");
    assert!(stderr.contains("release rate 1e300"), "{stderr}");
    assert!(stderr.contains("module `huge-rate`"), "{stderr}");
    assert!(!stderr.contains("NaN"), "{stderr}");
    assert!(!out.exists(), "no output directory");
    assert!(!exobound::output::staging_path(&out).exists(), "no staging directory");
}

#[test]
fn a_large_but_finite_release_runs_with_a_closed_ledger() {
    // 1e12 atoms cm^-2 s^-1 is far above any law (common practice: lunar
    // sources are 1e4-1e7) but finite in every product: the guard must not
    // refuse what merely is large.
    let tmp = TempDir::new("large-rate");
    let scenario = scenario_with_source(tmp.path(), &source_module("large-rate", "1e12"));
    let rt = std::sync::Arc::new(runtime());
    let source = exobound::checkpoint::ScenarioSource::file(
        &scenario,
        &["run.duration=\"12 h\"".to_string(), "outputs.products=[\"csv\"]".to_string()],
    )
    .unwrap();
    let sc = source.load(&rt).unwrap_or_else(|e| panic!("{e}"));
    let mut sim = exobound::engine::Simulation::new(
        sc.model.clone(),
        sc.processes.clone(),
        sc.config.clone(),
    )
    .unwrap_or_else(|e| panic!("{e}"));
    sim.run(sc.plan.steps).unwrap_or_else(|e| panic!("{e}"));
    let worst = sim.ledger().worst_step_closure();
    assert!(worst < 1e-12, "worst step closure {worst:e}");
}

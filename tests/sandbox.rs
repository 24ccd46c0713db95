//! The sandbox against hostile modules: every misbehaviour gives its own
//! named error, decided by fuel (never by wall time), and the same host
//! serves a good call afterwards.

use std::collections::BTreeMap;
use std::time::Duration;

use exobound::runtime::HostError;
use exobound_sdk::{ErrorCode, Impact, Outcome};

use crate::support::*;

/// Run the hostile Rust fixture in `mode` through `call` and return the host error.
fn hostile_error(mode: &str, call: &str) -> HostError {
    hostile_error_with(runtime(), mode, call)
}

/// As [`hostile_error`], on runtime `rt`.
fn hostile_error_with(rt: exobound::runtime::Runtime, mode: &str, call: &str) -> HostError {
    let m = hostile(&rt);
    let mut inst = rt
        .instantiate(&m, &params(&[("mode", text(mode))]))
        .expect("instantiates")
        .expect("parameters are valid");
    let err = match call {
        "loss" => {
            let ps = particles(100);
            let mut out = vec![0.0; 100];
            inst.loss_rate(&ps, &mut out).expect_err("the call must fail")
        }
        _ => {
            let hits = vec![Impact { temperature: 300.0, ..Default::default() }; 100];
            let mut out = vec![Outcome::default(); 100];
            inst.land(&hits, &mut out).expect_err("the call must fail")
        }
    };
    assert_host_still_works(&rt);
    err
}

#[test]
fn endless_loop_is_stopped_by_its_fuel() {
    let e = hostile_error("loop", "loss");
    // The budget of a batch grows with the batch: 100 records here.
    let fuel = TEST_LIMITS.fuel_for(100);
    assert!(
        matches!(e, HostError::OutOfFuel { fuel: f, key: "sandbox.fuel_per_record", .. } if f == fuel),
        "{e}"
    );
    let msg = e.to_string();
    assert!(msg.contains("sandbox.fuel_per_record"), "{msg}");
    assert!(msg.contains("hostile-law") && msg.contains("exobound_loss_rate"), "{msg}");
    assert!(msg.contains("batch of 100"), "{msg}");
}

#[test]
fn memory_bomb_is_capped() {
    // Fuel enough to fill 64 MiB, so that the memory cap is what stops it.
    let rt = exobound::runtime::Runtime::new(exobound::runtime::RuntimeConfig {
        limits: exobound::runtime::SandboxLimits { fuel_per_record: 10_000_000, ..TEST_LIMITS },
        cache_dir: None,
        ..Default::default()
    })
    .unwrap();
    let e = hostile_error_with(rt, "grow", "loss");
    assert!(matches!(e, HostError::MemoryLimit { .. }), "{e}");
    assert!(e.to_string().contains("64 MiB"), "{e}");
}

#[test]
fn panic_becomes_a_trap_with_its_message() {
    let e = hostile_error("panic", "land");
    let HostError::Trap { message, .. } = &e else { panic!("expected a trap, got {e}") };
    let m = message.as_deref().unwrap_or("");
    assert!(m.contains("panicked") && m.contains("index out of bounds"), "{e}");
}

#[test]
fn nan_and_infinite_rates_are_refused() {
    for mode in ["nan", "infinite", "negative"] {
        let e = hostile_error(mode, "loss");
        let HostError::InvalidOutput { index, .. } = &e else { panic!("{mode}: got {e}") };
        assert_eq!(*index, 99, "{mode}: the last record is the bad one");
    }
}

#[test]
fn bad_outcomes_are_refused() {
    for (mode, words) in [
        ("bad-outcome", "outcome code is 9"),
        ("downward", "upward velocity component"),
        ("too-fast", "exceeds the bound"),
        ("nan", "not finite"),
    ] {
        let e = hostile_error(mode, "land");
        assert!(matches!(e, HostError::InvalidOutput { index: 0, .. }), "{mode}: {e}");
        assert!(e.to_string().contains(words), "{mode}: {e}");
    }
}

#[test]
fn instance_recovers_after_a_trap() {
    // A poisoned instance is rebuilt before its next call; the next call
    // then fails the same way (the module is deterministic), but cleanly.
    let rt = runtime();
    let m = hostile(&rt);
    let mut inst = rt.instantiate(&m, &params(&[("mode", text("panic"))])).unwrap().unwrap();
    let hits = vec![Impact::default(); 4];
    let mut out = vec![Outcome::default(); 4];
    for _ in 0..3 {
        assert!(matches!(inst.land(&hits, &mut out), Err(HostError::Trap { .. })));
    }
    assert_host_still_works(&rt);
}

fn wat_error(bytes: Vec<u8>) -> HostError {
    let rt = runtime();
    let r = rt.load_bytes("fixture.wasm", &bytes);
    let e = match r {
        Err(e) => e,
        Ok(m) => match rt.instantiate(&m, &BTreeMap::new()) {
            Err(e) => e,
            Ok(Err(d)) => panic!("unexpected domain error {d}"),
            Ok(Ok(mut inst)) => {
                let ps = particles(8);
                let mut out = vec![0.0; 8];
                match inst.loss_rate(&ps, &mut out) {
                    Err(e) => e,
                    Ok(r) => panic!("the hostile call succeeded: {r:?}"),
                }
            }
        },
    };
    assert_host_still_works(&rt);
    e
}

fn loss_manifest() -> Vec<u8> {
    manifest_bytes("wat-fixture", &["loss"])
}

#[test]
fn wrong_abi_major_is_refused_naming_both_versions() {
    let m = loss_manifest();
    let e = wat_error(wat(Some("2.0.0"), Some(&m), "", &loss_export("(local.get $n)")));
    assert!(matches!(e, HostError::AbiUnsupported { .. }), "{e}");
    let msg = e.to_string();
    assert!(msg.contains("2.0.0") && msg.contains("1.1.0"), "{msg}");
}

#[test]
fn missing_abi_section_is_refused() {
    let m = loss_manifest();
    let e = wat_error(wat(None, Some(&m), "", &loss_export("(local.get $n)")));
    assert!(matches!(e, HostError::MissingSection { section: "exobound:abi", .. }), "{e}");
}

#[test]
fn missing_export_is_refused_before_running() {
    let m = loss_manifest();
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", ""));
    let HostError::MissingExport { export, .. } = &e else { panic!("got {e}") };
    assert_eq!(export, "exobound_loss_rate");
    assert!(e.to_string().contains("role `loss`"), "{e}");
}

#[test]
fn unreachable_trap_is_reported() {
    let m = loss_manifest();
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export("unreachable")));
    let HostError::Trap { trap, .. } = &e else { panic!("got {e}") };
    assert!(trap.contains("unreachable"), "{trap}");
}

#[test]
fn endless_loop_in_wat_is_stopped() {
    let m = loss_manifest();
    let e = wat_error(wat(
        Some("1.0.0"),
        Some(&m),
        "",
        &loss_export("(loop $l (br $l)) (i32.const 0)"),
    ));
    assert!(matches!(e, HostError::OutOfFuel { .. }), "{e}");
}

#[test]
fn endless_start_function_is_stopped() {
    let m = loss_manifest();
    let body =
        format!("{}\n(func $spin (loop $l (br $l)))\n(start $spin)", loss_export("(local.get $n)"));
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &body));
    let fuel = TEST_LIMITS.fuel_per_call;
    assert!(
        matches!(e, HostError::OutOfFuel { fuel: f, key: "sandbox.fuel_per_call", .. } if f == fuel),
        "{e}"
    );
    assert!(e.to_string().contains("instantiation"), "{e}");
}

#[test]
fn the_wall_time_backstop_still_stops_a_call_with_fuel_to_spare() {
    // Fuel enough for hours; the backstop of 1 s must stop the loop. The
    // outcome (a timeout, not a result) does not depend on the machine's
    // speed: no machine runs 1e15 wasm instructions in a second.
    let rt = exobound::runtime::Runtime::new(exobound::runtime::RuntimeConfig {
        limits: exobound::runtime::SandboxLimits {
            fuel_per_record: 100_000_000_000_000,
            backstop: Duration::from_secs(1),
            ..TEST_LIMITS
        },
        cache_dir: None,
        ..Default::default()
    })
    .unwrap();
    let m = hostile(&rt);
    let mut inst = rt.instantiate(&m, &params(&[("mode", text("loop"))])).unwrap().unwrap();
    let ps = particles(10);
    let mut out = vec![0.0; 10];
    let e = inst.loss_rate(&ps, &mut out).unwrap_err();
    assert!(matches!(e, HostError::Timeout { .. }), "{e}");
    assert!(e.to_string().contains("sandbox.backstop"), "{e}");
    assert_host_still_works(&rt);
}

#[test]
fn raw_memory_grow_past_the_cap_is_stopped() {
    let m = loss_manifest();
    let grow = "(block $b (loop $l (br_if $b (i32.eq (memory.grow (i32.const 64)) (i32.const -1))) (br $l))) unreachable";
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export(grow)));
    assert!(matches!(e, HostError::MemoryLimit { .. }), "{e}");
}

#[test]
fn reported_length_larger_than_the_batch_is_refused() {
    let m = loss_manifest();
    let e = wat_error(wat(
        Some("1.0.0"),
        Some(&m),
        "",
        &loss_export("(i32.add (local.get $n) (i32.const 5))"),
    ));
    assert!(matches!(e, HostError::LengthMismatch { reported: 13, .. }), "{e}");
}

#[test]
fn nan_written_by_raw_wasm_is_refused() {
    let m = loss_manifest();
    let tail = "(f64.store (local.get $out) (f64.const nan)) (local.get $n)";
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export(tail)));
    assert!(matches!(e, HostError::InvalidOutput { index: 0, .. }), "{e}");
    let tail = "(f64.store (local.get $out) (f64.const inf)) (local.get $n)";
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export(tail)));
    assert!(matches!(e, HostError::InvalidOutput { index: 0, .. }), "{e}");
}

#[test]
fn outcome_code_out_of_range_is_refused() {
    let m = manifest_bytes("wat-surface", &["surface-interaction"]);
    let body = r#"(func (export "exobound_land") (param $in i32) (param $n i32) (param $out i32) (result i32)
        (i32.store (local.get $out) (i32.const 7))
        (local.get $n))"#;
    let rt = runtime();
    let module = rt.load_bytes("surface.wasm", &wat(Some("1.0.0"), Some(&m), "", body)).unwrap();
    let mut inst = rt.instantiate(&module, &BTreeMap::new()).unwrap().unwrap();
    let hits = vec![Impact::default(); 3];
    let mut out = vec![Outcome::default(); 3];
    let e = inst.land(&hits, &mut out).unwrap_err();
    assert!(matches!(e, HostError::InvalidOutput { index: 0, .. }), "{e}");
    assert!(e.to_string().contains("outcome code is 7"), "{e}");
    assert_host_still_works(&rt);
}

#[test]
fn malformed_manifest_is_refused() {
    let e = wat_error(wat(
        Some("1.0.0"),
        Some(b"\xc1\xff not msgpack"),
        "",
        &loss_export("(local.get $n)"),
    ));
    assert!(matches!(e, HostError::ManifestMalformed { .. }), "{e}");
    // Valid MessagePack, but not a manifest.
    let e =
        wat_error(wat(Some("1.0.0"), Some(&[0x93, 1, 2, 3]), "", &loss_export("(local.get $n)")));
    assert!(matches!(e, HostError::ManifestMalformed { .. }), "{e}");
    // A manifest that decodes but names an unknown role.
    let m = manifest_bytes("wat-fixture", &["teleport"]);
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export("(local.get $n)")));
    assert!(e.to_string().contains("unknown role"), "{e}");
}

#[test]
fn huge_manifest_is_refused() {
    let mut info: exobound_sdk::wire::ManifestInfo =
        rmp_serde::from_slice(&loss_manifest()).expect("decodes");
    info.description = "x".repeat(200_000);
    let m = rmp_serde::to_vec_named(&info).unwrap();
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export("(local.get $n)")));
    let HostError::ManifestTooLarge { size, limit, .. } = e else { panic!("got {e}") };
    assert!(size > limit);
}

#[test]
fn imports_are_refused() {
    let m = loss_manifest();
    let imports = r#"(import "wasi_snapshot_preview1" "fd_write" (func (param i32 i32 i32 i32) (result i32)))"#;
    let e = wat_error(wat(Some("1.0.0"), Some(&m), imports, &loss_export("(local.get $n)")));
    let HostError::ForbiddenImport { import, .. } = &e else { panic!("got {e}") };
    assert!(import.contains("fd_write"), "{import}");
}

#[test]
fn unknown_error_code_is_a_host_error_and_known_codes_are_domain_errors() {
    let m = loss_manifest();
    let e = wat_error(wat(Some("1.0.0"), Some(&m), "", &loss_export("(i32.const -77)")));
    assert!(matches!(e, HostError::UnknownErrorCode { code: -77, .. }), "{e}");

    // -2 is OutsideValidity: a domain error with the module's own message.
    let rt = runtime();
    let module = rt
        .load_bytes(
            "refuse.wasm",
            &wat(Some("1.0.0"), Some(&m), "", &loss_export("(i32.const -2)")),
        )
        .unwrap();
    let mut inst = rt.instantiate(&module, &BTreeMap::new()).unwrap().unwrap();
    let ps = particles(4);
    let mut out = vec![0.0; 4];
    let d = inst.loss_rate(&ps, &mut out).expect("no host failure").expect_err("refused");
    assert_eq!(d.error.code, ErrorCode::OutsideValidity);
    assert_eq!(d.error.message, "the law refuses: input outside validity");
    assert!(d.to_string().contains("wat-fixture"), "{d}");
}

#[test]
fn not_wasm_is_refused() {
    let rt = runtime();
    let e = rt.load_bytes("notes.txt", b"surface-bounded exosphere").unwrap_err();
    assert!(matches!(e, HostError::NotWasm { .. }), "{e}");
    let e = rt.load(std::path::Path::new("no/such/module.wasm")).unwrap_err();
    assert!(e.to_string().contains("no/such/module.wasm"), "{e}");
}

#[test]
fn fuel_budget_stops_a_loop_reproducibly() {
    let limits = exobound::runtime::SandboxLimits {
        fuel_per_record: 1_000_000,
        fuel_per_call: 1_000_000,
        ..TEST_LIMITS
    };
    let rt = exobound::runtime::Runtime::new(exobound::runtime::RuntimeConfig {
        limits,
        cache_dir: None,
        ..Default::default()
    })
    .unwrap();
    let m = hostile(&rt);
    let mut inst = rt.instantiate(&m, &params(&[("mode", text("loop"))])).unwrap().unwrap();
    let ps = particles(4);
    let mut out = vec![0.0; 4];
    let e = inst.loss_rate(&ps, &mut out).unwrap_err();
    assert!(matches!(e, HostError::OutOfFuel { fuel: 5_000_000, .. }), "{e}");
    // The same call fails the same way again: fuel, not time, decides.
    let e2 = inst.loss_rate(&ps, &mut out).unwrap_err();
    assert_eq!(e.to_string(), e2.to_string());
    // A good module still runs under the same fuel budget.
    assert_host_still_works(&rt);
}

/// A loss module with `extra` small functions beside its exports.
fn many_functions(extra: usize) -> Vec<u8> {
    let m = loss_manifest();
    let mut body = loss_export("(local.get $n)");
    for i in 0..extra {
        body.push_str(&format!("\n(func $f{i} (result i32) (i32.const {i}))"));
    }
    wat(Some("1.0.0"), Some(&m), "", &body)
}

#[test]
fn a_module_of_a_hundred_thousand_functions_is_refused_before_compiling() {
    // Such a module once took 30-40 s and 5-6 GiB to compile, in `run` and
    // in `module vet`; the shape check refuses it before the compiler runs.
    let bytes = many_functions(100_000);
    let rt = runtime();
    let e = rt.load_bytes("many.wasm", &bytes).unwrap_err();
    assert!(matches!(e, HostError::CompileLimit { what: "functions", limit: 20_000, .. }), "{e}");
    assert!(e.to_string().contains("wat-fixture") && e.to_string().contains("20000"), "{e}");
    assert_eq!(e.kind(), "compile-limit");
    // vet reports it as a failed check, without compiling either.
    let report = exobound::vet::vet_bytes("many.wasm", &bytes, &Default::default());
    assert!(!report.passed);
    let abi = report.check("abi").expect("abi check");
    assert!(abi.summary.contains("functions"), "{}", abi.summary);
    // A module of ordinary size still loads under the same limits.
    rt.load_bytes("few.wasm", &many_functions(200)).unwrap();
}

#[test]
fn vet_ends_when_a_modules_error_message_export_loops() {
    // The law refuses every batch (code -6), and its message export never
    // returns: each read of the message is stopped by its own small fuel
    // budget, so vet finishes and reports the module as failing.
    let m = loss_manifest();
    let text = wat_text(Some("1.0.0"), Some(&m), "", &loss_export("(i32.const -6)"));
    let looping = text.replace(
        "(memory.copy (local.get $buf) (i32.const 16) (i32.const 39))\n    (i32.const 39))",
        "(loop $l (br $l)) (i32.const 0))",
    );
    assert_ne!(looping, text, "the fixture's message export was replaced");
    let bytes = ::wat::parse_str(&looping).unwrap();
    let report = exobound::vet::vet_bytes("loop-message.wasm", &bytes, &Default::default());
    assert!(!report.passed);
    // And the run-time call reports the law's refusal without its message.
    let rt = runtime();
    let module = rt.load_bytes("loop-message.wasm", &bytes).unwrap();
    let mut inst = rt.instantiate(&module, &BTreeMap::new()).unwrap().unwrap();
    let ps = particles(4);
    let mut out = vec![0.0; 4];
    let refusal = inst.loss_rate(&ps, &mut out).unwrap().unwrap_err();
    assert_eq!(refusal.error.code, ErrorCode::Law);
}

#[test]
fn vet_stops_starting_checks_past_its_time_limit() {
    let path = exobound::standard_module("photoionization");
    let options = exobound::vet::VetOptions { time_limit: Duration::ZERO, ..Default::default() };
    let report = exobound::vet::vet_file_with(&path, &options).unwrap();
    assert!(!report.passed);
    for name in ["determinism", "bounds", "sampler", "distribution", "throughput"] {
        let c = report.check(name).unwrap_or_else(|| panic!("{name} listed"));
        assert_eq!(c.status, exobound::vet::Status::NotRun, "{name}");
        assert!(c.summary.contains("time limit"), "{}", c.summary);
    }
}

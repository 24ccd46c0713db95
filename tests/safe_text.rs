//! Text from a module never reaches the terminal raw: a module whose error
//! message and manifest strings carry terminal escape sequences (clear
//! screen, set window title with BEL), a carriage return that would
//! overwrite the line, and a right-to-left override is inspected, vetted
//! and run through the real `exobound` binary, and called through the
//! library; what is printed holds none of those characters, only their
//! visible escapes, and vet fails the manifest for them.

use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Command, Output};

use exobound::text::printable;
use exobound_sdk::ParamValue;
use exobound_sdk::wire::{ManifestInfo, ParamInfo, ReferenceInfo};

use crate::support::{TempDir, exobound_binary, particles, runtime, wat_text_with_message};

/// Clear the screen and home the cursor.
const CLEAR: &str = "\u{1b}[2J";
/// Set the terminal window's title, ended by BEL.
const TITLE: &str = "\u{1b}]0;all checks passed\u{7}";
/// Right-to-left override: reverses the text after it.
const RLO: &str = "\u{202e}";

/// The module's error message: each trick once, and a carriage return
/// that would overwrite the start of the line with a reassuring lie.
fn hostile_message() -> String {
    format!("{CLEAR}{TITLE}density out of range\rOK: nothing went wrong {RLO}exe.txt")
}

fn hostile_manifest() -> Vec<u8> {
    let info = ManifestInfo {
        name: "hostile-text".to_string(),
        version: "0.0.1".to_string(),
        description: format!("a loss law{CLEAR} that rewrites the screen"),
        roles: vec!["loss".to_string()],
        authors: vec![format!("Mallory{TITLE}"), "Eve\rTrusted Author".to_string()],
        institution: format!("Institute of {RLO}gnitset"),
        licence: format!("Apache-2.0{CLEAR}"),
        law_source: format!("a paper\r{TITLE}"),
        draws_on: None,
        ledger_label: String::new(),
        inputs: vec![],
        parameters: vec![ParamInfo {
            name: "scale".to_string(),
            unit: String::new(),
            description: format!("a factor{RLO} with a hidden override"),
            default: Some(ParamValue::Number(1.0)),
            min: Some(0.0),
            max: Some(10.0),
            choices: vec![],
            default_origin: format!("common practice{TITLE}"),
            table: None,
        }],
        reference_points: vec![ReferenceInfo {
            description: format!("one atom{CLEAR}"),
            check: "loss-rate".to_string(),
            parameters: vec![],
            input: vec![],
            expected: 1e-6,
            tolerance: 1e-9,
            source: format!("nowhere\r{RLO}"),
        }],
        launch_laws: Vec::new(),
    };
    rmp_serde::to_vec_named(&info).expect("encode manifest")
}

/// A loss module that refuses every batch (code -2, outside validity) and
/// reports [`hostile_message`] as its reason.
fn hostile_module() -> Vec<u8> {
    let body =
        r#"(func (export "exobound_loss_rate") (param i32 i32 i32) (result i32) (i32.const -2))"#;
    let m = hostile_manifest();
    let msg = hostile_message();
    let text = wat_text_with_message(Some("1.0.0"), Some(&m), "", body, msg.as_bytes());
    wat::parse_str(&text).unwrap_or_else(|e| panic!("fixture WAT does not assemble: {e}"))
}

/// Fail if `text` (what `what` printed) holds a raw escape, BEL, carriage
/// return or bidirectional override.
fn assert_no_raw_controls(what: &str, text: &str) {
    for (c, name) in [('\u{1b}', "ESC"), ('\u{7}', "BEL"), ('\r', "CR"), ('\u{202e}', "RLO")] {
        assert!(!text.contains(c), "{what} printed a raw {name}:\n{}", printable(text));
    }
}

/// stdout and stderr of a finished command, as text.
fn printed(o: &Output) -> String {
    format!("{}{}", String::from_utf8_lossy(&o.stdout), String::from_utf8_lossy(&o.stderr))
}

fn write_module(dir: &Path) -> std::path::PathBuf {
    let path = dir.join("hostile-text.wasm");
    std::fs::write(&path, hostile_module()).unwrap();
    path
}

#[test]
fn module_inspect_prints_manifest_text_escaped() {
    let tmp = TempDir::new("safe-inspect");
    let module = write_module(tmp.path());
    let bin = exobound_binary();

    let o = Command::new(&bin).args(["module", "inspect"]).arg(&module).output().unwrap();
    assert!(o.status.success(), "{}", printable(&printed(&o)));
    let out = printed(&o);
    assert_no_raw_controls("module inspect", &out);
    for visible in [
        "a loss law\\u{1b}[2J that rewrites the screen",
        "Mallory\\u{1b}]0;all checks passed\\u{7}",
        "Eve\\u{d}Trusted Author",
        "Institute of \\u{202e}gnitset",
        "a factor\\u{202e} with a hidden override",
        "one atom\\u{1b}[2J",
        "nowhere\\u{d}\\u{202e}",
    ] {
        assert!(out.contains(visible), "`{visible}` missing from:\n{out}");
    }
    // Plain text is untouched.
    assert!(out.contains("hostile-text 0.0.1") && out.contains("scale"), "{out}");

    // As JSON: still valid, same strings when decoded, nothing raw printed.
    let o = Command::new(&bin).args(["module", "inspect", "--json"]).arg(&module).output().unwrap();
    assert!(o.status.success(), "{}", printable(&printed(&o)));
    let out = String::from_utf8(o.stdout).unwrap();
    assert_no_raw_controls("module inspect --json", &out);
    let v: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(v["manifest"]["institution"], format!("Institute of {RLO}gnitset"));
}

#[test]
fn a_module_error_reaches_the_terminal_escaped() {
    // Through the library: the domain error's message and its display.
    let rt = runtime();
    let module = rt.load_bytes("hostile-text.wasm", &hostile_module()).unwrap();
    let mut inst = rt.instantiate(&module, &BTreeMap::new()).unwrap().unwrap();
    let ps = particles(4);
    let mut out = vec![0.0; 4];
    let d = inst.loss_rate(&ps, &mut out).expect("no host failure").expect_err("refused");
    assert_no_raw_controls("DomainError's message", &d.error.message);
    assert_no_raw_controls("DomainError's display", &d.to_string());
    assert!(d.to_string().contains("\\u{1b}[2J\\u{1b}]0;all checks passed\\u{7}"), "{d}");
    assert!(d.to_string().contains("range\\u{d}OK: nothing went wrong \\u{202e}exe.txt"), "{d}");

    // Through a real run: the demo with this module as its loss process.
    let tmp = TempDir::new("safe-run");
    let bin = exobound_binary();
    exobound::scenario::demo::write(tmp.path()).unwrap();
    write_module(tmp.path());
    let scenario = tmp.path().join("demo-quick.toml");
    let text = std::fs::read_to_string(&scenario).unwrap();
    assert!(text.contains("\"standard:photoionization\""));
    std::fs::write(
        &scenario,
        text.replace("\"standard:photoionization\"", "\"hostile-text.wasm\""),
    )
    .unwrap();
    let o = Command::new(&bin)
        .arg("run")
        .arg(&scenario)
        .arg("--out")
        .arg(tmp.path().join("out"))
        .output()
        .unwrap();
    let out = printed(&o);
    assert!(
        !o.status.success(),
        "the run should stop at the module's refusal:\n{}",
        printable(&out)
    );
    assert_no_raw_controls("exobound run", &out);
    assert!(out.contains("\\u{1b}[2J") && out.contains("OK: nothing went wrong"), "{out}");

    // Vet quotes the manifest in its report; nothing raw there either, and
    // its manifest check fails the hidden characters, naming each field.
    let o = Command::new(&bin)
        .args(["module", "vet"])
        .arg(tmp.path().join("hostile-text.wasm"))
        .output()
        .unwrap();
    let out = printed(&o);
    assert_no_raw_controls("module vet", &out);
    assert!(out.contains("hostile-text 0.0.1"), "{}", printable(&out));
    assert!(!o.status.success(), "{out}");
    for field in
        ["`description` holds U+001B", "`authors[1]` holds U+000D", "`institution` holds U+202E"]
    {
        assert!(out.contains(field), "`{field}` missing from:\n{out}");
    }
}

//! The `exobound` binary end to end: a run killed with SIGKILL between two
//! checkpoints and resumed gives the same output, bit for bit, as one
//! uninterrupted run; bad input exits non-zero and leaves no output
//! directory behind.
//!
//! These tests live beside the binary (not in the `tests` crate) because
//! Cargo builds a package's binary only for that package's own
//! integration tests.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::Duration;

const BIN: &str = env!("CARGO_BIN_EXE_exobound");

/// A fresh directory under the system temp dir, removed when dropped.
struct Tmp(PathBuf);

impl Tmp {
    fn new(label: &str) -> Tmp {
        let p = std::env::temp_dir().join(format!("exobound-cli-{}-{label}", std::process::id()));
        let _ = std::fs::remove_dir_all(&p);
        std::fs::create_dir_all(&p).unwrap();
        Tmp(p)
    }
}

impl Drop for Tmp {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// The run's flags: the quick demo, 2 days, checkpoints every 2 h, 2 threads.
fn run_args(out: &Path) -> Vec<String> {
    [
        "run",
        "--quick",
        "--threads",
        "2",
        "--checkpoint-every",
        "2 h",
        "--set",
        "run.duration=\"2 d\"",
        "--out",
    ]
    .iter()
    .map(|s| s.to_string())
    .chain([out.display().to_string()])
    .collect()
}

/// Every file under `dir`, relative path -> bytes; summary.json without
/// its `performance` block (wall-clock figures, documented as the only
/// non-reproducible part).
fn contents(dir: &Path) -> Vec<(String, Vec<u8>)> {
    fn walk(base: &Path, dir: &Path, out: &mut Vec<(String, Vec<u8>)>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(base, &p, out);
            } else {
                let rel = p.strip_prefix(base).unwrap().display().to_string();
                let mut bytes = std::fs::read(&p).unwrap();
                if rel == "summary.json" {
                    let mut v: serde_json::Value = serde_json::from_slice(&bytes).unwrap();
                    v.as_object_mut().unwrap().remove("performance");
                    bytes = serde_json::to_vec(&v).unwrap();
                }
                out.push((rel, bytes));
            }
        }
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out);
    out.sort();
    out
}

#[test]
fn resume_after_sigkill_equals_an_uninterrupted_run() {
    let tmp = Tmp::new("resume");
    let (whole, killed) = (tmp.0.join("whole"), tmp.0.join("killed"));
    let st = Command::new(BIN).args(run_args(&whole)).stderr(Stdio::null()).status().unwrap();
    assert!(st.success());

    let mut child = Command::new(BIN)
        .args(run_args(&killed))
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let ck = exobound::output::staging_path(&killed).join(exobound::output::CHECKPOINT_FILE);
    // Wait for the second checkpoint (the file is replaced by rename), then
    // kill between it and the next one. No clock decides: the wait ends
    // when the checkpoint is replaced, or fails when the run ends first.
    let mut seen = None;
    loop {
        if let Ok(m) = std::fs::metadata(&ck) {
            let t = m.modified().unwrap();
            match seen {
                None => seen = Some(t),
                Some(s) if s != t => break,
                _ => {}
            }
        }
        assert!(child.try_wait().unwrap().is_none(), "the run finished before it could be killed");
        std::thread::sleep(Duration::from_millis(5));
    }
    child.kill().unwrap(); // SIGKILL on Unix
    child.wait().unwrap();
    assert!(!killed.exists(), "a killed run must not leave an output directory");
    assert!(ck.is_file(), "the checkpoint survives the kill");

    let resume = Command::new(BIN)
        .args(["run", "--resume", &killed.display().to_string()])
        .stderr(Stdio::null())
        .status()
        .unwrap();
    assert!(resume.success());
    assert!(!exobound::output::staging_path(&killed).exists());
    let (a, b) = (contents(&whole), contents(&killed));
    assert_eq!(
        a.iter().map(|x| &x.0).collect::<Vec<_>>(),
        b.iter().map(|x| &x.0).collect::<Vec<_>>()
    );
    for ((name, x), (_, y)) in a.iter().zip(&b) {
        assert!(x == y, "{name} differs between the resumed and the uninterrupted run");
    }
}

#[test]
fn bad_input_exits_non_zero_and_leaves_nothing() {
    let tmp = Tmp::new("bad");
    let scenario = tmp.0.join("bad.toml");
    std::fs::write(&scenario, "[body]\nname = \"moon\"\n[run]\nduratoin = \"1 d\"\n").unwrap();
    let out = tmp.0.join("out");
    let o = Command::new(BIN)
        .args(["run", &scenario.display().to_string(), "--out", &out.display().to_string()])
        .output()
        .unwrap();
    assert!(!o.status.success());
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("bad.toml:"), "{err}");
    assert!(!out.exists() && !exobound::output::staging_path(&out).exists());

    let o =
        Command::new(BIN).args(["run", "--resume", &out.display().to_string()]).output().unwrap();
    assert!(!o.status.success());
    assert!(String::from_utf8_lossy(&o.stderr).contains("no checkpoint to resume"));
}

#[test]
fn demo_write_produces_a_runnable_scenario() {
    let tmp = Tmp::new("demo");
    let st = Command::new(BIN)
        .args(["demo", "--write", &tmp.0.display().to_string()])
        .stdout(Stdio::null())
        .status()
        .unwrap();
    assert!(st.success());
    for f in ["demo.toml", "demo-quick.toml", "maps/bulk-sodium.csv"] {
        assert!(tmp.0.join(f).is_file(), "{f}");
    }
    let out = tmp.0.join("out");
    let o = Command::new(BIN)
        .args([
            "run",
            &tmp.0.join("demo-quick.toml").display().to_string(),
            "--set",
            "run.duration=\"12 h\"",
            "--set",
            "outputs.products=[\"csv\"]",
            "--out",
            &out.display().to_string(),
        ])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.join("ledger.csv").is_file() && !out.join("exosphere.nc").exists());
}

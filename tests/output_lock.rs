//! One writer per output directory. Through the library: the writer lock
//! that `output::Staging` takes refuses a second writer, never lets it touch
//! the first one's staging directory, does not outlive its holder, and the
//! temporary files of a killed writer are cleared on resume and at the end.
//! Between real `exobound` processes: of two runs aimed at one `--out` only
//! one proceeds and the finished directory is its own, and a run killed with
//! SIGKILL leaves neither a lock that blocks the next run nor temporary files
//! in the finished output.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::Duration;

use exobound::output::lock::{OutputLock, lock_path};
use exobound::output::{CHECKPOINT_FILE, PROVENANCE_FILE, Staging, staged, staging_path};

use crate::support::{TempDir, exobound_binary};

/// Every file under `dir`, as paths relative to it, sorted.
fn files(dir: &Path) -> Vec<String> {
    fn walk(base: &Path, dir: &Path, out: &mut Vec<String>) {
        for e in std::fs::read_dir(dir).unwrap().flatten() {
            let p = e.path();
            if p.is_dir() {
                walk(base, &p, out);
            } else {
                out.push(p.strip_prefix(base).unwrap().display().to_string());
            }
        }
    }
    let mut out = Vec::new();
    walk(dir, dir, &mut out);
    out.sort();
    out
}

fn refusal(r: Result<Staging, String>) -> String {
    match r {
        Ok(s) => panic!("a second writer was let in: {s:?}"),
        Err(e) => e,
    }
}

#[test]
fn a_second_staging_on_one_out_is_refused_until_the_first_is_dropped() {
    let tmp = TempDir::new("lock-twice");
    let out = tmp.path().join("run");
    let first = Staging::create(&out).unwrap();
    let lock = lock_path(&out);
    assert_eq!(first.lock_path(), lock);
    assert!(lock.is_file(), "the lock file sits beside the output");
    assert!(!lock.starts_with(first.dir()) && !lock.starts_with(&out));
    std::fs::write(first.dir().join("work.txt"), "the first writer's file").unwrap();

    // Another open of the same lock file is another open file description,
    // so flock refuses it even within this process.
    let e = refusal(Staging::create(&out));
    let pid = format!("pid {}", std::process::id());
    for part in [pid.as_str(), "on host ", "started ", "(this process)", "choose another --out"] {
        assert!(e.contains(part), "`{part}` missing from: {e}");
    }
    assert!(e.contains(&lock.display().to_string()), "the lock file is not named: {e}");
    assert!(e.contains(&out.display().to_string()), "the output is not named: {e}");
    // The refused writer left the first one's staging directory alone.
    assert_eq!(
        std::fs::read_to_string(first.dir().join("work.txt")).unwrap(),
        "the first writer's file"
    );

    // `staged` (observe, compare, fit) and resuming are refused the same way,
    // and the refused work never runs.
    let mut ran = false;
    let e = staged(&out, |_| {
        ran = true;
        Ok(())
    })
    .unwrap_err();
    assert!(!ran && e.contains("being written by another exobound process"), "{e}");
    std::fs::write(first.checkpoint_path(), b"checkpoint").unwrap();
    let e = refusal(Staging::existing(&out));
    assert!(e.contains(&pid), "{e}");
    assert!(first.dir().join("work.txt").is_file());

    drop(first);
    assert!(!lock.exists(), "dropping the holder removes the lock file");
    // The lock is free again: resuming the checkpoint left behind works.
    let again = Staging::existing(&out).unwrap();
    assert!(again.has_checkpoint());
    assert!(refusal(Staging::create(&out)).contains(&pid));
    again.discard();
    assert!(!lock.exists(), "discard removes the lock file");
    assert!(!staging_path(&out).exists());
    let third = Staging::create(&out).unwrap();
    third.finish().unwrap();
    assert!(!lock.exists(), "finish removes the lock file");
    assert!(out.is_dir() && !staging_path(&out).exists());
}

#[test]
fn the_lock_file_records_its_holder_and_one_path_spelling_cannot_bypass_it() {
    let tmp = TempDir::new("lock-spelling");
    let out = tmp.path().join("nested").join("run");
    let held = OutputLock::acquire(&out).unwrap();
    let text = std::fs::read_to_string(held.path()).unwrap();
    assert!(text.contains(&format!("pid: {}\n", std::process::id())), "{text}");
    assert!(text.contains("\nhost: ") && text.contains("\nstarted: ") && text.contains("Z\n"));
    // A trailing slash or a `./` names the same output and the same lock.
    let slash = PathBuf::from(format!("{}/", out.display()));
    assert_eq!(lock_path(&slash), lock_path(&out));
    assert!(refusal(Staging::create(&slash)).contains("being written"));
    let dotted = tmp.path().join("nested").join(".").join("run");
    assert!(refusal(Staging::create(&dotted)).contains("being written"));
    held.release();
    assert!(!lock_path(&out).exists());
}

#[test]
fn a_stale_lock_file_does_not_block_a_new_writer() {
    let tmp = TempDir::new("lock-stale");
    let out = tmp.path().join("run");
    // What a writer killed with SIGKILL leaves: the file, but no lock (the
    // kernel drops a flock when its holder dies). The pid is beyond Linux's
    // pid_max, so no live process has it.
    std::fs::write(
        lock_path(&out),
        "exobound writer lock\npid: 99999999\nhost: elsewhere\nstarted: 2001-01-01T00:00:00Z\n",
    )
    .unwrap();
    let s = Staging::create(&out).unwrap();
    let text = std::fs::read_to_string(lock_path(&out)).unwrap();
    assert!(
        !text.contains("99999999") && !text.contains("elsewhere"),
        "stale details kept: {text}"
    );
    assert!(text.contains(&format!("pid: {}\n", std::process::id())), "{text}");
    s.finish().unwrap();
    assert!(!lock_path(&out).exists());
}

#[test]
fn temporaries_of_a_killed_writer_are_removed_on_resume_and_at_the_end() {
    let tmp = TempDir::new("lock-temporaries");
    let out = tmp.path().join("run");
    let s = Staging::create(&out).unwrap();
    let dir = s.dir().to_path_buf();
    std::fs::write(s.checkpoint_path(), b"checkpoint").unwrap();
    std::fs::create_dir_all(dir.join("plots")).unwrap();
    // Left by `atomic_write` in a process killed mid-write.
    for leftover in [".checkpoint.exck.tmp-99999", "plots/.density.png.tmp-4242"] {
        std::fs::write(dir.join(leftover), b"half").unwrap();
    }
    // Files that only look similar are products, and stay.
    for keep in ["notes.tmp-1", ".tmp-12", "plots/.x.tmp-12a", PROVENANCE_FILE] {
        std::fs::write(dir.join(keep), b"keep").unwrap();
    }
    drop(s); // the writer is gone; its staging directory stays for --resume

    let s = Staging::existing(&out).unwrap();
    let keep = [".tmp-12", CHECKPOINT_FILE, "notes.tmp-1", "plots/.x.tmp-12a", PROVENANCE_FILE];
    assert_eq!(files(&dir), keep, "resume did not clear the temporaries");

    // More temporaries appear before the end (another kill and resume, say).
    std::fs::write(dir.join("plots/.ledger.png.tmp-7"), b"half").unwrap();
    std::fs::write(dir.join(".summary.json.tmp-8"), b"half").unwrap();
    let done = s.finish().unwrap();
    assert_eq!(done, out);
    assert_eq!(files(&out), [".tmp-12", "notes.tmp-1", "plots/.x.tmp-12a", PROVENANCE_FILE]);
}

/// Kills the child (by its pid) if the test ends early, so no run is left
/// stopped or running.
struct Reap(Child);

impl Drop for Reap {
    fn drop(&mut self) {
        let _ = signal(&self.0, "CONT");
        let _ = self.0.kill();
        let _ = self.0.wait();
    }
}

/// Send `SIG<name>` to `child` with kill(1).
fn signal(child: &Child, name: &str) -> bool {
    Command::new("kill")
        .arg(format!("-{name}"))
        .arg(child.id().to_string())
        .status()
        .is_ok_and(|s| s.success())
}

/// `exobound run` (the binary `bin`) of the quick demo with `seed` into `out`, plus `extra`;
/// its stderr goes to `log` (a file, so a stopped reader never blocks it).
fn start(bin: &Path, out: &Path, seed: u64, extra: &[&str], log: &Path) -> Child {
    Command::new(bin)
        .args(["run", "--quick", "--threads", "2", "--seed", &seed.to_string(), "--out"])
        .arg(out)
        .args(extra)
        .stdout(Stdio::null())
        .stderr(std::fs::File::create(log).unwrap())
        .spawn()
        .unwrap()
}

/// Wait until `cond` holds, failing if `child` exits first. No clock
/// decides: on a loaded machine the wait is simply longer.
fn wait_for(child: &mut Child, what: &str, cond: impl Fn() -> bool) {
    while !cond() {
        assert!(child.try_wait().unwrap().is_none(), "the run ended before {what}");
        std::thread::sleep(Duration::from_millis(5));
    }
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// Every file name under `dir`, subdirectories included.
fn names(dir: &Path) -> Vec<String> {
    let mut out = Vec::new();
    for e in std::fs::read_dir(dir).unwrap().flatten() {
        if e.path().is_dir() {
            out.extend(names(&e.path()));
        }
        out.push(e.file_name().to_string_lossy().into_owned());
    }
    out
}

#[test]
fn two_runs_on_one_out_one_proceeds_and_the_other_names_the_holder() {
    let bin = exobound_binary();
    let tmp = TempDir::new("lock-concurrent");
    let out = tmp.path().join("out");
    let lock = lock_path(&out);
    let log = tmp.path().join("first.log");
    let mut first = Reap(start(&bin, &out, 11, &[], &log));
    let pid_line = format!("pid: {}\n", first.0.id());
    wait_for(&mut first.0, "its lock and staging directory", || {
        std::fs::read_to_string(&lock).is_ok_and(|t| t.contains(&pid_line))
            && staging_path(&out).is_dir()
    });
    // Hold the first run still, so the second surely meets its lock.
    assert!(signal(&first.0, "STOP"), "kill -STOP failed");

    let second = Command::new(&bin)
        .args(["run", "--quick", "--threads", "2", "--seed", "22", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&second.stderr);
    let code = second.status.code().expect("the second run exited, not killed");
    assert!((1..=99).contains(&code), "exit status {code}: {err}");
    for part in [
        format!("pid {}", first.0.id()),
        "on host ".to_string(),
        "started ".to_string(),
        lock.display().to_string(),
        "choose another --out".to_string(),
    ] {
        assert!(err.contains(&part), "`{part}` missing from: {err}");
    }
    assert!(staging_path(&out).is_dir(), "the refused run touched the holder's staging directory");
    assert!(!out.exists());

    assert!(signal(&first.0, "CONT"), "kill -CONT failed");
    let status = first.0.wait().unwrap();
    let log = std::fs::read_to_string(&log).unwrap_or_default();
    assert!(status.success(), "the first run failed: {log}");

    for f in ["provenance.json", "summary.json", "exosphere.nc", "ledger.csv", "windows.csv"] {
        assert!(out.join(f).is_file(), "{f} missing from the finished output");
    }
    assert!(out.join("plots").is_dir() && out.join("profiles").is_dir());
    assert_eq!(json(&out.join("provenance.json"))["seed"], 11, "the output is not the winner's");
    assert!(!staging_path(&out).exists() && !lock.exists(), "staging or lock left behind");
}

#[test]
fn a_run_killed_mid_checkpoint_leaves_no_blocking_lock_and_resume_clears_its_temporaries() {
    let bin = exobound_binary();
    let tmp = TempDir::new("lock-killed");
    let out = tmp.path().join("out");
    let staging = staging_path(&out);
    let ck = staging.join(CHECKPOINT_FILE);
    let mut run =
        Reap(start(&bin, &out, 5, &["--checkpoint-every", "2 h"], &tmp.path().join("run.log")));
    wait_for(&mut run.0, "a checkpoint", || ck.is_file());
    run.0.kill().unwrap(); // SIGKILL
    run.0.wait().unwrap();

    // What the kill left: the lock file (no longer locked), the staging
    // directory, and, as if the kill had hit a checkpoint write, temporaries.
    assert!(lock_path(&out).is_file(), "the killed run's lock file should remain on disk");
    std::fs::write(staging.join(".checkpoint.exck.tmp-99999"), b"half a checkpoint").unwrap();
    std::fs::create_dir_all(staging.join("plots")).unwrap();
    std::fs::write(staging.join("plots/.column.png.tmp-99999"), b"half a figure").unwrap();

    let resume = Command::new(&bin)
        .args(["run", "--resume"])
        .arg(&out)
        .stdout(Stdio::null())
        .output()
        .unwrap();
    assert!(resume.status.success(), "{}", String::from_utf8_lossy(&resume.stderr));
    let left: Vec<String> = names(&out).into_iter().filter(|n| n.contains(".tmp-")).collect();
    assert!(left.is_empty(), "temporaries in the finished output: {left:?}");
    assert_eq!(json(&out.join("provenance.json"))["seed"], 5);
    assert!(!staging.exists() && !lock_path(&out).exists());

    // A fresh run over the finished output is not blocked either.
    let again = Command::new(&bin)
        .args(["run", "--quick", "--seed", "6", "--set", "run.duration=\"12 h\"", "--out"])
        .arg(&out)
        .output()
        .unwrap();
    assert!(again.status.success(), "{}", String::from_utf8_lossy(&again.stderr));
    assert_eq!(json(&out.join("provenance.json"))["seed"], 6);
}

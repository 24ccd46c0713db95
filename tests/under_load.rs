//! Runs under CPU load: the quick demo and the Chamberlain validation pass
//! while every core is kept busy by other processes.
//!
//! Why this exists: the sandbox once stopped calls after one second of
//! wall time, so a healthy run died whenever other jobs shared its cores
//! (this test's own CI run among them). Budgets are now counted in fuel, so
//! whether a call succeeds depends on the module and its inputs alone; this
//! test keeps that promise honest by running with the cores oversubscribed.

use std::process::{Child, Command, Stdio};

use crate::support::TempDir;

/// Busy-looping shell processes, killed by their process ids when dropped.
struct Load(Vec<Child>);

impl Load {
    /// `per_core` busy processes for every core of this machine.
    fn start(per_core: usize) -> Load {
        let cores = std::thread::available_parallelism().map_or(2, |n| n.get());
        let children = (0..per_core * cores)
            .map(|_| {
                Command::new("sh")
                    .args(["-c", "while :; do :; done"])
                    .stdin(Stdio::null())
                    .stdout(Stdio::null())
                    .spawn()
                    .expect("start a busy process")
            })
            .collect();
        Load(children)
    }

    /// Whether every busy process is still running (so the load was real).
    fn all_running(&mut self) -> bool {
        self.0.iter_mut().all(|c| matches!(c.try_wait(), Ok(None)))
    }
}

impl Drop for Load {
    fn drop(&mut self) {
        for c in &mut self.0 {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

#[test]
fn runs_pass_while_every_core_is_busy() {
    let tmp = TempDir::new("under-load");
    let settings = ["run.threads=2".to_string()];
    // The quick demo on a quiet machine first, as the reference.
    let quiet = tmp.path().join("quiet");
    crate::run_outputs::run_quick(&quiet, &settings);
    // One busy process per core besides this test's two worker threads (and
    // any other test running beside it): at least twice oversubscribed, so
    // each of this run's threads gets about half a core. (Three per core
    // was tried: it passed too, but took over 20 minutes of CI time.)
    let mut load = Load::start(1);
    let busy = tmp.path().join("busy");
    crate::run_outputs::run_quick(&busy, &settings);
    // Load changes neither whether the run succeeds nor what it gives.
    for f in ["exosphere.nc", "ledger.csv", "summary.json"] {
        let (a, b) = (std::fs::read(quiet.join(f)).unwrap(), std::fs::read(busy.join(f)).unwrap());
        if f == "summary.json" {
            // The summary also reports wall time and hops per second.
            let strip = |t: &[u8]| {
                let mut v: serde_json::Value = serde_json::from_slice(t).unwrap();
                v.as_object_mut().unwrap().remove("performance");
                v
            };
            assert_eq!(strip(&a), strip(&b), "{f}");
        } else {
            assert_eq!(a, b, "{f} differs under load");
        }
    }
    crate::engine::density_profile_follows_chamberlain();
    assert!(load.all_running(), "the load must last the whole test");
}

//! Runs under CPU load: the quick demo and the Chamberlain validation pass
//! while every core is kept busy by other processes.
//!
//! Why this exists: the sandbox once stopped calls after one second of
//! wall time, so a healthy run died whenever other jobs shared its cores
//! (this test's own CI run among them). Budgets are now counted in fuel, so
//! whether a call succeeds depends on the module and its inputs alone; this
//! test keeps that promise honest by running at several times
//! oversubscription.

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
    // Three busy processes per core besides this test's own threads (and
    // the other tests running beside it): about four times oversubscribed.
    let mut load = Load::start(3);
    let tmp = TempDir::new("under-load");
    let out = tmp.path().join("quick");
    crate::run_outputs::run_quick(&out, &["run.threads=2".to_string()]);
    assert!(out.join("provenance.json").is_file());
    crate::engine::density_profile_follows_chamberlain();
    assert!(load.all_running(), "the load must last the whole test");
}

//! A real single-node Slurm cluster runs the job array that
//! `exobound sweep --emit-slurm` writes, and `exobound sweep collect`
//! gathers the shards into the same `sweep.csv` as a local sweep.
//!
//! The cluster (munged, slurmctld, slurmd on loopback, non-default ports,
//! proctrack/linuxproc, task/none) is started by `tests/slurm/cluster.sh`
//! and stopped by pid when the test ends. It needs Debian's `slurm-wlm`
//! and `munge` and root. When those are missing the test says so and
//! passes, unless EXOBOUND_REQUIRE_SLURM is set (as `.ci/run` does, after
//! installing them), in which case it fails.

use std::path::{Path, PathBuf};
use std::process::Command;

const EXE: &str = env!("CARGO_BIN_EXE_exobound");

/// Stops the test cluster when dropped.
struct Cluster {
    dir: PathBuf,
    conf: PathBuf,
}

impl Drop for Cluster {
    fn drop(&mut self) {
        let _ = Command::new(script()).arg("stop").arg(&self.dir).status();
    }
}

fn script() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/slurm/cluster.sh")
}

fn have(cmd: &str) -> bool {
    Command::new("sh")
        .arg("-c")
        .arg(format!("command -v {cmd}"))
        .output()
        .is_ok_and(|o| o.status.success())
}

fn exobound(args: &[&str], conf: &Path) -> std::process::Output {
    let out = Command::new(EXE).args(args).env("SLURM_CONF", conf).output().unwrap();
    assert!(
        out.status.success(),
        "exobound {args:?} failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

#[test]
fn slurm_job_array_runs_the_sweep_end_to_end() {
    let required = std::env::var_os("EXOBOUND_REQUIRE_SLURM").is_some();
    let tools = ["munged", "slurmctld", "slurmd", "sbatch", "sinfo"];
    let missing: Vec<&str> = tools.iter().copied().filter(|t| !have(t)).collect();
    let root = Command::new("id").arg("-u").output().is_ok_and(|o| o.stdout.starts_with(b"0"));
    if !missing.is_empty() || !root {
        assert!(!required, "EXOBOUND_REQUIRE_SLURM is set but missing: {missing:?}, root: {root}");
        eprintln!("skipping the Slurm test: missing {missing:?} or not root");
        return;
    }
    let base = std::env::temp_dir().join(format!("exobound-slurm-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&base);
    std::fs::create_dir_all(&base).unwrap();
    let start = Command::new(script()).arg("start").arg(base.join("cluster")).output().unwrap();
    assert!(
        start.status.success(),
        "cluster start failed: {}",
        String::from_utf8_lossy(&start.stderr)
    );
    let conf = PathBuf::from(String::from_utf8_lossy(&start.stdout).trim().to_string());
    let cluster = Cluster { dir: base.join("cluster"), conf };

    let plan = base.join("plan.toml");
    std::fs::write(
        &plan,
        "title = \"slurm test\"\nscenario = \"demo-quick\"\n\
         set = [\"run.particles=3000\", \"run.duration=\\\"1 d\\\"\"]\nseeds = [5]\n\
         [[parameters]]\nkey = \"processes.impact-vapor.parameters.flux\"\n\
         range = { from = \"5e4 cm^-2 s^-1\", to = \"2e5 cm^-2 s^-1\", count = 3 }\n",
    )
    .unwrap();
    let (p, out, job) = (plan.to_str().unwrap(), base.join("out"), base.join("job"));
    exobound(
        &[
            "sweep",
            p,
            "--out",
            out.to_str().unwrap(),
            "--emit-slurm",
            job.to_str().unwrap(),
            "--shards",
            "3",
        ],
        &cluster.conf,
    );
    let sbatch = job.join("sweep.sbatch");
    let text = std::fs::read_to_string(&sbatch).unwrap();
    // Slurm job arrays: one task per shard, `#SBATCH --array=0-(N-1)` (sbatch manual).
    assert!(text.contains("#SBATCH --array=0-2\n"), "{text}");
    let run = Command::new("sbatch")
        .arg("--wait")
        .arg(&sbatch)
        .env("SLURM_CONF", &cluster.conf)
        .output()
        .unwrap();
    assert!(
        run.status.success(),
        "sbatch failed: {}{}\nlogs: {:?}",
        String::from_utf8_lossy(&run.stdout),
        String::from_utf8_lossy(&run.stderr),
        std::fs::read_dir(job.join("logs"))
            .map(|d| d.flatten().map(|e| e.path()).collect::<Vec<_>>())
    );
    for i in 0..3 {
        assert!(
            out.join("shards").join(format!("shard-{i}-of-3.json")).is_file(),
            "shard {i} missing"
        );
    }
    exobound(&["sweep", "collect", out.to_str().unwrap()], &cluster.conf);
    // The same plan run locally, unsharded, gives the same table bit for bit.
    let local = base.join("local");
    exobound(&["sweep", p, "--out", local.to_str().unwrap(), "--jobs", "2"], &cluster.conf);
    let a = std::fs::read_to_string(out.join("sweep.csv")).unwrap();
    let b = std::fs::read_to_string(local.join("sweep.csv")).unwrap();
    assert_eq!(a, b);
    drop(cluster);
    let _ = std::fs::remove_dir_all(&base);
}

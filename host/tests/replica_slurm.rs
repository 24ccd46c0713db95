//! A real single-node Slurm cluster runs what `exobound run --replicas N
//! --emit-slurm` writes: `submit.sh` submits the replicas' job array and
//! the merge job chained after it, and the merged directory equals the
//! merge of the same replicas run by hand, bit for bit.
//!
//! The cluster is the one of `slurm.rs` (`tests/slurm/cluster.sh`: munged,
//! slurmctld and slurmd on loopback, non-default ports), started here and
//! stopped by pid when the test ends. It needs Debian's `slurm-wlm` and
//! `munge` and root. When those are missing the test says so and passes,
//! unless EXOBOUND_REQUIRE_SLURM is set, in which case it fails.

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

fn exobound(args: &[String], conf: &Path) {
    let out = Command::new(EXE).args(args).env("SLURM_CONF", conf).output().unwrap();
    assert!(
        out.status.success(),
        "exobound {args:?} failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// The quick demo cut to 12 h with 1500 particles, NetCDF and CSV only.
fn small() -> Vec<String> {
    ["run.particles=1500", "run.duration=\"12 h\"", "outputs.products=[\"netcdf\", \"csv\"]"]
        .iter()
        .flat_map(|s| ["--set".to_string(), s.to_string()])
        .collect()
}

#[test]
fn slurm_runs_the_replica_array_then_the_merge() {
    let required = std::env::var_os("EXOBOUND_REQUIRE_SLURM").is_some();
    let tools = ["munged", "slurmctld", "slurmd", "sbatch", "sinfo"];
    let missing: Vec<&str> = tools.iter().copied().filter(|t| !have(t)).collect();
    let root = Command::new("id").arg("-u").output().is_ok_and(|o| o.stdout.starts_with(b"0"));
    if !missing.is_empty() || !root {
        assert!(!required, "EXOBOUND_REQUIRE_SLURM is set but missing: {missing:?}, root: {root}");
        eprintln!("skipping the Slurm replica test: missing {missing:?} or not root");
        return;
    }
    let base = std::env::temp_dir().join(format!("exobound-replica-slurm-{}", std::process::id()));
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

    let (out, job) = (base.join("merged"), base.join("job"));
    let mut args: Vec<String> = vec!["run".into(), "--quick".into()];
    args.extend(small());
    args.extend(["--seed", "3", "--replicas", "3", "--emit-slurm"].map(String::from));
    args.extend([job.display().to_string(), "--out".into(), out.display().to_string()]);
    exobound(&args, &cluster.conf);
    let array = std::fs::read_to_string(job.join("replicas.sbatch")).unwrap();
    // Slurm job arrays: one task per replica, `#SBATCH --array=0-(N-1)` (sbatch manual).
    assert!(array.contains("#SBATCH --array=0-2\n"), "{array}");

    // submit.sh as a user runs it; SBATCH_WAIT (sbatch's --wait) makes each
    // sbatch return when its job has ended, so the merge has run when it exits.
    let run = Command::new("sh")
        .arg(job.join("submit.sh"))
        .env("SLURM_CONF", &cluster.conf)
        .env("SBATCH_WAIT", "1")
        .output()
        .unwrap();
    let logs = || {
        std::fs::read_dir(job.join("logs"))
            .map(|d| {
                d.flatten()
                    .map(|e| {
                        let p = e.path();
                        format!(
                            "{}:\n{}",
                            p.display(),
                            std::fs::read_to_string(&p).unwrap_or_default()
                        )
                    })
                    .collect::<Vec<_>>()
            })
            .unwrap_or_default()
    };
    assert!(
        run.status.success(),
        "submit.sh failed: {}{}\nlogs: {:?}",
        String::from_utf8_lossy(&run.stdout),
        String::from_utf8_lossy(&run.stderr),
        logs()
    );
    assert!(out.join("provenance.json").is_file(), "no merged output; logs: {:?}", logs());

    // The same replicas run and merged by hand give the same bytes.
    let local = base.join("local");
    let mut dirs = Vec::new();
    for i in 0..3 {
        let d = local.join(format!("r{i}"));
        let mut a: Vec<String> = vec!["run".into(), "--quick".into()];
        a.extend(small());
        a.extend(["--seed".into(), "3".into(), "--replica".into(), format!("{i}/3")]);
        a.extend(["--out".into(), d.display().to_string()]);
        exobound(&a, &cluster.conf);
        dirs.push(d.display().to_string());
    }
    let by_hand = local.join("merged");
    let mut a = vec!["merge-replicas".to_string()];
    a.extend(dirs);
    a.extend(["--out".into(), by_hand.display().to_string()]);
    exobound(&a, &cluster.conf);
    for f in ["exosphere.nc", "ledger.csv", "windows.csv", "profiles/latitude.csv"] {
        assert_eq!(
            std::fs::read(out.join(f)).unwrap(),
            std::fs::read(by_hand.join(f)).unwrap(),
            "{f} differs between the Slurm merge and the merge by hand"
        );
    }
    drop(cluster);
    let _ = std::fs::remove_dir_all(&base);
}

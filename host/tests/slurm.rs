//! A real single-node Slurm cluster runs the job array that
//! `exobound sweep --emit-slurm` writes, and `exobound sweep collect`
//! gathers the shards into the same `sweep.csv` as a local sweep; and
//! `exobound fit --slurm` runs its batches as job arrays on it and gives
//! the same fit, bit for bit, as the same fit run locally.
//!
//! The cluster (munged, slurmctld, slurmd on loopback, non-default ports,
//! proctrack/linuxproc, task/none) is started by `tests/slurm/cluster.sh`
//! and stopped by pid when each test ends; the tests take turns (one
//! cluster at a time, [`SERIAL`]). It needs Debian's `slurm-wlm` and
//! `munge` and root. When those are missing the tests say so and pass,
//! unless EXOBOUND_REQUIRE_SLURM is set (as `.ci/run` does, after
//! installing them), in which case they fail.

use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::Mutex;

const EXE: &str = env!("CARGO_BIN_EXE_exobound");

/// One test cluster at a time: the tests of this file take turns.
static SERIAL: Mutex<()> = Mutex::new(());

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

/// Start a test cluster in a fresh directory named after `tag`: the
/// cluster and that directory, or `None` (the test passes) when Slurm or
/// root is missing and EXOBOUND_REQUIRE_SLURM is unset.
fn start_cluster(tag: &str) -> Option<(Cluster, PathBuf)> {
    let required = std::env::var_os("EXOBOUND_REQUIRE_SLURM").is_some();
    let tools = ["munged", "slurmctld", "slurmd", "sbatch", "sinfo"];
    let missing: Vec<&str> = tools.iter().copied().filter(|t| !have(t)).collect();
    let root = Command::new("id").arg("-u").output().is_ok_and(|o| o.stdout.starts_with(b"0"));
    if !missing.is_empty() || !root {
        assert!(!required, "EXOBOUND_REQUIRE_SLURM is set but missing: {missing:?}, root: {root}");
        eprintln!("skipping the Slurm test: missing {missing:?} or not root");
        return None;
    }
    let base = std::env::temp_dir().join(format!("exobound-slurm-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&base);
    std::fs::create_dir_all(&base).unwrap();
    let start = Command::new(script()).arg("start").arg(base.join("cluster")).output().unwrap();
    assert!(
        start.status.success(),
        "cluster start failed: {}",
        String::from_utf8_lossy(&start.stderr)
    );
    let conf = PathBuf::from(String::from_utf8_lossy(&start.stdout).trim().to_string());
    Some((Cluster { dir: base.join("cluster"), conf }, base))
}

/// Take this file's turn at the cluster (a failed test before does not
/// stop the others: its cluster was stopped when it unwound).
fn serial() -> std::sync::MutexGuard<'static, ()> {
    SERIAL.lock().unwrap_or_else(|e| e.into_inner())
}

#[test]
fn slurm_job_array_runs_the_sweep_end_to_end() {
    let _turn = serial();
    let Some((cluster, base)) = start_cluster("sweep") else { return };

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

/// The quick demo cut to 1 day and 3000 particles, NetCDF and CSV only.
const SMALL: [&str; 3] =
    ["run.particles=3000", "run.duration=\"1 d\"", "outputs.products=[\"netcdf\", \"csv\"]"];

/// The free parameter of the fits.
const FLUX: &str = "processes.impact-vapor.parameters.flux=5e4..1e6 cm^-2 s^-1";

/// Observations of the equatorial column: a run of the small demo at
/// 2e5 cm^-2 s^-1 with seed 99 (not a seed of the fits), every value with
/// a 10 % uncertainty.
fn observations(base: &Path, conf: &Path) -> PathBuf {
    let truth = base.join("truth");
    let mut args = vec!["run", "--quick", "--seed", "99", "--out", truth.to_str().unwrap()];
    for s in SMALL {
        args.extend(["--set", s]);
    }
    args.extend(["--set", "processes.impact-vapor.parameters.flux=\"2e5 cm^-2 s^-1\""]);
    exobound(&args, conf);
    let table = std::fs::read_to_string(truth.join("profiles/equator_local_time.csv")).unwrap();
    let mut obs = String::from("kind,coordinate,value,uncertainty,unit\n");
    for line in table.lines().skip(1) {
        let c: Vec<f64> = line.split(',').map(|x| x.parse().unwrap()).collect();
        if c[1].is_finite() && c[1] > 0.0 {
            obs.push_str(&format!("equator_column,{} h,{:e},{:e},cm^-2\n", c[0], c[1], 0.1 * c[1]));
        }
    }
    assert!(obs.lines().count() > 5, "too few observations:\n{obs}");
    let path = base.join("observed.csv");
    std::fs::write(&path, obs).unwrap();
    path
}

/// `exobound fit` of [`FLUX`] to `obs` into `out` with `more` arguments;
/// the command's output, whether it succeeded or not.
fn fit(obs: &Path, out: &Path, more: &[&str], conf: &Path) -> std::process::Output {
    let mut args = vec!["fit", "--quick", "--observed", obs.to_str().unwrap(), "--free", FLUX];
    args.extend(["--grid", "3", "--max-rounds", "2", "--seeds", "2"]);
    args.extend(["--out", out.to_str().unwrap()]);
    for s in SMALL {
        args.extend(["--set", s]);
    }
    args.extend(more);
    Command::new(EXE).args(&args).env("SLURM_CONF", conf).output().unwrap()
}

fn ok(out: std::process::Output, what: &str) {
    assert!(
        out.status.success(),
        "{what} failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn slurm_fit_runs_its_batches_as_job_arrays_with_the_local_result() {
    let _turn = serial();
    let Some((cluster, base)) = start_cluster("fit") else { return };
    let conf = cluster.conf.clone();
    let obs = observations(&base, &conf);

    let t = std::time::Instant::now();
    let local = base.join("local");
    // Here one run at a time on the scenario's threads (one per core);
    // there one thread per task: thread counts do not change a result.
    ok(fit(&obs, &local, &[], &conf), "the local fit");
    eprintln!("local fit: {:.1} s", t.elapsed().as_secs_f64());
    let t = std::time::Instant::now();
    let (remote, job) = (base.join("remote"), base.join("job"));
    let job_s = job.to_str().unwrap();
    ok(fit(&obs, &remote, &["--slurm", job_s, "--cpus-per-task", "1"], &conf), "the Slurm fit");
    eprintln!("Slurm fit: {:.1} s", t.elapsed().as_secs_f64());

    let read = |d: &Path| -> serde_json::Value {
        serde_json::from_str(&std::fs::read_to_string(d.join("fit.json")).unwrap()).unwrap()
    };
    let (a, b) = (read(&local), read(&remote));
    // Bit for bit: serde_json writes the shortest text that reads back to
    // the same f64, so equal text is equal bits.
    for key in ["best", "interval_1sigma", "interval_2sigma", "chi2", "sigma", "runs"] {
        assert_eq!(a[key].to_string(), b[key].to_string(), "fit.json `{key}`");
    }
    let evaluations = |v: &serde_json::Value| v["evaluations"].as_array().unwrap().len();
    assert_eq!(evaluations(&a), evaluations(&b));
    assert!(evaluations(&a) >= 3, "{a}");
    // Everything else the fit wrote is the same too.
    for file in ["fit.json", "evaluations.csv", "residuals.csv"] {
        assert_eq!(
            std::fs::read_to_string(local.join(file)).unwrap(),
            std::fs::read_to_string(remote.join(file)).unwrap(),
            "{file}"
        );
    }
    // The batches went to Slurm: the grid (3 points x 2 seeds), the noise
    // calibration (6 seeds), then the design rounds; each task has its log,
    // and the runs were removed once read.
    let grid = job.join("batch-1-grid");
    assert!(grid.join("runs.sbatch").is_file() && grid.join("task-5.sh").is_file());
    assert!(!grid.join("task-6.sh").exists());
    assert!(grid.join("logs/task-5.log").is_file());
    assert!(!grid.join("runs").exists());
    assert!(job.join("batch-2-noise-calibration/logs/task-5.log").is_file());
    assert!(job.join("batch-3-design-1/runs.sbatch").is_file());

    // A task that fails stops the fit: the error names the task, its point,
    // its seed and its log, and no output is left. The tasks (and only
    // they: sbatch's SBATCH_EXPORT, the input variable of --export) look
    // for the standard modules in a directory that does not exist, as on a
    // node where they are missing.
    let broken = base.join("broken");
    let mut args = vec!["fit", "--quick", "--observed", obs.to_str().unwrap(), "--free", FLUX];
    args.extend(["--out", broken.to_str().unwrap(), "--slurm", job_s]);
    let out = Command::new(EXE)
        .args(&args)
        .env("SLURM_CONF", &conf)
        .env("SBATCH_EXPORT", "ALL,EXOBOUND_MODULE_DIR=/nonexistent/exobound-modules")
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(!out.status.success(), "{err}");
    assert!(err.contains("batch 1 (grid), Slurm job "), "{err}");
    assert!(err.contains("6 of 6 runs did not finish"), "{err}");
    // Grid point 0 is at 1/6 of the log range: 5e4 x 20^(1/6).
    let flux = format!("{:.5e}", 5e4 * 20f64.powf(1.0 / 6.0));
    assert!(err.contains(&format!("task 0 (flux = {flux} cm^-2 s^-1, seed ")), "{err}");
    let log0 = job.join("batch-1-grid/logs/task-0.log");
    assert!(err.contains(&format!("log `{}`", log0.display())), "{err}");
    assert!(err.contains("EXOBOUND_MODULE_DIR"), "the log's end is quoted: {err}");
    assert!(!broken.exists(), "a failed fit left {}", broken.display());
    assert!(!base.join("broken.partial").exists());
    // The earlier fit's batches were emptied for this one.
    assert!(!job.join("batch-3-design-1").exists());
    drop(cluster);
    let _ = std::fs::remove_dir_all(&base);
}

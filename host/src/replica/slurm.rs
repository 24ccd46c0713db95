//! Slurm scripts for a replica set: a job array of N replicas, a merge job,
//! and a submit script that chains them.
//!
//! Why this exists: replicas are meant to run on many nodes at once, and
//! sites run batch schedulers. As for sweeps (`sweep::slurm`, whose writer
//! [`batch_script`] this reuses), each array task runs the command a user
//! would type, `exobound run SCENARIO --replica $SLURM_ARRAY_TASK_ID/N
//! --out OUT.replicas/replica-$SLURM_ARRAY_TASK_ID`, and the merge job runs
//! `exobound merge-replicas ... --out OUT`; `submit.sh` submits the array,
//! then the merge with `--dependency=afterok` on it, so the merge starts
//! only when every replica has succeeded. OUT must be on a filesystem that
//! every node sees.

use std::path::{Path, PathBuf};

use crate::output::atomic_write;
use crate::sweep::slurm::{Job, SlurmOptions, batch_script, sh};

/// Name of the job-array script in the job directory.
pub const ARRAY_SCRIPT: &str = "replicas.sbatch";
/// Name of the merge script.
pub const MERGE_SCRIPT: &str = "merge.sbatch";
/// Name of the submit script.
pub const SUBMIT_SCRIPT: &str = "submit.sh";

/// What the replicas run and where they write.
#[derive(Clone, Debug)]
pub struct ReplicaJobs<'a> {
    /// The `exobound` binary, absolute.
    pub exe: &'a Path,
    /// The scenario file, absolute; `None` for the built-in demo.
    pub scenario: Option<&'a Path>,
    /// With no scenario: the demo's quick preset.
    pub quick: bool,
    /// `KEY=VALUE` overrides, passed to every replica as `--set`.
    pub overrides: &'a [String],
    /// N, the number of replicas, dimensionless (at least 2).
    pub count: usize,
    /// The merged output directory, absolute; the replicas go beside it
    /// ([`replica_root`]).
    pub out: &'a Path,
}

/// The directory holding the replicas of merged output `out`: `OUT.replicas`.
pub fn replica_root(out: &Path) -> PathBuf {
    crate::output::beside(out, ".replicas")
}

/// Output directory of replica `index` of merged output `out`.
pub fn replica_dir(out: &Path, index: usize) -> PathBuf {
    replica_root(out).join(format!("replica-{index}"))
}

/// The three scripts (array, merge, submit) for `jobs`, with the job
/// directory `job_dir` (absolute) holding them and `logs/`.
pub fn scripts(jobs: &ReplicaJobs, o: &SlurmOptions, job_dir: &Path) -> [String; 3] {
    let exe = sh(&jobs.exe.display().to_string());
    let root = sh(&replica_root(jobs.out).display().to_string());
    let mut run = format!("{exe} run");
    match jobs.scenario {
        Some(p) => run += &format!(" {}", sh(&p.display().to_string())),
        None if jobs.quick => run += " --quick",
        None => {}
    }
    run += &format!(
        " --replica \"${{SLURM_ARRAY_TASK_ID}}/{n}\" --out {root}/replica-\"${{SLURM_ARRAY_TASK_ID}}\"",
        n = jobs.count
    );
    // Results do not depend on the thread count; use the CPUs the task has,
    // unless the user chose.
    if !jobs.overrides.iter().any(|o| o.trim_start().starts_with("run.threads")) {
        run += &format!(" --threads {}", o.cpus_per_task.max(1));
    }
    for s in jobs.overrides {
        run += &format!(" --set {}", sh(s));
    }
    let logs = job_dir.join("logs");
    let array = batch_script(
        &Job {
            name: "exobound-replicas",
            comment: &format!(
                "exobound replicas: one array task per replica (0 to {}); written by `exobound \
                 run --replicas {} --emit-slurm`.",
                jobs.count - 1,
                jobs.count
            ),
            array: Some(jobs.count),
            log: &logs.join("replica-%a.log"),
            command: &run,
        },
        o,
    );
    let dirs: Vec<String> = (0..jobs.count).map(|i| format!("{root}/replica-{i}")).collect();
    let merge_cmd = format!(
        "{exe} merge-replicas {} --out {}",
        dirs.join(" "),
        sh(&jobs.out.display().to_string())
    );
    let merge = batch_script(
        &Job {
            name: "exobound-merge-replicas",
            comment: "exobound replicas: merge every replica into one output directory; \
                      submitted by submit.sh after the array has succeeded.",
            array: None,
            log: &logs.join("merge.log"),
            command: &merge_cmd,
        },
        &SlurmOptions { shards: 1, cpus_per_task: 1, ..o.clone() },
    );
    let submit = format!(
        "#!/bin/sh\n\
         # Submit the {n} replicas, then the merge, which starts only when every replica has\n\
         # succeeded (--dependency=afterok on the array job). Written by `exobound run\n\
         # --replicas {n} --emit-slurm`.\n\
         set -eu\n\
         jid=$(sbatch --parsable {array})\n\
         jid=${{jid%%;*}}\n\
         echo \"replicas: job $jid\"\n\
         sbatch --dependency=afterok:\"$jid\" {merge}\n",
        n = jobs.count,
        array = sh(&job_dir.join(ARRAY_SCRIPT).display().to_string()),
        merge = sh(&job_dir.join(MERGE_SCRIPT).display().to_string()),
    );
    [array, merge, submit]
}

/// Write the three scripts into `job_dir` (created, with `logs/`); the
/// paths written, in the order array, merge, submit.
pub fn write(jobs: &ReplicaJobs, o: &SlurmOptions, job_dir: &Path) -> Result<[PathBuf; 3], String> {
    std::fs::create_dir_all(job_dir.join("logs"))
        .map_err(|e| format!("cannot create `{}`: {e}", job_dir.join("logs").display()))?;
    let job_dir = std::path::absolute(job_dir)
        .map_err(|e| format!("cannot resolve `{}`: {e}", job_dir.display()))?;
    let texts = scripts(jobs, o, &job_dir);
    let paths = [ARRAY_SCRIPT, MERGE_SCRIPT, SUBMIT_SCRIPT].map(|n| job_dir.join(n));
    for (p, t) in paths.iter().zip(&texts) {
        atomic_write(p, t.as_bytes())
            .map_err(|e| format!("cannot write `{}`: {e}", p.display()))?;
    }
    // submit.sh is run directly.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt as _;
        let _ = std::fs::set_permissions(&paths[2], std::fs::Permissions::from_mode(0o755));
    }
    Ok(paths)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_array_runs_each_replica_and_the_merge_names_them_all() {
        let o = SlurmOptions { shards: 3, cpus_per_task: 2, time_limit: None, partition: None };
        let over = vec!["run.duration=\"1 d\"".to_string()];
        let jobs = ReplicaJobs {
            exe: Path::new("/opt/exobound"),
            scenario: Some(Path::new("/s/lunar.toml")),
            quick: false,
            overrides: &over,
            count: 3,
            out: Path::new("/o/merged"),
        };
        let [array, merge, submit] = scripts(&jobs, &o, Path::new("/j"));
        // Slurm job arrays: `#SBATCH --array=0-(N-1)`, task id in
        // $SLURM_ARRAY_TASK_ID (sbatch manual).
        assert!(array.contains("#SBATCH --array=0-2\n"), "{array}");
        assert!(
            array.contains(
                "exec /opt/exobound run /s/lunar.toml --replica \"${SLURM_ARRAY_TASK_ID}/3\" --out \
             /o/merged.replicas/replica-\"${SLURM_ARRAY_TASK_ID}\" --threads 2 --set \
             'run.duration=\"1 d\"'\n"
            ),
            "{array}"
        );
        assert!(array.contains("#SBATCH --output=/j/logs/replica-%a.log\n"), "{array}");
        assert!(!merge.contains("--array"), "{merge}");
        assert!(
            merge.contains(
                "exec /opt/exobound merge-replicas /o/merged.replicas/replica-0 \
             /o/merged.replicas/replica-1 /o/merged.replicas/replica-2 --out /o/merged\n"
            ),
            "{merge}"
        );
        assert!(submit.contains("jid=$(sbatch --parsable /j/replicas.sbatch)\n"), "{submit}");
        assert!(
            submit.contains("sbatch --dependency=afterok:\"$jid\" /j/merge.sbatch\n"),
            "{submit}"
        );
    }
}

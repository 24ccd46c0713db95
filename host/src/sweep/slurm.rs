//! A Slurm job-array script that runs a sweep's shards.
//!
//! Why this exists: sweeps outgrow one machine, and sites already run a
//! batch scheduler. The script runs shard `$SLURM_ARRAY_TASK_ID` of N with
//! the same `exobound sweep PLAN --out OUT --shard I/N` command a user
//! would type, so the scheduler needs nothing from us; `exobound sweep
//! collect OUT` gathers the shards afterwards. OUT must be on a filesystem
//! that every node sees. [`batch_script`] is the writer itself, shared with
//! the job arrays of replicas (`replica::slurm`).

use std::path::Path;

/// Options of the emitted script.
#[derive(Clone, Debug)]
pub struct SlurmOptions {
    /// Number of array tasks (shards).
    pub shards: usize,
    /// CPUs per task, dimensionless count.
    pub cpus_per_task: usize,
    /// Wall-time limit per task, Slurm's `D-HH:MM:SS` or `MM` form; None for the site default.
    pub time_limit: Option<String>,
    /// Partition; None for the site default.
    pub partition: Option<String>,
}

/// Quote a path or word for a POSIX shell.
pub fn sh(s: &str) -> String {
    if !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || "/._-+=:,@".contains(c)) {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', "'\\''"))
    }
}

/// One batch job as [`batch_script`] writes it.
#[derive(Clone, Debug)]
pub struct Job<'a> {
    /// Slurm job name (`#SBATCH --job-name`).
    pub name: &'a str,
    /// A comment line saying what the job is and what wrote it.
    pub comment: &'a str,
    /// Number of array tasks (ids 0 to N-1), or `None` for a single task.
    pub array: Option<usize>,
    /// Log file pattern (`#SBATCH --output`; `%a` is the array task id).
    pub log: &'a Path,
    /// The command, already quoted for the shell; run with `exec`.
    pub command: &'a str,
}

/// A Slurm batch script for `job`: the `#SBATCH` header (name, array,
/// one task of `o.cpus_per_task` CPUs, log, optional time limit and
/// partition), `set -eu`, and `exec` of the command.
pub fn batch_script(job: &Job, o: &SlurmOptions) -> String {
    let mut s = String::from("#!/bin/sh\n");
    s.push_str(&format!("# {}\n", job.comment));
    s.push_str(&format!("#SBATCH --job-name={}\n", job.name));
    if let Some(n) = job.array {
        s.push_str(&format!("#SBATCH --array=0-{}\n", n.saturating_sub(1)));
    }
    s.push_str("#SBATCH --ntasks=1\n");
    s.push_str(&format!("#SBATCH --cpus-per-task={}\n", o.cpus_per_task.max(1)));
    s.push_str(&format!("#SBATCH --output={}\n", job.log.display()));
    if let Some(t) = &o.time_limit {
        s.push_str(&format!("#SBATCH --time={t}\n"));
    }
    if let Some(p) = &o.partition {
        s.push_str(&format!("#SBATCH --partition={p}\n"));
    }
    s.push_str("set -eu\n");
    s.push_str(&format!("exec {}\n", job.command));
    s
}

/// The job-array script for `plan` (absolute path) writing into `out`
/// (absolute), run by the binary `exe`, with logs in `logs`.
pub fn script(exe: &Path, plan: &Path, out: &Path, logs: &Path, o: &SlurmOptions) -> String {
    let command = format!(
        "{} sweep {} --out {} --shard \"${{SLURM_ARRAY_TASK_ID}}/{}\" --jobs {}",
        sh(&exe.display().to_string()),
        sh(&plan.display().to_string()),
        sh(&out.display().to_string()),
        o.shards,
        o.cpus_per_task.max(1)
    );
    batch_script(
        &Job {
            name: "exobound-sweep",
            comment: "exobound sweep: one array task per shard; written by `exobound sweep --emit-slurm`.",
            array: Some(o.shards),
            log: &logs.join("shard-%a.log"),
            command: &command,
        },
        o,
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn script_has_the_array_and_the_shard_command() {
        let o = SlurmOptions {
            shards: 4,
            cpus_per_task: 2,
            time_limit: Some("30".into()),
            partition: None,
        };
        let s = script(
            Path::new("/opt/exobound"),
            Path::new("/p/plan.toml"),
            Path::new("/o/out dir"),
            Path::new("/o/logs"),
            &o,
        );
        // Slurm job arrays: `#SBATCH --array=0-(N-1)` and the task id in
        // $SLURM_ARRAY_TASK_ID (sbatch manual).
        assert!(s.contains("#SBATCH --array=0-3\n"));
        assert!(s.contains("--shard \"${SLURM_ARRAY_TASK_ID}/4\""));
        assert!(s.contains("--out '/o/out dir'"));
        assert!(s.contains("#SBATCH --time=30\n"));
        assert!(s.starts_with("#!/bin/sh\n"));
        // The whole script, as it was before the writer was shared with the
        // replicas' job arrays (`batch_script`).
        let expected = "#!/bin/sh\n\
            # exobound sweep: one array task per shard; written by `exobound sweep --emit-slurm`.\n\
            #SBATCH --job-name=exobound-sweep\n#SBATCH --array=0-3\n#SBATCH --ntasks=1\n\
            #SBATCH --cpus-per-task=2\n#SBATCH --output=/o/logs/shard-%a.log\n\
            #SBATCH --time=30\nset -eu\nexec /opt/exobound sweep /p/plan.toml --out \
            '/o/out dir' --shard \"${SLURM_ARRAY_TASK_ID}/4\" --jobs 2\n";
        assert_eq!(s, expected);
    }
}

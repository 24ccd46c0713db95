//! `exobound fit --slurm JOBDIR`: each batch of a fit's model runs as a
//! Slurm job array.
//!
//! Why this exists: a fit's batches (the grid, the noise calibration, each
//! design round) are sets of independent runs, and a site's cluster can
//! run a whole batch at once. Each batch becomes a job array in the job
//! directory with one task per run. Task K runs `task-K.sh`, which holds
//! the very `exobound run` command of that run: the fit's scenario file
//! (or the demo), every override of the run in the order a local fit
//! applies them (the fit's, the point's, the seed, the threads), and
//! `--out` to the run's own directory. So the run is the one a local fit
//! would make, bit for bit. The array is submitted with `sbatch --wait`,
//! which returns when every task has ended (no time limit of ours decides
//! anything); the fit then reads each run's directory as it reads a local
//! run's result ([`super::evaluate`]), and a task that left no finished
//! run stops the fit with the task, its point, its seed and its log.
//! The job directory must be on a filesystem every node sees. The scripts
//! are written by the sweep's writer ([`batch_script`]).

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

use crate::checkpoint::ScenarioSource;
use crate::output::atomic_write;
use crate::sweep::slurm::{Job, SlurmOptions, batch_script, sh};

/// The file that marks a directory as the job directory of `exobound fit
/// --slurm` (a later fit may empty its batches).
pub const MARKER: &str = "exobound-fit-jobs.txt";
/// Name of a batch's job-array script inside its directory.
pub const ARRAY_SCRIPT: &str = "runs.sbatch";
/// Lines of a failed task's log quoted in the error, dimensionless count.
const LOG_TAIL: usize = 6;
/// Failed tasks described in full in the error (the others by number), dimensionless count.
const SHOWN_FAILURES: usize = 5;

/// Where and how a fit's batches run on Slurm.
#[derive(Clone, Debug)]
pub struct FitSlurm {
    /// The job directory, absolute, on a filesystem every node sees: the
    /// scripts, the logs, and each batch's runs until the fit has read them.
    pub job_dir: PathBuf,
    /// CPUs per task (also each run's `run.threads`), time limit and
    /// partition of every array; `shards` is set per batch to its runs.
    pub options: SlurmOptions,
    /// The `exobound` binary the tasks run, absolute.
    pub exe: PathBuf,
    /// The scenario file, absolute; `None` for the built-in demo.
    pub scenario: Option<PathBuf>,
    /// With no scenario file: the demo's quick preset.
    pub quick: bool,
}

/// One run of a batch.
#[derive(Clone, Debug)]
pub struct Task {
    /// Every override of the run, in the order the scenario source holds them.
    pub overrides: Vec<String>,
    /// The point in the parameters' units, for messages (e.g. `flux = 1.5e5 cm^-2 s^-1`).
    pub point: String,
    /// The run's seed.
    pub seed: u64,
}

/// A batch written into the job directory.
#[derive(Clone, Debug)]
pub struct Batch {
    /// Its directory, `JOBDIR/batch-N-STAGE`.
    pub dir: PathBuf,
    /// Its number in the fit, from 1.
    pub number: usize,
    /// The fit's stage it serves (`grid`, `noise calibration`, `design N`).
    pub stage: String,
    /// Its runs, task K being run K.
    pub tasks: Vec<Task>,
}

impl Batch {
    /// The job-array script.
    pub fn script(&self) -> PathBuf {
        self.dir.join(ARRAY_SCRIPT)
    }

    /// The shell script of task `k`, which runs its `exobound run`.
    pub fn task_script(&self, k: usize) -> PathBuf {
        self.dir.join(format!("task-{k}.sh"))
    }

    /// The output directory of task `k`'s run.
    pub fn run_dir(&self, k: usize) -> PathBuf {
        self.dir.join("runs").join(format!("task-{k}"))
    }

    /// The Slurm log of task `k` (`%a` of the array's `--output` pattern).
    pub fn log(&self, k: usize) -> PathBuf {
        self.dir.join("logs").join(format!("task-{k}.log"))
    }

    /// The tasks that left no finished run (a run's directory appears,
    /// renamed from `DIR.partial`, only when the run has written everything).
    pub fn unfinished(&self) -> Vec<usize> {
        (0..self.tasks.len()).filter(|&k| !self.run_dir(k).join("summary.json").is_file()).collect()
    }

    /// A line naming task `k`: its number, point, seed and log, then `why`
    /// and the end of its log.
    pub fn describe_failure(&self, k: usize, why: &str) -> String {
        let t = &self.tasks[k];
        let log = self.log(k);
        let tail = match std::fs::read_to_string(&log) {
            Ok(text) => {
                let lines: Vec<&str> = text.lines().filter(|l| !l.trim().is_empty()).collect();
                let from = lines.len().saturating_sub(LOG_TAIL);
                if lines.is_empty() {
                    "; the log is empty".to_string()
                } else {
                    let quoted: Vec<String> =
                        lines[from..].iter().map(|l| format!("      | {l}")).collect();
                    format!("; the log ends:\n{}", quoted.join("\n"))
                }
            }
            Err(e) => format!("; no log ({e}): the task may never have started"),
        };
        format!("  task {k} ({}, seed {}): {why}; log `{}`{tail}", t.point, t.seed, log.display())
    }

    /// The error of a batch whose tasks `failed` left no finished run:
    /// the first few described in full, the rest by number.
    pub fn failure(&self, failed: &[usize], job: &str) -> String {
        let mut lines: Vec<String> = failed
            .iter()
            .take(SHOWN_FAILURES)
            .map(|&k| {
                self.describe_failure(
                    k,
                    &format!("no finished run in `{}`", self.run_dir(k).display()),
                )
            })
            .collect();
        if failed.len() > SHOWN_FAILURES {
            let rest: Vec<String> =
                failed[SHOWN_FAILURES..].iter().map(|k| k.to_string()).collect();
            lines.push(format!(
                "  and tasks {} (logs `{}`)",
                rest.join(", "),
                self.dir.join("logs").join("task-K.log").display()
            ));
        }
        format!(
            "batch {} ({}), {job}: {} of {} runs did not finish:\n{}\nThe fit stopped and wrote \
             no output. The scripts and logs stay in `{}`; fix the cause and run the fit again \
             (a task can be tried by hand with `sh {}`).",
            self.number,
            self.stage,
            failed.len(),
            self.tasks.len(),
            lines.join("\n"),
            self.dir.display(),
            self.task_script(failed[0]).display()
        )
    }

    /// Remove the batch's runs once read (the scripts and logs stay).
    pub fn remove_runs(&self) -> Result<(), String> {
        let runs = self.dir.join("runs");
        std::fs::remove_dir_all(&runs)
            .map_err(|e| format!("cannot remove the read runs `{}`: {e}", runs.display()))
    }
}

impl FitSlurm {
    /// Make the job directory ready: create it, or empty the batches of an
    /// earlier fit in it; refuse a directory that holds anything else.
    pub fn prepare(&self) -> Result<(), String> {
        let d = &self.job_dir;
        let entries: Vec<PathBuf> = match std::fs::read_dir(d) {
            Ok(it) => it.flatten().map(|e| e.path()).collect(),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Vec::new(),
            Err(e) => return Err(format!("--slurm `{}`: {e}", d.display())),
        };
        if !entries.is_empty() && !d.join(MARKER).is_file() {
            return Err(format!(
                "--slurm `{}` holds files that are not a fit's jobs; give a new or empty directory \
                 (on a filesystem every node sees)",
                d.display()
            ));
        }
        for e in entries {
            let is_batch =
                e.file_name().and_then(|n| n.to_str()).is_some_and(|n| n.starts_with("batch-"));
            if is_batch && e.is_dir() {
                std::fs::remove_dir_all(&e).map_err(|err| {
                    format!("cannot empty the earlier fit's batch `{}`: {err}", e.display())
                })?;
            }
        }
        std::fs::create_dir_all(d).map_err(|e| format!("cannot create `{}`: {e}", d.display()))?;
        let note = "Job scripts and logs of `exobound fit --slurm`: one batch-N-STAGE directory \
                    per batch of runs (runs.sbatch, task-K.sh, logs/task-K.log). A fit given this \
                    directory empties the batches of the one before.\n";
        atomic_write(&d.join(MARKER), note.as_bytes())
            .map_err(|e| format!("cannot write `{}`: {e}", d.join(MARKER).display()))
    }

    /// Check that the tasks rebuild the fit's scenario: the scenario file
    /// still holds the text the fit read (and the same input directory),
    /// or both are the same built-in demo.
    pub fn check_source(&self, base: &ScenarioSource) -> Result<(), String> {
        match &self.scenario {
            Some(p) => {
                let now = ScenarioSource::file(p, &base.overrides).map_err(|e| e.to_string())?;
                if now.text != base.text || now.input_dir != base.input_dir {
                    return Err(format!(
                        "the scenario file `{}` is not the one the fit read (it changed since); \
                         the Slurm runs would run another scenario: run the fit again",
                        p.display()
                    ));
                }
            }
            None => {
                if base.input_dir.is_some()
                    || base.text != crate::scenario::demo::scenario_text(self.quick)
                {
                    return Err(format!(
                        "the fit's scenario ({}) is not the built-in demo{} that the Slurm runs \
                         would run; give its scenario file",
                        base.origin,
                        if self.quick { " (quick)" } else { "" }
                    ));
                }
            }
        }
        Ok(())
    }

    /// The `exobound run` command, quoted for the shell, of a run with
    /// `overrides` (every one, in order) writing into `out`.
    pub fn command(&self, overrides: &[String], out: &Path) -> String {
        let mut c = format!("{} run", sh(&self.exe.display().to_string()));
        match &self.scenario {
            Some(p) => c += &format!(" {}", sh(&p.display().to_string())),
            None if self.quick => c += " --quick",
            None => {}
        }
        c += &format!(" --out {}", sh(&out.display().to_string()));
        for o in overrides {
            c += &format!(" --set {}", sh(o));
        }
        c
    }

    /// Write batch `number` of the fit (for `stage`) into the job
    /// directory: a script per task and the job-array script.
    pub fn write_batch(&self, number: usize, stage: &str, tasks: &[Task]) -> Result<Batch, String> {
        let slug: String =
            stage.chars().map(|c| if c.is_ascii_alphanumeric() { c } else { '-' }).collect();
        let batch = Batch {
            dir: self.job_dir.join(format!("batch-{number}-{slug}")),
            number,
            stage: stage.to_string(),
            tasks: tasks.to_vec(),
        };
        for sub in ["logs", "runs"] {
            let d = batch.dir.join(sub);
            std::fs::create_dir_all(&d)
                .map_err(|e| format!("cannot create `{}`: {e}", d.display()))?;
        }
        for (k, t) in tasks.iter().enumerate() {
            let text = format!(
                "#!/bin/sh\n# exobound fit, batch {number} ({stage}), task {k}: {}, seed {}.\n\
                 # The run a local fit would make at this point; written by `exobound fit \
                 --slurm`.\nset -eu\nexec {}\n",
                t.point,
                t.seed,
                self.command(&t.overrides, &batch.run_dir(k))
            );
            let p = batch.task_script(k);
            atomic_write(&p, text.as_bytes())
                .map_err(|e| format!("cannot write `{}`: {e}", p.display()))?;
        }
        let command = format!(
            "/bin/sh {}/task-\"${{SLURM_ARRAY_TASK_ID}}\".sh",
            sh(&batch.dir.display().to_string())
        );
        let text = batch_script(
            &Job {
                name: "exobound-fit",
                comment: &format!(
                    "exobound fit, batch {number} ({stage}): one array task per run (0 to {}); \
                     written and submitted by `exobound fit --slurm`.",
                    tasks.len().saturating_sub(1)
                ),
                array: Some(tasks.len()),
                log: &batch.dir.join("logs").join("task-%a.log"),
                command: &command,
            },
            &SlurmOptions { shards: tasks.len(), ..self.options.clone() },
        );
        atomic_write(&batch.script(), text.as_bytes())
            .map_err(|e| format!("cannot write `{}`: {e}", batch.script().display()))?;
        Ok(batch)
    }

    /// Submit `batch` with `sbatch --wait` and return when every task has
    /// ended; an error if it could not be submitted or a task left no
    /// finished run.
    pub fn run(&self, batch: &Batch) -> Result<(), String> {
        let script = batch.script();
        let out = Command::new("sbatch")
            .arg("--wait")
            .arg("--parsable")
            .arg(&script)
            .stdin(Stdio::null())
            .output()
            .map_err(|e| {
                format!(
                    "cannot run `sbatch` ({e}); --slurm needs Slurm's sbatch on the PATH of the \
                     machine that runs the fit"
                )
            })?;
        let stdout = String::from_utf8_lossy(&out.stdout);
        let stderr = String::from_utf8_lossy(&out.stderr);
        // `--parsable`: the first line is `JOBID` or `JOBID;CLUSTER` (sbatch manual).
        let job = stdout
            .lines()
            .next()
            .and_then(|l| l.split(';').next())
            .and_then(|id| id.trim().parse::<u64>().ok());
        let Some(job) = job else {
            return Err(format!(
                "sbatch could not submit batch {} ({}), `{}`: {}; check the Slurm options \
                 (--partition, --time, --cpus-per-task) and that the cluster answers (sinfo)",
                batch.number,
                batch.stage,
                script.display(),
                stderr.trim()
            ));
        };
        let failed = batch.unfinished();
        if !failed.is_empty() {
            return Err(batch.failure(&failed, &format!("Slurm job {job}")));
        }
        Ok(())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn setup(dir: &Path) -> FitSlurm {
        FitSlurm {
            job_dir: dir.to_path_buf(),
            options: SlurmOptions {
                shards: 1,
                cpus_per_task: 2,
                time_limit: Some("30".into()),
                partition: Some("short".into()),
            },
            exe: PathBuf::from("/opt/exobound"),
            scenario: Some(PathBuf::from("/s/my lunar.toml")),
            quick: false,
        }
    }

    fn tmp(name: &str) -> PathBuf {
        let d =
            std::env::temp_dir().join(format!("exobound-fitslurm-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        d
    }

    #[test]
    fn each_task_runs_the_exact_run_command_of_its_point() {
        let d = tmp("scripts");
        let s = setup(&d);
        s.prepare().unwrap();
        let tasks = vec![
            Task {
                overrides: vec![
                    "run.particles=3000".into(),
                    "processes.impact-vapor.parameters.flux=\"1.5e5 cm^-2 s^-1\"".into(),
                    "run.seed=7".into(),
                    "run.threads=2".into(),
                ],
                point: "flux = 1.5e5 cm^-2 s^-1".into(),
                seed: 7,
            },
            Task { overrides: vec!["run.seed=8".into()], point: "flux = 2e5".into(), seed: 8 },
        ];
        let b = s.write_batch(3, "design 1", &tasks).unwrap();
        assert_eq!(b.dir, d.join("batch-3-design-1"));
        let array = std::fs::read_to_string(b.script()).unwrap();
        // Slurm job arrays: `#SBATCH --array=0-(N-1)`, the task id in
        // $SLURM_ARRAY_TASK_ID, `%a` in the output pattern (sbatch manual).
        assert!(array.contains("#SBATCH --array=0-1\n"), "{array}");
        assert!(array.contains("#SBATCH --cpus-per-task=2\n"), "{array}");
        assert!(array.contains("#SBATCH --time=30\n#SBATCH --partition=short\n"), "{array}");
        let logs = d.join("batch-3-design-1/logs/task-%a.log");
        assert!(array.contains(&format!("#SBATCH --output={}\n", logs.display())), "{array}");
        let task_dir = d.join("batch-3-design-1");
        assert!(
            array.contains(&format!(
                "exec /bin/sh {}/task-\"${{SLURM_ARRAY_TASK_ID}}\".sh\n",
                task_dir.display()
            )),
            "{array}"
        );
        let t0 = std::fs::read_to_string(b.task_script(0)).unwrap();
        let want = format!(
            "exec /opt/exobound run '/s/my lunar.toml' --out {} --set run.particles=3000 --set \
             'processes.impact-vapor.parameters.flux=\"1.5e5 cm^-2 s^-1\"' --set run.seed=7 \
             --set run.threads=2\n",
            b.run_dir(0).display()
        );
        assert!(t0.ends_with(&want), "{t0}");
        assert!(t0.contains("task 0: flux = 1.5e5 cm^-2 s^-1, seed 7."), "{t0}");
        // The demo: `--quick` or nothing in place of the file.
        let quick = FitSlurm { scenario: None, quick: true, ..s.clone() };
        assert!(
            quick.command(&[], Path::new("/o")).starts_with("/opt/exobound run --quick --out /o")
        );
        let full = FitSlurm { scenario: None, quick: false, ..s };
        assert_eq!(full.command(&[], Path::new("/o")), "/opt/exobound run --out /o");
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn a_task_without_a_finished_run_is_named_with_its_point_seed_and_log() {
        let d = tmp("failure");
        let s = setup(&d);
        s.prepare().unwrap();
        let tasks: Vec<Task> = (0..3)
            .map(|k| Task {
                overrides: vec![],
                point: format!("flux = {k}e5 cm^-2 s^-1"),
                seed: 10 + k,
            })
            .collect();
        let b = s.write_batch(1, "grid", &tasks).unwrap();
        for k in [0, 2] {
            std::fs::create_dir_all(b.run_dir(k)).unwrap();
            std::fs::write(b.run_dir(k).join("summary.json"), "{}").unwrap();
        }
        // Task 1 ran, failed, and left only a staging directory.
        std::fs::create_dir_all(b.dir.join("runs/task-1.partial")).unwrap();
        std::fs::write(b.log(1), "running\n\nerror: module trapped\n").unwrap();
        assert_eq!(b.unfinished(), vec![1]);
        // Many failures: the first five in full, the rest by number.
        let many = s
            .write_batch(2, "design 1", &(0..8).map(|_| tasks[0].clone()).collect::<Vec<_>>())
            .unwrap();
        let e = many.failure(&many.unfinished(), "Slurm job 43");
        assert!(e.contains("8 of 8 runs did not finish"), "{e}");
        assert!(e.contains("  task 4 (") && !e.contains("  task 5 ("), "{e}");
        assert!(e.contains("  and tasks 5, 6, 7 (logs `"), "{e}");
        let e = b.failure(&b.unfinished(), "Slurm job 42");
        assert!(e.starts_with("batch 1 (grid), Slurm job 42: 1 of 3 runs did not finish:"), "{e}");
        assert!(e.contains("task 1 (flux = 1e5 cm^-2 s^-1, seed 11)"), "{e}");
        assert!(e.contains(&format!("log `{}`", b.log(1).display())), "{e}");
        assert!(e.contains("      | error: module trapped"), "{e}");
        assert!(e.contains(&format!("sh {}", b.task_script(1).display())), "{e}");
        // A task that never started has no log, and says so.
        assert!(b.describe_failure(0, "x").contains("no log"));
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn the_job_directory_is_ours_or_empty() {
        let d = tmp("jobdir");
        std::fs::create_dir_all(&d).unwrap();
        std::fs::write(d.join("notes.txt"), "mine").unwrap();
        let s = setup(&d);
        let e = s.prepare().unwrap_err();
        assert!(e.contains("not a fit's jobs"), "{e}");
        std::fs::remove_file(d.join("notes.txt")).unwrap();
        s.prepare().unwrap();
        // An earlier fit's batch is emptied; the marker keeps the directory ours.
        std::fs::create_dir_all(d.join("batch-1-grid/logs")).unwrap();
        s.prepare().unwrap();
        assert!(!d.join("batch-1-grid").exists());
        assert!(d.join(MARKER).is_file());
        let _ = std::fs::remove_dir_all(&d);
    }
}

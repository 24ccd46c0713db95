//! The command-line side of replicas: `run --replica I/N`, `run --replicas
//! N --emit-slurm DIR`, and `merge-replicas DIR... --out DIR`.
//!
//! Why this exists: keeps the replica flags and their messages in one place
//! so that `run.rs` only calls in; the work is in [`exobound::replica`].

use std::path::{Path, PathBuf};
use std::sync::Arc;

use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use exobound::checkpoint::ScenarioSource;
use exobound::replica::{self, MergeOptions, Replica, slurm as rslurm};
use exobound::runtime::Runtime;
use exobound::sweep::slurm::SlurmOptions;

/// Replica flags of `exobound run` (see docs/replicas.md).
#[derive(Args, Clone, Debug, Default)]
pub struct ReplicaArgs {
    /// Run replica I of N (0 <= I < N; 0-based like $SLURM_ARRAY_TASK_ID) of the scenario,
    /// with a seed derived from the run seed and I; merge the N outputs with `merge-replicas`.
    #[arg(long, value_name = "I/N", conflicts_with_all = ["resume", "replicas"])]
    replica: Option<String>,
    /// With --emit-slurm: write a Slurm job array of N replicas plus the merge job, instead of
    /// running (replicas go to OUT.replicas/replica-I, the merge to --out).
    #[arg(long, value_name = "N", requires = "emit_slurm", conflicts_with = "resume")]
    replicas: Option<usize>,
    /// With --replicas: directory for the Slurm scripts (replicas.sbatch, merge.sbatch, submit.sh).
    #[arg(long, value_name = "DIR", requires = "replicas")]
    emit_slurm: Option<PathBuf>,
    /// With --emit-slurm: CPUs per replica task (also its --threads unless --threads is given).
    #[arg(long, default_value_t = 1, value_name = "N")]
    cpus_per_task: usize,
    /// With --emit-slurm: wall-time limit per task, in Slurm's form (e.g. 2:00:00).
    #[arg(long, requires = "emit_slurm")]
    time: Option<String>,
    /// With --emit-slurm: partition.
    #[arg(long, requires = "emit_slurm")]
    partition: Option<String>,
}

impl ReplicaArgs {
    /// `--replica I/N`, parsed.
    pub fn replica(&self) -> Result<Option<Replica>> {
        self.replica.as_deref().map(Replica::parse).transpose().map_err(anyhow::Error::msg)
    }

    /// `--replicas N`, when given (then the run writes Slurm scripts instead).
    pub fn emit_count(&self) -> Option<usize> {
        self.replicas
    }
}

/// Make `source` replica `r`: load it once for its run seed (the base
/// seed), then add the replica's seed override. Prints what it did.
pub fn apply(source: &mut ScenarioSource, r: Replica, runtime: &Arc<Runtime>) -> Result<()> {
    let base = source.load(runtime).map_err(|e| anyhow!("{e}"))?.config.seed;
    replica::apply(source, base, r);
    eprintln!(
        "replica {r} of base seed {base}: run seed {} (merge the {} outputs with `exobound \
         merge-replicas`)",
        replica::replica_seed(base, r.index),
        r.count
    );
    Ok(())
}

fn absolute(p: &Path) -> Result<PathBuf> {
    std::path::absolute(p).with_context(|| format!("resolving {}", p.display()))
}

/// `exobound run [SCENARIO] --replicas N --emit-slurm DIR --out OUT`: check
/// the scenario, then write the job array, the merge job and `submit.sh`.
pub fn emit_slurm(
    args: &ReplicaArgs,
    scenario: Option<&Path>,
    quick: bool,
    overrides: &[String],
    out: &Path,
    runtime: &Arc<Runtime>,
) -> Result<()> {
    let (Some(count), Some(job_dir)) = (args.replicas, args.emit_slurm.as_deref()) else {
        bail!("--replicas N needs --emit-slurm DIR");
    };
    if count < 2 {
        bail!(
            "--replicas {count}: a replica set needs N >= 2 (the scatter between replicas needs two)"
        );
    }
    // Refuse a bad scenario now, not on the cluster.
    let source = match scenario {
        Some(p) => ScenarioSource::file(p, overrides).map_err(|e| anyhow!("{e}"))?,
        None => ScenarioSource::demo(quick, overrides),
    };
    let base = source.load(runtime).map_err(|e| anyhow!("{e}"))?.config.seed;
    let exe = std::env::current_exe().context("locating the exobound binary")?;
    let scenario = scenario.map(absolute).transpose()?;
    let out = absolute(out)?;
    let jobs = rslurm::ReplicaJobs {
        exe: &exe,
        scenario: scenario.as_deref(),
        quick,
        overrides,
        count,
        out: &out,
    };
    let opts = SlurmOptions {
        shards: count,
        cpus_per_task: args.cpus_per_task,
        time_limit: args.time.clone(),
        partition: args.partition.clone(),
    };
    let [array, merge, submit] =
        rslurm::write(&jobs, &opts, job_dir).map_err(anyhow::Error::msg)?;
    println!("wrote {} ({count} array tasks, replicas 0 to {})", array.display(), count - 1);
    println!("wrote {}", merge.display());
    println!("wrote {}", submit.display());
    println!(
        "base seed {base}; replicas write {}/replica-I, the merge writes {}",
        rslurm::replica_root(&out).display(),
        out.display()
    );
    println!("next: sh {}", submit.display());
    Ok(())
}

/// Flags of `exobound merge-replicas`.
#[derive(Args)]
pub struct MergeArgs {
    /// The output directories of the replicas (`exobound run --replica I/N --out DIR`), in any order.
    #[arg(required = true, value_name = "DIR")]
    dirs: Vec<PathBuf>,
    /// The merged output directory (written as DIR.partial and renamed when complete).
    #[arg(long, value_name = "DIR")]
    out: PathBuf,
    /// Merge an incomplete set (at least two replicas); standard errors use the number merged.
    #[arg(long)]
    allow_partial: bool,
}

/// Run `exobound merge-replicas`.
pub fn merge(args: MergeArgs) -> Result<()> {
    let opts = MergeOptions { allow_partial: args.allow_partial };
    let r = replica::merge(&args.dirs, &args.out, &opts).map_err(anyhow::Error::msg)?;
    for n in &r.notes {
        eprintln!("note: {n}");
    }
    println!(
        "merged replicas {:?} of {} (base seed {}, scenario {}) into {}",
        r.merged,
        r.count,
        r.base_seed,
        &r.scenario_digest[..12],
        r.out.display()
    );
    if let Ok(text) = std::fs::read_to_string(r.out.join("summary.json"))
        && let Ok(v) = serde_json::from_str::<serde_json::Value>(&text)
    {
        let g = |p: &str| v.pointer(p).and_then(serde_json::Value::as_f64);
        let line = |name: &str, p: &str, unit: &str| {
            if let Some(x) = g(&format!("/{p}")) {
                let e = g(&format!("/standard_error/{p}")).unwrap_or(f64::NAN);
                println!("  {name:<30}{x:.4e} +- {e:.2e} {unit}");
            }
        };
        line("dayside near-surface density", "dayside_near_surface_density/value", "cm^-3");
        line("atoms in flight (mean)", "total_content/value", "atoms");
        line("equatorial column peak shift", "equatorial_column_peak/shift_deg", "deg");
        line("escape rate", "escape_rate/value", "atoms s^-1");
        if let Some(x) = g("/ledger/closure_error_run") {
            println!("  {:<30}{x:.1e}", "ledger closure (run)");
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use clap::{CommandFactory, Parser};

    use super::super::Cli;

    #[test]
    fn the_replica_flags_fit_the_command_line() {
        // clap checks names, `requires` and `conflicts_with` here (its own
        // consistency checks run only in debug builds otherwise).
        Cli::command().debug_assert();
        let parse =
            |args: &[&str]| Cli::try_parse_from(args).map(|_| ()).map_err(|e| e.to_string());
        assert!(parse(&["exobound", "run", "--quick", "--replica", "0/2"]).is_ok());
        let e = parse(&["exobound", "run", "--replicas", "3"]).unwrap_err();
        assert!(e.contains("--emit-slurm"), "{e}");
        let e = parse(&["exobound", "run", "--resume", "d", "--replica", "0/2"]).unwrap_err();
        assert!(e.contains("--resume") || e.contains("--replica"), "{e}");
        let e = parse(&["exobound", "merge-replicas", "a", "b"]).unwrap_err();
        assert!(e.contains("--out"), "{e}");
    }
}

//! `exobound sweep`: run a plan (or one shard of it), emit a Slurm job
//! array, or collect the shards.
//!
//! Why this exists: the command-line side of [`exobound::sweep`].

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use anyhow::{Context, Result, anyhow, bail};
use clap::{Args, Subcommand};
use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::sweep::{self, Shard, slurm};

/// Arguments of `exobound sweep`.
#[derive(Args)]
#[command(args_conflicts_with_subcommands = true)]
pub struct SweepArgs {
    #[command(subcommand)]
    action: Option<SweepAction>,
    /// The plan file (TOML, see docs/sweep.md).
    plan: Option<PathBuf>,
    /// Output directory (shared by all shards).
    #[arg(long, value_name = "DIR", default_value = "sweep-output")]
    out: PathBuf,
    /// Run only shard I of N (points whose index is I modulo N).
    #[arg(long, value_name = "I/N")]
    shard: Option<String>,
    /// Runs at a time on this machine (default: the number of cores).
    #[arg(long)]
    jobs: Option<usize>,
    /// Write a Slurm job-array script into DIR instead of running.
    #[arg(long, value_name = "DIR")]
    emit_slurm: Option<PathBuf>,
    /// With --emit-slurm: number of array tasks (default: one per point, at most 1000).
    #[arg(long)]
    shards: Option<usize>,
    /// With --emit-slurm: CPUs per array task.
    #[arg(long, default_value_t = 1)]
    cpus_per_task: usize,
    /// With --emit-slurm: wall-time limit per task, in Slurm's form (e.g. 2:00:00).
    #[arg(long)]
    time: Option<String>,
    /// With --emit-slurm: partition.
    #[arg(long)]
    partition: Option<String>,
    /// Renew the module digests pinned in `exobound.lock` next to the plan's scenario.
    #[arg(long)]
    update_lock: bool,
    /// Limits of every module call (local runs; for Slurm shards put
    /// `sandbox.KEY=VALUE` in the plan's `set` list).
    #[command(flatten)]
    sandbox: super::sandbox::SandboxArgs,
}

#[derive(Subcommand)]
enum SweepAction {
    /// Check that every shard is finished and write sweep.csv and the plots.
    Collect {
        /// The sweep's output directory.
        dir: PathBuf,
    },
}

fn absolute(p: &Path) -> Result<PathBuf> {
    std::path::absolute(p).with_context(|| format!("resolving {}", p.display()))
}

/// Check the plan's scenario against its `exobound.lock`: the first
/// point's modules, or every point's when a parameter of the plan sets a
/// `module` (or `unlocked`) key, since only then can points differ in them.
fn check_lock(plan: &sweep::plan::Plan, runtime: &Arc<Runtime>, update: bool) -> Result<()> {
    let varies = plan
        .parameters
        .iter()
        .any(|p| matches!(p.key.rsplit('.').next(), Some("module" | "unlocked" | "processes")));
    let seed = plan.seeds.first().copied().unwrap_or(1);
    let mut sources = Vec::new();
    let mut loaded = Vec::new();
    for p in plan.points.iter().take(if varies { plan.points.len() } else { 1 }) {
        let source = plan.source(p, seed, None);
        loaded.push(source.load(runtime).map_err(|e| anyhow!("point {}: {e}", p.index))?);
        sources.push(source);
    }
    let checks: Vec<_> =
        sources.iter().zip(&loaded).map(|(s, l)| (s, l.modules.as_slice())).collect();
    super::check_locks(&checks, update)
}

/// Run `exobound sweep`.
pub fn run(args: SweepArgs) -> Result<()> {
    if let Some(SweepAction::Collect { dir }) = &args.action {
        let r = sweep::collect(dir).map_err(anyhow::Error::msg)?;
        println!("collected {} points into {}", r.points.len(), dir.join("sweep.csv").display());
        return Ok(());
    }
    let Some(plan_path) = &args.plan else {
        bail!("give a plan file (exobound sweep PLAN.toml) or `exobound sweep collect DIR`");
    };
    let mut plan = sweep::plan::read(plan_path).map_err(anyhow::Error::msg)?;
    let sandbox = args.sandbox.overrides();
    if args.emit_slurm.is_some() && !sandbox.is_empty() {
        bail!(
            "the sandbox flags apply to local runs only; for Slurm shards put them in the \
             plan's `set` list, e.g. set = [\"sandbox.fuel_per_record=1e7\"]"
        );
    }
    // The limits never change a result, so they are not part of the plan's digest.
    plan.set.extend(sandbox);
    let runtime = Arc::new(
        Runtime::new(RuntimeConfig::default()).context("starting the WebAssembly runtime")?,
    );
    // The lock is checked (and first written) here, so that the shards of
    // a Slurm array only read it.
    check_lock(&plan, &runtime, args.update_lock)?;
    if let Some(dir) = &args.emit_slurm {
        let shards = args.shards.unwrap_or(plan.points.len().min(1000)).max(1);
        std::fs::create_dir_all(dir.join("logs"))
            .with_context(|| format!("creating {}", dir.display()))?;
        let exe = std::env::current_exe().context("locating the exobound binary")?;
        let opts = slurm::SlurmOptions {
            shards,
            cpus_per_task: args.cpus_per_task,
            time_limit: args.time.clone(),
            partition: args.partition.clone(),
        };
        let text = slurm::script(
            &exe,
            &absolute(plan_path)?,
            &absolute(&args.out)?,
            &absolute(&dir.join("logs"))?,
            &opts,
        );
        let script = dir.join("sweep.sbatch");
        exobound::output::atomic_write(&script, text.as_bytes())
            .with_context(|| format!("writing {}", script.display()))?;
        println!(
            "wrote {} ({} array tasks for {} points)",
            script.display(),
            shards,
            plan.points.len()
        );
        println!(
            "next: sbatch {} ; then: exobound sweep collect {}",
            script.display(),
            args.out.display()
        );
        return Ok(());
    }
    let shard = match &args.shard {
        Some(s) => Shard::parse(s).map_err(anyhow::Error::msg)?,
        None => Shard::ALL,
    };
    let jobs =
        args.jobs.unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()));
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = stop.clone();
        let _ = ctrlc::set_handler(move || {
            stop.store(true, std::sync::atomic::Ordering::SeqCst);
            eprintln!("\ninterrupt: stopping after the runs in progress");
        });
    }
    eprintln!(
        "sweep {} ({} points x {} seeds, shard {}/{}, {} jobs, plan {})",
        plan.title,
        plan.points.len(),
        plan.seeds.len(),
        shard.index,
        shard.count,
        jobs,
        &plan.digest[..12]
    );
    let log = |l: &str| eprintln!("{l}");
    let rep = sweep::run_shard(&plan, &args.out, shard, jobs, &runtime, stop, &log)
        .map_err(|e| anyhow!("{e}"))?;
    eprintln!("{} runs done, {} already finished and skipped", rep.ran, rep.skipped);
    if shard == Shard::ALL {
        let r = sweep::collect(&args.out).map_err(anyhow::Error::msg)?;
        println!("wrote {} ({} points)", args.out.join("sweep.csv").display(), r.points.len());
    } else {
        println!(
            "shard {}/{} finished; when all are, run: exobound sweep collect {}",
            shard.index,
            shard.count,
            args.out.display()
        );
    }
    Ok(())
}

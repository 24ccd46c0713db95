//! `exobound fit`: tune free parameters of a scenario to observations.
//!
//! Why this exists: the command-line side of [`exobound::fit`], including
//! `--slurm JOBDIR`, which sends each batch of runs to Slurm
//! ([`exobound::fit::slurm`]) with the sweep's Slurm options.

use std::path::{Path, PathBuf};
use std::sync::Arc;

use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use exobound::checkpoint::ScenarioSource;
use exobound::fit::slurm::FitSlurm;
use exobound::fit::{self, FitSettings, FreeParam};
use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::sweep::slurm::SlurmOptions;

/// Arguments of `exobound fit`.
#[derive(Args)]
pub struct FitArgs {
    /// The scenario (default: the built-in demo; --quick for its short preset).
    scenario: Option<PathBuf>,
    /// Observations (CSV, see docs/fit.md).
    #[arg(long, value_name = "OBS.csv")]
    observed: PathBuf,
    /// A free parameter and its range: KEY=LO..HI UNIT (repeatable, at most 4).
    #[arg(long = "free", value_name = "KEY=LO..HI")]
    free: Vec<String>,
    /// Output directory.
    #[arg(long, value_name = "DIR", default_value = "fit-output")]
    out: PathBuf,
    /// Seeds of every evaluation (the scenario's seed, +1, ...): common random
    /// numbers; two or more give the model's Monte Carlo error from the seeds.
    #[arg(long, default_value_t = 2)]
    seeds: u64,
    /// Coarse-grid points per free parameter.
    #[arg(long, default_value_t = 3)]
    grid: usize,
    /// Design rounds at most after the grid.
    #[arg(long, default_value_t = 8)]
    max_rounds: usize,
    /// Model runs at once (each gets its share of the cores; results do not depend on it).
    #[arg(long, default_value_t = 1, conflicts_with = "slurm")]
    jobs: usize,
    /// Run each batch of model runs as a Slurm job array (one task per run,
    /// submitted with sbatch --wait); scripts, logs and the runs until read go
    /// into JOBDIR, which every node must see. Same result as a local fit.
    #[arg(long, value_name = "JOBDIR")]
    slurm: Option<PathBuf>,
    /// With --slurm: CPUs per array task (each run's run.threads).
    #[arg(long, default_value_t = 1, requires = "slurm")]
    cpus_per_task: usize,
    /// With --slurm: wall-time limit per task, in Slurm's form (e.g. 2:00:00).
    #[arg(long, requires = "slurm")]
    time: Option<String>,
    /// With --slurm: partition.
    #[arg(long, requires = "slurm")]
    partition: Option<String>,
    /// Override a scenario key (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    set: Vec<String>,
    /// With no scenario file: the demo's quick preset.
    #[arg(long)]
    quick: bool,
    /// Renew the module digests pinned in `exobound.lock` next to the scenario.
    #[arg(long)]
    update_lock: bool,
    /// Limits of every module call.
    #[command(flatten)]
    sandbox: super::sandbox::SandboxArgs,
}

/// Run `exobound fit`.
pub fn run(mut args: FitArgs) -> Result<()> {
    args.set.extend(args.sandbox.overrides());
    if args.free.is_empty() {
        bail!("give at least one --free KEY=LO..HI UNIT");
    }
    let params: Vec<FreeParam> = args
        .free
        .iter()
        .map(|s| FreeParam::parse(s))
        .collect::<Result<_, _>>()
        .map_err(anyhow::Error::msg)?;
    let text = std::fs::read_to_string(&args.observed)
        .with_context(|| format!("reading the observations {}", args.observed.display()))?;
    let base_dir = args.observed.parent().unwrap_or(std::path::Path::new(".")).to_path_buf();
    let obs = fit::observed::parse(&text, &args.observed.display().to_string(), &base_dir)
        .map_err(anyhow::Error::msg)?;
    let base = match &args.scenario {
        Some(p) => ScenarioSource::file(p, &args.set).map_err(|e| anyhow!("{e}"))?,
        None => ScenarioSource::demo(args.quick, &args.set),
    };
    let runtime = Arc::new(
        Runtime::new(RuntimeConfig::default()).context("starting the WebAssembly runtime")?,
    );
    let scenario = base.load(&runtime).map_err(|e| anyhow!("{e}"))?;
    super::check_locks(&[(&base, &scenario.modules)], args.update_lock)?;
    let seed0 = scenario.config.seed;
    drop(scenario);
    let slurm = match &args.slurm {
        Some(dir) => {
            let absolute = |p: &Path| {
                std::path::absolute(p).with_context(|| format!("resolving {}", p.display()))
            };
            Some(FitSlurm {
                job_dir: absolute(dir)?,
                options: SlurmOptions {
                    shards: 1,
                    cpus_per_task: args.cpus_per_task.max(1),
                    time_limit: args.time.clone(),
                    partition: args.partition.clone(),
                },
                exe: std::env::current_exe().context("locating the exobound binary")?,
                scenario: args.scenario.as_deref().map(absolute).transpose()?,
                quick: args.quick,
            })
        }
        None => None,
    };
    let settings = FitSettings {
        seeds: (0..args.seeds.max(1)).map(|k| seed0.wrapping_add(k)).collect(),
        grid: args.grid,
        max_rounds: args.max_rounds,
        jobs: args.jobs.max(1),
        slurm,
    };
    let log = |l: &str| eprintln!("{l}");
    let r = fit::fit(&base, &params, &obs, &settings, &args.out, &runtime, &log)
        .map_err(anyhow::Error::msg)?;
    for (j, p) in r.parameters.iter().enumerate() {
        let [lo, hi] = r.interval_1sigma[j];
        let [lo2, hi2] = r.interval_2sigma[j];
        println!(
            "  {} = {:.4e} {}; 1 sigma [{lo:.4e}, {hi:.4e}], 2 sigma [{lo2:.4e}, {hi2:.4e}] (profile likelihood)",
            p.key, r.best[j], p.unit
        );
    }
    if r.parameters.len() > 1 {
        for (j, row) in r.correlation.iter().enumerate() {
            let cells: Vec<String> = row.iter().map(|c| format!("{c:+.2}")).collect();
            println!("  correlation row {}: {}", r.parameters[j].key, cells.join(" "));
        }
    }
    println!(
        "  chi2 = {:.3} for {} degrees of freedom (chi2/dof = {:.3}); {} evaluations ({} runs, {} \
         repeated points reused), {} design rounds{}",
        r.chi2,
        r.dof,
        r.chi2_per_dof,
        r.evaluations.len(),
        r.runs,
        r.reused_evaluations,
        r.rounds,
        if r.stopped_on_cap { ", stopped on the cap" } else { "" }
    );
    for n in &r.notes {
        println!("  note: {n}");
    }
    println!("wrote {}", args.out.display());
    Ok(())
}

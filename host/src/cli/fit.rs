//! `exobound fit`: tune free parameters of a scenario to observations.
//!
//! Why this exists: the command-line side of [`exobound::fit`].

use std::path::PathBuf;
use std::sync::Arc;

use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use exobound::checkpoint::ScenarioSource;
use exobound::fit::{self, FitSettings, FreeParam};
use exobound::runtime::{Runtime, RuntimeConfig};

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
    /// Seeds of every evaluation (the scenario's seed, +1, ...): common random numbers.
    #[arg(long, default_value_t = 1)]
    seeds: u64,
    /// Coarse-grid points per free parameter before Nelder-Mead.
    #[arg(long, default_value_t = 3)]
    grid: usize,
    /// Nelder-Mead iterations at most.
    #[arg(long, default_value_t = 40)]
    max_iterations: u64,
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
    let obs = fit::observed::parse(&text, &args.observed.display().to_string())
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
    let settings = FitSettings {
        seeds: (0..args.seeds.max(1)).map(|k| seed0.wrapping_add(k)).collect(),
        grid: args.grid,
        max_iterations: args.max_iterations,
        ..FitSettings::default()
    };
    let log = |l: &str| eprintln!("{l}");
    let r = fit::fit(&base, &params, &obs, &settings, &args.out, &runtime, &log)
        .map_err(anyhow::Error::msg)?;
    for ((p, b), s) in r.parameters.iter().zip(&r.best).zip(&r.sigma) {
        println!("  {} = {b:.4e} ± {s:.2e} {}", p.key, p.unit);
    }
    println!(
        "  chi2 = {:.3} for {} degrees of freedom (chi2/dof = {:.3}), {} evaluations",
        r.chi2,
        r.dof,
        r.chi2_per_dof,
        r.evaluations.len()
    );
    for n in &r.notes {
        println!("  note: {n}");
    }
    println!("wrote {}", args.out.display());
    Ok(())
}

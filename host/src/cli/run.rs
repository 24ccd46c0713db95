//! `exobound run`: argument handling, the progress display, Ctrl-C.
//!
//! Why this exists: the library's driver runs a scenario; this file turns
//! command-line flags into overrides, shows progress (a bar on a terminal,
//! a status line at intervals otherwise) and stops cleanly on Ctrl-C after
//! a checkpoint.

use std::io::{IsTerminal, Write};
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

use anyhow::{Context, Result, anyhow};
use clap::Args;
use exobound::checkpoint::ScenarioSource;
use exobound::driver::{self, Outcome, Progress, Session};
use exobound::runtime::{Runtime, RuntimeConfig};

/// Flags of `exobound run`.
#[derive(Args)]
pub struct RunArgs {
    /// The scenario TOML (default: the built-in demo).
    scenario: Option<PathBuf>,
    /// Output directory (written as DIR.partial and renamed when the run is done).
    #[arg(long, value_name = "DIR", default_value = "exobound-output")]
    out: PathBuf,
    /// Run seed (overrides run.seed).
    #[arg(long)]
    seed: Option<u64>,
    /// Worker threads, 0 for one per core (overrides run.threads; results do not depend on it).
    #[arg(long)]
    threads: Option<usize>,
    /// Override a scenario key, e.g. --set run.duration="2 d" (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    set: Vec<String>,
    /// Checkpoint interval in simulated time, e.g. "1 d" or "6h" (overrides run.checkpoint_every).
    #[arg(long, value_name = "DURATION")]
    checkpoint_every: Option<String>,
    /// With no SCENARIO: run the demo's short preset (a smoke test of about a minute or less).
    #[arg(long)]
    quick: bool,
    /// Renew the module digests pinned in `exobound.lock` next to the scenario
    /// (every command that runs the scenario checks them).
    #[arg(long, conflicts_with = "resume")]
    update_lock: bool,
    /// Limits of every module call.
    #[command(flatten)]
    sandbox: super::sandbox::SandboxArgs,
    /// Replicas of one scenario for many nodes (docs/replicas.md).
    #[command(flatten)]
    replica: super::replica::ReplicaArgs,
    /// Continue the interrupted run whose output directory is DIR.
    #[arg(long, value_name = "DIR", conflicts_with_all = ["scenario", "quick", "seed", "set"])]
    resume: Option<PathBuf>,
}

/// Run `exobound run`.
pub fn run(args: RunArgs) -> Result<()> {
    let mut overrides = args.set.clone();
    if let Some(s) = args.seed {
        overrides.push(format!("run.seed={s}"));
    }
    if let Some(t) = args.threads {
        overrides.push(format!("run.threads={t}"));
    }
    if let Some(c) = &args.checkpoint_every {
        overrides.push(format!("run.checkpoint_every=\"{}\"", c.replace('"', "")));
    }
    overrides.extend(args.sandbox.overrides());
    let runtime = Arc::new(
        Runtime::new(RuntimeConfig::default()).context("starting the WebAssembly runtime")?,
    );
    if args.replica.emit_count().is_some() {
        let (scenario, quick) = (args.scenario.as_deref(), args.quick);
        return super::replica::emit_slurm(
            &args.replica,
            scenario,
            quick,
            &overrides,
            &args.out,
            &runtime,
        );
    }
    let stop = Arc::new(AtomicBool::new(false));
    {
        let stop = stop.clone();
        ctrlc::set_handler(move || {
            if stop.swap(true, Ordering::SeqCst) {
                eprintln!("\nsecond interrupt: exiting without a checkpoint");
                std::process::exit(130);
            }
            eprintln!("\ninterrupt: stopping after this step and writing a checkpoint");
        })
        .context("installing the Ctrl-C handler")?;
    }
    let mut display = Display::new();
    let mut progress = |p: &Progress| display.show(p);
    let session = Session { stop, progress: Some(&mut progress) };
    let outcome = if let Some(dir) = &args.resume {
        eprintln!("resuming {}", dir.display());
        driver::resume(dir, &runtime, &overrides, session).map_err(|e| anyhow!("{e}"))?
    } else {
        let mut source = match &args.scenario {
            Some(p) => ScenarioSource::file(p, &overrides).map_err(|e| anyhow!("{e}"))?,
            None => ScenarioSource::demo(args.quick, &overrides),
        };
        if let Some(r) = args.replica.replica()? {
            super::replica::apply(&mut source, r, &runtime)?;
        }
        let scenario = source.load(&runtime).map_err(|e| anyhow!("{e}"))?;
        super::check_locks(&[(&source, &scenario.modules)], args.update_lock)?;
        eprintln!(
            "running {} ({}): {} steps of {} s, {} particles, {} threads",
            scenario.title,
            source.origin,
            scenario.plan.steps,
            scenario.config.dt,
            scenario.config.target_in_flight,
            scenario.config.threads
        );
        driver::start(scenario, source, &args.out, session).map_err(|e| anyhow!("{e}"))?
    };
    display.finish();
    match outcome {
        Outcome::Finished { dir, result } => {
            println!("wrote {}", dir.display());
            print_headline(&result.summary);
            Ok(())
        }
        Outcome::Interrupted { staging, step } => {
            let out = args.resume.clone().unwrap_or(args.out.clone());
            eprintln!(
                "stopped at step {step}; checkpoint in {}. Continue with: exobound run --resume {}",
                staging.display(),
                out.display()
            );
            Err(anyhow!("interrupted"))
        }
    }
}

/// A few lines of the run's summary for the terminal (undefined numbers are left out).
fn print_headline(s: &exobound::output::summary::Summary) {
    let show = |label: &str, x: f64, tail: &str| {
        if x.is_finite() {
            println!("  {label:<30}{x:.3e}{tail}");
        }
    };
    show("dayside near-surface density", s.dayside_near_surface_density.value, " cm^-3");
    show("atoms in flight (mean)", s.total_content.value, "");
    let p = &s.equatorial_column_peak;
    if p.shift_deg.is_finite() {
        println!(
            "  {:<30}{:.1} +- {:.1} deg towards {}",
            "equatorial column peak shift",
            p.shift_deg.abs(),
            p.uncertainty_deg,
            p.towards
        );
    }
    show("escape rate", s.escape_rate.value, " atoms s^-1");
    show("ionization rate", s.ionization_rate.value, " atoms s^-1");
    if s.ledger.closure_error_run.is_finite() {
        println!("  {:<30}{:.1e}", "ledger closure (run)", s.ledger.closure_error_run);
    }
}

/// Progress: a redrawn bar on a terminal, a status line every 10 s otherwise.
struct Display {
    tty: bool,
    last: Option<Instant>,
    drawn: bool,
}

impl Display {
    fn new() -> Display {
        Display { tty: std::io::stderr().is_terminal(), last: None, drawn: false }
    }

    fn show(&mut self, p: &Progress) {
        let now = Instant::now();
        let every = if self.tty { 0.2 } else { 10.0 };
        let due = self.last.is_none_or(|t| now.duration_since(t).as_secs_f64() >= every);
        if !due && p.step < p.steps {
            return;
        }
        self.last = Some(now);
        let frac = p.step as f64 / p.steps.max(1) as f64;
        let done_here = p.step.saturating_sub(p.first_step) as f64;
        let eta =
            if done_here > 0.0 { p.wall / done_here * (p.steps - p.step) as f64 } else { f64::NAN };
        let status = format!(
            "{:6.2} / {:.2} d  step {}/{}  {} in flight  ETA {}",
            p.time / 86_400.0,
            p.duration / 86_400.0,
            p.step,
            p.steps,
            p.particles,
            clock(eta)
        );
        let mut err = std::io::stderr();
        if self.tty {
            let width = 30;
            let filled = (frac * width as f64).round() as usize;
            let bar: String = (0..width).map(|k| if k < filled { '#' } else { '.' }).collect();
            let _ = write!(err, "\r[{bar}] {:3.0}%  {status}   ", frac * 100.0);
            self.drawn = true;
        } else {
            let _ = writeln!(err, "progress {:5.1}%  {status}", frac * 100.0);
        }
        let _ = err.flush();
    }

    fn finish(&mut self) {
        if self.drawn {
            eprintln!();
        }
    }
}

/// `1h02m`, `3m20s`, `45s` or `--`.
fn clock(s: f64) -> String {
    if !s.is_finite() {
        return "--".into();
    }
    let s = s.round() as u64;
    if s >= 3600 {
        format!("{}h{:02}m", s / 3600, (s % 3600) / 60)
    } else if s >= 60 {
        format!("{}m{:02}s", s / 60, s % 60)
    } else {
        format!("{s}s")
    }
}

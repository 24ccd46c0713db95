//! `exobound compare`: parse the variants, run them, print the table.
//!
//! Why this exists: the command-line side of [`exobound::compare`]: it
//! turns scenario files or `--variant NAME:KEY=VALUE` options into
//! variants, picks the common seeds, reports progress and prints the
//! side-by-side table.

use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use anyhow::{Context, Result, anyhow, bail};
use clap::Args;
use exobound::checkpoint::ScenarioSource;
use exobound::compare::{self, Variant};
use exobound::driver::Progress;
use exobound::runtime::{Runtime, RuntimeConfig};

/// Arguments of `exobound compare`.
#[derive(Args)]
pub struct CompareArgs {
    /// Scenario files: two or more to compare them, or one (none: the demo)
    /// with --variant options.
    scenarios: Vec<PathBuf>,
    /// A variant of the single scenario: NAME:KEY=VALUE[,KEY=VALUE...] (repeatable).
    #[arg(long = "variant", value_name = "NAME:KEY=VALUE")]
    variants: Vec<String>,
    /// Output directory.
    #[arg(long, value_name = "DIR", default_value = "compare-output")]
    out: PathBuf,
    /// Seeds per variant (the scenario's seed, +1, +2, ...); at least 2 to judge the noise.
    #[arg(long, default_value_t = 3)]
    seeds: u64,
    /// Override a scenario key in every variant (repeatable).
    #[arg(long = "set", value_name = "KEY=VALUE")]
    set: Vec<String>,
    /// With no scenario file: use the demo's quick preset.
    #[arg(long)]
    quick: bool,
    /// Renew the module digests pinned in `exobound.lock` next to each scenario.
    #[arg(long)]
    update_lock: bool,
    /// Limits of every module call.
    #[command(flatten)]
    sandbox: super::sandbox::SandboxArgs,
}

/// Run `exobound compare`.
pub fn run(mut args: CompareArgs) -> Result<()> {
    args.set.extend(args.sandbox.overrides());
    let mut variants: Vec<Variant> = Vec::new();
    if args.variants.is_empty() {
        if args.scenarios.len() < 2 {
            bail!(
                "give two or more scenario files, or one scenario (none for the demo) with \
                 --variant NAME:KEY=VALUE options"
            );
        }
        let names = compare::names_for_files(&args.scenarios);
        for (p, name) in args.scenarios.iter().zip(names) {
            let source = ScenarioSource::file(p, &args.set).map_err(|e| anyhow!("{e}"))?;
            variants.push(Variant { name, source });
        }
    } else {
        if args.scenarios.len() > 1 {
            bail!("--variant compares variants of one scenario; give at most one scenario file");
        }
        let base = match args.scenarios.first() {
            Some(p) => ScenarioSource::file(p, &args.set).map_err(|e| anyhow!("{e}"))?,
            None => ScenarioSource::demo(args.quick, &args.set),
        };
        variants.push(Variant { name: "base".into(), source: base.clone() });
        for spec in &args.variants {
            let (name, sets) = compare::parse_variant(spec).map_err(anyhow::Error::msg)?;
            if variants.iter().any(|v| v.name == name) {
                bail!("--variant `{spec}`: the name `{name}` is used twice");
            }
            let mut source = base.clone();
            source.overrides.extend(sets);
            variants.push(Variant { name, source });
        }
    }
    if args.seeds == 0 {
        bail!("--seeds must be at least 1");
    }
    let runtime = Arc::new(
        Runtime::new(RuntimeConfig::default()).context("starting the WebAssembly runtime")?,
    );
    // Check every variant, and its modules against the lock, before the
    // first run, and take the common seeds from the reference scenario.
    let mut loaded = Vec::new();
    for v in &variants {
        loaded.push(v.source.load(&runtime).map_err(|e| anyhow!("variant `{}`: {e}", v.name))?);
    }
    let checks: Vec<_> =
        variants.iter().zip(&loaded).map(|(v, s)| (&v.source, s.modules.as_slice())).collect();
    super::check_locks(&checks, args.update_lock)?;
    let seed0 = loaded[0].config.seed;
    drop(loaded);
    let seeds: Vec<u64> = (0..args.seeds).map(|k| seed0.wrapping_add(k)).collect();
    let total = variants.len() * seeds.len();
    let mut done = 0usize;
    let mut last = String::new();
    let mut progress = |label: &str, p: &Progress| {
        if label != last {
            done += 1;
            eprintln!("run {done}/{total}: {label} ({} steps)", p.steps);
            last = label.to_string();
        }
    };
    let stop = Arc::new(AtomicBool::new(false));
    let c = compare::compare(&variants, &seeds, &args.out, &runtime, stop, &mut progress)
        .map_err(anyhow::Error::msg)?;
    print!("{}", compare::comparison_text(&c));
    println!("wrote {}", args.out.display());
    Ok(())
}

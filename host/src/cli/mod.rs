//! Command-line parsing and error reporting for the `exobound` binary.
//!
//! Why this exists: clap and anyhow stay here, out of the library. Each
//! subcommand maps to one library call; errors are printed with their
//! cause chain (control and bidirectional characters escaped, see
//! `exobound::text`) and mapped to exit codes (0 success, 1 failure, 2 usage).

mod compare;
mod fit;
mod replica;
mod run;
mod sandbox;
mod share;
mod sweep;

use std::ffi::OsString;
use std::path::PathBuf;
use std::process::ExitCode;

use anyhow::{Context, Result, bail};
use clap::{Parser, Subcommand};
use exobound::{inspect, modbuild, scaffold};
use exobound_sdk::Role;

/// Monte Carlo model of a surface-bounded exosphere and its surface reservoir.
#[derive(Parser)]
#[command(name = "exobound", version, about)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand)]
enum Command {
    /// Run a scenario (default: the built-in demo) and write its output directory.
    Run(run::RunArgs),
    /// Write the demo scenario and its invented input maps into a directory, for editing.
    Demo {
        /// Directory to write (created if missing).
        #[arg(long, value_name = "DIR")]
        write: PathBuf,
    },
    /// Run variants side by side with common seeds, and tabulate the differences against the noise.
    Compare(compare::CompareArgs),
    /// Sweep parameters over a plan (a grid or a Latin hypercube), locally or as Slurm shards.
    Sweep(sweep::SweepArgs),
    /// Merge finished replicas of one scenario (`run --replica I/N`) into one output directory:
    /// the replica mean with standard errors from the scatter between replicas.
    MergeReplicas(replica::MergeArgs),
    /// Fit free parameters of a scenario to observed profiles and measures (chi-square, Nelder-Mead).
    Fit(fit::FitArgs),
    /// Lines of sight through a finished run: columns, brightness, a slit profile and an image.
    Observe {
        /// The output directory of a finished `exobound run`.
        run_dir: PathBuf,
        /// The view file (TOML): a [distant] observer or an [orbiter], see docs/observe.md.
        #[arg(long, value_name = "VIEW.toml")]
        view: PathBuf,
        /// Output directory (default: RUN_DIR-observe).
        #[arg(long, value_name = "DIR")]
        out: Option<PathBuf>,
    },
    /// Work with process modules: inspect, scaffold, build, vet, sign and verify them.
    Module {
        #[command(subcommand)]
        action: ModuleAction,
    },
    /// Catalogs of shared modules by name@version: add, list, show.
    Catalog {
        #[command(subcommand)]
        action: share::CatalogAction,
    },
    /// Show the module digests recorded in a run and re-verify the module files still present.
    Provenance(share::ProvenanceArgs),
}

#[derive(Subcommand)]
enum ModuleAction {
    /// Show a module's manifest, ABI version and SHA-256 digest, without running it.
    Inspect {
        /// The `.wasm` file.
        file: PathBuf,
        /// Print a JSON object instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Write a new module crate with one simple law, a manifest, a reference point and a test.
    New {
        /// Module name: lowercase letters, digits and '-'.
        name: String,
        /// Role: source, loss, surface-interaction or reservoir-process.
        #[arg(long)]
        role: String,
        /// Directory to create (default: ./NAME).
        #[arg(long)]
        dir: Option<PathBuf>,
        /// Depend on the exobound-sdk crate in this directory by a relative path, for work
        /// on the SDK itself (default: write a copy of the SDK this binary carries into the
        /// crate, which builds to the same .wasm wherever the crate is put).
        #[arg(long)]
        sdk: Option<PathBuf>,
    },
    /// Run the conformance suite on a `.wasm` file: ABI, manifest, reference points,
    /// determinism, bounds, sampler, throughput.
    Vet(share::VetArgs),
    /// Make an ed25519 key pair for signing modules.
    Keygen(share::KeygenArgs),
    /// Vet a module and write a detached signature over its digest and the vet report.
    Sign(share::SignArgs),
    /// Check a module's detached signature (and, optionally, that the signer is trusted);
    /// with --rebuild SRC_DIR, first rebuild its source elsewhere and compare digests.
    Verify(share::VerifyArgs),
    /// Build a module crate to a `.wasm` file (release, wasm32) and print its path; the same
    /// source, Cargo.lock and toolchain give the same file on any machine.
    Build {
        /// The crate directory (default: the current directory).
        dir: Option<PathBuf>,
    },
}

/// Check the scenarios a command is about to run against their
/// `exobound.lock` files (`run`, `compare`, `sweep` and `fit` alike), say
/// what was written, and name each module the scenarios leave unlocked.
fn check_locks(
    scenarios: &[(&exobound::checkpoint::ScenarioSource, &[exobound::scenario::ModuleUse])],
    update: bool,
) -> Result<()> {
    use exobound::share::lock::{LockAction, enforce_all};
    for (path, action) in enforce_all(scenarios, update)? {
        if action != LockAction::Unchanged {
            eprintln!("{}: {action:?}", path.display());
        }
    }
    let mut named: Vec<&str> = Vec::new();
    for m in scenarios.iter().flat_map(|(_, ms)| ms.iter()).filter(|m| m.unlocked) {
        if !named.contains(&m.spec.as_str()) {
            named.push(&m.spec);
            eprintln!(
                "note: module `{}` ({} {}, sha256 {}) is unlocked: exobound.lock does not pin \
                 it, and the provenance says so",
                exobound::text::printable(&m.spec),
                exobound::text::printable(&m.name),
                exobound::text::printable(&m.version),
                m.sha256
            );
        }
    }
    Ok(())
}

/// Parse `args`, run the command, and map the outcome to an exit code.
pub fn run(args: impl IntoIterator<Item = OsString>) -> ExitCode {
    let cli = match Cli::try_parse_from(args) {
        Ok(c) => c,
        Err(e) => {
            let _ = e.print();
            return if e.use_stderr() { ExitCode::from(2) } else { ExitCode::SUCCESS };
        }
    };
    match dispatch(cli) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            // The last line of defence: whatever module, file or record an
            // error quotes, no escape sequence reaches the terminal.
            eprintln!("error: {}", exobound::text::printable_lines(&format!("{e:#}")));
            ExitCode::from(1)
        }
    }
}

fn dispatch(cli: Cli) -> Result<()> {
    match cli.command {
        Command::Run(args) => run::run(args),
        Command::Demo { write } => {
            let files = exobound::scenario::demo::write(&write)
                .with_context(|| format!("writing the demo into {}", write.display()))?;
            for f in files {
                println!("wrote {}", f.display());
            }
            println!("next: exobound run {} --out demo-output", write.join("demo.toml").display());
            Ok(())
        }
        Command::Compare(args) => compare::run(args),
        Command::Sweep(args) => sweep::run(args),
        Command::Fit(args) => fit::run(args),
        Command::MergeReplicas(args) => replica::merge(args),
        Command::Observe { run_dir, view, out } => {
            let out = out.unwrap_or_else(|| exobound::observe::default_out(&run_dir));
            let obs =
                exobound::observe::observe(&run_dir, &view, &out).map_err(anyhow::Error::msg)?;
            println!(
                "{} lines of sight; peak brightness {:.4e} R (g = {:.3} photons/s/atom, {})",
                obs.samples.len(),
                obs.peak_brightness_r,
                obs.g_factor,
                obs.g_factor_origin
            );
            println!("wrote {}", out.display());
            Ok(())
        }
        Command::Catalog { action } => share::catalog(action),
        Command::Provenance(args) => share::provenance(args),
        Command::Module { action } => match action {
            ModuleAction::Vet(a) => share::vet(a),
            ModuleAction::Keygen(a) => share::keygen(a),
            ModuleAction::Sign(a) => share::sign(a),
            ModuleAction::Verify(a) => share::verify(a),
            ModuleAction::Inspect { file, json } => {
                let report = inspect::inspect(&file)?;
                if json {
                    let json = serde_json::to_string_pretty(&report)?;
                    println!("{}", exobound::text::json_printable(&json));
                } else {
                    print!("{}", inspect::render_text(&report));
                }
                Ok(())
            }
            ModuleAction::New { name, role, dir, sdk } => {
                let Some(role) = Role::parse(&role) else {
                    bail!(
                        "unknown role `{role}`; use source, loss, surface-interaction or \
                         reservoir-process"
                    );
                };
                let dir = dir.unwrap_or_else(|| PathBuf::from(&name));
                let sdk = match sdk {
                    None => scaffold::SdkSource::Copy,
                    Some(path) => scaffold::SdkSource::Path(path),
                };
                scaffold::new_module(&name, role, &dir, &sdk)?;
                println!("wrote module crate `{name}` ({}) in {}", role.as_str(), dir.display());
                println!("next: cd {} && cargo test && exobound module build", dir.display());
                Ok(())
            }
            ModuleAction::Build { dir } => {
                let dir = dir.unwrap_or_else(|| PathBuf::from("."));
                let wasm = modbuild::build_crate(&dir)
                    .map_err(anyhow::Error::msg)
                    .with_context(|| format!("building the module crate in {}", dir.display()))?;
                // Refuse to hand out a file the runtime would refuse.
                let report = inspect::inspect(&wasm)?;
                println!("{}", wasm.display());
                eprintln!("sha256 {}", report.sha256);
                Ok(())
            }
        },
    }
}

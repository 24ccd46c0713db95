//! `exobound module vet`: a conformance suite that judges a module from its
//! `.wasm` file alone.
//!
//! Why this exists: groups exchange process modules, and a receiving group
//! must be able to tell, without reading the source, that a module is well
//! formed and behaves. Vet runs the file through the same sandbox a run
//! uses and reports one pass or fail per check:
//!
//! - `abi`: the ABI version, no imports, the exports its roles need;
//! - `manifest`: units on every parameter, a published source, reference
//!   points for every role (see [`manifest_check`]);
//! - `reference-points`: the module reproduces its own reference points;
//! - `determinism`: the same inputs twice, on two instances, reversed and
//!   re-batched, give bit-identical outputs (see [`determinism`]);
//! - `bounds`: no NaN or infinity, and speeds, rates and probabilities in
//!   physical ranges, over a sweep of inputs and parameters ([`bounds`]);
//! - `sampler`: moments of the launch or re-emission sampler, and a
//!   two-sample KS test that its draws do not depend on the particle ids
//!   ([`sampler`]);
//! - `distribution`: KS tests of a source's launches against the launch
//!   laws it declares (`Source::LAUNCH_LAWS`), "not declared" when it
//!   declares none, never faked ([`distribution`]);
//! - `throughput`: wall time and fuel per record, and memory used
//!   ([`throughput`]).
//!
//! What a pass does NOT show: that the physics is right. A passing vet
//! says the module is well formed, deterministic, stays within physical
//! bounds over the envelope and reproduces the numbers its author put in
//! its manifest; whether those numbers and the law are right is for the
//! literature and review (see `docs/sharing.md`).

pub mod bounds;
pub mod determinism;
pub mod distribution;
pub mod envelope;
pub mod manifest_check;
pub mod sampler;
pub mod throughput;

use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Arc;
use std::time::{Duration, Instant};

use exobound_sdk::ParamValue;
use serde::{Deserialize, Serialize};

use crate::runtime::module::{self, ModuleHeader};
use crate::runtime::reference::run_reference_points;
use crate::runtime::{
    DomainError, HostError, LoadedModule, ProcessInstance, Runtime, RuntimeConfig, SandboxLimits,
};
use crate::text::printable;
use envelope::Call;

/// Version of the vet report layout.
pub const REPORT_FORMAT: u32 = 1;

/// The verdict of one check.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    /// The check ran and the module met it.
    Pass,
    /// The check ran and the module failed it.
    Fail,
    /// The module declares nothing this check could test against.
    NotDeclared,
    /// The check does not apply to the module's roles.
    NotApplicable,
    /// An earlier failure kept the check from running.
    NotRun,
}

impl Status {
    /// The verdict as printed.
    pub fn as_str(self) -> &'static str {
        match self {
            Status::Pass => "pass",
            Status::Fail => "FAIL",
            Status::NotDeclared => "not declared",
            Status::NotApplicable => "not applicable",
            Status::NotRun => "not run",
        }
    }
}

/// One check of the report.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Check {
    /// Its name: `abi`, `manifest`, `reference-points`, `determinism`,
    /// `bounds`, `sampler`, `distribution` or `throughput`.
    pub name: String,
    /// The verdict.
    pub status: Status,
    /// One line on what was found.
    pub summary: String,
    /// Further lines (each failure, each measurement).
    #[serde(default)]
    pub details: Vec<String>,
    /// Measurements by name; each name ends in its unit (e.g. `max_speed_m_per_s`).
    #[serde(default)]
    pub measured: BTreeMap<String, f64>,
}

impl Check {
    /// A check with a verdict and a summary.
    pub fn new(name: &str, status: Status, summary: impl Into<String>) -> Check {
        Check {
            name: name.to_string(),
            status,
            summary: summary.into(),
            details: Vec::new(),
            measured: BTreeMap::new(),
        }
    }

    /// With these detail lines.
    pub fn details(mut self, d: Vec<String>) -> Check {
        self.details = d;
        self
    }

    /// With one more measurement.
    pub fn measure(mut self, name: &str, value: f64) -> Check {
        self.measured.insert(name.to_string(), value);
        self
    }
}

/// The whole report, printed as text or JSON and embedded in signatures.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct VetReport {
    /// Layout version ([`REPORT_FORMAT`]).
    pub format: u32,
    /// The file vetted, as given.
    pub file: String,
    /// Module name from the manifest (empty if it could not be read).
    pub name: String,
    /// Module version from the manifest.
    pub version: String,
    /// SHA-256 of the file, lowercase hex.
    pub sha256: String,
    /// ABI version from the file (empty if it could not be read).
    pub abi: String,
    /// The engine that vetted it, `exobound X.Y.Z`.
    pub vetted_by: String,
    /// Whether every check passed or was not declared / not applicable.
    pub passed: bool,
    /// The parameters used where the sweep holds them at their base.
    pub base_parameters: BTreeMap<String, ParamValue>,
    /// The checks, in the order above.
    pub checks: Vec<Check>,
    /// Wall time of the whole vet, s.
    pub elapsed_s: f64,
}

impl VetReport {
    /// The check named `name`, if present.
    pub fn check(&self, name: &str) -> Option<&Check> {
        self.checks.iter().find(|c| c.name == name)
    }

    /// Names of the failed checks.
    pub fn failed(&self) -> Vec<&str> {
        self.checks.iter().filter(|c| c.status == Status::Fail).map(|c| c.name.as_str()).collect()
    }
}

/// Sizes, budgets and limits of a vet.
#[derive(Clone, Debug)]
pub struct VetOptions {
    /// Records per call in the bounds sweep, per parameter configuration.
    pub sweep_records: usize,
    /// Records per call in the determinism check.
    pub determinism_records: usize,
    /// Draws per half-sample in the sampler check, and per declared launch
    /// law in the distribution check.
    pub sampler_draws: usize,
    /// Records per timed batch in the throughput check.
    pub throughput_records: usize,
    /// Limits of every call: the same fuel, memory cap and backstop as a run's defaults.
    pub limits: SandboxLimits,
    /// Wall time after which no further check is started, s (default 600 s);
    /// the checks left are reported as not run.
    pub time_limit: Duration,
    /// Most fuel a record may take on average before `throughput` fails.
    pub max_fuel_per_record: f64,
    /// Directory of the compiled-module cache (`None`: compile in memory).
    pub cache_dir: Option<std::path::PathBuf>,
}

impl Default for VetOptions {
    fn default() -> Self {
        VetOptions {
            sweep_records: 512,
            determinism_records: 256,
            sampler_draws: 20_000,
            throughput_records: 1024,
            limits: SandboxLimits::default(),
            time_limit: Duration::from_secs(600),
            max_fuel_per_record: throughput::MAX_FUEL_PER_RECORD,
            cache_dir: crate::runtime::cache::default_dir(),
        }
    }
}

/// What every check needs: the runtime, the module and the base parameters.
pub struct Context<'a> {
    /// The vet's own runtime (fuel metering on).
    pub runtime: &'a Runtime,
    /// The compiled module.
    pub module: &'a Arc<LoadedModule>,
    /// The batch calls its roles implement.
    pub calls: Vec<Call>,
    /// The base parameters.
    pub base: BTreeMap<String, ParamValue>,
    /// The options.
    pub options: &'a VetOptions,
}

impl Context<'_> {
    /// A fresh instance with `params`.
    pub fn instance(
        &self,
        params: &BTreeMap<String, ParamValue>,
    ) -> Result<Result<ProcessInstance, DomainError>, HostError> {
        self.runtime.instantiate(self.module, params)
    }

    /// A fresh instance with the base parameters, or a failed check `name`.
    pub fn base_instance(&self, name: &str) -> Result<ProcessInstance, Check> {
        match self.instance(&self.base) {
            Ok(Ok(i)) => Ok(i),
            Ok(Err(d)) => Err(Check::new(
                name,
                Status::Fail,
                format!("the module refuses its own base parameters: {d}"),
            )),
            Err(h) => Err(Check::new(name, Status::Fail, format!("instantiation failed: {h}"))),
        }
    }
}

/// Vet the module file at `path` with default options.
pub fn vet_file(path: &Path) -> Result<VetReport, HostError> {
    vet_file_with(path, &VetOptions::default())
}

/// Vet the module file at `path` (or the standard module `standard:NAME`);
/// only an unreadable file is an error, every finding about the module is a
/// check in the report.
pub fn vet_file_with(path: &Path, options: &VetOptions) -> Result<VetReport, HostError> {
    let (shown, bytes) = crate::standard::read_module(path)?;
    Ok(vet_bytes(&shown.display().to_string(), &bytes, options))
}

/// Vet a module given as bytes; `file` names it in the report.
pub fn vet_bytes(file: &str, bytes: &[u8], options: &VetOptions) -> VetReport {
    let t0 = Instant::now();
    let mut report = VetReport {
        format: REPORT_FORMAT,
        file: file.to_string(),
        name: String::new(),
        version: String::new(),
        sha256: module::sha256_hex(bytes),
        abi: String::new(),
        vetted_by: format!("exobound {}", env!("CARGO_PKG_VERSION")),
        passed: false,
        base_parameters: BTreeMap::new(),
        checks: Vec::new(),
        elapsed_s: 0.0,
    };
    let later =
        ["reference-points", "determinism", "bounds", "sampler", "distribution", "throughput"];
    let not_run = |report: &mut VetReport, why: &str| {
        for name in later {
            report.checks.push(Check::new(name, Status::NotRun, why));
        }
    };
    let label = module::label_of(Path::new(file));
    let header: ModuleHeader = match module::read_header(&label, bytes, inspect_limit()) {
        Ok(h) => h,
        Err(e) => {
            let (abi, manifest) = manifest_check::refused(&e);
            report.checks.push(abi);
            report.checks.push(manifest);
            not_run(&mut report, "not run: the file was refused before compilation");
            return finish(report, t0);
        }
    };
    report.name = header.manifest.name.clone();
    report.version = header.manifest.version.clone();
    report.abi = header.abi.to_string();
    let runtime = match Runtime::new(RuntimeConfig {
        limits: options.limits,
        cache_dir: options.cache_dir.clone(),
        ..RuntimeConfig::default()
    }) {
        Ok(r) => r,
        Err(e) => {
            report.checks.push(Check::new("abi", Status::NotRun, format!("no runtime: {e}")));
            not_run(&mut report, "not run: the runtime could not start");
            return finish(report, t0);
        }
    };
    let module = match runtime.load_bytes(file, bytes) {
        Ok(m) => m,
        Err(e) => {
            report.checks.push(Check::new("abi", Status::Fail, format!("does not compile: {e}")));
            report.checks.push(manifest_check::completeness(&header.manifest));
            not_run(&mut report, "not run: the module does not compile");
            return finish(report, t0);
        }
    };
    report.checks.push(manifest_check::abi_pass(&header));
    report.checks.push(manifest_check::completeness(&header.manifest));
    let ctx = Context {
        runtime: &runtime,
        module: &module,
        calls: Call::for_roles(&header.roles),
        base: envelope::base_parameters(&header.manifest),
        options,
    };
    report.base_parameters = ctx.base.clone();
    // Each check is bounded by the fuel budgets; the time limit bounds the
    // whole vet, however many calls a check makes.
    let over = |report: &mut VetReport, names: &[&str]| -> bool {
        if t0.elapsed() <= options.time_limit {
            return false;
        }
        for name in names {
            report.checks.push(Check::new(
                name,
                Status::NotRun,
                format!(
                    "not run: vet's time limit of {:.0} s was reached",
                    options.time_limit.as_secs_f64()
                ),
            ));
        }
        true
    };
    report.checks.push(reference_check(&ctx));
    let rest = ["determinism", "bounds", "sampler", "distribution", "throughput"];
    if over(&mut report, &rest) {
        return finish(report, t0);
    }
    report.checks.push(determinism::check(&ctx));
    if over(&mut report, &rest[1..]) {
        return finish(report, t0);
    }
    report.checks.push(bounds::check(&ctx));
    if over(&mut report, &rest[2..]) {
        return finish(report, t0);
    }
    report.checks.push(sampler::check(&ctx));
    if over(&mut report, &rest[3..]) {
        return finish(report, t0);
    }
    report.checks.push(distribution::check(&ctx));
    if over(&mut report, &rest[4..]) {
        return finish(report, t0);
    }
    report.checks.push(throughput::check(&ctx));
    finish(report, t0)
}

fn inspect_limit() -> usize {
    RuntimeConfig::default().max_manifest
}

fn finish(mut report: VetReport, t0: Instant) -> VetReport {
    report.passed = !report.checks.is_empty()
        && report.checks.iter().all(|c| {
            matches!(c.status, Status::Pass | Status::NotDeclared | Status::NotApplicable)
        });
    report.elapsed_s = t0.elapsed().as_secs_f64();
    report
}

fn reference_check(ctx: &Context) -> Check {
    let name = "reference-points";
    match run_reference_points(ctx.runtime, ctx.module) {
        Err(e) => Check::new(name, Status::Fail, format!("a reference point could not run: {e}")),
        Ok(results) if results.is_empty() => {
            Check::new(name, Status::Fail, "the manifest holds no reference points to reproduce")
        }
        Ok(results) => {
            let failed = results.iter().filter(|r| !r.passed).count();
            let details = results
                .iter()
                .map(|r| {
                    format!(
                        "{} {}: expected {:e}, got {:e} (rel. tol. {:e}; {})",
                        if r.passed { "ok  " } else { "FAIL" },
                        r.description,
                        r.expected,
                        r.got,
                        r.tolerance,
                        r.source
                    )
                })
                .collect();
            let status = if failed == 0 { Status::Pass } else { Status::Fail };
            let summary = if failed == 0 {
                format!("all {} reference points reproduced within tolerance", results.len())
            } else {
                format!("{failed} of {} reference points not reproduced", results.len())
            };
            Check::new(name, status, summary).details(details)
        }
    }
}

/// The report as text, one block per check. Every string in the report
/// passes through [`printable`]: names, summaries and details quote the
/// module's manifest, and a report read from a file may come from anyone.
pub fn render_text(r: &VetReport) -> String {
    let p = |x: &str| printable(x).into_owned();
    let mut s = String::new();
    let who = if r.name.is_empty() {
        "(unreadable module)".to_string()
    } else {
        format!("{} {}", p(&r.name), p(&r.version))
    };
    s += &format!("vet {who}  ({})\n", p(&r.file));
    s += &format!("  sha256: {}\n", p(&r.sha256));
    if !r.base_parameters.is_empty() {
        let b: Vec<String> = r
            .base_parameters
            .iter()
            .map(|(k, v)| format!("{} = {}", p(k), p(&v.to_string())))
            .collect();
        s += &format!("  base parameters (no default in the manifest): {}\n", b.join(", "));
    }
    s += "\n";
    for c in &r.checks {
        s += &format!("  [{:<14}] {:<17} {}\n", c.status.as_str(), p(&c.name), p(&c.summary));
        for d in &c.details {
            s += &format!("  {:<16}   {}\n", "", p(d));
        }
        for (k, v) in &c.measured {
            s += &format!("  {:<16}   {} = {v:.6e}\n", "", p(k));
        }
    }
    s += &format!(
        "\n  result: {} ({:.2} s); {}\n",
        if r.passed { "PASS" } else { "FAIL" },
        r.elapsed_s,
        "a pass shows the module is well formed and in bounds, not that its physics is right"
    );
    s
}

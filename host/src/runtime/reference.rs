//! Running a module's own reference points through the sandbox.
//!
//! Why this exists: each manifest carries input -> output pairs from the
//! law's published source. Re-computing them with the compiled `.wasm`
//! (not the native build) shows that the file someone received still
//! implements the law it claims. Deterministic checks (rates) compare one
//! call; stochastic checks (mean launch speed, stick fraction) average
//! [`STOCHASTIC_DRAWS`] records with fixed random keys, so they are
//! reproducible too.

use std::collections::BTreeMap;
use std::sync::Arc;

use exobound_sdk::wire::{NamedFields, REFERENCE_DRAWS, ReferenceInfo};
use exobound_sdk::{CellState, Impact, InFlight, LaunchRequest, Outcome, RngKey, Velocity, stream};
use serde::Serialize;

use super::error::{DomainError, HostError, ModuleError};
use super::{LoadedModule, Runtime};

/// Records averaged by a stochastic reference check, dimensionless (the
/// SDK's, so that `exobound_sdk::testing` computes the same average natively).
pub const STOCHASTIC_DRAWS: u64 = REFERENCE_DRAWS;
/// Run seed of the stochastic reference checks (the SDK's, as above).
pub const REFERENCE_SEED: u64 = exobound_sdk::wire::REFERENCE_SEED;

/// The outcome of one reference point.
#[derive(Clone, Debug, Serialize)]
pub struct ReferenceResult {
    /// The point's description.
    pub description: String,
    /// Which check (`release-rate`, ...).
    pub check: String,
    /// Expected value, in the check's unit.
    pub expected: f64,
    /// Value computed by the module, in the check's unit.
    pub got: f64,
    /// Allowed relative deviation.
    pub tolerance: f64,
    /// Whether |got - expected| <= tolerance * |expected| (or <= tolerance for expected 0).
    pub passed: bool,
    /// Where the expected value comes from.
    pub source: String,
}

fn record<T: NamedFields + Default>(point: &ReferenceInfo, module: &str) -> Result<T, HostError> {
    let mut r = T::default();
    for (k, v) in &point.input {
        if !r.set_field(k, *v) {
            return Err(HostError::ManifestMalformed {
                module: module.to_string(),
                detail: format!(
                    "reference point `{}` sets the unknown input field `{k}`",
                    point.description
                ),
            });
        }
    }
    Ok(r)
}

fn key(i: u64, stream: u32) -> RngKey {
    RngKey { seed: REFERENCE_SEED, particle: i, event: 0, stream }
}

/// Run every reference point of `module` in the sandbox.
pub fn run_reference_points(
    rt: &Runtime,
    module: &Arc<LoadedModule>,
) -> Result<Vec<ReferenceResult>, ModuleError> {
    let mut results = Vec::new();
    for point in &module.manifest().reference_points {
        let params: BTreeMap<_, _> = point.parameters.iter().cloned().collect();
        let mut inst = rt.instantiate(module, &params)??;
        let name = module.name().to_string();
        let domain =
            |r: Result<Result<(), DomainError>, HostError>| -> Result<(), ModuleError> { Ok(r??) };
        let got = match point.check.as_str() {
            "release-rate" | "exchange" => {
                let cell: CellState = record(point, &name)?;
                let mut out = [0.0];
                if point.check == "release-rate" {
                    domain(inst.release_rate(&[cell], &mut out))?;
                } else {
                    domain(inst.exchange(&[cell], &mut out))?;
                }
                out[0]
            }
            "loss-rate" => {
                let p: InFlight = record(point, &name)?;
                let mut out = [0.0];
                domain(inst.loss_rate(&[p], &mut out))?;
                out[0]
            }
            "mean-launch-speed" => {
                let base: LaunchRequest = record(point, &name)?;
                let reqs: Vec<LaunchRequest> = (0..STOCHASTIC_DRAWS)
                    .map(|i| LaunchRequest { key: key(i, stream::LAUNCH), ..base })
                    .collect();
                let mut v = vec![Velocity::default(); reqs.len()];
                domain(inst.launch(&reqs, &mut v))?;
                v.iter().map(Velocity::speed).sum::<f64>() / v.len() as f64
            }
            "stick-fraction" => {
                let base: Impact = record(point, &name)?;
                let hits: Vec<Impact> = (0..STOCHASTIC_DRAWS)
                    .map(|i| Impact { key: key(i, stream::SURFACE), ..base })
                    .collect();
                let mut out = vec![Outcome::default(); hits.len()];
                domain(inst.land(&hits, &mut out))?;
                out.iter().filter(|o| o.kind == 0).count() as f64 / out.len() as f64
            }
            other => {
                return Err(ModuleError::Host(HostError::ManifestMalformed {
                    module: name,
                    detail: format!(
                        "reference point `{}` has the unknown check `{other}`",
                        point.description
                    ),
                }));
            }
        };
        let scale = if point.expected == 0.0 { 1.0 } else { point.expected.abs() };
        results.push(ReferenceResult {
            description: point.description.clone(),
            check: point.check.clone(),
            expected: point.expected,
            got,
            tolerance: point.tolerance,
            passed: (got - point.expected).abs() <= point.tolerance * scale,
            source: point.source.clone(),
        });
    }
    Ok(results)
}

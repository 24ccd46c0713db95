//! `provenance.json`: what made a run's output.
//!
//! Why this exists: a result is only as trustworthy as the record of what
//! produced it. The record holds the scenario as written and as resolved
//! (after the `--set` overrides), the seed, the engine version, and every
//! module's name, version, role, parameters, file and SHA-256 digest, so
//! that anyone can check they are running the same modules. A module the
//! scenario marks `unlocked` (work in progress, not pinned by
//! `exobound.lock`) is recorded as such. For a table parameter it records
//! the table used: its values, and for a CSV file its path and SHA-256
//! digest (a module's default table is covered by the module's own digest).

use serde::Serialize;

use crate::checkpoint::ScenarioSource;
use crate::scenario::Scenario;

/// One module as used by the run.
#[derive(Clone, Debug, Serialize)]
pub struct ModuleRecord {
    /// Manifest name.
    pub name: String,
    /// Manifest version.
    pub version: String,
    /// Role it played.
    pub role: String,
    /// The `module` key as written.
    pub spec: String,
    /// The resolved file, or `embedded:NAME` for a standard module
    /// embedded in the binary.
    pub path: String,
    /// SHA-256 of the file (or of the embedded bytes), hex.
    pub sha256: String,
    /// Whether the scenario marked the module `unlocked`: its digest was
    /// not checked against `exobound.lock`.
    pub unlocked: bool,
    /// Parameters passed, in the module's units.
    pub parameters: serde_json::Value,
    /// Each table parameter and the table used (empty if none).
    pub tables: Vec<crate::scenario::table::TableUse>,
}

/// The g-factor table a run used.
#[derive(Clone, Debug, Serialize)]
pub struct GFactorRecord {
    /// The built-in table's name and sources, or the file's path and digest.
    pub origin: String,
    /// SHA-256 of the table file, hex (`None` for a built-in table).
    pub sha256: Option<String>,
}

/// The provenance of a run.
#[derive(Clone, Debug, Serialize)]
pub struct Provenance {
    /// The program.
    pub engine: String,
    /// Its version.
    pub engine_version: String,
    /// The process ABI version the engine speaks.
    pub abi_version: String,
    /// Where the scenario came from.
    pub scenario_origin: String,
    /// The run seed.
    pub seed: u64,
    /// `KEY=VALUE` overrides applied.
    pub overrides: Vec<String>,
    /// The scenario after overrides, as parsed.
    pub scenario_resolved: serde_json::Value,
    /// The scenario text as given.
    pub scenario_text: String,
    /// The modules, in scenario order.
    pub modules: Vec<ModuleRecord>,
    /// The g-factor table behind radiation pressure and brightness.
    pub g_factor_table: GFactorRecord,
    /// A reminder of what the numbers are.
    pub caution: String,
}

impl Provenance {
    /// The provenance of `scenario`, run from `source`.
    pub fn of(scenario: &Scenario, source: &ScenarioSource) -> Provenance {
        Provenance {
            engine: "exobound".into(),
            engine_version: env!("CARGO_PKG_VERSION").into(),
            abi_version: exobound_sdk::ABI_VERSION.into(),
            scenario_origin: source.origin.clone(),
            seed: scenario.config.seed,
            overrides: source.overrides.clone(),
            scenario_resolved: serde_json::to_value(&scenario.file).unwrap_or_default(),
            scenario_text: source.text.clone(),
            modules: scenario
                .modules
                .iter()
                .map(|m| ModuleRecord {
                    name: m.name.clone(),
                    version: m.version.clone(),
                    role: m.role.as_str().into(),
                    spec: m.spec.clone(),
                    path: m.origin.to_string(),
                    sha256: m.sha256.clone(),
                    unlocked: m.unlocked,
                    parameters: serde_json::to_value(&m.parameters).unwrap_or_default(),
                    tables: m.tables.clone(),
                })
                .collect(),
            g_factor_table: GFactorRecord {
                origin: scenario.model.species.g_factors.table.origin.clone(),
                sha256: scenario.model.species.g_factors.table.sha256.clone(),
            },
            caution: "Model output: a scientific estimate from a Monte Carlo model, not \
                      flight-operations data."
                .into(),
        }
    }
}

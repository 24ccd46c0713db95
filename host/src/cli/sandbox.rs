//! The sandbox flags shared by run, compare, sweep and fit.
//!
//! Why this exists: the limits of module calls are scenario keys
//! (`[sandbox]`), and each command that runs a scenario also takes them as
//! flags, which become `--set sandbox.KEY=VALUE` overrides so that a file
//! and a flag are validated, reported and recorded the same way.

use clap::Args;

/// Limits of every module call (override the scenario's [sandbox] table).
#[derive(Args, Clone, Debug, Default)]
pub struct SandboxArgs {
    /// Fuel per record of a module call, wasm fuel units (sandbox.fuel_per_record; default 1e6).
    #[arg(long, value_name = "UNITS")]
    fuel_per_record: Option<f64>,
    /// Fixed fuel of every module call, fuel units (sandbox.fuel_per_call; default 5e7).
    #[arg(long, value_name = "UNITS")]
    fuel_per_call: Option<f64>,
    /// Memory cap of a module instance, e.g. "256 MiB" (sandbox.memory_cap; default 64 MiB).
    #[arg(long, value_name = "SIZE")]
    memory_cap: Option<String>,
    /// Wall-time backstop of one module call, e.g. "20 min" (sandbox.backstop; default 5 min).
    #[arg(long, value_name = "DURATION")]
    backstop: Option<String>,
}

impl SandboxArgs {
    /// The flags as `sandbox.KEY=VALUE` overrides.
    pub fn overrides(&self) -> Vec<String> {
        let quote = |s: &str| format!("\"{}\"", s.replace('"', ""));
        let mut v = Vec::new();
        if let Some(x) = self.fuel_per_record {
            v.push(format!("sandbox.fuel_per_record={x:e}"));
        }
        if let Some(x) = self.fuel_per_call {
            v.push(format!("sandbox.fuel_per_call={x:e}"));
        }
        if let Some(s) = &self.memory_cap {
            v.push(format!("sandbox.memory_cap={}", quote(s)));
        }
        if let Some(s) = &self.backstop {
            v.push(format!("sandbox.backstop={}", quote(s)));
        }
        v
    }
}

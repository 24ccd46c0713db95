//! The integration tests of exobound: one test binary, one module per area.
//!
//! Fixture modules are built from source: the hostile and table Rust
//! fixtures by this crate's build script, the WAT fixtures by `support::wat`.

mod support;

mod abi_equivalence;
mod cache;
mod csv_tables;
mod engine;
mod lock_commands;
mod numeric_guards;
mod observe_compare;
mod orbit;
mod output_lock;
mod parameters;
mod reference_scripts;
mod replica;
mod resolved_fields;
mod run_outputs;
mod safe_text;
mod sandbox;
mod scaffold;
mod scenario_errors;
mod standard_modules;
mod sweep_fit;
mod table_params;
mod under_load;
mod vet_sign;

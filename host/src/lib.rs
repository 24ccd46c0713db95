//! exobound: a Monte Carlo engine for surface-bounded exospheres.
//!
//! Why this exists: the engine owns particles, the surface grid, time,
//! transport, tallies and outputs; every source, loss, surface interaction
//! and reservoir process is a sandboxed WebAssembly module reached only
//! through [`runtime`]. The command-line tool is a thin layer over this
//! library, and the tests call the library directly.

// `!(x > 0.0)` is deliberate throughout: it is true for NaN too, so bad
// numbers are refused rather than let through.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod body;
pub mod checkpoint;
pub mod compare;
pub mod driver;
pub mod engine;
pub mod environment;
pub mod fit;
pub mod modbuild;
pub mod observe;
pub mod output;
pub mod particles;
pub mod radiation;
pub mod rebuild;
pub mod replica;
pub mod runtime;
pub mod scenario;
pub mod share;
pub mod species;
pub mod standard;
pub mod surface;
pub mod sweep;
pub mod tally;
pub mod text;
pub mod transport;
pub mod vec3;
pub mod vet;

/// Directory where the build placed the standard process modules
/// (`target/modules/<name>.wasm`), as known when this crate was compiled:
/// the files the tests and benches read. Scenarios do not look here: they
/// load the copies embedded in the binary ([`standard`]).
pub fn standard_module_dir() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("EXOBOUND_MODULE_DIR"))
}

/// Path of the build's copy of the standard module `name` (e.g.
/// `photoionization`), as [`standard_module_dir`].
pub fn standard_module(name: &str) -> std::path::PathBuf {
    standard_module_dir().join(format!("{name}.wasm"))
}
pub mod inspect;
pub mod scaffold;

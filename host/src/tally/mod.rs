//! Tallies: what a run measures, and the mass ledger.
//!
//! Why this exists: an exosphere model is judged by its densities,
//! columns and surface maps, and trusted only if every atom is accounted
//! for. Estimators here are snapshots at the end of each step (density,
//! column) averaged over a window; the ledger books every flow of atoms.

pub mod density;
pub mod ledger;
pub mod profiles;

pub use density::DensityTally;
pub use ledger::{Ledger, LedgerRow};

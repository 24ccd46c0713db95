//! Tallies: what a run measures, and the mass ledger.
//!
//! Why this exists: an exosphere model is judged by its densities,
//! columns and surface maps, and trusted only if every atom is accounted
//! for. The flight loop hands every tally the same [`Sighting`]s (one per
//! flight segment, at a time drawn uniformly in it: a time-sampled,
//! track-length estimator); tallies average them over a window; the ledger
//! books every flow of atoms.

pub mod density;
pub mod ledger;
pub mod profiles;
pub mod sighting;

pub use density::DensityTally;
pub use ledger::{Ledger, LedgerRow};
pub use sighting::{Sighting, Tally};

//! What the host and the SDK's plumbing use, and a law's author does not.
//!
//! Why this exists: an author writes a law against the role traits, the
//! records, the random generator and the authoring form of the manifest.
//! The decoded (owned) manifest, the byte views of record arrays, the
//! field-by-name access that reference points use and the protocol of the
//! host's reference checks belong to the other side of the boundary. They
//! live here, out of the crate root, so that the author's namespace lists
//! only what a law needs (see the crate documentation). The host imports
//! them from here.

pub use crate::launch_law::{
    LaunchLawInfo, QuantityInfo, Resolved, Speed, SpeedLawInfo, request_field,
};
pub use crate::manifest::{
    ManifestInfo, ParamInfo, ParamKindInfo, ReferenceInfo, encode, encode_with, encoded_len,
    encoded_len_with,
};
pub use crate::records::{NamedFields, Record, as_bytes, as_bytes_mut};

/// Run seed of the keys of a stochastic reference check
/// (`mean-launch-speed`, `stick-fraction`): record `i` of the check has the
/// key (this seed, particle `i`, event 0, the role's named stream). The
/// host's `module check` and `vet` and the SDK's `testing` module use the
/// same keys, so a native test computes the very average the host does.
pub const REFERENCE_SEED: u64 = 0x00E0_B0D5;

/// Records averaged by a stochastic reference check, dimensionless.
pub const REFERENCE_DRAWS: u64 = 100_000;

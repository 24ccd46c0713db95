//! Inputs shared by the benches, so every bench measures the same records.
//!
//! Why this exists: a ratio such as wasm against native is only meaningful
//! when both sides see identical batches; building them here keeps the
//! bench files short and the inputs in one place.

use exobound_sdk::{LaunchRequest, RngKey, stream};

/// Mass of a sodium atom, kg (IUPAC standard atomic weight 22.98976928 u; CODATA u).
pub const NA_MASS: f64 = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;

/// `n` launch requests over dayside temperatures 100-700 K.
pub fn launch_requests(n: usize) -> Vec<LaunchRequest> {
    (0..n)
        .map(|i| LaunchRequest {
            key: RngKey { seed: 42, particle: i as u64, event: 0, stream: stream::LAUNCH },
            cell: (i % 2048) as u32,
            temperature: 100.0 + (i % 600) as f64,
            mass: NA_MASS,
            ..Default::default()
        })
        .collect()
}

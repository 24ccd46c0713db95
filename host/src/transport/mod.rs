//! Flight of atoms between launch and landing (or escape).
//!
//! Why this exists: transport is the engine's hot path and its most
//! checkable physics, so it is kept pure (no particle bank, no modules, no
//! allocation) and tested against closed forms. The submodules are:
//!
//! - [`frames`]: latitude/longitude, local east-north-up axes, and the
//!   body-fixed <-> body-centred inertial (BCI) conversions;
//! - [`shadow`]: whether a point is in the body's cylindrical shadow;
//! - [`kepler`]: closed-form two-body flight, used when no radiation
//!   pressure acts;
//! - [`integrate`]: adaptive Dormand-Prince flight with radiation pressure
//!   switched off in shadow.
//!
//! All positions and velocities are BCI, in m and m s^-1.

pub mod frames;
pub mod integrate;
pub mod kepler;
pub mod shadow;

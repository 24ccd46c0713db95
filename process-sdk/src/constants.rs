//! Physical constants used by process laws and by the host, in SI units.
//!
//! Why this exists: a law and the engine must agree on k_B and the atomic
//! mass unit to the last digit, or a thermal launch and the host's escape
//! check would disagree. Values are CODATA 2022 exact or recommended values.

/// Boltzmann constant k_B, J K^-1 (CODATA 2022, exact).
pub const BOLTZMANN: f64 = 1.380_649e-23;
/// Atomic mass constant u, kg (CODATA 2022).
pub const ATOMIC_MASS: f64 = 1.660_539_066_60e-27;
/// Elementary charge, C; also joules per electronvolt (CODATA 2022, exact).
pub const ELECTRON_VOLT: f64 = 1.602_176_634e-19;
/// Planck constant h, J s (CODATA 2022, exact).
pub const PLANCK: f64 = 6.626_070_15e-34;
/// Newtonian constant of gravitation G, m^3 kg^-1 s^-2 (CODATA 2022).
pub const GRAVITATION: f64 = 6.674_30e-11;
/// Astronomical unit, m (IAU 2012 Resolution B2, exact).
pub const ASTRONOMICAL_UNIT: f64 = 1.495_978_707e11;
/// Speed of light in vacuum c, m s^-1 (exact).
pub const SPEED_OF_LIGHT: f64 = 299_792_458.0;
/// Square centimetres per square metre (1 m^2 = 1e4 cm^2).
pub const CM2_PER_M2: f64 = 1.0e4;

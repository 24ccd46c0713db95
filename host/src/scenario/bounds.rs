//! The physical and practical bounds that scenario values must lie within.
//!
//! Why this exists: a value far outside them is a typo or a misunderstanding
//! (a duration of "1e308 s", a million threads, a solar-wind flux of
//! "1e308 cm^-2 s^-1"), and accepting it costs hours of wall time or fills
//! the outputs with NaN. Each bound is refused with a message naming the
//! key, the range and the fix; each constant says where its value comes
//! from. `docs/scenario.md` lists them all, and must agree with this file.

use std::ops::RangeInclusive;

/// Most time steps a run may take, `round(run.duration / run.dt)`.
/// Practical cap, our choice: a lunation (29.53 d) at the smallest step
/// (1 s) is 2.6e6 steps, and a Mercury solar day (176 d) at 10 s is 1.5e6,
/// so 1e7 admits every run we can picture; beyond it a mistyped duration
/// is more likely than a plan.
pub const MAX_STEPS: u64 = 10_000_000;

/// Allowed time step `run.dt`, s. Practical range, our choice: below 1 s
/// nothing the engine resolves changes (ballistic hops of sodium last
/// minutes; common practice), and 1e6 s (11.6 d) is already more than a
/// third of a lunar solar day, so the Sun's motion within a step would be
/// lost at anything longer.
pub const DT_S: RangeInclusive<f64> = 1.0..=1.0e6;

/// Worker threads allowed per available core (`run.threads` at most this
/// times `std::thread::available_parallelism()`). Practical cap, our
/// choice: more threads than this only add start-up and switching cost,
/// and results do not depend on the count.
pub const THREADS_PER_CORE: usize = 4;

/// Allowed outer boundary `run.boundary_radii`, body radii (exclusive of 1).
/// Practical cap, our choice: the Hill spheres of the Moon and Mercury lie
/// within about 35 and 90 of their radii (from memory), beyond which the
/// body's gravity alone, as the engine integrates it, is not the physics;
/// 1000 leaves room for custom bodies while keeping hops finite.
pub const BOUNDARY_RADII_MAX: f64 = 1000.0;

/// Allowed unshielded solar-wind ion flux at 1 AU,
/// `environment.solar_wind_flux`, cm^-2 s^-1. The observed proton flux at
/// 1 AU is about 1e8 to 1e9 cm^-2 s^-1 (a density of ~5 cm^-3 at
/// ~400 km/s gives 2e8), and the densest, fastest coronal mass ejections
/// reach about 1e10 (from memory). The cap, 1e13, is our choice: a
/// thousand times the most extreme events, room for stress tests, and far
/// below where fluxes times yields, areas and steps could overflow.
pub const SOLAR_WIND_FLUX: RangeInclusive<f64> = 0.0..=1.0e13;

/// Allowed multiplier on a nominal flux (`environment.meteoroid_factor`,
/// `environment.solar_wind[].factor`), dimensionless. The cap, 1e6, is our
/// choice: meteor showers raise the impact flux by factors of 10 to 100
/// at most (from memory), and 1e6 times the nominal solar-wind cap still
/// gives finite rates.
pub const FACTOR: RangeInclusive<f64> = 0.0..=1.0e6;

/// Allowed heliocentric distance (`environment.heliocentric_distance`,
/// `surface.temperature.reference_distance`), AU. Our choice: 0.1 AU is a
/// third of Mercury's perihelion (0.307 AU), 100 AU lies near the
/// heliopause (~120 AU, from memory); the r^-2 flux and r^-1/2
/// temperature scalings mean nothing beyond either.
pub const HELIO_DISTANCE_AU: RangeInclusive<f64> = 0.1..=100.0;

/// Allowed surface temperature (`surface.temperature.subsolar`, `.night`),
/// K. Our choice: the coldest permanently shadowed lunar craters are
/// about 25 K and Mercury's subsolar point about 700 K at perihelion;
/// silicate regolith melts near 1400 to 2000 K (all from memory), where
/// the temperature law no longer describes a solid surface.
pub const TEMPERATURE_K: RangeInclusive<f64> = 10.0..=2000.0;

/// A number as messages show it: plain when moderate (`900`, `0.5`), in
/// exponent form when large or small (`1e13`, `1.5e-9`).
pub fn shown(x: f64) -> String {
    if x != 0.0 && x.is_finite() && !(1.0e-3..1.0e6).contains(&x.abs()) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_are_shown_plainly_or_in_exponent_form() {
        assert_eq!(shown(900.0), "900");
        assert_eq!(shown(0.5), "0.5");
        assert_eq!(shown(1.0e13), "1e13");
        assert_eq!(shown(1.5e-9), "1.5e-9");
        assert_eq!(shown(-2.0e8), "-2e8");
        assert_eq!(shown(0.0), "0");
        assert_eq!(shown(10_000_000.0), "1e7");
        assert_eq!(shown(1.0e6), "1e6");
        assert_eq!(shown(999_999.0), "999999");
    }
}

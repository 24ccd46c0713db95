//! Where the Sun is, as seen from the body, at any simulation time.
//!
//! Why this exists: the subsolar point drives everything on the surface
//! (temperature, photon-stimulated desorption, local time) and the Sun's
//! direction sets radiation pressure and the shadow. Flights are integrated
//! in the body-centred inertial frame (BCI): z along the spin axis, x along
//! the body-fixed prime meridian at t = 0. In BCI the Sun's longitude moves
//! only with the body's orbital motion; in the body-fixed frame the
//! subsolar point moves west by one turn per solar day. A body-fixed east
//! longitude is lon_BCI - Omega_sid t (mod 2 pi).
//!
//! Approximations: the spin axis is normal to the orbit plane apart from a
//! fixed subsolar latitude (no seasons within a run), and for an orbit
//! given only by a constant distance the Sun's BCI longitude advances
//! uniformly so that the subsolar point returns after exactly one solar
//! day. For a Keplerian orbit the Sun's BCI longitude follows the true
//! anomaly, which reproduces Mercury's non-uniform solar motion (and its
//! retrograde sunrise near perihelion).

use crate::body::{Body, HelioOrbit};
use crate::transport::frames::{unit_from_lat_lon, wrap_two_pi};
use crate::vec3::Vec3;
use core::f64::consts::PI;
use exobound_sdk::math;

/// Fixed parameters of the subsolar point for a run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SunGeometry {
    /// Subsolar latitude delta (the Sun's declination in the body frame), rad.
    pub subsolar_latitude: f64,
    /// Body-fixed east longitude of the subsolar point at t = 0, rad.
    pub subsolar_longitude_at_start: f64,
}

impl SunGeometry {
    /// BCI longitude of the Sun at time `t` (s), rad (not wrapped; it is
    /// continuous in t): the start longitude plus the orbital motion. For a
    /// Kepler orbit the motion is nu(t) - nu(0), nu the true anomaly; for a
    /// constant distance it is (Omega_sid - 2 pi / P_solar) t, the mean
    /// orbital rate implied by the two periods (synodic relation
    /// 1/P_solar = 1/P_sid - 1/P_orb).
    pub fn sun_longitude_bci(&self, body: &Body, t: f64) -> f64 {
        let motion = match body.orbit {
            HelioOrbit::Kepler { .. } => {
                body.orbit.true_anomaly_unwrapped(t) - body.orbit.true_anomaly_unwrapped(0.0)
            }
            HelioOrbit::Constant { .. } => (body.sidereal_rate() - 2.0 * PI / body.solar_day) * t,
        };
        self.subsolar_longitude_at_start + motion
    }

    /// Unit vector toward the Sun in BCI at time `t` (s), dimensionless:
    /// (cos delta cos lambda, cos delta sin lambda, sin delta).
    pub fn sun_direction_bci(&self, body: &Body, t: f64) -> Vec3 {
        unit_from_lat_lon(self.subsolar_latitude, self.sun_longitude_bci(body, t))
    }

    /// Body-fixed east longitude of the subsolar point at time `t` (s),
    /// rad in [0, 2 pi): lambda_BCI(t) - Omega_sid t.
    pub fn subsolar_longitude(&self, body: &Body, t: f64) -> f64 {
        wrap_two_pi(self.sun_longitude_bci(body, t) - body.sidereal_rate() * t)
    }

    /// Local solar time, hours in [0, 24), at body-fixed east longitude
    /// `lon_fixed` (rad) and time `t` (s): 12 + (lon - lon_ss) 12 / pi.
    /// Noon at the subsolar meridian, 06 at the dawn terminator (90 deg
    /// west of it), 18 at dusk; increasing eastward.
    pub fn local_time_hours(&self, body: &Body, lon_fixed: f64, t: f64) -> f64 {
        let d = lon_fixed - self.subsolar_longitude(body, t);
        let h = 12.0 + wrap_two_pi(d) * 12.0 / PI;
        let h = if h >= 24.0 { h - 24.0 } else { h };
        // Guard the rounding edge exactly at 24 h.
        if h >= 24.0 { 0.0 } else { h }
    }

    /// Cosine of the solar zenith angle at body-fixed latitude `lat` and
    /// east longitude `lon_fixed` (rad) at time `t` (s), dimensionless,
    /// negative on the night side (spherical law of cosines):
    /// cos SZA = sin lat sin delta + cos lat cos delta cos(lon - lon_ss).
    pub fn cos_sza(&self, body: &Body, lat: f64, lon_fixed: f64, t: f64) -> f64 {
        let (sl, cl) = math::sin_cos(lat);
        let (sd, cd) = math::sin_cos(self.subsolar_latitude);
        sl * sd + cl * cd * math::cos(lon_fixed - self.subsolar_longitude(body, t))
    }
}

/// One interval of the solar-wind schedule: between `start` and `end` (s of
/// simulated time) the flux reaching the surface is multiplied by `factor`
/// (0 while the body is shielded, e.g. the Moon inside the geomagnetic tail).
#[derive(Clone, Debug, PartialEq)]
pub struct FluxInterval {
    /// Start of the interval, s since the run start.
    pub start: f64,
    /// End of the interval (exclusive), s since the run start.
    pub end: f64,
    /// Multiplier on the unshielded flux, dimensionless, >= 0.
    pub factor: f64,
}

/// The solar-wind ion flux reaching the surface over time: an unshielded
/// flux at 1 AU, scaled as 1/r^2 with heliocentric distance r, and a
/// schedule of intervals that scale it further.
#[derive(Clone, Debug, PartialEq)]
pub struct SolarWind {
    /// Unshielded ion flux at 1 AU, ions cm^-2 s^-1.
    pub flux: f64,
    /// Intervals, in any order; where they overlap the later one wins;
    /// outside every interval the factor is 1.
    pub schedule: Vec<FluxInterval>,
}

impl SolarWind {
    /// A flux `flux` at 1 AU (ions cm^-2 s^-1) with no schedule.
    pub fn constant(flux: f64) -> SolarWind {
        SolarWind { flux, schedule: Vec::new() }
    }

    /// The schedule's factor at time `t` (s), dimensionless.
    pub fn factor_at(&self, t: f64) -> f64 {
        self.schedule.iter().rev().find(|i| t >= i.start && t < i.end).map_or(1.0, |i| i.factor)
    }

    /// Ion flux reaching the surface at time `t` (s) and heliocentric
    /// distance `r_au` (AU), ions cm^-2 s^-1: the 1 AU flux times 1/r^2
    /// (a radially expanding wind of constant speed) times the schedule.
    pub fn flux_at(&self, t: f64, r_au: f64) -> f64 {
        self.flux * self.factor_at(t) / (r_au * r_au)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::body::DAY;
    use crate::transport::frames::{fixed_to_inertial, wrap_pi};
    use crate::vec3;

    fn noon_at(lon: f64) -> SunGeometry {
        SunGeometry { subsolar_latitude: 0.0, subsolar_longitude_at_start: lon }
    }

    #[test]
    fn moon_subsolar_point_returns_after_one_solar_day() {
        let moon = Body::moon();
        let sun = noon_at(1.0);
        // NASA Moon fact sheet: lunar solar day = synodic month 29.53 d. By
        // construction the subsolar point moves west by 2 pi per solar day.
        let back = sun.subsolar_longitude(&moon, 29.53 * DAY);
        assert!(wrap_pi(back - 1.0).abs() < 1e-9, "{back}");
        // Half a solar day later it is on the far side.
        let half = sun.subsolar_longitude(&moon, 0.5 * 29.53 * DAY);
        assert!((wrap_pi(half - 1.0).abs() - PI).abs() < 1e-9);
        // It moves west (longitude decreasing) at 2 pi / P_solar.
        let early = sun.subsolar_longitude(&moon, 3600.0);
        assert!((wrap_pi(early - 1.0) + 2.0 * PI * 3600.0 / (29.53 * DAY)).abs() < 1e-12);
    }

    #[test]
    fn local_time_at_noon_dawn_and_dusk() {
        let moon = Body::moon();
        let sun = noon_at(0.3);
        let t = 4.0 * DAY;
        let ss = sun.subsolar_longitude(&moon, t);
        // Local-time convention (SDK records): 12 at the subsolar meridian,
        // increasing eastward; dawn terminator 90 deg west, dusk 90 deg east.
        assert!((sun.local_time_hours(&moon, ss, t) - 12.0).abs() < 1e-12);
        assert!((sun.local_time_hours(&moon, ss - 0.5 * PI, t) - 6.0).abs() < 1e-12);
        assert!((sun.local_time_hours(&moon, ss + 0.5 * PI, t) - 18.0).abs() < 1e-12);
        assert!(sun.local_time_hours(&moon, ss + PI, t).abs() < 1e-12);
        let lt = sun.local_time_hours(&moon, ss + PI - 1e-17, t);
        assert!((0.0..24.0).contains(&lt));
        // cos SZA: 1 at the subsolar point, 0 at the terminators, -1 at midnight.
        assert!((sun.cos_sza(&moon, 0.0, ss, t) - 1.0).abs() < 1e-15);
        assert!(sun.cos_sza(&moon, 0.0, ss - 0.5 * PI, t).abs() < 1e-15);
        assert!((sun.cos_sza(&moon, 0.0, ss + PI, t) + 1.0).abs() < 1e-15);
        // cos SZA at latitude 60 deg on the subsolar meridian = cos 60 deg.
        assert!((sun.cos_sza(&moon, PI / 3.0, ss, t) - 0.5).abs() < 1e-15);
    }

    #[test]
    fn sun_direction_matches_subsolar_point() {
        // The body-fixed subsolar point, rotated into BCI, is the Sun direction.
        for body in [Body::moon(), Body::mercury()] {
            let sun = SunGeometry { subsolar_latitude: 0.026, subsolar_longitude_at_start: 2.0 };
            for i in 0..10 {
                let t = i as f64 * 7.3 * DAY;
                let fixed = unit_from_lat_lon(0.026, sun.subsolar_longitude(&body, t));
                let bci = fixed_to_inertial(fixed, body.sidereal_rate(), t);
                let s = sun.sun_direction_bci(&body, t);
                assert!(vec3::norm(vec3::sub(bci, s)) < 1e-12, "{} t {t}", body.name);
                assert!(
                    sun.cos_sza(&body, 0.026, sun.subsolar_longitude(&body, t), t) > 1.0 - 1e-15
                );
            }
        }
    }

    #[test]
    fn mercury_subsolar_point_repeats_every_two_orbits() {
        let mercury = Body::mercury();
        let sun = noon_at(0.0);
        // NASA Mercury fact sheet: orbital period 87.969257 d,
        // sidereal rotation 58.6463 d (the 3:2 spin-orbit resonance:
        // 3 x 58.6463 d = 175.9389 d vs 2 x 87.969257 d = 175.938514 d).
        let p_orb = 87.969_257 * DAY;
        let p_sid = 58.6463 * DAY;
        let t = 2.0 * p_orb;
        // After two orbits the Sun is back at the same BCI longitude, and the
        // body has turned 2 p_orb / p_sid = 2.9999934 times; the subsolar
        // point misses its start by 2 pi (3 - 2 p_orb / p_sid) = 4.1e-5 rad
        // because the rounded fact-sheet periods are not exactly in 3:2.
        let expected_miss = 2.0 * PI * (3.0 - 2.0 * p_orb / p_sid);
        let miss = wrap_pi(sun.subsolar_longitude(&mercury, t));
        assert!((miss - expected_miss).abs() < 1e-9, "{miss} vs {expected_miss}");
        // The brief's tolerance, 1e-3 rad, is met with margin: the honest
        // floor from 6-figure periods is the 4.1e-5 rad above.
        assert!(miss.abs() < 1e-4);
        // NASA Mercury fact sheet: the mean solar day 175.9421 d, 1e-4 rel. From
        // the two periods, 1/P_sol = 1/P_sid - 1/P_orb gives 175.9385 d.
        let p_sol = 1.0 / (1.0 / p_sid - 1.0 / p_orb);
        assert!((p_sol / (175.9421 * DAY) - 1.0).abs() < 1e-4);
    }

    #[test]
    fn mercury_sun_moves_fastest_at_perihelion() {
        // Kepler's second law: the angular rate around the Sun is highest at
        // perihelion, where it exceeds the spin rate (the Sun briefly moves
        // backward in Mercury's sky, a known effect of the 3:2 resonance).
        let mercury = Body::mercury();
        let sun = noon_at(0.0);
        let dt = 600.0;
        let ss0 = sun.subsolar_longitude(&mercury, 0.0);
        let ss1 = sun.subsolar_longitude(&mercury, dt);
        assert!(wrap_pi(ss1 - ss0) > 0.0, "retrograde at perihelion");
        let half = 0.5 * 87.969_257 * DAY;
        let a0 = sun.subsolar_longitude(&mercury, half);
        let a1 = sun.subsolar_longitude(&mercury, half + dt);
        assert!(wrap_pi(a1 - a0) < 0.0, "westward at aphelion");
    }
}

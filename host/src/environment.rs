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
//! The Sun's apparent path: its orbital longitude L advances with the
//! orbit (the true anomaly for a Kepler orbit; uniformly for a constant
//! distance, at the mean rate Omega_sid - 2 pi / P_solar implied by the two
//! periods, so that the subsolar point returns after exactly one solar
//! day). Without an obliquity the spin axis is normal to the orbit plane
//! and the subsolar latitude is a fixed value (no seasons). With an
//! obliquity eps the orbit plane is tilted by eps about the direction of
//! the northward equinox, so that in a frame with x toward that equinox
//! and z along the spin axis the Sun lies along
//! (cos L, cos eps sin L, sin eps sin L), L counted from the equinox: the
//! subsolar latitude is delta = asin(sin eps sin L) and the Sun's right
//! ascension alpha = atan2(cos eps sin L, cos L) (spherical astronomy,
//! e.g. Smart 1977, Textbook on Spherical Astronomy, 6th ed.; from memory). The
//! Keplerian case reproduces Mercury's non-uniform solar motion (and its
//! retrograde sunrise near perihelion).

use crate::body::{Body, HelioOrbit};
use crate::transport::frames::{unit_from_lat_lon, wrap_pi, wrap_two_pi};
use crate::vec3::Vec3;
use core::f64::consts::PI;
use exobound_sdk::math;

/// Where the subsolar point starts and how its latitude behaves, for a run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SunGeometry {
    /// Subsolar latitude when `seasons` is `None` (the Sun's declination in
    /// the body frame, fixed for the run), rad; ignored with seasons.
    pub fixed_subsolar_latitude: f64,
    /// Body-fixed east longitude of the subsolar point at t = 0, rad.
    pub subsolar_longitude_at_start: f64,
    /// The spin axis's tilt and the season at the start; `None` for a spin
    /// axis normal to the orbit plane apart from the fixed latitude.
    pub seasons: Option<Seasons>,
}

/// A tilted spin axis: the subsolar latitude follows the orbit.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Seasons {
    /// Obliquity eps (angle between the spin axis and the orbit normal),
    /// rad in [0, pi/2).
    pub obliquity: f64,
    /// The Sun's orbital longitude L at t = 0, counted along its apparent
    /// path from the northward equinox (the "solar longitude" L_s of the
    /// trade), rad.
    pub solar_longitude_at_start: f64,
}

impl SunGeometry {
    /// No seasons: the subsolar point at latitude `lat` (rad) for the whole
    /// run, at body-fixed east longitude `lon` (rad) at t = 0.
    pub fn fixed(lat: f64, lon: f64) -> SunGeometry {
        SunGeometry {
            fixed_subsolar_latitude: lat,
            subsolar_longitude_at_start: lon,
            seasons: None,
        }
    }

    /// Seasons from obliquity `obliquity` (rad, [0, pi/2)), with the Sun
    /// at orbital longitude `solar_longitude_at_start` (rad, from the
    /// northward equinox) and the subsolar point at body-fixed east
    /// longitude `lon` (rad) at t = 0.
    pub fn seasonal(obliquity: f64, solar_longitude_at_start: f64, lon: f64) -> SunGeometry {
        SunGeometry {
            fixed_subsolar_latitude: 0.0,
            subsolar_longitude_at_start: lon,
            seasons: Some(Seasons { obliquity, solar_longitude_at_start }),
        }
    }

    /// The same geometry with the start longitude chosen so that the
    /// subsolar point lies at body-fixed east longitude `lon_ref` (rad) at
    /// time `t_ref` (s, may be before the start). The subsolar longitude is
    /// the start longitude plus a function of time alone, so this is exact
    /// up to rounding.
    pub fn anchored(self, body: &Body, t_ref: f64, lon_ref: f64) -> SunGeometry {
        let zero = SunGeometry { subsolar_longitude_at_start: 0.0, ..self };
        let drift = zero.sun_longitude_bci(body, t_ref) - body.sidereal_rate() * t_ref;
        SunGeometry { subsolar_longitude_at_start: wrap_two_pi(lon_ref - drift), ..self }
    }

    /// Angle the body has moved along its orbit since t = 0, at time `t`
    /// (s), rad, continuous in t: for a Kepler orbit nu(t) - nu(0), nu the
    /// true anomaly; for a constant distance (Omega_sid - 2 pi / P_solar) t,
    /// the mean orbital rate implied by the two periods (synodic relation
    /// 1/P_solar = 1/P_sid - 1/P_orb).
    pub fn orbital_motion(&self, body: &Body, t: f64) -> f64 {
        match body.orbit {
            HelioOrbit::Kepler { .. } => {
                body.orbit.true_anomaly_unwrapped(t) - body.orbit.true_anomaly_unwrapped(0.0)
            }
            HelioOrbit::Constant { .. } => (body.sidereal_rate() - 2.0 * PI / body.solar_day) * t,
        }
    }

    /// The Sun's orbital longitude L from the northward equinox at time `t`
    /// (s), rad in [0, 2 pi); `None` without seasons (no equinox is defined).
    pub fn solar_longitude(&self, body: &Body, t: f64) -> Option<f64> {
        self.seasons.map(|s| wrap_two_pi(s.solar_longitude_at_start + self.orbital_motion(body, t)))
    }

    /// Subsolar latitude (declination) and BCI longitude of the Sun at
    /// time `t` (s), both rad; the longitude is continuous in t.
    fn sun_lat_lon_bci(&self, body: &Body, t: f64) -> (f64, f64) {
        let motion = self.orbital_motion(body, t);
        match self.seasons {
            None => (self.fixed_subsolar_latitude, self.subsolar_longitude_at_start + motion),
            Some(s) => {
                let l0 = s.solar_longitude_at_start;
                let l = l0 + motion;
                let (se, ce) = math::sin_cos(s.obliquity);
                let delta = math::asin((se * math::sin(l)).clamp(-1.0, 1.0));
                let lon = self.subsolar_longitude_at_start + right_ascension(ce, l)
                    - right_ascension(ce, l0);
                (delta, lon)
            }
        }
    }

    /// BCI longitude of the Sun at time `t` (s), rad (not wrapped; it is
    /// continuous in t): the start longitude plus the orbital motion (as
    /// the Sun's right ascension, when the axis is tilted).
    pub fn sun_longitude_bci(&self, body: &Body, t: f64) -> f64 {
        self.sun_lat_lon_bci(body, t).1
    }

    /// Subsolar latitude (the Sun's declination in the body frame) at time
    /// `t` (s), rad in [-pi/2, pi/2]: the fixed value without seasons,
    /// asin(sin eps sin L(t)) with them.
    pub fn subsolar_latitude(&self, body: &Body, t: f64) -> f64 {
        match self.seasons {
            None => self.fixed_subsolar_latitude,
            Some(_) => self.sun_lat_lon_bci(body, t).0,
        }
    }

    /// Unit vector toward the Sun in BCI at time `t` (s), dimensionless:
    /// (cos delta cos lambda, cos delta sin lambda, sin delta).
    pub fn sun_direction_bci(&self, body: &Body, t: f64) -> Vec3 {
        let (lat, lon) = self.sun_lat_lon_bci(body, t);
        unit_from_lat_lon(lat, lon)
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
        let (delta, lon_bci) = self.sun_lat_lon_bci(body, t);
        let lon_ss = lon_bci - body.sidereal_rate() * t;
        let (sl, cl) = math::sin_cos(lat);
        let (sd, cd) = math::sin_cos(delta);
        sl * sd + cl * cd * math::cos(lon_fixed - lon_ss)
    }
}

/// The Sun's right ascension (rad) at orbital longitude `l` (rad) for an
/// obliquity whose cosine is `cos_eps` (> 0): atan2(cos eps sin L, cos L),
/// unwrapped to stay within pi/2 of L (for eps < 90 deg the two share a
/// quadrant), so that it grows by 2 pi per orbit as L does.
fn right_ascension(cos_eps: f64, l: f64) -> f64 {
    let (s, c) = math::sin_cos(l);
    l + wrap_pi(math::atan2(cos_eps * s, c) - l)
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
        SunGeometry::fixed(0.0, lon)
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
            let sun = SunGeometry::fixed(0.026, 2.0);
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
        let p_orb = 87.969_257 * DAY;
        // The 3:2 spin-orbit resonance (Colombo 1965, Nature 208, 575; from
        // memory), exact in the model: three sidereal turns per two orbits.
        assert!((3.0 * mercury.sidereal_rotation - 2.0 * p_orb).abs() < 1e-6);
        // After two orbits (one solar day) the Sun is back at the same BCI
        // longitude and the body has turned exactly three times: the
        // subsolar point is back, to rounding.
        let back = wrap_pi(sun.subsolar_longitude(&mercury, 2.0 * p_orb));
        assert!(back.abs() < 1e-9, "{back}");
        // After one orbit it is on the other hot longitude (1.5 turns).
        let one = sun.subsolar_longitude(&mercury, p_orb);
        assert!((one - PI).abs() < 1e-9, "{one}");
        // NASA Mercury fact sheet: the mean solar day 175.9421 d, 1e-4 rel.
        // From the two periods, 1/P_sol = 1/P_sid - 1/P_orb gives 2 P_orb.
        let p_sol = 1.0 / (1.0 / mercury.sidereal_rotation - 1.0 / p_orb);
        assert!((p_sol / (2.0 * p_orb) - 1.0).abs() < 1e-12);
        assert!((p_sol / (175.9421 * DAY) - 1.0).abs() < 1e-4);
        assert!((mercury.solar_day / p_sol - 1.0).abs() < 1e-12);
        // NASA Mercury fact sheet: sidereal rotation 58.6463 d; the exact
        // 2/3 of the orbital period lies within 3e-6 relative of it.
        assert!((mercury.sidereal_rotation / (58.6463 * DAY) - 1.0).abs() < 3e-6);
    }

    #[test]
    fn anchored_geometry_puts_the_subsolar_point_where_asked() {
        let mercury = Body::mercury();
        let orbit = mercury.orbit.starting_at(1.7).unwrap();
        let body = Body { orbit, ..mercury };
        let tp = body.orbit.perihelion_at_or_before(0.0).unwrap();
        assert!(tp <= 0.0 && tp > -88.0 * DAY);
        let sun = noon_at(0.0).anchored(&body, tp, PI);
        // Exactly at the requested longitude at the requested time.
        assert!(wrap_pi(sun.subsolar_longitude(&body, tp) - PI).abs() < 1e-12);
        // The start longitude follows the resonance formula
        // lon(0) = lon(t_p) + nu(0) - Omega_sid (0 - t_p).
        let expect = wrap_two_pi(PI + 1.7 - body.sidereal_rate() * (0.0 - tp));
        assert!(wrap_pi(sun.subsolar_longitude_at_start - expect).abs() < 1e-12);
    }

    #[test]
    fn obliquity_gives_solstices_and_equinoxes() {
        // Subsolar latitude delta = asin(sin eps sin L): +eps at the
        // northern summer solstice (L = 90 deg), 0 at the equinoxes,
        // -eps at L = 270 deg (spherical astronomy; Smart 1977, Textbook on
        // Spherical Astronomy, 6th ed.; from memory).
        let eps = 0.4;
        let moon = Body::moon();
        let n_orb = moon.sidereal_rate() - 2.0 * PI / moon.solar_day;
        let quarter = 0.5 * PI / n_orb;
        let sun = SunGeometry::seasonal(eps, 0.0, 0.3);
        assert!(sun.subsolar_latitude(&moon, 0.0).abs() < 1e-15);
        assert!((sun.subsolar_latitude(&moon, quarter) - eps).abs() < 1e-12);
        assert!(sun.subsolar_latitude(&moon, 2.0 * quarter).abs() < 1e-12);
        assert!((sun.subsolar_latitude(&moon, 3.0 * quarter) + eps).abs() < 1e-12);
        assert!((sun.solar_longitude(&moon, quarter).unwrap() - 0.5 * PI).abs() < 1e-12);
        // The start longitude is kept; the direction is a unit vector that
        // agrees with the body-fixed subsolar point and with cos SZA.
        assert!((sun.subsolar_longitude(&moon, 0.0) - 0.3).abs() < 1e-15);
        for body in [Body::moon(), Body::mercury()] {
            let sun = SunGeometry::seasonal(eps, 1.0, 2.0);
            for i in 0..40 {
                let t = i as f64 * 5.1 * DAY;
                let s = sun.sun_direction_bci(&body, t);
                assert!((vec3::norm(s) - 1.0).abs() < 1e-14);
                let (lat, lon) =
                    (sun.subsolar_latitude(&body, t), sun.subsolar_longitude(&body, t));
                let bci = fixed_to_inertial(unit_from_lat_lon(lat, lon), body.sidereal_rate(), t);
                assert!(vec3::norm(vec3::sub(bci, s)) < 1e-12, "{} t {t}", body.name);
                assert!(sun.cos_sza(&body, lat, lon, t) > 1.0 - 1e-15);
                assert!((sun.cos_sza(&body, -lat, lon + PI, t) + 1.0).abs() < 1e-12);
                // The direction lies in the orbit plane, tilted by eps about
                // the equinox: its angle from the equator plane never
                // exceeds eps.
                assert!(lat.abs() <= eps + 1e-15);
            }
        }
    }

    #[test]
    fn tilted_sun_still_repeats_on_mercury() {
        // The resonance holds with a tilted axis: one orbit moves the
        // subsolar point by 180 deg, a solar day brings it back.
        let mercury = Body::mercury();
        let sun = SunGeometry::seasonal(0.1, 0.4, 0.0);
        let p = 87.969_257 * DAY;
        for t in [0.0, 0.21 * p, 0.5 * p] {
            let a = sun.subsolar_longitude(&mercury, t);
            let b = sun.subsolar_longitude(&mercury, t + p);
            let c = sun.subsolar_longitude(&mercury, t + 2.0 * p);
            assert!((wrap_pi(b - a).abs() - PI).abs() < 1e-9);
            assert!(wrap_pi(c - a).abs() < 1e-9);
        }
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

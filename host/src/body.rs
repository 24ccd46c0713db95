//! The central body: its gravity, size, spin and heliocentric orbit.
//!
//! Why this exists: every trajectory, every escape decision and every
//! local-time bin depends on a few constants of the body (GM, radius, spin
//! period) and on where the body is around the Sun. They live here, once,
//! each with its source, so that a scenario can name "moon" or "mercury" or
//! describe any airless body with a struct literal or [`Body::custom`].
//! All quantities are SI (m, s, m^3 s^-2) except heliocentric distance,
//! which is in astronomical units because that is how solar fluxes scale.

use core::f64::consts::PI;
use exobound_sdk::constants::{ASTRONOMICAL_UNIT, BOLTZMANN};
use exobound_sdk::math;

use crate::transport::frames::{wrap_pi, wrap_two_pi};

/// Seconds per day (86 400 s, the SI day used by the fact sheets).
pub const DAY: f64 = 86_400.0;

/// Mercury's sidereal orbital period, s (NASA Mercury fact sheet:
/// 87.969257 d).
pub const MERCURY_ORBITAL_PERIOD: f64 = 87.969_257 * DAY;

/// Cubic metres per cubic kilometre, for GM given in km^3 s^-2.
const M3_PER_KM3: f64 = 1.0e9;

/// An airless body with a surface-bounded exosphere.
#[derive(Clone, Debug, PartialEq)]
pub struct Body {
    /// Display name, e.g. "Moon".
    pub name: String,
    /// Gravitational parameter GM, m^3 s^-2.
    pub gm: f64,
    /// Mean radius, m; the surface of the model is a sphere of this radius.
    pub radius: f64,
    /// Sidereal rotation period (spin relative to the stars), s; positive
    /// for prograde rotation about +z.
    pub sidereal_rotation: f64,
    /// Mean solar day (subsolar point back to the same longitude), s.
    pub solar_day: f64,
    /// The body's path around the Sun, which sets the heliocentric distance.
    pub orbit: HelioOrbit,
}

/// How the body's heliocentric distance evolves.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum HelioOrbit {
    /// A fixed distance (the Moon, whose distance from the Sun varies by
    /// under 2 per cent over a year); distance in AU.
    Constant {
        /// Heliocentric distance, AU.
        distance_au: f64,
    },
    /// A Keplerian ellipse around the Sun, with the body at perihelion at
    /// `time_of_perihelion_s` (simulation time, s).
    Kepler {
        /// Semi-major axis, AU.
        semi_major_axis_au: f64,
        /// Eccentricity, dimensionless, in [0, 1).
        eccentricity: f64,
        /// Orbital (sidereal) period, s.
        period_s: f64,
        /// Simulation time of a perihelion passage, s.
        time_of_perihelion_s: f64,
    },
}

impl Body {
    /// The Moon. Sources beside each value (JPL DE440 physical parameters; NASA fact sheet).
    pub fn moon() -> Body {
        Body {
            name: "Moon".to_string(),
            // JPL planetary/satellite physical parameters (DE440): 4902.800 km^3 s^-2.
            gm: 4902.800 * M3_PER_KM3,
            // Same source: mean radius 1737.4 km.
            radius: 1737.4e3,
            // NASA fact sheet: sidereal rotation period 27.322 d.
            sidereal_rotation: 27.322 * DAY,
            // NASA fact sheet: synodic month (the lunar solar day) 29.53 d.
            solar_day: 29.53 * DAY,
            // The Earth-Moon system stays within ~1.7 % of 1 AU; a constant
            // 1 AU is the usual choice (common practice: the Earth-Moon system's mean distance).
            orbit: HelioOrbit::Constant { distance_au: 1.0 },
        }
    }

    /// Mercury, at perihelion at t = 0 (see [`HelioOrbit::starting_at`] to
    /// start elsewhere on the orbit), spinning in exact 3:2 resonance with
    /// its orbit. Sources beside each value (JPL DE440 physical
    /// parameters; NASA Mercury fact sheet).
    pub fn mercury() -> Body {
        Body {
            name: "Mercury".to_string(),
            // JPL planetary physical parameters (DE440): 22031.86855 km^3 s^-2.
            gm: 22_031.868_55 * M3_PER_KM3,
            // Same source: mean radius 2439.4 km.
            radius: 2439.4e3,
            // The 3:2 spin-orbit resonance, made exact: three sidereal turns
            // per two orbits, 58.646171 d (Pettengill & Dyce 1965, Nature
            // 206, 1240, radar rotation period 59 +- 5 d; Colombo 1965,
            // Nature 208, 575, the 2/3 explanation; Margot et al. 2007,
            // Science 316, 710, the spin measured to be resonant to within
            // their errors: all from memory). The NASA fact sheet's rounded
            // 58.6463 d differs by 1.3e-4 d, which over one solar day
            // would move the subsolar point 4.1e-5 rad off its repeat.
            sidereal_rotation: MERCURY_ORBITAL_PERIOD * 2.0 / 3.0,
            // With P_sid = 2/3 P_orb the synodic relation 1/P_sol = 1/P_sid
            // - 1/P_orb gives exactly two orbits, 175.938514 d (the NASA
            // fact sheet's rounded 175.9421 d differs by 2e-5 relative).
            solar_day: 2.0 * MERCURY_ORBITAL_PERIOD,
            orbit: HelioOrbit::Kepler {
                // NASA fact sheet: a = 0.387098 AU, e = 0.20563,
                // sidereal orbital period 87.969257 d.
                semi_major_axis_au: 0.387_098,
                eccentricity: 0.205_63,
                period_s: MERCURY_ORBITAL_PERIOD,
                time_of_perihelion_s: 0.0,
            },
        }
    }

    /// A body the user describes: GM in m^3 s^-2, radius in m, sidereal
    /// rotation period and mean solar day in s.
    pub fn custom(
        name: &str,
        gm: f64,
        radius: f64,
        sidereal_rotation: f64,
        solar_day: f64,
        orbit: HelioOrbit,
    ) -> Body {
        Body { name: name.to_string(), gm, radius, sidereal_rotation, solar_day, orbit }
    }

    /// Surface escape speed sqrt(2 GM / R), m s^-1 (energy conservation in
    /// a point-mass field).
    pub fn escape_speed(&self) -> f64 {
        math::sqrt(2.0 * self.gm / self.radius)
    }

    /// Surface gravitational acceleration GM / R^2, m s^-2 (Newton's law of
    /// gravitation; rotation is neglected).
    pub fn surface_gravity(&self) -> f64 {
        self.gm / (self.radius * self.radius)
    }

    /// Sidereal spin rate 2 pi / P_sid, rad s^-1.
    pub fn sidereal_rate(&self) -> f64 {
        2.0 * PI / self.sidereal_rotation
    }

    /// Jeans escape parameter lambda = G M m / (k_B T r), dimensionless:
    /// the ratio of gravitational binding to thermal energy of an atom of
    /// mass `mass_kg` at temperature `temperature_k` (K) and radius `r_m` (m)
    /// (Jeans' escape law; Chamberlain & Hunten 1987).
    pub fn jeans_parameter(&self, mass_kg: f64, temperature_k: f64, r_m: f64) -> f64 {
        self.gm * mass_kg / (BOLTZMANN * temperature_k * r_m)
    }
}

impl HelioOrbit {
    /// Heliocentric distance at simulation time `t_s` (s), AU.
    /// For an ellipse, r = a (1 - e cos E) (Kepler's first law).
    pub fn distance_au(&self, t_s: f64) -> f64 {
        match *self {
            HelioOrbit::Constant { distance_au } => distance_au,
            HelioOrbit::Kepler { semi_major_axis_au, eccentricity, .. } => {
                let (e_anom, _) = self.eccentric_anomaly(t_s);
                semi_major_axis_au * (1.0 - eccentricity * math::cos(e_anom))
            }
        }
    }

    /// True anomaly at `t_s` (s), rad in [-pi, pi], 0 at perihelion; 0 for
    /// a constant distance (which has no perihelion).
    pub fn true_anomaly(&self, t_s: f64) -> f64 {
        match *self {
            HelioOrbit::Constant { .. } => 0.0,
            HelioOrbit::Kepler { eccentricity, .. } => {
                let (e_anom, _) = self.eccentric_anomaly(t_s);
                true_from_eccentric(e_anom, eccentricity)
            }
        }
    }

    /// True anomaly at `t_s` (s), rad, counted continuously: it grows by
    /// 2 pi per orbit instead of wrapping, so differences between two times
    /// give the angle the body has swept around the Sun. 0 for a constant
    /// distance.
    pub fn true_anomaly_unwrapped(&self, t_s: f64) -> f64 {
        match *self {
            HelioOrbit::Constant { .. } => 0.0,
            HelioOrbit::Kepler { eccentricity, .. } => {
                let (e_anom, turns) = self.eccentric_anomaly(t_s);
                true_from_eccentric(e_anom, eccentricity) + 2.0 * PI * turns
            }
        }
    }

    /// Heliocentric radial velocity dr/dt at `t_s` (s), m s^-1; positive
    /// moving away from the Sun, 0 for a constant distance. From r =
    /// a (1 - e cos E) and dE/dt = n / (1 - e cos E) (Kepler's equation):
    /// dr/dt = a e n sin E / (1 - e cos E).
    pub fn radial_velocity(&self, t_s: f64) -> f64 {
        match *self {
            HelioOrbit::Constant { .. } => 0.0,
            HelioOrbit::Kepler { semi_major_axis_au, eccentricity, period_s, .. } => {
                let (e_anom, _) = self.eccentric_anomaly(t_s);
                let (s, c) = math::sin_cos(e_anom);
                let n = 2.0 * PI / period_s;
                semi_major_axis_au * ASTRONOMICAL_UNIT * eccentricity * n * s
                    / (1.0 - eccentricity * c)
            }
        }
    }

    /// The same orbit with its time of perihelion chosen so that the true
    /// anomaly at t = 0 is `nu0` (rad): true -> eccentric -> mean anomaly
    /// M0 (Kepler's equation), and perihelion at t_p = -M0 P / (2 pi) with
    /// M0 in [0, 2 pi), so that t_p in (-P, 0] is the last perihelion at or
    /// before the start. `None` for a constant distance, which has no
    /// perihelion.
    pub fn starting_at(&self, nu0: f64) -> Option<HelioOrbit> {
        match *self {
            HelioOrbit::Constant { .. } => None,
            HelioOrbit::Kepler { semi_major_axis_au, eccentricity, period_s, .. } => {
                let m0 = wrap_two_pi(mean_from_true(nu0, eccentricity));
                Some(HelioOrbit::Kepler {
                    semi_major_axis_au,
                    eccentricity,
                    period_s,
                    time_of_perihelion_s: -m0 / (2.0 * PI) * period_s,
                })
            }
        }
    }

    /// Simulation time of the last perihelion passage at or before `t_s`
    /// (s), s; `None` for a constant distance.
    pub fn perihelion_at_or_before(&self, t_s: f64) -> Option<f64> {
        match *self {
            HelioOrbit::Constant { .. } => None,
            HelioOrbit::Kepler { period_s, time_of_perihelion_s, .. } => {
                let turns = ((t_s - time_of_perihelion_s) / period_s).floor();
                Some(time_of_perihelion_s + turns * period_s)
            }
        }
    }

    /// Orbital (sidereal) period, s; `None` for a constant distance.
    pub fn period_s(&self) -> Option<f64> {
        match *self {
            HelioOrbit::Constant { .. } => None,
            HelioOrbit::Kepler { period_s, .. } => Some(period_s),
        }
    }

    /// Eccentric anomaly in [-pi, pi] and the whole number of orbits since
    /// the reference perihelion (as f64), for the Kepler case; (0, 0) for a
    /// constant distance.
    fn eccentric_anomaly(&self, t_s: f64) -> (f64, f64) {
        match *self {
            HelioOrbit::Constant { .. } => (0.0, 0.0),
            HelioOrbit::Kepler { eccentricity, period_s, time_of_perihelion_s, .. } => {
                // Mean anomaly M = 2 pi (t - t_p) / P, reduced to [-pi, pi].
                let orbits = (t_s - time_of_perihelion_s) / period_s;
                let turns = orbits.round();
                let mean = 2.0 * PI * (orbits - turns);
                (eccentric_anomaly(mean, eccentricity), turns)
            }
        }
    }
}

/// True anomaly from eccentric anomaly E (rad in [-pi, pi]) for an ellipse
/// of eccentricity e: nu = 2 atan2(sqrt(1+e) sin(E/2), sqrt(1-e) cos(E/2)),
/// rad in [-pi, pi] (the half-angle form keeps the quadrant).
fn true_from_eccentric(e_anom: f64, e: f64) -> f64 {
    let (s, c) = math::sin_cos(0.5 * e_anom);
    2.0 * math::atan2(math::sqrt(1.0 + e) * s, math::sqrt(1.0 - e) * c)
}

/// Mean anomaly M (rad, in [-pi, pi]) at true anomaly `nu` (rad) on an
/// ellipse of eccentricity e in [0, 1): the eccentric anomaly
/// E = 2 atan2(sqrt(1-e) sin(nu/2), sqrt(1+e) cos(nu/2)) (the inverse of
/// [`true_from_eccentric`]), then Kepler's equation M = E - e sin E.
pub fn mean_from_true(nu: f64, e: f64) -> f64 {
    let (s, c) = math::sin_cos(0.5 * wrap_pi(nu));
    let e_anom = 2.0 * math::atan2(math::sqrt(1.0 - e) * s, math::sqrt(1.0 + e) * c);
    e_anom - e * math::sin(e_anom)
}

/// Solves Kepler's equation M = E - e sin E for the eccentric anomaly E,
/// rad, given the mean anomaly M (rad, in [-pi, pi]) and an elliptic
/// eccentricity e in [0, 1). Newton's method from Danby's starting value
/// E0 = M + 0.85 e sign(sin M), kept inside the bracket [-pi, pi] where the
/// left side is monotonic, until the correction is below 1e-15 rad.
pub fn eccentric_anomaly(mean_anomaly: f64, e: f64) -> f64 {
    let m = mean_anomaly;
    let (mut lo, mut hi) = (-PI, PI);
    let mut x = m + 0.85 * e * if math::sin(m) >= 0.0 { 1.0 } else { -1.0 };
    x = x.clamp(lo, hi);
    for _ in 0..60 {
        let (s, c) = math::sin_cos(x);
        let f = x - e * s - m;
        // Keep the bracket around the root; f is increasing in E.
        if f > 0.0 {
            hi = x;
        } else if f < 0.0 {
            lo = x;
        } else {
            break;
        }
        let mut next = x - f / (1.0 - e * c);
        if !(next > lo && next < hi) {
            // Newton left the bracket (only possible for e near 1): bisect.
            next = 0.5 * (lo + hi);
        }
        let done = (next - x).abs() <= 1e-15;
        x = next;
        if done {
            break;
        }
    }
    x
}

#[cfg(test)]
mod tests {
    use super::*;
    use exobound_sdk::constants::ATOMIC_MASS;

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    #[test]
    fn derived_quantities_match_the_closed_forms() {
        let moon = Body::moon();
        let mercury = Body::mercury();
        // Closed form v_esc = sqrt(2GM/R) with the JPL DE440 GM and mean radius, to 0.01 m/s.
        assert!((moon.escape_speed() - 2375.68).abs() < 0.005);
        assert!((mercury.escape_speed() - 4250.10).abs() < 0.005);
        // The same closed form evaluated here, to 1e-9 relative.
        assert!(rel(moon.escape_speed(), (2.0 * 4.9028e12_f64 / 1.7374e6).sqrt()) < 1e-9);
        // Closed form g0 = GM/R^2 with the JPL DE440 values, to 1e-5 m/s^2.
        assert!((moon.surface_gravity() - 1.62422).abs() < 5e-6);
        assert!((mercury.surface_gravity() - 3.70242).abs() < 5e-6);
        // Definition: 2 pi / P_sid.
        assert!(rel(moon.sidereal_rate(), 2.0 * PI / (27.322 * 86400.0)) < 1e-15);
    }

    #[test]
    fn jeans_parameters_match_the_closed_form() {
        let na = 22.989_769_28 * ATOMIC_MASS;
        let k = 39.0983 * ATOMIC_MASS;
        let moon = Body::moon();
        let mercury = Body::mercury();
        // Jeans parameter lambda = GMm/(k T R) (Chamberlain 1963, Planet. Space Sci. 11),
        // with CODATA 2022 k_B and u, to 7 figures.
        assert!(rel(moon.jeans_parameter(na, 1200.0, moon.radius), 6.502248) < 1e-6);
        assert!(rel(moon.jeans_parameter(na, 3000.0, moon.radius), 2.600899) < 1e-6);
        assert!(rel(moon.jeans_parameter(k, 1200.0, moon.radius), 11.05826) < 1e-6);
        assert!(rel(mercury.jeans_parameter(na, 1200.0, mercury.radius), 20.81074) < 1e-6);
        assert!(rel(mercury.jeans_parameter(na, 3000.0, mercury.radius), 8.324295) < 1e-6);
    }

    #[test]
    fn kepler_equation_is_solved_to_rounding() {
        // Kepler's equation M = E - e sin E; the residual is the test.
        for &e in &[0.0, 0.2, 0.20563, 0.7, 0.99, 0.999999] {
            for i in 0..=400 {
                let m = -PI + 2.0 * PI * i as f64 / 400.0;
                let x = eccentric_anomaly(m, e);
                // A few ulp of the largest term (E up to pi).
                assert!((x - e * math::sin(x) - m).abs() < 8.0 * f64::EPSILON * PI, "e {e} M {m}");
            }
        }
    }

    #[test]
    fn mercury_orbit_perihelion_aphelion_and_period() {
        let orbit = Body::mercury().orbit;
        let period = 87.969_257 * DAY;
        // NASA Mercury fact sheet: q = 0.30750 AU, Q = 0.46670 AU, 1e-4 rel.
        assert!(rel(orbit.distance_au(0.0), 0.30750) < 1e-4);
        assert!(rel(orbit.distance_au(0.5 * period), 0.46670) < 1e-4);
        assert!(rel(orbit.distance_au(3.0 * period), 0.30750) < 1e-4);
        // Kepler's laws: perihelion at t_p, aphelion half a period later.
        assert!(orbit.true_anomaly(0.0).abs() < 1e-15);
        assert!((orbit.true_anomaly(0.5 * period).abs() - PI).abs() < 1e-12);
        // The unwrapped anomaly gains exactly 2 pi per orbit.
        let t = 0.3 * period;
        let gain = orbit.true_anomaly_unwrapped(t + 2.0 * period) - orbit.true_anomaly_unwrapped(t);
        assert!((gain - 4.0 * PI).abs() < 1e-12);
        // And it is continuous through aphelion (no 2 pi jump).
        let jump = orbit.true_anomaly_unwrapped(0.5 * period + 1.0)
            - orbit.true_anomaly_unwrapped(0.5 * period - 1.0);
        assert!(jump > 0.0 && jump < 1e-5);
    }

    #[test]
    fn radial_velocity_is_the_derivative_of_distance() {
        let orbit = Body::mercury().orbit;
        let period = 87.969_257 * DAY;
        // Independent check: central difference of r(t), error O(h^2).
        for i in 0..20 {
            let t = period * (i as f64 + 0.37) / 20.0;
            let h = 10.0;
            let fd = (orbit.distance_au(t + h) - orbit.distance_au(t - h)) / (2.0 * h)
                * ASTRONOMICAL_UNIT;
            assert!((orbit.radial_velocity(t) - fd).abs() < 1e-3, "t {t}");
        }
        // Two-body motion: max dr/dt = n a e / sqrt(1 - e^2) at nu = 90 deg
        // (from r = p / (1 + e cos nu), Bate, Mueller & White ch. 1, from memory).
        let (a, e) = (0.387_098 * ASTRONOMICAL_UNIT, 0.205_63);
        let vmax = 2.0 * PI / period * a * e / (1.0 - e * e).sqrt();
        let peak = (0..20_000)
            .map(|i| orbit.radial_velocity(period * i as f64 / 20_000.0))
            .fold(0.0_f64, f64::max);
        assert!(rel(peak, vmax) < 1e-6);
        // A constant orbit has none.
        assert_eq!(Body::moon().orbit.radial_velocity(1e6), 0.0);
        assert_eq!(Body::moon().orbit.distance_au(1e6), 1.0);
    }

    #[test]
    fn a_start_true_anomaly_sets_the_time_of_perihelion() {
        for &(e, nu0) in
            &[(0.205_63, 0.0), (0.205_63, 1.7453), (0.205_63, -2.9), (0.7, 3.1), (0.0, 1.0)]
        {
            // Round trip true -> mean -> eccentric -> true (Kepler's equation).
            let m = mean_from_true(nu0, e);
            assert!((true_from_eccentric(eccentric_anomaly(m, e), e) - wrap_pi(nu0)).abs() < 1e-12);
            let orbit = HelioOrbit::Kepler {
                semi_major_axis_au: 0.387_098,
                eccentricity: e,
                period_s: 87.969_257 * DAY,
                time_of_perihelion_s: 0.0,
            }
            .starting_at(nu0)
            .unwrap();
            assert!(wrap_pi(orbit.true_anomaly(0.0) - nu0).abs() < 1e-12, "e {e} nu0 {nu0}");
            // Kepler's first law: r = a (1 - e^2) / (1 + e cos nu).
            let r = 0.387_098 * (1.0 - e * e) / (1.0 + e * nu0.cos());
            assert!(rel(orbit.distance_au(0.0), r) < 1e-12);
            // The last perihelion lies within one period before the start.
            let tp = orbit.perihelion_at_or_before(0.0).unwrap();
            assert!(tp <= 0.0 && tp > -87.969_257 * DAY);
            assert!(orbit.true_anomaly(tp).abs() < 1e-9);
        }
        assert_eq!(Body::moon().orbit.starting_at(1.0), None);
        assert_eq!(Body::moon().orbit.perihelion_at_or_before(5.0), None);
    }

    #[test]
    fn custom_body_is_a_plain_value() {
        let b = Body::custom(
            "Europa-like",
            3.2e12,
            1.56e6,
            3.55 * DAY,
            3.55 * DAY,
            HelioOrbit::Constant { distance_au: 5.2 },
        );
        assert_eq!(b.orbit.distance_au(0.0), 5.2);
        assert!(rel(b.escape_speed(), (2.0 * 3.2e12_f64 / 1.56e6).sqrt()) < 1e-15);
    }
}

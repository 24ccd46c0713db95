//! Where the body is on its orbit at the start of a run, from the `[body]`
//! keys: a custom ellipse, the starting true anomaly, the Moon's phase,
//! Mercury's resonant subsolar longitude, and the obliquity (seasons).
//!
//! Why this exists: these keys interact (a start true anomaly needs an
//! ellipse, Mercury's subsolar longitude follows from its orbit, an
//! obliquity replaces a fixed subsolar latitude), and each combination
//! that makes no sense is refused here with a message that names the key
//! and says what to write instead. The physics itself lives in
//! [`crate::body`] and [`crate::environment`]; `docs/scenario.md` lists
//! the keys and `docs/physics.md` ("Where the body is on its orbit") the
//! conventions and their sources.

use core::f64::consts::{FRAC_PI_2, PI};

use super::quantity::Kind;
use super::{ScenarioError, Validator, bounds, file};
use crate::body::{Body, HelioOrbit};
use crate::environment::SunGeometry;
use crate::transport::frames::{wrap_pi, wrap_two_pi};

/// How close (rad) `perihelion_subsolar_longitude` must be to 0 or 180 deg.
const HOT_LONGITUDE_TOLERANCE: f64 = 1e-9;

/// The subsolar longitude (rad, body-fixed east) at new moon plus a phase
/// fraction f of the synodic month: lon_ss = pi (1 - 2 f). The Moon's
/// prime meridian is the mean direction of the Earth (the selenographic
/// longitude convention of the IAU Working Group on Cartographic
/// Coordinates, e.g. Archinal et al. 2011, Celest. Mech. Dyn. Astr. 109,
/// 101; from memory), so at new moon the Sun is over the far side
/// (180 deg E) and at full moon over the near side (0 deg); the Sun's
/// subsolar point moves west, so first quarter (f = 1/4) has it at 90 deg
/// E, lighting the eastern (Mare Crisium) limb first, and last quarter at
/// 270 deg E.
pub fn lunar_phase_longitude(phase: f64) -> f64 {
    wrap_two_pi(PI * (1.0 - 2.0 * phase))
}

/// The Moon's phase (fraction of the synodic month since new moon,
/// dimensionless, [0, 1)) at body-fixed subsolar longitude `lon_ss` (rad):
/// the inverse of [`lunar_phase_longitude`].
pub fn lunar_phase_of(lon_ss: f64) -> f64 {
    let f = (0.5 - wrap_pi(lon_ss) / (2.0 * PI)).rem_euclid(1.0);
    if f >= 1.0 { 0.0 } else { f }
}

impl Validator<'_> {
    /// A custom body's elliptic orbit from `semi_major_axis`,
    /// `eccentricity` and `orbital_period`, if any of them is given (then
    /// all three must be); perihelion at t = 0 until `start_true_anomaly`
    /// moves it.
    pub(super) fn custom_orbit(
        &self,
        b: &file::BodySection,
    ) -> Result<Option<HelioOrbit>, ScenarioError> {
        let given = [
            ("semi_major_axis", b.semi_major_axis.is_some()),
            ("eccentricity", b.eccentricity.is_some()),
            ("orbital_period", b.orbital_period.is_some()),
        ];
        if given.iter().all(|(_, g)| !g) {
            return Ok(None);
        }
        if let Some((missing, _)) = given.iter().find(|(_, g)| !g) {
            return Err(self.err(
                &format!("body.{missing}"),
                "an elliptic custom orbit needs all three of semi_major_axis, eccentricity \
                 and orbital_period; add this key, or remove the other two for a constant \
                 distance (environment.heliocentric_distance)",
            ));
        }
        let a = self.helio_distance(
            "body.semi_major_axis",
            b.semi_major_axis.as_deref().unwrap_or_default(),
        )?;
        let e = b.eccentricity.unwrap_or_default();
        if !(0.0..1.0).contains(&e) {
            return Err(self.err(
                "body.eccentricity",
                format!(
                    "{} is outside the allowed range [0, 1): an ellipse has 0 <= e < 1 \
                     (Mercury's is 0.2056); for a fixed distance remove the orbit keys and \
                     set environment.heliocentric_distance",
                    bounds::shown(e)
                ),
            ));
        }
        let (q, big_q) = (a * (1.0 - e), a * (1.0 + e));
        for (what, r) in [("perihelion a (1 - e)", q), ("aphelion a (1 + e)", big_q)] {
            if !bounds::HELIO_DISTANCE_AU.contains(&r) {
                return Err(self.err(
                    "body.eccentricity",
                    format!(
                        "the {what} = {} AU lies outside the allowed heliocentric distances \
                         [{}, {}] AU; lower body.eccentricity or change body.semi_major_axis",
                        bounds::shown(r),
                        bounds::shown(*bounds::HELIO_DISTANCE_AU.start()),
                        bounds::shown(*bounds::HELIO_DISTANCE_AU.end())
                    ),
                ));
            }
        }
        let period = self.q(
            "body.orbital_period",
            b.orbital_period.as_deref().unwrap_or_default(),
            Kind::Time,
        )?;
        self.positive("body.orbital_period", period, "s")?;
        Ok(Some(HelioOrbit::Kepler {
            semi_major_axis_au: a,
            eccentricity: e,
            period_s: period,
            time_of_perihelion_s: 0.0,
        }))
    }

    /// `body.start_true_anomaly` applied to the body's orbit (after
    /// `environment.heliocentric_distance`, which makes it constant).
    pub(super) fn start_on_orbit(
        &self,
        b: &file::BodySection,
        body: &mut Body,
    ) -> Result<(), ScenarioError> {
        let Some(text) = &b.start_true_anomaly else { return Ok(()) };
        let nu0 = self.q("body.start_true_anomaly", text, Kind::Angle)?;
        match body.orbit.starting_at(nu0) {
            Some(orbit) => {
                body.orbit = orbit;
                Ok(())
            }
            None => Err(self.err(
                "body.start_true_anomaly",
                "the body is held at a constant heliocentric distance, which has no \
                 perihelion to count a true anomaly from; remove the key, or give an \
                 elliptic orbit (Mercury without environment.heliocentric_distance, or a \
                 custom body with semi_major_axis, eccentricity and orbital_period)",
            )),
        }
    }

    /// The subsolar point's start and its latitude law, from the `[body]`
    /// keys and the (final) orbit of `body`.
    pub(super) fn sun(
        &self,
        b: &file::BodySection,
        body: &Body,
    ) -> Result<SunGeometry, ScenarioError> {
        let name = b.name.to_ascii_lowercase();
        let (moon, mercury) = (name == "moon", name == "mercury");
        let kepler = matches!(body.orbit, HelioOrbit::Kepler { .. });

        // Latitude: fixed, or seasons from an obliquity.
        let seasons = match &b.obliquity {
            None => {
                for (k, v) in [
                    ("equinox_true_anomaly", &b.equinox_true_anomaly),
                    ("start_solar_longitude", &b.start_solar_longitude),
                ] {
                    if v.is_some() {
                        return Err(self.err(
                            &format!("body.{k}"),
                            "it places the equinox of a tilted spin axis; set body.obliquity \
                             as well, or remove it",
                        ));
                    }
                }
                None
            }
            Some(text) => {
                if b.subsolar_latitude.is_some() {
                    return Err(self.err(
                        "body.subsolar_latitude",
                        "with body.obliquity the subsolar latitude follows the orbit \
                         (asin(sin obliquity sin L)); give either obliquity or a fixed \
                         subsolar_latitude, not both",
                    ));
                }
                let eps = self.q("body.obliquity", text, Kind::Angle)?;
                if !(0.0..FRAC_PI_2).contains(&eps) {
                    return Err(self.err(
                        "body.obliquity",
                        format!(
                            "{} deg is outside the allowed range [0, 90) deg; a spin axis \
                             tilted by more than 90 deg is a retrograde spin, which the \
                             engine does not model",
                            bounds::shown(eps.to_degrees())
                        ),
                    ));
                }
                let l0 = if kepler {
                    if b.start_solar_longitude.is_some() {
                        return Err(self.err(
                            "body.start_solar_longitude",
                            "on an elliptic orbit the season follows the true anomaly: give \
                             body.equinox_true_anomaly (the true anomaly of the northward \
                             equinox) instead",
                        ));
                    }
                    let nu_eq = self.q_or(
                        "body.equinox_true_anomaly",
                        &b.equinox_true_anomaly,
                        "0 deg",
                        Kind::Angle,
                    )?;
                    body.orbit.true_anomaly(0.0) - nu_eq
                } else {
                    if b.equinox_true_anomaly.is_some() {
                        return Err(self.err(
                            "body.equinox_true_anomaly",
                            "at a constant heliocentric distance there is no true anomaly: \
                             give body.start_solar_longitude (the Sun's orbital longitude \
                             from the northward equinox at the start) instead",
                        ));
                    }
                    self.q_or(
                        "body.start_solar_longitude",
                        &b.start_solar_longitude,
                        "0 deg",
                        Kind::Angle,
                    )?
                };
                Some((eps, wrap_two_pi(l0)))
            }
        };
        let lat =
            self.q_or("body.subsolar_latitude", &b.subsolar_latitude, "0 deg", Kind::Angle)?;
        if lat.abs() > FRAC_PI_2 {
            return Err(self.err("body.subsolar_latitude", "must lie within [-90, 90] deg"));
        }
        let with_lon = |lon: f64| match seasons {
            None => SunGeometry::fixed(lat, lon),
            Some((eps, l0)) => SunGeometry::seasonal(eps, l0, lon),
        };

        // Longitude: the Moon's phase, Mercury's resonance, or given.
        if b.start_lunar_phase.is_some() && !moon {
            return Err(self.err(
                "body.start_lunar_phase",
                "only the Moon has a lunar phase; set body.subsolar_longitude instead",
            ));
        }
        if b.perihelion_subsolar_longitude.is_some() && !(mercury && kepler) {
            let why = if mercury {
                "at a constant heliocentric distance (environment.heliocentric_distance) there \
                 is no perihelion; set body.subsolar_longitude instead, or remove \
                 environment.heliocentric_distance"
            } else {
                "only Mercury's subsolar longitude is tied to its perihelion (the 3:2 \
                 resonance); set body.subsolar_longitude instead"
            };
            return Err(self.err("body.perihelion_subsolar_longitude", why));
        }
        if let Some(f) = b.start_lunar_phase {
            if b.subsolar_longitude.is_some() {
                return Err(self.err(
                    "body.subsolar_longitude",
                    "body.start_lunar_phase already places the subsolar point \
                     (180 deg E at new moon, 0 at full moon); give one of the two, not both",
                ));
            }
            if !(0.0..1.0).contains(&f) {
                return Err(self.err(
                    "body.start_lunar_phase",
                    format!(
                        "{} is outside the allowed range [0, 1): it is the fraction of the \
                         synodic month since new moon (0 new, 0.25 first quarter, 0.5 full, \
                         0.75 last quarter)",
                        bounds::shown(f)
                    ),
                ));
            }
            return Ok(with_lon(lunar_phase_longitude(f)));
        }
        if mercury && kepler {
            if b.subsolar_longitude.is_some() {
                return Err(self.err(
                    "body.subsolar_longitude",
                    "Mercury's subsolar longitude follows from its orbit through the 3:2 \
                     spin-orbit resonance; remove the key and choose the start with \
                     body.start_true_anomaly and which hot longitude faces the Sun at \
                     perihelion with body.perihelion_subsolar_longitude (\"0 deg\" or \
                     \"180 deg\")",
                ));
            }
            let hot = self.q_or(
                "body.perihelion_subsolar_longitude",
                &b.perihelion_subsolar_longitude,
                "0 deg",
                Kind::Angle,
            )?;
            let hot = wrap_two_pi(hot);
            let hot = if wrap_pi(hot).abs() < HOT_LONGITUDE_TOLERANCE {
                0.0
            } else if (hot - PI).abs() < HOT_LONGITUDE_TOLERANCE {
                PI
            } else {
                return Err(self.err(
                    "body.perihelion_subsolar_longitude",
                    format!(
                        "{} deg is not a hot longitude; in the 3:2 resonance the Sun stands \
                         over 0 deg or 180 deg E at every perihelion: write \"0 deg\" or \
                         \"180 deg\"",
                        bounds::shown(hot.to_degrees())
                    ),
                ));
            };
            // The last perihelion at or before the start: lon_ss(0) =
            // hot + nu(0) - Omega_sid (0 - t_p) (for a fixed latitude).
            let tp = body.orbit.perihelion_at_or_before(0.0).unwrap_or(0.0);
            return Ok(with_lon(0.0).anchored(body, tp, hot));
        }
        let lon =
            self.q_or("body.subsolar_longitude", &b.subsolar_longitude, "0 deg", Kind::Angle)?;
        Ok(with_lon(lon))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lunar_phases_place_the_subsolar_point() {
        // Selenographic convention (IAU, from memory): new moon 180 deg E,
        // first quarter 90, full 0, last quarter 270.
        for (f, deg) in [(0.0, 180.0), (0.25, 90.0), (0.5, 0.0), (0.75, 270.0)] {
            let lon = lunar_phase_longitude(f).to_degrees();
            let d = (lon - deg).rem_euclid(360.0);
            assert!(d.min(360.0 - d) < 1e-12, "f {f}: {lon}");
            assert!((lunar_phase_of(lunar_phase_longitude(f)) - f).abs() < 1e-15, "f {f}");
        }
        assert!((lunar_phase_of(0.1) - (0.5 - 0.1 / (2.0 * PI))).abs() < 1e-15);
    }
}

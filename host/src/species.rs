//! The exospheric species: atomic mass, photoionization rate, resonance
//! lines and the resonant-scattering g-factor that sets radiation pressure.
//!
//! Why this exists: the host needs a species' mass for every orbit and
//! escape decision, its photoionization rate as the default loss, and the
//! momentum that resonantly scattered sunlight delivers (radiation
//! pressure), which for sodium at Mercury is a sizeable fraction of
//! gravity. Values carry their source; those recalled rather than looked up
//! say "from memory". SI units throughout (kg, m, s^-1), except that
//! heliocentric distances are in AU.

use exobound_sdk::constants::{ATOMIC_MASS, PLANCK};

/// One resonance line used for radiation pressure and brightness.
#[derive(Clone, Debug, PartialEq)]
pub struct Line {
    /// Spectroscopic name, e.g. "D2".
    pub name: String,
    /// Vacuum wavelength, m.
    pub wavelength: f64,
    /// Absorption oscillator strength f, dimensionless.
    pub f_value: f64,
}

/// An exospheric atom species.
#[derive(Clone, Debug, PartialEq)]
pub struct Species {
    /// Element symbol or name, e.g. "Na".
    pub name: String,
    /// Atomic mass, kg.
    pub mass: f64,
    /// Photoionization rate at 1 AU for the quiet Sun, s^-1; scales as
    /// 1 / r_AU^2.
    pub photoionization_1au: f64,
    /// Resonance lines, strongest first.
    pub lines: Vec<Line>,
    /// Total g-factor (photons scattered per second per atom, summed over
    /// `lines`) at 1 AU for an atom at rest relative to the Sun,
    /// photons s^-1 atom^-1. From memory; the true value depends on the
    /// heliocentric radial velocity through the solar Fraunhofer lines.
    pub g_factor_1au: f64,
}

impl Species {
    /// Atomic sodium, with sources beside each value.
    pub fn sodium() -> Species {
        Species {
            name: "Na".to_string(),
            // IUPAC standard atomic weight (via `periodictable`): 22.98976928 u.
            mass: 22.989_769_28 * ATOMIC_MASS,
            // From memory: Huebner et al. 1992 (quiet Sun), 5.92e-6 s^-1.
            photoionization_1au: 5.92e-6,
            lines: vec![
                // NIST/VALD vacuum wavelength; f-value from VALD3.
                Line { name: "D2".to_string(), wavelength: 589.158e-9, f_value: 0.641 },
                // NIST/VALD vacuum wavelength; f-value from VALD3.
                Line { name: "D1".to_string(), wavelength: 589.756e-9, f_value: 0.320 },
            ],
            // From memory: Killen, Shemansky & Mouawad 2009 (ApJS 181, 351),
            // D2 ~0.5 + D1 ~0.3 photons s^-1 atom^-1 at 1 AU, at rest.
            g_factor_1au: 0.8,
        }
    }

    /// Atomic potassium, with sources beside each value.
    pub fn potassium() -> Species {
        Species {
            name: "K".to_string(),
            // IUPAC standard atomic weight (via `periodictable`): 39.0983 u.
            mass: 39.0983 * ATOMIC_MASS,
            // From memory, low confidence: Huebner et al. 1992 give ~2-3e-5 s^-1.
            photoionization_1au: 2.5e-5,
            lines: vec![
                // Banerjee et al. 2004 vacuum wavelength; f-value from memory.
                Line { name: "D2".to_string(), wavelength: 766.702e-9, f_value: 0.682 },
                // Banerjee et al. 2004 vacuum wavelength; f-value from memory.
                Line { name: "D1".to_string(), wavelength: 770.109e-9, f_value: 0.339 },
            ],
            // From memory, low confidence: about 1 photon s^-1 atom^-1 in
            // total at 1 AU, at rest. Replace with a tabulated value.
            g_factor_1au: 1.0,
        }
    }

    /// Radiation acceleration a = h g / (m lambda), m s^-2, from scattering
    /// `g_factor_total` photons s^-1 of wavelength `wavelength_m` (m): each
    /// absorbed photon delivers momentum h / lambda along the Sun-atom line,
    /// and re-emission is isotropic on average.
    pub fn radiation_acceleration(&self, g_factor_total: f64, wavelength_m: f64) -> f64 {
        PLANCK * g_factor_total / (self.mass * wavelength_m)
    }

    /// Radiation acceleration at heliocentric distance `r_au` (AU), m s^-2,
    /// for an atom at rest relative to the Sun: `g_factor_1au` shared among
    /// the lines in proportion to their f-values, each share scaled by
    /// 1 / r_AU^2 (the solar flux) and converted with h / (m lambda).
    /// The Doppler dependence of the g-factor is not included.
    pub fn radiation_acceleration_at(&self, r_au: f64) -> f64 {
        let f_sum: f64 = self.lines.iter().map(|l| l.f_value).sum();
        if f_sum <= 0.0 {
            return 0.0;
        }
        let at_1au: f64 = self
            .lines
            .iter()
            .map(|l| {
                self.radiation_acceleration(self.g_factor_1au * l.f_value / f_sum, l.wavelength)
            })
            .sum();
        at_1au / (r_au * r_au)
    }

    /// Photoionization rate at heliocentric distance `r_au` (AU), s^-1:
    /// rate(1 AU) / r_AU^2 (the solar EUV flux falls as the inverse square).
    pub fn photoionization_rate(&self, r_au: f64) -> f64 {
        self.photoionization_1au / (r_au * r_au)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::body::Body;

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    #[test]
    fn masses_and_lines_match_check_values() {
        let na = Species::sodium();
        let k = Species::potassium();
        // IUPAC standard atomic weights (CIAAW).
        assert!(rel(na.mass / ATOMIC_MASS, 22.98976928) < 1e-9);
        assert!(rel(k.mass / ATOMIC_MASS, 39.0983) < 1e-6);
        // Vacuum wavelengths: NIST Atomic Spectra Database (Na), Banerjee et al. 2004 (K).
        assert!(rel(na.lines[0].wavelength, 589.158e-9) < 1e-5);
        assert!(rel(na.lines[1].wavelength, 589.756e-9) < 1e-5);
        assert!(rel(k.lines[0].wavelength, 766.702e-9) < 1e-5);
        assert!(rel(k.lines[1].wavelength, 770.109e-9) < 1e-5);
        // Strongest line first, as documented.
        assert!(na.lines[0].f_value > na.lines[1].f_value);
        assert!(k.lines[0].f_value > k.lines[1].f_value);
    }

    #[test]
    fn momentum_per_photon_matches_check_values() {
        // Closed form h/(m lambda) with CODATA 2022 h and u: 2.946 cm s^-1 per
        // photon s^-1 (Na D2), 1.325 (K D1); 4 figures, so 1e-3 relative.
        let na = Species::sodium();
        let k = Species::potassium();
        assert!(rel(na.radiation_acceleration(1.0, 589.158e-9) * 100.0, 2.946) < 1e-3);
        assert!(rel(k.radiation_acceleration(1.0, 770.109e-9) * 100.0, 1.325) < 1e-3);
        // Linear in g (the law is a = h g / (m lambda)).
        assert!(
            rel(
                na.radiation_acceleration(3.0, 589.158e-9),
                3.0 * na.radiation_acceleration(1.0, 589.158e-9)
            ) < 1e-15
        );
    }

    #[test]
    fn radiation_acceleration_magnitudes() {
        let na = Species::sodium();
        let moon = Body::moon();
        let mercury = Body::mercury();
        let a_moon = na.radiation_acceleration_at(1.0);
        // h/(m lambda) g with the at-rest g of Killen, Shemansky & Mouawad 2009
        // (from memory): Na at the Moon 1.5-6 cm s^-2 (1-4 % of g0), factor 2.
        assert!(a_moon > 1.5e-2 && a_moon < 6e-2, "{a_moon}");
        assert!(a_moon / moon.surface_gravity() > 0.01 && a_moon / moon.surface_gravity() < 0.04);
        // At perihelion (0.3075 AU) and at rest the push is a few per cent of
        // g0; the Doppler shift out of the solar Fraunhofer line raises g by
        // 3-5x (Killen, Shemansky & Mouawad 2009, ApJS 181, 351, from
        // memory), and 5x the at-rest value must then lie within the factor
        // 2 of "up to ~54 % of g0" (from memory: the Mercury sodium-tail literature).
        let frac = na.radiation_acceleration_at(0.3075) / mercury.surface_gravity();
        assert!(frac < 0.54, "{frac}");
        assert!(5.0 * frac > 0.54 / 2.0 && 5.0 * frac < 0.54 * 2.0, "{frac}");
        // Inverse-square law (exact).
        assert!(rel(na.radiation_acceleration_at(0.5), 4.0 * a_moon) < 1e-15);
        // Sum over lines with f-weighted shares equals a single-line value at
        // an effective wavelength between D2 and D1.
        let lo = na.radiation_acceleration(na.g_factor_1au, 589.756e-9);
        let hi = na.radiation_acceleration(na.g_factor_1au, 589.158e-9);
        assert!(a_moon > lo && a_moon < hi);
    }

    #[test]
    fn photoionization_scales_with_inverse_square() {
        let na = Species::sodium();
        // From memory: Huebner, Keady & Lyon 1992 (Astrophys. Space Sci. 195): 5.92e-6 s^-1,
        // lifetime 1.69e5 s at 1 AU.
        assert!(rel(1.0 / na.photoionization_rate(1.0), 1.69e5) < 1e-3);
        // The inverse-square law of the solar photon flux: rate(r) = rate(1 AU) / r^2.
        assert!(rel(na.photoionization_rate(0.387098), 5.92e-6 / (0.387098 * 0.387098)) < 1e-15);
        // From memory (Huebner et al. 1992, low confidence): K ~2-3e-5 s^-1.
        let k = Species::potassium().photoionization_rate(1.0);
        assert!((2e-5..=3e-5).contains(&k));
    }
}

//! The exospheric species: atomic mass, photoionization rate, resonance
//! lines and the resonant-scattering g-factor that sets radiation pressure.
//!
//! Why this exists: the host needs a species' mass for every orbit and
//! escape decision, its photoionization rate as the default loss, and the
//! momentum that resonantly scattered sunlight delivers (radiation
//! pressure), which for sodium at Mercury is a sizeable fraction of
//! gravity. Values carry their source; those recalled rather than looked up
//! say "from memory". SI units throughout (kg, m, s^-1), except that
//! heliocentric distances are in AU. The g-factor and the radiation
//! acceleration themselves are in [`crate::radiation`].

use exobound_sdk::constants::ATOMIC_MASS;

use crate::radiation::{GFactorModel, GFactorTable, tables};

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
    /// The g-factors of `lines` against heliocentric radial velocity and
    /// distance, and the radiation acceleration they give (the built-in
    /// table unless the scenario names one).
    pub g_factors: GFactorModel,
}

impl Species {
    /// Atomic sodium, with sources beside each value.
    pub fn sodium() -> Species {
        // IUPAC standard atomic weight (via `periodictable`): 22.98976928 u.
        let mass = 22.989_769_28 * ATOMIC_MASS;
        let lines = vec![
            // NIST/VALD vacuum wavelength; f-value from VALD3.
            Line { name: "D2".to_string(), wavelength: 589.158e-9, f_value: 0.641 },
            // NIST/VALD vacuum wavelength; f-value from VALD3.
            Line { name: "D1".to_string(), wavelength: 589.756e-9, f_value: 0.320 },
        ];
        // The built-in table, with its sources (radiation/tables.rs).
        let g_factors = GFactorModel::bind(tables::sodium(), &lines, mass)
            .expect("the built-in Na table names the Na lines");
        Species {
            name: "Na".to_string(),
            mass,
            // From memory: Huebner et al. 1992 (quiet Sun), 5.92e-6 s^-1.
            photoionization_1au: 5.92e-6,
            lines,
            g_factors,
        }
    }

    /// Atomic potassium, with sources beside each value.
    pub fn potassium() -> Species {
        // IUPAC standard atomic weight (via `periodictable`): 39.0983 u.
        let mass = 39.0983 * ATOMIC_MASS;
        let lines = vec![
            // Banerjee et al. 2004 vacuum wavelength; f-value from memory.
            Line { name: "D2".to_string(), wavelength: 766.702e-9, f_value: 0.682 },
            // Banerjee et al. 2004 vacuum wavelength; f-value from memory.
            Line { name: "D1".to_string(), wavelength: 770.109e-9, f_value: 0.339 },
        ];
        // The built-in table, low confidence, with its sources (radiation/tables.rs).
        let g_factors = GFactorModel::bind(tables::potassium(), &lines, mass)
            .expect("the built-in K table names the K lines");
        Species {
            name: "K".to_string(),
            mass,
            // From memory, low confidence: Huebner et al. 1992 give ~2-3e-5 s^-1.
            photoionization_1au: 2.5e-5,
            lines,
            g_factors,
        }
    }

    /// The species named `name` (`Na`, `sodium`, `K` or `potassium`, case
    /// ignored), with its built-in g-factor table.
    pub fn by_name(name: &str) -> Option<Species> {
        match name.to_ascii_lowercase().as_str() {
            "na" | "sodium" => Some(Species::sodium()),
            "k" | "potassium" => Some(Species::potassium()),
            _ => None,
        }
    }

    /// This species with the g-factor table `table` (checked against its
    /// lines: the error names the table's origin and the column).
    pub fn with_g_factor_table(mut self, table: GFactorTable) -> Result<Species, String> {
        self.g_factors = GFactorModel::bind(table, &self.lines, self.mass)?;
        Ok(self)
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
    fn masses_and_lines_match_published_values() {
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
    fn radiation_acceleration_magnitudes() {
        let na = Species::sodium();
        let moon = Body::moon();
        // At rest at 1 AU (the Moon): h/(m lambda) g with D2 0.3-0.6 plus D1
        // 0.2-0.35 photons/s (Killen, Shemansky & Mouawad 2009, ApJS 181,
        // 351, from memory): 1.5-2.8 cm s^-2, 1-2 % of the Moon's g0.
        let a_moon = na.g_factors.acceleration(0.0, 1.0);
        assert!(a_moon > 1.5e-2 && a_moon < 2.8e-2, "{a_moon}");
        let frac = a_moon / moon.surface_gravity();
        assert!(frac > 0.009 && frac < 0.018, "{frac}");
        // The species' lines carry the table's columns in order (D2, D1).
        assert_eq!(na.g_factors.table.columns[0].line.as_deref(), Some("D2"));
        assert_eq!(na.g_factors.table.columns[1].line.as_deref(), Some("D1"));
        let k = Species::potassium();
        assert_eq!(k.g_factors.push_per_photon.len(), 2);
    }

    #[test]
    fn species_are_found_by_name_and_take_a_table() {
        assert_eq!(Species::by_name("SODIUM").unwrap().name, "Na");
        assert_eq!(Species::by_name("k").unwrap().name, "K");
        assert!(Species::by_name("Ca").is_none());
        let t = GFactorTable::parse(
            "radial_velocity_km_s,g_photons_per_s_per_atom
0,2
",
            "u.csv",
        )
        .unwrap();
        let na = Species::sodium().with_g_factor_table(t).unwrap();
        assert_eq!(na.g_factors.g_total(4e3, 2.0), 0.5);
        let bad = GFactorTable::parse(
            "radial_velocity_km_s,g_X_photons_per_s_per_atom
0,2
",
            "u.csv",
        )
        .unwrap();
        assert!(Species::sodium().with_g_factor_table(bad).unwrap_err().contains("u.csv"));
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

//! Surface temperature as a function of solar zenith angle and distance.
//!
//! Why this exists: thermal desorption, sticking and thermal re-emission
//! all depend on the local surface temperature. The law here is the
//! common empirical day-side form
//!
//!   T = T_night + (T_ss - T_night) cos^(1/4)(SZA)   (day side),
//!   T = T_night                                    (night side),
//!
//! (from memory: Butler 1997, as used for Mercury), with the subsolar
//! temperature scaled as r^(-1/2) with heliocentric distance, the scaling of
//! radiative equilibrium T_ss = [S (1 - A) / sigma]^(1/4) with S ~ r^-2.

use exobound_sdk::math;

/// The surface temperature law.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TemperatureLaw {
    /// Night-side temperature, K.
    pub night: f64,
    /// Subsolar temperature at `reference_distance`, K.
    pub subsolar: f64,
    /// Heliocentric distance at which `subsolar` applies, AU.
    pub reference_distance: f64,
}

impl TemperatureLaw {
    /// A law with the same temperature everywhere, K (for validation runs).
    pub fn uniform(t: f64) -> TemperatureLaw {
        TemperatureLaw { night: t, subsolar: t, reference_distance: 1.0 }
    }

    /// Subsolar temperature at heliocentric distance `r_au` (AU), K.
    pub fn subsolar_at(&self, r_au: f64) -> f64 {
        self.subsolar * math::sqrt(self.reference_distance / r_au)
    }

    /// Temperature, K, where the cosine of the solar zenith angle is
    /// `cos_sza`, at heliocentric distance `r_au` (AU).
    pub fn at(&self, cos_sza: f64, r_au: f64) -> f64 {
        if cos_sza <= 0.0 {
            return self.night;
        }
        let t_ss = self.subsolar_at(r_au);
        self.night + (t_ss - self.night) * math::sqrt(math::sqrt(cos_sza))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_worked_values() {
        let moon = TemperatureLaw { night: 100.0, subsolar: 390.0, reference_distance: 1.0 };
        let c = |deg: f64| deg.to_radians().cos();
        // Butler (1997), cos^(1/4) surface temperature law, from memory; Moon 390/100 K.
        assert!((moon.at(c(60.0), 1.0) - 343.9).abs() < 0.05);
        assert!((moon.at(c(80.0), 1.0) - 287.2).abs() < 0.05);
        // Mercury at perihelion 700/100 K: 604.5 K and 487.3 K.
        let mercury = TemperatureLaw { night: 100.0, subsolar: 700.0, reference_distance: 0.3075 };
        assert!((mercury.at(c(60.0), 0.3075) - 604.5).abs() < 0.05);
        assert!((mercury.at(c(80.0), 0.3075) - 487.3).abs() < 0.05);
        assert_eq!(mercury.at(-0.2, 0.3075), 100.0);
        // r^-1/2 scaling: at aphelion 0.4667 AU, T_ss = 700 sqrt(0.3075/0.4667) (radiative equilibrium).
        assert!((mercury.subsolar_at(0.4667) - 700.0 * (0.3075f64 / 0.4667).sqrt()).abs() < 1e-9);
    }
}

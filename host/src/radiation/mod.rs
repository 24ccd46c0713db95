//! Radiation pressure and the g-factor: one model, used by the engine's
//! flights and by `observe`'s brightness.
//!
//! Why this exists: an atom scatters g_l photons per second in each of its
//! resonance lines l, and each absorbed photon delivers the momentum
//! h / lambda_l away from the Sun (re-emission is isotropic on average).
//! g_l depends on where the Doppler-shifted line falls in the solar
//! Fraunhofer line, i.e. on the atom's heliocentric radial velocity v_r, and
//! on the solar flux, 1 / r_AU^2:
//!
//!   g_l(v_r, r) = g_l,1AU(v_r) / r_AU^2,
//!   a_rad(v_r, r) = sum_l (h / (m lambda_l)) g_l(v_r, r),
//!
//! directed away from the Sun, and zero in the body's shadow. The
//! brightness of a column is set by sum_l g_l. The engine and `observe`
//! both ask [`GFactorModel`], so they agree on g for the same v_r and r.
//! v_r is in m s^-1, positive away from the Sun; for an atom of the
//! exosphere it is the body's own heliocentric radial velocity plus the
//! atom's velocity component along the Sun-to-body direction.
//!
//! The integrator evaluates the push at every stage of every step of every
//! particle, so the engine does not interpolate the table there: once per
//! engine step it fills an [`AccelerationGrid`], the summed acceleration on
//! a uniform velocity grid at that step's heliocentric distance, which
//! answers in O(1) without allocating.

pub mod file;
pub mod tables;

pub use file::GFactorTable;

use exobound_sdk::constants::PLANCK;

use crate::species::Line;

/// Spacing of the engine's velocity grid, m s^-1 (0.1 km s^-1: the
/// built-in tables' nodes fall on it, so the grid reproduces them exactly).
pub const GRID_SPACING: f64 = 100.0;

/// Most nodes of the engine's velocity grid, dimensionless: a wider table
/// gets a coarser spacing.
pub const GRID_MAX_NODES: usize = 8001;

/// Momentum delivered per unit mass by scattering one photon per second of
/// wavelength `wavelength` (m) by an atom of mass `mass` (kg): h / (m
/// lambda), m s^-2 per (photon s^-1).
pub fn push_per_photon(mass: f64, wavelength: f64) -> f64 {
    PLANCK / (mass * wavelength)
}

/// A g-factor table bound to a species' lines: it gives g and the
/// radiation acceleration for any heliocentric radial velocity and
/// distance.
#[derive(Clone, Debug, PartialEq)]
pub struct GFactorModel {
    /// The table, as read or built in (g at 1 AU).
    pub table: GFactorTable,
    /// For each column of the table: the momentum per scattered photon per
    /// unit mass, m s^-2 per (photon s^-1). A line's own h / (m lambda); for
    /// a single column holding the total over the lines, the mean of the
    /// lines' values weighted by their f-values.
    pub push_per_photon: Vec<f64>,
}

impl GFactorModel {
    /// Bind `table` to a species of mass `mass` (kg) with resonance lines
    /// `lines`. A table with one column per line must name each of the
    /// species' lines exactly once (by name, case ignored); a single total
    /// column is shared among the lines in proportion to their f-values.
    pub fn bind(table: GFactorTable, lines: &[Line], mass: f64) -> Result<GFactorModel, String> {
        let mut push = Vec::with_capacity(table.columns.len());
        let named: Vec<&str> = lines.iter().map(|l| l.name.as_str()).collect();
        for (k, c) in table.columns.iter().enumerate() {
            match &c.line {
                None => {
                    let f_sum: f64 = lines.iter().map(|l| l.f_value).sum();
                    if lines.is_empty() || !(f_sum > 0.0) {
                        return Err(format!(
                            "{}: the species has no resonance line to carry the g-factor",
                            table.origin
                        ));
                    }
                    push.push(
                        lines
                            .iter()
                            .map(|l| l.f_value * push_per_photon(mass, l.wavelength))
                            .sum::<f64>()
                            / f_sum,
                    );
                }
                Some(name) => {
                    let Some(l) = lines.iter().find(|l| l.name.eq_ignore_ascii_case(name)) else {
                        return Err(format!(
                            "{}, column {} (`{}`): the species has no line `{name}`; its lines \
                             are {}",
                            table.origin,
                            k + 2,
                            file::line_column_name(name),
                            named.join(", ")
                        ));
                    };
                    push.push(push_per_photon(mass, l.wavelength));
                }
            }
        }
        if table.columns.iter().any(|c| c.line.is_some()) {
            for l in lines {
                let n = table
                    .columns
                    .iter()
                    .filter(|c| c.line.as_deref().is_some_and(|x| x.eq_ignore_ascii_case(&l.name)))
                    .count();
                if n != 1 {
                    return Err(format!(
                        "{}, line 1 (the header): a per-line table needs one column `{}` for \
                         each of the species' lines ({}); found {n} for `{}`",
                        table.origin,
                        file::line_column_name(&l.name),
                        named.join(", "),
                        l.name
                    ));
                }
            }
        }
        Ok(GFactorModel { table, push_per_photon: push })
    }

    /// Whether the table covers the heliocentric radial velocity `v_r`
    /// (m s^-1); a table of non-negative velocities covers |v_r|.
    pub fn covers(&self, v_r: f64) -> bool {
        let v = self.table.lookup_velocity(v_r / 1e3);
        let vs = &self.table.velocity_km_s;
        v >= vs[0] && v <= vs[vs.len() - 1]
    }

    /// g of column `k` at radial velocity `v_r` (m s^-1) and distance
    /// `r_au` (AU), photons s^-1 atom^-1: linear interpolation in the table
    /// (the end value outside it), times 1 / r_AU^2.
    pub fn g_column(&self, k: usize, v_r: f64, r_au: f64) -> f64 {
        self.table.g_1au(k, v_r / 1e3) / (r_au * r_au)
    }

    /// Total g over the lines at radial velocity `v_r` (m s^-1) and
    /// distance `r_au` (AU), photons s^-1 atom^-1 (what sets the
    /// brightness). Outside the table: the end values.
    pub fn g_total(&self, v_r: f64, r_au: f64) -> f64 {
        (0..self.table.columns.len()).map(|k| self.g_column(k, v_r, r_au)).sum()
    }

    /// Radiation acceleration sum_l (h / (m lambda_l)) g_l, m s^-2, at
    /// radial velocity `v_r` (m s^-1) and distance `r_au` (AU). Outside the
    /// table: the end values.
    pub fn acceleration(&self, v_r: f64, r_au: f64) -> f64 {
        self.push_per_photon.iter().enumerate().map(|(k, p)| p * self.g_column(k, v_r, r_au)).sum()
    }

    /// The acceleration at distance `r_au` (AU) on a uniform velocity grid
    /// spanning the table ([-v_max, v_max] for a table of non-negative
    /// velocities), spacing [`GRID_SPACING`] (coarser if the table is wider
    /// than [`GRID_MAX_NODES`] nodes allow). Each node holds
    /// [`GFactorModel::acceleration`] exactly.
    pub fn acceleration_grid(&self, r_au: f64) -> AccelerationGrid {
        let vs = &self.table.velocity_km_s;
        let (hi, lo) = (vs[vs.len() - 1] * 1e3, vs[0] * 1e3);
        let lo = if self.table.symmetric() { -hi } else { lo };
        let span = hi - lo;
        if !(span > 0.0) {
            return AccelerationGrid::constant(self.acceleration(lo, r_au));
        }
        let mut intervals = (span / GRID_SPACING).ceil() as usize;
        intervals = intervals.clamp(1, GRID_MAX_NODES - 1);
        let step = span / intervals as f64;
        let values =
            (0..=intervals).map(|j| self.acceleration(lo + j as f64 * step, r_au)).collect();
        AccelerationGrid { first: lo, inverse_step: 1.0 / step, values }
    }
}

/// The radiation acceleration on a uniform grid of heliocentric radial
/// velocity at one heliocentric distance, filled once per engine step.
#[derive(Clone, Debug, PartialEq)]
pub struct AccelerationGrid {
    /// Velocity of the first node, m s^-1.
    first: f64,
    /// One over the node spacing, s m^-1.
    inverse_step: f64,
    /// Acceleration at each node, m s^-2.
    values: Vec<f64>,
}

impl AccelerationGrid {
    /// The same acceleration `a` (m s^-2) at every velocity.
    pub fn constant(a: f64) -> AccelerationGrid {
        AccelerationGrid { first: 0.0, inverse_step: 0.0, values: vec![a] }
    }

    /// Acceleration at radial velocity `v_r` (m s^-1), m s^-2: linear
    /// interpolation between the two nearest nodes; beyond the grid (and
    /// for a NaN velocity) the end value. O(1), no allocation.
    #[inline]
    pub fn at(&self, v_r: f64) -> f64 {
        let n = self.values.len();
        let x = (v_r - self.first) * self.inverse_step;
        if !(x > 0.0) || n == 1 {
            return self.values[0];
        }
        let last = (n - 1) as f64;
        if x >= last {
            return self.values[n - 1];
        }
        let j = x as usize;
        let f = x - j as f64;
        let (a0, a1) = (self.values[j], self.values[j + 1]);
        a0 + f * (a1 - a0)
    }

    /// The largest acceleration on the grid, m s^-2.
    pub fn max(&self) -> f64 {
        self.values.iter().copied().fold(0.0, f64::max)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::body::Body;
    use crate::species::Species;

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    #[test]
    fn momentum_per_photon_matches_the_closed_form() {
        // h/(m lambda) with CODATA 2018 h and u (tests/python/gfactor_reference_values.py):
        // 2.94605 cm s^-2 per photon s^-1 for Na D2, 1.32525 for K D1.
        let na = Species::sodium();
        let k = Species::potassium();
        assert!(rel(push_per_photon(na.mass, 589.158e-9) * 100.0, 2.94605) < 2e-5);
        assert!(rel(push_per_photon(k.mass, 770.109e-9) * 100.0, 1.32525) < 2e-5);
        // The model's per-column values are the lines' own (Na: D2, D1).
        assert_eq!(na.g_factors.push_per_photon[0], push_per_photon(na.mass, 589.158e-9));
        assert_eq!(na.g_factors.push_per_photon[1], push_per_photon(na.mass, 589.756e-9));
    }

    #[test]
    fn sodium_acceleration_at_mercury_matches_the_table() {
        // Reference values from tests/python/gfactor_reference_values.py,
        // which builds the table: g = continuum g (Mitchell & Zemansky 1934
        // cross section, Neckel & Labs 1984 solar flux, from memory) times
        // the solar Na D residual intensity (from memory); the test checks
        // that the Rust model reproduces the script's law sum_l h g_l /
        // (m lambda_l r^2) and the table, to the script's printed digits.
        let na = Species::sodium();
        let m = &na.g_factors;
        let cases = [
            (0.3075, 0.0, 0.25259),
            (0.3075, 10e3, 2.41684),
            (0.3075, -10e3, 2.41684),
            (0.4667, 0.0, 0.10966),
            (0.4667, 10e3, 1.04921),
            (0.4667, -10e3, 1.04921),
        ];
        for (r, v, want) in cases {
            let a = m.acceleration(v, r);
            assert!(rel(a, want) < 5e-5, "r {r} AU, v_r {v} m/s: {a} vs {want}");
        }
        // The inverse-square law of the solar flux (exact).
        assert!(rel(m.acceleration(3e3, 0.5), 4.0 * m.acceleration(3e3, 1.0)) < 1e-15);
    }

    #[test]
    fn mercury_peak_push_is_about_half_of_surface_gravity() {
        // Scan Mercury's orbit for an atom at rest relative to Mercury:
        // v_r = Mercury's heliocentric radial velocity, r its distance.
        let mercury = Body::mercury();
        let na = Species::sodium();
        let g0 = mercury.surface_gravity();
        let period = match mercury.orbit {
            crate::body::HelioOrbit::Kepler { period_s, .. } => period_s,
            _ => unreachable!("Mercury has a Kepler orbit"),
        };
        let (mut best, mut best_nu, mut best_r, mut best_v) = (0.0, 0.0, 0.0, 0.0);
        let mut lowest = f64::INFINITY;
        let mut lowest_v = 0.0;
        for k in 0..2000 {
            let t = period * k as f64 / 2000.0;
            let r = mercury.orbit.distance_au(t);
            let v = mercury.orbit.radial_velocity(t);
            let ratio = na.g_factors.acceleration(v, r) / g0;
            if ratio > best {
                (best, best_nu, best_r, best_v) =
                    (ratio, mercury.orbit.true_anomaly(t).to_degrees(), r, v);
            }
            if ratio < lowest {
                (lowest, lowest_v) = (ratio, v);
            }
        }
        // From memory: the Mercury sodium-tail literature (Smyth & Marconi
        // 1995, ApJ 441, 839; Potter, Killen & Morgan 2002, Meteoritics &
        // Planet. Sci. 37, 1165) gives up to about 54 % of g0: of order half.
        assert!((0.3..=0.7).contains(&best), "max a/g0 {best}");
        // The peak falls where Mercury's radial speed is near its extreme
        // (about 10 km/s, true anomaly 60-90 or 270-300 deg, r 0.33-0.37 AU;
        // Kepler's laws with e = 0.2056).
        assert!(best_v.abs() > 8.5e3, "{best_v}");
        assert!((0.33..=0.37).contains(&best_r), "{best_r}");
        let nu = best_nu.rem_euclid(360.0);
        assert!((60.0..=90.0).contains(&nu) || (270.0..=300.0).contains(&nu), "{nu}");
        // The minimum is where v_r = 0 (perihelion or aphelion): the
        // Fraunhofer core leaves ~5 % of the continuum (from memory).
        assert!(lowest_v.abs() < 0.5e3, "{lowest_v}");
        assert!(lowest < 0.1 * best, "{lowest} vs {best}");
    }

    #[test]
    fn the_grid_reproduces_the_model() {
        let na = Species::sodium();
        let m = &na.g_factors;
        let r = 0.35;
        let grid = m.acceleration_grid(r);
        // The built-in table's nodes lie on the 0.1 km/s grid, so the grid's
        // linear interpolation is the table's (definition): equal to
        // rounding at any velocity.
        for k in -700..=700 {
            let v = k as f64 * 97.3;
            let (a, b) = (grid.at(v), m.acceleration(v, r));
            assert!((a - b).abs() <= 1e-12 * b, "{v}: {a} vs {b}");
        }
        // Beyond the table: the end value (stated behaviour).
        let end = m.acceleration(60e3, r);
        assert_eq!(grid.at(1e6), end);
        assert_eq!(grid.at(-1e6), end);
        assert_eq!(grid.at(f64::NAN), grid.at(-1e9));
        assert!(rel(grid.max(), end) < 1e-12);
        // A constant grid is constant.
        let c = AccelerationGrid::constant(0.25);
        assert_eq!((c.at(-5e3), c.at(0.0), c.at(7e4)), (0.25, 0.25, 0.25));
    }

    #[test]
    fn a_total_column_uses_the_f_weighted_mean_momentum() {
        let na = Species::sodium();
        let t = GFactorTable::parse(
            "radial_velocity_km_s,g_photons_per_s_per_atom\n0,1\n10,3\n",
            "t.csv",
        )
        .unwrap();
        let m = GFactorModel::bind(t, &na.lines, na.mass).unwrap();
        let (d2, d1) = (&na.lines[0], &na.lines[1]);
        let want = (d2.f_value * push_per_photon(na.mass, d2.wavelength)
            + d1.f_value * push_per_photon(na.mass, d1.wavelength))
            / (d2.f_value + d1.f_value);
        assert!(rel(m.push_per_photon[0], want) < 1e-15);
        // Between the lines' own values.
        assert!(m.push_per_photon[0] < push_per_photon(na.mass, d2.wavelength));
        assert!(m.push_per_photon[0] > push_per_photon(na.mass, d1.wavelength));
        // g and a at 5 km/s, 0.5 AU: 2 / 0.25 = 8 photons/s (linear interpolation).
        assert!(rel(m.g_total(5e3, 0.5), 8.0) < 1e-15);
        assert!(rel(m.acceleration(5e3, 0.5), 8.0 * want) < 1e-15);
    }

    #[test]
    fn a_per_line_table_must_name_the_species_lines() {
        let na = Species::sodium();
        let ok = GFactorTable::parse(
            "radial_velocity_km_s,g_D1_photons_per_s_per_atom,g_D2_photons_per_s_per_atom\n\
             0,0.25,0.5\n10,2.5,5\n",
            "t.csv",
        )
        .unwrap();
        let m = GFactorModel::bind(ok, &na.lines, na.mass).unwrap();
        // Columns in any order: D1 first here.
        assert_eq!(m.push_per_photon[0], push_per_photon(na.mass, na.lines[1].wavelength));
        assert!(rel(m.g_total(0.0, 1.0), 0.75) < 1e-15);
        let only_d2 = GFactorTable::parse(
            "radial_velocity_km_s,g_D2_photons_per_s_per_atom\n0,0.5\n",
            "t.csv",
        )
        .unwrap();
        let e = GFactorModel::bind(only_d2, &na.lines, na.mass).unwrap_err();
        assert!(e.contains("t.csv") && e.contains("g_D1_photons_per_s_per_atom"), "{e}");
        let wrong = GFactorTable::parse(
            "radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_H_photons_per_s_per_atom\n0,1,1\n",
            "t.csv",
        )
        .unwrap();
        let e = GFactorModel::bind(wrong, &na.lines, na.mass).unwrap_err();
        assert!(e.contains("t.csv") && e.contains("column 3") && e.contains("`H`"), "{e}");
    }
}

//! The run-averaged density field n(altitude, local time, latitude) as a
//! function of position, for lines of sight.
//!
//! Why this exists: an instrument integrates density along its line of
//! sight, so the binned field of a finished run must be looked up at
//! arbitrary points of the solar-fixed frame. The field is piecewise
//! constant: each bin holds the mean density of its volume, and zero lies
//! outside the altitude range. Frame: x towards the subsolar meridian
//! (local time 12) on the equator, z along the spin axis (north), y = z x x
//! towards local time 18 (dusk); local time = 12 + atan2(y, x) 12/pi.

use std::f64::consts::{FRAC_PI_2, PI};
use std::path::Path;

use exobound_products::Dataset;

use crate::vec3::{self, Vec3};

/// A binned density field above a sphere.
#[derive(Clone, Debug, PartialEq)]
pub struct DensityField {
    /// Sphere radius the altitudes refer to, m.
    pub radius: f64,
    /// Altitude bin edges, m, increasing.
    pub alt_edges: Vec<f64>,
    /// Local-time bins over 24 h, dimensionless count.
    pub n_lt: usize,
    /// Latitude bins over [-90, 90] deg, dimensionless count.
    pub n_lat: usize,
    /// Density, atoms cm^-3, index (alt * n_lt + lt) * n_lat + lat.
    pub density_cm3: Vec<f64>,
}

impl DensityField {
    /// A field; `None` if the sizes do not agree or the edges do not increase.
    pub fn new(
        radius: f64,
        alt_edges: Vec<f64>,
        n_lt: usize,
        n_lat: usize,
        density_cm3: Vec<f64>,
    ) -> Option<DensityField> {
        let ok = radius > 0.0
            && alt_edges.len() >= 2
            && alt_edges[0] >= 0.0
            && alt_edges.windows(2).all(|w| w[1] > w[0])
            && n_lt > 0
            && n_lat > 0
            && density_cm3.len() == (alt_edges.len() - 1) * n_lt * n_lat;
        ok.then_some(DensityField { radius, alt_edges, n_lt, n_lat, density_cm3 })
    }

    /// The field of a run's `exosphere.nc`, read by [`exobound_products::read_netcdf`];
    /// `file` names it in errors.
    pub fn from_dataset(ds: &Dataset, file: &Path) -> Result<DensityField, String> {
        let name = file.display();
        let var = |v: &str| {
            ds.variable(v).ok_or_else(|| {
                format!(
                    "`{name}` has no variable `{v}`; is it the exosphere.nc of an exobound run?"
                )
            })
        };
        let units = |v: &exobound_products::Variable| {
            v.attribute("units").and_then(|a| a.as_text()).unwrap_or("").to_string()
        };
        let density = var("density")?;
        let dims = crate::output::netcdf::ATMOSPHERE_DIMS;
        if density.dimensions != dims {
            return Err(format!(
                "`{name}`: density has dimensions {:?}, expected {dims:?}; files written before \
                 the CF dimension order must be remade: rerun the scenario",
                density.dimensions
            ));
        }
        if units(density) != "cm-3" {
            return Err(format!("`{name}`: density is in `{}`, expected `cm-3`", units(density)));
        }
        // The bounds carry no units of their own (CF 1.8 section 7.1): the altitude's apply.
        let altitude = var("altitude")?;
        if units(altitude) != "km" {
            return Err(format!("`{name}`: altitude is in `{}`, expected `km`", units(altitude)));
        }
        let bounds = var("altitude_bounds")?;
        let n_alt = ds.dimension_len("altitude").unwrap_or(0);
        let n_lt = ds.dimension_len("local_time").unwrap_or(0);
        let n_lat = ds.dimension_len("latitude").unwrap_or(0);
        if bounds.data.len() != 2 * n_alt || n_alt == 0 {
            return Err(format!("`{name}`: altitude_bounds does not match the altitude axis"));
        }
        if density.data.len() != n_alt * n_lt * n_lat {
            return Err(format!("`{name}`: density does not match its dimensions"));
        }
        let mut edges: Vec<f64> = bounds.data.chunks(2).map(|b| b[0] * 1e3).collect();
        edges.push(bounds.data[2 * n_alt - 1] * 1e3);
        // The file's (local_time, altitude, latitude) to this field's (altitude, local_time,
        // latitude).
        let data = exobound_products::swap_outer_axes(&density.data, n_lt, n_alt, n_lat);
        let radius_km =
            ds.attribute("body_radius_km").and_then(|a| a.as_number()).ok_or_else(|| {
                format!(
                    "`{name}` has no global attribute `body_radius_km`; it was written by an \
                     older exobound, so rerun the scenario"
                )
            })?;
        DensityField::new(radius_km * 1e3, edges, n_lt, n_lat, data)
            .ok_or_else(|| format!("`{name}`: the density grid is inconsistent"))
    }

    /// Atoms in the whole field, atoms: the sum of density times each
    /// bin's exact volume, (r2^3 - r1^3)/3 dlt (sin lat2 - sin lat1).
    pub fn content_atoms(&self) -> f64 {
        let dlt = 2.0 * PI / self.n_lt as f64;
        let mut total = 0.0;
        for k in 0..self.alt_edges.len() - 1 {
            let (r1, r2) = (self.radius + self.alt_edges[k], self.radius + self.alt_edges[k + 1]);
            let shell_cm3 = (r2.powi(3) - r1.powi(3)) / 3.0 * 1.0e6;
            for i in 0..self.n_lt {
                for j in 0..self.n_lat {
                    let lat = |j: usize| -FRAC_PI_2 + PI * j as f64 / self.n_lat as f64;
                    let band = lat(j + 1).sin() - lat(j).sin();
                    let n = self.density_cm3[(k * self.n_lt + i) * self.n_lat + j];
                    total += n * shell_cm3 * dlt * band;
                }
            }
        }
        total
    }

    /// Outer radius of the field, m.
    pub fn top_radius(&self) -> f64 {
        self.radius + self.alt_edges[self.alt_edges.len() - 1]
    }

    /// Density at solar-fixed position `p` (m), atoms cm^-3; zero outside
    /// the altitude range (and inside the body).
    pub fn at(&self, p: Vec3) -> f64 {
        let r = vec3::norm(p);
        let h = r - self.radius;
        let (lo, hi) = (self.alt_edges[0], self.alt_edges[self.alt_edges.len() - 1]);
        if !(h >= lo && h < hi) {
            return 0.0;
        }
        let k = self.alt_edges.partition_point(|&e| e <= h) - 1;
        let lt = local_time_of(p);
        let i = ((lt / 24.0 * self.n_lt as f64) as usize).min(self.n_lt - 1);
        let lat = (p[2] / r).clamp(-1.0, 1.0).asin();
        let j = (((lat + FRAC_PI_2) / PI * self.n_lat as f64) as usize).min(self.n_lat - 1);
        self.density_cm3[(k * self.n_lt + i) * self.n_lat + j]
    }

    /// Vertical column above (local time `lt` h, latitude `lat` rad), atoms
    /// cm^-2: the sum of density times bin height.
    pub fn vertical_column(&self, lt: f64, lat: f64) -> f64 {
        self.vertical_column_below(lt, lat, f64::INFINITY)
    }

    /// Vertical column between the surface and altitude `top` (m) above
    /// (local time `lt` h, latitude `lat` rad), atoms cm^-2: what a
    /// nadir-looking instrument at `top` sees. The density is constant
    /// within a bin, so a bin cut by `top` counts in proportion.
    pub fn vertical_column_below(&self, lt: f64, lat: f64, top: f64) -> f64 {
        let i = ((lt.rem_euclid(24.0) / 24.0 * self.n_lt as f64) as usize).min(self.n_lt - 1);
        let j = (((lat + FRAC_PI_2) / PI * self.n_lat as f64) as usize).min(self.n_lat - 1);
        (0..self.alt_edges.len() - 1)
            .map(|k| {
                let hi = self.alt_edges[k + 1].min(top);
                let dh_cm = (hi - self.alt_edges[k]).max(0.0) * 100.0;
                self.density_cm3[(k * self.n_lt + i) * self.n_lat + j] * dh_cm
            })
            .sum()
    }
}

/// Local time of a solar-fixed position, h in [0, 24).
pub fn local_time_of(p: Vec3) -> f64 {
    let lt = 12.0 + p[1].atan2(p[0]) * 12.0 / PI;
    if lt >= 24.0 { lt - 24.0 } else { lt.max(0.0) }
}

/// The solar-fixed position at altitude `alt` (m) above a sphere of radius
/// `radius` (m), local time `lt` (h) and latitude `lat` (rad).
pub fn position(radius: f64, alt: f64, lt: f64, lat: f64) -> Vec3 {
    let az = (lt - 12.0) * PI / 12.0;
    let r = radius + alt;
    [r * lat.cos() * az.cos(), r * lat.cos() * az.sin(), r * lat.sin()]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn positions_and_local_times_agree() {
        // Local time 12 faces the Sun (+x), 18 is dusk (+y), 06 dawn (-y).
        let r = 1.0e6;
        for (lt, lat) in [(12.0, 0.0), (18.0, 0.3), (6.0, -0.5), (0.5, 1.2), (23.5, 0.0)] {
            let p = position(r, 100.0, lt, lat);
            assert!((local_time_of(p) - lt).abs() < 1e-12, "{lt}");
        }
        assert!(position(r, 0.0, 18.0, 0.0)[1] > 0.0);
    }

    #[test]
    fn lookup_finds_the_bin() {
        let mut d = vec![0.0; 2 * 4 * 3];
        // Altitude bin 1, local time bin 2 (12-18 h), latitude bin 1 (equator).
        d[(4 + 2) * 3 + 1] = 7.0;
        let f = DensityField::new(1.0e6, vec![0.0, 1.0e4, 2.0e4], 4, 3, d).unwrap();
        assert_eq!(f.at(position(1.0e6, 1.5e4, 15.0, 0.1)), 7.0);
        assert_eq!(f.at(position(1.0e6, 0.5e4, 15.0, 0.1)), 0.0);
        assert_eq!(f.at(position(1.0e6, 2.5e4, 15.0, 0.1)), 0.0);
        // 7 cm^-3 over 10 km = 1e6 cm gives 7e6 cm^-2.
        assert!((f.vertical_column(15.0, 0.1) - 7.0e6).abs() < 1e-6);
    }
}

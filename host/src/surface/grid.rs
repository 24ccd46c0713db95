//! The latitude-longitude grid of surface cells, with exact areas.
//!
//! Why this exists: sources are given per unit area and the reservoir is
//! kept per cell, so cell areas must be exact: a cell between latitudes
//! phi1 and phi2 spanning dlon in longitude has area
//! R^2 dlon (sin phi2 - sin phi1) (the zone area of a sphere, Archimedes'
//! hat-box theorem). Cells are equal in latitude and longitude steps;
//! cell index = i_lat * n_lon + i_lon, with i_lat from the south pole and
//! i_lon from east longitude 0.

use std::f64::consts::{FRAC_PI_2, PI, TAU};

use exobound_sdk::{constants::CM2_PER_M2, math};

/// A regular latitude-longitude grid on a sphere of radius `radius` (m).
#[derive(Clone, Debug, PartialEq)]
pub struct Grid {
    n_lat: usize,
    n_lon: usize,
    radius: f64,
    sin_edges: Vec<f64>,
}

impl Grid {
    /// A grid of `n_lat` x `n_lon` cells on a sphere of radius `radius` (m);
    /// `None` if either count is zero or the radius is not positive.
    pub fn new(n_lat: usize, n_lon: usize, radius: f64) -> Option<Grid> {
        if n_lat == 0 || n_lon == 0 || !(radius > 0.0) {
            return None;
        }
        let sin_edges =
            (0..=n_lat).map(|i| math::sin(-FRAC_PI_2 + PI * i as f64 / n_lat as f64)).collect();
        Some(Grid { n_lat, n_lon, radius, sin_edges })
    }

    /// Number of cells.
    pub fn len(&self) -> usize {
        self.n_lat * self.n_lon
    }

    /// Whether the grid has no cells (never true for a constructed grid).
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// Cells in latitude.
    pub fn n_lat(&self) -> usize {
        self.n_lat
    }

    /// Cells in longitude.
    pub fn n_lon(&self) -> usize {
        self.n_lon
    }

    /// Sphere radius, m.
    pub fn radius(&self) -> f64 {
        self.radius
    }

    /// Latitude step, rad.
    pub fn dlat(&self) -> f64 {
        PI / self.n_lat as f64
    }

    /// Longitude step, rad.
    pub fn dlon(&self) -> f64 {
        TAU / self.n_lon as f64
    }

    /// Latitude and east-longitude indices of `cell`.
    pub fn indices(&self, cell: usize) -> (usize, usize) {
        (cell / self.n_lon, cell % self.n_lon)
    }

    /// The cell containing latitude `lat` (rad, [-pi/2, pi/2]) and east
    /// longitude `lon` (rad, any value; wrapped).
    pub fn cell_of(&self, lat: f64, lon: f64) -> usize {
        let i = (((lat + FRAC_PI_2) / self.dlat()) as isize).clamp(0, self.n_lat as isize - 1);
        let l = lon.rem_euclid(TAU);
        let j = ((l / self.dlon()) as isize).clamp(0, self.n_lon as isize - 1);
        i as usize * self.n_lon + j as usize
    }

    /// Latitude and east longitude of the centre of `cell`, rad.
    pub fn centre(&self, cell: usize) -> (f64, f64) {
        let (i, j) = self.indices(cell);
        (-FRAC_PI_2 + (i as f64 + 0.5) * self.dlat(), (j as f64 + 0.5) * self.dlon())
    }

    /// Southern edge of latitude row `i` (`i = n_lat` gives the north pole), degrees north,
    /// from whole degrees (-90 + 180 i / n_lat) so that products show exact decimals.
    pub fn latitude_edge_deg(&self, i: usize) -> f64 {
        -90.0 + 180.0 * i as f64 / self.n_lat as f64
    }

    /// Western edge of longitude column `j` (`j = n_lon` gives 360), degrees east.
    pub fn longitude_edge_deg(&self, j: usize) -> f64 {
        360.0 * j as f64 / self.n_lon as f64
    }

    /// Centre latitude of row `i`, degrees north: the mean of its degree edges (5, 15, ...
    /// for 10-degree rows), not a conversion from radians, which would give 4.999999999999995.
    pub fn latitude_centre_deg(&self, i: usize) -> f64 {
        0.5 * (self.latitude_edge_deg(i) + self.latitude_edge_deg(i + 1))
    }

    /// Centre east longitude of column `j`, degrees east, the mean of its degree edges.
    pub fn longitude_centre_deg(&self, j: usize) -> f64 {
        0.5 * (self.longitude_edge_deg(j) + self.longitude_edge_deg(j + 1))
    }

    /// Exact area of `cell`, m^2: R^2 dlon (sin phi2 - sin phi1).
    pub fn area_m2(&self, cell: usize) -> f64 {
        let (i, _) = self.indices(cell);
        self.radius * self.radius * self.dlon() * (self.sin_edges[i + 1] - self.sin_edges[i])
    }

    /// Exact area of `cell`, cm^2.
    pub fn area_cm2(&self, cell: usize) -> f64 {
        self.area_m2(cell) * CM2_PER_M2
    }

    /// A point uniformly distributed over the area of `cell`, from two
    /// uniform deviates in (0, 1): sin(lat) is uniform between the edges.
    pub fn sample(&self, cell: usize, u1: f64, u2: f64) -> (f64, f64) {
        let (i, j) = self.indices(cell);
        let s = self.sin_edges[i] + u1 * (self.sin_edges[i + 1] - self.sin_edges[i]);
        (math::asin(s.clamp(-1.0, 1.0)), (j as f64 + u2) * self.dlon())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn degree_centres_are_exact_decimals() {
        // 18 x 36 cells of 10 degrees: centres -85, ..., 5, ..., 85 and 5, ..., 355 exactly,
        // which the radian centres converted to degrees are not (4.999999999999995).
        let g = Grid::new(18, 36, 1.0).unwrap();
        assert_eq!(g.latitude_centre_deg(9), 5.0);
        assert_eq!(g.latitude_centre_deg(0), -85.0);
        assert_eq!(g.longitude_centre_deg(29), 295.0);
        assert_eq!((g.latitude_edge_deg(0), g.latitude_edge_deg(18)), (-90.0, 90.0));
        assert_eq!(g.longitude_edge_deg(36), 360.0);
        for i in 0..18 {
            let (lat, _) = g.centre(i * 36);
            assert!((g.latitude_centre_deg(i) - lat.to_degrees()).abs() < 1e-12);
        }
    }

    #[test]
    fn areas_sum_to_the_sphere() {
        // Surface of a sphere 4 pi R^2 (textbook); Moon radius 1737.4 km (JPL planetary and satellite physical parameters, DE440).
        let g = Grid::new(36, 72, 1.7374e6).unwrap();
        let total: f64 = (0..g.len()).map(|c| g.area_m2(c)).sum();
        let sphere = 4.0 * PI * 1.7374e6f64.powi(2);
        assert!((total / sphere - 1.0).abs() < 1e-12);
        // A polar cap cell is smaller than an equatorial one by about cos(lat).
        let polar = g.area_m2(0);
        let equatorial = g.area_m2(g.cell_of(0.01, 0.0));
        assert!(polar < 0.05 * equatorial);
    }

    #[test]
    fn cells_round_trip_and_sampling_stays_inside() {
        let g = Grid::new(18, 36, 1.0).unwrap();
        for c in 0..g.len() {
            let (lat, lon) = g.centre(c);
            assert_eq!(g.cell_of(lat, lon), c);
            let (la, lo) = g.sample(c, 0.999, 0.001);
            assert_eq!(g.cell_of(la, lo), c);
        }
        assert_eq!(g.cell_of(0.0, -0.001), g.cell_of(0.0, TAU - 0.001));
        assert_eq!(g.cell_of(FRAC_PI_2, 0.0), g.len() - g.n_lon());
    }
}

//! Density n(altitude, local time, latitude) and vertical column
//! N(local time, latitude), from the flight loop's sightings.
//!
//! Why this exists: what instruments see is built from these two fields.
//! Each sighting of weight w (atoms) and dwell d (s) counts w d / dt in the
//! bin that holds its sampled point (the time-sampled, track-length
//! estimator of `sighting.rs`), and each step closes one "snapshot" of
//! the time-averaged population; the density is the mean weight per snapshot divided
//! by the bin's exact volume, (r2^3 - r1^3)/3 dlt (sin phi2 - sin phi1),
//! and the column is the mean weight per snapshot above a surface patch
//! divided by the patch's area at the surface radius. Local time and
//! latitude are in the solar-fixed frame (local time 12 = subsolar meridian).

use std::f64::consts::{FRAC_PI_2, PI, TAU};

use exobound_sdk::{constants::CM2_PER_M2, math};

/// Cubic centimetres per cubic metre.
const CM3_PER_M3: f64 = 1.0e6;

/// Snapshot estimator of density and column.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct DensityTally {
    alt_edges: Vec<f64>,
    n_lt: usize,
    n_lat: usize,
    radius: f64,
    volume_cm3: Vec<f64>,
    area_cm2: Vec<f64>,
    weight: Vec<f64>,
    column_weight: Vec<f64>,
    /// Per source: the density bins' weights, layout (source, alt, lt, lat).
    #[serde(default)]
    source_weight: Vec<f64>,
    /// Per source: the columns' weights, layout (source, lt, lat).
    #[serde(default)]
    source_column_weight: Vec<f64>,
    /// Sources the tally splits by (0: no split).
    #[serde(default)]
    n_sources: usize,
    snapshots: u64,
}

impl DensityTally {
    /// A tally with altitude bin edges `alt_edges` (m, increasing, the
    /// first not negative), `n_lt` local-time bins over 24 h and `n_lat` latitude bins,
    /// above a sphere of radius `radius` (m). `None` if the edges are not
    /// increasing or a count is zero.
    pub fn new(
        alt_edges: Vec<f64>,
        n_lt: usize,
        n_lat: usize,
        radius: f64,
    ) -> Option<DensityTally> {
        if alt_edges.len() < 2
            || n_lt == 0
            || n_lat == 0
            || alt_edges[0] < 0.0
            || alt_edges.windows(2).any(|w| !(w[1] > w[0]))
        {
            return None;
        }
        let n_alt = alt_edges.len() - 1;
        let dlt = TAU / n_lt as f64;
        let sin_band = |j: usize| {
            let a = -FRAC_PI_2 + PI * j as f64 / n_lat as f64;
            math::sin(a + PI / n_lat as f64) - math::sin(a)
        };
        let mut volume_cm3 = Vec::with_capacity(n_alt * n_lt * n_lat);
        for k in 0..n_alt {
            let (r1, r2) = (radius + alt_edges[k], radius + alt_edges[k + 1]);
            let shell = (r2 * r2 * r2 - r1 * r1 * r1) / 3.0;
            for _ in 0..n_lt {
                for j in 0..n_lat {
                    volume_cm3.push(shell * dlt * sin_band(j) * CM3_PER_M3);
                }
            }
        }
        let mut area_cm2 = Vec::with_capacity(n_lt * n_lat);
        for _ in 0..n_lt {
            for j in 0..n_lat {
                area_cm2.push(radius * radius * dlt * sin_band(j) * CM2_PER_M2);
            }
        }
        let n = volume_cm3.len();
        Some(DensityTally {
            alt_edges,
            n_lt,
            n_lat,
            radius,
            volume_cm3,
            area_cm2,
            weight: vec![0.0; n],
            column_weight: vec![0.0; n_lt * n_lat],
            source_weight: Vec::new(),
            source_column_weight: Vec::new(),
            n_sources: 0,
            snapshots: 0,
        })
    }

    /// The same tally, also split by the source that released each atom:
    /// `n_sources` sources, indexed as [`super::Sighting::source`].
    pub fn with_sources(mut self, n_sources: usize) -> DensityTally {
        self.n_sources = n_sources;
        self.source_weight = vec![0.0; n_sources * self.weight.len()];
        self.source_column_weight = vec![0.0; n_sources * self.column_weight.len()];
        self
    }

    /// Sources the tally is split by, dimensionless.
    pub fn n_sources(&self) -> usize {
        self.n_sources
    }

    /// Altitude bin edges, m.
    pub fn alt_edges(&self) -> &[f64] {
        &self.alt_edges
    }

    /// (altitude, local-time, latitude) bin counts.
    pub fn shape(&self) -> (usize, usize, usize) {
        (self.alt_edges.len() - 1, self.n_lt, self.n_lat)
    }

    /// Snapshots accumulated.
    pub fn snapshots(&self) -> u64 {
        self.snapshots
    }

    /// The (local time, latitude) column index of a point, from local time
    /// in hours and latitude in rad.
    pub fn column_of(&self, local_time: f64, lat: f64) -> usize {
        let i =
            ((local_time.rem_euclid(24.0) / 24.0 * self.n_lt as f64) as usize).min(self.n_lt - 1);
        let j = (((lat + FRAC_PI_2) / PI * self.n_lat as f64) as usize).min(self.n_lat - 1);
        i * self.n_lat + j
    }

    /// The density bin of a point at `altitude` (m), or `None` outside the
    /// altitude range; `column` from [`DensityTally::column_of`].
    pub fn bin_of(&self, altitude: f64, column: usize) -> Option<usize> {
        if altitude < self.alt_edges[0] || altitude >= *self.alt_edges.last()? {
            return None;
        }
        let k = self.alt_edges.partition_point(|&e| e <= altitude) - 1;
        Some(k * self.n_lt * self.n_lat + column)
    }

    /// Add weight `w` (atoms) at density bin `bin` (if any) and column `column`.
    #[inline]
    pub fn add(&mut self, bin: Option<usize>, column: usize, w: f64) {
        if let Some(b) = bin {
            self.weight[b] += w;
        }
        self.column_weight[column] += w;
    }

    /// [`DensityTally::add`], and the same weight to source `source`'s
    /// share when the tally is split by source.
    #[inline]
    pub fn add_from(&mut self, source: u16, bin: Option<usize>, column: usize, w: f64) {
        self.add(bin, column, w);
        let s = source as usize;
        if s < self.n_sources {
            if let Some(b) = bin {
                self.source_weight[s * self.weight.len() + b] += w;
            }
            self.source_column_weight[s * self.column_weight.len() + column] += w;
        }
    }

    /// Close one snapshot.
    pub fn end_snapshot(&mut self) {
        self.snapshots += 1;
    }

    /// Name of the estimator, for the products' metadata.
    pub const ESTIMATOR: &'static str = "time-sampled track length: each flight segment of \
        each step scored at a time drawn uniformly within it, weighted by its expected time in \
        flight over the step length";

    /// Mean density per bin, atoms cm^-3, index (alt * n_lt + lt) * n_lat + lat.
    pub fn density_cm3(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.weight.iter().zip(&self.volume_cm3).map(|(w, v)| w / s / v).collect()
    }

    /// Mean vertical column per (local time, latitude), atoms cm^-2.
    pub fn column_cm2(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.column_weight.iter().zip(&self.area_cm2).map(|(w, a)| w / s / a).collect()
    }

    /// Mean density per source and bin, atoms cm^-3, layout (source, alt,
    /// lt, lat); empty when the tally is not split by source.
    pub fn density_by_source_cm3(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        let n = self.volume_cm3.len();
        self.source_weight.iter().enumerate().map(|(k, w)| w / s / self.volume_cm3[k % n]).collect()
    }

    /// Mean vertical column per source, atoms cm^-2, layout (source, lt,
    /// lat); empty when the tally is not split by source.
    pub fn column_by_source_cm2(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        let n = self.area_cm2.len();
        self.source_column_weight
            .iter()
            .enumerate()
            .map(|(k, w)| w / s / self.area_cm2[k % n])
            .collect()
    }

    /// Mean weight per snapshot in each density bin, atoms.
    pub fn mean_weight(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.weight.iter().map(|w| w / s).collect()
    }

    /// Exact bin volumes, cm^3.
    pub fn volumes_cm3(&self) -> &[f64] {
        &self.volume_cm3
    }

    /// Sphere radius the altitudes refer to, m.
    pub fn radius(&self) -> f64 {
        self.radius
    }

    /// The first accumulated weight that is not finite, as (which sum, index,
    /// value), atoms; `None` when every sum is finite.
    pub fn first_non_finite(&self) -> Option<(&'static str, usize, f64)> {
        let find = |v: &[f64]| v.iter().position(|w| !w.is_finite()).map(|i| (i, v[i]));
        find(&self.weight)
            .map(|(i, w)| ("density bin weight", i, w))
            .or_else(|| find(&self.column_weight).map(|(i, w)| ("column weight", i, w)))
    }

    /// Forget all snapshots (start a new averaging window).
    pub fn reset(&mut self) {
        self.weight.iter_mut().for_each(|w| *w = 0.0);
        self.column_weight.iter_mut().for_each(|w| *w = 0.0);
        self.source_weight.iter_mut().for_each(|w| *w = 0.0);
        self.source_column_weight.iter_mut().for_each(|w| *w = 0.0);
        self.snapshots = 0;
    }
}

impl super::Tally for DensityTally {
    /// (density bin if inside the altitude range, column).
    type Place = (Option<usize>, usize);

    fn place(&self, s: &super::Sighting) -> Self::Place {
        let column = self.column_of(s.local_time, s.latitude);
        (self.bin_of(s.altitude, column), column)
    }

    fn score(&mut self, (bin, column): Self::Place, s: &super::Sighting, dt: f64) {
        self.add_from(s.source, bin, column, s.weight * s.dwell / dt);
    }

    fn end_step(&mut self) {
        self.end_snapshot();
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn volumes_add_up_to_the_shell() {
        // Volume of a spherical shell 4/3 pi (r2^3 - r1^3) (textbook).
        let r = 1.7374e6;
        let t = DensityTally::new(vec![0.0, 1.0e5, 5.0e5], 24, 18, r).unwrap();
        let total: f64 = t.volumes_cm3().iter().sum();
        let shell = 4.0 / 3.0 * PI * ((r + 5.0e5f64).powi(3) - r.powi(3)) * CM3_PER_M3;
        assert!((total / shell - 1.0).abs() < 1e-12);
    }

    #[test]
    fn uniform_gas_gives_its_density() {
        // One atom per cm^3 everywhere: put weight = volume in each bin.
        let mut t = DensityTally::new(vec![0.0, 1.0e4, 3.0e4], 4, 3, 1.0e6).unwrap();
        let vols = t.volumes_cm3().to_vec();
        for (b, v) in vols.iter().enumerate() {
            t.weight[b] += *v;
        }
        t.end_snapshot();
        assert!(t.density_cm3().iter().all(|n| (n - 1.0).abs() < 1e-12));
        assert_eq!(t.bin_of(2.0e4, t.column_of(13.0, 0.1)), Some(12 + t.column_of(13.0, 0.1)));
        assert_eq!(t.bin_of(3.0e4, 0), None);
    }
}

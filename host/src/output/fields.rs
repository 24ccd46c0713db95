//! The arrays every product is made from: coordinates, run-averaged
//! density and column, surface maps and profiles with their errors.
//!
//! Why this exists: the NetCDF file, the CSV tables, the plots and the
//! summary must show the same numbers. They are computed once, here, from
//! the driver's averages and the final surface state.

use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;
use crate::tally::profiles;

/// Derived arrays of a finished run.
#[derive(Clone, Debug)]
pub struct Fields {
    /// Altitude bin centres, km.
    pub altitude_km: Vec<f64>,
    /// Altitude bin edges, km.
    pub altitude_edges_km: Vec<f64>,
    /// Local-time bin centres, h (exact decimals: means of the edges).
    pub local_time_h: Vec<f64>,
    /// Local-time bin edges, h, `local_time_h.len() + 1` of them from 0 to 24.
    pub local_time_edges_h: Vec<f64>,
    /// Tally latitude bin centres, deg (exact decimals: means of the degree edges).
    pub latitude_deg: Vec<f64>,
    /// Tally latitude bin edges, deg, from -90 to 90.
    pub latitude_edges_deg: Vec<f64>,
    /// Surface-grid latitude centres, deg.
    pub grid_latitude_deg: Vec<f64>,
    /// Surface-grid latitude edges, deg, from -90 to 90.
    pub grid_latitude_edges_deg: Vec<f64>,
    /// Surface-grid east-longitude centres, deg.
    pub grid_longitude_deg: Vec<f64>,
    /// Surface-grid east-longitude edges, deg, from 0 to 360.
    pub grid_longitude_edges_deg: Vec<f64>,
    /// Surface-cell areas, m^2, one per latitude row (every cell of a row has the same area).
    pub grid_row_area_m2: Vec<f64>,
    /// Run-averaged density, atoms cm^-3, layout (alt, lt, lat).
    pub density: Vec<f64>,
    /// Run-averaged vertical column, atoms cm^-2, layout (lt, lat).
    pub column: Vec<f64>,
    /// Final adsorbed surface density, atoms cm^-2, layout (lon, lat).
    pub reservoir: Vec<f64>,
    /// Bulk abundance relative to nominal, dimensionless, layout (lon, lat).
    pub bulk_abundance: Vec<f64>,
    /// Mean release flux, atoms cm^-2 s^-1, layout (lon, lat).
    pub source_flux: Vec<f64>,
    /// Mean sticking flux, atoms cm^-2 s^-1, layout (lon, lat).
    pub stick_flux: Vec<f64>,
    /// Mean loss in flight above each cell, atoms cm^-2 s^-1, layout (lon, lat).
    pub loss_flux: Vec<f64>,
    /// Equatorial column by local time, atoms cm^-2.
    pub equator_profile: Vec<f64>,
    /// Its standard error from the window-to-window scatter, atoms cm^-2.
    pub equator_error: Vec<f64>,
    /// Dayside (6-18 h) column by latitude, atoms cm^-2.
    pub latitude_profile: Vec<f64>,
    /// Its standard error, atoms cm^-2.
    pub latitude_error: Vec<f64>,
    /// Averaged windows (after the spin-up), dimensionless.
    pub windows: usize,
}

impl Fields {
    /// Compute the fields of a finished run.
    pub fn of(scenario: &Scenario, sim: &Simulation, record: &RunRecord) -> Fields {
        let tally = sim.tally();
        let (n_alt, n_lt, n_lat) = tally.shape();
        let edges: Vec<f64> = tally.alt_edges().iter().map(|e| e / 1e3).collect();
        let grid = &scenario.model.grid;
        let (gl, gm) = (grid.n_lat(), grid.n_lon());
        let a = &record.averages;
        let secs = a.seconds.max(f64::MIN_POSITIVE);
        // Surface-grid arrays, transposed from the grid's (lat, lon) to (lon, lat).
        let by_lon_lat = |f: &dyn Fn(usize) -> f64| -> Vec<f64> {
            let mut out = Vec::with_capacity(gl * gm);
            for j in 0..gm {
                for i in 0..gl {
                    out.push(f(i * gm + j));
                }
            }
            out
        };
        let reservoir = &sim.model().reservoir;
        let area = |c: usize| grid.area_cm2(c);
        let get = |v: &Vec<f64>, c: usize| v.get(c).copied().unwrap_or(0.0);
        let post: Vec<_> = record.windows.iter().filter(|w| !w.spin_up).collect();
        let stats = |pick: &dyn Fn(&crate::driver::WindowRecord) -> &Vec<f64>, n: usize| {
            let mut err = vec![f64::NAN; n];
            for (k, e) in err.iter_mut().enumerate() {
                let xs: Vec<f64> = post.iter().filter_map(|w| pick(w).get(k).copied()).collect();
                *e = profiles::mean_and_error(&xs).1;
            }
            err
        };
        let column = a.column_cm2();
        let column = if column.is_empty() { vec![0.0; n_lt * n_lat] } else { column };
        let density = a.density_cm3();
        let density = if density.is_empty() { vec![0.0; n_alt * n_lt * n_lat] } else { density };
        Fields {
            altitude_km: edges.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect(),
            altitude_edges_km: edges.clone(),
            local_time_h: (0..n_lt).map(|i| profiles::local_time_centre(i, n_lt)).collect(),
            local_time_edges_h: (0..=n_lt).map(|i| profiles::local_time_edge(i, n_lt)).collect(),
            latitude_deg: (0..n_lat).map(|j| profiles::latitude_centre_deg(j, n_lat)).collect(),
            latitude_edges_deg: (0..=n_lat)
                .map(|j| profiles::latitude_edge_deg(j, n_lat))
                .collect(),
            grid_latitude_deg: (0..gl).map(|i| grid.latitude_centre_deg(i)).collect(),
            grid_latitude_edges_deg: (0..=gl).map(|i| grid.latitude_edge_deg(i)).collect(),
            grid_longitude_deg: (0..gm).map(|j| grid.longitude_centre_deg(j)).collect(),
            grid_longitude_edges_deg: (0..=gm).map(|j| grid.longitude_edge_deg(j)).collect(),
            grid_row_area_m2: (0..gl).map(|i| grid.area_m2(i * gm)).collect(),
            equator_profile: profiles::equatorial_profile(
                &column,
                n_lt,
                n_lat,
                scenario.plan.equator_band,
            ),
            equator_error: stats(&|w| &w.equator_profile, n_lt),
            latitude_profile: profiles::dayside_latitude_profile(&column, n_lt, n_lat),
            latitude_error: stats(&|w| &w.latitude_profile, n_lat),
            density,
            column,
            reservoir: by_lon_lat(&|c| reservoir.adsorbed[c] / area(c)),
            bulk_abundance: by_lon_lat(&|c| reservoir.bulk_abundance[c]),
            source_flux: by_lon_lat(&|c| get(&a.released, c) / area(c) / secs),
            stick_flux: by_lon_lat(&|c| get(&a.stuck, c) / area(c) / secs),
            loss_flux: by_lon_lat(&|c| get(&a.lost_above, c) / area(c) / secs),
            windows: post.len(),
        }
    }
}

//! Averaging windows: the run-averaged tallies and the per-window time
//! series.
//!
//! Why this exists: the engine's tally covers the current window only.
//! At the end of each window the driver folds it into the run average
//! (once the spin-up is over) and records the window's own summary
//! measures, whose scatter from window to window gives the Monte Carlo
//! uncertainty of the shape measures. Everything here is plain data, so a
//! checkpoint saves it exactly.

use serde::{Deserialize, Serialize};

use crate::engine::Simulation;
use crate::scenario::RunPlan;
use crate::tally::profiles;

/// Tallies summed over every window after the spin-up.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct Averages {
    /// Snapshots summed, dimensionless.
    pub snapshots: u64,
    /// Steps summed, dimensionless.
    pub steps: u64,
    /// Simulated time summed, s.
    pub seconds: f64,
    /// Sum over windows of (mean density x snapshots), atoms cm^-3, layout (alt, lt, lat).
    pub density_sum: Vec<f64>,
    /// Sum over windows of (mean column x snapshots), atoms cm^-2, layout (lt, lat).
    pub column_sum: Vec<f64>,
    /// Per source: sum over windows of (mean density x snapshots), atoms
    /// cm^-3, layout (source, alt, lt, lat).
    #[serde(default)]
    pub density_by_source_sum: Vec<f64>,
    /// Per source: sum over windows of (mean column x snapshots), atoms
    /// cm^-2, layout (source, lt, lat).
    #[serde(default)]
    pub column_by_source_sum: Vec<f64>,
    /// Atoms released from each surface cell.
    pub released: Vec<f64>,
    /// Atoms that stuck in each surface cell.
    pub stuck: Vec<f64>,
    /// Atoms lost in flight above each surface cell.
    pub lost_above: Vec<f64>,
}

impl Averages {
    /// Mean density, atoms cm^-3, layout (alt, lt, lat).
    pub fn density_cm3(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.density_sum.iter().map(|x| x / s).collect()
    }

    /// Mean vertical column, atoms cm^-2, layout (lt, lat).
    pub fn column_cm2(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.column_sum.iter().map(|x| x / s).collect()
    }

    /// Mean density by source, atoms cm^-3, layout (source, alt, lt, lat).
    pub fn density_by_source_cm3(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.density_by_source_sum.iter().map(|x| x / s).collect()
    }

    /// Mean vertical column by source, atoms cm^-2, layout (source, lt, lat).
    pub fn column_by_source_cm2(&self) -> Vec<f64> {
        let s = self.snapshots.max(1) as f64;
        self.column_by_source_sum.iter().map(|x| x / s).collect()
    }
}

/// The summary measures of one window.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct WindowRecord {
    /// Start of the window, s.
    pub start: f64,
    /// End of the window, s.
    pub end: f64,
    /// Whether the window lies in the spin-up.
    pub spin_up: bool,
    /// Snapshots (steps) averaged in the window, dimensionless.
    #[serde(default)]
    pub snapshots: u64,
    /// The window's mean vertical column, atoms cm^-2, layout (lt, lat).
    #[serde(default)]
    pub column: Vec<f64>,
    /// The window's mean density in the lowest altitude bin, atoms cm^-3,
    /// layout (lt, lat).
    #[serde(default)]
    pub near_surface_density: Vec<f64>,
    /// Mean atoms in flight, atoms.
    pub content: f64,
    /// Mean atoms in flight and in sunlight, atoms.
    pub sunlit_content: f64,
    /// Atoms adsorbed at the end of the window, atoms.
    pub adsorbed: f64,
    /// Atoms supplied from the bulk during the window, atoms.
    pub supplied: f64,
    /// Atoms released during the window, atoms.
    pub released: f64,
    /// Atoms that escaped (left on unbound paths) during the window, atoms.
    pub escaped: f64,
    /// Atoms that left through the outer boundary on bound paths during
    /// the window, atoms.
    #[serde(default)]
    pub left_bound: f64,
    /// Atoms lost in flight (all loss modules) during the window, atoms.
    pub lost_in_flight: f64,
    /// Atoms removed from the pool by reservoir processes, atoms.
    pub removed: f64,
    /// Atoms that stuck during the window, atoms.
    pub stuck: f64,
    /// Local time of the equatorial column peak, hours (NaN if undefined).
    pub peak_local_time: f64,
    /// Shift of that peak from the subsolar point, deg (negative = dawn).
    pub shift_deg: f64,
    /// Mean density in the lowest altitude bin over the low-latitude dayside, atoms cm^-3.
    pub dayside_near_surface: f64,
    /// Mean equatorial column at the subsolar local-time bins, atoms cm^-2.
    pub subsolar_column: f64,
    /// Equatorial column by local-time bin, atoms cm^-2.
    pub equator_profile: Vec<f64>,
    /// Dayside column by latitude bin, atoms cm^-2.
    pub latitude_profile: Vec<f64>,
    /// Where the body is on its orbit at the window's middle.
    pub position: BodyPosition,
}

/// Where the body is on its orbit, and where the Sun stands over it, at
/// one time. Angles in degrees, as the tables write them.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct BodyPosition {
    /// Time, s since the run start.
    pub time: f64,
    /// True anomaly, deg in [0, 360), 0 at perihelion; NaN at a constant
    /// heliocentric distance (no perihelion).
    pub true_anomaly_deg: f64,
    /// Heliocentric distance, AU.
    pub heliocentric_distance_au: f64,
    /// Body-fixed east longitude of the subsolar point, deg in [0, 360).
    pub subsolar_longitude_deg: f64,
    /// Subsolar latitude, deg in [-90, 90].
    pub subsolar_latitude_deg: f64,
    /// The Sun's orbital longitude from the northward equinox (L_s), deg in
    /// [0, 360); NaN without an obliquity (no equinox).
    pub solar_longitude_deg: f64,
    /// For the Moon, the phase as a fraction of the synodic month since
    /// new moon, dimensionless in [0, 1), from the subsolar longitude;
    /// NaN for other bodies.
    pub lunar_phase: f64,
}

impl BodyPosition {
    /// The position of `model`'s body at time `t` (s).
    pub fn at(model: &crate::engine::Model, t: f64) -> BodyPosition {
        let (body, sun) = (&model.body, &model.sun);
        let lon_ss = sun.subsolar_longitude(body, t);
        BodyPosition {
            time: t,
            true_anomaly_deg: match body.orbit {
                crate::body::HelioOrbit::Kepler { .. } => degrees_0_360(body.orbit.true_anomaly(t)),
                crate::body::HelioOrbit::Constant { .. } => f64::NAN,
            },
            heliocentric_distance_au: body.orbit.distance_au(t),
            subsolar_longitude_deg: degrees_0_360(lon_ss),
            subsolar_latitude_deg: sun.subsolar_latitude(body, t).to_degrees(),
            solar_longitude_deg: sun.solar_longitude(body, t).map_or(f64::NAN, degrees_0_360),
            lunar_phase: if body.name == crate::body::Body::moon().name {
                crate::scenario::orbit::lunar_phase_of(lon_ss)
            } else {
                f64::NAN
            },
        }
    }
}

/// The driver's record of a run: averages, windows and where the current window started.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct RunRecord {
    /// Tallies after the spin-up.
    pub averages: Averages,
    /// One record per closed window.
    pub windows: Vec<WindowRecord>,
    /// Step at which the current window started.
    pub window_start_step: u64,
}

/// An angle (rad) in degrees, in [0, 360).
fn degrees_0_360(angle: f64) -> f64 {
    let d = angle.to_degrees().rem_euclid(360.0);
    // rem_euclid rounds a tiny negative angle up to exactly 360.
    if d >= 360.0 { 0.0 } else { d }
}

/// Latitude limit of the "dayside near-surface" mean, rad (30 deg).
pub const NEAR_SURFACE_LATITUDE: f64 = core::f64::consts::FRAC_PI_6;

/// Volume-weighted mean density of the lowest altitude bin over local
/// times 6-18 h and |latitude| < 30 deg, atoms cm^-3.
pub fn dayside_near_surface(density: &[f64], volumes: &[f64], n_lt: usize, n_lat: usize) -> f64 {
    let (mut atoms, mut vol) = (0.0, 0.0);
    for i in 0..n_lt {
        if !(6.0..18.0).contains(&profiles::local_time_centre(i, n_lt)) {
            continue;
        }
        for j in 0..n_lat {
            if profiles::latitude_centre(j, n_lat).abs() < NEAR_SURFACE_LATITUDE {
                let k = i * n_lat + j;
                atoms += density[k] * volumes[k];
                vol += volumes[k];
            }
        }
    }
    if vol > 0.0 { atoms / vol } else { 0.0 }
}

impl RunRecord {
    /// The equatorial column peak's shift of each window after the spin-up
    /// that has one, deg (negative = dawn): their scatter
    /// (`profiles::mean_and_error`) is the run's shift uncertainty.
    pub fn window_shifts_deg(&self) -> Vec<f64> {
        self.windows
            .iter()
            .filter(|w| !w.spin_up && w.shift_deg.is_finite())
            .map(|w| w.shift_deg)
            .collect()
    }

    /// Close the current window at the simulation's present step: record
    /// its measures, fold it into the averages unless it is spin-up, and
    /// start the next window.
    pub fn close_window(&mut self, sim: &mut Simulation, plan: &RunPlan) {
        let from = self.window_start_step as usize;
        let to = sim.steps() as usize;
        let dt = sim.config().dt;
        let spin_up = (to as u64) <= plan.spin_up_steps;
        let tally = sim.tally();
        let (n_alt, n_lt, n_lat) = tally.shape();
        let snaps = tally.snapshots();
        let density = tally.density_cm3();
        let column = tally.column_cm2();
        let rows = &sim.ledger().rows[from..to];
        let n = rows.len().max(1) as f64;
        let sunlit = &sim.sunlit_content()[from..to];
        let profile = profiles::equatorial_profile(&column, n_lt, n_lat, plan.equator_band);
        let peak = profiles::peak_local_time(&profile).unwrap_or(f64::NAN);
        let subsolar: Vec<f64> = (0..n_lt)
            .filter(|&i| (profiles::local_time_centre(i, n_lt) - 12.0).abs() < 1.0)
            .map(|i| profile[i])
            .collect();
        let rec = WindowRecord {
            start: from as f64 * dt,
            end: to as f64 * dt,
            spin_up,
            snapshots: snaps,
            column: column.clone(),
            near_surface_density: density[..n_lt * n_lat].to_vec(),
            content: rows.iter().map(|r| r.in_flight).sum::<f64>() / n,
            sunlit_content: sunlit.iter().sum::<f64>() / n,
            adsorbed: rows.last().map_or(0.0, |r| r.adsorbed),
            supplied: rows.iter().map(|r| r.supplied_from_bulk).sum(),
            released: rows.iter().map(|r| r.released).sum(),
            escaped: rows.iter().map(|r| r.escaped).sum(),
            left_bound: rows.iter().map(|r| r.left_bound).sum(),
            lost_in_flight: rows.iter().map(|r| r.losses.iter().sum::<f64>()).sum(),
            removed: rows.iter().map(|r| r.removed.iter().sum::<f64>()).sum(),
            stuck: rows.iter().map(|r| r.stuck).sum(),
            peak_local_time: peak,
            shift_deg: if peak.is_nan() {
                f64::NAN
            } else {
                profiles::shift_from_subsolar_deg(peak)
            },
            dayside_near_surface: dayside_near_surface(
                &density[..n_lt * n_lat],
                &tally.volumes_cm3()[..n_lt * n_lat],
                n_lt,
                n_lat,
            ),
            subsolar_column: if subsolar.is_empty() {
                f64::NAN
            } else {
                subsolar.iter().sum::<f64>() / subsolar.len() as f64
            },
            latitude_profile: profiles::dayside_latitude_profile(&column, n_lt, n_lat),
            equator_profile: profile,
            position: BodyPosition::at(sim.model(), 0.5 * (from + to) as f64 * dt),
        };
        if !spin_up {
            let a = &mut self.averages;
            if a.density_sum.is_empty() {
                a.density_sum = vec![0.0; n_alt * n_lt * n_lat];
                a.column_sum = vec![0.0; n_lt * n_lat];
                let n_src = tally.n_sources();
                a.density_by_source_sum = vec![0.0; n_src * n_alt * n_lt * n_lat];
                a.column_by_source_sum = vec![0.0; n_src * n_lt * n_lat];
                let cells = sim.model().grid.len();
                a.released = vec![0.0; cells];
                a.stuck = vec![0.0; cells];
                a.lost_above = vec![0.0; cells];
            }
            let s = snaps as f64;
            for (acc, d) in a.density_sum.iter_mut().zip(&density) {
                *acc += d * s;
            }
            for (acc, c) in a.column_sum.iter_mut().zip(&column) {
                *acc += c * s;
            }
            for (acc, d) in a.density_by_source_sum.iter_mut().zip(&tally.density_by_source_cm3()) {
                *acc += d * s;
            }
            for (acc, c) in a.column_by_source_sum.iter_mut().zip(&tally.column_by_source_cm2()) {
                *acc += c * s;
            }
            let maps = sim.maps();
            for (acc, x) in a.released.iter_mut().zip(&maps.released) {
                *acc += x;
            }
            for (acc, x) in a.stuck.iter_mut().zip(&maps.stuck) {
                *acc += x;
            }
            for (acc, x) in a.lost_above.iter_mut().zip(&maps.lost_above) {
                *acc += x;
            }
            a.snapshots += snaps;
            a.steps += (to - from) as u64;
            a.seconds += (to - from) as f64 * dt;
        }
        self.windows.push(rec);
        self.window_start_step = to as u64;
        sim.reset_tallies();
    }
}

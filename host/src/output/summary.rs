//! `summary.json`: the headline numbers of a run.
//!
//! Why this exists: most questions about a run are answered by a handful
//! of numbers: does the ledger close, how much sodium is aloft, where the
//! column peaks, how fast atoms escape and are ionized. Each number carries
//! its unit. Everything except the `performance` block is reproducible bit
//! for bit from the scenario and seed.

use std::collections::BTreeMap;
use std::path::Path;

use serde::{Deserialize, Serialize};

use super::Performance;
use super::fields::Fields;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;
use crate::tally::profiles;

/// Serde for a summary number: NaN (and infinities) as JSON null, null
/// read back as NaN, so that an undefined measure survives the round trip.
mod nullable {
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(x: &f64, s: S) -> Result<S::Ok, S::Error> {
        if x.is_finite() { s.serialize_f64(*x) } else { s.serialize_none() }
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<f64, D::Error> {
        Ok(Option::<f64>::deserialize(d)?.unwrap_or(f64::NAN))
    }
}

/// [`nullable`] for every value of a map.
mod nullable_map {
    use std::collections::BTreeMap;

    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(m: &BTreeMap<String, f64>, s: S) -> Result<S::Ok, S::Error> {
        s.collect_map(m.iter().map(|(k, v)| (k, v.is_finite().then_some(*v))))
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<BTreeMap<String, f64>, D::Error> {
        let m = BTreeMap::<String, Option<f64>>::deserialize(d)?;
        Ok(m.into_iter().map(|(k, v)| (k, v.unwrap_or(f64::NAN))).collect())
    }
}

/// A number with its unit.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Quantity {
    /// The value, in `unit` (NaN where undefined; null in the file).
    #[serde(with = "nullable")]
    pub value: f64,
    /// Its unit.
    pub unit: String,
}

impl Quantity {
    fn new(value: f64, unit: &str) -> Quantity {
        Quantity { value, unit: unit.into() }
    }
}

/// Totals of the run's ledger, atoms (the ledger's own file has them per step).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LedgerTotals {
    /// The unit of every number here: "atoms".
    pub unit: String,
    /// Adsorbed atoms at the start, atoms.
    #[serde(with = "nullable")]
    pub initial_stock: f64,
    /// Supplied from the bulk regolith, atoms.
    #[serde(with = "nullable")]
    pub supplied_from_bulk: f64,
    /// Released by every source, atoms.
    #[serde(with = "nullable")]
    pub released: f64,
    /// Of those, released from the adsorbed pool, atoms.
    #[serde(with = "nullable")]
    pub released_from_adsorbed: f64,
    /// Landings, atoms.
    #[serde(with = "nullable")]
    pub landed: f64,
    /// Landings that stuck, atoms.
    #[serde(with = "nullable")]
    pub stuck: f64,
    /// Landings that bounced, atoms.
    #[serde(with = "nullable")]
    pub bounced: f64,
    /// Left through the outer boundary on unbound paths, atoms.
    #[serde(with = "nullable")]
    pub escaped: f64,
    /// Left through the outer boundary on bound paths, atoms.
    #[serde(with = "nullable")]
    pub left_bound: f64,
    /// What `escaped` and `left_bound` mean in this run.
    pub escape_note: String,
    /// Buried at landing, atoms.
    #[serde(with = "nullable")]
    pub buried: f64,
    /// Lost in flight, by loss process, atoms.
    #[serde(with = "nullable_map")]
    pub lost_in_flight: BTreeMap<String, f64>,
    /// Removed from the adsorbed pool, by process, atoms.
    #[serde(with = "nullable_map")]
    pub removed_from_pool: BTreeMap<String, f64>,
    /// Net weight removed by Russian roulette (zero on average), atoms.
    #[serde(with = "nullable")]
    pub roulette: f64,
    /// In flight at the end, atoms.
    #[serde(with = "nullable")]
    pub final_in_flight: f64,
    /// Adsorbed at the end, atoms.
    #[serde(with = "nullable")]
    pub final_adsorbed: f64,
    /// Relative closure error over the run, dimensionless.
    #[serde(with = "nullable")]
    pub closure_error_run: f64,
    /// Worst relative closure error of one step, dimensionless.
    #[serde(with = "nullable")]
    pub closure_error_worst_step: f64,
}

/// Where the adsorbed reservoir is densest at the end of the run.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct AdsorbedPeak {
    /// Surface density, in `unit` (cm^-2).
    #[serde(with = "nullable")]
    pub value: f64,
    /// "cm^-2".
    pub unit: String,
    /// Cell-centre latitude, deg.
    #[serde(with = "nullable")]
    pub latitude_deg: f64,
    /// Cell-centre east longitude, deg.
    #[serde(with = "nullable")]
    pub longitude_deg: f64,
    /// Local time of that longitude at the end of the run, h.
    #[serde(with = "nullable")]
    pub local_time_h_at_end: f64,
}

/// Where the run-averaged density of the lowest altitude bin peaks.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct NearSurfacePeak {
    /// Density, in `unit` (cm^-3).
    #[serde(with = "nullable")]
    pub value: f64,
    /// "cm^-3".
    pub unit: String,
    /// The altitude bin's edges, km.
    pub altitude_km: [f64; 2],
    /// Bin-centre local time, h.
    #[serde(with = "nullable")]
    pub local_time_h: f64,
    /// Bin-centre latitude, deg.
    #[serde(with = "nullable")]
    pub latitude_deg: f64,
}

/// A number with its unit and how it is defined.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct DefinedQuantity {
    /// The value, in `unit`.
    #[serde(with = "nullable")]
    pub value: f64,
    /// Its unit.
    pub unit: String,
    /// What it is.
    pub definition: String,
}

/// The local time where the equatorial column peaks.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ColumnPeak {
    /// Peak local time, h.
    #[serde(with = "nullable")]
    pub local_time_h: f64,
    /// Shift from noon, deg of longitude (negative = towards dawn).
    #[serde(with = "nullable")]
    pub shift_deg: f64,
    /// "dawn", "dusk" or "undefined".
    pub towards: String,
    /// Standard error of the shift, deg.
    #[serde(with = "nullable")]
    pub uncertainty_deg: f64,
    /// Averaging windows behind the uncertainty, dimensionless.
    pub windows: usize,
    /// How the peak and its uncertainty are found.
    pub method: String,
}

/// A cos^n(latitude) fit to the dayside latitude profile.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LatitudeFit {
    /// The exponent n, dimensionless.
    #[serde(with = "nullable")]
    pub cos_power_n: f64,
    /// Its standard error, dimensionless.
    #[serde(with = "nullable")]
    pub uncertainty: f64,
    /// The amplitude A (cm^-2).
    pub amplitude: Quantity,
    /// RMS residual relative to the profile's mean, dimensionless.
    #[serde(with = "nullable")]
    pub relative_rms_residual: f64,
    /// Averaging windows behind the uncertainty, dimensionless.
    pub windows: usize,
    /// How the fit and its uncertainty are found.
    pub method: String,
}

/// One source module's share of the exosphere.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct SourceShare {
    /// The module's manifest name.
    pub source: String,
    /// Fraction of the dayside equatorial column, dimensionless.
    #[serde(with = "nullable")]
    pub dayside_equatorial_column_share: f64,
    /// Fraction of the dayside near-surface density, dimensionless.
    #[serde(with = "nullable")]
    pub dayside_near_surface_density_share: f64,
}

/// The split of the exosphere by source module.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct BySource {
    /// "1": the shares are fractions.
    pub unit: String,
    /// What the shares are of.
    pub definition: String,
    /// One per source module, in scenario order.
    pub sources: Vec<SourceShare>,
}

/// Wall-clock figures: the only part of a run's outputs that is not reproducible.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct PerformanceBlock {
    /// Says that these figures differ between identical runs.
    pub note: String,
    /// Wall time (s).
    pub wall_time: Quantity,
    /// Super-particle hops, dimensionless.
    pub particle_hops: u64,
    /// Hops per second of wall time (s^-1).
    pub hops_per_second: Quantity,
    /// Worker threads, dimensionless.
    pub threads: u64,
}

/// The summary of a finished run: what `summary.json` holds, typed. Runs
/// write it; `compare`, `sweep`, `fit` and the command line read it back
/// through [`Summary::read`], which refuses a malformed file.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Summary {
    /// The scenario's title.
    pub title: String,
    /// The run seed.
    pub seed: u64,
    /// Simulated time (s).
    pub simulated_time: Quantity,
    /// Start of the averaged part of the run, after the spin-up (s).
    pub averaged_from: Quantity,
    /// Ledger totals.
    pub ledger: LedgerTotals,
    /// Densest adsorbed cell at the end.
    pub peak_adsorbed_density: AdsorbedPeak,
    /// Densest cell of the lowest altitude bin.
    pub peak_near_surface_density: NearSurfacePeak,
    /// Mean dayside density of the lowest altitude bin (cm^-3).
    pub dayside_near_surface_density: DefinedQuantity,
    /// The equatorial column's peak local time and shift.
    pub equatorial_column_peak: ColumnPeak,
    /// The cos^n(latitude) fit.
    pub latitude_profile_fit: LatitudeFit,
    /// The exosphere's split by source module (absent when it cannot be formed).
    pub by_source: Option<BySource>,
    /// Mean atoms in flight over the averaged part (atoms).
    pub total_content: Quantity,
    /// Mean escape rate (atoms s^-1).
    pub escape_rate: Quantity,
    /// Mean rate of bound atoms leaving through the boundary (atoms s^-1).
    pub bound_boundary_loss_rate: Quantity,
    /// Mean photoionization rate (atoms s^-1).
    pub ionization_rate: Quantity,
    /// Mean release rate of every source (atoms s^-1).
    pub source_rate: Quantity,
    /// Mean supply rate from the bulk (atoms s^-1).
    pub supply_rate_from_bulk: Quantity,
    /// Wall-clock figures.
    pub performance: PerformanceBlock,
}

/// What the ledger's `escaped` and `left_bound` mean for this run.
fn escape_note(scenario: &Scenario) -> String {
    let c = &scenario.config;
    let radii = c.boundary_radius / scenario.model.body.radius;
    let launch = if c.escape_when_unbound {
        "atoms launched on unbound paths that miss the surface are booked as escaped at \
         launch (run.remove_unbound_at_launch = true): they never fly, so the escaping \
         component is missing from the density and column, and their photoionization \
         on the way out is booked as escape"
    } else {
        "unbound atoms fly, losses acting, until they reach the boundary"
    };
    format!(
        "escaped: atoms that left through the outer boundary ({} body radii) on unbound \
         paths (two-body energy >= 0 there; true escape); left_bound: atoms that left \
         through it on bound paths (apocentre beyond it), lost to the model's domain but \
         not escaped from the body; {launch}",
        crate::scenario::bounds::shown(radii)
    )
}

/// Each source module's share of the run-averaged exosphere: of the
/// dayside (6-18 h) equatorial column, and of the near-surface density
/// over the dayside within 30 deg of the equator (weighted by `volumes`,
/// cm^3 of the lowest altitude bin, as `dayside_near_surface_density`).
fn by_source(
    scenario: &Scenario,
    record: &RunRecord,
    (n_lt, n_lat): (usize, usize),
    volumes: &[f64],
) -> Option<BySource> {
    let a = &record.averages;
    let (columns, densities) = (a.column_by_source_cm2(), a.density_by_source_cm3());
    let n_col = n_lt * n_lat;
    let n_den = a.density_sum.len();
    let sources = &scenario.processes.sources;
    if columns.len() != sources.len() * n_col || n_den < n_col {
        return None;
    }
    let band = scenario.plan.equator_band;
    let dayside_eq = |c: &[f64]| -> f64 {
        let p = profiles::equatorial_profile(c, n_lt, n_lat, band);
        (0..n_lt)
            .filter(|&i| (6.0..18.0).contains(&profiles::local_time_centre(i, n_lt)))
            .map(|i| p[i])
            .sum()
    };
    let total_col = dayside_eq(&a.column_cm2());
    let near = |d: &[f64]| crate::driver::windows::dayside_near_surface(d, volumes, n_lt, n_lat);
    let total_near = near(&a.density_cm3()[..n_col]);
    let share = |x: f64, total: f64| if total > 0.0 { x / total } else { f64::NAN };
    let parts: Vec<SourceShare> = sources
        .iter()
        .enumerate()
        .map(|(s, m)| {
            let c = &columns[s * n_col..(s + 1) * n_col];
            let d = &densities[s * n_den..s * n_den + n_col];
            SourceShare {
                source: m.name().to_string(),
                dayside_equatorial_column_share: share(dayside_eq(c), total_col),
                dayside_near_surface_density_share: share(near(d), total_near),
            }
        })
        .collect();
    Some(BySource {
        unit: "1".into(),
        definition: "each source module's fraction of the run-averaged dayside (6-18 h) \
                     equatorial column and of the dayside near-surface density; the fractions \
                     add up to 1"
            .into(),
        sources: parts,
    })
}

impl Summary {
    /// Summarise a finished run.
    pub fn of(
        scenario: &Scenario,
        sim: &Simulation,
        record: &RunRecord,
        perf: &Performance,
        f: &Fields,
    ) -> Summary {
        let ledger = sim.ledger();
        let last = ledger.rows.last().cloned().unwrap_or_default();
        let losses: BTreeMap<String, f64> = (ledger.loss_labels.iter().enumerate())
            .map(|(k, label)| (label.clone(), ledger.total(|r| r.losses[k])))
            .collect();
        let removed: BTreeMap<String, f64> = (ledger.removal_labels.iter().enumerate())
            .map(|(k, label)| (label.clone(), ledger.total(|r| r.removed[k])))
            .collect();
        // Rates and content over the averaged part of the run.
        let from = scenario.plan.spin_up_steps as usize;
        let rows = &ledger.rows[from.min(ledger.rows.len())..];
        let span = rows.len() as f64 * scenario.config.dt;
        let rate = |pick: &dyn Fn(&crate::tally::LedgerRow) -> f64| {
            if span > 0.0 { rows.iter().map(pick).sum::<f64>() / span } else { f64::NAN }
        };
        let ionizing: Vec<usize> = ledger
            .loss_labels
            .iter()
            .enumerate()
            .filter(|(_, l)| l.contains("ioniz") || l.contains("ionis"))
            .map(|(k, _)| k)
            .collect();
        let content = if rows.is_empty() {
            f64::NAN
        } else {
            rows.iter().map(|r| r.in_flight).sum::<f64>() / rows.len() as f64
        };
        // Peak of the adsorbed reservoir (final state).
        let grid = &scenario.model.grid;
        let gl = grid.n_lat();
        let (mut kmax, mut vmax) = (0, f64::NEG_INFINITY);
        for (k, &v) in f.reservoir.iter().enumerate() {
            if v > vmax {
                vmax = v;
                kmax = k;
            }
        }
        let (plon, plat) = (f.grid_longitude_deg[kmax / gl], f.grid_latitude_deg[kmax % gl]);
        let t_end = sim.time();
        let lt_of = |lon_deg: f64| {
            scenario.model.sun.local_time_hours(&scenario.model.body, lon_deg.to_radians(), t_end)
        };
        // Peak of the near-surface density (lowest altitude bin).
        let (n_lt, n_lat) = (f.local_time_h.len(), f.latitude_deg.len());
        let low = &f.density[..n_lt * n_lat];
        let (mut dk, mut dmax) = (0, f64::NEG_INFINITY);
        for (k, &v) in low.iter().enumerate() {
            if v > dmax {
                dmax = v;
                dk = k;
            }
        }
        let volumes = &sim.tally().volumes_cm3()[..n_lt * n_lat];
        let dayside = crate::driver::windows::dayside_near_surface(low, volumes, n_lt, n_lat);
        // Peak shift of the equatorial column: from the run average, with
        // the standard error of the per-window shifts.
        let peak = profiles::peak_local_time(&f.equator_profile).unwrap_or(f64::NAN);
        let shift = if peak.is_nan() { f64::NAN } else { profiles::shift_from_subsolar_deg(peak) };
        let shifts = record.window_shifts_deg();
        let (_, shift_err) = profiles::mean_and_error(&shifts);
        // Latitude shape: A cos^n(lat) fitted to the dayside latitude
        // profile, with the standard error of the per-window exponents.
        let lat_rad: Vec<f64> = f.latitude_deg.iter().map(|d| d.to_radians()).collect();
        let cos_fit = profiles::fit_cos_power(&lat_rad, &f.latitude_profile);
        let ns: Vec<f64> = record
            .windows
            .iter()
            .filter(|w| !w.spin_up)
            .filter_map(|w| profiles::fit_cos_power(&lat_rad, &w.latitude_profile))
            .map(|c| c.n)
            .collect();
        let (_, n_err) = profiles::mean_and_error(&ns);
        let hops_per_s =
            if perf.wall_seconds > 0.0 { perf.hops as f64 / perf.wall_seconds } else { f64::NAN };
        let t = |pick: &dyn Fn(&crate::tally::LedgerRow) -> f64| ledger.total(pick);
        let towards =
            if shift.is_finite() { profiles::shift_direction(shift) } else { "undefined" };
        Summary {
            title: scenario.title.clone(),
            seed: scenario.config.seed,
            simulated_time: Quantity::new(t_end, "s"),
            averaged_from: Quantity::new(from as f64 * scenario.config.dt, "s"),
            ledger: LedgerTotals {
                unit: "atoms".into(),
                initial_stock: ledger.initial_stock,
                supplied_from_bulk: t(&|r| r.supplied_from_bulk),
                released: t(&|r| r.released),
                released_from_adsorbed: t(&|r| r.released_from_adsorbed),
                landed: t(&|r| r.landed),
                stuck: t(&|r| r.stuck),
                bounced: t(&|r| r.bounced),
                escaped: t(&|r| r.escaped),
                left_bound: t(&|r| r.left_bound),
                escape_note: escape_note(scenario),
                buried: t(&|r| r.buried),
                lost_in_flight: losses,
                removed_from_pool: removed,
                roulette: t(&|r| r.roulette),
                final_in_flight: last.in_flight,
                final_adsorbed: last.adsorbed,
                closure_error_run: ledger.cumulative_closure(),
                closure_error_worst_step: ledger.worst_step_closure(),
            },
            peak_adsorbed_density: AdsorbedPeak {
                value: vmax,
                unit: "cm^-2".into(),
                latitude_deg: plat,
                longitude_deg: plon,
                local_time_h_at_end: lt_of(plon),
            },
            peak_near_surface_density: NearSurfacePeak {
                value: dmax,
                unit: "cm^-3".into(),
                altitude_km: [f.altitude_edges_km[0], f.altitude_edges_km[1]],
                local_time_h: f.local_time_h[dk / n_lat],
                latitude_deg: f.latitude_deg[dk % n_lat],
            },
            dayside_near_surface_density: DefinedQuantity {
                value: dayside,
                unit: "cm^-3".into(),
                definition: "lowest altitude bin, local time 6-18 h, |latitude| < 30 deg, \
                             volume-weighted"
                    .into(),
            },
            equatorial_column_peak: ColumnPeak {
                local_time_h: peak,
                shift_deg: shift,
                towards: towards.into(),
                uncertainty_deg: shift_err,
                windows: shifts.len(),
                method: "2nd-order Fourier fit to the equatorial column; uncertainty = \
                         standard error of the per-window shifts"
                    .into(),
            },
            latitude_profile_fit: LatitudeFit {
                cos_power_n: cos_fit.map_or(f64::NAN, |c| c.n),
                uncertainty: n_err,
                amplitude: Quantity::new(cos_fit.map_or(f64::NAN, |c| c.amplitude), "cm^-2"),
                relative_rms_residual: cos_fit.map_or(f64::NAN, |c| c.relative_residual),
                windows: ns.len(),
                method: "least-squares A cos^n(latitude) to the dayside (6-18 h) column by \
                         latitude; uncertainty = standard error of the per-window exponents"
                    .into(),
            },
            by_source: by_source(scenario, record, (n_lt, n_lat), volumes),
            total_content: Quantity::new(content, "atoms"),
            escape_rate: Quantity::new(rate(&|r| r.escaped), "atoms s^-1"),
            bound_boundary_loss_rate: Quantity::new(rate(&|r| r.left_bound), "atoms s^-1"),
            ionization_rate: Quantity::new(
                rate(&|r| ionizing.iter().map(|&k| r.losses[k]).sum()),
                "atoms s^-1",
            ),
            source_rate: Quantity::new(rate(&|r| r.released), "atoms s^-1"),
            supply_rate_from_bulk: Quantity::new(rate(&|r| r.supplied_from_bulk), "atoms s^-1"),
            performance: PerformanceBlock {
                note: "wall-clock figures; the only part of the outputs that differs between \
                       identical runs"
                    .into(),
                wall_time: Quantity::new(perf.wall_seconds, "s"),
                particle_hops: perf.hops,
                hops_per_second: Quantity::new(hops_per_s, "s^-1"),
                threads: perf.threads as u64,
            },
        }
    }

    /// The JSON value (keys sorted, undefined numbers as null).
    pub fn to_json(&self) -> serde_json::Value {
        serde_json::to_value(self).unwrap_or_default()
    }

    /// Read a run's `summary.json` (or a merged run's, whose extra fields
    /// are ignored). A missing file, a field missing or of the wrong type
    /// is an error naming the file and the field.
    pub fn read(path: &Path) -> Result<Summary, String> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            format!("`{}`: {e}; is it the output directory of a run?", path.display())
        })?;
        serde_json::from_str(&text).map_err(|e| {
            format!(
                "`{}` is not the summary of a run of this exobound version ({e}); rerun that run",
                path.display()
            )
        })
    }
}

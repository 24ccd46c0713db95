//! `summary.json`: the headline numbers of a run.
//!
//! Why this exists: most questions about a run are answered by a handful
//! of numbers: does the ledger close, how much sodium is aloft, where the
//! column peaks, how fast atoms escape and are ionized. Each number carries
//! its unit. Everything except the `performance` block is reproducible bit
//! for bit from the scenario and seed.

use serde_json::{Value, json};

use super::Performance;
use super::fields::Fields;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;
use crate::tally::profiles;

/// The summary of a finished run, as JSON.
pub struct Summary {
    value: Value,
}

/// A finite number, or JSON null.
fn num(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

/// `{ "value": x, "unit": u }`.
fn q(x: f64, unit: &str) -> Value {
    json!({ "value": num(x), "unit": unit })
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
) -> Value {
    let a = &record.averages;
    let (columns, densities) = (a.column_by_source_cm2(), a.density_by_source_cm3());
    let n_col = n_lt * n_lat;
    let n_den = a.density_sum.len();
    let sources = &scenario.processes.sources;
    if columns.len() != sources.len() * n_col || n_den < n_col {
        return Value::Null;
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
    let share = |x: f64, total: f64| num(if total > 0.0 { x / total } else { f64::NAN });
    let parts: Vec<Value> = sources
        .iter()
        .enumerate()
        .map(|(s, m)| {
            let c = &columns[s * n_col..(s + 1) * n_col];
            let d = &densities[s * n_den..s * n_den + n_col];
            json!({
                "source": m.name(),
                "dayside_equatorial_column_share": share(dayside_eq(c), total_col),
                "dayside_near_surface_density_share": share(near(d), total_near),
            })
        })
        .collect();
    json!({
        "unit": "1",
        "definition": "each source module's fraction of the run-averaged dayside (6-18 h) equatorial column and of the dayside near-surface density; the fractions add up to 1",
        "sources": parts,
    })
}

impl Summary {
    /// Summarise a finished run.
    pub fn of(
        scenario: &Scenario,
        sim: &Simulation,
        record: &RunRecord,
        perf: &Performance,
    ) -> Summary {
        let f = Fields::of(scenario, sim, record);
        let ledger = sim.ledger();
        let last = ledger.rows.last().cloned().unwrap_or_default();
        let mut losses = serde_json::Map::new();
        for (k, label) in ledger.loss_labels.iter().enumerate() {
            losses.insert(label.clone(), num(ledger.total(|r| r.losses[k])));
        }
        let mut removed = serde_json::Map::new();
        for (k, label) in ledger.removal_labels.iter().enumerate() {
            removed.insert(label.clone(), num(ledger.total(|r| r.removed[k])));
        }
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
        let value = json!({
            "title": scenario.title,
            "seed": scenario.config.seed,
            "simulated_time": q(t_end, "s"),
            "averaged_from": q(from as f64 * scenario.config.dt, "s"),
            "ledger": {
                "unit": "atoms",
                "initial_stock": num(ledger.initial_stock),
                "supplied_from_bulk": num(ledger.total(|r| r.supplied_from_bulk)),
                "released": num(ledger.total(|r| r.released)),
                "released_from_adsorbed": num(ledger.total(|r| r.released_from_adsorbed)),
                "landed": num(ledger.total(|r| r.landed)),
                "stuck": num(ledger.total(|r| r.stuck)),
                "bounced": num(ledger.total(|r| r.bounced)),
                "escaped": num(ledger.total(|r| r.escaped)),
                "left_bound": num(ledger.total(|r| r.left_bound)),
                "escape_note": escape_note(scenario),
                "buried": num(ledger.total(|r| r.buried)),
                "lost_in_flight": losses,
                "removed_from_pool": removed,
                "roulette": num(ledger.total(|r| r.roulette)),
                "final_in_flight": num(last.in_flight),
                "final_adsorbed": num(last.adsorbed),
                "closure_error_run": num(ledger.cumulative_closure()),
                "closure_error_worst_step": num(ledger.worst_step_closure()),
            },
            "peak_adsorbed_density": {
                "value": num(vmax), "unit": "cm^-2",
                "latitude_deg": num(plat), "longitude_deg": num(plon),
                "local_time_h_at_end": num(lt_of(plon)),
            },
            "peak_near_surface_density": {
                "value": num(dmax), "unit": "cm^-3",
                "altitude_km": [num(f.altitude_edges_km[0]), num(f.altitude_edges_km[1])],
                "local_time_h": num(f.local_time_h[dk / n_lat]),
                "latitude_deg": num(f.latitude_deg[dk % n_lat]),
            },
            "dayside_near_surface_density": {
                "value": num(dayside), "unit": "cm^-3",
                "definition": "lowest altitude bin, local time 6-18 h, |latitude| < 30 deg, volume-weighted",
            },
            "equatorial_column_peak": {
                "local_time_h": num(peak),
                "shift_deg": num(shift),
                "towards": if shift.is_finite() { profiles::shift_direction(shift) } else { "undefined" },
                "uncertainty_deg": num(shift_err),
                "windows": shifts.len(),
                "method": "2nd-order Fourier fit to the equatorial column; uncertainty = standard error of the per-window shifts",
            },
            "latitude_profile_fit": {
                "cos_power_n": num(cos_fit.map_or(f64::NAN, |c| c.n)),
                "uncertainty": num(n_err),
                "amplitude": q(cos_fit.map_or(f64::NAN, |c| c.amplitude), "cm^-2"),
                "relative_rms_residual": num(cos_fit.map_or(f64::NAN, |c| c.relative_residual)),
                "windows": ns.len(),
                "method": "least-squares A cos^n(latitude) to the dayside (6-18 h) column by latitude; uncertainty = standard error of the per-window exponents",
            },
            "by_source": by_source(scenario, record, (n_lt, n_lat), volumes),
            "total_content": q(content, "atoms"),
            "escape_rate": q(rate(&|r| r.escaped), "atoms s^-1"),
            "bound_boundary_loss_rate": q(rate(&|r| r.left_bound), "atoms s^-1"),
            "ionization_rate": q(rate(&|r| ionizing.iter().map(|&k| r.losses[k]).sum()), "atoms s^-1"),
            "source_rate": q(rate(&|r| r.released), "atoms s^-1"),
            "supply_rate_from_bulk": q(rate(&|r| r.supplied_from_bulk), "atoms s^-1"),
            "performance": {
                "note": "wall-clock figures; the only part of the outputs that differs between identical runs",
                "wall_time": q(perf.wall_seconds, "s"),
                "particle_hops": perf.hops,
                "hops_per_second": q(hops_per_s, "s^-1"),
                "threads": perf.threads,
            },
        });
        Summary { value }
    }

    /// The JSON value.
    pub fn to_json(&self) -> Value {
        self.value.clone()
    }
}

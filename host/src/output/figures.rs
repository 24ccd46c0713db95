//! The PNG plots of a run: column map, reservoir map, equatorial
//! local-time profile, latitude profile and the ledger over time.
//!
//! Why this exists: the first look at a run is a picture. This module
//! chooses what each figure shows (units in every label, the subsolar
//! point and terminators marked, cos and cos^2 references on the latitude
//! profile); the drawing is in the `exobound-products` crate.

use std::path::Path;

use exobound_products::{Line, LinePlot, LineStyle, MapPlot, Marker, draw_lines, draw_map};

use super::fields::Fields;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;

/// Edges `lo..hi` in `n` equal bins.
fn edges(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..=n).map(|k| lo + (hi - lo) * k as f64 / n as f64).collect()
}

/// Transpose a `[x][y]` array (nx, ny) to `[y][x]`.
fn transpose(v: &[f64], nx: usize, ny: usize) -> Vec<f64> {
    let mut out = vec![0.0; nx * ny];
    for i in 0..nx {
        for j in 0..ny {
            out[j * nx + i] = v[i * ny + j];
        }
    }
    out
}

/// Draw every plot into `dir`.
pub fn draw_all(
    dir: &Path,
    scenario: &Scenario,
    sim: &Simulation,
    record: &RunRecord,
) -> Result<(), String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("cannot create `{}`: {e}", dir.display()))?;
    let f = Fields::of(scenario, sim, record);
    let sp = &scenario.model.species.name;
    let body = &scenario.model.body.name;
    let (n_lt, n_lat) = (f.local_time_h.len(), f.latitude_deg.len());
    let e = |r: Result<(), exobound_products::ProductError>| r.map_err(|e| e.to_string());
    let lt_ticks = Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0]);
    let lat_ticks = Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]);

    e(draw_map(
        &MapPlot {
            title: format!("{sp} column density at {body}, run average"),
            x_label: "local time (h)".into(),
            y_label: "latitude (deg)".into(),
            x_edges: edges(0.0, 24.0, n_lt),
            y_edges: edges(-90.0, 90.0, n_lat),
            values: transpose(&f.column, n_lt, n_lat),
            colour_label: "column (atoms cm^-2)".into(),
            log_scale: true,
            x_ticks: lt_ticks.clone(),
            y_ticks: lat_ticks.clone(),
        },
        &dir.join("column_map.png"),
    ))?;

    let (gl, gm) = (f.grid_latitude_deg.len(), f.grid_longitude_deg.len());
    let res = transpose(&f.reservoir, gm, gl);
    let positive: Vec<f64> = res.iter().copied().filter(|v| *v > 0.0).collect();
    let (lo, hi) =
        positive.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &v| (lo.min(v), hi.max(v)));
    e(draw_map(
        &MapPlot {
            title: format!("adsorbed {sp} reservoir at the end of the run"),
            x_label: "east longitude (deg)".into(),
            y_label: "latitude (deg)".into(),
            x_edges: edges(0.0, 360.0, gm),
            y_edges: edges(-90.0, 90.0, gl),
            values: res,
            colour_label: "surface density (atoms cm^-2)".into(),
            log_scale: !positive.is_empty() && hi > 100.0 * lo,
            x_ticks: Some(vec![0.0, 60.0, 120.0, 180.0, 240.0, 300.0, 360.0]),
            y_ticks: lat_ticks,
        },
        &dir.join("reservoir_map.png"),
    ))?;

    e(draw_lines(
        &LinePlot {
            title: format!("equatorial {sp} column by local time"),
            x_label: "local time (h)".into(),
            y_label: "column (atoms cm^-2)".into(),
            lines: vec![Line {
                label: format!(
                    "|lat| < {:.0} deg, +-1 s.e. over {} windows",
                    scenario.plan.equator_band.to_degrees(),
                    f.windows
                ),
                x: f.local_time_h.clone(),
                y: f.equator_profile.clone(),
                y_err: Some(
                    f.equator_error.iter().map(|x| if x.is_finite() { *x } else { 0.0 }).collect(),
                ),
                style: LineStyle::Points,
            }],
            markers: vec![
                Marker { x: 6.0, label: "dawn terminator".into() },
                Marker { x: 12.0, label: "subsolar".into() },
                Marker { x: 18.0, label: "dusk terminator".into() },
            ],
            log_y: false,
            x_range: Some((0.0, 24.0)),
            x_ticks: lt_ticks,
        },
        &dir.join("equator_local_time.png"),
    ))?;

    // cos and cos^2 references scaled to the equatorial value.
    let eq_bins = crate::tally::profiles::equatorial_bins(n_lat, 1e-9);
    let n0 = eq_bins.iter().map(|&j| f.latitude_profile[j]).sum::<f64>() / eq_bins.len() as f64;
    let fine: Vec<f64> = (0..=180).map(|k| -90.0 + k as f64).collect();
    e(draw_lines(
        &LinePlot {
            title: format!("dayside {sp} column by latitude (6-18 h)"),
            x_label: "latitude (deg)".into(),
            y_label: "column (atoms cm^-2)".into(),
            lines: vec![
                Line {
                    label: "model, +-1 s.e.".into(),
                    x: f.latitude_deg.clone(),
                    y: f.latitude_profile.clone(),
                    y_err: Some(
                        f.latitude_error
                            .iter()
                            .map(|x| if x.is_finite() { *x } else { 0.0 })
                            .collect(),
                    ),
                    style: LineStyle::Points,
                },
                Line {
                    label: "N_eq cos(lat)".into(),
                    x: fine.clone(),
                    y: fine.iter().map(|l| n0 * l.to_radians().cos()).collect(),
                    y_err: None,
                    style: LineStyle::Dashed,
                },
                Line {
                    label: "N_eq cos^2(lat)".into(),
                    x: fine.clone(),
                    y: fine.iter().map(|l| n0 * l.to_radians().cos().powi(2)).collect(),
                    y_err: None,
                    style: LineStyle::Dotted,
                },
            ],
            markers: vec![],
            log_y: false,
            x_range: Some((-90.0, 90.0)),
            x_ticks: Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]),
        },
        &dir.join("latitude_profile.png"),
    ))?;

    let rows = &sim.ledger().rows;
    let days: Vec<f64> = rows.iter().map(|r| r.time / 86_400.0).collect();
    let cumulative = |pick: &dyn Fn(&crate::tally::LedgerRow) -> f64| {
        let mut acc = 0.0;
        rows.iter()
            .map(|r| {
                acc += pick(r);
                acc
            })
            .collect::<Vec<f64>>()
    };
    let spin_up_days = scenario.plan.spin_up_steps as f64 * scenario.config.dt / 86_400.0;
    let mut markers = Vec::new();
    if spin_up_days > 0.0 {
        markers.push(Marker { x: spin_up_days, label: "end of spin-up".into() });
    }
    e(draw_lines(
        &LinePlot {
            title: format!("{sp} ledger over the run"),
            x_label: "simulated time (d)".into(),
            y_label: "atoms".into(),
            lines: vec![
                Line {
                    label: "in flight".into(),
                    x: days.clone(),
                    y: rows.iter().map(|r| r.in_flight).collect(),
                    y_err: None,
                    style: LineStyle::Solid,
                },
                Line {
                    label: "adsorbed".into(),
                    x: days.clone(),
                    y: rows.iter().map(|r| r.adsorbed).collect(),
                    y_err: None,
                    style: LineStyle::Solid,
                },
                Line {
                    label: "supplied from bulk (cumulative)".into(),
                    x: days.clone(),
                    y: cumulative(&|r| r.supplied_from_bulk),
                    y_err: None,
                    style: LineStyle::Dashed,
                },
                Line {
                    label: "lost in flight (cumulative)".into(),
                    x: days.clone(),
                    y: cumulative(&|r| r.losses.iter().sum()),
                    y_err: None,
                    style: LineStyle::Dashed,
                },
                Line {
                    label: "escaped (cumulative)".into(),
                    x: days.clone(),
                    y: cumulative(&|r| r.escaped),
                    y_err: None,
                    style: LineStyle::Dotted,
                },
            ],
            markers,
            log_y: true,
            x_range: None,
            x_ticks: None,
        },
        &dir.join("ledger.png"),
    ))?;

    // Phase-resolved shape measures: the peak shift window by window.
    let win: Vec<&crate::driver::windows::WindowRecord> =
        record.windows.iter().filter(|w| !w.spin_up).collect();
    if !win.is_empty() {
        let mid: Vec<f64> = win.iter().map(|w| 0.5 * (w.start + w.end) / 86_400.0).collect();
        e(draw_lines(
            &LinePlot {
                title: format!("{sp} equatorial column peak shift, window by window"),
                x_label: "simulated time at the window's middle (d)".into(),
                y_label: "shift from the subsolar point (deg, negative = dawn)".into(),
                lines: vec![Line {
                    label: "per averaging window".into(),
                    x: mid,
                    y: win.iter().map(|w| w.shift_deg).collect(),
                    y_err: None,
                    style: LineStyle::Points,
                }],
                markers: vec![],
                log_y: false,
                x_range: None,
                x_ticks: None,
            },
            &dir.join("phase_series.png"),
        ))?;
    }
    Ok(())
}

//! The plots of a merged replica set: the six figures of a run, drawn from
//! the merged products, with error bars from the scatter between replicas.
//!
//! Why this exists: a run's figures are drawn from its engine state
//! (`output::figures`), which a merge does not have; a merged directory
//! should still open with the same six pictures. They are drawn here from
//! the merged NetCDF fields and CSV tables with the same drawing code
//! (`exobound-products`), the same axes and units, titles that say they
//! show a mean of replicas, and error bars of one standard error between
//! replicas.

use std::path::Path;

use exobound_products::{Line, LinePlot, LineStyle, MapPlot, Marker, draw_lines, draw_map};

use super::merge::Merged;
use super::tables::Table;
use crate::tally::profiles;

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

/// Missing errors drawn as no bar.
fn bars(e: &[f64]) -> Vec<f64> {
    e.iter().map(|x| if x.is_finite() { *x } else { 0.0 }).collect()
}

/// Column `name` of `t`, or an error naming the table.
fn col(t: &Table, file: &str, name: &str) -> Result<Vec<f64>, String> {
    t.column(name).ok_or_else(|| format!("the merged `{file}` has no column `{name}`"))
}

/// Draw the six figures into `dir`; the files written, relative to the
/// output directory (`plots/NAME.png`).
pub fn draw_all(dir: &Path, m: &Merged) -> Result<Vec<String>, String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("cannot create `{}`: {e}", dir.display()))?;
    let ds = m.dataset.as_ref().ok_or("plots need the merged NetCDF fields")?;
    let var = |n: &str| {
        ds.variable(n).map(|v| v.data.clone()).ok_or_else(|| format!("exosphere.nc has no `{n}`"))
    };
    let text =
        |n: &str| ds.attribute(n).and_then(|a| a.as_text()).map(str::to_string).unwrap_or_default();
    let (sp, body) = (text("species"), text("body"));
    let count = m
        .provenance
        .replicas
        .as_ref()
        .and_then(|r| r.get("merged"))
        .and_then(|x| x.as_array())
        .map_or(0, Vec::len);
    let of = format!("mean of {count} replicas");
    let e = |r: Result<(), exobound_products::ProductError>| r.map_err(|e| e.to_string());
    let lt_ticks = Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0]);
    let lat_ticks = Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]);
    let mut files = Vec::new();
    let mut done = |name: &str| files.push(format!("plots/{name}"));

    let (n_lt, n_lat) = (var("local_time")?.len(), var("latitude")?.len());
    e(draw_map(
        &MapPlot {
            title: format!("{sp} column density at {body}, run average, {of}"),
            x_label: "local time (h)".into(),
            y_label: "latitude (deg)".into(),
            x_edges: edges(0.0, 24.0, n_lt),
            y_edges: edges(-90.0, 90.0, n_lat),
            values: transpose(&var("column")?, n_lt, n_lat),
            colour_label: "column (atoms cm^-2)".into(),
            log_scale: true,
            x_ticks: lt_ticks.clone(),
            y_ticks: lat_ticks.clone(),
        },
        &dir.join("column_map.png"),
    ))?;
    done("column_map.png");

    let (gm, gl) = (var("cell_longitude")?.len(), var("cell_latitude")?.len());
    let res = transpose(&var("reservoir")?, gm, gl);
    let positive: Vec<f64> = res.iter().copied().filter(|v| *v > 0.0).collect();
    let (lo, hi) =
        positive.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &v| (lo.min(v), hi.max(v)));
    e(draw_map(
        &MapPlot {
            title: format!("adsorbed {sp} reservoir at the end of the run, {of}"),
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
    done("reservoir_map.png");

    let eq_file = "profiles/equator_local_time.csv";
    let eq = m.table(eq_file).ok_or("plots need the merged profiles")?;
    e(draw_lines(
        &LinePlot {
            title: format!("equatorial {sp} column by local time, {of}"),
            x_label: "local time (h)".into(),
            y_label: "column (atoms cm^-2)".into(),
            lines: vec![Line {
                label: "equatorial band, +-1 s.e. between replicas".into(),
                x: col(eq, eq_file, "local_time_h")?,
                y: col(eq, eq_file, "column_cm-2")?,
                y_err: Some(bars(&col(eq, eq_file, "column_error_cm-2")?)),
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
    done("equator_local_time.png");

    let lat_file = "profiles/latitude.csv";
    let lat = m.table(lat_file).ok_or("plots need the merged profiles")?;
    let profile = col(lat, lat_file, "column_cm-2")?;
    // cos and cos^2 references scaled to the equatorial value, as for a run.
    let eq_bins = profiles::equatorial_bins(profile.len(), 1e-9);
    let n0 = eq_bins.iter().map(|&j| profile[j]).sum::<f64>() / eq_bins.len() as f64;
    let fine: Vec<f64> = (0..=180).map(|k| -90.0 + k as f64).collect();
    e(draw_lines(
        &LinePlot {
            title: format!("dayside {sp} column by latitude (6-18 h), {of}"),
            x_label: "latitude (deg)".into(),
            y_label: "column (atoms cm^-2)".into(),
            lines: vec![
                Line {
                    label: "model, +-1 s.e. between replicas".into(),
                    x: col(lat, lat_file, "latitude_deg")?,
                    y: profile.clone(),
                    y_err: Some(bars(&col(lat, lat_file, "column_error_cm-2")?)),
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
    done("latitude_profile.png");

    let lf = "ledger.csv";
    let ledger = m.table(lf).ok_or("plots need the merged ledger")?;
    let days: Vec<f64> = col(ledger, lf, "time_s")?.iter().map(|t| t / 86_400.0).collect();
    let cumulative = |xs: Vec<f64>| -> Vec<f64> {
        let mut acc = 0.0;
        xs.into_iter()
            .map(|x| {
                acc += x;
                acc
            })
            .collect()
    };
    let lost_cols: Vec<String> = ledger
        .header
        .iter()
        .filter(|h| h.starts_with("lost_") && h.ends_with("_atoms") && !h.ends_with("_error_atoms"))
        .cloned()
        .collect();
    let mut lost = vec![0.0; days.len()];
    for c in &lost_cols {
        for (acc, x) in lost.iter_mut().zip(col(ledger, lf, c)?) {
            *acc += x;
        }
    }
    let spin_up_days = m
        .summary
        .pointer("/averaged_from/value")
        .and_then(serde_json::Value::as_f64)
        .unwrap_or(0.0)
        / 86_400.0;
    let mut markers = Vec::new();
    if spin_up_days > 0.0 {
        markers.push(Marker { x: spin_up_days, label: "end of spin-up".into() });
    }
    let line = |label: &str, y: Vec<f64>, style| Line {
        label: label.into(),
        x: days.clone(),
        y,
        y_err: None,
        style,
    };
    e(draw_lines(
        &LinePlot {
            title: format!("{sp} ledger over the run, {of}"),
            x_label: "simulated time (d)".into(),
            y_label: "atoms".into(),
            lines: vec![
                line("in flight", col(ledger, lf, "in_flight_atoms")?, LineStyle::Solid),
                line("adsorbed", col(ledger, lf, "adsorbed_atoms")?, LineStyle::Solid),
                line(
                    "supplied from bulk (cumulative)",
                    cumulative(col(ledger, lf, "supplied_from_bulk_atoms")?),
                    LineStyle::Dashed,
                ),
                line("lost in flight (cumulative)", cumulative(lost), LineStyle::Dashed),
                line(
                    "escaped (cumulative)",
                    cumulative(col(ledger, lf, "escaped_atoms")?),
                    LineStyle::Dotted,
                ),
            ],
            markers,
            log_y: true,
            x_range: None,
            x_ticks: None,
        },
        &dir.join("ledger.png"),
    ))?;
    done("ledger.png");

    // The peak shift window by window, with its between-replica error.
    let wf = "windows.csv";
    let w = m.table(wf).ok_or("plots need the merged windows table")?;
    let spin = w.position("spin_up").ok_or("the merged windows.csv has no `spin_up`")?;
    let keep: Vec<usize> = (0..w.rows.len())
        .filter(|&r| !matches!(&w.rows[r][spin], super::tables::Cell::Text(t) if t == "true"))
        .collect();
    if !keep.is_empty() {
        let (start, end) = (col(w, wf, "start_s")?, col(w, wf, "end_s")?);
        let (shift, err) = (col(w, wf, "peak_shift_deg")?, col(w, wf, "peak_shift_error_deg")?);
        e(draw_lines(
            &LinePlot {
                title: format!("{sp} equatorial column peak shift, window by window, {of}"),
                x_label: "simulated time at the window's middle (d)".into(),
                y_label: "shift from the subsolar point (deg, negative = dawn)".into(),
                lines: vec![Line {
                    label: "per averaging window, +-1 s.e. between replicas".into(),
                    x: keep.iter().map(|&r| 0.5 * (start[r] + end[r]) / 86_400.0).collect(),
                    y: keep.iter().map(|&r| shift[r]).collect(),
                    y_err: Some(bars(&keep.iter().map(|&r| err[r]).collect::<Vec<_>>())),
                    style: LineStyle::Points,
                }],
                markers: vec![],
                log_y: false,
                x_range: None,
                x_ticks: None,
            },
            &dir.join("phase_series.png"),
        ))?;
        done("phase_series.png");
    }
    Ok(files)
}

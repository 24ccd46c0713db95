//! The plots of a merged replica set: the six figures of a run, drawn from
//! the merged products, with error bars from the scatter between replicas.
//!
//! Why this exists: a run's figures are drawn from its engine state
//! (`output::figures`), which a merge does not have; a merged directory
//! should still open with the same six pictures. They are drawn here from
//! the merged NetCDF fields and CSV tables with the run's own figure
//! specifications (`output::figures`), the same axes and units, titles that say they
//! show a mean of replicas, and error bars of one standard error between
//! replicas.

use std::path::Path;

use exobound_products::{ProductError, draw_lines, draw_map};

use super::merge::Merged;
use super::tables::Table;
use crate::output::figures::{
    LedgerSeries, column_map, equator_plot, latitude_plot, ledger_plot, reservoir_map, save,
    shift_plot,
};

/// Column `name` of `t`, or an error naming the table.
fn col(t: &Table, file: &str, name: &str) -> Result<Vec<f64>, String> {
    t.column(name).ok_or_else(|| format!("the merged `{file}` has no column `{name}`"))
}

/// Draw the six figures into `dir`, in the replicas' plot format; the
/// files written, relative to the output directory (`plots/NAME.png` or
/// `.svg`).
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
    let mut files = Vec::new();
    // Each figure in the replicas' plot format(s); the files written are listed.
    let mut write = |stem: &str, draw: &dyn Fn(&Path) -> Result<(), ProductError>| {
        save(dir, stem, m.plot_format, draw)?;
        files.extend(m.plot_format.extensions().iter().map(|ext| format!("plots/{stem}.{ext}")));
        Ok::<(), String>(())
    };

    let (n_lt, n_lat) = (var("local_time")?.len(), var("latitude")?.len());
    let title = format!("{sp} column density at {body}, run average, {of}");
    let map = column_map(title, n_lt, n_lat, &var("column")?, None);
    let plot = map;
    write("column_map", &|path| draw_map(&plot, path))?;

    let (gm, gl) = (var("cell_longitude")?.len(), var("cell_latitude")?.len());
    let title = format!("adsorbed {sp} reservoir at the end of the run, {of}");
    // The file's (cell_latitude, cell_longitude) to the map's (longitude, latitude) layout.
    let reservoir = var("reservoir")?;
    if reservoir.len() != gl * gm {
        return Err(format!(
            "exosphere.nc: `reservoir` has {} values, not {gl} x {gm}",
            reservoir.len()
        ));
    }
    let reservoir = exobound_products::swap_outer_axes(&reservoir, gl, gm, 1);
    let map = reservoir_map(title, gm, gl, &reservoir);
    let plot = map;
    write("reservoir_map", &|path| draw_map(&plot, path))?;

    let eq_file = "profiles/equator_local_time.csv";
    let eq = m.table(eq_file).ok_or("plots need the merged profiles")?;
    let plot = equator_plot(
        format!("equatorial {sp} column by local time, {of}"),
        "equatorial band, +-1 s.e. between replicas".into(),
        col(eq, eq_file, "local_time_h")?,
        col(eq, eq_file, "column_cm-2")?,
        &col(eq, eq_file, "column_error_cm-2")?,
        m.summary
            .pointer("/equatorial_column_peak/uncertainty_deg")
            .and_then(serde_json::Value::as_f64)
            .map(|deg| deg / 15.0),
    );
    write("equator_local_time", &|path| draw_lines(&plot, path))?;

    let lat_file = "profiles/latitude.csv";
    let lat = m.table(lat_file).ok_or("plots need the merged profiles")?;
    let plot = latitude_plot(
        format!("dayside {sp} column by latitude (6-18 h), {of}"),
        "model, +-1 s.e. between replicas".into(),
        col(lat, lat_file, "latitude_deg")?,
        col(lat, lat_file, "column_cm-2")?,
        &col(lat, lat_file, "column_error_cm-2")?,
    );
    write("latitude_profile", &|path| draw_lines(&plot, path))?;

    let lf = "ledger.csv";
    let ledger = m.table(lf).ok_or("plots need the merged ledger")?;
    let days: Vec<f64> = col(ledger, lf, "time_s")?.iter().map(|t| t / 86_400.0).collect();
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
    let series = LedgerSeries {
        days,
        in_flight: col(ledger, lf, "in_flight_atoms")?,
        adsorbed: col(ledger, lf, "adsorbed_atoms")?,
        supplied: col(ledger, lf, "supplied_from_bulk_atoms")?,
        lost,
        escaped: col(ledger, lf, "escaped_atoms")?,
        left_bound: col(ledger, lf, "left_bound_atoms")?,
    };
    let title = format!("{sp} ledger over the run, {of}");
    let plot = ledger_plot(title, series, spin_up_days);
    write("ledger", &|path| draw_lines(&plot, path))?;

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
        let err: Vec<f64> = keep.iter().map(|&r| err[r]).collect();
        let plot = shift_plot(
            format!("{sp} equatorial column peak shift, window by window, {of}"),
            "per averaging window, +-1 s.e. between replicas".into(),
            keep.iter().map(|&r| 0.5 * (start[r] + end[r]) / 86_400.0).collect(),
            keep.iter().map(|&r| shift[r]).collect(),
            Some(&err),
            vec![],
        );
        write("phase_series", &|path| draw_lines(&plot, path))?;
    }
    Ok(files)
}

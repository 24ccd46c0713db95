//! The plots of a run (PNG, SVG or both, by `outputs.plot_format`):
//! column map, reservoir map, equatorial local-time profile, latitude
//! profile, the ledger over time, the exosphere by source, the column
//! window by window and the peak shift's phase series.
//!
//! Why this exists: the first look at a run is a picture. This module
//! chooses what each figure shows (units in every label, the subsolar
//! point and terminators marked, cos and cos^2 references on the latitude
//! profile); the drawing is in the `exobound-products` crate. The figure
//! specifications are built by the `*_plot`/`*_map` functions here, which
//! the merged replica set (`replica::figures`) draws from as well.

use std::path::Path;

use exobound_products::{
    ColourScale, Line, LinePlot, LineStyle, MapPanels, MapPlot, Marker, Overlay, draw_lines,
    draw_map, draw_map_panels,
};

use super::fields::Fields;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::{PlotFormat, Scenario};

/// Edges `lo..hi` in `n` equal bins.
pub(crate) fn edges(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..=n).map(|k| lo + (hi - lo) * k as f64 / n as f64).collect()
}

/// Transpose a `[x][y]` array (nx, ny) to `[y][x]`.
pub(crate) fn transpose(v: &[f64], nx: usize, ny: usize) -> Vec<f64> {
    let mut out = vec![0.0; nx * ny];
    for i in 0..nx {
        for j in 0..ny {
            out[j * nx + i] = v[i * ny + j];
        }
    }
    out
}

/// Missing errors drawn as no bar.
pub(crate) fn bars(e: &[f64]) -> Vec<f64> {
    e.iter().map(|x| if x.is_finite() { *x } else { 0.0 }).collect()
}

/// The dawn terminator, subsolar point and dusk terminator on a local-time axis (h).
fn local_time_markers() -> Vec<Marker> {
    vec![
        Marker { x: 6.0, label: "dawn terminator".into() },
        Marker { x: 12.0, label: "subsolar".into() },
        Marker { x: 18.0, label: "dusk terminator".into() },
    ]
}

fn lt_ticks() -> Option<Vec<f64>> {
    Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0])
}

fn lat_ticks() -> Option<Vec<f64>> {
    Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0])
}

/// The terminator and the subsolar point on a local time (h) x latitude
/// (deg) map, for a subsolar latitude `delta` (rad): where cos SZA = sin
/// lat sin delta + cos lat cos delta cos h = 0, h the hour angle, i.e.
/// lat = atan(-cos h / tan delta), or the meridians 6 h and 18 h when
/// delta = 0 (spherical law of cosines).
pub(crate) fn terminators(delta: f64) -> Vec<Overlay> {
    let mut out = Vec::new();
    if delta.abs() < 1e-9 {
        for (lt, label) in [(6.0, "dawn terminator"), (18.0, "dusk terminator")] {
            out.push(Overlay {
                label: label.into(),
                points: vec![(lt, -90.0), (lt, 90.0)],
                style: LineStyle::Dashed,
            });
        }
    } else {
        let points = (0..=480)
            .map(|k| {
                let lt = 24.0 * k as f64 / 480.0;
                let h = (lt - 12.0) * std::f64::consts::PI / 12.0;
                (lt, (-h.cos() / delta.tan()).atan().to_degrees())
            })
            .collect();
        out.push(Overlay { label: "terminator".into(), points, style: LineStyle::Dashed });
    }
    out.push(Overlay {
        label: "subsolar".into(),
        points: vec![(12.0, delta.to_degrees())],
        style: LineStyle::Solid,
    });
    out
}

/// The column map over local time x latitude; `column` (atoms cm^-2) in
/// `[local time][latitude]` order; the terminators and the subsolar point
/// drawn when the subsolar latitude `subsolar_latitude` (rad) is known.
pub(crate) fn column_map(
    title: String,
    n_lt: usize,
    n_lat: usize,
    column: &[f64],
    subsolar_latitude: Option<f64>,
) -> MapPlot {
    MapPlot {
        title,
        x_label: "local time (h)".into(),
        y_label: "latitude (deg)".into(),
        x_edges: edges(0.0, 24.0, n_lt),
        y_edges: edges(-90.0, 90.0, n_lat),
        values: transpose(column, n_lt, n_lat),
        colour_label: "column (atoms cm^-2)".into(),
        scale: ColourScale::Log,
        marks: None,
        x_log: false,
        y_log: false,
        x_ticks: lt_ticks(),
        y_ticks: lat_ticks(),
        x_tick_labels: None,
        y_tick_labels: None,
        overlays: subsolar_latitude.map(terminators).unwrap_or_default(),
    }
}

/// The reservoir map over longitude x latitude; `reservoir` (atoms cm^-2)
/// in `[longitude][latitude]` order, `gm` x `gl` cells; a log scale when it
/// spans more than two decades.
pub(crate) fn reservoir_map(title: String, gm: usize, gl: usize, reservoir: &[f64]) -> MapPlot {
    let res = transpose(reservoir, gm, gl);
    let positive: Vec<f64> = res.iter().copied().filter(|v| *v > 0.0).collect();
    let (lo, hi) =
        positive.iter().fold((f64::INFINITY, 0.0f64), |(lo, hi), &v| (lo.min(v), hi.max(v)));
    MapPlot {
        title,
        x_label: "east longitude (deg)".into(),
        y_label: "latitude (deg)".into(),
        x_edges: edges(0.0, 360.0, gm),
        y_edges: edges(-90.0, 90.0, gl),
        values: res,
        colour_label: "surface density (atoms cm^-2)".into(),
        scale: if !positive.is_empty() && hi > 100.0 * lo {
            ColourScale::Log
        } else {
            ColourScale::Linear
        },
        marks: None,
        x_log: false,
        y_log: false,
        x_ticks: Some(vec![0.0, 60.0, 120.0, 180.0, 240.0, 300.0, 360.0]),
        y_ticks: lat_ticks(),
        x_tick_labels: None,
        y_tick_labels: None,
        overlays: vec![],
    }
}

/// The equatorial column (atoms cm^-2) by local time (h), with error bars,
/// the terminators and subsolar point marked, and the peak of the smooth
/// fit that the summary reports (`profiles::peak_local_time`), with its
/// standard error `peak_error_h` (h) when known.
pub(crate) fn equator_plot(
    title: String,
    label: String,
    local_time_h: Vec<f64>,
    column: Vec<f64>,
    error: &[f64],
    peak_error_h: Option<f64>,
) -> LinePlot {
    let mut markers = local_time_markers();
    if let Some(peak) = crate::tally::profiles::peak_local_time(&column) {
        let label = match peak_error_h.filter(|e| e.is_finite()) {
            Some(e) => format!("fitted peak {peak:.2} +- {e:.2} h"),
            None => format!("fitted peak {peak:.2} h"),
        };
        markers.push(Marker { x: peak, label });
    }
    LinePlot {
        title,
        x_label: "local time (h)".into(),
        y_label: "column (atoms cm^-2)".into(),
        lines: vec![Line {
            label,
            x: local_time_h,
            y: column,
            y_err: Some(bars(error)),
            style: LineStyle::Points,
        }],
        markers,
        log_x: false,
        log_y: false,
        x_range: Some((0.0, 24.0)),
        x_ticks: lt_ticks(),
    }
}

/// The equatorial column (atoms cm^-2) by local time (h), the total and
/// each source module's share (`by_source`: name, profile), with the
/// terminators and subsolar point marked.
pub(crate) fn source_equator_plot(
    title: String,
    local_time_h: Vec<f64>,
    total: Vec<f64>,
    by_source: Vec<(String, Vec<f64>)>,
) -> LinePlot {
    let mut lines = vec![Line {
        label: "all sources".into(),
        x: local_time_h.clone(),
        y: total,
        y_err: None,
        style: LineStyle::Solid,
    }];
    for (name, y) in by_source {
        lines.push(Line {
            label: name,
            x: local_time_h.clone(),
            y,
            y_err: None,
            style: LineStyle::Dashed,
        });
    }
    LinePlot {
        title,
        x_label: "local time (h)".into(),
        y_label: "column (atoms cm^-2)".into(),
        lines,
        markers: local_time_markers(),
        log_x: false,
        log_y: true,
        x_range: Some((0.0, 24.0)),
        x_ticks: lt_ticks(),
    }
}

/// Most panels of the per-window column figure; with more windows every
/// k-th one is drawn, dimensionless.
const MOST_PANELS: usize = 36;

/// The column map of each averaging window after the spin-up, as small
/// multiples on one colour scale; each panel named by its middle (d) and
/// the body's place on its orbit then (lunar phase, or true anomaly).
pub(crate) fn window_panels(
    title: String,
    n_lt: usize,
    n_lat: usize,
    windows: &[&crate::driver::WindowRecord],
) -> MapPanels {
    let step = windows.len().div_ceil(MOST_PANELS).max(1);
    let panels: Vec<(String, Vec<f64>)> = windows
        .iter()
        .step_by(step)
        .map(|w| {
            let day = 0.5 * (w.start + w.end) / 86_400.0;
            let p = &w.position;
            let place = if p.lunar_phase.is_finite() {
                format!(", phase {:.2}", p.lunar_phase)
            } else if p.true_anomaly_deg.is_finite() {
                format!(", TA {:.0} deg", p.true_anomaly_deg)
            } else {
                String::new()
            };
            (format!("day {day:.1}{place}"), transpose(&w.column, n_lt, n_lat))
        })
        .collect();
    let columns = match panels.len() {
        0..=4 => 2,
        5..=12 => 4,
        _ => 6,
    };
    MapPanels {
        title,
        x_label: "local time (h)".into(),
        y_label: "latitude (deg)".into(),
        x_edges: edges(0.0, 24.0, n_lt),
        y_edges: edges(-90.0, 90.0, n_lat),
        panels,
        colour_label: "column (atoms cm^-2)".into(),
        scale: ColourScale::Log,
        columns,
        x_ticks: Some(vec![0.0, 6.0, 12.0, 18.0, 24.0]),
        y_ticks: Some(vec![-90.0, 0.0, 90.0]),
    }
}

/// The dayside column (atoms cm^-2) by latitude (deg), with error bars and
/// cos and cos^2 references scaled to the equatorial value.
pub(crate) fn latitude_plot(
    title: String,
    label: String,
    latitude_deg: Vec<f64>,
    column: Vec<f64>,
    error: &[f64],
) -> LinePlot {
    let eq_bins = crate::tally::profiles::equatorial_bins(column.len(), 1e-9);
    let n0 = eq_bins.iter().map(|&j| column[j]).sum::<f64>() / eq_bins.len() as f64;
    let fine: Vec<f64> = (0..=180).map(|k| -90.0 + k as f64).collect();
    // The fit the summary reports (`latitude_profile_fit`), drawn solid.
    let lat_rad: Vec<f64> = latitude_deg.iter().map(|d| d.to_radians()).collect();
    let fit = crate::tally::profiles::fit_cos_power(&lat_rad, &column).map(|c| Line {
        label: format!("fit A cos^n(lat), n = {:.2}", c.n),
        x: fine.clone(),
        y: fine.iter().map(|l| c.amplitude * l.to_radians().cos().max(0.0).powf(c.n)).collect(),
        y_err: None,
        style: LineStyle::Solid,
    });
    LinePlot {
        title,
        x_label: "latitude (deg)".into(),
        y_label: "column (atoms cm^-2)".into(),
        lines: vec![
            Line {
                label,
                x: latitude_deg.clone(),
                y: column,
                y_err: Some(bars(error)),
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
        ]
        .into_iter()
        .chain(fit)
        .collect(),
        markers: vec![],
        log_x: false,
        log_y: false,
        x_range: Some((-90.0, 90.0)),
        x_ticks: lat_ticks(),
    }
}

/// Ledger series (atoms) over simulated time, for [`ledger_plot`].
pub(crate) struct LedgerSeries {
    /// Simulated time at each step's end, d.
    pub days: Vec<f64>,
    /// Atoms in flight.
    pub in_flight: Vec<f64>,
    /// Atoms adsorbed.
    pub adsorbed: Vec<f64>,
    /// Atoms supplied from the bulk per step.
    pub supplied: Vec<f64>,
    /// Atoms lost in flight per step, all losses.
    pub lost: Vec<f64>,
    /// Atoms escaped (unbound at the boundary) per step.
    pub escaped: Vec<f64>,
    /// Atoms that left through the boundary on bound paths per step.
    pub left_bound: Vec<f64>,
}

/// The ledger over the run: stocks, and cumulative flows; the end of the
/// spin-up (d) marked when positive.
pub(crate) fn ledger_plot(title: String, l: LedgerSeries, spin_up_days: f64) -> LinePlot {
    let cumulative = |xs: Vec<f64>| -> Vec<f64> {
        let mut acc = 0.0;
        xs.into_iter()
            .map(|x| {
                acc += x;
                acc
            })
            .collect()
    };
    let mut markers = Vec::new();
    if spin_up_days > 0.0 {
        markers.push(Marker { x: spin_up_days, label: "end of spin-up".into() });
    }
    let days = l.days;
    let line = |label: &str, y: Vec<f64>, style| Line {
        label: label.into(),
        x: days.clone(),
        y,
        y_err: None,
        style,
    };
    LinePlot {
        title,
        x_label: "simulated time (d)".into(),
        y_label: "atoms".into(),
        lines: vec![
            line("in flight", l.in_flight, LineStyle::Solid),
            line("adsorbed", l.adsorbed, LineStyle::Solid),
            line("supplied from bulk (cumulative)", cumulative(l.supplied), LineStyle::Dashed),
            line("lost in flight (cumulative)", cumulative(l.lost), LineStyle::Dashed),
            line("escaped, unbound (cumulative)", cumulative(l.escaped), LineStyle::Dotted),
            line("left the domain bound (cumulative)", cumulative(l.left_bound), LineStyle::Dotted),
        ],
        markers,
        log_x: false,
        log_y: true,
        x_range: None,
        x_ticks: None,
    }
}

/// The equatorial column peak's shift (deg, negative = dawn) window by
/// window, against the window's middle (d), with error bars if given.
pub(crate) fn shift_plot(
    title: String,
    label: String,
    mid_days: Vec<f64>,
    shift_deg: Vec<f64>,
    error: Option<&[f64]>,
    markers: Vec<Marker>,
) -> LinePlot {
    // Half a window's spacing of room at each end, so the end points clear the frame.
    let x_range = match finite_span(&mid_days) {
        Some((lo, hi)) if mid_days.len() > 1 && hi > lo => {
            let pad = 0.5 * (hi - lo) / (mid_days.len() - 1) as f64;
            Some((lo - pad, hi + pad))
        }
        _ => None,
    };
    LinePlot {
        title,
        x_label: "simulated time at the window's middle (d)".into(),
        y_label: "shift from the subsolar point (deg, negative = dawn)".into(),
        lines: vec![Line {
            label,
            x: mid_days,
            y: shift_deg,
            y_err: error.map(bars),
            style: LineStyle::Points,
        }],
        markers,
        log_x: false,
        log_y: false,
        x_range,
        x_ticks: None,
    }
}

/// The smallest and largest finite value of `x`, if any.
fn finite_span(x: &[f64]) -> Option<(f64, f64)> {
    x.iter().filter(|v| v.is_finite()).fold(None, |acc, &v| match acc {
        None => Some((v, v)),
        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
    })
}

/// The noise of one window's value in a series `x` with a slow trend, from the mean square
/// successive difference (von Neumann, Kent, Bellinson & Hart 1941, Ann. Math. Statist. 12,
/// 153-162): delta^2 = sum (x[i+1] - x[i])^2 / (pairs), whose expectation for independent
/// noise of variance sigma^2 is 2 sigma^2, while a trend of slope s per step adds only s^2;
/// so sigma = sqrt(delta^2 / 2), in the unit of `x`. Pairs with a non-finite member are left
/// out; None without a pair.
pub(crate) fn successive_difference_sd(x: &[f64]) -> Option<f64> {
    let d2: Vec<f64> = x
        .windows(2)
        .filter(|w| w[0].is_finite() && w[1].is_finite())
        .map(|w| (w[1] - w[0]) * (w[1] - w[0]))
        .collect();
    (!d2.is_empty()).then(|| (d2.iter().sum::<f64>() / d2.len() as f64 / 2.0).sqrt())
}

/// The start and end (d) of each interval in which the solar wind is
/// scaled (shielded when its factor is 0), for the phase series.
fn solar_wind_markers(scenario: &Scenario) -> Vec<Marker> {
    let end_day = scenario.plan.steps as f64 * scenario.config.dt / 86_400.0;
    let mut out = Vec::new();
    for iv in &scenario.model.solar_wind.schedule {
        let what = if iv.factor == 0.0 {
            "solar wind off".to_string()
        } else {
            format!("solar wind x{}", iv.factor)
        };
        let (a, b) = (iv.start / 86_400.0, iv.end / 86_400.0);
        if a < end_day {
            out.push(Marker { x: a, label: what });
        }
        if b < end_day {
            out.push(Marker { x: b, label: "solar wind back".into() });
        }
    }
    out
}

/// Writes one figure as `dir/STEM.EXT` for each file extension of `format`, through `draw`.
pub(crate) fn save(
    dir: &Path,
    stem: &str,
    format: PlotFormat,
    draw: impl Fn(&Path) -> Result<(), exobound_products::ProductError>,
) -> Result<(), String> {
    for ext in format.extensions() {
        draw(&dir.join(format!("{stem}.{ext}"))).map_err(|e| e.to_string())?;
    }
    Ok(())
}

/// Draw every plot into `dir`, in the scenario's plot format.
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
    let format = scenario.plan.products.plot_format;
    let title = format!("{sp} column density at {body}, run average");
    // The terminators where the Sun stood at the middle of the averaged time.
    let mid = 0.5 * (scenario.plan.spin_up_steps + scenario.plan.steps) as f64 * scenario.config.dt;
    let delta = scenario.model.sun.subsolar_latitude(&scenario.model.body, mid);
    let plot = column_map(title, n_lt, n_lat, &f.column, Some(delta));
    save(dir, "column_map", format, |path| draw_map(&plot, path))?;
    let (gl, gm) = (f.grid_latitude_deg.len(), f.grid_longitude_deg.len());
    let title = format!("adsorbed {sp} reservoir at the end of the run");
    let plot = reservoir_map(title, gm, gl, &f.reservoir);
    save(dir, "reservoir_map", format, |path| draw_map(&plot, path))?;
    let label = format!(
        "|lat| < {:.0} deg, +-1 s.e. over {} windows",
        scenario.plan.equator_band.to_degrees(),
        f.windows
    );
    // The peak's standard error, from the window-to-window scatter of the
    // shifts (deg; 15 deg per hour), as in the summary.
    let peak_error_h = crate::tally::profiles::mean_and_error(&record.window_shifts_deg()).1 / 15.0;
    let plot = equator_plot(
        format!("equatorial {sp} column by local time"),
        label,
        f.local_time_h.clone(),
        f.equator_profile.clone(),
        &f.equator_error,
        Some(peak_error_h),
    );
    save(dir, "equator_local_time", format, |path| draw_lines(&plot, path))?;
    let plot = latitude_plot(
        format!("dayside {sp} column by latitude (6-18 h)"),
        "model, +-1 s.e.".into(),
        f.latitude_deg.clone(),
        f.latitude_profile.clone(),
        &f.latitude_error,
    );
    save(dir, "latitude_profile", format, |path| draw_lines(&plot, path))?;
    let rows = &sim.ledger().rows;
    let pick = |p: &dyn Fn(&crate::tally::LedgerRow) -> f64| rows.iter().map(p).collect();
    let series = LedgerSeries {
        days: pick(&|r| r.time / 86_400.0),
        in_flight: pick(&|r| r.in_flight),
        adsorbed: pick(&|r| r.adsorbed),
        supplied: pick(&|r| r.supplied_from_bulk),
        lost: pick(&|r| r.losses.iter().sum()),
        escaped: pick(&|r| r.escaped),
        left_bound: pick(&|r| r.left_bound),
    };
    let spin_up_days = scenario.plan.spin_up_steps as f64 * scenario.config.dt / 86_400.0;
    let title = format!("{sp} ledger over the run");
    let plot = ledger_plot(title, series, spin_up_days);
    save(dir, "ledger", format, |path| draw_lines(&plot, path))?;
    // The exosphere by source: each source module's equatorial column.
    let by_source = record.averages.column_by_source_cm2();
    let n_col = n_lt * n_lat;
    if by_source.len() == scenario.processes.sources.len() * n_col && !by_source.is_empty() {
        let band = scenario.plan.equator_band;
        let parts = scenario
            .processes
            .sources
            .iter()
            .zip(by_source.chunks(n_col))
            .map(|(m, c)| {
                let profile = crate::tally::profiles::equatorial_profile(c, n_lt, n_lat, band);
                (m.name().to_string(), profile)
            })
            .collect();
        let plot = source_equator_plot(
            format!("equatorial {sp} column by local time and source"),
            f.local_time_h.clone(),
            f.equator_profile.clone(),
            parts,
        );
        save(dir, "equator_by_source", format, |path| draw_lines(&plot, path))?;
    }
    // Phase-resolved shape measures: the peak shift window by window.
    let win: Vec<&crate::driver::windows::WindowRecord> =
        record.windows.iter().filter(|w| !w.spin_up).collect();
    if win.iter().all(|w| w.column.len() == n_col) && !win.is_empty() {
        let plot =
            window_panels(format!("{sp} column at {body}, window by window"), n_lt, n_lat, &win);
        save(dir, "column_by_window", format, |path| draw_map_panels(&plot, path))?;
    }
    if !win.is_empty() {
        // One run has no replicas: the window-to-window noise comes from the successive
        // differences of the series itself, the same bar on every window.
        let shifts: Vec<f64> = win.iter().map(|w| w.shift_deg).collect();
        let sd = successive_difference_sd(&shifts);
        let (label, bars) = match sd {
            Some(s) => (
                format!(
                    "per averaging window; bars +-{s:.2} deg, the window-to-window noise from \
                     the mean square successive difference (same for every window)"
                ),
                Some(vec![s; shifts.len()]),
            ),
            None => ("per averaging window (one window: no noise estimate)".to_string(), None),
        };
        let plot = shift_plot(
            format!("{sp} equatorial column peak shift, window by window"),
            label,
            win.iter().map(|w| 0.5 * (w.start + w.end) / 86_400.0).collect(),
            shifts,
            bars.as_deref(),
            solar_wind_markers(scenario),
        );
        save(dir, "phase_series", format, |path| draw_lines(&plot, path))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn successive_difference_noise_matches_a_hand_computed_value_and_ignores_a_trend() {
        // 1, 3, 2, 5, 4: differences 2, -1, 3, -1, squares sum 15 over 4 pairs = 3.75 = delta^2;
        // sigma = sqrt(3.75 / 2) = 1.369306... (von Neumann et al. 1941: E delta^2 = 2 sigma^2).
        let s = successive_difference_sd(&[1.0, 3.0, 2.0, 5.0, 4.0]).unwrap();
        assert!((s - 1.875f64.sqrt()).abs() < 1e-15, "{s}");
        // A pure linear trend of 2 per window has no noise, and contributes only slope^2 / 2
        // to sigma^2 (sigma = sqrt 2), far below its scatter about the mean (s.d. 3.16).
        let trend: Vec<f64> = (0..5).map(|i| 10.0 + 2.0 * f64::from(i)).collect();
        let s = successive_difference_sd(&trend).unwrap();
        assert!((s - 2f64.sqrt()).abs() < 1e-15, "{s}");
        // A gap breaks the pairs around it; fewer than two finite neighbours give no estimate.
        let s = successive_difference_sd(&[1.0, 3.0, f64::NAN, 5.0, 4.0]).unwrap();
        assert!((s - (2.5f64 / 2.0).sqrt()).abs() < 1e-15, "{s}");
        assert_eq!(successive_difference_sd(&[1.0]), None);
        assert_eq!(successive_difference_sd(&[1.0, f64::NAN]), None);
    }
}

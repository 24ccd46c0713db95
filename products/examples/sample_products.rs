//! Writes one of each product from made-up exosphere-like fields, so a person (or the Python
//! check) can look at them: `cargo run -p exobound-products --release --example sample_products
//! -- DIR` (default DIR: the system temp dir + `exobound-products-sample`).

use std::f64::consts::PI;
use std::path::PathBuf;

use exobound_products::{
    ColourScale, Dataset, Line, LinePlot, LineStyle, MapPlot, Marker, Variable, draw_lines,
    draw_map, write_netcdf,
};

fn main() -> Result<(), Box<dyn std::error::Error>> {
    let dir = std::env::args()
        .nth(1)
        .map(PathBuf::from)
        .unwrap_or_else(|| std::env::temp_dir().join("exobound-products-sample"));
    std::fs::create_dir_all(&dir)?;

    // A made-up sodium column: brightest near noon, falling with latitude, grey at the poles.
    let (nlt, nlat) = (48, 36);
    let lt_edges: Vec<f64> = (0..=nlt).map(|i| 24.0 * i as f64 / nlt as f64).collect();
    let lat_edges: Vec<f64> = (0..=nlat).map(|j| -90.0 + 180.0 * j as f64 / nlat as f64).collect();
    let centre = |e: &[f64]| e.windows(2).map(|w| 0.5 * (w[0] + w[1])).collect::<Vec<f64>>();
    let (lt, lat) = (centre(&lt_edges), centre(&lat_edges));
    let mut column = Vec::new();
    for &la in &lat {
        for &t in &lt {
            let day = ((t - 12.0) / 24.0 * 2.0 * PI).cos().max(0.0);
            let v = 2e13 * la.to_radians().cos().powf(1.5) * (0.05 + day) + 1e11;
            column.push(if la.abs() > 85.0 { f64::NAN } else { v });
        }
    }
    draw_map(
        &MapPlot {
            title: "Na column density (sample field)".into(),
            x_label: "local time (h)".into(),
            y_label: "latitude (°)".into(),
            x_edges: lt_edges.clone(),
            y_edges: lat_edges.clone(),
            values: column.clone(),
            colour_label: "column density (m⁻²)".into(),
            scale: ColourScale::Log,
            marks: None,
            x_log: false,
            y_log: false,
            x_ticks: Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0]),
            y_ticks: Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]),
            x_tick_labels: None,
            y_tick_labels: None,
            overlays: vec![],
        },
        &dir.join("column_map.png"),
    )?;

    // A made-up adsorbed reservoir on longitude × latitude, linear scale.
    let nlon = 72;
    let lon_edges: Vec<f64> = (0..=nlon).map(|i| 360.0 * i as f64 / nlon as f64).collect();
    let lon = centre(&lon_edges);
    let mut reservoir = Vec::new();
    for &la in &lat {
        for &lo in &lon {
            reservoir
                .push(3e16 * (1.0 + 0.6 * (lo.to_radians() * 2.0).sin()) * la.to_radians().cos());
        }
    }
    draw_map(
        &MapPlot {
            title: "Adsorbed Na reservoir (sample field)".into(),
            x_label: "longitude (° E)".into(),
            y_label: "latitude (°)".into(),
            x_edges: lon_edges,
            y_edges: lat_edges.clone(),
            values: reservoir,
            colour_label: "surface density (m⁻²)".into(),
            scale: ColourScale::Linear,
            marks: None,
            x_log: false,
            y_log: false,
            x_ticks: Some((0..=6).map(|k| 60.0 * k as f64).collect()),
            y_ticks: Some(vec![-90.0, -45.0, 0.0, 45.0, 90.0]),
            x_tick_labels: None,
            y_tick_labels: None,
            overlays: vec![],
        },
        &dir.join("reservoir_map.png"),
    )?;

    // Equatorial local-time profile with the subsolar point and terminators.
    let eq = nlat / 2;
    let profile: Vec<f64> = (0..nlt).map(|i| column[eq * nlt + i]).collect();
    draw_lines(
        &LinePlot {
            title: "Equatorial column versus local time".into(),
            x_label: "local time (h)".into(),
            y_label: "column density (m⁻²)".into(),
            lines: vec![Line {
                label: "model (equator)".into(),
                x: lt.clone(),
                y: profile,
                y_err: None,
                style: LineStyle::Solid,
            }],
            markers: vec![
                Marker { x: 6.0, label: "dawn terminator".into() },
                Marker { x: 12.0, label: "subsolar".into() },
                Marker { x: 18.0, label: "dusk terminator".into() },
            ],
            log_x: false,
            log_y: true,
            x_range: Some((0.0, 24.0)),
            x_ticks: Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0]),
        },
        &dir.join("local_time_profile.png"),
    )?;

    // Latitude profile at noon against cos and cos² references.
    let noon = nlt / 2;
    let peak = column[eq * nlt + noon];
    let lat_profile: Vec<f64> = (0..nlat).map(|j| column[j * nlt + noon] / peak).collect();
    let err: Vec<f64> = lat_profile.iter().map(|v| 0.04 + 0.05 * v.abs()).collect();
    let fine: Vec<f64> = (0..=180).map(|k| -90.0 + k as f64).collect();
    draw_lines(
        &LinePlot {
            title: "Noon column versus latitude".into(),
            x_label: "latitude (°)".into(),
            y_label: "column / equatorial column (1)".into(),
            lines: vec![
                Line {
                    label: "model at noon".into(),
                    x: lat.clone(),
                    y: lat_profile,
                    y_err: Some(err),
                    style: LineStyle::Points,
                },
                Line {
                    label: "cos(latitude)".into(),
                    x: fine.clone(),
                    y: fine.iter().map(|l: &f64| l.to_radians().cos()).collect(),
                    y_err: None,
                    style: LineStyle::Dashed,
                },
                Line {
                    label: "cos²(latitude)".into(),
                    x: fine.clone(),
                    y: fine.iter().map(|l: &f64| l.to_radians().cos().powi(2)).collect(),
                    y_err: None,
                    style: LineStyle::Dotted,
                },
            ],
            markers: vec![],
            log_x: false,
            log_y: false,
            x_range: Some((-90.0, 90.0)),
            x_ticks: Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]),
        },
        &dir.join("latitude_profile.png"),
    )?;

    // A ledger over time.
    let days: Vec<f64> = (0..=200).map(|k| k as f64 * 0.5).collect();
    let aloft: Vec<f64> = days.iter().map(|d| 1e28 * (1.0 - (-d / 8.0).exp()) + 1e25).collect();
    let ionised: Vec<f64> = days.iter().map(|d| 4e27 * (d / 30.0).min(1.0) + 1e25).collect();
    let stuck: Vec<f64> = days.iter().map(|d| 2e29 * (1.0 + 0.3 * (d / 10.0).sin())).collect();
    draw_lines(
        &LinePlot {
            title: "Atom ledger".into(),
            x_label: "time (Earth days)".into(),
            y_label: "atoms (1)".into(),
            lines: vec![
                Line {
                    label: "in flight".into(),
                    x: days.clone(),
                    y: aloft,
                    y_err: None,
                    style: LineStyle::Solid,
                },
                Line {
                    label: "photo-ionised (cumulative)".into(),
                    x: days.clone(),
                    y: ionised,
                    y_err: None,
                    style: LineStyle::Dashed,
                },
                Line {
                    label: "adsorbed in the surface reservoir".into(),
                    x: days.clone(),
                    y: stuck,
                    y_err: None,
                    style: LineStyle::Solid,
                },
            ],
            markers: vec![],
            log_x: false,
            log_y: true,
            x_range: None,
            x_ticks: None,
        },
        &dir.join("ledger.png"),
    )?;

    // The same column as CF NetCDF.
    let mut ds = Dataset::new("exobound sample products");
    ds.add_coordinate(
        Variable::coordinate("lat", lat.clone(), "degrees_north", "latitude")
            .with("standard_name", "latitude"),
    );
    ds.add_coordinate(Variable::coordinate("lt", lt.clone(), "h", "local solar time"));
    ds.add_variable(
        Variable::new("column", &["lat", "lt"], column, "m-2")
            .with("long_name", "Na column density"),
    );
    write_netcdf(&ds, &dir.join("sample.nc"))?;
    println!("wrote products to {}", dir.display());
    Ok(())
}

//! The fields resolved by averaging window and by source: they must add up
//! to the run's own fields, so that a user who sums the parts, or averages
//! the windows, gets the run average back.

use std::sync::Arc;

use exobound::driver::RunRecord;
use exobound::engine::Simulation;
use exobound::scenario::Scenario;

use crate::support::runtime;

/// The quick demo, driven window by window as `exobound run` drives it.
fn quick_demo() -> (Scenario, Simulation, RunRecord) {
    let rt = Arc::new(runtime());
    let scenario = Scenario::demo(true, &[], &rt).unwrap_or_else(|e| panic!("{e}"));
    let mut sim = Simulation::new(
        scenario.model.clone(),
        scenario.processes.clone(),
        scenario.config.clone(),
    )
    .unwrap();
    let plan = &scenario.plan;
    let mut record = RunRecord::default();
    while sim.steps() < plan.steps {
        sim.step().unwrap();
        let s = sim.steps();
        if s - record.window_start_step == plan.window_steps
            || s == plan.spin_up_steps
            || s == plan.steps
        {
            record.close_window(&mut sim, plan);
        }
    }
    (scenario, sim, record)
}

fn assert_close(what: &str, got: &[f64], want: &[f64], rel: f64) {
    assert_eq!(got.len(), want.len(), "{what}: lengths");
    let scale = want.iter().fold(0.0f64, |m, x| m.max(x.abs()));
    for (k, (g, w)) in got.iter().zip(want).enumerate() {
        assert!((g - w).abs() <= rel * scale, "{what}[{k}]: {g} vs {w} (scale {scale})");
    }
}

#[test]
fn sources_add_up_and_windows_average_to_the_run_fields() {
    let (scenario, _sim, record) = quick_demo();
    let a = &record.averages;
    let n_src = scenario.processes.sources.len();
    assert_eq!(n_src, 3, "the quick demo has three sources");
    let column = a.column_cm2();
    let density = a.density_cm3();
    let (nc, nd) = (column.len(), density.len());
    let by_source = a.column_by_source_cm2();
    let dens_by_source = a.density_by_source_cm3();
    assert_eq!((by_source.len(), dens_by_source.len()), (n_src * nc, n_src * nd));
    // The parts add up to the whole to round-off: every sighting adds the
    // same weight to its source's share and to the total.
    let sum = |v: &[f64], n: usize| -> Vec<f64> {
        (0..n).map(|k| (0..n_src).map(|s| v[s * n + k]).sum()).collect()
    };
    assert_close("column by source", &sum(&by_source, nc), &column, 1e-12);
    assert_close("density by source", &sum(&dens_by_source, nd), &density, 1e-12);
    // Each source carries a real share of the dayside column (the quick
    // demo's desorption, impact vapour and sputtering all launch atoms).
    for s in 0..n_src {
        let total: f64 = by_source[s * nc..(s + 1) * nc].iter().sum();
        assert!(total > 0.0, "source {s} has no column");
    }
    // The windows after the spin-up, weighted by their snapshots, average to
    // the run field, column and near-surface density alike.
    let win: Vec<_> = record.windows.iter().filter(|w| !w.spin_up).collect();
    assert!(win.len() >= 2, "{} windows", win.len());
    let snaps: f64 = win.iter().map(|w| w.snapshots as f64).sum();
    assert_eq!(snaps as u64, a.snapshots);
    let mean = |pick: &dyn Fn(&exobound::driver::WindowRecord) -> &Vec<f64>, n: usize| {
        (0..n)
            .map(|k| win.iter().map(|w| pick(w)[k] * w.snapshots as f64).sum::<f64>() / snaps)
            .collect::<Vec<f64>>()
    };
    assert_close("windows' column", &mean(&|w| &w.column, nc), &column, 1e-12);
    assert_close(
        "windows' near-surface density",
        &mean(&|w| &w.near_surface_density, nc),
        &density[..nc],
        1e-12,
    );
    // And the windows differ: the point of resolving them.
    assert_ne!(win[0].column, win[1].column);
}

#[test]
fn the_summary_splits_the_dayside_exosphere_by_source() {
    let tmp = crate::support::TempDir::new("by-source");
    let out = tmp.path().join("run");
    crate::run_outputs::run_quick(&out, &[]);
    let s: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("summary.json")).unwrap()).unwrap();
    let parts = s.pointer("/by_source/sources").and_then(|v| v.as_array()).unwrap();
    let names: Vec<&str> = parts.iter().map(|p| p["source"].as_str().unwrap()).collect();
    assert_eq!(names, ["photon-desorption", "impact-vapor", "ion-sputter"]);
    for key in ["dayside_equatorial_column_share", "dayside_near_surface_density_share"] {
        let shares: Vec<f64> = parts.iter().map(|p| p[key].as_f64().unwrap()).collect();
        // Fractions of one whole (the per-source fields add up to the total).
        assert!((shares.iter().sum::<f64>() - 1.0).abs() < 1e-12, "{key}: {shares:?}");
        assert!(shares.iter().all(|&x| x > 0.0 && x < 1.0), "{key}: {shares:?}");
    }
    for f in ["plots/column_by_window.png", "plots/equator_by_source.png"] {
        assert!(out.join(f).is_file(), "missing {f}");
    }
    // The NetCDF file carries the same split: the by-source columns add up
    // to the column (the source dimension leads).
    let ds = exobound_products::read_netcdf(&out.join("exosphere.nc")).unwrap();
    let column = &ds.variable("column").unwrap().data;
    let by = ds.variable("column_by_source").unwrap();
    assert_eq!(by.dimensions[0], "source");
    assert_eq!(by.data.len(), 3 * column.len());
    let scale = column.iter().fold(0.0f64, |m, x| m.max(*x));
    for (k, c) in column.iter().enumerate() {
        let sum: f64 = (0..3).map(|s| by.data[s * column.len() + k]).sum();
        assert!((sum - c).abs() <= 1e-12 * scale, "cell {k}: {sum} vs {c}");
    }
    let w = ds.variable("column_by_window").unwrap();
    assert_eq!(w.dimensions, ["local_time", "window_end", "latitude"]);
}

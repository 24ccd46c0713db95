//! What an instrument sees, and comparisons of variants, end to end on the
//! quick demo: `observe` writes its products and converts columns with
//! 4 pi I = g N / 10^6; a bad view file is refused with its key and leaves
//! nothing behind; `compare` finds no difference between identical
//! variants and flags a clearly different one.

use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use exobound::checkpoint::ScenarioSource;
use exobound::compare::{self, Variant, stats::Verdict};
use exobound::runtime::{Runtime, RuntimeConfig};

use crate::run_outputs::run_quick;
use crate::support::TempDir;

#[test]
fn observe_a_quick_run_from_a_telescope_and_an_orbiter() {
    let tmp = TempDir::new("observe");
    let run = tmp.path().join("run");
    run_quick(&run, &[]);
    let view = tmp.path().join("view.toml");
    std::fs::write(
        &view,
        "title = \"test telescope\"\n[distant]\nphase_angle = \"60 deg\"\n\
         observer_side = \"dusk\"\naltitude_max = \"600 km\"\naltitude_step = \"100 km\"\n\
         aperture = \"10 km\"\nimage_pixels = 24\n",
    )
    .unwrap();
    let out = tmp.path().join("seen");
    let obs = exobound::observe::observe(&run, &view, &out).unwrap();
    for f in [
        "brightness.csv",
        "image.nc",
        "observation.json",
        "provenance.json",
        "plots/brightness_altitude.png",
        "plots/disk_image.png",
    ] {
        assert!(out.join(f).is_file(), "missing {f}");
    }
    assert_eq!(obs.samples.len(), 7);
    // The built-in Na table at rest at 1 AU (the demo's Moon), which the run
    // used and recorded: D2 0.54 + D1 0.271 photons s^-1 atom^-1
    // (host/src/radiation/tables.rs; from memory, within Killen, Shemansky &
    // Mouawad 2009, ApJS 181, 351: D2 0.3-0.6 + D1 0.2-0.35).
    assert!((obs.g_factor - 0.811).abs() < 1e-12, "{}", obs.g_factor);
    assert!(obs.g_factor_origin.contains("the run's table: built-in Na table"));
    // The run records the table's origin in its provenance.
    let prov = std::fs::read_to_string(run.join("provenance.json")).unwrap();
    assert!(prov.contains("\"g_factor_table\"") && prov.contains("built-in Na table"));
    for s in &obs.samples {
        // Hunten, Roach & Chamberlain (1956): 4 pi I [R] = g N / 10^6.
        assert!(
            (s.brightness_r - obs.g_factor * s.column_cm2 / 1e6).abs() <= 1e-9 * s.brightness_r
        );
        assert!(s.column_cm2 > 0.0);
    }
    // Above the limb the column falls with altitude (an exosphere bound to
    // the body); from 100 km to 600 km by more than a factor 2.
    assert!(obs.samples[1].column_cm2 > 2.0 * obs.samples[6].column_cm2);
    let img = exobound_products::read_netcdf(&out.join("image.nc")).unwrap();
    let b = img.variable("brightness").unwrap();
    assert_eq!(b.attribute("units").and_then(|a| a.as_text()), Some("1e10 m-2 s-1"));
    // 24 rows and 1.5 times as many columns of square pixels.
    assert_eq!(b.data.len(), 24 * 36);
    crate::support::cf_checker(&out.join("image.nc"));

    // An orbiter looking at nadir sees the vertical column of the field
    // below it (the density grid reaches the outer boundary, far above).
    let orb = tmp.path().join("orbiter.toml");
    std::fs::write(&orb, "[orbiter]\naltitude = \"4000 km\"\nlocal_time = \"11.5 h\"\nlatitude = \"5 deg\"\nlook = \"nadir\"\n").unwrap();
    let out2 = tmp.path().join("seen2");
    let o = exobound::observe::observe(&run, &orb, &out2).unwrap();
    let ds = exobound_products::read_netcdf(&run.join("exosphere.nc")).unwrap();
    let field =
        exobound::observe::field::DensityField::from_dataset(&ds, &run.join("exosphere.nc"))
            .unwrap();
    let want = field.vertical_column_below(11.5, 5f64.to_radians(), 4.0e6);
    assert!(want < field.vertical_column(11.5, 5f64.to_radians()));
    assert!(
        (o.samples[0].column_cm2 / want - 1.0).abs() < 1e-9,
        "{} vs {want}",
        o.samples[0].column_cm2
    );

    // A mistyped key: the file, the key and the nearest valid one; no output.
    std::fs::write(&view, "[distant]\nphase_angel = \"60 deg\"\n").unwrap();
    let bad = tmp.path().join("bad");
    let e = exobound::observe::observe(&run, &view, &bad).unwrap_err();
    assert!(
        e.contains("view.toml") && e.contains("phase_angel") && e.contains("phase_angle"),
        "{e}"
    );
    assert!(!bad.exists() && !exobound::output::staging_path(&bad).exists());
}

#[test]
fn compare_flags_real_differences_and_only_those() {
    let tmp = TempDir::new("compare");
    let rt = Arc::new(
        Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap(),
    );
    let base = ScenarioSource::demo(true, &[]);
    let mut same = base.clone();
    // The thread count never changes the result: an identical scenario.
    same.overrides.push("run.threads=1".into());
    let mut hot = base.clone();
    // Twenty times the meteoroid vaporization flux: clearly different.
    hot.overrides.push("processes.impact-vapor.parameters.flux=\"2e6 cm^-2 s^-1\"".into());
    let variants = vec![
        Variant { name: "base".into(), source: base },
        Variant { name: "same".into(), source: same },
        Variant { name: "hot".into(), source: hot },
    ];
    let out = tmp.path().join("cmp");
    let c = compare::compare(
        &variants,
        &[11, 12, 13],
        &out,
        &rt,
        Arc::new(AtomicBool::new(false)),
        &mut |_, _| {},
    )
    .unwrap();
    for f in [
        "comparison.csv",
        "comparison.txt",
        "comparison.json",
        "provenance.json",
        "plots/equator_local_time.png",
        "plots/latitude.png",
        "plots/column_difference_hot.png",
        "runs/hot/seed-12/summary.json",
    ] {
        assert!(out.join(f).is_file(), "missing {f}");
    }
    for r in &c.rows {
        // Common random numbers: an identical variant differs by exactly 0.
        assert_eq!(r.difference[0].mean, 0.0, "{}", r.measure);
        assert_eq!(r.difference[0].verdict, Verdict::WithinNoise, "{}", r.measure);
    }
    let row = |m: &str| c.rows.iter().find(|r| r.measure == m).unwrap();
    for m in ["source_rate", "total_content", "supply_rate_from_bulk"] {
        assert_eq!(row(m).difference[1].verdict, Verdict::Significant, "{m}");
        assert!(row(m).difference[1].mean > 0.0, "{m}");
    }
    let csv = std::fs::read_to_string(out.join("comparison.csv")).unwrap();
    assert!(
        csv.lines().any(|l| l.starts_with("source_rate,atoms s^-1,hot,") && l.ends_with(",yes"))
    );
}

#[test]
fn compare_with_two_seeds_warns_and_names_the_smallest_detectable_change() {
    let tmp = TempDir::new("compare-two-seeds");
    let rt = Arc::new(
        Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap(),
    );
    let base = ScenarioSource::demo(true, &[]);
    let mut warm = base.clone();
    // A second scenario: 1.5 times the vaporization flux.
    warm.overrides.push("processes.impact-vapor.parameters.flux=\"3e5 cm^-2 s^-1\"".into());
    let variants = vec![
        Variant { name: "base".into(), source: base },
        Variant { name: "warm".into(), source: warm },
    ];
    let out = tmp.path().join("cmp");
    let c = compare::compare(
        &variants,
        &[21, 22],
        &out,
        &rt,
        Arc::new(AtomicBool::new(false)),
        &mut |_, _| {},
    )
    .unwrap();
    // With 2 seeds (1 degree of freedom) and 11 measures at 1 % family-wise
    // (Holm 1979), the first Holm step needs |t| > t_{1 - 0.01/22}(1) =
    // 700.28 (scipy 1.17.1 stats.t.ppf; tests/python/compare_reference_values.py).
    let text = std::fs::read_to_string(out.join("comparison.txt")).unwrap();
    assert!(text.contains("WARNING: 2 seeds") && text.contains("700.3"), "{text}");
    assert!(text.contains("smallest detectable changes") && text.contains("total_content (warm)"));
    let w = &c.warnings[0];
    for r in &c.rows {
        let d = &r.difference[0];
        // The detectable change is the critical t times the pair's standard error.
        let want = 700.281_273_605_340_7 * d.se;
        assert!((d.smallest_detectable - want).abs() <= 1e-6 * want, "{}", r.measure);
        assert!(w.contains(&format!("{} (warm)", r.measure)), "{}", r.measure);
    }
    // No relative difference for the signed peak shift.
    let csv = std::fs::read_to_string(out.join("comparison.csv")).unwrap();
    let shift = csv
        .lines()
        .find(|l| l.starts_with("equatorial_peak_shift,") && l.contains(",warm,"))
        .unwrap();
    assert_eq!(shift.split(',').nth(7), Some("NaN"), "{shift}");
    assert!(text.lines().any(|l| l.contains("warm")
        && l.contains("diff")
        && !l.contains('%')
        && text.contains("equatorial_peak_shift")));
}

//! End to end through the library: the quick demo runs, every product
//! exists and parses, the NetCDF file reads back (with our crate and with
//! Python xarray), the provenance digests are the module files' digests,
//! the ledger closes, and the dayside sodium density is of the observed
//! order of magnitude.

use std::path::Path;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use exobound::checkpoint::ScenarioSource;
use exobound::driver::{self, Outcome, Session};
use exobound::runtime::{Runtime, RuntimeConfig};
use sha2::{Digest, Sha256};

use crate::support::TempDir;

fn runtime() -> Arc<Runtime> {
    Arc::new(Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap())
}

/// Run the quick demo with `overrides` into `out`.
pub fn run_quick(out: &Path, overrides: &[String]) {
    let rt = runtime();
    let source = ScenarioSource::demo(true, overrides);
    let scenario = source.load(&rt).unwrap_or_else(|e| panic!("{e}"));
    let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
    match driver::start(scenario, source, out, session).unwrap_or_else(|e| panic!("{e}")) {
        Outcome::Finished { dir, .. } => assert_eq!(dir, out),
        Outcome::Interrupted { .. } => panic!("not interrupted"),
    }
}

fn json(path: &Path) -> serde_json::Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

#[test]
fn quick_demo_writes_every_product() {
    let tmp = TempDir::new("quick-demo");
    let out = tmp.path().join("out");
    run_quick(&out, &[]);
    for f in [
        "exosphere.nc",
        "summary.json",
        "provenance.json",
        "ledger.csv",
        "windows.csv",
        "profiles/equator_local_time.csv",
        "profiles/latitude.csv",
        "plots/column_map.png",
        "plots/reservoir_map.png",
        "plots/equator_local_time.png",
        "plots/latitude_profile.png",
        "plots/ledger.png",
        "plots/phase_series.png",
    ] {
        let p = out.join(f);
        assert!(p.is_file() && std::fs::metadata(&p).unwrap().len() > 0, "missing {f}");
    }
    assert!(!exobound::output::staging_path(&out).exists(), "the staging directory was left");
    // PNG signature (PNG specification, ISO/IEC 15948, section 5.2).
    let png = std::fs::read(out.join("plots/column_map.png")).unwrap();
    assert_eq!(&png[..8], b"\x89PNG\r\n\x1a\n");

    // The NetCDF file reads back with the crate, with units on every variable.
    let ds = exobound_products::read_netcdf(&out.join("exosphere.nc")).unwrap();
    for v in ["density", "column", "reservoir", "source_flux", "loss_flux", "atoms_in_flight"] {
        assert!(ds.variable(v).is_some(), "exosphere.nc lacks `{v}`");
    }
    // Units on every variable but the bounds, which take their coordinate's (CF Conventions
    // 1.8, section 7.1 (cell boundaries)).
    for v in &ds.variables {
        let is_bounds = ds.bounds_parent(&v.name).is_some();
        assert_eq!(v.attribute("units").is_some(), !is_bounds, "`{}` units", v.name);
    }
    assert!(ds.variable("content").is_none(), "`content` is now `atoms_in_flight`");
    // CF dimension order (CF 1.8 section 2.4): axis-less local_time first, then Z, Y, X.
    assert_eq!(ds.variable("density").unwrap().dimensions, ["local_time", "altitude", "latitude"]);
    assert_eq!(ds.variable("column").unwrap().dimensions, ["local_time", "latitude"]);
    assert_eq!(ds.variable("reservoir").unwrap().dimensions, ["cell_latitude", "cell_longitude"]);
    // Coordinates are exact decimals from degree edges: 5, 15, ... and 0.5, 1.5, ...
    let coord = |n: &str| ds.variable(n).unwrap().data.clone();
    assert!(coord("latitude").contains(&5.0) && coord("latitude")[0] == -85.0);
    assert_eq!(coord("local_time")[10], 10.5);
    assert_eq!(coord("latitude_bounds")[..2], [-90.0, -80.0]);
    assert!(coord("cell_longitude").iter().all(|x| (x * 2.0).fract() == 0.0));
    // Surface-cell areas tile the sphere: 4 pi R^2 to round-off.
    let r_m = ds.attribute("body_radius_km").and_then(|a| a.as_number()).unwrap() * 1e3;
    let total: f64 = coord("cell_area").iter().sum();
    let sphere = 4.0 * std::f64::consts::PI * r_m * r_m;
    assert!((total / sphere - 1.0).abs() < 1e-12, "cell areas sum to {total}, sphere {sphere}");
    // summary.json carries the same exact values as the file.
    let summary = json(&out.join("summary.json"));
    let peak_lat = summary["peak_near_surface_density"]["latitude_deg"].as_f64().unwrap();
    assert!(coord("latitude").contains(&peak_lat), "summary latitude {peak_lat}");
    let history = ds.attribute("history").and_then(|a| a.as_text()).unwrap();
    assert!(history.contains("exobound ") && history.contains(" run"), "{history}");
    assert_eq!(
        ds.variable("latitude").unwrap().attribute("units").unwrap().as_text(),
        Some("degrees_north")
    );
    let modules = ds.attribute("modules").and_then(|a| a.as_text()).unwrap().to_string();
    assert!(modules.contains("photon-desorption@"), "{modules}");

    // The CSV profile and the NetCDF column agree (one set of fields behind both).
    let eq = std::fs::read_to_string(out.join("profiles/equator_local_time.csv")).unwrap();
    assert!(eq.starts_with("local_time_h,column_cm-2,column_error_cm-2\n"));
    assert_eq!(eq.lines().count(), 1 + 24);

    // The ledger closes to round-off over the run and at every step.
    let s = json(&out.join("summary.json"));
    let run = s["ledger"]["closure_error_run"].as_f64().unwrap();
    let worst = s["ledger"]["closure_error_worst_step"].as_f64().unwrap();
    assert!(run.abs() < 1e-12 && worst < 1e-12, "closure {run} / {worst}");
    for key in ["total_content", "escape_rate", "ionization_rate", "dayside_near_surface_density"] {
        assert!(s[key]["unit"].is_string(), "summary {key} has no unit");
    }
    assert!(matches!(s["equatorial_column_peak"]["towards"].as_str(), Some("dawn" | "dusk")));
    assert!(s["equatorial_column_peak"]["uncertainty_deg"].as_f64().unwrap() > 0.0);
    assert!(s["performance"]["hops_per_second"]["value"].as_f64().unwrap() > 0.0);

    // Order of magnitude: lunar Na near the surface on the dayside is tens
    // of atoms cm^-3 (29-67 cm^-3 in ground-based fits: Potter & Morgan 1988,
    // Science 241, 675; Tyler et al. 1988, Geophys. Res. Lett. 15, 1141; from
    // memory). The demo's invented
    // parameters must land within a factor of ~10 of that.
    let n = s["dayside_near_surface_density"]["value"].as_f64().unwrap();
    assert!((5.0..500.0).contains(&n), "dayside near-surface density {n} cm^-3");

    // Provenance: each module's digest equals SHA-256 of its file, computed
    // here. The demo's standard modules come from the copies embedded in
    // the binary, recorded as `embedded:NAME`; they are the build's files.
    let p = json(&out.join("provenance.json"));
    let mods = p["modules"].as_array().unwrap();
    assert_eq!(mods.len(), 5);
    for m in mods {
        let name = m["path"].as_str().unwrap().strip_prefix("embedded:").unwrap();
        assert_eq!(m["unlocked"], false);
        let bytes = std::fs::read(exobound::standard_module(name)).unwrap();
        let digest: String = Sha256::digest(&bytes).iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(m["sha256"].as_str().unwrap(), digest, "{}", m["name"]);
    }
    assert_eq!(p["seed"].as_u64(), Some(20261202));
    assert!(p["scenario_text"].as_str().unwrap().contains("[surface.temperature]"));

    xarray_check(&out.join("exosphere.nc"));
    crate::support::read_like_a_user(&out.join("exosphere.nc"));
    crate::support::cf_checker(&out.join("exosphere.nc"));
}

/// Open the file with Python xarray (scipy backend, no netCDF C library).
/// `.ci/run` installs xarray and sets EXOBOUND_REQUIRE_XARRAY=1; without
/// that variable and without xarray the check is reported and skipped.
fn xarray_check(nc: &Path) {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("python/check_netcdf.py");
    if !crate::support::python_can_import(
        "xarray, scipy",
        "EXOBOUND_REQUIRE_XARRAY",
        "the xarray check",
    ) {
        return;
    }
    let out = std::process::Command::new("python3")
        .arg(&script)
        .arg(nc)
        .args(["density", "column", "reservoir", "source_flux", "loss_flux", "atoms_in_flight"])
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "xarray check failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn runs_are_identical_for_one_and_two_threads() {
    let tmp = TempDir::new("threads");
    let (a, b) = (tmp.path().join("a"), tmp.path().join("b"));
    let short = |t: usize| {
        vec![
            "run.duration=\"12 h\"".to_string(),
            "outputs.products=[\"netcdf\", \"csv\"]".to_string(),
            format!("run.threads={t}"),
        ]
    };
    run_quick(&a, &short(1));
    run_quick(&b, &short(2));
    for f in ["exosphere.nc", "ledger.csv", "windows.csv", "profiles/latitude.csv"] {
        assert_eq!(std::fs::read(a.join(f)).unwrap(), std::fs::read(b.join(f)).unwrap(), "{f}");
    }
}

/// Bits of every value, so that NaN compares equal to NaN.
fn bits(v: &[f64]) -> Vec<u64> {
    v.iter().map(|x| x.to_bits()).collect()
}

#[test]
fn a_finished_run_reads_back_as_the_result_it_returned() {
    use exobound::output::results::RunResult;
    use exobound::output::summary::Summary;
    let tmp = TempDir::new("typed-result");
    let out = tmp.path().join("out");
    let rt = runtime();
    let source = ScenarioSource::demo(true, &["run.seed=5".into()]);
    let scenario = source.load(&rt).unwrap_or_else(|e| panic!("{e}"));
    let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
    let Outcome::Finished { result, .. } =
        driver::start(scenario, source, &out, session).unwrap_or_else(|e| panic!("{e}"))
    else {
        panic!("not interrupted")
    };
    let back = RunResult::read(&out).unwrap_or_else(|e| panic!("{e}"));
    // The files hold the same numbers, bit for bit, as the run returned.
    assert_eq!(back.summary.to_json(), result.summary.to_json());
    for (a, b) in [(&back.equator, &result.equator), (&back.latitude, &result.latitude)] {
        assert_eq!(bits(&a.coordinate), bits(&b.coordinate));
        assert_eq!(bits(&a.column), bits(&b.column));
        assert_eq!(bits(&a.error), bits(&b.error));
    }
    assert_eq!(bits(&back.column.column), bits(&result.column.column));
    assert_eq!(bits(&back.column.latitude_deg), bits(&result.column.latitude_deg));
    assert_eq!(bits(&back.measures()), bits(&result.measures()));
    // The equatorial profile is the equatorial band of the column map.
    assert_eq!(result.equator.column.len(), result.column.local_time_h.len());

    // A summary with a field missing or of the wrong type is refused,
    // naming the file and the field, not read as NaN.
    let path = out.join("summary.json");
    let mut v = json(&path);
    v.as_object_mut().unwrap().remove("escape_rate");
    std::fs::write(&path, serde_json::to_string(&v).unwrap()).unwrap();
    let e = Summary::read(&path).unwrap_err();
    assert!(e.contains("summary.json") && e.contains("escape_rate"), "{e}");
    v["escape_rate"] = serde_json::json!({ "value": "fast", "unit": "atoms s^-1" });
    std::fs::write(&path, serde_json::to_string(&v).unwrap()).unwrap();
    assert!(Summary::read(&path).unwrap_err().contains("summary.json"));
    std::fs::write(&path, serde_json::to_string(&result.summary.to_json()).unwrap()).unwrap();
    assert!(RunResult::read(&out).is_ok());
    // A damaged profile line is named, never skipped.
    let p = out.join("profiles/latitude.csv");
    let text = std::fs::read_to_string(&p).unwrap();
    std::fs::write(&p, text.replacen('\n', "\n5,x,1\n", 1)).unwrap();
    let e = RunResult::read(&out).unwrap_err();
    assert!(e.contains("latitude.csv` line 2"), "{e}");
}

#[test]
fn plot_format_both_writes_every_plot_as_png_and_svg_and_a_bad_format_is_refused() {
    let tmp = TempDir::new("plot-format");
    let (png_only, both) = (tmp.path().join("png"), tmp.path().join("both"));
    let plots_only = "outputs.products=[\"plots\"]".to_string();
    run_quick(&png_only, std::slice::from_ref(&plots_only));
    run_quick(&both, &[plots_only, "outputs.plot_format=\"both\"".into()]);
    let stems = [
        "column_map",
        "reservoir_map",
        "equator_local_time",
        "latitude_profile",
        "ledger",
        "phase_series",
    ];
    for stem in stems {
        let png = std::fs::read(both.join(format!("plots/{stem}.png"))).unwrap();
        // The PNG does not depend on the key: byte for byte the one of a PNG-only run.
        assert_eq!(png, std::fs::read(png_only.join(format!("plots/{stem}.png"))).unwrap());
        assert!(!png_only.join(format!("plots/{stem}.svg")).exists());
        let svg = std::fs::read_to_string(both.join(format!("plots/{stem}.svg"))).unwrap();
        // An SVG document (W3C SVG 1.1, section 5.1: the `svg` element in the SVG namespace),
        // with its title as text.
        assert!(svg.starts_with("<svg ") && svg.ends_with("</svg>\n"), "{stem}.svg");
        assert!(svg.contains("xmlns=\"http://www.w3.org/2000/svg\""), "{stem}.svg");
        assert!(svg.contains("<text ") && svg.contains("font-weight=\"bold\""), "{stem}.svg");
    }
    let svg = std::fs::read_to_string(both.join("plots/phase_series.svg")).unwrap();
    // The key's wrapped lines, each a <text> element, read back as one text.
    let words: Vec<&str> = svg
        .split("</text>")
        .filter_map(|t| t.rsplit_once('>').map(|(_, w)| w))
        .filter(|w| !w.trim().is_empty())
        .collect();
    let key = words.join(" ");
    assert!(key.contains("mean square successive difference"), "the phase series' key: {key}");
    let rt = runtime();
    let e = ScenarioSource::demo(true, &["outputs.plot_format=\"pdf\"".into()])
        .load(&rt)
        .map(|_| ())
        .unwrap_err()
        .to_string();
    assert!(e.contains("outputs.plot_format") && e.contains("`svg`"), "{e}");
}

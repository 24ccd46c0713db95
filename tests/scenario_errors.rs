//! Bad scenarios are refused with messages that point at the problem:
//! malformed TOML (file:line:column), unknown keys (with the nearest valid
//! one), a missing module file (its path), a parameter out of range (name,
//! value, range, unit), an unreadable or malformed map (file and problem),
//! a checkpoint from another version, values outside their physical or
//! practical bounds (key and range), and values of the wrong type (key,
//! what it takes, an example), in the file and from `--set`.

use std::path::Path;
use std::process::Command;
use std::sync::Arc;

use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::scenario::{Inputs, Scenario, demo};

use crate::support::{TempDir, exobound_binary};

fn runtime() -> Arc<Runtime> {
    Arc::new(Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap())
}

/// The quick demo written into `dir`, with `edit` applied to its text; the error.
fn refuse(dir: &Path, edit: impl Fn(String) -> String) -> String {
    demo::write(dir).unwrap();
    let path = dir.join("demo-quick.toml");
    let text = edit(std::fs::read_to_string(&path).unwrap());
    std::fs::write(&path, &text).unwrap();
    match Scenario::load(&path, &[], &runtime()) {
        Ok(_) => panic!("the edited scenario was accepted"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn the_unedited_demo_loads() {
    let tmp = TempDir::new("demo-ok");
    demo::write(tmp.path()).unwrap();
    for f in ["demo.toml", "demo-quick.toml"] {
        let s = Scenario::load(&tmp.path().join(f), &[], &runtime()).unwrap();
        assert_eq!(s.modules.len(), 5);
        // The enriched patch from the map file reaches the reservoir.
        let max = s.model.reservoir.bulk_abundance.iter().cloned().fold(0.0, f64::max);
        assert!(max > 1.5, "{max}");
    }
}

#[test]
fn malformed_toml_names_file_line_and_column() {
    let tmp = TempDir::new("bad-toml");
    let e = refuse(tmp.path(), |t| t.replace("name = \"sodium\"", "name = \"sodium"));
    let line =
        demo::scenario_text(true).lines().position(|l| l.contains("name = \"sodium\"")).unwrap()
            + 1;
    assert!(e.contains(&format!("demo-quick.toml:{line}:")), "{e}");
}

#[test]
fn unknown_key_names_it_and_the_nearest_valid_one() {
    let tmp = TempDir::new("bad-key");
    let e = refuse(tmp.path(), |t| t.replace("spin_up =", "spinup ="));
    assert!(e.contains("unknown key `spinup`") && e.contains("did you mean `spin_up`?"), "{e}");
    assert!(e.contains("demo-quick.toml:") && e.contains("[run]"), "{e}");
    let e = refuse(tmp.path(), |t| t.replace("[outputs]", "[output]"));
    assert!(e.contains("`output`") && e.contains("did you mean `outputs`?"), "{e}");
}

#[test]
fn missing_module_file_names_the_path() {
    let tmp = TempDir::new("bad-module");
    let e = refuse(tmp.path(), |t| {
        t.replace("standard:photoionization", "modules/photo-ionisation.wasm")
    });
    assert!(e.contains("processes[4].module"), "{e}");
    assert!(e.contains("modules/photo-ionisation.wasm") && e.contains("not found"), "{e}");
}

#[test]
fn parameter_out_of_range_names_value_range_and_unit() {
    let tmp = TempDir::new("bad-param");
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapor_temperature = \"90000 K\"")
    });
    assert!(e.contains("vapor_temperature") && e.contains("90000"), "{e}");
    assert!(e.contains("K") && e.contains("range"), "{e}");
    // A dimensional parameter without its unit is refused with the unit to use.
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapor_temperature = 3000")
    });
    assert!(e.contains("give the unit") && e.contains("\"3000 K\""), "{e}");
    // A unit that is not the module's.
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapor_temperature = \"3000 C\"")
    });
    assert!(e.contains("unit `C` does not match"), "{e}");
    // An unknown parameter gets the nearest name.
    let e = refuse(tmp.path(), |t| {
        t.replace("pattern = \"apex\"", "pattern = \"apex\"\nvapour_temperature = \"3000 K\"")
    });
    assert!(e.contains("did you mean `vapor_temperature`?"), "{e}");
}

#[test]
fn unreadable_or_malformed_map_names_the_file_and_problem() {
    let tmp = TempDir::new("bad-map");
    let e = refuse(tmp.path(), |t| t.replace("maps/bulk-sodium.csv", "maps/none.csv"));
    assert!(e.contains("maps/none.csv") && e.contains("cannot read"), "{e}");
    let map = tmp.path().join("maps/bulk-sodium.csv");
    let e = refuse(tmp.path(), |t| {
        let m = std::fs::read_to_string(&map).unwrap();
        std::fs::write(&map, m.replacen(",1\n", ",one\n", 1)).unwrap();
        t
    });
    assert!(e.contains("bulk-sodium.csv: line") && e.contains("`one`"), "{e}");
}

#[test]
fn quantities_without_units_are_refused() {
    let tmp = TempDir::new("bad-unit");
    let e = refuse(tmp.path(), |t| t.replace("dt = \"900 s\"", "dt = \"900\""));
    assert!(e.contains("run.dt") && e.contains("no unit"), "{e}");
}

#[test]
fn overrides_apply_and_are_checked() {
    let rt = runtime();
    let s = Scenario::demo(true, &["run.seed=7".into(), "run.dt=\"30 min\"".into()], &rt).unwrap();
    assert_eq!(s.config.seed, 7);
    assert_eq!(s.config.dt, 1800.0);
    let e = Scenario::demo(true, &["run.sead=7".into()], &rt).unwrap_err().to_string();
    assert!(e.contains("did you mean `seed`?"), "{e}");
    let _ = Inputs::Demo;
}

#[test]
fn checkpoint_from_another_version_is_refused() {
    let tmp = TempDir::new("old-checkpoint");
    let out = tmp.path().join("run");
    let staging = exobound::output::staging_path(&out);
    std::fs::create_dir_all(&staging).unwrap();
    std::fs::write(
        staging.join(exobound::output::CHECKPOINT_FILE),
        b"{\"kind\":\"exobound checkpoint\",\"format\":999,\"engine\":\"0.0.1\"}\n\x00\x01",
    )
    .unwrap();
    let session = exobound::driver::Session {
        stop: Arc::new(std::sync::atomic::AtomicBool::new(false)),
        progress: None,
    };
    let e = exobound::driver::resume(&out, &runtime(), &[], session).unwrap_err().to_string();
    assert!(e.contains("exobound 0.0.1") && e.contains("cannot continue it"), "{e}");
}

/// The quick demo with `overrides`; the error.
fn refuse_set(overrides: &[&str]) -> String {
    let o: Vec<String> = overrides.iter().map(|s| s.to_string()).collect();
    match Scenario::demo(true, &o, &runtime()) {
        Ok(_) => panic!("{overrides:?} was accepted"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn a_run_of_too_many_steps_is_refused() {
    // Issue 12: "1e308 s" was accepted and ran forever.
    let tmp = TempDir::new("huge-duration");
    let e = refuse(tmp.path(), |t| t.replace("duration = \"1.5 d\"", "duration = \"1e308 s\""));
    assert!(e.contains("run.duration / run.dt gives 1.1111111111111111e305 steps"), "{e}");
    assert!(e.contains("at most 10000000 are allowed"), "{e}");
    assert!(e.contains("raise run.dt or shorten run.duration"), "{e}");
    // Just above the cap at the quick demo's 900 s step: 1e7 + 1 steps.
    let e = refuse_set(&["run.duration=9000000900 s"]);
    assert!(e.contains("gives 10000001 steps; at most 10000000"), "{e}");
    // Numbers that overflow, as written or on conversion, name the key.
    let e = refuse_set(&["run.duration=1e309 s"]);
    assert!(e.contains("run.duration: `1e309 s` is not a finite number"), "{e}");
    let e = refuse_set(&["run.duration=1e308 d"]);
    assert!(e.contains("run.duration: `1e308 d` is too large"), "{e}");
}

#[test]
fn a_bad_time_step_blames_run_dt() {
    // Issue 12: a tiny dt was blamed on run.spin_up.
    let tmp = TempDir::new("tiny-dt");
    let e = refuse(tmp.path(), |t| t.replace("dt = \"900 s\"", "dt = \"1e-9 s\""));
    assert!(e.contains("run.dt: 1e-9 s is outside the allowed range [1, 1e6] s"), "{e}");
    assert!(!e.contains("spin_up"), "{e}");
    let e = refuse_set(&["run.dt=2e6 s"]);
    assert!(e.contains("run.dt: 2e6 s is outside the allowed range [1, 1e6] s"), "{e}");
    // Longer than the run (1.5 d) while within its own range.
    let e = refuse_set(&["run.dt=2 d"]);
    assert!(e.contains("run.dt: 172800 s is longer than run.duration = 129600 s"), "{e}");
    assert!(e.contains("lower run.dt or lengthen run.duration"), "{e}");
    // The bounds themselves are accepted: 1 s over a minute, and one step of 1e6 s.
    let rt = runtime();
    let o = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
    let short = o(&["run.dt=1 s", "run.duration=60 s", "run.spin_up=0 s", "outputs.window=60 s"]);
    let s = Scenario::demo(true, &short, &rt).unwrap();
    assert_eq!((s.config.dt, s.plan.steps), (1.0, 60));
    let long =
        o(&["run.dt=1e6 s", "run.duration=1e6 s", "run.spin_up=0 s", "outputs.window=1e6 s"]);
    let s = Scenario::demo(true, &long, &rt).unwrap();
    assert_eq!(s.plan.steps, 1);
}

#[test]
fn spin_up_checkpoints_and_windows_lie_within_the_run() {
    let e = refuse_set(&["run.spin_up=2 d"]);
    assert!(
        e.contains("run.spin_up: 172800 s is outside the allowed range [0, run.duration)"),
        "{e}"
    );
    let e = refuse_set(&["run.spin_up=-1 h"]);
    assert!(e.contains("run.spin_up: -3600 s is outside"), "{e}");
    let e = refuse_set(&["run.checkpoint_every=10 d"]);
    assert!(
        e.contains("run.checkpoint_every: 864000 s is outside the allowed range [900, 129600] s"),
        "{e}"
    );
    assert!(e.contains("leave the key out"), "{e}");
    let e = refuse_set(&["run.checkpoint_every=1 min"]);
    assert!(e.contains("run.checkpoint_every: 60 s is outside"), "{e}");
    let e = refuse_set(&["outputs.window=3 d"]);
    assert!(
        e.contains("outputs.window: 259200 s is outside the allowed range [900, 129600] s"),
        "{e}"
    );
    let e = refuse_set(&["run.duration=12 h", "outputs.window=1 d"]);
    assert!(
        e.contains("outputs.window: 86400 s is outside the allowed range [900, 43200] s"),
        "{e}"
    );
    // Left out, the window is one day, shortened to a run shorter than that.
    let tmp = TempDir::new("default-window");
    demo::write(tmp.path()).unwrap();
    let path = tmp.path().join("demo-quick.toml");
    let text = std::fs::read_to_string(&path).unwrap().replace("window = \"6 h\"\n", "");
    std::fs::write(&path, text).unwrap();
    let s = Scenario::load(&path, &["run.duration=12 h".into()], &runtime()).unwrap();
    assert_eq!((s.plan.window_steps, s.plan.steps), (48, 48));
}

#[test]
fn a_million_threads_are_refused() {
    // Issue 12: threads = 1000000 spent minutes creating threads.
    let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
    let tmp = TempDir::new("threads");
    let e = refuse(tmp.path(), |t| t.replace("threads = 0", "threads = 1000000"));
    assert!(
        e.contains(&format!(
            "run.threads: 1000000 threads is outside the allowed range 0 to {}",
            4 * cores
        )),
        "{e}"
    );
    assert!(e.contains("results do not depend on the thread count"), "{e}");
    // The cap itself is accepted (as `--threads N` sets it).
    let s = Scenario::demo(true, &[format!("run.threads={}", 4 * cores)], &runtime()).unwrap();
    assert_eq!(s.config.threads, 4 * cores);
}

#[test]
fn environment_values_outside_their_bounds_name_key_and_range() {
    // Issue 12: a flux of 1e308 was accepted and gave NaN everywhere.
    let tmp = TempDir::new("flux");
    let e = refuse(tmp.path(), |t| t.replace("\"2e8 cm^-2 s^-1\"", "\"1e308 cm^-2 s^-1\""));
    assert!(
        e.contains("environment.solar_wind_flux: 1e308 cm^-2 s^-1 is outside the allowed range [0, 1e13] cm^-2 s^-1"),
        "{e}"
    );
    assert!(e.contains("1 AU"), "{e}");
    let e = refuse_set(&["environment.solar_wind_flux=-1 cm^-2 s^-1"]);
    assert!(e.contains("environment.solar_wind_flux: -1 cm^-2 s^-1 is outside"), "{e}");
    let e = refuse_set(&["environment.meteoroid_factor=1e7"]);
    assert!(
        e.contains("environment.meteoroid_factor: 1e7 is outside the allowed range [0, 1e6]"),
        "{e}"
    );
    let e = refuse_set(&["environment.solar_wind.0.factor=-0.5"]);
    assert!(
        e.contains("environment.solar_wind[0].factor: -0.5 is outside the allowed range [0, 1e6]"),
        "{e}"
    );
    let e = refuse_set(&["environment.solar_wind.0.start=1e309 d"]);
    assert!(e.contains("environment.solar_wind[0].start: `1e309 d` is not a finite number"), "{e}");
    let e = refuse_set(&["environment.heliocentric_distance=1000 AU"]);
    assert!(
        e.contains(
            "environment.heliocentric_distance: 1000 AU is outside the allowed range [0.1, 100] AU"
        ),
        "{e}"
    );
    let e = refuse_set(&["surface.temperature.reference_distance=0.01 AU"]);
    assert!(e.contains("surface.temperature.reference_distance: 0.01 AU is outside"), "{e}");
    let e = refuse_set(&["surface.temperature.subsolar=5000 K"]);
    assert!(
        e.contains(
            "surface.temperature.subsolar: 5000 K is outside the allowed range [10, 2000] K"
        ),
        "{e}"
    );
    let e = refuse_set(&["surface.temperature.night=1 K"]);
    assert!(e.contains("surface.temperature.night: 1 K is outside"), "{e}");
    let e = refuse_set(&["run.boundary_radii=5000"]);
    assert!(
        e.contains("run.boundary_radii: 5000 body radii is outside the allowed range (1, 1000]"),
        "{e}"
    );
    let e = refuse_set(&["run.particles=50"]);
    assert!(
        e.contains("run.particles: 50 particles is outside the allowed range 100 to 100000000"),
        "{e}"
    );
}

#[test]
fn a_bare_number_for_a_quantity_names_the_key_and_an_example() {
    // Issue 12: "invalid type: integer" without the key or the fix.
    let tmp = TempDir::new("bare-number");
    let line_of = |needle: &str| {
        demo::scenario_text(true).lines().position(|l| l.starts_with(needle)).unwrap() + 1
    };
    let e = refuse(tmp.path(), |t| t.replace("dt = \"900 s\"", "dt = 900"));
    assert!(
        e.contains(&format!("demo-quick.toml:{}:6: run.dt needs a quantity with a unit in quotes, e.g. dt = \"600 s\"", line_of("dt ="))),
        "{e}"
    );
    assert!(e.contains("got the bare number 900") && e.ends_with("(in [run])"), "{e}");
    let e = refuse(tmp.path(), |t| t.replace("duration = \"1.5 d\"", "duration = 86400"));
    assert!(e.contains("run.duration needs a quantity with a unit") && e.contains("86400"), "{e}");
    let e = refuse(tmp.path(), |t| t.replace("\"2e8 cm^-2 s^-1\"", "2e8"));
    assert!(
        e.contains(&format!("demo-quick.toml:{}:", line_of("solar_wind_flux")))
            && e.contains("environment.solar_wind_flux needs a quantity with a unit")
            && e.contains("e.g. solar_wind_flux = \"2e8 cm^-2 s^-1\""),
        "{e}"
    );
    let e = refuse(tmp.path(), |t| t.replace("subsolar = \"390 K\"", "subsolar = 390"));
    assert!(
        e.contains("surface.temperature.subsolar needs a quantity with a unit")
            && e.contains("(in [surface.temperature])"),
        "{e}"
    );
    // The same from --set, where the file has no line to point at.
    let e = refuse_set(&["run.dt=600"]);
    assert!(e.starts_with("--set run.dt=600: run.dt needs a quantity with a unit"), "{e}");
    assert!(e.contains("e.g. --set run.dt=\"600 s\"") && e.contains("no unit"), "{e}");
    let e = refuse_set(&["environment.solar_wind.0.end=19"]);
    assert!(e.contains("environment.solar_wind.0.end needs a quantity with a unit"), "{e}");
}

#[test]
fn text_where_a_number_belongs_names_the_key() {
    let tmp = TempDir::new("text-number");
    let e = refuse(tmp.path(), |t| t.replace("seed = 20261202", "seed = \"7\""));
    assert!(
        e.contains("run.seed takes a plain whole number, without quotes")
            && e.contains("e.g. seed = 7"),
        "{e}"
    );
    let e = refuse(tmp.path(), |t| t.replace("particles = 8000", "particles = \"1e5\""));
    assert!(
        e.contains("run.particles takes a plain whole number") && e.contains("the text \"1e5\""),
        "{e}"
    );
    let e = refuse(tmp.path(), |t| t.replace("meteoroid_factor = 1.0", "meteoroid_factor = \"1\""));
    assert!(
        e.contains("environment.meteoroid_factor takes a plain number, without quotes or unit"),
        "{e}"
    );
    let e = refuse_set(&["run.particles=1e5"]);
    assert!(e.contains("--set run.particles=1e5: run.particles takes a plain whole number"), "{e}");
}

#[test]
fn a_refused_scenario_exits_with_failure_and_writes_nothing() {
    let tmp = TempDir::new("refused-binary");
    demo::write(tmp.path()).unwrap();
    let bin = exobound_binary();
    for (set, key) in [
        ("environment.solar_wind_flux=1e308 cm^-2 s^-1", "environment.solar_wind_flux"),
        ("run.dt=600", "run.dt"),
        ("run.duration=1e308 s", "run.duration"),
        ("run.threads=1000000", "run.threads"),
    ] {
        let out_dir = tmp.path().join("out");
        let run = Command::new(&bin)
            .arg("run")
            .arg(tmp.path().join("demo-quick.toml"))
            .arg("--out")
            .arg(&out_dir)
            .args(["--set", set])
            .output()
            .unwrap();
        let stderr = String::from_utf8_lossy(&run.stderr);
        let code = run.status.code().unwrap_or(-1);
        assert!((1..=99).contains(&code), "{set}: exit {code}: {stderr}");
        assert!(stderr.contains(key), "{set}: {stderr}");
        assert!(!out_dir.exists(), "{set}: {} exists", out_dir.display());
        let partial = exobound::output::staging_path(&out_dir);
        assert!(!partial.exists(), "{set}: {} exists", partial.display());
    }
}

#[test]
fn a_g_factor_table_file_is_read_checked_and_recorded() {
    let tmp = TempDir::new("g-table");
    demo::write(tmp.path()).unwrap();
    let path = tmp.path().join("demo-quick.toml");
    let text = std::fs::read_to_string(&path)
        .unwrap()
        .replace("name = \"sodium\"", "name = \"sodium\"\ng_factor_table = \"g.csv\"");
    std::fs::write(&path, &text).unwrap();
    // A per-line table (our layout, docs/scenario.md): used as given.
    let table = "# made up for the test\n\
                 radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_D1_photons_per_s_per_atom\n\
                 0,1.0,0.5\n10,4.0,2.0\n";
    std::fs::write(tmp.path().join("g.csv"), table).unwrap();
    let s = Scenario::load(&path, &[], &runtime()).unwrap();
    let g = &s.model.species.g_factors;
    // Linear interpolation, 1/r^2 (definition of the table's law): at 5 km/s
    // and 0.5 AU, (2.5 + 1.25) * 4 = 15 photons/s.
    assert!((g.g_total(5e3, 0.5) - 15.0).abs() < 1e-12);
    // The origin names the file and its SHA-256 (FIPS 180-4) for the provenance.
    let digest = exobound::runtime::module::sha256_hex(table.as_bytes());
    assert_eq!(g.table.sha256.as_deref(), Some(digest.as_str()));
    assert!(g.table.origin.contains("g.csv") && g.table.origin.contains(&digest));

    // A bad row: refused naming the key, the file, the line and the column.
    std::fs::write(
        tmp.path().join("g.csv"),
        "radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_D1_photons_per_s_per_atom\n\
         0,1.0,0.5\n10,4.0,-2\n",
    )
    .unwrap();
    let e = Scenario::load(&path, &[], &runtime()).unwrap_err().to_string();
    assert!(e.contains("species.g_factor_table") && e.contains("g.csv"), "{e}");
    assert!(e.contains("line 3, column 3") && e.contains("negative"), "{e}");
    // A line the species does not have.
    std::fs::write(
        tmp.path().join("g.csv"),
        "radial_velocity_km_s,g_D3_photons_per_s_per_atom\n0,1.0\n",
    )
    .unwrap();
    let e = Scenario::load(&path, &[], &runtime()).unwrap_err().to_string();
    assert!(e.contains("species.g_factor_table") && e.contains("`D3`"), "{e}");
    // No file at all.
    std::fs::remove_file(tmp.path().join("g.csv")).unwrap();
    let e = Scenario::load(&path, &[], &runtime()).unwrap_err().to_string();
    assert!(e.contains("species.g_factor_table") && e.contains("cannot read"), "{e}");
}

#[test]
fn radiation_pressure_is_on_by_default_for_mercury_only() {
    let rt = runtime();
    // docs/scenario.md: default true for Mercury, false for the Moon.
    let moon = Scenario::demo(true, &[], &rt).unwrap();
    assert!(!moon.config.radiation_pressure);
    // The demo at Mercury: its lunar phase key gives way to Mercury's own.
    let text = exobound::scenario::demo::scenario_text(true)
        .replace("name = \"moon\"", "name = \"mercury\"")
        .replace("start_lunar_phase = 0.0", "start_true_anomaly = \"0 deg\"")
        .replace("heliocentric_distance = \"1 AU\"\n", "");
    let at = |o: &[String]| {
        Scenario::from_text(&text, "demo at Mercury", exobound::scenario::Inputs::Demo, o, &rt)
            .unwrap()
    };
    assert!(at(&[]).config.radiation_pressure);
    assert!(!at(&["run.radiation_pressure=false".into()]).config.radiation_pressure);
}

//! Where the body is on its orbit, through the scenario keys: Mercury's
//! 3:2 resonance from two starting true anomalies, the start true anomaly
//! of Mercury and of a custom ellipse, the Moon's phase, the obliquity's
//! seasons, the refusals of keys that do not fit together, and the orbit
//! columns of the window time series.
//!
//! Why this exists: the keys are what a modeller writes, so every check
//! here builds its scenario from TOML text through the parser and the
//! validator, and reads the geometry back from the validated model.

use std::path::Path;
use std::sync::atomic::AtomicBool;
use std::sync::{Arc, OnceLock};

use core::f64::consts::PI;
use exobound::body::{DAY, HelioOrbit};
use exobound::checkpoint::ScenarioSource;
use exobound::driver::{self, Outcome, Session};
use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::scenario::{Inputs, Scenario};

use crate::support::TempDir;

/// One runtime for the module files of every scenario here.
fn runtime() -> Arc<Runtime> {
    static RT: OnceLock<Arc<Runtime>> = OnceLock::new();
    RT.get_or_init(|| {
        Arc::new(
            Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap(),
        )
    })
    .clone()
}

/// A small scenario whose `[body]` section holds `body` (TOML lines),
/// with `environment` lines in `[environment]` and `run` lines in `[run]`.
fn text(body: &str, environment: &str, run: &str) -> String {
    format!(
        r#"title = "orbit keys"

[body]
{body}

[species]
name = "sodium"

[surface]
latitude_cells = 6
longitude_cells = 12
adsorbed = "1e10 cm^-2"

[surface.temperature]
subsolar = "400 K"
night = "100 K"

[environment]
{environment}

[[processes]]
module = "standard:photon-desorption"
role = "source"

[[processes]]
module = "standard:surface-accommodation"
role = "surface-interaction"

[run]
{run}

[outputs]
products = ["csv", "netcdf"]
"#
    )
}

fn load(body: &str, environment: &str) -> Result<Scenario, String> {
    let t = text(body, environment, "duration = \"1 d\"\ndt = \"1 h\"\nparticles = 100");
    Scenario::from_text(&t, "orbit.toml", Inputs::Demo, &[], &runtime()).map_err(|e| e.0)
}

fn ok(body: &str) -> Scenario {
    load(body, "").unwrap_or_else(|e| panic!("{body}: {e}"))
}

/// `a - b` wrapped into [-pi, pi), rad.
fn diff(a: f64, b: f64) -> f64 {
    (a - b + PI).rem_euclid(2.0 * PI) - PI
}

/// NASA Mercury fact sheet: sidereal orbital period 87.969257 d.
const P_MERCURY: f64 = 87.969_257 * DAY;

#[test]
fn mercury_subsolar_point_follows_the_resonance_from_any_start() {
    for nu0_deg in [0.0_f64, 100.0, 250.0] {
        for hot_deg in [0.0_f64, 180.0] {
            let s = ok(&format!(
                "name = \"mercury\"\nstart_true_anomaly = \"{nu0_deg} deg\"\n\
                 perihelion_subsolar_longitude = \"{hot_deg} deg\""
            ));
            let (body, sun) = (&s.model.body, &s.model.sun);
            let lon = |t: f64| sun.subsolar_longitude(body, t);
            let hot = hot_deg.to_radians();
            let tp = body.orbit.perihelion_at_or_before(0.0).unwrap();
            assert!(tp <= 0.0 && tp > -P_MERCURY);
            // The 3:2 spin-orbit resonance (Colombo 1965, Nature 208, 575;
            // Margot et al. 2007, Science 316, 710; from memory): at every
            // perihelion the Sun stands over a hot longitude (0 or 180 deg
            // E), alternating, and at every aphelion over a warm one (90 or
            // 270 deg E).
            for k in 0..4 {
                let t = tp + k as f64 * P_MERCURY;
                let expect = hot + k as f64 * PI;
                assert!(diff(lon(t), expect).abs() < 1e-9, "nu0 {nu0_deg} k {k}: {}", lon(t));
                let warm = diff(lon(t + 0.5 * P_MERCURY), hot + k as f64 * PI - 0.5 * PI);
                assert!(warm.abs() < 1e-9, "aphelion nu0 {nu0_deg} k {k}");
            }
            // After one orbit the subsolar point has moved by exactly 180
            // deg; after one solar day (two orbits) it is back.
            for t in [0.0, 0.37 * P_MERCURY, 3.0 * DAY] {
                assert!((diff(lon(t + P_MERCURY), lon(t)).abs() - PI).abs() < 1e-9);
                assert!(diff(lon(t + 2.0 * P_MERCURY), lon(t)).abs() < 1e-9);
            }
            // The start longitude is lon_ss(t_p) + nu0 - Omega_sid (0 - t_p).
            let expect = hot + nu0_deg.to_radians() - body.sidereal_rate() * (0.0 - tp);
            assert!(diff(lon(0.0), expect).abs() < 1e-9, "start, nu0 {nu0_deg}");
        }
    }
}

#[test]
fn start_true_anomaly_and_distance_for_mercury_and_a_custom_ellipse() {
    let mercury = ok("name = \"mercury\"\nstart_true_anomaly = \"100 deg\"");
    let custom = ok("name = \"custom\"\ngm = \"3.2e4 km^3 s^-2\"\nradius = \"2000 km\"\n\
         sidereal_rotation = \"20 d\"\nsemi_major_axis = \"1.5 AU\"\neccentricity = 0.4\n\
         orbital_period = \"670 d\"\nstart_true_anomaly = \"-60 deg\"\nsubsolar_longitude = \"30 deg\"");
    for (s, nu0_deg, a, e) in
        [(&mercury, 100.0_f64, 0.387_098, 0.205_63), (&custom, -60.0, 1.5, 0.4)]
    {
        let orbit = s.model.body.orbit;
        let nu0 = nu0_deg.to_radians();
        assert!(diff(orbit.true_anomaly(0.0), nu0).abs() < 1e-12, "{}", s.model.body.name);
        // Kepler's first law, r = a (1 - e^2) / (1 + e cos nu) (Kepler 1609,
        // Astronomia nova; from memory).
        let r = a * (1.0 - e * e) / (1.0 + e * nu0.cos());
        assert!((orbit.distance_au(0.0) / r - 1.0).abs() < 1e-12, "{}", s.model.body.name);
    }
    // The custom ellipse keeps its own start longitude, and its mean solar
    // day follows from the synodic relation 1/P_sol = 1/P_sid - 1/P_orb
    // (common practice).
    let lon0 = custom.model.sun.subsolar_longitude(&custom.model.body, 0.0);
    assert!(diff(lon0, 30f64.to_radians()).abs() < 1e-12, "{lon0}");
    let b = &custom.model.body;
    assert!((1.0 / b.solar_day - (1.0 / (20.0 * DAY) - 1.0 / (670.0 * DAY))).abs() < 1e-20);
    assert!(matches!(b.orbit, HelioOrbit::Kepler { period_s, .. } if period_s == 670.0 * DAY));
}

#[test]
fn lunar_phase_places_the_subsolar_point() {
    // The Moon's prime meridian faces the Earth (IAU selenographic
    // convention, Archinal et al. 2011, Celest. Mech. Dyn. Astr. 109, 101;
    // from memory): new moon puts the Sun over 180 deg E, first quarter
    // over 90 deg E (the eastern limb is lit first), full moon over 0 deg,
    // last quarter over 270 deg E.
    for (phase, deg) in [("0", 180.0_f64), ("0.25", 90.0), ("0.5", 0.0), ("0.75", 270.0)] {
        let s = ok(&format!("name = \"moon\"\nstart_lunar_phase = {phase}"));
        let lon = s.model.sun.subsolar_longitude(&s.model.body, 0.0);
        assert!(diff(lon, deg.to_radians()).abs() < 1e-12, "phase {phase}: {lon}");
    }
    // Half a synodic month after new moon it is full moon (NASA Moon fact
    // sheet: synodic month 29.53 d).
    let s = ok("name = \"moon\"\nstart_lunar_phase = 0.0");
    let lon = s.model.sun.subsolar_longitude(&s.model.body, 0.5 * 29.53 * DAY);
    assert!(diff(lon, 0.0).abs() < 1e-9, "{lon}");
}

#[test]
fn obliquity_gives_the_seasons() {
    // Subsolar latitude delta = asin(sin eps sin L), L from the northward
    // equinox (Smart 1977, Textbook on Spherical Astronomy, 6th ed.; from
    // memory): +eps and -eps at the solstices, 0 at the equinoxes.
    let eps = 25.0_f64.to_radians();
    let s = ok("name = \"mercury\"\nobliquity = \"25 deg\"\nequinox_true_anomaly = \"30 deg\"\n\
         start_true_anomaly = \"30 deg\"");
    let (body, sun) = (&s.model.body, &s.model.sun);
    // The start is the northward equinox; find the later seasons by their
    // true anomaly on the ellipse.
    let when = |nu_deg: f64| {
        // Bisect nu(t) - nu over one orbit from the start (nu increases).
        let target = (nu_deg - 30.0_f64).to_radians();
        let swept =
            |t: f64| body.orbit.true_anomaly_unwrapped(t) - body.orbit.true_anomaly_unwrapped(0.0);
        let (mut lo, mut hi) = (0.0, P_MERCURY);
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if swept(mid) < target { lo = mid } else { hi = mid }
        }
        0.5 * (lo + hi)
    };
    assert!(sun.subsolar_latitude(body, 0.0).abs() < 1e-12);
    assert!((sun.subsolar_latitude(body, when(120.0)) - eps).abs() < 1e-9);
    assert!(sun.subsolar_latitude(body, when(210.0)).abs() < 1e-9);
    assert!((sun.subsolar_latitude(body, when(300.0)) + eps).abs() < 1e-9);
    // The Sun's direction stays a unit vector that agrees with the
    // subsolar point and with cos SZA = 1 there.
    for i in 0..30 {
        let t = i as f64 * 3.3 * DAY;
        let d = sun.sun_direction_bci(body, t);
        let norm = (d[0] * d[0] + d[1] * d[1] + d[2] * d[2]).sqrt();
        assert!((norm - 1.0).abs() < 1e-14);
        let (lat, lon) = (sun.subsolar_latitude(body, t), sun.subsolar_longitude(body, t));
        assert!((d[2] - lat.sin()).abs() < 1e-14);
        assert!(sun.cos_sza(body, lat, lon, t) > 1.0 - 1e-14);
    }
    // At a constant distance the season starts where start_solar_longitude says.
    let s = ok("name = \"moon\"\nobliquity = \"1.54 deg\"\nstart_solar_longitude = \"90 deg\"");
    let lat = s.model.sun.subsolar_latitude(&s.model.body, 0.0);
    assert!((lat - 1.54_f64.to_radians()).abs() < 1e-12, "{lat}");
}

/// The error of loading `body` (with `environment` lines), which must name `key`.
fn refused(body: &str, environment: &str, key: &str) -> String {
    match load(body, environment) {
        Ok(_) => panic!("accepted: {body}"),
        Err(e) => {
            assert!(e.contains(key), "`{key}` not named: {e}");
            e
        }
    }
}

#[test]
fn keys_that_do_not_fit_are_refused_by_name() {
    let custom = "name = \"custom\"\ngm = \"3.2e4 km^3 s^-2\"\nradius = \"2000 km\"\n\
                  sidereal_rotation = \"20 d\"";
    let e = refused(
        &format!(
            "{custom}\nsemi_major_axis = \"1 AU\"\neccentricity = 1.0\norbital_period = \"365 d\""
        ),
        "",
        "body.eccentricity",
    );
    assert!(e.contains("[0, 1)"), "{e}");
    let e = refused(&format!("{custom}\nsemi_major_axis = \"1 AU\""), "", "body.eccentricity");
    assert!(e.contains("all three"), "{e}");
    refused(
        &format!(
            "{custom}\nsolar_day = \"20 d\"\nsemi_major_axis = \"1 AU\"\neccentricity = 0.1\n\
                  orbital_period = \"365 d\""
        ),
        "",
        "body.solar_day",
    );
    let e = refused(
        "name = \"mercury\"\nsubsolar_longitude = \"10 deg\"",
        "",
        "body.subsolar_longitude",
    );
    assert!(e.contains("start_true_anomaly") && e.contains("perihelion_subsolar_longitude"), "{e}");
    let e = refused(
        "name = \"mercury\"\nobliquity = \"2 deg\"\nsubsolar_latitude = \"1 deg\"",
        "",
        "body.subsolar_latitude",
    );
    assert!(e.contains("obliquity"), "{e}");
    let e =
        refused("name = \"moon\"\nstart_true_anomaly = \"10 deg\"", "", "body.start_true_anomaly");
    assert!(e.contains("constant heliocentric distance"), "{e}");
    refused(
        "name = \"mercury\"\nstart_true_anomaly = \"10 deg\"",
        "heliocentric_distance = \"0.4 AU\"",
        "body.start_true_anomaly",
    );
    refused(
        "name = \"mercury\"\nperihelion_subsolar_longitude = \"90 deg\"",
        "",
        "body.perihelion_subsolar_longitude",
    );
    refused(
        "name = \"moon\"\nperihelion_subsolar_longitude = \"0 deg\"",
        "",
        "body.perihelion_subsolar_longitude",
    );
    refused("name = \"mercury\"\nstart_lunar_phase = 0.5", "", "body.start_lunar_phase");
    refused("name = \"moon\"\nstart_lunar_phase = 1.5", "", "body.start_lunar_phase");
    refused(
        "name = \"moon\"\nstart_lunar_phase = 0.5\nsubsolar_longitude = \"0 deg\"",
        "",
        "body.subsolar_longitude",
    );
    refused("name = \"moon\"\nobliquity = \"95 deg\"", "", "body.obliquity");
    refused("name = \"moon\"\nequinox_true_anomaly = \"0 deg\"", "", "body.equinox_true_anomaly");
    refused(
        "name = \"moon\"\nobliquity = \"1 deg\"\nequinox_true_anomaly = \"0 deg\"",
        "",
        "body.equinox_true_anomaly",
    );
    refused(
        "name = \"mercury\"\nobliquity = \"1 deg\"\nstart_solar_longitude = \"0 deg\"",
        "",
        "body.start_solar_longitude",
    );
    refused("name = \"moon\"\norbital_period = \"30 d\"", "", "body.orbital_period");
    // Mercury at a fixed distance has no perihelion: its start longitude is given.
    let s = load(
        "name = \"mercury\"\nsubsolar_longitude = \"10 deg\"",
        "heliocentric_distance = \"0.4 AU\"",
    )
    .unwrap();
    assert!(
        diff(s.model.sun.subsolar_longitude(&s.model.body, 0.0), 10f64.to_radians()).abs() < 1e-12
    );
}

/// Run `body` for `run` into `out` and return the validated scenario.
fn run(out: &Path, body: &str, run: &str) -> Scenario {
    let t = text(body, "", run);
    let source = ScenarioSource {
        origin: "orbit.toml".into(),
        text: t.clone(),
        input_dir: None,
        overrides: Vec::new(),
    };
    let scenario = Scenario::from_text(&t, "orbit.toml", Inputs::Demo, &[], &runtime()).unwrap();
    let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
    match driver::start(scenario.clone(), source, out, session).unwrap_or_else(|e| panic!("{e}")) {
        Outcome::Finished { .. } => scenario,
        Outcome::Interrupted { .. } => panic!("not interrupted"),
    }
}

#[test]
fn window_records_carry_the_orbit_position() {
    let tmp = TempDir::new("orbit-windows");
    for (name, body) in [
        ("mercury", "name = \"mercury\"\nstart_true_anomaly = \"40 deg\"\nobliquity = \"10 deg\""),
        ("moon", "name = \"moon\"\nstart_lunar_phase = 0.25"),
    ] {
        let out = tmp.path().join(name);
        let s = run(&out, body, "duration = \"6 d\"\ndt = \"12 h\"\nparticles = 100\nthreads = 1");
        let (b, sun) = (&s.model.body, &s.model.sun);
        let csv = std::fs::read_to_string(out.join("windows.csv")).unwrap();
        let mut lines = csv.lines();
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        let col = |n: &str| header.iter().position(|h| *h == n).unwrap_or_else(|| panic!("{n}"));
        let ds = exobound_products::read_netcdf(&out.join("exosphere.nc")).unwrap();
        let nc = |n: &str| ds.variable(n).unwrap_or_else(|| panic!("no {n} in exosphere.nc"));
        assert_eq!(nc("true_anomaly").attribute("units").unwrap().as_text(), Some("degrees"));
        assert_eq!(nc("heliocentric_distance").attribute("units").unwrap().as_text(), Some("au"));
        let rows: Vec<Vec<f64>> =
            lines.map(|l| l.split(',').map(|c| c.parse().unwrap_or(f64::NAN)).collect()).collect();
        assert_eq!(rows.len(), 6, "one window per day (the default window)");
        for (i, r) in rows.iter().enumerate() {
            let mid = 0.5 * (r[col("start_s")] + r[col("end_s")]);
            assert!((mid - (i as f64 + 0.5) * DAY).abs() < 1e-6);
            let lon = r[col("subsolar_longitude_deg")].to_radians();
            assert!(diff(lon, sun.subsolar_longitude(b, mid)).abs() < 1e-9);
            let lat = r[col("subsolar_latitude_deg")].to_radians();
            assert!((lat - sun.subsolar_latitude(b, mid)).abs() < 1e-12);
            let r_au = r[col("heliocentric_distance_au")];
            assert!((r_au - b.orbit.distance_au(mid)).abs() < 1e-12);
            let nu = r[col("true_anomaly_deg")];
            let phase = r[col("lunar_phase")];
            let ls = r[col("solar_longitude_deg")];
            assert_eq!(nc("true_anomaly").data[i].to_bits(), nu.to_bits());
            assert_eq!(nc("subsolar_latitude").data[i], r[col("subsolar_latitude_deg")]);
            if name == "mercury" {
                assert!(diff(nu.to_radians(), b.orbit.true_anomaly(mid)).abs() < 1e-9);
                assert!(phase.is_nan());
                // equinox_true_anomaly defaults to 0 deg (the northward
                // equinox at perihelion), so L_s = nu.
                assert!(diff(ls.to_radians(), nu.to_radians()).abs() < 1e-9);
                // Kepler's second law: dnu/dt = n (1 + e cos nu)^2 /
                // (1 - e^2)^1.5 (closed form), at most 6.35 deg/d at
                // perihelion for Mercury (NASA fact sheet orbit): the
                // anomaly grows from 40 deg, no faster than that.
                assert!(nu > 40.0 && nu < 40.0 + 6.4 * mid / DAY, "{nu}");
            } else {
                assert!(nu.is_nan() && ls.is_nan());
                // First quarter at the start: the phase grows by one
                // synodic month (29.53 d, NASA Moon fact sheet) per cycle.
                let expect = 0.25 + mid / (29.53 * DAY);
                assert!((phase - expect).abs() < 1e-9, "{phase} vs {expect}");
            }
        }
    }
}

//! Sweeps and fits end to end on a shortened quick demo: a sweep runs and
//! gathers every point; shards collected together equal the unsharded
//! sweep bit for bit; a missing shard and a shard of another plan are
//! refused; a restarted sweep skips finished runs; a fit recovers a known
//! parameter from observations the model made with another seed.

use std::path::Path;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use exobound::checkpoint::ScenarioSource;
use exobound::fit::{self, FitSettings, FreeParam};
use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::sweep::{self, Shard};

use crate::support::TempDir;

fn runtime() -> Arc<Runtime> {
    Arc::new(Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap())
}

/// A three-point plan of the quick demo, shortened to 1 day and 3000 particles.
fn write_plan(dir: &Path, seeds: &str) -> std::path::PathBuf {
    let p = dir.join("plan.toml");
    std::fs::write(
        &p,
        format!(
            "title = \"test sweep\"\nscenario = \"demo-quick\"\n\
             set = [\"run.particles=3000\", \"run.duration=\\\"1 d\\\"\"]\nseeds = {seeds}\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.flux\"\n\
             range = {{ from = \"5e4 cm^-2 s^-1\", to = \"2e5 cm^-2 s^-1\", count = 3 }}\n"
        ),
    )
    .unwrap();
    p
}

#[test]
fn sweep_shards_collect_and_restart() {
    let tmp = TempDir::new("sweep");
    let rt = runtime();
    let plan = sweep::plan::read(&write_plan(tmp.path(), "[5]")).unwrap();
    let no_stop = || Arc::new(AtomicBool::new(false));
    let quiet = |_: &str| {};

    // Unsharded, two at a time.
    let whole = tmp.path().join("whole");
    let rep = sweep::run_shard(&plan, &whole, Shard::ALL, 2, &rt, no_stop(), &quiet).unwrap();
    assert_eq!((rep.ran, rep.skipped), (3, 0));
    let r = sweep::collect(&whole).unwrap();
    assert_eq!(r.points.len(), 3);
    // The source rate grows with the vaporization flux (more atoms
    // supplied: the MIV source is proportional to the flux, by the law).
    let src = exobound::output::results::measure_index("source_rate").unwrap();
    assert!(r.points[0].mean[src] < r.points[1].mean[src]);
    assert!(r.points[1].mean[src] < r.points[2].mean[src]);
    let csv = std::fs::read_to_string(whole.join("sweep.csv")).unwrap();
    assert!(csv.starts_with("point,processes.impact-vapor.parameters.flux [cm^-2 s^-1],"));
    assert_eq!(csv.lines().count(), 4);

    // A restart skips every finished run.
    let rep = sweep::run_shard(&plan, &whole, Shard::ALL, 2, &rt, no_stop(), &quiet).unwrap();
    assert_eq!((rep.ran, rep.skipped), (0, 3));

    // Two shards, one at a time: a missing shard is named, then the two
    // together equal the unsharded sweep bit for bit.
    let sharded = tmp.path().join("sharded");
    sweep::run_shard(&plan, &sharded, Shard::parse("1/2").unwrap(), 1, &rt, no_stop(), &quiet)
        .unwrap();
    let e = sweep::collect(&sharded).unwrap_err();
    assert!(e.contains("missing shard(s) 0/2"), "{e}");
    sweep::run_shard(&plan, &sharded, Shard::parse("0/2").unwrap(), 1, &rt, no_stop(), &quiet)
        .unwrap();
    sweep::collect(&sharded).unwrap();
    assert_eq!(std::fs::read_to_string(sharded.join("sweep.csv")).unwrap(), csv);

    // A shard of another plan (other seeds, so another digest) is refused,
    // by `collect` and by a run into the same directory.
    let other = sweep::plan::read(&write_plan(tmp.path(), "[6]")).unwrap();
    assert_ne!(other.digest, plan.digest);
    let e = sweep::run_shard(&other, &sharded, Shard::ALL, 1, &rt, no_stop(), &quiet).unwrap_err();
    assert!(e.contains("another plan"), "{e}");
    // A directory of other things is not taken over.
    let junk = tmp.path().join("junk");
    std::fs::create_dir_all(&junk).unwrap();
    std::fs::write(junk.join("notes.txt"), "mine").unwrap();
    let e = sweep::run_shard(&plan, &junk, Shard::ALL, 1, &rt, no_stop(), &quiet).unwrap_err();
    assert!(e.contains("not the directory of a sweep"), "{e}");
    let foreign = sharded.join("shards").join("shard-0-of-1.json");
    std::fs::write(
        &foreign,
        format!(
            "{{\"plan_digest\":\"{}\",\"shard\":{{\"index\":0,\"count\":1}},\"points\":[0]}}",
            other.digest
        ),
    )
    .unwrap();
    let e = sweep::collect(&sharded).unwrap_err();
    assert!(e.contains("another plan") && e.contains("shard-0-of-1.json"), "{e}");
}

/// A keyed standard normal deviate for synthetic observation noise
/// (Box-Muller on two SplitMix64 uniforms of `key`; Box & Muller 1958,
/// Ann. Math. Statist. 29, 610; Steele, Lea & Flood 2014, OOPSLA, for
/// SplitMix64).
fn normal(key: u64) -> f64 {
    let mix = |mut z: u64| {
        z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    };
    let u = |k: u64| ((mix(k) >> 11) as f64 + 0.5) / (1u64 << 53) as f64;
    let (u1, u2) = (u(key.wrapping_mul(2)), u(key.wrapping_mul(2) + 1));
    (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos()
}

/// Synthetic column observations from the quick demo at a vaporization
/// flux `truth`: the mean of `runs` runs (seeds `seed` to `seed + runs -
/// 1`), each profile value plus Gaussian noise of `noise` x value (keyed by
/// `seed`), stated with the uncertainty sqrt(noise^2 value^2 + e^2), e the
/// runs' standard error. The truth's own Monte Carlo noise has a part
/// common to a whole profile (about 0.8 % for one run of the quick preset)
/// that these independent errors cannot state, so `runs` must make it
/// small beside the fit's own interval.
pub fn synthetic_columns(
    dir: &std::path::Path,
    truth: f64,
    seed: u64,
    runs: u64,
    noise: f64,
) -> String {
    let files = [
        ("equator_local_time.csv", "equator_column", "h"),
        ("latitude.csv", "latitude_column", "deg"),
    ];
    // Per file: per row, (coordinate, values over the seeds).
    let mut rows: Vec<Vec<(f64, Vec<f64>)>> = vec![Vec::new(); files.len()];
    for s in seed..seed + runs {
        let run = dir.join(format!("seed-{s}"));
        crate::run_outputs::run_quick(
            &run,
            &[
                format!("run.seed={s}"),
                format!("processes.impact-vapor.parameters.flux=\"{truth:e} cm^-2 s^-1\""),
            ],
        );
        for (f, (file, _, _)) in files.iter().enumerate() {
            let t = std::fs::read_to_string(run.join("profiles").join(file)).unwrap();
            for (r, l) in t.lines().skip(1).enumerate() {
                let c: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
                if rows[f].len() <= r {
                    rows[f].push((c[0], Vec::new()));
                }
                rows[f][r].1.push(c[1]);
            }
        }
    }
    let mut obs = String::from("kind,coordinate,value,uncertainty,unit\n");
    let mut k = 0u64;
    for ((_, kind, unit), rows) in files.iter().zip(&rows) {
        for (x, vals) in rows {
            let n = vals.len() as f64;
            let mean = vals.iter().sum::<f64>() / n;
            let var = vals.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / (n - 1.0);
            k += 1;
            let v = mean * (1.0 + noise * normal(seed.wrapping_mul(1000) + k));
            let sigma = ((noise * mean).powi(2) + var / n).sqrt();
            obs.push_str(&format!("{kind},{x} {unit},{v:e},{sigma:e},cm^-2\n"));
        }
    }
    obs
}

/// The vaporization flux as a free parameter.
fn flux_free() -> Vec<FreeParam> {
    vec![FreeParam::parse("processes.impact-vapor.parameters.flux=5e4..1e6 cm^-2 s^-1").unwrap()]
}

#[test]
fn fit_recovers_a_known_flux_from_synthetic_observations() {
    let tmp = TempDir::new("fit");
    let rt = runtime();
    let truth = 2.0e5;
    let obs = synthetic_columns(&tmp.path().join("syn"), truth, 96, 4, 0.05);
    let obs = fit::observed::parse(&obs, "synthetic", tmp.path()).unwrap();
    let base = ScenarioSource::demo(true, &[]);
    let settings =
        FitSettings { seeds: vec![20261202, 20261203], jobs: 2, ..FitSettings::default() };
    let out = tmp.path().join("fit");
    let lines = std::sync::Mutex::new(Vec::new());
    let log = |l: &str| lines.lock().unwrap().push(l.to_string());
    let r = fit::fit(&base, &flux_free(), &obs, &settings, &out, &rt, &log).unwrap();
    let [lo2, hi2] = r.interval_2sigma[0];
    let [lo, hi] = r.interval_1sigma[0];
    assert!(lo < r.best[0] && r.best[0] < hi && lo2 < lo && hi < hi2, "{:?}", r);
    // The interval is a profile-likelihood interval (Wilks 1938, Ann. Math.
    // Statist. 9, 60): one fit lands within 3 sigma of the truth in 99.7 %
    // of cases for Gaussian errors (this data set: 2.5 sigma high, from its
    // 5 % observation noise). Whether 1 and 2 sigma hold 68 % and 95 % is
    // measured over twenty fits by the ignored test
    // `fit_intervals_cover_the_truth` (docs/fit.md).
    let sigma = 0.5 * (hi - lo);
    assert!(
        (r.best[0] - truth).abs() < 3.0 * sigma,
        "{:?} vs {truth}; {:?}",
        r.interval_1sigma,
        r.notes
    );
    assert!(!r.stopped_on_cap, "{:?}", r.notes);
    // chi2 per degree of freedom of a model that describes the data with
    // the stated errors is of order 1 (common practice: 0.3-3).
    assert!(r.chi2_per_dof > 0.3 && r.chi2_per_dof < 3.0, "{}", r.chi2_per_dof);
    // The model's own noise is in every residual's denominator.
    assert!(r.residuals.iter().all(|q| q.model_error > 0.0));
    // One line per evaluation plus one for the noise calibration (six
    // more seeds at the best grid point), and nothing run twice.
    let lines = lines.into_inner().unwrap();
    assert_eq!(lines.len(), r.evaluations.len() + 1, "{lines:#?}");
    assert!(lines.iter().any(|l| l.starts_with("noise: measured from 8 seeds")), "{lines:#?}");
    assert_eq!(r.runs, r.evaluations.len() * 2 + 6);
    let mut seen: Vec<Vec<u64>> =
        r.evaluations.iter().map(|e| e.values.iter().map(|v| v.to_bits()).collect()).collect();
    seen.sort();
    seen.dedup();
    assert_eq!(seen.len(), r.evaluations.len());
    for f in [
        "fit.json",
        "residuals.csv",
        "evaluations.csv",
        "provenance.json",
        "plots/fit_equator.png",
        "best/summary.json",
    ] {
        assert!(out.join(f).is_file(), "missing {f}");
    }
    let j: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(out.join("fit.json")).unwrap()).unwrap();
    assert!(j["method"].as_str().unwrap().contains("profile likelihood"));
}

#[test]
fn fit_to_a_slit_profile_and_image_points_recovers_the_flux() {
    let tmp = TempDir::new("fit-slit");
    let rt = runtime();
    // A ground telescope's slit above the dawn limb at 70 deg phase,
    // written by hand; the truth run at 3e5 cm^-2 s^-1, seed 41.
    let view = tmp.path().join("slit.toml");
    std::fs::write(
        &view,
        "title = \"slit above the dawn limb\"\n[distant]\nphase_angle = \"70 deg\"\n\
         observer_side = \"dawn\"\naltitude_max = \"1500 km\"\naltitude_step = \"250 km\"\n\
         aperture = \"20 km\"\nimage_pixels = 8\n",
    )
    .unwrap();
    let truth = 3.0e5;
    let run = tmp.path().join("truth");
    crate::run_outputs::run_quick(
        &run,
        &[
            "run.seed=41".into(),
            format!("processes.impact-vapor.parameters.flux=\"{truth:e} cm^-2 s^-1\""),
        ],
    );
    let samples = exobound::observe::view_samples(&run, &view).unwrap();
    let mut obs = String::from("kind,coordinate,value,uncertainty,unit\n");
    for (k, s) in samples.iter().enumerate() {
        let v = s.brightness_r * (1.0 + 0.05 * normal(41_000 + k as u64));
        // 5 % noise, plus 3 % for the truth run's own Monte Carlo noise
        // (one run of the quick preset: about 3.4 % per value, 0.8 % common).
        let sigma = 0.058 * s.brightness_r;
        obs.push_str(&format!("brightness:slit.toml,{} km,{v:e},{sigma:e},R\n", s.altitude_km));
    }
    // An image point straight above the disk centre is the line of sight
    // of a slit at position angle 0 through the same aperture.
    let north = tmp.path().join("north.toml");
    let text = std::fs::read_to_string(&view).unwrap();
    std::fs::write(
        &north,
        text.replace("[distant]\n", "[distant]\nslit_position_angle = \"0 deg\"\n"),
    )
    .unwrap();
    let slit = exobound::observe::view_samples(&run, &north).unwrap();
    let above: Vec<(f64, f64)> = slit.iter().map(|s| (0.0, 1737.4 + s.altitude_km)).collect();
    let same = exobound::observe::sky_brightness(&run, &north, &above).unwrap();
    for (s, b) in slit.iter().zip(&same) {
        assert!(s.brightness_r > 0.0 && (s.brightness_r - b).abs() <= 1e-9 * b, "{s:?} vs {b}");
    }
    // Image pixels of the same telescope off the limb in other directions.
    let pixels =
        [(-2100.0, 0.0), (2100.0, 0.0), (0.0, -2300.0), (1500.0, 1500.0), (-1500.0, -1500.0)];
    let b = exobound::observe::sky_brightness(&run, &view, &pixels).unwrap();
    for (k, ((x, y), b)) in pixels.iter().zip(&b).enumerate() {
        assert!(*b > 0.0, "({x}, {y}) km: {b} R");
        let v = b * (1.0 + 0.05 * normal(42_000 + k as u64));
        obs.push_str(&format!("image:slit.toml,{x} {y} km,{v:e},{:e},R\n", 0.058 * b));
    }
    let obs = fit::observed::parse(&obs, "slit-obs.csv", tmp.path()).unwrap();
    assert_eq!(obs.len(), samples.len() + pixels.len());
    let base = ScenarioSource::demo(true, &[]);
    let settings = FitSettings { seeds: vec![7, 8], jobs: 2, ..FitSettings::default() };
    let r = fit::fit(&base, &flux_free(), &obs, &settings, &tmp.path().join("fit"), &rt, &|_| {})
        .unwrap();
    let [lo2, hi2] = r.interval_2sigma[0];
    assert!(
        lo2 < truth && truth < hi2,
        "{:?} {:?} vs {truth}; {:?}",
        r.best,
        r.interval_2sigma,
        r.notes
    );
    // Every row of residuals.csv has the header's seven cells (an image
    // point's label has no comma).
    let res = std::fs::read_to_string(tmp.path().join("fit/residuals.csv")).unwrap();
    assert!(res.lines().all(|l| l.split(',').count() == 7), "{res}");
    assert_eq!(res.lines().filter(|l| l.starts_with("image:slit.toml at ")).count(), 5);
    // Brightness grows with the flux: the fitted model reproduces the
    // observed slit and pixels to their errors (common practice: chi2/dof 0.3-3).
    assert!(r.chi2_per_dof > 0.2 && r.chi2_per_dof < 3.0, "{}", r.chi2_per_dof);
}

#[test]
fn a_bad_free_parameter_is_refused_before_any_run() {
    let tmp = TempDir::new("fit-bad");
    let rt = runtime();
    let obs = fit::observed::parse(
        "kind,coordinate,value,uncertainty,unit\nequator_column,12 h,1e9,1e8,cm^-2\n",
        "o.csv",
        tmp.path(),
    )
    .unwrap();
    let base = ScenarioSource::demo(true, &[]);
    let out = tmp.path().join("fit");
    let settings = FitSettings::default();
    let runs = std::sync::Mutex::new(0);
    let log = |_: &str| *runs.lock().unwrap() += 1;
    for (spec, names) in [
        // No unit for a flux.
        (
            "processes.impact-vapor.parameters.flux=5e4..1e6",
            "processes.impact-vapor.parameters.flux",
        ),
        // An unknown key.
        ("processes.impact-vapor.parameters.fluxx=5e4..1e6 cm^-2 s^-1", "fluxx"),
    ] {
        let free = [FreeParam::parse(spec).unwrap()];
        let e = fit::fit(&base, &free, &obs, &settings, &out, &rt, &log).unwrap_err();
        assert!(e.contains("--free") && e.contains(names), "{spec}: {e}");
        assert!(!out.exists() && !tmp.path().join("fit.partial").exists());
    }
    // An empty range is refused when parsed.
    let e =
        FreeParam::parse("processes.impact-vapor.parameters.flux=2e5..2e5 cm^-2 s^-1").unwrap_err();
    assert!(e.contains("processes.impact-vapor.parameters.flux"), "{e}");
    assert_eq!(*runs.lock().unwrap(), 0);
}

/// Coverage of the fit's intervals: twenty synthetic data sets (each from
/// its own seeds, with its own 5 % noise), each fitted; the truth must lie
/// inside the reported 1-sigma interval in 11 to 17 of them (the range the
/// issue asks for; for a binomial(20, 0.683), P(X <= 10) = 0.068 and
/// P(X >= 18) = 0.025) and inside 2 sigma in at least 17 (binomial(20,
/// 0.954): P(X <= 16) = 0.012); computed with scipy 1.17.1 stats.binom,
/// tests/python/coverage_binomial.py.
/// About 600 quick runs: run it with
/// `cargo test --release -p exobound-tests --test tests -- --ignored fit_intervals_cover_the_truth --nocapture`.
#[test]
#[ignore = "a validation of about 900 quick runs (20-40 minutes on 2 cores); docs/fit.md reports its counts"]
fn fit_intervals_cover_the_truth() {
    let tmp = TempDir::new("fit-coverage");
    let rt = runtime();
    let truth = 2.0e5;
    let (mut in1, mut in2) = (0, 0);
    for k in 0..20u64 {
        let dir = tmp.path().join(format!("set-{k}"));
        // Sixteen truth runs: with four, the truth's common noise (a shift
        // of every column at once, which the stated independent errors
        // leave out) was not small beside the fit's interval of about 1 %,
        // and the pulls had an RMS of 1.39 (11/20 inside 1 sigma, 18/20
        // inside 2).
        let obs = synthetic_columns(&dir.join("syn"), truth, 1000 + 20 * k, 16, 0.05);
        let obs = fit::observed::parse(&obs, "synthetic", &dir).unwrap();
        let base = ScenarioSource::demo(true, &[]);
        // The fit's own seeds differ from set to set too, so that the
        // model's Monte Carlo noise is a fresh draw in each fit and the
        // twenty outcomes are independent (the noise calibration takes the
        // next six seeds, which no other set uses).
        let seeds = vec![90_000 + 10 * k, 90_001 + 10 * k];
        let settings = FitSettings { seeds, jobs: 2, ..FitSettings::default() };
        let r =
            fit::fit(&base, &flux_free(), &obs, &settings, &dir.join("fit"), &rt, &|_| {}).unwrap();
        let inside = |[a, b]: [f64; 2]| a < truth && truth < b;
        in1 += usize::from(inside(r.interval_1sigma[0]));
        in2 += usize::from(inside(r.interval_2sigma[0]));
        println!(
            "set {k}: best {:.4e}, 1 sigma {:?}, 2 sigma {:?}, chi2/dof {:.2}, cap {}",
            r.best[0], r.interval_1sigma[0], r.interval_2sigma[0], r.chi2_per_dof, r.stopped_on_cap
        );
        let _ = std::fs::remove_dir_all(&dir);
    }
    println!("coverage: {in1}/20 inside 1 sigma, {in2}/20 inside 2 sigma");
    assert!((11..=17).contains(&in1), "{in1}/20 inside 1 sigma");
    assert!(in2 >= 17, "{in2}/20 inside 2 sigma");
}

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

#[test]
fn fit_recovers_a_known_flux_from_synthetic_observations() {
    let tmp = TempDir::new("fit");
    let rt = runtime();
    // Synthetic observations: the quick demo with a vaporization flux of
    // 2e5 cm^-2 s^-1 and seed 99; its equatorial and latitude profiles,
    // with the run's own window-to-window standard errors (at least 3 %).
    let truth = 2.0e5;
    let syn = tmp.path().join("syn");
    crate::run_outputs::run_quick(
        &syn,
        &[
            "run.seed=99".into(),
            format!("processes.impact-vapor.parameters.flux=\"{truth:e} cm^-2 s^-1\""),
        ],
    );
    let mut obs = String::from("kind,coordinate,value,uncertainty,unit\n");
    for (file, kind, unit) in [
        ("equator_local_time.csv", "equator_column", "h"),
        ("latitude.csv", "latitude_column", "deg"),
    ] {
        let t = std::fs::read_to_string(syn.join("profiles").join(file)).unwrap();
        for l in t.lines().skip(1) {
            let c: Vec<f64> = l.split(',').map(|x| x.parse().unwrap()).collect();
            obs.push_str(&format!(
                "{kind},{} {unit},{:e},{:e},cm^-2\n",
                c[0],
                c[1],
                c[2].max(0.03 * c[1])
            ));
        }
    }
    let obs = fit::observed::parse(&obs, "synthetic").unwrap();
    let base = ScenarioSource::demo(true, &[]);
    let free =
        [FreeParam::parse("processes.impact-vapor.parameters.flux=5e4..1e6 cm^-2 s^-1").unwrap()];
    // Three seeds per evaluation: the quick preset's equatorial column
    // scatters by about 5% from seed to seed now that escaping atoms fly
    // (one seed, 20261202, alone gives 1.898e5; the three give 1.968e5).
    let settings =
        FitSettings { seeds: vec![20261202, 20261203, 20261204], ..FitSettings::default() };
    let out = tmp.path().join("fit");
    let r = fit::fit(&base, &free, &obs, &settings, &out, &rt, &|_| {}).unwrap();
    let (best, sigma) = (r.best[0], r.sigma[0]);
    assert!(sigma.is_finite() && sigma > 0.0, "{:?}", r.notes);
    // Recovered within its reported uncertainty (2 sigma), or within 3%:
    // the reported sigma leaves out the Monte Carlo noise of the model and
    // of the synthetic data (about 1% for three seeds, measured as above),
    // which the curvature of the seeds' chi2 does not see; making the
    // reported uncertainty cover it is the fit's open issue ("Fits whose
    // error bars hold").
    assert!((best - truth).abs() < (2.0 * sigma).max(0.03 * truth), "{best} +- {sigma} vs {truth}");
    // chi2 per degree of freedom of a model that can describe the data
    // with realistic errors is of order 1 (common practice: 0.3-3).
    assert!(r.chi2_per_dof > 0.3 && r.chi2_per_dof < 3.0, "{}", r.chi2_per_dof);
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
}

//! Replicas end to end through the `exobound` binary: `run --replica I/N`
//! is reproducible and each index gives other results; `merge-replicas`
//! gives the same bytes whatever order the directories come in, holds the
//! arithmetic mean of the replicas with the standard error std / sqrt(N)
//! (both recomputed here from the replicas' own files), keeps the ledger
//! closed, and refuses mixed, duplicated or incomplete sets without
//! leaving output behind; the emitted Slurm scripts run the same commands.
//!
//! Each run is the quick demo cut to 12 h (48 steps of 900 s) with 1500
//! particles, a fraction of a second of simulation.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};
use std::sync::OnceLock;

use serde_json::Value;

use crate::support::{TempDir, exobound_binary};

/// The binary, built once for this module.
fn bin() -> &'static Path {
    static BIN: OnceLock<PathBuf> = OnceLock::new();
    BIN.get_or_init(exobound_binary)
}

/// Run the binary with `args`.
fn exobound(args: &[&str]) -> Output {
    Command::new(bin()).args(args).output().expect("start exobound")
}

/// Run the binary and require success.
fn ok(args: &[&str]) -> Output {
    let out = exobound(args);
    assert!(
        out.status.success(),
        "exobound {args:?} failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Run the binary, require failure, and return its stderr.
fn refused(args: &[&str]) -> String {
    let out = exobound(args);
    assert!(!out.status.success(), "exobound {args:?} succeeded but should have been refused");
    String::from_utf8_lossy(&out.stderr).into_owned()
}

/// The small quick-demo settings every run here uses, plus `products`.
fn small(products: &str) -> Vec<String> {
    [
        "run.particles=1500".to_string(),
        "run.duration=\"12 h\"".to_string(),
        format!("outputs.products={products}"),
    ]
    .into_iter()
    .flat_map(|s| ["--set".to_string(), s])
    .collect()
}

/// Products without the plots (most tests), and with them.
const NO_PLOTS: &str = "[\"netcdf\", \"csv\"]";
const ALL: &str = "[\"netcdf\", \"csv\", \"plots\"]";

/// Run replica `spec` of the small quick demo into `out`, with `extra` flags.
fn replica(out: &Path, spec: &str, products: &str, extra: &[&str]) -> PathBuf {
    let mut args: Vec<String> = vec!["run".into(), "--quick".into()];
    args.extend(small(products));
    args.extend(["--replica".into(), spec.into(), "--out".into(), out.display().to_string()]);
    args.extend(extra.iter().map(|s| s.to_string()));
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    ok(&args);
    out.to_path_buf()
}

/// Merge `dirs` into `out` (extra flags after), requiring success.
fn merge(dirs: &[&Path], out: &Path, extra: &[&str]) -> Output {
    let mut args: Vec<String> = vec!["merge-replicas".into()];
    args.extend(dirs.iter().map(|d| d.display().to_string()));
    args.extend(["--out".into(), out.display().to_string()]);
    args.extend(extra.iter().map(|s| s.to_string()));
    let args: Vec<&str> = args.iter().map(String::as_str).collect();
    ok(&args)
}

/// `merge-replicas` arguments as owned strings.
fn merge_args(dirs: &[&Path], out: &Path) -> Vec<String> {
    let mut args: Vec<String> = vec!["merge-replicas".into()];
    args.extend(dirs.iter().map(|d| d.display().to_string()));
    args.extend(["--out".into(), out.display().to_string()]);
    args
}

/// Every file under `dir`, relative path -> bytes, sorted by path.
fn files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    fn walk(base: &Path, dir: &Path, out: &mut Vec<(String, Vec<u8>)>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(base, &p, out);
            } else {
                let rel = p.strip_prefix(base).unwrap().display().to_string();
                out.push((rel, std::fs::read(&p).unwrap()));
            }
        }
    }
    let mut v = Vec::new();
    walk(dir, dir, &mut v);
    v.sort();
    v
}

fn json(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// summary.json without its wall-clock `performance` block.
fn summary_without_performance(dir: &Path) -> Value {
    let mut v = json(&dir.join("summary.json"));
    v.as_object_mut().unwrap().remove("performance");
    v
}

/// A CSV column by name.
fn csv_column(path: &Path, name: &str) -> Vec<f64> {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Vec<&str> = lines.next().unwrap().split(',').collect();
    let k = header.iter().position(|h| *h == name).unwrap_or_else(|| panic!("{name} in {path:?}"));
    lines.map(|l| l.split(',').nth(k).unwrap().parse().unwrap()).collect()
}

/// A NetCDF variable's data.
fn nc(path: &Path, var: &str) -> Vec<f64> {
    let ds = exobound_products::read_netcdf(path).unwrap();
    ds.variable(var).unwrap_or_else(|| panic!("{var} in {path:?}")).data.clone()
}

/// Mean and standard error of the mean (sample standard deviation with
/// n - 1, over sqrt(n)), written out here independently of the program.
fn mean_se(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    let mean = xs.iter().sum::<f64>() / n;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, var.sqrt() / n.sqrt())
}

/// Check merged (mean, error) values against the replicas' values; returns
/// how many entries differ between replicas (so the check means something).
fn check_mean_and_error(what: &str, replicas: &[Vec<f64>], mean: &[f64], error: &[f64]) -> usize {
    assert_eq!(mean.len(), replicas[0].len(), "{what}");
    assert_eq!(error.len(), replicas[0].len(), "{what}");
    let mut differing = 0;
    for i in 0..mean.len() {
        let xs: Vec<f64> = replicas.iter().map(|r| r[i]).collect();
        if xs.iter().any(|x| x.is_nan()) {
            assert!(mean[i].is_nan() && error[i].is_nan(), "{what}[{i}]: {xs:?}");
            continue;
        }
        if xs.iter().any(|x| *x != xs[0]) {
            differing += 1;
        }
        let (m, s) = mean_se(&xs);
        // The mean to a few ulp; the error to round-off of the two passes.
        assert!(
            (mean[i] - m).abs() <= 1e-14 * m.abs(),
            "{what}[{i}]: {} vs {m} from {xs:?}",
            mean[i]
        );
        assert!(
            (error[i] - s).abs() <= 1e-12 * s + 1e-14 * m.abs(),
            "{what}[{i}]: error {} vs {s} from {xs:?}",
            error[i]
        );
    }
    differing
}

/// Nothing of a refused merge into `out` may be left behind.
fn assert_nothing_written(out: &Path) {
    let name = out.file_name().unwrap().to_string_lossy().into_owned();
    for p in [
        out.to_path_buf(),
        out.with_file_name(format!("{name}.partial")),
        out.with_file_name(format!("{name}.writer-lock")),
    ] {
        assert!(!p.exists(), "{} was left behind", p.display());
    }
}

#[test]
fn a_replica_repeats_exactly_and_other_indices_differ() {
    let tmp = TempDir::new("replica-repeat");
    let t = tmp.path();
    let a = replica(&t.join("r1a"), "1/3", NO_PLOTS, &[]);
    let b = replica(&t.join("r1b"), "1/3", NO_PLOTS, &["--threads", "1"]);
    let c = replica(&t.join("r2"), "2/3", NO_PLOTS, &[]);
    // Same replica twice (also at another thread count): the same products.
    for f in ["exosphere.nc", "ledger.csv", "windows.csv", "profiles/latitude.csv"] {
        assert_eq!(std::fs::read(a.join(f)).unwrap(), std::fs::read(b.join(f)).unwrap(), "{f}");
    }
    assert_eq!(summary_without_performance(&a), summary_without_performance(&b));
    // Another index: other random numbers, other results.
    assert_ne!(
        std::fs::read(a.join("exosphere.nc")).unwrap(),
        std::fs::read(c.join("exosphere.nc")).unwrap()
    );
    let content =
        |d: &Path| json(&d.join("summary.json"))["total_content"]["value"].as_f64().unwrap();
    assert_ne!(content(&a), content(&c));
    // The provenance says which replica of which base seed it is, and the
    // seed used is neither the base seed nor the other replica's.
    let (pa, pc) = (json(&a.join("provenance.json")), json(&c.join("provenance.json")));
    let base = 20_261_202u64; // the quick demo's run.seed
    let last = pa["overrides"].as_array().unwrap().last().unwrap().as_str().unwrap().to_string();
    assert!(last.contains("# exobound replica 1/3, base seed 20261202"), "{last}");
    let seed = pa["seed"].as_u64().unwrap();
    assert!(last.starts_with(&format!("run.seed={seed} ")), "{last}");
    assert_eq!(pa["scenario_resolved"]["run"]["seed"].as_u64(), Some(seed));
    assert_ne!(seed, base);
    assert_ne!(seed, pc["seed"].as_u64().unwrap());
    // The documented rule, SplitMix64 from the base seed, written out here.
    let mix = |mut z: u64| {
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    };
    let rule = |i: u64| {
        mix(base.wrapping_add(0x9E37_79B9_7F4A_7C15u64.wrapping_mul(i + 1))) & (u64::MAX >> 1)
    };
    assert_eq!(seed, rule(1));
    assert_eq!(pc["seed"].as_u64(), Some(rule(2)));
    // The NetCDF file records the replica too.
    let ds = exobound_products::read_netcdf(&a.join("exosphere.nc")).unwrap();
    let over = ds.attribute("overrides").and_then(|v| v.as_text()).unwrap().to_string();
    assert!(over.contains("exobound replica 1/3, base seed 20261202"), "{over}");
}

#[test]
fn merging_gives_the_replica_mean_and_error_in_any_order_with_a_closed_ledger() {
    let tmp = TempDir::new("replica-merge");
    let t = tmp.path();
    let r: Vec<PathBuf> = (0..3)
        .map(|i| replica(&t.join(format!("r{i}")), &format!("{i}/3"), ALL, &["--seed", "11"]))
        .collect();
    let (m1, m2) = (t.join("m1"), t.join("m2"));
    merge(&[&r[2], &r[0], &r[1]], &m1, &[]);
    merge(&[&r[1], &r[2], &r[0]], &m2, &[]);

    // (b) The same bytes whatever the order given, plots included.
    let (f1, f2) = (files(&m1), files(&m2));
    let names: Vec<&str> = f1.iter().map(|(n, _)| n.as_str()).collect();
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
        assert!(names.contains(&f), "{f} missing from the merged directory: {names:?}");
    }
    assert_eq!(f1.len(), f2.len());
    for ((n1, b1), (n2, b2)) in f1.iter().zip(&f2) {
        assert_eq!(n1, n2);
        assert!(b1 == b2, "{n1} differs between merge orders");
    }

    // (c) Means and standard errors, recomputed from the replicas' files.
    let ncs: Vec<PathBuf> = r.iter().map(|d| d.join("exosphere.nc")).collect();
    let m_nc = m1.join("exosphere.nc");
    for (var, min_differing) in [
        ("density", 100),
        ("column", 100),
        ("reservoir", 50),
        ("atoms_in_flight", 1),
        ("source_flux", 50),
    ] {
        let reps: Vec<Vec<f64>> = ncs.iter().map(|p| nc(p, var)).collect();
        let n =
            check_mean_and_error(var, &reps, &nc(&m_nc, var), &nc(&m_nc, &format!("{var}_error")));
        assert!(n >= min_differing, "{var}: only {n} entries differ between replicas");
    }
    // Units are declared like the originals, on the errors too.
    let ds = exobound_products::read_netcdf(&m_nc).unwrap();
    for (var, unit) in [
        ("density", "cm-3"),
        ("density_error", "cm-3"),
        ("column_error", "cm-2"),
        ("atoms_in_flight_error", "1"),
    ] {
        assert_eq!(
            ds.variable(var).unwrap().attribute("units").and_then(|u| u.as_text()),
            Some(unit),
            "{var}"
        );
    }
    assert_eq!(ds.attribute("seed").and_then(|s| s.as_number()), Some(11.0));
    assert_eq!(ds.attribute("replica_count").and_then(|s| s.as_number()), Some(3.0));
    // Coordinates are the replicas' own.
    assert_eq!(nc(&m_nc, "latitude"), nc(&ncs[0], "latitude"));
    for (file, value, error, min) in [
        ("profiles/latitude.csv", "column_cm-2", "column_error_cm-2", 10),
        ("profiles/equator_local_time.csv", "column_cm-2", "column_error_cm-2", 10),
        ("windows.csv", "content_atoms", "content_error_atoms", 2),
        ("windows.csv", "peak_shift_deg", "peak_shift_error_deg", 1),
        ("ledger.csv", "escaped_atoms", "escaped_error_atoms", 40),
    ] {
        let reps: Vec<Vec<f64>> = r.iter().map(|d| csv_column(&d.join(file), value)).collect();
        let what = format!("{file} {value}");
        let n = check_mean_and_error(
            &what,
            &reps,
            &csv_column(&m1.join(file), value),
            &csv_column(&m1.join(file), error),
        );
        assert!(n >= min, "{what}: only {n} entries differ");
    }
    let s = json(&m1.join("summary.json"));
    for p in [
        "/total_content/value",
        "/escape_rate/value",
        "/dayside_near_surface_density/value",
        "/ledger/escaped",
    ] {
        let reps: Vec<f64> = r
            .iter()
            .map(|d| json(&d.join("summary.json")).pointer(p).unwrap().as_f64().unwrap())
            .collect();
        let se = s.pointer(&format!("/standard_error{p}")).unwrap().as_f64().unwrap();
        check_mean_and_error(
            p,
            &[vec![reps[0]], vec![reps[1]], vec![reps[2]]],
            &[s.pointer(p).unwrap().as_f64().unwrap()],
            &[se],
        );
    }
    assert_eq!(s["seed"].as_u64(), Some(11));
    let p = json(&m1.join("provenance.json"));
    assert_eq!(p["seed"].as_u64(), Some(11));
    assert_eq!(p["replicas"]["merged"], serde_json::json!([0, 1, 2]));
    assert!(
        p["overrides"]
            .as_array()
            .unwrap()
            .iter()
            .all(|o| !o.as_str().unwrap().contains("exobound replica"))
    );

    // (e) The mean ledger closes: supplied = change in stock + losses, over
    // the run and in every step, to round-off.
    let l = &s["ledger"];
    let f = |k: &str| l[k].as_f64().unwrap();
    let sum =
        |k: &str| l[k].as_object().unwrap().values().map(|v| v.as_f64().unwrap()).sum::<f64>();
    let (supplied, initial, stock) =
        (f("supplied_from_bulk"), f("initial_stock"), f("final_in_flight") + f("final_adsorbed"));
    let imbalance = supplied
        - (stock - initial)
        - f("escaped")
        - f("buried")
        - sum("lost_in_flight")
        - sum("removed_from_pool")
        - l.get("roulette").and_then(Value::as_f64).unwrap_or(0.0);
    let scale = supplied.abs().max(initial.abs()).max(stock.abs());
    assert!(imbalance.abs() <= 1e-12 * scale, "run imbalance {imbalance} of {scale} atoms");
    assert!(f("closure_error_run").abs() <= 1e-12, "{}", f("closure_error_run"));
    let ledger = m1.join("ledger.csv");
    let col = |n: &str| csv_column(&ledger, n);
    let text = std::fs::read_to_string(&ledger).unwrap();
    let header: Vec<&str> = text.lines().next().unwrap().split(',').collect();
    let outflow_cols: Vec<&str> = header
        .iter()
        .copied()
        .filter(|h| {
            // A particle budget's roulette, where the ledger has one, is an
            // outflow too (docs/outputs.md).
            (h.starts_with("lost_") || h.starts_with("removed_") || *h == "roulette_atoms")
                && !h.ends_with("_error_atoms")
        })
        .chain(["escaped_atoms", "buried_atoms"])
        .collect();
    let outflows: Vec<Vec<f64>> = outflow_cols.iter().map(|c| col(c)).collect();
    let (sup, fl, ad, closure) = (
        col("supplied_from_bulk_atoms"),
        col("in_flight_atoms"),
        col("adsorbed_atoms"),
        col("closure_error"),
    );
    let mut before = initial;
    for k in 0..sup.len() {
        let after = fl[k] + ad[k];
        let out: f64 = outflows.iter().map(|c| c[k]).sum();
        let scale = sup[k].abs().max(before.abs()).max(after.abs());
        let imbalance = sup[k] - (after - before) - out;
        assert!(
            imbalance.abs() <= 1e-12 * scale,
            "step {k}: imbalance {imbalance} of {scale} atoms"
        );
        assert!(closure[k].abs() <= 1e-12, "step {k}: closure_error {}", closure[k]);
        before = after;
    }

    xarray_check(&m_nc);
    crate::support::read_like_a_user(&m_nc);
    crate::support::cf_checker(&m_nc);
}

/// The merged file through Python xarray (scipy backend), as the run tests
/// do; skipped without xarray unless EXOBOUND_REQUIRE_XARRAY is set.
fn xarray_check(nc: &Path) {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("python/check_netcdf.py");
    if !crate::support::python_can_import(
        "xarray, scipy",
        "EXOBOUND_REQUIRE_XARRAY",
        "the xarray check",
    ) {
        return;
    }
    let out = Command::new("python3")
        .arg(&script)
        .arg(nc)
        .args([
            "density",
            "density_error",
            "column",
            "column_error",
            "reservoir_error",
            "atoms_in_flight",
            "atoms_in_flight_error",
        ])
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
fn merge_refuses_mixed_duplicate_and_incomplete_sets_and_writes_nothing() {
    let tmp = TempDir::new("replica-refuse");
    let t = tmp.path();
    let seed = ["--seed", "11"];
    let r0 = replica(&t.join("r0"), "0/3", NO_PLOTS, &seed);
    let r1 = replica(&t.join("r1"), "1/3", NO_PLOTS, &seed);
    let r2 = replica(&t.join("r2"), "2/3", NO_PLOTS, &seed);
    let out = t.join("merged");
    let try_merge = |dirs: &[&Path], extra: &[&str]| {
        let mut args = merge_args(dirs, &out);
        args.extend(extra.iter().map(|s| s.to_string()));
        let args: Vec<&str> = args.iter().map(String::as_str).collect();
        let e = refused(&args);
        assert_nothing_written(&out);
        e
    };

    // The same index twice.
    let dup = t.join("r1-again");
    std::fs::create_dir(&dup).unwrap();
    for f in files(&r1) {
        let p = dup.join(&f.0);
        std::fs::create_dir_all(p.parent().unwrap()).unwrap();
        std::fs::write(p, f.1).unwrap();
    }
    let e = try_merge(&[&r0, &r1, &dup, &r2], &[]);
    assert!(e.contains("replica 1/3 is given twice"), "{e}");
    assert!(
        e.contains(&format!("`{}`", r1.display())) && e.contains(&format!("`{}`", dup.display())),
        "{e}"
    );
    assert!(e.contains("give each replica once"), "{e}");

    // A missing index, named, with both fixes; --allow-partial accepts it.
    let e = try_merge(&[&r2, &r0], &[]);
    assert!(e.contains("replica 1 of 3 is missing"), "{e}");
    assert!(e.contains("--replica I/3") && e.contains("--allow-partial"), "{e}");
    let o = merge(&[&r2, &r0], &out, &["--allow-partial"]);
    assert!(String::from_utf8_lossy(&o.stderr).contains("partial set: 2 of 3"), "{o:?}");
    assert_eq!(json(&out.join("provenance.json"))["replicas"]["merged"], serde_json::json!([0, 2]));
    std::fs::remove_dir_all(&out).unwrap();

    // Another scenario (another duration), named with the difference.
    let other = t.join("other");
    let mut args: Vec<String> = vec!["run".into(), "--quick".into()];
    args.extend(small(NO_PLOTS));
    args.extend(
        ["--set", "run.duration=\"9 h\"", "--seed", "11", "--replica", "2/3", "--out"]
            .map(String::from),
    );
    args.push(other.display().to_string());
    ok(&args.iter().map(String::as_str).collect::<Vec<_>>());
    let e = try_merge(&[&r0, &r1, &other], &[]);
    assert!(e.contains(&format!("`{}` is a replica of another scenario", other.display())), "{e}");
    assert!(e.contains("run.duration") && e.contains("\"9 h\""), "{e}");
    assert!(e.contains("rerun it with the same scenario file"), "{e}");

    // Another base seed.
    let seed12 = replica(&t.join("seed12"), "2/3", NO_PLOTS, &["--seed", "12"]);
    let e = try_merge(&[&r0, &r1, &seed12], &[]);
    assert!(e.contains(&format!("`{}` is replica 2/3 of base seed 12", seed12.display())), "{e}");
    assert!(e.contains("--seed 11 --replica 2/3"), "{e}");

    // A set of another size.
    let four = replica(&t.join("four"), "2/4", NO_PLOTS, &seed);
    let e = try_merge(&[&r0, &r1, &four], &[]);
    assert!(e.contains("is replica 2/4") && e.contains("--replica I/3"), "{e}");

    // An ordinary run, a directory that is not there, a merge into a replica.
    let plain = t.join("plain");
    let mut args: Vec<String> = vec!["run".into(), "--quick".into()];
    args.extend(small(NO_PLOTS));
    args.extend(["--out".to_string(), plain.display().to_string()]);
    ok(&args.iter().map(String::as_str).collect::<Vec<_>>());
    let e = try_merge(&[&r0, &r1, &plain], &[]);
    assert!(
        e.contains(&format!("`{}` records no replica", plain.join("provenance.json").display())),
        "{e}"
    );
    assert!(e.contains("--replica I/N"), "{e}");
    let gone = t.join("not-run");
    let e = try_merge(&[&r0, &r1, &gone], &[]);
    assert!(
        e.contains(&format!("`{}` is not a finished exobound output directory", gone.display())),
        "{e}"
    );
    let e =
        refused(&merge_args(&[&r0, &r1, &r2], &r1).iter().map(String::as_str).collect::<Vec<_>>());
    assert!(e.contains("choose another --out"), "{e}");
    assert!(r1.join("provenance.json").is_file());

    // A bad --replica is refused before anything runs.
    let e = refused(&[
        "run",
        "--quick",
        "--replica",
        "3/3",
        "--out",
        &t.join("bad").display().to_string(),
    ]);
    assert!(e.contains("--replica `3/3`") && e.contains("0 <= I < N"), "{e}");
    assert!(!t.join("bad").exists() && !t.join("bad.partial").exists());
}

#[test]
fn emitted_slurm_scripts_run_each_replica_and_the_merge() {
    let tmp = TempDir::new("replica-slurm");
    let t = tmp.path();
    let (job, out) = (t.join("job"), t.join("merged"));
    let mut args: Vec<String> = vec!["run".into(), "--quick".into()];
    args.extend(small(NO_PLOTS));
    args.extend(["--seed", "5", "--replicas", "2", "--emit-slurm"].map(String::from));
    args.extend([job.display().to_string(), "--out".into(), out.display().to_string()]);
    let o = ok(&args.iter().map(String::as_str).collect::<Vec<_>>());
    assert!(String::from_utf8_lossy(&o.stdout).contains("submit.sh"), "{o:?}");
    let array = std::fs::read_to_string(job.join("replicas.sbatch")).unwrap();
    // Slurm job arrays: `#SBATCH --array=0-(N-1)` and the task id in
    // $SLURM_ARRAY_TASK_ID (sbatch manual).
    assert!(array.contains("#SBATCH --array=0-1\n"), "{array}");
    assert!(array.contains("--replica \"${SLURM_ARRAY_TASK_ID}/2\""), "{array}");
    let submit = std::fs::read_to_string(job.join("submit.sh")).unwrap();
    assert!(submit.contains("--dependency=afterok:"), "{submit}");
    assert!(!out.exists(), "emitting must not run anything");

    // What Slurm would do: each array task with its id, then the merge.
    for id in ["0", "1"] {
        let o = Command::new("sh")
            .arg(job.join("replicas.sbatch"))
            .env("SLURM_ARRAY_TASK_ID", id)
            .output()
            .unwrap();
        assert!(o.status.success(), "task {id}: {}", String::from_utf8_lossy(&o.stderr));
    }
    let o = Command::new("sh").arg(job.join("merge.sbatch")).output().unwrap();
    assert!(o.status.success(), "merge: {}", String::from_utf8_lossy(&o.stderr));
    let p = json(&out.join("provenance.json"));
    assert_eq!(p["replicas"]["merged"], serde_json::json!([0, 1]));
    assert_eq!(p["seed"].as_u64(), Some(5));
    // A task runs exactly the replica a user would run by hand.
    let by_hand = replica(&t.join("by-hand"), "1/2", NO_PLOTS, &["--seed", "5"]);
    let task = t.join("merged.replicas").join("replica-1");
    for f in ["exosphere.nc", "ledger.csv"] {
        assert_eq!(
            std::fs::read(by_hand.join(f)).unwrap(),
            std::fs::read(task.join(f)).unwrap(),
            "{f}"
        );
    }
}

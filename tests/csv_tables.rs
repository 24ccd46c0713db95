//! Every CSV table the quick demo's commands write reads as numbers: a
//! run, `observe` (a distant slit and an orbiter's nadir look), a 2-replica
//! `merge-replicas`, a 2-variant `compare`, a 2-point `sweep` and a short
//! `fit`, all through the `exobound` binary. Each table is header + rows (no comment line), every float cell
//! is in the one number style of `exobound::output::number` and reads back
//! to the value whose text it is, and `tests/python/check_csv.py` reads
//! each with pandas: float64 columns, `np.log10` on atom counts.
//!
//! `.ci/run` installs pandas and sets EXOBOUND_REQUIRE_XARRAY=1; without
//! that variable and without pandas the pandas check is reported and
//! skipped, the checks in Rust still run.

use std::path::{Path, PathBuf};
use std::process::Command;

use crate::support::{TempDir, exobound_binary};

/// Columns that are not floats (docs/outputs.md): text, bool and counts.
const TEXT: &[&str] = &["measure", "unit", "variant", "significant", "observation", "stage"];
const BOOL: &[&str] = &["spin_up"];
const COUNTS: &[&str] = &["step", "particles", "hops", "point"];

fn ok(bin: &Path, args: &[&str]) {
    let out = Command::new(bin).args(args).output().expect("start exobound");
    assert!(
        out.status.success(),
        "exobound {args:?} failed:\n{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Every `.csv` file under `dir`, sorted.
fn csv_files(dir: &Path) -> Vec<PathBuf> {
    fn walk(dir: &Path, out: &mut Vec<PathBuf>) {
        for e in std::fs::read_dir(dir).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                walk(&p, out);
            } else if p.extension().is_some_and(|x| x == "csv") {
                out.push(p);
            }
        }
    }
    let mut v = Vec::new();
    walk(dir, &mut v);
    v.sort();
    v
}

/// The checks that need no Python: header + rows, and every cell of the
/// kind its column declares; a float cell is exactly the text
/// `output::number` writes for the value it reads back as (shortest
/// round-trip digits: IEEE 754-2008 clause 5.12.2, Rust core::fmt).
/// Returns the number of float cells checked.
fn check_in_rust(path: &Path) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    let name = path.display();
    assert!(text.ends_with('\n'), "{name} does not end with a newline");
    let mut lines = text.lines();
    let header: Vec<&str> =
        lines.next().unwrap_or_else(|| panic!("{name} is empty")).split(',').collect();
    let mut floats = 0;
    for (k, line) in lines.enumerate() {
        let at = format!("{name} line {}", k + 2);
        assert!(!line.starts_with('#'), "{at} is a comment line");
        let cells: Vec<&str> = line.split(',').collect();
        assert_eq!(cells.len(), header.len(), "{at}: `{line}`");
        for (h, c) in header.iter().zip(&cells) {
            let averaged = header.contains(&format!("{h}_error").as_str());
            if TEXT.contains(h) {
                assert!(!c.is_empty(), "{at}, `{h}` is empty");
            } else if BOOL.contains(h) {
                assert!(*c == "true" || *c == "false", "{at}, `{h}`: `{c}`");
            } else if COUNTS.contains(h) && !averaged {
                c.parse::<u64>().unwrap_or_else(|e| panic!("{at}, `{h}`: `{c}`: {e}"));
            } else {
                let x: f64 = c.parse().unwrap_or_else(|e| panic!("{at}, `{h}`: `{c}`: {e}"));
                assert_eq!(exobound::output::number::text(x), *c, "{at}, `{h}`");
                floats += 1;
            }
        }
    }
    assert!(!header[0].starts_with('#'), "{name} starts with a comment line");
    floats
}

/// Read `files` with pandas (`tests/python/check_csv.py`).
fn pandas_check(files: &[PathBuf]) {
    if !crate::support::python_can_import(
        "pandas, numpy",
        "EXOBOUND_REQUIRE_XARRAY",
        "the pandas check",
    ) {
        return;
    }
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("python/check_csv.py");
    let out = Command::new("python3").arg(&script).args(files).output().expect("run python3");
    assert!(
        out.status.success(),
        "pandas check failed:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn every_csv_reads_as_numbers_in_rust_and_pandas() {
    let bin = exobound_binary();
    let tmp = TempDir::new("csv-tables");
    let t = |p: &str| tmp.path().join(p).display().to_string();
    // The run and the replicas: the quick demo cut to 12 h (48 steps).
    let short = ["--set", "run.duration=\"12 h\""];
    ok(&bin, &[&["run", "--quick", "--out", &t("run")][..], &short].concat());
    for i in ["0/2", "1/2"] {
        let out = t(&format!("r{}", &i[..1]));
        ok(&bin, &[&["run", "--quick", "--replica", i, "--out", &out][..], &short].concat());
    }
    ok(&bin, &["merge-replicas", &t("r0"), &t("r1"), "--out", &t("merged")]);
    std::fs::write(
        tmp.path().join("slit.toml"),
        "title = \"slit\"\n[distant]\nphase_angle = \"60 deg\"\nobserver_side = \"dusk\"\n\
         altitude_max = \"600 km\"\naltitude_step = \"100 km\"\naperture = \"10 km\"\n\
         image_pixels = 8\n",
    )
    .unwrap();
    std::fs::write(
        tmp.path().join("nadir.toml"),
        "[orbiter]\naltitude = \"4000 km\"\nlocal_time = \"11.5 h\"\nlatitude = \"5 deg\"\n\
         look = \"nadir\"\n",
    )
    .unwrap();
    ok(&bin, &["observe", &t("run"), "--view", &t("slit.toml"), "--out", &t("slit")]);
    ok(&bin, &["observe", &t("run"), "--view", &t("nadir.toml"), "--out", &t("nadir")]);
    ok(
        &bin,
        &[
            &["compare", "--quick", "--seeds", "2", "--out", &t("cmp")][..],
            &["--variant", "hot:processes.impact-vapor.parameters.flux=\"2e6 cm^-2 s^-1\""],
            &short,
        ]
        .concat(),
    );
    // A 2-point sweep and a fit cut to a few evaluations (1500 particles).
    std::fs::write(
        tmp.path().join("plan.toml"),
        "title = \"csv sweep\"\nscenario = \"demo-quick\"\n\
         set = [\"run.particles=1500\", \"run.duration=\\\"12 h\\\"\"]\nseeds = [5]\n\
         [[parameters]]\nkey = \"processes.impact-vapor.parameters.flux\"\n\
         values = [\"5e4 cm^-2 s^-1\", \"2e5 cm^-2 s^-1\"]\n",
    )
    .unwrap();
    ok(&bin, &["sweep", &t("plan.toml"), "--out", &t("sweep")]);
    std::fs::write(
        tmp.path().join("observed.csv"),
        "kind,coordinate,value,uncertainty,unit\nequator_column,10.5 h,1.2e9,1e8,cm^-2\n\
         latitude_column,30 deg,8e8,1e8,cm^-2\nsummary:dayside_near_surface_density,,20,5,cm^-3\n",
    )
    .unwrap();
    ok(
        &bin,
        &[
            &["fit", "--quick", "--observed", &t("observed.csv"), "--out", &t("fit")][..],
            &["--free", "processes.impact-vapor.parameters.flux=5e4..5e5 cm^-2 s^-1"],
            &["--grid", "2", "--max-rounds", "1", "--set", "run.particles=1500"],
            &short,
        ]
        .concat(),
    );
    // The observations file is the user's input (comments allowed, docs/fit.md).
    std::fs::remove_file(tmp.path().join("observed.csv")).unwrap();

    let files = csv_files(tmp.path());
    let rel: Vec<String> =
        files.iter().map(|p| p.strip_prefix(tmp.path()).unwrap().display().to_string()).collect();
    for want in [
        "run/ledger.csv",
        "run/windows.csv",
        "run/profiles/equator_local_time.csv",
        "run/profiles/latitude.csv",
        "merged/ledger.csv",
        "merged/windows.csv",
        "merged/profiles/latitude.csv",
        "slit/brightness.csv",
        "nadir/brightness.csv",
        "cmp/comparison.csv",
        "sweep/sweep.csv",
        "fit/residuals.csv",
        "fit/evaluations.csv",
    ] {
        assert!(rel.iter().any(|r| r == want), "{want} not written: {rel:?}");
    }
    let floats: usize = files.iter().map(|p| check_in_rust(p)).sum();
    assert!(floats > 1000, "{floats} float cells");

    // The headers carry what the comment lines used to: units in the names.
    let slit = std::fs::read_to_string(tmp.path().join("slit/brightness.csv")).unwrap();
    assert!(slit.starts_with("altitude_above_limb_km,column_cm-2,brightness_R\n"), "{slit}");
    let nadir = std::fs::read_to_string(tmp.path().join("nadir/brightness.csv")).unwrap();
    assert!(nadir.starts_with("tangent_altitude_km,elevation_deg,column_cm-2,brightness_R\nNaN,"));
    // Atom counts of order 1e25 are floats in exponent form, not 26-digit integers.
    let ledger = std::fs::read_to_string(tmp.path().join("run/ledger.csv")).unwrap();
    let row1: Vec<&str> = ledger.lines().nth(1).unwrap().split(',').collect();
    assert!(row1[0] == "0" && row1[1] == "900.0", "{row1:?}");
    assert!(row1[3].contains('e') && row1[3].parse::<f64>().unwrap() > 1e20, "{row1:?}");

    pandas_check(&files);
}

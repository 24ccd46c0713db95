//! Table parameters (ABI 1.1): a scenario gives a table inline or as a CSV
//! file, the host checks it against the module's declaration (naming the
//! file, row and column of a fault), the law interpolates in it, `inspect`
//! and provenance show it; and modules built for ABI 1.0 keep working.
//!
//! The module under test is the `table-law` fixture (tests/fixtures/): its
//! release rate equals its interpolated cross-section sigma(T) numerically
//! when cos(SZA) = 1, r = 1 AU, N = 1 cm^-2 and F = 1 cm^-2 s^-1. Expected
//! values are computed by hand in the comments, from the linear
//! interpolation formula y = y0 + (x - x0) / (x1 - x0) * (y1 - y0) and its
//! log-linear form y = y0 * (y1 / y0)^((x - x0) / (x1 - x0)) (Press,
//! Teukolsky, Vetterling & Flannery 2007, Numerical Recipes, 3rd ed.,
//! section 3.1, from memory).

use std::path::{Path, PathBuf};
use std::sync::{Arc, OnceLock};

use exobound::checkpoint::ScenarioSource;
use exobound::output::provenance::Provenance;
use exobound::runtime::{HostError, Runtime, RuntimeConfig};
use exobound::scenario::{Scenario, demo};
use exobound_sdk::{CellState, ErrorCode, ParamValue};
use serde::{Deserialize, Serialize};

use crate::support::{TempDir, loss_export, params, particles, text, wat};

/// One runtime for these tests, so each module is compiled once.
fn runtime() -> Arc<Runtime> {
    static RT: OnceLock<Arc<Runtime>> = OnceLock::new();
    RT.get_or_init(|| {
        Arc::new(
            Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap(),
        )
    })
    .clone()
}

fn fixture() -> PathBuf {
    exobound_tests::fixture_dir().join("table_law.wasm")
}

/// The quick demo in `dir` with the table fixture as its first process,
/// `parameters` as that process's `[processes.parameters]` body; its path.
fn scenario_with(dir: &Path, parameters: &str) -> PathBuf {
    scenario_with_more(dir, parameters, "")
}

/// As [`scenario_with`], with the `[[processes]]` entries `more` next.
fn scenario_with_more(dir: &Path, parameters: &str, more: &str) -> PathBuf {
    demo::write(dir).unwrap();
    let path = dir.join("demo-quick.toml");
    let t = std::fs::read_to_string(&path).unwrap();
    let entry = format!(
        "[[processes]]\nmodule = \"{}\"\nrole = \"source\"\n[processes.parameters]\n\
         {parameters}\n\n{more}\n",
        fixture().display()
    );
    std::fs::write(&path, t.replacen("[[processes]]", &(entry + "[[processes]]"), 1)).unwrap();
    path
}

/// sigma(T) as the loaded scenario's table fixture computes it, cm^2.
fn sigma(s: &Scenario, temperatures: &[f64]) -> Result<Vec<f64>, String> {
    let m = s.modules.iter().find(|m| m.name == "table-law").expect("the fixture is loaded");
    let mut inst = m.handle.instantiate().map_err(|e| e.to_string())?;
    let cells: Vec<CellState> = temperatures
        .iter()
        .map(|&t| CellState {
            temperature: t,
            cos_sza: 1.0,
            adsorbed: 1.0,
            helio_distance: 1.0,
            ..Default::default()
        })
        .collect();
    let mut out = vec![0.0; cells.len()];
    match inst.release_rate(&cells, &mut out) {
        Ok(Ok(())) => Ok(out),
        Ok(Err(d)) => Err(d.to_string()),
        Err(h) => Err(h.to_string()),
    }
}

fn close(got: f64, want: f64) -> bool {
    (got - want).abs() <= 1e-14 * want.abs()
}

/// The inline table of these tests: T [K] and sigma [cm^2].
const INLINE: &str = "cross_section = { columns = [\"temperature [K]\", \"cross_section [cm^2]\"], \
                      rows = [[100, 2.0e-20], [200, 3.0e-20], [300, 6.0e-20], [500, 1.0e-20]] }";

#[test]
fn an_inline_table_reaches_the_law_and_is_interpolated_linearly_and_log_linearly() {
    let tmp = TempDir::new("table-inline");
    let rt = runtime();
    let s = Scenario::load(&scenario_with(tmp.path(), INLINE), &[], &rt).unwrap();
    let got = sigma(&s, &[100.0, 200.0, 300.0, 500.0, 150.0, 250.0, 400.0]).unwrap();
    // At the rows: the tabulated values exactly.
    assert_eq!(got[..4], [2.0e-20, 3.0e-20, 6.0e-20, 1.0e-20]);
    // Between, linear: 2e-20 + 0.5 * (3e-20 - 2e-20) = 2.5e-20;
    // 3e-20 + 0.5 * (6e-20 - 3e-20) = 4.5e-20; 6e-20 + 0.5 * (1e-20 - 6e-20) = 3.5e-20.
    for (g, w) in got[4..].iter().zip([2.5e-20, 4.5e-20, 3.5e-20]) {
        assert!(close(*g, w), "{g} vs {w}");
    }
    let path = scenario_with(tmp.path(), &format!("{INLINE}\ninterpolation = \"log-linear\""));
    let s = Scenario::load(&path, &[], &rt).unwrap();
    let got = sigma(&s, &[100.0, 300.0, 150.0, 250.0, 400.0]).unwrap();
    assert_eq!(got[..2], [2.0e-20, 6.0e-20]);
    // Halfway, log-linear is the geometric mean: sqrt(2e-20 * 3e-20) = sqrt(6) e-20;
    // sqrt(3e-20 * 6e-20) = sqrt(18) e-20; sqrt(6e-20 * 1e-20) = sqrt(6) e-20.
    let want = [6f64.sqrt() * 1e-20, 18f64.sqrt() * 1e-20, 6f64.sqrt() * 1e-20];
    for (g, w) in got[2..].iter().zip(want) {
        assert!(close(*g, w), "{g} vs {w}");
    }
    let m = &s.modules[0];
    assert_eq!(m.tables.len(), 1);
    assert_eq!((m.tables[0].origin.as_str(), m.tables[0].file.as_ref()), ("scenario", None));
    assert_eq!(m.tables[0].columns[0], vec![100.0, 200.0, 300.0, 500.0]);
}

#[test]
fn a_csv_table_is_read_and_its_file_and_digest_go_into_provenance() {
    use sha2::Digest;
    let tmp = TempDir::new("table-csv");
    let csv = "# PSD cross-section, lab run 7 (invented for this test)\n\
               temperature [K],cross_section [cm^2]\n\
               100,2.0e-20\n200,3.0e-20\n\n300, 6.0e-20\n500,1.0e-20\n";
    std::fs::write(tmp.path().join("psd.csv"), csv).unwrap();
    let path = scenario_with(tmp.path(), "cross_section = { file = \"psd.csv\" }");
    let s = Scenario::load(&path, &[], &runtime()).unwrap();
    let got = sigma(&s, &[200.0, 250.0]).unwrap();
    // 3e-20 + 0.5 * (6e-20 - 3e-20) = 4.5e-20.
    assert_eq!(got[0], 3.0e-20);
    assert!(close(got[1], 4.5e-20), "{}", got[1]);

    let prov = Provenance::of(&s, &ScenarioSource::file(&path, &[]).unwrap());
    let json = serde_json::to_value(&prov).unwrap();
    let table = &json["modules"][0]["tables"][0];
    let digest: String =
        sha2::Sha256::digest(csv.as_bytes()).iter().map(|b| format!("{b:02x}")).collect();
    assert_eq!(table["origin"], "file");
    assert_eq!(table["sha256"], digest.as_str());
    assert!(table["file"].as_str().unwrap().ends_with("psd.csv"), "{table}");
    assert_eq!(table["header"], "temperature [K],cross_section [cm^2]");
    assert_eq!(table["columns"][1][2], 6.0e-20);
    // The other modules have no table parameters.
    assert_eq!(json["modules"][1]["tables"], serde_json::json!([]));
}

/// The error of loading the scenario whose fixture takes the CSV `csv`.
fn refused_csv(tmp: &TempDir, rt: &Arc<Runtime>, csv: &str) -> String {
    std::fs::write(tmp.path().join("lab.csv"), csv).unwrap();
    let path = scenario_with(tmp.path(), "cross_section = { file = \"lab.csv\" }");
    match Scenario::load(&path, &[], rt) {
        Ok(_) => panic!("the table was accepted:\n{csv}"),
        Err(e) => e.to_string(),
    }
}

#[test]
fn malformed_csv_tables_are_refused_naming_file_row_and_column() {
    let tmp = TempDir::new("table-bad-csv");
    let rt = runtime();
    let head = "temperature [K],cross_section [cm^2]\n";
    let key = "processes[0] (table-law).parameters.cross_section";
    let each = |e: &str| {
        assert!(e.contains("demo-quick.toml") && e.contains(key), "{e}");
        assert!(e.contains("lab.csv"), "{e}");
    };
    // Unsorted: the fault is in the first column of the row that goes back.
    let e = refused_csv(&tmp, &rt, &format!("{head}100,1e-20\n300,2e-20\n200,3e-20\n"));
    each(&e);
    assert!(e.contains("line 4 (row 3), column 1 (`temperature [K]`)"), "{e}");
    assert!(e.contains("does not increase") && e.contains("sort the rows"), "{e}");
    // A repeated temperature is not strictly increasing either.
    let e = refused_csv(&tmp, &rt, &format!("{head}100,1e-20\n100,2e-20\n"));
    assert!(e.contains("line 3 (row 2), column 1"), "{e}");
    // Wrong unit: the header's column and the unit the module takes.
    let e = refused_csv(&tmp, &rt, "temperature [K],cross_section [m^2]\n100,1e-24\n200,2e-24\n");
    each(&e);
    assert!(e.contains("line 1 (the header), column 2 (`cross_section`)"), "{e}");
    assert!(e.contains("`m^2`") && e.contains("takes `cm^2`"), "{e}");
    // NaN, and infinity, are not finite numbers.
    for bad in ["NaN", "inf"] {
        let e = refused_csv(&tmp, &rt, &format!("{head}100,1e-20\n200,{bad}\n"));
        each(&e);
        assert!(e.contains("line 3 (row 2), column 2 (`cross_section [cm^2]`)"), "{e}");
        assert!(e.contains("finite"), "{e}");
    }
    // Too many rows: the fixture allows 64; row 65 is named.
    let rows: String = (1..=65).map(|i| format!("{},1e-20\n", 100 + i)).collect();
    let e = refused_csv(&tmp, &rt, &format!("# a comment line\n{head}{rows}"));
    each(&e);
    assert!(e.contains("line 67 (row 65)") && e.contains("at most 64"), "{e}");
    // Columns swapped, and a value outside its column's declared range.
    let e = refused_csv(&tmp, &rt, "cross_section [cm^2],temperature [K]\n1e-20,100\n");
    assert!(e.contains("column 1") && e.contains("out of order"), "{e}");
    let e = refused_csv(&tmp, &rt, &format!("{head}100,1e-20\n200,-1e-20\n"));
    assert!(
        e.contains("row 2), column 2") && e.contains("-1e-20") && e.contains("[0, 1e-15]"),
        "{e}"
    );
    // A missing file is named.
    let path = scenario_with(tmp.path(), "cross_section = { file = \"nowhere.csv\" }");
    let e = Scenario::load(&path, &[], &rt).unwrap_err().to_string();
    assert!(e.contains("nowhere.csv") && e.contains("cannot read"), "{e}");
}

#[test]
fn malformed_inline_tables_are_refused_naming_row_and_column() {
    let tmp = TempDir::new("table-bad-inline");
    let rt = runtime();
    let refused = |rows: &str, cols: &str| {
        let p = format!("cross_section = {{ columns = [{cols}], rows = [{rows}] }}");
        match Scenario::load(&scenario_with(tmp.path(), &p), &[], &rt) {
            Ok(_) => panic!("accepted: {p}"),
            Err(e) => e.to_string(),
        }
    };
    let cols = "\"temperature [K]\", \"cross_section [cm^2]\"";
    let e = refused("[300, 1e-20], [200, 2e-20]", cols);
    assert!(e.contains("demo-quick.toml") && e.contains("parameters.cross_section"), "{e}");
    assert!(e.contains("rows[1] (row 2), column 1 (`temperature [K]`)"), "{e}");
    let e = refused("[100, 1e-20], [200, nan]", cols);
    assert!(e.contains("rows[1] (row 2), column 2") && e.contains("finite"), "{e}");
    let e = refused("[100, 1e-20], [200, 2e-20]", "\"temperature [C]\", \"cross_section [cm^2]\"");
    assert!(e.contains("`columns`, column 1 (`temperature`)") && e.contains("`K`"), "{e}");
    let e = refused("[100, 1e-20], [200]", cols);
    assert!(e.contains("rows[1] (row 2)") && e.contains("array of 2 numbers"), "{e}");
    let e = refused("[100, 1e-20]", cols);
    assert!(e.contains("at least 2"), "{e}");
    // A table where a number belongs, and a number where a table belongs.
    let p = "cross_section = \"3e-20 cm^2\"";
    let e = Scenario::load(&scenario_with(tmp.path(), p), &[], &rt).unwrap_err().to_string();
    assert!(e.contains("not a table") && e.contains("temperature [K],cross_section [cm^2]"), "{e}");
    let p = "photon_flux = { file = \"x.csv\" }";
    let e = Scenario::load(&scenario_with(tmp.path(), p), &[], &rt).unwrap_err().to_string();
    assert!(e.contains("parameters.photon_flux") && e.contains("not a number"), "{e}");
}

#[test]
fn the_default_table_is_used_shown_by_inspect_and_covered_by_the_digest() {
    let tmp = TempDir::new("table-default");
    let s = Scenario::load(&scenario_with(tmp.path(), ""), &[], &runtime()).unwrap();
    let got = sigma(&s, &[100.0, 175.0, 400.0]).unwrap();
    // The fixture's invented default: (100 K, 1e-20), (250 K, 4e-20), (400 K, 2e-20);
    // at 175 K: 1e-20 + 0.5 * (4e-20 - 1e-20) = 2.5e-20.
    assert_eq!((got[0], got[2]), (1.0e-20, 2.0e-20));
    assert!(close(got[1], 2.5e-20), "{}", got[1]);
    let t = &s.modules[0].tables[0];
    assert_eq!(t.origin, "module default");
    assert_eq!(t.columns, vec![vec![100.0, 250.0, 400.0], vec![1.0e-20, 4.0e-20, 2.0e-20]]);

    let i = exobound::inspect::inspect(&fixture()).unwrap();
    assert_eq!(i.abi, "1.1.0");
    let text = exobound::inspect::render_text(&i);
    for line in [
        "cross_section          table          2 to 64 rows",
        "column temperature",
        "default table (3 rows):",
        "temperature [K],cross_section [cm^2]",
        "100.0,1e-20",
        "250.0,4e-20",
        "400.0,2e-20",
    ] {
        assert!(text.contains(line), "`{line}` missing from:\n{text}");
    }

    // The default lives in the manifest section, so the file digest covers
    // it: change one tabulated value in the file and both the digest and
    // what `inspect` reads change with it.
    let bytes = std::fs::read(fixture()).unwrap();
    let mut old = vec![0xcb];
    old.extend(4.0e-20f64.to_bits().to_be_bytes());
    let section = bytes.windows(17).position(|w| w == b"exobound:manifest").unwrap();
    let at = section
        + bytes[section..]
            .windows(9)
            .position(|w| w == old)
            .expect("the default is in the manifest");
    let mut edited = bytes.clone();
    edited[at + 1..at + 9].copy_from_slice(&5.0e-20f64.to_bits().to_be_bytes());
    let limit = exobound::inspect::MAX_MANIFEST;
    let a = exobound::runtime::module::read_header("a", &bytes, limit).unwrap();
    let b = exobound::runtime::module::read_header("b", &edited, limit).unwrap();
    assert_ne!(a.sha256, b.sha256);
    let default = |h: &exobound::runtime::ModuleHeader| h.manifest.parameters[0].default.clone();
    assert_eq!(
        default(&b),
        Some(ParamValue::Table(vec![vec![100.0, 250.0, 400.0], vec![1.0e-20, 5.0e-20, 2.0e-20]]))
    );
}

#[test]
fn outside_the_table_the_law_clamps_or_refuses_as_chosen() {
    let tmp = TempDir::new("table-outside");
    let rt = runtime();
    let s = Scenario::load(&scenario_with(tmp.path(), ""), &[], &rt).unwrap();
    // Clamped: below the first row the first value, above the last the last.
    assert_eq!(sigma(&s, &[40.0, 1000.0]).unwrap(), vec![1.0e-20, 2.0e-20]);
    let s = Scenario::load(&scenario_with(tmp.path(), "outside = \"refuse\""), &[], &rt).unwrap();
    assert_eq!(sigma(&s, &[100.0, 400.0]).unwrap(), vec![1.0e-20, 2.0e-20]);
    let e = sigma(&s, &[200.0, 401.0]).unwrap_err();
    assert!(e.contains("table-law") && e.contains("outside"), "{e}");
    assert!(e.contains("401") && e.contains("[100, 400] K"), "{e}");
    // The fixture's reference point (on the default table) passes in the sandbox.
    let m = rt.load(&fixture()).unwrap();
    let points = exobound::runtime::reference::run_reference_points(&rt, &m).unwrap();
    assert!(points.iter().all(|p| p.passed), "{points:?}");
}

#[test]
fn the_host_and_the_guest_each_check_a_table() {
    // The host refuses a bad table before it instantiates the module ...
    let rt = runtime();
    let m = rt.load(&fixture()).unwrap();
    let refused = |v: ParamValue| match rt.instantiate(&m, &params(&[("cross_section", v)])) {
        Ok(Err(d)) => d,
        Ok(Ok(_)) => panic!("accepted"),
        Err(h) => panic!("host failure: {h}"),
    };
    let d = refused(ParamValue::Table(vec![vec![300.0, 200.0], vec![1e-20, 2e-20]]));
    assert_eq!(d.error.code, ErrorCode::InvalidParameter);
    assert!(d.error.message.contains("row 2, column 1"), "{d}");
    let d = refused(text("x"));
    assert!(d.error.message.contains("must be a table"), "{d}");
    // ... and the module's `exobound_init` decodes and checks it again
    // (`Params::decode`, as `abi::init` calls it), so it never trusts its
    // caller. Here natively, on the fixture's own manifest.
    use exobound_sdk::Process;
    let schema = table_law::TableLaw::MANIFEST.to_info().parameters;
    let given = params(&[(
        "cross_section",
        ParamValue::Table(vec![vec![100.0, 200.0], vec![1e-20, f64::NAN]]),
    )]);
    let e =
        exobound_sdk::Params::decode(&exobound_sdk::Params::encode(&given), &schema).unwrap_err();
    assert!(e.message.contains("row 2, column 2") && e.message.contains("finite"), "{e}");
    let ok = params(&[(
        "cross_section",
        ParamValue::Table(vec![vec![100.0, 200.0], vec![1e-20, 3e-20]]),
    )]);
    let p = exobound_sdk::Params::decode(&exobound_sdk::Params::encode(&ok), &schema).unwrap();
    assert!(table_law::TableLaw::new(&p).is_ok());
}

#[test]
fn a_table_of_the_most_rows_initialises_within_a_fiftieth_of_the_default_fuel() {
    // Decoding and checking a table in `exobound_init` costs fuel; the
    // largest table the fixture allows (64 rows) must fit the test limits
    // (1e6 units per call, a fiftieth of the default 5e7).
    let rt = crate::support::runtime();
    let m = rt.load(&fixture()).unwrap();
    let base = rt.instantiate(&m, &params(&[])).unwrap().unwrap();
    eprintln!("exobound_init with the 3-row default: {} fuel units", base.fuel_used());
    let t: Vec<f64> = (0..64).map(|i| 100.0 + 5.0 * i as f64).collect();
    let table = ParamValue::Table(vec![t, vec![3.0e-20; 64]]);
    let inst = rt.instantiate(&m, &params(&[("cross_section", table)])).unwrap().unwrap();
    eprintln!("exobound_init with a 64-row table: {} fuel units", inst.fuel_used());
    assert!(inst.fuel_used() < 1_000_000, "{}", inst.fuel_used());
}

// ---------------------------------------------------------------------------
// ABI 1.0: the manifest layout of docs/abi.md §3 before table parameters,
// written out here independently of the SDK's types.
// ---------------------------------------------------------------------------

#[derive(Serialize, Deserialize)]
#[serde(untagged)]
enum V10Value {
    Number(f64),
    Text(String),
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct V10Param {
    name: String,
    unit: String,
    description: String,
    default: Option<V10Value>,
    min: Option<f64>,
    max: Option<f64>,
    choices: Vec<String>,
    default_origin: String,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct V10Reference {
    description: String,
    check: String,
    parameters: Vec<(String, V10Value)>,
    input: Vec<(String, f64)>,
    expected: f64,
    tolerance: f64,
    source: String,
}

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct V10Manifest {
    name: String,
    version: String,
    description: String,
    roles: Vec<String>,
    authors: Vec<String>,
    institution: String,
    licence: String,
    law_source: String,
    draws_on: Option<String>,
    ledger_label: String,
    inputs: Vec<String>,
    parameters: Vec<V10Param>,
    reference_points: Vec<V10Reference>,
    /// A source's declared launch laws (for vet), written only when it
    /// declares some: the one optional key. The 1.0 host's decoder (serde's
    /// default) skips keys it does not know, so it does not stop a 1.0
    /// host loading the module; everything else must keep the 1.0 layout.
    #[serde(default, skip_serializing, rename = "launch_laws")]
    _launch_laws: Option<serde::de::IgnoredAny>,
}

/// A loss module as an ABI 1.0 host knows it: stamped 1.0.0, a manifest of
/// the 1.0 layout with a number and a choice parameter, 1e-6 s^-1.
fn abi_1_0_module() -> Vec<u8> {
    let m = V10Manifest {
        name: "old-loss".into(),
        version: "1.0.0".into(),
        description: "a loss module in the ABI 1.0 layout".into(),
        roles: vec!["loss".into()],
        authors: vec!["exobound developers".into()],
        institution: "exobound project".into(),
        licence: "Apache-2.0".into(),
        law_source: "none: a test fixture".into(),
        draws_on: None,
        ledger_label: String::new(),
        inputs: vec!["helio-distance".into()],
        parameters: vec![
            V10Param {
                name: "rate".into(),
                unit: "s^-1".into(),
                description: "loss rate".into(),
                default: Some(V10Value::Number(1e-6)),
                min: Some(0.0),
                max: Some(1.0),
                choices: vec![],
                default_origin: "common practice".into(),
            },
            V10Param {
                name: "activity".into(),
                unit: String::new(),
                description: "solar activity".into(),
                default: Some(V10Value::Text("quiet".into())),
                min: None,
                max: None,
                choices: vec!["quiet".into(), "active".into()],
                default_origin: "common practice".into(),
            },
        ],
        reference_points: vec![V10Reference {
            description: "at 1 AU".into(),
            check: "loss-rate".into(),
            parameters: vec![("activity".into(), V10Value::Text("active".into()))],
            input: vec![("helio_distance".into(), 1.0)],
            expected: 1e-6,
            tolerance: 1e-12,
            source: "the fixture's constant".into(),
        }],
        _launch_laws: None,
    };
    let bytes = rmp_serde::to_vec_named(&m).unwrap();
    wat(Some("1.0.0"), Some(&bytes), "", &loss_export("(local.get $n)"))
}

#[test]
fn an_abi_1_0_module_still_loads_and_runs() {
    let rt = runtime();
    let bytes = abi_1_0_module();
    let m = rt.load_bytes("old-loss.wasm", &bytes).unwrap();
    assert_eq!(m.manifest().parameters.iter().filter(|p| p.table.is_none()).count(), 2);
    let given = params(&[("rate", ParamValue::Number(2e-6)), ("activity", text("active"))]);
    let mut inst = rt.instantiate(&m, &given).unwrap().unwrap();
    let mut rates = vec![0.0; 4];
    inst.loss_rate(&particles(4), &mut rates).unwrap().unwrap();
    assert_eq!(rates, vec![1e-6; 4]);
    let points = exobound::runtime::reference::run_reference_points(&rt, &m).unwrap();
    assert!(points.iter().all(|p| p.passed), "{points:?}");

    // In a scenario, next to the table module, with its parameters as before.
    let tmp = TempDir::new("abi-1-0");
    std::fs::write(tmp.path().join("old-loss.wasm"), &bytes).unwrap();
    let old = "[[processes]]\nmodule = \"old-loss.wasm\"\nrole = \"loss\"\n\
               [processes.parameters]\nrate = \"2e-6 s^-1\"\nactivity = \"active\"\n";
    let s = Scenario::load(&scenario_with_more(tmp.path(), "", old), &[], &rt).unwrap();
    let old = s.modules.iter().find(|m| m.name == "old-loss").unwrap();
    assert!(old.tables.is_empty());
    assert_eq!(old.parameters.get("rate"), Some(&ParamValue::Number(2e-6)));
    let mut inst = old.handle.instantiate().unwrap();
    inst.loss_rate(&particles(2), &mut rates[..2]).unwrap().unwrap();
    assert_eq!(rates[..2], [1e-6, 1e-6]);
}

#[test]
fn modules_without_tables_are_stamped_1_0_and_keep_the_1_0_manifest_layout() {
    // A module built with this SDK that declares no table parameter is
    // stamped 1.0.0 and its manifest decodes in the ABI 1.0 layout (no
    // unknown key but the optional `launch_laws` of a source, which a 1.0
    // host skips), so a host that knows only ABI 1.0 loads it.
    for name in crate::support::STANDARD {
        let path = exobound::standard_module(name);
        let bytes = std::fs::read(&path).unwrap();
        let limit = exobound::inspect::MAX_MANIFEST;
        let h = exobound::runtime::module::read_header(name, &bytes, limit).unwrap();
        assert_eq!(h.abi.to_string(), "1.0.0", "{name}");
        let section = manifest_section(&bytes);
        let m: V10Manifest = rmp_serde::from_slice(&section)
            .unwrap_or_else(|e| panic!("{name}: not the ABI 1.0 layout: {e}"));
        assert_eq!(m.name, *name);
    }
}

#[test]
fn a_table_in_a_module_stamped_1_0_is_refused_naming_the_version() {
    let m = exobound_sdk::Manifest {
        name: "mislabelled",
        version: "0.0.1",
        description: "d",
        roles: &[exobound_sdk::Role::Loss],
        authors: &["a"],
        institution: "i",
        licence: "Apache-2.0",
        law_source: "s",
        draws_on: None,
        ledger_label: "",
        inputs: &[],
        parameters: &[exobound_sdk::ParamSpec {
            name: "t",
            unit: "",
            description: "d",
            kind: exobound_sdk::ParamKind::Table {
                columns: &[exobound_sdk::TableColumn { name: "x", unit: "K", min: 0.0, max: 1.0 }],
                min_rows: 1,
                max_rows: 2,
                default: None,
            },
            origin: exobound_sdk::Origin::NoDefault,
        }],
        reference_points: &[],
    };
    let bytes = rmp_serde::to_vec_named(&m.to_info()).unwrap();
    let module = wat(Some("1.0.0"), Some(&bytes), "", &loss_export("(local.get $n)"));
    let e = match runtime().load_bytes("mislabelled.wasm", &module) {
        Err(e @ HostError::ManifestMalformed { .. }) => e.to_string(),
        Err(e) => panic!("wrong error: {e}"),
        Ok(_) => panic!("a 1.0.0 module with a table was accepted"),
    };
    assert!(e.contains("`t` is a table") && e.contains("1.0.0") && e.contains("1.1"), "{e}");
    // Stamped 1.1.0, the same module loads.
    let module = wat(Some("1.1.0"), Some(&bytes), "", &loss_export("(local.get $n)"));
    assert!(runtime().load_bytes("labelled.wasm", &module).is_ok());
}

/// The bytes of the `exobound:manifest` custom section.
fn manifest_section(wasm: &[u8]) -> Vec<u8> {
    // Custom sections: id 0, LEB128 size, LEB128 name length, name, data.
    let leb = |b: &[u8], mut i: usize| -> (usize, usize) {
        let (mut v, mut shift) = (0usize, 0);
        loop {
            let byte = b[i];
            v |= ((byte & 0x7f) as usize) << shift;
            i += 1;
            if byte & 0x80 == 0 {
                return (v, i);
            }
            shift += 7;
        }
    };
    let mut i = 8;
    while i < wasm.len() {
        let id = wasm[i];
        let (size, body) = leb(wasm, i + 1);
        if id == 0 {
            let (n, name_at) = leb(wasm, body);
            if &wasm[name_at..name_at + n] == b"exobound:manifest" {
                return wasm[name_at + n..body + size].to_vec();
            }
        }
        i = body + size;
    }
    panic!("no exobound:manifest section");
}

//! Shared helpers: temporary directories, a test runtime, WAT fixtures.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::Duration;

use exobound::runtime::{LoadedModule, Runtime, RuntimeConfig, SandboxLimits};
use exobound_sdk::wire::ManifestInfo;
use exobound_sdk::{InFlight, ParamValue};

/// A directory under the system temp dir, removed when dropped.
pub struct TempDir(PathBuf);

impl TempDir {
    /// A fresh, empty directory whose name contains `label`.
    pub fn new(label: &str) -> TempDir {
        static N: AtomicUsize = AtomicUsize::new(0);
        let p = std::env::temp_dir().join(format!(
            "exobound-test-{}-{}-{label}",
            std::process::id(),
            N.fetch_add(1, Ordering::Relaxed)
        ));
        let _ = std::fs::remove_dir_all(&p);
        std::fs::create_dir_all(&p).expect("create temp dir");
        TempDir(p)
    }

    /// Its path.
    pub fn path(&self) -> &Path {
        &self.0
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// The fuel limits of the sandbox tests: a fiftieth of the defaults, still
/// some ten times what the standard laws need per record.
pub const TEST_LIMITS: SandboxLimits = SandboxLimits {
    fuel_per_record: 20_000,
    fuel_per_call: 1_000_000,
    memory_cap: 64 << 20,
    backstop: Duration::from_secs(300),
};

/// A runtime with small fuel budgets and no disk cache.
pub fn runtime() -> Runtime {
    Runtime::new(RuntimeConfig { limits: TEST_LIMITS, cache_dir: None, ..RuntimeConfig::default() })
        .expect("runtime")
}

/// Parameters from (name, value) pairs.
pub fn params(pairs: &[(&str, ParamValue)]) -> BTreeMap<String, ParamValue> {
    pairs.iter().map(|(k, v)| (k.to_string(), v.clone())).collect()
}

/// A text parameter value.
pub fn text(s: &str) -> ParamValue {
    ParamValue::Text(s.to_string())
}

/// Load a standard module built by the host's build script.
pub fn standard(rt: &Runtime, name: &str) -> Arc<LoadedModule> {
    rt.load(&exobound::standard_module(name)).unwrap_or_else(|e| panic!("load {name}: {e}"))
}

/// Load the hostile Rust fixture.
pub fn hostile(rt: &Runtime) -> Arc<LoadedModule> {
    let path = exobound_tests::fixture_dir().join("hostile_law.wasm");
    rt.load(&path).unwrap_or_else(|e| panic!("load hostile fixture: {e}"))
}

/// Sunlit particles at 1 AU, for loss calls.
pub fn particles(n: usize) -> Vec<InFlight> {
    (0..n)
        .map(|i| InFlight {
            altitude: 1.0e5 + i as f64,
            helio_distance: 1.0,
            sunlit_fraction: 1.0,
            speed: 1000.0,
            ..Default::default()
        })
        .collect()
}

/// Assert that `rt` still serves a good call: the standard photoionization
/// module returns its 1 AU rate (5.92e-6 s^-1, its manifest default).
pub fn assert_host_still_works(rt: &Runtime) {
    let m = standard(rt, "photoionization");
    let mut inst = rt.instantiate(&m, &BTreeMap::new()).unwrap().unwrap();
    let ps = particles(64);
    let mut rates = vec![0.0; 64];
    inst.loss_rate(&ps, &mut rates).unwrap().unwrap();
    assert!(rates.iter().all(|&r| r == 5.92e-6), "{rates:?}");
}

/// A manifest for WAT fixtures with the given roles, as MessagePack.
pub fn manifest_bytes(name: &str, roles: &[&str]) -> Vec<u8> {
    let info = ManifestInfo {
        name: name.to_string(),
        version: "0.0.1".to_string(),
        description: "hand-written WAT test fixture".to_string(),
        roles: roles.iter().map(|r| r.to_string()).collect(),
        authors: vec!["exobound developers".to_string()],
        institution: "exobound project".to_string(),
        licence: "Apache-2.0".to_string(),
        law_source: "none: a test fixture".to_string(),
        draws_on: roles.contains(&"source").then(|| "bulk".to_string()),
        ledger_label: String::new(),
        inputs: vec![],
        parameters: vec![],
        reference_points: vec![],
        launch_laws: Vec::new(),
    };
    rmp_serde::to_vec_named(&info).expect("encode manifest")
}

/// WAT string literal content for arbitrary bytes.
pub fn wat_bytes(b: &[u8]) -> String {
    b.iter().map(|x| format!("\\{x:02x}")).collect()
}

/// A hand-written WAT module: a bump allocator, no-op init and last_error,
/// plus `body` (the role exports), with the given sections and imports.
pub fn wat(abi: Option<&str>, manifest: Option<&[u8]>, imports: &str, body: &str) -> Vec<u8> {
    let text = wat_text(abi, manifest, imports, body);
    wat::parse_str(&text).unwrap_or_else(|e| panic!("fixture WAT does not assemble: {e}\n{text}"))
}

/// The text of the module [`wat`] assembles.
pub fn wat_text(abi: Option<&str>, manifest: Option<&[u8]>, imports: &str, body: &str) -> String {
    wat_text_with_message(abi, manifest, imports, body, b"the law refuses: input outside validity")
}

/// As [`wat_text`], with `message` as what `exobound_last_error` reports.
pub fn wat_text_with_message(
    abi: Option<&str>,
    manifest: Option<&[u8]>,
    imports: &str,
    body: &str,
    message: &[u8],
) -> String {
    // The bump allocator starts past the message, on a 1 KiB boundary.
    let heap = (16 + message.len()).div_ceil(1024) * 1024;
    let (data, len) = (wat_bytes(message), message.len());
    let mut sections = String::new();
    if let Some(a) = abi {
        sections += &format!("(@custom \"exobound:abi\" \"{a}\")\n");
    }
    if let Some(m) = manifest {
        sections += &format!("(@custom \"exobound:manifest\" \"{}\")\n", wat_bytes(m));
    }
    format!(
        r#"(module
  {imports}
  (memory (export "memory") 2)
  (global $heap (mut i32) (i32.const {heap}))
  (func (export "exobound_alloc") (param $size i32) (param $align i32) (result i32)
    (local $p i32)
    (local.set $p (i32.and
      (i32.add (global.get $heap) (i32.sub (local.get $align) (i32.const 1)))
      (i32.sub (i32.const 0) (local.get $align))))
    (global.set $heap (i32.add (local.get $p) (local.get $size)))
    (block $ok
      (loop $grow
        (br_if $ok (i32.le_u (global.get $heap) (i32.mul (memory.size) (i32.const 65536))))
        (if (i32.eq (memory.grow (i32.const 1)) (i32.const -1)) (then (return (i32.const 0))))
        (br $grow)))
    (local.get $p))
  (func (export "exobound_free") (param i32 i32 i32))
  (func (export "exobound_init") (param i32 i32) (result i32) (i32.const 0))
  (data (i32.const 16) "{data}")
  (func (export "exobound_last_error") (param $buf i32) (param $cap i32) (result i32)
    (memory.copy (local.get $buf) (i32.const 16) (i32.const {len}))
    (i32.const {len}))
  {body}
  {sections}
)"#
    )
}

/// A loss export whose body writes 1e-6 s^-1 into every output and then
/// runs `tail`, which must leave the i32 result on the stack.
pub fn loss_export(tail: &str) -> String {
    format!(
        r#"(func (export "exobound_loss_rate") (param $in i32) (param $n i32) (param $out i32) (result i32)
    (local $i i32)
    (block $done
      (loop $fill
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (f64.store (i32.add (local.get $out) (i32.mul (local.get $i) (i32.const 8))) (f64.const 1e-6))
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $fill)))
    {tail})"#
    )
}

/// The eight standard process modules, by manifest name.
pub const STANDARD: [&str; 8] = [
    "adsorbate-sputter",
    "impact-vapor",
    "ion-sputter",
    "photoionization",
    "photon-desorption",
    "regolith-diffusion",
    "surface-accommodation",
    "thermal-desorption",
];

/// The `exobound` binary of this build, (re)built first: the test crate
/// does not depend on it, and a stale one would test old code.
pub fn exobound_binary() -> PathBuf {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).parent().unwrap();
    let cargo = std::env::var("CARGO").unwrap_or_else(|_| "cargo".into());
    let out = std::process::Command::new(cargo)
        .args(["build", "--release", "--quiet", "-p", "exobound", "--bin", "exobound"])
        .current_dir(root)
        .output()
        .unwrap();
    assert!(out.status.success(), "{}", String::from_utf8_lossy(&out.stderr));
    // This test binary lies in <target>/release/deps/.
    let exe = std::env::current_exe().unwrap();
    let bin = exe.parent().unwrap().parent().unwrap().join("exobound");
    assert!(bin.is_file(), "{}", bin.display());
    bin
}

/// A batch export `name` that writes `value` into every f64 output (e.g. a
/// constant release rate, atoms cm^-2 s^-1, or loss rate, s^-1).
pub fn constant_rate_export(name: &str, value: &str) -> String {
    format!(
        r#"(func (export "{name}") (param $in i32) (param $n i32) (param $out i32) (result i32)
    (local $i i32)
    (block $done (loop $fill
      (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
      (f64.store (i32.add (local.get $out) (i32.mul (local.get $i) (i32.const 8))) (f64.const {value}))
      (local.set $i (i32.add (local.get $i) (i32.const 1)))
      (br $fill)))
    (local.get $n))"#
    )
}

/// Runs the IOOS compliance-checker's CF 1.8 suite on `nc` (tests/python/cf_check.py) and
/// fails on any error or warning that docs/outputs.md does not quote with its reason. `.ci/run`
/// installs the checker and sets EXOBOUND_REQUIRE_CF_CHECKER=1; only without that variable
/// and without the checker is the check reported and skipped.
pub fn cf_checker(nc: &Path) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    if !python_can_import(
        "compliance_checker, netCDF4",
        "EXOBOUND_REQUIRE_CF_CHECKER",
        "the CF checker",
    ) {
        return;
    }
    let out = std::process::Command::new("python3")
        .arg(root.join("python/cf_check.py"))
        .arg(nc)
        .arg(root.join("../docs/outputs.md"))
        .output()
        .expect("run python3");
    assert!(
        out.status.success(),
        "compliance-checker (CF 1.8) findings on {} that docs/outputs.md does not explain:\n{}\n{}",
        nc.display(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Opens a run's `nc` with xarray's default decoding as a user would
/// (tests/python/read_like_a_user.py): dates, exact coordinates, bounds, cell methods.
/// Skipped without xarray unless EXOBOUND_REQUIRE_XARRAY is set.
pub fn read_like_a_user(nc: &Path) {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("python/read_like_a_user.py");
    if !python_can_import("xarray, scipy", "EXOBOUND_REQUIRE_XARRAY", "the xarray check") {
        return;
    }
    let out = std::process::Command::new("python3").arg(&script).arg(nc).output().expect("python3");
    assert!(
        out.status.success(),
        "reading {} with default xarray decoding failed:\n{}\n{}",
        nc.display(),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Whether python3 can import `modules` (e.g. "xarray, scipy"), for a check
/// that uses them. Without them the check is reported and skipped, unless
/// the CI variable `required_by` is set (`.ci/run` sets it and installs the
/// modules), in which case the test fails: CI never skips.
pub fn python_can_import(modules: &str, required_by: &str, check: &str) -> bool {
    let has = std::process::Command::new("python3")
        .args(["-c", &format!("import {modules}")])
        .output()
        .is_ok_and(|o| o.status.success());
    if !has {
        assert!(
            std::env::var_os(required_by).is_none(),
            "{required_by} is set but python3 cannot import {modules}"
        );
        eprintln!("skipping {check}: python3 cannot import {modules}");
    }
    has
}

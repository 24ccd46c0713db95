//! The scripts that computed the reference values stated in the standard
//! modules and the engine tests, run and checked.
//!
//! Why this exists: a value such as "mean launch speed 2986.224711175713 m/s
//! (mpmath quadrature)" is only as good as the script that produced it. The
//! scripts under `tests/python/` recompute every such value with mpmath and
//! scipy, a second way where one exists, and exit with an error when a value
//! stated in the Rust code no longer matches. Skipped when python3 lacks
//! mpmath or scipy, unless CI's `EXOBOUND_REQUIRE_REFERENCE_SCRIPTS` is set.

use std::path::Path;
use std::process::Command;

use crate::support::python_can_import;

/// Runs `script` (a path under `tests/python/`) and fails with its output
/// unless it exits with status 0.
fn run(script: &str) {
    let path = Path::new(env!("CARGO_MANIFEST_DIR")).join("python").join(script);
    let out = Command::new("python3").arg(&path).output().expect("run python3");
    assert!(
        out.status.success(),
        "{script}: a stated reference value no longer matches its computation:\n{}\n{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
}

#[test]
fn stated_reference_values_match_their_scripts() {
    if !python_can_import(
        "mpmath, scipy, numpy",
        "EXOBOUND_REQUIRE_REFERENCE_SCRIPTS",
        "the reference-value scripts",
    ) {
        return;
    }
    run("module_reference_values.py");
    run("jeans_chamberlain_reference_values.py");
}

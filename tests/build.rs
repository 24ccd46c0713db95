//! Builds the test fixtures in `tests/fixtures/` (a hostile law, a
//! table-parameter law, a mislabelled source) to `.wasm`.
//!
//! Why this exists: fixture modules are built from source, never committed
//! as binaries. This drives the same nested wasm32 build as the host's
//! build script and exports the output directory as `EXOBOUND_FIXTURE_DIR`.

#[path = "../host/src/modbuild.rs"]
#[allow(dead_code)]
mod modbuild;

use std::path::PathBuf;

fn main() {
    let here = PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("set by cargo"));
    let root = here.parent().expect("tests/ lies in the workspace").to_path_buf();
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| root.join("target"));
    let target = if target.is_absolute() { target } else { root.join(target) };
    let wasm_dir = target.join("wasm");
    println!("cargo:rerun-if-changed={}", here.join("fixtures").display());
    println!("cargo:rerun-if-changed={}", root.join("process-sdk").display());
    let fixtures = ["hostile-law", "table-law", "mislabelled-source"];
    let packages: Vec<String> = fixtures.iter().map(|s| s.to_string()).collect();
    if let Err(e) = modbuild::build(&root.join("Cargo.toml"), &packages, &wasm_dir) {
        panic!("building the test fixtures to wasm failed: {e}");
    }
    let out = wasm_dir.join(modbuild::WASM_TARGET).join("release");
    println!("cargo:rustc-env=EXOBOUND_FIXTURE_DIR={}", out.display());
}

//! Builds the standard process modules in `processes/` to `.wasm`.
//!
//! Why this exists: the engine runs modules only through the sandbox, so a
//! plain `cargo build` or `cargo test` must leave ready `.wasm` files behind
//! with no manual step. This script drives a nested cargo with the wasm32
//! target into its own target directory (`target/wasm`), copies each module
//! to `target/modules/<name>.wasm`, and tells the library where they are
//! through the `EXOBOUND_MODULE_DIR` compile-time variable. Set
//! `EXOBOUND_SKIP_WASM_BUILD=1` to skip it (e.g. for `cargo doc`).

#[path = "src/modbuild.rs"]
#[allow(dead_code)]
mod modbuild;

use std::path::{Path, PathBuf};

fn main() {
    let host =
        PathBuf::from(std::env::var("CARGO_MANIFEST_DIR").expect("cargo sets CARGO_MANIFEST_DIR"));
    let root = host.parent().expect("host/ lies inside the workspace").to_path_buf();
    let target = std::env::var_os("CARGO_TARGET_DIR")
        .map(PathBuf::from)
        .unwrap_or_else(|| root.join("target"));
    let target = if target.is_absolute() { target } else { root.join(target) };
    let wasm_dir = target.join("wasm");
    let module_dir = target.join("modules");
    println!("cargo:rustc-env=EXOBOUND_MODULE_DIR={}", module_dir.display());
    println!("cargo:rustc-env=EXOBOUND_SDK_DIR={}", root.join("process-sdk").display());
    println!("cargo:rerun-if-changed={}", root.join("processes").display());
    println!("cargo:rerun-if-changed={}", root.join("process-sdk").display());
    println!("cargo:rerun-if-changed={}", root.join("Cargo.lock").display());
    println!("cargo:rerun-if-env-changed=EXOBOUND_SKIP_WASM_BUILD");
    if std::env::var_os("EXOBOUND_SKIP_WASM_BUILD").is_some() {
        return;
    }
    let crates = standard_crates(&root.join("processes"));
    if crates.is_empty() {
        return;
    }
    let packages: Vec<String> = crates.iter().map(|(pkg, _)| pkg.clone()).collect();
    if let Err(e) = modbuild::build(&root.join("Cargo.toml"), &packages, &wasm_dir) {
        panic!("building the standard process modules to wasm failed: {e}");
    }
    std::fs::create_dir_all(&module_dir).expect("create target/modules");
    for (pkg, lib) in &crates {
        let from = modbuild::artifact_path(&wasm_dir, lib);
        let to = module_dir.join(format!("{pkg}.wasm"));
        // Copy through a temporary name so a reader never sees half a file.
        let tmp = module_dir.join(format!(".{pkg}.wasm.tmp"));
        std::fs::copy(&from, &tmp)
            .unwrap_or_else(|e| panic!("copy {} to {}: {e}", from.display(), tmp.display()));
        std::fs::rename(&tmp, &to).expect("rename module into place");
    }
}

/// (package name, library name) of every crate directly under `dir`.
fn standard_crates(dir: &Path) -> Vec<(String, String)> {
    let Ok(entries) = std::fs::read_dir(dir) else { return Vec::new() };
    let mut out = Vec::new();
    for entry in entries.flatten() {
        let manifest = entry.path().join("Cargo.toml");
        if !manifest.is_file() {
            continue;
        }
        let lib = modbuild::lib_name(&manifest).unwrap_or_else(|e| panic!("{e}"));
        let pkg = entry.file_name().to_string_lossy().to_string();
        out.push((pkg, lib));
    }
    out.sort();
    out
}

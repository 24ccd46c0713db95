//! Support for the integration tests: where the built fixtures are.
//!
//! Why this exists: the test binary needs to know where `build.rs` put
//! the fixture modules it built from source.

/// Directory holding the fixture `.wasm` files built by `build.rs`.
pub fn fixture_dir() -> std::path::PathBuf {
    std::path::PathBuf::from(env!("EXOBOUND_FIXTURE_DIR"))
}

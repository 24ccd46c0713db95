//! The compiled-module cache: one artifact per digest and engine, reused.

use exobound::runtime::{Runtime, RuntimeConfig};

use crate::support::*;

#[test]
fn compiled_module_is_cached_on_disk_and_reused() {
    let dir = TempDir::new("cache");
    let config = RuntimeConfig { cache_dir: Some(dir.path().to_path_buf()), ..Default::default() };
    let path = exobound::standard_module("photoionization");
    let digest = {
        let rt = Runtime::new(config.clone()).unwrap();
        let m = rt.load(&path).unwrap();
        // Within one runtime the same digest is compiled once.
        let again = rt.load(&path).unwrap();
        assert!(std::sync::Arc::ptr_eq(&m, &again));
        m.sha256().to_string()
    };
    let files: Vec<_> =
        std::fs::read_dir(dir.path()).unwrap().flatten().map(|e| e.file_name()).collect();
    assert_eq!(files.len(), 1, "{files:?}");
    let name = files[0].to_string_lossy().to_string();
    assert!(name.starts_with(&digest) && name.ends_with(".cwasm"), "{name}");
    // A new runtime loads the artifact and it works.
    let rt = Runtime::new(config.clone()).unwrap();
    assert_host_still_works(&rt);
    // A corrupted artifact is recompiled, not trusted.
    std::fs::write(dir.path().join(&name), b"garbage").unwrap();
    let rt = Runtime::new(config).unwrap();
    assert_host_still_works(&rt);
    assert!(std::fs::metadata(dir.path().join(&name)).unwrap().len() > 100);
}

//! Helpers shared by the integration tests: a scratch directory per test that is removed
//! afterwards (kept if EXOBOUND_KEEP_TEST_OUTPUT is set, to look at the figures), so tests
//! never write into the repository.

use std::path::{Path, PathBuf};

/// A scratch directory under the system temp dir, removed on drop.
pub struct Scratch(PathBuf);

impl Scratch {
    /// A fresh directory named after the test and the process.
    pub fn new(test: &str) -> Self {
        let dir =
            std::env::temp_dir().join(format!("exobound-products-{test}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).expect("create scratch dir");
        Self(dir)
    }

    /// A path inside the directory.
    pub fn join(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }

    /// The directory itself.
    #[allow(dead_code)]
    pub fn path(&self) -> &Path {
        &self.0
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        if std::env::var_os("EXOBOUND_KEEP_TEST_OUTPUT").is_some() {
            eprintln!("kept {}", self.0.display());
            return;
        }
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

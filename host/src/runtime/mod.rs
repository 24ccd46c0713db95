//! The sandboxed wasm runtime: load and check modules, compile them once,
//! and give each worker thread its own instance.
//!
//! Why this exists: every process law reaches the engine only through this
//! module. It is the one place that decides what a module may do (nothing
//! but compute on the batches it is handed), how much it may compute (a
//! fuel budget per call, proportional to the batch), how much memory it may
//! use (a cap enforced by a resource limiter), how large a module may be
//! before it is compiled, and what counts as a valid answer (finite, in
//! range, one output per input).
//!
//! Whether a call succeeds depends only on the module, its inputs and its
//! parameters: fuel counts wasm instructions, so the same batch uses the
//! same fuel on any machine under any load. A wall-clock deadline (epoch
//! interruption) remains only as a backstop of minutes against a host that
//! is itself stuck; it never decides a healthy run.
//!
//! What the sandbox guarantees: a module cannot read or write host memory,
//! files, the network or the clock (ABI v1 grants no imports at all); a
//! trap, a runaway loop or a memory bomb becomes a typed [`HostError`]
//! naming the module, the call, the batch and the scenario key that raises
//! the limit; outputs that are NaN, infinite, negative where a rate must be
//! positive, faster than the speed bound, or of an unknown outcome code are
//! refused; a compiled-module cache entry is verified against a keyed
//! digest before its native code is loaded. What it does not guarantee:
//! that the law is physically right, that it is fast, or that a module is
//! not subtly wrong within the bounds; that is what reference points,
//! `vet` and review are for. Nor does it protect against a user who can
//! already write to the cache directory and read its key.

pub mod backend;
pub mod cache;
pub mod error;
pub mod instance;
pub mod limits;
pub mod module;
pub mod reference;
pub mod validate;
pub mod watchdog;

use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::sync::{Arc, Mutex};
use std::time::Duration;

use exobound_sdk::ParamValue;
use exobound_sdk::wire::ManifestInfo;
use wasmtime::{Config, Engine, OptLevel};

pub use error::{CallSite, DomainError, HostError, ModuleError, flatten};
pub use instance::ProcessInstance;
pub use limits::{CompileLimits, SandboxLimits};
pub use module::{AbiVersion, ModuleHeader};

use watchdog::Watchdog;

/// Limits and options of the sandbox.
#[derive(Clone, Debug)]
pub struct RuntimeConfig {
    /// Default per-call limits (fuel, memory cap, wall-time backstop); a
    /// scenario's `[sandbox]` table overrides them per module instance.
    pub limits: SandboxLimits,
    /// Limits on a module's shape and compilation, checked before and while compiling.
    pub compile: CompileLimits,
    /// Largest launch or re-emission speed accepted from a module, m s^-1 (default 1e5).
    pub max_speed: f64,
    /// Largest number of records passed in one call, dimensionless (default 8192).
    pub max_batch: usize,
    /// Largest manifest section accepted, bytes (default 64 KiB).
    pub max_manifest: usize,
    /// Directory of the compiled-module cache; `None` compiles in memory only.
    pub cache_dir: Option<PathBuf>,
    /// Period of the watchdog's epoch tick, wall time (default 50 ms).
    pub epoch_tick: Duration,
    /// Count fuel (default true). Off only to measure what metering costs
    /// (`benches/engine.rs`): without it no fuel budget applies and only
    /// the wall-time backstop stops a runaway call. No command turns it off.
    pub fuel_metering: bool,
}

impl Default for RuntimeConfig {
    fn default() -> Self {
        RuntimeConfig {
            limits: SandboxLimits::default(),
            compile: CompileLimits::default(),
            max_speed: 1.0e5,
            max_batch: 8192,
            max_manifest: 64 << 10,
            cache_dir: cache::default_dir(),
            epoch_tick: Duration::from_millis(50),
            fuel_metering: true,
        }
    }
}

/// A module file that passed the header checks and was compiled.
#[derive(Debug)]
pub struct LoadedModule {
    /// Where it came from (path or label), for messages.
    pub origin: String,
    /// Sections, digest and exports.
    pub header: ModuleHeader,
    compiled: wasmtime::Module,
}

impl LoadedModule {
    /// Module name from the manifest.
    pub fn name(&self) -> &str {
        &self.header.manifest.name
    }

    /// The decoded manifest.
    pub fn manifest(&self) -> &ManifestInfo {
        &self.header.manifest
    }

    /// SHA-256 of the file, lowercase hex.
    pub fn sha256(&self) -> &str {
        &self.header.sha256
    }
}

/// The wasm engine with its watchdog and its table of compiled modules.
/// Share one per process; it is `Sync`, and each worker thread makes its own
/// [`ProcessInstance`]s from it.
pub struct Runtime {
    engine: Engine,
    config: RuntimeConfig,
    watchdog: Arc<Watchdog>,
    cache: Option<cache::Cache>,
    modules: Mutex<HashMap<String, Arc<LoadedModule>>>,
    notices: Mutex<Vec<String>>,
}

impl Runtime {
    /// A runtime with the given limits. A cache directory that another user
    /// owns or others can write is refused here, naming it and the fix.
    pub fn new(config: RuntimeConfig) -> Result<Runtime, HostError> {
        let mut notices = Vec::new();
        let cache = match config.cache_dir.as_deref().map(cache::Cache::open).transpose()? {
            Some(Ok(c)) => Some(c),
            Some(Err(why)) => {
                eprintln!("exobound: warning: {why}");
                notices.push(why);
                None
            }
            None => None,
        };
        let mut c = Config::new();
        c.cranelift_opt_level(OptLevel::Speed);
        // Let Cranelift inline small guest functions (libm helpers, samplers):
        // measured 6% faster launches at batch 1024.
        c.compiler_inlining(wasmtime::Inlining::Yes);
        // Fuel is the budget that decides; the epoch is the wall-time backstop.
        c.epoch_interruption(true);
        c.consume_fuel(config.fuel_metering);
        let engine = Engine::new(&c).map_err(|e| HostError::Compile {
            module: "(engine)".to_string(),
            detail: e.to_string(),
        })?;
        let watchdog = Arc::new(Watchdog::start(engine.clone(), config.epoch_tick));
        Ok(Runtime {
            engine,
            config,
            watchdog,
            cache,
            modules: Mutex::new(HashMap::new()),
            notices: Mutex::new(notices),
        })
    }

    /// The runtime's limits.
    pub fn config(&self) -> &RuntimeConfig {
        &self.config
    }

    /// Warnings raised so far (e.g. a rejected cache entry), one line each.
    pub fn notices(&self) -> Vec<String> {
        self.notices.lock().unwrap_or_else(|p| p.into_inner()).clone()
    }

    /// Load, check and compile the module file at `path` (compiled once per
    /// runtime; later loads of the same digest share it).
    pub fn load(&self, path: &Path) -> Result<Arc<LoadedModule>, HostError> {
        let bytes = module::read_file(path)?;
        self.load_bytes(&path.display().to_string(), &bytes)
    }

    /// Load, check and compile a module from its bytes; `origin` names it in messages.
    pub fn load_bytes(&self, origin: &str, bytes: &[u8]) -> Result<Arc<LoadedModule>, HostError> {
        let label = module::label_of(Path::new(origin));
        let header = module::read_header(&label, bytes, self.config.max_manifest)?;
        limits::check_shape(&header.manifest.name, bytes, &self.config.compile)?;
        if let Some(m) = self.modules.lock().unwrap_or_else(|p| p.into_inner()).get(&header.sha256)
        {
            return Ok(m.clone());
        }
        let notice = |text: String| {
            eprintln!("exobound: warning: {text}");
            self.notices.lock().unwrap_or_else(|p| p.into_inner()).push(text);
        };
        let compiled = cache::compile_cached(
            &self.engine,
            self.cache.as_ref(),
            &header.manifest.name,
            &header.sha256,
            bytes,
            &self.config.compile,
            &notice,
        )?;
        let loaded = Arc::new(LoadedModule { origin: origin.to_string(), header, compiled });
        self.modules
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .insert(loaded.header.sha256.clone(), loaded.clone());
        Ok(loaded)
    }

    /// A fresh instance of `module`, initialised with `params` (validated
    /// against the manifest first, so the error names the parameter), under
    /// the runtime's default limits.
    pub fn instantiate(
        &self,
        module: &Arc<LoadedModule>,
        params: &BTreeMap<String, ParamValue>,
    ) -> Result<Result<ProcessInstance, DomainError>, HostError> {
        self.instantiate_with(module, params, &self.config.limits)
    }

    /// As [`Runtime::instantiate`], under `limits` (a scenario's `[sandbox]`).
    pub fn instantiate_with(
        &self,
        module: &Arc<LoadedModule>,
        params: &BTreeMap<String, ParamValue>,
        limits: &SandboxLimits,
    ) -> Result<Result<ProcessInstance, DomainError>, HostError> {
        if let Err(error) = exobound_sdk::Params::validate(params, &module.manifest().parameters) {
            return Ok(Err(DomainError {
                module: module.name().to_string(),
                call: "parameters",
                error,
            }));
        }
        ProcessInstance::new(self, module.clone(), exobound_sdk::Params::encode(params), limits)
    }

    pub(crate) fn engine(&self) -> &Engine {
        &self.engine
    }

    /// Epoch ticks that cover the wall-time backstop `backstop`.
    pub(crate) fn ticks_for(&self, backstop: Duration) -> u64 {
        self.watchdog.ticks_for(backstop)
    }
}

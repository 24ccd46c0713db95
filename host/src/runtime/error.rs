//! Host-side failures of process modules, as typed errors.
//!
//! Why this exists: modules are other people's code. When one misbehaves,
//! the scientist needs to know which module, in which role, on what batch,
//! what happened and what to do about it, and the run must carry on or
//! stop cleanly, never crash or hang. Each failure therefore has its own
//! variant, and its message ends with the fix.
//!
//! These are *host-side* failures (traps, budgets, broken pointers, bad
//! outputs, unloadable files). A law's own refusal is an
//! `exobound_sdk::ProcessError`, kept apart as `Result<Result<T,
//! ProcessError>, HostError>`.

use std::fmt;
use std::path::PathBuf;
use std::time::Duration;

/// Where in a module a failure happened: module name, role call, batch size.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct CallSite {
    /// Module name from its manifest (or its file name before the manifest is read).
    pub module: String,
    /// The export that was called, e.g. `exobound_launch`.
    pub call: &'static str,
    /// Number of records in the batch.
    pub batch: usize,
}

impl fmt::Display for CallSite {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "module `{}`, call {} on a batch of {}", self.module, self.call, self.batch)
    }
}

/// A host-side failure of a module: it never comes from the law's own logic.
#[derive(Debug)]
pub enum HostError {
    /// A module file could not be read.
    Read {
        /// The file.
        path: PathBuf,
        /// The operating system's reason.
        source: std::io::Error,
    },
    /// The bytes are not a WebAssembly module.
    NotWasm {
        /// Module label (file name).
        module: String,
        /// The parser's reason.
        detail: String,
    },
    /// A required custom section is absent.
    MissingSection {
        /// Module label.
        module: String,
        /// Section name.
        section: &'static str,
    },
    /// The module was built for an ABI major version this host does not speak.
    AbiUnsupported {
        /// Module label.
        module: String,
        /// Version found in the module.
        found: String,
        /// Version the host implements.
        supported: &'static str,
    },
    /// The manifest section is larger than the host accepts.
    ManifestTooLarge {
        /// Module label.
        module: String,
        /// Section size, bytes.
        size: usize,
        /// Limit, bytes.
        limit: usize,
    },
    /// The manifest section does not decode or is inconsistent.
    ManifestMalformed {
        /// Module label.
        module: String,
        /// What is wrong.
        detail: String,
    },
    /// The module imports something; ABI v1 grants no imports.
    ForbiddenImport {
        /// Module name.
        module: String,
        /// `module::field` of the import.
        import: String,
    },
    /// An export required by the ABI or by a declared role is absent or has the wrong type.
    MissingExport {
        /// Module name.
        module: String,
        /// Export name.
        export: String,
        /// Why it is required.
        needed_for: String,
    },
    /// The module was asked for a role its manifest does not declare.
    RoleNotDeclared {
        /// Module name.
        module: String,
        /// Role name.
        role: &'static str,
    },
    /// Compilation or instantiation failed.
    Compile {
        /// Module name.
        module: String,
        /// wasmtime's reason.
        detail: String,
    },
    /// A call ran past the wall-time backstop and was interrupted.
    Timeout {
        /// Where.
        site: CallSite,
        /// The backstop, wall time.
        budget: Duration,
    },
    /// A call used up its fuel budget.
    OutOfFuel {
        /// Where.
        site: CallSite,
        /// The budget of this call, fuel units (about one per wasm instruction).
        fuel: u64,
        /// The scenario key whose value sized this budget
        /// (`sandbox.fuel_per_record` for batch calls, `sandbox.fuel_per_call` otherwise).
        key: &'static str,
    },
    /// The module tried to grow its memory past the cap.
    MemoryLimit {
        /// Where.
        site: CallSite,
        /// The cap, bytes.
        limit: usize,
    },
    /// The module's shape exceeds a compile limit (checked before compiling),
    /// or its compilation ran past the compile backstop.
    CompileLimit {
        /// Module name.
        module: String,
        /// What was counted, with its unit, e.g. `functions`.
        what: &'static str,
        /// The count found.
        found: u64,
        /// The limit.
        limit: u64,
    },
    /// The module trapped (unreachable, out-of-bounds access, division by zero, ...).
    Trap {
        /// Where.
        site: CallSite,
        /// wasmtime's trap description.
        trap: String,
        /// The module's own last message, if it left one (e.g. a Rust panic message).
        message: Option<String>,
    },
    /// The module returned a pointer or length outside its memory.
    BadPointer {
        /// Where.
        site: CallSite,
        /// What was wrong.
        detail: String,
    },
    /// The module reported a different number of outputs than the batch holds.
    LengthMismatch {
        /// Where.
        site: CallSite,
        /// The count it reported.
        reported: i32,
    },
    /// A negative return that is not one of ABI v1's domain error codes.
    UnknownErrorCode {
        /// Where.
        site: CallSite,
        /// The code.
        code: i32,
    },
    /// An output value failed validation (NaN, infinite, negative rate, speed
    /// above the bound, unknown outcome code, downward re-emission).
    InvalidOutput {
        /// Where.
        site: CallSite,
        /// Index of the offending record within the batch.
        index: usize,
        /// What was wrong, with the value.
        detail: String,
    },
    /// The compiled-module cache could not be used.
    Cache {
        /// The cache file or directory.
        path: PathBuf,
        /// What went wrong.
        detail: String,
    },
}

impl HostError {
    /// The call site, for failures that happen inside a call.
    pub fn site(&self) -> Option<&CallSite> {
        match self {
            HostError::Timeout { site, .. }
            | HostError::OutOfFuel { site, .. }
            | HostError::MemoryLimit { site, .. }
            | HostError::Trap { site, .. }
            | HostError::BadPointer { site, .. }
            | HostError::LengthMismatch { site, .. }
            | HostError::UnknownErrorCode { site, .. }
            | HostError::InvalidOutput { site, .. } => Some(site),
            _ => None,
        }
    }

    /// A short machine-readable name of the failure, e.g. `timeout`.
    pub fn kind(&self) -> &'static str {
        match self {
            HostError::Read { .. } => "read",
            HostError::NotWasm { .. } => "not-wasm",
            HostError::MissingSection { .. } => "missing-section",
            HostError::AbiUnsupported { .. } => "abi-unsupported",
            HostError::ManifestTooLarge { .. } => "manifest-too-large",
            HostError::ManifestMalformed { .. } => "manifest-malformed",
            HostError::ForbiddenImport { .. } => "forbidden-import",
            HostError::MissingExport { .. } => "missing-export",
            HostError::RoleNotDeclared { .. } => "role-not-declared",
            HostError::Compile { .. } => "compile",
            HostError::CompileLimit { .. } => "compile-limit",
            HostError::Timeout { .. } => "timeout",
            HostError::OutOfFuel { .. } => "out-of-fuel",
            HostError::MemoryLimit { .. } => "memory-limit",
            HostError::Trap { .. } => "trap",
            HostError::BadPointer { .. } => "bad-pointer",
            HostError::LengthMismatch { .. } => "length-mismatch",
            HostError::UnknownErrorCode { .. } => "unknown-error-code",
            HostError::InvalidOutput { .. } => "invalid-output",
            HostError::Cache { .. } => "cache",
        }
    }
}

impl fmt::Display for HostError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            HostError::Read { path, source } => {
                write!(f, "cannot read module file {}: {source}; check the path", path.display())
            }
            HostError::NotWasm { module, detail } => write!(
                f,
                "{module} is not a WebAssembly module ({detail}); build it with \
                 `exobound module build`"
            ),
            HostError::MissingSection { module, section } => write!(
                f,
                "{module} has no `{section}` custom section, so it was not built with \
                 exobound-sdk's export_process! (or the section was stripped); rebuild it \
                 with `exobound module build`"
            ),
            HostError::AbiUnsupported { module, found, supported } => write!(
                f,
                "{module} was built for process ABI {found}, but this host supports ABI \
                 {supported}; rebuild the module against a matching exobound-sdk or use a \
                 matching exobound release"
            ),
            HostError::ManifestTooLarge { module, size, limit } => write!(
                f,
                "{module}: the exobound:manifest section is {size} bytes, above the host's \
                 limit of {limit} bytes; shorten the descriptions or reference points"
            ),
            HostError::ManifestMalformed { module, detail } => write!(
                f,
                "{module}: the exobound:manifest section is malformed: {detail}; rebuild the \
                 module with exobound-sdk"
            ),
            HostError::ForbiddenImport { module, import } => write!(
                f,
                "module `{module}` imports `{import}`, but process modules may import \
                 nothing (no WASI, no host functions); remove the dependency that needs it"
            ),
            HostError::MissingExport { module, export, needed_for } => write!(
                f,
                "module `{module}` lacks the export `{export}` (or it has the wrong type), \
                 needed for {needed_for}; register the law with export_process! listing \
                 every role"
            ),
            HostError::RoleNotDeclared { module, role } => write!(
                f,
                "module `{module}` does not declare the role `{role}` in its manifest; use \
                 it only in the roles it lists (see `exobound module inspect`)"
            ),
            HostError::Compile { module, detail } => {
                write!(f, "module `{module}` could not be compiled or instantiated: {detail}")
            }
            HostError::CompileLimit { module, what, found, limit } => write!(
                f,
                "module `{module}` was refused before compiling: {what} is {found}, above the \
                 limit of {limit}; a process law needs far less (the standard modules have a \
                 few hundred functions of at most a few KiB), so reduce the module or split it"
            ),
            HostError::Timeout { site, budget } => write!(
                f,
                "{site}: was still running after the wall-time backstop of {:.0} s and was \
                 stopped (the fuel budget, not wall time, normally decides; a call this slow \
                 is a law far too slow or a stuck host); fix the module, or raise `{}` in the \
                 scenario's [sandbox] table (or --set {}=\"20 min\")",
                budget.as_secs_f64(),
                super::limits::KEY_BACKSTOP,
                super::limits::KEY_BACKSTOP
            ),
            HostError::OutOfFuel { site, fuel, key } => write!(
                f,
                "{site}: used up its fuel budget of {fuel} units (about one per wasm \
                 instruction; the same on every machine) and was stopped: an endless loop, or \
                 a law that needs more compute per record; fix the module, or raise `{key}` in \
                 the scenario's [sandbox] table (or --set {key}=...)"
            ),
            HostError::MemoryLimit { site, limit } => write!(
                f,
                "{site}: tried to grow its memory beyond the cap of {} MiB and was stopped; \
                 fix the module's memory use, or raise `{}` in the scenario's [sandbox] table \
                 (or --set {}=\"256 MiB\")",
                limit / (1 << 20),
                super::limits::KEY_MEMORY_CAP,
                super::limits::KEY_MEMORY_CAP
            ),
            HostError::Trap { site, trap, message } => {
                write!(f, "{site}: trapped: {trap}")?;
                if let Some(m) = message {
                    write!(f, " ({m})")?;
                }
                write!(f, "; this is a bug in the module, report it to its authors")
            }
            HostError::BadPointer { site, detail } => {
                write!(f, "{site}: {detail}; this is a bug in the module")
            }
            HostError::LengthMismatch { site, reported } => write!(
                f,
                "{site}: reported {reported} outputs for a batch of {}; a module must write \
                 exactly one output per input record",
                site.batch
            ),
            HostError::UnknownErrorCode { site, code } => write!(
                f,
                "{site}: returned {code}, which is not an ABI v1 error code (-1 to -6); this \
                 is a bug in the module"
            ),
            HostError::InvalidOutput { site, index, detail } => write!(
                f,
                "{site}: output record {index} is invalid: {detail}; this is a bug in the \
                 module or the law is used outside its validity"
            ),
            HostError::Cache { path, detail } => {
                write!(f, "compiled-module cache at {}: {detail}", path.display())
            }
        }
    }
}

impl std::error::Error for HostError {}

/// A law's own refusal (a domain error), with the module that refused.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct DomainError {
    /// Module name.
    pub module: String,
    /// The call that refused, e.g. `exobound_init`.
    pub call: &'static str,
    /// The law's error.
    pub error: exobound_sdk::ProcessError,
}

impl fmt::Display for DomainError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "module `{}` refused {}: {}", self.module, self.call, self.error)
    }
}

impl std::error::Error for DomainError {}

/// Either level of failure, for callers that report rather than recover.
#[derive(Debug)]
pub enum ModuleError {
    /// A host-side failure.
    Host(HostError),
    /// A law's own refusal.
    Domain(DomainError),
}

impl fmt::Display for ModuleError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ModuleError::Host(e) => e.fmt(f),
            ModuleError::Domain(e) => e.fmt(f),
        }
    }
}

impl std::error::Error for ModuleError {}

impl From<HostError> for ModuleError {
    fn from(e: HostError) -> Self {
        ModuleError::Host(e)
    }
}

impl From<DomainError> for ModuleError {
    fn from(e: DomainError) -> Self {
        ModuleError::Domain(e)
    }
}

/// Flatten the two levels into one error, for callers that only report.
pub fn flatten<T>(r: Result<Result<T, DomainError>, HostError>) -> Result<T, ModuleError> {
    match r {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(d)) => Err(ModuleError::Domain(d)),
        Err(h) => Err(ModuleError::Host(h)),
    }
}

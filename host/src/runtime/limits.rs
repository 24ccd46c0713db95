//! The limits of the sandbox, as values a user can set and a message can name.
//!
//! Why this exists: a budget that decides whether a run succeeds must not
//! depend on how busy the machine is, and a user whose legitimately heavy
//! law hits a limit must be told which setting raises it. Call budgets are
//! therefore counted in wasmtime fuel (about one unit per wasm instruction
//! executed, identical on every machine), sized per record so that a batch
//! of 8192 records gets 8192 times the allowance of one; wall time is only
//! a backstop of minutes. Each limit carries the scenario key that sets it
//! (`[sandbox]` in the scenario file, or `--set sandbox.KEY=VALUE`).
//!
//! Compile limits are checked on the module's bytes before any code is
//! compiled, so a module built to exhaust the compiler (a hundred thousand
//! tiny functions, one enormous function) is refused with a named error in
//! milliseconds instead of taking minutes and gigabytes.

use std::time::Duration;

use wasmparser::{Parser, Payload};

use super::error::HostError;

/// Scenario key of the fuel per record.
pub const KEY_FUEL_PER_RECORD: &str = "sandbox.fuel_per_record";
/// Scenario key of the fixed fuel of every call.
pub const KEY_FUEL_PER_CALL: &str = "sandbox.fuel_per_call";
/// Scenario key of the memory cap.
pub const KEY_MEMORY_CAP: &str = "sandbox.memory_cap";
/// Scenario key of the wall-time backstop.
pub const KEY_BACKSTOP: &str = "sandbox.backstop";

/// Per-call limits of one module instance.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SandboxLimits {
    /// Fuel allowed per record of a batch call, wasm fuel units (about one
    /// per instruction; default 1e6, some 500 times what the standard laws use).
    pub fuel_per_record: u64,
    /// Fuel allowed to every call on top of the per-record share, and the
    /// whole budget of calls without records (initialisation, buffer
    /// allocation, reading an error message), fuel units (default 5e7).
    pub fuel_per_call: u64,
    /// Largest linear memory a module may grow to, bytes (default 64 MiB).
    pub memory_cap: usize,
    /// Wall-time backstop of one call, s: only a stuck host or a module far
    /// slower than any law should reach it (default 300 s).
    pub backstop: Duration,
}

impl Default for SandboxLimits {
    fn default() -> Self {
        SandboxLimits {
            fuel_per_record: 1_000_000,
            fuel_per_call: 50_000_000,
            memory_cap: 64 << 20,
            backstop: Duration::from_secs(300),
        }
    }
}

impl SandboxLimits {
    /// The fuel budget of a call over `records` records, fuel units.
    pub fn fuel_for(&self, records: usize) -> u64 {
        self.fuel_per_call.saturating_add(self.fuel_per_record.saturating_mul(records as u64))
    }
}

/// Limits on a module's shape and on its compilation.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CompileLimits {
    /// Largest module file, bytes (default 32 MiB; the standard modules are 100-300 KiB).
    pub max_module_bytes: usize,
    /// Most functions (defined and imported), dimensionless (default 20 000;
    /// the standard modules have a few hundred).
    pub max_functions: u32,
    /// Largest body of one function, bytes (default 4 MiB).
    pub max_function_bytes: usize,
    /// Most local variables of one function, dimensionless (default 50 000).
    pub max_locals: u32,
    /// Wall-time backstop of one compilation, s (default 300 s): the shape
    /// limits above decide; this only guards against a compiler that hangs.
    pub compile_backstop: Duration,
}

impl Default for CompileLimits {
    fn default() -> Self {
        CompileLimits {
            max_module_bytes: 32 << 20,
            max_functions: 20_000,
            max_function_bytes: 4 << 20,
            max_locals: 50_000,
            compile_backstop: Duration::from_secs(300),
        }
    }
}

/// Check the shape of `bytes` against `limits` before compiling; `name`
/// names the module in errors.
pub fn check_shape(name: &str, bytes: &[u8], limits: &CompileLimits) -> Result<(), HostError> {
    let refuse = |what: &'static str, found: u64, limit: u64| HostError::CompileLimit {
        module: name.to_string(),
        what,
        found,
        limit,
    };
    if bytes.len() > limits.max_module_bytes {
        return Err(refuse(
            "module size, bytes",
            bytes.len() as u64,
            limits.max_module_bytes as u64,
        ));
    }
    let not_wasm = |e: wasmparser::BinaryReaderError| HostError::NotWasm {
        module: name.to_string(),
        detail: e.to_string(),
    };
    let mut functions: u64 = 0;
    for payload in Parser::new(0).parse_all(bytes) {
        match payload.map_err(not_wasm)? {
            Payload::ImportSection(reader) => {
                for import in reader.into_imports() {
                    let import = import.map_err(not_wasm)?;
                    if matches!(
                        import.ty,
                        wasmparser::TypeRef::Func(_) | wasmparser::TypeRef::FuncExact(_)
                    ) {
                        functions += 1;
                    }
                }
            }
            Payload::FunctionSection(reader) => {
                functions += reader.count() as u64;
                if functions > limits.max_functions as u64 {
                    return Err(refuse("functions", functions, limits.max_functions as u64));
                }
            }
            Payload::CodeSectionEntry(body) => {
                let size = body.range().len();
                if size > limits.max_function_bytes {
                    return Err(refuse(
                        "size of one function body, bytes",
                        size as u64,
                        limits.max_function_bytes as u64,
                    ));
                }
                let mut locals: u64 = 0;
                let reader = body.get_locals_reader().map_err(not_wasm)?;
                for local in reader {
                    let (count, _) = local.map_err(not_wasm)?;
                    locals += count as u64;
                    if locals > limits.max_locals as u64 {
                        return Err(refuse(
                            "local variables of one function",
                            locals,
                            limits.max_locals as u64,
                        ));
                    }
                }
            }
            _ => {}
        }
    }
    if functions > limits.max_functions as u64 {
        return Err(refuse("functions", functions, limits.max_functions as u64));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn module_with(functions: usize, locals: usize) -> Vec<u8> {
        let mut text = String::from("(module");
        for _ in 0..functions {
            text.push_str(&format!(" (func (local {}))", "i32 ".repeat(locals)));
        }
        text.push(')');
        wat::parse_str(&text).expect("valid wat")
    }

    #[test]
    fn fuel_grows_with_the_batch() {
        let l = SandboxLimits::default();
        assert_eq!(l.fuel_for(0), l.fuel_per_call);
        assert_eq!(l.fuel_for(8192), l.fuel_per_call + 8192 * l.fuel_per_record);
        let huge = SandboxLimits { fuel_per_record: u64::MAX, ..l };
        assert_eq!(huge.fuel_for(2), u64::MAX);
    }

    #[test]
    fn too_many_functions_are_refused_before_compiling() {
        let limits = CompileLimits { max_functions: 100, ..CompileLimits::default() };
        assert!(check_shape("small", &module_with(100, 0), &limits).is_ok());
        let e = check_shape("many", &module_with(101, 0), &limits).unwrap_err();
        assert!(matches!(e, HostError::CompileLimit { found: 101, limit: 100, .. }), "{e}");
        assert!(e.to_string().contains("many") && e.to_string().contains("functions"), "{e}");
    }

    #[test]
    fn too_many_locals_are_refused() {
        let limits = CompileLimits { max_locals: 10, ..CompileLimits::default() };
        assert!(check_shape("m", &module_with(1, 10), &limits).is_ok());
        let e = check_shape("m", &module_with(1, 11), &limits).unwrap_err();
        assert!(matches!(e, HostError::CompileLimit { found: 11, .. }), "{e}");
    }

    #[test]
    fn oversized_files_are_refused() {
        let limits = CompileLimits { max_module_bytes: 16, ..CompileLimits::default() };
        let e = check_shape("big", &module_with(3, 0), &limits).unwrap_err();
        assert!(matches!(e, HostError::CompileLimit { what: "module size, bytes", .. }), "{e}");
    }
}

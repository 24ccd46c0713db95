//! One instance of a module in its own store: the batch calls of ABI v1.
//!
//! Why this exists: wasm instances are single-threaded, so each worker
//! thread owns one `ProcessInstance` per module. The instance owns two
//! buffers in the module's memory (inputs and outputs), allocated once and
//! grown only when a larger batch arrives, so the hot loop allocates
//! nothing and crosses the boundary once per batch. Every call is armed
//! with a fuel budget sized to its batch (and a wall-time backstop); every
//! failure becomes a typed error; after a host-side failure the instance
//! is rebuilt before the next call, so one bad batch never poisons the
//! rest of a run.

use std::sync::Arc;

use exobound_sdk::wire::{Record, as_bytes, as_bytes_mut};
use exobound_sdk::{
    CellState, ErrorCode, Impact, InFlight, LaunchRequest, Outcome, ProcessError, Role, Velocity,
};
use wasmtime::{Engine, Instance, Memory, ResourceLimiter, Store, Trap, TypedFunc};

use super::error::{CallSite, DomainError, HostError};
use super::limits::{KEY_FUEL_PER_CALL, KEY_FUEL_PER_RECORD, SandboxLimits};
use super::{LoadedModule, Runtime, validate};

/// Longest error message read back from a module, bytes.
const MAX_MESSAGE: u32 = 4096;
/// Fuel allowed to `exobound_last_error`, fuel units.
const MESSAGE_FUEL: u64 = 1_000_000;
/// Alignment of the host's batch buffers in guest memory, bytes.
const BUFFER_ALIGN: u32 = 8;

/// The store's resource limiter: caps linear memory and remembers a refusal.
struct MemoryGuard {
    limit: usize,
    refused: bool,
}

impl ResourceLimiter for MemoryGuard {
    fn memory_growing(
        &mut self,
        _current: usize,
        desired: usize,
        _maximum: Option<usize>,
    ) -> wasmtime::Result<bool> {
        if desired > self.limit {
            self.refused = true;
            return Ok(false);
        }
        Ok(true)
    }

    fn table_growing(
        &mut self,
        _current: usize,
        desired: usize,
        _maximum: Option<usize>,
    ) -> wasmtime::Result<bool> {
        Ok(desired <= 100_000)
    }
}

type Batch = TypedFunc<(u32, u32, u32), i32>;

/// The exports of one instance.
struct Exports {
    memory: Memory,
    alloc: TypedFunc<(u32, u32), u32>,
    free: TypedFunc<(u32, u32, u32), ()>,
    init: TypedFunc<(u32, u32), i32>,
    last_error: TypedFunc<(u32, u32), u32>,
    release_rate: Option<Batch>,
    launch: Option<Batch>,
    loss_rate: Option<Batch>,
    land: Option<Batch>,
    exchange: Option<Batch>,
}

/// A region of guest memory owned by the host.
#[derive(Clone, Copy, Default)]
struct Buffer {
    ptr: u32,
    cap: u32,
}

/// Which buffer.
#[derive(Clone, Copy)]
enum Which {
    Input,
    Output,
}

/// A live, initialised instance of a module, owned by one worker thread.
pub struct ProcessInstance {
    module: Arc<LoadedModule>,
    engine: Engine,
    store: Store<MemoryGuard>,
    exports: Exports,
    input: Buffer,
    output: Buffer,
    params: Vec<u8>,
    poisoned: bool,
    ticks: u64,
    limits: SandboxLimits,
    /// Fuel armed for the current call, units, and the key that sized it.
    armed: (u64, &'static str),
    max_speed: f64,
    max_batch: usize,
}

impl ProcessInstance {
    pub(crate) fn new(
        runtime: &Runtime,
        module: Arc<LoadedModule>,
        params: Vec<u8>,
        limits: &SandboxLimits,
    ) -> Result<Result<ProcessInstance, DomainError>, HostError> {
        let cfg = runtime.config();
        let engine = runtime.engine().clone();
        let ticks = runtime.ticks_for(limits.backstop);
        let (store, exports) = match instantiate(&engine, &module, limits, ticks)? {
            Ok(v) => v,
            Err(d) => return Ok(Err(d)),
        };
        let mut inst = ProcessInstance {
            module,
            engine,
            store,
            exports,
            input: Buffer::default(),
            output: Buffer::default(),
            params,
            poisoned: false,
            ticks,
            limits: *limits,
            armed: (limits.fuel_for(0), KEY_FUEL_PER_CALL),
            max_speed: cfg.max_speed,
            max_batch: cfg.max_batch.max(1),
        };
        match inst.init()? {
            Ok(()) => Ok(Ok(inst)),
            Err(d) => Ok(Err(d)),
        }
    }

    /// The module this instance runs.
    pub fn module(&self) -> &Arc<LoadedModule> {
        &self.module
    }

    /// Module name from the manifest.
    pub fn name(&self) -> &str {
        self.module.name()
    }

    /// `Source::release_rate`: atoms cm^-2 s^-1 per cell into `rates`.
    pub fn release_rate(
        &mut self,
        cells: &[CellState],
        rates: &mut [f64],
    ) -> Result<Result<(), DomainError>, HostError> {
        self.batch(Role::Source, "exobound_release_rate", cells, rates, validate::nonnegative_rate)
    }

    /// `Source::launch`: launch velocities, m s^-1, local east/north/up.
    pub fn launch(
        &mut self,
        requests: &[LaunchRequest],
        velocities: &mut [Velocity],
    ) -> Result<Result<(), DomainError>, HostError> {
        self.batch(Role::Source, "exobound_launch", requests, velocities, validate::upward_velocity)
    }

    /// `Loss::loss_rate`: s^-1 per particle into `rates`.
    pub fn loss_rate(
        &mut self,
        particles: &[InFlight],
        rates: &mut [f64],
    ) -> Result<Result<(), DomainError>, HostError> {
        self.batch(Role::Loss, "exobound_loss_rate", particles, rates, validate::nonnegative_rate)
    }

    /// `SurfaceInteraction::land`: one outcome per impact.
    pub fn land(
        &mut self,
        impacts: &[Impact],
        outcomes: &mut [Outcome],
    ) -> Result<Result<(), DomainError>, HostError> {
        self.batch(Role::SurfaceInteraction, "exobound_land", impacts, outcomes, validate::outcome)
    }

    /// `ReservoirProcess::exchange`: atoms cm^-2 s^-1 into (+) or out of (-) the pool.
    pub fn exchange(
        &mut self,
        cells: &[CellState],
        rates: &mut [f64],
    ) -> Result<Result<(), DomainError>, HostError> {
        self.batch(Role::ReservoirProcess, "exobound_exchange", cells, rates, validate::signed_rate)
    }

    /// Bytes of linear memory the module currently holds.
    pub fn memory_bytes(&self) -> usize {
        self.exports.memory.data_size(&self.store)
    }

    /// Fuel used by the last call (the budget is re-armed before every
    /// call), wasm fuel units; for a batch split into sub-batches, the last
    /// sub-batch's.
    pub fn fuel_used(&self) -> u64 {
        self.armed.0.saturating_sub(self.store.get_fuel().unwrap_or(0))
    }

    /// The limits this instance runs under.
    pub fn limits(&self) -> &SandboxLimits {
        &self.limits
    }

    fn site(&self, call: &'static str, batch: usize) -> CallSite {
        CallSite { module: self.module.name().to_string(), call, batch }
    }

    /// Arm the backstop and the fixed fuel budget for a call without records.
    fn arm(&mut self) {
        self.arm_for(0);
    }

    /// Arm the backstop and the fuel budget for a call over `records` records.
    fn arm_for(&mut self, records: usize) {
        let fuel = self.limits.fuel_for(records);
        let key = if records == 0 { KEY_FUEL_PER_CALL } else { KEY_FUEL_PER_RECORD };
        self.armed = (fuel, key);
        arm(&mut self.store, self.ticks, fuel);
    }

    /// Turn a failed call into the right host error, and mark the instance
    /// for rebuilding.
    fn classify(&mut self, e: wasmtime::Error, site: CallSite) -> HostError {
        self.poisoned = true;
        if self.store.data().refused {
            return HostError::MemoryLimit { site, limit: self.limits.memory_cap };
        }
        match e.downcast_ref::<Trap>() {
            Some(Trap::Interrupt) => HostError::Timeout { site, budget: self.limits.backstop },
            Some(Trap::OutOfFuel) => {
                HostError::OutOfFuel { site, fuel: self.armed.0, key: self.armed.1 }
            }
            Some(t) => {
                let trap = t.to_string();
                let message = self.read_message().filter(|m| !m.is_empty());
                HostError::Trap { site, trap, message }
            }
            None => HostError::Trap { site, trap: format!("{e:#}"), message: None },
        }
    }

    /// The module's last error message, if it can be read back safely.
    fn read_message(&mut self) -> Option<String> {
        let buf = self.ensure(Which::Output, MAX_MESSAGE as usize, "exobound_last_error").ok()?;
        // Copying a message of at most 4 KiB takes thousands of instructions;
        // a module whose message export loops is stopped after this much.
        let fuel = self.limits.fuel_per_call.min(MESSAGE_FUEL);
        self.armed = (fuel, KEY_FUEL_PER_CALL);
        arm(&mut self.store, self.ticks, fuel);
        let len = self.exports.last_error.call(&mut self.store, (buf, MAX_MESSAGE)).ok()?;
        let k = len.min(MAX_MESSAGE) as usize;
        let data = self.exports.memory.data(&self.store);
        let bytes = data.get(buf as usize..buf as usize + k)?;
        // Module text is untrusted: escape control characters before it can
        // reach a terminal or a text product.
        let mut s = crate::text::printable(&String::from_utf8_lossy(bytes)).into_owned();
        if len > MAX_MESSAGE {
            s.push_str(" [...]");
        }
        Some(s)
    }

    /// Make sure buffer `which` holds at least `bytes`; returns its address.
    fn ensure(&mut self, which: Which, bytes: usize, call: &'static str) -> Result<u32, HostError> {
        let buf = match which {
            Which::Input => self.input,
            Which::Output => self.output,
        };
        if (buf.cap as usize) >= bytes && buf.ptr != 0 {
            return Ok(buf.ptr);
        }
        let module = self.module.clone();
        let site = || CallSite { module: module.name().to_string(), call, batch: 0 };
        let want = u32::try_from(bytes.max(64)).map_err(|_| HostError::BadPointer {
            site: site(),
            detail: format!("a buffer of {bytes} bytes does not fit a 32-bit address space"),
        })?;
        if buf.ptr != 0 {
            let free = self.exports.free.clone();
            self.arm();
            if let Err(e) = free.call(&mut self.store, (buf.ptr, buf.cap, BUFFER_ALIGN)) {
                return Err(self.classify(e, site()));
            }
        }
        self.arm();
        let alloc = self.exports.alloc.clone();
        let ptr = match alloc.call(&mut self.store, (want, BUFFER_ALIGN)) {
            Ok(p) => p,
            Err(e) => return Err(self.classify(e, site())),
        };
        let size = self.exports.memory.data_size(&self.store);
        if ptr == 0 {
            self.poisoned = true;
            if self.store.data().refused {
                return Err(HostError::MemoryLimit { site: site(), limit: self.limits.memory_cap });
            }
            return Err(HostError::BadPointer {
                site: site(),
                detail: format!("exobound_alloc could not provide {want} bytes"),
            });
        }
        if ptr % BUFFER_ALIGN != 0 || (ptr as usize).saturating_add(want as usize) > size {
            self.poisoned = true;
            return Err(HostError::BadPointer {
                site: site(),
                detail: format!(
                    "exobound_alloc returned {ptr:#x} for {want} bytes, outside the module's \
                     {size} bytes of memory or not {BUFFER_ALIGN}-byte aligned"
                ),
            });
        }
        let new = Buffer { ptr, cap: want };
        match which {
            Which::Input => self.input = new,
            Which::Output => self.output = new,
        }
        Ok(ptr)
    }

    /// Call `exobound_init` with the stored parameters.
    fn init(&mut self) -> Result<Result<(), DomainError>, HostError> {
        let n = self.params.len();
        let site = self.site("exobound_init", n);
        let ptr = self.ensure(Which::Input, n, "exobound_init")?;
        let params = std::mem::take(&mut self.params);
        let written = self.write(ptr, &params);
        self.params = params;
        written.map_err(|detail| HostError::BadPointer { site: site.clone(), detail })?;
        self.arm();
        let init = self.exports.init.clone();
        let rc = match init.call(&mut self.store, (ptr, n as u32)) {
            Ok(rc) => rc,
            Err(e) => return Err(self.classify(e, site)),
        };
        self.domain_status(rc, 0, site)
    }

    /// Interpret a status: 0 or the expected count is success, a negative
    /// ABI code is a domain error, anything else a host error.
    fn domain_status(
        &mut self,
        rc: i32,
        expected: usize,
        site: CallSite,
    ) -> Result<Result<(), DomainError>, HostError> {
        if rc >= 0 {
            if rc as usize == expected {
                return Ok(Ok(()));
            }
            self.poisoned = true;
            return Err(HostError::LengthMismatch { site, reported: rc });
        }
        let Some(code) = ErrorCode::from_code(-(rc as i64) as i32) else {
            self.poisoned = true;
            return Err(HostError::UnknownErrorCode { site, code: rc });
        };
        let message = self.read_message().unwrap_or_default();
        Ok(Err(DomainError {
            module: site.module,
            call: site.call,
            error: ProcessError::new(code, message),
        }))
    }

    fn write(&mut self, ptr: u32, bytes: &[u8]) -> Result<(), String> {
        let data = self.exports.memory.data_mut(&mut self.store);
        let dst = data
            .get_mut(ptr as usize..ptr as usize + bytes.len())
            .ok_or_else(|| format!("buffer at {ptr:#x} lies outside the module's memory"))?;
        dst.copy_from_slice(bytes);
        Ok(())
    }

    /// Rebuild the instance after a host-side failure.
    fn rebuild(&mut self) -> Result<(), HostError> {
        let module = self.module.clone();
        let (store, exports) = match instantiate(&self.engine, &module, &self.limits, self.ticks)? {
            Ok(v) => v,
            Err(d) => {
                return Err(HostError::Compile {
                    module: module.name().to_string(),
                    detail: format!("re-initialisation after a failure was refused: {d}"),
                });
            }
        };
        self.store = store;
        self.exports = exports;
        self.input = Buffer::default();
        self.output = Buffer::default();
        self.poisoned = false;
        match self.init()? {
            Ok(()) => Ok(()),
            Err(d) => Err(HostError::Compile {
                module: module.name().to_string(),
                detail: format!("re-initialisation after a failure was refused: {d}"),
            }),
        }
    }

    /// One role call over `input`, in sub-batches of at most `max_batch`
    /// records, validating every output with `check`.
    fn batch<I: Record, O: Record>(
        &mut self,
        role: Role,
        call: &'static str,
        input: &[I],
        output: &mut [O],
        check: fn(&O, f64) -> Option<String>,
    ) -> Result<Result<(), DomainError>, HostError> {
        if !self.module.header.roles.contains(&role) {
            return Err(HostError::RoleNotDeclared {
                module: self.module.name().to_string(),
                role: role.as_str(),
            });
        }
        debug_assert_eq!(input.len(), output.len(), "one output slot per input record");
        let n = input.len().min(output.len());
        if self.poisoned {
            self.rebuild()?;
        }
        let mut start = 0;
        while start < n {
            let k = (n - start).min(self.max_batch);
            let site = self.site(call, k);
            let in_ptr = self.ensure(Which::Input, k * I::SIZE, call)?;
            let out_ptr = self.ensure(Which::Output, k * O::SIZE, call)?;
            self.write(in_ptr, as_bytes(&input[start..start + k]))
                .map_err(|detail| HostError::BadPointer { site: site.clone(), detail })?;
            let func = match call {
                "exobound_release_rate" => self.exports.release_rate.clone(),
                "exobound_launch" => self.exports.launch.clone(),
                "exobound_loss_rate" => self.exports.loss_rate.clone(),
                "exobound_land" => self.exports.land.clone(),
                _ => self.exports.exchange.clone(),
            };
            let Some(func) = func else {
                return Err(HostError::MissingExport {
                    module: self.module.name().to_string(),
                    export: call.to_string(),
                    needed_for: format!("the role `{}`", role.as_str()),
                });
            };
            self.arm_for(k);
            let rc = match func.call(&mut self.store, (in_ptr, k as u32, out_ptr)) {
                Ok(rc) => rc,
                Err(e) => return Err(self.classify(e, site)),
            };
            if let Err(d) = self.domain_status(rc, k, site.clone())? {
                return Ok(Err(d));
            }
            let out = &mut output[start..start + k];
            let data = self.exports.memory.data(&self.store);
            let src =
                data.get(out_ptr as usize..out_ptr as usize + k * O::SIZE).ok_or_else(|| {
                    HostError::BadPointer {
                        site: site.clone(),
                        detail: "the output buffer no longer lies inside the module's memory"
                            .into(),
                    }
                })?;
            as_bytes_mut(out).copy_from_slice(src);
            for (i, o) in out.iter().enumerate() {
                if let Some(detail) = check(o, self.max_speed) {
                    return Err(HostError::InvalidOutput { site, index: start + i, detail });
                }
            }
            start += k;
        }
        Ok(Ok(()))
    }
}

fn arm(store: &mut Store<MemoryGuard>, ticks: u64, fuel: u64) {
    store.set_epoch_deadline(ticks);
    // This fails only when fuel metering is off (benches), and then no
    // budget applies.
    let _ = store.set_fuel(fuel);
}

/// A new store and instance of `module`, with its exports resolved.
#[allow(clippy::type_complexity)]
fn instantiate(
    engine: &Engine,
    module: &LoadedModule,
    limits: &SandboxLimits,
    ticks: u64,
) -> Result<Result<(Store<MemoryGuard>, Exports), DomainError>, HostError> {
    let name = module.name().to_string();
    let memory_limit = limits.memory_cap;
    let fuel = limits.fuel_for(0);
    let budget = limits.backstop;
    let mut store = Store::new(engine, MemoryGuard { limit: memory_limit, refused: false });
    store.limiter(|g| g as &mut dyn ResourceLimiter);
    arm(&mut store, ticks, fuel);
    let instance = match Instance::new(&mut store, &module.compiled, &[]) {
        Ok(i) => i,
        Err(e) => {
            let site = CallSite { module: name.clone(), call: "instantiation", batch: 0 };
            if store.data().refused {
                return Err(HostError::MemoryLimit { site, limit: memory_limit });
            }
            return Err(match e.downcast_ref::<Trap>() {
                Some(Trap::Interrupt) => HostError::Timeout { site, budget },
                Some(Trap::OutOfFuel) => {
                    HostError::OutOfFuel { site, fuel, key: KEY_FUEL_PER_CALL }
                }
                _ => HostError::Compile { module: name, detail: format!("{e:#}") },
            });
        }
    };
    let missing = |export: &str, why: &str| HostError::MissingExport {
        module: name.clone(),
        export: export.to_string(),
        needed_for: why.to_string(),
    };
    let core = "every module (ABI v1 core exports)";
    let memory =
        instance.get_memory(&mut store, "memory").ok_or_else(|| missing("memory", core))?;
    let alloc = instance
        .get_typed_func::<(u32, u32), u32>(&mut store, "exobound_alloc")
        .map_err(|_| missing("exobound_alloc", core))?;
    let free = instance
        .get_typed_func::<(u32, u32, u32), ()>(&mut store, "exobound_free")
        .map_err(|_| missing("exobound_free", core))?;
    let init = instance
        .get_typed_func::<(u32, u32), i32>(&mut store, "exobound_init")
        .map_err(|_| missing("exobound_init", core))?;
    let last_error = instance
        .get_typed_func::<(u32, u32), u32>(&mut store, "exobound_last_error")
        .map_err(|_| missing("exobound_last_error", core))?;
    let mut role_func = |role: Role, export: &str| -> Result<Option<Batch>, HostError> {
        if !module.header.roles.contains(&role) {
            return Ok(None);
        }
        instance
            .get_typed_func::<(u32, u32, u32), i32>(&mut store, export)
            .map(Some)
            .map_err(|_| missing(export, &format!("the role `{}`", role.as_str())))
    };
    let release_rate = role_func(Role::Source, "exobound_release_rate")?;
    let launch = role_func(Role::Source, "exobound_launch")?;
    let loss_rate = role_func(Role::Loss, "exobound_loss_rate")?;
    let land = role_func(Role::SurfaceInteraction, "exobound_land")?;
    let exchange = role_func(Role::ReservoirProcess, "exobound_exchange")?;
    Ok(Ok((
        store,
        Exports {
            memory,
            alloc,
            free,
            init,
            last_error,
            release_rate,
            launch,
            loss_rate,
            land,
            exchange,
        },
    )))
}

//! One calling convention for process modules, whether they run in the
//! wasm sandbox or are linked natively.
//!
//! Why this exists: runs always use wasm modules, but the cost of the
//! sandbox can only be measured against the same laws called natively, and
//! unit tests want the engine without compiling modules. The engine calls
//! every process through [`ProcessCalls`]; [`ProcessInstance`] implements it
//! over the wasm ABI, and [`NativeProcess`] over a Rust type directly.
//! [`ModuleHandle`] makes fresh instances, one per worker thread.

use std::collections::BTreeMap;
use std::sync::Arc;

use exobound_sdk::wire::ManifestInfo;
use exobound_sdk::{
    CellState, Impact, InFlight, LaunchRequest, Loss, Outcome, ParamValue, Params, Process,
    ProcessError, ReservoirProcess, Role, Source, SurfaceInteraction, Velocity,
};

use super::error::{DomainError, HostError, ModuleError};
use super::{LoadedModule, ProcessInstance, Runtime, SandboxLimits, validate};

/// The outcome of one batch call: a host failure, a domain refusal, or success.
pub type CallResult = Result<Result<(), DomainError>, HostError>;

/// The batch calls of the four roles.
pub trait ProcessCalls: Send {
    /// Module name.
    fn name(&self) -> &str;
    /// `Source::release_rate`, atoms cm^-2 s^-1.
    fn release_rate(&mut self, cells: &[CellState], rates: &mut [f64]) -> CallResult;
    /// `Source::launch`, m s^-1 local east/north/up.
    fn launch(&mut self, requests: &[LaunchRequest], velocities: &mut [Velocity]) -> CallResult;
    /// `Loss::loss_rate`, s^-1.
    fn loss_rate(&mut self, particles: &[InFlight], rates: &mut [f64]) -> CallResult;
    /// `SurfaceInteraction::land`.
    fn land(&mut self, impacts: &[Impact], outcomes: &mut [Outcome]) -> CallResult;
    /// `ReservoirProcess::exchange`, atoms cm^-2 s^-1.
    fn exchange(&mut self, cells: &[CellState], rates: &mut [f64]) -> CallResult;
}

impl ProcessCalls for ProcessInstance {
    fn name(&self) -> &str {
        ProcessInstance::name(self)
    }
    fn release_rate(&mut self, cells: &[CellState], rates: &mut [f64]) -> CallResult {
        ProcessInstance::release_rate(self, cells, rates)
    }
    fn launch(&mut self, requests: &[LaunchRequest], velocities: &mut [Velocity]) -> CallResult {
        ProcessInstance::launch(self, requests, velocities)
    }
    fn loss_rate(&mut self, particles: &[InFlight], rates: &mut [f64]) -> CallResult {
        ProcessInstance::loss_rate(self, particles, rates)
    }
    fn land(&mut self, impacts: &[Impact], outcomes: &mut [Outcome]) -> CallResult {
        ProcessInstance::land(self, impacts, outcomes)
    }
    fn exchange(&mut self, cells: &[CellState], rates: &mut [f64]) -> CallResult {
        ProcessInstance::exchange(self, cells, rates)
    }
}

type Method<T, I, O> = fn(&mut T, &[I], &mut [O]) -> Result<(), ProcessError>;

/// A law linked natively, behind the same calls and output checks as wasm.
pub struct NativeProcess<T: Process> {
    law: T,
    name: String,
    max_speed: f64,
    release_rate: Option<Method<T, CellState, f64>>,
    launch: Option<Method<T, LaunchRequest, Velocity>>,
    loss_rate: Option<Method<T, InFlight, f64>>,
    land: Option<Method<T, Impact, Outcome>>,
    exchange: Option<Method<T, CellState, f64>>,
}

impl<T: Process> NativeProcess<T> {
    /// Build the law from `params` (validated against its manifest); add
    /// its roles with [`NativeProcess::source`] and friends.
    pub fn new(params: &BTreeMap<String, ParamValue>) -> Result<NativeProcess<T>, DomainError> {
        let info = T::MANIFEST.to_info();
        let refuse = |error| DomainError { module: info.name.clone(), call: "parameters", error };
        let p = Params::validate(params, &info.parameters).map_err(refuse)?;
        let law = T::new(&p).map_err(|error| DomainError {
            module: info.name.clone(),
            call: "exobound_init",
            error,
        })?;
        Ok(NativeProcess {
            law,
            name: info.name,
            max_speed: super::RuntimeConfig::default().max_speed,
            release_rate: None,
            launch: None,
            loss_rate: None,
            land: None,
            exchange: None,
        })
    }

    fn run<I, O>(
        &mut self,
        call: &'static str,
        method: Option<Method<T, I, O>>,
        input: &[I],
        output: &mut [O],
        check: fn(&O, f64) -> Option<String>,
    ) -> CallResult {
        let Some(m) = method else {
            return Err(HostError::RoleNotDeclared { module: self.name.clone(), role: call });
        };
        if let Err(error) = m(&mut self.law, input, output) {
            return Ok(Err(DomainError { module: self.name.clone(), call, error }));
        }
        for (index, o) in output.iter().enumerate() {
            if let Some(detail) = check(o, self.max_speed) {
                let site = super::CallSite { module: self.name.clone(), call, batch: input.len() };
                return Err(HostError::InvalidOutput { site, index, detail });
            }
        }
        Ok(Ok(()))
    }
}

impl<T: Source> NativeProcess<T> {
    /// Enable the Source role.
    pub fn source(mut self) -> Self {
        self.release_rate = Some(T::release_rate);
        self.launch = Some(T::launch);
        self
    }
}

impl<T: Loss> NativeProcess<T> {
    /// Enable the Loss role.
    pub fn loss(mut self) -> Self {
        self.loss_rate = Some(T::loss_rate);
        self
    }
}

impl<T: SurfaceInteraction> NativeProcess<T> {
    /// Enable the SurfaceInteraction role.
    pub fn surface_interaction(mut self) -> Self {
        self.land = Some(T::land);
        self
    }
}

impl<T: ReservoirProcess> NativeProcess<T> {
    /// Enable the ReservoirProcess role.
    pub fn reservoir_process(mut self) -> Self {
        self.exchange = Some(T::exchange);
        self
    }
}

impl<T: Process + Send> ProcessCalls for NativeProcess<T> {
    fn name(&self) -> &str {
        &self.name
    }
    fn release_rate(&mut self, cells: &[CellState], rates: &mut [f64]) -> CallResult {
        let m = self.release_rate;
        self.run("exobound_release_rate", m, cells, rates, validate::nonnegative_rate)
    }
    fn launch(&mut self, requests: &[LaunchRequest], velocities: &mut [Velocity]) -> CallResult {
        let m = self.launch;
        self.run("exobound_launch", m, requests, velocities, validate::upward_velocity)
    }
    fn loss_rate(&mut self, particles: &[InFlight], rates: &mut [f64]) -> CallResult {
        let m = self.loss_rate;
        self.run("exobound_loss_rate", m, particles, rates, validate::nonnegative_rate)
    }
    fn land(&mut self, impacts: &[Impact], outcomes: &mut [Outcome]) -> CallResult {
        let m = self.land;
        self.run("exobound_land", m, impacts, outcomes, validate::outcome)
    }
    fn exchange(&mut self, cells: &[CellState], rates: &mut [f64]) -> CallResult {
        let m = self.exchange;
        self.run("exobound_exchange", m, cells, rates, validate::signed_rate)
    }
}

/// Makes instances of one configured module (one per worker thread).
type Factory = dyn Fn() -> Result<Box<dyn ProcessCalls>, ModuleError> + Send + Sync;

/// A configured module: its manifest, its parameters, and a way to make
/// fresh instances of it.
#[derive(Clone)]
pub struct ModuleHandle {
    /// The module's manifest.
    pub manifest: Arc<ManifestInfo>,
    /// SHA-256 of the `.wasm` file, or `native` for a linked law.
    pub digest: String,
    factory: Arc<Factory>,
}

impl ModuleHandle {
    /// A handle on a wasm module with `params`, run under `limits` (the
    /// scenario's `[sandbox]`); checks the parameters now.
    pub fn wasm(
        runtime: Arc<Runtime>,
        module: Arc<LoadedModule>,
        params: BTreeMap<String, ParamValue>,
        limits: SandboxLimits,
    ) -> Result<ModuleHandle, ModuleError> {
        // Instantiate once now, so a bad parameter is reported before the run.
        runtime.instantiate_with(&module, &params, &limits)??;
        let manifest = Arc::new(module.manifest().clone());
        let digest = module.sha256().to_string();
        let factory = move || -> Result<Box<dyn ProcessCalls>, ModuleError> {
            Ok(Box::new(runtime.instantiate_with(&module, &params, &limits)??))
        };
        Ok(ModuleHandle { manifest, digest, factory: Arc::new(factory) })
    }

    /// A handle on a natively linked law `T` with `params`, for benches and
    /// unit tests; `enable` adds its roles (e.g. `NativeProcess::source`).
    pub fn native<T: Process + Send>(
        params: BTreeMap<String, ParamValue>,
        enable: fn(NativeProcess<T>) -> NativeProcess<T>,
    ) -> Result<ModuleHandle, ModuleError> {
        NativeProcess::<T>::new(&params)?;
        let manifest = Arc::new(T::MANIFEST.to_info());
        let factory = move || -> Result<Box<dyn ProcessCalls>, ModuleError> {
            Ok(Box::new(enable(NativeProcess::<T>::new(&params)?)))
        };
        Ok(ModuleHandle { manifest, digest: "native".to_string(), factory: Arc::new(factory) })
    }

    /// A fresh instance.
    pub fn instantiate(&self) -> Result<Box<dyn ProcessCalls>, ModuleError> {
        (self.factory)()
    }

    /// Module name.
    pub fn name(&self) -> &str {
        &self.manifest.name
    }

    /// Whether the module declares `role`.
    pub fn has_role(&self, role: Role) -> bool {
        self.manifest.has_role(role)
    }

    /// The ledger column for atoms this module removes.
    pub fn ledger_label(&self) -> &str {
        if self.manifest.ledger_label.is_empty() {
            &self.manifest.name
        } else {
            &self.manifest.ledger_label
        }
    }

    /// For sources: whether releases come out of the adsorbed pool.
    pub fn draws_on_adsorbed(&self) -> bool {
        self.manifest.draws_on.as_deref() == Some("adsorbed")
    }
}

impl std::fmt::Debug for ModuleHandle {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "ModuleHandle({} {}, {})", self.manifest.name, self.manifest.version, self.digest)
    }
}

//! The four roles a process module can play, as traits, and the domain
//! error a law returns when it cannot do what is asked.
//!
//! Why this exists: a module author implements a law by writing plain Rust
//! against these traits; [`crate::export_process!`] turns the type into a
//! wasm module, and the host or a unit test can call the same type
//! natively. The host never calls a law once per particle: the batch
//! methods (`release_rate`, `launch`, `loss_rate`, `land`, `exchange`) are
//! the ABI's entry points, and each batch crosses the boundary once.
//!
//! A law whose records are independent (almost all of them) implements the
//! one-record methods instead (`release_rate_one`, `launch_one`,
//! `loss_rate_one`, `land_one`, `exchange_one`): the batch methods' default
//! bodies loop over the records, check that the input and output slices
//! have the same length, and stop at the first refusal. A law that needs
//! the whole batch at once (a shared table lookup, a vectorised kernel)
//! overrides the batch method and leaves the one-record method alone. A
//! law that implements neither gets an `Unsupported` error naming both at
//! its first call, never a silent result.
//!
//! Errors come in two levels. A [`ProcessError`] is the law's own "I can't
//! do that": a parameter out of range, an input outside the law's validity.
//! Traps, exhausted budgets and broken pointers are the host's business and
//! never appear here.

use crate::launch_law::LaunchLaw;
use crate::manifest::Manifest;
use crate::params::Params;
use crate::records::{CellState, Impact, InFlight, LaunchRequest, Outcome, Velocity};

/// Domain error codes of ABI v1; a batch export returns `-(code as i32)`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[repr(i32)]
pub enum ErrorCode {
    /// A parameter is unknown, missing, of the wrong type or out of range.
    InvalidParameter = 1,
    /// An input lies outside the range where the law is valid.
    OutsideValidity = 2,
    /// An input record is malformed (misaligned batch, NaN input, ...).
    InvalidInput = 3,
    /// A batch call arrived before a successful `init`.
    NotInitialised = 4,
    /// The module was asked for a role it does not implement.
    Unsupported = 5,
    /// Any other failure the law itself detects.
    Law = 6,
}

impl ErrorCode {
    /// The code for an ABI integer, if it is one of ABI v1's codes.
    pub fn from_code(code: i32) -> Option<ErrorCode> {
        Some(match code {
            1 => ErrorCode::InvalidParameter,
            2 => ErrorCode::OutsideValidity,
            3 => ErrorCode::InvalidInput,
            4 => ErrorCode::NotInitialised,
            5 => ErrorCode::Unsupported,
            6 => ErrorCode::Law,
            _ => return None,
        })
    }

    /// A short lowercase name for messages.
    pub fn name(self) -> &'static str {
        match self {
            ErrorCode::InvalidParameter => "invalid parameter",
            ErrorCode::OutsideValidity => "input outside the law's validity",
            ErrorCode::InvalidInput => "invalid input",
            ErrorCode::NotInitialised => "not initialised",
            ErrorCode::Unsupported => "unsupported role",
            ErrorCode::Law => "law error",
        }
    }
}

/// The default batch loop: `f` on each input record, its result into the
/// output record at the same index. Refuses slices of different lengths
/// (the ABI never passes them; a native caller might), and stops at the
/// first refusal, leaving later outputs untouched (the host reads no
/// output of a refused batch).
#[inline]
pub fn each_record<I, O>(
    inputs: &[I],
    outputs: &mut [O],
    mut f: impl FnMut(&I) -> Result<O, ProcessError>,
) -> Result<(), ProcessError> {
    if inputs.len() != outputs.len() {
        return Err(ProcessError::new(
            ErrorCode::InvalidInput,
            format!("{} input records but {} output slots", inputs.len(), outputs.len()),
        ));
    }
    for (input, output) in inputs.iter().zip(outputs.iter_mut()) {
        *output = f(input)?;
    }
    Ok(())
}

/// The refusal of a role method that the law implements in neither form.
fn neither(role: &str, batch: &str, one: &str) -> ProcessError {
    ProcessError::new(
        ErrorCode::Unsupported,
        format!(
            "the law implements neither `{role}::{one}` (one record) nor `{role}::{batch}` \
             (a batch); implement one of them"
        ),
    )
}

/// A law's own refusal, with a message meant for the scientist running it.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ProcessError {
    /// Which kind of refusal.
    pub code: ErrorCode,
    /// What went wrong and what to change.
    pub message: String,
}

impl ProcessError {
    /// A new error of kind `code`.
    pub fn new(code: ErrorCode, message: impl Into<String>) -> ProcessError {
        ProcessError { code, message: message.into() }
    }

    /// An input outside the law's validity.
    pub fn outside_validity(message: impl Into<String>) -> ProcessError {
        ProcessError::new(ErrorCode::OutsideValidity, message)
    }

    /// A parameter problem.
    pub fn parameter(message: impl Into<String>) -> ProcessError {
        ProcessError::new(ErrorCode::InvalidParameter, message)
    }
}

impl core::fmt::Display for ProcessError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        write!(f, "{}: {}", self.code.name(), self.message)
    }
}

impl std::error::Error for ProcessError {}

/// What every module is: its manifest, and how to build it from parameters.
pub trait Process: Sized + 'static {
    /// The module's self-description, embedded in the `.wasm` file.
    const MANIFEST: Manifest;

    /// Build the law from parameters already validated against
    /// `MANIFEST.parameters` (unknown, missing and out-of-range values never
    /// reach this function).
    fn new(params: &Params) -> Result<Self, ProcessError>;
}

/// A source of atoms from the surface.
///
/// The manifest's `draws_on` says whether released atoms come out of the
/// adsorbed pool (the host caps the release by the pool and subtracts it)
/// or out of the bulk regolith (the host does not deplete anything).
pub trait Source: Process {
    /// The laws the launches follow, declared for `exobound module vet` to
    /// test with a Kolmogorov-Smirnov test (see [`crate::launch_law`]); one
    /// per option of a choice parameter that selects the law. Empty (the
    /// default): nothing declared, and vet says so.
    const LAUNCH_LAWS: &'static [LaunchLaw] = &[];

    /// Release rate of one cell, atoms cm^-2 s^-1.
    fn release_rate_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        let _ = cell;
        Err(neither("Source", "release_rate", "release_rate_one"))
    }

    /// Launch velocity of one request, m s^-1 in the local horizontal frame
    /// (up > 0). Draw random numbers only from `Rng::new(request.key)`.
    fn launch_one(&self, request: &LaunchRequest) -> Result<Velocity, ProcessError> {
        let _ = request;
        Err(neither("Source", "launch", "launch_one"))
    }

    /// Release rate per cell, atoms cm^-2 s^-1, into `rates[i]` for
    /// `cells[i]`. The ABI entry point; by default [`Source::release_rate_one`]
    /// on each cell.
    fn release_rate(&mut self, cells: &[CellState], rates: &mut [f64]) -> Result<(), ProcessError> {
        each_record(cells, rates, |cell| self.release_rate_one(cell))
    }

    /// Launch velocity per request, m s^-1 in the local horizontal frame
    /// (up > 0), into `velocities[i]` for `requests[i]`. Draw random numbers
    /// only from `Rng::new(requests[i].key)`. The ABI entry point; by
    /// default [`Source::launch_one`] on each request.
    fn launch(
        &mut self,
        requests: &[LaunchRequest],
        velocities: &mut [Velocity],
    ) -> Result<(), ProcessError> {
        each_record(requests, velocities, |request| self.launch_one(request))
    }
}

/// A loss of atoms in flight (photoionization, electron impact, ...).
pub trait Loss: Process {
    /// Loss rate of one particle, s^-1, averaged over the interval (so a
    /// loss that acts only in sunlight multiplies by `sunlit_fraction`).
    fn loss_rate_one(&self, particle: &InFlight) -> Result<f64, ProcessError> {
        let _ = particle;
        Err(neither("Loss", "loss_rate", "loss_rate_one"))
    }

    /// Loss rate per particle, s^-1, into `rates[i]` for `particles[i]`. The
    /// ABI entry point; by default [`Loss::loss_rate_one`] on each particle.
    fn loss_rate(&mut self, particles: &[InFlight], rates: &mut [f64]) -> Result<(), ProcessError> {
        each_record(particles, rates, |particle| self.loss_rate_one(particle))
    }
}

/// What happens when an atom reaches the surface.
pub trait SurfaceInteraction: Process {
    /// The outcome of one impact: stick, bounce with a new velocity (m s^-1),
    /// or lost. Draw random numbers only from `Rng::new(impact.key)`.
    fn land_one(&self, impact: &Impact) -> Result<Outcome, ProcessError> {
        let _ = impact;
        Err(neither("SurfaceInteraction", "land", "land_one"))
    }

    /// One outcome per impact into `outcomes[i]` for `impacts[i]`. The ABI
    /// entry point; by default [`SurfaceInteraction::land_one`] on each impact.
    fn land(&mut self, impacts: &[Impact], outcomes: &mut [Outcome]) -> Result<(), ProcessError> {
        each_record(impacts, outcomes, |impact| self.land_one(impact))
    }
}

/// Exchange between the adsorbed pool and the rest of the surface (diffusion
/// from the bulk, burial, sputtering of adsorbates).
pub trait ReservoirProcess: Process {
    /// Rate of one cell into (> 0) or out of (< 0) the adsorbed pool, atoms
    /// cm^-2 s^-1.
    fn exchange_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        let _ = cell;
        Err(neither("ReservoirProcess", "exchange", "exchange_one"))
    }

    /// Rate per cell into (> 0) or out of (< 0) the adsorbed pool, atoms
    /// cm^-2 s^-1, into `rates[i]` for `cells[i]`. The ABI entry point; by
    /// default [`ReservoirProcess::exchange_one`] on each cell.
    fn exchange(&mut self, cells: &[CellState], rates: &mut [f64]) -> Result<(), ProcessError> {
        each_record(cells, rates, |cell| self.exchange_one(cell))
    }
}

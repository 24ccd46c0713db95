//! The four roles a process module can play, as traits, and the domain
//! error a law returns when it cannot do what is asked.
//!
//! Why this exists: a module author implements a law by writing plain Rust
//! against these traits; [`crate::export_process!`] turns the type into a
//! wasm module, and the host or a unit test can call the same type
//! natively. Every method takes a whole batch: the host never calls a law
//! once per particle.
//!
//! Errors come in two levels. A [`ProcessError`] is the law's own "I can't
//! do that": a parameter out of range, an input outside the law's validity.
//! Traps, exhausted budgets and broken pointers are the host's business and
//! never appear here.

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
    /// Release rate per cell, atoms cm^-2 s^-1, into `rates[i]` for `cells[i]`.
    fn release_rate(&mut self, cells: &[CellState], rates: &mut [f64]) -> Result<(), ProcessError>;

    /// Launch velocity per request, m s^-1 in the local horizontal frame
    /// (up > 0), into `velocities[i]` for `requests[i]`. Draw random numbers
    /// only from `Rng::new(requests[i].key)`.
    fn launch(
        &mut self,
        requests: &[LaunchRequest],
        velocities: &mut [Velocity],
    ) -> Result<(), ProcessError>;
}

/// A loss of atoms in flight (photoionization, electron impact, ...).
pub trait Loss: Process {
    /// Loss rate per particle, s^-1, averaged over the interval (so a loss
    /// that acts only in sunlight multiplies by `sunlit_fraction`).
    fn loss_rate(&mut self, particles: &[InFlight], rates: &mut [f64]) -> Result<(), ProcessError>;
}

/// What happens when an atom reaches the surface.
pub trait SurfaceInteraction: Process {
    /// One outcome per impact: stick, bounce with a new velocity, or lost.
    fn land(&mut self, impacts: &[Impact], outcomes: &mut [Outcome]) -> Result<(), ProcessError>;
}

/// Exchange between the adsorbed pool and the rest of the surface (diffusion
/// from the bulk, burial, sputtering of adsorbates).
pub trait ReservoirProcess: Process {
    /// Rate per cell into (> 0) or out of (< 0) the adsorbed pool, atoms cm^-2 s^-1.
    fn exchange(&mut self, cells: &[CellState], rates: &mut [f64]) -> Result<(), ProcessError>;
}

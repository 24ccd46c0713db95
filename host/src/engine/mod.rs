//! The step loop: environment, surface state, reservoir processes,
//! release, flight, landing, tallies.
//!
//! Why this exists: this is the engine every process module plugs into.
//! It owns particles, the surface, time, transport and tallies, and it
//! hard-codes no process physics: every release rate, launch velocity,
//! loss rate, landing outcome and reservoir exchange comes from a module
//! through [`ProcessCalls`]. Particles fly in fixed-size chunks handed to
//! threads by rayon; every chunk's results are reduced in chunk order, and
//! every random number is keyed by (run seed, particle id, event, stream),
//! so a run is bit-identical at any thread count.

mod budget;
mod flight;
mod release;

pub use budget::{OVERFLOW, WEIGHT_RATIO, weight_window};
pub use flight::SHADOW_HORIZON;

use std::sync::Mutex;

use exobound_sdk::{CellState, Role, flags};
use serde::{Deserialize, Serialize};

use crate::body::Body;
use crate::environment::{SolarWind, SunGeometry};
use crate::particles::ParticleBank;
use crate::runtime::backend::{ModuleHandle, ProcessCalls};
use crate::runtime::{DomainError, HostError, ModuleError};
use crate::species::Species;
use crate::surface::{Grid, Reservoir, TemperatureLaw};
use crate::tally::{DensityTally, Ledger, LedgerRow};

/// Most steps of one run: the step number has 24 bits of the random-number
/// key (see `exobound_sdk::RngKey`), dimensionless.
pub const MAX_STEPS: u64 = 1 << 24;

/// Why a run could not go on.
#[derive(Debug)]
pub enum EngineError {
    /// A module failed or refused.
    Module(ModuleError),
    /// The configuration is unusable; the message names the setting.
    Config(String),
    /// A quantity became infinite or NaN: the run stops rather than write
    /// products that hold it.
    Numeric {
        /// The step in which it happened, from 0.
        step: u64,
        /// What overflowed, with the numbers that led to it and their units.
        quantity: String,
        /// The module or modules whose output led to it.
        modules: String,
    },
}

impl std::fmt::Display for EngineError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            EngineError::Module(e) => write!(f, "{e}"),
            EngineError::Config(m) => write!(f, "invalid run configuration: {m}"),
            EngineError::Numeric { step, quantity, modules } => write!(
                f,
                "step {step}: {quantity} is not a finite number; it follows from the output of \
                 {modules}. The run was stopped and no products were written; check that \
                 module's rates and the scenario's fluxes and reservoir for values far outside \
                 the physical range"
            ),
        }
    }
}

impl std::error::Error for EngineError {}

impl From<ModuleError> for EngineError {
    fn from(e: ModuleError) -> Self {
        EngineError::Module(e)
    }
}

impl From<HostError> for EngineError {
    fn from(e: HostError) -> Self {
        EngineError::Module(ModuleError::Host(e))
    }
}

impl From<DomainError> for EngineError {
    fn from(e: DomainError) -> Self {
        EngineError::Module(ModuleError::Domain(e))
    }
}

/// Unwrap a batch call's two levels into an engine error.
pub(crate) fn call(r: Result<Result<(), DomainError>, HostError>) -> Result<(), EngineError> {
    Ok(r??)
}

/// The process modules of a run, by role.
#[derive(Clone, Debug)]
pub struct Processes {
    /// Sources, in the order their particles are released.
    pub sources: Vec<ModuleHandle>,
    /// Losses in flight; each gets its own ledger column.
    pub losses: Vec<ModuleHandle>,
    /// The surface interaction deciding every landing.
    pub surface: ModuleHandle,
    /// Reservoir processes, applied before the sources each step.
    pub reservoir: Vec<ModuleHandle>,
}

/// The physical setting of a run.
#[derive(Clone, Debug)]
pub struct Model {
    /// The airless body.
    pub body: Body,
    /// The species.
    pub species: Species,
    /// Surface grid.
    pub grid: Grid,
    /// Surface temperature law.
    pub temperature: TemperatureLaw,
    /// Where the Sun is.
    pub sun: SunGeometry,
    /// Adsorbed pool and bulk abundance per cell.
    pub reservoir: Reservoir,
    /// Solar-wind ion flux reaching the surface over time (unshielded flux
    /// and shielding schedule), ions cm^-2 s^-1.
    pub solar_wind: SolarWind,
    /// Meteoroid flux relative to nominal, dimensionless.
    pub meteoroid_factor: f64,
}

/// Numerical settings of a run.
#[derive(Clone, Debug)]
pub struct RunConfig {
    /// Time step, s.
    pub dt: f64,
    /// Run seed.
    pub seed: u64,
    /// Particles in flight the weights adapt towards, dimensionless.
    pub target_in_flight: usize,
    /// Particles per chunk handed to one thread (fixed, so results do not
    /// depend on the thread count).
    pub chunk_size: usize,
    /// Worker threads.
    pub threads: usize,
    /// Outer boundary: a particle reaching this radius leaves the model,
    /// booked as escaped if its path is unbound there and as left bound
    /// otherwise, m.
    pub boundary_radius: f64,
    /// The remove-at-launch shortcut: book a particle as escaped as soon as
    /// its path is unbound and misses the surface, so escaping atoms never
    /// fly. It is cheaper, but it drops the escaping component from every
    /// density, column and line of sight, and it books atoms that would
    /// have been photoionized on the way out as escaped. Off by default:
    /// unbound atoms fly, losses acting, until they reach `boundary_radius`.
    pub escape_when_unbound: bool,
    /// Integrate with radiation pressure (else closed-form Kepler hops).
    pub radiation_pressure: bool,
    /// Relative tolerance of the radiation-pressure integrator.
    pub integrator_tolerance: f64,
    /// Altitude bin edges of the density tally, m.
    pub alt_edges: Vec<f64>,
    /// Local-time bins of the tallies over 24 h.
    pub n_local_time: usize,
    /// Latitude bins of the tallies.
    pub n_latitude: usize,
}

impl RunConfig {
    /// Settings for `body`: 20 radii boundary, escaping atoms flying,
    /// 4096-particle chunks, 100 km altitude bins to 2000 km, 24 x 18
    /// local-time x latitude bins.
    pub fn for_body(body: &Body) -> RunConfig {
        RunConfig {
            dt: 300.0,
            seed: 1,
            target_in_flight: 100_000,
            chunk_size: 4096,
            threads: 1,
            boundary_radius: 20.0 * body.radius,
            escape_when_unbound: false,
            radiation_pressure: false,
            integrator_tolerance: 1e-9,
            alt_edges: (0..=20).map(|k| k as f64 * 1.0e5).collect(),
            n_local_time: 24,
            n_latitude: 18,
        }
    }
}

/// Per-cell maps accumulated over the current averaging window, atoms.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SurfaceMaps {
    /// Atoms released from each cell.
    pub released: Vec<f64>,
    /// Atoms that stuck in each cell.
    pub stuck: Vec<f64>,
    /// Atoms lost in flight above each cell.
    pub lost_above: Vec<f64>,
}

/// Everything that evolves during a run, as a value: what a checkpoint
/// saves. The model's fixed parts, the modules and the configuration are
/// rebuilt from the scenario; modules keep no state between batch calls
/// (ABI v1), so this is the whole state.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct EngineState {
    /// Simulated time, s.
    pub time: f64,
    /// Steps done.
    pub step: u64,
    /// Next particle id.
    pub next_id: u64,
    /// Particles in flight.
    pub bank: ParticleBank,
    /// The ledger so far.
    pub ledger: Ledger,
    /// The density tally of the current averaging window.
    pub tally: DensityTally,
    /// Per-cell maps of the current averaging window.
    pub maps: SurfaceMaps,
    /// Sunlit content per step, atoms.
    pub sunlit_content: Vec<f64>,
    /// Super-particles the sources together aim to launch per step.
    pub launch_goal: f64,
    /// Smoothed fraction of particles leaving flight per step.
    pub removal_fraction: f64,
    /// Adsorbed atoms per cell, atoms.
    pub adsorbed: Vec<f64>,
    /// Bulk abundance per cell, dimensionless.
    pub bulk_abundance: Vec<f64>,
}

/// Instances one worker needs for flight: the surface interaction and the losses.
pub(crate) struct WorkerSet {
    pub surface: Box<dyn ProcessCalls>,
    pub losses: Vec<Box<dyn ProcessCalls>>,
}

/// A running simulation.
pub struct Simulation {
    model: Model,
    processes: Processes,
    config: RunConfig,
    bank: ParticleBank,
    time: f64,
    step: u64,
    next_id: u64,
    ledger: Ledger,
    tally: DensityTally,
    maps: SurfaceMaps,
    sunlit_content: Vec<f64>,
    sources: Vec<Box<dyn ProcessCalls>>,
    reservoir: Vec<Box<dyn ProcessCalls>>,
    workers: Mutex<Vec<WorkerSet>>,
    pool: rayon::ThreadPool,
    launch_goal: f64,
    removal_fraction: f64,
    cells: Vec<CellState>,
}

impl Simulation {
    /// A simulation at time 0 with no particles in flight.
    pub fn new(
        model: Model,
        processes: Processes,
        config: RunConfig,
    ) -> Result<Simulation, EngineError> {
        check(&model, &processes, &config)?;
        let tally = DensityTally::new(
            config.alt_edges.clone(),
            config.n_local_time,
            config.n_latitude,
            model.body.radius,
        )
        .ok_or_else(|| {
            EngineError::Config(
                "alt_edges must increase from >= 0 m; bin counts must be > 0".into(),
            )
        })?
        .with_sources(processes.sources.len());
        let pool =
            rayon::ThreadPoolBuilder::new().num_threads(config.threads.max(1)).build().map_err(
                |e| EngineError::Config(format!("cannot start {} threads: {e}", config.threads)),
            )?;
        let sources =
            processes.sources.iter().map(|m| m.instantiate()).collect::<Result<Vec<_>, _>>()?;
        let reservoir =
            processes.reservoir.iter().map(|m| m.instantiate()).collect::<Result<Vec<_>, _>>()?;
        let n_cells = model.grid.len();
        let ledger = Ledger {
            loss_labels: processes.losses.iter().map(|m| m.ledger_label().to_string()).collect(),
            removal_labels: processes
                .reservoir
                .iter()
                .map(|m| m.ledger_label().to_string())
                .collect(),
            initial_stock: model.reservoir.total(),
            rows: Vec::new(),
        };
        let launch_goal = (config.target_in_flight as f64 / 20.0).max(1.0);
        Ok(Simulation {
            maps: SurfaceMaps {
                released: vec![0.0; n_cells],
                stuck: vec![0.0; n_cells],
                lost_above: vec![0.0; n_cells],
            },
            cells: vec![CellState::default(); n_cells],
            model,
            processes,
            config,
            bank: ParticleBank::new(),
            time: 0.0,
            step: 0,
            next_id: 0,
            ledger,
            tally,
            sunlit_content: Vec::new(),
            sources,
            reservoir,
            workers: Mutex::new(Vec::new()),
            pool,
            launch_goal,
            removal_fraction: 0.0,
        })
    }

    /// Simulated time, s.
    pub fn time(&self) -> f64 {
        self.time
    }

    /// Steps done.
    pub fn steps(&self) -> u64 {
        self.step
    }

    /// The mass ledger so far.
    pub fn ledger(&self) -> &Ledger {
        &self.ledger
    }

    /// The density and column tally of the current averaging window.
    pub fn tally(&self) -> &DensityTally {
        &self.tally
    }

    /// Per-cell maps of the current averaging window.
    pub fn maps(&self) -> &SurfaceMaps {
        &self.maps
    }

    /// The particles in flight.
    pub fn particles(&self) -> &ParticleBank {
        &self.bank
    }

    /// The physical setting, including the current reservoir.
    pub fn model(&self) -> &Model {
        &self.model
    }

    /// Mean adsorbed surface density in `n_lt` local-time bins over 24 h,
    /// atoms cm^-2, at the current time (the reservoir in the solar-fixed frame).
    pub fn adsorbed_by_local_time(&self, n_lt: usize) -> Vec<f64> {
        let n_lt = n_lt.max(1);
        let (mut atoms, mut area) = (vec![0.0; n_lt], vec![0.0; n_lt]);
        let grid = &self.model.grid;
        for c in 0..grid.len() {
            let (_, lon) = grid.centre(c);
            let lt = self.model.sun.local_time_hours(&self.model.body, lon, self.time);
            let k = ((lt / 24.0 * n_lt as f64) as usize).min(n_lt - 1);
            atoms[k] += self.model.reservoir.adsorbed[c];
            area[k] += grid.area_cm2(c);
        }
        atoms.iter().zip(&area).map(|(a, s)| if *s > 0.0 { a / s } else { 0.0 }).collect()
    }

    /// Atoms in flight and in sunlight, averaged over each step, atoms.
    pub fn sunlit_content(&self) -> &[f64] {
        &self.sunlit_content
    }

    /// Start a new averaging window for the tallies and maps.
    pub fn reset_tallies(&mut self) {
        self.tally.reset();
        for m in [&mut self.maps.released, &mut self.maps.stuck, &mut self.maps.lost_above] {
            m.iter_mut().for_each(|x| *x = 0.0);
        }
    }

    /// The evolving state, for a checkpoint.
    pub fn state(&self) -> EngineState {
        EngineState {
            time: self.time,
            step: self.step,
            next_id: self.next_id,
            bank: self.bank.clone(),
            ledger: self.ledger.clone(),
            tally: self.tally.clone(),
            maps: self.maps.clone(),
            sunlit_content: self.sunlit_content.clone(),
            launch_goal: self.launch_goal,
            removal_fraction: self.removal_fraction,
            adsorbed: self.model.reservoir.adsorbed.clone(),
            bulk_abundance: self.model.reservoir.bulk_abundance.clone(),
        }
    }

    /// Continue from a saved state; refused if it does not fit this
    /// simulation's grid, sources, losses, reservoir processes or tally.
    pub fn restore(&mut self, s: EngineState) -> Result<(), EngineError> {
        let fits = s.adsorbed.len() == self.model.grid.len()
            && s.bulk_abundance.len() == self.model.grid.len()
            && s.ledger.loss_labels == self.ledger.loss_labels
            && s.ledger.removal_labels == self.ledger.removal_labels
            && s.tally.shape() == self.tally.shape()
            && s.tally.alt_edges() == self.tally.alt_edges()
            && s.maps.released.len() == self.model.grid.len();
        if !fits {
            return Err(EngineError::Config(
                "the saved state does not match this scenario's grid, processes or tally bins"
                    .into(),
            ));
        }
        self.time = s.time;
        self.step = s.step;
        self.next_id = s.next_id;
        self.bank = s.bank;
        self.ledger = s.ledger;
        self.tally = s.tally;
        self.maps = s.maps;
        self.sunlit_content = s.sunlit_content;
        self.launch_goal = s.launch_goal;
        self.removal_fraction = s.removal_fraction;
        self.model.reservoir.adsorbed = s.adsorbed;
        self.model.reservoir.bulk_abundance = s.bulk_abundance;
        Ok(())
    }

    /// The process modules of this run.
    pub fn processes(&self) -> &Processes {
        &self.processes
    }

    /// The numerical settings of this run.
    pub fn config(&self) -> &RunConfig {
        &self.config
    }

    /// Run `n` steps.
    pub fn run(&mut self, n: u64) -> Result<(), EngineError> {
        for _ in 0..n {
            self.step()?;
        }
        Ok(())
    }

    /// Advance one step of `dt`.
    pub fn step(&mut self) -> Result<&LedgerRow, EngineError> {
        if self.step >= MAX_STEPS {
            return Err(EngineError::Config(format!(
                "the run has reached {MAX_STEPS} steps, the most the random-number keys can \
                 tell apart; raise run.dt or shorten run.duration"
            )));
        }
        let dt = self.config.dt;
        let t_mid = self.time + 0.5 * dt;
        let stock_before = self.bank.total_weight() + self.model.reservoir.total();
        let present = self.bank.len();
        let mut row = LedgerRow {
            step: self.step,
            time: self.time + dt,
            losses: vec![0.0; self.processes.losses.len()],
            removed: vec![0.0; self.processes.reservoir.len()],
            ..Default::default()
        };
        // 1-2. Environment and surface state at mid-step.
        self.fill_cells(t_mid);
        // 3. Reservoir processes.
        self.exchange(&mut row)?;
        self.bank.set_remaining(dt);
        // 4. Sources: release and launch.
        self.release(&mut row)?;
        // 5-6. Flight with losses, and landing.
        self.fly(&mut row)?;
        // The particle budget: roulette, splitting, thinning.
        self.weight_window(&mut row)?;
        self.time += dt;
        self.step += 1;
        // 7. The ledger row (the tallies scored the flight's sightings).
        row.in_flight = self.bank.total_weight();
        row.adsorbed = self.model.reservoir.total();
        row.particles = self.bank.len() as u64;
        row.close(stock_before);
        self.check_finite(&row)?;
        self.adapt_budget(present, row.launched);
        self.ledger.rows.push(row);
        Ok(self.ledger.rows.last().expect("just pushed"))
    }

    /// Stop the run if the step's ledger row or the tally holds a value
    /// that is not finite, naming the quantity and the modules behind it.
    fn check_finite(&self, row: &LedgerRow) -> Result<(), EngineError> {
        let names = |ms: &[&ModuleHandle]| {
            let v: Vec<String> = ms.iter().map(|m| format!("module `{}`", m.name())).collect();
            if v.is_empty() { "the scenario's initial state".to_string() } else { v.join(", ") }
        };
        let p = &self.processes;
        let sources: Vec<&ModuleHandle> = p.sources.iter().collect();
        let numeric = |quantity: String, modules: String| {
            Err(EngineError::Numeric { step: row.step, quantity, modules })
        };
        if let Some((name, index, value)) = row.first_non_finite() {
            let (label, modules) = match (name, index) {
                ("losses", Some(i)) => (format!("losses[{i}]"), names(&[&p.losses[i]])),
                ("removed", Some(k)) => (format!("removed[{k}]"), names(&[&p.reservoir[k]])),
                ("supplied_from_bulk", _) => {
                    let mut ms = sources.clone();
                    ms.extend(p.reservoir.iter());
                    (name.to_string(), names(&ms))
                }
                ("released" | "released_from_adsorbed", _) => (name.to_string(), names(&sources)),
                _ => {
                    let mut ms = sources.clone();
                    ms.push(&p.surface);
                    ms.extend(p.losses.iter());
                    ms.extend(p.reservoir.iter());
                    (name.to_string(), names(&ms))
                }
            };
            return numeric(format!("the ledger's `{label}` ({value} atoms)"), modules);
        }
        if let Some((what, index, value)) = self.tally.first_non_finite() {
            return numeric(
                format!("the density tally's {what} {index} ({value} atoms)"),
                names(&sources),
            );
        }
        Ok(())
    }

    /// Heliocentric distance at time `t`, AU.
    fn helio_distance(&self, t: f64) -> f64 {
        self.model.body.orbit.distance_au(t)
    }

    /// Fill `self.cells` with the surface state at time `t`.
    fn fill_cells(&mut self, t: f64) {
        let r_au = self.helio_distance(t);
        let (grid, body, sun) = (&self.model.grid, &self.model.body, &self.model.sun);
        for (c, cell) in self.cells.iter_mut().enumerate() {
            let (lat, lon) = grid.centre(c);
            let cos_sza = sun.cos_sza(body, lat, lon, t);
            *cell = CellState {
                cell: c as u32,
                flags: if cos_sza > 0.0 { flags::SUNLIT } else { 0 },
                latitude: lat,
                longitude: lon,
                local_time: sun.local_time_hours(body, lon, t),
                cos_sza,
                temperature: self.model.temperature.at(cos_sza, r_au),
                adsorbed: self.model.reservoir.density_cm2(grid, c),
                bulk_abundance: self.model.reservoir.bulk_abundance[c],
                helio_distance: r_au,
                solar_wind_flux: self.model.solar_wind.flux_at(t, r_au),
                meteoroid_factor: self.model.meteoroid_factor,
                time: t,
            };
        }
    }

    /// Refresh the adsorbed densities of `self.cells` after the pool changed.
    fn refresh_adsorbed(&mut self) {
        for (c, cell) in self.cells.iter_mut().enumerate() {
            cell.adsorbed = self.model.reservoir.density_cm2(&self.model.grid, c);
        }
    }

    /// Reservoir processes: supply from the bulk into the pool, or removal.
    fn exchange(&mut self, row: &mut LedgerRow) -> Result<(), EngineError> {
        let dt = self.config.dt;
        let mut rates = vec![0.0; self.cells.len()];
        for k in 0..self.reservoir.len() {
            call(self.reservoir[k].exchange(&self.cells, &mut rates))?;
            for (c, &rate) in rates.iter().enumerate() {
                let area = self.model.grid.area_cm2(c);
                let atoms = rate * area * dt;
                if !atoms.is_finite() {
                    return Err(EngineError::Numeric {
                        step: self.step,
                        quantity: format!(
                            "the atoms exchanged with the adsorbed pool of cell {c} (rate \
                             {rate:e} atoms cm^-2 s^-1 x area {area:e} cm^2 x dt {dt} s)"
                        ),
                        modules: format!("module `{}`", self.processes.reservoir[k].name()),
                    });
                }
                let pool = &mut self.model.reservoir.adsorbed[c];
                if atoms >= 0.0 {
                    row.supplied_from_bulk += atoms;
                    *pool += atoms;
                } else {
                    let removed = (-atoms).min(*pool);
                    *pool -= removed;
                    row.removed[k] += removed;
                }
            }
            self.refresh_adsorbed();
        }
        Ok(())
    }
}

fn check(model: &Model, p: &Processes, c: &RunConfig) -> Result<(), EngineError> {
    let bad = |m: String| Err(EngineError::Config(m));
    if !(c.dt > 0.0 && c.dt.is_finite()) {
        return bad(format!("dt = {} s must be positive", c.dt));
    }
    if !(c.boundary_radius > model.body.radius) {
        return bad(format!(
            "boundary_radius = {} m must exceed the body radius {} m",
            c.boundary_radius, model.body.radius
        ));
    }
    if c.chunk_size == 0 {
        return bad("chunk_size must be at least 1".into());
    }
    if model.reservoir.adsorbed.len() != model.grid.len()
        || model.reservoir.bulk_abundance.len() != model.grid.len()
    {
        return bad("the reservoir maps must have one value per grid cell".into());
    }
    let role = |m: &ModuleHandle, r: Role, what: &str| {
        if m.has_role(r) {
            Ok(())
        } else {
            Err(EngineError::Config(format!(
                "module `{}` is used as a {what} but does not declare the role `{}`",
                m.name(),
                r.as_str()
            )))
        }
    };
    for m in &p.sources {
        role(m, Role::Source, "source")?;
    }
    for m in &p.losses {
        role(m, Role::Loss, "loss")?;
    }
    role(&p.surface, Role::SurfaceInteraction, "surface interaction")?;
    for m in &p.reservoir {
        role(m, Role::ReservoirProcess, "reservoir process")?;
    }
    if p.sources.len() > u16::MAX as usize {
        return bad("too many sources".into());
    }
    Ok(())
}

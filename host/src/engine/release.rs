//! Release: sources turn rates per cell into launched super-particles.
//!
//! Why this exists: a source module gives a release rate per cell (atoms
//! cm^-2 s^-1); the engine turns rate x area x dt into particles, draws each
//! particle's launch point uniformly over its cell and its launch time
//! uniformly within the step, and asks the module for the launch
//! velocities in one batch. A source that draws on the adsorbed pool is
//! capped by it and depletes it; a bulk source supplies atoms from outside
//! the ledger's stocks.
//!
//! Every new particle of a step has about the same weight w, whatever its
//! source (the particle budget, `budget.rs`): a cell releasing A >= w atoms
//! launches k = A / w particles, rounded stochastically, of weight A / k, so
//! it releases exactly A; a cell releasing A < w atoms launches one particle
//! of weight w with probability A / w (or, when its pool holds less than w,
//! one particle carrying the whole pool with probability A / pool), so the
//! expected release is A and no pool is overdrawn. Particles are thus
//! allocated across sources and cells in proportion to the atoms released.
//!
//! The per-cell draws come from host streams keyed by (source, cell, step);
//! the launch points and the launch states are built in parallel, and the
//! particles join the bank in cell order, so results do not depend on the
//! thread count.

use exobound_sdk::{LaunchRequest, Rng, RngKey, Velocity, flags, stream};
use rayon::prelude::*;

use super::{EngineError, Simulation, call};
use crate::tally::LedgerRow;
use crate::transport::frames;
use crate::vec3::Vec3;

/// One cell's share of a source's release in one step.
struct CellRelease {
    /// The cell.
    cell: usize,
    /// Particles it launches.
    count: u64,
    /// Atoms each carries, atoms.
    weight: f64,
    /// Id of its first particle (the rest follow).
    first_id: u64,
}

impl Simulation {
    /// Release and launch the atoms of every source for this step.
    pub(super) fn release(&mut self, row: &mut LedgerRow) -> Result<(), EngineError> {
        let n_cells = self.cells.len();
        let mut rates = vec![0.0; n_cells];
        // The atoms all sources would release, for the step's common weight.
        let mut expected = 0.0;
        for s in 0..self.sources.len() {
            call(self.sources[s].release_rate(&self.cells, &mut rates))?;
            expected += self.expected_atoms(s, &rates)?;
        }
        if !(expected > 0.0) {
            return Ok(());
        }
        let w = self.launch_weight(expected);
        let mut requests: Vec<LaunchRequest> = Vec::new();
        let mut velocities: Vec<Velocity> = Vec::new();
        let mut plan: Vec<CellRelease> = Vec::new();
        for s in 0..self.sources.len() {
            // Asked again: an earlier source may have drawn down the pool.
            call(self.sources[s].release_rate(&self.cells, &mut rates))?;
            if !(self.expected_atoms(s, &rates)? > 0.0) {
                continue;
            }
            self.plan_cells(s, &rates, w, row, &mut plan)?;
            if plan.is_empty() {
                continue;
            }
            requests.clear();
            let at = StepAt {
                model: &self.model,
                seed: self.config.seed,
                step: self.step,
                t0: self.time,
                dt: self.config.dt,
            };
            let built: Vec<Vec<LaunchRequest>> =
                self.pool.install(|| plan.par_iter().map(|p| at.requests_of(s, p)).collect());
            built.into_iter().for_each(|v| requests.extend(v));
            velocities.clear();
            velocities.resize(requests.len(), Velocity::default());
            call(self.sources[s].launch(&requests, &mut velocities))?;
            let radius = self.model.body.radius;
            let spin = self.model.body.sidereal_rate();
            let states: Vec<(Vec3, Vec3)> = self.pool.install(|| {
                requests
                    .par_iter()
                    .zip(velocities.par_iter())
                    .with_min_len(1024)
                    .map(|(req, v)| {
                        frames::launch_state(
                            radius,
                            req.latitude,
                            req.longitude,
                            [v.east, v.north, v.up],
                            spin,
                            req.time,
                        )
                    })
                    .collect()
            });
            self.bank.reserve(requests.len());
            let t_end = self.time + self.config.dt;
            let mut k = 0;
            for p in &plan {
                for _ in 0..p.count {
                    let (req, (pos, vel)) = (&requests[k], states[k]);
                    self.bank.push(
                        req.key.particle,
                        s as u16,
                        p.weight,
                        t_end - req.time,
                        req.time,
                        pos,
                        vel,
                    );
                    k += 1;
                }
            }
            self.refresh_adsorbed();
        }
        Ok(())
    }

    /// Atoms (atoms) source `s` would release this step at `rates` (atoms
    /// cm^-2 s^-1 per cell), capped by the pool for a source that draws on
    /// it; a numeric error if rate x area x dt overflows.
    fn expected_atoms(&self, s: usize, rates: &[f64]) -> Result<f64, EngineError> {
        let dt = self.config.dt;
        let from_pool = self.processes.sources[s].draws_on_adsorbed();
        let grid = &self.model.grid;
        let mut total = 0.0;
        for (c, &rate) in rates.iter().enumerate() {
            let a = rate * grid.area_cm2(c) * dt;
            // Caught at its source: rate x area x dt overflowing in a cell
            // (before the pool caps it).
            if !a.is_finite() {
                return Err(EngineError::Numeric {
                    step: self.step,
                    quantity: format!(
                        "the atoms released in cell {c} (release rate {rate:e} atoms cm^-2 s^-1 \
                         x cell area {:e} cm^2 x dt {dt} s)",
                        grid.area_cm2(c)
                    ),
                    modules: format!("module `{}`", self.processes.sources[s].name()),
                });
            }
            total += if from_pool { a.min(self.model.reservoir.adsorbed[c]) } else { a };
        }
        if !total.is_finite() {
            return Err(EngineError::Numeric {
                step: self.step,
                quantity: "the atoms released, summed over the cells".to_string(),
                modules: format!("module `{}`", self.processes.sources[s].name()),
            });
        }
        Ok(total)
    }

    /// Decide how many particles of what weight each cell launches for
    /// source `s` at common weight `w` (atoms), take the atoms from the pool
    /// or the bulk, and book them; fills `plan` in cell order.
    fn plan_cells(
        &mut self,
        s: usize,
        rates: &[f64],
        w: f64,
        row: &mut LedgerRow,
        plan: &mut Vec<CellRelease>,
    ) -> Result<(), EngineError> {
        let dt = self.config.dt;
        let from_pool = self.processes.sources[s].draws_on_adsorbed();
        plan.clear();
        for (c, &rate) in rates.iter().enumerate() {
            let pool = self.model.reservoir.adsorbed[c];
            let a = rate * self.model.grid.area_cm2(c) * dt;
            let atoms = if from_pool { a.min(pool) } else { a };
            if !(atoms > 0.0) {
                continue;
            }
            let u = self.cell_rng(s, c).uniform();
            let (count, weight) = if atoms >= w {
                let n = atoms / w;
                let k = n.floor() + if u < n - n.floor() { 1.0 } else { 0.0 };
                (k, atoms / k)
            } else {
                let w1 = if from_pool { w.min(pool) } else { w };
                if u < atoms / w1 {
                    (1.0, w1)
                } else {
                    continue;
                }
            };
            let released = count * weight;
            if from_pool {
                self.model.reservoir.adsorbed[c] = (pool - released).max(0.0);
                row.released_from_adsorbed += released;
            } else {
                row.supplied_from_bulk += released;
            }
            row.released += released;
            row.launched += count as u64;
            self.maps.released[c] += released;
            let first_id = self.next_id;
            self.next_id += count as u64;
            if self.next_id > exobound_sdk::rng::MAX_PARTICLE_ID {
                return Err(EngineError::Config(format!(
                    "the run has launched {first_id} particles, the most the random-number keys \
                     can tell apart; lower run.particles or run.duration"
                )));
            }
            plan.push(CellRelease { cell: c, count: count as u64, weight, first_id });
        }
        Ok(())
    }

    /// The host stream of source `s` and cell `c` in this step.
    fn cell_rng(&self, s: usize, c: usize) -> Rng {
        cell_rng(self.config.seed, self.step, s, c)
    }
}

/// The host stream of source `s` and cell `c` in step `step` (in the
/// particle slot: source << 32 | cell).
fn cell_rng(seed: u64, step: u64, s: usize, c: usize) -> Rng {
    Rng::new(RngKey::at_step(seed, ((s as u64) << 32) | c as u64, 0, stream::HOST_RELEASE, step))
}

/// What building launch requests needs of the step, shareable across threads.
struct StepAt<'a> {
    model: &'a super::Model,
    seed: u64,
    step: u64,
    /// Start of the step, s.
    t0: f64,
    /// Step length, s.
    dt: f64,
}

impl StepAt<'_> {
    /// The launch requests of one cell's particles: each point uniform over
    /// the cell, each launch time uniform in the step.
    fn requests_of(&self, s: usize, p: &CellRelease) -> Vec<LaunchRequest> {
        let (dt, t0) = (self.dt, self.t0);
        let (model, body) = (self.model, &self.model.body);
        let mut rng = cell_rng(self.seed, self.step, s, p.cell);
        // The first draw of the stream decided the count.
        let _ = rng.uniform();
        (0..p.count)
            .map(|k| {
                let (lat, lon) = model.grid.sample(p.cell, rng.uniform(), rng.uniform());
                let t_launch = t0 + dt * rng.uniform();
                let cos_sza = model.sun.cos_sza(body, lat, lon, t_launch);
                let r_au = body.orbit.distance_au(t_launch);
                let id = p.first_id + k;
                LaunchRequest {
                    key: RngKey::at_step(self.seed, id, 0, stream::LAUNCH, self.step),
                    cell: p.cell as u32,
                    flags: if cos_sza > 0.0 { flags::SUNLIT } else { 0 },
                    latitude: lat,
                    longitude: lon,
                    local_time: model.sun.local_time_hours(body, lon, t_launch),
                    cos_sza,
                    temperature: model.temperature.at(cos_sza, r_au),
                    helio_distance: r_au,
                    mass: model.species.mass,
                    time: t_launch,
                }
            })
            .collect()
    }
}

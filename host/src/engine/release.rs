//! Release: sources turn rates per cell into launched super-particles.
//!
//! Why this exists: a source module gives a release rate per cell (atoms
//! cm^-2 s^-1); the engine turns rate x area x dt into particles of a
//! common weight per source, rounded stochastically so the expected number
//! of atoms is exact, draws each particle's launch point uniformly over its
//! cell and its launch time uniformly within the step, and asks the module
//! for the launch velocities in one batch. A source that draws on the
//! adsorbed pool is capped by it and depletes it; a bulk source supplies
//! atoms from outside the ledger's stocks.

use exobound_sdk::{LaunchRequest, Rng, RngKey, Velocity, flags, stream};

use super::{EngineError, Simulation, call};
use crate::tally::LedgerRow;
use crate::transport::frames;

impl Simulation {
    /// Release and launch the atoms of every source for this step.
    pub(super) fn release(&mut self, row: &mut LedgerRow) -> Result<(), EngineError> {
        let dt = self.config.dt;
        let t0 = self.time;
        let n_cells = self.cells.len();
        let mut rates = vec![0.0; n_cells];
        let mut requests: Vec<LaunchRequest> = Vec::new();
        let mut weights: Vec<f64> = Vec::new();
        let mut velocities: Vec<Velocity> = Vec::new();
        let mass = self.model.species.mass;
        let rate_bci = self.model.body.sidereal_rate();
        for s in 0..self.sources.len() {
            call(self.sources[s].release_rate(&self.cells, &mut rates))?;
            let from_pool = self.processes.sources[s].draws_on_adsorbed();
            // Expected atoms per cell, capped by the pool for adsorbed sources.
            let expected = |c: usize, pool: f64| {
                let a = rates[c] * self.model.grid.area_cm2(c) * dt;
                if from_pool { a.min(pool) } else { a }
            };
            let total: f64 =
                (0..n_cells).map(|c| expected(c, self.model.reservoir.adsorbed[c])).sum();
            // Caught at its source: rate x area x dt overflowing in a cell
            // (before the pool caps it), or the sum over the cells.
            let overflow =
                (0..n_cells).find(|&c| !(rates[c] * self.model.grid.area_cm2(c) * dt).is_finite());
            if overflow.is_some() || !total.is_finite() {
                let quantity = match overflow {
                    Some(c) => format!(
                        "the atoms released in cell {c} (release rate {:e} atoms cm^-2 s^-1 x \
                         cell area {:e} cm^2 x dt {dt} s)",
                        rates[c],
                        self.model.grid.area_cm2(c)
                    ),
                    None => "the atoms released, summed over the cells".to_string(),
                };
                return Err(EngineError::Numeric {
                    step: self.step,
                    quantity,
                    modules: format!("module `{}`", self.processes.sources[s].name()),
                });
            }
            if !(total > 0.0) {
                continue;
            }
            let w = total / self.new_per_step[s];
            requests.clear();
            weights.clear();
            for c in 0..n_cells {
                let pool = self.model.reservoir.adsorbed[c];
                let atoms = expected(c, pool);
                if !(atoms > 0.0) {
                    continue;
                }
                // A host stream, keyed by source and cell (in the particle
                // slot: source << 32 | cell) and by the step.
                let mut rng = Rng::new(RngKey::at_step(
                    self.config.seed,
                    ((s as u64) << 32) | c as u64,
                    0,
                    stream::HOST_RELEASE,
                    self.step,
                ));
                let n = atoms / w;
                let mut k = n.floor() + if rng.uniform() < n - n.floor() { 1.0 } else { 0.0 };
                if from_pool {
                    k = k.min((pool / w).floor());
                }
                if k < 1.0 {
                    continue;
                }
                let released = k * w;
                if from_pool {
                    self.model.reservoir.adsorbed[c] = (pool - released).max(0.0);
                    row.released_from_adsorbed += released;
                } else {
                    row.supplied_from_bulk += released;
                }
                row.released += released;
                row.launched += k as u64;
                self.maps.released[c] += released;
                for _ in 0..k as u64 {
                    let (lat, lon) = self.model.grid.sample(c, rng.uniform(), rng.uniform());
                    // Launch time uniform in the step: the particle flies the rest of it.
                    let t_launch = t0 + dt * rng.uniform();
                    let cos_sza = self.model.sun.cos_sza(&self.model.body, lat, lon, t_launch);
                    let r_au = self.model.body.orbit.distance_au(t_launch);
                    let id = self.next_id;
                    if id >= exobound_sdk::rng::MAX_PARTICLE_ID {
                        return Err(EngineError::Config(format!(
                            "the run has launched {id} particles, the most the random-number \
                             keys can tell apart; lower run.particles or run.duration"
                        )));
                    }
                    self.next_id += 1;
                    requests.push(LaunchRequest {
                        key: RngKey::at_step(self.config.seed, id, 0, stream::LAUNCH, self.step),
                        cell: c as u32,
                        flags: if cos_sza > 0.0 { flags::SUNLIT } else { 0 },
                        latitude: lat,
                        longitude: lon,
                        local_time: self.model.sun.local_time_hours(
                            &self.model.body,
                            lon,
                            t_launch,
                        ),
                        cos_sza,
                        temperature: self.model.temperature.at(cos_sza, r_au),
                        helio_distance: r_au,
                        mass,
                        time: t_launch,
                    });
                    weights.push(w);
                }
            }
            if requests.is_empty() {
                continue;
            }
            velocities.clear();
            velocities.resize(requests.len(), Velocity::default());
            call(self.sources[s].launch(&requests, &mut velocities))?;
            self.bank.reserve(requests.len());
            for ((req, v), &w) in requests.iter().zip(&velocities).zip(&weights) {
                let (pos, vel) = frames::launch_state(
                    self.model.body.radius,
                    req.latitude,
                    req.longitude,
                    [v.east, v.north, v.up],
                    rate_bci,
                    req.time,
                );
                self.bank.push(req.key.particle, s as u16, w, t0 + dt - req.time, pos, vel);
            }
            self.refresh_adsorbed();
        }
        Ok(())
    }
}

//! The particle budget: how many super-particles to launch, and how to keep
//! their weights comparable.
//!
//! Why this exists: a Monte Carlo tally's variance is set by how the
//! particles' weights spread. If one source launches as many particles as
//! another that releases a million times more atoms, or particles of weight
//! 1e-200 atoms fly beside particles of weight 1e20, most of the CPU goes
//! to particles that carry nothing. The budget therefore
//!
//! 1. aims the launches of each step at the particles that leave flight
//!    (target x the smoothed removal fraction, steered gently towards the
//!    target count, and never more than the room left under the target);
//! 2. gives every new particle of the step the same weight, whatever its
//!    source and cell (so particles are allocated in proportion to the atoms
//!    released), kept within [`WEIGHT_RATIO`] of the mean weight in flight;
//! 3. after flight, plays Russian roulette with particles lighter than
//!    mean / [`WEIGHT_RATIO`] (a survivor carries mean / [`WEIGHT_RATIO`])
//!    and splits particles heavier than mean x [`WEIGHT_RATIO`] into copies
//!    near the mean; and when the count exceeds the target by more than
//!    [`OVERFLOW`], plays roulette with every particle at the survival
//!    probability target / count. All of these are unbiased: the expected
//!    weight is unchanged (Kahn & Harris 1951, "Estimation of particle
//!    transmission by random sampling", NBS Appl. Math. Ser. 12, 27-30,
//!    for roulette and splitting). The net weight roulette takes out of or
//!    adds to flight is booked in the ledger's `roulette` column.

use exobound_sdk::{Rng, RngKey, stream};

use super::{EngineError, Simulation};
use crate::particles::ParticleBank;
use crate::tally::LedgerRow;

/// Largest ratio between a particle's weight and the mean weight in flight,
/// either way, after each step (and for new particles at launch),
/// dimensionless (common practice in weight windows: a factor of a few).
pub const WEIGHT_RATIO: f64 = 4.0;

/// Fraction by which the count may exceed the target before the whole
/// population is thinned by roulette, dimensionless.
pub const OVERFLOW: f64 = 0.25;

/// Most copies one split makes, dimensionless.
const MAX_SPLIT: u64 = 64;

impl Simulation {
    /// The weight (atoms) of each new particle this step, for `atoms`
    /// expected to be released by all sources together.
    pub(super) fn launch_weight(&self, atoms: f64) -> f64 {
        let goal = self.launch_goal.max(1.0);
        let mut w = atoms / goal;
        let n = self.bank.len();
        if n > 0 {
            let mean = self.bank.total_weight() / n as f64;
            if mean > 0.0 && mean.is_finite() {
                w = w.clamp(mean / WEIGHT_RATIO, mean * WEIGHT_RATIO);
            }
        }
        w
    }

    /// Adapt the launches per step so the number in flight nears the target.
    ///
    /// In a steady state the particles launched per step equal those
    /// removed per step, N q, where q is the fraction of the particles in
    /// flight during a step that leave it. So the launches per step aim at
    /// target x q, with q smoothed over about ten steps so that the weights
    /// change slowly, times a mild correction (target / N)^(1/2), kept within
    /// [0.7, 1.4], that steers the count itself; and never above the room
    /// left, target - N (1 - q), so that a population that hardly loses
    /// particles (no loss, no sticking) does not overshoot. Before anything
    /// has left flight, the launches grow by 25% per step up to that room.
    pub(super) fn adapt_budget(&mut self, present: usize, launched: u64) {
        let target = self.config.target_in_flight.max(1) as f64;
        let now = self.bank.len() as f64;
        let during = present as f64 + launched as f64;
        if during > 0.0 {
            let q = (during - now).max(0.0) / during;
            self.removal_fraction =
                if self.removal_fraction > 0.0 { 0.9 * self.removal_fraction + 0.1 * q } else { q };
        }
        let q = self.removal_fraction;
        let wanted = if q > 0.0 {
            let steer = (target / now.max(1.0)).sqrt().clamp(0.7, 1.4);
            target * q * steer
        } else {
            self.launch_goal * 1.25
        };
        let room = target - now * (1.0 - q);
        self.launch_goal = wanted.min(room).clamp(1.0, target);
    }

    /// Roulette and split the particles whose weights left the window around
    /// the mean, and thin an overfull population; books the net weight
    /// roulette removed in `row.roulette`.
    pub(super) fn weight_window(&mut self, row: &mut LedgerRow) -> Result<(), EngineError> {
        let target = self.config.target_in_flight;
        let (seed, step) = (self.config.seed, self.step);
        row.roulette += weight_window(&mut self.bank, &mut self.next_id, seed, step, target)?;
        Ok(())
    }
}

/// The particle budget's games on `bank` after the flight of step `step`
/// of a run with seed `seed` and `target` particles in flight: roulette
/// below mean / [`WEIGHT_RATIO`], splitting above mean x [`WEIGHT_RATIO`]
/// (new ids from `next_id`), and thinning when the count exceeds the target
/// by more than [`OVERFLOW`]. Returns the net weight roulette took out of
/// flight (atoms; negative when it added more than it took).
pub fn weight_window(
    bank: &mut ParticleBank,
    next_id: &mut u64,
    seed: u64,
    step: u64,
    target: usize,
) -> Result<f64, EngineError> {
    let n = bank.len();
    if n == 0 {
        return Ok(0.0);
    }
    let mean = bank.total_weight() / n as f64;
    if !(mean > 0.0 && mean.is_finite()) {
        return Ok(0.0);
    }
    let (lo, hi) = (mean / WEIGHT_RATIO, mean * WEIGHT_RATIO);
    let target = target.max(1) as f64;
    // Thinning of the whole population when it overflows the target.
    let keep_all = if n as f64 > target * (1.0 + OVERFLOW) { target / n as f64 } else { 1.0 };
    // Net weight roulette takes out, summed with compensation.
    let mut net = Neumaier::default();
    let mut splits: Vec<(usize, u64)> = Vec::new();
    let mut removed = false;
    for i in 0..n {
        let w = bank.weights()[i];
        // Survival probability and the survivor's weight (p x w_new = w).
        let (p, w_new) = if w < lo {
            let p = (w / lo) * keep_all;
            (p, w / p)
        } else if keep_all < 1.0 {
            (keep_all, w / keep_all)
        } else {
            (1.0, w)
        };
        if p < 1.0 {
            let key =
                RngKey::at_step(seed, bank.ids()[i], bank.events()[i], stream::HOST_ROULETTE, step);
            if Rng::new(key).uniform() < p {
                net.add(w - w_new);
                bank.weights_mut()[i] = w_new;
            } else {
                net.add(w);
                bank.remove(i);
                removed = true;
                continue;
            }
        }
        let w = bank.weights()[i];
        if w > hi {
            let copies = ((w / mean).ceil() as u64).clamp(2, MAX_SPLIT);
            splits.push((i, copies));
        }
    }
    // Splitting conserves weight exactly: each copy carries w / copies.
    for (i, copies) in splits {
        let w = bank.weights()[i] / copies as f64;
        bank.weights_mut()[i] = w;
        for _ in 1..copies {
            let id = *next_id;
            if id >= exobound_sdk::rng::MAX_PARTICLE_ID {
                return Err(EngineError::Config(format!(
                    "the run has made {id} particles, the most the random-number keys can tell \
                     apart; lower run.particles or run.duration"
                )));
            }
            *next_id += 1;
            bank.push_split(i, id, w);
        }
    }
    if removed {
        bank.compact();
    }
    Ok(net.value())
}

/// A running sum with Neumaier's compensation (as `compensated_sum`).
#[derive(Default)]
struct Neumaier {
    sum: f64,
    carry: f64,
}

impl Neumaier {
    fn add(&mut self, x: f64) {
        let t = self.sum + x;
        if self.sum.abs() >= x.abs() {
            self.carry += (self.sum - t) + x;
        } else {
            self.carry += (x - t) + self.sum;
        }
        self.sum = t;
    }

    fn value(&self) -> f64 {
        self.sum + self.carry
    }
}

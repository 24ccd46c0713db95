//! The particle bank: every super-particle in flight, as struct-of-arrays.
//!
//! Why this exists: the hot loop is particles times hops, so the state is
//! kept as parallel columns (positions together, velocities together,
//! weights together) that chunks of the loop read and write without
//! allocating. Geometry state (position, velocity) is kept apart from
//! bookkeeping state (id, event counter, weight, alive flag), and the step
//! loop reaches both only through [`Chunk`] views.
//!
//! A super-particle stands for `weight` atoms. Positions and velocities are
//! in the body-centred inertial frame (z along the spin axis, x along the
//! prime meridian at t = 0), in m and m s^-1.

use crate::vec3::Vec3;

/// Bytes of state held per particle in flight.
pub const BYTES_PER_PARTICLE: usize = std::mem::size_of::<u64>()
    + std::mem::size_of::<u32>()
    + std::mem::size_of::<u16>()
    + 2 * std::mem::size_of::<f64>()
    + 2 * std::mem::size_of::<Vec3>()
    + std::mem::size_of::<bool>();

// The engine's budget: at most 200 bytes of state per particle in flight.
const _: () = assert!(BYTES_PER_PARTICLE <= 200);

/// The super-particles in flight, as columns.
#[derive(Clone, Debug, Default, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct ParticleBank {
    id: Vec<u64>,
    event: Vec<u32>,
    source: Vec<u16>,
    weight: Vec<f64>,
    remaining: Vec<f64>,
    pos: Vec<Vec3>,
    vel: Vec<Vec3>,
    alive: Vec<bool>,
}

/// A mutable view of a contiguous range of the bank.
pub struct Chunk<'a> {
    /// Particle ids, unique in the run.
    pub id: &'a mut [u64],
    /// Event counters (0 at launch, +1 per landing).
    pub event: &'a mut [u32],
    /// Index of the source that released each particle.
    pub source: &'a mut [u16],
    /// Atoms each particle stands for, atoms.
    pub weight: &'a mut [f64],
    /// Time still to fly in the current step, s.
    pub remaining: &'a mut [f64],
    /// Positions, body-centred inertial, m.
    pub pos: &'a mut [Vec3],
    /// Velocities, body-centred inertial, m s^-1.
    pub vel: &'a mut [Vec3],
    /// False once a particle has left flight (stuck, lost, escaped).
    pub alive: &'a mut [bool],
}

impl ParticleBank {
    /// An empty bank.
    pub fn new() -> ParticleBank {
        ParticleBank::default()
    }

    /// Particles in the bank.
    pub fn len(&self) -> usize {
        self.id.len()
    }

    /// Whether the bank is empty.
    pub fn is_empty(&self) -> bool {
        self.id.is_empty()
    }

    /// Add a particle that still has `remaining` s to fly in this step.
    #[allow(clippy::too_many_arguments)]
    pub fn push(
        &mut self,
        id: u64,
        source: u16,
        weight: f64,
        remaining: f64,
        pos: Vec3,
        vel: Vec3,
    ) {
        self.id.push(id);
        self.event.push(0);
        self.source.push(source);
        self.weight.push(weight);
        self.remaining.push(remaining);
        self.pos.push(pos);
        self.vel.push(vel);
        self.alive.push(true);
    }

    /// Reserve room for `n` more particles.
    pub fn reserve(&mut self, n: usize) {
        self.id.reserve(n);
        self.event.reserve(n);
        self.source.reserve(n);
        self.weight.reserve(n);
        self.remaining.reserve(n);
        self.pos.reserve(n);
        self.vel.reserve(n);
        self.alive.reserve(n);
    }

    /// Weights, atoms.
    pub fn weights(&self) -> &[f64] {
        &self.weight
    }

    /// Positions, body-centred inertial, m.
    pub fn positions(&self) -> &[Vec3] {
        &self.pos
    }

    /// Velocities, body-centred inertial, m s^-1.
    pub fn velocities(&self) -> &[Vec3] {
        &self.vel
    }

    /// Ids.
    pub fn ids(&self) -> &[u64] {
        &self.id
    }

    /// Set every particle's remaining flight time to `dt` s (start of a step).
    pub fn set_remaining(&mut self, dt: f64) {
        self.remaining.iter_mut().for_each(|r| *r = dt);
    }

    /// Total atoms in flight, atoms (compensated sum in bank order).
    pub fn total_weight(&self) -> f64 {
        crate::tally::ledger::compensated_sum(&self.weight)
    }

    /// Views of consecutive chunks of `size` particles (the last may be shorter).
    pub fn chunks(&mut self, size: usize) -> Vec<Chunk<'_>> {
        let size = size.max(1);
        let mut out = Vec::with_capacity(self.len().div_ceil(size));
        let mut id = self.id.as_mut_slice();
        let mut event = self.event.as_mut_slice();
        let mut source = self.source.as_mut_slice();
        let mut weight = self.weight.as_mut_slice();
        let mut remaining = self.remaining.as_mut_slice();
        let mut pos = self.pos.as_mut_slice();
        let mut vel = self.vel.as_mut_slice();
        let mut alive = self.alive.as_mut_slice();
        while !id.is_empty() {
            let k = size.min(id.len());
            let (a, b) = id.split_at_mut(k);
            id = b;
            let (e, e2) = event.split_at_mut(k);
            event = e2;
            let (s, s2) = source.split_at_mut(k);
            source = s2;
            let (w, w2) = weight.split_at_mut(k);
            weight = w2;
            let (r, r2) = remaining.split_at_mut(k);
            remaining = r2;
            let (p, p2) = pos.split_at_mut(k);
            pos = p2;
            let (v, v2) = vel.split_at_mut(k);
            vel = v2;
            let (l, l2) = alive.split_at_mut(k);
            alive = l2;
            out.push(Chunk {
                id: a,
                event: e,
                source: s,
                weight: w,
                remaining: r,
                pos: p,
                vel: v,
                alive: l,
            });
        }
        out
    }

    /// Drop the particles that are no longer alive, keeping the order of the rest.
    pub fn compact(&mut self) {
        let mut keep = 0;
        for i in 0..self.len() {
            if self.alive[i] {
                if keep != i {
                    self.id[keep] = self.id[i];
                    self.event[keep] = self.event[i];
                    self.source[keep] = self.source[i];
                    self.weight[keep] = self.weight[i];
                    self.remaining[keep] = self.remaining[i];
                    self.pos[keep] = self.pos[i];
                    self.vel[keep] = self.vel[i];
                    self.alive[keep] = true;
                }
                keep += 1;
            }
        }
        self.id.truncate(keep);
        self.event.truncate(keep);
        self.source.truncate(keep);
        self.weight.truncate(keep);
        self.remaining.truncate(keep);
        self.pos.truncate(keep);
        self.vel.truncate(keep);
        self.alive.truncate(keep);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chunks_cover_the_bank_and_compact_keeps_order() {
        let mut b = ParticleBank::new();
        for i in 0..10 {
            b.push(i, 0, 1.0 + i as f64, 5.0, [i as f64, 0.0, 0.0], [0.0; 3]);
        }
        let sizes: Vec<usize> = b.chunks(4).iter().map(|c| c.id.len()).collect();
        assert_eq!(sizes, vec![4, 4, 2]);
        for c in b.chunks(4) {
            for (i, alive) in c.alive.iter_mut().enumerate() {
                *alive = c.id[i] % 3 != 0;
            }
        }
        b.compact();
        assert_eq!(b.ids(), &[1, 2, 4, 5, 7, 8]);
        assert_eq!(b.total_weight(), 2.0 + 3.0 + 5.0 + 6.0 + 8.0 + 9.0);
    }
}

//! The particle bank: every super-particle in flight, as struct-of-arrays.
//!
//! Why this exists: the hot loop is particles times hops, so the state is
//! kept as parallel columns (positions together, velocities together,
//! weights together) that chunks of the loop read and write without
//! allocating. Geometry state (reference state, next event, shadow
//! schedule) is kept apart from bookkeeping state (id, event counter,
//! weight, alive flag), and the step loop reaches both only through
//! [`Chunk`] views.
//!
//! A super-particle stands for `weight` atoms. Flight is event-driven: each
//! particle keeps the state (`pos`, `vel`) at a reference time `epoch`, from
//! which its closed-form orbit follows, the time and kind of its next event
//! (landing or the outer boundary) solved once per hop, and the times its
//! path enters and leaves the body's shadow. A step only evaluates what it
//! needs: the position at the step's end (`here`, for the tallies and the
//! loss records) and, for the particles whose event falls in the step, the
//! event. With radiation pressure the reference state is the integrator's
//! state at the end of the last step, and `step_size` its next step.
//! Positions and velocities are in the body-centred inertial frame (z along
//! the spin axis, x along the prime meridian at t = 0), in m and m s^-1.

use crate::vec3::Vec3;

/// Shadow entries and exits kept per planned path, dimensionless.
pub const SHADOW_TOGGLES: usize = 4;

/// Bytes of state held per particle in flight.
pub const BYTES_PER_PARTICLE: usize = std::mem::size_of::<u64>()
    + std::mem::size_of::<u32>()
    + std::mem::size_of::<u16>()
    + 9 * std::mem::size_of::<f64>()
    + 3 * std::mem::size_of::<Vec3>()
    + std::mem::size_of::<[f64; SHADOW_TOGGLES]>()
    + 3 * std::mem::size_of::<u8>();

// The engine's budget: at most 200 bytes of state per particle in flight.
const _: () = assert!(BYTES_PER_PARTICLE <= 200);

/// What ends a particle's planned path.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[repr(u8)]
pub enum NextEvent {
    /// Not planned yet (just launched or bounced; or radiation pressure,
    /// which plans step by step).
    Unplanned = 0,
    /// Reaches the surface at `next_event`.
    Landing = 1,
    /// Reaches the outer boundary at `next_event`.
    Boundary = 2,
    /// Unbound and never meets the surface: escaped at launch (only with
    /// `escape_when_unbound`).
    Unbound = 3,
    /// No event on this path (it neither lands nor leaves).
    Never = 4,
}

impl NextEvent {
    /// The kind from its stored code.
    pub fn from_code(code: u8) -> NextEvent {
        match code {
            1 => NextEvent::Landing,
            2 => NextEvent::Boundary,
            3 => NextEvent::Unbound,
            4 => NextEvent::Never,
            _ => NextEvent::Unplanned,
        }
    }
}

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
    epoch: Vec<f64>,
    next_event: Vec<f64>,
    next_kind: Vec<u8>,
    here: Vec<Vec3>,
    chi_here: Vec<f64>,
    t_here: Vec<f64>,
    lit_from: Vec<f64>,
    lit_until: Vec<f64>,
    lit_start: Vec<u8>,
    toggles: Vec<[f64; SHADOW_TOGGLES]>,
    step_size: Vec<f64>,
    alive: Vec<u8>,
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
    /// Reference positions (at `epoch`), body-centred inertial, m.
    pub pos: &'a mut [Vec3],
    /// Reference velocities (at `epoch`), body-centred inertial, m s^-1.
    pub vel: &'a mut [Vec3],
    /// Time of the reference state, s since the run's start.
    pub epoch: &'a mut [f64],
    /// Time of the next event, s since the run's start.
    pub next_event: &'a mut [f64],
    /// Kind of the next event, a [`NextEvent`] code.
    pub next_kind: &'a mut [u8],
    /// Position at the end of the last advance, body-centred inertial, m.
    pub here: &'a mut [Vec3],
    /// Universal anomaly of `here` on the reference orbit (0 at `epoch`),
    /// m^0.5: where the next Kepler solve starts.
    pub chi_here: &'a mut [f64],
    /// Time of `here`, s since the run's start.
    pub t_here: &'a mut [f64],
    /// Start of the interval the shadow schedule covers, s since the run's
    /// start (+infinity, with `lit_until` -infinity, when there is none; no
    /// column holds NaN, so that two banks compare equal when their bits do).
    pub lit_from: &'a mut [f64],
    /// End of the interval the shadow schedule covers, s since the run's start.
    pub lit_until: &'a mut [f64],
    /// 1 if sunlit at `lit_from`, else 0.
    pub lit_start: &'a mut [u8],
    /// Times the path enters or leaves the shadow, ascending, padded with
    /// +infinity, s since the run's start.
    pub toggles: &'a mut [[f64; SHADOW_TOGGLES]],
    /// Next step size of the radiation-pressure integrator (0: choose), s.
    pub step_size: &'a mut [f64],
    /// 0 once a particle has left flight (stuck, lost, escaped), else 1.
    pub alive: &'a mut [u8],
}

/// Applies the same call to every column of the bank (the columns are
/// listed once, here).
macro_rules! each_column {
    ($bank:expr, $f:ident $(, $arg:expr)*) => {{
        $f(&mut $bank.id $(, $arg)*);
        $f(&mut $bank.event $(, $arg)*);
        $f(&mut $bank.source $(, $arg)*);
        $f(&mut $bank.weight $(, $arg)*);
        $f(&mut $bank.remaining $(, $arg)*);
        $f(&mut $bank.pos $(, $arg)*);
        $f(&mut $bank.vel $(, $arg)*);
        $f(&mut $bank.epoch $(, $arg)*);
        $f(&mut $bank.next_event $(, $arg)*);
        $f(&mut $bank.next_kind $(, $arg)*);
        $f(&mut $bank.here $(, $arg)*);
        $f(&mut $bank.chi_here $(, $arg)*);
        $f(&mut $bank.t_here $(, $arg)*);
        $f(&mut $bank.lit_from $(, $arg)*);
        $f(&mut $bank.lit_until $(, $arg)*);
        $f(&mut $bank.lit_start $(, $arg)*);
        $f(&mut $bank.toggles $(, $arg)*);
        $f(&mut $bank.step_size $(, $arg)*);
        $f(&mut $bank.alive $(, $arg)*);
    }};
}

fn reserve_column<T>(v: &mut Vec<T>, n: usize) {
    v.reserve(n);
}

fn truncate_column<T>(v: &mut Vec<T>, n: usize) {
    v.truncate(n);
}

fn move_column<T: Copy>(v: &mut [T], moves: &[(usize, usize, usize)]) {
    for &(from, len, to) in moves {
        v.copy_within(from..from + len, to);
    }
}

/// Move the alive particles of one column slice to its front, keeping order.
fn front_column<T: Copy>(v: &mut [T], alive: &[u8]) {
    let mut keep = 0;
    for i in 0..v.len() {
        if alive[i] != 0 {
            v[keep] = v[i];
            keep += 1;
        }
    }
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

    /// Add a particle launched from position `pos` (m) with velocity `vel`
    /// (m s^-1) at time `epoch` (s), which still has `remaining` s to fly in
    /// this step; its path is planned when it first flies.
    #[allow(clippy::too_many_arguments)]
    pub fn push(
        &mut self,
        id: u64,
        source: u16,
        weight: f64,
        remaining: f64,
        epoch: f64,
        pos: Vec3,
        vel: Vec3,
    ) {
        self.push_copy(id, 0, source, weight, remaining, epoch, pos, vel);
    }

    /// [`ParticleBank::push`] with an event counter `event` (a split copy
    /// keeps its parent's counter).
    #[allow(clippy::too_many_arguments)]
    fn push_copy(
        &mut self,
        id: u64,
        event: u32,
        source: u16,
        weight: f64,
        remaining: f64,
        epoch: f64,
        pos: Vec3,
        vel: Vec3,
    ) {
        self.id.push(id);
        self.event.push(event);
        self.source.push(source);
        self.weight.push(weight);
        self.remaining.push(remaining);
        self.pos.push(pos);
        self.vel.push(vel);
        self.epoch.push(epoch);
        self.next_event.push(f64::INFINITY);
        self.next_kind.push(NextEvent::Unplanned as u8);
        self.here.push(pos);
        self.chi_here.push(0.0);
        self.t_here.push(epoch);
        self.lit_from.push(f64::INFINITY);
        self.lit_until.push(f64::NEG_INFINITY);
        self.lit_start.push(0);
        self.toggles.push([f64::INFINITY; SHADOW_TOGGLES]);
        self.step_size.push(0.0);
        self.alive.push(1);
    }

    /// Append a copy of particle `i` with id `id` and weight `weight`
    /// (atoms), with its path, next event and shadow schedule: a split.
    pub fn push_split(&mut self, i: usize, id: u64, weight: f64) {
        self.id.push(id);
        self.event.push(self.event[i]);
        self.source.push(self.source[i]);
        self.weight.push(weight);
        self.remaining.push(self.remaining[i]);
        self.pos.push(self.pos[i]);
        self.vel.push(self.vel[i]);
        self.epoch.push(self.epoch[i]);
        self.next_event.push(self.next_event[i]);
        self.next_kind.push(self.next_kind[i]);
        self.here.push(self.here[i]);
        self.chi_here.push(self.chi_here[i]);
        self.t_here.push(self.t_here[i]);
        self.lit_from.push(self.lit_from[i]);
        self.lit_until.push(self.lit_until[i]);
        self.lit_start.push(self.lit_start[i]);
        self.toggles.push(self.toggles[i]);
        self.step_size.push(self.step_size[i]);
        self.alive.push(self.alive[i]);
    }

    /// Reserve room for `n` more particles.
    pub fn reserve(&mut self, n: usize) {
        each_column!(self, reserve_column, n);
    }

    /// Weights, atoms.
    pub fn weights(&self) -> &[f64] {
        &self.weight
    }

    /// Weights, atoms, to change (the particle budget's roulette).
    pub fn weights_mut(&mut self) -> &mut [f64] {
        &mut self.weight
    }

    /// Positions at each particle's last sighting (a time within the last
    /// step), body-centred inertial, m.
    pub fn positions(&self) -> &[Vec3] {
        &self.here
    }

    /// Reference states (position m, velocity m s^-1, body-centred
    /// inertial) at each particle's epoch: its launch or bounce, or for an
    /// integrated flight the end of its last step. Two-body energy and
    /// angular momentum computed from them hold along a closed-form path.
    pub fn reference_states(&self) -> impl Iterator<Item = (Vec3, Vec3)> + '_ {
        self.pos.iter().copied().zip(self.vel.iter().copied())
    }

    /// Ids.
    pub fn ids(&self) -> &[u64] {
        &self.id
    }

    /// Event counters (0 at launch, +1 per landing).
    pub fn events(&self) -> &[u32] {
        &self.event
    }

    /// Mark particle `i` as out of flight (removed at the next compaction).
    pub fn remove(&mut self, i: usize) {
        self.alive[i] = 0;
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
        let mut rest = Chunk {
            id: &mut self.id,
            event: &mut self.event,
            source: &mut self.source,
            weight: &mut self.weight,
            remaining: &mut self.remaining,
            pos: &mut self.pos,
            vel: &mut self.vel,
            epoch: &mut self.epoch,
            next_event: &mut self.next_event,
            next_kind: &mut self.next_kind,
            here: &mut self.here,
            chi_here: &mut self.chi_here,
            t_here: &mut self.t_here,
            lit_from: &mut self.lit_from,
            lit_until: &mut self.lit_until,
            lit_start: &mut self.lit_start,
            toggles: &mut self.toggles,
            step_size: &mut self.step_size,
            alive: &mut self.alive,
        };
        while !rest.id.is_empty() {
            let k = size.min(rest.id.len());
            let (head, tail) = rest.split_at(k);
            out.push(head);
            rest = tail;
        }
        out
    }

    /// Drop the particles that are no longer alive, keeping the order of the rest.
    pub fn compact(&mut self) {
        let n = self.len();
        self.compact_chunks(n.max(1), |c| c.compact_front());
    }

    /// Compact the bank in chunks of `size`: `front` moves each chunk's
    /// alive particles to the chunk's front and returns how many there are
    /// (it may run on many threads); the kept runs are then moved together
    /// in chunk order.
    pub fn compact_chunks<F>(&mut self, size: usize, front: F)
    where
        F: Fn(Chunk<'_>) -> usize + Sync + Send,
    {
        use rayon::prelude::*;
        let size = size.max(1);
        let kept: Vec<usize> = self.chunks(size).into_par_iter().map(front).collect();
        self.gather(size, &kept);
    }

    /// After each chunk of `size` particles has moved its `kept[k]` alive
    /// particles to its front ([`Chunk::compact_front`]), move those runs
    /// together in chunk order and drop the rest.
    pub fn gather(&mut self, size: usize, kept: &[usize]) {
        let size = size.max(1);
        let mut moves = Vec::with_capacity(kept.len());
        let mut to = 0;
        for (k, &n) in kept.iter().enumerate() {
            moves.push((k * size, n, to));
            to += n;
        }
        each_column!(self, move_column, &moves);
        each_column!(self, truncate_column, to);
    }
}

impl<'a> Chunk<'a> {
    /// Split the view at particle `k`.
    fn split_at(self, k: usize) -> (Chunk<'a>, Chunk<'a>) {
        macro_rules! cut {
            ($($f:ident),*) => {{
                $(let $f = self.$f.split_at_mut(k);)*
                (Chunk { $($f: $f.0,)* }, Chunk { $($f: $f.1,)* })
            }};
        }
        cut!(
            id, event, source, weight, remaining, pos, vel, epoch, next_event, next_kind, here,
            chi_here, t_here, lit_from, lit_until, lit_start, toggles, step_size, alive
        )
    }

    /// Move the alive particles of this chunk to its front, keeping their
    /// order; returns how many there are.
    pub fn compact_front(self) -> usize {
        // Nothing to move before the first particle that left flight.
        let Some(first) = self.alive.iter().position(|&a| a == 0) else {
            return self.alive.len();
        };
        if first > 0 {
            let (_, rest) = self.split_at(first);
            return first + rest.compact_front();
        }
        let alive: Vec<u8> = self.alive.to_vec();
        front_column(self.id, &alive);
        front_column(self.event, &alive);
        front_column(self.source, &alive);
        front_column(self.weight, &alive);
        front_column(self.remaining, &alive);
        front_column(self.pos, &alive);
        front_column(self.vel, &alive);
        front_column(self.epoch, &alive);
        front_column(self.next_event, &alive);
        front_column(self.next_kind, &alive);
        front_column(self.here, &alive);
        front_column(self.chi_here, &alive);
        front_column(self.t_here, &alive);
        front_column(self.lit_from, &alive);
        front_column(self.lit_until, &alive);
        front_column(self.lit_start, &alive);
        front_column(self.toggles, &alive);
        front_column(self.step_size, &alive);
        front_column(self.alive, &alive);
        alive.iter().filter(|&&a| a != 0).count()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn chunks_cover_the_bank_and_compact_keeps_order() {
        let mut b = ParticleBank::new();
        for i in 0..10 {
            b.push(i, 0, 1.0 + i as f64, 5.0, 0.0, [i as f64, 0.0, 0.0], [0.0; 3]);
        }
        let sizes: Vec<usize> = b.chunks(4).iter().map(|c| c.id.len()).collect();
        assert_eq!(sizes, vec![4, 4, 2]);
        for c in b.chunks(4) {
            for (i, alive) in c.alive.iter_mut().enumerate() {
                *alive = (c.id[i] % 3 != 0) as u8;
            }
        }
        let mut by_chunks = b.clone();
        b.compact();
        assert_eq!(b.ids(), &[1, 2, 4, 5, 7, 8]);
        assert_eq!(b.total_weight(), 2.0 + 3.0 + 5.0 + 6.0 + 8.0 + 9.0);
        assert_eq!(b.positions()[2], [4.0, 0.0, 0.0]);
        // Compacting chunk by chunk (as the flight does, in parallel) gives the same bank.
        by_chunks.compact_chunks(4, |c| c.compact_front());
        assert_eq!(by_chunks, b);
    }
}

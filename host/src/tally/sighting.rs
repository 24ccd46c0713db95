//! Sightings: what the flight loop hands to every tally.
//!
//! Why this exists: a tally should not have to touch the hot loop. Each
//! step, every flight segment of every particle yields one [`Sighting`]:
//! where the particle was at a time drawn uniformly within the segment, and
//! how long it was in flight during the segment (its dwell). A tally is then
//! a filter (which sightings it counts: a bin of altitude, local time and
//! latitude, sunlight), an estimator and a score (what each sighting adds):
//! see [`Tally`].
//!
//! The estimator is time-sampled: a sighting of weight w and dwell d (s)
//! adds w d / dt to the bin holding its sampled point. Because the point is
//! uniform in time over the segment, the expected contribution is w times
//! the time the segment spends in the bin divided by dt: the segment's
//! track-length (time-weighted) score, estimated with one point per
//! segment. Summed over segments and averaged over the steps of a window it
//! is an unbiased estimate of the window's time-averaged density and
//! column. Unlike a snapshot at the step's end it also counts segments that
//! end within the step (hops shorter than a step, atoms launched and landed
//! or ionized within it), at no extra Kepler solve: the sampled point
//! replaces the end-of-step position, which event-driven flight does not
//! otherwise need.
//!
//! With losses the dwell is the expected time in flight before the loss,
//! (1 - exp(-beta tau)) / beta for a segment of tau s at total loss rate
//! beta, so that a particle the loss may take part-way is counted for the
//! time it is expected to survive (the expected-value form of the score).

/// One particle seen once in one step.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Sighting {
    /// Atoms the particle stands for, atoms.
    pub weight: f64,
    /// Time the sighting stands for, s (see the module docs).
    pub dwell: f64,
    /// Altitude above the mean radius at the sampled time, m.
    pub altitude: f64,
    /// Local solar time at the sampled time, hours.
    pub local_time: f64,
    /// Latitude at the sampled time, rad.
    pub latitude: f64,
    /// Whether the sampled point is in sunlight.
    pub sunlit: bool,
    /// Index of the source module that released the atom (the order of
    /// the scenario's sources), dimensionless.
    pub source: u16,
}

/// Something that counts sightings: one filter, estimator and score.
///
/// Placing a sighting (finding its bin) reads the tally only, so the
/// engine does it on the flight's threads; scoring adds to the tally, which
/// the engine does serially in chunk order, so that sums do not depend on
/// the thread count.
pub trait Tally: Sync {
    /// Where a sighting falls in this tally.
    type Place: Send + Copy;
    /// Place one sighting.
    fn place(&self, s: &Sighting) -> Self::Place;
    /// Count one sighting at its `place`, from a step of `dt` s.
    fn score(&mut self, place: Self::Place, s: &Sighting, dt: f64);
    /// Close the step.
    fn end_step(&mut self);
}

//! Flight and landing: advance every particle to the end of the step.
//!
//! Why this exists: this is the hot loop, particles times hops. Each chunk
//! of particles flies on one thread with its own module instances, in
//! named phases over one scratch struct ([`Scratch`]):
//!
//! 1. `advance`: flight is event-driven. A particle's closed-form (Kepler)
//!    path, the time and kind of its next event (landing or the outer
//!    boundary) and the times it enters and leaves the shadow are solved
//!    once, when it is launched or bounces (`plan`). A step then evaluates
//!    only what it needs: the particle's place at one time drawn uniformly
//!    in its segment (one Kepler solve, started from the previous one's
//!    anomaly: the sighting that the tallies score and the loss records
//!    describe, `tally/sighting.rs`), the sunlit time of the segment from
//!    the known shadow times, and the event if it falls in the step. The
//!    state at the step's end is never needed. With radiation pressure the
//!    integrator flies the step, starting from the step size it reached in
//!    the previous step, and draws the sighting over its steps;
//! 2. `ionize`: the loss modules give a rate for each flight segment; the
//!    particle survives the segment with probability exp(-sum(beta) tau)
//!    (analog Monte Carlo), and a particle that does not is booked whole to
//!    one loss, drawn in proportion to the rates;
//! 3. `escape`: particles that reached the outer boundary are booked as
//!    escaped when their path is unbound there (two-body energy >= 0), or
//!    as having left the domain bound (apocentre beyond the boundary)
//!    otherwise; with `escape_when_unbound`, particles launched unbound
//!    are booked as escaped at once. The landings are collected;
//! 4. `land`: the surface interaction decides each landing in one batch;
//!    atoms `stick` (join the pool of the landing cell), are lost (buried),
//!    or `bounce` and fly on within the step, which starts another round.
//!
//! Each chunk then moves its surviving particles to its front; the bank
//! joins the chunks in order. Chunks return their books and sightings,
//! which the step reduces in chunk order, so results do not depend on the
//! thread count.

use exobound_sdk::{Impact, InFlight, Outcome, OutcomeKind, Rng, RngKey, flags, stream};
use rayon::prelude::*;

use super::{EngineError, Simulation, WorkerSet, call};
use crate::particles::{Chunk, NextEvent, SHADOW_TOGGLES};
use crate::radiation::AccelerationGrid;
use crate::tally::{DensityTally, LedgerRow, Sighting, Tally};
use crate::transport::integrate::{self, FlightEnd};
use crate::transport::kepler::{Direction, Orbit};
use crate::transport::{frames, shadow};
use crate::vec3::{Vec3, dot, norm, scale};

/// Longest stretch of a path one shadow schedule covers, s: the Sun's
/// direction is taken as fixed over it (it turns by at most ~1.5 deg in 6 h,
/// at Mercury's perihelion); a longer flight gets a new schedule.
pub const SHADOW_HORIZON: f64 = 6.0 * 3600.0;

/// Samples of a path when looking for shadow entries and exits: one per
/// this many seconds of flight, dimensionless bounds below.
const SHADOW_SPACING: f64 = 60.0;
/// Fewest and most samples per schedule.
const SHADOW_SAMPLES: (usize, usize) = (8, 64);
/// Bisection steps that place each entry or exit (to 2^-8 of a sample
/// interval: a quarter of a second for 60 s samples, against
/// photoionization lifetimes of hours).
const SHADOW_BISECTIONS: u32 = 8;

/// Everything a chunk needs to know about the step, read-only.
pub(super) struct StepContext<'a> {
    step: u64,
    model: &'a super::Model,
    config: &'a super::RunConfig,
    processes: &'a super::Processes,
    workers: &'a std::sync::Mutex<Vec<WorkerSet>>,
    tally: &'a DensityTally,
    t_end: f64,
    sun_dir: Vec3,
    r_au: f64,
    /// The radiation acceleration against heliocentric radial velocity at
    /// this step's mid-time distance, if radiation pressure is on.
    a_rad: Option<AccelerationGrid>,
    helio_radial_velocity: f64,
    n_losses: usize,
}

/// The books of one chunk for one step.
#[derive(Default)]
pub(super) struct ChunkBooks {
    hops: u64,
    landed: f64,
    stuck: f64,
    bounced: f64,
    escaped: f64,
    left_bound: f64,
    buried: f64,
    losses: Vec<f64>,
    stuck_cells: Vec<(u32, f64)>,
    lost_cells: Vec<(u32, f64)>,
    /// Particles of the chunk still in flight after the step.
    kept: usize,
    /// Every sighting of the chunk's particles in this step, in order.
    sightings: Vec<Sighting>,
    /// Where each sighting falls in the density tally (found on the chunk's thread).
    places: Vec<<DensityTally as Tally>::Place>,
}

/// How a flight segment ended.
#[derive(Clone, Copy, PartialEq)]
enum SegmentEnd {
    Running,
    Landed,
    Escaped,
    /// Removed by a loss during the segment.
    Lost,
}

/// One flight segment of one particle in one step.
struct Segment {
    /// How it ended.
    end: SegmentEnd,
    /// Its length, s.
    duration: f64,
    /// Position at the sighting, m.
    sample_r: Vec3,
    /// Velocity at the sighting, m s^-1.
    sample_v: Vec3,
    /// Time of the sighting, s since the run's start.
    sample_t: f64,
    /// Position at its end (used when it ends at an event), m.
    end_r: Vec3,
    /// Velocity at its end, m s^-1.
    end_v: Vec3,
    /// Fraction of it in sunlight, dimensionless.
    lit: f64,
}

/// Scratch of one chunk's flight, shared by the phases (allocated once per
/// chunk and step, never per particle).
struct Scratch {
    /// Indices (in the chunk) of the particles flying this round.
    active: Vec<usize>,
    /// How each active particle's segment ended.
    ends: Vec<SegmentEnd>,
    /// Length of each active particle's segment, s.
    seg_time: Vec<f64>,
    /// One loss record per active particle.
    records: Vec<InFlight>,
    /// Loss rates, one row per loss module, s^-1.
    rates: Vec<f64>,
    /// Sum of the loss rates per active particle, s^-1.
    total_rate: Vec<f64>,
    /// The landings of this round.
    impacts: Vec<Impact>,
    /// Chunk index of each landing.
    landed_idx: Vec<usize>,
    /// The surface's decisions.
    outcomes: Vec<Outcome>,
    /// One sighting per active particle of this round.
    sights: Vec<Sighting>,
}

impl Scratch {
    fn new(n: usize, n_losses: usize) -> Scratch {
        Scratch {
            active: Vec::with_capacity(n),
            ends: Vec::with_capacity(n),
            seg_time: Vec::with_capacity(n),
            records: Vec::with_capacity(if n_losses > 0 { n } else { 0 }),
            rates: Vec::new(),
            total_rate: Vec::new(),
            impacts: Vec::new(),
            landed_idx: Vec::new(),
            outcomes: Vec::new(),
            sights: Vec::with_capacity(n),
        }
    }
}

impl Simulation {
    /// Fly every particle to the end of the step.
    pub(super) fn fly(&mut self, row: &mut LedgerRow) -> Result<(), EngineError> {
        let t_end = self.time + self.config.dt;
        let t_mid = self.time + 0.5 * self.config.dt;
        let body = &self.model.body;
        let r_au = body.orbit.distance_au(t_mid);
        let ctx_values = (
            self.model.sun.sun_direction_bci(body, t_mid),
            // Filled once per step; each atom reads it at its own v_r.
            self.config
                .radiation_pressure
                .then(|| self.model.species.g_factors.acceleration_grid(r_au)),
            body.orbit.radial_velocity(t_mid),
        );
        let chunk_size = self.config.chunk_size;
        let n_losses = self.processes.losses.len();
        // Take the bank out so chunks can borrow the rest of `self` immutably.
        let mut bank = std::mem::take(&mut self.bank);
        let results: Vec<Result<ChunkBooks, EngineError>> = {
            let ctx = StepContext {
                step: self.step,
                model: &self.model,
                config: &self.config,
                processes: &self.processes,
                workers: &self.workers,
                tally: &self.tally,
                t_end,
                sun_dir: ctx_values.0,
                r_au,
                a_rad: ctx_values.1,
                helio_radial_velocity: ctx_values.2,
                n_losses,
            };
            let chunks = bank.chunks(chunk_size);
            self.pool.install(|| chunks.into_par_iter().map(|chunk| ctx.fly_chunk(chunk)).collect())
        };
        // Reduce in chunk order (deterministic at any thread count).
        let mut first_error = None;
        let mut kept = Vec::with_capacity(results.len());
        // Atoms in flight and in sunlight, averaged over the step.
        let mut sunlit = 0.0;
        for r in results {
            match r {
                Ok(b) => {
                    row.hops += b.hops;
                    row.landed += b.landed;
                    row.stuck += b.stuck;
                    row.bounced += b.bounced;
                    row.escaped += b.escaped;
                    row.left_bound += b.left_bound;
                    row.buried += b.buried;
                    for (k, l) in b.losses.iter().enumerate() {
                        row.losses[k] += l;
                    }
                    for (c, w) in b.stuck_cells {
                        self.model.reservoir.adsorbed[c as usize] += w;
                        self.maps.stuck[c as usize] += w;
                    }
                    for (c, w) in b.lost_cells {
                        self.maps.lost_above[c as usize] += w;
                    }
                    kept.push(b.kept);
                    for (sight, &place) in b.sightings.iter().zip(&b.places) {
                        self.tally.score(place, sight, self.config.dt);
                        if sight.sunlit {
                            sunlit += sight.weight * sight.dwell / self.config.dt;
                        }
                    }
                }
                Err(e) => {
                    if first_error.is_none() {
                        first_error = Some(e);
                    }
                }
            }
        }
        let result = match first_error {
            Some(e) => Err(e),
            None => {
                // Each chunk has already moved its survivors to its front.
                bank.gather(chunk_size, &kept);
                self.tally.end_step();
                self.sunlit_content.push(sunlit);
                Ok(())
            }
        };
        self.bank = bank;
        result
    }
}

impl StepContext<'_> {
    fn worker_set(&self) -> Result<WorkerSet, EngineError> {
        if let Some(set) = self.workers.lock().unwrap_or_else(|p| p.into_inner()).pop() {
            return Ok(set);
        }
        Ok(WorkerSet {
            surface: self.processes.surface.instantiate()?,
            losses: self
                .processes
                .losses
                .iter()
                .map(|m| m.instantiate())
                .collect::<Result<_, _>>()?,
        })
    }

    fn fly_chunk(&self, mut chunk: Chunk<'_>) -> Result<ChunkBooks, EngineError> {
        let mut set = self.worker_set()?;
        let result = self.fly_chunk_with(&mut set, &mut chunk);
        // A set whose module failed is dropped rather than reused.
        if result.is_ok() {
            self.workers.lock().unwrap_or_else(|p| p.into_inner()).push(set);
        }
        let mut books = result?;
        books.kept = chunk.compact_front();
        books.places = books.sightings.iter().map(|s| self.tally.place(s)).collect();
        Ok(books)
    }

    fn fly_chunk_with(
        &self,
        set: &mut WorkerSet,
        chunk: &mut Chunk<'_>,
    ) -> Result<ChunkBooks, EngineError> {
        let n = chunk.id.len();
        let mut books = ChunkBooks { losses: vec![0.0; self.n_losses], ..Default::default() };
        let mut s = Scratch::new(n, self.n_losses);
        s.active.extend((0..n).filter(|&i| chunk.alive[i] != 0 && chunk.remaining[i] > 0.0));
        while !s.active.is_empty() {
            self.advance(chunk, &mut s);
            if self.n_losses > 0 {
                self.ionize(set, chunk, &mut s, &mut books)?;
            }
            books.sightings.extend_from_slice(&s.sights);
            self.escape(chunk, &mut s, &mut books);
            if s.impacts.is_empty() {
                break;
            }
            self.land(set, chunk, &mut s, &mut books)?;
        }
        Ok(books)
    }

    /// Phase 1: each active particle to its next event or the step's end,
    /// with one sighting of it at a time drawn uniformly in the segment.
    fn advance(&self, chunk: &mut Chunk<'_>, s: &mut Scratch) {
        let body = &self.model.body;
        let radius = body.radius;
        let spin = body.sidereal_rate();
        s.ends.clear();
        s.seg_time.clear();
        s.records.clear();
        s.sights.clear();
        for &i in &s.active {
            let tau = chunk.remaining[i];
            let seg_start = self.t_end - tau;
            // Where in the segment the particle is sighted: a host stream of
            // its own, drawn before anything else of this segment.
            let mut rng = Rng::new(RngKey::at_step(
                self.config.seed,
                chunk.id[i],
                chunk.event[i],
                stream::HOST_SIGHTING,
                self.step,
            ));
            let seg = if self.a_rad.is_some() {
                self.advance_integrated(chunk, i, tau, &mut rng)
            } else {
                let u = rng.uniform();
                self.advance_kepler(chunk, i, seg_start, u)
            };
            let t = seg.duration;
            if seg.end != SegmentEnd::Running {
                // The path ends here: its last state is the reference state
                // (a landing reads its velocity from it).
                let r1 = if seg.end == SegmentEnd::Landed {
                    scale(seg.end_r, radius / norm(seg.end_r))
                } else {
                    seg.end_r
                };
                chunk.pos[i] = r1;
                chunk.vel[i] = seg.end_v;
                chunk.epoch[i] = seg_start + t;
                chunk.here[i] = r1;
                chunk.chi_here[i] = 0.0;
                chunk.t_here[i] = seg_start + t;
                chunk.next_kind[i] = NextEvent::Unplanned as u8;
            }
            chunk.remaining[i] -= t;
            s.ends.push(seg.end);
            s.seg_time.push(t);
            let (r, v, t_at) = (seg.sample_r, seg.sample_v, seg.sample_t);
            let (lat, lon_bci) = frames::lat_lon(r);
            let lon = frames::inertial_to_fixed_longitude(lon_bci, spin, t_at);
            let local_time = self.model.sun.local_time_hours(body, lon, t_at);
            let altitude = norm(r) - radius;
            s.sights.push(Sighting {
                weight: chunk.weight[i],
                dwell: t,
                altitude,
                local_time,
                latitude: lat,
                sunlit: shadow::is_sunlit(r, self.sun_dir, radius),
                source: chunk.source[i],
            });
            if self.n_losses > 0 {
                s.records.push(InFlight {
                    key: RngKey::at_step(
                        self.config.seed,
                        chunk.id[i],
                        chunk.event[i],
                        stream::FLIGHT,
                        self.step,
                    ),
                    altitude,
                    latitude: lat,
                    local_time,
                    speed: norm(v),
                    sun_radial_velocity: self.helio_radial_velocity - dot(v, self.sun_dir),
                    helio_distance: self.r_au,
                    sunlit_fraction: seg.lit,
                    time: t_at,
                });
            }
        }
    }

    /// Integrated flight (radiation pressure) of particle `i` for `tau` s,
    /// sighted at a time drawn with `rng` uniformly over the segment flown.
    fn advance_integrated(
        &self,
        chunk: &mut Chunk<'_>,
        i: usize,
        tau: f64,
        rng: &mut Rng,
    ) -> Segment {
        let body = &self.model.body;
        let field = integrate::Field {
            mu: body.gm,
            radius: body.radius,
            boundary_radius: self.config.boundary_radius,
            sun_dir: self.sun_dir,
            push: match &self.a_rad {
                Some(grid) => integrate::Push::Doppler {
                    grid,
                    helio_radial_velocity: self.helio_radial_velocity,
                },
                None => integrate::Push::Constant(0.0),
            },
        };
        let tol =
            integrate::Tolerance::relative(self.config.integrator_tolerance, body.gm, body.radius);
        let (r0, v0, h0) = (chunk.pos[i], chunk.vel[i], chunk.step_size[i]);
        // One pass over the segment; the sighting is drawn uniformly in
        // time over what was flown, by reservoir sampling over the steps.
        let f = integrate::fly_on(&field, r0, v0, tau, &tol, h0, Some(rng));
        let sampled = f.sample.unwrap_or(integrate::Sampled { t: 0.0, r: r0, v: v0 });
        let (sample_r, sample_v, sample_dt, sunlit_time) =
            (sampled.r, sampled.v, sampled.t, f.sunlit_time);
        let (end, t, r, v) = match f.end {
            FlightEnd::Running { r, v } => (SegmentEnd::Running, tau, r, v),
            FlightEnd::Landed { t, r, v } => (SegmentEnd::Landed, t, r, v),
            FlightEnd::Escaped { t, r, v } => (SegmentEnd::Escaped, t, r, v),
        };
        chunk.step_size[i] = f.next_step;
        // The integrator's state is the new reference state.
        let seg_start = self.t_end - tau;
        chunk.pos[i] = r;
        chunk.vel[i] = v;
        chunk.epoch[i] = seg_start + t;
        chunk.here[i] = sample_r;
        chunk.t_here[i] = seg_start + sample_dt;
        let lit = if t > 0.0 {
            (sunlit_time / t).clamp(0.0, 1.0)
        } else {
            shadow::is_sunlit(r0, self.sun_dir, body.radius) as u8 as f64
        };
        Segment {
            end,
            duration: t,
            sample_r,
            sample_v,
            sample_t: seg_start + sample_dt,
            end_r: r,
            end_v: v,
            lit,
        }
    }

    /// Closed-form flight of particle `i` from `seg_start` (s) to its event
    /// or the step's end, sighted at the fraction `u` of the segment.
    fn advance_kepler(&self, chunk: &mut Chunk<'_>, i: usize, seg_start: f64, u: f64) -> Segment {
        let body = &self.model.body;
        let orbit = Orbit::from_state(body.gm, chunk.pos[i], chunk.vel[i]);
        if NextEvent::from_code(chunk.next_kind[i]) == NextEvent::Unplanned {
            self.plan(chunk, i, &orbit);
        }
        let kind = NextEvent::from_code(chunk.next_kind[i]);
        if kind == NextEvent::Unbound {
            let (r, v) = (chunk.pos[i], chunk.vel[i]);
            return Segment {
                end: SegmentEnd::Escaped,
                duration: 0.0,
                sample_r: r,
                sample_v: v,
                sample_t: seg_start,
                end_r: r,
                end_v: v,
                lit: shadow::is_sunlit(r, self.sun_dir, body.radius) as u8 as f64,
            };
        }
        let event_now = matches!(kind, NextEvent::Landing | NextEvent::Boundary)
            && chunk.next_event[i] <= self.t_end;
        // The segment's end: the event, or the step's end (where the state
        // itself is not needed: the path stays planned).
        let (end, seg_end, end_r, end_v) = if event_now {
            let (target, direction, end) = if kind == NextEvent::Landing {
                (body.radius, Direction::Descending, SegmentEnd::Landed)
            } else {
                (self.config.boundary_radius, Direction::Ascending, SegmentEnd::Escaped)
            };
            match orbit.crossing(target, direction) {
                Some(c) => (end, chunk.next_event[i].max(seg_start), c.r, c.v),
                // Planned from the same state, so this does not happen; fly on.
                None => (SegmentEnd::Running, self.t_end, chunk.pos[i], chunk.vel[i]),
            }
        } else {
            (SegmentEnd::Running, self.t_end, chunk.pos[i], chunk.vel[i])
        };
        let t = seg_end - seg_start;
        // The sighting. The Kepler solve starts from where the last one
        // ended, moved on at d(chi)/dt = sqrt(mu) / r.
        let t_s = seg_start + u * t;
        let guess = chunk.chi_here[i]
            + (t_s - chunk.t_here[i]) * body.gm.sqrt() / norm(chunk.here[i]).max(body.radius);
        let (sample_r, sample_v, chi) = orbit.propagate_near(t_s - chunk.epoch[i], guess);
        chunk.here[i] = sample_r;
        chunk.chi_here[i] = chi;
        chunk.t_here[i] = t_s;
        let lit = if self.n_losses == 0 {
            0.0
        } else if t > 0.0 {
            (self.sunlit_time(chunk, i, &orbit, seg_start, seg_end) / t).clamp(0.0, 1.0)
        } else {
            shadow::is_sunlit(sample_r, self.sun_dir, body.radius) as u8 as f64
        };
        Segment { end, duration: t, sample_r, sample_v, sample_t: t_s, end_r, end_v, lit }
    }

    /// Solve particle `i`'s path once: the time and kind of its next event,
    /// and (when losses need it) its shadow schedule.
    fn plan(&self, chunk: &mut Chunk<'_>, i: usize, orbit: &Orbit) {
        let (radius, boundary) = (self.model.body.radius, self.config.boundary_radius);
        // Each crossing as (anomaly m^0.5, time s, position m): solved once
        // here and handed to the shadow schedule.
        let cross = |r: f64, d: Direction| {
            orbit.anomaly_of_crossing(r, d).map(|chi| {
                let (t, pos) = orbit.at_anomaly(chi);
                (chi, t, pos)
            })
        };
        let land = cross(radius, Direction::Descending);
        let unbound_now = self.config.escape_when_unbound && !orbit.is_bound() && land.is_none();
        let esc = if unbound_now {
            None
        } else if !orbit.is_bound() || orbit.apoapsis() >= boundary {
            cross(boundary, Direction::Ascending)
        } else {
            None
        };
        let (kind, end) = match (land, esc) {
            _ if unbound_now => (NextEvent::Unbound, None),
            (Some(a), Some(b)) if b.1 < a.1 => (NextEvent::Boundary, Some(b)),
            (Some(a), _) => (NextEvent::Landing, Some(a)),
            (None, Some(b)) => (NextEvent::Boundary, Some(b)),
            (None, None) => (NextEvent::Never, None),
        };
        let t = match (kind, end) {
            (NextEvent::Unbound, _) => 0.0,
            (_, Some((_, t, _))) => t,
            _ => f64::INFINITY,
        };
        chunk.next_kind[i] = kind as u8;
        chunk.next_event[i] = chunk.epoch[i] + t;
        chunk.lit_from[i] = f64::INFINITY;
        if self.n_losses > 0 && kind != NextEvent::Unbound {
            let from = chunk.epoch[i];
            self.schedule_shadow(chunk, i, orbit, from, end.map(|(chi, _, r)| (chi, r)));
        }
    }

    /// Sunlit time (s) of particle `i` between `a` and `b` (s), from its
    /// shadow schedule, renewed first if it does not cover [a, b].
    fn sunlit_time(&self, chunk: &mut Chunk<'_>, i: usize, orbit: &Orbit, a: f64, b: f64) -> f64 {
        // A segment that ends at the planned event may end an ulp past it
        // (seg_start + (event - seg_start)); that is still covered.
        let slack = 1e-9 * (1.0 + b.abs());
        if !(chunk.lit_from[i] <= a + slack && b <= chunk.lit_until[i] + slack) {
            self.schedule_shadow(chunk, i, orbit, a, None);
        }
        lit_between(chunk.lit_start[i] != 0, chunk.lit_from[i], &chunk.toggles[i], a, b)
    }

    /// Find where particle `i`'s path enters and leaves the shadow from
    /// `from` (s) to its next event or [`SHADOW_HORIZON`] later.
    ///
    /// A two-body path lies in a plane through the body's centre, so its
    /// track is a great circle. If both ends lie on the day side (r . s >= 0)
    /// and the stretch sweeps less than half a turn, every point between them
    /// is on the day side too (r . s along a great circle is A cos(phi -
    /// phi0), negative on one contiguous half-turn only) and so sunlit. Else
    /// the path is sampled at equal steps of its universal anomaly (no Kepler
    /// solve per sample) and each change between sunlit and shadowed samples
    /// is placed by bisection; this catches paths that rise out of the shadow
    /// above the night side near the terminator. At most [`SHADOW_TOGGLES`]
    /// changes are kept (a ballistic path has at most two).
    fn schedule_shadow(
        &self,
        chunk: &mut Chunk<'_>,
        i: usize,
        orbit: &Orbit,
        from: f64,
        event: Option<(f64, Vec3)>,
    ) {
        let radius = self.model.body.radius;
        let sun = self.sun_dir;
        let epoch = chunk.epoch[i];
        let t_event = chunk.next_event[i];
        let mut until = t_event.min(from + SHADOW_HORIZON);
        if let Some(p) = orbit.period() {
            // A path that never ends (no event) is scheduled one orbit at most.
            until = until.min(from + 0.999 * p);
        }
        chunk.lit_from[i] = from;
        chunk.lit_until[i] = until;
        chunk.toggles[i] = [f64::INFINITY; SHADOW_TOGGLES];
        // The ends as (anomaly m^0.5, position m); the event's from `plan`
        // when it has them.
        let at = |chi: f64| (chi, orbit.at_anomaly(chi).1);
        let (chi_a, ra) =
            if from == epoch { (0.0, chunk.pos[i]) } else { at(orbit.anomaly_at(from - epoch)) };
        let (chi_b, rb) = match event {
            Some(e) if until == t_event => e,
            _ if until == t_event => {
                let target = if NextEvent::from_code(chunk.next_kind[i]) == NextEvent::Boundary {
                    (self.config.boundary_radius, Direction::Ascending)
                } else {
                    (radius, Direction::Descending)
                };
                at(orbit
                    .anomaly_of_crossing(target.0, target.1)
                    .unwrap_or_else(|| orbit.anomaly_at(until - epoch)))
            }
            _ => at(orbit.anomaly_at(until - epoch)),
        };
        let lit_a = shadow::is_sunlit(ra, sun, radius);
        chunk.lit_start[i] = lit_a as u8;
        let (day_a, day_b) = (dot(ra, sun) >= 0.0, dot(rb, sun) >= 0.0);
        if day_a == day_b {
            // The arc swept from a to b, in the sense of the motion, is
            // less than half a turn when (ra x rb) points along the angular
            // momentum (or both ends share a direction, as on a radial
            // path), provided the stretch is less than one revolution.
            let ab = crate::vec3::cross(ra, rb);
            let h = orbit.angular_momentum_vector();
            let half = dot(ab, h) > 0.0 || (norm(ab) == 0.0 && dot(ra, rb) > 0.0);
            let within_turn = orbit.period().is_none_or(|p| until - from < p);
            if half && within_turn {
                if day_a {
                    // All on the day side, so all sunlit.
                    return;
                }
                // All on the night side. Along a great circle the cosine of
                // the angle theta to the anti-Sun axis is A cos(phi - phi0),
                // so on the arc sin(theta) is largest at an end; the distance
                // from the axis, |r| sin(theta), is then at most
                // r_max x that, and if this is below the radius the whole
                // stretch is in the shadow.
                let sin_theta = |r: Vec3| {
                    let c = -dot(r, sun) / norm(r);
                    (1.0 - c * c).max(0.0).sqrt()
                };
                let r_max =
                    if orbit.is_bound() { orbit.apoapsis() } else { norm(ra).max(norm(rb)) };
                if r_max * sin_theta(ra).max(sin_theta(rb)) < radius {
                    return;
                }
            }
        }
        let span = until - from;
        let n = ((span / SHADOW_SPACING).ceil() as usize).clamp(SHADOW_SAMPLES.0, SHADOW_SAMPLES.1);
        let d_chi = (chi_b - chi_a) / n as f64;
        let mut found = 0;
        let mut prev = (chi_a, lit_a);
        for k in 1..=n {
            let chi = if k == n { chi_b } else { chi_a + d_chi * k as f64 };
            let lit = shadow::is_sunlit(orbit.at_anomaly(chi).1, sun, radius);
            if lit != prev.1 {
                // Bisect between the two samples for the change.
                let (mut lo, mut hi) = (prev.0, chi);
                for _ in 0..SHADOW_BISECTIONS {
                    let mid = 0.5 * (lo + hi);
                    if shadow::is_sunlit(orbit.at_anomaly(mid).1, sun, radius) == prev.1 {
                        lo = mid;
                    } else {
                        hi = mid;
                    }
                }
                let t = epoch + orbit.at_anomaly(0.5 * (lo + hi)).0;
                if found < SHADOW_TOGGLES {
                    chunk.toggles[i][found] = t.clamp(from, until);
                    found += 1;
                }
            }
            prev = (chi, lit);
        }
    }

    /// Phase 2: survival over each segment, booked per loss module.
    fn ionize(
        &self,
        set: &mut WorkerSet,
        chunk: &mut Chunk<'_>,
        s: &mut Scratch,
        books: &mut ChunkBooks,
    ) -> Result<(), EngineError> {
        let n_losses = self.n_losses;
        let spin = self.model.body.sidereal_rate();
        let m_len = s.records.len();
        s.total_rate.clear();
        s.total_rate.resize(m_len, 0.0);
        // One row of rates per loss module, in one buffer reused by every round.
        s.rates.clear();
        s.rates.resize(n_losses * m_len, 0.0);
        for (loss, row) in set.losses.iter_mut().zip(s.rates.chunks_mut(m_len.max(1))) {
            call(loss.loss_rate(&s.records, &mut row[..m_len]))?;
            for (t, r) in s.total_rate.iter_mut().zip(row.iter()) {
                *t += r;
            }
        }
        // The sightings' dwell: the expected time in flight before the
        // loss, (1 - exp(-beta tau)) / beta (sighting.rs).
        for (sight, &beta) in s.sights.iter_mut().zip(&s.total_rate) {
            let bt = beta * sight.dwell;
            if bt > 1e-8 {
                sight.dwell = (1.0 - exobound_sdk::math::exp(-bt)) / beta;
            } else if bt > 0.0 {
                // Series, where 1 - exp(-x) would cancel.
                sight.dwell *= 1.0 - 0.5 * bt;
            }
        }
        for (k, &i) in s.active.iter().enumerate() {
            let beta = s.total_rate[k];
            if !(beta > 0.0) {
                continue;
            }
            // Analog loss: the atom survives the segment with probability
            // exp(-beta tau); if not, the loss that took it is drawn in
            // proportion to the rates.
            let survive = exobound_sdk::math::exp(-beta * s.seg_time[k]);
            // The host's own stream: never the key a loss module got.
            let mut rng = Rng::new(RngKey::at_step(
                self.config.seed,
                chunk.id[i],
                chunk.event[i],
                stream::HOST_SURVIVAL,
                self.step,
            ));
            if rng.uniform() < survive {
                continue;
            }
            let w = chunk.weight[i];
            let pick = rng.uniform() * beta;
            let mut acc = 0.0;
            let mut module = n_losses - 1;
            for m in 0..n_losses {
                acc += s.rates[m * m_len + k];
                if pick < acc {
                    module = m;
                    break;
                }
            }
            books.losses[module] += w;
            s.ends[k] = SegmentEnd::Lost;
            chunk.alive[i] = 0;
            let (lat, lon_bci) = frames::lat_lon(chunk.here[i]);
            let lon = frames::inertial_to_fixed_longitude(lon_bci, spin, s.records[k].time);
            books.lost_cells.push((self.model.grid.cell_of(lat, lon) as u32, w));
        }
        Ok(())
    }

    /// Phase 3: book the escapes, and collect the landings.
    fn escape(&self, chunk: &mut Chunk<'_>, s: &mut Scratch, books: &mut ChunkBooks) {
        let body = &self.model.body;
        let spin = body.sidereal_rate();
        s.impacts.clear();
        s.landed_idx.clear();
        for (k, &i) in s.active.iter().enumerate() {
            match s.ends[k] {
                SegmentEnd::Running | SegmentEnd::Lost => {}
                SegmentEnd::Escaped => {
                    // The segment's end state is the reference state: at the
                    // boundary, or at launch for the unbound shortcut.
                    if escapes(body.gm, chunk.pos[i], chunk.vel[i]) {
                        books.escaped += chunk.weight[i];
                    } else {
                        books.left_bound += chunk.weight[i];
                    }
                    chunk.alive[i] = 0;
                }
                SegmentEnd::Landed => {
                    let t_at = self.t_end - chunk.remaining[i];
                    let (lat, lon, v_rel) =
                        frames::surface_view(chunk.here[i], chunk.vel[i], spin, t_at);
                    let cell = self.model.grid.cell_of(lat, lon);
                    let cos_sza = self.model.sun.cos_sza(body, lat, lon, t_at);
                    books.landed += chunk.weight[i];
                    books.hops += 1;
                    s.impacts.push(Impact {
                        key: RngKey::at_step(
                            self.config.seed,
                            chunk.id[i],
                            chunk.event[i],
                            stream::SURFACE,
                            self.step,
                        ),
                        cell: cell as u32,
                        flags: if cos_sza > 0.0 { flags::SUNLIT } else { 0 },
                        latitude: lat,
                        longitude: lon,
                        local_time: self.model.sun.local_time_hours(body, lon, t_at),
                        cos_sza,
                        temperature: self.model.temperature.at(cos_sza, self.r_au),
                        adsorbed: self.model.reservoir.density_cm2(&self.model.grid, cell),
                        mass: self.model.species.mass,
                        velocity: exobound_sdk::Velocity {
                            east: v_rel[0],
                            north: v_rel[1],
                            up: v_rel[2],
                        },
                        time: t_at,
                    });
                    s.landed_idx.push(i);
                }
            }
        }
    }

    /// Phase 4: stick, bounce or lost, in one batch; bounced particles fly
    /// on in the next round.
    fn land(
        &self,
        set: &mut WorkerSet,
        chunk: &mut Chunk<'_>,
        s: &mut Scratch,
        books: &mut ChunkBooks,
    ) -> Result<(), EngineError> {
        let body = &self.model.body;
        s.active.clear();
        s.outcomes.clear();
        s.outcomes.resize(s.impacts.len(), Outcome::default());
        call(set.surface.land(&s.impacts, &mut s.outcomes))?;
        for ((hit, out), &i) in s.impacts.iter().zip(&s.outcomes).zip(&s.landed_idx) {
            let w = chunk.weight[i];
            match OutcomeKind::from_code(out.kind) {
                Some(OutcomeKind::Stick) => {
                    books.stuck += w;
                    books.stuck_cells.push((hit.cell, w));
                    chunk.alive[i] = 0;
                }
                Some(OutcomeKind::Lost) | None => {
                    books.buried += w;
                    chunk.alive[i] = 0;
                }
                Some(OutcomeKind::Bounce) => {
                    books.bounced += w;
                    let v = out.velocity;
                    let (r, vel) = frames::launch_state(
                        body.radius,
                        hit.latitude,
                        hit.longitude,
                        [v.east, v.north, v.up],
                        body.sidereal_rate(),
                        hit.time,
                    );
                    chunk.pos[i] = r;
                    chunk.vel[i] = vel;
                    chunk.here[i] = r;
                    chunk.chi_here[i] = 0.0;
                    chunk.t_here[i] = hit.time;
                    chunk.epoch[i] = hit.time;
                    chunk.next_kind[i] = NextEvent::Unplanned as u8;
                    chunk.step_size[i] = 0.0;
                    chunk.event[i] += 1;
                    if chunk.remaining[i] > 0.0 {
                        s.active.push(i);
                    }
                }
            }
        }
        Ok(())
    }
}

/// Whether a particle at `r` (m) with velocity `v` (m s^-1) in the field
/// of a point mass `mu` (m^3 s^-2) is unbound: specific two-body energy
/// v^2 / 2 - mu / r >= 0 (Jeans' criterion for escape; with radiation
/// pressure this is the energy where it leaves the domain).
fn escapes(mu: f64, r: Vec3, v: Vec3) -> bool {
    0.5 * dot(v, v) >= mu / norm(r)
}

/// Sunlit time (s) within [a, b] (s) of a path that is sunlit at `from`
/// when `lit_start`, and changes between sunlit and shadowed at `toggles`
/// (ascending, padded with +infinity).
fn lit_between(lit_start: bool, from: f64, toggles: &[f64; SHADOW_TOGGLES], a: f64, b: f64) -> f64 {
    let mut lit = lit_start;
    let mut t = from;
    let mut total = 0.0;
    for &tog in toggles.iter().take_while(|t| t.is_finite()) {
        if lit {
            total += (tog.min(b) - t.max(a)).max(0.0);
        }
        lit = !lit;
        t = tog;
        if t >= b {
            return total;
        }
    }
    if lit {
        total += (b - t.max(a)).max(0.0);
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lit_time_follows_the_toggles() {
        let inf = f64::INFINITY;
        // Sunlit from 0, shadow from 10 to 30.
        let tog = [10.0, 30.0, inf, inf];
        assert_eq!(lit_between(true, 0.0, &tog, 0.0, 40.0), 20.0);
        assert_eq!(lit_between(true, 0.0, &tog, 5.0, 15.0), 5.0);
        assert_eq!(lit_between(true, 0.0, &tog, 12.0, 20.0), 0.0);
        assert_eq!(lit_between(true, 0.0, &tog, 25.0, 35.0), 5.0);
        // Shadowed throughout.
        assert_eq!(lit_between(false, 0.0, &[inf; 4], 3.0, 9.0), 0.0);
        assert_eq!(lit_between(true, 0.0, &[inf; 4], 3.0, 9.0), 6.0);
    }
}

//! Flight and landing: advance every particle to the end of the step.
//!
//! Why this exists: this is the hot loop, particles times hops. Each chunk
//! of particles flies on one thread with its own module instances:
//!
//! 1. `fly`: every active particle follows its path (closed-form Kepler
//!    hop, or the integrator when radiation pressure is on) until it lands,
//!    reaches the outer boundary (`escape`), or the step ends;
//! 2. `ionize`: the loss modules give a rate for each flight segment; the
//!    particle survives the segment with probability exp(-sum(beta) tau)
//!    (analog Monte Carlo, so particle counts stay meaningful for the
//!    particle budget), and a particle that does not is booked whole to one
//!    loss, drawn in proportion to the rates;
//! 3. `land`: the surface interaction decides each landing in one batch;
//!    atoms `stick` (join the pool of the landing cell), are lost (buried),
//!    or `bounce` and fly on within the step, which starts another round.
//!
//! Chunks return their books, which the step reduces in chunk order.

use exobound_sdk::{Impact, InFlight, Outcome, OutcomeKind, Rng, RngKey, flags, stream};
use rayon::prelude::*;

use super::{EngineError, Simulation, WorkerSet, call};
use crate::particles::Chunk;
use crate::tally::LedgerRow;
use crate::transport::integrate::{self, FlightEnd};
use crate::transport::kepler::{Direction, Orbit};
use crate::transport::{frames, shadow};
use crate::vec3::{Vec3, dot, norm, scale};

/// Everything a chunk needs to know about the step, read-only.
pub(super) struct StepContext<'a> {
    step: u64,
    model: &'a super::Model,
    config: &'a super::RunConfig,
    processes: &'a super::Processes,
    workers: &'a std::sync::Mutex<Vec<WorkerSet>>,
    t_end: f64,
    sun_dir: Vec3,
    r_au: f64,
    a_rad: f64,
    helio_radial_velocity: f64,
}

/// The books of one chunk for one step.
#[derive(Default)]
pub(super) struct ChunkBooks {
    hops: u64,
    landed: f64,
    stuck: f64,
    bounced: f64,
    escaped: f64,
    buried: f64,
    losses: Vec<f64>,
    stuck_cells: Vec<(u32, f64)>,
    lost_cells: Vec<(u32, f64)>,
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

impl Simulation {
    /// Fly every particle to the end of the step.
    pub(super) fn fly(&mut self, row: &mut LedgerRow) -> Result<(), EngineError> {
        let t_end = self.time + self.config.dt;
        let t_mid = self.time + 0.5 * self.config.dt;
        let body = &self.model.body;
        let r_au = body.orbit.distance_au(t_mid);
        let ctx_values = (
            self.model.sun.sun_direction_bci(body, t_mid),
            if self.config.radiation_pressure {
                self.model.species.radiation_acceleration_at(r_au)
            } else {
                0.0
            },
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
                t_end,
                sun_dir: ctx_values.0,
                r_au,
                a_rad: ctx_values.1,
                helio_radial_velocity: ctx_values.2,
            };
            let chunks = bank.chunks(chunk_size);
            self.pool.install(|| {
                chunks.into_par_iter().map(|chunk| ctx.fly_chunk(chunk, n_losses)).collect()
            })
        };
        // Reduce in chunk order (deterministic at any thread count).
        let mut first_error = None;
        for r in results {
            match r {
                Ok(b) => {
                    row.hops += b.hops;
                    row.landed += b.landed;
                    row.stuck += b.stuck;
                    row.bounced += b.bounced;
                    row.escaped += b.escaped;
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
                }
                Err(e) => {
                    if first_error.is_none() {
                        first_error = Some(e);
                    }
                }
            }
        }
        bank.compact();
        self.bank = bank;
        match first_error {
            Some(e) => Err(e),
            None => Ok(()),
        }
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

    fn fly_chunk(&self, chunk: Chunk<'_>, n_losses: usize) -> Result<ChunkBooks, EngineError> {
        let mut set = self.worker_set()?;
        let result = self.fly_chunk_with(&mut set, chunk, n_losses);
        // A set whose module failed is dropped rather than reused.
        if result.is_ok() {
            self.workers.lock().unwrap_or_else(|p| p.into_inner()).push(set);
        }
        result
    }

    fn fly_chunk_with(
        &self,
        set: &mut WorkerSet,
        chunk: Chunk<'_>,
        n_losses: usize,
    ) -> Result<ChunkBooks, EngineError> {
        let body = &self.model.body;
        let (mu, radius) = (body.gm, body.radius);
        let spin = body.sidereal_rate();
        let boundary = self.config.boundary_radius;
        let seed = self.config.seed;
        // Flight draws must differ from step to step for the same particle
        // and event, so the step is a part of every key.
        let step = self.step;
        let mass = self.model.species.mass;
        let n = chunk.id.len();
        let mut books = ChunkBooks { losses: vec![0.0; n_losses], ..Default::default() };
        // Scratch for the rounds of this chunk (allocated per chunk, not per particle).
        let mut active: Vec<usize> =
            (0..n).filter(|&i| chunk.alive[i] && chunk.remaining[i] > 0.0).collect();
        let mut ends: Vec<SegmentEnd> = Vec::with_capacity(n);
        let mut seg_time: Vec<f64> = Vec::with_capacity(n);
        let mut records: Vec<InFlight> = Vec::with_capacity(n);
        let mut rates: Vec<f64> = Vec::with_capacity(n * n_losses);
        let mut total_rate: Vec<f64> = Vec::with_capacity(n);
        let mut impacts: Vec<Impact> = Vec::new();
        let mut landed_idx: Vec<usize> = Vec::new();
        let mut outcomes: Vec<Outcome> = Vec::new();
        while !active.is_empty() {
            ends.clear();
            seg_time.clear();
            records.clear();
            // fly: each active particle to its next event or the step's end.
            for &i in &active {
                let (r0, v0, tau) = (chunk.pos[i], chunk.vel[i], chunk.remaining[i]);
                let sunlit0 = shadow::is_sunlit(r0, self.sun_dir, radius);
                let (end, t, r1, v1, sunlit_time) = if self.a_rad > 0.0 {
                    let f = integrate::fly(
                        mu,
                        radius,
                        boundary,
                        self.sun_dir,
                        self.a_rad,
                        r0,
                        v0,
                        tau,
                        self.config.integrator_tolerance,
                    );
                    match f.end {
                        FlightEnd::Running { r, v } => {
                            (SegmentEnd::Running, tau, r, v, f.sunlit_time)
                        }
                        FlightEnd::Landed { t, r, v } => {
                            (SegmentEnd::Landed, t, r, v, f.sunlit_time)
                        }
                        FlightEnd::Escaped { t, r, v } => {
                            (SegmentEnd::Escaped, t, r, v, f.sunlit_time)
                        }
                    }
                } else {
                    let orbit = Orbit::from_state(mu, r0, v0);
                    let land = orbit.crossing(radius, Direction::Descending);
                    let unbound_now =
                        self.config.escape_when_unbound && !orbit.is_bound() && land.is_none();
                    let esc = if unbound_now {
                        None
                    } else if !orbit.is_bound() || orbit.apoapsis() >= boundary {
                        orbit.crossing(boundary, Direction::Ascending)
                    } else {
                        None
                    };
                    let first = match (land, esc) {
                        (Some(a), Some(b)) => Some(if a.t <= b.t {
                            (SegmentEnd::Landed, a)
                        } else {
                            (SegmentEnd::Escaped, b)
                        }),
                        (Some(a), None) => Some((SegmentEnd::Landed, a)),
                        (None, Some(b)) => Some((SegmentEnd::Escaped, b)),
                        (None, None) => None,
                    };
                    let (end, t, r1, v1) = if unbound_now {
                        (SegmentEnd::Escaped, 0.0, r0, v0)
                    } else {
                        match first {
                            Some((end, c)) if c.t <= tau => (end, c.t, c.r, c.v),
                            _ => {
                                let (r, v) = orbit.propagate(tau);
                                (SegmentEnd::Running, tau, r, v)
                            }
                        }
                    };
                    let lit = if n_losses > 0 {
                        sunlit_time(&orbit, r0, r1, t, self.sun_dir, radius)
                    } else {
                        0.0
                    };
                    (end, t, r1, v1, lit)
                };
                let r1 = if end == SegmentEnd::Landed { scale(r1, radius / norm(r1)) } else { r1 };
                chunk.pos[i] = r1;
                chunk.vel[i] = v1;
                chunk.remaining[i] -= t;
                ends.push(end);
                seg_time.push(t);
                if n_losses > 0 {
                    let t_at = self.t_end - chunk.remaining[i];
                    let (lat, lon_bci) = frames::lat_lon(r1);
                    let lon = frames::inertial_to_fixed_longitude(lon_bci, spin, t_at);
                    records.push(InFlight {
                        key: RngKey::at_step(
                            seed,
                            chunk.id[i],
                            chunk.event[i],
                            stream::FLIGHT,
                            step,
                        ),
                        altitude: norm(r1) - radius,
                        latitude: lat,
                        local_time: self.model.sun.local_time_hours(body, lon, t_at),
                        speed: norm(v1),
                        sun_radial_velocity: self.helio_radial_velocity - dot(v1, self.sun_dir),
                        helio_distance: self.r_au,
                        sunlit_fraction: if t > 0.0 {
                            (sunlit_time / t).clamp(0.0, 1.0)
                        } else {
                            sunlit0 as u8 as f64
                        },
                        time: t_at,
                    });
                }
            }
            // ionize: survival over each segment, booked per loss module.
            if n_losses > 0 {
                total_rate.clear();
                total_rate.resize(records.len(), 0.0);
                // One row of rates per loss module, in one buffer reused by every round.
                let m_len = records.len();
                rates.clear();
                rates.resize(n_losses * m_len, 0.0);
                for (loss, row) in set.losses.iter_mut().zip(rates.chunks_mut(m_len.max(1))) {
                    call(loss.loss_rate(&records, &mut row[..m_len]))?;
                    for (t, r) in total_rate.iter_mut().zip(row.iter()) {
                        *t += r;
                    }
                }
                for (k, &i) in active.iter().enumerate() {
                    let beta = total_rate[k];
                    if !(beta > 0.0) {
                        continue;
                    }
                    // Analog loss: the atom survives the segment with
                    // probability exp(-beta tau); if not, the loss that took it
                    // is drawn in proportion to the rates.
                    let survive = exobound_sdk::math::exp(-beta * seg_time[k]);
                    // The host's own stream: never the key a loss module got.
                    let mut rng = Rng::new(RngKey::at_step(
                        seed,
                        chunk.id[i],
                        chunk.event[i],
                        stream::HOST_SURVIVAL,
                        step,
                    ));
                    let u = rng.uniform();
                    if u < survive {
                        continue;
                    }
                    let w = chunk.weight[i];
                    let pick = rng.uniform() * beta;
                    let mut acc = 0.0;
                    let mut module = n_losses - 1;
                    for m in 0..n_losses {
                        acc += rates[m * m_len + k];
                        if pick < acc {
                            module = m;
                            break;
                        }
                    }
                    books.losses[module] += w;
                    ends[k] = SegmentEnd::Lost;
                    chunk.alive[i] = false;
                    let (lat, lon_bci) = frames::lat_lon(chunk.pos[i]);
                    let lon = frames::inertial_to_fixed_longitude(lon_bci, spin, records[k].time);
                    books.lost_cells.push((self.model.grid.cell_of(lat, lon) as u32, w));
                }
            }
            // escape, and collect the landings.
            impacts.clear();
            landed_idx.clear();
            for (k, &i) in active.iter().enumerate() {
                match ends[k] {
                    SegmentEnd::Running | SegmentEnd::Lost => {}
                    SegmentEnd::Escaped => {
                        books.escaped += chunk.weight[i];
                        chunk.alive[i] = false;
                    }
                    SegmentEnd::Landed => {
                        let t_at = self.t_end - chunk.remaining[i];
                        let (lat, lon, v_rel) =
                            frames::surface_view(chunk.pos[i], chunk.vel[i], spin, t_at);
                        let cell = self.model.grid.cell_of(lat, lon);
                        let cos_sza = self.model.sun.cos_sza(body, lat, lon, t_at);
                        books.landed += chunk.weight[i];
                        books.hops += 1;
                        impacts.push(Impact {
                            key: RngKey::at_step(
                                seed,
                                chunk.id[i],
                                chunk.event[i],
                                stream::SURFACE,
                                step,
                            ),
                            cell: cell as u32,
                            flags: if cos_sza > 0.0 { flags::SUNLIT } else { 0 },
                            latitude: lat,
                            longitude: lon,
                            local_time: self.model.sun.local_time_hours(body, lon, t_at),
                            cos_sza,
                            temperature: self.model.temperature.at(cos_sza, self.r_au),
                            adsorbed: self.model.reservoir.density_cm2(&self.model.grid, cell),
                            mass,
                            velocity: exobound_sdk::Velocity {
                                east: v_rel[0],
                                north: v_rel[1],
                                up: v_rel[2],
                            },
                            time: t_at,
                        });
                        landed_idx.push(i);
                    }
                }
            }
            // land: stick, bounce or lost, in one batch.
            active.clear();
            if impacts.is_empty() {
                break;
            }
            outcomes.clear();
            outcomes.resize(impacts.len(), Outcome::default());
            call(set.surface.land(&impacts, &mut outcomes))?;
            for ((hit, out), &i) in impacts.iter().zip(&outcomes).zip(&landed_idx) {
                let w = chunk.weight[i];
                match OutcomeKind::from_code(out.kind) {
                    Some(OutcomeKind::Stick) => {
                        books.stuck += w;
                        books.stuck_cells.push((hit.cell, w));
                        chunk.alive[i] = false;
                    }
                    Some(OutcomeKind::Lost) | None => {
                        books.buried += w;
                        chunk.alive[i] = false;
                    }
                    Some(OutcomeKind::Bounce) => {
                        books.bounced += w;
                        let v = out.velocity;
                        let (r, vel) = frames::launch_state(
                            radius,
                            hit.latitude,
                            hit.longitude,
                            [v.east, v.north, v.up],
                            spin,
                            hit.time,
                        );
                        chunk.pos[i] = r;
                        chunk.vel[i] = vel;
                        chunk.event[i] += 1;
                        if chunk.remaining[i] > 0.0 {
                            active.push(i);
                        }
                    }
                }
            }
        }
        Ok(books)
    }
}

/// Sub-intervals sampled when a Kepler segment may pass through the shadow.
const SHADOW_SAMPLES: u32 = 8;

/// Time spent in sunlight on the Kepler segment from `r0` to `r1` lasting
/// `t` s, with the Sun along `sun` and the shadow cylinder of radius
/// `radius` (m).
///
/// A two-body path lies in a plane through the body's centre, so its track
/// is a great circle. If both ends lie on the day side (r . s >= 0) and the
/// segment sweeps less than half a turn, every point between them is on the
/// day side too (r . s along a great circle is A cos(phi - phi0), negative
/// on one contiguous half-turn only) and so sunlit, whatever its altitude.
/// Otherwise the segment is sampled at the midpoints of
/// [`SHADOW_SAMPLES`] equal sub-intervals, which catches paths that rise out
/// of the shadow above the night side near the terminator.
fn sunlit_time(orbit: &Orbit, r0: Vec3, r1: Vec3, t: f64, sun: Vec3, radius: f64) -> f64 {
    if t <= 0.0 {
        return 0.0;
    }
    let day0 = dot(r0, sun) >= 0.0;
    let day1 = dot(r1, sun) >= 0.0;
    if day0 && day1 {
        let h = crate::vec3::cross(r0, r1);
        let sweep = exobound_sdk::math::atan2(norm(h), dot(r0, r1));
        let short = orbit.period().is_none_or(|p| t < 0.5 * p);
        if short && sweep < std::f64::consts::PI {
            return t;
        }
    }
    let dt = t / SHADOW_SAMPLES as f64;
    let lit = (0..SHADOW_SAMPLES)
        .filter(|k| shadow::is_sunlit(orbit.propagate((*k as f64 + 0.5) * dt).0, sun, radius))
        .count();
    lit as f64 * dt
}

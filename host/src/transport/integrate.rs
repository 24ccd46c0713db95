//! Flight with radiation pressure: adaptive Dormand-Prince 5(4) integration.
//!
//! Why this exists: resonant scattering of sunlight pushes sodium and
//! potassium atoms away from the Sun with an acceleration of a few per
//! cent of the Moon's gravity and up to about half of Mercury's, so hops
//! and escape are no longer conic sections. The push is switched off in
//! the body's shadow, which makes the force discontinuous; this module
//! integrates the motion with error control, treats shadow entry and exit
//! as events at which the step is cut and restarted, and locates landing
//! (descending through the surface) and escape (ascending through the
//! outer boundary) to well under a microsecond.
//!
//! Equation of motion (Newton's second law, body-centred inertial frame):
//!   d2r/dt2 = -mu r / |r|^3 - a_rad(v_r) s_hat   (sunlit, cylindrical shadow)
//!   d2r/dt2 = -mu r / |r|^3                      (in shadow)
//! with s_hat the unit vector toward the Sun, held fixed over one flight
//! call (the engine's step is short compared with a solar day). The push
//! a_rad depends on the atom's own heliocentric radial velocity
//! v_r = V_body - v . s_hat through the g-factor (see [`crate::radiation`]),
//! so it is evaluated from the state at every stage; [`Push::Constant`]
//! keeps a fixed push for the tests and benches.
//!
//! Integrator: the Dormand & Prince (1980) 5(4) pair with local
//! extrapolation, FSAL, and Hairer's 4th-order continuous extension (Hairer,
//! Norsett & Wanner, *Solving ODEs I*, sect. II.5-6; coefficients from
//! memory, verified by the order tests below). No heap allocation.

use crate::radiation::AccelerationGrid;
use crate::transport::kepler::{Direction, Orbit};
use crate::transport::shadow::is_sunlit;
use crate::vec3::{self, Vec3};
use exobound_sdk::{Rng, math};

/// Largest number of step attempts (accepted + rejected) in one flight
/// call; a flight that runs out returns `Running` with `elapsed` short of
/// the duration asked for.
pub const MAX_STEPS: u32 = 1_000_000;

/// Where a flight call stopped.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum FlightEnd {
    /// Still in flight at the end of the interval: position (m), velocity (m s^-1).
    Running {
        /// Position, m.
        r: Vec3,
        /// Velocity, m s^-1.
        v: Vec3,
    },
    /// Reached the surface moving down after `t` s, at position r (m) with velocity v (m s^-1).
    Landed {
        /// Time since the start of the call, s.
        t: f64,
        /// Position, m (|r| = radius to ~1e-9 relative).
        r: Vec3,
        /// Velocity, m s^-1.
        v: Vec3,
    },
    /// Reached the outer boundary moving out after `t` s, at r (m) with velocity v (m s^-1).
    Escaped {
        /// Time since the start of the call, s.
        t: f64,
        /// Position, m (|r| = boundary radius to ~1e-9 relative).
        r: Vec3,
        /// Velocity, m s^-1.
        v: Vec3,
    },
}

/// Result of one flight call.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Flight {
    /// Where and how the flight stopped.
    pub end: FlightEnd,
    /// Time spent in sunlight during the call, s.
    pub sunlit_time: f64,
    /// Step attempts used (accepted and rejected, plus event re-steps).
    pub steps: u32,
    /// Time integrated, s: the event time, or the duration for `Running`
    /// (less only if [`MAX_STEPS`] ran out).
    pub elapsed: f64,
    /// Step size to continue with in the next call, s.
    pub next_step: f64,
    /// With a sampler: the state at a time drawn uniformly over the time flown.
    pub sample: Option<Sampled>,
}

/// Error tolerances of the step-size control: a component passes when its
/// local error estimate is below `abs + rel * |y|`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Tolerance {
    /// Relative tolerance, dimensionless.
    pub rel: f64,
    /// Absolute tolerance on each position component, m.
    pub abs_position: f64,
    /// Absolute tolerance on each velocity component, m s^-1.
    pub abs_velocity: f64,
}

impl Tolerance {
    /// A relative tolerance `rel` with absolute floors scaled to the body:
    /// `rel` times the radius (m) and times the circular speed
    /// sqrt(mu / radius) (m s^-1).
    pub fn relative(rel: f64, mu: f64, radius: f64) -> Tolerance {
        Tolerance { rel, abs_position: rel * radius, abs_velocity: rel * math::sqrt(mu / radius) }
    }
}

/// The radiation push on an atom in sunlight, directed along -sun_dir.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Push<'a> {
    /// A fixed acceleration, m s^-2 (0 for none).
    Constant(f64),
    /// The acceleration at the atom's heliocentric radial velocity v_r =
    /// `helio_radial_velocity` - v . sun_dir (m s^-1), read from `grid`.
    Doppler {
        /// The summed radiation acceleration against v_r at this step's
        /// heliocentric distance.
        grid: &'a AccelerationGrid,
        /// The body's heliocentric radial velocity, m s^-1, positive away
        /// from the Sun.
        helio_radial_velocity: f64,
    },
}

impl Push<'_> {
    /// The push's magnitude, m s^-2, on an atom moving with velocity `v`
    /// (m s^-1, BCI) when the Sun lies along the unit vector `sun_dir`.
    #[inline]
    pub fn magnitude(&self, v: Vec3, sun_dir: Vec3) -> f64 {
        match *self {
            Push::Constant(a) => a,
            Push::Doppler { grid, helio_radial_velocity } => {
                grid.at(helio_radial_velocity - vec3::dot(v, sun_dir))
            }
        }
    }
}

/// The force field and the flight's stopping surfaces.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Field<'a> {
    /// Gravitational parameter GM, m^3 s^-2.
    pub mu: f64,
    /// Body radius, m: the surface and the shadow cylinder's radius.
    pub radius: f64,
    /// Outer boundary radius, m; crossing it outward ends the flight.
    pub boundary_radius: f64,
    /// Unit vector toward the Sun, BCI.
    pub sun_dir: Vec3,
    /// Radiation acceleration in sunlight, directed along -sun_dir.
    pub push: Push<'a>,
}

/// State vector: position (m) then velocity (m s^-1).
type State = [f64; 6];

/// Flies an atom from r0 (m), v0 (m s^-1) for at most `duration` s with
/// relative tolerance `tol` (absolute floors from [`Tolerance::relative`]).
/// See [`fly_with`].
#[allow(clippy::too_many_arguments)]
pub fn fly(
    mu: f64,
    radius: f64,
    boundary_radius: f64,
    sun_dir: Vec3,
    a_rad: f64,
    r0: Vec3,
    v0: Vec3,
    duration: f64,
    tol: f64,
) -> Flight {
    let field = Field { mu, radius, boundary_radius, sun_dir, push: Push::Constant(a_rad) };
    fly_with(&field, r0, v0, duration, &Tolerance::relative(tol, mu, radius))
}

/// Flies an atom from r0 (m), v0 (m s^-1) in `field` for at most
/// `duration` s, stopping at the first landing (descending through
/// `radius`) or escape (ascending through `boundary_radius`). An atom that
/// starts on the surface moving up is in flight, not landed.
pub fn fly_with(field: &Field, r0: Vec3, v0: Vec3, duration: f64, tol: &Tolerance) -> Flight {
    fly_on(field, r0, v0, duration, tol, 0.0, None)
}

/// [`fly_with`], starting with step size `h0` (s) when it is positive, as
/// the flight loop does from one engine step to the next, so that the
/// integrator carries on where it stopped rather than restarting from a
/// cautious first step. [`Flight::next_step`] is the size to pass next.
///
/// With a `sampler`, [`Flight::sample`] is the state at a time drawn
/// uniformly over the time flown (wherever the flight ends), by reservoir
/// sampling over the accepted steps: a step of length h ending at elapsed
/// time t replaces the sample, with probability h / t, by the dense-output
/// state at a uniform point of the step (Vitter 1985, "Random sampling with
/// a reservoir", ACM TOMS 11, 37-57, in its continuous form).
pub fn fly_on(
    field: &Field,
    r0: Vec3,
    v0: Vec3,
    duration: f64,
    tol: &Tolerance,
    h0: f64,
    mut sampler: Option<&mut Rng>,
) -> Flight {
    let finite = r0.iter().chain(v0.iter()).all(|x| x.is_finite()) && vec3::norm2(r0) > 0.0;
    if !finite || duration.is_nan() || duration <= 0.0 {
        // Nothing to integrate (or nothing sensible): report zero elapsed time.
        let end = FlightEnd::Running { r: r0, v: v0 };
        let sample = sampler.map(|_| Sampled { t: 0.0, r: r0, v: v0 });
        return Flight { end, sunlit_time: 0.0, steps: 0, elapsed: 0.0, next_step: h0, sample };
    }
    let mut y: State = [r0[0], r0[1], r0[2], v0[0], v0[1], v0[2]];
    let mut lit = is_sunlit(r0, field.sun_dir, field.radius);
    let mut k1 = deriv(field, lit, &y);
    let mut t = 0.0;
    let mut sunlit_time = 0.0;
    let mut steps = 0u32;
    let mut sample = sampler.as_ref().map(|_| Sampled { t: 0.0, r: r0, v: v0 });
    let mut h = if h0 > 0.0 && h0.is_finite() {
        h0.min(initial_step(field, r0, v0, f64::INFINITY) * 64.0)
    } else {
        initial_step(field, r0, v0, duration)
    };
    while t < duration && steps < MAX_STEPS {
        let last = h >= duration - t;
        let h_try = if last { duration - t } else { h };
        let step = dp_step(field, lit, &y, &k1, h_try);
        steps += 1;
        let err = error_norm(&y, &step.y1, &step.err, tol);
        if err.is_nan() || err > 1.0 {
            // Rejected: shrink (a NaN error also shrinks, toward the floor).
            let factor = if err.is_finite() { (0.9 * math::pow(err, -0.2)).max(0.2) } else { 0.2 };
            h = h_try * factor;
            continue;
        }
        // Accepted: look for the first event inside the step.
        let dense = Dense::new(&y, &step, h_try);
        match first_event(field, lit, &dense) {
            None => {
                offer(&mut sampler, &mut sample, t, h_try, &dense, 1.0);
                if lit {
                    sunlit_time += h_try;
                }
                // Land exactly on the requested end time on the last step.
                t = if last { duration } else { t + h_try };
                y = step.y1;
                k1 = step.k7;
                let grow = if err > 0.0 { (0.9 * math::pow(err, -0.2)).min(5.0) } else { 5.0 };
                h = if last { h } else { h_try * grow };
            }
            Some((theta, kind)) => {
                let dt = theta * h_try;
                match kind {
                    Event::Shadow => {
                        // Cut the step at the shadow boundary and switch the push.
                        let s = dp_step(field, lit, &y, &k1, dt);
                        steps += 1;
                        offer(&mut sampler, &mut sample, t, dt, &Dense::new(&y, &s, dt), 1.0);
                        if lit {
                            sunlit_time += dt;
                        }
                        t += dt;
                        y = s.y1;
                        lit = !lit;
                        k1 = deriv(field, lit, &y);
                        // Restart cautiously after the discontinuity.
                        h = (h_try - dt).max(1e-3 * h_try);
                    }
                    Event::Landing | Event::Escape => {
                        let target = if kind == Event::Landing {
                            field.radius
                        } else {
                            field.boundary_radius
                        };
                        let (dt, y_end, extra) = polish(field, lit, &y, &k1, dt, h_try, target);
                        steps += extra;
                        offer(&mut sampler, &mut sample, t, dt, &dense, dt / h_try);
                        if lit {
                            sunlit_time += dt;
                        }
                        let r = [y_end[0], y_end[1], y_end[2]];
                        let v = [y_end[3], y_end[4], y_end[5]];
                        let t_end = t + dt;
                        let end = if kind == Event::Landing {
                            FlightEnd::Landed { t: t_end, r, v }
                        } else {
                            FlightEnd::Escaped { t: t_end, r, v }
                        };
                        return Flight {
                            end,
                            sunlit_time,
                            steps,
                            elapsed: t_end,
                            next_step: h,
                            sample,
                        };
                    }
                }
            }
        }
    }
    let end = FlightEnd::Running { r: [y[0], y[1], y[2]], v: [y[3], y[4], y[5]] };
    // `h` is the size the controller would try next (an end-clipped last
    // step leaves it unclipped).
    Flight { end, sunlit_time, steps, elapsed: t, next_step: h, sample }
}

/// A state drawn uniformly in time over a flight.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sampled {
    /// Time since the start of the flight call, s.
    pub t: f64,
    /// Position, m.
    pub r: Vec3,
    /// Velocity, m s^-1.
    pub v: Vec3,
}

/// Reservoir step: the stretch [t0, t0 + h] (s), covered by `dense` from
/// theta 0 to `theta_max`, replaces the sample with probability
/// h / (t0 + h), at a uniform point within it.
fn offer(
    sampler: &mut Option<&mut Rng>,
    sample: &mut Option<Sampled>,
    t0: f64,
    h: f64,
    dense: &Dense,
    theta_max: f64,
) {
    let Some(rng) = sampler.as_deref_mut() else { return };
    if !(h > 0.0) {
        return;
    }
    if rng.uniform() * (t0 + h) < h {
        let x = rng.uniform();
        let y = dense.at(x * theta_max);
        *sample = Some(Sampled { t: t0 + x * h, r: [y[0], y[1], y[2]], v: [y[3], y[4], y[5]] });
    }
}

/// Kinds of event inside a step.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Event {
    Landing,
    Escape,
    Shadow,
}

/// Which event, if any, holds at a state while flying in mode `lit`:
/// landing is |r| < R moving inward, escape |r| > R_b moving outward,
/// shadow a change of the sunlit flag. Requiring the radial direction
/// keeps a launch from the surface (moving outward) from counting as a
/// landing.
#[inline]
fn event_at(field: &Field, lit: bool, y: &State) -> Option<Event> {
    let r = [y[0], y[1], y[2]];
    let rv = y[0] * y[3] + y[1] * y[4] + y[2] * y[5];
    let r2 = vec3::norm2(r);
    if r2 < field.radius * field.radius && rv < 0.0 {
        Some(Event::Landing)
    } else if r2 > field.boundary_radius * field.boundary_radius && rv > 0.0 {
        Some(Event::Escape)
    } else if is_sunlit(r, field.sun_dir, field.radius) != lit {
        Some(Event::Shadow)
    } else {
        None
    }
}

/// Samples per step scanned for events on the dense output.
const EVENT_SAMPLES: usize = 8;

/// First event in an accepted step, as the fraction theta in (0, 1] of the
/// step where it first holds (to 1e-12 of the step by bisection on the
/// continuous extension) and its kind.
fn first_event(field: &Field, lit: bool, dense: &Dense) -> Option<(f64, Event)> {
    let mut prev = 0.0;
    for j in 1..=EVENT_SAMPLES {
        let theta = j as f64 / EVENT_SAMPLES as f64;
        if event_at(field, lit, &dense.at(theta)).is_some() {
            // Bisect (prev, theta]: event absent at lo, present at hi.
            let (mut lo, mut hi) = (prev, theta);
            while (hi - lo) * dense.h > 1e-9 && hi - lo > 1e-15 {
                let mid = 0.5 * (lo + hi);
                if event_at(field, lit, &dense.at(mid)).is_some() {
                    hi = mid;
                } else {
                    lo = mid;
                }
            }
            let kind = event_at(field, lit, &dense.at(hi)).unwrap_or(Event::Shadow);
            return Some((hi, kind));
        }
        prev = theta;
    }
    None
}

/// Refines a radius crossing found on the dense output: Newton's method on
/// |r(dt)| - target, each iterate a fresh single Dormand-Prince step of
/// length dt from the start of the accepted step (5th-order accurate, and
/// no longer than that step, whose error passed the test), with
/// d|r|/dt = r . v / |r|. Iterates stay in (0, h_max]; iteration stops
/// when the correction is below 1e-10 s. Returns dt, the state and the
/// number of steps taken.
fn polish(
    field: &Field,
    lit: bool,
    y0: &State,
    k1: &State,
    dt0: f64,
    h_max: f64,
    target: f64,
) -> (f64, State, u32) {
    let mut dt = dt0;
    let mut s = dp_step(field, lit, y0, k1, dt);
    let mut n = 1;
    for _ in 0..6 {
        let r = [s.y1[0], s.y1[1], s.y1[2]];
        let rn = vec3::norm(r);
        let rdot = (s.y1[0] * s.y1[3] + s.y1[1] * s.y1[4] + s.y1[2] * s.y1[5]) / rn;
        if rdot == 0.0 {
            break;
        }
        let next = (dt - (rn - target) / rdot).clamp(0.5 * dt, h_max);
        let delta = next - dt;
        dt = next;
        s = dp_step(field, lit, y0, k1, dt);
        n += 1;
        if delta.abs() <= 1e-10 {
            break;
        }
    }
    (dt, s.y1, n)
}

/// Acceleration field as the state derivative (v, a): gravity of a point
/// mass plus the radiation push -a_rad(v_r) s_hat when `lit`, a_rad at
/// this state's own velocity.
#[inline]
fn deriv(field: &Field, lit: bool, y: &State) -> State {
    let r = [y[0], y[1], y[2]];
    let r2 = vec3::norm2(r);
    let inv_r3 = 1.0 / (r2 * math::sqrt(r2));
    let mut a = vec3::scale(r, -field.mu * inv_r3);
    if lit {
        let a_rad = field.push.magnitude([y[3], y[4], y[5]], field.sun_dir);
        a = vec3::add_scaled(a, field.sun_dir, -a_rad);
    }
    [y[3], y[4], y[5], a[0], a[1], a[2]]
}

/// y + h sum_j c_j k_j for up to six stages.
#[inline]
fn combine(y: &State, h: f64, terms: &[(f64, &State)]) -> State {
    let mut out = *y;
    for (c, k) in terms {
        let hc = h * c;
        for i in 0..6 {
            out[i] += hc * k[i];
        }
    }
    out
}

/// One Dormand-Prince step: the 5th-order solution, the stage
/// derivatives needed for FSAL and dense output, and the embedded error.
struct DpStep {
    y1: State,
    k3: State,
    k4: State,
    k5: State,
    k6: State,
    k7: State,
    k1: State,
    err: State,
}

// Dormand & Prince (1980) RK5(4)7M tableau (Hairer, Norsett & Wanner,
// Table II.5.2; from memory, checked by the convergence-order tests).
const A21: f64 = 1.0 / 5.0;
const A31: f64 = 3.0 / 40.0;
const A32: f64 = 9.0 / 40.0;
const A41: f64 = 44.0 / 45.0;
const A42: f64 = -56.0 / 15.0;
const A43: f64 = 32.0 / 9.0;
const A51: f64 = 19372.0 / 6561.0;
const A52: f64 = -25360.0 / 2187.0;
const A53: f64 = 64448.0 / 6561.0;
const A54: f64 = -212.0 / 729.0;
const A61: f64 = 9017.0 / 3168.0;
const A62: f64 = -355.0 / 33.0;
const A63: f64 = 46732.0 / 5247.0;
const A64: f64 = 49.0 / 176.0;
const A65: f64 = -5103.0 / 18656.0;
const B1: f64 = 35.0 / 384.0;
const B3: f64 = 500.0 / 1113.0;
const B4: f64 = 125.0 / 192.0;
const B5: f64 = -2187.0 / 6784.0;
const B6: f64 = 11.0 / 84.0;
// Error weights b - b_hat (5th minus embedded 4th order).
const E1: f64 = 71.0 / 57600.0;
const E3: f64 = -71.0 / 16695.0;
const E4: f64 = 71.0 / 1920.0;
const E5: f64 = -17253.0 / 339200.0;
const E6: f64 = 22.0 / 525.0;
const E7: f64 = -1.0 / 40.0;
// Continuous extension (Hairer's dopri5 `contd5`, from memory).
const D1: f64 = -12715105075.0 / 11282082432.0;
const D3: f64 = 87487479700.0 / 32700410799.0;
const D4: f64 = -10690763975.0 / 1880347072.0;
const D5: f64 = 701980252875.0 / 199316789632.0;
const D6: f64 = -1453857185.0 / 822651844.0;
const D7: f64 = 69997945.0 / 29380423.0;

/// One Dormand-Prince 5(4) step of length h from y with k1 = f(y).
#[inline]
fn dp_step(field: &Field, lit: bool, y: &State, k1: &State, h: f64) -> DpStep {
    let k2 = deriv(field, lit, &combine(y, h, &[(A21, k1)]));
    let k3 = deriv(field, lit, &combine(y, h, &[(A31, k1), (A32, &k2)]));
    let k4 = deriv(field, lit, &combine(y, h, &[(A41, k1), (A42, &k2), (A43, &k3)]));
    let k5 = deriv(field, lit, &combine(y, h, &[(A51, k1), (A52, &k2), (A53, &k3), (A54, &k4)]));
    let k6 = deriv(
        field,
        lit,
        &combine(y, h, &[(A61, k1), (A62, &k2), (A63, &k3), (A64, &k4), (A65, &k5)]),
    );
    let y1 = combine(y, h, &[(B1, k1), (B3, &k3), (B4, &k4), (B5, &k5), (B6, &k6)]);
    let k7 = deriv(field, lit, &y1);
    let zero = [0.0; 6];
    let err = combine(&zero, h, &[(E1, k1), (E3, &k3), (E4, &k4), (E5, &k5), (E6, &k6), (E7, &k7)]);
    DpStep { y1, k3, k4, k5, k6, k7, k1: *k1, err }
}

/// Hairer's RMS error norm with per-component scale abs + rel max(|y0|, |y1|).
#[inline]
fn error_norm(y0: &State, y1: &State, err: &State, tol: &Tolerance) -> f64 {
    let mut sum = 0.0;
    for i in 0..6 {
        let abs = if i < 3 { tol.abs_position } else { tol.abs_velocity };
        let sc = abs + tol.rel * y0[i].abs().max(y1[i].abs());
        let q = err[i] / sc;
        sum += q * q;
    }
    math::sqrt(sum / 6.0)
}

/// The continuous extension of one accepted step: y(t0 + theta h) for
/// theta in [0, 1], 4th-order accurate.
struct Dense {
    h: f64,
    c1: State,
    c2: State,
    c3: State,
    c4: State,
    c5: State,
}

impl Dense {
    fn new(y0: &State, s: &DpStep, h: f64) -> Dense {
        let mut c2 = [0.0; 6];
        let mut c3 = [0.0; 6];
        let mut c4 = [0.0; 6];
        let mut c5 = [0.0; 6];
        for i in 0..6 {
            c2[i] = s.y1[i] - y0[i];
            c3[i] = h * s.k1[i] - c2[i];
            c4[i] = c2[i] - h * s.k7[i] - c3[i];
            c5[i] = h
                * (D1 * s.k1[i]
                    + D3 * s.k3[i]
                    + D4 * s.k4[i]
                    + D5 * s.k5[i]
                    + D6 * s.k6[i]
                    + D7 * s.k7[i]);
        }
        Dense { h, c1: *y0, c2, c3, c4, c5 }
    }

    #[inline]
    fn at(&self, theta: f64) -> State {
        let u = 1.0 - theta;
        core::array::from_fn(|i| {
            self.c1[i]
                + theta * (self.c2[i] + u * (self.c3[i] + theta * (self.c4[i] + u * self.c5[i])))
        })
    }
}

/// First trial step, s: a small fraction of the local dynamical time and
/// of |r|/|v|, and no more than a quarter of the unperturbed (Keplerian)
/// time to the surface, so that even a very short hop from the surface
/// is resolved by the first step's event samples.
fn initial_step(field: &Field, r0: Vec3, v0: Vec3, duration: f64) -> f64 {
    let rn = vec3::norm(r0);
    let vn = vec3::norm(v0);
    let mut h = 0.02 * math::sqrt(rn * rn * rn / field.mu);
    if vn > 0.0 {
        h = h.min(0.01 * rn / vn);
    }
    if let Some(t) =
        Orbit::from_state(field.mu, r0, v0).time_to_radius(field.radius, Direction::Descending)
        && t > 0.0
    {
        h = h.min(0.25 * t);
    }
    h.min(duration).max(1e-9)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::body::Body;
    use crate::transport::frames::{enu_basis, enu_to_vec, unit_from_lat_lon};
    use crate::transport::kepler::ballistic_hop;
    use core::f64::consts::{FRAC_PI_2, FRAC_PI_4, PI};

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// Surface launch at (lat, lon) with speed, elevation and azimuth
    /// (from east toward north).
    fn launch(radius: f64, lat: f64, lon: f64, speed: f64, el: f64, az: f64) -> (Vec3, Vec3) {
        let b = enu_basis(lat, lon);
        let v = enu_to_vec(
            [speed * el.cos() * az.cos(), speed * el.cos() * az.sin(), speed * el.sin()],
            &b,
        );
        (vec3::scale(b[2], radius), v)
    }

    fn landed(f: &Flight) -> (f64, Vec3, Vec3) {
        match f.end {
            FlightEnd::Landed { t, r, v } => (t, r, v),
            other => panic!("expected a landing, got {other:?}"),
        }
    }

    #[test]
    fn without_radiation_it_reproduces_kepler() {
        // Independent check: the closed-form hop (kepler.rs, itself checked
        // against the range equation, Bate, Mueller & White 1971, Fundamentals of Astrodynamics, ch. 6, from memory) vs the integrator, to ~1e-8.
        let moon = Body::moon();
        let sun = [1.0, 0.0, 0.0];
        for &(v, el) in &[
            (1000.0, FRAC_PI_4),
            (2000.0, FRAC_PI_4),
            (1500.0, FRAC_PI_2),
            (300.0, 0.1),
            (0.5, 0.17),
        ] {
            let (r0, v0) = launch(moon.radius, 0.4, 2.0, v, el, 1.0);
            let f = fly(moon.gm, moon.radius, 20.0 * moon.radius, sun, 0.0, r0, v0, 1e6, 1e-11);
            let (t, r, _) = landed(&f);
            let c = Orbit::from_state(moon.gm, r0, v0)
                .crossing(moon.radius, Direction::Descending)
                .unwrap();
            assert!(rel(t, c.t) < 1e-8, "v {v} el {el}: {t} vs {}", c.t);
            assert!(vec3::norm(vec3::sub(r, c.r)) < 1e-8 * moon.radius, "v {v} el {el}");
            // Bate, Mueller & White (1971) ch. 6, from memory: TOF of the range equation.
            let hop = ballistic_hop(moon.gm, moon.radius, v, el).unwrap();
            assert!(rel(t, hop.time_of_flight) < 1e-8);
        }
    }

    #[test]
    fn engine_tolerance_accuracy() {
        // At the engine's default 1e-9 the landing time still agrees with
        // the closed form (kepler.rs) to better than 1e-6 relative.
        let moon = Body::moon();
        let (r0, v0) = launch(moon.radius, 0.0, 0.0, 1000.0, FRAC_PI_4, 0.0);
        let f =
            fly(moon.gm, moon.radius, 20.0 * moon.radius, [1.0, 0.0, 0.0], 0.0, r0, v0, 1e5, 1e-9);
        let (t, ..) = landed(&f);
        let tk = Orbit::from_state(moon.gm, r0, v0)
            .time_to_radius(moon.radius, Direction::Descending)
            .unwrap();
        assert!(rel(t, tk) < 1e-6, "{t} {tk}");
        assert!(f.steps < 200, "{} steps", f.steps);
    }

    #[test]
    fn running_and_escaping_without_radiation() {
        let moon = Body::moon();
        let sun = [0.0, 1.0, 0.0];
        let (r0, v0) = launch(moon.radius, -0.2, 1.0, 1200.0, 0.8, 0.3);
        let orbit = Orbit::from_state(moon.gm, r0, v0);
        // Stopped mid-flight: the state equals the closed-form propagation.
        let f = fly(moon.gm, moon.radius, 20.0 * moon.radius, sun, 0.0, r0, v0, 700.0, 1e-11);
        let FlightEnd::Running { r, v } = f.end else { panic!("{:?}", f.end) };
        let (rk, vk) = orbit.propagate(700.0);
        assert!(vec3::norm(vec3::sub(r, rk)) < 1e-8 * moon.radius);
        assert!(vec3::norm(vec3::sub(v, vk)) < 1e-8 * 1200.0);
        assert_eq!(f.elapsed, 700.0);
        // Escape through the boundary at the Keplerian crossing time.
        let (r0, v0) = launch(moon.radius, 0.1, 3.0, 1.2 * moon.escape_speed(), 0.6, 2.0);
        let b = 5.0 * moon.radius;
        let f = fly(moon.gm, moon.radius, b, sun, 0.0, r0, v0, 1e6, 1e-11);
        let FlightEnd::Escaped { t, r, .. } = f.end else { panic!("{:?}", f.end) };
        let c = Orbit::from_state(moon.gm, r0, v0).crossing(b, Direction::Ascending).unwrap();
        assert!(rel(t, c.t) < 1e-8 && rel(vec3::norm(r), b) < 1e-10);
        // Zero duration: nothing happens.
        let f = fly(moon.gm, moon.radius, b, sun, 0.0, r0, v0, 0.0, 1e-9);
        assert_eq!(f.end, FlightEnd::Running { r: r0, v: v0 });
    }

    #[test]
    fn sunlit_flight_conserves_the_modified_energy() {
        // A constant force -a s_hat has potential a (r . s_hat), so in
        // permanent sunlight E' = v^2/2 - mu/r + a (r . s_hat) is conserved
        // (Newton's laws; work done by a constant force). Dayside launches
        // with r . s > 0 stay sunlit throughout.
        for (body, frac) in [(Body::moon(), 0.03), (Body::mercury(), 0.5)] {
            let a = frac * body.surface_gravity();
            let sun = unit_from_lat_lon(0.1, 0.5);
            let field = Field {
                mu: body.gm,
                radius: body.radius,
                boundary_radius: 30.0 * body.radius,
                sun_dir: sun,
                push: Push::Constant(a),
            };
            let energy = |r: Vec3, v: Vec3| {
                0.5 * vec3::norm2(v) - body.gm / vec3::norm(r) + a * vec3::dot(r, sun)
            };
            for &(lat, lon, speed, el, az) in &[
                (0.1, 0.5, 0.5, FRAC_PI_2, 0.0),
                (0.3, 0.9, 0.4, 0.7, 2.0),
                (-0.2, 0.2, 0.2, 1.0, -1.0),
            ] {
                let (r0, v0) = launch(body.radius, lat, lon, speed * body.escape_speed(), el, az);
                let tol = Tolerance::relative(1e-11, body.gm, body.radius);
                let f = fly_with(&field, r0, v0, 1e6, &tol);
                let (t, r, v) = landed(&f);
                assert!(vec3::dot(r, sun) > 0.0);
                let scale = body.gm / body.radius;
                assert!(
                    (energy(r, v) - energy(r0, v0)).abs() < 1e-9 * scale,
                    "{} {lat}",
                    body.name
                );
                // Always in sunlight: the sunlit time is the whole flight.
                assert!(rel(f.sunlit_time, t) < 1e-15);
            }
        }
    }

    #[test]
    fn radiation_displaces_the_landing_anti_sunward() {
        // Flat-gravity kinematics with a constant extra force (Newton's second
        // law, no source needed): a vertical launch at solar zenith angle z
        // feels a horizontal push a sin z away from the subsolar point and an
        // extra downward a cos z, so T = 2 v / (g + a cos z) and the landing is
        // displaced d = a sin z T^2 / 2 anti-sunward. Curvature corrections are
        // O(v^2 R / mu) ~ 0.4 % at 100 m/s on the Moon; we allow 2 %.
        let moon = Body::moon();
        let g = moon.surface_gravity();
        let a = 0.03 * g;
        let sun = [1.0, 0.0, 0.0];
        let z: f64 = 1.0; // rad from the subsolar point, along the equator
        let v = 100.0;
        let (r0, v0) = launch(moon.radius, 0.0, z, v, FRAC_PI_2, 0.0);
        let f = fly(moon.gm, moon.radius, 10.0 * moon.radius, sun, a, r0, v0, 1e5, 1e-11);
        let (t, r, _) = landed(&f);
        let t_flat = 2.0 * v / (g + a * z.cos());
        let d_flat = 0.5 * a * z.sin() * t_flat * t_flat;
        let (_, lon) = crate::transport::frames::lat_lon(r);
        let d = (lon - z) * moon.radius;
        assert!(d > 0.0, "moved away from the subsolar point");
        assert!(rel(d, d_flat) < 0.02, "{d} vs {d_flat}");
        assert!(rel(t, t_flat) < 0.02, "{t} vs {t_flat}");
        // At the subsolar point the push is purely vertical, so by symmetry a
        // vertical launch there lands where it started.
        let (r0, v0) = launch(moon.radius, 0.0, 0.0, 800.0, FRAC_PI_2, 0.0);
        let f = fly(moon.gm, moon.radius, 10.0 * moon.radius, sun, a, r0, v0, 1e5, 1e-11);
        let (_, r, _) = landed(&f);
        assert!(vec3::norm(vec3::sub(r, r0)) < 1e-3);
    }

    #[test]
    fn in_full_shadow_there_is_no_push() {
        // Cylindrical shadow: a vertical launch at the antisolar point never
        // leaves the shadow, so the flight is exactly Keplerian (kepler.rs).
        let moon = Body::moon();
        let sun = [1.0, 0.0, 0.0];
        let (r0, v0) = launch(moon.radius, 0.0, PI, 1500.0, FRAC_PI_2, 0.0);
        let f = fly(moon.gm, moon.radius, 20.0 * moon.radius, sun, 0.05, r0, v0, 1e6, 1e-11);
        let (t, r, _) = landed(&f);
        let c = Orbit::from_state(moon.gm, r0, v0)
            .crossing(moon.radius, Direction::Descending)
            .unwrap();
        assert!(rel(t, c.t) < 1e-8 && vec3::norm(vec3::sub(r, c.r)) < 1e-8 * moon.radius);
        assert_eq!(f.sunlit_time, 0.0);
    }

    #[test]
    fn leaving_the_shadow_is_located_precisely() {
        // A night-side launch toward the terminator flies out of the shadow
        // cylinder and lands on the day side. Until it leaves the shadow the
        // motion is Keplerian, so the exit time found by bisection on the
        // closed-form orbit (kepler.rs + shadow.rs, independent of the
        // integrator) must equal flight time - sunlit time.
        let moon = Body::moon();
        let sun = [1.0, 0.0, 0.0];
        let a = 0.03 * moon.surface_gravity();
        // 100 deg from the subsolar point, heading west toward the day side.
        let (r0, v0) = launch(moon.radius, 0.0, 100f64.to_radians(), 1000.0, FRAC_PI_4, PI);
        let f = fly(moon.gm, moon.radius, 20.0 * moon.radius, sun, a, r0, v0, 1e6, 1e-11);
        let (t, r, v) = landed(&f);
        assert!(r[0] > 0.0, "landed on the day side");
        let orbit = Orbit::from_state(moon.gm, r0, v0);
        let (mut lo, mut hi) = (0.0, t);
        assert!(is_sunlit(orbit.propagate(hi).0, sun, moon.radius));
        for _ in 0..80 {
            let mid = 0.5 * (lo + hi);
            if is_sunlit(orbit.propagate(mid).0, sun, moon.radius) { hi = mid } else { lo = mid }
        }
        let t_exit = 0.5 * (lo + hi);
        assert!((t - f.sunlit_time - t_exit).abs() < 1e-6, "{} vs {t_exit}", t - f.sunlit_time);
        // After the exit the modified energy E' (constant-force potential) is
        // conserved: compare its value at the exit with the landing.
        let (rx, vx) = orbit.propagate(t_exit);
        let e = |r: Vec3, v: Vec3| {
            0.5 * vec3::norm2(v) - moon.gm / vec3::norm(r) + a * vec3::dot(r, sun)
        };
        assert!((e(r, v) - e(rx, vx)).abs() < 1e-8 * moon.gm / moon.radius);
    }

    #[test]
    fn very_short_hops_from_the_surface_are_not_landed_at_once() {
        // A 0.05 m/s launch at 10 deg flies for 2 v sin(el)/g ~ 0.011 s
        // (flat-gravity limit of the range equation, Bate, Mueller & White 1971 ch. 6); it must not end at t = 0.
        let moon = Body::moon();
        for el in [0.17, 1.2] {
            let (r0, v0) = launch(moon.radius * (1.0 - 1e-16), 0.3, 0.3, 0.05, el, 0.0);
            let f = fly(
                moon.gm,
                moon.radius,
                10.0 * moon.radius,
                [1.0, 0.0, 0.0],
                0.02,
                r0,
                v0,
                10.0,
                1e-10,
            );
            let (t, ..) = landed(&f);
            let flat = 2.0 * 0.05 * el.sin() / moon.surface_gravity();
            assert!(t > 0.9 * flat && t < 1.1 * flat, "{t} vs {flat}");
        }
    }

    #[test]
    fn bad_input_is_reported_not_integrated() {
        // A NaN state or a zero radius cannot be flown: zero elapsed time,
        // so the caller can tell it from a completed flight.
        let moon = Body::moon();
        let f = fly(
            moon.gm,
            moon.radius,
            1e8,
            [1.0, 0.0, 0.0],
            0.0,
            [f64::NAN, 0.0, 0.0],
            [0.0; 3],
            10.0,
            1e-9,
        );
        assert_eq!((f.elapsed, f.steps), (0.0, 0));
        let f = fly(
            moon.gm,
            moon.radius,
            1e8,
            [1.0, 0.0, 0.0],
            0.0,
            [0.0; 3],
            [1.0, 0.0, 0.0],
            10.0,
            1e-9,
        );
        assert_eq!(f.elapsed, 0.0);
    }

    /// One step of length h along a Moon orbit, compared with the closed form:
    /// (error of the 5th-order step, error of the dense output at mid-step).
    fn step_errors(h: f64) -> (f64, f64) {
        let moon = Body::moon();
        let field = Field {
            mu: moon.gm,
            radius: moon.radius,
            boundary_radius: 1e9,
            sun_dir: [1.0, 0.0, 0.0],
            push: Push::Constant(0.0),
        };
        let (r0, v0) = launch(2.0 * moon.radius, 0.2, 0.4, 1200.0, 0.3, 0.5);
        let y: State = [r0[0], r0[1], r0[2], v0[0], v0[1], v0[2]];
        let k1 = deriv(&field, false, &y);
        let s = dp_step(&field, false, &y, &k1, h);
        let orbit = Orbit::from_state(moon.gm, r0, v0);
        let (r1, _) = orbit.propagate(h);
        let (rm, _) = orbit.propagate(0.5 * h);
        let d = Dense::new(&y, &s, h).at(0.5);
        (
            vec3::norm(vec3::sub([s.y1[0], s.y1[1], s.y1[2]], r1)),
            vec3::norm(vec3::sub([d[0], d[1], d[2]], rm)),
        )
    }

    #[test]
    fn tableau_and_dense_output_have_the_right_order() {
        // Dormand-Prince 5(4): local error O(h^6) for the step and O(h^5) for
        // the continuous extension (Hairer, Norsett & Wanner II.5-6, from
        // memory). Halving h must divide them by ~64 and ~32; a wrong
        // coefficient would drop the order and fail this.
        let (s1, d1) = step_errors(400.0);
        let (s2, d2) = step_errors(200.0);
        assert!(s1 / s2 > 45.0, "step ratio {}", s1 / s2);
        assert!(d1 / d2 > 24.0, "dense ratio {}", d1 / d2);
        // The error estimate is the difference to the embedded 4th order,
        // so it must be O(h^5): ratio ~32.
        let moon = Body::moon();
        let field = Field {
            mu: moon.gm,
            radius: moon.radius,
            boundary_radius: 1e9,
            sun_dir: [1.0, 0.0, 0.0],
            push: Push::Constant(0.0),
        };
        let (r0, v0) = launch(2.0 * moon.radius, 0.2, 0.4, 1200.0, 0.3, 0.5);
        let y: State = [r0[0], r0[1], r0[2], v0[0], v0[1], v0[2]];
        let k1 = deriv(&field, false, &y);
        let e = |h: f64| {
            let s = dp_step(&field, false, &y, &k1, h);
            s.err.iter().map(|x| x * x).sum::<f64>().sqrt()
        };
        let ratio = e(400.0) / e(200.0);
        assert!(ratio > 24.0 && ratio < 45.0, "error-estimate ratio {ratio}");
    }

    #[test]
    fn the_push_follows_each_atoms_own_radial_velocity() {
        // Gravity negligible (mu tiny) and the atom far from the body, in
        // sunlight: over a short flight the displacement along -s_hat beyond
        // v0 t is a t^2 / 2 (uniform acceleration) with a the sodium push at
        // the atom's own heliocentric radial velocity (radiation module:
        // sum_l h g_l(v_r) / (m lambda_l r^2)). An atom receding from the
        // Sun at 10 km/s sees the Fraunhofer line's wing, one at rest its
        // core: the pushes differ by the table's ratio (~8.9 at 0.35 AU).
        let na = crate::species::Species::sodium();
        let r_au = 0.35;
        let grid = na.g_factors.acceleration_grid(r_au);
        let sun = [1.0, 0.0, 0.0];
        let far = [2.0e7, 3.0e7, 0.0];
        let tol = Tolerance { rel: 1e-13, abs_position: 1e-7, abs_velocity: 1e-9 };
        let t = 2.0;
        let push_of = |helio: f64, v_along: f64| {
            let field = Field {
                mu: 1e-6,
                radius: 1.0,
                boundary_radius: 1e12,
                sun_dir: sun,
                push: Push::Doppler { grid: &grid, helio_radial_velocity: helio },
            };
            // Velocity along -s_hat (away from the Sun), m/s.
            let v0 = vec3::scale(sun, -v_along);
            let f = fly_with(&field, far, v0, t, &tol);
            let FlightEnd::Running { r, .. } = f.end else { panic!("{:?}", f.end) };
            let along = -vec3::dot(vec3::sub(r, far), sun) - v_along * t;
            2.0 * along / (t * t)
        };
        let at_rest = push_of(0.0, 0.0);
        let receding = push_of(0.0, 10e3);
        // The same v_r made of the body's own motion: the same push.
        let body_receding = push_of(10e3, 0.0);
        let a0 = na.g_factors.acceleration(0.0, r_au);
        let a10 = na.g_factors.acceleration(10e3, r_au);
        // The atom speeds up by a t < 4 m/s, so its mean v_r drifts by < 2
        // m/s, where the table changes by < 15 % per km/s: the mean push
        // differs from the starting one by < 3e-4; 1e-3 relative.
        assert!((at_rest / a0 - 1.0).abs() < 1e-3, "{at_rest} vs {a0}");
        assert!((receding / a10 - 1.0).abs() < 1e-3, "{receding} vs {a10}");
        assert!((body_receding / a10 - 1.0).abs() < 1e-3, "{body_receding} vs {a10}");
        assert!(receding > 5.0 * at_rest, "{receding} vs {at_rest}");
        // In the shadow there is no push, whatever v_r (unchanged handling).
        let field = Field {
            mu: 1e-6,
            radius: 1.0e8,
            boundary_radius: 1e12,
            sun_dir: sun,
            push: Push::Doppler { grid: &grid, helio_radial_velocity: 10e3 },
        };
        let behind = [-2.0e9, 1.0e7, 0.0];
        let t = 200.0;
        let f = fly_with(&field, behind, [0.0; 3], t, &tol);
        let FlightEnd::Running { r, .. } = f.end else { panic!("{:?}", f.end) };
        assert!(vec3::norm(vec3::sub(r, behind)) < 1e-6);
        assert_eq!(f.sunlit_time, 0.0);
    }

    #[test]
    fn the_sighting_is_uniform_over_the_time_flown() {
        // A hop with no radiation pressure, flown for longer than it lasts:
        // the reservoir-sampled sighting must be uniform over [0, landing
        // time] (its mean 1/2 and variance 1/12 of the flight: moments of
        // the uniform distribution), and lie on the Kepler path there.
        let moon = Body::moon();
        let (r0, v0) = launch(moon.radius, 0.3, 1.0, 1200.0, 0.9, 0.4);
        let field = Field {
            mu: moon.gm,
            radius: moon.radius,
            boundary_radius: 20.0 * moon.radius,
            sun_dir: [1.0, 0.0, 0.0],
            push: Push::Constant(0.0),
        };
        let tol = Tolerance::relative(1e-10, moon.gm, moon.radius);
        let orbit = Orbit::from_state(moon.gm, r0, v0);
        let n = 4000;
        let mut xs = Vec::with_capacity(n);
        for k in 0..n {
            let mut rng = Rng::new(exobound_sdk::RngKey {
                seed: 5,
                particle: k as u64,
                event: 0,
                stream: 0x84,
            });
            let f = fly_on(&field, r0, v0, 1.0e5, &tol, 0.0, Some(&mut rng));
            let (t_land, ..) = landed(&f);
            let s = f.sample.expect("a sampler gives a sample");
            let (r_kepler, _) = orbit.propagate(s.t);
            assert!(vec3::norm(vec3::sub(s.r, r_kepler)) < 1.0, "sighting off the path");
            xs.push(s.t / t_land);
        }
        let mean = xs.iter().sum::<f64>() / n as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
        // 4 standard errors: sd of the mean sqrt(1/12/n), of the variance
        // about sqrt(1/180/n) for a uniform variable.
        assert!((mean - 0.5).abs() < 4.0 * (1.0 / 12.0 / n as f64).sqrt(), "mean {mean}");
        assert!((var - 1.0 / 12.0).abs() < 4.0 * (1.0 / 180.0 / n as f64).sqrt(), "var {var}");
        assert!(xs.iter().all(|&x| (0.0..=1.0).contains(&x)));
    }
}

//! Closed-form two-body flight: the Keplerian hop.
//!
//! Why this exists: with no radiation pressure an atom between launch and
//! landing moves on a conic section about the body's centre, so its state
//! at any time, its landing time and its landing point follow from Kepler's
//! equation without step-by-step integration. This is the engine's hot path
//! (particles x hops), so nothing here allocates and each call uses only
//! the trigonometry the geometry needs.
//!
//! Method. The state is advanced with Lagrange's f and g functions in the
//! universal variable chi (Bate, Mueller & White, *Fundamentals of
//! Astrodynamics*, ch. 4, from memory). For a bound orbit chi = sqrt(a) dE,
//! the eccentric-anomaly difference scaled by sqrt(a); for an unbound one
//! chi = sqrt(-a) dH, the hyperbolic-anomaly difference. Writing the
//! Stumpff functions c2, c3 of psi = chi^2 / a lets one formula cover
//! ellipses up to and including e = 1 (purely radial launches, where the
//! periapsis direction is undefined but the anomaly difference is not),
//! parabolas and hyperbolas without a branch at e = 1:
//!
//!   sqrt(mu) dt = chi^3 c3 + sigma0 chi^2 c2 + r0 chi (1 - psi c3)
//!   r           = chi^2 c2 + sigma0 chi (1 - psi c3) + r0 (1 - psi c2)
//!
//! with sigma0 = r0 . v0 / sqrt(mu). The right side of the first line is
//! increasing in chi (its derivative is r / sqrt(mu) >= 0), so Newton's
//! method inside a bracket always finds the one root.
//!
//! Radius crossings are found from the anomaly directly: at radius R the
//! radial variable sigma = r . v / sqrt(mu) satisfies
//! sigma_R^2 = sigma0^2 + (R - r0)(2 - (R + r0)/a) (from vis-viva and
//! conservation of angular momentum), which has no cancellation when the
//! atom starts on the surface; the crossing's anomaly then comes from one
//! atan2, and the time from the first equation above.

use crate::vec3::{self, Vec3};
use core::f64::consts::PI;
use exobound_sdk::math;

/// Which way the atom is moving when it reaches the radius asked for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Direction {
    /// Moving inward (r . v < 0): a surface impact.
    Descending,
    /// Moving outward (r . v > 0): reaching an outer boundary.
    Ascending,
}

/// A two-body (Keplerian) orbit about a point mass, fixed by one state.
/// Positions in m, velocities in m s^-1, times in s, body-centred inertial.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Orbit {
    /// Gravitational parameter GM, m^3 s^-2.
    mu: f64,
    /// sqrt(mu), m^1.5 s^-1.
    sqrt_mu: f64,
    /// Reference position, m.
    r0: Vec3,
    /// Reference velocity, m s^-1.
    v0: Vec3,
    /// |r0|, m.
    r0_norm: f64,
    /// sigma0 = r0 . v0 / sqrt(mu), m^0.5.
    sigma0: f64,
    /// Reciprocal semi-major axis 1/a = 2/r0 - v0^2/mu, m^-1 (vis-viva);
    /// positive when bound, zero for a parabola, negative when unbound.
    alpha: f64,
}

/// Closed-form flight of a surface-to-surface ballistic hop.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Hop {
    /// Angle at the body's centre between launch and landing points, rad.
    pub range_angle: f64,
    /// Time from launch to landing, s.
    pub time_of_flight: f64,
    /// Highest altitude above the launch radius, m.
    pub max_altitude: f64,
}

impl Hop {
    /// Great-circle distance along the surface of radius `radius` (m)
    /// between launch and landing, m.
    pub fn surface_range(&self, radius: f64) -> f64 {
        radius * self.range_angle
    }
}

/// A state reached at a radius crossing: time since the reference state
/// (s), position (m) and velocity (m s^-1).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Crossing {
    /// Time after the reference state, s.
    pub t: f64,
    /// Position at the crossing, m.
    pub r: Vec3,
    /// Velocity at the crossing, m s^-1.
    pub v: Vec3,
}

/// Stumpff functions c2(psi) = (1 - cos sqrt psi)/psi and
/// c3(psi) = (sqrt psi - sin sqrt psi)/psi^1.5, continued to psi <= 0 with
/// cosh and sinh (Bate, Mueller & White ch. 4, from memory). A Taylor
/// series is used for |psi| <= 1, where the closed forms cancel.
#[inline]
fn stumpff(psi: f64) -> (f64, f64) {
    if psi > 1.0 {
        let s = math::sqrt(psi);
        let (sn, cs) = math::sin_cos(s);
        ((1.0 - cs) / psi, (s - sn) / (psi * s))
    } else if psi < -1.0 {
        let s = math::sqrt(-psi);
        let (sh, ch) = sinh_cosh(s);
        ((ch - 1.0) / -psi, (sh - s) / (-psi * s))
    } else {
        // c2 = sum (-psi)^k / (2k+2)!, c3 = sum (-psi)^k / (2k+3)!, k = 0..11;
        // the first omitted term is below 1/26! ~ 2.5e-27 for |psi| <= 1.
        let x = -psi;
        let mut c2 = 0.0;
        let mut c3 = 0.0;
        let mut k = 11;
        loop {
            c2 = c2 * x + INV_FACT[2 * k + 2];
            c3 = c3 * x + INV_FACT[2 * k + 3];
            if k == 0 {
                break;
            }
            k -= 1;
        }
        (c2, c3)
    }
}

/// 1/n! for n = 0..25, for the Stumpff series.
const INV_FACT: [f64; 26] = {
    let mut t = [1.0; 26];
    let mut n = 1;
    while n < 26 {
        t[n] = t[n - 1] / n as f64;
        n += 1;
    }
    t
};

impl Orbit {
    /// The orbit through position `r` (m) with velocity `v` (m s^-1) about a
    /// point mass with GM = `mu` (m^3 s^-2). `r` must be non-zero.
    pub fn from_state(mu: f64, r: Vec3, v: Vec3) -> Orbit {
        let r0_norm = vec3::norm(r);
        let sqrt_mu = math::sqrt(mu);
        Orbit {
            mu,
            sqrt_mu,
            r0: r,
            v0: v,
            r0_norm,
            sigma0: vec3::dot(r, v) / sqrt_mu,
            alpha: 2.0 / r0_norm - vec3::norm2(v) / mu,
        }
    }

    /// Specific orbital energy v^2/2 - mu/r, J kg^-1 (conserved).
    pub fn energy(&self) -> f64 {
        0.5 * vec3::norm2(self.v0) - self.mu / self.r0_norm
    }

    /// True if the orbit is bound (an ellipse, energy < 0).
    pub fn is_bound(&self) -> bool {
        self.alpha > 0.0
    }

    /// Semi-major axis a = 1/alpha, m; infinite for a parabola, negative
    /// for a hyperbola.
    pub fn semi_major_axis(&self) -> f64 {
        1.0 / self.alpha
    }

    /// Eccentricity, dimensionless: e^2 = (1 - r0/a)^2 + sigma0^2 / a, the
    /// sum of (e cos E)^2 and (e sin E)^2 (or their hyperbolic analogue),
    /// valid for radial orbits too (e = 1).
    pub fn eccentricity(&self) -> f64 {
        let ec = 1.0 - self.r0_norm * self.alpha;
        math::sqrt((ec * ec + self.alpha * self.sigma0 * self.sigma0).max(0.0))
    }

    /// Specific angular momentum vector r x v, m^2 s^-1 (normal to the
    /// orbit's plane, along the sense of the motion).
    pub fn angular_momentum_vector(&self) -> Vec3 {
        vec3::cross(self.r0, self.v0)
    }

    /// Specific angular momentum |r x v|, m^2 s^-1.
    pub fn angular_momentum(&self) -> f64 {
        vec3::norm(vec3::cross(self.r0, self.v0))
    }

    /// Period 2 pi sqrt(a^3/mu), s, for a bound orbit; None otherwise.
    pub fn period(&self) -> Option<f64> {
        if self.is_bound() {
            Some(2.0 * PI / (self.sqrt_mu * self.alpha * math::sqrt(self.alpha)))
        } else {
            None
        }
    }

    /// Apoapsis radius a (1 + e), m; infinite if the orbit is unbound.
    pub fn apoapsis(&self) -> f64 {
        if self.is_bound() { (1.0 + self.eccentricity()) / self.alpha } else { f64::INFINITY }
    }

    /// Periapsis radius p / (1 + e) with p = h^2/mu, m (this form stays
    /// accurate for near-radial orbits, where a (1 - e) would cancel; it is
    /// 0 for a purely radial orbit).
    pub fn periapsis(&self) -> f64 {
        let h = self.angular_momentum();
        h * h / self.mu / (1.0 + self.eccentricity())
    }

    /// sqrt(mu) t and r at universal anomaly `chi` (m^0.5), with the
    /// Stumpff values used (c2, c3, psi).
    #[inline]
    fn time_radius(&self, chi: f64) -> (f64, f64, f64, f64) {
        let chi2 = chi * chi;
        let psi = self.alpha * chi2;
        let (c2, c3) = stumpff(psi);
        let one_psi_c3 = 1.0 - psi * c3;
        let t_scaled = chi2 * chi * c3 + self.sigma0 * chi2 * c2 + self.r0_norm * chi * one_psi_c3;
        let r = chi2 * c2 + self.sigma0 * chi * one_psi_c3 + self.r0_norm * (1.0 - psi * c2);
        (t_scaled, r, c2, c3)
    }

    /// State after `dt` s of flight from the universal anomaly `chi`,
    /// with Lagrange's f and g functions (Bate, Mueller & White ch. 4):
    /// r = f r0 + g v0, v = fdot r0 + gdot v0.
    #[inline]
    fn state_at(&self, chi: f64, dt: f64) -> (Vec3, Vec3) {
        let (_, r, c2, c3) = self.time_radius(chi);
        self.state_from(chi, dt, r, c2, c3)
    }

    /// [`Orbit::state_at`] with |r| (m) and the Stumpff values at `chi`
    /// already known.
    #[inline]
    fn state_from(&self, chi: f64, dt: f64, r: f64, c2: f64, c3: f64) -> (Vec3, Vec3) {
        let chi2 = chi * chi;
        let psi = self.alpha * chi2;
        let f = 1.0 - chi2 * c2 / self.r0_norm;
        let g = dt - chi2 * chi * c3 / self.sqrt_mu;
        let fdot = self.sqrt_mu * chi * (psi * c3 - 1.0) / (r * self.r0_norm);
        let gdot = 1.0 - chi2 * c2 / r;
        let pos = vec3::add(vec3::scale(self.r0, f), vec3::scale(self.v0, g));
        let vel = vec3::add(vec3::scale(self.r0, fdot), vec3::scale(self.v0, gdot));
        (pos, vel)
    }

    /// Position (m) and velocity (m s^-1) after `dt` s (negative `dt`
    /// propagates backward). Bound orbits are first reduced modulo the
    /// period, so long flights keep full precision.
    pub fn propagate(&self, dt: f64) -> (Vec3, Vec3) {
        if dt == 0.0 {
            return (self.r0, self.v0);
        }
        let (dt, chi) = self.solve_universal(dt, None);
        self.state_at(chi, dt)
    }

    /// [`Orbit::propagate`] starting Newton's method from `chi_guess`
    /// (m^0.5; e.g. the anomaly of a nearby earlier time plus
    /// sqrt(mu) dt / r), which saves iterations when the guess is close;
    /// also returns the anomaly reached (m^0.5). The result does not depend
    /// on the guess beyond the solver's tolerance (~1e-15 in chi).
    pub fn propagate_near(&self, dt: f64, chi_guess: f64) -> (Vec3, Vec3, f64) {
        if dt == 0.0 {
            return (self.r0, self.v0, 0.0);
        }
        let (dt, chi) = self.solve_universal(dt, Some(chi_guess));
        let (r, v) = self.state_at(chi, dt);
        (r, v, chi)
    }

    /// Solves the universal Kepler equation for chi at flight time `dt`;
    /// returns the (possibly period-reduced) time and chi. Newton's method
    /// with the derivative r / sqrt(mu), falling back to bisection whenever
    /// a Newton step would leave the current bracket, to ~1e-15 in chi.
    fn solve_universal(&self, dt: f64, start: Option<f64>) -> (f64, f64) {
        let (dt, mut lo, mut hi, guess) = if let Some(period) = self.period() {
            // Elliptic: chi = sqrt(a) dE, and one period is dE = 2 pi.
            let mut red = dt - period * (dt / period).floor();
            if red.is_nan() || red >= period {
                red = 0.0;
            }
            let hi = 2.0 * PI / math::sqrt(self.alpha);
            (red, 0.0, hi, red * self.sqrt_mu / self.r0_norm)
        } else {
            let (lo, hi, guess) = self.unbound_bracket(dt);
            (dt, lo, hi, guess)
        };
        let goal = dt * self.sqrt_mu;
        if goal == 0.0 {
            return (dt, 0.0);
        }
        // A caller's start is used only inside the bracket.
        let mut chi = match start {
            Some(c) if c > lo && c < hi => c,
            _ => guess,
        };
        if !(chi > lo && chi < hi) {
            chi = 0.5 * (lo + hi);
        }
        for _ in 0..200 {
            let (t, r, ..) = self.time_radius(chi);
            let f = t - goal;
            if f > 0.0 {
                hi = chi;
            } else if f < 0.0 {
                lo = chi;
            } else {
                break;
            }
            let mut next = chi - f / r;
            let newton = next > lo && next < hi;
            if !newton {
                next = 0.5 * (lo + hi);
            }
            let step = (next - chi).abs();
            chi = next;
            // Newton converges quadratically: the error after a step of
            // relative size 1e-8 is of order (1e-8)^2 times a factor of
            // order one (sigma chi / 2r), below round-off, so no further
            // confirming iteration is needed.
            if (newton && step <= 1e-8 * chi.abs())
                || step <= 1e-15 * chi.abs()
                || hi - lo <= 4.0 * f64::EPSILON * chi.abs()
            {
                break;
            }
        }
        (dt, chi)
    }

    /// Bracket [lo, hi] and a starting value for chi on an unbound orbit
    /// at flight time `dt` (s, either sign). On a hyperbola the start comes
    /// from the far-field solution of e sinh H - H = M, H ~ ln(2M/e + 1.8)
    /// (a standard starter, from memory), because the time grows
    /// exponentially with chi there and Newton from a poor start crawls.
    /// The bracket edge is then doubled until it encloses the root, never
    /// beyond |dH| = 700, where cosh would overflow.
    fn unbound_bracket(&self, dt: f64) -> (f64, f64, f64) {
        let goal = dt * self.sqrt_mu;
        let near = goal / self.r0_norm;
        let (guess, cap) = if self.alpha < 0.0 {
            let sa = math::sqrt(-self.alpha);
            let e = self.eccentricity();
            let h0 = atanh(self.sigma0 * sa / (1.0 - self.r0_norm * self.alpha));
            let (sinh_h0, _) = sinh_cosh(h0);
            // Mean anomaly M = e sinh H - H, advancing at n = sqrt(mu) (-alpha)^1.5.
            let m = e * sinh_h0 - h0 + self.sqrt_mu * sa * sa * sa * dt;
            let h = m.signum() * math::ln(2.0 * m.abs() / e + 1.8);
            let far = (h - h0) / sa;
            // Use the far-field start only if it points the right way.
            let g = if far * dt > 0.0 && far.abs() < near.abs() { far } else { near };
            (g, 700.0 / sa)
        } else {
            (near, f64::MAX)
        };
        let mut edge = guess.clamp(-cap, cap);
        for _ in 0..200 {
            let (t, ..) = self.time_radius(edge);
            let enclosed = if dt > 0.0 { t >= goal } else { t <= goal };
            if enclosed || edge.abs() >= cap {
                break;
            }
            edge = (2.0 * edge).clamp(-cap, cap);
        }
        if dt > 0.0 { (0.0, edge, guess) } else { (edge, 0.0, guess) }
    }

    /// Time (s) until the atom next reaches radius `radius` (m) moving in
    /// `direction`; None if this orbit never does. A crossing exactly at the
    /// reference state counts as "now" only if the atom is already moving
    /// the right way: an atom launched upward from the surface gets the full
    /// hop time for `Descending`, not 0.
    pub fn time_to_radius(&self, radius: f64, direction: Direction) -> Option<f64> {
        self.crossing_anomaly(radius, direction).map(|chi| self.time_radius(chi).0 / self.sqrt_mu)
    }

    /// Like [`Orbit::time_to_radius`], and also the state there: the landing
    /// (or boundary) point and velocity, at no extra Kepler solve.
    pub fn crossing(&self, radius: f64, direction: Direction) -> Option<Crossing> {
        let chi = self.crossing_anomaly(radius, direction)?;
        let (t_scaled, r_norm, c2, c3) = self.time_radius(chi);
        let t = t_scaled / self.sqrt_mu;
        let (r, v) = self.state_from(chi, t, r_norm, c2, c3);
        Some(Crossing { t, r, v })
    }

    /// Universal anomaly chi (m^0.5) of the next crossing of `radius` (m)
    /// moving in `direction`; None if this orbit never gets there. With
    /// [`Orbit::at_anomaly`] a path can be sampled without Kepler solves.
    pub fn anomaly_of_crossing(&self, radius: f64, direction: Direction) -> Option<f64> {
        self.crossing_anomaly(radius, direction)
    }

    /// Universal anomaly chi (m^0.5) reached `dt` s after the reference
    /// state (one Kepler solve; a bound orbit is reduced modulo its period).
    pub fn anomaly_at(&self, dt: f64) -> f64 {
        if dt == 0.0 {
            return 0.0;
        }
        self.solve_universal(dt, None).1
    }

    /// Time since the reference state (s) and position (m) at universal
    /// anomaly `chi` (m^0.5): no Kepler solve, for sampling a path.
    pub fn at_anomaly(&self, chi: f64) -> (f64, Vec3) {
        let (t_scaled, r, c2, c3) = self.time_radius(chi);
        let t = t_scaled / self.sqrt_mu;
        (t, self.state_from(chi, t, r, c2, c3).0)
    }

    /// Universal anomaly chi (m^0.5) of the next crossing of `radius`.
    fn crossing_anomaly(&self, radius: f64, direction: Direction) -> Option<f64> {
        // sigma at the crossing: sigma_R^2 = sigma0^2 + (R - r0)(2 - alpha (R + r0)).
        let s2 = self.sigma0 * self.sigma0
            + (radius - self.r0_norm) * (2.0 - self.alpha * (radius + self.r0_norm));
        if s2.is_nan() || s2 < 0.0 {
            return None;
        }
        let s_r = match direction {
            Direction::Ascending => math::sqrt(s2),
            Direction::Descending => -math::sqrt(s2),
        };
        if self.alpha > 0.0 {
            // Ellipse: e sin E = sigma sqrt(alpha), e cos E = 1 - r alpha.
            let sa = math::sqrt(self.alpha);
            let mut e0 = math::atan2(self.sigma0 * sa, 1.0 - self.r0_norm * self.alpha);
            if e0 < 0.0 {
                e0 += 2.0 * PI;
            }
            let mut et = math::atan2(s_r * sa, 1.0 - radius * self.alpha);
            if direction == Direction::Descending {
                // The descending half is E in [pi, 2 pi]; atan2 gives
                // [-pi, -0], so periapsis itself maps to 2 pi, not 0.
                et += 2.0 * PI;
            }
            let mut de = et - e0;
            if de < 0.0 {
                de += 2.0 * PI;
            }
            Some(de / sa)
        } else if self.alpha < 0.0 {
            // Hyperbola: tanh H = e sinh H / e cosh H = sigma sqrt(-alpha) / (1 - r alpha).
            let sa = math::sqrt(-self.alpha);
            let h0 = atanh(self.sigma0 * sa / (1.0 - self.r0_norm * self.alpha));
            let ht = atanh(s_r * sa / (1.0 - radius * self.alpha));
            let dh = ht - h0;
            if dh >= 0.0 { Some(dh / sa) } else { None }
        } else {
            // Parabola: sigma grows linearly, sigma = sigma0 + chi.
            let chi = s_r - self.sigma0;
            if chi >= 0.0 { Some(chi) } else { None }
        }
    }
}

/// Hyperbolic sine and cosine of x, via one exp (|x| well above 1e-8
/// only: sinh loses relative precision for tiny x, which the caller
/// tolerates because it multiplies e ~ 1 and is added to O(1) terms).
#[inline]
fn sinh_cosh(x: f64) -> (f64, f64) {
    let ep = math::exp(x);
    let em = 1.0 / ep;
    (0.5 * (ep - em), 0.5 * (ep + em))
}

/// Inverse hyperbolic tangent for |x| < 1, via ln_1p (accurate near 0).
#[inline]
fn atanh(x: f64) -> f64 {
    0.5 * math::ln_1p(2.0 * x / (1.0 - x))
}

/// Closed-form ballistic hop from radius `radius` (m) back to it, for
/// launch speed `speed` (m s^-1) at elevation `elevation` (rad above the
/// local horizontal) about GM = `mu` (m^3 s^-2). None if the launch is
/// unbound (speed >= escape speed) or points below the horizontal.
///
/// Free-flight range equation (Bate, Mueller & White ch. 6, from memory;
/// Bate, Mueller & White 1971, ch. 6, from memory), with nu = v^2 R / mu and launch elevation el:
/// e sin(nu_L) = nu sin el cos el and e cos(nu_L) = nu cos^2 el - 1 at the
/// launch true anomaly nu_L, so the range angle is
/// Psi = 2 atan2(nu sin el cos el, 1 - nu cos^2 el) (the same as
/// cos(Psi/2) = (1 - nu cos^2 el)/e, without acos's loss of precision for
/// short hops). The launch eccentric anomaly E1 has e sin E1 =
/// sin el sqrt(nu (2 - nu)) and e cos E1 = nu - 1, and the time of flight is
/// TOF = 2 sqrt(a^3/mu) (pi - E1 + e sin E1) with a = R / (2 - nu). The peak
/// altitude a (1 + e) - R is rewritten as
/// R nu ((1 + e) - (2 - nu) cos^2 el) / ((2 - nu)(1 + e)) to avoid
/// cancelling R against the apoapsis for short hops.
pub fn ballistic_hop(mu: f64, radius: f64, speed: f64, elevation: f64) -> Option<Hop> {
    let nu = speed * speed * radius / mu;
    if nu.is_nan() || nu >= 2.0 || elevation < 0.0 {
        return None;
    }
    let (s, c) = math::sin_cos(elevation);
    let c2 = c * c;
    let e = math::sqrt((1.0 - nu * (2.0 - nu) * c2).max(0.0));
    let range_angle = 2.0 * math::atan2(nu * s * c, 1.0 - nu * c2);
    let e_sin_e1 = s * math::sqrt(nu * (2.0 - nu));
    // pi - E1, computed directly (E1 is near pi for short hops).
    let pi_minus_e1 = math::atan2(e_sin_e1, 1.0 - nu);
    let a = radius / (2.0 - nu);
    let time_of_flight = 2.0 * math::sqrt(a * a * a / mu) * (pi_minus_e1 + e_sin_e1);
    let max_altitude = radius * nu * ((1.0 + e) - (2.0 - nu) * c2) / ((2.0 - nu) * (1.0 + e));
    Some(Hop { range_angle, time_of_flight, max_altitude })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::body::Body;
    use crate::transport::frames::{enu_basis, enu_to_vec};
    use core::f64::consts::{FRAC_PI_2, FRAC_PI_4};

    fn rel(a: f64, b: f64) -> f64 {
        (a - b).abs() / b.abs()
    }

    /// Launch state from the surface point (lat, lon) with speed and
    /// elevation, azimuth measured from east toward north.
    fn launch(radius: f64, speed: f64, elevation: f64, azimuth: f64) -> (Vec3, Vec3) {
        let basis = enu_basis(0.3, 1.1);
        let r = vec3::scale(basis[2], radius);
        let (se, ce) = (elevation.sin(), elevation.cos());
        let v = enu_to_vec(
            [speed * ce * azimuth.cos(), speed * ce * azimuth.sin(), speed * se],
            &basis,
        );
        (r, v)
    }

    /// Fixed-step classical Runge-Kutta (RK4) integration of the two-body
    /// problem, an independent check of the closed form.
    fn rk4(mu: f64, r: Vec3, v: Vec3, duration: f64, steps: usize) -> (Vec3, Vec3) {
        let acc = |r: Vec3| vec3::scale(r, -mu / vec3::norm(r).powi(3));
        let h = duration / steps as f64;
        let (mut r, mut v) = (r, v);
        for _ in 0..steps {
            let k1r = v;
            let k1v = acc(r);
            let k2r = vec3::add_scaled(v, k1v, 0.5 * h);
            let k2v = acc(vec3::add_scaled(r, k1r, 0.5 * h));
            let k3r = vec3::add_scaled(v, k2v, 0.5 * h);
            let k3v = acc(vec3::add_scaled(r, k2r, 0.5 * h));
            let k4r = vec3::add_scaled(v, k3v, h);
            let k4v = acc(vec3::add_scaled(r, k3r, h));
            let dr = vec3::add(
                vec3::add(k1r, vec3::scale(k2r, 2.0)),
                vec3::add(vec3::scale(k3r, 2.0), k4r),
            );
            let dv = vec3::add(
                vec3::add(k1v, vec3::scale(k2v, 2.0)),
                vec3::add(vec3::scale(k3v, 2.0), k4v),
            );
            r = vec3::add_scaled(r, dr, h / 6.0);
            v = vec3::add_scaled(v, dv, h / 6.0);
        }
        (r, v)
    }

    #[test]
    fn stumpff_series_meets_closed_form() {
        // Continuity of c2, c3 across the series/closed-form switch at |psi| = 1
        // (definitions of the Stumpff functions).
        for &p in &[1.0f64, -1.0] {
            let (a2, a3) = stumpff(p); // series branch
            let (b2, b3) = stumpff(p * (1.0 + f64::EPSILON)); // closed-form branch
            assert!((a2 - b2).abs() < 3e-16 && (a3 - b3).abs() < 3e-16, "{p}");
        }
        let (c2, c3) = stumpff(-1.0);
        assert!((c2 - (1f64.cosh() - 1.0)).abs() < 3e-16);
        assert!((c3 - (1f64.sinh() - 1.0)).abs() < 3e-16);
        // Values at 0: 1/2 and 1/6.
        assert_eq!(stumpff(0.0), (0.5, 1.0 / 6.0));
        // Closed form at psi = 0.5 compared with the series.
        let s = 0.5f64.sqrt();
        let (c2, c3) = stumpff(0.5);
        assert!((c2 - (1.0 - s.cos()) / 0.5).abs() < 1e-15);
        assert!((c3 - (s - s.sin()) / (0.5 * s)).abs() < 1e-15);
    }

    #[test]
    fn worked_hops_match_the_range_equation() {
        let moon = Body::moon();
        let mercury = Body::mercury();
        let cases = [
            // Range equation (Bate, Mueller & White 1971, ch. 6, from memory),
            // evaluated and cross-checked by integration in
            // tests/python/hop_reference_values.py:
            // (body, v, Psi rad, range km, TOF s, h_max km, printed decimals).
            (&moon, 1000.0, 0.424201, 737.01, 1211.59, 206.98, 2),
            (&moon, 2000.0, 2.361757, 4103.3, 12978.2, 3530.5, 1),
            (&mercury, 1000.0, 0.117076, 285.60, 420.23, 73.57, 2),
        ];
        for (body, v, psi, range_km, tof, hmax_km, dec) in cases {
            let hop = ballistic_hop(body.gm, body.radius, v, FRAC_PI_4).unwrap();
            let half_unit = 0.5 * 10f64.powi(-dec);
            // Range equation (Bate, Mueller & White 1971, ch. 6): to the printed precision.
            assert!((hop.range_angle - psi).abs() <= 5e-7, "{} {v}", body.name);
            assert!((hop.surface_range(body.radius) / 1e3 - range_km).abs() <= half_unit);
            assert!((hop.time_of_flight - tof).abs() <= half_unit);
            assert!((hop.max_altitude / 1e3 - hmax_km).abs() <= half_unit);
        }
        // Unbound and downward launches have no hop.
        assert!(ballistic_hop(moon.gm, moon.radius, moon.escape_speed(), 0.5).is_none());
        assert!(ballistic_hop(moon.gm, moon.radius, 500.0, -0.1).is_none());
    }

    #[test]
    fn orbit_reproduces_the_range_equation() {
        // Self-consistency: time_to_radius + propagate vs the range equation
        // (Bate, Mueller & White 1971, ch. 6; two independent routes through Kepler's laws).
        for body in [Body::moon(), Body::mercury()] {
            for &v_frac in &[0.01, 0.2, 0.42, 0.7, 0.9, 0.99] {
                for &el in &[0.02, 0.3, FRAC_PI_4, 1.2, 1.5, FRAC_PI_2] {
                    let v = v_frac * body.escape_speed();
                    let hop = ballistic_hop(body.gm, body.radius, v, el).unwrap();
                    let (r0, v0) = launch(body.radius, v, el, 0.7);
                    let orbit = Orbit::from_state(body.gm, r0, v0);
                    let tof = orbit.time_to_radius(body.radius, Direction::Descending).unwrap();
                    assert!(rel(tof, hop.time_of_flight) < 1e-9, "{} {v_frac} {el}", body.name);
                    let (r1, v1) = orbit.propagate(tof);
                    assert!(rel(vec3::norm(r1), body.radius) < 1e-12);
                    assert!(vec3::dot(r1, v1) < 0.0, "lands moving down");
                    // Range angle swept in the direction of motion, [0, 2 pi).
                    let n = vec3::cross(r0, v0);
                    let sweep = math::atan2(
                        vec3::dot(vec3::cross(r0, r1), n) / vec3::norm(n),
                        vec3::dot(r0, r1),
                    );
                    let psi = crate::transport::frames::wrap_two_pi(sweep);
                    if el < FRAC_PI_2 {
                        assert!(rel(psi, hop.range_angle) < 1e-9, "{} {v_frac} {el}", body.name);
                    } else {
                        let off = vec3::angle_between(r0, r1);
                        assert!(off < 1e-7 && hop.range_angle < 1e-12);
                    }
                    // crossing() returns the same landing state.
                    let c = orbit.crossing(body.radius, Direction::Descending).unwrap();
                    assert!(vec3::norm(vec3::sub(c.r, r1)) < 1e-6 * body.radius * 1e-3);
                    // Peak altitude: apoapsis - R (Kepler's first law); the
                    // subtraction costs a few ulp of R for the lowest hops.
                    let dh = (orbit.apoapsis() - body.radius - hop.max_altitude).abs();
                    assert!(dh < 1e-9 * hop.max_altitude + 8.0 * f64::EPSILON * body.radius);
                }
            }
        }
    }

    #[test]
    fn flat_gravity_limit() {
        // Flat-gravity limit of the range equation (textbook projectile motion): range v^2 sin(2 el)/g, TOF 2 v sin(el)/g,
        // h_max v^2 sin^2(el)/(2g) are the nu -> 0 limits; corrections are O(nu).
        let moon = Body::moon();
        let g = moon.surface_gravity();
        let mut last = f64::INFINITY;
        for &v in &[100.0, 10.0, 1.0] {
            let el = 0.6;
            let hop = ballistic_hop(moon.gm, moon.radius, v, el).unwrap();
            let range = v * v * (2.0 * el).sin() / g;
            let tof = 2.0 * v * el.sin() / g;
            let hmax = v * v * el.sin().powi(2) / (2.0 * g);
            let nu = v * v * moon.radius / moon.gm;
            let dev = [
                hop.surface_range(moon.radius) / range - 1.0,
                hop.time_of_flight / tof - 1.0,
                hop.max_altitude / hmax - 1.0,
            ];
            let worst = dev.iter().fold(0.0f64, |m, d| m.max(d.abs()));
            assert!(worst < 2.0 * nu, "v {v}: {dev:?} nu {nu}");
            assert!(worst < last);
            last = worst;
        }
        // Flat-gravity projectile values for the Moon at 1 km/s, 45 deg (textbook formulas, evaluated).
        let v: f64 = 1000.0;
        assert!((v * v / g / 1e3 - 615.68).abs() < 0.005);
        assert!((2.0 * v * FRAC_PI_4.sin() / g - 870.70).abs() < 0.005);
        assert!((v * v * 0.5 / (2.0 * g) / 1e3 - 153.92).abs() < 0.005);
    }

    #[test]
    fn propagate_conserves_energy_and_angular_momentum() {
        // Two-body integrals of motion (energy, angular momentum vector).
        let moon = Body::moon();
        let ve = moon.escape_speed();
        for &(speed, el) in
            &[(0.3 * ve, 0.5), (0.95 * ve, 0.1), (1.5 * ve, 0.8), (0.6 * ve, FRAC_PI_2), (ve, 0.4)]
        {
            let (r0, v0) = launch(moon.radius, speed, el, 2.0);
            let orbit = Orbit::from_state(moon.gm, r0, v0);
            let h0 = vec3::cross(r0, v0);
            for &dt in &[1.0, 500.0, 3.3e3, 1.0e4, 7.7e4, 1.0e6, -2.0e3] {
                let (r, v) = orbit.propagate(dt);
                let o = Orbit::from_state(moon.gm, r, v);
                let scale = moon.gm / moon.radius;
                assert!((o.energy() - orbit.energy()).abs() < 1e-12 * scale, "{speed} {dt}");
                let dh = vec3::norm(vec3::sub(vec3::cross(r, v), h0));
                assert!(dh < 1e-12 * moon.radius * ve, "{speed} {dt} {dh}");
            }
        }
    }

    #[test]
    fn propagate_agrees_with_rk4() {
        // Independent check: fixed-step RK4 (error ~h^4) against the closed form.
        let mercury = Body::mercury();
        let ve = mercury.escape_speed();
        for &(speed, el, dur) in &[
            (0.5 * ve, 0.7, 2000.0),
            (0.8 * ve, FRAC_PI_2, 5000.0),
            (1.2 * ve, 0.3, 4000.0),
            (0.9 * ve, 0.05, 3000.0),
        ] {
            let (r0, v0) = launch(mercury.radius, speed, el, -0.4);
            let orbit = Orbit::from_state(mercury.gm, r0, v0);
            let (r, v) = orbit.propagate(dur);
            let (rr, vr) = rk4(mercury.gm, r0, v0, dur, 40_000);
            assert!(vec3::norm(vec3::sub(r, rr)) < 1e-8 * vec3::norm(r), "{speed} {el}");
            assert!(vec3::norm(vec3::sub(v, vr)) < 1e-8 * vec3::norm(v), "{speed} {el}");
        }
    }

    #[test]
    fn edge_cases_of_surface_crossings() {
        let moon = Body::moon();
        let vc = (moon.gm / moon.radius).sqrt();
        let r0 = [moon.radius, 0.0, 0.0];
        // Horizontal launch faster than circular: at periapsis, it skims the
        // surface again after exactly one period (Kepler's third law).
        let o = Orbit::from_state(moon.gm, r0, [0.0, 1.1 * vc, 0.0]);
        let t = o.time_to_radius(moon.radius, Direction::Descending).unwrap();
        assert!(rel(t, o.period().unwrap()) < 1e-12);
        // Horizontal launch slower than circular: at apoapsis, it falls at once.
        let o = Orbit::from_state(moon.gm, r0, [0.0, 0.9 * vc, 0.0]);
        assert_eq!(o.time_to_radius(moon.radius, Direction::Descending), Some(0.0));
        // Launched downward: lands now.
        let o = Orbit::from_state(moon.gm, r0, [-10.0, 300.0, 0.0]);
        assert_eq!(o.time_to_radius(moon.radius, Direction::Descending), Some(0.0));
        // Upward from a radius one rounding error below or above the surface:
        // still the full hop (the range equation of Bate, Mueller & White 1971, ch. 6, as the reference).
        let hop = ballistic_hop(moon.gm, moon.radius, 800.0, 0.9).unwrap();
        for fuzz in [1.0 - 2e-16, 1.0, 1.0 + 2e-16] {
            let (r, v) = launch(moon.radius * fuzz, 800.0, 0.9, 0.0);
            let o = Orbit::from_state(moon.gm, r, v);
            let t = o.time_to_radius(moon.radius, Direction::Descending).unwrap();
            assert!(rel(t, hop.time_of_flight) < 1e-9);
        }
        // Never reaches a radius beyond apoapsis or below periapsis.
        let (r, v) = launch(moon.radius, 1000.0, 0.8, 0.0);
        let o = Orbit::from_state(moon.gm, r, v);
        assert!(o.time_to_radius(moon.radius + 1.0e6, Direction::Ascending).is_none());
        assert!(o.time_to_radius(1.0e5, Direction::Descending).is_none());
        let up = o.time_to_radius(o.apoapsis() - 1.0, Direction::Ascending).unwrap();
        let down = o.time_to_radius(o.apoapsis() - 1.0, Direction::Descending).unwrap();
        assert!(up < down && down < o.time_to_radius(moon.radius, Direction::Descending).unwrap());
        // Circular orbit: no crossings of any other radius.
        let o =
            Orbit::from_state(moon.gm, [2.0 * moon.radius, 0.0, 0.0], [0.0, vc / 2f64.sqrt(), 0.0]);
        assert!(o.eccentricity() < 1e-15);
        assert!(o.time_to_radius(moon.radius, Direction::Descending).is_none());
    }

    #[test]
    fn vertical_launch_is_a_radial_orbit() {
        // e = 1: peak radius from energy, 1/r_max = 1/R - v^2/(2 mu).
        let moon = Body::moon();
        let v = 1800.0;
        let (r0, v0) = launch(moon.radius, v, FRAC_PI_2, 0.0);
        let o = Orbit::from_state(moon.gm, r0, v0);
        assert!((o.eccentricity() - 1.0).abs() < 1e-12);
        let r_max = 1.0 / (1.0 / moon.radius - v * v / (2.0 * moon.gm));
        assert!(rel(o.apoapsis(), r_max) < 1e-12);
        assert!(o.periapsis() < 1e-3);
        let t_up = o.time_to_radius(r_max * (1.0 - 1e-12), Direction::Ascending).unwrap();
        let t_down = o.time_to_radius(moon.radius, Direction::Descending).unwrap();
        // Time symmetry of the radial Kepler problem: up and down take the same time.
        assert!(rel(t_down, 2.0 * t_up) < 1e-5);
        let (r1, v1) = o.propagate(t_down);
        assert!(vec3::norm(vec3::sub(r1, r0)) < 1e-6);
        assert!(rel(vec3::norm(v1), v) < 1e-9 && vec3::dot(v1, v0) < 0.0);
        // The RK4 check at half the flight (before the singular centre matters).
        let (rr, _) = rk4(moon.gm, r0, v0, 0.5 * t_down, 40_000);
        let (rk, _) = o.propagate(0.5 * t_down);
        assert!(vec3::norm(vec3::sub(rr, rk)) < 1e-8 * vec3::norm(rk));
    }

    #[test]
    fn unbound_flights_reach_the_boundary_once() {
        let moon = Body::moon();
        let boundary = 10.0 * moon.radius;
        for speed_frac in [1.0, 1.0 + 1e-9, 1.3] {
            let v = speed_frac * moon.escape_speed();
            let (r0, v0) = launch(moon.radius, v, 0.7, 1.0);
            let o = Orbit::from_state(moon.gm, r0, v0);
            assert!(o.apoapsis().is_infinite() || o.is_bound());
            assert!(o.time_to_radius(moon.radius, Direction::Descending).is_none() || o.is_bound());
            let c = o.crossing(boundary, Direction::Ascending).unwrap();
            assert!(rel(vec3::norm(c.r), boundary) < 1e-12, "{speed_frac}");
            let (r, v) = o.propagate(c.t);
            assert!(vec3::norm(vec3::sub(r, c.r)) < 1e-9 * boundary);
            assert!(vec3::norm(vec3::sub(v, c.v)) < 1e-9 * moon.escape_speed());
            // Independent check of the crossing time by RK4.
            let (rr, _) = rk4(moon.gm, r0, v0, c.t, 100_000);
            assert!(rel(vec3::norm(rr), boundary) < 1e-8, "{speed_frac}");
        }
        // An exactly parabolic state takes the parabola branch.
        let r0 = [moon.radius, 0.0, 0.0];
        let v = (2.0 * moon.gm / moon.radius).sqrt();
        let o = Orbit::from_state(moon.gm, r0, [v * 0.6, v * 0.8, 0.0]);
        if o.alpha == 0.0 {
            let t = o.time_to_radius(boundary, Direction::Ascending).unwrap();
            assert!(rel(vec3::norm(o.propagate(t).0), boundary) < 1e-12);
        }
    }
}

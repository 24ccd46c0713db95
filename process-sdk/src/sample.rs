//! Samplers that process laws need for launch and re-emission velocities.
//!
//! Why this exists: every source law ends in "draw a speed from this
//! distribution and a direction from that one". Writing those once, with
//! their derivations, keeps modules short and lets the tests check the
//! samplers against exact CDFs once for everybody.
//!
//! Directions are unit vectors in the local horizontal frame: east, north,
//! up. Speeds are in m s^-1, temperatures in K, masses in kg.

use crate::constants::BOLTZMANN;
use crate::math;
use crate::records::Velocity;
use crate::rng::Rng;

/// 2 pi, rad.
const TAU: f64 = core::f64::consts::TAU;

/// A unit vector in the local horizontal frame (east, north, up), dimensionless.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Direction {
    /// Eastward component.
    pub east: f64,
    /// Northward component.
    pub north: f64,
    /// Upward (local vertical) component.
    pub up: f64,
}

impl Direction {
    /// The velocity of this direction at `speed` m s^-1.
    #[inline]
    pub fn times(self, speed: f64) -> Velocity {
        Velocity { east: self.east * speed, north: self.north * speed, up: self.up * speed }
    }
}

/// Most probable speed of a Maxwellian, a = sqrt(2 k T / m), in m s^-1, for
/// temperature `t` in K and particle mass `m` in kg.
#[inline]
pub fn thermal_speed(t: f64, m: f64) -> f64 {
    math::sqrt(2.0 * BOLTZMANN * t / m)
}

impl Rng {
    /// Uniform deviate on (a, b), in the units of a and b.
    #[inline]
    pub fn uniform_in(&mut self, a: f64, b: f64) -> f64 {
        a + (b - a) * self.uniform()
    }

    /// Standard normal deviate (mean 0, variance 1) by the Box-Muller
    /// transform (Box & Muller 1958); the second deviate of each pair is kept.
    #[inline]
    pub fn normal(&mut self) -> f64 {
        if let Some(z) = self.spare_normal.take() {
            return z;
        }
        let r = math::sqrt(-2.0 * math::ln(self.uniform()));
        let (s, c) = math::sin_cos(TAU * self.uniform());
        self.spare_normal = Some(r * s);
        r * c
    }

    /// Exponential deviate with unit mean (inverse CDF, -ln u).
    #[inline]
    pub fn exponential(&mut self) -> f64 {
        -math::ln(self.uniform())
    }

    /// Speed in m s^-1 from the Maxwellian *flux* distribution
    /// f(v) ~ v^3 exp(-v^2/a^2), a = sqrt(2kT/m), for temperature `t` in K and
    /// mass `m` in kg. This is the speed distribution of atoms crossing a
    /// plane, the right law for thermal desorption and for vapour leaving a
    /// surface. Since x = v^2/a^2 is Gamma(2, 1), x is the sum of two unit
    /// exponentials and v = a sqrt(x).
    #[inline]
    pub fn maxwellian_flux_speed(&mut self, t: f64, m: f64) -> f64 {
        // -ln(u1) - ln(u2) = -ln(u1 u2); one logarithm instead of two
        // (u1 u2 >= 2^-108, far from underflow).
        let x = -math::ln(self.uniform() * self.uniform());
        thermal_speed(t, m) * math::sqrt(x)
    }

    /// Direction drawn from the cosine (Lambert) law about the local
    /// vertical: cos(theta) = sqrt(u), azimuth uniform. This is the angular
    /// distribution of a Maxwellian flux leaving a surface.
    #[inline]
    pub fn cosine_direction(&mut self) -> Direction {
        let cos_t = math::sqrt(self.uniform());
        let sin_t = math::sqrt(1.0 - cos_t * cos_t);
        let (s, c) = math::sin_cos(TAU * self.uniform());
        Direction { east: sin_t * c, north: sin_t * s, up: cos_t }
    }

    /// Direction uniform over the upward hemisphere (cos(theta) uniform on (0, 1)).
    #[inline]
    pub fn isotropic_upward(&mut self) -> Direction {
        let cos_t = self.uniform();
        let sin_t = math::sqrt(1.0 - cos_t * cos_t);
        let (s, c) = math::sin_cos(TAU * self.uniform());
        Direction { east: sin_t * c, north: sin_t * s, up: cos_t }
    }

    /// Direction uniform over the whole sphere (cos(theta) uniform on (-1, 1)).
    #[inline]
    pub fn isotropic(&mut self) -> Direction {
        let cos_t = 2.0 * self.uniform() - 1.0;
        let sin_t = math::sqrt(1.0 - cos_t * cos_t);
        let (s, c) = math::sin_cos(TAU * self.uniform());
        Direction { east: sin_t * c, north: sin_t * s, up: cos_t }
    }

    /// Energy in the units of `u` from the Sigmund-Thompson distribution
    /// f(E) = 2 U E / (E + U)^3 (Thompson 1968), by its inverse CDF
    /// E = U sqrt(x) / (1 - sqrt(x)). With `e_max` finite the draw is
    /// truncated to E <= e_max by inverting the renormalised CDF.
    #[inline]
    pub fn sigmund_thompson_energy(&mut self, u: f64, e_max: f64) -> f64 {
        // CDF(E) = E^2 / (E + U)^2, so a uniform x on (0, CDF(e_max)) inverts exactly.
        let cdf_max = if e_max.is_finite() {
            let r = e_max / (e_max + u);
            r * r
        } else {
            1.0
        };
        let s = math::sqrt(self.uniform() * cdf_max);
        u * s / (1.0 - s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::constants::ATOMIC_MASS;
    use crate::records::RngKey;

    const SEED: u64 = 7;

    fn rng(stream: u32) -> Rng {
        Rng::new(RngKey { seed: SEED, particle: 5, event: 0, stream })
    }

    /// Largest distance between the empirical CDF of `xs` and `cdf`.
    fn ks_distance(xs: &mut [f64], cdf: impl Fn(f64) -> f64) -> f64 {
        xs.sort_by(f64::total_cmp);
        let n = xs.len() as f64;
        xs.iter()
            .enumerate()
            .map(|(i, &x)| {
                let f = cdf(x);
                (f - i as f64 / n).abs().max((f - (i + 1) as f64 / n).abs())
            })
            .fold(0.0, f64::max)
    }

    // Kolmogorov-Smirnov critical value at p = 0.01 is 1.628/sqrt(N)
    // (asymptotic Kolmogorov distribution; e.g. Press et al., Numerical Recipes §14.3).
    const KS_1PC: f64 = 1.628;

    #[test]
    fn maxwellian_flux_speed_matches_cdf_and_moments() {
        let n = 200_000;
        let m = 22.989_769_28 * ATOMIC_MASS;
        let t = 1200.0;
        let mut r = rng(1);
        let mut v: Vec<f64> = (0..n).map(|_| r.maxwellian_flux_speed(t, m)).collect();
        let a = thermal_speed(t, m);
        // Maxwellian flux, a = sqrt(2kT/m): Na at 1200 K has a = 931.66 m/s (tests/python/sampler_reference_values.py, scipy.stats.chi(df=4)).
        assert!((a - 931.66).abs() < 0.01);
        let mean = v.iter().sum::<f64>() / n as f64;
        // <v> = (3 sqrt(pi)/4) a = 1238.49 m/s (Maxwellian flux moments, textbook; tests/python/sampler_reference_values.py).
        let sd = a * (2.0 - (0.75 * core::f64::consts::PI.sqrt()).powi(2)).sqrt();
        assert!((mean - 1238.49).abs() < 3.0 * sd / (n as f64).sqrt(), "mean {mean}");
        // CDF = 1 - (1 + v^2/a^2) exp(-v^2/a^2) (Maxwellian flux distribution, textbook).
        let d = ks_distance(&mut v, |x| {
            let q = x * x / (a * a);
            1.0 - (1.0 + q) * (-q).exp()
        });
        assert!(d < KS_1PC / (n as f64).sqrt(), "KS distance {d}");
    }

    #[test]
    fn cosine_law_has_sqrt_cdf() {
        // Lambert law: P(cos theta < c) = c^2 (common practice derivation of
        // the cosine law, f(theta) ~ cos theta sin theta).
        let n = 100_000;
        let mut r = rng(2);
        let mut c: Vec<f64> = (0..n).map(|_| r.cosine_direction().up).collect();
        let d = ks_distance(&mut c, |x| x * x);
        assert!(d < KS_1PC / (n as f64).sqrt());
        let dir = r.cosine_direction();
        assert!((dir.east.powi(2) + dir.north.powi(2) + dir.up.powi(2) - 1.0).abs() < 1e-15);
    }

    #[test]
    fn isotropic_is_uniform_in_cos_theta() {
        // Uniform on the sphere: cos theta uniform on (-1, 1) (Archimedes' hat-box theorem).
        let n = 100_000;
        let mut r = rng(3);
        let mut c: Vec<f64> = (0..n).map(|_| r.isotropic().up).collect();
        let d = ks_distance(&mut c, |x| 0.5 * (x + 1.0));
        assert!(d < KS_1PC / (n as f64).sqrt());
        let mut h: Vec<f64> = (0..n).map(|_| r.isotropic_upward().up).collect();
        let d = ks_distance(&mut h, |x| x);
        assert!(d < KS_1PC / (n as f64).sqrt());
    }

    #[test]
    fn normal_matches_erfc_cdf() {
        // Phi(x) = erfc(-x / sqrt 2) / 2 (Abramowitz & Stegun 26.2.29).
        let n = 100_000;
        let mut r = rng(4);
        let mut z: Vec<f64> = (0..n).map(|_| r.normal()).collect();
        let d = ks_distance(&mut z, |x| 0.5 * math::erfc(-x / core::f64::consts::SQRT_2));
        assert!(d < KS_1PC / (n as f64).sqrt());
    }

    #[test]
    fn sigmund_thompson_median_and_truncated_mean() {
        let n = 400_000;
        let u = 0.27;
        let mut r = rng(5);
        let mut e: Vec<f64> = (0..n).map(|_| r.sigmund_thompson_energy(u, f64::INFINITY)).collect();
        // CDF = E^2/(E+U)^2; median (1 + sqrt 2) U = 0.65184 eV (Sigmund 1969 / Thompson 1968
        // energy distribution; tests/python/sampler_reference_values.py, scipy.stats.betaprime(2, 1)).
        let d = ks_distance(&mut e, |x| (x / (x + u)).powi(2));
        assert!(d < KS_1PC / (n as f64).sqrt());
        let median = e[n / 2];
        assert!((median - 0.65184).abs() < 0.01, "median {median}");
        // With a hard cutoff at 2.7 eV the mean is 0.70278 eV (quadrature of the
        // truncated distribution, tests/python/sampler_reference_values.py).
        let xs: Vec<f64> = (0..n).map(|_| r.sigmund_thompson_energy(u, 2.7)).collect();
        let mean = xs.iter().sum::<f64>() / n as f64;
        let sd = (xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / n as f64).sqrt();
        assert!(xs.iter().all(|&x| x <= 2.7));
        assert!((mean - 0.70278).abs() < 3.0 * sd / (n as f64).sqrt(), "mean {mean}");
    }
}

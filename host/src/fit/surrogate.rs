//! A smooth stand-in for the model near the best fit, and the intervals
//! read from it.
//!
//! Why this exists: every evaluation of a Monte Carlo model carries noise,
//! so chi-square evaluated run by run is rough on the scale of the
//! parameter uncertainty, and an optimiser or a finite-difference
//! curvature on it chases noise. Instead each model value is fitted, over a
//! design of evaluations around the current best point, by a quadratic in
//! the (scaled) free parameters (ordinary least squares). The chi-square of
//! those smooth model values against the observations, with the model's
//! Monte Carlo variance added to each observation's, is then minimised
//! exactly and profiled: the interval of a parameter is where the profile
//! chi-square (minimised over the other parameters) rises by 1 (1 sigma)
//! or 4 (2 sigma) above its minimum (Wilks 1938, Ann. Math. Statist. 9,
//! 60-62: the profile likelihood ratio is asymptotically chi-square with
//! one degree of freedom; as used for Delta chi^2 intervals in Press et al.
//! 2007, Numerical Recipes 3rd ed., section 15.6.5).

use argmin::core::{CostFunction, Executor, State};
use argmin::solver::neldermead::NelderMead;

/// A quadratic in d variables: c0 + sum b_j x_j + sum_{j<=k} a_jk x_j x_k,
/// with x = z - centre.
#[derive(Clone, Debug)]
pub struct Quadratic {
    centre: Vec<f64>,
    coefficients: Vec<f64>,
}

/// The terms of the quadratic basis at offset `x`: 1, x_j, x_j x_k (j <= k).
fn basis(x: &[f64]) -> Vec<f64> {
    let d = x.len();
    let mut out = Vec::with_capacity(1 + d + d * (d + 1) / 2);
    out.push(1.0);
    out.extend_from_slice(x);
    for j in 0..d {
        for k in j..d {
            out.push(x[j] * x[k]);
        }
    }
    out
}

/// Number of coefficients of a quadratic in `d` variables.
pub fn terms(d: usize) -> usize {
    1 + d + d * (d + 1) / 2
}

impl Quadratic {
    /// Least-squares fit of `y` at points `z` (each of length d), centred on
    /// `centre` and scaled per dimension by `scale` (for conditioning).
    /// `None` when there are too few points or the design is singular.
    pub fn fit(z: &[Vec<f64>], y: &[f64], centre: &[f64], scale: &[f64]) -> Option<Quadratic> {
        let d = centre.len();
        let p = terms(d);
        if z.len() < p {
            return None;
        }
        let rows: Vec<Vec<f64>> = z
            .iter()
            .map(|zi| {
                basis(
                    &zi.iter()
                        .zip(centre)
                        .zip(scale)
                        .map(|((a, c), s)| (a - c) / s)
                        .collect::<Vec<_>>(),
                )
            })
            .collect();
        // Normal equations (A^T A) c = A^T y; p <= 15, so this is tiny.
        let mut ata = vec![vec![0.0; p]; p];
        let mut aty = vec![0.0; p];
        for (r, &yi) in rows.iter().zip(y) {
            for i in 0..p {
                aty[i] += r[i] * yi;
                for j in 0..p {
                    ata[i][j] += r[i] * r[j];
                }
            }
        }
        let inv = super::invert(&ata)?;
        let coefficients = (0..p).map(|i| (0..p).map(|j| inv[i][j] * aty[j]).sum()).collect();
        Some(Quadratic { centre: centre.to_vec(), coefficients: scale_back(coefficients, scale) })
    }

    /// The value at `z`.
    pub fn at(&self, z: &[f64]) -> f64 {
        let x: Vec<f64> = z.iter().zip(&self.centre).map(|(a, c)| a - c).collect();
        basis(&x).iter().zip(&self.coefficients).map(|(b, c)| b * c).sum()
    }
}

/// Coefficients fitted in scaled offsets x/s, restated for unscaled offsets.
fn scale_back(mut c: Vec<f64>, s: &[f64]) -> Vec<f64> {
    let d = s.len();
    for j in 0..d {
        c[1 + j] /= s[j];
    }
    let mut k = 1 + d;
    for a in 0..d {
        for b in a..d {
            c[k] /= s[a] * s[b];
            k += 1;
        }
    }
    c
}

/// A box in z: lower and upper corners.
#[derive(Clone, Debug)]
pub struct Region {
    /// Lower corner.
    pub lo: Vec<f64>,
    /// Upper corner.
    pub hi: Vec<f64>,
}

impl Region {
    /// `z` moved into the box.
    pub fn clamp(&self, z: &[f64]) -> Vec<f64> {
        z.iter().zip(&self.lo).zip(&self.hi).map(|((v, l), h)| v.clamp(*l, *h)).collect()
    }
}

/// `f` plus a steep penalty outside `region` (where `f` is read at the
/// clamped point), for Nelder-Mead.
struct Boxed<'a> {
    f: &'a dyn Fn(&[f64]) -> f64,
    region: &'a Region,
}

impl CostFunction for Boxed<'_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, z: &Self::Param) -> Result<f64, argmin::core::Error> {
        let c = self.region.clamp(z);
        let out: f64 = z.iter().zip(&c).map(|(a, b)| (a - b).powi(2)).sum();
        Ok((self.f)(&c) + 1e8 * out)
    }
}

/// The minimum of the smooth function `f` in `region`, from `start`, by
/// Nelder-Mead with a simplex of `step` per dimension, restarted once from
/// its answer (a cheap guard against a collapsed simplex).
pub fn minimise(
    f: &dyn Fn(&[f64]) -> f64,
    region: &Region,
    start: &[f64],
    step: &[f64],
) -> Vec<f64> {
    let d = start.len();
    if d == 0 {
        return Vec::new();
    }
    let mut best = region.clamp(start);
    for _ in 0..2 {
        let mut simplex = vec![best.clone()];
        for j in 0..d {
            let mut v = best.clone();
            v[j] = if v[j] + step[j] <= region.hi[j] { v[j] + step[j] } else { v[j] - step[j] };
            simplex.push(v);
        }
        let Ok(solver) = NelderMead::new(simplex).with_sd_tolerance(1e-12) else {
            return best;
        };
        let run = Executor::new(Boxed { f, region }, solver).configure(|s| s.max_iters(400)).run();
        if let Ok(r) = run
            && let Some(z) = r.state().get_best_param()
        {
            let z = region.clamp(z);
            if f(&z) <= f(&best) {
                best = z;
            }
        }
    }
    best
}

/// The profile of `f` in dimension `j` at `t`: `f` minimised over the
/// other dimensions within `region`, starting from `start`.
pub fn profile(
    f: &dyn Fn(&[f64]) -> f64,
    region: &Region,
    start: &[f64],
    step: &[f64],
    j: usize,
    t: f64,
) -> f64 {
    let d = start.len();
    if d == 1 {
        return f(&[t]);
    }
    let others: Vec<usize> = (0..d).filter(|&k| k != j).collect();
    let full = |x: &[f64]| -> Vec<f64> {
        let mut z = vec![0.0; d];
        z[j] = t;
        for (k, &o) in others.iter().enumerate() {
            z[o] = x[k];
        }
        z
    };
    let g = |x: &[f64]| f(&full(x));
    let sub = Region {
        lo: others.iter().map(|&o| region.lo[o]).collect(),
        hi: others.iter().map(|&o| region.hi[o]).collect(),
    };
    let x0: Vec<f64> = others.iter().map(|&o| start[o]).collect();
    let s: Vec<f64> = others.iter().map(|&o| step[o]).collect();
    g(&minimise(&g, &sub, &x0, &s))
}

/// Where the profile of `f` in dimension `j` rises by `delta` above
/// `f(best)`, on each side of `best[j]`: `(lower, upper)`, each `None`
/// when the rise is not reached inside `region` (the interval then
/// extends at least to the region's edge).
pub fn interval(
    f: &dyn Fn(&[f64]) -> f64,
    region: &Region,
    best: &[f64],
    step: &[f64],
    j: usize,
    delta: f64,
) -> (Option<f64>, Option<f64>) {
    let f0 = f(best);
    let level = |t: f64| profile(f, region, best, step, j, t) - f0 - delta;
    let side = |edge: f64| -> Option<f64> {
        // March out in 40 steps to the edge, then bisect the first crossing.
        let (mut a, n) = (best[j], 40);
        for k in 1..=n {
            let b = best[j] + (edge - best[j]) * k as f64 / n as f64;
            if level(b) >= 0.0 {
                let (mut lo, mut hi) = (a, b);
                for _ in 0..50 {
                    let m = 0.5 * (lo + hi);
                    if level(m) >= 0.0 { hi = m } else { lo = m }
                }
                return Some(0.5 * (lo + hi));
            }
            a = b;
        }
        None
    };
    (side(region.lo[j]), side(region.hi[j]))
}

/// The Hessian of `f` at `z` by central differences with steps `h`.
pub fn hessian(f: &dyn Fn(&[f64]) -> f64, z: &[f64], h: &[f64]) -> Vec<Vec<f64>> {
    let d = z.len();
    let at = |i: usize, a: f64, j: usize, b: f64| {
        let mut v = z.to_vec();
        v[i] += a;
        v[j] += b;
        f(&v)
    };
    let mut m = vec![vec![0.0; d]; d];
    for i in 0..d {
        m[i][i] = (at(i, h[i], i, 0.0) - 2.0 * f(z) + at(i, -h[i], i, 0.0)) / (h[i] * h[i]);
        for j in 0..i {
            let v = (at(i, h[i], j, h[j]) - at(i, h[i], j, -h[j]) - at(i, -h[i], j, h[j])
                + at(i, -h[i], j, -h[j]))
                / (4.0 * h[i] * h[j]);
            m[i][j] = v;
            m[j][i] = v;
        }
    }
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_quadratic_is_recovered_exactly() {
        // y = 3 + 2x - y' + 0.5 x^2 + x y' + 4 y'^2 sampled on a 3x3 grid.
        let truth = |z: &[f64]| {
            3.0 + 2.0 * z[0] - z[1] + 0.5 * z[0] * z[0] + z[0] * z[1] + 4.0 * z[1] * z[1]
        };
        let mut pts = Vec::new();
        for a in [-1.0, 0.0, 1.0] {
            for b in [-0.1, 0.0, 0.1] {
                pts.push(vec![0.3 + a, 0.2 + b]);
            }
        }
        let y: Vec<f64> = pts.iter().map(|p| truth(p)).collect();
        let q = Quadratic::fit(&pts, &y, &[0.3, 0.2], &[1.0, 0.1]).unwrap();
        for z in [[0.1, 0.25], [1.0, -0.3], [0.3, 0.2]] {
            assert!((q.at(&z) - truth(&z)).abs() < 1e-9, "{z:?}");
        }
        assert!(Quadratic::fit(&pts[..5], &y[..5], &[0.3, 0.2], &[1.0, 0.1]).is_none());
    }

    #[test]
    fn profile_intervals_of_a_correlated_gaussian() {
        // chi2 = x^T C^-1 x for C = [[1, r], [r, 1]] * s^2: the profile
        // interval of each parameter at Delta chi2 = 1 is +-s, at 4 is +-2s,
        // whatever the correlation r (Press et al. 2007, Numerical Recipes
        // 3rd ed., section 15.6.5: projection of the Delta chi2 ellipse).
        let (s, r): (f64, f64) = (0.05, 0.6);
        let det = s.powi(4) * (1.0 - r * r);
        let f = |z: &[f64]| {
            let (x, y) = (z[0] - 0.5, z[1] - 0.4);
            (s * s * x * x - 2.0 * r * s * s * x * y + s * s * y * y) / det
        };
        let region = Region { lo: vec![0.0, 0.0], hi: vec![1.0, 1.0] };
        let best = minimise(&f, &region, &[0.45, 0.45], &[0.05, 0.05]);
        assert!((best[0] - 0.5).abs() < 1e-5 && (best[1] - 0.4).abs() < 1e-5, "{best:?}");
        for (j, c) in [(0, 0.5), (1, 0.4)] {
            let (lo, hi) = interval(&f, &region, &best, &[0.05, 0.05], j, 1.0);
            assert!((lo.unwrap() - (c - s)).abs() < 1e-4, "{lo:?}");
            assert!((hi.unwrap() - (c + s)).abs() < 1e-4, "{hi:?}");
            let (lo, _) = interval(&f, &region, &best, &[0.05, 0.05], j, 4.0);
            assert!((lo.unwrap() - (c - 2.0 * s)).abs() < 1e-4);
        }
        // Not reached inside a box narrower than the interval.
        let small = Region { lo: vec![0.48, 0.0], hi: vec![0.52, 1.0] };
        assert_eq!(interval(&f, &small, &best, &[0.01, 0.05], 0, 1.0), (None, None));
        // The Hessian gives covariance 2 H^-1 = C and the correlation r.
        let h = hessian(&f, &best, &[1e-3, 1e-3]);
        let cov = super::super::invert(&h).unwrap();
        let corr = 2.0 * cov[0][1] / (2.0 * cov[0][0] * 2.0 * cov[1][1]).sqrt();
        assert!((corr - r).abs() < 1e-6, "{corr}");
        assert!(((2.0 * cov[0][0]).sqrt() - s).abs() < 1e-6);
    }
}

//! Whether a difference between two variants exceeds the Monte Carlo noise.
//!
//! Why this exists: two runs of one scenario with different seeds differ,
//! so a difference between variants means something only against that
//! scatter. Variants are run with common random numbers (the same list of
//! seeds), and each seed gives one paired difference B - A; the noise of
//! the mean difference is the standard error of those pairs, and a
//! difference is significant when |mean| exceeds the two-sided 99 %
//! Student-t critical value times that standard error.

/// Two-sided 99 % critical values t_{0.995, dof} for dof = 1..=12;
/// computed with `scipy.stats.t.ppf(0.995, dof)` (scipy 1.x), and equal
/// to the printed Student-t tables (e.g. Abramowitz & Stegun, Table 26.10).
const T995: [f64; 12] =
    [63.657, 9.925, 5.841, 4.604, 4.032, 3.707, 3.499, 3.355, 3.250, 3.169, 3.106, 3.055];

/// The normal limit of [`T995`] (dof -> infinity), 2.576 (same sources).
const Z995: f64 = 2.576;

/// Two-sided 99 % Student-t critical value for `dof` degrees of freedom
/// (dimensionless); the normal value beyond 30, linear in 1/dof between.
pub fn t_critical(dof: usize) -> f64 {
    match dof {
        0 => f64::INFINITY,
        1..=12 => T995[dof - 1],
        _ => {
            // Between 12 and infinity t is close to linear in 1/dof.
            let w = 12.0 / dof as f64;
            Z995 + (T995[11] - Z995) * w
        }
    }
}

/// Mean and its standard error (sample standard deviation / sqrt(n)) of
/// the finite values ([`crate::tally::profiles::mean_and_error`] on them);
/// the error is NaN with fewer than 2.
pub fn mean_and_se(x: &[f64]) -> (f64, f64) {
    let v: Vec<f64> = x.iter().copied().filter(|a| a.is_finite()).collect();
    crate::tally::profiles::mean_and_error(&v)
}

/// The verdict on one difference.
#[derive(Clone, Copy, Debug, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Larger than the noise.
    Significant,
    /// Within the noise.
    WithinNoise,
    /// Fewer than two seeds: the noise cannot be estimated.
    Unknown,
}

impl Verdict {
    /// Short text for tables.
    pub fn as_str(self) -> &'static str {
        match self {
            Verdict::Significant => "yes",
            Verdict::WithinNoise => "no",
            Verdict::Unknown => "unknown",
        }
    }
}

/// A paired difference B - A over common seeds.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Difference {
    /// Mean of B_s - A_s, in the measure's unit.
    pub mean: f64,
    /// Its standard error, same unit.
    pub se: f64,
    /// Pairs used.
    pub pairs: usize,
    /// Whether |mean| > t_{0.995, pairs-1} se.
    pub verdict: Verdict,
}

/// The paired difference of `b` against `a` (same seeds, same order);
/// pairs where either value is not finite are skipped.
pub fn paired(a: &[f64], b: &[f64]) -> Difference {
    let d: Vec<f64> = a
        .iter()
        .zip(b)
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .map(|(x, y)| y - x)
        .collect();
    let (mean, se) = mean_and_se(&d);
    let verdict = if d.len() < 2 {
        Verdict::Unknown
    } else if mean == 0.0 {
        Verdict::WithinNoise
    } else if mean.abs() > t_critical(d.len() - 1) * se {
        Verdict::Significant
    } else {
        Verdict::WithinNoise
    };
    Difference { mean, se, pairs: d.len(), verdict }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn critical_values_match_the_tables() {
        // Student-t, two-sided 99 %: 63.657 (1 dof), 4.032 (5), 3.169 (10);
        // normal limit 2.576 (scipy.stats.t.ppf / norm.ppf(0.995)).
        assert_eq!(t_critical(1), 63.657);
        assert_eq!(t_critical(5), 4.032);
        assert_eq!(t_critical(10), 3.169);
        // t(30) = 2.750 and t(120) = 2.617 in the tables; the interpolation
        // is within 0.02 of both.
        assert!((t_critical(30) - 2.750).abs() < 0.02, "{}", t_critical(30));
        assert!((t_critical(120) - 2.617).abs() < 0.02, "{}", t_critical(120));
    }

    #[test]
    fn standard_error_worked_example() {
        // 1, 2, 3, 4: mean 2.5, sample sd sqrt(5/3), se sqrt(5/12) (definition).
        let (m, se) = mean_and_se(&[1.0, 2.0, 3.0, 4.0]);
        assert_eq!(m, 2.5);
        assert!((se - (5.0f64 / 12.0).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn verdicts() {
        // Identical variants under common random numbers: zero difference.
        let a = [1.0, 1.3, 0.8];
        assert_eq!(paired(&a, &a).verdict, Verdict::WithinNoise);
        // A shift of 1 with pair scatter 0.1: mean 1, se 0.058, t = 17 > 9.925.
        let b = [2.0, 2.4, 1.7];
        let d = paired(&a, &b);
        assert_eq!(d.verdict, Verdict::Significant);
        // A shift of 0.05 with the same scatter: within the noise.
        let c = [1.0, 1.45, 0.85];
        assert_eq!(paired(&a, &c).verdict, Verdict::WithinNoise);
        assert_eq!(paired(&a[..1], &b[..1]).verdict, Verdict::Unknown);
    }
}

//! Whether a difference between two variants exceeds the Monte Carlo noise.
//!
//! Why this exists: two runs of one scenario with different seeds differ,
//! so a difference between variants means something only against that
//! scatter. Variants are run with common random numbers (the same list of
//! seeds), and each seed gives one paired difference B - A; the noise of
//! the mean difference is the standard error of those pairs. Each
//! difference gets a two-sided Student-t p-value, and the measures of one
//! variant are tested together with the Holm-Bonferroni step-down rule at a
//! family-wise error rate of 1 % (Holm 1979, Scand. J. Statist. 6, 65-70),
//! so that testing eleven measures at once does not multiply false alarms.

/// Mean and its standard error (sample standard deviation / sqrt(n)) of
/// the finite values ([`crate::tally::profiles::mean_and_error`] on them);
/// the error is NaN with fewer than 2.
pub fn mean_and_se(x: &[f64]) -> (f64, f64) {
    let v: Vec<f64> = x.iter().copied().filter(|a| a.is_finite()).collect();
    crate::tally::profiles::mean_and_error(&v)
}

/// ln Gamma(x) for x > 0: the Lanczos approximation with g = 7 and nine
/// coefficients (Lanczos 1964, SIAM J. Numer. Anal. B 1, 86; the
/// coefficients as tabulated by Press et al. 2007, Numerical Recipes 3rd
/// ed., section 6.1, from memory), accurate to about 1e-15 relative.
fn ln_gamma(x: f64) -> f64 {
    const G: f64 = 7.0;
    const C: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        // Reflection: Gamma(x) Gamma(1 - x) = pi / sin(pi x).
        return (std::f64::consts::PI / (std::f64::consts::PI * x).sin()).ln() - ln_gamma(1.0 - x);
    }
    let x = x - 1.0;
    let mut a = C[0];
    let t = x + G + 0.5;
    for (k, c) in C.iter().enumerate().skip(1) {
        a += c / (x + k as f64);
    }
    0.5 * (2.0 * std::f64::consts::PI).ln() + (x + 0.5) * t.ln() - t + a.ln()
}

/// The continued fraction of the incomplete beta function, by the modified
/// Lentz method (Press et al. 2007, Numerical Recipes 3rd ed., section 6.4).
fn beta_fraction(a: f64, b: f64, x: f64) -> f64 {
    const TINY: f64 = 1e-300;
    let (qab, qap, qam) = (a + b, a + 1.0, a - 1.0);
    let mut c = 1.0;
    let mut d = 1.0 - qab * x / qap;
    if d.abs() < TINY {
        d = TINY;
    }
    d = 1.0 / d;
    let mut h = d;
    for m in 1..=300 {
        let m = m as f64;
        let m2 = 2.0 * m;
        let aa = m * (b - m) * x / ((qam + m2) * (a + m2));
        d = 1.0 + aa * d;
        d = if d.abs() < TINY { TINY } else { d };
        c = 1.0 + aa / c;
        c = if c.abs() < TINY { TINY } else { c };
        d = 1.0 / d;
        h *= d * c;
        let aa = -(a + m) * (qab + m) * x / ((a + m2) * (qap + m2));
        d = 1.0 + aa * d;
        d = if d.abs() < TINY { TINY } else { d };
        c = 1.0 + aa / c;
        c = if c.abs() < TINY { TINY } else { c };
        d = 1.0 / d;
        let del = d * c;
        h *= del;
        if (del - 1.0).abs() < 1e-15 {
            break;
        }
    }
    h
}

/// The regularized incomplete beta function I_x(a, b) (Press et al. 2007,
/// Numerical Recipes 3rd ed., eq. 6.4.1 and section 6.4).
pub fn incomplete_beta(a: f64, b: f64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let front =
        (ln_gamma(a + b) - ln_gamma(a) - ln_gamma(b) + a * x.ln() + b * (1.0 - x).ln()).exp();
    if x < (a + 1.0) / (a + b + 2.0) {
        front * beta_fraction(a, b, x) / a
    } else {
        1.0 - front * beta_fraction(b, a, 1.0 - x) / b
    }
}

/// Two-sided p-value of Student's t with `dof` degrees of freedom:
/// P(|T| >= |t|) = I_{dof/(dof + t^2)}(dof/2, 1/2) (Abramowitz & Stegun
/// 1964, eq. 26.7.1 with 26.5.27), dimensionless.
pub fn t_two_sided_p(t: f64, dof: usize) -> f64 {
    if dof == 0 || !t.is_finite() {
        return if t.is_finite() { 1.0 } else { 0.0 };
    }
    let v = dof as f64;
    incomplete_beta(0.5 * v, 0.5, v / (v + t * t))
}

/// The |t| whose two-sided p-value is `alpha` for `dof` degrees of freedom
/// (bisection on [`t_two_sided_p`]), dimensionless.
pub fn t_quantile_two_sided(alpha: f64, dof: usize) -> f64 {
    if dof == 0 {
        return f64::INFINITY;
    }
    let (mut lo, mut hi) = (0.0f64, 1.0f64);
    while t_two_sided_p(hi, dof) > alpha && hi < 1e12 {
        hi *= 2.0;
    }
    for _ in 0..200 {
        let m = 0.5 * (lo + hi);
        if t_two_sided_p(m, dof) > alpha { lo = m } else { hi = m }
    }
    0.5 * (lo + hi)
}

/// The family-wise error rate of the comparison, dimensionless (1 %).
pub const FAMILY_ALPHA: f64 = 0.01;

/// Holm's step-down rule at family-wise error rate `alpha`: which of the
/// `p` values are rejected (significant). NaN p-values are never rejected
/// and do not count as tests (Holm 1979).
pub fn holm(p: &[f64], alpha: f64) -> Vec<bool> {
    let mut order: Vec<usize> = (0..p.len()).filter(|&i| p[i].is_finite()).collect();
    order.sort_by(|&a, &b| p[a].total_cmp(&p[b]));
    let m = order.len();
    let mut out = vec![false; p.len()];
    for (rank, &i) in order.iter().enumerate() {
        if p[i] <= alpha / (m - rank) as f64 {
            out[i] = true;
        } else {
            break;
        }
    }
    out
}

/// The smallest |mean difference| that Holm's rule could flag for a
/// measure with standard error `se` from `pairs` seeds among `tests`
/// measures (its first, most stringent step), in the measure's unit.
pub fn smallest_detectable(se: f64, pairs: usize, tests: usize) -> f64 {
    if pairs < 2 || !se.is_finite() {
        return f64::NAN;
    }
    t_quantile_two_sided(FAMILY_ALPHA / tests.max(1) as f64, pairs - 1) * se
}

/// The fewest seeds for which the test's critical value (first Holm step
/// among `tests` measures) is within 25 % of its many-seed limit.
pub fn seeds_the_test_can_use(tests: usize) -> usize {
    let alpha = FAMILY_ALPHA / tests.max(1) as f64;
    let limit = t_quantile_two_sided(alpha, 100_000);
    (2..200).find(|&k| t_quantile_two_sided(alpha, k - 1) <= 1.25 * limit).unwrap_or(200)
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
    /// Two-sided Student-t p-value of mean / se, dimensionless (NaN with fewer than 2 pairs).
    pub p_value: f64,
    /// Whether Holm's rule over the variant's measures rejects "no difference" ([`holm`]).
    pub verdict: Verdict,
    /// The smallest |mean| the test could flag with this standard error, in the measure's unit.
    pub smallest_detectable: f64,
}

/// The paired difference of `b` against `a` (same seeds, same order);
/// pairs where either value is not finite are skipped. The verdict is the
/// single test's at [`FAMILY_ALPHA`]; [`correct`] applies Holm's rule over
/// the measures of a variant.
pub fn paired(a: &[f64], b: &[f64]) -> Difference {
    let d: Vec<f64> = a
        .iter()
        .zip(b)
        .filter(|(x, y)| x.is_finite() && y.is_finite())
        .map(|(x, y)| y - x)
        .collect();
    let (mean, se) = mean_and_se(&d);
    let p_value = if d.len() < 2 {
        f64::NAN
    } else if mean == 0.0 {
        1.0
    } else if se == 0.0 {
        0.0
    } else {
        t_two_sided_p(mean / se, d.len() - 1)
    };
    let verdict = if d.len() < 2 {
        Verdict::Unknown
    } else if p_value <= FAMILY_ALPHA {
        Verdict::Significant
    } else {
        Verdict::WithinNoise
    };
    Difference {
        mean,
        se,
        pairs: d.len(),
        p_value,
        verdict,
        smallest_detectable: smallest_detectable(se, d.len(), 1),
    }
}

/// Apply Holm's rule to the differences of one variant (one per measure):
/// verdicts and smallest detectable changes for testing them together.
pub fn correct(diffs: &mut [&mut Difference]) {
    let p: Vec<f64> = diffs.iter().map(|d| d.p_value).collect();
    let tests = p.iter().filter(|x| x.is_finite()).count();
    let reject = holm(&p, FAMILY_ALPHA);
    for (d, r) in diffs.iter_mut().zip(reject) {
        if d.pairs >= 2 {
            d.verdict = if r { Verdict::Significant } else { Verdict::WithinNoise };
            d.smallest_detectable = smallest_detectable(d.se, d.pairs, tests);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn standard_error_worked_example() {
        // 1, 2, 3, 4: mean 2.5, sample sd sqrt(5/3), se sqrt(5/12) (definition).
        let (m, se) = mean_and_se(&[1.0, 2.0, 3.0, 4.0]);
        assert_eq!(m, 2.5);
        assert!((se - (5.0f64 / 12.0).sqrt()).abs() < 1e-15);
    }

    #[test]
    fn student_t_and_holm_against_scipy() {
        // scipy 1.17.1, tests/python/compare_reference_values.py:
        // 2 * stats.t.sf(t, dof) and stats.t.ppf(1 - alpha/2, dof).
        for (t, dof, p) in [
            (2.0, 1, 0.295_167_235_300_866_5),
            (30.0, 1, 0.021_212_804_811_070_85),
            (2.5, 4, 0.066_766_544_811_988_14),
            (1.0, 30, 0.325_308_615_426_030_2),
        ] {
            let got = t_two_sided_p(t, dof);
            assert!((got - p).abs() < 1e-12 * p.max(1e-3), "t {t} dof {dof}: {got} vs {p}");
        }
        // Critical values: 63.657 (1 dof, 99 %) as in the printed tables
        // (Abramowitz & Stegun 1964, Table 26.10); 11 measures at 1 %
        // family-wise with 2 seeds: t_{1 - 0.01/22}(1) = 700.28.
        assert!((t_quantile_two_sided(0.01, 1) - 63.656_741_162_871_53).abs() < 1e-8);
        assert!((t_quantile_two_sided(0.01 / 11.0, 1) - 700.281_273_605_340_7).abs() < 1e-6);
        // Holm: sorted p 0.001, 0.004, 0.03 against 0.01/3, 0.01/2, 0.01/1.
        assert_eq!(holm(&[0.03, 0.001, 0.004, f64::NAN], 0.01), vec![false, true, true, false]);
        assert_eq!(holm(&[0.02, 0.006], 0.01), vec![false, false]);
    }

    #[test]
    fn verdicts() {
        // Identical variants under common random numbers: zero difference.
        let a = [1.0, 1.3, 0.8];
        assert_eq!(paired(&a, &a).verdict, Verdict::WithinNoise);
        // A shift of 1 with pair scatter 0.1: mean 1, se 0.058, t = 17 > 9.925
        // (p = 0.0034 < 0.01).
        let b = [2.0, 2.4, 1.7];
        let d = paired(&a, &b);
        assert_eq!(d.verdict, Verdict::Significant);
        // A shift of 0.05 with the same scatter: within the noise.
        let c = [1.0, 1.45, 0.85];
        assert_eq!(paired(&a, &c).verdict, Verdict::WithinNoise);
        assert_eq!(paired(&a[..1], &b[..1]).verdict, Verdict::Unknown);
    }
}

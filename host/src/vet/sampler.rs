//! The `sampler` check: the launch and re-emission samplers, judged by
//! their draws.
//!
//! Why this exists: a sampler can be deterministic and in bounds and still
//! be keyed wrongly, for instance drawing faster atoms for higher particle
//! ids, which would bias every tally that depends on which ids a run hands
//! out. Vet draws two half-samples at one central state with disjoint
//! particle ids and requires them to come from one distribution: a
//! two-sample Kolmogorov-Smirnov test on the speed and on the cosine of
//! the angle from the vertical (sources), or on the stick fraction and the
//! bounce speed (surface interactions). It reports the moments of the
//! draws.
//!
//! The test against a *declared* launch law is the `distribution` check
//! ([`super::distribution`]); the mean launch speed is held to the
//! manifest's own `mean-launch-speed` reference points under
//! `reference-points`.

use exobound_sdk::{OutcomeKind, Velocity};

use super::envelope::{self, Call, Outputs};
use super::{Check, Context, Status};

/// Significance level of the KS tests, dimensionless.
pub const ALPHA: f64 = 1.0e-3;
/// c(alpha) for alpha = 0.001 in the asymptotic two-sample KS critical
/// value D = c(alpha) sqrt((n + m) / (n m)), with
/// c(alpha) = sqrt(-ln(alpha / 2) / 2) = 1.9495 (the two-sample section of
/// the Kolmogorov-Smirnov test in standard references; tabulated as 1.95).
pub fn ks_coefficient(alpha: f64) -> f64 {
    (-(alpha / 2.0).ln() / 2.0).sqrt()
}

/// The two-sample KS critical value for sizes `n` and `m` at `alpha`.
pub fn ks_critical(n: usize, m: usize, alpha: f64) -> f64 {
    let (n, m) = (n as f64, m as f64);
    ks_coefficient(alpha) * ((n + m) / (n * m)).sqrt()
}

/// The two-sample KS statistic: the largest distance between the two
/// empirical distribution functions. NaNs must have been removed.
pub fn ks_statistic(a: &[f64], b: &[f64]) -> f64 {
    let mut a = a.to_vec();
    let mut b = b.to_vec();
    a.sort_by(f64::total_cmp);
    b.sort_by(f64::total_cmp);
    let (n, m) = (a.len() as f64, b.len() as f64);
    let (mut i, mut j, mut d) = (0usize, 0usize, 0.0f64);
    while i < a.len() && j < b.len() {
        let x = a[i].min(b[j]);
        while i < a.len() && a[i] <= x {
            i += 1;
        }
        while j < b.len() && b[j] <= x {
            j += 1;
        }
        d = d.max((i as f64 / n - j as f64 / m).abs());
    }
    d
}

/// Mean, standard deviation and skewness of `x`.
pub fn moments(x: &[f64]) -> (f64, f64, f64) {
    let n = x.len().max(1) as f64;
    let mean = x.iter().sum::<f64>() / n;
    let var = x.iter().map(|v| (v - mean).powi(2)).sum::<f64>() / n;
    let sd = var.sqrt();
    let skew =
        if sd > 0.0 { x.iter().map(|v| ((v - mean) / sd).powi(3)).sum::<f64>() / n } else { 0.0 };
    (mean, sd, skew)
}

struct Ks {
    what: &'static str,
    d: f64,
    critical: f64,
}

fn ks(what: &'static str, a: &[f64], b: &[f64]) -> Ks {
    Ks { what, d: ks_statistic(a, b), critical: ks_critical(a.len(), b.len(), ALPHA) }
}

fn draws(ctx: &Context, call: Call, first: u64) -> Result<Outputs, String> {
    let mut inst = ctx.base_instance("sampler").map_err(|c| c.summary)?;
    let recs = envelope::central(call, first, ctx.options.sampler_draws);
    match envelope::run(&mut inst, call, &recs) {
        Err(h) => Err(h.to_string()),
        Ok(Err(d)) => Err(format!("the law refused the central state: {d}")),
        Ok(Ok(o)) => Ok(o),
    }
}

/// Particle id of the second half-sample's first draw, dimensionless. It
/// must stay below 2^40: the generator keys on the low 40 bits of the id
/// (`Rng::new`), so 2^40 would give the first half-sample's draws again and
/// a two-sample test that cannot fail.
pub const SECOND_HALF: u64 = 1 << 38;

/// Run the check.
pub fn check(ctx: &Context) -> Check {
    let samples: Vec<Call> =
        ctx.calls.iter().copied().filter(|c| matches!(c, Call::Launch | Call::Land)).collect();
    if samples.is_empty() {
        let why = "the module has no sampler (neither source nor surface interaction)";
        return Check::new("sampler", Status::NotApplicable, why);
    }
    let mut c = Check::new("sampler", Status::Pass, "");
    let mut tests: Vec<Ks> = Vec::new();
    let mut details = Vec::new();
    for call in samples {
        let (a, b) = match (draws(ctx, call, 0), draws(ctx, call, SECOND_HALF)) {
            (Ok(a), Ok(b)) => (a, b),
            (Err(e), _) | (_, Err(e)) => {
                c.status = Status::Fail;
                c.summary = format!("{}: {e}", call.as_str());
                return c;
            }
        };
        match (a, b) {
            (Outputs::Velocities(a), Outputs::Velocities(b)) => {
                let sp = |v: &[Velocity]| v.iter().map(Velocity::speed).collect::<Vec<_>>();
                let cz = |v: &[Velocity]| {
                    v.iter()
                        .map(|u| if u.speed() > 0.0 { u.up / u.speed() } else { 0.0 })
                        .collect::<Vec<_>>()
                };
                let (sa, sb) = (sp(&a), sp(&b));
                let all: Vec<f64> = sa.iter().chain(&sb).copied().collect();
                let (mean, sd, skew) = moments(&all);
                let (cmean, _, _) = moments(&cz(&a).into_iter().chain(cz(&b)).collect::<Vec<_>>());
                c = c
                    .measure("launch_mean_speed_m_s-1", mean)
                    .measure("launch_sd_speed_m_s-1", sd)
                    .measure("launch_skewness_speed", skew)
                    .measure("launch_mean_cos_from_vertical", cmean);
                if sd == 0.0 {
                    details.push(
                        "launch: every draw has the same speed (a degenerate sampler?)".to_string(),
                    );
                }
                tests.push(ks("launch speed", &sa, &sb));
                tests.push(ks("launch cos(angle from vertical)", &cz(&a), &cz(&b)));
            }
            (Outputs::Outcomes(a), Outputs::Outcomes(b)) => {
                let stick = |o: &[exobound_sdk::Outcome]| {
                    o.iter().filter(|x| x.kind == OutcomeKind::Stick as u32).count() as f64
                        / o.len().max(1) as f64
                };
                let bounce = |o: &[exobound_sdk::Outcome]| {
                    o.iter()
                        .filter(|x| x.kind == OutcomeKind::Bounce as u32)
                        .map(|x| x.velocity.speed())
                        .collect::<Vec<_>>()
                };
                let (pa, pb) = (stick(&a), stick(&b));
                let n = a.len() as f64;
                let p = 0.5 * (pa + pb);
                // Two binomial proportions: |pa - pb| within 5 standard errors.
                let se = (p * (1.0 - p) * 2.0 / n).sqrt();
                c = c.measure("land_stick_fraction", p);
                if (pa - pb).abs() > 5.0 * se + 1e-12 {
                    c.status = Status::Fail;
                    details.push(format!(
                        "land: stick fractions {pa:.5} and {pb:.5} of the two half-samples differ by more \
                         than 5 standard errors ({se:.2e})"
                    ));
                }
                let (ba, bb) = (bounce(&a), bounce(&b));
                if ba.len() >= 50 && bb.len() >= 50 {
                    let all: Vec<f64> = ba.iter().chain(&bb).copied().collect();
                    let (mean, sd, skew) = moments(&all);
                    c = c
                        .measure("bounce_mean_speed_m_s-1", mean)
                        .measure("bounce_sd_speed_m_s-1", sd)
                        .measure("bounce_skewness_speed", skew);
                    tests.push(ks("bounce speed", &ba, &bb));
                } else {
                    details.push(
                        "land: too few bounces at the central state for a KS test".to_string(),
                    );
                }
            }
            _ => unreachable!("launch gives velocities, land gives outcomes"),
        }
    }
    for t in &tests {
        let ok = t.d <= t.critical;
        details.push(format!(
            "{} KS two-sample (disjoint particle ids): D = {:.5}, critical {:.5} at alpha = {ALPHA}: {}",
            t.what,
            t.d,
            t.critical,
            if ok { "same distribution" } else { "DIFFERENT" }
        ));
        if !ok || !t.d.is_finite() {
            c.status = Status::Fail;
        }
    }
    c.summary = if c.status == Status::Pass {
        format!(
            "{} draws per half-sample; the draws do not depend on the particle ids",
            ctx.options.sampler_draws
        )
    } else {
        "the draws depend on the particle ids (the sampler is keyed wrongly)".to_string()
    };
    c.details(details)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ks_statistic_of_shifted_and_equal_samples() {
        let a: Vec<f64> = (0..100).map(|i| i as f64).collect();
        let b: Vec<f64> = (0..100).map(|i| i as f64 + 50.0).collect();
        assert!((ks_statistic(&a, &b) - 0.5).abs() < 1e-12);
        assert_eq!(ks_statistic(&a, &a), 0.0);
        // c(0.001) = 1.95 in the usual table of two-sample KS coefficients.
        assert!((ks_coefficient(1e-3) - 1.95).abs() < 1e-3);
    }
}

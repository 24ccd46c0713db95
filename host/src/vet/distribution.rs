//! The `distribution` check: a source's launches against the launch law it
//! declares.
//!
//! Why this exists: reference points pin a mean launch speed, and the
//! `sampler` check shows the draws do not depend on particle ids, but
//! neither shows that the draws have the declared *shape*. A source that
//! declares its launch laws (`Source::LAUNCH_LAWS`, decoded as
//! `ManifestInfo::launch_laws`; see `exobound_sdk::launch_law`) gets, for
//! each declared law, an instance with the law's `when` choices (other
//! parameters at their defaults, or the base values vet uses where the
//! manifest gives no default), draws
//! [`VetOptions::sampler_draws`](super::VetOptions) launches at vet's
//! central state, keyed from a block of particle ids of its own
//! ([`FIRST_PARTICLE`]; fixed keys, so a vet is reproducible), and runs a
//! one-sample Kolmogorov-Smirnov test of the speeds (energies, for the
//! energy laws) and of the cosines of the angle from the vertical against
//! the declared distribution functions, at significance [`ALPHA`]. The
//! statistic is D = sup |F_n - F|; the test rejects when
//! D (sqrt(n) + 0.12 + 0.11/sqrt(n)) > c(alpha), Stephens's finite-n
//! modification of the statistic (Stephens 1974, J. Am. Stat. Assoc. 69,
//! 730, Table 1A, case 0: a completely specified distribution), with
//! c(alpha) = sqrt(-ln(alpha/2)/2) the upper alpha point of Kolmogorov's
//! limiting distribution P(sqrt(n) D > c) = 2 sum_k (-1)^(k-1)
//! exp(-2 k^2 c^2) kept to its first term (Kolmogorov 1933, Giorn. Ist.
//! Ital. Attuari 4, 83; tabulated by Smirnov 1948, Ann. Math. Stat. 19,
//! 279): c = 1.9495 at alpha = 0.001, so D_crit = 0.013773 for n = 20 000.
//!
//! "Not declared" is reported only when the module declares nothing; a
//! declaration that names an unknown parameter, input or option, a
//! parameter whose unit is not the law's, or a number that is not finite
//! and positive fails, and so does a law under which the module's launches
//! are refused (by the law or by the host's output validation).

use std::collections::BTreeMap;

use exobound_sdk::wire::{LaunchLawInfo, ManifestInfo, QuantityInfo, Resolved};
use exobound_sdk::{ParamValue, Velocity};

use super::envelope::{self, Call, Outputs, Records};
use super::sampler::ks_coefficient;
use super::{Check, Context, Status};

/// Significance level of the KS tests, dimensionless (vet's, as for `sampler`).
pub const ALPHA: f64 = 1.0e-3;

/// Particle id of the first draw, dimensionless: a block of keys disjoint
/// from the `sampler` check's two half-samples (ids from 0 and from
/// [`SECOND_HALF`](super::sampler::SECOND_HALF) = 2^38), so the two checks
/// judge independent draws, and below 2^40, the bits of the id the
/// generator keys on (`Rng::new`).
pub const FIRST_PARTICLE: u64 = 1 << 39;

/// The largest one-sample KS distance D, dimensionless, that passes at
/// significance `alpha` with `n` draws: c(alpha)/(sqrt(n) + 0.12 +
/// 0.11/sqrt(n)), c(alpha) = sqrt(-ln(alpha/2)/2) (Kolmogorov 1933, Giorn.
/// Ist. Ital. Attuari 4, 83; finite-n form of Stephens 1974, J. Am. Stat.
/// Assoc. 69, 730, Table 1A).
pub fn ks_critical_one_sample(n: usize, alpha: f64) -> f64 {
    let root = (n as f64).sqrt();
    ks_coefficient(alpha) / (root + 0.12 + 0.11 / root)
}

/// The one-sample KS distance, dimensionless, between the empirical
/// distribution of `x` (sorted in place) and the distribution function
/// `cdf`: max over i of |cdf(x_i) - i/n| and |cdf(x_i) - (i+1)/n|.
pub fn ks_one_sample(x: &mut [f64], cdf: impl Fn(f64) -> f64) -> f64 {
    x.sort_by(f64::total_cmp);
    let n = x.len() as f64;
    x.iter()
        .enumerate()
        .map(|(i, &v)| {
            let f = cdf(v);
            (f - i as f64 / n).abs().max((f - (i + 1) as f64 / n).abs())
        })
        .fold(0.0, f64::max)
}

/// Every parameter of `m` at its default, overlaid with `given`.
fn full_parameters(
    m: &ManifestInfo,
    given: &BTreeMap<String, ParamValue>,
) -> BTreeMap<String, ParamValue> {
    let mut all: BTreeMap<String, ParamValue> = m
        .parameters
        .iter()
        .filter_map(|p| p.default.clone().map(|d| (p.name.clone(), d)))
        .collect();
    all.extend(given.iter().map(|(k, v)| (k.clone(), v.clone())));
    all
}

/// Why the `when` list of `law` cannot select an instance, if it cannot.
fn check_when(m: &ManifestInfo, law: &LaunchLawInfo) -> Option<String> {
    for (name, option) in &law.when {
        match m.parameters.iter().find(|p| &p.name == name) {
            None => return Some(format!("`when` names the unknown parameter `{name}`")),
            Some(p) if p.choices.is_empty() => {
                return Some(format!("`when` names `{name}`, which is not a choice parameter"));
            }
            Some(p) if !p.choices.contains(option) => {
                return Some(format!(
                    "`when` gives `{name}` = \"{option}\", not one of its options ({})",
                    p.choices.join(", ")
                ));
            }
            Some(_) => {}
        }
    }
    None
}

/// Why a number of `law` taken from a parameter of `m` cannot be used
/// as the law's number, if it cannot: the parameter's declared unit must
/// be the unit the law states (K, eV, u; dimensionless, written `` or `1`,
/// for the exponent), since vet, a run and the SDK all read the value as is.
fn check_units(m: &ManifestInfo, law: &LaunchLawInfo) -> Option<String> {
    let s = &law.speed;
    let numbers = [
        ("temperature", &s.temperature, "K"),
        ("binding_energy", &s.binding_energy, "eV"),
        ("max_energy", &s.max_energy, "eV"),
        ("ion_energy", &s.ion_energy, "eV"),
        ("ion_mass", &s.ion_mass, "u"),
        ("exponent", &s.exponent, ""),
        ("energy", &s.energy, "eV"),
    ];
    for (what, q, unit) in numbers {
        let Some(QuantityInfo::Named(n)) = q else { continue };
        let Some(name) = n.strip_prefix("param:") else { continue };
        // An unknown parameter is reported when the law is resolved.
        let Some(p) = m.parameters.iter().find(|p| p.name == name) else { continue };
        let given = p.unit.trim();
        let same = given == unit || (unit.is_empty() && given == "1");
        if !same {
            let want = if unit.is_empty() { "dimensionless" } else { unit };
            return Some(format!(
                "`{what}` names `{name}`, whose unit is `{given}`; the law needs {want}"
            ));
        }
    }
    None
}

/// The outcome of one declared law.
struct Verdict {
    /// Whether both KS tests passed.
    ok: bool,
    /// The report line: the law, both distances and the critical one.
    line: String,
    /// The larger of the two KS distances, dimensionless (0 when no test ran).
    worst: f64,
}

/// Draw launches under the declared law `law` of the module `m` and test
/// them against it.
fn test_law(ctx: &Context, m: &ManifestInfo, law: &LaunchLawInfo) -> Verdict {
    let label = law.label();
    let fail = |why: String| Verdict { ok: false, line: format!("{label}: {why}"), worst: 0.0 };
    if let Some(why) = check_when(m, law).or_else(|| check_units(m, law)) {
        return fail(why);
    }
    let mut given = ctx.base.clone();
    for (k, v) in &law.when {
        given.insert(k.clone(), ParamValue::Text(v.clone()));
    }
    let params = full_parameters(m, &given);
    let n = ctx.options.sampler_draws;
    if n < 100 {
        return fail(format!("{n} draws are too few for a KS test (vet's options)"));
    }
    let Records::Launches(requests) = envelope::central(Call::Launch, FIRST_PARTICLE, n) else {
        unreachable!("a launch call has launch requests")
    };
    let resolved: Resolved = match law.resolve(&params, &requests[0]) {
        Ok(r) => r,
        Err(e) => return fail(format!("the declaration cannot be evaluated: {e}")),
    };
    let mut inst = match ctx.instance(&given) {
        Ok(Ok(i)) => i,
        Ok(Err(d)) => return fail(format!("the module refuses these parameters: {d}")),
        Err(h) => return fail(format!("instantiation failed: {h}")),
    };
    let velocities = match envelope::run(&mut inst, Call::Launch, &Records::Launches(requests)) {
        Ok(Ok(Outputs::Velocities(v))) => v,
        Ok(Ok(_)) => unreachable!("launch gives velocities"),
        Ok(Err(d)) => return fail(format!("the law refused the central state: {d}")),
        Err(h) => return fail(h.to_string()),
    };
    let mut speeds: Vec<f64> = velocities.iter().map(Velocity::speed).collect();
    let mut cosines: Vec<f64> =
        velocities.iter().map(|v| if v.speed() > 0.0 { v.up / v.speed() } else { 0.0 }).collect();
    if speeds.iter().chain(&cosines).any(|x| !x.is_finite()) {
        return fail("a launch velocity is not finite".to_string());
    }
    let d_speed = ks_one_sample(&mut speeds, |v| resolved.speed_cdf(v));
    let d_dir = ks_one_sample(&mut cosines, |c| resolved.direction.cdf(c));
    let critical = ks_critical_one_sample(n, ALPHA);
    let what = if resolved.speed.in_energy() { "energy" } else { "speed" };
    let failed: Vec<&str> = [(d_speed, what), (d_dir, "direction")]
        .into_iter()
        .filter(|(d, _)| *d > critical)
        .map(|(_, w)| w)
        .collect();
    let ok = failed.is_empty();
    let verdict = if ok {
        "follows the declaration".to_string()
    } else {
        format!("DISAGREES with the declaration ({} test)", failed.join(" and "))
    };
    Verdict {
        ok,
        line: format!(
            "{label}: {what} D = {d_speed:.5}, direction D = {d_dir:.5}, critical {critical:.5} \
             ({n} draws, alpha = {ALPHA}): {verdict}"
        ),
        worst: d_speed.max(d_dir),
    }
}

/// Run the check.
pub fn check(ctx: &Context) -> Check {
    let name = "distribution";
    if !ctx.calls.contains(&Call::Launch) {
        return Check::new(
            name,
            Status::NotApplicable,
            "only a source declares a launch law, and the module has no source role",
        );
    }
    let m = ctx.module.manifest();
    if m.launch_laws.is_empty() {
        return Check::new(
            name,
            Status::NotDeclared,
            "not declared: the manifest holds no launch law (`Source::LAUNCH_LAWS`), so there is \
             nothing to test the launches against",
        );
    }
    let verdicts: Vec<Verdict> = m.launch_laws.iter().map(|l| test_law(ctx, m, l)).collect();
    let failed = verdicts.iter().filter(|v| !v.ok).count();
    let worst = verdicts.iter().map(|v| v.worst).fold(0.0, f64::max);
    let laws = match verdicts.len() {
        1 => "1 declared launch law".to_string(),
        n => format!("{n} declared launch laws"),
    };
    let (status, summary) = if failed == 0 {
        (Status::Pass, format!("the launches follow the {laws} (KS tests)"))
    } else {
        (Status::Fail, format!("the launches disagree with {failed} of the {laws}"))
    };
    Check::new(name, status, summary)
        .details(verdicts.into_iter().map(|v| v.line).collect())
        .measure("max_ks_distance", worst)
        .measure("ks_critical_distance", ks_critical_one_sample(ctx.options.sampler_draws, ALPHA))
}

#[cfg(test)]
mod tests {
    use super::*;
    use exobound_sdk::wire::Speed;
    use exobound_sdk::{DirectionLaw, Rng, RngKey, stream};

    #[test]
    fn ks_one_sample_of_a_grid() {
        // (i + 1/2)/N against U(0, 1) is 1/(2N) from the CDF everywhere (definition).
        let mut x: Vec<f64> = (0..100).map(|i| (i as f64 + 0.5) / 100.0).collect();
        assert!((ks_one_sample(&mut x, |v| v) - 0.005).abs() < 1e-15);
    }

    /// A source manifest with a choice `law` (`flux`, `sputter`) and the
    /// numbers `t` (K), `u` (eV) and `beta` (unit `beta_unit`).
    fn manifest(beta_unit: &str) -> ManifestInfo {
        let param = |name: &str, unit: &str, choices: &[&str]| exobound_sdk::wire::ParamInfo {
            name: name.into(),
            unit: unit.into(),
            description: String::new(),
            default: None,
            min: None,
            max: None,
            choices: choices.iter().map(|c| c.to_string()).collect(),
            default_origin: "no default".into(),
            table: None,
        };
        ManifestInfo {
            name: "m".into(),
            version: "1.0.0".into(),
            description: String::new(),
            roles: vec!["source".into()],
            authors: vec![],
            institution: String::new(),
            licence: String::new(),
            law_source: String::new(),
            draws_on: Some("bulk".into()),
            ledger_label: String::new(),
            inputs: vec![],
            parameters: vec![
                param("law", "", &["flux", "sputter"]),
                param("t", "K", &[]),
                param("u", "eV", &[]),
                param("beta", beta_unit, &[]),
            ],
            reference_points: vec![],
            launch_laws: vec![],
        }
    }

    #[test]
    fn a_declaration_naming_what_the_manifest_lacks_is_refused_with_its_name() {
        use exobound_sdk::{LaunchLaw, Quantity, SpeedLaw};
        let m = manifest("");
        let law = |when: &'static [(&'static str, &'static str)], speed| {
            LaunchLaw { when, speed, direction: DirectionLaw::Cosine }.to_info()
        };
        let flux = |t| SpeedLaw::MaxwellianFlux { temperature: Quantity::Param(t) };
        let power =
            |b, u| SpeedLaw::PowerLaw { exponent: Quantity::Param(b), energy: Quantity::Param(u) };
        assert_eq!(check_when(&m, &law(&[("law", "flux")], flux("t"))), None);
        assert_eq!(check_units(&m, &law(&[], flux("t"))), None);
        assert_eq!(check_units(&m, &law(&[], power("beta", "u"))), None);
        assert_eq!(check_units(&manifest("1"), &law(&[], power("beta", "u"))), None);
        let why = |w: Option<String>| w.expect("refused");
        let w = why(check_when(&m, &law(&[("mode", "flux")], flux("t"))));
        assert!(w.contains("unknown parameter `mode`"), "{w}");
        let w = why(check_when(&m, &law(&[("t", "flux")], flux("t"))));
        assert!(w.contains("not a choice parameter"), "{w}");
        let w = why(check_when(&m, &law(&[("law", "gas")], flux("t"))));
        assert!(w.contains("\"gas\", not one of its options (flux, sputter)"), "{w}");
        // A temperature in eV, an energy in K, an exponent with a unit.
        let w = why(check_units(&m, &law(&[], flux("u"))));
        assert!(w.contains("`temperature` names `u`, whose unit is `eV`; the law needs K"), "{w}");
        let w = why(check_units(&m, &law(&[], power("beta", "t"))));
        assert!(w.contains("`energy` names `t`"), "{w}");
        let w = why(check_units(&manifest("eV"), &law(&[], power("beta", "u"))));
        assert!(w.contains("the law needs dimensionless"), "{w}");
    }

    #[test]
    fn the_critical_distance_is_kolmogorovs_at_alpha() {
        // Kolmogorov's limiting distribution P(sqrt(n) D > c) = 2 sum_k (-1)^(k-1)
        // exp(-2 k^2 c^2) (Kolmogorov 1933, Giorn. Ist. Ital. Attuari 4, 83) is alpha at
        // c(alpha); the terms past the first are below 1e-12.
        let c = ks_coefficient(ALPHA);
        let tail: f64 = (1..=5)
            .map(|k| {
                let k = k as f64;
                2.0 * (-1f64).powf(k - 1.0) * (-2.0 * k * k * c * c).exp()
            })
            .sum();
        assert!((tail - ALPHA).abs() < 1e-12, "{tail}");
        assert!((c - 1.949_474).abs() < 1e-6, "{c}");
        // Stephens 1974 (J. Am. Stat. Assoc. 69, 730, Table 1A, case 0): the point of
        // D (sqrt(n) + 0.12 + 0.11/sqrt(n)); at alpha = 0.01 his tabulated 1.628.
        assert!((ks_coefficient(0.01) - 1.628).abs() < 5e-4);
        let d = ks_critical_one_sample(20_000, ALPHA);
        let root = 20_000f64.sqrt();
        assert!((d - 1.949_474 / (root + 0.12 + 0.11 / root)).abs() < 1e-8, "{d}");
        assert!((d - 0.013_773).abs() < 5e-7, "{d}");
    }

    #[test]
    fn the_draws_are_keyed_apart_from_the_sampler_check() {
        // Rng::new keys on the low 40 bits of the particle id, so every block must lie
        // below 2^40 and the blocks must not overlap for vet's draws.
        let n = super::super::VetOptions::default().sampler_draws as u64;
        let second = super::super::sampler::SECOND_HALF;
        assert!(n <= second && second + n <= FIRST_PARTICLE && FIRST_PARTICLE + n <= 1 << 40);
        let key = |p: u64| RngKey { seed: 0x7E7, particle: p, event: 0, stream: stream::LAUNCH };
        let first = |p: u64| Rng::new(key(p)).uniform();
        assert_ne!(first(0), first(FIRST_PARTICLE));
        assert_ne!(first(second), first(FIRST_PARTICLE));
        // What an id of 2^40 would do: repeat id 0.
        assert_eq!(first(0), first(1 << 40));
    }

    /// `n` keyed launches from `draw`, as speeds (m s^-1) and cosines from the vertical.
    fn sample(n: u64, mut draw: impl FnMut(&mut Rng) -> Velocity) -> (Vec<f64>, Vec<f64>) {
        (0..n)
            .map(|i| {
                let key = RngKey { seed: 11, particle: i, event: 0, stream: stream::LAUNCH };
                let v = draw(&mut Rng::new(key));
                (v.speed(), v.up / v.speed())
            })
            .unzip()
    }

    #[test]
    fn the_test_passes_the_right_law_and_fails_a_wrong_one() {
        // Na at 400 K, vet's central state. Keys are fixed, so the outcome is too; a
        // correct sampler would fail 0.1% of key sets, and this one is not among them.
        let m = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;
        let t = 400.0;
        let n = 20_000;
        let critical = ks_critical_one_sample(n as usize, ALPHA);
        let flux = Speed::MaxwellianFlux { t };
        let (mut v, mut c) =
            sample(n, |r| r.cosine_direction().times(r.maxwellian_flux_speed(t, m)));
        assert!(ks_one_sample(&mut v, |x| flux.cdf(x, m)) < critical);
        assert!(ks_one_sample(&mut c, |x| DirectionLaw::Cosine.cdf(x)) < critical);
        // Isotropic directions against the cosine law: D -> max (c - c^2) = 1/4.
        let (_, mut c) = sample(n, |r| r.isotropic_upward().times(1.0));
        let d = ks_one_sample(&mut c, |x| DirectionLaw::Cosine.cdf(x));
        assert!(d > critical && (d - 0.25).abs() < 0.02, "{d}");
        // Speeds of the Maxwellian gas (three normal components, sd a/sqrt 2) against
        // the flux: the gas is slower, and the test sees it.
        let s = exobound_sdk::sample::thermal_speed(t, m) / std::f64::consts::SQRT_2;
        let (mut v, _) = sample(n, |r| {
            let (x, y, z) = (r.normal(), r.normal(), r.normal());
            Velocity { east: 0.0, north: 0.0, up: s * (x * x + y * y + z * z).sqrt() }
        });
        assert!(ks_one_sample(&mut v, |x| flux.cdf(x, m)) > critical);
    }
}

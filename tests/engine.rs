//! The engine against closed forms from the literature: Jeans escape, the
//! Chamberlain exosphere, photoionization balance; and its own promises:
//! the mass ledger closes, and threads do not change results.

use std::collections::BTreeMap;
use std::sync::Arc;

use exobound::body::Body;
use exobound::engine::{Model, Processes, RunConfig, Simulation};
use exobound::environment::SunGeometry;
use exobound::runtime::backend::ModuleHandle;
use exobound::runtime::{Runtime, RuntimeConfig, SandboxLimits};
use exobound::species::Species;
use exobound::surface::{Grid, Reservoir, TemperatureLaw};
use exobound_sdk::ParamValue;
use exobound_sdk::math;

use crate::support::*;

fn runtime() -> Arc<Runtime> {
    Arc::new(Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap())
}

fn module(rt: &Arc<Runtime>, name: &str, p: &[(&str, ParamValue)]) -> ModuleHandle {
    let m = rt.load(&exobound::standard_module(name)).unwrap_or_else(|e| panic!("{name}: {e}"));
    ModuleHandle::wasm(rt.clone(), m, params(p), SandboxLimits::default())
        .unwrap_or_else(|e| panic!("{name}: {e}"))
}

fn num(x: f64) -> ParamValue {
    ParamValue::Number(x)
}

/// The Moon without rotation or orbital motion: the closed forms assume a
/// non-rotating body under a fixed Sun.
fn still_moon() -> Body {
    let mut b = Body::moon();
    b.sidereal_rotation = f64::INFINITY;
    b.solar_day = f64::INFINITY;
    b
}

fn model(body: Body, temperature: TemperatureLaw, adsorbed_cm2: f64) -> Model {
    let grid = Grid::new(18, 36, body.radius).unwrap();
    let reservoir = Reservoir::uniform(&grid, adsorbed_cm2);
    Model {
        body,
        species: Species::sodium(),
        grid,
        temperature,
        sun: SunGeometry::fixed(0.0, 0.0),
        reservoir,
        solar_wind: exobound::environment::SolarWind::constant(0.0),
        meteoroid_factor: 1.0,
    }
}

fn perfect_sticking(rt: &Arc<Runtime>) -> ModuleHandle {
    module(
        rt,
        "surface-accommodation",
        &[("sticking_model", text("constant")), ("sticking", num(1.0))],
    )
}

fn full_reemission(rt: &Arc<Runtime>, t: f64) -> ModuleHandle {
    module(
        rt,
        "surface-accommodation",
        &[
            ("sticking_model", text("constant")),
            ("sticking", num(0.0)),
            ("accommodation", num(1.0)),
            ("reemit_temperature", num(t)),
        ],
    )
}

/// Jeans flux fraction above escape speed, (1 + lambda) exp(-lambda)
/// (Jeans' escape law; Chamberlain & Hunten 1987, Theory of Planetary
/// Atmospheres, 2nd ed., ch. 7).
fn jeans_flux_fraction(lambda: f64) -> f64 {
    (1.0 + lambda) * math::exp(-lambda)
}

fn jeans_case(t: f64, expected_table: f64) {
    let rt = runtime();
    let body = still_moon();
    let lambda = body.jeans_parameter(Species::sodium().mass, t, body.radius);
    // The closed form reproduces the stated flux fraction
    // (tests/python/jeans_chamberlain_reference_values.py: gammaincc(2, lambda) and quadrature).
    assert!((jeans_flux_fraction(lambda) / expected_table - 1.0).abs() < 1e-6);
    let mut config = RunConfig::for_body(&body);
    config.dt = 3000.0;
    config.target_in_flight = 40_000;
    config.boundary_radius = 1.0e4 * body.radius;
    config.threads = 2;
    // The unbound count at launch: with the remove-at-launch shortcut every
    // unbound launch is booked as escaped at once, so the escaped fraction
    // is the fraction of the launch flux above escape speed.
    config.escape_when_unbound = true;
    // A thermal source at a fixed temperature: impact vapour with a uniform
    // pattern, launching a Maxwellian flux at `t`; every returning atom sticks.
    let processes = Processes {
        sources: vec![module(&rt, "impact-vapor", &[("vapor_temperature", num(t))])],
        losses: vec![],
        surface: perfect_sticking(&rt),
        reservoir: vec![],
    };
    let mut sim =
        Simulation::new(model(body, TemperatureLaw::uniform(300.0), 0.0), processes, config)
            .unwrap();
    sim.run(16).unwrap();
    let ledger = sim.ledger();
    let released = ledger.total(|r| r.released);
    let escaped = ledger.total(|r| r.escaped);
    let p = jeans_flux_fraction(lambda);
    let got = escaped / released;
    // Binomial standard error of a weighted fraction, with the effective
    // number of draws (sum w)^2 / sum w^2 (Kish's effective sample size);
    // all particles of one step share the weight released / launched.
    let sum_w2: f64 = ledger
        .rows
        .iter()
        .filter(|r| r.launched > 0)
        .map(|r| r.released * r.released / r.launched as f64)
        .sum();
    let n_eff = released * released / sum_w2;
    let sigma = (p * (1.0 - p) / n_eff).sqrt();
    assert!(n_eff > 1.0e5, "too few effective launches: {n_eff}");
    assert!(
        (got - p).abs() < 3.0 * sigma,
        "T = {t} K: escaped fraction {got}, Jeans {p}, sigma {sigma}"
    );
    assert!(ledger.worst_step_closure() < 1e-12);
}

#[test]
fn jeans_escape_na_moon_1200k() {
    // Na, Moon, 1200 K: flux fraction (1 + lambda) exp(-lambda) = 1.125384e-2 (Jeans' law;
    // tests/python/jeans_chamberlain_reference_values.py).
    jeans_case(1200.0, 1.125384e-2);
}

#[test]
fn jeans_escape_na_moon_3000k() {
    // Na, Moon, 3000 K: flux fraction 2.672113e-1 (Jeans' law;
    // tests/python/jeans_chamberlain_reference_values.py).
    jeans_case(3000.0, 2.672113e-1);
}

/// P(3/2, x), the regularized lower incomplete gamma function, from
/// erf: P(3/2, x) = erf(sqrt x) - 2 sqrt(x/pi) exp(-x) (Abramowitz & Stegun 6.5.16-17).
fn p32(x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    (1.0 - math::erfc(x.sqrt())) - 2.0 * (x / std::f64::consts::PI).sqrt() * (-x).exp()
}

/// n(r)/n(R) of a ballistic + escaping Chamberlain exosphere with the
/// exobase at the surface (Chamberlain 1963, Planet. Space Sci. 11, 901).
fn chamberlain(lambda_c: f64, r_over_rc: f64) -> f64 {
    let lambda = lambda_c / r_over_rc;
    let psi = lambda * lambda / (lambda + lambda_c);
    let f = (lambda_c * lambda_c - lambda * lambda).sqrt() / lambda_c * (-psi).exp();
    let bal = p32(lambda) - f * p32(lambda - psi);
    let esc = 0.5 * (1.0 - p32(lambda) - f * (1.0 - p32(lambda - psi)));
    let zeta_c = p32(lambda_c) + 0.5 * (1.0 - p32(lambda_c));
    (-(lambda_c - lambda)).exp() * (bal + esc) / zeta_c
}

/// The closed form's volume mean over the shell from `lo` to `hi` km above
/// a body of radius `r_km` km (Simpson's rule, 40 intervals), n/n_c.
fn chamberlain_bin_mean(lambda_c: f64, r_km: f64, lo: f64, hi: f64) -> f64 {
    let m = 40;
    let h = (hi - lo) / m as f64;
    let f = |x: f64| chamberlain(lambda_c, (r_km + x) / r_km) * (r_km + x).powi(2);
    let s: f64 = (0..=m)
        .map(|i| {
            let w = if i == 0 || i == m {
                1.0
            } else if i % 2 == 1 {
                4.0
            } else {
                2.0
            };
            w * f(lo + i as f64 * h)
        })
        .sum();
    let vol: f64 = ((r_km + hi).powi(3) - (r_km + lo).powi(3)) / 3.0;
    s * h / 3.0 / vol
}

/// Mean and standard error of batch values, dimensionless.
fn mean_and_error(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    let mean = xs.iter().sum::<f64>() / n;
    let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}

#[test]
fn chamberlain_closed_form_matches_the_table() {
    // Chamberlain (1963, Planet. Space Sci. 11, 901), Na Moon 1200 K (lambda_c 6.502248):
    // 100 km 0.690347, 500 km 0.217101, 1000 km 0.0779993, 2000 km 0.0200217
    // (tests/python/jeans_chamberlain_reference_values.py; the velocity-space integration of
    // tests/python/chamberlain_reference_values.py confirms the closed form).
    let r = 1737.4;
    for (h, want) in
        [(100.0, 0.690347), (500.0, 0.217101), (1000.0, 0.0779993), (2000.0, 0.0200217)]
    {
        let got = chamberlain(6.502248, (r + h) / r);
        assert!((got / want - 1.0).abs() < 1e-5, "{h} km: {got} vs {want}");
    }
}

/// A collisionless exosphere over an exobase at the surface: a thermal
/// source launching a Maxwellian flux at `t` (K), every returning atom
/// re-emitted at `t`, no losses (Chamberlain's (1963) setting).
fn thermal_exobase(rt: &Arc<Runtime>, body: Body, t: f64, config: RunConfig) -> Simulation {
    let processes = Processes {
        sources: vec![module(rt, "impact-vapor", &[("vapor_temperature", num(t))])],
        losses: vec![],
        surface: full_reemission(rt, t),
        reservoir: vec![],
    };
    Simulation::new(model(body, TemperatureLaw::uniform(t), 0.0), processes, config).unwrap()
}

/// The Chamberlain validation: sodium at 1200 K over a still Moon, the
/// density at 100-2000 km against the closed form. Run by the test
/// `under_load::runs_pass_while_every_core_is_busy`, with every core kept
/// busy by other processes, so that it guards the physics and the sandbox's
/// independence of machine load at once.
pub fn density_profile_follows_chamberlain() {
    let rt = runtime();
    let body = still_moon();
    let t = 1200.0;
    let r_km = body.radius / 1e3;
    let lambda_c = body.jeans_parameter(Species::sodium().mass, t, body.radius);
    let mut config = RunConfig::for_body(&body);
    config.dt = 600.0;
    config.target_in_flight = 30_000;
    config.threads = 2;
    // Escaping atoms are part of the Chamberlain density (zeta_esc); they
    // fly (the default) out to a boundary far enough that the bound orbits
    // it cuts change the density below 2000 km by under 0.3%
    // (tests/python/chamberlain_reference_values.py gives 1.3% at 2500 km
    // for 20 radii and 2000 K; at 1200 K and 50 radii far less).
    config.boundary_radius = 50.0 * body.radius;
    let km = 1.0e3;
    config.alt_edges = [0.0, 10.0, 95.0, 105.0, 495.0, 505.0, 995.0, 1005.0, 1995.0, 2005.0]
        .iter()
        .map(|h| h * km)
        .collect();
    config.n_local_time = 1;
    config.n_latitude = 1;
    let mut sim = thermal_exobase(&rt, body, t, config);
    // Spin up: several residence times (about 90 hops of ~1200 s each).
    sim.run(900).unwrap();
    // Ten batches of snapshots, for a batch-means error estimate.
    let bins = [(2usize, 100.0), (4, 500.0), (6, 1000.0), (8, 2000.0)];
    let mut ratios = vec![Vec::new(); bins.len()];
    for _ in 0..10 {
        sim.reset_tallies();
        sim.run(60).unwrap();
        let n = sim.tally().density_cm3();
        for (k, (b, _)) in bins.iter().enumerate() {
            ratios[k].push(n[*b] / n[0]);
        }
    }
    // Expected: the closed form averaged over each 10 km bin, relative to
    // its average over the lowest bin [0, 10 km].
    let bin_mean = |lo: f64, hi: f64| chamberlain_bin_mean(lambda_c, r_km, lo, hi);
    let n0 = bin_mean(0.0, 10.0);
    for (k, (_, h)) in bins.iter().enumerate() {
        let want = bin_mean(h - 5.0, h + 5.0) / n0;
        let xs = &ratios[k];
        let mean = xs.iter().sum::<f64>() / xs.len() as f64;
        let var = xs.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (xs.len() - 1) as f64;
        let sigma = (var / xs.len() as f64).sqrt();
        // Chamberlain (1963, Planet. Space Sci. 11, 901): within 3 sigma and at most 3%.
        assert!(
            (mean - want).abs() < 3.0 * sigma.max(1e-4 * want) && (mean / want - 1.0).abs() < 0.03,
            "{h} km: n/n0 = {mean} +- {sigma}, Chamberlain {want}"
        );
    }
    let worst = sim.ledger().worst_step_closure();
    assert!(worst < 1e-12, "worst step closure {worst:e}");
}

/// Hot sodium (2000 K, lambda_c = 3.90) over a still Moon with every
/// default of the engine: escaping atoms fly to the outer boundary of 20
/// radii. The density at 1000 and 2500 km against Chamberlain's ballistic
/// plus escaping exosphere; escaping atoms are 4.5% and 8.2% of it there.
#[test]
fn escaping_atoms_fill_the_chamberlain_exosphere() {
    let rt = runtime();
    let body = still_moon();
    let t = 2000.0;
    let r_km = body.radius / 1e3;
    let lambda_c = body.jeans_parameter(Species::sodium().mass, t, body.radius);
    let mut config = RunConfig::for_body(&body);
    assert!(!config.escape_when_unbound, "escaping atoms fly by default");
    config.dt = 900.0;
    config.target_in_flight = 30_000;
    config.threads = 2;
    let km = 1.0e3;
    config.alt_edges = [0.0, 10.0, 975.0, 1025.0, 2450.0, 2550.0].iter().map(|h| h * km).collect();
    config.n_local_time = 1;
    config.n_latitude = 1;
    let mut sim = thermal_exobase(&rt, body, t, config);
    // Spin up: bound paths with apocentres out to 20 radii last up to 2.6 d,
    // and their share of the density at 2500 km reaches its steady state
    // only after a few of those (with 1.7 d of spin-up both bands came out
    // 1-2% low).
    sim.run(480).unwrap();
    let mut ratios = [Vec::new(), Vec::new()];
    for _ in 0..10 {
        sim.reset_tallies();
        sim.run(40).unwrap();
        let n = sim.tally().density_cm3();
        ratios[0].push(n[2] / n[0]);
        ratios[1].push(n[4] / n[0]);
    }
    let n0 = chamberlain_bin_mean(lambda_c, r_km, 0.0, 10.0);
    // (altitude band km, boundary correction, ballistic-only n/n0). The
    // correction takes out the incoming legs of bound orbits whose
    // apocentre lies beyond 20 radii, and the ballistic-only value is what
    // the remove-at-launch shortcut would give: both from a velocity-space
    // integration of Chamberlain's (1963) exosphere, whose infinite-domain
    // result matches the closed form to 1e-8
    // (tests/python/chamberlain_reference_values.py).
    let cases = [((975.0, 1025.0), 0.995557, 0.16617699), ((2450.0, 2550.0), 0.986720, 0.03893299)];
    for (k, ((lo, hi), correction, ballistic_only)) in cases.into_iter().enumerate() {
        let want = chamberlain_bin_mean(lambda_c, r_km, lo, hi) / n0 * correction;
        let (mean, sigma) = mean_and_error(&ratios[k]);
        // Chamberlain (1963, Planet. Space Sci. 11, 901), ballistic plus
        // escaping density: within 3 sigma and 3%.
        assert!(
            (mean - want).abs() < 3.0 * sigma && (mean / want - 1.0).abs() < 0.03,
            "{lo}-{hi} km: n/n0 = {mean} +- {sigma}, Chamberlain {want}"
        );
        eprintln!(
            "{lo}-{hi} km: n/n0 = {mean:.6} +- {sigma:.6}, Chamberlain {want:.6}, \
             ballistic only {ballistic_only:.6}"
        );
        if k == 1 {
            // The escaping atoms are really there: at 2500 km the ballistic
            // part alone (Chamberlain 1963, zeta_bal) lies 4% lower, well
            // outside the noise.
            assert!(mean - ballistic_only > 3.0 * sigma, "{mean} +- {sigma}");
        }
    }
    let worst = sim.ledger().worst_step_closure();
    assert!(worst < 1e-12, "worst step closure {worst:e}");
}

/// Potassium at 2000 K over a still Moon, every returning atom sticking,
/// boundary at 20 radii: the atoms that leave on unbound paths (escape) and
/// those that leave on bound paths (apocentre beyond the boundary) are
/// booked apart, each at its own closed-form rate.
#[test]
fn escape_is_booked_apart_from_bound_atoms_leaving() {
    let rt = runtime();
    let body = still_moon();
    let t = 2000.0;
    let mut config = RunConfig::for_body(&body);
    config.dt = 600.0;
    config.target_in_flight = 30_000;
    config.threads = 2;
    let processes = Processes {
        sources: vec![module(&rt, "impact-vapor", &[("vapor_temperature", num(t))])],
        losses: vec![],
        surface: perfect_sticking(&rt),
        reservoir: vec![],
    };
    let mut m = model(body, TemperatureLaw::uniform(300.0), 0.0);
    m.species = Species::potassium();
    let lambda = m.body.jeans_parameter(m.species.mass, t, m.body.radius);
    let mut sim = Simulation::new(m, processes, config).unwrap();
    // Spin up past the longest way out: a bound path whose apocentre is just
    // beyond 20 radii reaches it after about half its 2.6 d period.
    sim.run(300).unwrap();
    let (mut esc, mut left) = (Vec::new(), Vec::new());
    for _ in 0..8 {
        let from = sim.ledger().rows.len();
        sim.run(36).unwrap();
        let rows = &sim.ledger().rows[from..];
        let released: f64 = rows.iter().map(|r| r.released).sum();
        esc.push(rows.iter().map(|r| r.escaped).sum::<f64>() / released);
        left.push(rows.iter().map(|r| r.left_bound).sum::<f64>() / released);
    }
    // Jeans' escape law (Chamberlain & Hunten 1987, Theory of Planetary
    // Atmospheres, ch. 7): the flux fraction on unbound paths.
    let jeans = jeans_flux_fraction(lambda);
    // The fraction of a Maxwellian flux whose paths reach 20 radii, less the
    // escaping part, from energy and angular momentum conservation
    // (tests/python/boundary_escape_reference_values.py, closed form checked
    // by quadrature): 3.24774848e-3, for lambda = 6.634956.
    assert!((lambda / 6.634956 - 1.0).abs() < 1e-6, "{lambda}");
    let bound_leaving = 3.24774848e-3;
    for (name, xs, want) in [("escaped", &esc, jeans), ("left bound", &left, bound_leaving)] {
        let (mean, sigma) = mean_and_error(xs);
        eprintln!("{name}: {mean:.6e} +- {sigma:.2e}, expected {want:.6e}");
        assert!(
            (mean - want).abs() < 3.0 * sigma && (mean / want - 1.0).abs() < 0.05,
            "{name}: fraction {mean} +- {sigma}, expected {want}"
        );
    }
    let worst = sim.ledger().worst_step_closure();
    assert!(worst < 1e-12, "worst step closure {worst:e}");
}

#[test]
fn photoionization_balances_the_source_in_steady_state() {
    // With photoionization (rate beta in sunlight) the only loss besides a
    // negligible escape, the content obeys dN/dt = S - beta N_sun - E, so in
    // steady state the sunlit content is N_sun = (S - E) / beta: the source
    // rate times the mean photoionization lifetime 1/beta (derived here from
    // the balance; beta = beta_1AU / r^2 with r = 1 AU).
    let rt = runtime();
    let body = still_moon();
    let t = 600.0;
    let beta = 1.0e-4;
    let mut config = RunConfig::for_body(&body);
    config.dt = 300.0;
    config.target_in_flight = 30_000;
    config.threads = 2;
    let processes = Processes {
        sources: vec![module(&rt, "impact-vapor", &[("vapor_temperature", num(t))])],
        losses: vec![module(&rt, "photoionization", &[("rate_1au", num(beta))])],
        surface: full_reemission(&rt, t),
        reservoir: vec![],
    };
    let mut sim =
        Simulation::new(model(body, TemperatureLaw::uniform(t), 0.0), processes, config).unwrap();
    sim.run(500).unwrap();
    let window: usize = 150;
    sim.run(window as u64).unwrap();
    let rows = &sim.ledger().rows[sim.ledger().rows.len() - window..];
    let dt = 300.0;
    let source = rows.iter().map(|r| r.released).sum::<f64>() / (window as f64 * dt);
    let escape = rows.iter().map(|r| r.escaped).sum::<f64>() / (window as f64 * dt);
    let lit = sim.sunlit_content();
    let n_sun = lit[lit.len() - window..].iter().sum::<f64>() / window as f64;
    let want = (source - escape) / beta;
    let ionized = rows.iter().map(|r| r.losses[0]).sum::<f64>() / (window as f64 * dt);
    assert!((n_sun / want - 1.0).abs() < 0.03, "N_sun {n_sun:e} vs (S - E)/beta {want:e}");
    // The loss booked per step equals beta times the sunlit content (same balance, per step).
    assert!(
        (ionized / (beta * n_sun) - 1.0).abs() < 0.03,
        "loss {ionized:e} vs beta N_sun {:e}",
        beta * n_sun
    );
    assert!(sim.ledger().worst_step_closure() < 1e-12);
}

/// A Moon run with every role active: two sources (adsorbed pool and bulk),
/// a loss, partial sticking, and a reservoir process.
fn full_run(threads: usize, steps: u64) -> Simulation {
    full_run_with(threads, steps, false)
}

/// [`full_run`], with radiation pressure (integrated flight) if `radiation`.
fn full_run_with(threads: usize, steps: u64, radiation: bool) -> Simulation {
    let rt = runtime();
    let body = Body::moon();
    let mut config = RunConfig::for_body(&body);
    config.radiation_pressure = radiation;
    config.dt = 600.0;
    config.target_in_flight = 20_000;
    config.threads = threads;
    config.chunk_size = 512;
    config.seed = 20_261_201;
    let processes = Processes {
        sources: vec![
            module(&rt, "thermal-desorption", &[("binding_energy", num(1.1))]),
            module(&rt, "impact-vapor", &[("vapor_temperature", num(3000.0))]),
        ],
        losses: vec![module(&rt, "photoionization", &[])],
        surface: module(
            &rt,
            "surface-accommodation",
            &[("sticking", num(0.4)), ("accommodation", num(0.6))],
        ),
        reservoir: vec![module(&rt, "regolith-diffusion", &[])],
    };
    let temperature = TemperatureLaw { night: 100.0, subsolar: 390.0, reference_distance: 1.0 };
    let mut sim = Simulation::new(model(body, temperature, 1.0e9), processes, config).unwrap();
    sim.run(steps).unwrap();
    sim
}

#[test]
fn ledger_closes_every_step_with_every_role_active() {
    let sim = full_run(2, 60);
    let ledger = sim.ledger();
    for row in &ledger.rows {
        // The mass ledger closes to round-off (project standard: <= 1e-12 relative).
        assert!(
            row.closure_error.abs() <= 1e-12,
            "step {}: closure {}",
            row.step,
            row.closure_error
        );
    }
    assert!(ledger.cumulative_closure().abs() <= 1e-12);
    // Every flow was exercised.
    let last = ledger.rows.last().unwrap();
    for (what, v) in [
        ("released", ledger.total(|r| r.released)),
        ("from bulk", ledger.total(|r| r.supplied_from_bulk)),
        ("from pool", ledger.total(|r| r.released_from_adsorbed)),
        ("stuck", ledger.total(|r| r.stuck)),
        ("bounced", ledger.total(|r| r.bounced)),
        ("escaped", ledger.total(|r| r.escaped)),
        ("photoionized", ledger.total(|r| r.losses[0])),
        ("in flight", last.in_flight),
    ] {
        assert!(v > 0.0, "{what} is {v}");
    }
    assert_eq!(ledger.loss_labels, vec!["photoionized".to_string()]);
    // The reservoir by local time holds the same atoms as the map by cell:
    // one bin over 24 h times the sphere's area 4 pi R^2 is the total.
    let r_cm = sim.model().body.radius * 100.0;
    let whole = sim.adsorbed_by_local_time(1)[0] * 4.0 * std::f64::consts::PI * r_cm * r_cm;
    assert!((whole / sim.model().reservoir.total() - 1.0).abs() < 1e-12);
    assert_eq!(sim.adsorbed_by_local_time(24).len(), 24);
}

/// The books close with escaping atoms in flight and radiation pressure
/// on: unbound atoms fly (the default), so some are in the bank at the
/// end, and some have left through the boundary.
#[test]
fn ledger_closes_with_escaping_atoms_in_flight_under_radiation_pressure() {
    let sim = full_run_with(2, 60, true);
    let ledger = sim.ledger();
    let worst = ledger.worst_step_closure();
    // The mass ledger closes to round-off (project standard: <= 1e-12 relative).
    assert!(worst <= 1e-12, "worst step closure {worst:e}");
    assert!(ledger.cumulative_closure().abs() <= 1e-12);
    let mu = sim.model().body.gm;
    let unbound = sim
        .particles()
        .reference_states()
        .filter(|&(r, v)| 0.5 * exobound::vec3::dot(v, v) >= mu / exobound::vec3::norm(r))
        .count();
    assert!(unbound > 0, "no unbound atom in flight");
    // In 10 h the fast impact vapour has reached 20 radii on unbound paths;
    // bound paths take more than a day to get that far.
    assert!(ledger.total(|r| r.escaped) > 0.0);
}

#[test]
fn threads_give_bit_identical_results() {
    let a = full_run(1, 25);
    let b = full_run(2, 25);
    assert_eq!(a.ledger(), b.ledger());
    let bits = |v: Vec<f64>| v.into_iter().map(f64::to_bits).collect::<Vec<_>>();
    assert_eq!(bits(a.tally().density_cm3()), bits(b.tally().density_cm3()));
    assert_eq!(
        bits(a.model().reservoir.adsorbed.clone()),
        bits(b.model().reservoir.adsorbed.clone())
    );
    assert_eq!(a.particles(), b.particles());
    assert!(a.particles().len() > 1000);
}

#[test]
fn threads_give_bit_identical_results_under_radiation_pressure() {
    // The integrated path carries the integrator's step size from step to
    // step and draws its sighting over the integrator's steps: neither may
    // depend on how particles are spread over threads.
    let a = full_run_with(1, 12, true);
    let b = full_run_with(2, 12, true);
    assert_eq!(a.ledger(), b.ledger());
    let bits = |v: Vec<f64>| v.into_iter().map(f64::to_bits).collect::<Vec<_>>();
    assert_eq!(bits(a.tally().density_cm3()), bits(b.tally().density_cm3()));
    assert_eq!(a.particles(), b.particles());
    assert!(a.particles().len() > 1000);
    assert!(a.ledger().worst_step_closure() < 1e-12);
}

#[test]
fn bad_configuration_is_refused_with_the_setting_named() {
    let rt = runtime();
    let body = Body::moon();
    let mut config = RunConfig::for_body(&body);
    config.dt = -1.0;
    let processes = Processes {
        sources: vec![module(&rt, "thermal-desorption", &[])],
        losses: vec![],
        surface: perfect_sticking(&rt),
        reservoir: vec![],
    };
    let temperature = TemperatureLaw::uniform(300.0);
    let e = Simulation::new(model(body.clone(), temperature, 1e9), processes.clone(), config)
        .err()
        .unwrap();
    assert!(e.to_string().contains("dt"), "{e}");
    // A module in the wrong role.
    let wrong = Processes { losses: vec![perfect_sticking(&rt)], ..processes };
    let e =
        Simulation::new(model(body.clone(), temperature, 1e9), wrong, RunConfig::for_body(&body))
            .err()
            .unwrap();
    assert!(
        e.to_string().contains("surface-accommodation") && e.to_string().contains("loss"),
        "{e}"
    );
    let _ = BTreeMap::<String, ParamValue>::new();
}

/// Smallest and largest of `weights`.
fn spread(weights: &[f64]) -> (f64, f64) {
    weights.iter().fold((f64::MAX, 0.0f64), |(a, b), &w| (a.min(w), b.max(w)))
}

/// One pure-loss history: `n` particles with weights spread log-uniformly
/// over six decades, each surviving a step of `dt` s with probability
/// exp(-beta dt) (analog loss, as the flight loop books it), and after each
/// step the particle budget's roulette, splitting and thinning towards
/// `target` particles. Returns (initial weight, final weight, weight the
/// decay removed, net weight the budget's roulette removed), atoms.
fn pure_loss_history(seed: u64, n: usize, target: usize, steps: u64) -> (f64, f64, f64, f64) {
    use exobound::engine::{WEIGHT_RATIO, weight_window};
    use exobound::particles::ParticleBank;
    use exobound_sdk::{Rng, RngKey};
    let (beta, dt) = (2.0e-4f64, 600.0f64);
    let mut bank = ParticleBank::new();
    let mut draw = Rng::new(RngKey { seed, particle: u64::MAX >> 30, event: 0, stream: 0x70 });
    for id in 0..n as u64 {
        let w = 10f64.powf(-3.0 + 6.0 * draw.uniform());
        bank.push(id, 0, w, 0.0, 0.0, [1.0, 0.0, 0.0], [0.0; 3]);
    }
    let w0 = bank.total_weight();
    let mut next_id = n as u64;
    let (mut decayed, mut rouletted) = (0.0, 0.0);
    let survive = (-beta * dt).exp();
    for step in 0..steps {
        for i in 0..bank.len() {
            let key = RngKey::at_step(seed, bank.ids()[i], bank.events()[i], 0x71, step);
            if Rng::new(key).uniform() >= survive {
                decayed += bank.weights()[i];
                bank.remove(i);
            }
        }
        bank.compact();
        rouletted += weight_window(&mut bank, &mut next_id, seed, step, target).unwrap();
        // After the budget's games every weight lies within [mean / R,
        // mean x R] of the mean before them, so no two differ by more than R^2.
        let (lo, hi) = spread(bank.weights());
        assert!(hi / lo <= WEIGHT_RATIO * WEIGHT_RATIO * 1.0001, "step {step}: {lo:e}..{hi:e}");
    }
    (w0, bank.total_weight(), decayed, rouletted)
}

#[test]
fn roulette_and_splitting_keep_a_pure_loss_decay_unbiased() {
    // A population decaying at rate beta keeps W(t) = W0 exp(-beta t) in
    // expectation (first-order loss); Russian roulette and splitting are
    // unbiased games (Kahn & Harris 1951, NBS Appl. Math. Ser. 12, 27-30),
    // so the mean over independent histories must stay on that curve. The
    // target (half the start) also makes the budget thin the population.
    let (n, target, steps) = (4000, 2000, 10u64);
    let expected_ratio = (-2.0e-4f64 * 600.0 * steps as f64).exp();
    let ratios: Vec<f64> = (0..24u64)
        .map(|seed| {
            let (w0, w, decayed, rouletted) = pure_loss_history(seed + 1, n, target, steps);
            // The books balance: what left flight is what the decay and the
            // roulette took (round-off only).
            assert!(((w0 - w) - (decayed + rouletted)).abs() <= 1e-12 * w0, "books");
            w / w0
        })
        .collect();
    let m = ratios.len() as f64;
    let mean = ratios.iter().sum::<f64>() / m;
    let sd = (ratios.iter().map(|r| (r - mean).powi(2)).sum::<f64>() / (m - 1.0)).sqrt();
    let se = sd / m.sqrt();
    assert!(
        (mean - expected_ratio).abs() < 4.0 * se,
        "W/W0 = {mean} +- {se} over 24 histories, exp(-beta t) = {expected_ratio}"
    );
    // Not a vacuous check: the histories differ, and roulette acted.
    assert!(sd > 0.0);
}

#[test]
fn budget_reaches_its_target_without_overshoot_with_no_loss_and_no_sticking() {
    // Atoms bounce forever (sticking 0) and nothing ionizes them, so
    // particles leave flight only by escape: the case in which the old
    // budget overshot and then launched a few very heavy particles.
    use exobound::engine::{OVERFLOW, WEIGHT_RATIO};
    let rt = runtime();
    let body = still_moon();
    let t = 700.0;
    let mut config = RunConfig::for_body(&body);
    config.dt = 600.0;
    config.target_in_flight = 6000;
    config.threads = 2;
    let mut sim = thermal_exobase(&rt, body, t, config);
    let target = 6000.0;
    for _ in 0..300 {
        sim.step().unwrap();
        let p = sim.particles();
        assert!(
            (p.len() as f64) <= target * (1.0 + OVERFLOW) * 1.05,
            "step {}: {} particles against a target of {target}",
            sim.steps(),
            p.len()
        );
        let (lo, hi) = spread(p.weights());
        assert!(hi / lo <= WEIGHT_RATIO * WEIGHT_RATIO * 1.0001, "weights {lo:e}..{hi:e}");
    }
    let n = sim.particles().len() as f64;
    assert!(n > 0.8 * target, "{n} particles at the end, target {target}");
    assert!(sim.ledger().worst_step_closure() < 1e-12);
}

//! Engine benches: closed-form hops, and one full step with wasm modules
//! against the same modules linked natively, at 1 and 2 threads.
//!
//! `engine/hop/native`: Kepler hops (orbit from state, then the landing time
//! and state in one solve, as the step loop does) per second on one core. `engine/step/{wasm,native}/T`: one
//! step of a Moon scenario with about 1e5 particles in flight, T threads;
//! `engine/step/wasm-nofuel/1` is the same with fuel metering off, to
//! measure what the deterministic budgets cost; `engine/step/native-radiation/1`
//! flies the same scenario with radiation pressure (the integrator). The
//! step benches report particle-steps per second.

use std::collections::BTreeMap;
use std::sync::Arc;
use std::time::Duration;

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use exobound::body::Body;
use exobound::engine::{Model, Processes, RunConfig, Simulation};
use exobound::environment::SunGeometry;
use exobound::runtime::backend::{ModuleHandle, NativeProcess};
use exobound::runtime::{Runtime, RuntimeConfig, SandboxLimits};
use exobound::species::Species;
use exobound::surface::{Grid, Reservoir, TemperatureLaw};
use exobound::transport::kepler::{Direction, Orbit};
use exobound_sdk::{ParamValue, Rng, RngKey};
use photoionization::Photoionization;
use surface_accommodation::SurfaceAccommodation;
use thermal_desorption::ThermalDesorption;

fn hop(c: &mut Criterion) {
    let body = Body::moon();
    let n = 8192;
    let mut rng = Rng::new(RngKey { seed: 3, particle: 0, event: 0, stream: 1 });
    let states: Vec<([f64; 3], [f64; 3])> = (0..n)
        .map(|_| {
            let d = rng.cosine_direction();
            let v = rng.maxwellian_flux_speed(1200.0, exobound_benches::NA_MASS);
            ([0.0, 0.0, body.radius], [d.east * v, d.north * v, d.up * v])
        })
        .collect();
    let mut group = c.benchmark_group("engine/hop");
    group.throughput(Throughput::Elements(n as u64));
    group.bench_function("native", |b| {
        b.iter(|| {
            let mut sum = 0.0;
            for (r, v) in &states {
                let o = Orbit::from_state(body.gm, *r, *v);
                if let Some(c) = o.crossing(body.radius, Direction::Descending) {
                    sum += c.r[0] + c.t;
                }
            }
            sum
        })
    });
    group.finish();
}

fn num(x: f64) -> ParamValue {
    ParamValue::Number(x)
}

/// How the step's modules run.
#[derive(Clone, Copy, PartialEq)]
enum Build {
    /// In wasm, as in a run: fuel metered.
    Wasm,
    /// In wasm without fuel metering: what metering costs.
    WasmNoFuel,
    /// Linked natively.
    Native,
}

fn processes(build: Build) -> Processes {
    let td = BTreeMap::from([("binding_energy".to_string(), num(1.1))]);
    let sa = BTreeMap::from([("sticking".to_string(), num(0.3))]);
    let pi = BTreeMap::new();
    if build != Build::Native {
        let rt = Arc::new(
            Runtime::new(RuntimeConfig {
                fuel_metering: build == Build::Wasm,
                ..RuntimeConfig::default()
            })
            .unwrap(),
        );
        let load = |name: &str, p: BTreeMap<String, ParamValue>| {
            let m = rt.load(&exobound::standard_module(name)).unwrap();
            ModuleHandle::wasm(rt.clone(), m, p, SandboxLimits::default()).unwrap()
        };
        Processes {
            sources: vec![load("thermal-desorption", td)],
            losses: vec![load("photoionization", pi)],
            surface: load("surface-accommodation", sa),
            reservoir: vec![],
        }
    } else {
        Processes {
            sources: vec![
                ModuleHandle::native::<ThermalDesorption>(td, NativeProcess::source).unwrap(),
            ],
            losses: vec![ModuleHandle::native::<Photoionization>(pi, NativeProcess::loss).unwrap()],
            surface: ModuleHandle::native::<SurfaceAccommodation>(
                sa,
                NativeProcess::surface_interaction,
            )
            .unwrap(),
            reservoir: vec![],
        }
    }
}

/// A Moon simulation spun up to about 1e5 particles in flight.
fn moon_simulation(build: Build, threads: usize) -> Simulation {
    moon_simulation_with(build, threads, false)
}

/// [`moon_simulation`], with radiation pressure (integrated flight) if `radiation`.
fn moon_simulation_with(build: Build, threads: usize, radiation: bool) -> Simulation {
    let body = Body::moon();
    let grid = Grid::new(36, 72, body.radius).unwrap();
    let reservoir = Reservoir::uniform(&grid, 3.0e10);
    let model = Model {
        species: Species::sodium(),
        temperature: TemperatureLaw { night: 100.0, subsolar: 390.0, reference_distance: 1.0 },
        sun: SunGeometry::fixed(0.0, 0.0),
        grid,
        reservoir,
        solar_wind: exobound::environment::SolarWind::constant(0.0),
        meteoroid_factor: 1.0,
        body,
    };
    let mut config = RunConfig::for_body(&model.body);
    config.dt = 300.0;
    config.target_in_flight = 100_000;
    config.threads = threads;
    config.radiation_pressure = radiation;
    let mut sim = Simulation::new(model, processes(build), config).unwrap();
    while sim.particles().len() < 100_000 && sim.steps() < 200 {
        sim.step().unwrap();
    }
    sim
}

fn step(c: &mut Criterion) {
    let mut group = c.benchmark_group("engine/step");
    group.sample_size(10).measurement_time(Duration::from_secs(8));
    for threads in [1, 2] {
        for (label, build) in
            [("wasm", Build::Wasm), ("wasm-nofuel", Build::WasmNoFuel), ("native", Build::Native)]
        {
            if threads == 2 && build == Build::WasmNoFuel {
                continue;
            }
            let mut sim = moon_simulation(build, threads);
            eprintln!(
                "engine/step/{label}/{threads}: {} particles in flight, {} bytes of state each",
                sim.particles().len(),
                exobound::particles::BYTES_PER_PARTICLE
            );
            // Elements = particles in flight, so criterion's rate is
            // particle-steps per second (core time per particle-step =
            // threads / rate).
            group.throughput(Throughput::Elements(sim.particles().len() as u64));
            group.bench_with_input(BenchmarkId::new(label, threads), &threads, |b, _| {
                b.iter(|| sim.step().unwrap().particles)
            });
        }
    }
    // Integrated flight under radiation pressure, natively linked modules.
    let mut sim = moon_simulation_with(Build::Native, 1, true);
    eprintln!("engine/step/native-radiation/1: {} particles in flight", sim.particles().len());
    group.throughput(Throughput::Elements(sim.particles().len() as u64));
    group.bench_with_input(BenchmarkId::new("native-radiation", 1), &1, |b, _| {
        b.iter(|| sim.step().unwrap().particles)
    });
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(2))
        .sample_size(20);
    targets = hop, step
}
criterion_main!(benches);

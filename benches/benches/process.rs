//! Every standard process module in wasm against the same law linked natively.
//!
//! Why this exists: the `abi` bench prices the sandbox for one law at
//! several batch sizes and the `engine` bench prices a whole step, but
//! neither says which of the eight standard laws pay most for running in
//! wasm. Here each module has a group `process/<name>` with two IDs over the
//! same batch of 4096 records: `native` calls the module crate's role trait
//! directly (the SDK's native path: no copies, no output checks), `wasm`
//! calls `target/modules/<name>.wasm` once per batch through the runtime as
//! shipped (records copied into and out of guest memory, epoch deadline,
//! every output validated). Sources are measured on `launch`, the call that
//! carries a step (see `docs/performance.md`); the other roles on their one
//! call. The records describe the lunar dayside at 1 AU: cos SZA uniform in
//! (0, 1), surface temperatures 100-390 K from the host's temperature law.
//! Before anything is timed the two outputs are compared, so both IDs are
//! known to do the same work. Divide a time by 4096 for ns per record.

use std::collections::BTreeMap;
use std::f64::consts::PI;
use std::fmt::Debug;
use std::hint::black_box;
use std::time::Duration;

use adsorbate_sputter::AdsorbateSputter;
use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use exobound::runtime::{ProcessInstance, Runtime, RuntimeConfig};
use exobound::surface::TemperatureLaw;
use exobound_benches::NA_MASS;
use exobound_sdk::{
    CellState, Impact, InFlight, LaunchRequest, Loss, Outcome, ParamValue, Params, Process,
    ReservoirProcess, Rng, RngKey, Source, SurfaceInteraction, Velocity, flags, stream,
};
use impact_vapor::ImpactVapor;
use ion_sputter::IonSputter;
use photoionization::Photoionization;
use photon_desorption::PhotonDesorption;
use regolith_diffusion::RegolithDiffusion;
use surface_accommodation::SurfaceAccommodation;
use thermal_desorption::ThermalDesorption;

/// Records per call: the engine's default flight chunk.
const BATCH: usize = 4096;
/// Run seed of the records' random streams.
const SEED: u64 = 42;
/// Seed of the generator that lays out the inputs (not seen by the laws).
const LAYOUT_SEED: u64 = 2026;
/// Heliocentric distance of the Moon, AU.
const HELIO_AU: f64 = 1.0;
/// Solar-wind ion flux at normal incidence, ions cm^-2 s^-1: 5 cm^-3 at
/// 400 km/s (common practice for the quiet wind at 1 AU).
const SOLAR_WIND_FLUX: f64 = 2.0e8;

/// A point of the sunlit hemisphere with its surface temperature.
#[derive(Clone, Copy)]
struct Site {
    latitude: f64,
    longitude: f64,
    local_time: f64,
    cos_sza: f64,
    temperature: f64,
}

/// A generator for the layout of record `i`, one stream per kind of record.
fn layout(i: usize, stream: u32) -> Rng {
    Rng::new(RngKey { seed: LAYOUT_SEED, particle: i as u64, event: 0, stream })
}

/// `n` sites spread uniformly over the dayside, subsolar point at latitude
/// and longitude 0 (local time 12 h).
fn dayside(n: usize) -> Vec<Site> {
    // The lunar law of the engine bench: 100 K at night, 390 K subsolar.
    let law = TemperatureLaw { night: 100.0, subsolar: 390.0, reference_distance: 1.0 };
    (0..n)
        .map(|i| {
            let mut rng = layout(i, 0);
            // Uniform area on the hemisphere: cos SZA uniform, azimuth about
            // the subsolar point uniform. With x to the Sun, y east, z north
            // the point is (cos, sin cos az, sin sin az).
            let cos_sza = rng.uniform();
            let sin_sza = (1.0 - cos_sza * cos_sza).sqrt();
            let az = 2.0 * PI * rng.uniform();
            let latitude = (sin_sza * az.sin()).asin();
            let longitude = (sin_sza * az.cos()).atan2(cos_sza);
            Site {
                latitude,
                longitude,
                local_time: 12.0 + longitude * 12.0 / PI,
                cos_sza,
                temperature: law.at(cos_sza, HELIO_AU),
            }
        })
        .collect()
}

/// Adsorbed surface density, atoms cm^-2, log-uniform in 1e9-1e11.
fn adsorbed(rng: &mut Rng) -> f64 {
    1.0e9 * 100f64.powf(rng.uniform())
}

/// Cell states for `Source::release_rate` and `ReservoirProcess::exchange`.
fn cells(sites: &[Site]) -> Vec<CellState> {
    sites
        .iter()
        .enumerate()
        .map(|(i, s)| CellState {
            cell: i as u32,
            flags: flags::SUNLIT,
            latitude: s.latitude,
            longitude: s.longitude,
            local_time: s.local_time,
            cos_sza: s.cos_sza,
            temperature: s.temperature,
            adsorbed: adsorbed(&mut layout(i, 1)),
            bulk_abundance: 1.0,
            helio_distance: HELIO_AU,
            // Ions arrive along the Sun line, so the flux through the surface
            // scales as cos SZA.
            solar_wind_flux: SOLAR_WIND_FLUX * s.cos_sza,
            meteoroid_factor: 1.0,
            time: 0.0,
        })
        .collect()
}

/// Launch requests for `Source::launch`, one Na atom per site.
fn launches(sites: &[Site]) -> Vec<LaunchRequest> {
    sites
        .iter()
        .enumerate()
        .map(|(i, s)| LaunchRequest {
            key: RngKey { seed: SEED, particle: i as u64, event: 0, stream: stream::LAUNCH },
            cell: i as u32,
            flags: flags::SUNLIT,
            latitude: s.latitude,
            longitude: s.longitude,
            local_time: s.local_time,
            cos_sza: s.cos_sza,
            temperature: s.temperature,
            helio_distance: HELIO_AU,
            mass: NA_MASS,
            time: 0.0,
        })
        .collect()
}

/// Na atoms in flight above the sites for `Loss::loss_rate`: up to 2000 km
/// high at 300-2300 m/s; one in eight spent the interval in shadow and one
/// in eight crossed a shadow boundary.
fn in_flight(sites: &[Site]) -> Vec<InFlight> {
    sites
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let mut rng = layout(i, 2);
            let speed = 300.0 + 2000.0 * rng.uniform();
            let sunlit_fraction = match i % 8 {
                0 => 0.0,
                1 => rng.uniform(),
                _ => 1.0,
            };
            InFlight {
                key: RngKey { seed: SEED, particle: i as u64, event: 0, stream: stream::FLIGHT },
                altitude: 2.0e6 * rng.uniform(),
                latitude: s.latitude,
                local_time: s.local_time,
                speed,
                sun_radial_velocity: speed * (2.0 * rng.uniform() - 1.0),
                helio_distance: HELIO_AU,
                sunlit_fraction,
                time: 0.0,
            }
        })
        .collect()
}

/// Na atoms landing on the sites for `SurfaceInteraction::land`: 300-2300
/// m/s, arriving along the cosine law.
fn impacts(sites: &[Site]) -> Vec<Impact> {
    sites
        .iter()
        .enumerate()
        .map(|(i, s)| {
            let mut rng = layout(i, 3);
            let speed = 300.0 + 2000.0 * rng.uniform();
            let d = rng.cosine_direction();
            Impact {
                key: RngKey { seed: SEED, particle: i as u64, event: 1, stream: stream::SURFACE },
                cell: i as u32,
                flags: flags::SUNLIT,
                latitude: s.latitude,
                longitude: s.longitude,
                local_time: s.local_time,
                cos_sza: s.cos_sza,
                temperature: s.temperature,
                adsorbed: adsorbed(&mut rng),
                mass: NA_MASS,
                velocity: Velocity {
                    east: d.east * speed,
                    north: d.north * speed,
                    up: -d.up * speed,
                },
                time: 0.0,
            }
        })
        .collect()
}

/// Parameters from (name, number) pairs; every other parameter keeps its default.
fn params(pairs: &[(&str, f64)]) -> BTreeMap<String, ParamValue> {
    pairs.iter().map(|&(k, v)| (k.to_string(), ParamValue::Number(v))).collect()
}

/// The law `T` built natively from `p`, as the module's `init` would build it.
fn native<T: Process>(p: &BTreeMap<String, ParamValue>) -> T {
    let schema = T::MANIFEST.to_info().parameters;
    T::new(&Params::validate(p, &schema).expect("valid parameters")).expect("law accepts them")
}

/// An instance of the built standard module `name` with parameters `p`.
fn wasm(rt: &Runtime, name: &str, p: &BTreeMap<String, ParamValue>) -> ProcessInstance {
    let module = rt.load(&exobound::standard_module(name)).expect("module built by host/build.rs");
    rt.instantiate(&module, p).expect("instance").expect("parameters accepted")
}

/// Time one batch call both ways in the group `process/<name>`, after
/// checking that both ways give the same outputs.
fn compare<I, O>(
    c: &mut Criterion,
    name: &str,
    input: &[I],
    mut native: impl FnMut(&[I], &mut [O]),
    mut wasm: impl FnMut(&[I], &mut [O]),
) where
    O: Copy + Default + PartialEq + Debug,
{
    let mut out_native = vec![O::default(); input.len()];
    let mut out_wasm = vec![O::default(); input.len()];
    native(input, &mut out_native);
    wasm(input, &mut out_wasm);
    if let Some(k) = out_native.iter().zip(&out_wasm).position(|(a, b)| a != b) {
        panic!("{name}: record {k} differs: native {:?}, wasm {:?}", out_native[k], out_wasm[k]);
    }

    let mut group = c.benchmark_group(format!("process/{name}"));
    group.throughput(Throughput::Elements(input.len() as u64));
    group.bench_function("native", |b| {
        b.iter(|| native(black_box(input), black_box(&mut out_native[..])))
    });
    group.bench_function("wasm", |b| {
        b.iter(|| wasm(black_box(input), black_box(&mut out_wasm[..])))
    });
    group.finish();
}

/// Bench module `$name` (crate type `$law`, parameters `$p`) on `$input`
/// through its batch method `$call`, natively and in wasm.
macro_rules! bench_pair {
    ($c:expr, $rt:expr, $name:literal, $law:ty, $p:expr, $input:expr, $call:ident, $out:ty) => {{
        let mut law = native::<$law>($p);
        let mut inst = wasm($rt, $name, $p);
        compare(
            $c,
            $name,
            $input,
            |i, o: &mut [$out]| law.$call(i, o).unwrap(),
            |i, o: &mut [$out]| inst.$call(i, o).unwrap().unwrap(),
        );
    }};
}

fn process(c: &mut Criterion) {
    let rt = Runtime::new(RuntimeConfig::default()).expect("runtime");
    let sites = dayside(BATCH);
    let cells = cells(&sites);
    let launches = launches(&sites);
    let in_flight = in_flight(&sites);
    let impacts = impacts(&sites);
    let p = params(&[]);

    // Sources, on their launch sampling. Defaults except the thermal binding
    // energy, which is the engine bench's lunar 1.1 eV.
    let td = params(&[("binding_energy", 1.1)]);
    bench_pair!(c, &rt, "photon-desorption", PhotonDesorption, &p, &launches, launch, Velocity);
    bench_pair!(c, &rt, "impact-vapor", ImpactVapor, &p, &launches, launch, Velocity);
    bench_pair!(c, &rt, "ion-sputter", IonSputter, &p, &launches, launch, Velocity);
    bench_pair!(c, &rt, "thermal-desorption", ThermalDesorption, &td, &launches, launch, Velocity);

    // Reservoir processes, on the cell states.
    bench_pair!(c, &rt, "adsorbate-sputter", AdsorbateSputter, &p, &cells, exchange, f64);
    bench_pair!(c, &rt, "regolith-diffusion", RegolithDiffusion, &p, &cells, exchange, f64);

    // The loss, on atoms in flight.
    bench_pair!(c, &rt, "photoionization", Photoionization, &p, &in_flight, loss_rate, f64);

    // The surface interaction, on landings; sticking 0.3 as in the engine bench.
    let sa = params(&[("sticking", 0.3)]);
    bench_pair!(
        c,
        &rt,
        "surface-accommodation",
        SurfaceAccommodation,
        &sa,
        &impacts,
        land,
        Outcome
    );
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(2))
        .sample_size(50);
    targets = process
}
criterion_main!(benches);

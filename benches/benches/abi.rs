//! The cost of the wasm boundary for a launch-sampling law.
//!
//! `abi/launch/native/B` calls the thermal-desorption law directly;
//! `abi/launch/wasm/B` calls the same source compiled to wasm through the
//! runtime, with the sandbox as shipped (epoch interruption on, memory cap,
//! output validation, fuel metered); `abi/launch/wasm-nofuel/B` is the
//! same with fuel metering off, to measure what the deterministic budgets
//! cost. All draw Maxwellian-flux speeds and cosine-law directions for
//! batches of B records. Compare the per-element times of
//! the two IDs from one run: the ratio is the cost of the sandbox.

use std::collections::BTreeMap;
use std::time::Duration;

use criterion::{BenchmarkId, Criterion, Throughput, criterion_group, criterion_main};
use exobound::runtime::{Runtime, RuntimeConfig};
use exobound_benches::launch_requests;
use exobound_sdk::{Params, Process, Source, Velocity};
use thermal_desorption::ThermalDesorption;

const BATCHES: [usize; 4] = [1, 64, 1024, 8192];

fn launch(c: &mut Criterion) {
    let schema = ThermalDesorption::MANIFEST.to_info().parameters;
    let mut native =
        ThermalDesorption::new(&Params::validate(&BTreeMap::new(), &schema).unwrap()).unwrap();
    let rt = Runtime::new(RuntimeConfig::default()).expect("runtime");
    let module = rt.load(&exobound::standard_module("thermal-desorption")).expect("module built");
    let mut wasm = rt.instantiate(&module, &BTreeMap::new()).unwrap().unwrap();
    let rt_nofuel =
        Runtime::new(RuntimeConfig { fuel_metering: false, ..RuntimeConfig::default() }).unwrap();
    let module_nofuel =
        rt_nofuel.load(&exobound::standard_module("thermal-desorption")).expect("module built");
    let mut wasm_nofuel = rt_nofuel.instantiate(&module_nofuel, &BTreeMap::new()).unwrap().unwrap();

    let mut group = c.benchmark_group("abi/launch");
    for b in BATCHES {
        let reqs = launch_requests(b);
        let mut out = vec![Velocity::default(); b];
        group.throughput(Throughput::Elements(b as u64));
        group.bench_with_input(BenchmarkId::new("native", b), &b, |bench, _| {
            bench.iter(|| native.launch(&reqs, &mut out).unwrap())
        });
        group.bench_with_input(BenchmarkId::new("wasm", b), &b, |bench, _| {
            bench.iter(|| wasm.launch(&reqs, &mut out).unwrap().unwrap())
        });
        group.bench_with_input(BenchmarkId::new("wasm-nofuel", b), &b, |bench, _| {
            bench.iter(|| wasm_nofuel.launch(&reqs, &mut out).unwrap().unwrap())
        });
    }
    group.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(2))
        .sample_size(30);
    targets = launch
}
criterion_main!(benches);

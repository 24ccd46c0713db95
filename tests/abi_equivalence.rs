//! One law built both ways gives bit-identical outputs natively and in wasm.

use std::collections::BTreeMap;

use exobound_sdk::{CellState, LaunchRequest, Params, Process, RngKey, Source, Velocity, stream};
use thermal_desorption::ThermalDesorption;

use crate::support::*;

const N: usize = 100_000;

fn cells() -> Vec<CellState> {
    (0..N)
        .map(|i| CellState {
            cell: i as u32,
            temperature: 100.0 + (i % 6000) as f64 * 0.1,
            adsorbed: 1.0e9 + i as f64 * 3.7e4,
            cos_sza: ((i % 180) as f64).to_radians().cos(),
            ..Default::default()
        })
        .collect()
}

fn requests() -> Vec<LaunchRequest> {
    (0..N)
        .map(|i| LaunchRequest {
            key: RngKey {
                seed: 20_261_201,
                particle: i as u64,
                event: (i % 7) as u32,
                stream: stream::LAUNCH,
            },
            cell: (i % 512) as u32,
            temperature: 100.0 + (i % 600) as f64,
            mass: 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS,
            ..Default::default()
        })
        .collect()
}

#[test]
fn thermal_desorption_is_bit_identical_natively_and_in_wasm() {
    // Native: the same type, called directly.
    let schema = ThermalDesorption::MANIFEST.to_info().parameters;
    let mut native =
        ThermalDesorption::new(&Params::validate(&BTreeMap::new(), &schema).unwrap()).unwrap();
    let cells = cells();
    let reqs = requests();
    let mut rate_n = vec![0.0; N];
    let mut vel_n = vec![Velocity::default(); N];
    native.release_rate(&cells, &mut rate_n).unwrap();
    native.launch(&reqs, &mut vel_n).unwrap();

    // Wasm: the standard module built by the build script.
    let rt = runtime();
    let m = standard(&rt, "thermal-desorption");
    let mut inst = rt.instantiate(&m, &BTreeMap::new()).unwrap().unwrap();
    let mut rate_w = vec![0.0; N];
    let mut vel_w = vec![Velocity::default(); N];
    inst.release_rate(&cells, &mut rate_w).unwrap().unwrap();
    inst.launch(&reqs, &mut vel_w).unwrap().unwrap();

    let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
    assert_eq!(bits(&rate_n), bits(&rate_w), "release rates differ");
    let vbits = |v: &[Velocity]| {
        v.iter()
            .flat_map(|v| [v.east.to_bits(), v.north.to_bits(), v.up.to_bits()])
            .collect::<Vec<_>>()
    };
    assert_eq!(vbits(&vel_n), vbits(&vel_w), "launch velocities differ");
    // The comparison is not vacuous: rates and speeds vary.
    assert!(rate_n.iter().any(|&r| r > 0.0));
    assert!(vel_n.windows(2).any(|w| w[0] != w[1]));
}

#[test]
fn results_do_not_depend_on_batch_boundaries() {
    // Random streams are keyed per record, so splitting a batch changes nothing.
    let rt = runtime();
    let m = standard(&rt, "thermal-desorption");
    let mut inst = rt.instantiate(&m, &BTreeMap::new()).unwrap().unwrap();
    let reqs = requests();
    let mut whole = vec![Velocity::default(); 3000];
    inst.launch(&reqs[..3000], &mut whole).unwrap().unwrap();
    let mut parts = vec![Velocity::default(); 3000];
    for (chunk_in, chunk_out) in reqs[..3000].chunks(7).zip(parts.chunks_mut(7)) {
        inst.launch(chunk_in, chunk_out).unwrap().unwrap();
    }
    assert_eq!(whole, parts);
}

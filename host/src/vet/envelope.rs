//! The inputs `vet` feeds a module: the physical envelope of every record
//! field, the parameter configurations to sweep, and one way to call any role.
//!
//! Why this exists: an ABI v1 manifest says *which* inputs a module reads
//! but not over what range, so vet brings its own envelope, wide enough to
//! cover the Moon and Mercury (night-side polar cold to perihelion
//! subsolar heat) with margin. Every field is varied, read or not, so a
//! module that reads an undeclared field is exercised too. Parameters are
//! swept over the ranges their manifest *does* declare: each number at its
//! minimum and maximum, each choice at every option, one at a time.

use std::collections::BTreeMap;

use exobound_sdk::wire::ManifestInfo;
use exobound_sdk::{
    CellState, Impact, InFlight, LaunchRequest, Outcome, ParamValue, RngKey, Role, Velocity, flags,
    stream,
};

use crate::runtime::{DomainError, HostError, ProcessInstance};

/// Mass of a sodium atom, kg (22.98976928 u).
pub const SODIUM_MASS: f64 = 22.989_769_28 * 1.660_539_066_60e-27;
/// Mass of a potassium atom, kg (39.0983 u).
pub const POTASSIUM_MASS: f64 = 39.0983 * 1.660_539_066_60e-27;

/// One row of the envelope: a record field, its range and unit.
#[derive(Clone, Copy, Debug)]
pub struct Span {
    /// Field name (as in the ABI records).
    pub field: &'static str,
    /// Lowest value, in `unit`.
    pub lo: f64,
    /// Highest value, in `unit`.
    pub hi: f64,
    /// Unit of `lo` and `hi`.
    pub unit: &'static str,
    /// Sampled log-uniformly between `lo` > 0 and `hi` (with an occasional exact 0).
    pub log: bool,
}

/// The envelope vet sweeps. Temperatures: 40 K (permanently shadowed
/// polar floors) to 750 K (Mercury's subsolar point near perihelion is
/// about 700 K; from memory). Heliocentric distance: 0.3 AU (inside
/// Mercury's 0.307 AU perihelion) to 1.6 AU. Fluxes and surface densities
/// span the decades seen in the literature with margin.
pub const ENVELOPE: [Span; 17] = [
    Span {
        field: "latitude",
        lo: -std::f64::consts::FRAC_PI_2,
        hi: std::f64::consts::FRAC_PI_2,
        unit: "rad",
        log: false,
    },
    Span {
        field: "longitude",
        lo: -std::f64::consts::PI,
        hi: std::f64::consts::PI,
        unit: "rad",
        log: false,
    },
    Span { field: "local_time", lo: 0.0, hi: 24.0, unit: "h", log: false },
    Span { field: "cos_sza", lo: -1.0, hi: 1.0, unit: "1", log: false },
    Span { field: "temperature", lo: 40.0, hi: 750.0, unit: "K", log: false },
    Span { field: "adsorbed", lo: 1.0e6, hi: 1.0e16, unit: "cm^-2", log: true },
    Span { field: "bulk_abundance", lo: 0.0, hi: 10.0, unit: "1", log: false },
    Span { field: "helio_distance", lo: 0.3, hi: 1.6, unit: "AU", log: false },
    Span { field: "solar_wind_flux", lo: 1.0e6, hi: 1.0e10, unit: "cm^-2 s^-1", log: true },
    Span { field: "meteoroid_factor", lo: 0.0, hi: 10.0, unit: "1", log: false },
    Span { field: "time", lo: 0.0, hi: 1.0e8, unit: "s", log: false },
    Span { field: "altitude", lo: 0.0, hi: 5.0e7, unit: "m", log: false },
    Span { field: "speed", lo: 0.0, hi: 1.0e4, unit: "m s^-1", log: false },
    Span { field: "sun_radial_velocity", lo: -1.0e4, hi: 1.0e4, unit: "m s^-1", log: false },
    Span { field: "sunlit_fraction", lo: 0.0, hi: 1.0, unit: "1", log: false },
    Span { field: "velocity_horizontal", lo: -3000.0, hi: 3000.0, unit: "m s^-1", log: false },
    Span { field: "velocity_up", lo: -5000.0, hi: -1.0, unit: "m s^-1", log: false },
];

/// A batch call of ABI v1.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Call {
    /// `Source::release_rate`, atoms cm^-2 s^-1.
    ReleaseRate,
    /// `Source::launch`, m s^-1.
    Launch,
    /// `Loss::loss_rate`, s^-1.
    LossRate,
    /// `SurfaceInteraction::land`.
    Land,
    /// `ReservoirProcess::exchange`, atoms cm^-2 s^-1.
    Exchange,
}

impl Call {
    /// The calls that the roles `roles` implement.
    pub fn for_roles(roles: &[Role]) -> Vec<Call> {
        let mut v = Vec::new();
        for r in roles {
            match r {
                Role::Source => v.extend([Call::ReleaseRate, Call::Launch]),
                Role::Loss => v.push(Call::LossRate),
                Role::SurfaceInteraction => v.push(Call::Land),
                Role::ReservoirProcess => v.push(Call::Exchange),
            }
        }
        v
    }

    /// The call's short name in reports.
    pub fn as_str(self) -> &'static str {
        match self {
            Call::ReleaseRate => "release-rate",
            Call::Launch => "launch",
            Call::LossRate => "loss-rate",
            Call::Land => "land",
            Call::Exchange => "exchange",
        }
    }
}

/// Input records for one call.
#[derive(Clone, Debug)]
pub enum Records {
    /// Cells, for release-rate and exchange.
    Cells(Vec<CellState>),
    /// Launch requests.
    Launches(Vec<LaunchRequest>),
    /// Particles in flight.
    Flights(Vec<InFlight>),
    /// Landings.
    Impacts(Vec<Impact>),
}

impl Records {
    /// Number of records.
    pub fn len(&self) -> usize {
        match self {
            Records::Cells(v) => v.len(),
            Records::Launches(v) => v.len(),
            Records::Flights(v) => v.len(),
            Records::Impacts(v) => v.len(),
        }
    }

    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }

    /// The records in reverse order.
    pub fn reversed(&self) -> Records {
        fn rev<T: Clone>(v: &[T]) -> Vec<T> {
            v.iter().rev().cloned().collect()
        }
        match self {
            Records::Cells(v) => Records::Cells(rev(v)),
            Records::Launches(v) => Records::Launches(rev(v)),
            Records::Flights(v) => Records::Flights(rev(v)),
            Records::Impacts(v) => Records::Impacts(rev(v)),
        }
    }

    /// Records `range` of these.
    pub fn slice(&self, range: std::ops::Range<usize>) -> Records {
        match self {
            Records::Cells(v) => Records::Cells(v[range].to_vec()),
            Records::Launches(v) => Records::Launches(v[range].to_vec()),
            Records::Flights(v) => Records::Flights(v[range].to_vec()),
            Records::Impacts(v) => Records::Impacts(v[range].to_vec()),
        }
    }
}

/// Outputs of one call.
#[derive(Clone, Debug, PartialEq)]
pub enum Outputs {
    /// Rates, in the call's unit.
    Rates(Vec<f64>),
    /// Launch velocities, m s^-1.
    Velocities(Vec<Velocity>),
    /// Landing outcomes.
    Outcomes(Vec<Outcome>),
}

impl Outputs {
    /// Every output as raw bits, for bit-for-bit comparison.
    pub fn bits(&self) -> Vec<u64> {
        match self {
            Outputs::Rates(v) => v.iter().map(|x| x.to_bits()).collect(),
            Outputs::Velocities(v) => v
                .iter()
                .flat_map(|u| [u.east.to_bits(), u.north.to_bits(), u.up.to_bits()])
                .collect(),
            Outputs::Outcomes(v) => v
                .iter()
                .flat_map(|o| {
                    [
                        o.kind as u64 | ((o.reserved as u64) << 32),
                        o.velocity.east.to_bits(),
                        o.velocity.north.to_bits(),
                        o.velocity.up.to_bits(),
                    ]
                })
                .collect(),
        }
    }

    /// The outputs in reverse order.
    pub fn reversed(&self) -> Outputs {
        match self {
            Outputs::Rates(v) => Outputs::Rates(v.iter().rev().copied().collect()),
            Outputs::Velocities(v) => Outputs::Velocities(v.iter().rev().copied().collect()),
            Outputs::Outcomes(v) => Outputs::Outcomes(v.iter().rev().copied().collect()),
        }
    }
}

/// Run `call` on `records` through `inst`.
pub fn run(
    inst: &mut ProcessInstance,
    call: Call,
    records: &Records,
) -> Result<Result<Outputs, DomainError>, HostError> {
    match (call, records) {
        (Call::ReleaseRate, Records::Cells(c)) => {
            let mut out = vec![0.0; c.len()];
            Ok(inst.release_rate(c, &mut out)?.map(|()| Outputs::Rates(out)))
        }
        (Call::Exchange, Records::Cells(c)) => {
            let mut out = vec![0.0; c.len()];
            Ok(inst.exchange(c, &mut out)?.map(|()| Outputs::Rates(out)))
        }
        (Call::Launch, Records::Launches(r)) => {
            let mut out = vec![Velocity::default(); r.len()];
            Ok(inst.launch(r, &mut out)?.map(|()| Outputs::Velocities(out)))
        }
        (Call::LossRate, Records::Flights(p)) => {
            let mut out = vec![0.0; p.len()];
            Ok(inst.loss_rate(p, &mut out)?.map(|()| Outputs::Rates(out)))
        }
        (Call::Land, Records::Impacts(h)) => {
            let mut out = vec![Outcome::default(); h.len()];
            Ok(inst.land(h, &mut out)?.map(|()| Outputs::Outcomes(out)))
        }
        _ => unreachable!("vet pairs each call with its own record type"),
    }
}

/// SplitMix64: a small, well-mixed integer hash used to spread the sweep
/// deterministically (Steele, Lea & Flood 2014; constants from memory).
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// A uniform number in [0, 1) for record `i`, field `j`.
fn unit(i: usize, j: usize) -> f64 {
    (mix(((i as u64) << 8) ^ j as u64 ^ 0x5EED) >> 11) as f64 / (1u64 << 53) as f64
}

/// The value of envelope field `field` for sweep record `i`: record 0 is
/// at every low end, record 1 at every high end, the rest spread inside.
fn value(field: &str, i: usize) -> f64 {
    let (j, s) = ENVELOPE
        .iter()
        .enumerate()
        .find(|(_, s)| s.field == field)
        .expect("vet's envelope names every field it fills");
    let u = match i {
        0 => 0.0,
        1 => 1.0,
        _ => unit(i, j),
    };
    if s.log {
        if i > 1 && i.is_multiple_of(17) {
            return 0.0;
        }
        (s.lo.ln() + u * (s.hi.ln() - s.lo.ln())).exp()
    } else {
        s.lo + u * (s.hi - s.lo)
    }
}

fn sunlit_flags(cos_sza: f64) -> u32 {
    if cos_sza > 0.0 { flags::SUNLIT } else { 0 }
}

fn key(i: usize, stream: u32) -> RngKey {
    RngKey { seed: 0x7E7, particle: i as u64, event: (i % 5) as u32, stream }
}

/// `n` records for `call` spread over the whole envelope.
pub fn sweep(call: Call, n: usize) -> Records {
    let mass = |i: usize| if i.is_multiple_of(2) { SODIUM_MASS } else { POTASSIUM_MASS };
    match call {
        Call::ReleaseRate | Call::Exchange => Records::Cells(
            (0..n)
                .map(|i| {
                    let cos_sza = value("cos_sza", i);
                    CellState {
                        cell: (i % 1000) as u32,
                        flags: sunlit_flags(cos_sza),
                        latitude: value("latitude", i),
                        longitude: value("longitude", i),
                        local_time: value("local_time", i),
                        cos_sza,
                        temperature: value("temperature", i),
                        adsorbed: value("adsorbed", i),
                        bulk_abundance: value("bulk_abundance", i),
                        helio_distance: value("helio_distance", i),
                        solar_wind_flux: value("solar_wind_flux", i),
                        meteoroid_factor: value("meteoroid_factor", i),
                        time: value("time", i),
                    }
                })
                .collect(),
        ),
        Call::Launch => Records::Launches(
            (0..n)
                .map(|i| {
                    let cos_sza = value("cos_sza", i);
                    LaunchRequest {
                        key: key(i, stream::LAUNCH),
                        cell: (i % 1000) as u32,
                        flags: sunlit_flags(cos_sza),
                        latitude: value("latitude", i),
                        longitude: value("longitude", i),
                        local_time: value("local_time", i),
                        cos_sza,
                        temperature: value("temperature", i),
                        helio_distance: value("helio_distance", i),
                        mass: mass(i),
                        time: value("time", i),
                    }
                })
                .collect(),
        ),
        Call::LossRate => Records::Flights(
            (0..n)
                .map(|i| InFlight {
                    key: key(i, stream::FLIGHT),
                    altitude: value("altitude", i),
                    latitude: value("latitude", i),
                    local_time: value("local_time", i),
                    speed: value("speed", i),
                    sun_radial_velocity: value("sun_radial_velocity", i),
                    helio_distance: value("helio_distance", i),
                    sunlit_fraction: value("sunlit_fraction", i),
                    time: value("time", i),
                })
                .collect(),
        ),
        Call::Land => Records::Impacts(
            (0..n)
                .map(|i| {
                    let cos_sza = value("cos_sza", i);
                    Impact {
                        key: key(i, stream::SURFACE),
                        cell: (i % 1000) as u32,
                        flags: sunlit_flags(cos_sza),
                        latitude: value("latitude", i),
                        longitude: value("longitude", i),
                        local_time: value("local_time", i),
                        cos_sza,
                        temperature: value("temperature", i),
                        adsorbed: value("adsorbed", i),
                        mass: mass(i),
                        velocity: Velocity {
                            east: value("velocity_horizontal", i),
                            north: value("velocity_horizontal", i + 7),
                            up: value("velocity_up", i),
                        },
                        time: value("time", i),
                    }
                })
                .collect(),
        ),
    }
}

/// `n` records for `call` at one central, typical state (a sunlit
/// mid-latitude dayside cell at 1 AU, 400 K, sodium), differing only in
/// their random keys (particle ids `first..first + n`).
pub fn central(call: Call, first: u64, n: usize) -> Records {
    let k =
        |i: usize, s: u32| RngKey { seed: 0x7E7, particle: first + i as u64, event: 0, stream: s };
    let cell = CellState {
        cell: 7,
        flags: flags::SUNLIT,
        latitude: 0.3,
        longitude: 0.2,
        local_time: 11.0,
        cos_sza: 0.8,
        temperature: 400.0,
        adsorbed: 1.0e12,
        bulk_abundance: 1.0,
        helio_distance: 1.0,
        solar_wind_flux: 2.0e8,
        meteoroid_factor: 1.0,
        time: 1.0e5,
    };
    match call {
        Call::ReleaseRate | Call::Exchange => Records::Cells(vec![cell; n]),
        Call::Launch => Records::Launches(
            (0..n)
                .map(|i| LaunchRequest {
                    key: k(i, stream::LAUNCH),
                    cell: cell.cell,
                    flags: cell.flags,
                    latitude: cell.latitude,
                    longitude: cell.longitude,
                    local_time: cell.local_time,
                    cos_sza: cell.cos_sza,
                    temperature: cell.temperature,
                    helio_distance: cell.helio_distance,
                    mass: SODIUM_MASS,
                    time: cell.time,
                })
                .collect(),
        ),
        Call::LossRate => Records::Flights(
            (0..n)
                .map(|i| InFlight {
                    key: k(i, stream::FLIGHT),
                    altitude: 1.0e5,
                    latitude: cell.latitude,
                    local_time: cell.local_time,
                    speed: 1500.0,
                    sun_radial_velocity: 300.0,
                    helio_distance: 1.0,
                    sunlit_fraction: 1.0,
                    time: cell.time,
                })
                .collect(),
        ),
        Call::Land => Records::Impacts(
            (0..n)
                .map(|i| Impact {
                    key: k(i, stream::SURFACE),
                    cell: cell.cell,
                    flags: cell.flags,
                    latitude: cell.latitude,
                    longitude: cell.longitude,
                    local_time: cell.local_time,
                    cos_sza: cell.cos_sza,
                    temperature: cell.temperature,
                    adsorbed: cell.adsorbed,
                    mass: SODIUM_MASS,
                    velocity: Velocity { east: 400.0, north: -200.0, up: -1200.0 },
                    time: cell.time,
                })
                .collect(),
        ),
    }
}

/// The base parameters: every default, and for a parameter without one
/// the middle of its range (geometric when it spans more than two decades
/// above zero) or its first option. A table without a default is left out
/// (no table can be made up for it), so its absence is reported by name.
pub fn base_parameters(m: &ManifestInfo) -> BTreeMap<String, ParamValue> {
    let mut out = BTreeMap::new();
    for p in &m.parameters {
        if p.default.is_some() || p.table.is_some() {
            continue;
        }
        let v = if let Some(first) = p.choices.first() {
            ParamValue::Text(first.clone())
        } else {
            let lo = p.min.unwrap_or(0.0);
            let hi = p.max.unwrap_or(lo.max(1.0));
            if lo > 0.0 && hi / lo > 100.0 {
                ParamValue::Number((lo * hi).sqrt())
            } else {
                ParamValue::Number(0.5 * (lo + hi))
            }
        };
        out.insert(p.name.clone(), v);
    }
    out
}

/// A parameter configuration of the sweep: a label and the values.
#[derive(Clone, Debug)]
pub struct Config {
    /// What differs from the base, e.g. `binding_energy = 0.05 eV`.
    pub label: String,
    /// The parameters to pass.
    pub params: BTreeMap<String, ParamValue>,
}

/// The base configuration, then each number parameter at its minimum and
/// maximum and each choice at each of its other options, one at a time.
pub fn configs(m: &ManifestInfo) -> Vec<Config> {
    let base = base_parameters(m);
    let mut out = vec![Config { label: "base parameters".to_string(), params: base.clone() }];
    for p in &m.parameters {
        let mut values = Vec::new();
        if p.choices.is_empty() {
            for x in [p.min, p.max].into_iter().flatten() {
                if x.is_finite() {
                    values.push(ParamValue::Number(x));
                }
            }
        } else {
            values.extend(p.choices.iter().map(|c| ParamValue::Text(c.clone())));
        }
        let current = base.get(&p.name).or(p.default.as_ref());
        for v in values {
            if Some(&v) == current {
                continue;
            }
            let mut params = base.clone();
            let label = format!("{} = {} {}", p.name, v, p.unit).trim_end().to_string();
            params.insert(p.name.clone(), v);
            out.push(Config { label, params });
        }
    }
    out
}

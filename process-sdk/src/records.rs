//! The `repr(C)` batch records that cross the wasm boundary, one type per
//! role and direction.
//!
//! Why this exists: the host calls a module once per batch, never once per
//! particle. A batch is a contiguous array of one of these records, written
//! by the host into the module's linear memory; the module writes its
//! results into a second, host-provided array. The layouts are part of ABI
//! v1 (see `docs/abi.md`): fields are only 8-byte floats, 8-byte and 4-byte
//! integers in an order that leaves no implicit padding, so the layout is
//! identical on wasm32 and on 64-bit hosts. The sizes are pinned below by
//! compile-time assertions.
//!
//! Frames and units:
//! - body-fixed latitude and east longitude in radians;
//! - local time in hours, 12 at the subsolar meridian, increasing eastward
//!   (6 is the dawn terminator, 18 the dusk terminator);
//! - velocities in the local horizontal frame, east, north, up, in m s^-1;
//! - surface densities in atoms cm^-2 and fluxes in cm^-2 s^-1, as the
//!   laboratory and observing literature quote them; everything else SI.

/// The key of one record's random stream (see [`crate::rng::Rng`]): run
/// seed, particle, event, stream and step.
///
/// The `stream` word holds two parts: the named stream in its low 8 bits
/// (see [`stream`]) and the step number in its high 24 bits, so that
/// draws of the same particle and event in different steps (in flight, a
/// particle keeps its event counter from step to step) are distinct
/// without folding the step into the seed. Build keys with
/// [`RngKey::at_step`]; read the parts with [`RngKey::stream_id`] and
/// [`RngKey::step`].
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct RngKey {
    /// Run seed chosen by the user, dimensionless.
    pub seed: u64,
    /// Particle id, unique within the run and below 2^40 (for cell-level
    /// host draws, source << 32 | cell), dimensionless.
    pub particle: u64,
    /// Event counter of this particle (0 at launch, +1 per landing), dimensionless.
    pub event: u32,
    /// Named stream in the low 8 bits (see [`stream`]), step number in the high 24.
    pub stream: u32,
}

impl RngKey {
    /// The key of (run seed, particle, event, named stream, step); the step
    /// is taken modulo 2^24 (the host refuses runs of more steps).
    pub const fn at_step(seed: u64, particle: u64, event: u32, stream: u32, step: u64) -> RngKey {
        RngKey { seed, particle, event, stream: (stream & 0xFF) | ((step as u32 & 0xFF_FFFF) << 8) }
    }

    /// The named stream, see [`stream`].
    pub const fn stream_id(&self) -> u32 {
        self.stream & 0xFF
    }

    /// The step number, dimensionless.
    pub const fn step(&self) -> u32 {
        self.stream >> 8
    }
}

/// Named random streams, so that launch, flight and surface draws of one
/// event never share numbers. Streams 1-3 are handed to modules with their
/// records; streams from 0x80 up are the host's own and are never handed
/// to a module, so a module's draws cannot be correlated with the host's.
pub mod stream {
    /// Launch velocity of a newly released particle (modules).
    pub const LAUNCH: u32 = 1;
    /// Draws made in flight, e.g. by a stochastic loss (modules).
    pub const FLIGHT: u32 = 2;
    /// Surface interaction at landing: stick, bounce, lost (modules).
    pub const SURFACE: u32 = 3;
    /// Host: stochastic rounding of released atoms into particles, and
    /// each new particle's launch point and time.
    pub const HOST_RELEASE: u32 = 0x81;
    /// Host: survival of a flight segment against the in-flight losses, and
    /// which loss took the atom.
    pub const HOST_SURVIVAL: u32 = 0x82;
    /// Host: the particle budget's Russian roulette and splitting of
    /// particles whose weights left the allowed window.
    pub const HOST_ROULETTE: u32 = 0x83;
    /// Host: the time within a flight segment at which the tallies sight
    /// the particle.
    pub const HOST_SIGHTING: u32 = 0x84;
    /// The streams handed to modules.
    pub const MODULE_STREAMS: [u32; 3] = [LAUNCH, FLIGHT, SURFACE];
    /// The host's own streams.
    pub const HOST_STREAMS: [u32; 4] = [HOST_RELEASE, HOST_SURVIVAL, HOST_ROULETTE, HOST_SIGHTING];
}

/// The state of one surface cell, as seen by `Source::release_rate` and
/// `ReservoirProcess::exchange`.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct CellState {
    /// Cell index in the host's grid, dimensionless.
    pub cell: u32,
    /// Bit flags: bit 0 set when the cell centre is sunlit (see [`flags`]).
    pub flags: u32,
    /// Body-fixed latitude of the cell centre, rad.
    pub latitude: f64,
    /// Body-fixed east longitude of the cell centre, rad.
    pub longitude: f64,
    /// Local solar time at the cell centre, hours (12 = subsolar meridian).
    pub local_time: f64,
    /// Cosine of the solar zenith angle, dimensionless; <= 0 on the night side.
    pub cos_sza: f64,
    /// Surface temperature, K.
    pub temperature: f64,
    /// Adsorbed surface density of the species, atoms cm^-2.
    pub adsorbed: f64,
    /// Bulk abundance relative to the scenario's nominal regolith, dimensionless (1 = nominal).
    pub bulk_abundance: f64,
    /// Heliocentric distance of the body, AU.
    pub helio_distance: f64,
    /// Solar-wind ion flux reaching the surface (after any shielding), ions cm^-2 s^-1.
    pub solar_wind_flux: f64,
    /// Meteoroid flux relative to the scenario's nominal flux, dimensionless.
    pub meteoroid_factor: f64,
    /// Simulated time since the start of the run, s.
    pub time: f64,
}

/// Flag bits of [`CellState::flags`] and [`Impact::flags`].
pub mod flags {
    /// The point is in sunlight.
    pub const SUNLIT: u32 = 1;
}

/// One atom to be launched by `Source::launch`.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct LaunchRequest {
    /// Random stream of this launch.
    pub key: RngKey,
    /// Cell the atom leaves from, dimensionless.
    pub cell: u32,
    /// Bit flags as in [`CellState::flags`].
    pub flags: u32,
    /// Body-fixed latitude of the launch point, rad.
    pub latitude: f64,
    /// Body-fixed east longitude of the launch point, rad.
    pub longitude: f64,
    /// Local solar time of the launch point, hours.
    pub local_time: f64,
    /// Cosine of the solar zenith angle at the launch point, dimensionless.
    pub cos_sza: f64,
    /// Surface temperature at the launch point, K.
    pub temperature: f64,
    /// Heliocentric distance of the body, AU.
    pub helio_distance: f64,
    /// Mass of one atom of the species, kg.
    pub mass: f64,
    /// Simulated time, s.
    pub time: f64,
}

/// A velocity in the local horizontal frame, m s^-1.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Velocity {
    /// Eastward component, m s^-1.
    pub east: f64,
    /// Northward component, m s^-1.
    pub north: f64,
    /// Upward (local vertical) component, m s^-1.
    pub up: f64,
}

impl Velocity {
    /// Speed |v|, m s^-1.
    #[inline]
    pub fn speed(&self) -> f64 {
        crate::math::sqrt(self.east * self.east + self.north * self.north + self.up * self.up)
    }
}

/// One particle in flight, as seen by `Loss::loss_rate`.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct InFlight {
    /// Random stream for stochastic losses.
    pub key: RngKey,
    /// Altitude above the mean radius, m.
    pub altitude: f64,
    /// Latitude, rad.
    pub latitude: f64,
    /// Local solar time, hours.
    pub local_time: f64,
    /// Speed relative to the body, m s^-1.
    pub speed: f64,
    /// Velocity component along the Sun-to-particle direction in the Sun's
    /// frame (positive moving away from the Sun), m s^-1; sets the Doppler shift.
    pub sun_radial_velocity: f64,
    /// Heliocentric distance, AU.
    pub helio_distance: f64,
    /// Fraction of the interval spent in sunlight, dimensionless, in [0, 1].
    pub sunlit_fraction: f64,
    /// Simulated time, s.
    pub time: f64,
}

/// One atom arriving at the surface, as seen by `SurfaceInteraction::land`.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Impact {
    /// Random stream of this landing.
    pub key: RngKey,
    /// Cell of the landing point, dimensionless.
    pub cell: u32,
    /// Bit flags as in [`CellState::flags`].
    pub flags: u32,
    /// Body-fixed latitude of the landing point, rad.
    pub latitude: f64,
    /// Body-fixed east longitude of the landing point, rad.
    pub longitude: f64,
    /// Local solar time of the landing point, hours.
    pub local_time: f64,
    /// Cosine of the solar zenith angle, dimensionless.
    pub cos_sza: f64,
    /// Surface temperature, K.
    pub temperature: f64,
    /// Adsorbed surface density in the landing cell, atoms cm^-2.
    pub adsorbed: f64,
    /// Mass of one atom of the species, kg.
    pub mass: f64,
    /// Impact velocity in the local horizontal frame (up < 0), m s^-1.
    pub velocity: Velocity,
    /// Simulated time, s.
    pub time: f64,
}

/// What happens to an atom that lands.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[repr(u32)]
pub enum OutcomeKind {
    /// The atom joins the adsorbed pool of its cell.
    Stick = 0,
    /// The atom leaves again with the outcome's velocity.
    Bounce = 1,
    /// The atom is lost to the exosphere and the pool (buried, cold-trapped).
    Lost = 2,
}

impl OutcomeKind {
    /// The kind for an ABI code, or `None` for a code outside ABI v1.
    pub fn from_code(code: u32) -> Option<OutcomeKind> {
        match code {
            0 => Some(OutcomeKind::Stick),
            1 => Some(OutcomeKind::Bounce),
            2 => Some(OutcomeKind::Lost),
            _ => None,
        }
    }
}

/// The result of one landing.
#[repr(C)]
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Outcome {
    /// An [`OutcomeKind`] code: 0 stick, 1 bounce, 2 lost.
    pub kind: u32,
    /// Reserved, must be 0.
    pub reserved: u32,
    /// Re-emission velocity for a bounce (up > 0), m s^-1; ignored otherwise.
    pub velocity: Velocity,
}

impl Outcome {
    /// An atom that sticks.
    pub const STICK: Outcome = Outcome { kind: 0, reserved: 0, velocity: Velocity::ZERO };
    /// An atom that is lost (buried or cold-trapped).
    pub const LOST: Outcome = Outcome { kind: 2, reserved: 0, velocity: Velocity::ZERO };
    /// An atom that bounces with velocity `v`, m s^-1.
    #[inline]
    pub fn bounce(v: Velocity) -> Outcome {
        Outcome { kind: 1, reserved: 0, velocity: v }
    }
}

impl Velocity {
    /// The zero velocity.
    pub const ZERO: Velocity = Velocity { east: 0.0, north: 0.0, up: 0.0 };
}

/// Plain-data records that may be viewed as bytes: every bit pattern is a
/// valid value and there is no padding.
///
/// # Safety
/// Implement only for `repr(C)` types made of integers and floats, with no
/// implicit padding. The SDK implements it for the ABI records.
pub unsafe trait Record: Copy + Default + 'static {
    /// Size of one record, bytes.
    const SIZE: usize = core::mem::size_of::<Self>();
}

// SAFETY: all of these are repr(C), built from u32/u64/f64 with no padding
// (the size assertions below would fail if padding appeared).
unsafe impl Record for CellState {}
unsafe impl Record for LaunchRequest {}
unsafe impl Record for Velocity {}
unsafe impl Record for InFlight {}
unsafe impl Record for Impact {}
unsafe impl Record for Outcome {}
unsafe impl Record for f64 {}

// ABI v1 layout: these sizes are frozen.
const _: () = assert!(core::mem::size_of::<RngKey>() == 24);
const _: () = assert!(core::mem::size_of::<CellState>() == 96);
const _: () = assert!(core::mem::size_of::<LaunchRequest>() == 96);
const _: () = assert!(core::mem::size_of::<Velocity>() == 24);
const _: () = assert!(core::mem::size_of::<InFlight>() == 88);
const _: () = assert!(core::mem::size_of::<Impact>() == 120);
const _: () = assert!(core::mem::size_of::<Outcome>() == 32);
const _: () = assert!(core::mem::align_of::<CellState>() == 8);

/// View a slice of records as bytes.
#[inline]
pub fn as_bytes<T: Record>(records: &[T]) -> &[u8] {
    // SAFETY: `Record` guarantees plain data without padding.
    unsafe {
        core::slice::from_raw_parts(records.as_ptr().cast::<u8>(), core::mem::size_of_val(records))
    }
}

/// View a mutable slice of records as bytes.
#[inline]
pub fn as_bytes_mut<T: Record>(records: &mut [T]) -> &mut [u8] {
    // SAFETY: `Record` guarantees that every bit pattern is a valid value.
    unsafe {
        core::slice::from_raw_parts_mut(
            records.as_mut_ptr().cast::<u8>(),
            core::mem::size_of_val(records),
        )
    }
}

/// Records whose fields can be set by name, so that a manifest's reference
/// points can state their inputs as (field, value) pairs.
pub trait NamedFields {
    /// Set the field `name` to `value` (integers are truncated); false if no such field.
    fn set_field(&mut self, name: &str, value: f64) -> bool;
}

impl NamedFields for CellState {
    fn set_field(&mut self, name: &str, v: f64) -> bool {
        match name {
            "cell" => self.cell = v as u32,
            "flags" => self.flags = v as u32,
            "latitude" => self.latitude = v,
            "longitude" => self.longitude = v,
            "local_time" => self.local_time = v,
            "cos_sza" => self.cos_sza = v,
            "temperature" => self.temperature = v,
            "adsorbed" => self.adsorbed = v,
            "bulk_abundance" => self.bulk_abundance = v,
            "helio_distance" => self.helio_distance = v,
            "solar_wind_flux" => self.solar_wind_flux = v,
            "meteoroid_factor" => self.meteoroid_factor = v,
            "time" => self.time = v,
            _ => return false,
        }
        true
    }
}

impl NamedFields for InFlight {
    fn set_field(&mut self, name: &str, v: f64) -> bool {
        match name {
            "altitude" => self.altitude = v,
            "latitude" => self.latitude = v,
            "local_time" => self.local_time = v,
            "speed" => self.speed = v,
            "sun_radial_velocity" => self.sun_radial_velocity = v,
            "helio_distance" => self.helio_distance = v,
            "sunlit_fraction" => self.sunlit_fraction = v,
            "time" => self.time = v,
            _ => return false,
        }
        true
    }
}

impl NamedFields for LaunchRequest {
    fn set_field(&mut self, name: &str, v: f64) -> bool {
        match name {
            "cell" => self.cell = v as u32,
            "flags" => self.flags = v as u32,
            "latitude" => self.latitude = v,
            "longitude" => self.longitude = v,
            "local_time" => self.local_time = v,
            "cos_sza" => self.cos_sza = v,
            "temperature" => self.temperature = v,
            "helio_distance" => self.helio_distance = v,
            "mass" => self.mass = v,
            "time" => self.time = v,
            _ => return false,
        }
        true
    }
}

impl NamedFields for Impact {
    fn set_field(&mut self, name: &str, v: f64) -> bool {
        match name {
            "cell" => self.cell = v as u32,
            "flags" => self.flags = v as u32,
            "latitude" => self.latitude = v,
            "longitude" => self.longitude = v,
            "local_time" => self.local_time = v,
            "cos_sza" => self.cos_sza = v,
            "temperature" => self.temperature = v,
            "adsorbed" => self.adsorbed = v,
            "mass" => self.mass = v,
            "velocity_east" => self.velocity.east = v,
            "velocity_north" => self.velocity.north = v,
            "velocity_up" => self.velocity.up = v,
            "time" => self.time = v,
            _ => return false,
        }
        true
    }
}

//! `ScenarioFile`: the scenario TOML exactly as written, before any checking.
//!
//! Why this exists: the file is deserialised into these plain structs, and
//! only then validated into a [`super::Scenario`] that owns constructed
//! objects. Every struct refuses unknown keys, so a typo is an error that
//! names the key rather than a setting silently ignored. Dimensional values
//! are strings with their unit (`"300 s"`); `docs/scenario.md` lists every
//! key with its unit and default, and the defaults below are the ones it
//! documents.

use serde::{Deserialize, Serialize};

/// The whole scenario file.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ScenarioFile {
    /// A title for plots and provenance.
    #[serde(default)]
    pub title: Option<String>,
    /// Catalog directories searched for `module = "name@version"`, relative
    /// to the scenario file, before those in `$EXOBOUND_CATALOGS`.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub catalogs: Vec<String>,
    /// The airless body.
    pub body: BodySection,
    /// The species followed.
    pub species: SpeciesSection,
    /// Surface grid, temperature, composition and initial reservoir.
    pub surface: SurfaceSection,
    /// Heliocentric distance, solar wind and meteoroids.
    #[serde(default)]
    pub environment: EnvironmentSection,
    /// The process modules, in order.
    #[serde(default)]
    pub processes: Vec<ProcessEntry>,
    /// Time stepping, seed, particle budget, threads, checkpoints.
    pub run: RunSection,
    /// Tally grids, averaging window and products.
    #[serde(default)]
    pub outputs: OutputsSection,
    /// Limits of every module call (fuel, memory cap, wall-time backstop).
    #[serde(default, skip_serializing_if = "SandboxSection::is_empty")]
    pub sandbox: SandboxSection,
}

/// `[sandbox]`: the limits every module call runs under. They decide
/// whether a misbehaving module is stopped, never the results of a healthy
/// run, so a run resumed with other values continues unchanged.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SandboxSection {
    /// Fuel per record of a batch call, wasm fuel units (about one per
    /// instruction; default 1e6).
    #[serde(default)]
    pub fuel_per_record: Option<f64>,
    /// Fuel of every call on top of the per-record share, and of calls
    /// without records, fuel units (default 5e7).
    #[serde(default)]
    pub fuel_per_call: Option<f64>,
    /// Largest linear memory of one module instance, e.g. "64 MiB" (default).
    #[serde(default)]
    pub memory_cap: Option<String>,
    /// Wall-time backstop of one call, e.g. "5 min" (default).
    #[serde(default)]
    pub backstop: Option<String>,
}

impl SandboxSection {
    /// Whether no key is set.
    pub fn is_empty(&self) -> bool {
        *self == SandboxSection::default()
    }
}

/// `[body]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BodySection {
    /// `moon`, `mercury` or `custom`.
    pub name: String,
    /// Custom bodies: GM, e.g. "4902.8 km^3 s^-2".
    #[serde(default)]
    pub gm: Option<String>,
    /// Custom bodies: mean radius, e.g. "1737.4 km".
    #[serde(default)]
    pub radius: Option<String>,
    /// Custom bodies: sidereal rotation period, e.g. "27.32 d".
    #[serde(default)]
    pub sidereal_rotation: Option<String>,
    /// Custom bodies: mean solar day, e.g. "29.53 d".
    #[serde(default)]
    pub solar_day: Option<String>,
    /// Subsolar latitude, e.g. "0 deg" (default).
    #[serde(default)]
    pub subsolar_latitude: Option<String>,
    /// Body-fixed east longitude of the subsolar point at the start, e.g. "0 deg" (default).
    #[serde(default)]
    pub subsolar_longitude: Option<String>,
    /// Custom bodies on an ellipse: semi-major axis, e.g. "0.387 AU".
    #[serde(default)]
    pub semi_major_axis: Option<String>,
    /// Custom bodies on an ellipse: eccentricity, dimensionless, in [0, 1).
    #[serde(default)]
    pub eccentricity: Option<f64>,
    /// Custom bodies on an ellipse: sidereal orbital period, e.g. "87.97 d".
    #[serde(default)]
    pub orbital_period: Option<String>,
    /// Elliptic orbits: true anomaly at the start, e.g. "60 deg" (default "0 deg", perihelion).
    #[serde(default)]
    pub start_true_anomaly: Option<String>,
    /// Mercury: the hot longitude under the Sun at the last perihelion
    /// before the start, "0 deg" (default) or "180 deg".
    #[serde(default)]
    pub perihelion_subsolar_longitude: Option<String>,
    /// The Moon: phase at the start, fraction of the synodic month since
    /// new moon, dimensionless, in [0, 1) (0.5 = full moon).
    #[serde(default)]
    pub start_lunar_phase: Option<f64>,
    /// Tilt of the spin axis from the orbit normal, e.g. "1.54 deg"
    /// (default: none, a fixed subsolar latitude).
    #[serde(default)]
    pub obliquity: Option<String>,
    /// With `obliquity` on an elliptic orbit: true anomaly of the northward
    /// equinox, e.g. "0 deg" (default).
    #[serde(default)]
    pub equinox_true_anomaly: Option<String>,
    /// With `obliquity` at a constant distance: the Sun's orbital longitude
    /// from the northward equinox at the start, e.g. "90 deg" (default "0 deg").
    #[serde(default)]
    pub start_solar_longitude: Option<String>,
}

/// `[species]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SpeciesSection {
    /// `sodium` (or `Na`) or `potassium` (or `K`).
    pub name: String,
    /// A g-factor table file (CSV, relative to the scenario file) for
    /// radiation pressure and brightness (default: the species' built-in table).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub g_factor_table: Option<String>,
}

/// `[surface]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SurfaceSection {
    /// Latitude cells of the surface grid (default 18).
    #[serde(default)]
    pub latitude_cells: Option<usize>,
    /// Longitude cells of the surface grid (default 36).
    #[serde(default)]
    pub longitude_cells: Option<usize>,
    /// Surface temperature law.
    pub temperature: TemperatureSection,
    /// Map of bulk abundance relative to nominal regolith (default: 1 everywhere).
    #[serde(default)]
    pub bulk_map: Option<String>,
    /// Initial adsorbed surface density, uniform, e.g. "1e10 cm^-2" (default "0 cm^-2").
    #[serde(default)]
    pub adsorbed: Option<String>,
    /// Map of the initial adsorbed surface density (replaces `adsorbed`).
    #[serde(default)]
    pub adsorbed_map: Option<String>,
}

/// `[surface.temperature]`: T = T_night + (T_ss - T_night) cos^(1/4)(SZA) by day.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TemperatureSection {
    /// Subsolar temperature at the reference distance, e.g. "390 K".
    pub subsolar: String,
    /// Night-side temperature, e.g. "100 K".
    pub night: String,
    /// Heliocentric distance at which `subsolar` holds (default "1 AU");
    /// elsewhere it scales as r^-1/2.
    #[serde(default)]
    pub reference_distance: Option<String>,
}

/// `[environment]`.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct EnvironmentSection {
    /// A fixed heliocentric distance, e.g. "1 AU"; default: the body's own orbit.
    #[serde(default)]
    pub heliocentric_distance: Option<String>,
    /// Unshielded solar-wind ion flux at 1 AU (default "2e8 cm^-2 s^-1").
    #[serde(default)]
    pub solar_wind_flux: Option<String>,
    /// Intervals that scale the solar-wind flux (0 = shielded).
    #[serde(default)]
    pub solar_wind: Vec<IntervalEntry>,
    /// Meteoroid flux relative to nominal (default 1).
    #[serde(default)]
    pub meteoroid_factor: Option<f64>,
}

/// `[[environment.solar_wind]]`: one interval of the solar-wind schedule.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct IntervalEntry {
    /// Start, time since the run start, e.g. "12 d".
    pub start: String,
    /// End, time since the run start, e.g. "17 d".
    pub end: String,
    /// Multiplier on the unshielded flux, >= 0 (0 = shielded).
    pub factor: f64,
    /// Free text, e.g. "inside the geomagnetic tail".
    #[serde(default)]
    pub note: Option<String>,
}

/// `[[processes]]`: one module.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProcessEntry {
    /// The `.wasm` file (relative to the scenario file), or `standard:NAME`
    /// for a module built with the engine.
    pub module: String,
    /// `source`, `loss`, `surface-interaction` or `reservoir-process`.
    pub role: String,
    /// Parameters: a number with its unit as text ("3e-20 cm^2"), a bare
    /// number for dimensionless ones, or the name of an option.
    #[serde(default)]
    pub parameters: toml::Table,
    /// `true` for a module given by path that is being developed: its
    /// digest is not pinned in `exobound.lock` (default false), and the
    /// run's provenance records it as unlocked.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub unlocked: bool,
}

/// `[run]`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RunSection {
    /// Time step (default "300 s").
    #[serde(default)]
    pub dt: Option<String>,
    /// Simulated duration, including the spin-up, e.g. "29.53 d".
    pub duration: String,
    /// Leading time left out of the averaged products (default "0 s").
    #[serde(default)]
    pub spin_up: Option<String>,
    /// Run seed (default 1).
    #[serde(default)]
    pub seed: Option<u64>,
    /// Super-particles in flight the weights adapt towards (default 100000).
    #[serde(default)]
    pub particles: Option<usize>,
    /// Worker threads, 0 for one per core (default 0).
    #[serde(default)]
    pub threads: Option<usize>,
    /// Checkpoint interval in simulated time, e.g. "1 d" (default: none).
    #[serde(default)]
    pub checkpoint_every: Option<String>,
    /// Integrate with radiation pressure (default true for Mercury, false
    /// for the Moon and a custom body).
    #[serde(default)]
    pub radiation_pressure: Option<bool>,
    /// Outer boundary in body radii (default 20).
    #[serde(default)]
    pub boundary_radii: Option<f64>,
    /// Book atoms launched on unbound paths as escaped at once, so that
    /// they never fly (default false: they fly to the outer boundary).
    #[serde(default)]
    pub remove_unbound_at_launch: Option<bool>,
}

/// `[outputs]`.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OutputsSection {
    /// Altitude bin edges of the density tally (default 0..3000 km, finer near the surface).
    #[serde(default)]
    pub altitude_edges: Option<QuantityList>,
    /// Logarithmically spaced altitude bins added above the last edge, up
    /// to the outer boundary (default 24; 0 for none).
    #[serde(default)]
    pub outer_bins: Option<usize>,
    /// Local-time bins over 24 h (default 24).
    #[serde(default)]
    pub local_time_bins: Option<usize>,
    /// Latitude bins from pole to pole (default 18).
    #[serde(default)]
    pub latitude_bins: Option<usize>,
    /// Averaging window of the time series, e.g. "1 d" (default "1 d").
    #[serde(default)]
    pub window: Option<String>,
    /// Half-width of the equatorial band of the local-time profile (default "10 deg").
    #[serde(default)]
    pub equator_band: Option<String>,
    /// Which products: any of `netcdf`, `csv`, `plots` (default all three).
    #[serde(default)]
    pub products: Option<Vec<String>>,
    /// File format of the plots: `png`, `svg` or `both` (default `png`).
    #[serde(default)]
    pub plot_format: Option<String>,
}

/// A list of numbers sharing one unit: `{ values = [0, 50, 100], unit = "km" }`.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct QuantityList {
    /// The numbers, in `unit`.
    pub values: Vec<f64>,
    /// Their unit.
    pub unit: String,
}

//! Scenarios: the TOML file a modeller writes, checked and turned into the
//! objects the engine runs.
//!
//! Why this exists: a run is described by one file. Parsing is in two
//! phases: the text becomes a [`ScenarioFile`] that mirrors it exactly
//! (unknown keys refused, with the nearest valid key suggested), then
//! [`Scenario`] validates every value (units, ranges, module files, maps)
//! and owns the constructed body, grid, reservoir, modules and settings.
//! Every error names the file and the key, and says how to fix it; no
//! output exists yet when one is raised.

pub mod bounds;
pub mod demo;
pub mod file;
pub mod keys;
pub mod maps;
pub mod orbit;
pub mod quantity;
pub mod sandbox;
pub mod table;

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;

use exobound_sdk::wire::ParamKindInfo;
use exobound_sdk::{ParamValue, Role};

pub use file::ScenarioFile;
use quantity::Kind;

use crate::body::{Body, HelioOrbit};
use crate::engine::{Model, Processes, RunConfig};
use crate::environment::{FluxInterval, SolarWind};
use crate::runtime::Runtime;
use crate::runtime::backend::ModuleHandle;
use crate::species::Species;
use crate::surface::{Grid, Reservoir, TemperatureLaw};

/// A scenario that cannot be used, with a message naming the file, the key
/// and the fix.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct ScenarioError(pub String);

impl std::fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for ScenarioError {}

/// Where the files a scenario names (maps, modules) are found.
#[derive(Clone, Debug, PartialEq)]
pub enum Inputs {
    /// Relative to this directory (the scenario file's own).
    Dir(PathBuf),
    /// The built-in demo: its maps are generated in memory; modules are
    /// `standard:` ones.
    Demo,
}

impl Inputs {
    /// The text of the input file `rel`, or a message naming it.
    fn read(&self, rel: &str) -> Result<String, String> {
        match self {
            Inputs::Dir(d) => {
                let p = d.join(rel);
                std::fs::read_to_string(&p)
                    .map_err(|e| format!("cannot read the map file `{}`: {e}", p.display()))
            }
            Inputs::Demo => demo::input(rel)
                .ok_or_else(|| format!("the built-in demo has no input file `{rel}`")),
        }
    }
}

/// Where the bytes of a module came from.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ModuleOrigin {
    /// A `.wasm` file: a path, a catalog's stored file, or a standard
    /// module taken from `$EXOBOUND_MODULE_DIR`.
    File(PathBuf),
    /// The standard module of this name embedded in the binary.
    Embedded(String),
}

impl ModuleOrigin {
    /// The prefix of [`ModuleOrigin::Embedded`] in records (`embedded:NAME`).
    pub const EMBEDDED_PREFIX: &'static str = "embedded:";

    /// The file, if the module came from one.
    pub fn file(&self) -> Option<&Path> {
        match self {
            ModuleOrigin::File(p) => Some(p),
            ModuleOrigin::Embedded(_) => None,
        }
    }
}

impl std::fmt::Display for ModuleOrigin {
    /// The file's path, or `embedded:NAME` (the form provenance records).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            ModuleOrigin::File(p) => write!(f, "{}", p.display()),
            ModuleOrigin::Embedded(n) => write!(f, "{}{n}", ModuleOrigin::EMBEDDED_PREFIX),
        }
    }
}

/// A process module as the scenario uses it.
#[derive(Clone, Debug)]
pub struct ModuleUse {
    /// Position in the `[[processes]]` list, from 0.
    pub index: usize,
    /// The role it plays here.
    pub role: Role,
    /// The `module` key as written.
    pub spec: String,
    /// Where its bytes came from: the resolved `.wasm` file, or the binary.
    pub origin: ModuleOrigin,
    /// Whether the scenario marks it `unlocked`: a module given by path
    /// that is being developed, whose digest `exobound.lock` does not pin.
    pub unlocked: bool,
    /// Manifest name.
    pub name: String,
    /// Manifest version.
    pub version: String,
    /// SHA-256 of the file, hex.
    pub sha256: String,
    /// Parameters as passed to the module, each in the manifest's unit.
    pub parameters: BTreeMap<String, ParamValue>,
    /// Every table parameter of the module and the table it used (given
    /// inline, from a file, or the module's default).
    pub tables: Vec<table::TableUse>,
    /// The configured module.
    pub handle: ModuleHandle,
}

/// Which output products to write.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Products {
    /// `exosphere.nc`.
    pub netcdf: bool,
    /// `ledger.csv` and `profiles/*.csv`.
    pub csv: bool,
    /// `plots/*.png` (or `.svg`, by `plot_format`).
    pub plots: bool,
    /// File format of the plots.
    pub plot_format: PlotFormat,
}

/// File format of a run's plots (`outputs.plot_format`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PlotFormat {
    /// PNG only (the default).
    Png,
    /// SVG only: shapes as vectors, text as text.
    Svg,
    /// Each plot as PNG and as SVG.
    Both,
}

impl PlotFormat {
    /// The scenario spellings, in the order of the variants.
    pub const NAMES: [&'static str; 3] = ["png", "svg", "both"];

    /// The file extensions each plot is written with.
    pub fn extensions(self) -> &'static [&'static str] {
        match self {
            PlotFormat::Png => &["png"],
            PlotFormat::Svg => &["svg"],
            PlotFormat::Both => &["png", "svg"],
        }
    }
}

/// Time plan and products of a run.
#[derive(Clone, Debug, PartialEq)]
pub struct RunPlan {
    /// Steps in the whole run, including spin-up.
    pub steps: u64,
    /// Steps of spin-up, left out of the averaged products.
    pub spin_up_steps: u64,
    /// Steps per averaging window of the time series.
    pub window_steps: u64,
    /// Steps between checkpoints, if any.
    pub checkpoint_steps: Option<u64>,
    /// Half-width of the equatorial band of the local-time profile, rad.
    pub equator_band: f64,
    /// Products to write.
    pub products: Products,
}

/// A validated scenario: everything the engine needs, constructed.
#[derive(Clone, Debug)]
pub struct Scenario {
    /// Title for plots and provenance.
    pub title: String,
    /// Where the scenario came from (a path, or "built-in demo").
    pub origin: String,
    /// The file's text as read.
    pub text: String,
    /// The `KEY=VALUE` settings applied on top of the file.
    pub overrides: Vec<String>,
    /// The file after the overrides, as resolved.
    pub file: ScenarioFile,
    /// The physical setting.
    pub model: Model,
    /// The modules by role.
    pub processes: Processes,
    /// The modules in file order, with their digests.
    pub modules: Vec<ModuleUse>,
    /// Numerical settings.
    pub config: RunConfig,
    /// Time plan and products.
    pub plan: RunPlan,
}

impl Scenario {
    /// Load the scenario file at `path`, apply `overrides` (`KEY=VALUE`),
    /// and validate it, loading its modules into `runtime`.
    pub fn load(
        path: &Path,
        overrides: &[String],
        runtime: &Arc<Runtime>,
    ) -> Result<Scenario, ScenarioError> {
        let text = std::fs::read_to_string(path).map_err(|e| {
            ScenarioError(format!("cannot read the scenario file `{}`: {e}", path.display()))
        })?;
        let dir = path.parent().map(Path::to_path_buf).unwrap_or_default();
        let dir = if dir.as_os_str().is_empty() { PathBuf::from(".") } else { dir };
        Scenario::from_text(
            &text,
            &path.display().to_string(),
            Inputs::Dir(dir),
            overrides,
            runtime,
        )
    }

    /// The built-in demo (quick or full), with `overrides`.
    pub fn demo(
        quick: bool,
        overrides: &[String],
        runtime: &Arc<Runtime>,
    ) -> Result<Scenario, ScenarioError> {
        let text = demo::scenario_text(quick);
        let origin = if quick { "built-in demo (quick)" } else { "built-in demo" };
        Scenario::from_text(&text, origin, Inputs::Demo, overrides, runtime)
    }

    /// Parse, override and validate scenario `text`; `origin` names it in messages.
    pub fn from_text(
        text: &str,
        origin: &str,
        inputs: Inputs,
        overrides: &[String],
        runtime: &Arc<Runtime>,
    ) -> Result<Scenario, ScenarioError> {
        let max_manifest = runtime.config().max_manifest;
        let names = |spec: &str| manifest_name(&inputs, spec, max_manifest);
        let file = keys::parse_file_named(text, origin, overrides, &names)?;
        let v = Validator { origin, inputs: &inputs };
        v.build(file, text, overrides, runtime)
    }
}

/// The manifest name of the module a `module` key names (`None` when it
/// cannot be read), for selecting a process by name in an override. A
/// catalog reference is taken at its word; the checks come later.
fn manifest_name(inputs: &Inputs, spec: &str, max_manifest: usize) -> Option<String> {
    if let Some((name, _)) = crate::share::catalog::parse_ref(spec) {
        return Some(name.to_string());
    }
    let bytes = match spec.strip_prefix("standard:") {
        Some(name) => match crate::standard::find(name).ok()? {
            crate::standard::Found::Embedded(b) => b.to_vec(),
            crate::standard::Found::File(p) => std::fs::read(p).ok()?,
        },
        None => match inputs {
            Inputs::Dir(d) => std::fs::read(d.join(spec)).ok()?,
            Inputs::Demo => std::fs::read(spec).ok()?,
        },
    };
    let header = crate::runtime::module::read_header(spec, &bytes, max_manifest).ok()?;
    Some(header.manifest.name)
}

struct Validator<'a> {
    origin: &'a str,
    inputs: &'a Inputs,
}

impl Validator<'_> {
    fn err(&self, key: &str, msg: impl std::fmt::Display) -> ScenarioError {
        // Messages may quote a module's manifest (choices, units): escape
        // its control characters here, where every refusal passes.
        let text = format!("{}: {key}: {msg}", self.origin);
        ScenarioError(crate::text::printable_lines(&text).into_owned())
    }

    fn q(&self, key: &str, text: &str, kind: Kind) -> Result<f64, ScenarioError> {
        quantity::parse(text, kind).map_err(|m| self.err(key, m))
    }

    fn q_or(
        &self,
        key: &str,
        text: &Option<String>,
        default: &str,
        kind: Kind,
    ) -> Result<f64, ScenarioError> {
        self.q(key, text.as_deref().unwrap_or(default), kind)
    }

    fn positive(&self, key: &str, x: f64, unit: &str) -> Result<f64, ScenarioError> {
        if x > 0.0 && x.is_finite() {
            Ok(x)
        } else {
            Err(self.err(key, format!("must be positive, got {x} {unit}")))
        }
    }

    fn build(
        &self,
        file: ScenarioFile,
        text: &str,
        overrides: &[String],
        runtime: &Arc<Runtime>,
    ) -> Result<Scenario, ScenarioError> {
        let body = self.body(&file)?;
        let species = match file.species.name.to_ascii_lowercase().as_str() {
            "sodium" | "na" => Species::sodium(),
            "potassium" | "k" => Species::potassium(),
            other => {
                return Err(self.err(
                    "species.name",
                    format!("unknown species `{other}`; use `sodium` or `potassium`"),
                ));
            }
        };
        let species = self.g_factor_table(&file, species)?;
        let s = &file.surface;
        let n_lat = s.latitude_cells.unwrap_or(18);
        let n_lon = s.longitude_cells.unwrap_or(36);
        if !(2..=720).contains(&n_lat) || !(2..=1440).contains(&n_lon) {
            return Err(self.err(
                "surface.latitude_cells / longitude_cells",
                format!("{n_lat} x {n_lon} cells; use 2-720 latitude and 2-1440 longitude cells"),
            ));
        }
        let grid = Grid::new(n_lat, n_lon, body.radius)
            .ok_or_else(|| self.err("surface", "cannot build the surface grid"))?;
        let t = &s.temperature;
        let temperature = TemperatureLaw {
            subsolar: self.temperature("surface.temperature.subsolar", &t.subsolar)?,
            night: self.temperature("surface.temperature.night", &t.night)?,
            reference_distance: self.helio_distance(
                "surface.temperature.reference_distance",
                t.reference_distance.as_deref().unwrap_or("1 AU"),
            )?,
        };
        if temperature.night > temperature.subsolar {
            return Err(self.err(
                "surface.temperature",
                format!(
                    "night = {} K exceeds subsolar = {} K",
                    temperature.night, temperature.subsolar
                ),
            ));
        }
        let reservoir = self.reservoir(s, &grid)?;
        let sun = self.sun(&file.body, &body)?;
        let e = &file.environment;
        let flux = self.within(
            "environment.solar_wind_flux",
            self.q_or(
                "environment.solar_wind_flux",
                &e.solar_wind_flux,
                "2e8 cm^-2 s^-1",
                Kind::Flux,
            )?,
            bounds::SOLAR_WIND_FLUX,
            "cm^-2 s^-1",
            "it is the unshielded flux at 1 AU, observed to be about 1e8 to 1e9 cm^-2 s^-1 \
             (default 2e8); scale it in time with [[environment.solar_wind]] factors",
        )?;
        let mut schedule = Vec::new();
        for (i, iv) in e.solar_wind.iter().enumerate() {
            let key = format!("environment.solar_wind[{i}]");
            // quantity::parse gives finite values only.
            let start = self.q(&format!("{key}.start"), &iv.start, Kind::Time)?;
            let end = self.q(&format!("{key}.end"), &iv.end, Kind::Time)?;
            if !(end > start) {
                return Err(
                    self.err(&key, format!("end ({end} s) must come after start ({start} s)"))
                );
            }
            let factor = self.within(
                &format!("{key}.factor"),
                iv.factor,
                bounds::FACTOR,
                "",
                "it multiplies environment.solar_wind_flux: 0 for shielded, 1 for nominal",
            )?;
            schedule.push(FluxInterval { start, end, factor });
        }
        let meteoroid_factor = self.within(
            "environment.meteoroid_factor",
            e.meteoroid_factor.unwrap_or(1.0),
            bounds::FACTOR,
            "",
            "it is the meteoroid flux relative to nominal: 1 for the nominal flux",
        )?;
        let model = Model {
            body,
            species,
            grid,
            temperature,
            sun,
            reservoir,
            solar_wind: SolarWind { flux, schedule },
            meteoroid_factor,
        };
        let modules = self.modules(&file, runtime)?;
        let processes = self.processes(&modules)?;
        let (config, plan) = self.settings(&file, &model.body)?;
        Ok(Scenario {
            title: file.title.clone().unwrap_or_else(|| "exobound run".to_string()),
            origin: self.origin.to_string(),
            text: text.to_string(),
            overrides: overrides.to_vec(),
            file,
            model,
            processes,
            modules,
            config,
            plan,
        })
    }

    /// `species` with the table `species.g_factor_table` names, if any:
    /// read relative to the scenario's directory, checked against the
    /// species' lines; errors name the file, its line and column, and the key.
    fn g_factor_table(
        &self,
        file: &ScenarioFile,
        species: Species,
    ) -> Result<Species, ScenarioError> {
        const KEY: &str = "species.g_factor_table";
        let Some(rel) = &file.species.g_factor_table else {
            return Ok(species);
        };
        let path = match self.inputs {
            Inputs::Dir(d) => d.join(rel),
            Inputs::Demo => {
                return Err(self.err(
                    KEY,
                    "the built-in demo has no table files; write the scenario to a file \
                     (`exobound demo --write DIR`) and put the table beside it",
                ));
            }
        };
        let table = crate::radiation::GFactorTable::read(&path).map_err(|e| self.err(KEY, e))?;
        species.with_g_factor_table(table).map_err(|e| self.err(KEY, e))
    }

    fn body(&self, file: &ScenarioFile) -> Result<Body, ScenarioError> {
        let b = &file.body;
        let mut body = match b.name.to_ascii_lowercase().as_str() {
            "moon" => Body::moon(),
            "mercury" => Body::mercury(),
            "custom" => {
                let need = |k: &str, v: &Option<String>| {
                    v.clone().ok_or_else(|| {
                        self.err(&format!("body.{k}"), "a custom body needs this key")
                    })
                };
                let gm = self.q("body.gm", &need("gm", &b.gm)?, Kind::GravParameter)?;
                let radius = self.q("body.radius", &need("radius", &b.radius)?, Kind::Length)?;
                let rot = self.q(
                    "body.sidereal_rotation",
                    &need("sidereal_rotation", &b.sidereal_rotation)?,
                    Kind::Time,
                )?;
                self.positive("body.gm", gm, "m^3 s^-2")?;
                self.positive("body.radius", radius, "m")?;
                self.positive("body.sidereal_rotation", rot, "s")?;
                let orbit = self.custom_orbit(b)?;
                let day = match orbit.and_then(|o| o.period_s()) {
                    // On an ellipse the mean solar day follows from the two
                    // periods (synodic relation 1/P_sol = 1/P_sid - 1/P_orb);
                    // infinite for a spin locked to the orbit, negative if
                    // the Sun moves east.
                    Some(p_orb) => {
                        if b.solar_day.is_some() {
                            return Err(self.err(
                                "body.solar_day",
                                "on an elliptic orbit the mean solar day follows from                                  sidereal_rotation and orbital_period (1/P_sol = 1/P_sid -                                  1/P_orb); remove the key",
                            ));
                        }
                        1.0 / (1.0 / rot - 1.0 / p_orb)
                    }
                    None => {
                        let day = self.q(
                            "body.solar_day",
                            &need("solar_day", &b.solar_day)?,
                            Kind::Time,
                        )?;
                        self.positive("body.solar_day", day, "s")?
                    }
                };
                Body::custom(
                    "custom",
                    gm,
                    radius,
                    rot,
                    day,
                    orbit.unwrap_or(HelioOrbit::Constant { distance_au: 1.0 }),
                )
            }
            other => {
                return Err(self.err(
                    "body.name",
                    format!("unknown body `{other}`; use `moon`, `mercury` or `custom`"),
                ));
            }
        };
        if !b.name.eq_ignore_ascii_case("custom") {
            for (k, v) in [
                ("gm", &b.gm),
                ("radius", &b.radius),
                ("sidereal_rotation", &b.sidereal_rotation),
                ("solar_day", &b.solar_day),
                ("semi_major_axis", &b.semi_major_axis),
                ("orbital_period", &b.orbital_period),
                ("eccentricity", &b.eccentricity.map(|e| e.to_string())),
            ] {
                if v.is_some() {
                    return Err(self.err(
                        &format!("body.{k}"),
                        format!("only a custom body takes `{k}`; set body.name = \"custom\" or remove it"),
                    ));
                }
            }
        }
        if let Some(d) = &file.environment.heliocentric_distance {
            if b.semi_major_axis.is_some() {
                return Err(self.err(
                    "environment.heliocentric_distance",
                    "the custom body already has an elliptic orbit (body.semi_major_axis,                      eccentricity, orbital_period); give either that orbit or a constant                      distance, not both",
                ));
            }
            let r = self.helio_distance("environment.heliocentric_distance", d)?;
            body.orbit = HelioOrbit::Constant { distance_au: r };
        }
        self.start_on_orbit(b, &mut body)?;
        Ok(body)
    }

    fn reservoir(&self, s: &file::SurfaceSection, grid: &Grid) -> Result<Reservoir, ScenarioError> {
        let adsorbed =
            self.q_or("surface.adsorbed", &s.adsorbed, "0 cm^-2", Kind::SurfaceDensity)?;
        if !(adsorbed >= 0.0) {
            return Err(self.err("surface.adsorbed", "must not be negative"));
        }
        let mut r = Reservoir::uniform(grid, adsorbed);
        let centres_deg = |c: usize| {
            let (lat, lon) = grid.centre(c);
            (lat.to_degrees(), lon.to_degrees().rem_euclid(360.0))
        };
        if let Some(rel) = &s.bulk_map {
            let m = self.map("surface.bulk_map", rel, "bulk_abundance", "1")?;
            for c in 0..grid.len() {
                let (lat, lon) = centres_deg(c);
                r.bulk_abundance[c] = m.at(lat, lon);
            }
        }
        if let Some(rel) = &s.adsorbed_map {
            if s.adsorbed.is_some() {
                return Err(self.err(
                    "surface.adsorbed_map",
                    "give either `adsorbed` or `adsorbed_map`, not both",
                ));
            }
            let m = self.map("surface.adsorbed_map", rel, "adsorbed_density", "cm^-2")?;
            for c in 0..grid.len() {
                let (lat, lon) = centres_deg(c);
                r.adsorbed[c] = m.at(lat, lon) * grid.area_cm2(c);
            }
        }
        Ok(r)
    }

    fn map(
        &self,
        key: &str,
        rel: &str,
        quantity: &str,
        unit: &str,
    ) -> Result<maps::SurfaceMap, ScenarioError> {
        let text = self.inputs.read(rel).map_err(|m| self.err(key, m))?;
        let shown = match self.inputs {
            Inputs::Dir(d) => d.join(rel).display().to_string(),
            Inputs::Demo => rel.to_string(),
        };
        maps::parse(&text, &shown, quantity, unit).map_err(|m| self.err(key, m))
    }

    /// The file a path-given `module` key names, relative to the scenario.
    fn module_path(&self, spec: &str) -> PathBuf {
        match self.inputs {
            Inputs::Dir(d) => d.join(spec),
            Inputs::Demo => PathBuf::from(spec),
        }
    }

    /// The scenario's `catalogs`, relative to its directory.
    fn catalog_dirs(&self, file: &ScenarioFile) -> Vec<PathBuf> {
        file.catalogs
            .iter()
            .map(|c| match self.inputs {
                Inputs::Dir(d) => d.join(c),
                Inputs::Demo => PathBuf::from(c),
            })
            .collect()
    }

    fn modules(
        &self,
        file: &ScenarioFile,
        runtime: &Arc<Runtime>,
    ) -> Result<Vec<ModuleUse>, ScenarioError> {
        let mut out = Vec::new();
        let limits = sandbox::limits(&file.sandbox).map_err(|m| self.err("[sandbox]", m))?;
        for (i, entry) in file.processes.iter().enumerate() {
            let key = format!("processes[{i}]");
            let role = Role::parse(&entry.role).ok_or_else(|| {
                self.err(
                    &format!("{key}.role"),
                    format!(
                        "unknown role `{}`; use source, loss, surface-interaction or reservoir-process",
                        entry.role
                    ),
                )
            })?;
            let module_key = format!("{key}.module");
            let catalog_ref = crate::share::catalog::parse_ref(&entry.module);
            let standard = entry.module.strip_prefix("standard:");
            if entry.unlocked && (catalog_ref.is_some() || standard.is_some()) {
                return Err(self.err(
                    &format!("{key}.unlocked"),
                    format!(
                        "only a module given by path can be unlocked; `{}` is a {} module, \
                         whose digest exobound.lock always pins. Remove `unlocked = true`, or \
                         name your development copy by its path (e.g. module = \"my-law.wasm\")",
                        entry.module,
                        if standard.is_some() { "standard" } else { "catalog" }
                    ),
                ));
            }
            let origin = match (catalog_ref, standard) {
                (Some((name, version)), _) => ModuleOrigin::File(
                    crate::share::catalog::resolve(
                        name,
                        version,
                        &crate::share::catalog::search_path(&self.catalog_dirs(file)),
                    )
                    .map_err(|e| self.err(&module_key, e))?,
                ),
                (None, Some(name)) => match crate::standard::find(name) {
                    Ok(crate::standard::Found::File(p)) => ModuleOrigin::File(p),
                    Ok(crate::standard::Found::Embedded(_)) => ModuleOrigin::Embedded(name.into()),
                    Err(e) => return Err(self.err(&module_key, e)),
                },
                (None, None) => ModuleOrigin::File(self.module_path(&entry.module)),
            };
            let loaded = match &origin {
                ModuleOrigin::File(path) => {
                    if !path.is_file() {
                        return Err(self.err(
                            &module_key,
                            format!(
                                "module file `{}` not found (paths are relative to the scenario \
                                 file)",
                                path.display()
                            ),
                        ));
                    }
                    runtime
                        .load(path)
                        .map_err(|e| self.err(&module_key, format!("`{}`: {e}", path.display())))?
                }
                ModuleOrigin::Embedded(name) => {
                    let bytes = crate::standard::embedded(name).unwrap_or_default();
                    runtime
                        .load_bytes(&format!("{name}.wasm (embedded)"), bytes)
                        .map_err(|e| self.err(&module_key, format!("`{origin}`: {e}")))?
                }
            };
            let info = loaded.manifest().clone();
            let label = format!("{key} ({})", info.name);
            if !info.has_role(role) {
                return Err(self.err(
                    &format!("{key}.role"),
                    format!(
                        "module `{}` does not implement the role `{}`; it declares: {}",
                        info.name,
                        role.as_str(),
                        info.roles.join(", ")
                    ),
                ));
            }
            let (parameters, tables) =
                self.parameters(&label, &entry.parameters, &info.parameters)?;
            let handle =
                ModuleHandle::wasm(runtime.clone(), loaded.clone(), parameters.clone(), limits)
                    .map_err(|e| self.err(&format!("{label}.parameters"), e))?;
            out.push(ModuleUse {
                index: i,
                role,
                spec: entry.module.clone(),
                origin,
                unlocked: entry.unlocked,
                name: info.name.clone(),
                version: info.version.clone(),
                sha256: loaded.sha256().to_string(),
                parameters,
                tables,
                handle,
            });
        }
        Ok(out)
    }

    /// The parameters given for a module, checked against its `schema`,
    /// and the tables its table parameters use.
    fn parameters(
        &self,
        label: &str,
        given: &toml::Table,
        schema: &[exobound_sdk::wire::ParamInfo],
    ) -> Result<(BTreeMap<String, ParamValue>, Vec<table::TableUse>), ScenarioError> {
        let mut out = BTreeMap::new();
        let mut tables = Vec::new();
        for p in schema {
            let Some(spec) = &p.table else { continue };
            let key = format!("{label}.parameters.{}", p.name);
            match (given.get(&p.name), &p.default) {
                (Some(value), _) => {
                    let dir = match self.inputs {
                        Inputs::Dir(d) => Some(d.as_path()),
                        Inputs::Demo => None,
                    };
                    let g =
                        table::given(&p.name, spec, value, dir).map_err(|m| self.err(&key, m))?;
                    out.insert(p.name.clone(), ParamValue::Table(g.columns));
                    tables.push(g.record);
                }
                (None, Some(ParamValue::Table(d))) => {
                    tables.push(table::default_use(&p.name, spec, d));
                }
                (None, _) => {
                    return Err(self.err(
                        &key,
                        format!(
                            "the module's table `{}` has no default; give one: {} = {{ file = \
                             \"TABLE.csv\" }} with the header `{}`",
                            p.name,
                            p.name,
                            spec.header()
                        ),
                    ));
                }
            }
        }
        for (name, value) in given {
            let key = format!("{label}.parameters.{name}");
            let Some(p) = schema.iter().find(|p| &p.name == name) else {
                let names: Vec<&str> = schema.iter().map(|p| p.name.as_str()).collect();
                return Err(self.err(&key, keys::unknown_message(name, &names, "parameter")));
            };
            let unit = quantity::normalise_unit(&p.unit);
            let dimensionless = unit.is_empty() || unit == "1";
            let v = match (p.kind(), value) {
                // Read above, with the file and row of any fault.
                (ParamKindInfo::Table, _) => continue,
                (ParamKindInfo::Choice, toml::Value::String(s)) => ParamValue::Text(s.clone()),
                (ParamKindInfo::Choice, other) => {
                    return Err(self.err(
                        &key,
                        format!("`{other}` is not an option; use one of {}", p.choices.join(", ")),
                    ));
                }
                (ParamKindInfo::Number, toml::Value::String(s)) => {
                    let Some((x, u)) = quantity::split(s) else {
                        return Err(self.err(&key, format!("`{s}` is not a number with a unit")));
                    };
                    if u != unit && !(dimensionless && u.is_empty()) {
                        return Err(self.err(
                            &key,
                            format!(
                                "unit `{u}` does not match the module's unit `{}`; write the value in `{}`",
                                p.unit, p.unit
                            ),
                        ));
                    }
                    ParamValue::Number(x)
                }
                (ParamKindInfo::Number, toml::Value::Float(x)) if dimensionless => {
                    ParamValue::Number(*x)
                }
                (ParamKindInfo::Number, toml::Value::Integer(x)) if dimensionless => {
                    ParamValue::Number(*x as f64)
                }
                (ParamKindInfo::Number, toml::Value::Float(_) | toml::Value::Integer(_)) => {
                    return Err(self.err(
                        &key,
                        format!(
                            "give the unit: {name} = \"{value} {}\" (the module's unit is `{}`)",
                            p.unit, p.unit
                        ),
                    ));
                }
                (ParamKindInfo::Number, other) => {
                    return Err(self.err(&key, format!("`{other}` is not a number")));
                }
            };
            out.insert(name.clone(), v);
        }
        Ok((out, tables))
    }

    fn processes(&self, modules: &[ModuleUse]) -> Result<Processes, ScenarioError> {
        let by = |r: Role| modules.iter().filter(move |m| m.role == r).map(|m| m.handle.clone());
        let surfaces: Vec<ModuleHandle> = by(Role::SurfaceInteraction).collect();
        if surfaces.len() != 1 {
            return Err(self.err(
                "processes",
                format!(
                    "exactly one module must have role = \"surface-interaction\"; found {}",
                    surfaces.len()
                ),
            ));
        }
        let sources: Vec<ModuleHandle> = by(Role::Source).collect();
        if sources.is_empty() {
            return Err(self.err("processes", "at least one module must have role = \"source\""));
        }
        Ok(Processes {
            sources,
            losses: by(Role::Loss).collect(),
            surface: surfaces[0].clone(),
            reservoir: by(Role::ReservoirProcess).collect(),
        })
    }

    fn settings(
        &self,
        file: &ScenarioFile,
        body: &Body,
    ) -> Result<(RunConfig, RunPlan), ScenarioError> {
        let r = &file.run;
        let o = &file.outputs;
        let mut c = RunConfig::for_body(body);
        // The time step first, so that a bad one is blamed on run.dt and
        // not on the step counts derived from it.
        c.dt = self.within(
            "run.dt",
            self.q_or("run.dt", &r.dt, "300 s", Kind::Time)?,
            bounds::DT_S,
            "s",
            "choose a time step between 1 s and 1e6 s (11.6 d), e.g. \"600 s\"",
        )?;
        let duration =
            self.positive("run.duration", self.q("run.duration", &r.duration, Kind::Time)?, "s")?;
        if c.dt > duration {
            return Err(self.err(
                "run.dt",
                format!(
                    "{} s is longer than run.duration = {} s, so the run would have no step; \
                     lower run.dt or lengthen run.duration",
                    bounds::shown(c.dt),
                    bounds::shown(duration)
                ),
            ));
        }
        // At least 1, as dt <= duration; checked against the cap before
        // the conversion to an integer.
        let steps = (duration / c.dt).round();
        if !(steps <= bounds::MAX_STEPS as f64) {
            return Err(ScenarioError(format!(
                "{}: run.duration / run.dt gives {} steps; at most {} are allowed; \
                 raise run.dt or shorten run.duration",
                self.origin,
                if steps < 1.0e15 { format!("{steps}") } else { bounds::shown(steps) },
                bounds::MAX_STEPS
            )));
        }
        let steps = steps as u64;
        // Every time below lies in [0, duration], so its count of steps
        // lies in [0, steps].
        let steps_of = |t: f64| (t / c.dt).round() as u64;
        let spin_up = self.q_or("run.spin_up", &r.spin_up, "0 s", Kind::Time)?;
        if !(spin_up >= 0.0 && spin_up < duration) || steps_of(spin_up) >= steps {
            return Err(self.err(
                "run.spin_up",
                format!(
                    "{} s is outside the allowed range [0, run.duration) = [0, {} s), \
                     counted in whole steps of run.dt = {} s with at least one step left after it; \
                     shorten run.spin_up (it is part of run.duration) or lengthen run.duration",
                    bounds::shown(spin_up),
                    bounds::shown(duration),
                    bounds::shown(c.dt)
                ),
            ));
        }
        let spin_up_steps = steps_of(spin_up);
        c.seed = r.seed.unwrap_or(1);
        c.target_in_flight = r.particles.unwrap_or(100_000);
        if !(100..=100_000_000).contains(&c.target_in_flight) {
            return Err(self.err(
                "run.particles",
                format!(
                    "{} particles is outside the allowed range 100 to 100000000; \
                     use between 100 and 100000000 particles",
                    c.target_in_flight
                ),
            ));
        }
        let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
        let max_threads = bounds::THREADS_PER_CORE * cores;
        c.threads = match r.threads.unwrap_or(0) {
            0 => cores,
            n if n <= max_threads => n,
            n => {
                return Err(self.err(
                    "run.threads",
                    format!(
                        "{n} threads is outside the allowed range 0 to {max_threads} \
                         ({} per core on this machine's {cores} cores); use 0 for one per core, \
                         or fewer threads: results do not depend on the thread count",
                        bounds::THREADS_PER_CORE
                    ),
                ));
            }
        };
        // On by default where it matters: for sodium at Mercury the push
        // reaches about half of the surface gravity; at the Moon a few per
        // cent, and the closed-form hops are far cheaper.
        c.radiation_pressure =
            r.radiation_pressure.unwrap_or(file.body.name.eq_ignore_ascii_case("mercury"));
        c.escape_when_unbound = r.remove_unbound_at_launch.unwrap_or(false);
        let radii = r.boundary_radii.unwrap_or(20.0);
        if !(radii > 1.0 && radii <= bounds::BOUNDARY_RADII_MAX) {
            return Err(self.err(
                "run.boundary_radii",
                format!(
                    "{} body radii is outside the allowed range (1, {}] body radii; \
                     the default is 20",
                    bounds::shown(radii),
                    bounds::shown(bounds::BOUNDARY_RADII_MAX)
                ),
            ));
        }
        c.boundary_radius = radii * body.radius;
        let whole_steps = format!(
            "[run.dt, run.duration] = [{} s, {} s]",
            bounds::shown(c.dt),
            bounds::shown(duration)
        );
        let checkpoint_steps = match &r.checkpoint_every {
            None => None,
            Some(t) => {
                let every = self.within(
                    "run.checkpoint_every",
                    self.q("run.checkpoint_every", t, Kind::Time)?,
                    c.dt..=duration,
                    "s",
                    &format!(
                        "checkpoints fall on whole steps within the run: give a time in \
                         {whole_steps}, or leave the key out for no periodic checkpoints"
                    ),
                )?;
                Some(steps_of(every).max(1))
            }
        };
        c.alt_edges = match &o.altitude_edges {
            None => DEFAULT_ALTITUDE_EDGES_KM.iter().map(|k| k * 1.0e3).collect(),
            Some(list) => {
                let f = quantity::parse(&format!("1 {}", list.unit), Kind::Length)
                    .map_err(|m| self.err("outputs.altitude_edges.unit", m))?;
                list.values.iter().map(|v| v * f).collect()
            }
        };
        if c.alt_edges.len() < 2
            || c.alt_edges[0] < 0.0
            || c.alt_edges.windows(2).any(|w| !(w[1] > w[0]))
            || c.alt_edges.iter().any(|e| !e.is_finite())
        {
            return Err(self.err(
                "outputs.altitude_edges",
                "need at least two finite edges, increasing from >= 0",
            ));
        }
        let outer = o.outer_bins.unwrap_or(DEFAULT_OUTER_BINS);
        if outer > MAX_OUTER_BINS {
            return Err(self.err(
                "outputs.outer_bins",
                format!(
                    "{outer} bins is more than {MAX_OUTER_BINS}; the default is \
                     {DEFAULT_OUTER_BINS}, and 0 leaves the grid at the last altitude edge"
                ),
            ));
        }
        c.alt_edges = with_outer_bins(&c.alt_edges, c.boundary_radius - body.radius, outer);
        c.n_local_time = o.local_time_bins.unwrap_or(24);
        c.n_latitude = o.latitude_bins.unwrap_or(18);
        if !(4..=1440).contains(&c.n_local_time) || !(2..=720).contains(&c.n_latitude) {
            return Err(self.err(
                "outputs.local_time_bins / latitude_bins",
                "use 4-1440 local-time bins and 2-720 latitude bins",
            ));
        }
        let window = match &o.window {
            Some(w) => self.within(
                "outputs.window",
                self.q("outputs.window", w, Kind::Time)?,
                c.dt..=duration,
                "s",
                &format!("an averaging window spans whole steps: give a time in {whole_steps}"),
            )?,
            // The default, one day, shortened to the run or lengthened to one step.
            None => 86_400.0f64.min(duration).max(c.dt),
        };
        let window_steps = steps_of(window).max(1);
        let band = self.q_or("outputs.equator_band", &o.equator_band, "10 deg", Kind::Angle)?;
        if !(band > 0.0 && band < core::f64::consts::FRAC_PI_2) {
            return Err(self.err("outputs.equator_band", "must lie in (0, 90) deg"));
        }
        let names = o
            .products
            .clone()
            .unwrap_or_else(|| vec!["netcdf".to_string(), "csv".to_string(), "plots".to_string()]);
        let plot_format = match o.plot_format.as_deref().unwrap_or("png") {
            "png" => PlotFormat::Png,
            "svg" => PlotFormat::Svg,
            "both" => PlotFormat::Both,
            other => {
                return Err(self.err(
                    "outputs.plot_format",
                    keys::unknown_message(other, &PlotFormat::NAMES, "plot format"),
                ));
            }
        };
        let mut products = Products { netcdf: false, csv: false, plots: false, plot_format };
        for n in &names {
            match n.as_str() {
                "netcdf" => products.netcdf = true,
                "csv" => products.csv = true,
                "plots" => products.plots = true,
                other => {
                    return Err(self.err(
                        "outputs.products",
                        keys::unknown_message(other, &["netcdf", "csv", "plots"], "product"),
                    ));
                }
            }
        }
        Ok((
            c,
            RunPlan {
                steps,
                spin_up_steps,
                window_steps,
                checkpoint_steps,
                equator_band: band,
                products,
            },
        ))
    }

    /// `x` (in `unit`, "" if dimensionless) if it lies in `range`, else a
    /// message naming `key`, the value, the range and `fix`.
    fn within(
        &self,
        key: &str,
        x: f64,
        range: std::ops::RangeInclusive<f64>,
        unit: &str,
        fix: &str,
    ) -> Result<f64, ScenarioError> {
        if range.contains(&x) {
            return Ok(x);
        }
        let u = if unit.is_empty() { String::new() } else { format!(" {unit}") };
        Err(self.err(
            key,
            format!(
                "{}{u} is outside the allowed range [{}, {}]{u}; {fix}",
                bounds::shown(x),
                bounds::shown(*range.start()),
                bounds::shown(*range.end())
            ),
        ))
    }

    /// A surface temperature at `key`, K, within [`bounds::TEMPERATURE_K`].
    fn temperature(&self, key: &str, text: &str) -> Result<f64, ScenarioError> {
        self.within(
            key,
            self.q(key, text, Kind::Temperature)?,
            bounds::TEMPERATURE_K,
            "K",
            "the lunar subsolar point is about 390 K and its night about 100 K",
        )
    }

    /// A heliocentric distance at `key`, AU, within [`bounds::HELIO_DISTANCE_AU`].
    fn helio_distance(&self, key: &str, text: &str) -> Result<f64, ScenarioError> {
        self.within(
            key,
            self.q(key, text, Kind::HelioDistance)?,
            bounds::HELIO_DISTANCE_AU,
            "AU",
            "the Moon is at 1 AU, Mercury between 0.307 and 0.467 AU",
        )
    }
}

/// Default altitude bin edges of the density tally, km: fine near the
/// surface, where the cold component lives, coarser above.
pub const DEFAULT_ALTITUDE_EDGES_KM: [f64; 16] = [
    0.0, 25.0, 50.0, 100.0, 150.0, 200.0, 300.0, 400.0, 500.0, 700.0, 1000.0, 1300.0, 1600.0,
    2000.0, 2500.0, 3000.0,
];

/// Default number of logarithmically spaced altitude bins between the
/// last altitude edge and the outer boundary, dimensionless.
pub const DEFAULT_OUTER_BINS: usize = 24;

/// Most outer bins a scenario may ask for, dimensionless.
const MAX_OUTER_BINS: usize = 200;

/// `edges` (m) with `n` bins added above the last edge, equally spaced in
/// log(altitude) up to `top` (m), the boundary's altitude, so that the
/// density grid covers the whole domain. Unchanged when `n` is 0 or the
/// edges already reach `top`.
pub fn with_outer_bins(edges: &[f64], top: f64, n: usize) -> Vec<f64> {
    let mut out = edges.to_vec();
    let last = edges[edges.len() - 1];
    if n == 0 || !(last > 0.0) || last >= top {
        return out;
    }
    let ratio = top / last;
    out.extend((1..n).map(|k| last * ratio.powf(k as f64 / n as f64)));
    out.push(top);
    out
}

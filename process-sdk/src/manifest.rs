//! Manifest types: what a module says about itself.
//!
//! Why this exists: a module travels between institutions as one `.wasm`
//! file, and whoever receives it must be able to see what law it is, who
//! wrote it, which published source it follows, what its parameters mean
//! (unit, default, range, and where the default comes from), what it reads,
//! and the reference points it promises to reproduce, all *before* running
//! any of its code.
//!
//! There are two forms of the same content:
//! - [`Manifest`] is the authoring form, a `const` made of `&'static`
//!   data. [`encode`] turns it into MessagePack at compile time, so
//!   `export_process!` can place it in the `exobound:manifest` custom
//!   section with no code running.
//! - [`ManifestInfo`] is the owned form that the host decodes from that
//!   section with rmp-serde (and that `module inspect --json` prints).
//!
//! Wire format (ABI v1): a MessagePack map with string keys, the field names
//! of [`ManifestInfo`]; numbers are float64; enumerations are strings.
//! ABI 1.1 adds table parameters: a table entry carries a ninth key,
//! `table` (see [`TableInfo`]); every other entry is written exactly as in
//! ABI 1.0.

use serde::{Deserialize, Serialize};

use crate::launch_law::{EnergyCutoff, LaunchLaw, LaunchLawInfo, Quantity, SpeedLaw};
use crate::params::ParamValue;
use crate::table::{ColumnInfo, TableInfo};

/// The roles a module can play.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Role {
    /// Releases atoms from the surface (see `Source`).
    Source,
    /// Removes atoms in flight (see `Loss`).
    Loss,
    /// Decides the outcome of a landing (see `SurfaceInteraction`).
    SurfaceInteraction,
    /// Exchanges atoms with the adsorbed pool (see `ReservoirProcess`).
    ReservoirProcess,
}

impl Role {
    /// All roles, in ABI order.
    pub const ALL: [Role; 4] =
        [Role::Source, Role::Loss, Role::SurfaceInteraction, Role::ReservoirProcess];

    /// The role's name on the wire and in scenario files.
    pub const fn as_str(self) -> &'static str {
        match self {
            Role::Source => "source",
            Role::Loss => "loss",
            Role::SurfaceInteraction => "surface-interaction",
            Role::ReservoirProcess => "reservoir-process",
        }
    }

    /// The role named `s`, if any.
    pub fn parse(s: &str) -> Option<Role> {
        Role::ALL.into_iter().find(|r| r.as_str() == s)
    }
}

/// Where a source's atoms come from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pool {
    /// The adsorbed surface pool: release is capped by it and depletes it.
    Adsorbed,
    /// The bulk regolith: release does not deplete the adsorbed pool.
    Bulk,
}

impl Pool {
    /// The pool's name on the wire.
    pub const fn as_str(self) -> &'static str {
        match self {
            Pool::Adsorbed => "adsorbed",
            Pool::Bulk => "bulk",
        }
    }
}

/// An input a module reads; the host checks that it can supply each one.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Input {
    /// Surface temperature, K.
    Temperature,
    /// Cosine of the solar zenith angle.
    CosSza,
    /// Local solar time, hours.
    LocalTime,
    /// Latitude and longitude, rad.
    Position,
    /// Adsorbed surface density, atoms cm^-2.
    Adsorbed,
    /// Relative bulk abundance from the composition map.
    BulkAbundance,
    /// Heliocentric distance, AU.
    HelioDistance,
    /// Solar-wind ion flux at the surface, ions cm^-2 s^-1.
    SolarWindFlux,
    /// Relative meteoroid flux.
    MeteoroidFactor,
    /// Altitude of a particle in flight, m.
    Altitude,
    /// Speed of a particle, m s^-1.
    Speed,
    /// Velocity along the Sun direction in the Sun's frame, m s^-1.
    SunRadialVelocity,
    /// Whether (or for what fraction of the interval) the point is sunlit.
    Sunlight,
    /// Impact velocity at landing, m s^-1.
    ImpactVelocity,
    /// Atomic mass of the species, kg.
    Mass,
    /// Simulated time, s.
    Time,
}

impl Input {
    /// Every input, in ABI order.
    pub const ALL: [Input; 16] = [
        Input::Temperature,
        Input::CosSza,
        Input::LocalTime,
        Input::Position,
        Input::Adsorbed,
        Input::BulkAbundance,
        Input::HelioDistance,
        Input::SolarWindFlux,
        Input::MeteoroidFactor,
        Input::Altitude,
        Input::Speed,
        Input::SunRadialVelocity,
        Input::Sunlight,
        Input::ImpactVelocity,
        Input::Mass,
        Input::Time,
    ];

    /// The input's name on the wire.
    pub const fn as_str(self) -> &'static str {
        match self {
            Input::Temperature => "temperature",
            Input::CosSza => "cos-sza",
            Input::LocalTime => "local-time",
            Input::Position => "position",
            Input::Adsorbed => "adsorbed",
            Input::BulkAbundance => "bulk-abundance",
            Input::HelioDistance => "helio-distance",
            Input::SolarWindFlux => "solar-wind-flux",
            Input::MeteoroidFactor => "meteoroid-factor",
            Input::Altitude => "altitude",
            Input::Speed => "speed",
            Input::SunRadialVelocity => "sun-radial-velocity",
            Input::Sunlight => "sunlight",
            Input::ImpactVelocity => "impact-velocity",
            Input::Mass => "mass",
            Input::Time => "time",
        }
    }
}

/// Where a parameter's default value comes from.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Origin {
    /// Taken from the named publication or data page.
    Source(&'static str),
    /// A rule of thumb of the trade with no single source.
    CommonPractice,
    /// Recalled from memory; the named publication is believed to be the origin.
    FromMemory(&'static str),
    /// No default (the user must give the value).
    NoDefault,
}

/// The type, default and allowed values of a parameter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum ParamKind {
    /// A number in the parameter's unit, with an inclusive allowed range.
    Number {
        /// Default value, in the parameter's unit, or `None` if required.
        default: Option<f64>,
        /// Smallest allowed value, in the parameter's unit.
        min: f64,
        /// Largest allowed value, in the parameter's unit.
        max: f64,
    },
    /// One of a list of named options.
    Choice {
        /// Default option, or `None` if required.
        default: Option<&'static str>,
        /// The allowed options.
        options: &'static [&'static str],
    },
    /// A table of numbers (ABI 1.1): named columns with units, the first
    /// strictly increasing. The parameter's own `unit` stays empty.
    Table {
        /// The columns, in order; the first is the abscissa.
        columns: &'static [TableColumn],
        /// Fewest rows allowed (at least 1).
        min_rows: u32,
        /// Most rows allowed.
        max_rows: u32,
        /// Default table as rows, each with one value per column (in the
        /// columns' units), or `None` if required. A row of the wrong
        /// length is a compile error.
        default: Option<&'static [&'static [f64]]>,
    },
}

/// One column of a table parameter.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct TableColumn {
    /// Column name, e.g. `temperature` (ASCII letters, digits, `_`, `-`).
    pub name: &'static str,
    /// Unit of the column's values, e.g. `K`; empty for dimensionless.
    pub unit: &'static str,
    /// Smallest allowed value, inclusive, in `unit`.
    pub min: f64,
    /// Largest allowed value, inclusive, in `unit`.
    pub max: f64,
}

/// One entry of the parameter schema.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ParamSpec {
    /// Name used in scenario files, e.g. `cross_section`.
    pub name: &'static str,
    /// Unit of the value, e.g. `cm^2`; empty for dimensionless numbers and choices.
    pub unit: &'static str,
    /// What the parameter means physically.
    pub description: &'static str,
    /// Type, default and range.
    pub kind: ParamKind,
    /// Where the default comes from.
    pub origin: Origin,
}

/// A parameter value in a reference point.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Value {
    /// A number, in the parameter's unit.
    Number(f64),
    /// A choice option.
    Text(&'static str),
}

/// Which call a reference point exercises, and so the unit of `expected`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Check {
    /// `Source::release_rate` on one `CellState`: atoms cm^-2 s^-1.
    ReleaseRate,
    /// `Loss::loss_rate` on one `InFlight`: s^-1.
    LossRate,
    /// `ReservoirProcess::exchange` on one `CellState`: atoms cm^-2 s^-1.
    Exchange,
    /// Mean speed of `Source::launch` over many draws from one `LaunchRequest`: m s^-1.
    MeanLaunchSpeed,
    /// Fraction of `SurfaceInteraction::land` outcomes that stick, over many
    /// draws from one `Impact`: dimensionless.
    StickFraction,
}

impl Check {
    /// The check's name on the wire.
    pub const fn as_str(self) -> &'static str {
        match self {
            Check::ReleaseRate => "release-rate",
            Check::LossRate => "loss-rate",
            Check::Exchange => "exchange",
            Check::MeanLaunchSpeed => "mean-launch-speed",
            Check::StickFraction => "stick-fraction",
        }
    }

    /// The unit of the check's expected value.
    pub const fn unit(self) -> &'static str {
        match self {
            Check::ReleaseRate | Check::Exchange => "cm^-2 s^-1",
            Check::LossRate => "s^-1",
            Check::MeanLaunchSpeed => "m s^-1",
            Check::StickFraction => "",
        }
    }
}

/// A published input -> output pair that the module promises to reproduce.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ReferencePoint {
    /// What the point shows, in a few words.
    pub description: &'static str,
    /// Which call it exercises.
    pub check: Check,
    /// Parameters for this point (others take their defaults).
    pub parameters: &'static [(&'static str, Value)],
    /// Input record fields by name (see `NamedFields`); others are zero.
    pub input: &'static [(&'static str, f64)],
    /// Expected output, in the unit of `check`.
    pub expected: f64,
    /// Allowed relative deviation, dimensionless.
    pub tolerance: f64,
    /// Where the expected value comes from.
    pub source: &'static str,
}

/// The authoring form of a manifest: a `const` in the module's `Process` impl.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Manifest {
    /// Module name, lowercase with hyphens, e.g. `photon-desorption`.
    pub name: &'static str,
    /// Module version, semver, e.g. `1.0.0`.
    pub version: &'static str,
    /// One or two sentences on the law.
    pub description: &'static str,
    /// Roles implemented; must match the roles given to `export_process!`.
    pub roles: &'static [Role],
    /// Authors.
    pub authors: &'static [&'static str],
    /// Institution responsible for the module.
    pub institution: &'static str,
    /// Licence of the module (SPDX identifier).
    pub licence: &'static str,
    /// Published source of the law.
    pub law_source: &'static str,
    /// For sources: which pool released atoms come from.
    pub draws_on: Option<Pool>,
    /// Name of the ledger column for atoms this module removes (e.g.
    /// `photoionized`); empty to use the module name.
    pub ledger_label: &'static str,
    /// Inputs read.
    pub inputs: &'static [Input],
    /// Parameter schema.
    pub parameters: &'static [ParamSpec],
    /// Reference points from the law's published source.
    pub reference_points: &'static [ReferencePoint],
}

// ---------------------------------------------------------------------------
// Owned form
// ---------------------------------------------------------------------------

/// One parameter as decoded from a manifest (owned form of [`ParamSpec`]).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ParamInfo {
    /// Name used in scenario files.
    pub name: String,
    /// Unit of the value; empty for dimensionless numbers and choices.
    pub unit: String,
    /// Physical meaning.
    pub description: String,
    /// Default value, if any.
    pub default: Option<ParamValue>,
    /// Smallest allowed number (numbers only), in `unit`.
    pub min: Option<f64>,
    /// Largest allowed number (numbers only), in `unit`.
    pub max: Option<f64>,
    /// Allowed options (choices only; empty for numbers).
    pub choices: Vec<String>,
    /// Where the default comes from: `source: ...`, `common practice`,
    /// `from memory: ...` or `no default`.
    pub default_origin: String,
    /// The declared columns and row limits (table parameters only, ABI
    /// 1.1); absent from the wire for numbers and choices.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub table: Option<TableInfo>,
}

/// Whether a decoded parameter is a number, a choice or a table.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ParamKindInfo {
    /// A number with a range.
    Number,
    /// One of named options.
    Choice,
    /// A table of numbers (ABI 1.1).
    Table,
}

impl ParamInfo {
    /// Number, choice or table.
    pub fn kind(&self) -> ParamKindInfo {
        if self.table.is_some() {
            ParamKindInfo::Table
        } else if self.choices.is_empty() {
            ParamKindInfo::Number
        } else {
            ParamKindInfo::Choice
        }
    }

    /// The unit, or "dimensionless".
    pub fn unit_or_dimensionless(&self) -> &str {
        if self.unit.is_empty() { "dimensionless" } else { &self.unit }
    }

    /// A sentence stating what is allowed, for error messages.
    pub fn allowed(&self) -> String {
        match self.kind() {
            ParamKindInfo::Number => format!(
                "allowed range [{}, {}] {}",
                self.min.unwrap_or(f64::NEG_INFINITY),
                self.max.unwrap_or(f64::INFINITY),
                self.unit_or_dimensionless()
            ),
            ParamKindInfo::Choice => format!("allowed options: {}", self.choices.join(", ")),
            ParamKindInfo::Table => self.table.as_ref().map(TableInfo::allowed).unwrap_or_default(),
        }
    }
}

/// One reference point as decoded from a manifest.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ReferenceInfo {
    /// What the point shows.
    pub description: String,
    /// Which call: `release-rate`, `loss-rate`, `exchange`,
    /// `mean-launch-speed` or `stick-fraction`.
    pub check: String,
    /// Parameters for this point.
    pub parameters: Vec<(String, ParamValue)>,
    /// Input record fields by name.
    pub input: Vec<(String, f64)>,
    /// Expected output, in the unit of `check`.
    pub expected: f64,
    /// Allowed relative deviation.
    pub tolerance: f64,
    /// Where the expected value comes from.
    pub source: String,
}

/// A manifest as decoded from the `exobound:manifest` section.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ManifestInfo {
    /// Module name.
    pub name: String,
    /// Module version (semver).
    pub version: String,
    /// Description of the law.
    pub description: String,
    /// Role names: `source`, `loss`, `surface-interaction`, `reservoir-process`.
    pub roles: Vec<String>,
    /// Authors.
    pub authors: Vec<String>,
    /// Institution.
    pub institution: String,
    /// Licence.
    pub licence: String,
    /// Published source of the law.
    pub law_source: String,
    /// `adsorbed` or `bulk` for sources.
    pub draws_on: Option<String>,
    /// Ledger column for removed atoms.
    pub ledger_label: String,
    /// Input names.
    pub inputs: Vec<String>,
    /// Parameter schema.
    pub parameters: Vec<ParamInfo>,
    /// Reference points.
    pub reference_points: Vec<ReferenceInfo>,
    /// The launch laws a source declares (`Source::LAUNCH_LAWS`), for `vet`
    /// to test its launches against; absent from the section (and empty
    /// here) when nothing is declared, as in every ABI 1.0 module.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub launch_laws: Vec<LaunchLawInfo>,
}

impl ManifestInfo {
    /// Decode a manifest section.
    pub fn decode(bytes: &[u8]) -> Result<ManifestInfo, rmp_serde::decode::Error> {
        rmp_serde::from_slice(bytes)
    }

    /// The roles, parsed; unknown role names are returned as the error.
    pub fn parsed_roles(&self) -> Result<Vec<Role>, String> {
        self.roles.iter().map(|r| Role::parse(r).ok_or_else(|| r.clone())).collect()
    }

    /// Whether the module declares `role`.
    pub fn has_role(&self, role: Role) -> bool {
        self.roles.iter().any(|r| r == role.as_str())
    }
}

fn origin_text(o: Origin) -> String {
    match o {
        Origin::Source(s) => format!("source: {s}"),
        Origin::CommonPractice => "common practice".to_string(),
        Origin::FromMemory(s) => format!("from memory: {s}"),
        Origin::NoDefault => "no default".to_string(),
    }
}

fn value_owned(v: Value) -> ParamValue {
    match v {
        Value::Number(x) => ParamValue::Number(x),
        Value::Text(s) => ParamValue::Text(s.to_string()),
    }
}

impl ParamSpec {
    /// The owned form.
    pub fn to_info(&self) -> ParamInfo {
        let mut table = None;
        let (default, min, max, choices) = match self.kind {
            ParamKind::Number { default, min, max } => {
                (default.map(ParamValue::Number), Some(min), Some(max), Vec::new())
            }
            ParamKind::Choice { default, options } => (
                default.map(|d| ParamValue::Text(d.to_string())),
                None,
                None,
                options.iter().map(|s| s.to_string()).collect(),
            ),
            ParamKind::Table { columns, min_rows, max_rows, default } => {
                table = Some(TableInfo {
                    columns: columns
                        .iter()
                        .map(|c| ColumnInfo {
                            name: c.name.to_string(),
                            unit: c.unit.to_string(),
                            min: c.min,
                            max: c.max,
                        })
                        .collect(),
                    min_rows,
                    max_rows,
                });
                // Rows to columns; a short row reads as NaN, which validation refuses.
                let by_column = |rows: &[&[f64]]| {
                    (0..columns.len())
                        .map(|j| {
                            rows.iter().map(|r| r.get(j).copied().unwrap_or(f64::NAN)).collect()
                        })
                        .collect()
                };
                (default.map(|rows| ParamValue::Table(by_column(rows))), None, None, Vec::new())
            }
        };
        ParamInfo {
            name: self.name.to_string(),
            unit: self.unit.to_string(),
            description: self.description.to_string(),
            default,
            min,
            max,
            choices,
            default_origin: origin_text(self.origin),
            table,
        }
    }
}

impl Manifest {
    /// The owned form with the launch laws `launch` (a source's
    /// `LAUNCH_LAWS`), as the host decodes it from the custom section that
    /// `export_process!` writes.
    pub fn to_info_with(&self, launch: &[LaunchLaw]) -> ManifestInfo {
        ManifestInfo {
            launch_laws: launch.iter().map(LaunchLaw::to_info).collect(),
            ..self.to_info()
        }
    }

    /// The owned form without launch laws, as the host would decode it from
    /// the custom section of a module that declares none.
    pub fn to_info(&self) -> ManifestInfo {
        let strs = |v: &[&str]| v.iter().map(|s| s.to_string()).collect::<Vec<_>>();
        ManifestInfo {
            name: self.name.to_string(),
            version: self.version.to_string(),
            description: self.description.to_string(),
            roles: self.roles.iter().map(|r| r.as_str().to_string()).collect(),
            authors: strs(self.authors),
            institution: self.institution.to_string(),
            licence: self.licence.to_string(),
            law_source: self.law_source.to_string(),
            draws_on: self.draws_on.map(|p| p.as_str().to_string()),
            ledger_label: self.ledger_label.to_string(),
            inputs: self.inputs.iter().map(|i| i.as_str().to_string()).collect(),
            parameters: self.parameters.iter().map(ParamSpec::to_info).collect(),
            reference_points: self
                .reference_points
                .iter()
                .map(|r| ReferenceInfo {
                    description: r.description.to_string(),
                    check: r.check.as_str().to_string(),
                    parameters: r
                        .parameters
                        .iter()
                        .map(|(k, v)| (k.to_string(), value_owned(*v)))
                        .collect(),
                    input: r.input.iter().map(|(k, v)| (k.to_string(), *v)).collect(),
                    expected: r.expected,
                    tolerance: r.tolerance,
                    source: r.source.to_string(),
                })
                .collect(),
            launch_laws: Vec::new(),
        }
    }
}

// ---------------------------------------------------------------------------
// Compile-time MessagePack encoder
// ---------------------------------------------------------------------------

/// A fixed-capacity MessagePack writer usable in `const` context. With
/// `N = 0` it only counts, which is how [`encoded_len`] sizes the section.
#[doc(hidden)]
pub struct Writer<const N: usize> {
    /// Encoded bytes (the first `min(len, N)` are valid).
    pub buf: [u8; N],
    /// Bytes produced so far, counted even beyond `N`.
    pub len: usize,
}

impl<const N: usize> Writer<N> {
    const fn new() -> Self {
        Writer { buf: [0; N], len: 0 }
    }
    const fn byte(&mut self, b: u8) {
        if self.len < N {
            self.buf[self.len] = b;
        }
        self.len += 1;
    }
    const fn be(&mut self, x: u64, bytes: u32) {
        let mut i = bytes;
        while i > 0 {
            i -= 1;
            self.byte((x >> (8 * i)) as u8);
        }
    }
    const fn header(&mut self, n: usize, fix: u8, fix_max: usize, b16: u8, b32: u8) {
        if n <= fix_max {
            self.byte(fix | n as u8);
        } else if n <= 0xFFFF {
            self.byte(b16);
            self.be(n as u64, 2);
        } else {
            self.byte(b32);
            self.be(n as u64, 4);
        }
    }
    const fn map(&mut self, n: usize) {
        self.header(n, 0x80, 15, 0xde, 0xdf);
    }
    const fn array(&mut self, n: usize) {
        self.header(n, 0x90, 15, 0xdc, 0xdd);
    }
    const fn uint(&mut self, x: u32) {
        if x <= 0x7f {
            self.byte(x as u8);
        } else if x <= 0xFF {
            self.byte(0xcc);
            self.byte(x as u8);
        } else if x <= 0xFFFF {
            self.byte(0xcd);
            self.be(x as u64, 2);
        } else {
            self.byte(0xce);
            self.be(x as u64, 4);
        }
    }
    const fn str(&mut self, s: &str) {
        let b = s.as_bytes();
        let n = b.len();
        if n <= 31 {
            self.byte(0xa0 | n as u8);
        } else if n <= 0xFF {
            self.byte(0xd9);
            self.byte(n as u8);
        } else if n <= 0xFFFF {
            self.byte(0xda);
            self.be(n as u64, 2);
        } else {
            self.byte(0xdb);
            self.be(n as u64, 4);
        }
        let mut i = 0;
        while i < n {
            self.byte(b[i]);
            i += 1;
        }
    }
    const fn f64(&mut self, x: f64) {
        self.byte(0xcb);
        self.be(x.to_bits(), 8);
    }
    const fn nil(&mut self) {
        self.byte(0xc0);
    }
    const fn key(&mut self, k: &str) {
        self.str(k);
    }
    const fn strs(&mut self, v: &[&str]) {
        self.array(v.len());
        let mut i = 0;
        while i < v.len() {
            self.str(v[i]);
            i += 1;
        }
    }
    const fn prefixed(&mut self, prefix: &str, s: &str) {
        // A string made of two parts, written as one MessagePack str.
        let n = prefix.len() + s.len();
        let (p, q) = (prefix.as_bytes(), s.as_bytes());
        if n <= 31 {
            self.byte(0xa0 | n as u8);
        } else if n <= 0xFF {
            self.byte(0xd9);
            self.byte(n as u8);
        } else if n <= 0xFFFF {
            self.byte(0xda);
            self.be(n as u64, 2);
        } else {
            self.byte(0xdb);
            self.be(n as u64, 4);
        }
        let mut i = 0;
        while i < p.len() {
            self.byte(p[i]);
            i += 1;
        }
        i = 0;
        while i < q.len() {
            self.byte(q[i]);
            i += 1;
        }
    }
    const fn origin(&mut self, o: Origin) {
        match o {
            Origin::Source(s) => self.prefixed("source: ", s),
            Origin::CommonPractice => self.str("common practice"),
            Origin::FromMemory(s) => self.prefixed("from memory: ", s),
            Origin::NoDefault => self.str("no default"),
        }
    }
    const fn value(&mut self, v: Value) {
        match v {
            Value::Number(x) => self.f64(x),
            Value::Text(s) => self.str(s),
        }
    }
    const fn param(&mut self, p: &ParamSpec) {
        // Numbers and choices keep the 8 keys of ABI 1.0; a table adds `table`.
        self.map(if matches!(p.kind, ParamKind::Table { .. }) { 9 } else { 8 });
        self.key("name");
        self.str(p.name);
        self.key("unit");
        self.str(p.unit);
        self.key("description");
        self.str(p.description);
        match p.kind {
            ParamKind::Number { default, min, max } => {
                self.key("default");
                match default {
                    Some(d) => self.f64(d),
                    None => self.nil(),
                }
                self.key("min");
                self.f64(min);
                self.key("max");
                self.f64(max);
                self.key("choices");
                self.array(0);
            }
            ParamKind::Choice { default, options } => {
                self.key("default");
                match default {
                    Some(d) => self.str(d),
                    None => self.nil(),
                }
                self.key("min");
                self.nil();
                self.key("max");
                self.nil();
                self.key("choices");
                self.strs(options);
            }
            ParamKind::Table { default, .. } => {
                self.key("default");
                match default {
                    Some(rows) => self.table_columns(p, rows),
                    None => self.nil(),
                }
                self.key("min");
                self.nil();
                self.key("max");
                self.nil();
                self.key("choices");
                self.array(0);
            }
        }
        self.key("default_origin");
        self.origin(p.origin);
        if let ParamKind::Table { columns, min_rows, max_rows, .. } = p.kind {
            self.key("table");
            self.map(3);
            self.key("columns");
            self.array(columns.len());
            let mut j = 0;
            while j < columns.len() {
                self.map(4);
                self.key("name");
                self.str(columns[j].name);
                self.key("unit");
                self.str(columns[j].unit);
                self.key("min");
                self.f64(columns[j].min);
                self.key("max");
                self.f64(columns[j].max);
                j += 1;
            }
            self.key("min_rows");
            self.uint(min_rows);
            self.key("max_rows");
            self.uint(max_rows);
        }
    }
    /// A default table, given as rows, written as one array per column.
    const fn table_columns(&mut self, p: &ParamSpec, rows: &[&[f64]]) {
        let ncols = match p.kind {
            ParamKind::Table { columns, .. } => columns.len(),
            _ => 0,
        };
        let mut i = 0;
        while i < rows.len() {
            assert!(
                rows[i].len() == ncols,
                "manifest: a row of a table parameter's default has not one value per column"
            );
            i += 1;
        }
        self.array(ncols);
        let mut j = 0;
        while j < ncols {
            self.array(rows.len());
            i = 0;
            while i < rows.len() {
                self.f64(rows[i][j]);
                i += 1;
            }
            j += 1;
        }
    }
    const fn reference(&mut self, r: &ReferencePoint) {
        self.map(7);
        self.key("description");
        self.str(r.description);
        self.key("check");
        self.str(r.check.as_str());
        self.key("parameters");
        self.array(r.parameters.len());
        let mut i = 0;
        while i < r.parameters.len() {
            self.array(2);
            self.str(r.parameters[i].0);
            self.value(r.parameters[i].1);
            i += 1;
        }
        self.key("input");
        self.array(r.input.len());
        i = 0;
        while i < r.input.len() {
            self.array(2);
            self.str(r.input[i].0);
            self.f64(r.input[i].1);
            i += 1;
        }
        self.key("expected");
        self.f64(r.expected);
        self.key("tolerance");
        self.f64(r.tolerance);
        self.key("source");
        self.str(r.source);
    }
    const fn quantity(&mut self, q: Quantity) {
        match q {
            Quantity::Param(n) => self.prefixed("param:", n),
            Quantity::Input(n) => self.prefixed("input:", n),
            Quantity::Fixed(x) => self.f64(x),
        }
    }
    const fn launch_law(&mut self, l: &LaunchLaw) {
        self.map(3);
        self.key("when");
        self.array(l.when.len());
        let mut i = 0;
        while i < l.when.len() {
            self.array(2);
            self.str(l.when[i].0);
            self.str(l.when[i].1);
            i += 1;
        }
        self.key("speed");
        match l.speed {
            SpeedLaw::MaxwellianFlux { temperature } => {
                self.map(2);
                self.key("law");
                self.str("maxwellian-flux");
                self.key("temperature");
                self.quantity(temperature);
            }
            SpeedLaw::SigmundThompson { binding_energy, cutoff } => {
                let n = match cutoff {
                    EnergyCutoff::None => 3,
                    EnergyCutoff::Hard { .. } => 4,
                    EnergyCutoff::Thompson { .. } => 5,
                };
                self.map(n);
                self.key("law");
                self.str("sigmund-thompson");
                self.key("binding_energy");
                self.quantity(binding_energy);
                self.key("cutoff");
                match cutoff {
                    EnergyCutoff::None => self.str("none"),
                    EnergyCutoff::Hard { max_energy } => {
                        self.str("hard");
                        self.key("max_energy");
                        self.quantity(max_energy);
                    }
                    EnergyCutoff::Thompson { ion_energy, ion_mass } => {
                        self.str("thompson");
                        self.key("ion_energy");
                        self.quantity(ion_energy);
                        self.key("ion_mass");
                        self.quantity(ion_mass);
                    }
                }
            }
            SpeedLaw::PowerLaw { exponent, energy } => {
                self.map(3);
                self.key("law");
                self.str("power-law");
                self.key("exponent");
                self.quantity(exponent);
                self.key("energy");
                self.quantity(energy);
            }
        }
        self.key("direction");
        self.str(l.direction.as_str());
    }
    const fn manifest(&mut self, m: &Manifest, launch: &[LaunchLaw]) {
        // The 14th key only when something is declared, so that the section
        // of a module without a declaration is byte-identical to ABI 1.0's.
        self.map(if launch.is_empty() { 13 } else { 14 });
        self.key("name");
        self.str(m.name);
        self.key("version");
        self.str(m.version);
        self.key("description");
        self.str(m.description);
        self.key("roles");
        self.array(m.roles.len());
        let mut i = 0;
        while i < m.roles.len() {
            self.str(m.roles[i].as_str());
            i += 1;
        }
        self.key("authors");
        self.strs(m.authors);
        self.key("institution");
        self.str(m.institution);
        self.key("licence");
        self.str(m.licence);
        self.key("law_source");
        self.str(m.law_source);
        self.key("draws_on");
        match m.draws_on {
            Some(p) => self.str(p.as_str()),
            None => self.nil(),
        }
        self.key("ledger_label");
        self.str(m.ledger_label);
        self.key("inputs");
        self.array(m.inputs.len());
        i = 0;
        while i < m.inputs.len() {
            self.str(m.inputs[i].as_str());
            i += 1;
        }
        self.key("parameters");
        self.array(m.parameters.len());
        i = 0;
        while i < m.parameters.len() {
            self.param(&m.parameters[i]);
            i += 1;
        }
        self.key("reference_points");
        self.array(m.reference_points.len());
        i = 0;
        while i < m.reference_points.len() {
            self.reference(&m.reference_points[i]);
            i += 1;
        }
        if !launch.is_empty() {
            self.key("launch_laws");
            self.array(launch.len());
            i = 0;
            while i < launch.len() {
                self.launch_law(&launch[i]);
                i += 1;
            }
        }
    }
}

/// Length in bytes of the MessagePack encoding of `m`.
pub const fn encoded_len(m: &Manifest) -> usize {
    encoded_len_with(m, &[])
}

/// The MessagePack encoding of `m` in a buffer of exactly `N` bytes, where
/// `N` must be [`encoded_len`]`(m)` (checked at compile time when used in a
/// `const` or `static`).
pub const fn encode<const N: usize>(m: &Manifest) -> [u8; N] {
    encode_with::<N>(m, &[])
}

/// Length in bytes of the MessagePack encoding of `m` with the launch laws
/// `launch` (empty: the same as [`encoded_len`]).
pub const fn encoded_len_with(m: &Manifest, launch: &[LaunchLaw]) -> usize {
    let mut w = Writer::<0>::new();
    w.manifest(m, launch);
    w.len
}

/// The MessagePack encoding of `m` with the launch laws `launch`, in a
/// buffer of exactly `N` = [`encoded_len_with`]`(m, launch)` bytes.
pub const fn encode_with<const N: usize>(m: &Manifest, launch: &[LaunchLaw]) -> [u8; N] {
    let mut w = Writer::<N>::new();
    w.manifest(m, launch);
    assert!(w.len == N, "manifest::encode: N must equal encoded_len(m)");
    w.buf
}

#[cfg(test)]
mod tests {
    use super::*;

    const EXAMPLE: Manifest = Manifest {
        name: "example-law",
        version: "1.2.3",
        description: "A law used to check that the const encoder and rmp-serde agree, with a \
                      description long enough to need the str16 form of MessagePack so that \
                      longer headers are exercised too; the text goes on past 255 bytes on \
                      purpose, because real descriptions often do.",
        roles: &[Role::Source, Role::Loss],
        authors: &["A. Author", "B. Author"],
        institution: "Nowhere Institute",
        licence: "Apache-2.0",
        law_source: "Author & Author (2026)",
        draws_on: Some(Pool::Adsorbed),
        ledger_label: "example",
        inputs: &[Input::Temperature, Input::CosSza],
        parameters: &[
            ParamSpec {
                name: "cross_section",
                unit: "cm^2",
                description: "PSD cross-section",
                kind: ParamKind::Number { default: Some(3.0e-20), min: 1e-22, max: 1e-17 },
                origin: Origin::Source("Yakshinskiy & Madey 1999"),
            },
            ParamSpec {
                name: "velocity_law",
                unit: "",
                description: "launch distribution",
                kind: ParamKind::Choice {
                    default: Some("maxwellian"),
                    options: &["maxwellian", "power-law"],
                },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "temperature",
                unit: "K",
                description: "needed",
                kind: ParamKind::Number { default: None, min: 10.0, max: 5000.0 },
                origin: Origin::NoDefault,
            },
            ParamSpec {
                name: "yield_table",
                unit: "",
                description: "a table; max_rows = 200 needs the uint8 form of MessagePack",
                kind: ParamKind::Table {
                    columns: &[
                        TableColumn { name: "temperature", unit: "K", min: 0.0, max: 1.0e4 },
                        TableColumn { name: "yield", unit: "", min: 0.0, max: 1.0 },
                    ],
                    min_rows: 2,
                    max_rows: 200,
                    default: Some(&[&[100.0, 0.5], &[200.0, 0.25], &[300.0, 0.125]]),
                },
                origin: Origin::CommonPractice,
            },
        ],
        reference_points: &[ReferencePoint {
            description: "at 1 AU",
            check: Check::ReleaseRate,
            parameters: &[("velocity_law", Value::Text("power-law"))],
            input: &[("cos_sza", 1.0), ("adsorbed", 1.0e10)],
            expected: 4.5e4,
            tolerance: 1e-9,
            source: "check",
        }],
    };

    const LAUNCH: &[LaunchLaw] = &[
        LaunchLaw {
            when: &[("velocity_law", "maxwellian")],
            speed: SpeedLaw::MaxwellianFlux { temperature: Quantity::Input("temperature") },
            direction: crate::launch_law::DirectionLaw::Cosine,
        },
        LaunchLaw {
            when: &[("velocity_law", "power-law")],
            speed: SpeedLaw::SigmundThompson {
                binding_energy: Quantity::Fixed(0.27),
                cutoff: EnergyCutoff::Thompson {
                    ion_energy: Quantity::Param("temperature"),
                    ion_mass: Quantity::Fixed(1.0),
                },
            },
            direction: crate::launch_law::DirectionLaw::Isotropic,
        },
    ];

    #[test]
    fn launch_laws_encode_and_decode_and_are_absent_when_none() {
        const LEN: usize = encoded_len_with(&EXAMPLE, LAUNCH);
        static BYTES: [u8; LEN] = encode_with::<LEN>(&EXAMPLE, LAUNCH);
        let decoded = ManifestInfo::decode(&BYTES).expect("decodes");
        assert_eq!(decoded, EXAMPLE.to_info_with(LAUNCH));
        assert_eq!(decoded.launch_laws.len(), 2);
        // Without a declaration the section is exactly the 13-key ABI 1.0 manifest.
        const PLAIN: usize = encoded_len(&EXAMPLE);
        assert_eq!(encoded_len_with(&EXAMPLE, &[]), PLAIN);
        const { assert!(LEN > PLAIN) };
    }

    #[test]
    fn const_encoding_decodes_with_rmp_serde() {
        const LEN: usize = encoded_len(&EXAMPLE);
        static BYTES: [u8; LEN] = encode::<LEN>(&EXAMPLE);
        let decoded = ManifestInfo::decode(&BYTES).expect("decodes");
        assert_eq!(decoded, EXAMPLE.to_info());
        assert_eq!(decoded.parsed_roles().unwrap(), vec![Role::Source, Role::Loss]);
        assert_eq!(decoded.parameters[0].default_origin, "source: Yakshinskiy & Madey 1999");
        // The default table arrives as columns.
        assert_eq!(
            decoded.parameters[3].default,
            Some(ParamValue::Table(vec![vec![100.0, 200.0, 300.0], vec![0.5, 0.25, 0.125]]))
        );
        // The const writer and rmp-serde's named encoding agree byte for byte.
        assert_eq!(rmp_serde::to_vec_named(&EXAMPLE.to_info()).unwrap(), BYTES.to_vec());
    }

    #[test]
    fn entries_without_tables_keep_the_abi_1_0_layout() {
        // ABI 1.0 hosts decode parameter entries of exactly eight keys; only
        // a table entry carries the ninth, `table`.
        const LEN: usize = encoded_len(&EXAMPLE);
        static BYTES: [u8; LEN] = encode::<LEN>(&EXAMPLE);
        let raw: rmpv_like::Map = rmp_serde::from_slice(&BYTES).unwrap();
        let keys: Vec<usize> = raw.parameters.iter().map(|p| p.len()).collect();
        assert_eq!(keys, vec![8, 8, 8, 9]);
        assert!(raw.parameters[3].contains_key("table"));
        assert_eq!(crate::abi::version_bytes(&EXAMPLE), *b"1.1.0");
        let no_tables = Manifest { parameters: &EXAMPLE.parameters[..3], ..EXAMPLE };
        assert_eq!(crate::abi::version_bytes(&no_tables), *b"1.0.0");
    }

    /// Just enough structure to count the keys of each parameter entry.
    mod rmpv_like {
        use std::collections::BTreeMap;

        #[derive(serde::Deserialize)]
        pub struct Map {
            pub parameters: Vec<BTreeMap<String, serde::de::IgnoredAny>>,
        }
    }
}

//! Reading the scenario text: syntax errors with file:line:column, unknown
//! keys with the nearest valid one, values of the wrong type with the key
//! and an example, and `--set KEY=VALUE` overrides.
//!
//! Why this exists: the first thing a modeller sees of a mistyped scenario
//! is this module's message, so it must point at the place and suggest
//! the fix ("unknown key `dtt` in [run]; did you mean `dt`?", "run.dt needs
//! a quantity with a unit in quotes, e.g. dt = \"600 s\""). serde alone
//! says "invalid type: integer `900`, expected a string" and, for a value
//! set with `--set`, not even where; [`TAKES`] says what each key takes.

use toml::de::{DeTable, DeValue};

use super::quantity::Kind;
use super::{ScenarioError, ScenarioFile};

/// Parse `text` (named `origin` in messages) into a [`ScenarioFile`] and
/// apply `overrides`, each `KEY=VALUE` with a dotted key such as
/// `run.seed` or `processes.0.parameters.flux` (a process may also be
/// named by its module, `processes.impact-vapor.parameters.flux`).
pub fn parse_file(
    text: &str,
    origin: &str,
    overrides: &[String],
) -> Result<ScenarioFile, ScenarioError> {
    parse_file_named(text, origin, overrides, &|_| None)
}

/// As [`parse_file`], with `manifest_name` giving the manifest name of the
/// module a `[[processes]]` entry's `module` key names (`None` when it
/// cannot be read), so that a process can be selected by the name its
/// author gave it whatever its file is called.
pub fn parse_file_named(
    text: &str,
    origin: &str,
    overrides: &[String],
    manifest_name: &dyn Fn(&str) -> Option<String>,
) -> Result<ScenarioFile, ScenarioError> {
    let file: ScenarioFile =
        toml::from_str(text).map_err(|e| ScenarioError(describe_scenario(origin, text, &e)))?;
    if overrides.is_empty() {
        return Ok(file);
    }
    let mut table: toml::Table =
        toml::from_str(text).map_err(|e| ScenarioError(describe(origin, text, &e)))?;
    for o in overrides {
        let fail = |m: String| ScenarioError(format!("--set {o}: {m}"));
        check_override(o).map_err(fail)?;
        apply(&mut table, o, manifest_name).map_err(fail)?;
    }
    toml::Value::Table(table).try_into::<ScenarioFile>().map_err(|e| {
        ScenarioError(format!("{origin}: after the --set overrides: {}", suggest(e.message())))
    })
}

/// A toml error as `origin:line:column: message`, unknown keys with a suggestion.
pub(crate) fn describe(origin: &str, text: &str, e: &toml::de::Error) -> String {
    let msg = suggest(e.message());
    match e.span() {
        Some(span) => {
            let (line, col) = line_col(text, span.start);
            let section = section_at(text, span.start);
            let where_ =
                if section.is_empty() { String::new() } else { format!(" (in [{section}])") };
            format!("{origin}:{line}:{col}: {msg}{where_}")
        }
        None => format!("{origin}: {msg}"),
    }
}

/// A scenario file's toml error as [`describe`] gives it, except that a
/// value of the wrong type names its key, what the key takes and an
/// example: `demo.toml:58:6: run.dt needs a quantity with a unit in
/// quotes, e.g. dt = "600 s" (...); got the bare number 900 (in [run])`.
pub(crate) fn describe_scenario(origin: &str, text: &str, e: &toml::de::Error) -> String {
    let plain = describe(origin, text, e);
    let Some(span) = e.span() else { return plain };
    let Ok(doc) = DeTable::parse(text) else { return plain };
    let mut path = Vec::new();
    let Some(value) = find_value(doc.get_ref(), &span, &mut path) else { return plain };
    let key = display_key(&path);
    // An entry of a list is shown as a bare value.
    let leaf = match path.last() {
        Some(Seg::Key(k)) => k.clone(),
        _ => String::new(),
    };
    let message = match takes(&pattern_key(&path)) {
        Some(t) => wrong_type(&key, t, &Given::of_de(value), &Place::File { leaf: &leaf }),
        None => None,
    };
    let (line, col) = line_col(text, span.start);
    let section = section_at(text, span.start);
    let where_ = if section.is_empty() { String::new() } else { format!(" (in [{section}])") };
    // A key without an entry in TAKES still gets named.
    let message = message.unwrap_or_else(|| format!("{key}: {}", suggest(e.message())));
    format!("{origin}:{line}:{col}: {message}{where_}")
}

/// One step of a path into the scenario: a table key or an array index.
#[derive(Clone, Debug, PartialEq)]
enum Seg {
    Key(String),
    Index(usize),
}

/// The value whose span is `span`, with its path in `path`.
fn find_value<'a, 'i>(
    table: &'a DeTable<'i>,
    span: &std::ops::Range<usize>,
    path: &mut Vec<Seg>,
) -> Option<&'a DeValue<'i>> {
    for (k, v) in table.iter() {
        path.push(Seg::Key(k.get_ref().to_string()));
        if let Some(found) = find_in(v, span, path) {
            return Some(found);
        }
        path.pop();
    }
    None
}

fn find_in<'a, 'i>(
    v: &'a toml::Spanned<DeValue<'i>>,
    span: &std::ops::Range<usize>,
    path: &mut Vec<Seg>,
) -> Option<&'a DeValue<'i>> {
    if v.span() == *span {
        return Some(v.get_ref());
    }
    match v.get_ref() {
        DeValue::Table(t) => find_value(t, span, path),
        DeValue::Array(items) => {
            for (i, item) in items.iter().enumerate() {
                path.push(Seg::Index(i));
                if let Some(found) = find_in(item, span, path) {
                    return Some(found);
                }
                path.pop();
            }
            None
        }
        _ => None,
    }
}

/// `environment.solar_wind[1].start`.
fn display_key(path: &[Seg]) -> String {
    let mut out = String::new();
    for s in path {
        match s {
            Seg::Key(k) if out.is_empty() => out.push_str(k),
            Seg::Key(k) => {
                out.push('.');
                out.push_str(k);
            }
            Seg::Index(i) => out.push_str(&format!("[{i}]")),
        }
    }
    out
}

/// `environment.solar_wind[].start`: the key as [`TAKES`] lists it.
fn pattern_key(path: &[Seg]) -> String {
    let mut out = String::new();
    for s in path {
        match s {
            Seg::Key(k) => {
                if !out.is_empty() {
                    out.push('.');
                }
                out.push_str(k);
            }
            Seg::Index(_) => out.push_str("[]"),
        }
    }
    out
}

/// The [`TAKES`] pattern of a `--set` key such as `processes.impact-vapor.role`:
/// the part after an array key (an index or a module name) becomes `[]`.
fn override_pattern(key: &str) -> String {
    let mut out = String::new();
    let mut after_array = false;
    for part in key.split('.') {
        if after_array {
            out.push_str("[]");
            after_array = false;
            continue;
        }
        if !out.is_empty() {
            out.push('.');
        }
        out.push_str(part);
        after_array = ARRAYS.contains(&out.as_str());
    }
    out
}

/// Keys of the scenario that hold arrays, as [`TAKES`] spells them.
const ARRAYS: [&str; 5] = [
    "catalogs",
    "processes",
    "environment.solar_wind",
    "outputs.products",
    "outputs.altitude_edges.values",
];

/// What a scenario key takes, for the message about a value of another type.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Takes {
    /// A quantity with its unit, as text: the kind and an example value.
    Quantity(Kind, &'static str),
    /// A plain number: an example.
    Number(&'static str),
    /// A whole number >= 0: an example.
    Whole(&'static str),
    /// Text: an example, without the quotes.
    Text(&'static str),
    /// `true` or `false`.
    Flag,
    /// A list: an example in TOML.
    List(&'static str),
    /// An inline table: an example in TOML.
    Table(&'static str),
}

/// Every value key of [`ScenarioFile`], array entries written `[]`, with
/// what it takes. Keys missing here still get named in a type error,
/// only without the example (`processes[].parameters` are checked against
/// each module's manifest elsewhere).
const TAKES: &[(&str, Takes)] = &[
    ("title", Takes::Text("lunar sodium, nominal")),
    ("catalogs", Takes::List(r#"["catalog"]"#)),
    ("catalogs[]", Takes::Text("catalog")),
    ("body.name", Takes::Text("moon")),
    ("body.gm", Takes::Quantity(Kind::GravParameter, "4902.8 km^3 s^-2")),
    ("body.radius", Takes::Quantity(Kind::Length, "1737.4 km")),
    ("body.sidereal_rotation", Takes::Quantity(Kind::Time, "27.32 d")),
    ("body.solar_day", Takes::Quantity(Kind::Time, "29.53 d")),
    ("body.subsolar_latitude", Takes::Quantity(Kind::Angle, "0 deg")),
    ("body.subsolar_longitude", Takes::Quantity(Kind::Angle, "0 deg")),
    ("body.semi_major_axis", Takes::Quantity(Kind::HelioDistance, "0.387 AU")),
    ("body.eccentricity", Takes::Number("0.2056")),
    ("body.orbital_period", Takes::Quantity(Kind::Time, "87.97 d")),
    ("body.start_true_anomaly", Takes::Quantity(Kind::Angle, "60 deg")),
    ("body.perihelion_subsolar_longitude", Takes::Quantity(Kind::Angle, "180 deg")),
    ("body.start_lunar_phase", Takes::Number("0.25")),
    ("body.obliquity", Takes::Quantity(Kind::Angle, "1.54 deg")),
    ("body.equinox_true_anomaly", Takes::Quantity(Kind::Angle, "0 deg")),
    ("body.start_solar_longitude", Takes::Quantity(Kind::Angle, "90 deg")),
    ("species.name", Takes::Text("sodium")),
    ("species.g_factor_table", Takes::Text("g-factors-na.csv")),
    ("surface.latitude_cells", Takes::Whole("18")),
    ("surface.longitude_cells", Takes::Whole("36")),
    ("surface.bulk_map", Takes::Text("maps/bulk-sodium.csv")),
    ("surface.adsorbed", Takes::Quantity(Kind::SurfaceDensity, "1e11 cm^-2")),
    ("surface.adsorbed_map", Takes::Text("maps/adsorbed.csv")),
    ("surface.temperature.subsolar", Takes::Quantity(Kind::Temperature, "390 K")),
    ("surface.temperature.night", Takes::Quantity(Kind::Temperature, "100 K")),
    ("surface.temperature.reference_distance", Takes::Quantity(Kind::HelioDistance, "1 AU")),
    ("environment.heliocentric_distance", Takes::Quantity(Kind::HelioDistance, "1 AU")),
    ("environment.solar_wind_flux", Takes::Quantity(Kind::Flux, "2e8 cm^-2 s^-1")),
    ("environment.meteoroid_factor", Takes::Number("1.0")),
    (
        "environment.solar_wind",
        Takes::List(r#"[{ start = "12 d", end = "17.5 d", factor = 0.0 }]"#),
    ),
    ("environment.solar_wind[].start", Takes::Quantity(Kind::Time, "12 d")),
    ("environment.solar_wind[].end", Takes::Quantity(Kind::Time, "17.5 d")),
    ("environment.solar_wind[].factor", Takes::Number("0.0")),
    ("environment.solar_wind[].note", Takes::Text("inside the geomagnetic tail")),
    ("processes[].module", Takes::Text("standard:photoionization")),
    ("processes[].role", Takes::Text("loss")),
    ("processes[].parameters", Takes::Table(r#"{ pattern = "apex" }"#)),
    ("processes[].unlocked", Takes::Flag),
    ("run.dt", Takes::Quantity(Kind::Time, "600 s")),
    ("run.duration", Takes::Quantity(Kind::Time, "29.53 d")),
    ("run.spin_up", Takes::Quantity(Kind::Time, "3 d")),
    ("run.seed", Takes::Whole("7")),
    ("run.particles", Takes::Whole("100000")),
    ("run.threads", Takes::Whole("0")),
    ("run.checkpoint_every", Takes::Quantity(Kind::Time, "1 d")),
    ("run.radiation_pressure", Takes::Flag),
    ("run.boundary_radii", Takes::Number("20")),
    ("run.remove_unbound_at_launch", Takes::Flag),
    ("outputs.altitude_edges", Takes::Table(r#"{ values = [0, 50, 100, 500], unit = "km" }"#)),
    ("outputs.altitude_edges.values", Takes::List("[0, 50, 100, 500]")),
    ("outputs.altitude_edges.values[]", Takes::Number("50")),
    ("outputs.altitude_edges.unit", Takes::Text("km")),
    ("outputs.outer_bins", Takes::Whole("24")),
    ("outputs.local_time_bins", Takes::Whole("24")),
    ("outputs.latitude_bins", Takes::Whole("18")),
    ("outputs.window", Takes::Quantity(Kind::Time, "1 d")),
    ("outputs.equator_band", Takes::Quantity(Kind::Angle, "10 deg")),
    ("outputs.products", Takes::List(r#"["netcdf", "csv", "plots"]"#)),
    ("outputs.products[]", Takes::Text("csv")),
    ("outputs.plot_format", Takes::Text("svg")),
    ("sandbox.fuel_per_record", Takes::Number("1e7")),
    ("sandbox.fuel_per_call", Takes::Number("1e9")),
    ("sandbox.memory_cap", Takes::Text("256 MiB")),
    ("sandbox.backstop", Takes::Quantity(Kind::Time, "20 min")),
];

fn takes(pattern: &str) -> Option<Takes> {
    TAKES.iter().find(|(k, _)| *k == pattern).map(|(_, t)| *t)
}

/// A value as written, reduced to what a type message needs.
#[derive(Clone, Debug, PartialEq)]
enum Given {
    /// An integer, as written.
    Integer(String),
    /// A float, as written.
    Float(String),
    /// Text, without its quotes.
    Text(String),
    /// `true` or `false`.
    Flag(bool),
    /// An array.
    List,
    /// A table.
    Table,
    /// A date or time.
    Date,
}

impl Given {
    fn of_de(v: &DeValue<'_>) -> Given {
        match v {
            DeValue::Integer(i) => Given::Integer(i.as_str().to_string()),
            DeValue::Float(f) => Given::Float(f.as_str().to_string()),
            DeValue::String(s) => Given::Text(s.to_string()),
            DeValue::Boolean(b) => Given::Flag(*b),
            DeValue::Array(_) => Given::List,
            DeValue::Table(_) => Given::Table,
            DeValue::Datetime(_) => Given::Date,
        }
    }

    /// `raw` is the text after `=` in `--set KEY=VALUE`.
    fn of_value(v: &toml::Value, raw: &str) -> Given {
        match v {
            toml::Value::Integer(_) => Given::Integer(raw.to_string()),
            toml::Value::Float(_) => Given::Float(raw.to_string()),
            toml::Value::String(s) => Given::Text(s.clone()),
            toml::Value::Boolean(b) => Given::Flag(*b),
            toml::Value::Array(_) => Given::List,
            toml::Value::Table(_) => Given::Table,
            toml::Value::Datetime(_) => Given::Date,
        }
    }

    fn describe(&self, wants_unit: bool) -> String {
        match self {
            Given::Integer(r) | Given::Float(r) if wants_unit => {
                format!("the bare number {r}, which has no unit")
            }
            Given::Integer(r) | Given::Float(r) => format!("the number {r}"),
            Given::Text(s) => format!("the text \"{s}\""),
            Given::Flag(b) => format!("`{b}`"),
            Given::List => "a list".to_string(),
            Given::Table => "a table".to_string(),
            Given::Date => "a date".to_string(),
        }
    }
}

/// Where the value was written, which decides how the example is spelled.
enum Place<'a> {
    /// In the file, as `leaf = value` (as `value` if `leaf` is empty).
    File { leaf: &'a str },
    /// On the command line, as `--set KEY=VALUE`.
    Set,
}

/// The message for `given` at `key`, which takes `t`; `None` if the type fits.
fn wrong_type(key: &str, t: Takes, given: &Given, place: &Place<'_>) -> Option<String> {
    // How to write `value` (`toml` in the file, `cli` after --set).
    let example = |toml: &str, cli: &str| match place {
        Place::File { leaf: "" } => toml.to_string(),
        Place::File { leaf } => format!("{leaf} = {toml}"),
        Place::Set => format!("--set {key}={cli}"),
    };
    let in_quotes = if matches!(place, Place::File { .. }) { " in quotes" } else { "" };
    let got = given.describe(matches!(t, Takes::Quantity(..)));
    match (t, given) {
        (Takes::Quantity(..) | Takes::Text(_), Given::Text(_))
        | (Takes::Number(_), Given::Integer(_) | Given::Float(_))
        | (Takes::Flag, Given::Flag(_))
        | (Takes::List(_), Given::List)
        | (Takes::Table(_), Given::Table) => None,
        (Takes::Whole(_), Given::Integer(r)) if !r.trim_start().starts_with('-') => None,
        (Takes::Quantity(kind, ex), _) => {
            let units: Vec<String> = kind.units().iter().map(|(u, _)| format!("`{u}`")).collect();
            Some(format!(
                "{key} needs a quantity with a unit{in_quotes}, e.g. {} (a {}: {}); got {got}",
                example(&format!("\"{ex}\""), &format!("\"{ex}\"")),
                kind.name(),
                units.join(", ")
            ))
        }
        (Takes::Number(ex), _) => Some(format!(
            "{key} takes a plain number, without quotes or unit, e.g. {}; got {got}",
            example(ex, ex)
        )),
        (Takes::Whole(ex), Given::Integer(_)) => {
            Some(format!("{key} takes a whole number >= 0, e.g. {}; got {got}", example(ex, ex)))
        }
        (Takes::Whole(ex), _) => Some(format!(
            "{key} takes a plain whole number, without quotes or decimal point, e.g. {}; got {got}",
            example(ex, ex)
        )),
        (Takes::Text(ex), _) => Some(format!(
            "{key} takes text{in_quotes}, e.g. {}; got {got}",
            example(&format!("\"{ex}\""), ex)
        )),
        (Takes::Flag, _) => {
            Some(format!("{key} takes true or false, e.g. {}; got {got}", example("true", "true")))
        }
        (Takes::List(ex), _) => {
            Some(format!("{key} takes a list, e.g. {}; got {got}", example(ex, &format!("'{ex}'"))))
        }
        (Takes::Table(ex), _) => Some(format!(
            "{key} takes a table, e.g. {}; got {got}",
            example(ex, &format!("'{ex}'"))
        )),
    }
}

/// Refuse a `--set KEY=VALUE` whose value has the wrong type for its key,
/// before it is applied (afterwards serde no longer knows which key it was).
fn check_override(setting: &str) -> Result<(), String> {
    let Some((key, raw)) = setting.split_once('=') else { return Ok(()) };
    let (key, raw) = (key.trim(), raw.trim());
    let Some(t) = takes(&override_pattern(key)) else { return Ok(()) };
    let given = Given::of_value(&override_value(raw), raw);
    match wrong_type(key, t, &given, &Place::Set) {
        Some(m) => Err(m),
        None => Ok(()),
    }
}

/// The value of `--set KEY=RAW`: a TOML value if `raw` parses as one
/// ("7", "true", "\"x\""), else the text itself.
fn override_value(raw: &str) -> toml::Value {
    toml::from_str::<toml::Table>(&format!("v = {raw}"))
        .ok()
        .and_then(|mut t| t.remove("v"))
        .unwrap_or_else(|| toml::Value::String(raw.to_string()))
}

/// 1-based line and column (in characters) of byte offset `at`.
pub fn line_col(text: &str, at: usize) -> (usize, usize) {
    let at = at.min(text.len());
    let before = &text[..at];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, col)
}

/// The `[section]` header in force at byte offset `at`, or "" at top level.
fn section_at(text: &str, at: usize) -> String {
    let before = &text[..at.min(text.len())];
    for line in before.lines().rev() {
        let t = line.trim();
        if t.starts_with('[') {
            return t.trim_matches(|c| c == '[' || c == ']').trim().to_string();
        }
    }
    String::new()
}

/// Rewrite serde's "unknown field `x`, expected one of `a`, `b`" into a
/// message with the nearest valid key.
fn suggest(msg: &str) -> String {
    let Some(rest) = msg.strip_prefix("unknown field `") else { return msg.to_string() };
    let Some((name, tail)) = rest.split_once('`') else { return msg.to_string() };
    let valid: Vec<&str> = tail.split('`').skip(1).step_by(2).collect();
    unknown_message(name, &valid, "key")
}

/// "unknown KIND `name`; did you mean `best`? (valid: ...)".
pub fn unknown_message(name: &str, valid: &[&str], kind: &str) -> String {
    let best = valid.iter().min_by_key(|v| edit_distance(name, v)).copied();
    let list = valid.iter().map(|v| format!("`{v}`")).collect::<Vec<_>>().join(", ");
    match best {
        Some(b) if edit_distance(name, b) <= (b.len().max(name.len()) / 2).max(2) => {
            format!("unknown {kind} `{name}`; did you mean `{b}`? (valid: {list})")
        }
        _ if valid.is_empty() => format!("unknown {kind} `{name}`; none are accepted here"),
        _ => format!("unknown {kind} `{name}`; valid: {list}"),
    }
}

/// Levenshtein distance between `a` and `b`, in characters.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        cur[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != *cb);
            cur[j + 1] = sub.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// Whether the `[[processes]]` entry whose `module` key is `module`
/// answers to the selector `sel` of a dotted key by the key itself or the
/// module's name in it (`standard:NAME`, `NAME@VERSION`, or the file name
/// without `.wasm`), with `-` and `_` taken as the same (cargo writes
/// `lab-psd` as `lab_psd.wasm`).
fn selects_by_key(module: &str, sel: &str) -> bool {
    if module == sel {
        return true;
    }
    let stem = match (module.strip_prefix("standard:"), crate::share::catalog::parse_ref(module)) {
        (Some(name), _) => name,
        (None, Some((name, _))) => name,
        (None, None) => {
            let file = module.rsplit(['/', '\\']).next().unwrap_or(module);
            file.strip_suffix(".wasm").unwrap_or(file)
        }
    };
    same_name(stem, sel)
}

/// Whether two module names are the same, `-` and `_` taken as one.
fn same_name(a: &str, b: &str) -> bool {
    a.replace('_', "-") == b.replace('_', "-")
}

/// Apply one `KEY=VALUE` to `table`; `manifest_name` as for [`parse_file_named`].
fn apply(
    table: &mut toml::Table,
    setting: &str,
    manifest_name: &dyn Fn(&str) -> Option<String>,
) -> Result<(), String> {
    let (key, raw) = setting.split_once('=').ok_or("expected KEY=VALUE, e.g. --set run.seed=7")?;
    let (key, raw) = (key.trim(), raw.trim());
    if key.is_empty() {
        return Err("the key is empty".into());
    }
    let value = override_value(raw);
    let parts: Vec<&str> = key.split('.').collect();
    let mut here = table;
    for (n, part) in parts.iter().enumerate() {
        let last = n + 1 == parts.len();
        if last {
            here.insert(part.to_string(), value);
            return Ok(());
        }
        let entry =
            here.entry(part.to_string()).or_insert_with(|| toml::Value::Table(toml::Table::new()));
        here = match entry {
            toml::Value::Table(t) => t,
            toml::Value::Array(items) => {
                let sel = parts[n + 1];
                let module = |it: &toml::Value| {
                    it.get("module").and_then(|m| m.as_str()).unwrap_or_default().to_string()
                };
                let idx = match sel.parse::<usize>() {
                    Ok(i) => i,
                    Err(_) => {
                        // By the key first, then by the manifest name.
                        let by_key = items.iter().position(|it| selects_by_key(&module(it), sel));
                        by_key
                            .or_else(|| {
                                items.iter().position(|it| {
                                    manifest_name(&module(it)).is_some_and(|n| same_name(&n, sel))
                                })
                            })
                            .ok_or_else(|| {
                                let known: Vec<String> = items
                                    .iter()
                                    .map(|it| {
                                        let m = module(it);
                                        match manifest_name(&m) {
                                            Some(name) if name != m => format!("`{m}` ({name})"),
                                            _ => format!("`{m}`"),
                                        }
                                    })
                                    .collect();
                                format!(
                                    "no entry of `{part}` uses the module `{sel}`; select one by \
                                     its index from 0 or by its module's name: {}",
                                    known.join(", ")
                                )
                            })?
                    }
                };
                let len = items.len();
                let item = items.get_mut(idx).ok_or_else(|| {
                    format!("`{part}` has {len} entries; index {idx} is out of range")
                })?;
                // Skip the selector part.
                return match item {
                    toml::Value::Table(t) => {
                        let rest = parts[n + 2..].join(".");
                        if rest.is_empty() {
                            return Err(format!("name a key inside `{part}.{sel}`"));
                        }
                        apply(t, &format!("{rest}={raw}"), manifest_name)
                    }
                    _ => Err(format!("`{part}.{sel}` is not a table")),
                };
            }
            _ => return Err(format!("`{}` is a value, not a section", parts[..=n].join("."))),
        };
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levenshtein_worked_values() {
        // Classic worked example (Levenshtein 1966; any textbook): kitten -> sitting = 3.
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("dt", "dt"), 0);
    }

    #[test]
    fn suggestion_picks_the_nearest_key() {
        let m = suggest("unknown field `dtt`, expected one of `dt`, `duration`, `seed`");
        assert!(m.contains("did you mean `dt`?"), "{m}");
        let m = suggest("unknown field `zzzzzzzz`, expected `dt`");
        assert!(!m.contains("did you mean"), "{m}");
    }

    #[test]
    fn line_and_column_are_one_based() {
        let t = "a = 1\nbb = 2\n";
        assert_eq!(line_col(t, 0), (1, 1));
        assert_eq!(line_col(t, 6), (2, 1));
        assert_eq!(line_col(t, 9), (2, 4));
    }

    fn demo() -> String {
        super::super::demo::scenario_text(true)
    }

    #[test]
    fn every_listed_key_exists_and_explains_a_wrong_type() {
        for (pattern, t) in TAKES {
            // Array elements are reached through their lists' own entries.
            if pattern.ends_with("[]") {
                continue;
            }
            let key = pattern.replace("[]", ".0");
            // The example is well typed and the key is a real one.
            let good = match t {
                Takes::Quantity(_, ex) | Takes::Text(ex) => format!("\"{ex}\""),
                Takes::Number(ex) | Takes::Whole(ex) | Takes::List(ex) | Takes::Table(ex) => {
                    ex.to_string()
                }
                Takes::Flag => "true".to_string(),
            };
            // The demo has no altitude_edges, whose two keys are both required.
            let edges = "outputs.altitude_edges={ values = [0, 50], unit = \"km\" }".to_string();
            if let Err(e) = parse_file(&demo(), "demo", &[edges, format!("{key}={good}")]) {
                panic!("{key}={good}: {e}");
            }
            let bad = match t {
                Takes::Quantity(..) => "600",
                Takes::Number(_) => "\"1\"",
                Takes::Whole(_) => "1.5",
                Takes::Flag => "1",
                Takes::Text(_) | Takes::List(_) | Takes::Table(_) => "7",
            };
            let e = parse_file(&demo(), "demo", &[format!("{key}={bad}")]).unwrap_err().0;
            assert!(e.starts_with(&format!("--set {key}={bad}: {key} ")), "{e}");
            assert!(e.contains("e.g. --set"), "{e}");
        }
    }

    #[test]
    fn a_bare_number_for_a_quantity_names_the_key_and_place() {
        let text = demo().replace("dt = \"900 s\"", "dt = 900");
        let line = text.lines().position(|l| l == "dt = 900").unwrap() + 1;
        let e = parse_file(&text, "s.toml", &[]).unwrap_err().0;
        assert!(
            e.starts_with(&format!("s.toml:{line}:6: run.dt needs a quantity with a unit")),
            "{e}"
        );
        assert!(e.contains("e.g. dt = \"600 s\"") && e.contains("bare number 900"), "{e}");
        assert!(e.ends_with("(in [run])"), "{e}");
        let e = parse_file(&demo(), "s.toml", &["run.dt=600".into()]).unwrap_err().0;
        assert!(
            e.contains("run.dt needs a quantity") && e.contains("--set run.dt=\"600 s\""),
            "{e}"
        );
        // An entry of an array of tables is named with its index.
        let text = demo().replace("start = \"12 d\"", "start = 12");
        let e = parse_file(&text, "s.toml", &[]).unwrap_err().0;
        assert!(e.contains("environment.solar_wind[0].start needs a quantity"), "{e}");
        assert!(e.contains("e.g. start = \"12 d\""), "{e}");
        // An entry of a list is named by its index; the example is a value.
        let text = demo().replace("products = [\"netcdf\",", "products = [1,");
        let e = parse_file(&text, "s.toml", &[]).unwrap_err().0;
        assert!(
            e.contains("outputs.products[0] takes text in quotes, e.g. \"csv\"; got the number 1"),
            "{e}"
        );
    }

    #[test]
    fn text_or_fractions_for_a_count_name_the_key() {
        let e =
            parse_file(&demo().replace("seed = 20261202", "seed = \"7\""), "s", &[]).unwrap_err().0;
        assert!(e.contains("run.seed takes a plain whole number") && e.contains("\"7\""), "{e}");
        let e = parse_file(&demo(), "s", &["run.particles=1e5".into()]).unwrap_err().0;
        assert!(e.contains("run.particles takes a plain whole number") && e.contains("1e5"), "{e}");
        let e = parse_file(&demo(), "s", &["run.threads=-2".into()]).unwrap_err().0;
        assert!(e.contains("run.threads takes a whole number >= 0"), "{e}");
        let e = parse_file(&demo(), "s", &["processes.impact-vapor.role=3".into()]).unwrap_err().0;
        assert!(e.contains("processes.impact-vapor.role takes text"), "{e}");
    }

    #[test]
    fn overrides_reach_nested_and_listed_keys() {
        let mut t: toml::Table = toml::from_str(
            "[run]\nseed = 1\n[[processes]]\nmodule = \"standard:impact-vapor\"\n[processes.parameters]\nflux = \"1 x\"\n",
        )
        .unwrap();
        let none = |_: &str| None;
        let apply = |t: &mut toml::Table, s: &str| apply(t, s, &none);
        apply(&mut t, "run.seed=7").unwrap();
        apply(&mut t, "run.dt=600 s").unwrap();
        apply(&mut t, "processes.impact-vapor.parameters.flux=\"2e4 cm^-2 s^-1\"").unwrap();
        apply(&mut t, "processes.0.role=source").unwrap();
        assert_eq!(t["run"]["seed"].as_integer(), Some(7));
        assert_eq!(t["run"]["dt"].as_str(), Some("600 s"));
        let p = &t["processes"][0];
        assert_eq!(p["parameters"]["flux"].as_str(), Some("2e4 cm^-2 s^-1"));
        assert_eq!(p["role"].as_str(), Some("source"));
        assert!(apply(&mut t, "processes.9.role=x").unwrap_err().contains("out of range"));
        assert!(apply(&mut t, "processes.nope.role=x").unwrap_err().contains("`nope`"));
        assert!(apply(&mut t, "noequals").is_err());
    }

    #[test]
    fn a_process_is_selected_by_file_name_or_manifest_name() {
        let mut t: toml::Table = toml::from_str(
            "[[processes]]\nmodule = \"standard:photoionization\"\n\
             [[processes]]\nmodule = \"build/lab_psd_yield.wasm\"\n\
             [[processes]]\nmodule = \"mine.wasm\"\n",
        )
        .unwrap();
        let names = |m: &str| (m == "mine.wasm").then(|| "thermal-release".to_string());
        // The file name with hyphens or underscores, and the manifest name.
        apply(&mut t, "processes.lab-psd-yield.role=source", &names).unwrap();
        apply(&mut t, "processes.lab_psd_yield.unlocked=true", &names).unwrap();
        apply(&mut t, "processes.thermal-release.role=loss", &names).unwrap();
        apply(&mut t, "processes.thermal_release.unlocked=true", &names).unwrap();
        apply(&mut t, "processes.mine.parameters.x=1", &names).unwrap();
        let p = &t["processes"];
        assert_eq!(p[1]["role"].as_str(), Some("source"));
        assert_eq!(p[1]["unlocked"].as_bool(), Some(true));
        assert_eq!(p[2]["role"].as_str(), Some("loss"));
        assert_eq!(p[2]["unlocked"].as_bool(), Some(true));
        assert_eq!(p[2]["parameters"]["x"].as_integer(), Some(1));
        // An unknown name lists the modules with their manifest names.
        let e = apply(&mut t, "processes.nope.role=x", &names).unwrap_err();
        assert!(e.contains("`mine.wasm` (thermal-release)"), "{e}");
    }
}

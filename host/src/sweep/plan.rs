//! The sweep plan: a base scenario, the parameters to vary and how, and
//! the seeds of every point.
//!
//! Why this exists: poorly constrained parameters (the impact
//! vaporization rate, the vapour temperature, the PSD cross-section, the
//! sputtering yield, the diffusion enhancement) are mapped by running the
//! model over a set of values. A plan names them in a TOML file of our own
//! layout; this module checks it, expands it into points (a full grid or
//! a Latin hypercube), each point a list of `--set` overrides, and gives
//! the plan a SHA-256 digest so that shards of one plan can be told from
//! another's. `docs/sweep.md` documents every key.

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use sha2::{Digest, Sha256};

use crate::checkpoint::ScenarioSource;
use crate::scenario::keys::describe;
use crate::scenario::quantity;
use exobound_sdk::{Rng, RngKey};

/// The plan file as written.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PlanFile {
    /// A title for tables and plots.
    #[serde(default)]
    pub title: Option<String>,
    /// The base scenario: a path relative to the plan, or "demo" / "demo-quick".
    pub scenario: String,
    /// Overrides applied to every point, `KEY=VALUE`.
    #[serde(default)]
    pub set: Vec<String>,
    /// "grid" (every combination) or "latin-hypercube".
    #[serde(default = "default_sampling")]
    pub sampling: String,
    /// Latin hypercube: number of points.
    #[serde(default)]
    pub points: Option<usize>,
    /// Latin hypercube: seed of the sampling, dimensionless.
    #[serde(default = "default_sampling_seed")]
    pub sampling_seed: u64,
    /// Run seeds of every point; the point's measures are their means.
    #[serde(default = "default_seeds")]
    pub seeds: Vec<u64>,
    /// The parameters varied.
    #[serde(default)]
    pub parameters: Vec<ParameterEntry>,
}

/// One `[[parameters]]` entry.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ParameterEntry {
    /// The scenario key, as for `--set`, e.g. `processes.impact-vapor.parameters.flux`.
    pub key: String,
    /// Explicit values (TOML values: quantity strings, numbers or words).
    #[serde(default)]
    pub values: Option<Vec<toml::Value>>,
    /// A range instead of a list.
    #[serde(default)]
    pub range: Option<RangeEntry>,
}

/// `range = { from = "...", to = "...", count = N, spacing = "linear" }`.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RangeEntry {
    /// Lower end: a quantity string with its unit, or a number.
    pub from: toml::Value,
    /// Upper end, in the same unit.
    pub to: toml::Value,
    /// Grid: number of values (>= 2); ignored by the Latin hypercube.
    #[serde(default)]
    pub count: Option<usize>,
    /// "linear" or "log".
    #[serde(default = "default_spacing")]
    pub spacing: String,
}

fn default_sampling() -> String {
    "grid".into()
}
fn default_sampling_seed() -> u64 {
    1
}
fn default_seeds() -> Vec<u64> {
    vec![1]
}
fn default_spacing() -> String {
    "linear".into()
}

/// How one parameter's values are chosen.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub enum Axis {
    /// Explicit values.
    List(Vec<Value>),
    /// A continuous range in `unit`; `log` for logarithmic spacing.
    Range {
        /// Lower end, in `unit`.
        from: f64,
        /// Upper end, in `unit`.
        to: f64,
        /// Grid size.
        count: Option<usize>,
        /// Logarithmic spacing.
        log: bool,
        /// The unit, "" for a plain number.
        unit: String,
    },
}

/// One parameter value: its number (NaN for a word), unit and the TOML
/// literal passed as the override.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Value {
    /// Number in `unit` (NaN for a word such as "apex").
    pub number: f64,
    /// Unit, "" if none.
    pub unit: String,
    /// The TOML literal of the override, e.g. `"2e5 cm^-2 s^-1"` with quotes.
    pub literal: String,
}

impl Value {
    fn of_number(x: f64, unit: &str) -> Value {
        let literal = if unit.is_empty() {
            format_number(x)
        } else {
            format!("\"{} {unit}\"", format_number(x))
        };
        Value { number: x, unit: unit.to_string(), literal }
    }
}

/// A number written so that it reads back exactly.
fn format_number(x: f64) -> String {
    let s = format!("{x:e}");
    if s.parse::<f64>().ok() == Some(x) { s } else { format!("{x:?}") }
}

/// A parameter of the plan.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Parameter {
    /// The scenario key.
    pub key: String,
    /// Its values.
    pub axis: Axis,
}

impl Parameter {
    /// The unit of its values, "" if none.
    pub fn unit(&self) -> String {
        match &self.axis {
            Axis::List(v) => v.first().map_or(String::new(), |x| x.unit.clone()),
            Axis::Range { unit, .. } => unit.clone(),
        }
    }
}

/// One point of the plan.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Point {
    /// Index in the plan, from 0.
    pub index: usize,
    /// One value per parameter.
    pub values: Vec<Value>,
}

impl Point {
    /// The point's overrides, `KEY=VALUE`.
    pub fn overrides(&self, params: &[Parameter]) -> Vec<String> {
        params.iter().zip(&self.values).map(|(p, v)| format!("{}={}", p.key, v.literal)).collect()
    }

    /// Directory name of the point, e.g. `p0007`.
    pub fn dir_name(&self) -> String {
        format!("p{:04}", self.index)
    }
}

/// A checked plan.
#[derive(Clone, Debug, Serialize)]
pub struct Plan {
    /// Title.
    pub title: String,
    /// Where the plan came from.
    pub origin: String,
    /// The base scenario.
    #[serde(skip)]
    pub base: ScenarioSource,
    /// The base scenario's origin.
    pub base_origin: String,
    /// Overrides for every point.
    pub set: Vec<String>,
    /// "grid" or "latin-hypercube".
    pub sampling: String,
    /// The parameters.
    pub parameters: Vec<Parameter>,
    /// The points.
    pub points: Vec<Point>,
    /// Run seeds of every point.
    pub seeds: Vec<u64>,
    /// SHA-256 (hex) of the base scenario text, the overrides, the points and the seeds.
    pub digest: String,
}

impl Plan {
    /// The source of point `p` with seed `seed`: the base with the plan's
    /// overrides, the point's and the seed.
    pub fn source(&self, p: &Point, seed: u64, threads: Option<usize>) -> ScenarioSource {
        let mut s = self.base.clone();
        s.overrides.extend(self.set.iter().cloned());
        s.overrides.extend(p.overrides(&self.parameters));
        s.overrides.push(format!("run.seed={seed}"));
        if let Some(t) = threads {
            s.overrides.push(format!("run.threads={t}"));
        }
        s
    }
}

/// Read and check a plan file.
pub fn read(path: &Path) -> Result<Plan, String> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| format!("cannot read the plan `{}`: {e}", path.display()))?;
    let origin = path.display().to_string();
    let file: PlanFile = toml::from_str(&text).map_err(|e| describe(&origin, &text, &e))?;
    let base_dir = path.parent().map(Path::to_path_buf).unwrap_or_else(|| PathBuf::from("."));
    check(&file, &origin, &base_dir).map_err(|e| format!("{origin}: {e}"))
}

/// A range end: a quantity string or a number, as (number, unit).
fn end(v: &toml::Value, what: &str) -> Result<(f64, String), String> {
    match v {
        toml::Value::Float(x) => Ok((*x, String::new())),
        toml::Value::Integer(i) => Ok((*i as f64, String::new())),
        toml::Value::String(s) => quantity::split(s)
            .filter(|(x, _)| x.is_finite())
            .ok_or_else(|| format!("range {what} `{s}` is not a number with a unit")),
        other => Err(format!("range {what} must be a number or a quantity string, not {other}")),
    }
}

fn list_value(v: &toml::Value) -> Result<Value, String> {
    match v {
        toml::Value::Float(x) => Ok(Value::of_number(*x, "")),
        toml::Value::Integer(i) => {
            Ok(Value { number: *i as f64, unit: String::new(), literal: i.to_string() })
        }
        toml::Value::String(s) => Ok(match quantity::split(s) {
            Some((x, unit)) if x.is_finite() => Value { number: x, unit, literal: toml_string(s) },
            _ => Value { number: f64::NAN, unit: String::new(), literal: toml_string(s) },
        }),
        toml::Value::Boolean(b) => Ok(Value {
            number: f64::from(u8::from(*b)),
            unit: String::new(),
            literal: b.to_string(),
        }),
        other => Err(format!("a value must be a number, a string or a boolean, not {other}")),
    }
}

fn toml_string(s: &str) -> String {
    toml::Value::String(s.to_string()).to_string()
}

/// Check a parsed plan; `base_dir` is the plan's directory.
pub fn check(file: &PlanFile, origin: &str, base_dir: &Path) -> Result<Plan, String> {
    let base = match file.scenario.as_str() {
        "demo" => ScenarioSource::demo(false, &[]),
        "demo-quick" => ScenarioSource::demo(true, &[]),
        p => ScenarioSource::file(&base_dir.join(p), &[]).map_err(|e| format!("scenario: {e}"))?,
    };
    if file.parameters.is_empty() {
        return Err("the plan varies nothing: add a [[parameters]] entry".into());
    }
    if file.seeds.is_empty() {
        return Err("seeds: give at least one run seed".into());
    }
    let mut params = Vec::new();
    for (k, p) in file.parameters.iter().enumerate() {
        let at = format!("parameters[{k}] (`{}`)", p.key);
        if !p.key.contains('.') {
            return Err(format!("{at}: key must be a dotted scenario key such as run.dt"));
        }
        let axis = match (&p.values, &p.range) {
            (Some(v), None) => {
                if v.is_empty() {
                    return Err(format!("{at}: values is empty"));
                }
                Axis::List(
                    v.iter()
                        .map(list_value)
                        .collect::<Result<_, _>>()
                        .map_err(|e| format!("{at}: {e}"))?,
                )
            }
            (None, Some(r)) => {
                let (from, u1) = end(&r.from, "from").map_err(|e| format!("{at}: {e}"))?;
                let (to, u2) = end(&r.to, "to").map_err(|e| format!("{at}: {e}"))?;
                if u1 != u2 {
                    return Err(format!(
                        "{at}: range from is in `{u1}` but to is in `{u2}`; use one unit"
                    ));
                }
                let log = match r.spacing.as_str() {
                    "linear" => false,
                    "log" => true,
                    s => return Err(format!("{at}: spacing `{s}`; use \"linear\" or \"log\"")),
                };
                if !(to > from) {
                    return Err(format!("{at}: range needs to > from (got {from} .. {to} {u1})"));
                }
                if log && from <= 0.0 {
                    return Err(format!("{at}: a log range needs from > 0 (got {from} {u1})"));
                }
                if file.sampling == "grid" && r.count.is_none_or(|c| c < 2) {
                    return Err(format!("{at}: a grid range needs count >= 2"));
                }
                Axis::Range { from, to, count: r.count, log, unit: u1 }
            }
            _ => return Err(format!("{at}: give either values = [...] or range = {{ ... }}")),
        };
        params.push(Parameter { key: p.key.clone(), axis });
    }
    let points = match file.sampling.as_str() {
        "grid" => grid(&params),
        "latin-hypercube" => {
            let n = file
                .points
                .filter(|&n| n >= 2)
                .ok_or("a latin-hypercube plan needs points = N (at least 2)".to_string())?;
            latin_hypercube(&params, n, file.sampling_seed)
        }
        s => return Err(format!("sampling `{s}`; use \"grid\" or \"latin-hypercube\"")),
    };
    if points.len() > 100_000 {
        return Err(format!("the plan has {} points; at most 100000", points.len()));
    }
    let mut h = Sha256::new();
    h.update(base.text.as_bytes());
    for s in &file.set {
        h.update(b"\0set\0");
        h.update(s.as_bytes());
    }
    for p in &points {
        h.update(b"\0point\0");
        for o in p.overrides(&params) {
            h.update(o.as_bytes());
            h.update(b"\0");
        }
    }
    for s in &file.seeds {
        h.update(s.to_le_bytes());
    }
    let digest: String = h.finalize().iter().map(|b| format!("{b:02x}")).collect();
    Ok(Plan {
        title: file.title.clone().unwrap_or_else(|| "Parameter sweep".into()),
        origin: origin.to_string(),
        base_origin: base.origin.clone(),
        base,
        set: file.set.clone(),
        sampling: file.sampling.clone(),
        parameters: params,
        points,
        seeds: file.seeds.clone(),
        digest,
    })
}

/// The value at fraction `u` in [0, 1] of a range.
fn range_value(from: f64, to: f64, log: bool, u: f64) -> f64 {
    if log { (from.ln() + u * (to.ln() - from.ln())).exp() } else { from + u * (to - from) }
}

/// Every combination, the last parameter varying fastest.
fn grid(params: &[Parameter]) -> Vec<Point> {
    let levels: Vec<Vec<Value>> = params
        .iter()
        .map(|p| match &p.axis {
            Axis::List(v) => v.clone(),
            Axis::Range { from, to, count, log, unit } => {
                let n = count.unwrap_or(2);
                (0..n)
                    .map(|i| {
                        let u = i as f64 / (n - 1) as f64;
                        // Land exactly on the ends.
                        let x = if i == 0 {
                            *from
                        } else if i == n - 1 {
                            *to
                        } else {
                            range_value(*from, *to, *log, u)
                        };
                        Value::of_number(x, unit)
                    })
                    .collect()
            }
        })
        .collect();
    let total: usize = levels.iter().map(Vec::len).product();
    (0..total)
        .map(|index| {
            let mut rem = index;
            let mut values = vec![Value::of_number(0.0, ""); levels.len()];
            for (k, l) in levels.iter().enumerate().rev() {
                values[k] = l[rem % l.len()].clone();
                rem /= l.len();
            }
            Point { index, values }
        })
        .collect()
}

/// A Latin hypercube of `n` points (McKay, Beckman & Conover 1979): each
/// parameter's range is cut into n equal strata (in log for log ranges),
/// each stratum is used once, at a uniformly drawn place inside it, and
/// the strata are paired across parameters by independent random
/// permutations. A list parameter takes the value whose index is the
/// stratum scaled to the list. Random numbers come from the SDK's
/// counter-based generator keyed by (sampling seed, parameter), so the
/// plan is the same on every machine.
fn latin_hypercube(params: &[Parameter], n: usize, seed: u64) -> Vec<Point> {
    let mut columns: Vec<Vec<Value>> = Vec::new();
    for (k, p) in params.iter().enumerate() {
        let mut rng = Rng::new(RngKey { seed, particle: k as u64, event: 0, stream: 0x5e });
        // Fisher-Yates shuffle of the strata.
        let mut perm: Vec<usize> = (0..n).collect();
        for i in (1..n).rev() {
            let j = ((rng.uniform() * (i + 1) as f64) as usize).min(i);
            perm.swap(i, j);
        }
        let col = perm
            .iter()
            .map(|&s| {
                let u = (s as f64 + rng.uniform()) / n as f64;
                match &p.axis {
                    Axis::Range { from, to, log, unit, .. } => {
                        Value::of_number(range_value(*from, *to, *log, u), unit)
                    }
                    Axis::List(v) => v[((u * v.len() as f64) as usize).min(v.len() - 1)].clone(),
                }
            })
            .collect();
        columns.push(col);
    }
    (0..n)
        .map(|index| Point { index, values: columns.iter().map(|c| c[index].clone()).collect() })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plan(text: &str) -> Result<Plan, String> {
        let f: PlanFile = toml::from_str(text).map_err(|e| e.to_string())?;
        check(&f, "t.toml", Path::new("."))
    }

    #[test]
    fn grids_cover_every_combination() {
        let p = plan(
            "scenario = \"demo-quick\"\nseeds = [1, 2]\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.pattern\"\nvalues = [\"uniform\", \"apex\"]\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.flux\"\n\
             range = { from = \"1e5 cm^-2 s^-1\", to = \"1e7 cm^-2 s^-1\", count = 3, spacing = \"log\" }\n",
        )
        .unwrap();
        assert_eq!(p.points.len(), 6);
        let o = p.points[1].overrides(&p.parameters);
        assert_eq!(o[0], "processes.impact-vapor.parameters.pattern=\"uniform\"");
        // Log spacing: the geometric mean of 1e5 and 1e7 is 1e6 (definition).
        assert!((p.points[1].values[1].number / 1e6 - 1.0).abs() < 1e-12, "{:?}", p.points[1]);
        assert_eq!(p.points[2].values[1].literal, "\"1e7 cm^-2 s^-1\"");
        assert_eq!(p.parameters[1].unit(), "cm^-2 s^-1");
        // The digest names the plan: another seed list gives another digest.
        let q = plan(
            "scenario = \"demo-quick\"\nseeds = [1, 3]\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.pattern\"\nvalues = [\"uniform\", \"apex\"]\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.flux\"\n\
             range = { from = \"1e5 cm^-2 s^-1\", to = \"1e7 cm^-2 s^-1\", count = 3, spacing = \"log\" }\n",
        )
        .unwrap();
        assert_ne!(p.digest, q.digest);
    }

    #[test]
    fn latin_hypercube_uses_each_stratum_once() {
        let n = 10;
        let p = plan(&format!(
            "scenario = \"demo-quick\"\nsampling = \"latin-hypercube\"\npoints = {n}\n\
             [[parameters]]\nkey = \"a.b\"\nrange = {{ from = 0.0, to = 1.0 }}\n\
             [[parameters]]\nkey = \"c.d\"\nrange = {{ from = \"2000 K\", to = \"5000 K\" }}\n"
        ))
        .unwrap();
        assert_eq!(p.points.len(), n);
        // The defining property of a Latin hypercube (McKay et al. 1979):
        // every one of the n strata of every parameter holds one point.
        for (k, (lo, hi)) in [(0.0, 1.0), (2000.0, 5000.0)].into_iter().enumerate() {
            let mut strata: Vec<usize> = p
                .points
                .iter()
                .map(|pt| (((pt.values[k].number - lo) / (hi - lo)) * n as f64) as usize)
                .collect();
            strata.sort();
            assert_eq!(strata, (0..n).collect::<Vec<_>>());
        }
        // Reproducible from the sampling seed.
        let again = plan(&format!(
            "scenario = \"demo-quick\"\nsampling = \"latin-hypercube\"\npoints = {n}\n\
             [[parameters]]\nkey = \"a.b\"\nrange = {{ from = 0.0, to = 1.0 }}\n\
             [[parameters]]\nkey = \"c.d\"\nrange = {{ from = \"2000 K\", to = \"5000 K\" }}\n"
        ))
        .unwrap();
        assert_eq!(p.digest, again.digest);
    }

    #[test]
    fn bad_plans_are_refused_with_the_entry() {
        let e = plan("scenario = \"demo-quick\"\n").unwrap_err();
        assert!(e.contains("[[parameters]]"), "{e}");
        let e = plan("scenario = \"demo-quick\"\n[[parameters]]\nkey = \"a.b\"\nrange = { from = \"1 K\", to = \"2 km\", count = 2 }\n").unwrap_err();
        assert!(e.contains("parameters[0]") && e.contains("one unit"), "{e}");
        let e = plan("scenario = \"demo-quick\"\n[[parameters]]\nkey = \"a.b\"\nrange = { from = 1.0, to = 2.0 }\n").unwrap_err();
        assert!(e.contains("count >= 2"), "{e}");
        let e = plan("scenario = \"nothere.toml\"\n[[parameters]]\nkey = \"a.b\"\nvalues = [1]\n")
            .unwrap_err();
        assert!(e.contains("nothere.toml"), "{e}");
        assert!(toml::from_str::<PlanFile>("scenario = \"x\"\nseed = [1]\n").is_err());
    }
}

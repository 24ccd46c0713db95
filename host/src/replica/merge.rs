//! Merging finished replicas into one output directory: the replica mean,
//! with standard errors from the scatter between replicas.
//!
//! Why this exists: N replicas of one scenario (see [`super`]) are N
//! independent estimates of the same fields. Their mean is the best
//! estimate, and the sample standard deviation between them over sqrt(N)
//! is its standard error, measured directly rather than inferred from
//! window-to-window scatter within one run. The merged directory has the
//! layout of a run's (`docs/outputs.md`), so `observe`, `compare` and
//! user scripts read it unchanged; the extra error variables and columns
//! are additions (`docs/replicas.md`).
//!
//! The set is checked before anything is written: one scenario (by
//! [`super::scenario_digest`]), one base seed, one N, no index twice, none
//! missing (unless `allow_partial`), one grid. Replicas are sorted by index
//! and every sum runs in that order, so the result is the same bit for bit
//! whatever order the directories are given in. The output is written like
//! a run's: under the writer lock, into `OUT.partial`, renamed at the end.

use std::path::{Path, PathBuf};

use exobound_products::{AttrValue, Dataset, Variable};
use serde_json::{Map, Value, json};

use super::tables::{self, SPECS, Table};
use super::{ProvenanceFile, ReplicaRun, first_difference, identity, parse_marker};
use crate::output::{PROVENANCE_FILE, atomic_write, staged};
use crate::scenario::PlotFormat;
use crate::tally::profiles;

/// The run's NetCDF file name.
pub const NETCDF_FILE: &str = "exosphere.nc";

/// The run's summary file name.
pub const SUMMARY_FILE: &str = "summary.json";

/// Variables that are part of the grid, not estimates: copied, and required
/// to be equal in every replica (besides the coordinate variables and the
/// variables other variables name as `bounds`, `cell_measures` or
/// `coordinates`; see [`is_grid`]).
const GRID_VARIABLES: [&str; 1] = ["spin_up"];

/// Whether `v` of `ds` is part of the grid: a coordinate variable, a variable
/// another one names in `bounds`, `cell_measures` or `coordinates` (CF 1.8
/// sections 5, 7.1 and 7.2), or one of [`GRID_VARIABLES`].
fn is_grid(ds: &Dataset, v: &Variable) -> bool {
    v.is_coordinate()
        || GRID_VARIABLES.contains(&v.name.as_str())
        || ds.variables.iter().any(|o| {
            ["bounds", "cell_measures", "coordinates"].iter().any(|k| {
                o.attribute(k)
                    .and_then(AttrValue::as_text)
                    .is_some_and(|t| t.split_whitespace().any(|w| w == v.name))
            })
        })
}

/// Mean of `xs` and its standard error, the sample standard deviation
/// (n - 1 in the denominator) over sqrt(n), both in the unit of `xs`, with
/// the values summed in the order given. Values that are all the same
/// (bit for bit) give that value exactly and a standard error of 0; any
/// missing (non-finite) value makes both NaN; one value has a NaN error.
pub fn mean_and_standard_error(xs: &[f64]) -> (f64, f64) {
    let Some(&first) = xs.first() else { return (f64::NAN, f64::NAN) };
    if xs.iter().any(|x| !x.is_finite()) {
        return (f64::NAN, f64::NAN);
    }
    if xs.iter().all(|x| x.to_bits() == first.to_bits()) {
        return (first, if xs.len() > 1 { 0.0 } else { f64::NAN });
    }
    let n = xs.len() as f64;
    let mut sum = 0.0;
    for x in xs {
        sum += x;
    }
    let mean = sum / n;
    let mut squares = 0.0;
    for x in xs {
        squares += (x - mean) * (x - mean);
    }
    (mean, (squares / (n - 1.0) / n).sqrt())
}

/// Options of [`merge`].
#[derive(Clone, Copy, Debug, Default)]
pub struct MergeOptions {
    /// Merge an incomplete set (at least two replicas); the standard errors
    /// then use the number merged.
    pub allow_partial: bool,
}

/// What [`merge`] did.
#[derive(Clone, Debug)]
pub struct MergeReport {
    /// The merged output directory.
    pub out: PathBuf,
    /// N, the number of replicas in the set, dimensionless.
    pub count: usize,
    /// The replica indices merged, ascending.
    pub merged: Vec<usize>,
    /// The base seed of the set.
    pub base_seed: u64,
    /// The scenario digest every replica shares, hex.
    pub scenario_digest: String,
    /// Files written, relative to `out`.
    pub files: Vec<String>,
    /// Remarks for the user (a partial set, products not redrawn).
    pub notes: Vec<String>,
}

/// Everything the merged directory holds, computed before it is written.
#[derive(Clone, Debug)]
pub struct Merged {
    /// `provenance.json`, with the `replicas` record.
    pub provenance: ProvenanceFile,
    /// `summary.json`, with `standard_error` and `replicas`.
    pub summary: Value,
    /// `exosphere.nc`, if the replicas wrote one.
    pub dataset: Option<Dataset>,
    /// The CSV tables the replicas wrote, by path inside the directory.
    pub tables: Vec<(&'static str, Table)>,
    /// Whether to draw the plots.
    pub plots: bool,
    /// Their file format: the one the replicas' plots were written in.
    pub plot_format: PlotFormat,
    /// Remarks for the user.
    pub notes: Vec<String>,
}

impl Merged {
    /// The merged table at `file` (e.g. `ledger.csv`), if written.
    pub fn table(&self, file: &str) -> Option<&Table> {
        self.tables.iter().find(|(f, _)| *f == file).map(|(_, t)| t)
    }
}

/// Read the replicas in `dirs`, check that they form one set, and sort
/// them by index. Each refusal names the directory and the fix.
pub fn check_set(dirs: &[PathBuf], opts: &MergeOptions) -> Result<Vec<ReplicaRun>, String> {
    if dirs.len() < 2 {
        return Err(format!(
            "give at least two replica directories to merge ({} given), e.g. `exobound \
             merge-replicas rep-0 rep-1 rep-2 --out merged`",
            dirs.len()
        ));
    }
    let mut runs = dirs.iter().map(|d| ReplicaRun::read(d)).collect::<Result<Vec<_>, _>>()?;
    // One order for every check and every sum, whatever the order given.
    runs.sort_by(|a, b| {
        a.marker.replica.index.cmp(&b.marker.replica.index).then_with(|| a.dir.cmp(&b.dir))
    });
    let r0 = &runs[0];
    for r in &runs[1..] {
        if r.digest != r0.digest {
            let diff = first_difference(&identity(&r0.provenance), &identity(&r.provenance))
                .unwrap_or_else(|| "none found".into());
            return Err(format!(
                "`{}` is a replica of another scenario than `{}` (scenario digest {} vs {}; \
                 first difference, `{}` vs `{}`: {diff}); merge only replicas of one scenario: \
                 leave it out, or rerun it with the same scenario file, --set overrides, modules \
                 and exobound version as the others",
                r.dir.display(),
                r0.dir.display(),
                &r.digest[..12],
                &r0.digest[..12],
                r0.dir.display(),
                r.dir.display()
            ));
        }
        if r.marker.base_seed != r0.marker.base_seed {
            return Err(format!(
                "`{}` is replica {} of base seed {}, but `{}` is of base seed {}; the replicas \
                 of one set share their base seed: rerun it with `--seed {} --replica {}`, or \
                 leave it out",
                r.dir.display(),
                r.marker.replica,
                r.marker.base_seed,
                r0.dir.display(),
                r0.marker.base_seed,
                r0.marker.base_seed,
                r.marker.replica
            ));
        }
        if r.marker.replica.count != r0.marker.replica.count {
            return Err(format!(
                "`{}` is replica {} but `{}` is replica {}: every replica of a set is made \
                 with the same N; rerun it with `--replica I/{}`, or leave it out",
                r.dir.display(),
                r.marker.replica,
                r0.dir.display(),
                r0.marker.replica,
                r0.marker.replica.count
            ));
        }
    }
    for pair in runs.windows(2) {
        if pair[0].marker.replica.index == pair[1].marker.replica.index {
            return Err(format!(
                "replica {} is given twice: `{}` and `{}`; give each replica once (if they are \
                 different runs, one was made with the wrong --replica: rerun it with the index \
                 that is missing)",
                pair[0].marker.replica,
                pair[0].dir.display(),
                pair[1].dir.display()
            ));
        }
    }
    let n = r0.marker.replica.count;
    let have: Vec<usize> = runs.iter().map(|r| r.marker.replica.index).collect();
    let missing: Vec<usize> = (0..n).filter(|i| !have.contains(i)).collect();
    if !missing.is_empty() && !opts.allow_partial {
        let list = |v: &[usize]| v.iter().map(usize::to_string).collect::<Vec<_>>().join(", ");
        return Err(format!(
            "replica{} {} of {n} {} missing (given: {}, in `{}`{}); run each with `exobound run \
             SCENARIO --replica I/{n} --out DIR` (the same scenario, --seed and --set as the \
             others) and merge again, or merge the {} given with --allow-partial",
            if missing.len() == 1 { "" } else { "s" },
            list(&missing),
            if missing.len() == 1 { "is" } else { "are" },
            list(&have),
            runs[0].dir.display(),
            if runs.len() > 1 { " ..." } else { "" },
            runs.len()
        ));
    }
    Ok(runs)
}

/// `out` must be none of the replica directories, nor hold or lie inside one.
fn check_out(out: &Path, runs: &[ReplicaRun]) -> Result<(), String> {
    let canon = |p: &Path| std::fs::canonicalize(p).or_else(|_| std::path::absolute(p));
    let o = canon(out).map_err(|e| format!("cannot resolve --out `{}`: {e}", out.display()))?;
    for r in runs {
        let d = canon(&r.dir).map_err(|e| format!("cannot resolve `{}`: {e}", r.dir.display()))?;
        if d.starts_with(&o) || o.starts_with(&d) {
            return Err(format!(
                "--out `{}` is, holds or lies inside the replica directory `{}`, which the \
                 merge reads; choose another --out",
                out.display(),
                r.dir.display()
            ));
        }
    }
    Ok(())
}

/// Which products a run directory holds: (NetCDF, CSV tables, plots).
fn product_files(dir: &Path) -> (bool, bool, bool) {
    (dir.join(NETCDF_FILE).is_file(), dir.join(SPECS[0].file).is_file(), dir.join("plots").is_dir())
}

/// Merge the finished replicas in `dirs` (any order) into the output
/// directory `out`: checked first ([`check_set`]), then computed, then
/// written under the writer lock into `out.partial` and renamed to `out`.
pub fn merge(dirs: &[PathBuf], out: &Path, opts: &MergeOptions) -> Result<MergeReport, String> {
    let runs = check_set(dirs, opts)?;
    check_out(out, &runs)?;
    let merged = merge_products(&runs)?;
    let files = staged(out, |dir| write(dir, &merged))?;
    Ok(MergeReport {
        out: out.components().collect(),
        count: runs[0].marker.replica.count,
        merged: runs.iter().map(|r| r.marker.replica.index).collect(),
        base_seed: runs[0].marker.base_seed,
        scenario_digest: runs[0].digest.clone(),
        files,
        notes: merged.notes,
    })
}

/// Read every replica's products and merge them (nothing is written).
pub fn merge_products(runs: &[ReplicaRun]) -> Result<Merged, String> {
    let (netcdf, csv, plots) = product_files(&runs[0].dir);
    let mut expected = vec![SUMMARY_FILE.to_string()];
    if netcdf {
        expected.push(NETCDF_FILE.into());
    }
    if csv {
        expected.extend(SPECS.iter().map(|s| s.file.to_string()));
    }
    for r in &runs[1..] {
        for f in &expected {
            if !r.dir.join(f).is_file() {
                return Err(format!(
                    "`{}` is missing, though `{}` has it; that replica is incomplete: rerun it",
                    r.dir.join(f).display(),
                    runs[0].dir.join(f).display()
                ));
            }
        }
    }
    let n = runs[0].marker.replica.count;
    let indices: Vec<usize> = runs.iter().map(|r| r.marker.replica.index).collect();
    let mut notes = Vec::new();
    if indices.len() < n {
        notes.push(format!(
            "partial set: {} of {n} replicas merged (indices {:?}); standard errors use {}",
            indices.len(),
            indices,
            indices.len()
        ));
    }
    let dataset = if netcdf {
        let mut sets = Vec::with_capacity(runs.len());
        for r in runs {
            let p = r.dir.join(NETCDF_FILE);
            let ds = exobound_products::read_netcdf(&p)
                .map_err(|e| format!("cannot read `{}`: {e}; rerun that replica", p.display()))?;
            sets.push((p, ds));
        }
        Some(merge_dataset(runs, &sets)?)
    } else {
        None
    };
    let (mut merged_tables, mut ledgers) = (Vec::new(), None);
    if csv {
        for spec in &SPECS {
            let mut inputs = Vec::with_capacity(runs.len());
            for r in runs {
                let p = r.dir.join(spec.file);
                let t = Table::read(&p)?;
                inputs.push((p, t));
            }
            merged_tables.push((spec.file, tables::merge_table(spec, &inputs)?));
            if spec.file == SPECS[0].file {
                ledgers = Some(inputs);
            }
        }
    }
    let mut summaries = Vec::with_capacity(runs.len());
    for r in runs {
        let p = r.dir.join(SUMMARY_FILE);
        let text = std::fs::read_to_string(&p)
            .map_err(|e| format!("cannot read `{}`: {e}; rerun that replica", p.display()))?;
        let v: Value = serde_json::from_str(&text)
            .map_err(|e| format!("`{}` is not JSON ({e}); rerun that replica", p.display()))?;
        summaries.push((p, v));
    }
    let initial = summaries
        .iter()
        .map(|(p, s)| {
            s.pointer("/ledger/initial_stock").and_then(Value::as_f64).ok_or_else(|| {
                format!("`{}` has no ledger.initial_stock; rerun that replica", p.display())
            })
        })
        .collect::<Result<Vec<f64>, String>>()?;
    let ledger = merged_tables.iter_mut().find(|(f, _)| *f == SPECS[0].file);
    let worst_step = match (ledger, &ledgers) {
        (Some((_, merged)), Some(inputs)) => Some(tables::close_ledger(merged, inputs, &initial)?),
        _ => None,
    };
    let summary = merge_summary(runs, &summaries, dataset.as_ref(), worst_step)?;
    let provenance = merge_provenance(runs);
    let drawn = plots && netcdf && csv;
    if plots && !drawn {
        notes.push(
            "plots not drawn: they are drawn from the merged NetCDF file and CSV tables, and \
             the replicas lack one of them (outputs.products)"
                .into(),
        );
    }
    let plot_format = plot_format_of(&runs[0].dir.join("plots"));
    Ok(Merged {
        provenance,
        summary,
        dataset,
        tables: merged_tables,
        plots: drawn,
        plot_format,
        notes,
    })
}

/// The format the plots in `dir` were written in (`outputs.plot_format` of the replicas), read
/// from which files its column map has; PNG when it has neither.
fn plot_format_of(dir: &Path) -> PlotFormat {
    let has = |ext: &str| dir.join(format!("column_map.{ext}")).is_file();
    match (has("png"), has("svg")) {
        (true, true) => PlotFormat::Both,
        (false, true) => PlotFormat::Svg,
        _ => PlotFormat::Png,
    }
}

/// Write `m` into the staging directory `dir`; the files written, relative.
fn write(dir: &Path, m: &Merged) -> Result<Vec<String>, String> {
    let mut files = Vec::new();
    // Provenance is serialised from its typed record, so its fields keep a
    // run's order.
    let write_json = |name: &str, text: serde_json::Result<String>| -> Result<(), String> {
        let text = text.map_err(|e| e.to_string())?;
        // Module text stays escaped when printed, as in a run's JSON files.
        let mut text = crate::text::json_printable(&text).into_owned();
        text.push('\n');
        atomic_write(&dir.join(name), text.as_bytes())
            .map_err(|e| format!("cannot write `{name}`: {e}"))
    };
    write_json(PROVENANCE_FILE, serde_json::to_string_pretty(&m.provenance))?;
    files.push(PROVENANCE_FILE.to_string());
    write_json(SUMMARY_FILE, serde_json::to_string_pretty(&m.summary))?;
    files.push(SUMMARY_FILE.to_string());
    if let Some(ds) = &m.dataset {
        exobound_products::write_netcdf(ds, &dir.join(NETCDF_FILE)).map_err(|e| e.to_string())?;
        files.push(NETCDF_FILE.to_string());
    }
    for (file, table) in &m.tables {
        let path = dir.join(file);
        if let Some(parent) = path.parent() {
            std::fs::create_dir_all(parent)
                .map_err(|e| format!("cannot create `{}`: {e}", parent.display()))?;
        }
        atomic_write(&path, table.to_csv().as_bytes())
            .map_err(|e| format!("cannot write `{file}`: {e}"))?;
        files.push(file.to_string());
    }
    if m.plots {
        files.extend(super::figures::draw_all(&dir.join("plots"), m)?);
    }
    Ok(files)
}

/// Which replicas, as text for the products: `M of N replicas (indices
/// ...) of base seed S`.
fn describe(runs: &[ReplicaRun]) -> String {
    let idx: Vec<String> = runs.iter().map(|r| r.marker.replica.index.to_string()).collect();
    format!(
        "{} of {} replicas (indices {}) of base seed {}",
        runs.len(),
        runs[0].marker.replica.count,
        idx.join(", "),
        runs[0].marker.base_seed
    )
}

/// The merged NetCDF dataset: grids checked equal, every other variable
/// averaged, with a `<name>_error` variable (same dimensions and units)
/// holding the standard error between replicas.
fn merge_dataset(runs: &[ReplicaRun], sets: &[(PathBuf, Dataset)]) -> Result<Dataset, String> {
    let (p0, d0) = &sets[0];
    let mismatch = |p: &Path, what: String| {
        format!(
            "`{}` does not match `{}`: {what}; the replicas do not share a grid: rerun them \
             with one scenario and one exobound version",
            p.display(),
            p0.display()
        )
    };
    for (p, d) in &sets[1..] {
        if d.dimensions != d0.dimensions {
            let diff = d
                .dimensions
                .iter()
                .zip(&d0.dimensions)
                .find(|(a, b)| a != b)
                .map(|(a, b)| format!("dimension {} = {} vs {} = {}", a.0, a.1, b.0, b.1))
                .unwrap_or_else(|| "another number of dimensions".into());
            return Err(mismatch(p, diff));
        }
        let names = |x: &Dataset| -> Vec<(String, Vec<String>)> {
            x.variables.iter().map(|v| (v.name.clone(), v.dimensions.clone())).collect()
        };
        if names(d) != names(d0) {
            return Err(mismatch(p, "other variables".into()));
        }
        for (v, v0) in d.variables.iter().zip(&d0.variables) {
            let grid = is_grid(d0, v0);
            let same = v.data.len() == v0.data.len()
                && v.data.iter().zip(&v0.data).all(|(a, b)| a.to_bits() == b.to_bits());
            if !same && (grid || v.data.len() != v0.data.len()) {
                return Err(mismatch(p, format!("the values of `{}` differ", v0.name)));
            }
        }
    }
    let mut out = Dataset {
        dimensions: d0.dimensions.clone(),
        variables: Vec::new(),
        attributes: Vec::new(),
    };
    let mut xs = vec![0.0; sets.len()];
    for (k, v0) in d0.variables.iter().enumerate() {
        if is_grid(d0, v0) {
            out.variables.push(v0.clone());
            continue;
        }
        let n = v0.data.len();
        let (mut mean, mut se) = (Vec::with_capacity(n), Vec::with_capacity(n));
        for i in 0..n {
            for (slot, (_, d)) in xs.iter_mut().zip(sets) {
                *slot = d.variables[k].data[i];
            }
            let (m, s) = mean_and_standard_error(&xs);
            mean.push(m);
            se.push(s);
        }
        let err_name = format!("{}_error", v0.name);
        let units = v0.attribute("units").and_then(AttrValue::as_text).unwrap_or("1");
        let long = v0.attribute("long_name").and_then(AttrValue::as_text).unwrap_or(&v0.name);
        let dims: Vec<&str> = v0.dimensions.iter().map(String::as_str).collect();
        let mut err = Variable::new(&err_name, &dims, se, units).with(
            "long_name",
            format!(
                "standard error of the replica mean (sample standard deviation / sqrt({})) of: \
                 {long}",
                runs.len()
            ),
        );
        // The error lives on the same cells as the mean (CF 1.8 sections 5 and 7.2).
        for key in ["coordinates", "cell_measures"] {
            if let Some(value) = v0.attribute(key) {
                err = err.with(key, value.clone());
            }
        }
        out.variables.push(
            Variable { data: mean, ..v0.clone() }.with("ancillary_variables", err_name.as_str()),
        );
        out.variables.push(err);
    }
    for (name, value) in &d0.attributes {
        let value = match (name.as_str(), value) {
            ("seed", _) => AttrValue::Number(runs[0].marker.base_seed as f64),
            // The merge appends its line to the replicas' history (CF 1.8 section 2.6.2),
            // without a date so that merging again gives the same bytes.
            // Each replica's own line names its seed, so the set is described instead.
            ("history", AttrValue::Text(_)) => {
                let text = |k: &str| d0.attribute(k).and_then(AttrValue::as_text).unwrap_or("");
                let kept: Vec<&str> = text("overrides")
                    .split("; ")
                    .filter(|o| !o.is_empty() && parse_marker(o).is_none())
                    .collect();
                let overrides = if kept.is_empty() {
                    "no overrides".to_string()
                } else {
                    format!("overrides {}", kept.join("; "))
                };
                AttrValue::Text(format!(
                    "exobound {v} run --replica: scenario {}, {overrides}\nexobound {v} \
                     merge-replicas: mean of {} (no date: reproducible)",
                    text("scenario_origin"),
                    describe(runs),
                    v = env!("CARGO_PKG_VERSION"),
                ))
            }
            ("overrides", AttrValue::Text(t)) => AttrValue::Text(
                t.split("; ")
                    .filter(|o| !o.is_empty() && parse_marker(o).is_none())
                    .collect::<Vec<_>>()
                    .join("; "),
            ),
            _ => value.clone(),
        };
        out.attributes.push((name.clone(), value));
    }
    let seeds: Vec<String> =
        runs.iter().map(|r| format!("{}:{}", r.marker.replica.index, r.marker.seed)).collect();
    let set = |ds: &mut Dataset, k: &str, v: AttrValue| ds.attributes.push((k.to_string(), v));
    set(
        &mut out,
        "replicas",
        AttrValue::Text(format!(
            "mean of {}; each <name>_error variable is the standard error of that mean between \
             the replicas (sample standard deviation / sqrt({})), in the variable's units",
            describe(runs),
            runs.len()
        )),
    );
    set(&mut out, "replica_count", AttrValue::Number(runs[0].marker.replica.count as f64));
    set(
        &mut out,
        "replica_indices",
        AttrValue::Numbers(runs.iter().map(|r| r.marker.replica.index as f64).collect()),
    );
    set(&mut out, "replica_seeds", AttrValue::Text(seeds.join(", ")));
    set(&mut out, "scenario_digest", AttrValue::Text(runs[0].digest.clone()));
    Ok(out)
}

/// A finite number, or JSON null (as in a run's summary).
fn num(x: f64) -> Value {
    if x.is_finite() { json!(x) } else { Value::Null }
}

/// Standard errors of values every replica has the same: 0 for numbers,
/// null for nulls, `None` for text.
fn zero_errors(v: &Value) -> Option<Value> {
    match v {
        Value::Number(_) => Some(json!(0.0)),
        Value::Null => Some(Value::Null),
        Value::Array(a) => {
            Some(Value::Array(a.iter().map(|x| zero_errors(x).unwrap_or(Value::Null)).collect()))
        }
        Value::Object(o) => {
            let m: Map<String, Value> =
                o.iter().filter_map(|(k, x)| zero_errors(x).map(|e| (k.clone(), e))).collect();
            (!m.is_empty()).then_some(Value::Object(m))
        }
        _ => None,
    }
}

/// The mean tree and the standard-error tree of one JSON value as every
/// replica wrote it (`files` name them, for messages).
fn merge_json(
    vals: &[&Value],
    at: &str,
    files: &[PathBuf],
) -> Result<(Value, Option<Value>), String> {
    let v0 = vals[0];
    if vals.iter().all(|v| *v == v0) {
        return Ok((v0.clone(), zero_errors(v0)));
    }
    let shape = |k: usize| {
        format!(
            "`{}` differs in layout from `{}` at `{at}`; it was written by another exobound \
             version: rerun it with this one",
            files[k].display(),
            files[0].display()
        )
    };
    let join = |k: &str| if at.is_empty() { k.to_string() } else { format!("{at}.{k}") };
    if vals.iter().all(|v| v.is_number() || v.is_null()) {
        let xs: Vec<f64> = vals.iter().map(|v| v.as_f64().unwrap_or(f64::NAN)).collect();
        let (m, s) = mean_and_standard_error(&xs);
        return Ok((num(m), Some(num(s))));
    }
    match v0 {
        Value::Object(o0) => {
            let (mut mean, mut se) = (Map::new(), Map::new());
            for (k, v) in vals.iter().enumerate() {
                let same_keys = v.as_object().is_some_and(|o| {
                    o.len() == o0.len() && o.keys().zip(o0.keys()).all(|(a, b)| a == b)
                });
                if !same_keys {
                    return Err(shape(k));
                }
            }
            for key in o0.keys() {
                let sub: Vec<&Value> = vals.iter().map(|v| &v[key.as_str()]).collect();
                let (m, s) = merge_json(&sub, &join(key), files)?;
                mean.insert(key.clone(), m);
                if let Some(s) = s {
                    se.insert(key.clone(), s);
                }
            }
            Ok((Value::Object(mean), (!se.is_empty()).then_some(Value::Object(se))))
        }
        Value::Array(a0) => {
            if let Some(k) =
                vals.iter().position(|v| v.as_array().is_none_or(|a| a.len() != a0.len()))
            {
                return Err(shape(k));
            }
            let (mut mean, mut se) = (Vec::new(), Vec::new());
            for i in 0..a0.len() {
                let sub: Vec<&Value> = vals.iter().map(|v| &v[i]).collect();
                let (m, s) = merge_json(&sub, &format!("{at}[{i}]"), files)?;
                mean.push(m);
                se.push(s.unwrap_or(Value::Null));
            }
            Ok((Value::Array(mean), Some(Value::Array(se))))
        }
        Value::String(_) if vals.iter().all(|v| v.is_string()) => {
            // Words that differ between replicas (e.g. the direction of a
            // shift near zero) are set from the merged numbers afterwards.
            Ok((Value::String("differs between replicas".into()), None))
        }
        _ => Err(shape(vals.iter().position(|v| *v != v0).unwrap_or(0))),
    }
}

/// The merged `summary.json`: every number the replica mean, the
/// `standard_error` tree beside it, and the numbers that are not means
/// (seed, performance, ledger closure, peaks, shift direction, the
/// uncertainties) set as `docs/replicas.md` describes.
fn merge_summary(
    runs: &[ReplicaRun],
    summaries: &[(PathBuf, Value)],
    ds: Option<&Dataset>,
    worst_step: Option<f64>,
) -> Result<Value, String> {
    let files: Vec<PathBuf> = summaries.iter().map(|(p, _)| p.clone()).collect();
    let vals: Vec<&Value> = summaries.iter().map(|(_, v)| v).collect();
    let (mut s, se) = merge_json(&vals, "", &files)?;
    let mut se = match se {
        Some(Value::Object(m)) => m,
        _ => Map::new(),
    };
    let m = runs.len();
    let Some(obj) = s.as_object_mut() else {
        return Err(format!("`{}` is not a JSON object; rerun that replica", files[0].display()));
    };
    obj.insert("seed".into(), json!(runs[0].marker.base_seed));
    se.remove("seed");

    // Performance: totals over the replicas, not means.
    let pick = |p: &str| -> Vec<f64> {
        vals.iter().map(|v| v.pointer(p).and_then(Value::as_f64).unwrap_or(f64::NAN)).collect()
    };
    let wall: f64 = pick("/performance/wall_time/value").iter().sum();
    let hops: u64 = vals
        .iter()
        .map(|v| v.pointer("/performance/particle_hops").and_then(Value::as_u64).unwrap_or(0))
        .sum();
    let threads = vals
        .iter()
        .filter_map(|v| v.pointer("/performance/threads").and_then(Value::as_u64))
        .max()
        .unwrap_or(0);
    let note = format!(
        "wall-clock figures summed over the {m} merged replicas (threads: the largest); the \
         only part of the outputs that differs between identical runs"
    );
    let rate = if wall > 0.0 { hops as f64 / wall } else { f64::NAN };
    obj.insert(
        "performance".into(),
        json!({
            "note": note,
            "wall_time": { "value": num(wall), "unit": "s" },
            "particle_hops": hops,
            "hops_per_second": { "value": num(rate), "unit": "s^-1" },
            "threads": threads,
        }),
    );
    se.remove("performance");

    // The ledger of the mean closes as each replica's does. Its imbalance
    // is the mean of theirs (it is linear in the ledger), each recovered
    // from the replica's own closure error and scale, so no list of the
    // outflows is needed (see `tables::close_ledger`).
    let total = |v: &Value| {
        let f = |k: &str| v.pointer(&format!("/ledger/{k}")).and_then(Value::as_f64);
        let stock = f("final_in_flight").zip(f("final_adsorbed")).map(|(a, b)| a + b);
        let scale = tables::closure_scale(
            f("supplied_from_bulk").unwrap_or(f64::NAN),
            f("initial_stock").unwrap_or(f64::NAN),
            stock.unwrap_or(f64::NAN),
        );
        (f("closure_error_run").unwrap_or(f64::NAN), scale)
    };
    let imbalances: Vec<f64> = vals
        .iter()
        .map(|v| {
            let (c, scale) = total(v);
            c * scale
        })
        .collect();
    let run_closure = mean_and_standard_error(&imbalances).0 / total(&s).1;
    let Some(obj) = s.as_object_mut() else {
        return Err(format!("`{}` is not a JSON object; rerun that replica", files[0].display()));
    };
    if let Some(l) = obj.get_mut("ledger").and_then(Value::as_object_mut) {
        l.insert("closure_error_run".into(), num(run_closure));
        l.insert("closure_error_worst_step".into(), num(worst_step.unwrap_or(f64::NAN)));
        if let Some(e) = se.get_mut("ledger").and_then(Value::as_object_mut) {
            e.remove("closure_error_run");
            e.remove("closure_error_worst_step");
        }
    }

    // Shape measures: the mean of the replicas' estimates, with the
    // standard error between them as the uncertainty.
    let note = format!(
        "; merged: mean of the {m} replicas' values; uncertainty = standard error between replicas"
    );
    let err_at = |se: &Map<String, Value>, key: &str, field: &str| {
        se.get(key).and_then(|o| o.get(field)).cloned().unwrap_or(Value::Null)
    };
    if let Some(e) = obj.get_mut("equatorial_column_peak").and_then(Value::as_object_mut) {
        let shift = e.get("shift_deg").and_then(Value::as_f64).unwrap_or(f64::NAN);
        let towards =
            if shift.is_finite() { profiles::shift_direction(shift) } else { "undefined" };
        e.insert("towards".into(), json!(towards));
        e.insert("uncertainty_deg".into(), err_at(&se, "equatorial_column_peak", "shift_deg"));
        restate_uncertainty(e, "method", &note);
    }
    if let Some(e) = obj.get_mut("latitude_profile_fit").and_then(Value::as_object_mut) {
        e.insert("uncertainty".into(), err_at(&se, "latitude_profile_fit", "cos_power_n"));
        restate_uncertainty(e, "method", &note);
    }
    for (key, sub) in
        [("equatorial_column_peak", "uncertainty_deg"), ("latitude_profile_fit", "uncertainty")]
    {
        if let Some(e) = se.get_mut(key).and_then(Value::as_object_mut) {
            e.remove(sub);
        }
    }
    peaks(obj, &mut se, &vals, ds);
    let note = format!(
        "standard error of each number above, between the {m} merged replicas: sample standard \
         deviation / sqrt({m}), in that number's unit; 0 where every replica gave the same value"
    );
    se.insert("note".into(), json!(note));
    obj.insert("standard_error".into(), Value::Object(se));
    let indices: Vec<usize> = runs.iter().map(|r| r.marker.replica.index).collect();
    obj.insert(
        "replicas".into(),
        json!({
            "count": runs[0].marker.replica.count,
            "merged": indices,
            "base_seed": runs[0].marker.base_seed,
            "meaning": format!(
                "every number is the mean over {}, except where the field says otherwise \
                 (docs/replicas.md)",
                describe(runs)
            ),
        }),
    );
    Ok(s)
}

/// Replace what the string at `key` says after `; uncertainty` (a run's
/// source of its uncertainty) by `text`.
fn restate_uncertainty(o: &mut Map<String, Value>, key: &str, text: &str) {
    if let Some(Value::String(s)) = o.get_mut(key) {
        if let Some(k) = s.find("; uncertainty") {
            s.truncate(k);
        }
        s.push_str(text);
    }
}

/// The two peak records of the summary. With the merged NetCDF fields,
/// found on the mean fields (the largest mean adsorbed density and the
/// largest mean lowest-bin density, where they are, and the standard error
/// of the mean there): a mean of the replicas' peak values would be biased
/// high by their noise. Without it, the mean of the peak values, with each
/// position kept only if every replica gave the same.
fn peaks(
    obj: &mut Map<String, Value>,
    se: &mut Map<String, Value>,
    vals: &[&Value],
    ds: Option<&Dataset>,
) {
    let var = |d: &Dataset, n: &str| d.variable(n).map(|v| v.data.clone()).unwrap_or_default();
    let argmax = |xs: &[f64]| {
        let (mut k, mut best) = (0, f64::NEG_INFINITY);
        for (i, &x) in xs.iter().enumerate() {
            if x > best {
                best = x;
                k = i;
            }
        }
        (k, best)
    };
    let first = vals[0];
    let Some(d) = ds else {
        for (key, positions) in [
            (
                "peak_adsorbed_density",
                &["latitude_deg", "longitude_deg", "local_time_h_at_end"][..],
            ),
            ("peak_near_surface_density", &["altitude_km", "local_time_h", "latitude_deg"][..]),
        ] {
            for p in positions {
                let all_same = vals.iter().all(|v| {
                    v.get(key).and_then(|o| o.get(*p)) == first.get(key).and_then(|o| o.get(*p))
                });
                if let Some(o) = obj.get_mut(key).and_then(Value::as_object_mut)
                    && !all_same
                {
                    o.insert((*p).to_string(), Value::Null);
                }
                if let Some(o) = se.get_mut(key).and_then(Value::as_object_mut) {
                    o.remove(*p);
                }
            }
        }
        return;
    };
    // Adsorbed density, (cell_latitude, cell_longitude), cm-2.
    let (res, res_err) = (var(d, "reservoir"), var(d, "reservoir_error"));
    let (lon, lat) = (var(d, "cell_longitude"), var(d, "cell_latitude"));
    if !res.is_empty() && res_err.len() == res.len() && !lon.is_empty() {
        let (k, vmax) = argmax(&res);
        let (plon, plat) = (lon[k % lon.len()], lat[k / lon.len()]);
        // Local solar time rises 1 h per 15 deg of east longitude; every
        // replica ends at the same time, so the first one's peak gives the
        // local time of any longitude.
        let p0 = first.get("peak_adsorbed_density");
        let lt0 = p0.and_then(|p| p.get("local_time_h_at_end")).and_then(Value::as_f64);
        let lon0 = p0.and_then(|p| p.get("longitude_deg")).and_then(Value::as_f64);
        let lt = match (lt0, lon0) {
            (Some(t), Some(l)) if l == plon => t,
            (Some(t), Some(l)) => (t + (plon - l) / 15.0).rem_euclid(24.0),
            _ => f64::NAN,
        };
        obj.insert(
            "peak_adsorbed_density".into(),
            json!({
                "value": num(vmax), "unit": "cm^-2",
                "latitude_deg": num(plat), "longitude_deg": num(plon),
                "local_time_h_at_end": num(lt),
            }),
        );
        se.insert("peak_adsorbed_density".into(), json!({ "value": num(res_err[k]) }));
    }
    // Near-surface density: the lowest altitude bin of
    // density(local_time, altitude, latitude), cm-3, taken in (local_time,
    // latitude) order so that ties resolve as in a run's summary.
    let (den, den_err) = (var(d, "density"), var(d, "density_error"));
    let (lt, la, bounds) = (var(d, "local_time"), var(d, "latitude"), var(d, "altitude_bounds"));
    let cells = lt.len() * la.len();
    let n_alt = bounds.len() / 2;
    if cells > 0 && den.len() == cells * n_alt && den_err.len() == den.len() && n_alt >= 1 {
        let at = |k: usize| (k / la.len()) * n_alt * la.len() + k % la.len();
        let low: Vec<f64> = (0..cells).map(|k| den[at(k)]).collect();
        let (k, dmax) = argmax(&low);
        obj.insert(
            "peak_near_surface_density".into(),
            json!({
                "value": num(dmax), "unit": "cm^-3",
                "altitude_km": [num(bounds[0]), num(bounds[1])],
                "local_time_h": num(lt[k / la.len()]),
                "latitude_deg": num(la[k % la.len()]),
            }),
        );
        se.insert("peak_near_surface_density".into(), json!({ "value": num(den_err[at(k)]) }));
    }
}

/// How replica seeds are derived, in words for `provenance.json`.
const SEED_RULE: &str = "replica I runs with seed mix64(S + (I + 1) * 0x9E3779B97F4A7C15) & \
                         (2^63 - 1), the (I+1)-th SplitMix64 output from the base seed S \
                         (docs/replicas.md)";

/// The merged `provenance.json`: the first replica's record with the base
/// seed as the seed, the overrides common to the set, and a `replicas`
/// record of what was merged.
fn merge_provenance(runs: &[ReplicaRun]) -> ProvenanceFile {
    let r0 = &runs[0];
    let mut p = r0.provenance.clone();
    p.seed = r0.marker.base_seed;
    p.overrides = r0.provenance.common_overrides();
    if let Some(run) = p.scenario_resolved.get_mut("run").and_then(Value::as_object_mut) {
        run.insert("seed".into(), json!(r0.marker.base_seed));
    }
    let list: Vec<Value> = runs
        .iter()
        .map(|r| {
            json!({
                "index": r.marker.replica.index,
                "seed": r.marker.seed,
                "directory": r.dir.display().to_string(),
                "scenario_origin": r.provenance.scenario_origin,
                "overrides": r.provenance.overrides,
            })
        })
        .collect();
    p.replicas = Some(json!({
        "count": r0.marker.replica.count,
        "merged": runs.iter().map(|r| r.marker.replica.index).collect::<Vec<_>>(),
        "base_seed": r0.marker.base_seed,
        "seed_rule": SEED_RULE,
        "scenario_digest": r0.digest,
        "standard_errors": format!(
            "sample standard deviation between the {m} merged replicas / sqrt({m})",
            m = runs.len()
        ),
        "runs": list,
    }));
    p
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mean_and_standard_error_by_hand() {
        // 1, 2, 6: mean 3, sample variance (4 + 1 + 9) / 2 = 7, s.e. sqrt(7 / 3).
        let (m, s) = mean_and_standard_error(&[1.0, 2.0, 6.0]);
        assert_eq!(m, 3.0);
        assert_eq!(s, (7.0f64 / 3.0).sqrt());
        // Equal values are kept exactly (0.1 * 3 / 3 is not 0.1 in floating point).
        assert_eq!(mean_and_standard_error(&[0.1, 0.1, 0.1]), (0.1, 0.0));
        let (m, s) = mean_and_standard_error(&[1.0, f64::NAN]);
        assert!(m.is_nan() && s.is_nan());
    }

    #[test]
    fn json_trees_average_numbers_and_keep_equal_values() {
        let a = json!({"x": {"value": 1.0, "unit": "s"}, "n": 3, "w": "dawn", "l": [0.0, 2.0]});
        let b = json!({"x": {"value": 3.0, "unit": "s"}, "n": 3, "w": "dusk", "l": [0.0, 4.0]});
        let files = vec![PathBuf::from("a"), PathBuf::from("b")];
        let (m, se) = merge_json(&[&a, &b], "", &files).unwrap();
        assert_eq!(m["x"], json!({"value": 2.0, "unit": "s"}));
        assert_eq!(m["n"], json!(3));
        assert_eq!(m["l"], json!([0.0, 3.0]));
        assert_eq!(m["w"], json!("differs between replicas"));
        let se = se.unwrap();
        assert_eq!(se["x"], json!({"value": 1.0}));
        assert_eq!(se["n"], json!(0.0));
        assert_eq!(se["l"], json!([0.0, 1.0]));
        let c = json!({"x": {"value": 3.0}, "n": 3, "w": "dusk", "l": [0.0, 4.0]});
        let e = merge_json(&[&a, &c], "", &files).unwrap_err();
        assert!(e.contains("`b` differs in layout") && e.contains("`x`"), "{e}");
    }
}

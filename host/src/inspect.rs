//! What `exobound module inspect` reports about a module file.
//!
//! Why this exists: before anyone trusts a module from another group they
//! want to see, without running it, what law it claims to be, its digest,
//! the ABI it was built for, its parameters with units and ranges (for a
//! table parameter its columns, row limits and default table), and the
//! reference points it promises. This reads only the file's sections, so
//! what it prints is what the file's digest covers.

use std::path::Path;

use exobound_sdk::ParamValue;
use exobound_sdk::wire::ManifestInfo;
use serde::Serialize;

use crate::runtime::HostError;
use crate::runtime::module::{self, ModuleHeader};
use crate::text::printable;

/// Largest manifest accepted when inspecting, bytes (the runtime's default).
pub const MAX_MANIFEST: usize = 64 << 10;

/// The inspection record, also printed as JSON by `--json`.
#[derive(Clone, Debug, Serialize)]
pub struct Inspection {
    /// The file inspected.
    pub file: String,
    /// Module name.
    pub name: String,
    /// Module version.
    pub version: String,
    /// ABI version from the `exobound:abi` section.
    pub abi: String,
    /// SHA-256 of the file, lowercase hex.
    pub sha256: String,
    /// File size, bytes.
    pub size_bytes: usize,
    /// Roles.
    pub roles: Vec<String>,
    /// For sources: `adsorbed` or `bulk`.
    pub draws_on: Option<String>,
    /// The full manifest.
    pub manifest: ManifestInfo,
    /// Parameters (repeated at top level for scripts): name, unit, default, min, max.
    pub parameters: Vec<exobound_sdk::wire::ParamInfo>,
    /// The `exobound:build` record (toolchain and SDK version) that
    /// `exobound module build` appends, if the file has one.
    pub build: Option<String>,
}

/// Inspect the module file at `path`, or the standard module `NAME` when
/// `path` is `standard:NAME` (the copy embedded in this binary, or the one
/// `$EXOBOUND_MODULE_DIR` holds).
pub fn inspect(path: &Path) -> Result<Inspection, HostError> {
    let (shown, bytes) = crate::standard::read_module(path)?;
    let header = module::read_header(&module::label_of(&shown), &bytes, MAX_MANIFEST)?;
    Ok(from_header(&shown, header, crate::modbuild::read_build_section(&bytes)))
}

fn from_header(path: &Path, h: ModuleHeader, build: Option<String>) -> Inspection {
    Inspection {
        build,
        file: path.display().to_string(),
        name: h.manifest.name.clone(),
        version: h.manifest.version.clone(),
        abi: h.abi.to_string(),
        sha256: h.sha256,
        size_bytes: h.size,
        roles: h.manifest.roles.clone(),
        draws_on: h.manifest.draws_on.clone(),
        parameters: h.manifest.parameters.clone(),
        manifest: h.manifest,
    }
}

fn value(v: &Option<ParamValue>) -> String {
    match v {
        None => "(required)".to_string(),
        Some(v) => printable(&v.to_string()).into_owned(),
    }
}

/// Rows of a default table printed by the text view; `--json` gives all.
pub const TABLE_ROWS_SHOWN: usize = 12;

/// A table parameter: its columns with units and ranges, its row limits,
/// and its default table (the first [`TABLE_ROWS_SHOWN`] rows).
fn table_param(q: &exobound_sdk::ParamInfo, t: &exobound_sdk::table::TableInfo) -> String {
    let p = |x: &str| printable(x).into_owned();
    let mut s = format!(
        "    {:<22} {:<14} {} to {} rows; first column strictly increasing\n",
        p(&q.name),
        "table",
        t.min_rows,
        t.max_rows
    );
    s += &format!("    {:<22} {} (default: {})\n", "", p(&q.description), p(&q.default_origin));
    for c in &t.columns {
        s += &format!(
            "    {:<22}   column {:<20} {:<14} [{}, {}]\n",
            "",
            p(&c.name),
            p(if c.unit.is_empty() { "dimensionless" } else { &c.unit }),
            crate::output::number::text(c.min),
            crate::output::number::text(c.max)
        );
    }
    match &q.default {
        Some(ParamValue::Table(cols)) => {
            let rows = cols.first().map_or(0, Vec::len);
            s += &format!("    {:<22}   default table ({rows} rows):\n", "");
            s += &format!("    {:<22}     {}\n", "", p(&t.header()));
            for i in 0..rows.min(TABLE_ROWS_SHOWN) {
                let row: Vec<String> =
                    cols.iter().map(|c| crate::output::number::text(c[i])).collect();
                s += &format!("    {:<22}     {}\n", "", row.join(","));
            }
            if rows > TABLE_ROWS_SHOWN {
                s += &format!(
                    "    {:<22}     ... {} more rows (`--json` lists them all)\n",
                    "",
                    rows - TABLE_ROWS_SHOWN
                );
            }
        }
        _ => s += &format!("    {:<22}   default table: (required)\n", ""),
    }
    s
}

/// Module-provided strings joined by `sep`, each made safe to print.
fn list(items: &[String], sep: &str) -> String {
    items.iter().map(|x| printable(x)).collect::<Vec<_>>().join(sep)
}

/// A human-readable report. Every string taken from the module (its
/// manifest and file name) passes through [`printable`], so a manifest
/// cannot send escape sequences or bidirectional controls to the terminal.
pub fn render_text(i: &Inspection) -> String {
    let m = &i.manifest;
    let p = |x: &str| printable(x).into_owned();
    let mut s = String::new();
    s += &format!("{} {}  ({})\n", p(&m.name), p(&m.version), p(&i.file));
    s += &format!("  {}\n\n", p(&m.description));
    s += &format!("  roles:       {}\n", list(&m.roles, ", "));
    if let Some(d) = &m.draws_on {
        s += &format!("  draws on:    {} pool\n", p(d));
    }
    s += &format!("  ABI:         {}\n", i.abi);
    s += &format!("  sha256:      {}\n", i.sha256);
    s += &format!("  size:        {} bytes\n", i.size_bytes);
    match &i.build {
        // At most a few lines of at most a line's length: the record comes
        // from the file, and a hostile one could be long.
        Some(b) => {
            for (n, line) in b.lines().take(8).enumerate() {
                let line: String = line.chars().take(120).collect();
                let label = if n == 0 { "built with:" } else { "" };
                s += &format!("  {label:<12} {}\n", p(&line));
            }
        }
        None => s += "  built with:  not recorded (no `exobound:build` section)\n",
    }
    s += &format!("  law source:  {}\n", p(&m.law_source));
    s += &format!("  authors:     {} ({})\n", list(&m.authors, ", "), p(&m.institution));
    s += &format!("  licence:     {}\n", p(&m.licence));
    if !m.ledger_label.is_empty() {
        s += &format!("  ledger:      {}\n", p(&m.ledger_label));
    }
    s += &format!("  reads:       {}\n", list(&m.inputs, ", "));
    s += "\n  parameters:\n";
    if m.parameters.is_empty() {
        s += "    (none)\n";
    }
    for q in &m.parameters {
        if let Some(t) = &q.table {
            s += &table_param(q, t);
            continue;
        }
        // A choice has no unit: the unit column says what kind it is.
        let (unit, range) = if q.choices.is_empty() {
            let lo = number(q.min.unwrap_or(f64::NEG_INFINITY));
            let hi = number(q.max.unwrap_or(f64::INFINITY));
            (p(q.unit_or_dimensionless()), format!("[{lo}, {hi}]"))
        } else {
            ("choice".to_string(), format!("one of {}", list(&q.choices, " | ")))
        };
        s += &format!(
            "    {:<22} {:<14} default {:<14} {}\n",
            p(&q.name),
            unit,
            value(&q.default),
            range
        );
        s += &format!("    {:<22} {} (default: {})\n", "", p(&q.description), p(&q.default_origin));
    }
    s += "\n  reference points:\n";
    if m.reference_points.is_empty() {
        s += "    (none)\n";
    }
    for r in &m.reference_points {
        s += &format!(
            "    {}: {} = {} (rel. tol. {}); {}\n",
            p(&r.check),
            p(&r.description),
            number(r.expected),
            number(r.tolerance),
            p(&r.source)
        );
        s += &format!("      with {}\n", reference_setting(r, &m.parameters));
    }
    s
}

/// A number as the defaults are shown (exponent form when small or large,
/// see [`ParamValue`]'s `Display`), so ranges and defaults read alike.
fn number(x: f64) -> String {
    ParamValue::Number(x).to_string()
}

/// The parameters (with their units from `schema`) and input fields a
/// reference point sets, e.g. `parameters: activation_energy = 0.1 eV;
/// input: temperature = 600 (other fields zero)`.
fn reference_setting(
    r: &exobound_sdk::ReferenceInfo,
    schema: &[exobound_sdk::ParamInfo],
) -> String {
    let params: Vec<String> = r
        .parameters
        .iter()
        .map(|(k, v)| {
            let unit = schema
                .iter()
                .find(|q| &q.name == k && q.choices.is_empty() && !q.unit.is_empty())
                .map(|q| format!(" {}", printable(&q.unit)))
                .unwrap_or_default();
            format!("{} = {}{unit}", printable(k), value(&Some(v.clone())))
        })
        .collect();
    let input: Vec<String> =
        r.input.iter().map(|(k, x)| format!("{} = {}", printable(k), number(*x))).collect();
    let params = if params.is_empty() {
        "parameters at their defaults".to_string()
    } else {
        format!("parameters: {}", params.join(", "))
    };
    let input = if input.is_empty() {
        "all input fields zero".to_string()
    } else {
        format!("input: {} (other fields zero)", input.join(", "))
    };
    format!("{params}; {input}")
}

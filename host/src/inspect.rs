//! What `exobound module inspect` reports about a module file.
//!
//! Why this exists: before anyone trusts a module from another group they
//! want to see, without running it, what law it claims to be, its digest,
//! the ABI it was built for, its parameters with units and ranges, and the
//! reference points it promises. This reads only the file's sections.

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
}

/// Inspect the module file at `path`.
pub fn inspect(path: &Path) -> Result<Inspection, HostError> {
    let bytes = module::read_file(path)?;
    let header = module::read_header(&module::label_of(path), &bytes, MAX_MANIFEST)?;
    Ok(from_header(path, header))
}

fn from_header(path: &Path, h: ModuleHeader) -> Inspection {
    Inspection {
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
        let range = if q.choices.is_empty() {
            format!("[{}, {}]", q.min.unwrap_or(f64::NEG_INFINITY), q.max.unwrap_or(f64::INFINITY))
        } else {
            format!("one of {}", list(&q.choices, " | "))
        };
        s += &format!(
            "    {:<22} {:<14} default {:<14} {}\n",
            p(&q.name),
            p(q.unit_or_dimensionless()),
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
            "    {}: {} = {:e} (rel. tol. {:e}); {}\n",
            p(&r.check),
            p(&r.description),
            r.expected,
            r.tolerance,
            p(&r.source)
        );
    }
    s
}

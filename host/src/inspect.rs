//! What `exobound module inspect` reports about a module file.
//!
//! Why this exists: before anyone trusts a module from another group they
//! want to see, without running it, what law it claims to be, its digest,
//! the ABI it was built for, its parameters with units and ranges, and the
//! reference points it promises. This reads only the file's sections.

use std::path::Path;

use exobound_sdk::{ManifestInfo, ParamValue};
use serde::Serialize;

use crate::runtime::HostError;
use crate::runtime::module::{self, ModuleHeader};

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
    pub parameters: Vec<exobound_sdk::ParamInfo>,
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
        Some(v) => v.to_string(),
    }
}

/// A human-readable report.
pub fn render_text(i: &Inspection) -> String {
    let m = &i.manifest;
    let mut s = String::new();
    s += &format!("{} {}  ({})\n", m.name, m.version, i.file);
    s += &format!("  {}\n\n", m.description);
    s += &format!("  roles:       {}\n", m.roles.join(", "));
    if let Some(p) = &m.draws_on {
        s += &format!("  draws on:    {p} pool\n");
    }
    s += &format!("  ABI:         {}\n", i.abi);
    s += &format!("  sha256:      {}\n", i.sha256);
    s += &format!("  size:        {} bytes\n", i.size_bytes);
    s += &format!("  law source:  {}\n", m.law_source);
    s += &format!("  authors:     {} ({})\n", m.authors.join(", "), m.institution);
    s += &format!("  licence:     {}\n", m.licence);
    if !m.ledger_label.is_empty() {
        s += &format!("  ledger:      {}\n", m.ledger_label);
    }
    s += &format!("  reads:       {}\n", m.inputs.join(", "));
    s += "\n  parameters:\n";
    if m.parameters.is_empty() {
        s += "    (none)\n";
    }
    for p in &m.parameters {
        let range = if p.choices.is_empty() {
            format!("[{}, {}]", p.min.unwrap_or(f64::NEG_INFINITY), p.max.unwrap_or(f64::INFINITY))
        } else {
            format!("one of {}", p.choices.join(" | "))
        };
        s += &format!(
            "    {:<22} {:<14} default {:<14} {}\n",
            p.name,
            p.unit_or_dimensionless(),
            value(&p.default),
            range
        );
        s += &format!("    {:<22} {} (default: {})\n", "", p.description, p.default_origin);
    }
    s += "\n  reference points:\n";
    if m.reference_points.is_empty() {
        s += "    (none)\n";
    }
    for r in &m.reference_points {
        s += &format!(
            "    {}: {} = {:e} (rel. tol. {:e}); {}\n",
            r.check, r.description, r.expected, r.tolerance, r.source
        );
    }
    s
}

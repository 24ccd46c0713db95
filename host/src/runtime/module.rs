//! Reading a module file: digest, ABI version, manifest, imports and
//! exports, all checked before any of the module's code is compiled.
//!
//! Why this exists: a module from another institution must be judged by
//! what it says about itself and by its shape before it runs. The host
//! reads the `exobound:abi` and `exobound:manifest` custom sections with a
//! plain parser, refuses an unsupported ABI major version, a malformed or
//! oversized manifest, any import, and missing exports, and only then hands
//! the bytes to the compiler.

use std::path::Path;

use exobound_sdk::table::TableInfo;
use exobound_sdk::wire::ManifestInfo;
use exobound_sdk::{ABI_SECTION, MANIFEST_SECTION, ParamValue, Role};
use sha2::{Digest, Sha256};
use wasmparser::{ExternalKind, Parser, Payload, TypeRef};

use super::error::HostError;

/// The ABI major version this host implements.
pub const SUPPORTED_ABI_MAJOR: u32 = 1;
/// The ABI version this host implements, for messages.
pub const SUPPORTED_ABI: &str = "1.x (built with exobound-sdk ABI 1.1.0)";
/// The first minor version of ABI 1 with table parameters.
pub const TABLES_SINCE_MINOR: u32 = 1;

/// Exports every module must have, whatever its roles.
pub const CORE_EXPORTS: [&str; 5] =
    ["memory", "exobound_alloc", "exobound_free", "exobound_init", "exobound_last_error"];

/// The batch exports that implement `role`.
pub fn role_exports(role: Role) -> &'static [&'static str] {
    match role {
        Role::Source => &["exobound_release_rate", "exobound_launch"],
        Role::Loss => &["exobound_loss_rate"],
        Role::SurfaceInteraction => &["exobound_land"],
        Role::ReservoirProcess => &["exobound_exchange"],
    }
}

/// An ABI version `major.minor.patch`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord)]
pub struct AbiVersion {
    /// Breaking changes.
    pub major: u32,
    /// New exports.
    pub minor: u32,
    /// New enumeration values.
    pub patch: u32,
}

impl std::fmt::Display for AbiVersion {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}.{}.{}", self.major, self.minor, self.patch)
    }
}

impl AbiVersion {
    /// Parse the ASCII content of an `exobound:abi` section.
    pub fn parse(text: &str) -> Option<AbiVersion> {
        let mut it = text.trim().split('.').map(|p| p.parse::<u32>().ok());
        let v = AbiVersion { major: it.next()??, minor: it.next()??, patch: it.next()?? };
        it.next().is_none().then_some(v)
    }
}

/// What the host knows about a module file before compiling it.
#[derive(Clone, Debug)]
pub struct ModuleHeader {
    /// SHA-256 of the whole file, lowercase hex.
    pub sha256: String,
    /// ABI version from `exobound:abi`.
    pub abi: AbiVersion,
    /// Decoded manifest.
    pub manifest: ManifestInfo,
    /// Roles, parsed from the manifest.
    pub roles: Vec<Role>,
    /// Names of the exported functions and memories.
    pub exports: Vec<String>,
    /// Size of the file, bytes.
    pub size: usize,
}

/// Lowercase hex SHA-256 of `bytes`.
pub fn sha256_hex(bytes: &[u8]) -> String {
    let digest = Sha256::digest(bytes);
    let mut s = String::with_capacity(64);
    for b in digest {
        s.push_str(&format!("{b:02x}"));
    }
    s
}

/// A label for messages before the manifest is known: the file name.
pub fn label_of(path: &Path) -> String {
    path.file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_else(|| path.display().to_string())
}

/// Read and check the header of a module: sections, imports, exports.
///
/// `label` names the module in errors until the manifest gives its name;
/// `max_manifest` is the largest manifest section accepted, bytes.
pub fn read_header(
    label: &str,
    bytes: &[u8],
    max_manifest: usize,
) -> Result<ModuleHeader, HostError> {
    let mut abi_text: Option<Vec<u8>> = None;
    let mut manifest_bytes: Option<Vec<u8>> = None;
    let mut imports = Vec::new();
    let mut exports = Vec::new();
    let not_wasm = |e: wasmparser::BinaryReaderError| HostError::NotWasm {
        module: label.to_string(),
        detail: e.to_string(),
    };
    if !bytes.starts_with(b"\0asm") {
        return Err(HostError::NotWasm {
            module: label.to_string(),
            detail: "the file does not start with the wasm magic number".to_string(),
        });
    }
    for payload in Parser::new(0).parse_all(bytes) {
        match payload.map_err(not_wasm)? {
            Payload::CustomSection(reader) => {
                let (slot, name) = match reader.name() {
                    n if n == ABI_SECTION => (&mut abi_text, ABI_SECTION),
                    n if n == MANIFEST_SECTION => (&mut manifest_bytes, MANIFEST_SECTION),
                    _ => continue,
                };
                if slot.is_some() {
                    return Err(HostError::ManifestMalformed {
                        module: label.to_string(),
                        detail: format!(
                            "the module holds two `{name}` sections (two modules linked into \
                             one file?)"
                        ),
                    });
                }
                if name == MANIFEST_SECTION && reader.data().len() > max_manifest {
                    return Err(HostError::ManifestTooLarge {
                        module: label.to_string(),
                        size: reader.data().len(),
                        limit: max_manifest,
                    });
                }
                *slot = Some(reader.data().to_vec());
            }
            Payload::ImportSection(reader) => {
                for import in reader.into_imports() {
                    let import = import.map_err(not_wasm)?;
                    let kind = match import.ty {
                        TypeRef::Func(_) | TypeRef::FuncExact(_) => "function",
                        TypeRef::Memory(_) => "memory",
                        TypeRef::Table(_) => "table",
                        TypeRef::Global(_) => "global",
                        TypeRef::Tag(_) => "tag",
                    };
                    imports.push(format!("{}::{} ({kind})", import.module, import.name));
                }
            }
            Payload::ExportSection(reader) => {
                for export in reader {
                    let export = export.map_err(not_wasm)?;
                    if matches!(export.kind, ExternalKind::Func | ExternalKind::Memory) {
                        exports.push(export.name.to_string());
                    }
                }
            }
            _ => {}
        }
    }
    let abi_raw = abi_text
        .ok_or(HostError::MissingSection { module: label.to_string(), section: ABI_SECTION })?;
    let abi_str = String::from_utf8_lossy(&abi_raw).to_string();
    let abi = AbiVersion::parse(&abi_str).ok_or_else(|| HostError::ManifestMalformed {
        module: label.to_string(),
        detail: format!("the exobound:abi section holds {abi_str:?}, not major.minor.patch"),
    })?;
    if abi.major != SUPPORTED_ABI_MAJOR {
        return Err(HostError::AbiUnsupported {
            module: label.to_string(),
            found: abi.to_string(),
            supported: SUPPORTED_ABI,
        });
    }
    let raw = manifest_bytes.ok_or(HostError::MissingSection {
        module: label.to_string(),
        section: MANIFEST_SECTION,
    })?;
    let manifest = ManifestInfo::decode(&raw).map_err(|e| HostError::ManifestMalformed {
        module: label.to_string(),
        detail: format!("it does not decode as an exobound manifest: {e}"),
    })?;
    let roles = check_manifest(label, &manifest)?;
    if abi.minor < TABLES_SINCE_MINOR
        && let Some(p) = manifest.parameters.iter().find(|p| p.table.is_some())
    {
        return Err(HostError::ManifestMalformed {
            module: label.to_string(),
            detail: format!(
                "parameter `{}` is a table, which needs ABI 1.{TABLES_SINCE_MINOR}, but the \
                 exobound:abi section says {abi} (a host of ABI 1.0 could not read this \
                 manifest); stamp the module 1.{TABLES_SINCE_MINOR}.0, as exobound-sdk does",
                p.name
            ),
        });
    }
    let name = manifest.name.clone();
    if let Some(import) = imports.into_iter().next() {
        return Err(HostError::ForbiddenImport { module: name, import });
    }
    for export in CORE_EXPORTS {
        if !exports.iter().any(|e| e == export) {
            return Err(HostError::MissingExport {
                module: name,
                export: export.to_string(),
                needed_for: "every module (ABI v1 core exports)".to_string(),
            });
        }
    }
    for &role in &roles {
        for export in role_exports(role) {
            if !exports.iter().any(|e| e == export) {
                return Err(HostError::MissingExport {
                    module: name,
                    export: export.to_string(),
                    needed_for: format!("the role `{}` its manifest declares", role.as_str()),
                });
            }
        }
    }
    Ok(ModuleHeader { sha256: sha256_hex(bytes), abi, manifest, roles, exports, size: bytes.len() })
}

/// Consistency checks on a decoded manifest; returns the parsed roles.
pub fn check_manifest(label: &str, m: &ManifestInfo) -> Result<Vec<Role>, HostError> {
    let bad = |detail: String| HostError::ManifestMalformed { module: label.to_string(), detail };
    if m.name.is_empty()
        || !m.name.chars().all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_')
    {
        return Err(bad(format!(
            "the module name {:?} must be non-empty ASCII letters, digits, '-' or '_'",
            m.name
        )));
    }
    if AbiVersion::parse(&m.version).is_none() {
        return Err(bad(format!("the version {:?} is not major.minor.patch", m.version)));
    }
    let roles = m.parsed_roles().map_err(|r| bad(format!("unknown role {r:?}")))?;
    if roles.is_empty() {
        return Err(bad("the manifest declares no roles".to_string()));
    }
    let is_source = roles.contains(&Role::Source);
    match (&m.draws_on, is_source) {
        (None, true) => {
            return Err(bad("a source must say whether it draws on `adsorbed` or `bulk`".into()));
        }
        (Some(p), true) if p != "adsorbed" && p != "bulk" => {
            return Err(bad(format!("draws_on {p:?} must be `adsorbed` or `bulk`")));
        }
        (Some(_), false) => return Err(bad("draws_on is set but the module is no source".into())),
        _ => {}
    }
    for input in &m.inputs {
        if !exobound_sdk::Input::ALL.iter().any(|i| i.as_str() == input) {
            return Err(bad(format!("unknown input {input:?}")));
        }
    }
    for (i, p) in m.parameters.iter().enumerate() {
        if p.name.is_empty() {
            return Err(bad(format!("parameter {i} has no name")));
        }
        if m.parameters[..i].iter().any(|q| q.name == p.name) {
            return Err(bad(format!("parameter `{}` is declared twice", p.name)));
        }
        if let (Some(lo), Some(hi)) = (p.min, p.max)
            && (lo.is_nan() || hi.is_nan() || lo > hi)
        {
            return Err(bad(format!("parameter `{}` has min {lo} above max {hi}", p.name)));
        }
        if let Some(t) = &p.table {
            check_table_declaration(p, t)
                .map_err(|m| bad(format!("table parameter `{}` {m}", p.name)))?;
        } else if let Some(ParamValue::Table(_)) = &p.default {
            return Err(bad(format!(
                "parameter `{}` has a table as its default but declares no `table` (columns)",
                p.name
            )));
        }
        if let Some(d) = &p.default {
            let given = std::collections::BTreeMap::from([(p.name.clone(), d.clone())]);
            if let Err(e) = exobound_sdk::Params::validate(&given, std::slice::from_ref(p)) {
                return Err(bad(format!("the default of `{}` is invalid: {}", p.name, e.message)));
            }
        }
    }
    Ok(roles)
}

/// Characters allowed in a table column's name: they must survive a CSV
/// header cell `name [unit]` unchanged.
fn column_name_ok(s: &str) -> bool {
    !s.is_empty() && s.chars().all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '-')
}

/// The declaration of a table parameter: columns named for a CSV header,
/// units that fit in `[...]`, sane ranges and row limits, no number or
/// choice fields. The error completes "table parameter `x` ...".
fn check_table_declaration(p: &exobound_sdk::ParamInfo, t: &TableInfo) -> Result<(), String> {
    if !p.unit.is_empty() || p.min.is_some() || p.max.is_some() || !p.choices.is_empty() {
        return Err(
            "sets `unit`, `min`, `max` or `choices`; a table declares them per column".into()
        );
    }
    if t.columns.is_empty() {
        return Err("declares no columns".into());
    }
    for (j, c) in t.columns.iter().enumerate() {
        if !column_name_ok(&c.name) {
            return Err(format!(
                "column {} is named {:?}; use ASCII letters, digits, '_' or '-'",
                j + 1,
                c.name
            ));
        }
        if t.columns[..j].iter().any(|d| d.name == c.name) {
            return Err(format!("names the column `{}` twice", c.name));
        }
        if c.unit.contains([',', '[', ']', '\n', '\r']) || c.unit.trim() != c.unit {
            return Err(format!(
                "column `{}` has the unit {:?}, which cannot be written in a CSV header \
                 `name [unit]`",
                c.name, c.unit
            ));
        }
        if c.min.is_nan() || c.max.is_nan() || c.min > c.max {
            return Err(format!("column `{}` has min {} above max {}", c.name, c.min, c.max));
        }
    }
    if t.min_rows < 1 || t.min_rows > t.max_rows {
        return Err(format!(
            "allows {} to {} rows; a table needs 1 <= min_rows <= max_rows",
            t.min_rows, t.max_rows
        ));
    }
    Ok(())
}

/// Read a module file from disk (errors name the file).
pub fn read_file(path: &Path) -> Result<Vec<u8>, HostError> {
    std::fs::read(path).map_err(|source| HostError::Read { path: path.to_path_buf(), source })
}

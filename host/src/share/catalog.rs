//! Catalogs: directories of vetted, signed modules indexed by `name@version`.
//!
//! Why this exists: groups share modules through a directory that all of
//! them can read, on a shared filesystem or in a git repository. The
//! directory holds its TOML index, the modules, their vet reports and
//! signatures, and an optional trust policy:
//!
//! ```text
//! CATALOG/
//!   catalog.toml                             the index (below)
//!   policy.toml                              optional trust policy (see `policy`)
//!   modules/NAME/VERSION/module.wasm
//!   modules/NAME/VERSION/vet.json            vet report made when it was added
//!   modules/NAME/VERSION/signatures/KEYID.sig
//! ```
//!
//! ```toml
//! format = 1
//! [[module]]
//! name = "photoionization"
//! version = "1.0.0"
//! sha256 = "<64 hex>"
//! file = "modules/photoionization/1.0.0/module.wasm"
//! vet_report = "modules/photoionization/1.0.0/vet.json"
//! vet_passed = true
//! signatures = [{ signer = "...", key_id = "<16 hex>", file = "modules/.../signatures/<key_id>.sig" }]
//! ```
//!
//! Paths in the index are relative to the catalog directory, so a catalog
//! can be moved or cloned. A published `name@version` never changes its
//! digest: adding another file under the same name and version is refused.
//! The index is written last, atomically, so an interrupted `add` leaves
//! the catalog as it was (plus unreferenced files).

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::policy::Policy;
use super::signature::{self, ModuleSignature, Verified};
use super::{ShareError, write_atomic};
use crate::runtime::module::{self, sha256_hex};
use crate::vet::VetReport;

/// File name of the index inside a catalog.
pub const INDEX_FILE: &str = "catalog.toml";
/// Layout version of the index.
pub const INDEX_FORMAT: u32 = 1;
/// Environment variable listing catalog directories (`:`-separated on Unix).
pub const CATALOGS_ENV: &str = "EXOBOUND_CATALOGS";

/// A signature as listed in the index.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct SignatureRef {
    /// Who signed.
    pub signer: String,
    /// Their key's id.
    pub key_id: String,
    /// The signature file, relative to the catalog.
    pub file: String,
}

/// One module in the index.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Entry {
    /// Manifest name.
    pub name: String,
    /// Manifest version.
    pub version: String,
    /// SHA-256 of the module file, lowercase hex.
    pub sha256: String,
    /// The module file, relative to the catalog.
    pub file: String,
    /// The vet report, relative to the catalog.
    pub vet_report: String,
    /// Whether that vet passed.
    pub vet_passed: bool,
    /// Signatures, one per key.
    #[serde(default)]
    pub signatures: Vec<SignatureRef>,
}

impl Entry {
    /// `name@version`.
    pub fn reference(&self) -> String {
        format!("{}@{}", self.name, self.version)
    }
}

/// The index file.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Index {
    /// [`INDEX_FORMAT`].
    pub format: u32,
    /// The modules, sorted by name and version.
    #[serde(default, rename = "module")]
    pub modules: Vec<Entry>,
}

/// An open catalog.
#[derive(Clone, Debug)]
pub struct Catalog {
    /// Its directory.
    pub dir: PathBuf,
    /// Its index.
    pub index: Index,
    /// Its trust policy.
    pub policy: Policy,
}

/// A module's standing in its catalog, re-checked from the files.
#[derive(Clone, Debug)]
pub struct Standing {
    /// The index entry.
    pub entry: Entry,
    /// The module file.
    pub path: PathBuf,
    /// The file's digest now.
    pub sha256_now: Option<String>,
    /// Each listed signature, verified against the file.
    pub signatures: Vec<Result<Verified, ShareError>>,
    /// The policy's verdict: the trusted key ids counted, or the reasons for refusal.
    pub verdict: Result<Vec<String>, Vec<String>>,
}

/// `(name, version)` if `spec` is a catalog reference `name@version`
/// (a name of letters, digits, `-`, `_`; a version `major.minor.patch`).
pub fn parse_ref(spec: &str) -> Option<(&str, &str)> {
    let (name, version) = spec.split_once('@')?;
    let name_ok =
        !name.is_empty() && name.chars().all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_');
    let version_ok = module::AbiVersion::parse(version).is_some();
    (name_ok && version_ok).then_some((name, version))
}

impl Catalog {
    /// Open the catalog in `dir`.
    pub fn open(dir: &Path) -> Result<Catalog, ShareError> {
        let path = dir.join(INDEX_FILE);
        let text = std::fs::read_to_string(&path).map_err(|e| {
            ShareError(format!(
                "`{}` is not a catalog: cannot read `{}` ({e}); `exobound catalog add {} FILE` \
                 creates one",
                dir.display(),
                path.display(),
                dir.display()
            ))
        })?;
        let index: Index = toml::from_str(&text).map_err(|e| {
            ShareError(format!(
                "`{}` is not a valid catalog index: {}",
                path.display(),
                e.message()
            ))
        })?;
        if index.format != INDEX_FORMAT {
            return Err(ShareError(format!(
                "`{}` has format {}, this exobound reads format {INDEX_FORMAT}",
                path.display(),
                index.format
            )));
        }
        let policy = Policy::read(dir)?;
        Ok(Catalog { dir: dir.to_path_buf(), index, policy })
    }

    /// Open the catalog in `dir`, or an empty one if it holds no index yet.
    pub fn open_or_new(dir: &Path) -> Result<Catalog, ShareError> {
        if dir.join(INDEX_FILE).exists() {
            return Catalog::open(dir);
        }
        Ok(Catalog {
            dir: dir.to_path_buf(),
            index: Index { format: INDEX_FORMAT, modules: Vec::new() },
            policy: Policy::read(dir)?,
        })
    }

    /// The entry for `name@version`.
    pub fn find(&self, name: &str, version: &str) -> Option<&Entry> {
        self.index.modules.iter().find(|e| e.name == name && e.version == version)
    }

    /// Re-check an entry against its files and the policy.
    pub fn standing(&self, entry: &Entry) -> Standing {
        let path = self.dir.join(&entry.file);
        let bytes = std::fs::read(&path).ok();
        let sha256_now = bytes.as_deref().map(sha256_hex);
        let signatures: Vec<Result<Verified, ShareError>> = entry
            .signatures
            .iter()
            .map(|s| {
                let sig = signature::read(&self.dir.join(&s.file))?;
                match &bytes {
                    Some(b) => signature::verify(b, &sig),
                    None => {
                        Err(ShareError(format!("the module file `{}` is missing", path.display())))
                    }
                }
            })
            .collect();
        let mut verdict = self.policy.judge(self.vet_passed(entry), &signatures);
        let mut file_problem = None;
        match &sha256_now {
            None => file_problem = Some(format!("the module file `{}` is missing", path.display())),
            Some(d) if *d != entry.sha256 => {
                file_problem = Some(format!(
                    "the module file `{}` has sha256 {d}, but the index lists {}: it was replaced \
                     or damaged",
                    path.display(),
                    entry.sha256
                ))
            }
            _ => {}
        }
        if let Some(p) = file_problem {
            verdict = match verdict {
                Ok(_) => Err(vec![p]),
                Err(mut r) => {
                    r.insert(0, p);
                    Err(r)
                }
            };
        }
        Standing { entry: entry.clone(), path, sha256_now, signatures, verdict }
    }

    /// Whether the stored vet report of `entry` is of its file and passed.
    fn vet_passed(&self, entry: &Entry) -> bool {
        std::fs::read_to_string(self.dir.join(&entry.vet_report))
            .ok()
            .and_then(|t| serde_json::from_str::<VetReport>(&t).ok())
            .is_some_and(|r| r.passed && r.sha256 == entry.sha256)
    }

    /// Add the module file `wasm` with its vet `report` and `signatures`;
    /// refuses what the policy refuses, and a different file under an
    /// existing `name@version`. Signatures for an existing identical entry
    /// are merged. Returns the entry.
    pub fn add(
        &mut self,
        wasm: &Path,
        report: &VetReport,
        signatures: &[PathBuf],
    ) -> Result<Entry, ShareError> {
        let bytes = std::fs::read(wasm)
            .map_err(|e| ShareError(format!("cannot read the module `{}`: {e}", wasm.display())))?;
        let digest = sha256_hex(&bytes);
        if report.sha256 != digest {
            return Err(ShareError(format!(
                "the vet report is of sha256 {}, not of `{}` ({digest})",
                report.sha256,
                wasm.display()
            )));
        }
        let (name, version) = (report.name.clone(), report.version.clone());
        if parse_ref(&format!("{name}@{version}")).is_none() {
            return Err(ShareError(format!(
                "`{}` has no usable name and version in its manifest (vet: {})",
                wasm.display(),
                report.failed().join(", ")
            )));
        }
        let mut sigs: Vec<ModuleSignature> = Vec::new();
        let mut verified = Vec::new();
        for p in signatures {
            let s = signature::read(p)?;
            let v = signature::verify(&bytes, &s)
                .map_err(|e| ShareError(format!("`{}`: {e}", p.display())))?;
            verified.push(Ok(v));
            sigs.push(s);
        }
        let base = format!("modules/{name}/{version}");
        let existing = self.find(&name, &version).cloned();
        if let Some(e) = &existing {
            if e.sha256 != digest {
                return Err(ShareError(format!(
                    "{name}@{version} is already in `{}` with sha256 {}, and `{}` is {digest}; a \
                     published version never changes: give the module a new version",
                    self.dir.display(),
                    e.sha256,
                    wasm.display()
                )));
            }
            // Count the signatures already there too.
            for s in &e.signatures {
                if !sigs.iter().any(|n| n.key_id == s.key_id) {
                    let sig = signature::read(&self.dir.join(&s.file))?;
                    verified.push(signature::verify(&bytes, &sig));
                }
            }
        }
        if let Err(reasons) = self.policy.judge(report.passed, &verified) {
            return Err(ShareError(format!(
                "the trust policy of `{}` refuses {name}@{version}: {}",
                self.dir.display(),
                reasons.join("; ")
            )));
        }
        let file = format!("{base}/module.wasm");
        let vet_file = format!("{base}/vet.json");
        write_atomic(&self.dir.join(&file), &bytes, false)?;
        let vet_json =
            serde_json::to_string_pretty(report).map_err(|e| ShareError(e.to_string()))?;
        write_atomic(&self.dir.join(&vet_file), vet_json.as_bytes(), false)?;
        let mut entry = existing.unwrap_or(Entry {
            name: name.clone(),
            version: version.clone(),
            sha256: digest,
            file,
            vet_report: vet_file,
            vet_passed: report.passed,
            signatures: Vec::new(),
        });
        entry.vet_passed = report.passed;
        for s in &sigs {
            let rel = format!("{base}/signatures/{}.sig", s.key_id);
            signature::write(&self.dir.join(&rel), s)?;
            entry.signatures.retain(|r| r.key_id != s.key_id);
            entry.signatures.push(SignatureRef {
                signer: s.signer.clone(),
                key_id: s.key_id.clone(),
                file: rel,
            });
        }
        self.index.modules.retain(|e| !(e.name == name && e.version == version));
        self.index.modules.push(entry.clone());
        self.index.modules.sort_by(|a, b| (&a.name, &a.version).cmp(&(&b.name, &b.version)));
        self.write_index()?;
        Ok(entry)
    }

    fn write_index(&self) -> Result<(), ShareError> {
        let body = toml::to_string(&self.index).map_err(|e| ShareError(e.to_string()))?;
        let text = format!(
            "# exobound catalog index: modules by name@version (see docs/sharing.md).\n{body}"
        );
        write_atomic(&self.dir.join(INDEX_FILE), text.as_bytes(), false)
    }
}

/// The catalog directories to search: `extra` first (e.g. a scenario's
/// `catalogs` key), then those listed in `$EXOBOUND_CATALOGS`.
pub fn search_path(extra: &[PathBuf]) -> Vec<PathBuf> {
    let mut dirs = extra.to_vec();
    if let Some(v) = std::env::var_os(CATALOGS_ENV) {
        dirs.extend(std::env::split_paths(&v).filter(|p| !p.as_os_str().is_empty()));
    }
    dirs
}

/// Resolve `name@version` through `catalogs` (the first that lists it):
/// the module file, after checking its digest and the catalog's policy.
pub fn resolve(name: &str, version: &str, catalogs: &[PathBuf]) -> Result<PathBuf, ShareError> {
    if catalogs.is_empty() {
        return Err(ShareError(format!(
            "`{name}@{version}` names a catalog module, but no catalog is configured; list \
             catalog directories in the scenario's `catalogs` key or in ${CATALOGS_ENV}"
        )));
    }
    let mut searched = Vec::new();
    for dir in catalogs {
        let cat = Catalog::open(dir)?;
        let Some(entry) = cat.find(name, version) else {
            searched.push(dir.display().to_string());
            continue;
        };
        let st = cat.standing(entry);
        return match st.verdict {
            Ok(_) => Ok(st.path),
            Err(reasons) => Err(ShareError(format!(
                "`{name}@{version}` in `{}` is refused: {}",
                dir.display(),
                reasons.join("; ")
            ))),
        };
    }
    Err(ShareError(format!(
        "no catalog lists `{name}@{version}` (searched {}); see `exobound catalog list DIR`",
        searched.join(", ")
    )))
}

//! Detached module signatures: a key holder's statement that *this* file
//! (by its SHA-256) passed *this* vet report.
//!
//! Why this exists: a digest says which file, a vet report says how it
//! behaved, and a signature says who stands behind both. The signature
//! file travels beside the module (default `FILE.sig`) and holds the vet
//! report verbatim, so it can be checked with nothing else at hand.
//!
//! Layout (TOML, our own):
//!
//! ```toml
//! kind = "exobound-module-signature"
//! format = 1
//! module = "photoionization"          # manifest name
//! version = "1.0.0"                   # manifest version
//! module_sha256 = "<64 hex>"          # SHA-256 of the .wasm file
//! vet_sha256 = "<64 hex>"             # SHA-256 of the bytes of vet_report
//! vet_passed = true
//! signer = "Group, Institution"
//! public = "<64 hex>"                 # ed25519 public key
//! key_id = "<16 hex>"                 # first 16 hex digits of SHA-256(public)
//! signature = "<128 hex>"             # ed25519 over the message below
//! vet_report = "<the vet report as JSON>"
//! ```
//!
//! The signed message is the UTF-8 text, each line ending in `\n`:
//!
//! ```text
//! exobound module signature v1
//! module: NAME
//! version: VERSION
//! module-sha256: HEX
//! vet-sha256: HEX
//! vet-passed: true|false
//! signer: SIGNER
//! ```

use std::path::{Path, PathBuf};

use ed25519_dalek::{Signature, Signer, VerifyingKey};
use serde::{Deserialize, Serialize};

use super::keys::{KeyPair, key_id, parse_public};
use super::{ShareError, hex, unhex, write_atomic};
use crate::runtime::module::sha256_hex;
use crate::vet::VetReport;

/// `kind` of a signature file.
pub const SIGNATURE_KIND: &str = "exobound-module-signature";
/// Layout version of signature files.
pub const SIGNATURE_FORMAT: u32 = 1;

/// A signature file's content.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModuleSignature {
    /// Always [`SIGNATURE_KIND`].
    pub kind: String,
    /// [`SIGNATURE_FORMAT`].
    pub format: u32,
    /// Manifest name of the module signed.
    pub module: String,
    /// Manifest version.
    pub version: String,
    /// SHA-256 of the module file, lowercase hex.
    pub module_sha256: String,
    /// SHA-256 of the bytes of `vet_report`, lowercase hex.
    pub vet_sha256: String,
    /// Whether the signed vet report passed.
    pub vet_passed: bool,
    /// Who signed.
    pub signer: String,
    /// The signer's ed25519 public key, 64 hex digits.
    pub public: String,
    /// The key's id.
    pub key_id: String,
    /// The ed25519 signature over [`ModuleSignature::message`], 128 hex digits.
    pub signature: String,
    /// The vet report, JSON, exactly as signed.
    pub vet_report: String,
}

impl ModuleSignature {
    /// The bytes that are signed.
    pub fn message(&self) -> Vec<u8> {
        format!(
            "exobound module signature v1\nmodule: {}\nversion: {}\nmodule-sha256: {}\n\
             vet-sha256: {}\nvet-passed: {}\nsigner: {}\n",
            self.module,
            self.version,
            self.module_sha256,
            self.vet_sha256,
            self.vet_passed,
            self.signer
        )
        .into_bytes()
    }

    /// The vet report it carries.
    pub fn report(&self) -> Result<VetReport, ShareError> {
        serde_json::from_str(&self.vet_report)
            .map_err(|e| ShareError(format!("the signed vet report does not parse: {e}")))
    }
}

/// The default signature path of a module file: `FILE.sig`.
pub fn default_path(module: &Path) -> PathBuf {
    let mut s = module.as_os_str().to_owned();
    s.push(".sig");
    PathBuf::from(s)
}

/// Sign the module `bytes` with its vet `report` (which must be of these
/// bytes and have passed).
pub fn sign(
    bytes: &[u8],
    report: &VetReport,
    key: &KeyPair,
) -> Result<ModuleSignature, ShareError> {
    let digest = sha256_hex(bytes);
    if report.sha256 != digest {
        return Err(ShareError(format!(
            "the vet report is of sha256 {}, but the module is {digest}; vet this file",
            report.sha256
        )));
    }
    if !report.passed {
        return Err(ShareError(format!(
            "vet failed ({}); a signature vouches for a passing vet, so fix the module first",
            report.failed().join(", ")
        )));
    }
    let vet_report = serde_json::to_string_pretty(report).map_err(|e| ShareError(e.to_string()))?;
    let public = key.verifying();
    let mut sig = ModuleSignature {
        kind: SIGNATURE_KIND.into(),
        format: SIGNATURE_FORMAT,
        module: report.name.clone(),
        version: report.version.clone(),
        module_sha256: digest,
        vet_sha256: sha256_hex(vet_report.as_bytes()),
        vet_passed: report.passed,
        signer: key.signer.clone(),
        public: hex(public.as_bytes()),
        key_id: key_id(&public),
        signature: String::new(),
        vet_report,
    };
    sig.signature = hex(&key.signing.sign(&sig.message()).to_bytes());
    Ok(sig)
}

/// Write a signature file atomically.
pub fn write(path: &Path, sig: &ModuleSignature) -> Result<(), ShareError> {
    let text = toml::to_string(sig).map_err(|e| ShareError(e.to_string()))?;
    write_atomic(path, text.as_bytes(), false)
}

/// Read a signature file.
pub fn read(path: &Path) -> Result<ModuleSignature, ShareError> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        ShareError(format!(
            "cannot read the signature `{}`: {e} (sign with `exobound module sign FILE --key KEY`, \
             or pass --sig)",
            path.display()
        ))
    })?;
    let sig: ModuleSignature = toml::from_str(&text).map_err(|e| {
        ShareError(format!("`{}` is not an exobound signature: {}", path.display(), e.message()))
    })?;
    if sig.kind != SIGNATURE_KIND || sig.format != SIGNATURE_FORMAT {
        return Err(ShareError(format!(
            "`{}` is kind {:?} format {}, not {SIGNATURE_KIND:?} format {SIGNATURE_FORMAT}",
            path.display(),
            sig.kind,
            sig.format
        )));
    }
    Ok(sig)
}

/// What a valid signature establishes.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Verified {
    /// Who signed.
    pub signer: String,
    /// Their key's id.
    pub key_id: String,
    /// Their public key.
    pub public: VerifyingKey,
    /// Whether the signed vet passed.
    pub vet_passed: bool,
}

/// Check `sig` against the module `bytes`: the digest, the vet report it
/// carries, and the ed25519 signature (strict verification).
pub fn verify(bytes: &[u8], sig: &ModuleSignature) -> Result<Verified, ShareError> {
    let digest = sha256_hex(bytes);
    if digest != sig.module_sha256 {
        return Err(ShareError(format!(
            "the module's sha256 is {digest}, but `{}` signed {}: the file changed after signing",
            sig.signer, sig.module_sha256
        )));
    }
    let vet_digest = sha256_hex(sig.vet_report.as_bytes());
    if vet_digest != sig.vet_sha256 {
        return Err(ShareError(format!(
            "the vet report in the signature has sha256 {vet_digest}, not the signed {}: it was edited",
            sig.vet_sha256
        )));
    }
    let report = sig.report()?;
    if report.sha256 != digest || report.passed != sig.vet_passed {
        return Err(ShareError(
            "the signed vet report is of another file or disagrees with vet_passed".into(),
        ));
    }
    let public = parse_public(&sig.public, "the signature")?;
    if key_id(&public) != sig.key_id {
        return Err(ShareError(format!(
            "key_id {} does not belong to the public key it names",
            sig.key_id
        )));
    }
    let raw: [u8; 64] = unhex(&sig.signature)
        .and_then(|b| b.try_into().ok())
        .ok_or_else(|| ShareError("`signature` is not 128 hex digits".into()))?;
    public.verify_strict(&sig.message(), &Signature::from_bytes(&raw)).map_err(|_| {
        ShareError(format!(
            "the ed25519 signature of `{}` (key {}) does not verify: the signature file was altered",
            sig.signer, sig.key_id
        ))
    })?;
    Ok(Verified {
        signer: sig.signer.clone(),
        key_id: sig.key_id.clone(),
        public,
        vet_passed: sig.vet_passed,
    })
}

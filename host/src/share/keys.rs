//! Institution key pairs (ed25519) and their files.
//!
//! Why this exists: a receiving group trusts a module because a colleague
//! it knows vetted it, and a signature is how that colleague says so. Keys
//! are ed25519 (RFC 8032) from the maintained `ed25519-dalek` crate; the
//! files are small TOML documents of our own layout, written atomically,
//! the secret one readable by its owner only:
//!
//! ```toml
//! # KEY.secret.toml
//! kind = "exobound-secret-key"
//! signer = "Lunar Exosphere Group, Example University"
//! secret = "<32-byte seed, 64 hex digits>"
//! public = "<32-byte public key, 64 hex digits>"
//! ```
//!
//! ```toml
//! # KEY.public.toml
//! kind = "exobound-public-key"
//! signer = "Lunar Exosphere Group, Example University"
//! public = "<64 hex digits>"
//! ```
//!
//! A key is named in messages by its id: the first 16 hex digits of the
//! SHA-256 of the 32 public-key bytes.

use std::path::{Path, PathBuf};

use ed25519_dalek::{SigningKey, VerifyingKey};
use serde::{Deserialize, Serialize};

use super::{ShareError, hex, unhex, write_atomic};

/// `kind` of a secret-key file.
pub const SECRET_KIND: &str = "exobound-secret-key";
/// `kind` of a public-key file.
pub const PUBLIC_KIND: &str = "exobound-public-key";

#[derive(Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
struct SecretFile {
    kind: String,
    signer: String,
    secret: String,
    public: String,
}

/// A public key with the name of its holder, as stored in a public-key
/// file, a trust policy or a signature.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PublicKeyFile {
    /// Always [`PUBLIC_KIND`].
    pub kind: String,
    /// Who holds the key (an institution or group).
    pub signer: String,
    /// The 32-byte ed25519 public key, 64 lowercase hex digits.
    pub public: String,
}

/// A loaded key pair.
pub struct KeyPair {
    /// Who holds it.
    pub signer: String,
    /// The signing half.
    pub signing: SigningKey,
}

impl KeyPair {
    /// The public half.
    pub fn verifying(&self) -> VerifyingKey {
        self.signing.verifying_key()
    }
}

/// The id of a public key: first 16 hex digits of SHA-256 of its bytes.
pub fn key_id(key: &VerifyingKey) -> String {
    crate::runtime::module::sha256_hex(key.as_bytes())[..16].to_string()
}

/// Parse 64 hex digits into a public key; `what` names it in messages.
pub fn parse_public(hex_text: &str, what: &str) -> Result<VerifyingKey, ShareError> {
    let bytes: [u8; 32] = unhex(hex_text)
        .and_then(|b| b.try_into().ok())
        .ok_or_else(|| ShareError(format!("{what}: the public key is not 64 hex digits")))?;
    VerifyingKey::from_bytes(&bytes)
        .map_err(|e| ShareError(format!("{what}: not a valid ed25519 public key ({e})")))
}

/// Make a new key pair for `signer` and write `PREFIX.secret.toml` and
/// `PREFIX.public.toml`; refuses to overwrite either. Returns both paths.
pub fn generate(signer: &str, prefix: &Path) -> Result<(PathBuf, PathBuf), ShareError> {
    if signer.trim().is_empty() {
        return Err(ShareError(
            "give the key's holder with --signer \"Group, Institution\"".into(),
        ));
    }
    let secret_path = with_suffix(prefix, ".secret.toml");
    let public_path = with_suffix(prefix, ".public.toml");
    for p in [&secret_path, &public_path] {
        if p.exists() {
            return Err(ShareError(format!(
                "`{}` already exists; choose another prefix or remove it first",
                p.display()
            )));
        }
    }
    let mut seed = [0u8; 32];
    getrandom::fill(&mut seed)
        .map_err(|e| ShareError(format!("the system's random source failed: {e}")))?;
    let signing = SigningKey::from_bytes(&seed);
    let public = hex(signing.verifying_key().as_bytes());
    let secret = SecretFile {
        kind: SECRET_KIND.into(),
        signer: signer.to_string(),
        secret: hex(&seed),
        public: public.clone(),
    };
    let text = format!(
        "# exobound secret key: keep it private; it signs modules as `{signer}`.\n{}",
        toml::to_string(&secret).map_err(|e| ShareError(e.to_string()))?
    );
    write_atomic(&secret_path, text.as_bytes(), true)?;
    let pubfile = PublicKeyFile { kind: PUBLIC_KIND.into(), signer: signer.to_string(), public };
    let text = format!(
        "# exobound public key of `{signer}`: share it; add it to a catalog's trust policy.\n{}",
        toml::to_string(&pubfile).map_err(|e| ShareError(e.to_string()))?
    );
    write_atomic(&public_path, text.as_bytes(), false)?;
    Ok((secret_path, public_path))
}

fn with_suffix(prefix: &Path, suffix: &str) -> PathBuf {
    let mut s = prefix.as_os_str().to_owned();
    s.push(suffix);
    PathBuf::from(s)
}

/// Read a secret-key file.
pub fn read_secret(path: &Path) -> Result<KeyPair, ShareError> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        ShareError(format!(
            "cannot read the key file `{}`: {e} (make one with `exobound module keygen`)",
            path.display()
        ))
    })?;
    let f: SecretFile = toml::from_str(&text).map_err(|e| {
        ShareError(format!(
            "`{}` is not an exobound secret-key file: {}",
            path.display(),
            e.message()
        ))
    })?;
    if f.kind != SECRET_KIND {
        return Err(ShareError(format!(
            "`{}` holds kind = {:?}, not {SECRET_KIND:?} (pass the .secret.toml file to --key)",
            path.display(),
            f.kind
        )));
    }
    let seed: [u8; 32] = unhex(&f.secret).and_then(|b| b.try_into().ok()).ok_or_else(|| {
        ShareError(format!("`{}`: `secret` is not 64 hex digits", path.display()))
    })?;
    let signing = SigningKey::from_bytes(&seed);
    if hex(signing.verifying_key().as_bytes()) != f.public.to_ascii_lowercase() {
        return Err(ShareError(format!(
            "`{}`: `public` does not belong to `secret`; the file is damaged",
            path.display()
        )));
    }
    Ok(KeyPair { signer: f.signer, signing })
}

/// Read a public-key file.
pub fn read_public(path: &Path) -> Result<(PublicKeyFile, VerifyingKey), ShareError> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        ShareError(format!("cannot read the public-key file `{}`: {e}", path.display()))
    })?;
    let f: PublicKeyFile = toml::from_str(&text).map_err(|e| {
        ShareError(format!(
            "`{}` is not an exobound public-key file: {}",
            path.display(),
            e.message()
        ))
    })?;
    if f.kind != PUBLIC_KIND {
        return Err(ShareError(format!(
            "`{}` holds kind = {:?}, not {PUBLIC_KIND:?}",
            path.display(),
            f.kind
        )));
    }
    let key = parse_public(&f.public, &path.display().to_string())?;
    Ok((f, key))
}

//! A catalog's trust policy: which signatures count, and whether a passing
//! vet is required.
//!
//! Why this exists: a catalog on a shared filesystem is only as good as
//! the rule that decides what may be taken from it. `policy.toml` in the
//! catalog's directory states that rule; `catalog add` refuses a module
//! that does not meet it, and a scenario's `name@version` is resolved only
//! if the module meets it at that moment. Layout:
//!
//! ```toml
//! require_vet = true          # the stored vet report must have passed
//! min_signatures = 1          # valid signatures by distinct trusted keys
//!
//! [[trusted]]
//! signer = "Lunar Exosphere Group, Example University"
//! public = "<64 hex digits>"  # from that group's KEY.public.toml
//! ```
//!
//! A catalog without `policy.toml` has the open policy: nothing required.

use std::path::Path;

use serde::{Deserialize, Serialize};

use super::ShareError;
use super::keys::{key_id, parse_public};
use super::signature::Verified;

/// File name of the policy inside a catalog.
pub const POLICY_FILE: &str = "policy.toml";

/// One trusted key.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TrustedKey {
    /// Who holds it.
    pub signer: String,
    /// The ed25519 public key, 64 hex digits.
    pub public: String,
}

/// A trust policy.
#[derive(Clone, Debug, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct Policy {
    /// Whether the module's stored vet report must show a pass.
    #[serde(default)]
    pub require_vet: bool,
    /// Least number of valid signatures by distinct trusted keys.
    #[serde(default)]
    pub min_signatures: usize,
    /// The trusted keys.
    #[serde(default)]
    pub trusted: Vec<TrustedKey>,
}

impl Policy {
    /// Read `DIR/policy.toml`, or the open policy if there is none.
    pub fn read(catalog: &Path) -> Result<Policy, ShareError> {
        let path = catalog.join(POLICY_FILE);
        if !path.exists() {
            return Ok(Policy::default());
        }
        let text = std::fs::read_to_string(&path)
            .map_err(|e| ShareError(format!("cannot read `{}`: {e}", path.display())))?;
        let p: Policy = toml::from_str(&text).map_err(|e| {
            ShareError(format!("`{}` is not a valid trust policy: {}", path.display(), e.message()))
        })?;
        for (i, t) in p.trusted.iter().enumerate() {
            parse_public(&t.public, &format!("{}: trusted[{i}] ({})", path.display(), t.signer))?;
        }
        if p.min_signatures > 0 && p.trusted.is_empty() {
            return Err(ShareError(format!(
                "`{}` requires {} signatures but trusts no key; add [[trusted]] entries",
                path.display(),
                p.min_signatures
            )));
        }
        Ok(p)
    }

    /// Whether the policy asks for anything at all.
    pub fn is_open(&self) -> bool {
        !self.require_vet && self.min_signatures == 0
    }

    /// Whether `v`'s key is trusted.
    pub fn trusts(&self, v: &Verified) -> bool {
        self.trusted.iter().any(|t| t.public.eq_ignore_ascii_case(&super::hex(v.public.as_bytes())))
    }

    /// Judge a module: `vet_passed` from its stored report, `signatures`
    /// the results of verifying each signature. Returns the reasons for
    /// refusal, or the key ids of the trusted signers counted.
    pub fn judge(
        &self,
        vet_passed: bool,
        signatures: &[Result<Verified, ShareError>],
    ) -> Result<Vec<String>, Vec<String>> {
        let mut reasons = Vec::new();
        if self.require_vet && !vet_passed {
            reasons
                .push("the policy requires a passing vet, and the stored vet report failed".into());
        }
        let mut counted: Vec<String> = Vec::new();
        for s in signatures {
            match s {
                Ok(v) if self.trusts(v) && v.vet_passed => {
                    let id = key_id(&v.public);
                    if !counted.contains(&id) {
                        counted.push(id);
                    }
                }
                Ok(v) if self.trusts(v) => reasons.push(format!(
                    "the signature of `{}` (key {}) vouches for a failed vet",
                    v.signer, v.key_id
                )),
                Ok(v) => {
                    if self.min_signatures > 0 {
                        reasons.push(format!(
                            "the signer `{}` (key {}) is not trusted by the policy",
                            v.signer, v.key_id
                        ))
                    }
                }
                Err(e) => reasons.push(format!("a signature is invalid: {e}")),
            }
        }
        if counted.len() < self.min_signatures {
            reasons.push(format!(
                "the policy requires {} signature(s) by trusted keys; {} found",
                self.min_signatures,
                counted.len()
            ));
        } else if counted.len() >= self.min_signatures {
            // Untrusted or broken extra signatures do not block a module
            // that has enough trusted ones, but a broken one always does.
            reasons.retain(|r| !r.contains("is not trusted"));
        }
        if reasons.is_empty() { Ok(counted) } else { Err(reasons) }
    }
}

//! The sharing commands: `module vet|keygen|sign|verify`, `catalog
//! add|list|show` and `provenance`.
//!
//! Why this exists: each command is one call into `exobound::vet` or
//! `exobound::share`, plus printing; a failed vet, a bad signature or a
//! changed module file is an error (exit code 1) after the report. Strings
//! read from modules, signatures, catalogs and run records were written by
//! others, so they are printed through `exobound::text` (escape sequences
//! and bidirectional controls shown as visible escapes).

use std::path::{Path, PathBuf};

use anyhow::{Context, Result, anyhow, bail};
use clap::{Args, Subcommand};
use exobound::share::catalog::{Catalog, parse_ref};
use exobound::share::{keys, signature, trace};
use exobound::text::{json_printable, printable};
use exobound::vet::{self, VetReport};

/// `value` as pretty JSON, safe to print (see `exobound::text::json_printable`).
fn pretty_json(value: &impl serde::Serialize) -> Result<String> {
    Ok(json_printable(&serde_json::to_string_pretty(value)?).into_owned())
}

/// `exobound module vet`.
#[derive(Args)]
pub struct VetArgs {
    /// The `.wasm` file.
    file: PathBuf,
    /// Print the report as JSON instead of text.
    #[arg(long)]
    json: bool,
    /// Also write the JSON report to this file (atomically).
    #[arg(long, value_name = "REPORT.json")]
    out: Option<PathBuf>,
}

/// `exobound module keygen`.
#[derive(Args)]
pub struct KeygenArgs {
    /// Who holds the key, e.g. "Lunar Exosphere Group, Example University".
    #[arg(long)]
    signer: String,
    /// Path prefix: writes PREFIX.secret.toml and PREFIX.public.toml.
    #[arg(long, value_name = "PREFIX")]
    out: PathBuf,
}

/// `exobound module sign`.
#[derive(Args)]
pub struct SignArgs {
    /// The `.wasm` file.
    file: PathBuf,
    /// The secret-key file (KEY.secret.toml from `exobound module keygen`).
    #[arg(long, value_name = "KEY")]
    key: PathBuf,
    /// Where to write the signature (default: FILE.sig).
    #[arg(long, value_name = "SIG")]
    out: Option<PathBuf>,
    /// Sign this vet report (JSON from `module vet --out`) instead of vetting again.
    #[arg(long, value_name = "REPORT.json")]
    vet_report: Option<PathBuf>,
}

/// `exobound module verify`.
#[derive(Args)]
pub struct VerifyArgs {
    /// The `.wasm` file. With --rebuild: the published module to compare
    /// (default: the one `exobound module build` left in SRC_DIR).
    file: Option<PathBuf>,
    /// Rebuild the module crate in SRC_DIR, in a fresh copy in another directory, and
    /// compare its digest with FILE's; the signature is checked too if there is one.
    #[arg(long, value_name = "SRC_DIR")]
    rebuild: Option<PathBuf>,
    /// The signature (default: FILE.sig).
    #[arg(long, value_name = "SIG")]
    sig: Option<PathBuf>,
    /// Require the signer to be one of these public keys (KEY.public.toml; repeatable).
    #[arg(long, value_name = "PUBLIC")]
    trusted: Vec<PathBuf>,
}

/// `exobound catalog ...`.
#[derive(Subcommand)]
pub enum CatalogAction {
    /// Vet a module and add it (with its signatures) to a catalog directory, creating the index if needed.
    Add {
        /// The catalog directory.
        catalog: PathBuf,
        /// The `.wasm` file.
        file: PathBuf,
        /// Signature files to store with it (repeatable).
        #[arg(long = "sig", value_name = "SIG")]
        sigs: Vec<PathBuf>,
        /// Use this vet report (JSON from `module vet --out`) instead of vetting again.
        #[arg(long, value_name = "REPORT.json")]
        vet_report: Option<PathBuf>,
    },
    /// List a catalog's modules by name@version.
    List {
        /// The catalog directory.
        catalog: PathBuf,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
    /// Show one module, re-checking its file, signatures and the trust policy.
    Show {
        /// The catalog directory.
        catalog: PathBuf,
        /// The module, as name@version.
        module: String,
        /// Print JSON instead of text.
        #[arg(long)]
        json: bool,
    },
}

/// `exobound provenance`.
#[derive(Args)]
pub struct ProvenanceArgs {
    /// The output directory of a finished run.
    run_dir: PathBuf,
    /// Print JSON instead of text.
    #[arg(long)]
    json: bool,
}

fn read_report(path: &Path) -> Result<VetReport> {
    let text = std::fs::read_to_string(path)
        .with_context(|| format!("cannot read the vet report `{}`", path.display()))?;
    serde_json::from_str(&text).with_context(|| {
        format!(
            "`{}` is not a vet report (make one with `exobound module vet FILE --out`)",
            path.display()
        )
    })
}

fn vet_or_read(file: &Path, report: &Option<PathBuf>) -> Result<VetReport> {
    match report {
        Some(p) => read_report(p),
        None => {
            eprintln!("vetting {} ...", file.display());
            Ok(vet::vet_file(file)?)
        }
    }
}

/// Run `module vet`.
pub fn vet(a: VetArgs) -> Result<()> {
    let report = vet::vet_file(&a.file)?;
    if let Some(out) = &a.out {
        exobound::share::write_atomic(out, pretty_json(&report)?.as_bytes(), false)?;
    }
    if a.json {
        println!("{}", pretty_json(&report)?);
    } else {
        print!("{}", vet::render_text(&report));
    }
    if !report.passed {
        bail!("vet failed: {}", printable(&report.failed().join(", ")));
    }
    Ok(())
}

/// Run `module keygen`.
pub fn keygen(a: KeygenArgs) -> Result<()> {
    let (secret, public) = keys::generate(&a.signer, &a.out)?;
    let (_, key) = keys::read_public(&public)?;
    println!("wrote {} (keep it private)", secret.display());
    println!("wrote {} (share it)", public.display());
    println!("key id {}", keys::key_id(&key));
    Ok(())
}

/// Run `module sign`.
pub fn sign(a: SignArgs) -> Result<()> {
    let key = keys::read_secret(&a.key)?;
    let bytes = std::fs::read(&a.file)
        .with_context(|| format!("cannot read the module `{}`", a.file.display()))?;
    let report = vet_or_read(&a.file, &a.vet_report)?;
    let sig = signature::sign(&bytes, &report, &key)?;
    let out = a.out.unwrap_or_else(|| signature::default_path(&a.file));
    signature::write(&out, &sig)?;
    println!(
        "signed {} {} (sha256 {}) as `{}` (key {}); wrote {}",
        printable(&sig.module),
        printable(&sig.version),
        sig.module_sha256,
        printable(&sig.signer),
        sig.key_id,
        out.display()
    );
    Ok(())
}

/// Run `module verify`.
pub fn verify(a: VerifyArgs) -> Result<()> {
    let Some(src) = a.rebuild else {
        let Some(file) = a.file else {
            bail!("give the .wasm file to verify (or --rebuild SRC_DIR to rebuild its source)");
        };
        return verify_signature(&file, a.sig, &a.trusted, true);
    };
    let file = match a.file {
        Some(f) => f,
        None => exobound::rebuild::built_module(&src)?,
    };
    let r = exobound::rebuild::rebuild_and_compare(&src, &file)?;
    if !r.matches() {
        bail!("{}", r.summary().trim_end());
    }
    print!("{}", r.summary());
    let explicit = a.sig.is_some() || !a.trusted.is_empty();
    verify_signature(&file, a.sig, &a.trusted, explicit)
}

/// Check the signature of `file` (at `sig`, default FILE.sig) and, if
/// `trusted` is not empty, that its signer is one of them. When the
/// signature was not asked for (`required` false) and there is none, say so.
fn verify_signature(
    file: &Path,
    sig: Option<PathBuf>,
    trusted: &[PathBuf],
    required: bool,
) -> Result<()> {
    let sig_path = sig.unwrap_or_else(|| signature::default_path(file));
    if !required && !sig_path.exists() {
        println!("signature: none at {}, not checked", sig_path.display());
        return Ok(());
    }
    let sig = signature::read(&sig_path)?;
    let bytes = std::fs::read(file)
        .with_context(|| format!("cannot read the module `{}`", file.display()))?;
    let v = signature::verify(&bytes, &sig).map_err(|e| anyhow!("{}: {e}", file.display()))?;
    if !trusted.is_empty() {
        let mut is_trusted = false;
        for p in trusted {
            let (_, key) = keys::read_public(p)?;
            is_trusted |= key == v.public;
        }
        if !is_trusted {
            bail!(
                "the signature is valid, but its signer `{}` (key {}) is none of the --trusted keys",
                printable(&v.signer),
                v.key_id
            );
        }
    }
    println!(
        "valid: {} {} (sha256 {}) signed by `{}` (key {}{}); the signed vet {}",
        printable(&sig.module),
        printable(&sig.version),
        printable(&sig.module_sha256),
        printable(&v.signer),
        v.key_id,
        if trusted.is_empty() { ", not checked against a trust list" } else { ", trusted" },
        if v.vet_passed { "passed" } else { "FAILED" }
    );
    Ok(())
}

/// Run `catalog ...`.
pub fn catalog(action: CatalogAction) -> Result<()> {
    match action {
        CatalogAction::Add { catalog, file, sigs, vet_report } => {
            let mut cat = Catalog::open_or_new(&catalog)?;
            let report = vet_or_read(&file, &vet_report)?;
            let e = cat.add(&file, &report, &sigs)?;
            println!(
                "added {} (sha256 {}, vet {}, {} signature(s)) to {}",
                printable(&e.reference()),
                e.sha256,
                if e.vet_passed { "passed" } else { "FAILED" },
                e.signatures.len(),
                catalog.display()
            );
            Ok(())
        }
        CatalogAction::List { catalog, json } => {
            let cat = Catalog::open(&catalog)?;
            if json {
                println!("{}", pretty_json(&cat.index.modules)?);
                return Ok(());
            }
            if cat.index.modules.is_empty() {
                println!("{}: no modules", catalog.display());
            }
            for e in &cat.index.modules {
                let signers: Vec<String> =
                    e.signatures.iter().map(|s| printable(&s.signer).into_owned()).collect();
                println!(
                    "{:<32} sha256 {}  vet {}  signed by: {}",
                    printable(&e.reference()),
                    printable(e.sha256.get(..16).unwrap_or(&e.sha256)),
                    if e.vet_passed { "pass" } else { "FAIL" },
                    if signers.is_empty() { "(nobody)".to_string() } else { signers.join("; ") }
                );
            }
            Ok(())
        }
        CatalogAction::Show { catalog, module, json } => {
            let cat = Catalog::open(&catalog)?;
            let (name, version) = parse_ref(&module).ok_or_else(|| {
                anyhow!("`{}` is not name@version (e.g. photoionization@1.0.0)", printable(&module))
            })?;
            let entry = cat.find(name, version).ok_or_else(|| {
                anyhow!(
                    "`{}` is not in `{}`; see `exobound catalog list`",
                    printable(&module),
                    catalog.display()
                )
            })?;
            let st = cat.standing(entry);
            if json {
                let v = serde_json::json!({
                    "entry": st.entry,
                    "path": st.path.display().to_string(),
                    "sha256_now": st.sha256_now,
                    "signatures": st.signatures.iter().map(|s| match s {
                        Ok(v) => serde_json::json!({"valid": true, "signer": v.signer, "key_id": v.key_id}),
                        Err(e) => serde_json::json!({"valid": false, "error": e.0}),
                    }).collect::<Vec<_>>(),
                    "policy_open": cat.policy.is_open(),
                    "accepted": st.verdict.is_ok(),
                    "refusals": st.verdict.clone().err().unwrap_or_default(),
                });
                println!("{}", pretty_json(&v)?);
            } else {
                println!("{}  in {}", printable(&st.entry.reference()), catalog.display());
                println!("  file:      {}", printable(&st.path.display().to_string()));
                println!("  sha256:    {} (index)", printable(&st.entry.sha256));
                println!(
                    "             {} (file now)",
                    st.sha256_now.as_deref().unwrap_or("(missing)")
                );
                println!(
                    "  vet:       {} ({})",
                    if st.entry.vet_passed { "passed" } else { "FAILED" },
                    printable(&st.entry.vet_report)
                );
                for (r, s) in st.entry.signatures.iter().zip(&st.signatures) {
                    match s {
                        Ok(v) => println!(
                            "  signature: `{}` key {}: valid{}",
                            printable(&v.signer),
                            v.key_id,
                            if cat.policy.trusts(v) {
                                ", trusted"
                            } else if cat.policy.trusted.is_empty() {
                                " (the policy lists no trusted keys)"
                            } else {
                                ", not trusted by the policy"
                            }
                        ),
                        Err(e) => println!(
                            "  signature: {} ({}): INVALID: {e}",
                            printable(&r.signer),
                            printable(&r.file)
                        ),
                    }
                }
                if cat.policy.is_open() {
                    println!("  policy:    open (no policy.toml: nothing required)");
                }
                match &st.verdict {
                    Ok(_) => println!("  verdict:   accepted by the catalog's trust policy"),
                    Err(r) => println!("  verdict:   REFUSED: {}", printable(&r.join("; "))),
                }
            }
            if let Err(r) = st.verdict {
                bail!(
                    "{} does not meet the trust policy of {}: {}",
                    printable(&module),
                    catalog.display(),
                    printable(&r.join("; "))
                );
            }
            Ok(())
        }
    }
}

/// Run `provenance`.
pub fn provenance(a: ProvenanceArgs) -> Result<()> {
    let t = trace::trace(&a.run_dir)?;
    if a.json {
        println!("{}", pretty_json(&t)?);
    } else {
        print!("{}", trace::render_text(&t));
    }
    if t.any_changed() {
        bail!("a module file changed since the run: its results were made with other code");
    }
    Ok(())
}

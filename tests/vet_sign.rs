//! Sharing modules: vet passes every standard module and names the check
//! each bad fixture fails; signatures verify and catch a one-byte change;
//! a lock catches the same change; a trust policy refuses an untrusted
//! signer; a catalog survives a round trip; a run's provenance is
//! re-verified.

use std::path::{Path, PathBuf};
use std::sync::{Arc, OnceLock};

use exobound::runtime::{Runtime, RuntimeConfig};
use exobound::scenario::{Scenario, demo};
use exobound::share::catalog::{self, Catalog};
use exobound::share::lock::{self, LockAction};
use exobound::share::policy::Policy;
use exobound::share::{keys, signature, trace};
use exobound::vet::{self, Status, VetOptions, VetReport};
use exobound_sdk::wire::{ManifestInfo, ReferenceInfo};

use crate::support::*;

fn options() -> VetOptions {
    VetOptions { cache_dir: None, ..VetOptions::default() }
}

fn vet_bytes(label: &str, bytes: &[u8]) -> VetReport {
    vet::vet_bytes(label, bytes, &options())
}

/// The vet report of the standard photoionization module, made once.
fn photoionization_report() -> &'static VetReport {
    static R: OnceLock<VetReport> = OnceLock::new();
    R.get_or_init(|| {
        vet::vet_file_with(&exobound::standard_module("photoionization"), &options()).unwrap()
    })
}

#[test]
fn every_standard_module_passes_vet() {
    for name in STANDARD {
        // As a user names it: `exobound module vet standard:NAME` vets the
        // copy the binary carries, the very bytes the build wrote.
        let r = vet::vet_file_with(Path::new(&format!("standard:{name}")), &options()).unwrap();
        assert!(r.passed, "{name} fails vet:\n{}", vet::render_text(&r));
        assert_eq!(r.name, name);
        let built = std::fs::read(exobound::standard_module(name)).unwrap();
        assert_eq!(r.sha256, exobound::runtime::module::sha256_hex(&built), "{name}");
        for check in ["abi", "manifest", "reference-points", "determinism", "bounds", "throughput"]
        {
            let c = r.check(check).unwrap_or_else(|| panic!("{name}: no `{check}` check"));
            assert_eq!(c.status, Status::Pass, "{name}: {check}: {}", c.summary);
        }
        // Every standard source declares its launch laws and its launches pass the KS
        // tests against them (one per declared law); the other roles declare none.
        let d = r.check("distribution").unwrap();
        let source = r.check("sampler").unwrap().measured.contains_key("launch_mean_speed_m_s-1");
        if source {
            assert_eq!(d.status, Status::Pass, "{name}: {}\n{:#?}", d.summary, d.details);
            assert!(d.details.iter().all(|l| l.contains("follows the declaration")), "{name}");
        } else {
            assert_eq!(d.status, Status::NotApplicable, "{name}");
        }
        let json = serde_json::to_value(&r).unwrap();
        assert_eq!(json["checks"].as_array().unwrap().len(), 8);
        assert!(vet::render_text(&r).contains("result: PASS"));
    }
}

/// A complete manifest for a WAT fixture, with `points` as its reference points.
fn manifest(name: &str, roles: &[&str], points: Vec<ReferenceInfo>) -> ManifestInfo {
    ManifestInfo {
        name: name.to_string(),
        version: "1.0.0".to_string(),
        description: "hand-written WAT fixture for the vet tests".to_string(),
        roles: roles.iter().map(|r| r.to_string()).collect(),
        authors: vec!["exobound developers".to_string()],
        institution: "exobound project".to_string(),
        licence: "Apache-2.0".to_string(),
        law_source: "invented for the vet tests (a fixture, no publication)".to_string(),
        draws_on: roles.contains(&"source").then(|| "bulk".to_string()),
        ledger_label: String::new(),
        inputs: vec![],
        parameters: vec![],
        reference_points: points,
        launch_laws: Vec::new(),
    }
}

fn point(check: &str, input: &[(&str, f64)], expected: f64) -> ReferenceInfo {
    ReferenceInfo {
        description: format!("{check} fixture point"),
        check: check.to_string(),
        parameters: vec![],
        input: input.iter().map(|(k, v)| (k.to_string(), *v)).collect(),
        expected,
        tolerance: 1e-6,
        source: "the fixture's own definition".to_string(),
    }
}

fn encode(m: &ManifestInfo) -> Vec<u8> {
    rmp_serde::to_vec_named(m).unwrap()
}

/// A loss export whose rate per record is the f64 expression `rate`
/// (which may read `$rec`, the record's address, and `$calls`, a call counter).
fn loss(rate: &str, per_record: &str) -> String {
    format!(
        r#"(global $calls (mut f64) (f64.const 0))
  (func (export "exobound_loss_rate") (param $in i32) (param $n i32) (param $out i32) (result i32)
    (local $i i32) (local $rec i32) (local $j i32)
    (block $done
      (loop $fill
        (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
        (local.set $rec (i32.add (local.get $in) (i32.mul (local.get $i) (i32.const 88))))
        {per_record}
        (f64.store (i32.add (local.get $out) (i32.mul (local.get $i) (i32.const 8))) {rate})
        (local.set $i (i32.add (local.get $i) (i32.const 1)))
        (br $fill)))
    (global.set $calls (f64.add (global.get $calls) (f64.const 1)))
    (local.get $n))"#
    )
}

fn loss_fixture(name: &str, rate: &str, per_record: &str, m: Option<ManifestInfo>) -> Vec<u8> {
    let m = m.unwrap_or_else(|| {
        manifest(name, &["loss"], vec![point("loss-rate", &[("altitude", 0.0)], 1e-6)])
    });
    wat(Some("1.0.0"), Some(&encode(&m)), "", &loss(rate, per_record))
}

/// A source whose launch speed grows with the particle id modulo 40000:
/// keyed wrongly, though deterministic and in bounds.
fn keyed_wrongly() -> Vec<u8> {
    let id_mod = |i: u64| (i % 40_000) as f64;
    let n = exobound::runtime::reference::STOCHASTIC_DRAWS;
    let mean = (0..n).map(|i| 100.0 + id_mod(i) * 1e-3).sum::<f64>() / n as f64;
    let m = manifest(
        "keyed-wrongly",
        &["source"],
        vec![point("release-rate", &[], 1.0), point("mean-launch-speed", &[], mean)],
    );
    let release = constant_rate_export("exobound_release_rate", "1");
    let body = release
        + r#"
  (func (export "exobound_launch") (param $in i32) (param $n i32) (param $out i32) (result i32)
    (local $i i32) (local $o i32)
    (block $done (loop $fill
      (br_if $done (i32.ge_u (local.get $i) (local.get $n)))
      (local.set $o (i32.add (local.get $out) (i32.mul (local.get $i) (i32.const 24))))
      (f64.store (local.get $o) (f64.const 0))
      (f64.store offset=8 (local.get $o) (f64.const 0))
      (f64.store offset=16 (local.get $o)
        (f64.add (f64.const 100)
          (f64.mul (f64.const 1e-3)
            (f64.convert_i64_u (i64.rem_u
              (i64.load offset=8 (i32.add (local.get $in) (i32.mul (local.get $i) (i32.const 96))))
              (i64.const 40000))))))
      (local.set $i (i32.add (local.get $i) (i32.const 1)))
      (br $fill)))
    (local.get $n))"#;
    wat(Some("1.0.0"), Some(&encode(&m)), "", &body)
}

#[test]
fn vet_names_the_check_each_bad_fixture_fails() {
    let busy = "(local.set $j (i32.const 0))
        (block $b (loop $l
          (br_if $b (i32.ge_u (local.get $j) (i32.const 50000)))
          (local.set $j (i32.add (local.get $j) (i32.const 1)))
          (br $l)))";
    let mut bad_units = manifest("bad-units", &["loss"], vec![point("loss-rate", &[], 1e-6)]);
    bad_units.law_source = String::new();
    bad_units.parameters.push(exobound_sdk::wire::ParamInfo {
        name: "scale".into(),
        unit: "bananas".into(),
        description: "a parameter with a unit nobody can read".into(),
        default: Some(exobound_sdk::ParamValue::Number(1.0)),
        min: Some(0.0),
        max: Some(2.0),
        choices: vec![],
        default_origin: "common practice".into(),
        table: None,
    });
    let good_manifest = manifest("abi-two", &["loss"], vec![point("loss-rate", &[], 1e-6)]);
    let cases: Vec<(&str, Vec<u8>, Vec<&str>)> = vec![
        (
            "ABI 2.0.0",
            wat(Some("2.0.0"), Some(&encode(&good_manifest)), "", &loss("(f64.const 1e-6)", "")),
            vec!["abi"],
        ),
        (
            "unreadable unit, no published source",
            loss_fixture("bad-units", "(f64.const 1e-6)", "", Some(bad_units)),
            vec!["manifest"],
        ),
        (
            "misses its own reference point",
            loss_fixture(
                "wrong-reference",
                "(f64.const 1e-6)",
                "",
                Some(manifest("wrong-reference", &["loss"], vec![point("loss-rate", &[], 2e-6)])),
            ),
            vec!["reference-points"],
        ),
        (
            "keeps state between calls",
            loss_fixture(
                "stateful",
                "(f64.add (f64.const 1e-6) (f64.mul (global.get $calls) (f64.const 1e-12)))",
                "",
                None,
            ),
            vec!["determinism"],
        ),
        (
            "loss rate of 10 s^-1 above 1000 km",
            loss_fixture(
                "too-lossy",
                "(select (f64.const 10) (f64.const 1e-6) (f64.gt (f64.load offset=24 (local.get $rec)) (f64.const 1e6)))",
                "",
                None,
            ),
            vec!["bounds"],
        ),
        ("sampler keyed by particle id", keyed_wrongly(), vec!["sampler"]),
        (
            "450k fuel per record",
            loss_fixture("slow", "(f64.const 1e-6)", busy, None),
            vec!["throughput"],
        ),
    ];
    for (what, bytes, want) in cases {
        let r = vet_bytes(what, &bytes);
        assert!(!r.passed, "{what}: passed vet");
        assert_eq!(r.failed(), want, "{what}:\n{}", vet::render_text(&r));
    }
    // The hostile Rust fixture: NaN, infinite and negative rates, bad
    // outcomes, an endless loop, a memory bomb and a panic, all under `bounds`.
    let path = exobound_tests::fixture_dir().join("hostile_law.wasm");
    let r = vet::vet_file_with(&path, &options()).unwrap();
    let bounds = r.check("bounds").unwrap();
    assert_eq!(bounds.status, Status::Fail);
    for mode in [
        "loop",
        "grow",
        "panic",
        "nan",
        "infinite",
        "negative",
        "bad-outcome",
        "downward",
        "too-fast",
    ] {
        assert!(
            bounds.details.iter().any(|d| d.starts_with(&format!("mode = \"{mode}\""))),
            "hostile mode {mode} not named: {:#?}",
            bounds.details
        );
    }
    // No published source and no reference points: the manifest fails too.
    assert!(r.failed().contains(&"manifest") && r.failed().contains(&"reference-points"));
}

#[test]
fn vet_fails_a_source_whose_launches_disagree_with_its_declaration() {
    // The fixture declares the Maxwellian flux with cosine-law directions and draws the
    // Maxwellian gas (mode gas-speeds) or isotropic directions (mode isotropic-directions).
    let path = exobound_tests::fixture_dir().join("mislabelled_source.wasm");
    let r = vet::vet_file_with(&path, &options()).unwrap();
    assert_eq!(r.failed(), vec!["distribution"], "{}", vet::render_text(&r));
    let d = r.check("distribution").unwrap();
    assert!(d.summary.contains("disagree with 2 of the 2 declared launch laws"), "{}", d.summary);
    let line = |mode: &str| d.details.iter().find(|l| l.contains(mode)).unwrap().clone();
    let critical = |l: &str| -> f64 {
        l.split("critical ").nth(1).unwrap().split(' ').next().unwrap().parse().unwrap()
    };
    let distance = |l: &str, what: &str| -> f64 {
        let tail = l.split(&format!("{what} D = ")).nth(1).unwrap();
        tail.split(',').next().unwrap().parse().unwrap()
    };
    // D_crit = c(0.001)/(sqrt(n) + 0.12 + 0.11/sqrt(n)) with c = sqrt(ln(2000)/2) = 1.9495,
    // n = 20 000 (Kolmogorov 1933, Giorn. Ist. Ital. Attuari 4, 83; finite-n form of
    // Stephens 1974, J. Am. Stat. Assoc. 69, 730, Table 1A).
    let d_crit = d.measured["ks_critical_distance"];
    assert!((d_crit - 0.013_773).abs() < 5e-7, "{d_crit}");
    // Gas speeds: the speed test fails, the directions (cosine law) pass. The line names
    // the declared law that fails. The largest gap between the CDFs of the Maxwellian gas,
    // erf(x) - 2x exp(-x^2)/sqrt(pi), and of the flux, 1 - (1 + x^2) exp(-x^2), x = v/a,
    // is 0.1694 (closed forms of kinetic theory, e.g. Chamberlain & Hunten 1987, Theory
    // of Planetary Atmospheres, 2nd ed.; from memory), twelve times D_crit.
    let gas = line("mode = gas-speeds");
    assert!(gas.starts_with("maxwellian-flux speeds, cosine directions"), "{gas}");
    assert!(gas.ends_with("DISAGREES with the declaration (speed test)"), "{gas}");
    assert!(
        distance(&gas, "speed") > critical(&gas) && distance(&gas, "direction") < critical(&gas)
    );
    assert!((distance(&gas, "speed") - 0.1694).abs() < d_crit, "{gas}");
    // Isotropic directions: the speed test passes, the direction test fails; the CDFs c
    // and c^2 are at most 1/4 apart (at c = 1/2).
    let iso = line("mode = isotropic-directions");
    assert!(iso.ends_with("DISAGREES with the declaration (direction test)"), "{iso}");
    assert!(
        distance(&iso, "speed") < critical(&iso) && distance(&iso, "direction") > critical(&iso)
    );
    assert!((distance(&iso, "direction") - 0.25).abs() < d_crit, "{iso}");
    // A source that declares nothing is reported as such, and passes.
    let r = vet_bytes("keyed-wrongly", &keyed_wrongly());
    let d = r.check("distribution").unwrap();
    assert_eq!(d.status, Status::NotDeclared, "{}", d.summary);
    assert!(d.summary.starts_with("not declared"));
}

/// Keys for `signer` under `dir`.
fn keypair(dir: &Path, label: &str) -> (PathBuf, PathBuf) {
    keys::generate(&format!("{label} group, Example Institute"), &dir.join(label)).unwrap()
}

/// `bytes` with the first `Huebner` (in the manifest's law source) changed to `huebner`.
fn tampered(bytes: &[u8]) -> Vec<u8> {
    let at = bytes.windows(7).position(|w| w == b"Huebner").expect("the manifest cites Huebner");
    let mut t = bytes.to_vec();
    t[at] = b'h';
    t
}

#[test]
fn ed25519_matches_rfc_8032_test_1() {
    // RFC 8032 section 7.1, TEST 1 (empty message); the secret and public
    // key were checked against a public copy of the vectors, the signature
    // is as published in the RFC.
    let seed =
        exobound::share::unhex("9d61b19deffd5a60ba844af492ec2cc44449c5697b326919703bac031cae7f60")
            .unwrap();
    let sk = ed25519_dalek::SigningKey::from_bytes(&seed.try_into().unwrap());
    assert_eq!(
        exobound::share::hex(sk.verifying_key().as_bytes()),
        "d75a980182b10ab7d54bfed3c964073a0ee172f3daa62325af021a68f707511a"
    );
    use ed25519_dalek::Signer;
    assert_eq!(
        exobound::share::hex(&sk.sign(b"").to_bytes()),
        "e5564300c360ac729086e2cc806e828a84877f1eb8e5d974d873e065224901555fb8821590a33bacc61e39701cf9b46bd25bf5f0595bbe24655141438e7a100b"
    );
}

#[test]
fn a_signature_verifies_and_a_one_byte_change_fails_verify_and_the_lock() {
    let tmp = TempDir::new("sign");
    let (secret, public) = keypair(tmp.path(), "alpha");
    let key = keys::read_secret(&secret).unwrap();
    let (_, trusted) = keys::read_public(&public).unwrap();
    let original = std::fs::read(exobound::standard_module("photoionization")).unwrap();
    let sig = signature::sign(&original, photoionization_report(), &key).unwrap();
    let sig_path = tmp.path().join("photoionization.wasm.sig");
    signature::write(&sig_path, &sig).unwrap();
    let back = signature::read(&sig_path).unwrap();
    assert_eq!(back, sig);
    let v = signature::verify(&original, &back).unwrap();
    assert_eq!(v.public, trusted);
    assert!(v.vet_passed);

    // One byte changed: verify names both digests.
    let bad = tampered(&original);
    let e = signature::verify(&bad, &back).unwrap_err().to_string();
    assert!(e.contains(&sig.module_sha256) && e.contains("changed after signing"), "{e}");
    // An edited signature file fails too.
    let mut forged = back.clone();
    forged.signer = "someone else".into();
    assert!(signature::verify(&original, &forged).unwrap_err().0.contains("does not verify"));
    // A missing key file names the file and the fix.
    let e = keys::read_secret(&tmp.path().join("nope.secret.toml")).err().unwrap().0;
    assert!(e.contains("nope.secret.toml") && e.contains("keygen"), "{e}");

    // The lock: pinned on the first load, refused after the byte changes.
    demo::write(tmp.path()).unwrap();
    let module = tmp.path().join("photoionization.wasm");
    std::fs::write(&module, &original).unwrap();
    let scenario = tmp.path().join("demo-quick.toml");
    let text = std::fs::read_to_string(&scenario).unwrap();
    std::fs::write(&scenario, text.replace("standard:photoionization", "photoionization.wasm"))
        .unwrap();
    let rt = Arc::new(
        Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap(),
    );
    let lock_path = lock::path_for(&scenario);
    let s = Scenario::load(&scenario, &[], &rt).unwrap();
    assert_eq!(lock::enforce(&lock_path, &s.modules, false).unwrap(), LockAction::Created);
    assert_eq!(lock::enforce(&lock_path, &s.modules, false).unwrap(), LockAction::Unchanged);
    let pinned = std::fs::read_to_string(&lock_path).unwrap();
    std::fs::write(&module, &bad).unwrap();
    let s2 = Scenario::load(&scenario, &[], &rt).unwrap();
    let new_digest = exobound::runtime::module::sha256_hex(&bad);
    let e = lock::enforce(&lock_path, &s2.modules, false).unwrap_err().0;
    assert!(
        e.contains("photoionization.wasm")
            && e.contains(&sig.module_sha256)
            && e.contains(&new_digest),
        "{e}"
    );
    assert!(e.contains("--update-lock"), "{e}");
    assert_eq!(
        std::fs::read_to_string(&lock_path).unwrap(),
        pinned,
        "a refusal leaves the lock as it was"
    );
    assert_eq!(lock::enforce(&lock_path, &s2.modules, true).unwrap(), LockAction::Updated);
    assert!(std::fs::read_to_string(&lock_path).unwrap().contains(&new_digest));
}

#[test]
fn a_policy_refuses_an_untrusted_signer_and_a_catalog_round_trips() {
    let tmp = TempDir::new("catalog");
    let (a_secret, a_public) = keypair(tmp.path(), "trusted");
    let (b_secret, _) = keypair(tmp.path(), "stranger");
    let cat_dir = tmp.path().join("cat");
    std::fs::create_dir_all(&cat_dir).unwrap();
    let (a_file, _) = keys::read_public(&a_public).unwrap();
    let policy = format!(
        "require_vet = true\nmin_signatures = 1\n[[trusted]]\nsigner = \"{}\"\npublic = \"{}\"\n",
        a_file.signer, a_file.public
    );
    std::fs::write(cat_dir.join("policy.toml"), policy).unwrap();

    let wasm = exobound::standard_module("photoionization");
    let bytes = std::fs::read(&wasm).unwrap();
    let report = photoionization_report();
    let sign_as = |secret: &Path, out: &str| {
        let s = signature::sign(&bytes, report, &keys::read_secret(secret).unwrap()).unwrap();
        let p = tmp.path().join(out);
        signature::write(&p, &s).unwrap();
        p
    };
    let by_stranger = sign_as(&b_secret, "stranger.sig");
    let by_trusted = sign_as(&a_secret, "trusted.sig");

    // The policy itself, and the catalog that applies it.
    let pol = Policy::read(&cat_dir).unwrap();
    let stranger = signature::verify(&bytes, &signature::read(&by_stranger).unwrap());
    let e = pol.judge(true, &[stranger]).unwrap_err().join("; ");
    assert!(e.contains("not trusted") && e.contains("stranger group"), "{e}");
    let mut cat = Catalog::open_or_new(&cat_dir).unwrap();
    let e = cat.add(&wasm, report, std::slice::from_ref(&by_stranger)).unwrap_err().0;
    assert!(e.contains("refuses") && e.contains("not trusted"), "{e}");
    assert!(!cat_dir.join(catalog::INDEX_FILE).exists(), "a refused add writes no index");
    let e = cat.add(&wasm, report, &[]).unwrap_err().0;
    assert!(e.contains("requires 1 signature"), "{e}");

    let entry = cat.add(&wasm, report, &[by_trusted, by_stranger]).unwrap();
    assert_eq!(entry.sha256, report.sha256);
    assert_eq!(entry.signatures.len(), 2);

    // Round trip: reopen from disk and find the same entry, accepted.
    let again = Catalog::open(&cat_dir).unwrap();
    assert_eq!(again.index, cat.index);
    let found = again.find("photoionization", &report.version).unwrap();
    assert_eq!(found, &entry);
    let st = again.standing(found);
    assert!(st.verdict.is_ok(), "{:?}", st.verdict);
    let resolved =
        catalog::resolve("photoionization", &report.version, std::slice::from_ref(&cat_dir))
            .unwrap();
    assert_eq!(
        exobound::runtime::module::sha256_hex(&std::fs::read(&resolved).unwrap()),
        report.sha256
    );

    // A published version never changes.
    let other = tmp.path().join("other.wasm");
    std::fs::write(&other, tampered(&bytes)).unwrap();
    let mut fake = report.clone();
    fake.sha256 = exobound::runtime::module::sha256_hex(&std::fs::read(&other).unwrap());
    let e = cat.add(&other, &fake, &[]).unwrap_err().0;
    assert!(e.contains("already in") && e.contains("new version"), "{e}");

    // A scenario names it as name@version through its `catalogs` key.
    demo::write(tmp.path()).unwrap();
    let scenario = tmp.path().join("demo-quick.toml");
    let text = std::fs::read_to_string(&scenario).unwrap();
    let spec = format!("photoionization@{}", report.version);
    let text = format!("catalogs = [\"cat\"]\n{}", text.replace("standard:photoionization", &spec));
    std::fs::write(&scenario, text).unwrap();
    let rt = Arc::new(
        Runtime::new(RuntimeConfig { cache_dir: None, ..RuntimeConfig::default() }).unwrap(),
    );
    let s = Scenario::load(&scenario, &[], &rt).unwrap();
    let m = s.modules.iter().find(|m| m.spec == spec).unwrap();
    assert_eq!(m.sha256, report.sha256);

    // An unknown version, and a replaced catalog file, are refused by name.
    let e =
        catalog::resolve("photoionization", "9.9.9", std::slice::from_ref(&cat_dir)).unwrap_err().0;
    assert!(e.contains("photoionization@9.9.9"), "{e}");
    std::fs::write(&resolved, tampered(&bytes)).unwrap();
    let e = Scenario::load(&scenario, &[], &rt).unwrap_err().to_string();
    assert!(e.contains(&spec) || e.contains("processes["), "{e}");
    assert!(e.contains(&report.sha256) && e.contains("replaced or damaged"), "{e}");
    // A malformed index names the file.
    std::fs::write(cat_dir.join(catalog::INDEX_FILE), "format = \"one\"\n").unwrap();
    let e = Catalog::open(&cat_dir).unwrap_err().0;
    assert!(e.contains("catalog.toml") && e.contains("not a valid catalog index"), "{e}");
}

#[test]
fn provenance_re_verifies_the_modules_of_a_run() {
    let tmp = TempDir::new("trace");
    let module = tmp.path().join("photoionization.wasm");
    let bytes = std::fs::read(exobound::standard_module("photoionization")).unwrap();
    std::fs::write(&module, &bytes).unwrap();
    let digest = exobound::runtime::module::sha256_hex(&bytes);
    let gone = tmp.path().join("gone.wasm");
    let record = serde_json::json!({
        "engine": "exobound", "engine_version": "0.1.0", "scenario_origin": "test", "seed": 7,
        "modules": [
            {"name": "photoionization", "version": "1.0.0", "role": "loss", "spec": "photoionization.wasm",
             "path": module.display().to_string(), "sha256": digest},
            {"name": "gone", "version": "1.0.0", "role": "source", "spec": "gone.wasm",
             "path": gone.display().to_string(), "sha256": "00"},
        ]
    });
    std::fs::write(tmp.path().join("provenance.json"), record.to_string()).unwrap();
    let t = trace::trace(tmp.path()).unwrap();
    assert_eq!(t.modules[0].now, trace::FileState::Same);
    assert_eq!(t.modules[1].now, trace::FileState::Missing);
    assert!(!t.any_changed());
    std::fs::write(&module, tampered(&bytes)).unwrap();
    let t = trace::trace(tmp.path()).unwrap();
    assert!(t.any_changed());
    assert!(trace::render_text(&t).contains("CHANGED"));
    let e = trace::trace(&tmp.path().join("nowhere")).unwrap_err().0;
    assert!(e.contains("provenance.json"), "{e}");
}

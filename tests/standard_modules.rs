//! Every standard module inspects cleanly and reproduces its own reference
//! points when run as wasm through the sandbox; the `exobound` binary
//! carries them, so a copy of it runs the demo far from the build tree;
//! `inspect` shows choices, ranges and reference points plainly.

use std::process::Command;

use exobound::inspect;
use exobound::runtime::reference::run_reference_points;
use sha2::{Digest, Sha256};

use crate::support::*;

#[test]
fn inspect_json_has_the_promised_fields() {
    for name in STANDARD {
        let report = inspect::inspect(&exobound::standard_module(name)).unwrap();
        let json = serde_json::to_value(&report).unwrap();
        assert_eq!(json["name"], name);
        assert_eq!(json["abi"], "1.0.0");
        assert_eq!(json["sha256"].as_str().unwrap().len(), 64);
        assert!(json["version"].is_string() && json["roles"].is_array());
        for p in json["parameters"].as_array().unwrap() {
            for field in ["name", "unit", "default", "min", "max"] {
                assert!(p.get(field).is_some(), "{name}: parameter lacks `{field}`: {p}");
            }
        }
        assert!(!report.manifest.law_source.is_empty());
        assert!(inspect::render_text(&report).contains("sha256"));
    }
}

#[test]
fn reference_points_hold_in_wasm() {
    let rt = runtime();
    for name in STANDARD {
        let m = standard(&rt, name);
        let results = run_reference_points(&rt, &m).unwrap_or_else(|e| panic!("{name}: {e}"));
        assert!(!results.is_empty(), "{name} has no reference points");
        for r in results {
            // Each expected value carries its published source in the manifest.
            assert!(
                r.passed,
                "{name}: {} expected {} got {} ({})",
                r.description, r.expected, r.got, r.source
            );
        }
    }
}

#[test]
fn a_copied_binary_runs_the_quick_demo_with_no_build_tree() {
    // The binary alone in a directory of its own, run from another one,
    // with no module directory named: the standard modules must come from
    // inside it.
    let tmp = TempDir::new("installed");
    let bin = tmp.path().join("bin/exobound");
    std::fs::create_dir_all(bin.parent().unwrap()).unwrap();
    std::fs::copy(exobound_binary(), &bin).unwrap();
    let work = tmp.path().join("elsewhere");
    std::fs::create_dir_all(&work).unwrap();
    let exobound = |args: &[&str]| {
        Command::new(&bin)
            .args(args)
            .current_dir(&work)
            .env_remove("EXOBOUND_MODULE_DIR")
            .output()
            .unwrap()
    };
    let o = exobound(&["run", "--quick", "--set", "run.duration=\"12 h\"", "--out", "demo"]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let prov: serde_json::Value =
        serde_json::from_str(&std::fs::read_to_string(work.join("demo/provenance.json")).unwrap())
            .unwrap();
    let mods = prov["modules"].as_array().unwrap();
    assert_eq!(mods.len(), 5);
    for m in mods {
        // Loaded from the embedded copy, whose SHA-256 (FIPS 180-4, by the
        // sha2 crate here) is that of the file the build wrote: locks and
        // provenance records made before stay valid.
        let name = m["name"].as_str().unwrap();
        assert_eq!(m["path"].as_str(), Some(format!("embedded:{name}").as_str()));
        let file = std::fs::read(exobound::standard_module(name)).unwrap();
        let digest: String = Sha256::digest(&file).iter().map(|b| format!("{b:02x}")).collect();
        assert_eq!(m["sha256"].as_str(), Some(digest.as_str()), "{name}");
    }
    // The embedded modules can be inspected, and re-verified by `provenance`.
    let o = exobound(&["module", "inspect", "standard:photoionization"]);
    assert!(String::from_utf8_lossy(&o.stdout).contains("photoionization 1.0.0"));
    let o = exobound(&["provenance", "demo"]);
    assert!(o.status.success());
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(text.matches("embedded in this exobound, same digest").count(), 5, "{text}");

    // EXOBOUND_MODULE_DIR still overrides, and a missing file is named.
    let o = Command::new(&bin)
        .args(["run", "--quick", "--out", "never"])
        .current_dir(&work)
        .env("EXOBOUND_MODULE_DIR", tmp.path().join("no-modules"))
        .output()
        .unwrap();
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{e}");
    assert!(e.contains("EXOBOUND_MODULE_DIR") && e.contains("no-modules"), "{e}");
    assert!(!work.join("never").exists());
}

#[test]
fn inspect_shows_choices_ranges_and_reference_settings_plainly() {
    let text = |name: &str| {
        inspect::render_text(&inspect::inspect(&exobound::standard_module(name)).unwrap())
    };
    let line = |t: &str, p: &str| {
        t.lines().find(|l| l.trim_start().starts_with(&format!("{p} "))).unwrap().to_string()
    };
    let psd = text("photon-desorption");
    // A choice is listed as a choice, with its options, not as a unit.
    let l = line(&psd, "velocity_law");
    assert!(l.contains("choice") && !l.contains("dimensionless"), "{l}");
    assert!(l.contains("one of maxwellian | power-law"), "{l}");
    // Range ends print like the defaults: 1e17, not 100000000000000000.
    let l = line(&psd, "photon_flux_1au");
    assert!(l.contains("default 1.5e14") && l.contains("[0, 1e17]"), "{l}");
    // Each reference point shows the parameters and inputs it sets.
    assert!(
        psd.contains("with parameters: activation_energy = 0.1 eV, reference_temperature = 300 K"),
        "{psd}"
    );
    assert!(
        psd.contains("input: cos_sza = 1, helio_distance = 1, adsorbed = 1e10, temperature = 600"),
        "{psd}"
    );
    assert!(psd.contains("with parameters at their defaults; input: cos_sza = -0.3"), "{psd}");
}

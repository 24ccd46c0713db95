//! Every standard module inspects cleanly and reproduces its own reference
//! points when run as wasm through the sandbox.

use exobound::inspect;
use exobound::runtime::reference::run_reference_points;

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

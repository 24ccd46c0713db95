//! Parameter validation errors name the parameter, the value, the range and the unit.

use exobound::runtime::DomainError;
use exobound_sdk::{ErrorCode, ParamValue};

use crate::support::*;

fn refused(rt: &exobound::runtime::Runtime, module: &str, p: &[(&str, ParamValue)]) -> DomainError {
    let m = if module == "hostile-law" { hostile(rt) } else { standard(rt, module) };
    match rt.instantiate(&m, &params(p)).expect("no host failure") {
        Ok(_) => panic!("parameters {p:?} should be refused"),
        Err(d) => d,
    }
}

#[test]
fn unknown_parameter_is_named() {
    let rt = runtime();
    let d = refused(&rt, "photoionization", &[("rate_1AU", ParamValue::Number(1e-6))]);
    assert_eq!(d.error.code, ErrorCode::InvalidParameter);
    assert!(d.error.message.contains("`rate_1AU`"), "{d}");
    assert!(d.error.message.contains("rate_1au"), "lists the known names: {d}");
    assert!(d.to_string().contains("photoionization"), "{d}");
}

#[test]
fn missing_parameter_without_default_is_named() {
    let rt = runtime();
    let d = refused(&rt, "hostile-law", &[]);
    assert_eq!(d.error.code, ErrorCode::InvalidParameter);
    assert!(d.error.message.contains("`mode`") && d.error.message.contains("no default"), "{d}");
}

#[test]
fn out_of_range_parameter_names_value_range_and_unit() {
    let rt = runtime();
    let d = refused(&rt, "photoionization", &[("rate_1au", ParamValue::Number(5.0))]);
    let msg = &d.error.message;
    assert!(msg.contains("`rate_1au`") && msg.contains('5') && msg.contains("s^-1"), "{msg}");
    assert!(msg.contains("[0, 0.01]"), "{msg}");
    let d = refused(
        &rt,
        "hostile-law",
        &[("mode", text("good")), ("strength", ParamValue::Number(f64::NAN))],
    );
    assert!(d.error.message.contains("`strength`"), "{d}");
}

#[test]
fn wrong_type_and_unknown_option_are_refused() {
    let rt = runtime();
    let d = refused(&rt, "photoionization", &[("rate_1au", text("fast"))]);
    assert!(d.error.message.contains("must be a number"), "{d}");
    let d = refused(&rt, "hostile-law", &[("mode", text("explode"))]);
    assert!(d.error.message.contains("\"explode\"") && d.error.message.contains("loop"), "{d}");
}

#[test]
fn encoded_parameters_are_revalidated_by_the_sdk() {
    // The guest's `init` decodes the MessagePack the host sends and validates
    // it again with `Params::decode`, so a module never trusts its caller.
    use exobound_sdk::Process;
    let schema = photoionization::Photoionization::MANIFEST.to_info().parameters;
    let given = params(&[("bogus", ParamValue::Number(1.0))]);
    let e =
        exobound_sdk::Params::decode(&exobound_sdk::Params::encode(&given), &schema).unwrap_err();
    assert!(e.message.contains("`bogus`"));
}

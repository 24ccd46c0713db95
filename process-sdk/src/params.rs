//! Parameters: decoded from MessagePack and validated against the schema
//! in the module's manifest.
//!
//! Why this exists: poorly constrained parameters (a PSD cross-section, a
//! vapour temperature) are what users tune, so a typo or a value in the
//! wrong unit must be refused with a message that names the parameter, the
//! value, the allowed range and the unit, before the law ever runs. The
//! host runs the same validation before it instantiates a module, so the
//! user sees the error with the scenario key; the guest runs it again so
//! that a module never trusts its caller.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::manifest::{ParamInfo, ParamKindInfo};
use crate::roles::{ErrorCode, ProcessError};

/// A parameter value as it travels in MessagePack: a number in the unit the
/// schema declares, or the name of one of a choice parameter's options.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum ParamValue {
    /// A number, in the parameter's declared unit.
    Number(f64),
    /// One of a choice parameter's options.
    Text(String),
}

impl core::fmt::Display for ParamValue {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            ParamValue::Number(x) if *x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e6) => {
                write!(f, "{x:e}")
            }
            ParamValue::Number(x) => write!(f, "{x}"),
            ParamValue::Text(s) => write!(f, "\"{s}\""),
        }
    }
}

/// Validated parameter values, one per schema entry, in schema order.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    values: Vec<(String, ParamValue)>,
}

impl Params {
    /// Decode a MessagePack map `name -> value` and validate it against `schema`.
    pub fn decode(bytes: &[u8], schema: &[ParamInfo]) -> Result<Params, ProcessError> {
        let given: BTreeMap<String, ParamValue> = if bytes.is_empty() {
            BTreeMap::new()
        } else {
            rmp_serde::from_slice(bytes).map_err(|e| {
                ProcessError::parameter(format!(
                    "parameters are not a MessagePack map of name to number or text: {e}"
                ))
            })?
        };
        Params::validate(&given, schema)
    }

    /// Encode `name -> value` pairs as the MessagePack map that `init` takes.
    pub fn encode(given: &BTreeMap<String, ParamValue>) -> Vec<u8> {
        // A map of strings to f64/str cannot fail to serialise.
        rmp_serde::to_vec(given).unwrap_or_default()
    }

    /// Validate `given` against `schema`: refuse unknown names, missing values
    /// without a default, values of the wrong type and values out of range;
    /// fill in defaults.
    pub fn validate(
        given: &BTreeMap<String, ParamValue>,
        schema: &[ParamInfo],
    ) -> Result<Params, ProcessError> {
        for name in given.keys() {
            if !schema.iter().any(|p| &p.name == name) {
                let known: Vec<&str> = schema.iter().map(|p| p.name.as_str()).collect();
                return Err(ProcessError::parameter(format!(
                    "unknown parameter `{name}`; this module's parameters are: {}",
                    if known.is_empty() { "(none)".to_string() } else { known.join(", ") }
                )));
            }
        }
        let mut values = Vec::with_capacity(schema.len());
        for spec in schema {
            let value = match given.get(&spec.name) {
                Some(v) => v.clone(),
                None => match &spec.default {
                    Some(d) => d.clone(),
                    None => {
                        return Err(ProcessError::parameter(format!(
                            "parameter `{}` ({}) has no default and was not given; {}",
                            spec.name,
                            spec.unit_or_dimensionless(),
                            spec.allowed()
                        )));
                    }
                },
            };
            check_value(spec, &value)?;
            values.push((spec.name.clone(), value));
        }
        Ok(Params { values })
    }

    /// The number given for `name`, in the unit its schema entry declares.
    pub fn number(&self, name: &str) -> Result<f64, ProcessError> {
        match self.get(name)? {
            ParamValue::Number(x) => Ok(*x),
            ParamValue::Text(_) => Err(ProcessError::parameter(format!(
                "parameter `{name}` is a choice, not a number"
            ))),
        }
    }

    /// The option chosen for the choice parameter `name`.
    pub fn choice(&self, name: &str) -> Result<&str, ProcessError> {
        match self.get(name)? {
            ParamValue::Text(s) => Ok(s),
            ParamValue::Number(_) => Err(ProcessError::parameter(format!(
                "parameter `{name}` is a number, not a choice"
            ))),
        }
    }

    /// Every value, in schema order.
    pub fn iter(&self) -> impl Iterator<Item = (&str, &ParamValue)> {
        self.values.iter().map(|(k, v)| (k.as_str(), v))
    }

    fn get(&self, name: &str) -> Result<&ParamValue, ProcessError> {
        self.values.iter().find(|(k, _)| k == name).map(|(_, v)| v).ok_or_else(|| {
            ProcessError::new(
                ErrorCode::Law,
                format!(
                    "the law asked for parameter `{name}`, which its manifest does not declare"
                ),
            )
        })
    }
}

fn check_value(spec: &ParamInfo, value: &ParamValue) -> Result<(), ProcessError> {
    match (spec.kind(), value) {
        (ParamKindInfo::Number, ParamValue::Number(x)) => {
            let (lo, hi) =
                (spec.min.unwrap_or(f64::NEG_INFINITY), spec.max.unwrap_or(f64::INFINITY));
            if !(x.is_finite() && *x >= lo && *x <= hi) {
                return Err(ProcessError::parameter(format!(
                    "parameter `{}` = {x} {} is out of range; {}",
                    spec.name,
                    spec.unit,
                    spec.allowed()
                )));
            }
        }
        (ParamKindInfo::Choice, ParamValue::Text(s)) => {
            if !spec.choices.iter().any(|c| c == s) {
                return Err(ProcessError::parameter(format!(
                    "parameter `{}` = \"{s}\" is not an option; {}",
                    spec.name,
                    spec.allowed()
                )));
            }
        }
        (ParamKindInfo::Number, ParamValue::Text(s)) => {
            return Err(ProcessError::parameter(format!(
                "parameter `{}` must be a number in {}, not the text \"{s}\"; {}",
                spec.name,
                spec.unit_or_dimensionless(),
                spec.allowed()
            )));
        }
        (ParamKindInfo::Choice, ParamValue::Number(x)) => {
            return Err(ProcessError::parameter(format!(
                "parameter `{}` must be one of its options, not the number {x}; {}",
                spec.name,
                spec.allowed()
            )));
        }
    }
    Ok(())
}

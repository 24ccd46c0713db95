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
//!
//! A table parameter (ABI 1.1) travels as an array of columns, each an
//! array of numbers in its column's declared unit; [`crate::table`] holds
//! its checks and the interpolation over it.

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::manifest::{ParamInfo, ParamKindInfo};
use crate::roles::{ErrorCode, ProcessError};
use crate::table::{TableRef, check_table};

/// A parameter value as it travels in MessagePack: a number in the unit the
/// schema declares, the name of one of a choice parameter's options, or a
/// table as its columns.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum ParamValue {
    /// A number, in the parameter's declared unit.
    Number(f64),
    /// One of a choice parameter's options.
    Text(String),
    /// A table (ABI 1.1): one `Vec` per declared column, in declared order,
    /// each value in its column's unit.
    Table(Vec<Vec<f64>>),
}

impl core::fmt::Display for ParamValue {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            ParamValue::Number(x) if *x != 0.0 && (x.abs() < 1e-3 || x.abs() >= 1e6) => {
                write!(f, "{x:e}")
            }
            ParamValue::Number(x) => write!(f, "{x}"),
            ParamValue::Text(s) => write!(f, "\"{s}\""),
            ParamValue::Table(cols) => write!(
                f,
                "a table of {} rows x {} columns",
                cols.first().map_or(0, Vec::len),
                cols.len()
            ),
        }
    }
}

/// Validated parameter values, one per schema entry, in schema order.
#[derive(Clone, Debug, PartialEq)]
pub struct Params {
    values: Vec<(String, ParamValue)>,
    /// The schema entries of the table parameters, for their column names.
    tables: Vec<ParamInfo>,
}

impl Params {
    /// Decode a MessagePack map `name -> value` and validate it against `schema`.
    pub fn decode(bytes: &[u8], schema: &[ParamInfo]) -> Result<Params, ProcessError> {
        let given: BTreeMap<String, ParamValue> = if bytes.is_empty() {
            BTreeMap::new()
        } else {
            rmp_serde::from_slice(bytes).map_err(|e| {
                ProcessError::parameter(format!(
                    "parameters are not a MessagePack map of name to number, text or table: {e}"
                ))
            })?
        };
        Params::validate(&given, schema)
    }

    /// Encode `name -> value` pairs as the MessagePack map that `init` takes.
    pub fn encode(given: &BTreeMap<String, ParamValue>) -> Vec<u8> {
        // A map of strings to f64, str or arrays of f64 cannot fail to serialise.
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
        let tables = schema.iter().filter(|p| p.table.is_some()).cloned().collect();
        Ok(Params { values, tables })
    }

    /// The number given for `name`, in the unit its schema entry declares.
    pub fn number(&self, name: &str) -> Result<f64, ProcessError> {
        match self.get(name)? {
            ParamValue::Number(x) => Ok(*x),
            other => Err(ProcessError::parameter(format!(
                "parameter `{name}` is {}, not a number",
                kind_name(other)
            ))),
        }
    }

    /// The option chosen for the choice parameter `name`.
    pub fn choice(&self, name: &str) -> Result<&str, ProcessError> {
        match self.get(name)? {
            ParamValue::Text(s) => Ok(s),
            other => Err(ProcessError::parameter(format!(
                "parameter `{name}` is {}, not a choice",
                kind_name(other)
            ))),
        }
    }

    /// The table given for the table parameter `name` (ABI 1.1), checked
    /// against its declaration: build interpolating curves from it with
    /// [`TableRef::linear`] or [`TableRef::log_linear`].
    pub fn table(&self, name: &str) -> Result<TableRef<'_>, ProcessError> {
        let value = self.get(name)?;
        let info = self.tables.iter().find(|p| p.name == name);
        match (value, info.and_then(|p| p.table.as_ref().map(|t| (p.name.as_str(), t)))) {
            (ParamValue::Table(columns), Some((name, spec))) => {
                Ok(TableRef { name, spec, columns })
            }
            (other, _) => Err(ProcessError::parameter(format!(
                "parameter `{name}` is {}, not a table",
                kind_name(other)
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

/// "a number", "a choice" or "a table", for messages.
fn kind_name(v: &ParamValue) -> &'static str {
    match v {
        ParamValue::Number(_) => "a number",
        ParamValue::Text(_) => "a choice",
        ParamValue::Table(_) => "a table",
    }
}

fn check_value(spec: &ParamInfo, value: &ParamValue) -> Result<(), ProcessError> {
    match (spec.kind(), value) {
        (ParamKindInfo::Table, ParamValue::Table(columns)) => {
            if let Some(table) = &spec.table
                && let Err(fault) = check_table(table, columns)
            {
                return Err(ProcessError::parameter(format!(
                    "table parameter `{}`: {fault}",
                    spec.name
                )));
            }
        }
        (ParamKindInfo::Table, other) => {
            return Err(ProcessError::parameter(format!(
                "parameter `{}` must be a table, not {} ({other}); {}",
                spec.name,
                kind_name(other),
                spec.allowed()
            )));
        }
        (ParamKindInfo::Number | ParamKindInfo::Choice, ParamValue::Table(_)) => {
            return Err(ProcessError::parameter(format!(
                "parameter `{}` takes a single value, not a table; {}",
                spec.name,
                spec.allowed()
            )));
        }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::table::{ColumnInfo, TableInfo};

    fn schema() -> Vec<ParamInfo> {
        vec![ParamInfo {
            name: "sigma".into(),
            unit: String::new(),
            description: "cross-section against temperature".into(),
            default: Some(ParamValue::Table(vec![vec![100.0, 200.0], vec![1.0e-20, 4.0e-20]])),
            min: None,
            max: None,
            choices: vec![],
            default_origin: "common practice".into(),
            table: Some(TableInfo {
                columns: vec![
                    ColumnInfo { name: "t".into(), unit: "K".into(), min: 0.0, max: 1e4 },
                    ColumnInfo { name: "sigma".into(), unit: "cm^2".into(), min: 0.0, max: 10.0 },
                ],
                min_rows: 2,
                max_rows: 10,
            }),
        }]
    }

    #[test]
    fn a_table_round_trips_through_messagepack_and_falls_back_to_its_default() {
        let given = BTreeMap::from([(
            "sigma".to_string(),
            ParamValue::Table(vec![vec![10.0, 20.0, 40.0], vec![1.0, 2.0, 3.0]]),
        )]);
        let p = Params::decode(&Params::encode(&given), &schema()).unwrap();
        let t = p.table("sigma").unwrap();
        assert_eq!((t.rows(), t.column("t").unwrap()), (3, &[10.0, 20.0, 40.0][..]));
        assert_eq!(t.linear("sigma").unwrap().clamped(30.0), 2.5);
        let d = Params::decode(&[], &schema()).unwrap();
        assert_eq!(d.table("sigma").unwrap().column("sigma").unwrap(), &[1.0e-20, 4.0e-20]);
        assert!(d.number("sigma").unwrap_err().message.contains("a table, not a number"));
        assert_eq!(d.table("sigma").unwrap().column("x").unwrap_err().code, ErrorCode::Law);
    }

    #[test]
    fn a_bad_table_or_a_table_of_the_wrong_kind_is_refused() {
        let bad = |v: ParamValue| {
            let given = BTreeMap::from([("sigma".to_string(), v)]);
            Params::decode(&Params::encode(&given), &schema()).unwrap_err().message
        };
        let e = bad(ParamValue::Table(vec![vec![10.0, 5.0], vec![1.0, 2.0]]));
        assert!(e.contains("`sigma`") && e.contains("row 2, column 1"), "{e}");
        let e = bad(ParamValue::Number(1.0));
        assert!(e.contains("must be a table") && e.contains("`t [K]`"), "{e}");
    }
}

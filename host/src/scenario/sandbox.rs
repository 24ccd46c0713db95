//! The `[sandbox]` table: the limits of every module call, validated.
//!
//! Why this exists: a legitimately heavy law (a long rejection loop, a big
//! lookup table) may need more fuel or memory than the defaults, and the
//! budget message tells the user which key raises it. This file turns the
//! table into [`SandboxLimits`], refusing values outside the range a run
//! can use with a message that names the key, the range and an example.

use std::time::Duration;

use super::file::SandboxSection;
use super::quantity::{self, Kind};
use crate::runtime::SandboxLimits;
use crate::runtime::limits::{
    KEY_BACKSTOP, KEY_FUEL_PER_CALL, KEY_FUEL_PER_RECORD, KEY_MEMORY_CAP,
};

/// Allowed fuel per record, fuel units.
pub const FUEL_PER_RECORD_RANGE: (f64, f64) = (1.0e3, 1.0e12);
/// Allowed fixed fuel per call, fuel units.
pub const FUEL_PER_CALL_RANGE: (f64, f64) = (1.0e6, 1.0e13);
/// Allowed memory cap, bytes: 1 MiB to the 4 GiB a wasm32 memory can address.
pub const MEMORY_CAP_RANGE: (f64, f64) = (1_048_576.0, 4_294_967_296.0);
/// Allowed wall-time backstop, s: 1 s to 7 d.
pub const BACKSTOP_RANGE: (f64, f64) = (1.0, 7.0 * 86_400.0);

/// Bytes in one of `unit`.
fn memory_unit(unit: &str) -> Option<f64> {
    Some(match unit {
        "B" => 1.0,
        "KiB" => 1024.0,
        "MiB" => 1_048_576.0,
        "GiB" => 1_073_741_824.0,
        "kB" => 1.0e3,
        "MB" => 1.0e6,
        "GB" => 1.0e9,
        _ => return None,
    })
}

/// Parse a memory size such as "256 MiB" into bytes.
pub fn parse_memory(text: &str) -> Result<f64, String> {
    let t = text.trim();
    let split = t.find(|c: char| c.is_ascii_alphabetic()).unwrap_or(t.len());
    let (num, unit) = (t[..split].trim(), t[split..].trim());
    let x: f64 = num.parse().map_err(|_| format!("`{text}` is not a number with a unit"))?;
    if unit.is_empty() {
        return Err(format!("`{text}` has no unit; write e.g. \"256 MiB\""));
    }
    let f = memory_unit(unit).ok_or_else(|| {
        format!("unknown memory unit `{unit}`; use B, KiB, MiB, GiB, kB, MB or GB")
    })?;
    Ok(x * f)
}

/// `x` if finite and within `range`, else a message naming `key`.
fn within(key: &str, x: f64, range: (f64, f64), unit: &str, example: &str) -> Result<f64, String> {
    if x.is_finite() && x >= range.0 && x <= range.1 {
        Ok(x)
    } else {
        Err(format!(
            "{key} = {x} {unit} lies outside the allowed range {:e} to {:e} {unit}; e.g. \
             {key} = {example}",
            range.0, range.1
        ))
    }
}

/// Validate `[sandbox]` into limits; the error names the key.
pub fn limits(s: &SandboxSection) -> Result<SandboxLimits, String> {
    let mut l = SandboxLimits::default();
    if let Some(x) = s.fuel_per_record {
        let unit = "fuel units";
        l.fuel_per_record =
            within(KEY_FUEL_PER_RECORD, x, FUEL_PER_RECORD_RANGE, unit, "1e7")?.round() as u64;
    }
    if let Some(x) = s.fuel_per_call {
        let unit = "fuel units";
        l.fuel_per_call =
            within(KEY_FUEL_PER_CALL, x, FUEL_PER_CALL_RANGE, unit, "1e9")?.round() as u64;
    }
    if let Some(t) = &s.memory_cap {
        let bytes = parse_memory(t).map_err(|m| format!("{KEY_MEMORY_CAP}: {m}"))?;
        l.memory_cap =
            within(KEY_MEMORY_CAP, bytes, MEMORY_CAP_RANGE, "bytes", "\"256 MiB\"")? as usize;
    }
    if let Some(t) = &s.backstop {
        let secs = quantity::parse(t, Kind::Time).map_err(|m| format!("{KEY_BACKSTOP}: {m}"))?;
        l.backstop =
            Duration::from_secs_f64(within(KEY_BACKSTOP, secs, BACKSTOP_RANGE, "s", "\"20 min\"")?);
    }
    Ok(l)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn defaults_when_empty() {
        assert_eq!(limits(&SandboxSection::default()).unwrap(), SandboxLimits::default());
    }

    #[test]
    fn values_and_units_are_read() {
        let s = SandboxSection {
            fuel_per_record: Some(2.0e6),
            fuel_per_call: Some(1.0e8),
            memory_cap: Some("256 MiB".into()),
            backstop: Some("20 min".into()),
        };
        let l = limits(&s).unwrap();
        assert_eq!(l.fuel_per_record, 2_000_000);
        assert_eq!(l.fuel_per_call, 100_000_000);
        assert_eq!(l.memory_cap, 256 << 20);
        assert_eq!(l.backstop, Duration::from_secs(1200));
    }

    #[test]
    fn out_of_range_values_name_their_key() {
        let s = SandboxSection { fuel_per_record: Some(1.0e300), ..Default::default() };
        assert!(limits(&s).unwrap_err().contains("sandbox.fuel_per_record"));
        let s = SandboxSection { memory_cap: Some("64".into()), ..Default::default() };
        let e = limits(&s).unwrap_err();
        assert!(e.contains("sandbox.memory_cap") && e.contains("no unit"), "{e}");
        let s = SandboxSection { memory_cap: Some("8 GiB".into()), ..Default::default() };
        assert!(limits(&s).unwrap_err().contains("sandbox.memory_cap"));
        let s = SandboxSection { backstop: Some("0.1 s".into()), ..Default::default() };
        assert!(limits(&s).unwrap_err().contains("sandbox.backstop"));
    }
}

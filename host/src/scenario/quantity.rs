//! Quantities with units, as scenario files and the command line write
//! them: `"300 s"`, `"29.53 d"`, `"1e9 cm^-2"`, `"6h"`.
//!
//! Why this exists: every dimensional value in a scenario declares its
//! unit, so a reader of the file never has to guess whether a duration is
//! in seconds or days. This module parses such a text into the engine's
//! internal unit for its kind of quantity, and refuses a missing or
//! unknown unit with the list of the units it accepts.

/// What a quantity measures, and so which units it accepts.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Kind {
    /// A duration; internal unit s.
    Time,
    /// A length or altitude; internal unit m.
    Length,
    /// A temperature; internal unit K.
    Temperature,
    /// An angle; internal unit rad.
    Angle,
    /// Atoms per unit area; internal unit atoms cm^-2.
    SurfaceDensity,
    /// Particles per unit area and time; internal unit cm^-2 s^-1.
    Flux,
    /// A heliocentric distance; internal unit AU.
    HelioDistance,
    /// A gravitational parameter GM; internal unit m^3 s^-2.
    GravParameter,
    /// A speed; internal unit m s^-1.
    Speed,
}

impl Kind {
    /// The units accepted for this kind, with the factor to the internal unit.
    pub fn units(self) -> &'static [(&'static str, f64)] {
        match self {
            Kind::Time => &[("s", 1.0), ("min", 60.0), ("h", 3600.0), ("d", 86_400.0)],
            Kind::Length => &[("m", 1.0), ("km", 1.0e3)],
            Kind::Temperature => &[("K", 1.0)],
            Kind::Angle => &[("deg", core::f64::consts::PI / 180.0), ("rad", 1.0)],
            Kind::SurfaceDensity => &[("cm^-2", 1.0), ("m^-2", 1.0e-4)],
            Kind::Flux => &[("cm^-2 s^-1", 1.0), ("m^-2 s^-1", 1.0e-4)],
            Kind::HelioDistance => &[("AU", 1.0)],
            Kind::GravParameter => &[("m^3 s^-2", 1.0), ("km^3 s^-2", 1.0e9)],
            Kind::Speed => &[("m/s", 1.0), ("km/s", 1.0e3), ("m s^-1", 1.0), ("km s^-1", 1.0e3)],
        }
    }

    /// The internal unit, as written in outputs.
    pub fn internal_unit(self) -> &'static str {
        match self {
            Kind::Time => "s",
            Kind::Length => "m",
            Kind::Temperature => "K",
            Kind::Angle => "rad",
            Kind::SurfaceDensity => "cm^-2",
            Kind::Flux => "cm^-2 s^-1",
            Kind::HelioDistance => "AU",
            Kind::GravParameter => "m^3 s^-2",
            Kind::Speed => "m s^-1",
        }
    }

    /// A plain name for messages.
    pub fn name(self) -> &'static str {
        match self {
            Kind::Time => "duration",
            Kind::Length => "length",
            Kind::Temperature => "temperature",
            Kind::Angle => "angle",
            Kind::SurfaceDensity => "surface density",
            Kind::Flux => "flux",
            Kind::HelioDistance => "heliocentric distance",
            Kind::GravParameter => "gravitational parameter",
            Kind::Speed => "speed",
        }
    }
}

/// Split `"3e-20 cm^2"` or `"6h"` into the number and the unit text
/// (units normalised to single spaces). `None` if no number leads.
pub fn split(text: &str) -> Option<(f64, String)> {
    let t = text.trim();
    if let Some((num, unit)) = t.split_once(char::is_whitespace)
        && let Ok(x) = num.parse::<f64>()
    {
        return Some((x, normalise_unit(unit)));
    }
    // No space: the longest leading part that parses as a number.
    let cut = (1..=t.len())
        .rev()
        .filter(|&i| t.is_char_boundary(i))
        .find(|&i| t[..i].parse::<f64>().is_ok() && !t[..i].ends_with(['e', 'E']))?;
    let x = t[..cut].parse::<f64>().ok()?;
    Some((x, normalise_unit(&t[cut..])))
}

/// A unit text with runs of whitespace turned into single spaces.
pub fn normalise_unit(unit: &str) -> String {
    unit.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Parse `text` as a quantity of `kind` into its internal unit. The error
/// says what was wrong and which units are accepted.
pub fn parse(text: &str, kind: Kind) -> Result<f64, String> {
    let accepted = || kind.units().iter().map(|(u, _)| format!("`{u}`")).collect::<Vec<_>>();
    let Some((x, unit)) = split(text) else {
        return Err(format!(
            "`{text}` is not a {}: write a number and a unit, e.g. \"1 {}\"",
            kind.name(),
            kind.units()[0].0
        ));
    };
    if !x.is_finite() {
        return Err(format!(
            "`{text}` is not a finite number; write a finite {} with its unit, e.g. \"1 {}\"",
            kind.name(),
            kind.units()[0].0
        ));
    }
    if unit.is_empty() {
        return Err(format!(
            "`{text}` has no unit; a {} needs one of {}",
            kind.name(),
            accepted().join(", ")
        ));
    }
    match kind.units().iter().find(|(u, _)| *u == unit) {
        // A finite number can still overflow on conversion ("1e308 d").
        Some((_, factor)) if (x * factor).is_finite() => Ok(x * factor),
        Some(_) => Err(format!(
            "`{text}` is too large: in {} it exceeds the largest number ({:e}); write a smaller {}",
            kind.internal_unit(),
            f64::MAX,
            kind.name()
        )),
        None => Err(format!(
            "unknown unit `{unit}` for a {}; use one of {}",
            kind.name(),
            accepted().join(", ")
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn durations_in_every_unit() {
        assert_eq!(parse("300 s", Kind::Time).unwrap(), 300.0);
        assert_eq!(parse("6h", Kind::Time).unwrap(), 21_600.0);
        assert_eq!(parse(" 2.5   d ", Kind::Time).unwrap(), 216_000.0);
        assert_eq!(parse("1e3 s", Kind::Time).unwrap(), 1000.0);
        assert_eq!(parse("1e3s", Kind::Time).unwrap(), 1000.0);
    }

    #[test]
    fn compound_units_and_conversions() {
        assert_eq!(parse("1e9 cm^-2", Kind::SurfaceDensity).unwrap(), 1e9);
        assert_eq!(parse("1e13  m^-2", Kind::SurfaceDensity).unwrap(), 1e9);
        assert_eq!(parse("2e8 cm^-2  s^-1", Kind::Flux).unwrap(), 2e8);
        assert_eq!(parse("4902.8 km^3 s^-2", Kind::GravParameter).unwrap(), 4.9028e12);
        assert!((parse("180 deg", Kind::Angle).unwrap() - core::f64::consts::PI).abs() < 1e-15);
    }

    #[test]
    fn refusals_name_the_accepted_units() {
        let e = parse("300", Kind::Time).unwrap_err();
        assert!(e.contains("no unit") && e.contains("`h`"), "{e}");
        let e = parse("300 fortnights", Kind::Time).unwrap_err();
        assert!(e.contains("unknown unit `fortnights`") && e.contains("`d`"), "{e}");
        let e = parse("soon", Kind::Time).unwrap_err();
        assert!(e.contains("not a duration"), "{e}");
        assert!(parse("inf K", Kind::Temperature).is_err());
    }

    #[test]
    fn every_parsed_value_is_finite() {
        // "1e309" reads as infinity in Rust; "1e308 d" overflows on conversion.
        for t in ["1e309 s", "-1e309 s", "NaN s", "inf s", "1e308 d", "-1e308 d"] {
            let e = parse(t, Kind::Time).unwrap_err();
            assert!(e.contains("finite") || e.contains("too large"), "{t}: {e}");
            assert!(e.contains(&format!("`{t}`")), "{t}: {e}");
        }
        assert_eq!(parse("1e308 s", Kind::Time).unwrap(), 1e308);
    }
}

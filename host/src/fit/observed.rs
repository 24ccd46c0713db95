//! Observations to fit: profiles and summary measures with uncertainties,
//! in a small CSV layout of our own.
//!
//! Why this exists: a fit compares the model with what was measured, and
//! the measurements must say what they are, where and in which unit. Each
//! row is one observed value:
//!
//! ```text
//! # comments start with '#'
//! kind,coordinate,value,uncertainty,unit
//! equator_column,10.5 h,1.2e9,1.0e8,cm^-2
//! latitude_column,30 deg,8.0e8,1.0e8,cm^-2
//! summary:dayside_near_surface_density,,20,5,cm^-3
//! brightness:slit.toml,500 km,1200,120,R
//! image:slit.toml,1200 -300 km,900,90,R
//! ```
//!
//! `equator_column` is the equatorial column at a local time (the
//! coordinate, in h), `latitude_column` the dayside column at a latitude
//! (in deg); `summary:NAME` is a summary measure of
//! [`crate::output::results::MEASURES`] in its unit; `brightness:VIEW`
//! is the brightness (rayleigh) seen through a view file of `exobound
//! observe` (a path relative to the observations file) at an altitude above
//! the limb (distant slit) or a tangent altitude (orbiter scan), with its
//! unit; `image:VIEW` is the brightness a distant observer's view sees at
//! a point of the sky plane (km to the observer's right and to projected
//! north of the disk centre, the axes of `image.nc`), through the view's
//! aperture. `docs/fit.md` documents it.

use crate::output::results::MEASURES;
use crate::scenario::quantity::{self, Kind};

/// The header line.
pub const HEADER: &str = "kind,coordinate,value,uncertainty,unit";

/// What one observation measures.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub enum Observable {
    /// Equatorial column at a local time, h.
    EquatorColumn(f64),
    /// Dayside column at a latitude, deg.
    LatitudeColumn(f64),
    /// A summary measure, by its index in [`MEASURES`].
    Summary(usize),
    /// Brightness through a view file (the path as resolved) at an altitude
    /// above the limb or a tangent altitude, km.
    Brightness(std::path::PathBuf, f64),
    /// Brightness through a distant view file (the path as resolved) at a
    /// sky-plane point: km to the observer's right, km to projected north.
    ImagePoint(std::path::PathBuf, f64, f64),
}

impl Observable {
    /// Observations of one kind share a model-noise estimate: "equator",
    /// "latitude", "brightness VIEW", "image VIEW" or the summary measure's name.
    pub fn family(&self) -> String {
        match self {
            Observable::EquatorColumn(_) => "equator".into(),
            Observable::LatitudeColumn(_) => "latitude".into(),
            Observable::Summary(m) => MEASURES[*m].name.into(),
            Observable::Brightness(v, _) => format!("brightness {}", v.display()),
            Observable::ImagePoint(v, ..) => format!("image {}", v.display()),
        }
    }
}

/// One observed value.
#[derive(Clone, Debug, PartialEq, serde::Serialize)]
pub struct Observation {
    /// What it is.
    pub what: Observable,
    /// The value, in `unit`.
    pub value: f64,
    /// Its 1-sigma uncertainty, in `unit`.
    pub sigma: f64,
    /// The unit.
    pub unit: String,
    /// The row as a label, e.g. "equator_column at 10.5 h".
    pub label: String,
}

/// Parse an observations file's text; `file` names it in errors, and view
/// files of brightness rows are found relative to `base` (its directory).
pub fn parse(text: &str, file: &str, base: &std::path::Path) -> Result<Vec<Observation>, String> {
    let mut rows = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let Some((hl, header)) = rows.next() else {
        return Err(format!("`{file}`: no observations"));
    };
    let header: String = header.split(',').map(str::trim).collect::<Vec<_>>().join(",");
    if header != HEADER {
        return Err(format!("`{file}` line {hl}: the header must be `{HEADER}`, found `{header}`"));
    }
    let mut out = Vec::new();
    for (ln, l) in rows {
        let c: Vec<&str> = l.split(',').map(str::trim).collect();
        let at = format!("`{file}` line {ln}");
        if c.len() != 5 {
            return Err(format!("{at}: expected 5 fields ({HEADER}), found {}", c.len()));
        }
        let num = |s: &str, what: &str| {
            s.parse::<f64>()
                .ok()
                .filter(|x| x.is_finite())
                .ok_or_else(|| format!("{at}: {what} `{s}` is not a number"))
        };
        let value = num(c[2], "value")?;
        let sigma = num(c[3], "uncertainty")?;
        if !(sigma > 0.0) {
            return Err(format!("{at}: the uncertainty must be positive (got {sigma})"));
        }
        let unit = quantity::normalise_unit(c[4]);
        let (what, label) = match c[0] {
            "equator_column" | "latitude_column" => {
                if unit != "cm^-2" {
                    return Err(format!("{at}: a column is in `cm^-2`, not `{unit}`"));
                }
                if c[0] == "equator_column" {
                    let lt = quantity::parse(c[1], Kind::Time)
                        .map_err(|e| format!("{at}: coordinate: {e}"))?
                        / 3600.0;
                    if !(0.0..24.0).contains(&lt) {
                        return Err(format!("{at}: local time {lt} h is outside 0 to 24 h"));
                    }
                    (Observable::EquatorColumn(lt), format!("equator_column at {lt} h"))
                } else {
                    let lat = quantity::parse(c[1], Kind::Angle)
                        .map_err(|e| format!("{at}: coordinate: {e}"))?
                        .to_degrees();
                    if !(-90.0..=90.0).contains(&lat) {
                        return Err(format!("{at}: latitude {lat} deg is outside -90 to 90 deg"));
                    }
                    (Observable::LatitudeColumn(lat), format!("latitude_column at {lat} deg"))
                }
            }
            k if k.starts_with("image:") => {
                let view = view_file(&k["image:".len()..], k, base, &at)?;
                if !matches!(unit.as_str(), "R" | "rayleigh") {
                    return Err(format!("{at}: brightness is in `R` (rayleigh), not `{unit}`"));
                }
                let (x, y) = sky_point(c[1]).map_err(|e| format!("{at}: coordinate: {e}"))?;
                // No comma in the label: it is a cell of residuals.csv.
                (Observable::ImagePoint(view, x, y), format!("{k} at {x} {y} km"))
            }
            k if k.starts_with("brightness:") => {
                let view = view_file(&k["brightness:".len()..], k, base, &at)?;
                if !matches!(unit.as_str(), "R" | "rayleigh") {
                    return Err(format!("{at}: brightness is in `R` (rayleigh), not `{unit}`"));
                }
                let alt = quantity::parse(c[1], Kind::Length)
                    .map_err(|e| format!("{at}: coordinate (altitude with its unit): {e}"))?
                    / 1e3;
                if !(alt >= 0.0) {
                    return Err(format!("{at}: altitude {alt} km is below the surface"));
                }
                (Observable::Brightness(view, alt), format!("{k} at {alt} km"))
            }
            k => {
                let Some(name) = k.strip_prefix("summary:") else {
                    return Err(format!(
                        "{at}: unknown kind `{k}`; use equator_column, latitude_column, \
                         brightness:VIEW, image:VIEW or summary:NAME"
                    ));
                };
                let Some(m) = crate::output::results::measure_index(name) else {
                    let names: Vec<&str> = MEASURES.iter().map(|m| m.name).collect();
                    return Err(format!(
                        "{at}: {}",
                        crate::scenario::keys::unknown_message(name, &names, "summary measure")
                    ));
                };
                let want = MEASURES[m].unit;
                if unit != want {
                    return Err(format!("{at}: {name} is in `{want}`, not `{unit}`"));
                }
                (Observable::Summary(m), k.to_string())
            }
        };
        out.push(Observation { what, value, sigma, unit, label });
    }
    if out.is_empty() {
        return Err(format!("`{file}`: no observations after the header"));
    }
    Ok(out)
}

/// The view file `name` of the row kind `kind`, relative to `base`; it must exist.
fn view_file(
    name: &str,
    kind: &str,
    base: &std::path::Path,
    at: &str,
) -> Result<std::path::PathBuf, String> {
    let view = base.join(name);
    if name.is_empty() || !view.is_file() {
        return Err(format!(
            "{at}: `{kind}` names the view file `{}`, which does not exist; give the path of an \
             `exobound observe` view file relative to the observations file",
            view.display()
        ));
    }
    Ok(view)
}

/// A sky-plane point written `X Y UNIT` (e.g. `1200 -300 km`), in km.
fn sky_point(text: &str) -> Result<(f64, f64), String> {
    let words: Vec<&str> = text.split_whitespace().collect();
    let [x, y, unit] = words[..] else {
        return Err(format!(
            "`{text}`: write the sky-plane point as `X Y UNIT`, e.g. `1200 -300 km` (to the \
             observer's right, to projected north)"
        ));
    };
    let km = |v: &str| -> Result<f64, String> {
        let m = quantity::parse(&format!("{v} {unit}"), Kind::Length)?;
        Ok(m / 1e3)
    };
    Ok((km(x)?, km(y)?))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rows_parse_and_bad_rows_are_named() {
        let o = parse(
            "# test\nkind,coordinate,value,uncertainty,unit\nequator_column,10.5 h,1.2e9,1e8,cm^-2\n\
             latitude_column,30 deg,8e8,1e8,cm^-2\nsummary:escape_rate,,3e21,1e20,atoms s^-1\n",
            "o.csv",
            std::path::Path::new("."),
        )
        .unwrap();
        assert_eq!(o[0].what, Observable::EquatorColumn(10.5));
        assert!(matches!(o[1].what, Observable::LatitudeColumn(l) if (l - 30.0).abs() < 1e-12));
        assert!(matches!(o[2].what, Observable::Summary(_)));
        let e = parse(
            &format!("{HEADER}\nequator_column,10.5 h,1,0,cm^-2\n"),
            "o.csv",
            std::path::Path::new("."),
        )
        .unwrap_err();
        assert!(e.contains("line 2") && e.contains("positive"), "{e}");
        let e = parse(
            &format!("{HEADER}\nequator_column,10.5 h,1,1,cm^-3\n"),
            "o.csv",
            std::path::Path::new("."),
        )
        .unwrap_err();
        assert!(e.contains("cm^-2"), "{e}");
        let e = parse(
            &format!("{HEADER}\nsummary:escape_rat,,1,1,atoms s^-1\n"),
            "o.csv",
            std::path::Path::new("."),
        )
        .unwrap_err();
        assert!(e.contains("escape_rate"), "{e}");
        let e = parse("a,b\n", "o.csv", std::path::Path::new(".")).unwrap_err();
        assert!(e.contains(HEADER), "{e}");
        let e = parse(
            &format!("{HEADER}\nbrightness:nowhere.toml,500 km,1,1,R\n"),
            "o.csv",
            std::path::Path::new("."),
        )
        .unwrap_err();
        assert!(e.contains("line 2") && e.contains("nowhere.toml"), "{e}");
    }

    #[test]
    fn image_points_parse_in_km_and_a_bad_point_is_named() {
        let dir = std::env::temp_dir().join(format!("exobound-obs-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        std::fs::write(dir.join("v.toml"), "[distant]\n").unwrap();
        let o = parse(&format!("{HEADER}\nimage:v.toml,1200 -300 km,900,90,R\n"), "o.csv", &dir)
            .unwrap();
        assert_eq!(o[0].what, Observable::ImagePoint(dir.join("v.toml"), 1200.0, -300.0));
        assert_eq!(o[0].what.family(), format!("image {}", dir.join("v.toml").display()));
        let o = parse(&format!("{HEADER}\nimage:v.toml,1.2e6 -3e5 m,900,90,R\n"), "o.csv", &dir)
            .unwrap();
        assert_eq!(o[0].what, Observable::ImagePoint(dir.join("v.toml"), 1200.0, -300.0));
        for (row, says) in [
            ("image:v.toml,1200 km,900,90,R", "X Y UNIT"),
            ("image:v.toml,1200 -300 furlong,900,90,R", "furlong"),
            ("image:v.toml,1200 -300 km,900,90,cm^-2", "rayleigh"),
            ("image:w.toml,1200 -300 km,900,90,R", "w.toml"),
        ] {
            let e = parse(&format!("{HEADER}\n{row}\n"), "o.csv", &dir).unwrap_err();
            assert!(e.contains("line 2") && e.contains(says), "{row}: {e}");
        }
        let _ = std::fs::remove_dir_all(&dir);
    }
}

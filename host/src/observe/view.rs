//! The view file: where the instrument is, where it looks, and how the
//! brightness is computed.
//!
//! Why this exists: an observer states a viewing geometry in the terms of
//! the trade (phase angle, the limb, altitudes above it, an orbiter's
//! position and look direction), with units on every value. This module
//! reads that TOML, refuses unknown keys and bad values with the key and
//! the fix, and turns it into rays in the solar-fixed frame of
//! [`super::field`]. `docs/observe.md` documents every key.

use std::path::{Path, PathBuf};

use serde::Deserialize;

use crate::scenario::keys::describe;
use crate::scenario::quantity::{Kind, parse};
use crate::vec3::{self, Vec3};
use exobound_sdk::constants::ASTRONOMICAL_UNIT;

/// The view file as written.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ViewFile {
    /// A title for plots.
    #[serde(default)]
    pub title: Option<String>,
    /// A distant observer (a telescope).
    #[serde(default)]
    pub distant: Option<DistantSection>,
    /// An orbiter.
    #[serde(default)]
    pub orbiter: Option<OrbiterSection>,
    /// How columns become brightness.
    #[serde(default)]
    pub brightness: BrightnessSection,
}

/// `[distant]`: a telescope far from the body.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct DistantSection {
    /// Sun-body-observer angle, e.g. "60 deg".
    pub phase_angle: String,
    /// "dawn" or "dusk": the side of the subsolar meridian that the
    /// sub-observer point lies on.
    #[serde(default = "default_side")]
    pub observer_side: String,
    /// Latitude of the sub-observer point, e.g. "0 deg".
    #[serde(default = "zero_deg")]
    pub sub_observer_latitude: String,
    /// Where on the limb the slit sits: "sunward", "north", "south", or an
    /// angle on the sky from the projected north pole towards the
    /// observer's right (with north up), e.g. "90 deg".
    #[serde(default = "default_pa")]
    pub slit_position_angle: String,
    /// Lowest altitude above the limb, e.g. "0 km".
    #[serde(default = "zero_km")]
    pub altitude_min: String,
    /// Highest altitude above the limb, e.g. "1500 km".
    #[serde(default = "default_alt_max")]
    pub altitude_max: String,
    /// Spacing of the slit points, e.g. "50 km".
    #[serde(default = "default_alt_step")]
    pub altitude_step: String,
    /// Side of the square aperture at each slit point, e.g. "20 km"; "0 km"
    /// for single lines of sight.
    #[serde(default = "zero_km")]
    pub aperture: String,
    /// Half the width of the disk image, e.g. "4000 km"; default 2.2 body radii.
    #[serde(default)]
    pub image_half_width: Option<String>,
    /// Pixels along each side of the image.
    #[serde(default = "default_pixels")]
    pub image_pixels: usize,
    /// Distance from the observer to the body, e.g. "384400 km" or
    /// "0.6 AU"; gives the image an angular scale (arcsec). Default: none.
    #[serde(default)]
    pub observer_distance: Option<String>,
}

/// `[orbiter]`: a spacecraft inside or near the exosphere.
#[derive(Clone, Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct OrbiterSection {
    /// Spacecraft altitude above the mean radius, e.g. "100 km".
    pub altitude: String,
    /// Local time below the spacecraft, e.g. "9 h".
    pub local_time: String,
    /// Latitude below the spacecraft, e.g. "0 deg".
    #[serde(default = "zero_deg")]
    pub latitude: String,
    /// "nadir" (one line straight down) or "limb" (a scan of tangent altitudes).
    pub look: String,
    /// For "limb": direction of the scan on the local horizon, from north
    /// through east, e.g. "90 deg" (towards later local time).
    #[serde(default = "default_azimuth")]
    pub azimuth: String,
    /// For "limb": lowest tangent altitude, e.g. "0 km".
    #[serde(default = "zero_km")]
    pub tangent_altitude_min: String,
    /// For "limb": highest tangent altitude (below the spacecraft).
    #[serde(default)]
    pub tangent_altitude_max: Option<String>,
    /// For "limb": spacing of the tangent altitudes, e.g. "10 km".
    #[serde(default = "default_tan_step")]
    pub tangent_altitude_step: String,
}

/// `[brightness]`.
#[derive(Clone, Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct BrightnessSection {
    /// A g-factor table file (relative to the view file); default the
    /// built-in table for the run's species.
    #[serde(default)]
    pub g_factor_table: Option<String>,
    /// Heliocentric radial velocity of the atoms, e.g. "-5 km/s"; default
    /// the body's at the end of the run.
    #[serde(default)]
    pub radial_velocity: Option<String>,
    /// Heliocentric distance, e.g. "0.39 AU"; default the body's at the end
    /// of the run.
    #[serde(default)]
    pub heliocentric_distance: Option<String>,
}

fn default_side() -> String {
    "dawn".into()
}
fn zero_deg() -> String {
    "0 deg".into()
}
fn zero_km() -> String {
    "0 km".into()
}
fn default_pa() -> String {
    "sunward".into()
}
fn default_alt_max() -> String {
    "1500 km".into()
}
fn default_alt_step() -> String {
    "50 km".into()
}
fn default_pixels() -> usize {
    121
}
fn default_azimuth() -> String {
    "90 deg".into()
}
fn default_tan_step() -> String {
    "10 km".into()
}

/// A checked distant-observer geometry, SI units.
#[derive(Clone, Debug, PartialEq)]
pub struct Distant {
    /// Phase angle, rad.
    pub phase_angle: f64,
    /// Unit vector from the body towards the observer, solar-fixed.
    pub to_observer: Vec3,
    /// Unit vector of the image's up direction (projected north).
    pub up: Vec3,
    /// Unit vector of the image's right direction.
    pub right: Vec3,
    /// Slit position angle from up towards right, rad.
    pub position_angle: f64,
    /// Altitudes above the limb, m.
    pub altitudes: Vec<f64>,
    /// Aperture side, m.
    pub aperture: f64,
    /// Half width of the image, m.
    pub image_half_width: f64,
    /// Pixels along a side of the image.
    pub image_pixels: usize,
    /// Distance from the observer to the body's centre, m, if given.
    pub observer_distance: Option<f64>,
}

/// A checked orbiter geometry, SI units.
#[derive(Clone, Debug, PartialEq)]
pub struct Orbiter {
    /// Spacecraft position, m, solar-fixed.
    pub position: Vec3,
    /// Spacecraft altitude, m.
    pub altitude: f64,
    /// The looks: (tangent altitude, m, or None for nadir; unit direction).
    pub looks: Vec<(Option<f64>, Vec3)>,
}

/// Where the instrument is.
#[derive(Clone, Debug, PartialEq)]
pub enum Geometry {
    /// A telescope far away.
    Distant(Distant),
    /// A spacecraft.
    Orbiter(Orbiter),
}

/// A checked view.
#[derive(Clone, Debug, PartialEq)]
pub struct View {
    /// Title for plots.
    pub title: String,
    /// The geometry.
    pub geometry: Geometry,
    /// A g-factor table file, resolved.
    pub g_factor_table: Option<PathBuf>,
    /// Radial velocity override, m s^-1.
    pub radial_velocity: Option<f64>,
    /// Heliocentric distance override, AU.
    pub heliocentric_distance: Option<f64>,
}

/// Read and check a view file. `radius` (m) is the body's, from the run.
pub fn read(path: &Path, radius: f64) -> Result<View, String> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| format!("cannot read the view file `{}`: {e}", path.display()))?;
    let origin = path.display().to_string();
    let file: ViewFile = toml::from_str(&text).map_err(|e| describe(&origin, &text, &e))?;
    let base = path.parent().unwrap_or(Path::new("."));
    check(&file, radius, base).map_err(|e| format!("{origin}: {e}"))
}

/// `key = "value"` parsed as a quantity of `kind`, the key named in errors.
fn q(section: &str, key: &str, value: &str, kind: Kind) -> Result<f64, String> {
    parse(value, kind).map_err(|e| format!("[{section}] {key}: {e}"))
}

/// Values lo, lo + step, ... up to hi (inclusive within rounding), checked.
fn range(section: &str, key: &str, lo: f64, hi: f64, step: f64) -> Result<Vec<f64>, String> {
    if !(step > 0.0) || hi < lo {
        return Err(format!(
            "[{section}] {key}: need a positive step and max >= min (got min {lo} m, max {hi} \
             m, step {step} m)"
        ));
    }
    let n = ((hi - lo) / step + 1e-9).floor() as usize + 1;
    if n > 100_000 {
        return Err(format!("[{section}] {key}: {n} points is too many; use a larger step"));
    }
    Ok((0..n).map(|i| lo + step * i as f64).collect())
}

/// Check a parsed view file; file paths are relative to `base`.
pub fn check(file: &ViewFile, radius: f64, base: &Path) -> Result<View, String> {
    let geometry = match (&file.distant, &file.orbiter) {
        (Some(d), None) => Geometry::Distant(distant(d, radius)?),
        (None, Some(o)) => Geometry::Orbiter(orbiter(o, radius)?),
        (Some(_), Some(_)) => {
            return Err("give either [distant] or [orbiter], not both".into());
        }
        (None, None) => {
            return Err("the view needs a [distant] or an [orbiter] table".into());
        }
    };
    let b = &file.brightness;
    let radial_velocity = b
        .radial_velocity
        .as_deref()
        .map(|v| q("brightness", "radial_velocity", v, Kind::Speed))
        .transpose()?;
    let heliocentric_distance = b
        .heliocentric_distance
        .as_deref()
        .map(|v| q("brightness", "heliocentric_distance", v, Kind::HelioDistance))
        .transpose()?;
    if let Some(r) = heliocentric_distance
        && !(r > 0.0)
    {
        return Err(format!("[brightness] heliocentric_distance: {r} AU must be positive"));
    }
    Ok(View {
        title: file.title.clone().unwrap_or_else(|| "Line-of-sight view".into()),
        geometry,
        g_factor_table: b.g_factor_table.as_ref().map(|f| base.join(f)),
        radial_velocity,
        heliocentric_distance,
    })
}

fn distant(d: &DistantSection, radius: f64) -> Result<Distant, String> {
    let s = "distant";
    let alpha = q(s, "phase_angle", &d.phase_angle, Kind::Angle)?;
    if !(0.0..=std::f64::consts::PI).contains(&alpha) {
        return Err(format!(
            "[distant] phase_angle: {} deg is outside 0 to 180 deg",
            alpha.to_degrees()
        ));
    }
    let beta = q(s, "sub_observer_latitude", &d.sub_observer_latitude, Kind::Angle)?;
    if beta.abs() > 89f64.to_radians() {
        return Err(format!(
            "[distant] sub_observer_latitude: {} deg; use -89 to 89 deg (the image is \
             oriented by the projected pole)",
            beta.to_degrees()
        ));
    }
    let sign = match d.observer_side.as_str() {
        "dawn" => -1.0,
        "dusk" => 1.0,
        other => {
            return Err(format!("[distant] observer_side: `{other}`; use \"dawn\" or \"dusk\""));
        }
    };
    // The sub-observer point's azimuth from the subsolar meridian, phi:
    // cos(alpha) = cos(beta) cos(phi) (spherical law of cosines).
    let c = alpha.cos() / beta.cos();
    if c.abs() > 1.0 {
        return Err(format!(
            "[distant] a phase angle of {} deg is impossible at a sub-observer latitude of {} \
             deg (the phase angle must be at least the latitude)",
            alpha.to_degrees(),
            beta.to_degrees()
        ));
    }
    let phi = sign * c.acos();
    let o = [beta.cos() * phi.cos(), beta.cos() * phi.sin(), beta.sin()];
    let up = vec3::normalize(vec3::add_scaled([0.0, 0.0, 1.0], o, -o[2]));
    // Looking along -o with `up` up, the right-hand side is (-o) x up.
    let right = vec3::cross(vec3::scale(o, -1.0), up);
    let position_angle = match d.slit_position_angle.as_str() {
        "north" => 0.0,
        "south" => std::f64::consts::PI,
        "sunward" => {
            let sun = vec3::add_scaled([1.0, 0.0, 0.0], o, -o[0]);
            if vec3::norm(sun) < 1e-6 {
                return Err(
                    "[distant] slit_position_angle: \"sunward\" is undefined at zero phase \
                     angle; give an angle, e.g. \"90 deg\""
                        .into(),
                );
            }
            vec3::dot(sun, right).atan2(vec3::dot(sun, up))
        }
        other => q(s, "slit_position_angle", other, Kind::Angle)
            .map_err(|e| format!("{e} (or one of \"sunward\", \"north\", \"south\")"))?,
    };
    let lo = q(s, "altitude_min", &d.altitude_min, Kind::Length)?;
    let hi = q(s, "altitude_max", &d.altitude_max, Kind::Length)?;
    let step = q(s, "altitude_step", &d.altitude_step, Kind::Length)?;
    if lo < 0.0 {
        return Err("[distant] altitude_min: must not be negative".into());
    }
    let altitudes = range(s, "altitude_min/altitude_max/altitude_step", lo, hi, step)?;
    let aperture = q(s, "aperture", &d.aperture, Kind::Length)?;
    if aperture < 0.0 {
        return Err("[distant] aperture: must not be negative".into());
    }
    let image_half_width = match &d.image_half_width {
        Some(w) => q(s, "image_half_width", w, Kind::Length)?,
        None => 2.2 * radius,
    };
    if !(image_half_width > 0.0) {
        return Err("[distant] image_half_width: must be positive".into());
    }
    if !(8..=1024).contains(&d.image_pixels) {
        return Err(format!("[distant] image_pixels: {}; use 8 to 1024", d.image_pixels));
    }
    let observer_distance = match &d.observer_distance {
        None => None,
        Some(text) => {
            let au = parse(text, Kind::HelioDistance).map(|au| au * ASTRONOMICAL_UNIT);
            let m = parse(text, Kind::Length).or(au).map_err(|e| {
                format!("[distant] observer_distance: {e} (a length such as \"384400 km\", or AU)")
            })?;
            if !(m > radius) {
                return Err(format!(
                    "[distant] observer_distance: {text} lies inside the body; a distant \
                     observer is outside it (use [orbiter] for a spacecraft)"
                ));
            }
            Some(m)
        }
    };
    Ok(Distant {
        phase_angle: alpha,
        to_observer: o,
        up,
        right,
        position_angle,
        altitudes,
        aperture,
        image_half_width,
        image_pixels: d.image_pixels,
        observer_distance,
    })
}

/// Local east, north and up unit vectors at solar-fixed position `p`.
pub fn enu_at(p: Vec3) -> (Vec3, Vec3, Vec3) {
    let up = vec3::normalize(p);
    let east = vec3::normalize(vec3::cross([0.0, 0.0, 1.0], up));
    let north = vec3::cross(up, east);
    (east, north, up)
}

fn orbiter(o: &OrbiterSection, radius: f64) -> Result<Orbiter, String> {
    let s = "orbiter";
    let alt = q(s, "altitude", &o.altitude, Kind::Length)?;
    if !(alt > 0.0) {
        return Err("[orbiter] altitude: must be above the surface".into());
    }
    let lt = q(s, "local_time", &o.local_time, Kind::Time)? / 3600.0;
    if !(0.0..24.0).contains(&lt) {
        return Err(format!("[orbiter] local_time: {lt} h is outside 0 to 24 h"));
    }
    let lat = q(s, "latitude", &o.latitude, Kind::Angle)?;
    if lat.abs() > 89.9f64.to_radians() {
        return Err("[orbiter] latitude: use -89.9 to 89.9 deg".into());
    }
    let position = super::field::position(radius, alt, lt, lat);
    let (east, north, up) = enu_at(position);
    let looks = match o.look.as_str() {
        "nadir" => vec![(None, vec3::scale(up, -1.0))],
        "limb" => {
            let az = q(s, "azimuth", &o.azimuth, Kind::Angle)?;
            let h = vec3::add(vec3::scale(north, az.cos()), vec3::scale(east, az.sin()));
            let lo = q(s, "tangent_altitude_min", &o.tangent_altitude_min, Kind::Length)?;
            let hi = match &o.tangent_altitude_max {
                Some(t) => q(s, "tangent_altitude_max", t, Kind::Length)?,
                None => alt,
            };
            let step = q(s, "tangent_altitude_step", &o.tangent_altitude_step, Kind::Length)?;
            if lo < 0.0 || hi > alt {
                return Err(format!(
                    "[orbiter] tangent altitudes must lie between 0 and the spacecraft's \
                     altitude ({} km)",
                    alt / 1e3
                ));
            }
            range(s, "tangent_altitude_min/max/step", lo, hi, step)?
                .into_iter()
                .map(|ht| {
                    // Depression below the horizon for a line tangent at
                    // radius R + ht: cos(dep) = (R + ht) / (R + alt).
                    let dep = ((radius + ht) / (radius + alt)).clamp(-1.0, 1.0).acos();
                    let d = vec3::add(vec3::scale(h, dep.cos()), vec3::scale(up, -dep.sin()));
                    (Some(ht), d)
                })
                .collect()
        }
        other => return Err(format!("[orbiter] look: `{other}`; use \"nadir\" or \"limb\"")),
    };
    Ok(Orbiter { position, altitude: alt, looks })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn file(text: &str) -> ViewFile {
        toml::from_str(text).unwrap()
    }

    #[test]
    fn distant_geometry_is_orthonormal_and_on_the_right_side() {
        let v = check(
            &file("[distant]\nphase_angle = \"60 deg\"\nobserver_side = \"dawn\""),
            1.7374e6,
            Path::new("."),
        )
        .unwrap();
        let Geometry::Distant(d) = v.geometry else { panic!() };
        // Phase angle = angle between the Sun (+x) and the observer (definition).
        assert!((vec3::dot(d.to_observer, [1.0, 0.0, 0.0]) - 0.5).abs() < 1e-12);
        assert!(d.to_observer[1] < 0.0, "a dawn-side observer has y < 0");
        assert!(vec3::dot(d.up, d.right).abs() < 1e-12);
        assert!(vec3::dot(d.up, d.to_observer).abs() < 1e-12);
        assert!((vec3::norm(d.right) - 1.0).abs() < 1e-12);
        // "sunward": the projected Sun direction at the slit's angle.
        let slit = vec3::add(
            vec3::scale(d.up, d.position_angle.cos()),
            vec3::scale(d.right, d.position_angle.sin()),
        );
        assert!(vec3::dot(slit, [1.0, 0.0, 0.0]) > 0.8);
        assert_eq!(d.altitudes.len(), 31);
    }

    #[test]
    fn orbiter_limb_lines_are_tangent_at_the_asked_altitude() {
        let r = 1.7374e6;
        let v = check(
            &file(
                "[orbiter]\naltitude = \"100 km\"\nlocal_time = \"9 h\"\nlook = \"limb\"\n\
                 tangent_altitude_step = \"25 km\"",
            ),
            r,
            Path::new("."),
        )
        .unwrap();
        let Geometry::Orbiter(o) = v.geometry else { panic!() };
        assert_eq!(o.looks.len(), 5);
        for (ht, d) in &o.looks {
            // Closest approach of the line to the centre (geometry):
            // |p - (p.d) d| = R + ht.
            let p = o.position;
            let closest = vec3::add_scaled(p, *d, -vec3::dot(p, *d));
            assert!((vec3::norm(closest) - (r + ht.unwrap())).abs() < 1e-3);
        }
    }

    #[test]
    fn bad_views_are_refused_with_the_key() {
        let r = 1.7374e6;
        let e =
            check(&file("[distant]\nphase_angle = \"200 deg\""), r, Path::new(".")).unwrap_err();
        assert!(e.contains("phase_angle") && e.contains("180"), "{e}");
        let e = check(
            &file("[distant]\nphase_angle = \"30 deg\"\nobserver_side = \"noon\""),
            r,
            Path::new("."),
        )
        .unwrap_err();
        assert!(e.contains("observer_side"), "{e}");
        let e = check(&file("title = \"x\""), r, Path::new(".")).unwrap_err();
        assert!(e.contains("[distant]"), "{e}");
        let e = toml::from_str::<ViewFile>("[distant]\nphase_angel = \"3 deg\"")
            .unwrap_err()
            .to_string();
        assert!(e.contains("phase_angel"), "{e}");
    }
}

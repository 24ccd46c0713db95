//! Coordinate frames: latitude and longitude, local east-north-up axes, and
//! the rotation between the body-fixed frame and the body-centred inertial
//! frame (BCI) in which flights are integrated.
//!
//! Why this exists: process modules speak in body-fixed latitude, east
//! longitude and local (east, north, up) velocities, whereas orbits are
//! simplest in a non-rotating frame. BCI has its z axis along the spin axis
//! and its x axis along the body-fixed prime meridian at t = 0, so the two
//! frames differ only by a rotation of Omega_sid t about z, and a point at
//! rest on the surface moves at Omega x r in BCI. Angles are radians,
//! lengths metres, times seconds. Trigonometry goes through
//! `exobound_sdk::math` so that host and modules agree bit for bit.

use crate::vec3::{self, Vec3};
use core::f64::consts::PI;
use exobound_sdk::math;

/// Local axes at a surface point: `[east, north, up]`, each a unit vector
/// in the frame whose longitude was used to build them.
pub type EnuBasis = [Vec3; 3];

/// Wraps an angle (rad) into [0, 2 pi).
#[inline]
pub fn wrap_two_pi(angle: f64) -> f64 {
    let two_pi = 2.0 * PI;
    let w = angle - two_pi * (angle / two_pi).floor();
    // Rounding can give exactly 2 pi for tiny negative inputs.
    if w >= two_pi || w < 0.0 { 0.0 } else { w }
}

/// Wraps an angle (rad) into [-pi, pi).
#[inline]
pub fn wrap_pi(angle: f64) -> f64 {
    let w = wrap_two_pi(angle + PI) - PI;
    if w >= PI { -PI } else { w }
}

/// Unit vector toward latitude `lat` and longitude `lon` (rad):
/// (cos lat cos lon, cos lat sin lon, sin lat), dimensionless.
#[inline]
pub fn unit_from_lat_lon(lat: f64, lon: f64) -> Vec3 {
    let (sl, cl) = math::sin_cos(lat);
    let (so, co) = math::sin_cos(lon);
    [cl * co, cl * so, sl]
}

/// Latitude in [-pi/2, pi/2] and longitude in [0, 2 pi) (rad) of the
/// direction of `r` (any length unit). Latitude uses atan2(z, rho), which
/// stays accurate near the poles where asin(z/|r|) would not.
#[inline]
pub fn lat_lon(r: Vec3) -> (f64, f64) {
    let rho = math::sqrt(r[0] * r[0] + r[1] * r[1]);
    (math::atan2(r[2], rho), wrap_two_pi(math::atan2(r[1], r[0])))
}

/// Local east, north and up unit vectors at latitude `lat`, longitude
/// `lon` (rad). At a pole east is taken as the direction of increasing
/// longitude `lon` and north as its continuation, so the basis is always
/// right-handed (east x north = up).
#[inline]
pub fn enu_basis(lat: f64, lon: f64) -> EnuBasis {
    let (sl, cl) = math::sin_cos(lat);
    let (so, co) = math::sin_cos(lon);
    [[-so, co, 0.0], [-sl * co, -sl * so, cl], [cl * co, cl * so, sl]]
}

/// Vector from local components `v_enu` = (east, north, up) in `basis`
/// (units of `v_enu`).
#[inline]
pub fn enu_to_vec(v_enu: [f64; 3], basis: &EnuBasis) -> Vec3 {
    let [e, n, u] = basis;
    [
        v_enu[0] * e[0] + v_enu[1] * n[0] + v_enu[2] * u[0],
        v_enu[0] * e[1] + v_enu[1] * n[1] + v_enu[2] * u[1],
        v_enu[0] * e[2] + v_enu[1] * n[2] + v_enu[2] * u[2],
    ]
}

/// Local components (east, north, up) of `v` in `basis` (units of `v`).
#[inline]
pub fn vec_to_enu(v: Vec3, basis: &EnuBasis) -> [f64; 3] {
    [vec3::dot(v, basis[0]), vec3::dot(v, basis[1]), vec3::dot(v, basis[2])]
}

/// BCI longitude (rad, [0, 2 pi)) of body-fixed east longitude `lon_fixed`
/// (rad) at time `t` (s) for spin rate `omega` (rad s^-1):
/// lon_BCI = lon_fixed + Omega t.
#[inline]
pub fn fixed_to_inertial_longitude(lon_fixed: f64, omega: f64, t: f64) -> f64 {
    wrap_two_pi(lon_fixed + omega * t)
}

/// Body-fixed east longitude (rad, [0, 2 pi)) of BCI longitude
/// `lon_inertial` (rad) at time `t` (s): lon_fixed = lon_BCI - Omega t.
#[inline]
pub fn inertial_to_fixed_longitude(lon_inertial: f64, omega: f64, t: f64) -> f64 {
    wrap_two_pi(lon_inertial - omega * t)
}

/// Rotates a body-fixed vector into BCI at time `t` (s): R_z(Omega t) v.
#[inline]
pub fn fixed_to_inertial(v: Vec3, omega: f64, t: f64) -> Vec3 {
    vec3::rotate_z(v, omega * t)
}

/// Rotates a BCI vector into the body-fixed frame at time `t` (s):
/// R_z(-Omega t) v.
#[inline]
pub fn inertial_to_fixed(v: Vec3, omega: f64, t: f64) -> Vec3 {
    vec3::rotate_z(v, -omega * t)
}

/// Velocity in BCI of a point at rest on the rotating body at BCI position
/// `r` (m): Omega z x r = (-Omega y, Omega x, 0), m s^-1.
#[inline]
pub fn corotation_velocity(omega: f64, r: Vec3) -> Vec3 {
    [-omega * r[1], omega * r[0], 0.0]
}

/// BCI launch state (position m, velocity m s^-1) of an atom leaving the
/// surface sphere of radius `radius` (m) at body-fixed latitude `lat` and
/// east longitude `lon_fixed` (rad) at time `t` (s), with velocity `v_enu`
/// (east, north, up, m s^-1) relative to the rotating surface. The
/// surface's own motion Omega x r is added (Galilean velocity addition).
#[inline]
pub fn launch_state(
    radius: f64,
    lat: f64,
    lon_fixed: f64,
    v_enu: [f64; 3],
    omega: f64,
    t: f64,
) -> (Vec3, Vec3) {
    let lon = lon_fixed + omega * t;
    let basis = enu_basis(lat, lon);
    let r = vec3::scale(basis[2], radius);
    let v = vec3::add(enu_to_vec(v_enu, &basis), corotation_velocity(omega, r));
    (r, v)
}

/// Body-fixed view of a BCI state at time `t` (s): latitude and east
/// longitude (rad) of `r`, and the velocity relative to the rotating
/// surface in local (east, north, up) components, m s^-1. The inverse of
/// [`launch_state`].
#[inline]
pub fn surface_view(r: Vec3, v: Vec3, omega: f64, t: f64) -> (f64, f64, [f64; 3]) {
    let (lat, lon_inertial) = lat_lon(r);
    let basis = enu_basis(lat, lon_inertial);
    let v_rel = vec3::sub(v, corotation_velocity(omega, r));
    (lat, inertial_to_fixed_longitude(lon_inertial, omega, t), vec_to_enu(v_rel, &basis))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::body::Body;
    use core::f64::consts::FRAC_PI_2;

    #[test]
    fn lat_lon_round_trip() {
        // Spherical coordinates (definition); lon in [0, 2 pi).
        for i in 0..37 {
            for j in 0..72 {
                let lat = -FRAC_PI_2 + 1e-9 + (PI - 2e-9) * i as f64 / 36.0;
                let lon = 2.0 * PI * j as f64 / 72.0;
                let (la, lo) = lat_lon(vec3::scale(unit_from_lat_lon(lat, lon), 1737.4e3));
                assert!((la - lat).abs() < 1e-15, "lat {lat}");
                // Longitude is meaningless at the poles, so scale by cos(lat).
                assert!(wrap_pi(lo - lon).abs() * lat.cos() < 1e-15, "lon {lon}");
                assert!((0.0..2.0 * PI).contains(&lo));
            }
        }
        let (la, lo) = lat_lon([0.0, -1.0, 0.0]);
        assert!(la == 0.0 && (lo - 1.5 * PI).abs() < 1e-15);
    }

    #[test]
    fn wrapping() {
        assert_eq!(wrap_two_pi(-1e-18), 0.0);
        assert!((wrap_two_pi(-0.5) - (2.0 * PI - 0.5)).abs() < 1e-15);
        assert!((wrap_two_pi(7.0 * PI) - PI).abs() < 1e-14);
        assert!((wrap_pi(1.5 * PI) + 0.5 * PI).abs() < 1e-15);
        assert_eq!(wrap_pi(PI), -PI);
    }

    #[test]
    fn enu_basis_is_orthonormal_and_right_handed() {
        // Local horizontal axes (definition): east x north = up, up = r-hat.
        for &(lat, lon) in &[(0.0, 0.0), (0.7, 2.1), (-1.2, 5.9), (FRAC_PI_2, 0.3)] {
            let b = enu_basis(lat, lon);
            for i in 0..3 {
                assert!((vec3::norm(b[i]) - 1.0).abs() < 1e-15);
                for j in 0..i {
                    assert!(vec3::dot(b[i], b[j]).abs() < 1e-15);
                }
            }
            assert!(vec3::norm(vec3::sub(vec3::cross(b[0], b[1]), b[2])) < 1e-15);
            assert_eq!(b[2], unit_from_lat_lon(lat, lon));
            let v = [3.0, -4.0, 5.0];
            let back = vec_to_enu(enu_to_vec(v, &b), &b);
            assert!(vec3::norm(vec3::sub(back, v)) < 1e-14);
        }
        // At the equator and prime meridian: east = +y, north = +z, up = +x.
        assert_eq!(enu_basis(0.0, 0.0), [[-0.0, 1.0, 0.0], [-0.0, -0.0, 1.0], [1.0, 0.0, 0.0]]);
    }

    #[test]
    fn body_fixed_and_inertial_longitudes() {
        let moon = Body::moon();
        let w = moon.sidereal_rate();
        let t = 5.0 * 86400.0;
        // The body turns eastward: a fixed meridian advances in BCI by Omega t.
        let lon = 1.0;
        let li = fixed_to_inertial_longitude(lon, w, t);
        assert!((wrap_pi(li - lon - w * t)).abs() < 1e-15);
        assert!((inertial_to_fixed_longitude(li, w, t) - lon).abs() < 1e-14);
        // Vector rotation agrees with the longitude shift.
        let v = fixed_to_inertial(unit_from_lat_lon(0.3, lon), w, t);
        let (la, lo) = lat_lon(v);
        assert!((la - 0.3).abs() < 1e-15 && (lo - li).abs() < 1e-14);
        let back = inertial_to_fixed(v, w, t);
        assert!(vec3::norm(vec3::sub(back, unit_from_lat_lon(0.3, lon))) < 1e-15);
    }

    #[test]
    fn launch_state_adds_surface_rotation() {
        let moon = Body::moon();
        let w = moon.sidereal_rate();
        // A point at rest on the equator moves east at Omega R
        // (4.63 m/s for the Moon: 2 pi 1737.4 km / 27.322 d).
        let (r, v) = launch_state(moon.radius, 0.0, 0.4, [0.0, 0.0, 0.0], w, 1e5);
        assert!((vec3::norm(v) - w * moon.radius).abs() < 1e-12);
        assert!((w * moon.radius - 4.6245).abs() < 1e-3);
        assert!(vec3::dot(r, v).abs() < 1e-6);
        // The round trip recovers position and relative velocity.
        let v_enu = [120.0, -35.0, 800.0];
        let (r, v) = launch_state(moon.radius, -0.6, 4.0, v_enu, w, 3.3e6);
        assert!((vec3::norm(r) - moon.radius).abs() < 1e-8);
        let (lat, lon, back) = surface_view(r, v, w, 3.3e6);
        assert!((lat + 0.6).abs() < 1e-14 && (lon - 4.0).abs() < 1e-12);
        assert!(vec3::norm(vec3::sub(back, v_enu)) < 1e-11);
    }
}

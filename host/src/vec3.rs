//! Three-vectors as plain `[f64; 3]` arrays, with the handful of operations
//! the transport code needs.
//!
//! Why this exists: positions and velocities sit in the particle bank's
//! columns and cross the wasm boundary as plain numbers, so a bare array is
//! the cheapest representation that needs no conversion. These helpers are
//! `#[inline]` and allocation-free because they run once per particle per
//! hop. Units are whatever the caller's vectors carry (m, m s^-1, ...).

use exobound_sdk::math;

/// A Cartesian three-vector; the unit is the caller's (m, m s^-1, m s^-2).
pub type Vec3 = [f64; 3];

/// The zero vector.
pub const ZERO: Vec3 = [0.0, 0.0, 0.0];

/// a + b, componentwise (units of a and b, which must agree).
#[inline]
pub fn add(a: Vec3, b: Vec3) -> Vec3 {
    [a[0] + b[0], a[1] + b[1], a[2] + b[2]]
}

/// a - b, componentwise (units of a and b, which must agree).
#[inline]
pub fn sub(a: Vec3, b: Vec3) -> Vec3 {
    [a[0] - b[0], a[1] - b[1], a[2] - b[2]]
}

/// s a: the vector a scaled by the scalar s (units multiply).
#[inline]
pub fn scale(a: Vec3, s: f64) -> Vec3 {
    [a[0] * s, a[1] * s, a[2] * s]
}

/// a + s b, a fused "axpy" used by the integrator stages (units of a).
#[inline]
pub fn add_scaled(a: Vec3, b: Vec3, s: f64) -> Vec3 {
    [a[0] + s * b[0], a[1] + s * b[1], a[2] + s * b[2]]
}

/// Scalar product a . b (units multiply).
#[inline]
pub fn dot(a: Vec3, b: Vec3) -> f64 {
    a[0] * b[0] + a[1] * b[1] + a[2] * b[2]
}

/// Vector product a x b, right-handed (units multiply).
#[inline]
pub fn cross(a: Vec3, b: Vec3) -> Vec3 {
    [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]]
}

/// Euclidean length |a| (units of a).
#[inline]
pub fn norm(a: Vec3) -> f64 {
    math::sqrt(dot(a, a))
}

/// Squared length |a|^2 (units of a, squared); avoids a square root.
#[inline]
pub fn norm2(a: Vec3) -> f64 {
    dot(a, a)
}

/// a / |a|, dimensionless. The zero vector is returned unchanged, so a
/// caller that may pass zero must check the result itself.
#[inline]
pub fn normalize(a: Vec3) -> Vec3 {
    let n = norm(a);
    if n > 0.0 { scale(a, 1.0 / n) } else { a }
}

/// Angle between a and b, rad in [0, pi]. Uses atan2(|a x b|, a . b), which
/// keeps full precision for nearly parallel vectors where acos would not.
#[inline]
pub fn angle_between(a: Vec3, b: Vec3) -> f64 {
    math::atan2(norm(cross(a, b)), dot(a, b))
}

/// Rotates v about the +z axis by `angle` rad, right-handed
/// (counter-clockwise seen from +z): x -> y for angle = pi/2.
#[inline]
pub fn rotate_z(v: Vec3, angle: f64) -> Vec3 {
    let (s, c) = math::sin_cos(angle);
    [c * v[0] - s * v[1], s * v[0] + c * v[1], v[2]]
}

#[cfg(test)]
mod tests {
    use super::*;
    use core::f64::consts::{FRAC_PI_2, PI};

    fn close(a: Vec3, b: Vec3, tol: f64) -> bool {
        norm(sub(a, b)) <= tol
    }

    #[test]
    fn algebra_identities() {
        // Textbook vector identities (no physics source needed).
        let a = [1.0, -2.0, 3.5];
        let b = [-0.5, 4.0, 2.0];
        assert_eq!(add(a, b), [0.5, 2.0, 5.5]);
        assert_eq!(sub(a, b), [1.5, -6.0, 1.5]);
        assert_eq!(scale(a, 2.0), [2.0, -4.0, 7.0]);
        assert_eq!(add_scaled(a, b, 2.0), [0.0, 6.0, 7.5]);
        assert_eq!(dot(a, b), -0.5 - 8.0 + 7.0);
        let c = cross(a, b);
        assert!(dot(c, a).abs() < 1e-12 && dot(c, b).abs() < 1e-12);
        assert_eq!(cross([1.0, 0.0, 0.0], [0.0, 1.0, 0.0]), [0.0, 0.0, 1.0]);
        assert!((norm([3.0, 4.0, 12.0]) - 13.0).abs() < 1e-15);
        assert!((norm(normalize(a)) - 1.0).abs() < 1e-15);
        assert_eq!(normalize(ZERO), ZERO);
        assert!((angle_between([1.0, 0.0, 0.0], [0.0, 0.0, 2.0]) - FRAC_PI_2).abs() < 1e-15);
        assert!((angle_between([1.0, 1e-9, 0.0], [1.0, 0.0, 0.0]) - 1e-9).abs() < 1e-24);
    }

    #[test]
    fn rotation_about_z_is_right_handed() {
        // Right-hand rule: a quarter turn about +z takes x to y and y to -x.
        assert!(close(rotate_z([1.0, 0.0, 0.0], FRAC_PI_2), [0.0, 1.0, 0.0], 1e-15));
        assert!(close(rotate_z([0.0, 1.0, 0.0], FRAC_PI_2), [-1.0, 0.0, 0.0], 1e-15));
        let v = [0.3, -0.7, 0.2];
        assert!(close(rotate_z(rotate_z(v, 1.234), -1.234), v, 1e-15));
        assert!(close(rotate_z(v, 2.0 * PI), v, 1e-15));
        assert_eq!(rotate_z(v, 0.9)[2], 0.2);
        assert!((norm(rotate_z(v, 0.9)) - norm(v)).abs() < 1e-15);
    }
}

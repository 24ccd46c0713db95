//! The body's shadow, as a cylinder.
//!
//! Why this exists: radiation pressure and photoionization act only in
//! sunlight. The Sun is far enough (>= 0.3 AU, so the penumbra of a body of
//! radius R spans ~R * 0.005 rad) that a cylinder of the body's radius
//! behind it is the standard approximation for atoms within a few radii.

use crate::vec3::{self, Vec3};

/// True if the point `r` (m, body-centred) is in sunlight, given the unit
/// vector `sun_dir` toward the Sun and the body radius `radius` (m).
/// Cylindrical shadow: a point is shadowed iff it lies on the night side
/// (r . s < 0) and within `radius` of the Sun-body axis,
/// |r - (r . s) s| < radius. Points on the cylinder wall count as sunlit.
#[inline]
pub fn is_sunlit(r: Vec3, sun_dir: Vec3, radius: f64) -> bool {
    let along = vec3::dot(r, sun_dir);
    if along >= 0.0 {
        return true;
    }
    // |r_perp|^2 = |r|^2 - (r.s)^2, compared without a square root.
    let perp2 = vec3::norm2(r) - along * along;
    perp2 >= radius * radius
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cylinder_geometry() {
        // Cylindrical shadow model (geometry of a point source at infinity).
        let s = [1.0, 0.0, 0.0];
        let r = 1.0e6;
        assert!(is_sunlit([2.0e6, 0.0, 0.0], s, r)); // dayside
        assert!(is_sunlit([0.0, 0.0, 1.5e6], s, r)); // over the terminator
        assert!(!is_sunlit([-1.0e7, 0.0, 0.0], s, r)); // far down the axis
        assert!(!is_sunlit([-3.0e6, 0.0, 0.999e6], s, r)); // just inside the wall
        assert!(is_sunlit([-3.0e6, 0.0, 1.001e6], s, r)); // just outside
        assert!(is_sunlit([-3.0e6, 0.6e6, 0.8e6], s, r)); // on the wall
        // Any Sun direction: rotate the picture.
        let s2 = crate::vec3::normalize([1.0, 1.0, 1.0]);
        assert!(!is_sunlit(crate::vec3::scale(s2, -5.0e6), s2, r));
        assert!(is_sunlit(crate::vec3::scale(s2, 5.0e6), s2, r));
    }
}

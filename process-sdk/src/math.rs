//! Elementary functions shared by the host engine and every process module.
//!
//! Why this exists: the same law must give bit-identical numbers whether it
//! runs natively (unit tests, benches, the host's own transport) or inside
//! the wasm sandbox. The platform maths library (glibc) and the `libm`
//! crate disagree in the last bit on a few per cent of arguments, so both
//! sides route every transcendental through `libm`. `sqrt` is the
//! exception: it is correctly rounded by IEEE 754 on every target and is a
//! single instruction on wasm32, whereas `libm::sqrt` is a software routine
//! that made a guest about three times slower in our measurements.

/// e^x (dimensionless in, dimensionless out), via `libm`.
#[inline]
pub fn exp(x: f64) -> f64 {
    libm::exp(x)
}

/// Natural logarithm ln(x) for x > 0, via `libm`.
#[inline]
pub fn ln(x: f64) -> f64 {
    libm::log(x)
}

/// ln(1 + x), accurate for small x, via `libm`.
#[inline]
pub fn ln_1p(x: f64) -> f64 {
    libm::log1p(x)
}

/// e^x - 1, accurate for small x, via `libm`.
#[inline]
pub fn exp_m1(x: f64) -> f64 {
    libm::expm1(x)
}

/// Sine of an angle in radians, via `libm`.
#[inline]
pub fn sin(x: f64) -> f64 {
    libm::sin(x)
}

/// Cosine of an angle in radians, via `libm`.
#[inline]
pub fn cos(x: f64) -> f64 {
    libm::cos(x)
}

/// Sine and cosine of an angle in radians, via `libm` (one call).
#[inline]
pub fn sin_cos(x: f64) -> (f64, f64) {
    libm::sincos(x)
}

/// Tangent of an angle in radians, via `libm`.
#[inline]
pub fn tan(x: f64) -> f64 {
    libm::tan(x)
}

/// Arc sine in radians, for x in [-1, 1], via `libm`.
#[inline]
pub fn asin(x: f64) -> f64 {
    libm::asin(x)
}

/// Arc cosine in radians, for x in [-1, 1], via `libm`.
#[inline]
pub fn acos(x: f64) -> f64 {
    libm::acos(x)
}

/// Four-quadrant arc tangent of y/x in radians, in (-pi, pi], via `libm`.
#[inline]
pub fn atan2(y: f64, x: f64) -> f64 {
    libm::atan2(y, x)
}

/// x raised to the power y, via `libm`.
#[inline]
pub fn pow(x: f64, y: f64) -> f64 {
    libm::pow(x, y)
}

/// Cube root, via `libm`.
#[inline]
pub fn cbrt(x: f64) -> f64 {
    libm::cbrt(x)
}

/// Complementary error function erfc(x), via `libm`.
#[inline]
pub fn erfc(x: f64) -> f64 {
    libm::erfc(x)
}

/// Square root: IEEE 754 correctly rounded on every target, so `f64::sqrt`
/// is already bit-identical between native and wasm32 (and fast on both).
#[inline]
pub fn sqrt(x: f64) -> f64 {
    x.sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn functions_agree_with_closed_forms() {
        // Identities that hold to a few ulp (textbook trigonometry).
        for i in 0..1000 {
            let x = -10.0 + 0.02 * i as f64;
            let (s, c) = sin_cos(x);
            assert_eq!(s, sin(x));
            assert_eq!(c, cos(x));
            assert!((s * s + c * c - 1.0).abs() < 4e-16);
            assert!((ln(exp(x)) - x).abs() < 1e-14 * x.abs().max(1.0));
        }
        assert_eq!(atan2(1.0, -1.0), 3.0 * core::f64::consts::FRAC_PI_4);
        assert_eq!(pow(2.0, 10.0), 1024.0);
        assert_eq!(sqrt(2.0), core::f64::consts::SQRT_2);
        // erfc(1) = 0.157299207050285 (Abramowitz & Stegun, table 7.1)
        assert!((erfc(1.0) - 0.157_299_207_050_285).abs() < 1e-15);
    }
}

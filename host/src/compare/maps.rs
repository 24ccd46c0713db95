//! The signed column difference maps of `compare`, judged cell by cell against the Monte Carlo
//! noise.
//!
//! Why this exists: a map of "variant minus reference" shows where a law changes the exosphere,
//! but a cell's difference means something only against the scatter between seeds. Every
//! variant runs with the same seeds (common random numbers), so each seed gives one paired
//! difference per cell; their mean is what the map shows, and the standard error of that mean
//! (sample standard deviation / sqrt(pairs), Student 1908, Biometrika 6, 1-25) says how far
//! the noise alone would move it. Cells whose |mean difference| is below two standard errors
//! are marked as within the noise (two standard errors: common practice, about the two-sided
//! 95 % level for many pairs). With one seed there is no scatter to estimate, and the map says
//! so instead of marking anything. The map is drawn on the diverging, zero-centred scale of
//! `exobound-products`.

use exobound_products::{CellMarks, ColourScale, MapPlot};

use super::stats::mean_and_se;
use crate::output::figures::{edges, transpose};

/// How many standard errors a difference must exceed to count as beyond the noise.
pub const NOISE_SE: f64 = 2.0;

/// The paired per-seed differences of one variant's column map against the reference's.
#[derive(Clone, Debug, PartialEq)]
pub struct DifferenceMap {
    /// Per cell, layout `[local time][latitude]`: the mean over seeds of
    /// 100 (B_s - A_s) / mean_s(A_s), in % of the reference's mean column; NaN where the
    /// reference's mean column is not positive or no seed has both values.
    pub mean: Vec<f64>,
    /// Per cell: the standard error of `mean` (%), NaN with fewer than two pairs.
    pub se: Vec<f64>,
    /// Seeds paired (the shorter of the two lists).
    pub seeds: usize,
}

/// The paired differences of `variant` against `reference` over `cells` cells: one column map
/// per seed in each (same seeds, same order; layout `[local time][latitude]`, atoms cm^-2).
/// Each seed's difference is scaled by the reference's mean over the seeds, so the mean
/// difference is exactly the difference of the mean maps in % of the reference's.
pub fn paired_difference(reference: &[&[f64]], variant: &[&[f64]], cells: usize) -> DifferenceMap {
    let seeds = reference.len().min(variant.len());
    let value = |m: &[f64], c: usize| m.get(c).copied().unwrap_or(f64::NAN);
    let mut mean = vec![f64::NAN; cells];
    let mut se = vec![f64::NAN; cells];
    for c in 0..cells {
        let pairs: Vec<(f64, f64)> = (0..seeds)
            .map(|s| (value(reference[s], c), value(variant[s], c)))
            .filter(|(a, b)| a.is_finite() && b.is_finite())
            .collect();
        if pairs.is_empty() {
            continue;
        }
        let a_mean = pairs.iter().map(|p| p.0).sum::<f64>() / pairs.len() as f64;
        if !(a_mean > 0.0) {
            continue;
        }
        let d: Vec<f64> = pairs.iter().map(|(a, b)| 100.0 * (b - a) / a_mean).collect();
        (mean[c], se[c]) = mean_and_se(&d);
    }
    DifferenceMap { mean, se, seeds }
}

impl DifferenceMap {
    /// Per cell, whether the difference is within the noise: |mean| < [`NOISE_SE`] standard
    /// errors; None with fewer than two seeds (no noise estimate). Cells without a standard
    /// error are not marked.
    pub fn within_noise(&self) -> Option<Vec<bool>> {
        (self.seeds >= 2).then(|| {
            self.mean
                .iter()
                .zip(&self.se)
                .map(|(m, s)| m.is_finite() && s.is_finite() && m.abs() < NOISE_SE * s)
                .collect()
        })
    }
}

/// The map of `diff` (`n_lt` local-time by `n_lat` latitude bins) of variant `name` against
/// `reference`: diverging scale, cells within the noise dotted, or a key note that one seed
/// gives no noise estimate.
pub fn difference_plot(
    name: &str,
    reference: &str,
    diff: &DifferenceMap,
    n_lt: usize,
    n_lat: usize,
) -> MapPlot {
    let n = diff.seeds;
    let marks = match diff.within_noise() {
        // [local time][latitude] to the plot's row-major [latitude][local time].
        Some(mask) => CellMarks {
            mask: (0..n_lat)
                .flat_map(|j| (0..n_lt).map(move |i| (i, j)))
                .map(|(i, j)| mask[i * n_lat + j])
                .collect(),
            label: format!(
                "within the noise: |difference| < 2 s.e. of the {n} paired per-seed differences"
            ),
        },
        None => CellMarks {
            mask: Vec::new(),
            label: format!(
                "{n} seed: no noise estimate, so no cell is judged (compare with 2 or more seeds)"
            ),
        },
    };
    MapPlot {
        title: format!(
            "Column of {name} relative to {reference}, mean of {n} paired seed{}",
            if n == 1 { "" } else { "s" }
        ),
        x_label: "local time (h)".into(),
        y_label: "latitude (deg)".into(),
        x_edges: edges(0.0, 24.0, n_lt),
        y_edges: edges(-90.0, 90.0, n_lat),
        values: transpose(&diff.mean, n_lt, n_lat),
        colour_label: format!("column difference (% of {reference})"),
        scale: ColourScale::Diverging,
        marks: Some(marks),
        x_log: false,
        y_log: false,
        x_ticks: Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0]),
        y_ticks: Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]),
        x_tick_labels: None,
        y_tick_labels: None,
        overlays: vec![],
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Three seeds, six cells (layout [local time][latitude], 3 x 2): per seed, the reference
    /// and variant maps of the worked example below.
    fn example() -> DifferenceMap {
        let reference: [[f64; 6]; 3] = [
            [100.0, 100.0, 100.0, 100.0, 0.0, 90.0],
            [100.0, 100.0, 100.0, 100.0, 0.0, 100.0],
            [100.0, 100.0, 100.0, 100.0, 0.0, 110.0],
        ];
        let variant: [[f64; 6]; 3] = [
            [101.0, 110.0, 102.2, 100.0, 5.0, 92.0],
            [99.0, 112.0, 102.4, 100.0, 5.0, 99.0],
            [103.0, 108.0, 102.0, 103.0, 5.0, 113.0],
        ];
        let r: Vec<&[f64]> = reference.iter().map(|m| m.as_slice()).collect();
        let v: Vec<&[f64]> = variant.iter().map(|m| m.as_slice()).collect();
        paired_difference(&r, &v, 6)
    }

    #[test]
    fn the_noise_mask_marks_exactly_the_cells_within_two_standard_errors() {
        // Worked by hand; s.e. = sample s.d. / sqrt(3) of the per-seed differences in % of
        // the reference's mean (Student 1908, Biometrika 6, 1-25), threshold 2 s.e.
        //   cell 0: d = 1, -1, 3      mean 1     s.d. 2        s.e. 1.1547  -> |1| < 2.309: marked
        //   cell 1: d = 10, 12, 8     mean 10    s.d. 2        s.e. 1.1547  -> not marked
        //   cell 2: d = 2.2, 2.4, 2.0 mean 2.2   s.d. 0.2      s.e. 0.11547 -> not marked
        //   cell 3: d = 0, 0, 3       mean 1     s.d. sqrt 3   s.e. 1       -> |1| < 2: marked
        //   cell 4: reference mean 0: no relative difference (NaN), not marked
        //   cell 5: A = 90, 100, 110 (mean 100), d = 2, -1, 3: mean 4/3, s.d. sqrt(13/3),
        //           s.e. 1.2019 -> |1.333| < 2.404: marked
        let d = example();
        let close = |a: f64, b: f64| (a - b).abs() < 1e-9;
        assert!(close(d.mean[0], 1.0) && close(d.se[0], 2.0 / 3f64.sqrt()), "{d:?}");
        assert!(close(d.mean[1], 10.0) && close(d.se[1], 2.0 / 3f64.sqrt()));
        assert!(close(d.mean[2], 2.2) && close(d.se[2], 0.2 / 3f64.sqrt()));
        assert!(close(d.mean[3], 1.0) && close(d.se[3], 1.0));
        assert!(d.mean[4].is_nan());
        assert!(close(d.mean[5], 4.0 / 3.0) && close(d.se[5], (13.0f64 / 9.0).sqrt()));
        assert_eq!(d.within_noise(), Some(vec![true, false, false, true, false, true]));
    }

    #[test]
    fn the_plot_is_diverging_transposed_and_says_when_one_seed_gives_no_estimate() {
        let d = example();
        let plot = difference_plot("b", "a", &d, 3, 2);
        assert_eq!(plot.scale, ColourScale::Diverging);
        // [local time][latitude] (3 x 2) -> row-major [latitude][local time].
        assert_eq!(plot.values[1], d.mean[2]);
        assert_eq!(plot.values[3], d.mean[1]);
        let marks = plot.marks.expect("marks");
        assert_eq!(marks.mask, vec![true, false, false, false, true, true]);
        let one = DifferenceMap { seeds: 1, ..d };
        assert_eq!(one.within_noise(), None);
        let marks = difference_plot("b", "a", &one, 3, 2).marks.expect("a key note");
        assert!(marks.mask.is_empty() && marks.label.contains("no noise estimate"));
    }
}

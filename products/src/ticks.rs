//! Where the tick marks of an axis or colour bar go and how their numbers are written, kept apart
//! from the drawing so that it can be tested on its own: round steps (1, 2, 2.5, 5 × 10ⁿ),
//! decades on logarithmic axes, and compact "2.5×10¹²" labels for very large or small values.

/// The ticks of one axis, in the axis's own coordinate (log10 of the value on a log axis).
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Lower end of the axis, in axis coordinates.
    pub lo: f64,
    /// Upper end of the axis, in axis coordinates.
    pub hi: f64,
    /// Labelled tick positions, in axis coordinates, ascending.
    pub ticks: Vec<f64>,
    /// The label of each tick.
    pub labels: Vec<String>,
    /// Unlabelled minor positions (log axes: 2…9 × 10ⁿ).
    pub minor: Vec<f64>,
}

impl Axis {
    /// A linear axis from `lo` to `hi`, with `explicit` ticks if given (those inside the range)
    /// or about `target` round ones.
    pub fn linear(lo: f64, hi: f64, explicit: Option<&[f64]>, target: usize) -> Self {
        let ticks: Vec<f64> = match explicit {
            Some(t) => t.iter().copied().filter(|&v| within(v, lo, hi)).collect(),
            None => round_ticks(lo, hi, target),
        };
        let step = typical_step(&ticks, hi - lo);
        let labels = ticks.iter().map(|&v| format_number(v, step)).collect();
        Self { lo, hi, ticks, labels, minor: Vec::new() }
    }

    /// A logarithmic axis; `lo` and `hi` are log10 of the value range. Decades are labelled
    /// 10ⁿ when at least two fall inside, otherwise round values are placed on the log scale.
    pub fn log10(lo: f64, hi: f64, target: usize) -> Self {
        let first = lo.ceil() as i32;
        let last = hi.floor() as i32;
        if last - first >= 1 {
            let count = (last - first + 1) as usize;
            let every = count.div_ceil(target.max(2)) as i32;
            let ticks: Vec<f64> = (first..=last).step_by(every as usize).map(f64::from).collect();
            let labels = ticks.iter().map(|&d| format!("10{}", superscript(d as i32))).collect();
            let mut minor = Vec::new();
            if every == 1 {
                for d in (lo.floor() as i32)..=(hi.ceil() as i32) {
                    for m in 2..=9 {
                        let p = f64::from(d) + f64::from(m).log10();
                        if within(p, lo, hi) {
                            minor.push(p);
                        }
                    }
                }
            }
            Self { lo, hi, ticks, labels, minor }
        } else {
            let values = round_ticks(10f64.powf(lo), 10f64.powf(hi), target.min(5));
            let values: Vec<f64> = values.into_iter().filter(|&v| v > 0.0).collect();
            let step = typical_step(&values, 10f64.powf(hi) - 10f64.powf(lo));
            let labels = values.iter().map(|&v| format_number(v, step)).collect();
            let ticks = values.iter().map(|v| v.log10()).collect();
            Self { lo, hi, ticks, labels, minor: Vec::new() }
        }
    }

    /// An axis from `lo` to `hi` (axis coordinates) with the given `ticks` (axis coordinates)
    /// written as `labels`; ticks outside the range are dropped with their labels.
    pub fn labelled(lo: f64, hi: f64, ticks: &[f64], labels: &[String]) -> Self {
        let (ticks, labels) = ticks
            .iter()
            .zip(labels)
            .filter(|(t, _)| within(**t, lo, hi))
            .map(|(t, l)| (*t, l.clone()))
            .unzip();
        Self { lo, hi, ticks, labels, minor: Vec::new() }
    }

    /// The label of the tick at `v` (empty if `v` is not a tick).
    pub fn label_at(&self, v: f64) -> String {
        let tol = 1e-9 * (self.hi - self.lo).abs().max(f64::MIN_POSITIVE);
        self.ticks
            .iter()
            .position(|&t| (t - v).abs() <= tol)
            .map(|i| self.labels[i].clone())
            .unwrap_or_default()
    }

    /// Fraction of the way from `lo` to `hi` at which `v` lies.
    pub fn fraction(&self, v: f64) -> f64 {
        (v - self.lo) / (self.hi - self.lo)
    }
}

/// True if `v` lies in [lo, hi] up to rounding.
fn within(v: f64, lo: f64, hi: f64) -> bool {
    let eps = 1e-9 * (hi - lo).abs();
    v >= lo - eps && v <= hi + eps
}

/// The spacing of the ticks (or the span, if fewer than two).
fn typical_step(ticks: &[f64], span: f64) -> f64 {
    let step = ticks.windows(2).map(|w| (w[1] - w[0]).abs()).fold(f64::INFINITY, f64::min);
    if step.is_finite() && step > 0.0 { step } else { span.abs().max(f64::MIN_POSITIVE) }
}

/// About `target` ticks at a round step (1, 2 or 5 × 10ⁿ) between `lo` and `hi`: the step whose
/// tick count is nearest `target`, the finer one on a tie.
pub fn round_ticks(lo: f64, hi: f64, target: usize) -> Vec<f64> {
    let span = hi - lo;
    if !span.is_finite() || span <= 0.0 {
        return vec![lo];
    }
    let target = target.max(2) as f64;
    let decade = 10f64.powf((span / target).log10().floor());
    let count = |step: f64| ((hi / step + 1e-9).floor() - (lo / step - 1e-9).ceil() + 1.0).max(0.0);
    let step = [1.0, 2.0, 5.0, 10.0, 20.0]
        .iter()
        .map(|m| m * decade)
        .min_by(|a, b| {
            let (da, db) = ((count(*a) - target).abs(), (count(*b) - target).abs());
            da.total_cmp(&db).then(a.total_cmp(b))
        })
        .unwrap_or(decade);
    let first = (lo / step - 1e-9).ceil() as i64;
    let last = (hi / step + 1e-9).floor() as i64;
    (first..=last)
        .map(|k| {
            let v = k as f64 * step;
            if v.abs() < step * 1e-9 { 0.0 } else { v }
        })
        .collect()
}

/// The fewest decimals (up to 6) that write every multiple of `step` exactly.
fn decimals_for(step: f64) -> usize {
    (0..=6)
        .find(|&d| {
            let scaled = step.abs() * 10f64.powi(d);
            (scaled - scaled.round()).abs() < 1e-6 * scaled.max(1.0)
        })
        .unwrap_or(6) as usize
}

/// `v` written for a tick label, with as many decimals as the tick `step` needs; values of
/// magnitude ≥ 10⁵ or < 10⁻³ are written as "m×10ⁿ"; negatives take a true minus sign.
pub fn format_number(v: f64, step: f64) -> String {
    if v == 0.0 {
        return "0".to_owned();
    }
    let mag = v.abs();
    if (1e-3..1e5).contains(&mag) {
        let decimals = decimals_for(step);
        return typographic_minus(format!("{v:.decimals$}"));
    }
    let exp = mag.log10().floor() as i32;
    let mantissa = v / 10f64.powi(exp);
    let decimals = decimals_for(step / 10f64.powi(exp)).min(3);
    let m = format!("{mantissa:.decimals$}");
    let m =
        if m.contains('.') { m.trim_end_matches('0').trim_end_matches('.').to_owned() } else { m };
    typographic_minus(format!("{m}×10{}", superscript(exp)))
}

/// A leading ASCII hyphen replaced by the minus sign (U+2212), which matches the digits' width.
fn typographic_minus(s: String) -> String {
    match s.strip_prefix('-') {
        Some(rest) => format!("−{rest}"),
        None => s,
    }
}

/// An integer in Unicode superscript digits (with a superscript minus).
pub fn superscript(n: i32) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::new();
    if n < 0 {
        s.push('⁻');
    }
    for c in n.unsigned_abs().to_string().chars() {
        s.push(DIGITS[c.to_digit(10).unwrap_or(0) as usize]);
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn round_ticks_cover_the_range_at_a_round_step() {
        assert_eq!(round_ticks(0.0, 24.0, 8), vec![0.0, 5.0, 10.0, 15.0, 20.0]);
        let lat: Vec<f64> = (-4..=4).map(|k| f64::from(k) * 20.0).collect();
        assert_eq!(round_ticks(-90.0, 90.0, 6), lat);
        assert_eq!(round_ticks(0.0, 1.0, 4), vec![0.0, 0.5, 1.0]);
        assert_eq!(round_ticks(0.0, 4.8e16, 6), vec![0.0, 1e16, 2e16, 3e16, 4e16]);
    }

    #[test]
    fn numbers_are_written_compactly() {
        assert_eq!(format_number(12.0, 6.0), "12");
        assert_eq!(format_number(0.25, 0.25), "0.25");
        assert_eq!(format_number(-0.5, 0.5), "−0.5");
        assert_eq!(format_number(-90.0, 30.0), "−90");
        assert_eq!(format_number(2.5e12, 5e11), "2.5×10¹²");
        assert_eq!(format_number(3e-7, 1e-7), "3×10⁻⁷");
        assert_eq!(superscript(-12), "⁻¹²");
    }

    #[test]
    fn log_axis_labels_decades() {
        let a = Axis::log10(9.5, 12.2, 8);
        assert_eq!(a.ticks, vec![10.0, 11.0, 12.0]);
        assert_eq!(a.labels, vec!["10¹⁰", "10¹¹", "10¹²"]);
        assert!(!a.minor.is_empty());
        // Under two decades: round values instead.
        let b = Axis::log10(2.0f64.log10(), 9.0f64.log10(), 8);
        assert!(b.ticks.len() >= 2 && b.labels.iter().all(|l| !l.contains('×')));
    }

    #[test]
    fn labelled_axes_keep_their_text_and_drop_ticks_outside() {
        let a = Axis::labelled(
            0.0,
            2.0,
            &[-0.5, 0.0, 1.0, 2.0],
            &["x".into(), "1e5".into(), "1e6".into(), "1e7".into()],
        );
        assert_eq!(a.ticks, vec![0.0, 1.0, 2.0]);
        assert_eq!(a.labels, vec!["1e5", "1e6", "1e7"]);
        assert_eq!(a.label_at(1.0), "1e6");
    }
}

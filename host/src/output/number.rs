//! The one way a float is written into a CSV table.
//!
//! Why this exists: every table exobound writes (a run's ledger, windows
//! and profiles, `observe`'s brightness, `compare`, `sweep`, `fit` and the
//! merged replica tables) must read back as numbers in any tool, pandas
//! included, without a per-file recipe. Rust's `{}` of an f64 writes
//! `31657796892973910000000000` for an atom count, which pandas cannot hold
//! in int64 and keeps as text; `{}` of `900.0` writes `900`, which pandas
//! reads as an integer column. This module writes every float
//!
//! * with the fewest significant digits that read back to the same f64
//!   (the shortest round-trip representation of Rust's `core::fmt`, after
//!   Steele & White 1990 and IEEE 754-2008 clause 5.12.2), so a value read
//!   back with `str::parse::<f64>` is the value computed;
//! * in plain decimal with a decimal point (`0.25`, `900.0`, `-87.5`) when
//!   `1e-4 <= |x| < 1e6` or `x` is zero, otherwise in exponent form
//!   (`3.165779689297391e25`, `2.5e-7`, `1e6`), so that a float column never
//!   looks like an integer column;
//! * `NaN` for a missing value and `inf` / `-inf` for infinities, which
//!   pandas (`read_csv`), numpy and Rust's `str::parse::<f64>` all read as
//!   the same float.
//!
//! Counts (step numbers, particles, hops) are integers and are written as
//! such by their writers; booleans are written `true` / `false`, which
//! pandas reads as bool. `docs/outputs.md` states the rule for users.

use std::fmt::Write as _;

/// Smallest magnitude written in plain decimal, dimensionless.
pub const PLAIN_MIN: f64 = 1e-4;
/// Magnitude from which numbers are written in exponent form, dimensionless.
pub const PLAIN_MAX: f64 = 1e6;

/// Append the CSV text of `x` (any unit; the column name carries it) to
/// `out`, in the style of this module's documentation.
pub fn push(out: &mut String, x: f64) {
    if x.is_nan() {
        out.push_str("NaN");
    } else if x.is_infinite() {
        out.push_str(if x > 0.0 { "inf" } else { "-inf" });
    } else if x == 0.0 || (PLAIN_MIN..PLAIN_MAX).contains(&x.abs()) {
        let start = out.len();
        let _ = write!(out, "{x}");
        if !out[start..].contains('.') {
            out.push_str(".0");
        }
    } else {
        let _ = write!(out, "{x:e}");
    }
}

/// The CSV text of `x` (any unit), as [`push`] writes it.
pub fn text(x: f64) -> String {
    let mut s = String::new();
    push(&mut s, x);
    s
}

/// Append `,` then the CSV text of each of `xs` (any unit) to `out`.
pub fn push_cells(out: &mut String, xs: &[f64]) {
    for &x in xs {
        out.push(',');
        push(out, x);
    }
}

/// One CSV row of floats (any unit) ending with a newline.
pub fn row(xs: &[f64]) -> String {
    let mut s = String::new();
    for (k, &x) in xs.iter().enumerate() {
        if k > 0 {
            s.push(',');
        }
        push(&mut s, x);
    }
    s.push('\n');
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_style_by_magnitude() {
        assert_eq!(text(3.165779689297391e25), "3.165779689297391e25");
        assert_eq!(text(900.0), "900.0");
        assert_eq!(text(-87.5), "-87.5");
        assert_eq!(text(0.0), "0.0");
        assert_eq!(text(-0.0), "-0.0");
        assert_eq!(text(1e-4), "0.0001");
        assert_eq!(text(9.9e-5), "9.9e-5");
        assert_eq!(text(999_999.5), "999999.5");
        assert_eq!(text(1e6), "1e6");
        assert_eq!(text(-2.5e-7), "-2.5e-7");
        assert_eq!(text(f64::NAN), "NaN");
        assert_eq!(text(f64::INFINITY), "inf");
        assert_eq!(text(f64::NEG_INFINITY), "-inf");
        assert_eq!(row(&[1.0, f64::NAN, 2e30]), "1.0,NaN,2e30\n");
        let mut s = String::from("7");
        push_cells(&mut s, &[0.5, 1e-9]);
        assert_eq!(s, "7,0.5,1e-9");
    }

    #[test]
    fn every_float_reads_back_exactly_and_never_as_an_integer() {
        // The round-trip property of the shortest representation (IEEE
        // 754-2008 clause 5.12.2; Rust core::fmt's Grisu/Ryu-style
        // shortest digits): parse(text(x)) == x, bit for bit, over
        // magnitudes from subnormal to the largest finite f64. A
        // deterministic xorshift walk over bit patterns, no clock.
        let mut state = 0x9E37_79B9_7F4A_7C15_u64;
        let mut checked = 0;
        for _ in 0..200_000 {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            let x = f64::from_bits(state);
            let t = text(x);
            let back: f64 = t.parse().unwrap_or_else(|e| panic!("`{t}`: {e}"));
            if x.is_nan() {
                assert!(back.is_nan() && t == "NaN");
                continue;
            }
            assert_eq!(back.to_bits(), x.to_bits(), "{x:e} written `{t}`");
            // A float cell always has a point, an exponent or a word, so
            // no reader takes a float column for integers.
            assert!(t.contains(['.', 'e']) || t.ends_with("inf"), "`{t}`");
            checked += 1;
        }
        assert!(checked > 190_000);
        for x in [f64::MAX, f64::MIN_POSITIVE, 5e-324, 1e300, 123456.789, 0.1 + 0.2] {
            assert_eq!(text(x).parse::<f64>().unwrap(), x);
        }
    }
}

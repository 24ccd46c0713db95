//! Table parameters (ABI 1.1): the declared shape of a table, the checks a
//! table must pass, and interpolation over its columns.
//!
//! Why this exists: laboratory results come as tables (a desorption
//! cross-section against temperature, a sticking coefficient against
//! temperature, a yield against energy), not as single numbers. A module
//! declares a table parameter in its manifest: named columns, each with its
//! unit and allowed range, limits on the number of rows, and a default
//! table. The first column is the abscissa and must strictly increase. A
//! scenario may replace the default (inline, or from a CSV file); the host
//! checks the table against the declaration with [`check_table`] before the
//! module runs, and the module checks it again in `exobound_init`.
//!
//! The value travels as columns of f64, in the declared column order and
//! in the declared units (there is no unit conversion at the boundary):
//! MessagePack `[[x0, x1, ...], [y0, y1, ...], ...]`.
//!
//! Interpolation ([`Curve`]) is linear, or log-linear (linear in ln y), in
//! the first column. Outside the tabulated range a curve never
//! extrapolates: [`Curve::clamped`] holds the end value, and
//! [`Curve::within`] refuses with an `OutsideValidity` error naming the
//! value and the range. The author chooses per call which one the law
//! needs. At a tabulated abscissa both return the tabulated value exactly.

use serde::{Deserialize, Serialize};

use crate::math;
use crate::roles::{ErrorCode, ProcessError};

/// `x` for a message: exponent form when |x| < 1e-3 or >= 1e6 (so a
/// cross-section reads `2e-20`, not twenty zeros), plain otherwise.
fn num(x: f64) -> String {
    if x != 0.0 && x.is_finite() && (x.abs() < 1e-3 || x.abs() >= 1e6) {
        format!("{x:e}")
    } else {
        format!("{x}")
    }
}

/// One column of a table parameter, as decoded from a manifest.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ColumnInfo {
    /// Column name, e.g. `temperature` (ASCII letters, digits, `_`, `-`).
    pub name: String,
    /// Unit of the column's values, e.g. `K`; empty for dimensionless.
    pub unit: String,
    /// Smallest allowed value, inclusive, in `unit`.
    pub min: f64,
    /// Largest allowed value, inclusive, in `unit`.
    pub max: f64,
}

impl ColumnInfo {
    /// The column as a CSV header cell writes it: `name [unit]`, or `name`
    /// for a dimensionless column.
    pub fn header(&self) -> String {
        if self.unit.is_empty() {
            self.name.clone()
        } else {
            format!("{} [{}]", self.name, self.unit)
        }
    }
}

/// The declared shape of a table parameter, as decoded from a manifest.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct TableInfo {
    /// The columns, in order. The first is the abscissa: strictly increasing.
    pub columns: Vec<ColumnInfo>,
    /// Fewest rows allowed (at least 1).
    pub min_rows: u32,
    /// Most rows allowed.
    pub max_rows: u32,
}

impl TableInfo {
    /// The header line a CSV file for this table starts with, e.g.
    /// `temperature [K],cross_section [cm^2]`.
    pub fn header(&self) -> String {
        self.columns.iter().map(ColumnInfo::header).collect::<Vec<_>>().join(",")
    }

    /// A sentence stating what is allowed, for error messages.
    pub fn allowed(&self) -> String {
        let cols: Vec<String> = self
            .columns
            .iter()
            .enumerate()
            .map(|(j, c)| {
                let order = if j == 0 { ", strictly increasing" } else { "" };
                format!("`{}` in [{}, {}]{order}", c.header(), num(c.min), num(c.max))
            })
            .collect();
        format!(
            "a table of {} to {} rows with the columns {}",
            self.min_rows,
            self.max_rows,
            cols.join(", ")
        )
    }
}

/// Where a table breaks its declaration: a 1-based data row and column
/// when the fault sits in one cell (or one row), and what is wrong.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct TableFault {
    /// Data row, from 1 (the header is not counted); `None` for a fault of
    /// the whole table (its column count).
    pub row: Option<usize>,
    /// Column, from 1; `None` for a fault of a whole row (a row too many).
    pub column: Option<usize>,
    /// What is wrong and what to change.
    pub message: String,
}

impl core::fmt::Display for TableFault {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match (self.row, self.column) {
            (Some(r), Some(c)) => write!(f, "row {r}, column {c}: {}", self.message),
            (Some(r), None) => write!(f, "row {r}: {}", self.message),
            (None, Some(c)) => write!(f, "column {c}: {}", self.message),
            (None, None) => f.write_str(&self.message),
        }
    }
}

/// Check `columns` (one `Vec` per column, in order) against `spec`: the
/// column count, equal column lengths, the row count, every value finite
/// and within its column's range, and the first column strictly
/// increasing. The first fault found is returned, scanning row by row.
pub fn check_table(spec: &TableInfo, columns: &[Vec<f64>]) -> Result<(), TableFault> {
    let fault = |row, column, message: String| Err(TableFault { row, column, message });
    if columns.len() != spec.columns.len() {
        return fault(
            None,
            None,
            format!(
                "the table has {} columns; this parameter takes {} (`{}`)",
                columns.len(),
                spec.columns.len(),
                spec.header()
            ),
        );
    }
    let rows = columns.first().map_or(0, Vec::len);
    if let Some((j, c)) = columns.iter().enumerate().find(|(_, c)| c.len() != rows) {
        return fault(
            Some(rows.min(c.len()) + 1),
            Some(j + 1),
            format!(
                "column `{}` has {} values but column `{}` has {rows}; every row needs a value \
                 in every column",
                spec.columns[j].name,
                c.len(),
                spec.columns[0].name
            ),
        );
    }
    let (lo, hi) = (spec.min_rows as usize, spec.max_rows as usize);
    if rows > hi {
        return fault(
            Some(hi + 1),
            None,
            format!("the table has {rows} rows; this parameter takes at most {hi}: remove rows"),
        );
    }
    for i in 0..rows {
        for (j, col) in spec.columns.iter().enumerate() {
            let x = columns[j][i];
            // Formatted only on a fault: this loop runs in every `exobound_init`.
            let at = || format!("`{}`", col.header());
            if !x.is_finite() {
                return fault(
                    Some(i + 1),
                    Some(j + 1),
                    format!("{} is {}; every value must be a finite number", at(), num(x)),
                );
            }
            if x < col.min || x > col.max {
                return fault(
                    Some(i + 1),
                    Some(j + 1),
                    format!(
                        "{} = {} is outside the column's allowed range [{}, {}] {}",
                        at(),
                        num(x),
                        num(col.min),
                        num(col.max),
                        if col.unit.is_empty() { "(dimensionless)" } else { &col.unit }
                    ),
                );
            }
        }
        if i > 0 && columns[0][i] <= columns[0][i - 1] {
            return fault(
                Some(i + 1),
                Some(1),
                format!(
                    "`{}` = {} does not increase on the row before ({}); sort the rows by `{}` \
                     and give each value once",
                    spec.columns[0].header(),
                    num(columns[0][i]),
                    num(columns[0][i - 1]),
                    spec.columns[0].name
                ),
            );
        }
    }
    if rows < lo {
        return fault(
            None,
            None,
            format!("the table has {rows} rows; this parameter takes at least {lo}: add rows"),
        );
    }
    Ok(())
}

/// A validated table parameter, borrowed from [`crate::Params`]: its
/// columns (in the declared units) and their names.
#[derive(Clone, Copy, Debug)]
pub struct TableRef<'a> {
    pub(crate) name: &'a str,
    pub(crate) spec: &'a TableInfo,
    pub(crate) columns: &'a [Vec<f64>],
}

impl<'a> TableRef<'a> {
    /// Number of rows.
    pub fn rows(&self) -> usize {
        self.columns.first().map_or(0, Vec::len)
    }

    /// The declared columns.
    pub fn spec(&self) -> &'a TableInfo {
        self.spec
    }

    /// The values of column `name`, in its declared unit.
    pub fn column(&self, name: &str) -> Result<&'a [f64], ProcessError> {
        match self.spec.columns.iter().position(|c| c.name == name) {
            Some(j) => Ok(&self.columns[j]),
            None => Err(ProcessError::new(
                ErrorCode::Law,
                format!(
                    "the law asked for column `{name}` of table `{}`, which declares only `{}`",
                    self.name,
                    self.spec.header()
                ),
            )),
        }
    }

    /// Linear interpolation of column `y` against the first column.
    pub fn linear(&self, y: &str) -> Result<Curve, ProcessError> {
        self.curve(y, Scale::Linear)
    }

    /// Log-linear interpolation (linear in ln y) of column `y`, whose values
    /// must all be > 0, against the first column.
    pub fn log_linear(&self, y: &str) -> Result<Curve, ProcessError> {
        self.curve(y, Scale::Log)
    }

    fn curve(&self, y: &str, scale: Scale) -> Result<Curve, ProcessError> {
        let ys = self.column(y)?.to_vec();
        let (Some(x), Some(xs)) = (self.spec.columns.first(), self.columns.first()) else {
            return Err(ProcessError::new(
                ErrorCode::Law,
                format!("table `{}` declares no columns", self.name),
            ));
        };
        let label = format!("`{}` of table `{}`", x.name, self.name);
        Curve::new(xs.clone(), ys, scale, label, x.unit.clone())
    }
}

/// How a curve interpolates between two rows.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Scale {
    /// y linear in x.
    Linear,
    /// ln y linear in x.
    Log,
}

/// A function y(x) tabulated at strictly increasing x, interpolated
/// linearly or log-linearly. Units are those of the columns it was built
/// from. It allocates only when built.
#[derive(Clone, Debug, PartialEq)]
pub struct Curve {
    x: Vec<f64>,
    y: Vec<f64>,
    /// ln y for a log-linear curve; empty for a linear one.
    ln_y: Vec<f64>,
    /// What x is, for messages, e.g. "`temperature` of table `cross_section`".
    label: String,
    /// Unit of x, for messages.
    unit: String,
}

impl Curve {
    /// Linear interpolation through the points (x\[i\], y\[i\]). `x` must be
    /// finite and strictly increasing, `y` finite, both of the same length
    /// of at least 1.
    pub fn linear(x: &[f64], y: &[f64]) -> Result<Curve, ProcessError> {
        Curve::new(x.to_vec(), y.to_vec(), Scale::Linear, "x".into(), String::new())
    }

    /// Log-linear interpolation: ln y is linear in x between the points, so
    /// a quantity that varies by decades (a cross-section, a rate) is
    /// interpolated as a local exponential. As [`Curve::linear`], and every
    /// y must be > 0.
    pub fn log_linear(x: &[f64], y: &[f64]) -> Result<Curve, ProcessError> {
        Curve::new(x.to_vec(), y.to_vec(), Scale::Log, "x".into(), String::new())
    }

    fn new(
        x: Vec<f64>,
        y: Vec<f64>,
        scale: Scale,
        label: String,
        unit: String,
    ) -> Result<Curve, ProcessError> {
        let bad = |m: String| Err(ProcessError::parameter(format!("{label}: {m}")));
        if x.is_empty() || x.len() != y.len() {
            return bad(format!(
                "a curve needs as many y values as x values, at least one ({} x, {} y)",
                x.len(),
                y.len()
            ));
        }
        for i in 0..x.len() {
            if !(x[i].is_finite() && y[i].is_finite()) {
                return bad(format!(
                    "row {}: ({}, {}) is not a pair of finite numbers",
                    i + 1,
                    num(x[i]),
                    num(y[i])
                ));
            }
            if i > 0 && x[i] <= x[i - 1] {
                return bad(format!(
                    "row {}: x = {} does not increase on the row before ({})",
                    i + 1,
                    num(x[i]),
                    num(x[i - 1])
                ));
            }
            if scale == Scale::Log && y[i] <= 0.0 {
                return bad(format!(
                    "row {}: y = {} is not > 0, so it has no logarithm; use linear \
                     interpolation, or give positive values",
                    i + 1,
                    num(y[i])
                ));
            }
        }
        let ln_y = match scale {
            Scale::Linear => Vec::new(),
            Scale::Log => y.iter().map(|&v| math::ln(v)).collect(),
        };
        Ok(Curve { x, y, ln_y, label, unit })
    }

    /// The tabulated range of x: (first, last), in the unit of x.
    pub fn range(&self) -> (f64, f64) {
        (self.x[0], self.x[self.x.len() - 1])
    }

    /// y at `x`, holding the end value outside the tabulated range (below
    /// the first x it is the first y, above the last x the last y); never
    /// extrapolates. NaN gives NaN.
    pub fn clamped(&self, x: f64) -> f64 {
        let (lo, hi) = self.range();
        if x.is_nan() {
            f64::NAN
        } else if x <= lo {
            self.y[0]
        } else if x >= hi {
            self.y[self.y.len() - 1]
        } else {
            self.inside(x)
        }
    }

    /// y at `x`, or an `OutsideValidity` error naming `x` and the range when
    /// `x` lies outside the tabulated range (or is NaN).
    pub fn within(&self, x: f64) -> Result<f64, ProcessError> {
        let (lo, hi) = self.range();
        if x >= lo && x <= hi {
            Ok(self.clamped(x))
        } else {
            Err(ProcessError::outside_validity(format!(
                "{} = {} {} lies outside the tabulated range [{}, {}] {}; the table does not \
                 reach it: extend the table to cover it",
                self.label,
                num(x),
                self.unit,
                num(lo),
                num(hi),
                self.unit
            )))
        }
    }

    /// Interpolate at `x`, strictly inside the range.
    fn inside(&self, x: f64) -> f64 {
        // j: the number of tabulated x <= x, so x[j-1] <= x < x[j].
        let j = self.x.partition_point(|&v| v <= x);
        if self.x[j - 1] == x {
            return self.y[j - 1];
        }
        let f = (x - self.x[j - 1]) / (self.x[j] - self.x[j - 1]);
        if self.ln_y.is_empty() {
            self.y[j - 1] + f * (self.y[j] - self.y[j - 1])
        } else {
            math::exp(self.ln_y[j - 1] + f * (self.ln_y[j] - self.ln_y[j - 1]))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> TableInfo {
        TableInfo {
            columns: vec![
                ColumnInfo { name: "temperature".into(), unit: "K".into(), min: 1.0, max: 1000.0 },
                ColumnInfo { name: "yield".into(), unit: "".into(), min: 0.0, max: 1.0 },
            ],
            min_rows: 2,
            max_rows: 4,
        }
    }

    #[test]
    fn a_good_table_passes_and_each_fault_names_row_and_column() {
        let s = spec();
        assert_eq!(check_table(&s, &[vec![100.0, 200.0], vec![0.1, 0.2]]), Ok(()));
        let f = check_table(&s, &[vec![100.0, 90.0], vec![0.1, 0.2]]).unwrap_err();
        assert_eq!((f.row, f.column), (Some(2), Some(1)));
        assert!(f.message.contains("does not increase"), "{f}");
        let f = check_table(&s, &[vec![100.0, 200.0], vec![0.1, f64::NAN]]).unwrap_err();
        assert_eq!((f.row, f.column), (Some(2), Some(2)));
        assert!(f.message.contains("finite"), "{f}");
        let f = check_table(&s, &[vec![100.0, 200.0], vec![0.1, 2.0]]).unwrap_err();
        assert!(f.message.contains("[0, 1]"), "{f}");
        let f = check_table(&s, &[vec![1.0, 2.0, 3.0, 4.0, 5.0], vec![0.0; 5]]).unwrap_err();
        assert_eq!((f.row, f.column), (Some(5), None));
        let f = check_table(&s, &[vec![1.0], vec![0.0]]).unwrap_err();
        assert!(f.message.contains("at least 2"), "{f}");
        let f = check_table(&s, &[vec![1.0, 2.0]]).unwrap_err();
        assert!(f.message.contains("temperature [K],yield"), "{f}");
        let f = check_table(&s, &[vec![1.0, 2.0], vec![0.0]]).unwrap_err();
        assert_eq!((f.row, f.column), (Some(2), Some(2)));
    }

    #[test]
    fn linear_interpolation_at_and_between_the_points() {
        let c = Curve::linear(&[100.0, 200.0, 400.0], &[1.0, 3.0, 2.0]).unwrap();
        // At the points: the tabulated values exactly.
        assert_eq!([c.clamped(100.0), c.clamped(200.0), c.clamped(400.0)], [1.0, 3.0, 2.0]);
        // Between, by hand: 1 + (150-100)/(200-100) * (3-1) = 2;
        // 3 + (300-200)/(400-200) * (2-3) = 2.5.
        assert_eq!(c.clamped(150.0), 2.0);
        assert_eq!(c.clamped(300.0), 2.5);
        // Outside: held at the ends by `clamped`, refused by `within`.
        assert_eq!((c.clamped(50.0), c.clamped(1e9)), (1.0, 2.0));
        let e = c.within(401.0).unwrap_err();
        assert_eq!(e.code, ErrorCode::OutsideValidity);
        assert!(e.message.contains("401") && e.message.contains("[100, 400]"), "{e}");
        assert!(c.within(f64::NAN).is_err() && c.clamped(f64::NAN).is_nan());
        assert_eq!(c.within(400.0), Ok(2.0));
    }

    #[test]
    fn log_linear_interpolation_is_geometric_between_points() {
        let c = Curve::log_linear(&[0.0, 10.0], &[1.0e-20, 1.0e-18]).unwrap();
        // Halfway in x is the geometric mean: sqrt(1e-20 * 1e-18) = 1e-19.
        assert!((c.clamped(5.0) / 1.0e-19 - 1.0).abs() < 1e-14, "{}", c.clamped(5.0));
        // A quarter of the way: 1e-20 * 100^0.25 = 1e-20 * 10^0.5.
        let q = 1.0e-20 * 10f64.sqrt();
        assert!((c.clamped(2.5) / q - 1.0).abs() < 1e-14);
        assert_eq!(c.clamped(10.0), 1.0e-18);
        let e = Curve::log_linear(&[0.0, 1.0], &[1.0, 0.0]).unwrap_err();
        assert!(e.message.contains("row 2") && e.message.contains("> 0"), "{e}");
    }

    #[test]
    fn malformed_curves_are_refused() {
        assert!(Curve::linear(&[], &[]).is_err());
        assert!(Curve::linear(&[1.0, 2.0], &[1.0]).is_err());
        assert!(Curve::linear(&[1.0, 1.0], &[1.0, 2.0]).is_err());
        assert!(Curve::linear(&[1.0, f64::INFINITY], &[1.0, 2.0]).is_err());
        let one = Curve::linear(&[5.0], &[7.0]).unwrap();
        assert_eq!((one.clamped(0.0), one.clamped(9.0)), (7.0, 7.0));
        assert_eq!(one.within(5.0), Ok(7.0));
    }
}

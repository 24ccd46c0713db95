//! The CSV tables of replicas, merged cell by cell into the mean with the
//! standard error between replicas.
//!
//! Why this exists: `ledger.csv`, `windows.csv` and the two profiles of a
//! merged directory must read like a run's (same files, same columns, same
//! number format) while carrying the between-replica uncertainty. Each
//! table has key columns (step, time, window bounds, bin centres) that must
//! agree in every replica, or the replicas do not share a grid and are
//! refused; every other cell becomes the mean over the replicas. Where a
//! run's table already has an error column (the profiles'
//! `column_error_cm-2`), it is replaced by the between-replica standard
//! error; elsewhere an error column is appended after the run's columns, so
//! readers that go by position or name still find every run column.

use std::path::{Path, PathBuf};

use super::merge::mean_and_standard_error;
use crate::output::number;

/// One cell of a merged table.
#[derive(Clone, Debug, PartialEq)]
pub enum Cell {
    /// Text kept as read (a key, or a value every replica wrote the same).
    Text(String),
    /// A computed number, written with the fewest digits that read back exactly.
    Number(f64),
}

impl Cell {
    /// The cell as a number (NaN if it does not read as one).
    pub fn value(&self) -> f64 {
        match self {
            Cell::Text(s) => s.parse().unwrap_or(f64::NAN),
            Cell::Number(x) => *x,
        }
    }
}

/// A CSV table: a header and rows of cells.
#[derive(Clone, Debug, PartialEq)]
pub struct Table {
    /// Column names, each ending with its unit (`_atoms`, `_s`, `_cm-2`, ...).
    pub header: Vec<String>,
    /// Rows, each as long as the header.
    pub rows: Vec<Vec<Cell>>,
}

impl Table {
    /// Read a CSV table written by a run: a header, then rows of numbers
    /// (any that `str::parse::<f64>` reads, `NaN` included) and the words
    /// `true` / `false`. A row of the wrong length, an empty line or any
    /// other cell is an error naming the file, line and column, never
    /// skipped or averaged as NaN.
    pub fn read(path: &Path) -> Result<Table, String> {
        let text = std::fs::read_to_string(path)
            .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
        let mut lines = text.lines();
        let header: Vec<String> = lines
            .next()
            .ok_or_else(|| format!("`{}` is empty; rerun that replica", path.display()))?
            .split(',')
            .map(str::to_string)
            .collect();
        let mut rows = Vec::new();
        for (k, line) in lines.enumerate() {
            let row: Vec<Cell> = line.split(',').map(|c| Cell::Text(c.to_string())).collect();
            if row.len() != header.len() {
                return Err(format!(
                    "`{}` line {}: {} cells under {} columns; the file is damaged: rerun that \
                     replica",
                    path.display(),
                    k + 2,
                    row.len(),
                    header.len()
                ));
            }
            for (c, cell) in row.iter().enumerate() {
                let Cell::Text(t) = cell else { continue };
                if t != "true" && t != "false" && t.parse::<f64>().is_err() {
                    return Err(format!(
                        "`{}` line {}, column `{}`: `{t}` is not a number; the file is damaged: \
                         rerun that replica",
                        path.display(),
                        k + 2,
                        header[c]
                    ));
                }
            }
            rows.push(row);
        }
        Ok(Table { header, rows })
    }

    /// Index of column `name`.
    pub fn position(&self, name: &str) -> Option<usize> {
        self.header.iter().position(|h| h == name)
    }

    /// Column `name` as numbers.
    pub fn column(&self, name: &str) -> Option<Vec<f64>> {
        let k = self.position(name)?;
        Some(self.rows.iter().map(|r| r[k].value()).collect())
    }

    /// The table as CSV text, computed numbers written by
    /// [`crate::output::number`], as the run's own tables are.
    pub fn to_csv(&self) -> String {
        let mut s = self.header.join(",");
        s.push('\n');
        for row in &self.rows {
            for (k, c) in row.iter().enumerate() {
                if k > 0 {
                    s.push(',');
                }
                match c {
                    Cell::Text(t) => s.push_str(t),
                    Cell::Number(x) => number::push(&mut s, *x),
                }
            }
            s.push('\n');
        }
        s
    }
}

/// Where a table's standard errors go.
#[derive(Clone, Copy, Debug)]
pub enum Errors {
    /// One error column per averaged column, appended after the run's
    /// columns, except for the columns listed (recomputed, not averaged).
    Append {
        /// Averaged columns that get no error column.
        skip: &'static [&'static str],
    },
    /// The table's own error column `error` holds the standard error of
    /// column `value` between replicas.
    Replace {
        /// The averaged column.
        value: &'static str,
        /// Its error column.
        error: &'static str,
    },
}

/// How one table of a run is merged.
#[derive(Clone, Copy, Debug)]
pub struct Spec {
    /// Path inside the output directory.
    pub file: &'static str,
    /// Columns that must be equal in every replica (the table's grid).
    pub keys: &'static [&'static str],
    /// Where the standard errors go.
    pub errors: Errors,
}

/// The tables of a run's `csv` product and how each is merged.
pub const SPECS: [Spec; 4] = [
    Spec {
        file: "ledger.csv",
        keys: &["step", "time_s"],
        errors: Errors::Append { skip: &["closure_error"] },
    },
    Spec {
        file: "windows.csv",
        keys: &[
            "start_s",
            "end_s",
            "spin_up",
            "subsolar_longitude_deg",
            "heliocentric_distance_au",
            "true_anomaly_deg",
            "subsolar_latitude_deg",
            "solar_longitude_deg",
            "lunar_phase",
        ],
        errors: Errors::Append { skip: &[] },
    },
    Spec {
        file: "profiles/equator_local_time.csv",
        keys: &["local_time_h"],
        errors: Errors::Replace { value: "column_cm-2", error: "column_error_cm-2" },
    },
    Spec {
        file: "profiles/latitude.csv",
        keys: &["latitude_deg"],
        errors: Errors::Replace { value: "column_cm-2", error: "column_error_cm-2" },
    },
];

/// Unit suffixes of run table columns (`docs/outputs.md`), longest first.
const UNIT_SUFFIXES: [&str; 7] = ["_atoms", "_cm-2", "_cm-3", "_deg", "_au", "_h", "_s"];

/// The name of the error column of `column`: `_error` before its unit
/// suffix, as in the profiles' `column_error_cm-2` (`escaped_atoms` gives
/// `escaped_error_atoms`; a column without a unit suffix gets `_error`).
pub fn error_column_name(column: &str) -> String {
    for suffix in UNIT_SUFFIXES {
        if let Some(stem) = column.strip_suffix(suffix).filter(|s| !s.is_empty()) {
            return format!("{stem}_error{suffix}");
        }
    }
    format!("{column}_error")
}

/// Merge one table of every replica (`inputs`, in replica order, with the
/// path each was read from): keys checked equal, other cells averaged,
/// standard errors placed as `spec.errors` says.
pub fn merge_table(spec: &Spec, inputs: &[(PathBuf, Table)]) -> Result<Table, String> {
    let (path0, first) = &inputs[0];
    for (path, t) in &inputs[1..] {
        if t.header != first.header {
            return Err(format!(
                "`{}` has the columns {} but `{}` has {}; the replicas do not share a grid: \
                 rerun them with one scenario and one exobound version",
                path.display(),
                t.header.join(","),
                path0.display(),
                first.header.join(",")
            ));
        }
        if t.rows.len() != first.rows.len() {
            return Err(format!(
                "`{}` has {} rows but `{}` has {}; the replicas do not share a time grid: rerun \
                 them with one scenario",
                path.display(),
                t.rows.len(),
                path0.display(),
                first.rows.len()
            ));
        }
    }
    let ncol = first.header.len();
    let is_key: Vec<bool> = first.header.iter().map(|h| spec.keys.contains(&h.as_str())).collect();
    for key in spec.keys {
        if first.position(key).is_none() {
            return Err(format!(
                "`{}` has no column `{key}`; it was not written by this exobound version: rerun \
                 the replicas with it",
                path0.display()
            ));
        }
    }
    let (replace_value, replace_error) = match spec.errors {
        Errors::Replace { value, error } => {
            let v = first.position(value);
            let e = first.position(error);
            match (v, e) {
                (Some(v), Some(e)) => (Some(v), Some(e)),
                _ => {
                    return Err(format!(
                        "`{}` lacks `{value}` or `{error}`; rerun the replicas with this \
                         exobound version",
                        path0.display()
                    ));
                }
            }
        }
        Errors::Append { .. } => (None, None),
    };
    let appended: Vec<usize> = match spec.errors {
        Errors::Append { skip } => {
            (0..ncol).filter(|&c| !is_key[c] && !skip.contains(&first.header[c].as_str())).collect()
        }
        Errors::Replace { .. } => Vec::new(),
    };
    let mut header = first.header.clone();
    header.extend(appended.iter().map(|&c| error_column_name(&first.header[c])));
    let mut rows = Vec::with_capacity(first.rows.len());
    for r in 0..first.rows.len() {
        let mut row: Vec<Cell> = Vec::with_capacity(header.len());
        let mut errors: Vec<f64> = vec![f64::NAN; ncol];
        for c in 0..ncol {
            let cells: Vec<&Cell> = inputs.iter().map(|(_, t)| &t.rows[r][c]).collect();
            let same = cells.iter().all(|x| *x == cells[0]);
            if is_key[c] {
                if !same {
                    let k = cells.iter().position(|x| *x != cells[0]).unwrap_or(0);
                    return Err(format!(
                        "`{}` row {}, column `{}`: {} where `{}` has {}; the replicas do not \
                         share a grid: rerun them with one scenario",
                        inputs[k].0.display(),
                        r + 1,
                        first.header[c],
                        text(cells[k]),
                        path0.display(),
                        text(cells[0])
                    ));
                }
                row.push(cells[0].clone());
                continue;
            }
            if Some(c) == replace_error {
                row.push(Cell::Text(String::new())); // filled below
                continue;
            }
            if same {
                // Every replica wrote the same value: no scatter, unless it
                // is missing (NaN). A number is the mean, a float (the mean
                // of integer counts such as `particles` is written as one
                // in every row, so the column has one type); a float
                // written by a run reads back and is written again to the
                // same text (`output::number`).
                let x = cells[0].value();
                errors[c] = if x.is_nan() { f64::NAN } else { 0.0 };
                let kept = match cells[0] {
                    Cell::Text(t) if x.is_nan() && t != "NaN" => cells[0].clone(),
                    _ => Cell::Number(x),
                };
                row.push(kept);
                continue;
            }
            let mut xs = Vec::with_capacity(cells.len());
            for (k, cell) in cells.iter().enumerate() {
                let x = cell.value();
                if x.is_nan() && !matches!(cell, Cell::Text(t) if t == "NaN") {
                    return Err(format!(
                        "`{}` row {}, column `{}`: `{}` is not a number; the file is damaged: \
                         rerun that replica",
                        inputs[k].0.display(),
                        r + 1,
                        first.header[c],
                        text(cell)
                    ));
                }
                xs.push(x);
            }
            let (mean, se) = mean_and_standard_error(&xs);
            row.push(Cell::Number(mean));
            errors[c] = se;
        }
        if let (Some(v), Some(e)) = (replace_value, replace_error) {
            row[e] = Cell::Number(errors[v]);
        }
        for &c in &appended {
            row.push(Cell::Number(errors[c]));
        }
        rows.push(row);
    }
    Ok(Table { header, rows })
}

fn text(c: &Cell) -> String {
    match c {
        Cell::Text(t) => format!("`{t}`"),
        Cell::Number(x) => format!("`{}`", number::text(*x)),
    }
}

/// The scale a run divides a ledger imbalance by: the largest of the
/// atoms supplied, the stock before and the stock after (atoms), as in
/// `LedgerRow::close` and `Ledger::cumulative_closure`.
pub fn closure_scale(supplied: f64, before: f64, after: f64) -> f64 {
    supplied.abs().max(before.abs()).max(after.abs()).max(f64::MIN_POSITIVE)
}

/// Set `closure_error` of every row of the merged `ledger.csv` to the
/// closure of its mean flows and stocks. The imbalance (supplied - change
/// in stock - every outflow, atoms) is linear in the ledger, so the mean
/// row's imbalance is the mean of the replicas' imbalances, each recovered
/// from its own `closure_error` times its scale ([`closure_scale`]); this
/// needs no list of the outflow columns, which differ between scenarios
/// and versions. The stock before the first step is the initial stock
/// (`initial[r]` for replica `r`, their mean for the merge; atoms).
/// Returns the largest magnitude, dimensionless.
pub fn close_ledger(
    merged: &mut Table,
    inputs: &[(PathBuf, Table)],
    initial: &[f64],
) -> Result<f64, String> {
    let col = |t: &Table, p: &Path, name: &str| {
        t.position(name)
            .ok_or_else(|| format!("`{}` has no column `{name}`; rerun that replica", p.display()))
    };
    let names = ["supplied_from_bulk_atoms", "in_flight_atoms", "adsorbed_atoms", "closure_error"];
    let mut cols = Vec::with_capacity(inputs.len());
    for (p, t) in inputs {
        let c: Vec<usize> = names.iter().map(|n| col(t, p, n)).collect::<Result<_, _>>()?;
        cols.push(c);
    }
    let (p0, _) = &inputs[0];
    let m: Vec<usize> = names.iter().map(|n| col(merged, p0, n)).collect::<Result<_, _>>()?;
    let stock =
        |t: &Table, c: &[usize], k: usize| t.rows[k][c[1]].value() + t.rows[k][c[2]].value();
    let (mut before, mut worst) = (mean_and_standard_error(initial).0, 0.0f64);
    let mut imbalances = vec![0.0; inputs.len()];
    for k in 0..merged.rows.len() {
        for (r, ((_, t), c)) in inputs.iter().zip(&cols).enumerate() {
            let b = if k == 0 { initial[r] } else { stock(t, c, k - 1) };
            let scale = closure_scale(t.rows[k][c[0]].value(), b, stock(t, c, k));
            imbalances[r] = t.rows[k][c[3]].value() * scale;
        }
        let after = stock(merged, &m, k);
        let scale = closure_scale(merged.rows[k][m[0]].value(), before, after);
        let closure = mean_and_standard_error(&imbalances).0 / scale;
        worst = worst.max(closure.abs());
        merged.rows[k][m[3]] = Cell::Number(closure);
        before = after;
    }
    Ok(worst)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn table(text: &str) -> Table {
        let mut lines = text.lines();
        let header = lines.next().unwrap().split(',').map(str::to_string).collect();
        let rows =
            lines.map(|l| l.split(',').map(|c| Cell::Text(c.to_string())).collect()).collect();
        Table { header, rows }
    }

    #[test]
    fn a_damaged_table_is_refused_naming_file_line_and_column() {
        let dir = std::env::temp_dir().join(format!("exobound-table-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("windows.csv");
        let good = "start_s,spin_up,content_atoms\n0.0,true,3.1e25\n900.0,false,NaN\n";
        std::fs::write(&p, good).unwrap();
        let t = Table::read(&p).unwrap();
        assert_eq!(t.rows[1][1], Cell::Text("false".into()));
        assert_eq!(t.column("content_atoms").unwrap()[0], 3.1e25);
        std::fs::write(&p, "start_s,spin_up,content_atoms\n0.0,true,3.1e25\n900.0,false,\n")
            .unwrap();
        let e = Table::read(&p).unwrap_err();
        assert!(e.contains("windows.csv` line 3, column `content_atoms`"), "{e}");
        std::fs::write(&p, format!("{good}\n")).unwrap();
        assert!(Table::read(&p).unwrap_err().contains("line 4"));
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn error_columns_go_before_the_unit() {
        assert_eq!(error_column_name("escaped_atoms"), "escaped_error_atoms");
        assert_eq!(error_column_name("peak_local_time_h"), "peak_local_time_error_h");
        assert_eq!(
            error_column_name("dayside_near_surface_density_cm-3"),
            "dayside_near_surface_density_error_cm-3"
        );
        assert_eq!(error_column_name("latitude_cos_power_n"), "latitude_cos_power_n_error");
        assert_eq!(error_column_name("hops"), "hops_error");
    }

    #[test]
    fn cells_average_keys_stay_and_errors_are_appended() {
        let a = table(
            "start_s,end_s,spin_up,subsolar_longitude_deg,heliocentric_distance_au,true_anomaly_deg,subsolar_latitude_deg,solar_longitude_deg,lunar_phase,x_atoms\n0,10,true,1,1,NaN,0,NaN,0.25,2\n",
        );
        let b = table(
            "start_s,end_s,spin_up,subsolar_longitude_deg,heliocentric_distance_au,true_anomaly_deg,subsolar_latitude_deg,solar_longitude_deg,lunar_phase,x_atoms\n0,10,true,1,1,NaN,0,NaN,0.25,4\n",
        );
        let c = table(
            "start_s,end_s,spin_up,subsolar_longitude_deg,heliocentric_distance_au,true_anomaly_deg,subsolar_latitude_deg,solar_longitude_deg,lunar_phase,x_atoms\n0,10,true,1,1,NaN,0,NaN,0.25,9\n",
        );
        let inputs: Vec<(PathBuf, Table)> = [a, b, c]
            .into_iter()
            .enumerate()
            .map(|(k, t)| (PathBuf::from(format!("r{k}")), t))
            .collect();
        let m = merge_table(&SPECS[1], &inputs).unwrap();
        assert_eq!(m.header.last().unwrap(), "x_error_atoms");
        // mean 5, sample variance ((9 + 1 + 16) / 2 = 13), s.e. sqrt(13 / 3).
        assert_eq!(m.rows[0][9], Cell::Number(5.0));
        assert_eq!(m.rows[0][10], Cell::Number((13.0f64 / 3.0).sqrt()));
        assert_eq!(m.rows[0][2], Cell::Text("true".into()));
        // The orbit columns are keys: kept as written, NaN included, and
        // given no error column.
        assert_eq!(m.rows[0][5], Cell::Text("NaN".into()));
        assert_eq!(m.rows[0][8], Cell::Text("0.25".into()));
        assert_eq!(m.header.len(), 11);
    }

    #[test]
    fn a_differing_key_is_refused_naming_the_file() {
        let a = table("local_time_h,column_cm-2,column_error_cm-2\n0.5,1,NaN\n");
        let b = table("local_time_h,column_cm-2,column_error_cm-2\n1.5,3,NaN\n");
        let inputs = vec![(PathBuf::from("r0/p.csv"), a), (PathBuf::from("r1/p.csv"), b)];
        let e = merge_table(&SPECS[2], &inputs).unwrap_err();
        assert!(e.contains("`r1/p.csv` row 1") && e.contains("local_time_h"), "{e}");
        assert!(e.contains("rerun"), "{e}");
    }

    #[test]
    fn the_merged_ledger_closes_whatever_its_outflow_columns() {
        // `roulette_atoms` is an outflow that `close_ledger` is not told
        // about; each replica's closure_error includes it (row imbalances
        // by hand: A: 10 - (105 - 100) - 3 - 2 = 0 and 4.2 - (109 - 105)
        // - 1 + 1 = 0.2 atoms; B: 0 and 2 - (105 - 110) - 4 - 3 = 0).
        let head = "step,time_s,supplied_from_bulk_atoms,escaped_atoms,roulette_atoms,\
                    in_flight_atoms,adsorbed_atoms,closure_error\n";
        let a = table(&format!("{head}0,1,10,3,2,5,100,0\n1,2,4.2,1,-1,6,103,{}\n", 0.2 / 109.0));
        let b = table(&format!("{head}0,1,12,2,0,8,102,0\n1,2,2,4,3,3,102,0\n"));
        let inputs = vec![(PathBuf::from("a"), a), (PathBuf::from("b"), b)];
        let mut m = merge_table(&SPECS[0], &inputs).unwrap();
        let worst = close_ledger(&mut m, &inputs, &[100.0, 100.0]).unwrap();
        let c = m.position("closure_error").unwrap();
        // Mean row 0 closes exactly; mean row 1 has imbalance 0.1 atoms over
        // a scale of max(3.1, 107.5, 107) = 107.5 atoms.
        assert_eq!(m.rows[0][c].value(), 0.0);
        assert!((m.rows[1][c].value() - 0.1 / 107.5).abs() < 1e-15, "{:?}", m.rows[1][c]);
        assert_eq!(worst, m.rows[1][c].value().abs());
    }

    #[test]
    fn the_profile_error_column_holds_the_between_replica_error() {
        let a = table("latitude_deg,column_cm-2,column_error_cm-2\n5.0,1.0,0.1\n");
        let b = table("latitude_deg,column_cm-2,column_error_cm-2\n5.0,3.0,0.2\n");
        let inputs = vec![(PathBuf::from("a"), a), (PathBuf::from("b"), b)];
        let m = merge_table(&SPECS[3], &inputs).unwrap();
        assert_eq!(m.header, vec!["latitude_deg", "column_cm-2", "column_error_cm-2"]);
        assert_eq!(m.rows[0][1], Cell::Number(2.0));
        // s = sqrt(2), s.e. = s / sqrt(2) = 1.
        assert_eq!(m.rows[0][2], Cell::Number(1.0));
        assert_eq!(m.to_csv(), "latitude_deg,column_cm-2,column_error_cm-2\n5.0,2.0,1.0\n");
    }
}

//! Tables given for a module's table parameters: inline in the scenario,
//! or from a CSV file.
//!
//! Why this exists: laboratory results come as tables, and a modeller must
//! be able to hand a module the lab's own table without rebuilding it. The
//! module declares the columns (names, units, ranges), the row limits and
//! that the first column strictly increases; this module reads what the
//! scenario gives and checks it against that declaration before any module
//! code runs. Every refusal names the file, the row and the column, and
//! says what to change. There is no unit conversion: a column is given in
//! the unit the module declares, and the header says so.
//!
//! The two forms, in a process's `[processes.parameters]` table:
//!
//! ```toml
//! cross_section = { columns = ["temperature [K]", "cross_section [cm^2]"],
//!                   rows = [[100, 2.0e-20], [300, 3.5e-20]] }
//! cross_section = { file = "psd-table.csv" }
//! ```
//!
//! The CSV layout is our own: lines starting with `#` and blank lines are
//! skipped; the first other line is the header, one cell per declared
//! column in declared order, each `name [unit]` (`name` alone, `name []`
//! or `name [1]` for a dimensionless column); then one row per line,
//! comma-separated numbers. Cells are not quoted.

use std::path::{Path, PathBuf};

use exobound_sdk::table::{ColumnInfo, TableInfo, check_table};
use serde::Serialize;

use super::quantity::normalise_unit;

/// The table a run used for one table parameter, as provenance records it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct TableUse {
    /// The parameter's name.
    pub parameter: String,
    /// `scenario` (given inline), `file` (a CSV file) or `module default`
    /// (the module's own default, covered by the module's digest).
    pub origin: String,
    /// The CSV file as resolved, for `file`.
    pub file: Option<String>,
    /// SHA-256 of the CSV file, lowercase hex, for `file`.
    pub sha256: Option<String>,
    /// The columns and their units, as a CSV header: `name [unit],...`.
    pub header: String,
    /// The values, one array per column, each in its column's unit.
    pub columns: Vec<Vec<f64>>,
}

/// A table as given, before it is passed to the module.
#[derive(Clone, Debug, PartialEq)]
pub struct Given {
    /// One `Vec` per declared column, in the declared units.
    pub columns: Vec<Vec<f64>>,
    /// How provenance records it.
    pub record: TableUse,
}

/// Read the value given for table parameter `name` (declared as `spec`).
/// `dir` resolves a relative CSV path (the scenario's directory; `None`
/// for the built-in demo, which resolves against the working directory).
/// The error completes "<scenario>: <key>: ".
pub fn given(
    name: &str,
    spec: &TableInfo,
    value: &toml::Value,
    dir: Option<&Path>,
) -> Result<Given, String> {
    let form = "give `{ file = \"TABLE.csv\" }` or `{ columns = [...], rows = [[...], ...] }`";
    let toml::Value::Table(t) = value else {
        return Err(format!(
            "`{value}` is not a table; this parameter takes {}: {form}, with the header `{}`",
            spec.allowed(),
            spec.header()
        ));
    };
    if let Some(k) = t.keys().find(|k| !["file", "columns", "rows"].contains(&k.as_str())) {
        return Err(format!("unknown key `{k}` in a table; {form}"));
    }
    match (t.get("file"), t.get("columns"), t.get("rows")) {
        (Some(f), None, None) => {
            let Some(rel) = f.as_str() else {
                return Err(format!("`file = {f}` is not a path; write file = \"TABLE.csv\""));
            };
            let path = match dir {
                Some(d) => d.join(rel),
                None => PathBuf::from(rel),
            };
            from_file(name, spec, &path)
        }
        (None, Some(c), Some(r)) => inline(name, spec, c, r),
        (Some(_), _, _) => {
            Err(format!("give either `file` or `columns` and `rows`, not both; {form}"))
        }
        _ => Err(format!(
            "an inline table needs both `columns` (the header, e.g. [{}]) and `rows`; {form}",
            spec.columns
                .iter()
                .map(|c| format!("\"{}\"", c.header()))
                .collect::<Vec<_>>()
                .join(", ")
        )),
    }
}

/// Read and check the CSV file at `path`.
pub fn from_file(name: &str, spec: &TableInfo, path: &Path) -> Result<Given, String> {
    let shown = path.display().to_string();
    let bytes = std::fs::read(path).map_err(|e| {
        format!(
            "cannot read the table file `{shown}`: {e} (paths are relative to the scenario file)"
        )
    })?;
    let text = std::str::from_utf8(&bytes)
        .map_err(|_| format!("`{shown}`: the table file is not UTF-8 text"))?;
    let columns = parse_csv(text, &shown, spec)?;
    let record = TableUse {
        parameter: name.to_string(),
        origin: "file".into(),
        file: Some(shown),
        sha256: Some(crate::runtime::module::sha256_hex(&bytes)),
        header: spec.header(),
        columns: columns.clone(),
    };
    Ok(Given { columns, record })
}

/// Parse a CSV table's `text` (from `file`, named in errors) against `spec`.
pub fn parse_csv(text: &str, file: &str, spec: &TableInfo) -> Result<Vec<Vec<f64>>, String> {
    let mut lines = text
        .lines()
        .enumerate()
        .map(|(i, l)| (i + 1, l.trim()))
        .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
    let Some((hl, header)) = lines.next() else {
        return Err(format!(
            "`{file}`: the table file holds no header; its first line must read `{}`",
            spec.header()
        ));
    };
    let cells: Vec<&str> = header.split(',').map(str::trim).collect();
    check_header(&cells, spec).map_err(|m| format!("`{file}` line {hl} (the header), {m}"))?;
    let mut columns = vec![Vec::new(); spec.columns.len()];
    let mut line_of_row = Vec::new();
    for (ln, l) in lines {
        let row = line_of_row.len() + 1;
        let at = format!("`{file}` line {ln} (row {row})");
        let cells: Vec<&str> = l.split(',').map(str::trim).collect();
        if cells.len() != spec.columns.len() {
            return Err(format!(
                "{at}: {} comma-separated cells, but the header has {} (`{}`); give one \
                 number per column",
                cells.len(),
                spec.columns.len(),
                spec.header()
            ));
        }
        for (j, cell) in cells.iter().enumerate() {
            let x = number(cell).map_err(|m| {
                format!("{at}, column {} (`{}`): {m}", j + 1, spec.columns[j].header())
            })?;
            columns[j].push(x);
        }
        line_of_row.push(ln);
    }
    check_table(spec, &columns).map_err(|f| {
        let place = match f.row {
            Some(r) if r <= line_of_row.len() => format!(" line {} (row {r})", line_of_row[r - 1]),
            Some(r) => format!(" row {r}"),
            None => String::new(),
        };
        let column = f
            .column
            .map(|c| format!(", column {c} (`{}`)", spec.columns[c - 1].header()))
            .unwrap_or_default();
        format!("`{file}`{place}{column}: {}", f.message)
    })?;
    Ok(columns)
}

/// Read and check an inline table: `columns` (the header cells) and `rows`.
fn inline(
    name: &str,
    spec: &TableInfo,
    header: &toml::Value,
    rows: &toml::Value,
) -> Result<Given, String> {
    let cells: Option<Vec<&str>> =
        header.as_array().and_then(|a| a.iter().map(toml::Value::as_str).collect());
    let Some(cells) = cells else {
        return Err(format!(
            "`columns = {header}` must be an array of strings, the header: [{}]",
            quoted_header(spec)
        ));
    };
    check_header(&cells, spec).map_err(|m| format!("`columns`, {m}"))?;
    let Some(rows) = rows.as_array() else {
        return Err(format!("`rows = {rows}` must be an array of rows, e.g. [[1, 2], [3, 4]]"));
    };
    let mut columns = vec![Vec::new(); spec.columns.len()];
    for (i, row) in rows.iter().enumerate() {
        let at = format!("rows[{i}] (row {})", i + 1);
        let Some(cells) = row.as_array().filter(|c| c.len() == spec.columns.len()) else {
            return Err(format!(
                "{at} is `{row}`; each row is an array of {} numbers (`{}`)",
                spec.columns.len(),
                spec.header()
            ));
        };
        for (j, cell) in cells.iter().enumerate() {
            let x = match cell {
                toml::Value::Float(x) => *x,
                toml::Value::Integer(k) => *k as f64,
                other => {
                    return Err(format!(
                        "{at}, column {} (`{}`): `{other}` is not a number",
                        j + 1,
                        spec.columns[j].header()
                    ));
                }
            };
            columns[j].push(x);
        }
    }
    check_table(spec, &columns).map_err(|f| {
        let place = match f.row {
            Some(r) => format!("rows[{}] (row {r})", r - 1),
            None => "the table".to_string(),
        };
        let column = f
            .column
            .map(|c| format!(", column {c} (`{}`)", spec.columns[c - 1].header()))
            .unwrap_or_default();
        format!("{place}{column}: {}", f.message)
    })?;
    let record = TableUse {
        parameter: name.to_string(),
        origin: "scenario".into(),
        file: None,
        sha256: None,
        header: spec.header(),
        columns: columns.clone(),
    };
    Ok(Given { columns, record })
}

/// The module's default table, as provenance records it.
pub fn default_use(name: &str, spec: &TableInfo, columns: &[Vec<f64>]) -> TableUse {
    TableUse {
        parameter: name.to_string(),
        origin: "module default".into(),
        file: None,
        sha256: None,
        header: spec.header(),
        columns: columns.to_vec(),
    }
}

fn quoted_header(spec: &TableInfo) -> String {
    spec.columns.iter().map(|c| format!("\"{}\"", c.header())).collect::<Vec<_>>().join(", ")
}

/// Check header cells against the declared columns: count, names, order,
/// units. The error completes "<where>, ".
fn check_header(cells: &[&str], spec: &TableInfo) -> Result<(), String> {
    let want = spec.header();
    if cells.len() != spec.columns.len() {
        return Err(format!(
            "{} columns `{}`: this module's table has {}; the header must read `{want}`",
            cells.len(),
            cells.join(","),
            spec.columns.len()
        ));
    }
    for (j, (cell, col)) in cells.iter().zip(&spec.columns).enumerate() {
        let at = format!("column {}", j + 1);
        let Some((name, unit)) = split_header_cell(cell) else {
            return Err(format!(
                "{at}: `{cell}` is not `name [unit]`; the header must read `{want}`"
            ));
        };
        if name != col.name {
            let elsewhere = spec.columns.iter().position(|c| c.name == name);
            let hint = match elsewhere {
                Some(k) => format!(" (`{name}` is column {}: the columns are out of order)", k + 1),
                None => String::new(),
            };
            return Err(format!(
                "{at} (`{cell}`): expected the column `{}` here{hint}; the header must read `{want}`",
                col.name
            ));
        }
        if !same_unit(&unit, col) {
            let shown = if unit.is_empty() { "no unit" } else { unit.as_str() };
            return Err(format!(
                "{at} (`{}`): the values are in `{shown}`, but the module takes `{}`; give the \
                 column in {} and write `{}` (no conversion is made)",
                col.name,
                unit_name(&col.unit),
                unit_name(&col.unit),
                col.header()
            ));
        }
    }
    Ok(())
}

/// `name [unit]` -> (name, normalised unit); `name` alone has no unit.
fn split_header_cell(cell: &str) -> Option<(String, String)> {
    match cell.split_once('[') {
        None => {
            (!cell.is_empty() && !cell.contains(']')).then(|| (cell.to_string(), String::new()))
        }
        Some((name, rest)) => {
            let unit = rest.strip_suffix(']')?;
            if unit.contains(['[', ']']) {
                return None;
            }
            Some((name.trim().to_string(), normalise_unit(unit)))
        }
    }
}

fn same_unit(given: &str, col: &ColumnInfo) -> bool {
    let want = normalise_unit(&col.unit);
    let dimensionless = |u: &str| u.is_empty() || u == "1";
    given == want || (dimensionless(given) && dimensionless(&want))
}

fn unit_name(u: &str) -> &str {
    if u.is_empty() { "dimensionless" } else { u }
}

/// A CSV cell as a finite number.
fn number(cell: &str) -> Result<f64, String> {
    match cell.parse::<f64>() {
        Ok(x) if x.is_finite() => Ok(x),
        Ok(x) => Err(format!("`{cell}` is {x}; every value must be a finite number")),
        Err(_) if cell.is_empty() => Err("the cell is empty; give a number".to_string()),
        Err(_) => Err(format!("`{cell}` is not a number")),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn spec() -> TableInfo {
        TableInfo {
            columns: vec![
                ColumnInfo { name: "temperature".into(), unit: "K".into(), min: 0.0, max: 1e4 },
                ColumnInfo { name: "yield".into(), unit: "".into(), min: 0.0, max: 1.0 },
            ],
            min_rows: 2,
            max_rows: 3,
        }
    }

    #[test]
    fn csv_with_comments_and_units_is_read_by_column() {
        let t = "# lab run 7\n\ntemperature [K], yield []\n100,0.5\n# a note\n200, 0.25\n";
        assert_eq!(
            parse_csv(t, "t.csv", &spec()).unwrap(),
            vec![vec![100.0, 200.0], vec![0.5, 0.25]]
        );
        // A dimensionless column may be written bare or as [1].
        assert!(parse_csv("temperature [K],yield\n1,0\n2,0\n", "t.csv", &spec()).is_ok());
        assert!(parse_csv("temperature [ K ],yield [1]\n1,0\n2,0\n", "t.csv", &spec()).is_ok());
    }

    #[test]
    fn csv_faults_name_line_row_and_column() {
        let bad = |t: &str| parse_csv(t, "t.csv", &spec()).unwrap_err();
        let e = bad("temperature [C],yield\n1,0\n2,0\n");
        assert!(e.contains("line 1 (the header), column 1") && e.contains("`K`"), "{e}");
        let e = bad("yield,temperature [K]\n1,0\n2,0\n");
        assert!(e.contains("out of order"), "{e}");
        let e = bad("# c\ntemperature [K],yield\n1,0\n2,nan\n");
        assert!(e.contains("line 4 (row 2), column 2 (`yield`)") && e.contains("finite"), "{e}");
        let e = bad("temperature [K],yield\n2,0\n1,0\n");
        assert!(e.contains("line 3 (row 2), column 1 (`temperature [K]`)"), "{e}");
        let e = bad("temperature [K],yield\n1,0\n2,0\n3,0\n4,0\n");
        assert!(e.contains("line 5 (row 4)") && e.contains("at most 3"), "{e}");
        let e = bad("temperature [K],yield\n1,0,3\n");
        assert!(e.contains("line 2 (row 1)") && e.contains("3 comma-separated"), "{e}");
        let e = bad("temperature [K],yield\n1,x\n");
        assert!(e.contains("column 2") && e.contains("`x` is not a number"), "{e}");
        let e = bad("# only a comment\n");
        assert!(e.contains("no header") && e.contains("temperature [K],yield"), "{e}");
    }
}

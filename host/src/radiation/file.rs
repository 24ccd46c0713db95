//! g-factor tables: the values, and the CSV file a user supplies them in.
//!
//! Why this exists: the g-factor of a resonance line against heliocentric
//! radial velocity is data (measured solar spectra, or a published table),
//! and a modeller must be able to give their own, to the engine (scenario
//! key `species.g_factor_table`) and to `observe` (a view's
//! `g_factor_table`). The layout is our own:
//!
//! - comment lines start with `#`; blank lines are skipped;
//! - the first other line is the header. Either one total column
//!   `radial_velocity_km_s,g_photons_per_s_per_atom` (g summed over the
//!   species' lines), or one column per line,
//!   `radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_D1_photons_per_s_per_atom`
//!   (`g_<LINE>_photons_per_s_per_atom`, the line names of the species, in
//!   any order; every line of the species once);
//! - then one row per velocity, velocities strictly increasing, g >= 0,
//!   given at 1 AU. A table whose velocities are all >= 0 is read as
//!   symmetric: it is looked up at |v|.
//!
//! Errors name the file, the line and the column.

use std::path::Path;

/// The first column's name (radial velocity, km s^-1).
pub const VELOCITY_COLUMN: &str = "radial_velocity_km_s";

/// The header of a table with one total column.
pub const TOTAL_HEADER: &str = "radial_velocity_km_s,g_photons_per_s_per_atom";

/// The name of the total column (g summed over the lines, photons s^-1 atom^-1).
pub const TOTAL_COLUMN: &str = "g_photons_per_s_per_atom";

/// The column name of line `line` in a per-line table (photons s^-1 atom^-1).
pub fn line_column_name(line: &str) -> String {
    format!("g_{line}_photons_per_s_per_atom")
}

/// One column of g at 1 AU.
#[derive(Clone, Debug, PartialEq)]
pub struct Column {
    /// The resonance line it belongs to, or `None` for the total over the lines.
    pub line: Option<String>,
    /// g at 1 AU at each tabulated velocity, photons s^-1 atom^-1.
    pub g_1au: Vec<f64>,
}

/// g at 1 AU against heliocentric radial velocity, for one or more lines.
#[derive(Clone, Debug, PartialEq)]
pub struct GFactorTable {
    /// Heliocentric radial velocities, km s^-1, strictly increasing.
    pub velocity_km_s: Vec<f64>,
    /// The g columns, each as long as `velocity_km_s`.
    pub columns: Vec<Column>,
    /// Where the table came from: the built-in table's name and sources,
    /// or the file's path.
    pub origin: String,
    /// SHA-256 of the file it was read from, hex (`None` if built in).
    pub sha256: Option<String>,
}

impl GFactorTable {
    /// Whether the table gives non-negative velocities only, and is read at |v|.
    pub fn symmetric(&self) -> bool {
        self.velocity_km_s[0] >= 0.0
    }

    /// The velocity (km s^-1) at which the table is looked up for `v_km_s`
    /// (km s^-1): |v| for a symmetric table, else v.
    pub fn lookup_velocity(&self, v_km_s: f64) -> f64 {
        if self.symmetric() { v_km_s.abs() } else { v_km_s }
    }

    /// g at 1 AU of column `k` at radial velocity `v_km_s` (km s^-1),
    /// photons s^-1 atom^-1: linear interpolation between rows; the end
    /// value beyond the first or last row.
    pub fn g_1au(&self, k: usize, v_km_s: f64) -> f64 {
        let (vs, gs) = (&self.velocity_km_s, &self.columns[k].g_1au);
        let v = self.lookup_velocity(v_km_s);
        let n = vs.len();
        if n == 1 || !(v > vs[0]) {
            return gs[0];
        }
        if v >= vs[n - 1] {
            return gs[n - 1];
        }
        let j = vs.partition_point(|&x| x <= v).clamp(1, n - 1);
        let f = (v - vs[j - 1]) / (vs[j] - vs[j - 1]);
        gs[j - 1] + f * (gs[j] - gs[j - 1])
    }

    /// Parse a table file's text; `file` names it in errors and in `origin`.
    pub fn parse(text: &str, file: &str) -> Result<GFactorTable, String> {
        let mut rows = text
            .lines()
            .enumerate()
            .map(|(i, l)| (i + 1, l.trim()))
            .filter(|(_, l)| !l.is_empty() && !l.starts_with('#'));
        let Some((hl, header)) = rows.next() else {
            return Err(format!(
                "`{file}`: empty g-factor table; it starts with the header `{TOTAL_HEADER}`, \
                 or one column per line, e.g. `{VELOCITY_COLUMN},{},{}`",
                line_column_name("D2"),
                line_column_name("D1")
            ));
        };
        let names: Vec<&str> = header.split(',').map(str::trim).collect();
        if names[0] != VELOCITY_COLUMN || names.len() < 2 {
            return Err(format!(
                "`{file}` line {hl}, column 1: the header is `{}`; a g-factor table starts \
                 with `{TOTAL_HEADER}` (velocity in km/s, g at 1 AU in photons s^-1 atom^-1), \
                 or gives one column per line, e.g. `{VELOCITY_COLUMN},{},{}`",
                names.join(","),
                line_column_name("D2"),
                line_column_name("D1")
            ));
        }
        let mut columns = Vec::new();
        for (k, name) in names.iter().enumerate().skip(1) {
            let line = if *name == TOTAL_COLUMN {
                None
            } else if let Some(l) = name
                .strip_prefix("g_")
                .and_then(|s| s.strip_suffix("_photons_per_s_per_atom"))
                .filter(|l| !l.is_empty())
            {
                Some(l.to_string())
            } else {
                return Err(format!(
                    "`{file}` line {hl}, column {}: `{name}` is not a g-factor column; use \
                     `{TOTAL_COLUMN}` (the total over the lines) or `{}` (one line)",
                    k + 1,
                    line_column_name("LINE")
                ));
            };
            let dup = columns.iter().any(|c: &Column| match (&c.line, &line) {
                (None, None) => true,
                (Some(a), Some(b)) => a.eq_ignore_ascii_case(b),
                _ => false,
            });
            if dup {
                return Err(format!(
                    "`{file}` line {hl}, column {}: `{name}` appears twice",
                    k + 1
                ));
            }
            columns.push(Column { line, g_1au: Vec::new() });
        }
        let has_total = columns.iter().any(|c| c.line.is_none());
        if has_total && columns.len() > 1 {
            return Err(format!(
                "`{file}` line {hl}: give either one total column `{TOTAL_COLUMN}` or one \
                 column per line, not both"
            ));
        }
        let mut velocity_km_s: Vec<f64> = Vec::new();
        for (ln, l) in rows {
            let cells: Vec<&str> = l.split(',').map(str::trim).collect();
            if cells.len() != names.len() {
                return Err(format!(
                    "`{file}` line {ln}: expected {} comma-separated numbers (as the header), \
                     found {} in `{l}`",
                    names.len(),
                    cells.len()
                ));
            }
            let mut nums = Vec::with_capacity(cells.len());
            for (k, s) in cells.iter().enumerate() {
                let Some(x) = s.parse::<f64>().ok().filter(|x| x.is_finite()) else {
                    return Err(format!(
                        "`{file}` line {ln}, column {} (`{}`): `{s}` is not a finite number",
                        k + 1,
                        names[k]
                    ));
                };
                nums.push(x);
            }
            let v = nums[0];
            if let Some(&last) = velocity_km_s.last()
                && v <= last
            {
                return Err(format!(
                    "`{file}` line {ln}, column 1 (`{VELOCITY_COLUMN}`): velocities must \
                     increase ({v} after {last})"
                ));
            }
            for (k, &g) in nums.iter().enumerate().skip(1) {
                if g < 0.0 {
                    return Err(format!(
                        "`{file}` line {ln}, column {} (`{}`): a g-factor cannot be negative \
                         ({g})",
                        k + 1,
                        names[k]
                    ));
                }
                columns[k - 1].g_1au.push(g);
            }
            velocity_km_s.push(v);
        }
        if velocity_km_s.is_empty() {
            return Err(format!("`{file}`: the g-factor table has no rows"));
        }
        Ok(GFactorTable { velocity_km_s, columns, origin: format!("file {file}"), sha256: None })
    }

    /// Read a table file; `origin` records its path and SHA-256 digest.
    pub fn read(path: &Path) -> Result<GFactorTable, String> {
        let bytes = std::fs::read(path)
            .map_err(|e| format!("cannot read the g-factor table `{}`: {e}", path.display()))?;
        let text = String::from_utf8(bytes.clone())
            .map_err(|_| format!("`{}`: the g-factor table is not UTF-8 text", path.display()))?;
        let mut t = GFactorTable::parse(&text, &path.display().to_string())?;
        let digest = crate::runtime::module::sha256_hex(&bytes);
        t.origin = format!("file {} (sha256 {digest})", path.display());
        t.sha256 = Some(digest);
        Ok(t)
    }

    /// The table in the file layout above, with `origin` as a comment:
    /// [`GFactorTable::parse`] reads it back to the same values.
    pub fn to_text(&self) -> String {
        let mut s = String::new();
        for l in self.origin.lines() {
            s.push_str(&format!("# {l}\n"));
        }
        s.push_str("# g at 1 AU; velocities in km/s, positive away from the Sun\n");
        s.push_str(VELOCITY_COLUMN);
        for c in &self.columns {
            s.push(',');
            match &c.line {
                None => s.push_str(TOTAL_COLUMN),
                Some(l) => s.push_str(&line_column_name(l)),
            }
        }
        s.push('\n');
        for (j, v) in self.velocity_km_s.iter().enumerate() {
            s.push_str(&format!("{v:?}"));
            for c in &self.columns {
                s.push_str(&format!(",{:?}", c.g_1au[j]));
            }
            s.push('\n');
        }
        s
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn total_tables_parse_and_interpolate() {
        let t = GFactorTable::parse(
            "# made up for the test\nradial_velocity_km_s, g_photons_per_s_per_atom\n\
             -10,2\n0,1\n10,3\n",
            "t.csv",
        )
        .unwrap();
        assert_eq!(t.columns.len(), 1);
        assert!(t.columns[0].line.is_none() && !t.symmetric());
        // Linear interpolation between rows (definition).
        assert!((t.g_1au(0, 5.0) - 2.0).abs() < 1e-12);
        assert!((t.g_1au(0, -5.0) - 1.5).abs() < 1e-12);
        // Beyond the rows: the end values (stated behaviour).
        assert_eq!((t.g_1au(0, 11.0), t.g_1au(0, -40.0)), (3.0, 2.0));
        // A table of v >= 0 is read at |v|.
        let s = GFactorTable::parse(&format!("{TOTAL_HEADER}\n0,1\n10,3\n"), "s.csv").unwrap();
        assert!(s.symmetric());
        assert_eq!(s.g_1au(0, -7.0), s.g_1au(0, 7.0));
    }

    #[test]
    fn per_line_tables_parse_and_round_trip() {
        let text = "radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_D1_photons_per_s_per_atom\n\
                    0,0.5,0.25\n10,5,2.5\n";
        let t = GFactorTable::parse(text, "l.csv").unwrap();
        assert_eq!(t.columns.len(), 2);
        assert_eq!(t.columns[0].line.as_deref(), Some("D2"));
        assert_eq!(t.columns[1].line.as_deref(), Some("D1"));
        assert!((t.g_1au(1, 4.0) - 1.15).abs() < 1e-12);
        let back = GFactorTable::parse(&t.to_text(), "l.csv").unwrap();
        assert_eq!(back.velocity_km_s, t.velocity_km_s);
        assert_eq!(back.columns, t.columns);
    }

    #[test]
    fn bad_files_are_refused_with_file_line_and_column() {
        let e = GFactorTable::parse("v,g\n0,1\n", "t.csv").unwrap_err();
        assert!(e.contains("`t.csv` line 1, column 1") && e.contains(TOTAL_HEADER), "{e}");
        let e = GFactorTable::parse(&format!("{TOTAL_HEADER}\n0,1\n0,2\n"), "t.csv").unwrap_err();
        assert!(e.contains("line 3, column 1") && e.contains("increase"), "{e}");
        let e = GFactorTable::parse(&format!("{TOTAL_HEADER}\n0,x\n"), "t.csv").unwrap_err();
        assert!(e.contains("line 2, column 2") && e.contains(TOTAL_COLUMN), "{e}");
        let e = GFactorTable::parse(&format!("{TOTAL_HEADER}\n0,-1\n"), "t.csv").unwrap_err();
        assert!(e.contains("line 2, column 2") && e.contains("negative"), "{e}");
        let e = GFactorTable::parse(&format!("{TOTAL_HEADER}\n0,1,2\n"), "t.csv").unwrap_err();
        assert!(e.contains("line 2") && e.contains("expected 2"), "{e}");
        let e = GFactorTable::parse(
            "radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_D2x\n0,1,1\n",
            "t.csv",
        )
        .unwrap_err();
        assert!(e.contains("line 1, column 3") && e.contains("g_D2x"), "{e}");
        let e = GFactorTable::parse(
            "radial_velocity_km_s,g_D2_photons_per_s_per_atom,g_d2_photons_per_s_per_atom\n",
            "t.csv",
        )
        .unwrap_err();
        assert!(e.contains("column 3") && e.contains("twice"), "{e}");
        let e = GFactorTable::parse(&format!("# c\n{TOTAL_HEADER}\n"), "t.csv").unwrap_err();
        assert!(e.contains("no rows"), "{e}");
        assert!(GFactorTable::parse("", "t.csv").unwrap_err().contains("empty"));
    }

    #[test]
    fn read_records_the_digest() {
        let dir = std::env::temp_dir().join(format!("exobound-gft-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("g.csv");
        let text = format!("{TOTAL_HEADER}\n0,1\n");
        std::fs::write(&p, &text).unwrap();
        let t = GFactorTable::read(&p).unwrap();
        // SHA-256 of the file's bytes (FIPS 180-4), as the module digests are.
        let want = crate::runtime::module::sha256_hex(text.as_bytes());
        assert_eq!(t.sha256.as_deref(), Some(want.as_str()));
        assert!(t.origin.contains(&want) && t.origin.contains("g.csv"));
        std::fs::remove_dir_all(&dir).unwrap();
        assert!(GFactorTable::read(&p).unwrap_err().contains("cannot read"));
    }
}

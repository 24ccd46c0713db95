//! The typed result of a run: its summary, its profiles and its column map.
//!
//! Why this exists: `compare`, `sweep`, `fit` and the command line all
//! judge runs by the same numbers. A finished run hands them a
//! [`RunResult`] directly; a run finished earlier (a sweep point run on a
//! cluster node, say) is read back from its directory through the same
//! types by [`RunResult::read`], which refuses a malformed file with its
//! name and line instead of dropping what it cannot parse. The summary
//! measures that the commands compare, sweep and fit are listed once, in
//! [`MEASURES`], with their units.

use std::path::Path;

use super::fields::Fields;
use super::summary::Summary;

/// A profile: (bin centre, column) pairs with the column's standard error.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Profile {
    /// Bin centres, in the profile's coordinate unit (h of local time or deg of latitude).
    pub coordinate: Vec<f64>,
    /// Column, atoms cm^-2.
    pub column: Vec<f64>,
    /// Its standard error from the window-to-window scatter, atoms cm^-2 (NaN if unknown).
    pub error: Vec<f64>,
}

impl Profile {
    /// (coordinate, column) pairs.
    pub fn pairs(&self) -> Vec<(f64, f64)> {
        self.coordinate.iter().copied().zip(self.column.iter().copied()).collect()
    }

    /// The column at `x` by linear interpolation between bin centres, atoms
    /// cm^-2; `period` (24 h for local time) wraps the coordinate, otherwise
    /// the end values are held.
    pub fn at(&self, x: f64, period: Option<f64>) -> f64 {
        interpolate(&self.pairs(), x, period)
    }

    /// The standard error at `x`, interpolated like [`Profile::at`], atoms cm^-2.
    pub fn error_at(&self, x: f64, period: Option<f64>) -> f64 {
        let p: Vec<(f64, f64)> =
            self.coordinate.iter().copied().zip(self.error.iter().copied()).collect();
        interpolate(&p, x, period)
    }
}

/// Linear interpolation in a profile of (bin centre, value); `period`
/// wraps the coordinate, otherwise the ends are held.
fn interpolate(p: &[(f64, f64)], x: f64, period: Option<f64>) -> f64 {
    if p.is_empty() {
        return f64::NAN;
    }
    let n = p.len();
    let k = p.partition_point(|q| q.0 <= x);
    let (a, b) = match (k, period) {
        (0, Some(t)) => ((p[n - 1].0 - t, p[n - 1].1), p[0]),
        (0, None) => return p[0].1,
        (k, Some(t)) if k == n => (p[n - 1], (p[0].0 + t, p[0].1)),
        (k, None) if k == n => return p[n - 1].1,
        (k, _) => (p[k - 1], p[k]),
    };
    let f = (x - a.0) / (b.0 - a.0);
    a.1 + f * (b.1 - a.1)
}

/// The run-averaged vertical column on the (local time, latitude) grid.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct ColumnMap {
    /// Local-time bin centres, h.
    pub local_time_h: Vec<f64>,
    /// Latitude bin centres, deg.
    pub latitude_deg: Vec<f64>,
    /// Column, atoms cm^-2, layout (local time, latitude).
    pub column: Vec<f64>,
}

/// What a finished run tells the commands that judge it.
#[derive(Clone, Debug, PartialEq)]
pub struct RunResult {
    /// The summary (what `summary.json` holds).
    pub summary: Summary,
    /// Equatorial column by local time (coordinate in h).
    pub equator: Profile,
    /// Dayside column by latitude (coordinate in deg).
    pub latitude: Profile,
    /// The run-averaged column map.
    pub column: ColumnMap,
}

/// File of the equatorial profile inside a run directory.
pub const EQUATOR_FILE: &str = "profiles/equator_local_time.csv";
/// File of the latitude profile inside a run directory.
pub const LATITUDE_FILE: &str = "profiles/latitude.csv";

impl RunResult {
    /// The result of a run just finished, from its fields and summary.
    pub fn of(f: &Fields, summary: Summary) -> RunResult {
        RunResult {
            summary,
            equator: Profile {
                coordinate: f.local_time_h.clone(),
                column: f.equator_profile.clone(),
                error: f.equator_error.clone(),
            },
            latitude: Profile {
                coordinate: f.latitude_deg.clone(),
                column: f.latitude_profile.clone(),
                error: f.latitude_error.clone(),
            },
            column: ColumnMap {
                local_time_h: f.local_time_h.clone(),
                latitude_deg: f.latitude_deg.clone(),
                column: f.column.clone(),
            },
        }
    }

    /// Read a finished run's directory: `summary.json`, the two profile
    /// tables and the column of `exosphere.nc`. A missing or malformed file
    /// is an error naming it (and the line, for a table); nothing is skipped.
    pub fn read(dir: &Path) -> Result<RunResult, String> {
        let summary = Summary::read(&dir.join("summary.json"))?;
        let equator = read_profile(&dir.join(EQUATOR_FILE), "local_time_h")?;
        let latitude = read_profile(&dir.join(LATITUDE_FILE), "latitude_deg")?;
        let nc = dir.join("exosphere.nc");
        let ds = exobound_products::read_netcdf(&nc).map_err(|e| {
            format!("`{}`: {e}; the run was written without NetCDF, or is damaged", nc.display())
        })?;
        let coord = |name: &str| {
            ds.variable(name).map(|v| v.data.clone()).ok_or_else(|| {
                format!("`{}` has no variable `{name}`; rerun that run", nc.display())
            })
        };
        let (local_time_h, latitude_deg, column) =
            (coord("local_time")?, coord("latitude")?, coord("column")?);
        if column.len() != local_time_h.len() * latitude_deg.len() {
            return Err(format!(
                "`{}`: `column` has {} values, not {} x {}; the file is damaged",
                nc.display(),
                column.len(),
                local_time_h.len(),
                latitude_deg.len()
            ));
        }
        Ok(RunResult {
            summary,
            equator,
            latitude,
            column: ColumnMap { local_time_h, latitude_deg, column },
        })
    }

    /// Every measure of [`MEASURES`], in its unit, in that order.
    pub fn measures(&self) -> Vec<f64> {
        MEASURES.iter().map(|m| (m.of)(&self.summary)).collect()
    }
}

/// A profile table of a run (`COORDINATE,column_cm-2,column_error_cm-2`).
/// The header must name `coordinate` first; every line must hold three
/// numbers (NaN allowed). A fault is an error naming the file and line.
pub fn read_profile(path: &Path, coordinate: &str) -> Result<Profile, String> {
    let text = std::fs::read_to_string(path).map_err(|e| format!("`{}`: {e}", path.display()))?;
    let mut lines = text.lines();
    let header = lines.next().unwrap_or_default();
    let want = format!("{coordinate},column_cm-2,column_error_cm-2");
    if header != want {
        return Err(format!(
            "`{}` line 1: expected the header `{want}`, found `{header}`; rerun with this \
             exobound version",
            path.display()
        ));
    }
    let mut p = Profile::default();
    for (k, l) in lines.enumerate() {
        let cells: Vec<Option<f64>> = l.split(',').map(|x| x.trim().parse::<f64>().ok()).collect();
        match cells.as_slice() {
            [Some(x), Some(y), Some(e)] => {
                p.coordinate.push(*x);
                p.column.push(*y);
                p.error.push(*e);
            }
            _ => {
                return Err(format!(
                    "`{}` line {}: `{l}` is not three numbers (coordinate, column, error); the \
                     file is damaged: rerun that run",
                    path.display(),
                    k + 2
                ));
            }
        }
    }
    if p.coordinate.windows(2).any(|w| w[1] <= w[0]) {
        return Err(format!(
            "`{}`: the {coordinate} column is not increasing; the file is damaged: rerun that run",
            path.display()
        ));
    }
    Ok(p)
}

/// One summary measure that `compare`, `sweep` and `fit` use.
#[derive(Clone, Copy)]
pub struct Measure {
    /// Its name in tables, plots and observation files.
    pub name: &'static str,
    /// Its unit.
    pub unit: &'static str,
    /// True for a signed measure (zero is not "none"), whose relative
    /// difference means nothing.
    pub signed: bool,
    /// Its value in a summary, in `unit`.
    pub of: fn(&Summary) -> f64,
}

impl std::fmt::Debug for Measure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{} ({})", self.name, self.unit)
    }
}

/// The summary measures, with their units.
pub const MEASURES: &[Measure] = &[
    Measure {
        name: "dayside_near_surface_density",
        unit: "cm^-3",
        signed: false,
        of: |s| s.dayside_near_surface_density.value,
    },
    Measure {
        name: "peak_near_surface_density",
        unit: "cm^-3",
        signed: false,
        of: |s| s.peak_near_surface_density.value,
    },
    Measure {
        name: "peak_adsorbed_density",
        unit: "cm^-2",
        signed: false,
        of: |s| s.peak_adsorbed_density.value,
    },
    Measure { name: "total_content", unit: "atoms", signed: false, of: |s| s.total_content.value },
    Measure {
        name: "equatorial_peak_shift",
        unit: "deg (negative = dawn)",
        signed: true,
        of: |s| s.equatorial_column_peak.shift_deg,
    },
    Measure {
        name: "latitude_cos_power_n",
        unit: "1",
        signed: false,
        of: |s| s.latitude_profile_fit.cos_power_n,
    },
    Measure { name: "source_rate", unit: "atoms s^-1", signed: false, of: |s| s.source_rate.value },
    Measure {
        name: "supply_rate_from_bulk",
        unit: "atoms s^-1",
        signed: false,
        of: |s| s.supply_rate_from_bulk.value,
    },
    Measure { name: "escape_rate", unit: "atoms s^-1", signed: false, of: |s| s.escape_rate.value },
    Measure {
        name: "ionization_rate",
        unit: "atoms s^-1",
        signed: false,
        of: |s| s.ionization_rate.value,
    },
    Measure {
        name: "final_adsorbed",
        unit: "atoms",
        signed: false,
        of: |s| s.ledger.final_adsorbed,
    },
];

/// The index of the measure called `name`.
pub fn measure_index(name: &str) -> Option<usize> {
    MEASURES.iter().position(|m| m.name == name)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_profile_table_reads_whole_or_not_at_all() {
        let dir = std::env::temp_dir().join(format!("exobound-profile-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("p.csv");
        std::fs::write(
            &p,
            "local_time_h,column_cm-2,column_error_cm-2\n0.5,1e9,2e7\n1.5,NaN,NaN\n",
        )
        .unwrap();
        let v = read_profile(&p, "local_time_h").unwrap();
        assert_eq!(v.coordinate, vec![0.5, 1.5]);
        assert_eq!(v.column[0], 1e9);
        assert!(v.column[1].is_nan());
        let e = read_profile(&p, "latitude_deg").unwrap_err();
        assert!(e.contains("line 1") && e.contains("latitude_deg"), "{e}");
        std::fs::write(&p, "latitude_deg,column_cm-2,column_error_cm-2\n-85,1,0\n-75,x,0\n")
            .unwrap();
        let e = read_profile(&p, "latitude_deg").unwrap_err();
        assert!(e.contains("line 3"), "{e}");
        std::fs::write(&p, "latitude_deg,column_cm-2,column_error_cm-2\n-85,1,0\n-75,1\n").unwrap();
        assert!(read_profile(&p, "latitude_deg").unwrap_err().contains("line 3"));
        std::fs::write(&p, "latitude_deg,column_cm-2,column_error_cm-2\n-75,1,0\n-85,1,0\n")
            .unwrap();
        assert!(read_profile(&p, "latitude_deg").unwrap_err().contains("not increasing"));
        let _ = std::fs::remove_dir_all(&dir);
    }

    #[test]
    fn interpolation_wraps_local_time_and_holds_latitude_ends() {
        let p = Profile {
            coordinate: vec![1.0, 3.0, 23.0],
            column: vec![10.0, 30.0, 0.0],
            error: vec![1.0; 3],
        };
        assert_eq!(p.at(2.0, Some(24.0)), 20.0);
        // Between 23 h and 25 h (= 1 h): halfway at 24 h.
        assert_eq!(p.at(0.0, Some(24.0)), 5.0);
        assert_eq!(p.at(0.0, None), 10.0);
        assert_eq!(p.at(30.0, None), 0.0);
        assert_eq!(p.error_at(2.0, Some(24.0)), 1.0);
    }
}

//! CSV tables: the ledger step by step, the per-window time series, and
//! the equatorial local-time and latitude profiles.
//!
//! Why this exists: a table opens anywhere (a spreadsheet, pandas, awk).
//! Every column name ends with its unit (`_s`, `_atoms`, `_cm-2`); every
//! float goes through [`super::number`] (shortest round-trip digits, an
//! exponent when large or small, `NaN` when missing), so a value read back
//! is the value computed and pandas reads every float column as float64.
//! Counts (`step`, `particles`, `hops`) are integers; `spin_up` is
//! `true` / `false`.

use std::fmt::Write as _;
use std::path::Path;

use super::atomic_write;
use super::fields::Fields;
use super::number;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::scenario::Scenario;

fn csv_name(label: &str) -> String {
    label.chars().map(|c| if c.is_ascii_alphanumeric() { c } else { '_' }).collect()
}

/// The ledger as CSV text: one row per step.
pub fn ledger_csv(sim: &Simulation) -> String {
    let l = sim.ledger();
    let mut s = String::from(
        "step,time_s,supplied_from_bulk_atoms,released_atoms,released_from_adsorbed_atoms,\
         landed_atoms,stuck_atoms,bounced_atoms,escaped_atoms,left_bound_atoms,buried_atoms",
    );
    for label in &l.loss_labels {
        let _ = write!(s, ",lost_{}_atoms", csv_name(label));
    }
    for label in &l.removal_labels {
        let _ = write!(s, ",removed_{}_atoms", csv_name(label));
    }
    s.push_str(",roulette_atoms,in_flight_atoms,adsorbed_atoms,particles,hops,closure_error\n");
    for r in &l.rows {
        let _ = write!(s, "{}", r.step);
        number::push_cells(
            &mut s,
            &[
                r.time,
                r.supplied_from_bulk,
                r.released,
                r.released_from_adsorbed,
                r.landed,
                r.stuck,
                r.bounced,
                r.escaped,
                r.left_bound,
                r.buried,
            ],
        );
        number::push_cells(&mut s, &r.losses);
        number::push_cells(&mut s, &r.removed);
        number::push_cells(&mut s, &[r.roulette, r.in_flight, r.adsorbed]);
        let _ = write!(s, ",{},{}", r.particles, r.hops);
        number::push_cells(&mut s, &[r.closure_error]);
        s.push('\n');
    }
    s
}

/// The per-window time series as CSV text.
pub fn windows_csv(record: &RunRecord, latitude_deg: &[f64]) -> String {
    let lat_rad: Vec<f64> = latitude_deg.iter().map(|d| d.to_radians()).collect();
    let mut s = String::from(
        "start_s,end_s,spin_up,content_atoms,sunlit_content_atoms,adsorbed_atoms,supplied_atoms,\
         released_atoms,escaped_atoms,left_bound_atoms,lost_in_flight_atoms,removed_atoms,stuck_atoms,\
         peak_local_time_h,peak_shift_deg,dayside_near_surface_density_cm-3,subsolar_column_cm-2,\
         subsolar_longitude_deg,heliocentric_distance_au,latitude_cos_power_n,\
         latitude_fit_relative_residual",
    );
    s.push_str(ORBIT_HEADER);
    for w in &record.windows {
        // The phase of the body's day (subsolar longitude) and its season
        // (heliocentric distance) at the window's middle.
        let (lon_ss, r_au) =
            (w.position.subsolar_longitude_deg, w.position.heliocentric_distance_au);
        let fit = crate::tally::profiles::fit_cos_power(&lat_rad, &w.latitude_profile);
        number::push(&mut s, w.start);
        number::push_cells(&mut s, &[w.end]);
        let _ = write!(s, ",{}", w.spin_up);
        number::push_cells(
            &mut s,
            &[
                w.content,
                w.sunlit_content,
                w.adsorbed,
                w.supplied,
                w.released,
                w.escaped,
                w.left_bound,
                w.lost_in_flight,
                w.removed,
                w.stuck,
                w.peak_local_time,
                w.shift_deg,
                w.dayside_near_surface,
                w.subsolar_column,
                lon_ss,
                r_au,
                fit.map_or(f64::NAN, |f| f.n),
                fit.map_or(f64::NAN, |f| f.relative_residual),
            ],
        );
        let p = &w.position;
        number::push_cells(
            &mut s,
            &[p.true_anomaly_deg, p.subsolar_latitude_deg, p.solar_longitude_deg, p.lunar_phase],
        );
        s.push('\n');
    }
    s
}

/// The orbit columns that end each `windows.csv` row, all at the window's
/// middle (`docs/outputs.md`).
const ORBIT_HEADER: &str =
    ",true_anomaly_deg,subsolar_latitude_deg,solar_longitude_deg,lunar_phase\n";

/// Write `ledger.csv`, `windows.csv` and `profiles/*.csv` into `dir`.
pub fn write_all(
    dir: &Path,
    scenario: &Scenario,
    sim: &Simulation,
    record: &RunRecord,
) -> std::io::Result<()> {
    let f = Fields::of(scenario, sim, record);
    atomic_write(&dir.join("ledger.csv"), ledger_csv(sim).as_bytes())?;
    atomic_write(&dir.join("windows.csv"), windows_csv(record, &f.latitude_deg).as_bytes())?;
    std::fs::create_dir_all(dir.join("profiles"))?;
    let mut eq = String::from("local_time_h,column_cm-2,column_error_cm-2\n");
    for ((lt, c), e) in f.local_time_h.iter().zip(&f.equator_profile).zip(&f.equator_error) {
        eq.push_str(&number::row(&[*lt, *c, *e]));
    }
    atomic_write(&dir.join("profiles/equator_local_time.csv"), eq.as_bytes())?;
    let mut lat = String::from("latitude_deg,column_cm-2,column_error_cm-2\n");
    for ((l, c), e) in f.latitude_deg.iter().zip(&f.latitude_profile).zip(&f.latitude_error) {
        lat.push_str(&number::row(&[*l, *c, *e]));
    }
    atomic_write(&dir.join("profiles/latitude.csv"), lat.as_bytes())?;
    Ok(())
}

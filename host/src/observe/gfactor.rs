//! The brightness that resonance scattering gives, and the g-factor that
//! `observe` uses for it.
//!
//! Why this exists: an optically thin exosphere scatters g photons per
//! second per atom, and the brightness of a column N is 4 pi I = g N / 10^6
//! rayleigh. g itself (its dependence on the atoms' heliocentric radial
//! velocity through the solar Fraunhofer line, and on 1 / r^2) is the same
//! model the engine uses for radiation pressure, [`crate::radiation`]; here
//! `observe` picks the table: the view's own file, else the one the run
//! used (recorded in its `exosphere.nc`), else the species' built-in table.
//! The table file layout is described in [`crate::radiation::file`].

use crate::radiation::{GFactorModel, GFactorTable};
use crate::species::Species;

/// Photons cm^-2 s^-1 (into 4 pi sr) per rayleigh: 1 R = 10^6 / (4 pi)
/// photons cm^-2 s^-1 sr^-1 (Hunten, Roach & Chamberlain 1956).
pub const PHOTONS_PER_RAYLEIGH: f64 = 1.0e6;

/// The netCDF global attribute of `exosphere.nc` holding the run's
/// g-factor table in the file layout (text).
pub const RUN_TABLE_ATTRIBUTE: &str = "g_factor_table";

/// The netCDF global attribute of `exosphere.nc` naming the run's table's origin.
pub const RUN_ORIGIN_ATTRIBUTE: &str = "g_factor_origin";

/// The g-factor model for `observe`: the view's table file `view_table`
/// if given, else the run's table `run_table` (its text and origin, from
/// `exosphere.nc`), else the built-in table of `species` (`Na` or `K`).
pub fn model_for(
    species: &str,
    view_table: Option<&std::path::Path>,
    run_table: Option<(&str, &str)>,
) -> Result<GFactorModel, String> {
    let sp = Species::by_name(species).ok_or_else(|| {
        format!("the run's species `{species}` is not known to `observe`; it knows Na and K")
    })?;
    let table = match (view_table, run_table) {
        (Some(p), _) => GFactorTable::read(p)?,
        (None, Some((text, origin))) => {
            let mut t = GFactorTable::parse(text, "the run's g-factor table (exosphere.nc)")?;
            t.origin = format!("the run's table: {origin}");
            t
        }
        (None, None) => return Ok(sp.g_factors),
    };
    Ok(sp.with_g_factor_table(table)?.g_factors)
}

/// Total g over the lines, photons s^-1 atom^-1, at heliocentric radial
/// velocity `v_km_s` (km s^-1) and distance `r_au` (AU); an error if the
/// table does not reach `v_km_s` (for a brightness, asked explicitly, the
/// end value would be a guess).
pub fn g_at(model: &GFactorModel, v_km_s: f64, r_au: f64) -> Result<f64, String> {
    if !model.covers(v_km_s * 1e3) {
        let vs = &model.table.velocity_km_s;
        let lo = if model.table.symmetric() { -vs[vs.len() - 1] } else { vs[0] };
        return Err(format!(
            "radial velocity {v_km_s} km/s is outside the g-factor table ({lo} to {} km/s, {})",
            vs[vs.len() - 1],
            model.table.origin
        ));
    }
    if !(r_au > 0.0) {
        return Err(format!("heliocentric distance {r_au} AU must be positive"));
    }
    Ok(model.g_total(v_km_s * 1e3, r_au))
}

/// Brightness 4 pi I, rayleigh, of an optically thin column `column_cm2`
/// (atoms cm^-2) scattering `g` photons s^-1 atom^-1: g N / 10^6.
pub fn brightness_rayleigh(g: f64, column_cm2: f64) -> f64 {
    g * column_cm2 / PHOTONS_PER_RAYLEIGH
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::f64::consts::PI;

    #[test]
    fn rayleigh_conversion() {
        // Hunten, Roach & Chamberlain (1956): 1 R = 10^6 / (4 pi) photons
        // cm^-2 s^-1 sr^-1, so 4 pi I [R] = g N / 10^6. Worked example from
        // Hunten, Roach & Chamberlain 1956 (J. Atmos. Terr. Phys. 8), from memory:
        // 4 pi I [R] = g N / 1e6, so N = 1e11 cm^-2, g = 5 gives 5.0e5 R.
        assert!((brightness_rayleigh(5.0, 1.0e11) - 5.0e5).abs() < 1e-6);
        // One rayleigh of emission: g N = 10^6 photons cm^-2 s^-1 into 4 pi sr,
        // i.e. an intensity of 10^6 / (4 pi) per steradian.
        let per_sr = brightness_rayleigh(1.0, 1.0e6) * PHOTONS_PER_RAYLEIGH / (4.0 * PI);
        assert!((per_sr - 1.0e6 / (4.0 * PI)).abs() < 1e-6);
    }

    #[test]
    fn observe_and_engine_share_one_g_factor() {
        // The brightness g is the sum of the lines' g from the same model the
        // engine's push comes from: at Mercury (0.35 AU) and 10 km/s the
        // engine's acceleration equals sum_l h g_l / (m lambda_l) of the
        // g's `observe` uses (definition of the law, one code path).
        let na = Species::sodium();
        let m = model_for("Na", None, None).unwrap();
        assert_eq!(m, na.g_factors);
        let (v, r) = (10.0, 0.35);
        let g = g_at(&m, v, r).unwrap();
        let lines: f64 = (0..2).map(|k| m.g_column(k, v * 1e3, r)).sum();
        assert_eq!(g, lines);
        let grid = na.g_factors.acceleration_grid(r);
        let a: f64 = (0..2).map(|k| m.push_per_photon[k] * m.g_column(k, v * 1e3, r)).sum();
        assert!((grid.at(v * 1e3) - a).abs() <= 1e-12 * a);
        // Built-in Na at rest at 1 AU: D2 0.54 + D1 0.271 (radiation/tables.rs).
        assert!((g_at(&m, 0.0, 1.0).unwrap() - 0.811).abs() < 1e-12);
        // Symmetric table: the sign of v does not matter; 1/r^2 (law).
        assert_eq!(g_at(&m, -7.0, 1.0).unwrap(), g_at(&m, 7.0, 1.0).unwrap());
        assert!((g_at(&m, 3.0, 0.4).unwrap() / g_at(&m, 3.0, 1.0).unwrap() - 6.25).abs() < 1e-12);
        // Beyond the table `observe` refuses rather than guess.
        assert!(g_at(&m, 61.0, 1.0).unwrap_err().contains("outside"));
        // K has a (low-confidence) built-in table now; unknown species are refused.
        assert!(model_for("K", None, None).is_ok());
        assert!(model_for("Ca", None, None).unwrap_err().contains("Ca"));
    }

    #[test]
    fn the_run_table_serves_observe_unless_the_view_gives_one() {
        let run_text = "radial_velocity_km_s,g_photons_per_s_per_atom\n0,2\n10,4\n";
        let m = model_for("Na", None, Some((run_text, "file u.csv (sha256 abc)"))).unwrap();
        assert!(m.table.origin.contains("u.csv"));
        assert!((g_at(&m, 5.0, 1.0).unwrap() - 3.0).abs() < 1e-12);
        let e = model_for("Na", None, Some(("nonsense\n", "x"))).unwrap_err();
        assert!(e.contains("exosphere.nc"), "{e}");
        // A view's file wins over the run's table.
        let dir = std::env::temp_dir().join(format!("exobound-obs-g-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("view-g.csv");
        std::fs::write(&p, "radial_velocity_km_s,g_photons_per_s_per_atom\n0,7\n").unwrap();
        let m = model_for("Na", Some(&p), Some((run_text, "x"))).unwrap();
        assert_eq!(g_at(&m, 0.0, 1.0).unwrap(), 7.0);
        std::fs::remove_dir_all(&dir).unwrap();
    }
}

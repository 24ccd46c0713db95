//! The built-in g-factor tables, per resonance line, with their sources.
//!
//! Why this exists: a run needs a g-factor for radiation pressure and
//! `observe` one for brightness even when the modeller supplies none. The
//! values are computed in `tests/python/gfactor_reference_values.py` as
//! g_l,1AU(v) = g_cont,l * R_l(v): g_cont the rate an atom would scatter if
//! the solar spectrum had no Fraunhofer line at l (integrated cross section
//! pi e^2 f / (m_e c), Mitchell & Zemansky 1934; solar spectral irradiance
//! at 1 AU about 1.85 W m^-2 nm^-1 at 589 nm and 1.25 W m^-2 nm^-1 at
//! 770 nm, from memory: Neckel & Labs 1984, Solar Physics 90, 205), and
//! R_l(v) the residual intensity of the solar line at the Doppler shift of
//! an atom moving at v, FROM MEMORY (no published table could be consulted
//! when these were written). Both tables are symmetric in v (the tabulated
//! v >= 0 are read at |v|); beyond the last row the end value holds.
//! Supply a table (`species.g_factor_table`) for quantitative work.

use super::file::{Column, GFactorTable};

/// Tabulated |v_r|, km s^-1, of the built-in sodium table.
const NA_VELOCITY_KM_S: [f64; 23] = [
    0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0, 11.0, 12.0, 13.0, 14.0, 15.0, 17.0,
    20.0, 25.0, 30.0, 40.0, 50.0, 60.0,
];

/// Na D2 (589.158 nm) g at 1 AU, photons s^-1 atom^-1, at `NA_VELOCITY_KM_S`.
/// Continuum g 10.81 (computed) times the residual intensity of the solar
/// D2 line: 5 % in the core (Kurucz et al. 1984, Solar Flux Atlas, from
/// memory), 45 % at 10 km/s, 97.5 % at 60 km/s (from memory, shaped so that
/// the push at Mercury peaks near half of g0 as Smyth & Marconi 1995, ApJ
/// 441, 839, and Potter, Killen & Morgan 2002, Meteoritics & Planet. Sci.
/// 37, 1165, report, from memory). Believed good to a factor of about 1.5
/// in the core (|v| < 3 km/s) and 30 % beyond.
const NA_D2_G: [f64; 23] = [
    0.54, 0.573, 0.67, 0.843, 1.1, 1.46, 1.92, 2.49, 3.13, 4.0, 4.86, 5.57, 6.16, 6.7, 7.13, 7.51,
    8.11, 8.75, 9.4, 9.78, 10.2, 10.4, 10.5,
];

/// Na D1 (589.756 nm) g at 1 AU, photons s^-1 atom^-1, at `NA_VELOCITY_KM_S`.
/// Continuum g 5.41 (computed) times the D2 residual-intensity profile
/// narrowed by 0.88 in velocity (the solar D1 line is the weaker; from
/// memory). Same tolerance as D2.
const NA_D1_G: [f64; 23] = [
    0.271, 0.293, 0.359, 0.475, 0.649, 0.889, 1.19, 1.55, 2.04, 2.52, 2.9, 3.22, 3.49, 3.72, 3.9,
    4.06, 4.31, 4.56, 4.84, 4.99, 5.17, 5.26, 5.28,
];

/// Tabulated |v_r|, km s^-1, of the built-in potassium table.
const K_VELOCITY_KM_S: [f64; 13] =
    [0.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 7.0, 8.0, 9.0, 10.0, 12.0, 15.0];

/// K D2 (766.702 nm) g at 1 AU, photons s^-1 atom^-1, at `K_VELOCITY_KM_S`.
/// Continuum g 17.1 (computed) times a Gaussian dip of depth 0.75 and 1/e
/// half-width 4.5 km/s for the solar K I line: LOW CONFIDENCE, from memory,
/// good to a factor of about 3 in the core.
const K_D2_G: [f64; 13] =
    [4.28, 4.9, 6.58, 8.89, 11.3, 13.4, 15.0, 16.0, 16.6, 16.9, 17.0, 17.1, 17.1];

/// K D1 (770.109 nm) g at 1 AU, photons s^-1 atom^-1, at `K_VELOCITY_KM_S`.
/// Continuum g 8.63 (computed) times a Gaussian dip of depth 0.70 and 1/e
/// half-width 4.0 km/s: LOW CONFIDENCE, from memory, a factor of about 3.
const K_D1_G: [f64; 13] =
    [2.59, 2.95, 3.92, 5.19, 6.4, 7.36, 7.99, 8.34, 8.51, 8.59, 8.61, 8.62, 8.63];

/// The name and sources recorded for the built-in sodium table.
pub const SODIUM_ORIGIN: &str = "built-in Na table (D2, D1 per line): continuum g from the \
     Mitchell & Zemansky (1934) cross section and the Neckel & Labs (1984) solar flux, times \
     the solar D-line residual intensity from memory (Kurucz et al. 1984 atlas core ~5 %; \
     wings set so the push at Mercury peaks near half of g0, Smyth & Marconi 1995, Potter, \
     Killen & Morgan 2002); good to a factor ~1.5 in the core, ~30 % in the wings; \
     computed by tests/python/gfactor_reference_values.py";

/// The name and sources recorded for the built-in potassium table.
pub const POTASSIUM_ORIGIN: &str = "built-in K table (D2, D1 per line), LOW CONFIDENCE: \
     continuum g from the Mitchell & Zemansky (1934) cross section and the Neckel & Labs \
     (1984) solar flux, times a Gaussian solar K I line profile from memory; good to a factor \
     ~3; computed by tests/python/gfactor_reference_values.py";

fn per_line(v: &[f64], d2: &[f64], d1: &[f64], origin: &str) -> GFactorTable {
    GFactorTable {
        velocity_km_s: v.to_vec(),
        columns: vec![
            Column { line: Some("D2".into()), g_1au: d2.to_vec() },
            Column { line: Some("D1".into()), g_1au: d1.to_vec() },
        ],
        origin: origin.into(),
        sha256: None,
    }
}

/// The built-in sodium table (D2 and D1 columns; see the module notes).
pub fn sodium() -> GFactorTable {
    per_line(&NA_VELOCITY_KM_S, &NA_D2_G, &NA_D1_G, SODIUM_ORIGIN)
}

/// The built-in potassium table (D2 and D1 columns), low confidence.
pub fn potassium() -> GFactorTable {
    per_line(&K_VELOCITY_KM_S, &K_D2_G, &K_D1_G, POTASSIUM_ORIGIN)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sodium_table_agrees_with_the_physical_checks() {
        let t = sodium();
        // Continuum g of Na D2 at 1 AU, (pi e^2 / (m_e c)) f lambda^2 Phi_lambda
        // with 1.85 W m^-2 nm^-1 (Mitchell & Zemansky 1934; Neckel & Labs 1984,
        // from memory): 10.81 photons s^-1 (tests/python/gfactor_reference_values.py).
        // Far from the line the table approaches it (97.5 % at 60 km/s, from memory).
        let far = t.g_1au(0, 60.0);
        assert!(far < 10.81 && far > 0.95 * 10.81, "{far}");
        // At rest the Fraunhofer core leaves about 5 % of it (Kurucz et al.
        // 1984 atlas, from memory): D2 0.3-0.6 and D1 0.2-0.35 photons s^-1
        // (Killen, Shemansky & Mouawad 2009, ApJS 181, 351, from memory).
        let (d2, d1) = (t.g_1au(0, 0.0), t.g_1au(1, 0.0));
        assert!((0.3..=0.6).contains(&d2) && (0.2..=0.35).contains(&d1), "{d2} {d1}");
        assert!((d2 / 10.81 - 0.05).abs() < 0.01);
        // The D1:D2 continuum ratio is the f-value ratio, 0.320 / 0.641 (VALD3).
        assert!((t.g_1au(1, 60.0) / far - 0.320 / 0.641).abs() < 0.01);
        // g rises monotonically out of the core (a Fraunhofer line's profile).
        for k in 0..2 {
            for w in t.columns[k].g_1au.windows(2) {
                assert!(w[1] >= w[0]);
            }
        }
        assert!(t.symmetric());
    }

    #[test]
    fn potassium_table_is_below_its_continuum() {
        // Continuum g at 1 AU with 1.25 W m^-2 nm^-1 (Neckel & Labs 1984, from
        // memory): K D2 17.12, K D1 8.63 (tests/python/gfactor_reference_values.py).
        let t = potassium();
        for (k, cont) in [(0, 17.12), (1, 8.63)] {
            for &g in &t.columns[k].g_1au {
                assert!(g > 0.0 && g <= cont * 1.001, "{g} vs {cont}");
            }
        }
    }
}

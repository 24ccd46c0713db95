//! thermal-desorption: first-order thermal desorption of adsorbed alkali
//! atoms from a regolith surface.
//!
//! Why this exists: on the dayside of Mercury, and to a lesser degree on the
//! Moon, atoms that have stuck to warm regolith grains leave again by
//! thermal activation alone. That release is what empties the hot
//! equatorial surface of adsorbed Na and K within minutes at perihelion,
//! and it sets the cold, barometric component of the exosphere. The law is
//! the Polanyi-Wigner (Arrhenius) rate of first order in the coverage,
//!
//! ```text
//! Phi = N_s * nu * exp(-U / (k_B T))      [atoms cm^-2 s^-1]
//! ```
//!
//! with N_s the adsorbed surface density (atoms cm^-2), nu the vibrational
//! (attempt) frequency of the adsorbate-surface bond (s^-1), U the binding
//! (activation) energy (eV) and T the local surface temperature (K). The
//! form and the Na binding energy of 1.85 eV follow Hunten & Sprague (2002)
//! (from memory); nu = 1e13 s^-1 is common practice. Released atoms leave
//! in equilibrium with the surface: their speed follows the Maxwellian
//! *flux* distribution at the surface temperature, their direction the
//! cosine (Lambert) law, as for any gas crossing a plane out of a
//! half-space in thermal equilibrium.
//!
//! The module draws on the adsorbed pool: the host caps the release of a
//! step by the pool and subtracts it.
//!
//! Limits of the law, so that a user knows what is left out:
//! - one binding energy for every site; real regolith offers a spread of
//!   sites (Hunten & Sprague used a distribution of U), which makes the
//!   release less steep in T than a single Arrhenius term;
//! - U independent of coverage, i.e. no lateral interaction between
//!   adsorbates, reasonable for the sub-monolayer coverages (< 1e14
//!   atoms cm^-2) of exospheric alkalis;
//! - no re-adsorption inside the porous regolith before escape to vacuum;
//!   the emitted flux is that of a flat surface.

use exobound_sdk::constants::{BOLTZMANN, ELECTRON_VOLT};
use exobound_sdk::{
    CellState, Check, ErrorCode, Input, LaunchRequest, Manifest, Origin, ParamKind, ParamSpec,
    Params, Pool, Process, ProcessError, ReferencePoint, Rng, Role, Source, Value, Velocity, math,
};

/// Mass of one Na atom, kg (22.98976928 u, IUPAC; check-values §2), used by
/// the launch-speed reference point.
const NA_MASS: f64 = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;

/// First-order thermal desorption with a single binding energy and a
/// thermal (Maxwellian-flux, cosine-law) launch at the surface temperature.
#[derive(Clone, Debug, PartialEq)]
pub struct ThermalDesorption {
    /// Vibrational (attempt) frequency nu of the adsorption bond, s^-1.
    pub vibrational_frequency: f64,
    /// Binding energy U of the adsorbate, eV.
    pub binding_energy: f64,
    /// U / k_B, the activation temperature, K (cached so that the per-cell
    /// rate is one division and one exponential).
    activation_temperature: f64,
}

impl ThermalDesorption {
    /// Per-atom desorption rate nu * exp(-U / (k_B T)), s^-1, at surface
    /// temperature `temperature` in K (which must be > 0).
    ///
    /// On a cold nightside (T ~ 100 K) the exponent is about -215 and the
    /// result is of order 1e-80 s^-1; for the default U and T below about
    /// 29 K (U/kT > 745) the exponential underflows to exactly 0, which is
    /// the right limit.
    #[inline]
    pub fn rate_per_atom(&self, temperature: f64) -> f64 {
        self.vibrational_frequency * math::exp(-self.activation_temperature / temperature)
    }

    /// Residence time of one adsorbed atom, 1 / (nu exp(-U/kT)), s, at
    /// surface temperature `temperature` in K.
    #[inline]
    pub fn residence_time(&self, temperature: f64) -> f64 {
        1.0 / self.rate_per_atom(temperature)
    }
}

/// A temperature the law can use: finite and strictly positive.
#[inline]
fn usable_temperature(t: f64) -> bool {
    t.is_finite() && t > 0.0
}

impl Process for ThermalDesorption {
    const MANIFEST: Manifest = Manifest {
        name: "thermal-desorption",
        version: "1.0.0",
        description: "First-order thermal desorption of adsorbed atoms, \
                      Phi = N_s nu exp(-U/(k_B T)), with launch speeds from the Maxwellian \
                      flux distribution at the local surface temperature and directions \
                      from the cosine law.",
        roles: &[Role::Source],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Hunten, D. M. & Sprague, A. L. (2002), Meteoritics & Planetary Science 37, \
                     1191 (first-order desorption with U = 1.85 eV for Na; from memory); \
                     Maxwellian-flux and cosine-law emission: kinetic theory of gases",
        draws_on: Some(Pool::Adsorbed),
        ledger_label: "",
        inputs: &[Input::Temperature, Input::Adsorbed, Input::Mass],
        parameters: &[
            ParamSpec {
                name: "vibrational_frequency",
                unit: "s^-1",
                description: "Vibrational (attempt) frequency nu of the adsorbate-surface bond, \
                              the prefactor of the Arrhenius rate",
                kind: ParamKind::Number { default: Some(1.0e13), min: 1.0e9, max: 1.0e17 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "binding_energy",
                unit: "eV",
                description: "Binding (activation) energy U of the adsorbed atom on the \
                              regolith surface",
                kind: ParamKind::Number { default: Some(1.85), min: 0.05, max: 5.0 },
                origin: Origin::FromMemory("Hunten & Sprague 2002"),
            },
        ],
        reference_points: &[
            ReferencePoint {
                description: "Na, U = 1.85 eV, T = 600 K, N_s = 1e10 cm^-2: 2.889e-3 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("temperature", 600.0), ("adsorbed", 1.0e10)],
                expected: 2.889e7,
                tolerance: 1.0e-3,
                source: "check-values §7, thermal desorption (M: Hunten & Sprague 2002; C)",
            },
            ReferencePoint {
                description: "U = 1.85 eV, T = 400 K, N_s = 1e10 cm^-2: 4.91e-11 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("temperature", 400.0), ("adsorbed", 1.0e10)],
                expected: 4.91e-1,
                tolerance: 1.0e-3,
                source: "check-values §7, thermal desorption (M: Hunten & Sprague 2002; C)",
            },
            ReferencePoint {
                description: "U = 1.4 eV, T = 400 K, N_s = 1e10 cm^-2: 2.295e-5 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[("binding_energy", Value::Number(1.4))],
                input: &[("temperature", 400.0), ("adsorbed", 1.0e10)],
                expected: 2.295e5,
                tolerance: 1.0e-3,
                source: "check-values §7, thermal desorption (M: Hunten & Sprague 2002; C)",
            },
            ReferencePoint {
                description: "U = 2.0 eV, T = 700 K, N_s = 1e10 cm^-2: 3.987e-2 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[("binding_energy", Value::Number(2.0))],
                input: &[("temperature", 700.0), ("adsorbed", 1.0e10)],
                expected: 3.987e8,
                tolerance: 1.0e-3,
                source: "check-values §7, thermal desorption (M: Hunten & Sprague 2002; C)",
            },
            ReferencePoint {
                description: "Na launched from a 1200 K surface: mean Maxwellian-flux speed \
                              (3 sqrt(pi)/4) sqrt(2kT/m)",
                check: Check::MeanLaunchSpeed,
                parameters: &[],
                input: &[("temperature", 1200.0), ("mass", NA_MASS)],
                expected: 1238.49,
                tolerance: 0.01,
                source: "check-values §6, Maxwellian flux, Na 1200 K (C)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        let vibrational_frequency = params.number("vibrational_frequency")?;
        let binding_energy = params.number("binding_energy")?;
        // The schema has already refused values outside its ranges, so both
        // numbers are finite and positive and U/k_B is a finite temperature
        // (1.85 eV corresponds to 21 468 K).
        Ok(ThermalDesorption {
            vibrational_frequency,
            binding_energy,
            // U [eV] * (J per eV) / k_B [J/K] = activation temperature in K.
            activation_temperature: binding_energy * ELECTRON_VOLT / BOLTZMANN,
        })
    }
}

impl Source for ThermalDesorption {
    fn release_rate(&mut self, cells: &[CellState], rates: &mut [f64]) -> Result<(), ProcessError> {
        if cells.len() != rates.len() {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!("{} cells but {} rate slots", cells.len(), rates.len()),
            ));
        }
        for (cell, rate) in cells.iter().zip(rates.iter_mut()) {
            if !usable_temperature(cell.temperature) {
                return Err(ProcessError::outside_validity(format!(
                    "cell {}: surface temperature {} K; thermal desorption needs a finite \
                     temperature above 0 K",
                    cell.cell, cell.temperature
                )));
            }
            if !(cell.adsorbed.is_finite() && cell.adsorbed >= 0.0) {
                return Err(ProcessError::new(
                    ErrorCode::InvalidInput,
                    format!(
                        "cell {}: adsorbed surface density {} atoms cm^-2; it must be finite \
                         and >= 0",
                        cell.cell, cell.adsorbed
                    ),
                ));
            }
            // First order in the coverage: every adsorbed atom leaves
            // independently at the Arrhenius rate of its site. The host, not
            // the law, caps the release of a step by the pool it holds, so a
            // rate far above N_s / dt (Mercury's subsolar point) is correct
            // here and simply empties the cell.
            *rate = cell.adsorbed * self.rate_per_atom(cell.temperature);
        }
        Ok(())
    }

    fn launch(
        &mut self,
        requests: &[LaunchRequest],
        velocities: &mut [Velocity],
    ) -> Result<(), ProcessError> {
        if requests.len() != velocities.len() {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "{} launch requests but {} velocity slots",
                    requests.len(),
                    velocities.len()
                ),
            ));
        }
        for (req, v) in requests.iter().zip(velocities.iter_mut()) {
            if !usable_temperature(req.temperature) {
                return Err(ProcessError::outside_validity(format!(
                    "cell {}: surface temperature {} K at launch; a thermal launch needs a \
                     finite temperature above 0 K",
                    req.cell, req.temperature
                )));
            }
            if !(req.mass.is_finite() && req.mass > 0.0) {
                return Err(ProcessError::new(
                    ErrorCode::InvalidInput,
                    format!(
                        "cell {}: atomic mass {} kg; it must be finite and > 0",
                        req.cell, req.mass
                    ),
                ));
            }
            // An atom that desorbs from a surface in equilibrium at T leaves
            // with the distribution of atoms crossing a plane, the Maxwellian
            // *flux* (weighted by v cos theta), not the Maxwellian of the gas
            // itself: hence v^3 exp(-v^2/a^2) and the cosine law, mean energy
            // 2kT rather than 3kT/2.
            //
            // One stream per record: the draw depends only on the key, never
            // on the record's place in the batch. Speed first, then direction.
            let mut rng = Rng::new(req.key);
            let speed = rng.maxwellian_flux_speed(req.temperature, req.mass);
            *v = rng.cosine_direction().times(speed);
        }
        Ok(())
    }
}

exobound_sdk::export_process!(ThermalDesorption: Source);

#[cfg(test)]
mod tests {
    use std::collections::BTreeMap;

    use exobound_sdk::constants::ATOMIC_MASS;
    use exobound_sdk::{NamedFields, ParamValue, RngKey, stream};

    use super::*;

    /// The parameter schema exactly as the host decodes it from the manifest.
    fn schema() -> Vec<exobound_sdk::ParamInfo> {
        ThermalDesorption::MANIFEST.to_info().parameters
    }

    /// The law built from `given` through the same decode/validate path as `init`.
    fn law_with(given: &[(&str, ParamValue)]) -> ThermalDesorption {
        let map: BTreeMap<String, ParamValue> =
            given.iter().map(|(k, v)| (k.to_string(), v.clone())).collect();
        let params = Params::decode(&Params::encode(&map), &schema()).expect("valid parameters");
        ThermalDesorption::new(&params).expect("law builds")
    }

    /// A cell (index 17) at `temperature` K holding `adsorbed` atoms cm^-2.
    fn cell(temperature: f64, adsorbed: f64) -> CellState {
        CellState { cell: 17, temperature, adsorbed, ..CellState::default() }
    }

    /// A launch from cell 3 at `temperature` K of an atom of `mass` kg, with
    /// its own random stream (particle id `particle`).
    fn request(particle: u64, temperature: f64, mass: f64) -> LaunchRequest {
        LaunchRequest {
            key: RngKey { seed: 2024, particle, event: 0, stream: stream::LAUNCH },
            cell: 3,
            temperature,
            mass,
            ..LaunchRequest::default()
        }
    }

    /// |got - stated| within half a unit of the stated value's last digit,
    /// i.e. `got` rounds to the value as printed in check-values.
    fn assert_rounds_to(got: f64, stated: f64, last_digit: f64) {
        assert!((got - stated).abs() <= 0.5 * last_digit, "got {got:e}, stated {stated:e}");
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let params = Params::decode(&[], &schema()).expect("defaults validate");
        let law = ThermalDesorption::new(&params).unwrap();
        // nu = 1e13 s^-1: common practice (check-values §7).
        assert_eq!(law.vibrational_frequency, 1.0e13);
        // U = 1.85 eV for Na: from memory, Hunten & Sprague 2002 (check-values §7).
        assert_eq!(law.binding_energy, 1.85);
        let info = ThermalDesorption::MANIFEST.to_info();
        assert_eq!(info.draws_on.as_deref(), Some("adsorbed"));
        assert_eq!(info.parameters[1].default_origin, "from memory: Hunten & Sprague 2002");
    }

    #[test]
    fn per_atom_rates_match_check_values() {
        let law = law_with(&[]);
        // check-values §7, thermal desorption, U = 1.85 eV, T = 600 K: 2.889e-3 s^-1
        // (M: Hunten & Sprague 2002; C).
        assert_rounds_to(law.rate_per_atom(600.0), 2.889e-3, 1e-6);
        // check-values §7, U = 1.85 eV, T = 400 K: 4.91e-11 s^-1 (M: Hunten & Sprague 2002; C).
        assert_rounds_to(law.rate_per_atom(400.0), 4.91e-11, 1e-13);
        let law = law_with(&[("binding_energy", ParamValue::Number(1.4))]);
        // check-values §7, U = 1.4 eV, T = 400 K: 2.295e-5 s^-1 (M: Hunten & Sprague 2002; C).
        assert_rounds_to(law.rate_per_atom(400.0), 2.295e-5, 1e-8);
        let law = law_with(&[("binding_energy", ParamValue::Number(2.0))]);
        // check-values §7, U = 2.0 eV, T = 700 K: 3.987e-2 s^-1 (M: Hunten & Sprague 2002; C).
        assert_rounds_to(law.rate_per_atom(700.0), 3.987e-2, 1e-5);
    }

    #[test]
    fn release_rate_is_first_order_in_coverage() {
        let mut law = law_with(&[]);
        let cells = [cell(600.0, 1.0e10), cell(600.0, 3.0e10), cell(600.0, 0.0)];
        let mut rates = [f64::NAN; 3];
        law.release_rate(&cells, &mut rates).unwrap();
        // check-values §7: 2.889e-3 s^-1 per atom at 600 K, times N_s = 1e10 cm^-2
        // (M: Hunten & Sprague 2002; C).
        assert_rounds_to(rates[0], 2.889e7, 1e4);
        // First-order kinetics (Polanyi-Wigner, order 1, common practice): Phi ~ N_s.
        assert!((rates[1] / rates[0] - 3.0).abs() < 1e-15);
        assert_eq!(rates[2], 0.0);
    }

    #[test]
    fn residence_time_at_mercury_subsolar_is_short() {
        let law = law_with(&[]);
        // 1/(2.889e-3 s^-1) = 346 s at 600 K (check-values §7, C): adsorbed Na
        // cannot survive a Mercury dayside at perihelion.
        let tau = law.residence_time(600.0);
        assert!((tau - 1.0 / 2.889e-3).abs() < 0.1, "tau {tau}");
    }

    /// The manifest's promises are tested here and not only by the host:
    /// a wrong `expected`, a field name the records do not know or a
    /// parameter outside the schema fails this test before any module is
    /// shipped.
    #[test]
    fn manifest_reference_points_hold() {
        // Each reference point run the way the host's `module check` would:
        // parameters through the manifest schema, input record by field name.
        for point in ThermalDesorption::MANIFEST.reference_points {
            let given: Vec<(&str, ParamValue)> = point
                .parameters
                .iter()
                .map(|(k, v)| match v {
                    Value::Number(x) => (*k, ParamValue::Number(*x)),
                    Value::Text(s) => (*k, ParamValue::Text(s.to_string())),
                })
                .collect();
            let mut law = law_with(&given);
            let got = match point.check {
                Check::ReleaseRate => {
                    let mut c = CellState::default();
                    for (k, v) in point.input {
                        assert!(c.set_field(k, *v), "unknown field {k}");
                    }
                    let mut out = [0.0];
                    law.release_rate(&[c], &mut out).unwrap();
                    out[0]
                }
                Check::MeanLaunchSpeed => {
                    let mut r = LaunchRequest::default();
                    for (k, v) in point.input {
                        assert!(r.set_field(k, *v), "unknown field {k}");
                    }
                    // 20 000 draws: the standard error of the mean speed is
                    // 0.36 <v> / sqrt(N) = 0.26% of <v>, a quarter of the
                    // 1% tolerance.
                    let n = 20_000;
                    let reqs: Vec<LaunchRequest> = (0..n)
                        .map(|i| LaunchRequest {
                            key: RngKey { seed: 11, particle: i, event: 0, stream: stream::LAUNCH },
                            ..r
                        })
                        .collect();
                    let mut vs = vec![Velocity::ZERO; reqs.len()];
                    law.launch(&reqs, &mut vs).unwrap();
                    vs.iter().map(Velocity::speed).sum::<f64>() / n as f64
                }
                other => panic!("unexpected check {other:?}"),
            };
            // Expected values and sources are stated in each point (check-values §6, §7).
            assert!(
                (got - point.expected).abs() <= point.tolerance * point.expected.abs(),
                "{}: got {got}, expected {}",
                point.description,
                point.expected
            );
        }
    }

    #[test]
    fn launch_is_a_maxwellian_flux_with_cosine_directions() {
        let mut law = law_with(&[]);
        let m = 22.989_769_28 * ATOMIC_MASS;
        let n = 100_000;
        let reqs: Vec<LaunchRequest> = (0..n).map(|i| request(i, 1200.0, m)).collect();
        let mut vs = vec![Velocity::ZERO; reqs.len()];
        law.launch(&reqs, &mut vs).unwrap();
        assert!(vs.iter().all(|v| v.up > 0.0), "every launch leaves the surface");
        let nf = n as f64;
        let speeds: Vec<f64> = vs.iter().map(Velocity::speed).collect();
        let mean = speeds.iter().sum::<f64>() / nf;
        // check-values §6: Maxwellian flux, Na 1200 K, a = 931.66 m/s,
        // <v> = 1238.49 m/s (C); the standard deviation of the flux speed is
        // a sqrt(2 - 9 pi/16) (moments of chi with 4 degrees of freedom, C).
        let a = 931.66;
        let sd = a * (2.0 - 9.0 * core::f64::consts::PI / 16.0).sqrt();
        assert!((mean - 1238.49).abs() < 3.0 * sd / nf.sqrt(), "mean speed {mean}");
        // check-values §6: <E> = 2kT = 0.20682 eV for Na at 1200 K (C).
        let mean_e = speeds.iter().map(|v| 0.5 * m * v * v).sum::<f64>() / nf / ELECTRON_VOLT;
        // Var(E) = 2 (kT)^2 for a Gamma(2) energy, so sd(E) = sqrt(2) kT = 0.0731 eV (C).
        assert!((mean_e - 0.20682).abs() < 3.0 * 0.0731 / nf.sqrt(), "mean energy {mean_e}");
        // Cosine law: <cos theta> = 2/3, Var = 1/2 - 4/9 = 1/18 (common practice derivation
        // from f(theta) ~ cos theta sin theta).
        let mean_cos = vs.iter().map(|v| v.up / v.speed()).sum::<f64>() / nf;
        assert!((mean_cos - 2.0 / 3.0).abs() < 3.0 * (1.0f64 / 18.0 / nf).sqrt(), "{mean_cos}");
        // Isotropic in azimuth: <east> and <north> vanish (symmetry, common practice).
        let mean_east = vs.iter().map(|v| v.east).sum::<f64>() / nf;
        assert!(mean_east.abs() < 3.0 * 1238.49 / nf.sqrt(), "mean east {mean_east}");
    }

    #[test]
    fn launch_depends_only_on_the_key() {
        let mut law = law_with(&[]);
        // K, 39.0983 u (check-values §2, F: IUPAC).
        let m = 39.0983 * ATOMIC_MASS;
        let a = request(5, 500.0, m);
        let b = request(6, 500.0, m);
        let mut pair = [Velocity::ZERO; 2];
        law.launch(&[a, b], &mut pair).unwrap();
        let mut swapped = [Velocity::ZERO; 2];
        law.launch(&[b, a], &mut swapped).unwrap();
        // Counter-based streams: order in the batch is irrelevant, keys differ.
        assert_eq!(pair[0], swapped[1]);
        assert_eq!(pair[1], swapped[0]);
        assert_ne!(pair[0], pair[1]);
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let mut law = law_with(&[]);
        let mut out = [0.0];
        let err = law.release_rate(&[cell(0.0, 1.0e10)], &mut out).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("cell 17") && err.message.contains("0 K"), "{err}");
        let err = law.release_rate(&[cell(f64::NAN, 1.0e10)], &mut out).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        let err = law.release_rate(&[cell(300.0, -1.0)], &mut out).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        let mut v = [Velocity::ZERO];
        let err = law.launch(&[request(1, -5.0, 1e-26)], &mut v).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("cell 3"), "{err}");
        let err = law.launch(&[request(1, 300.0, 0.0)], &mut v).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
    }

    #[test]
    fn out_of_range_parameters_are_refused_by_the_schema() {
        let map: BTreeMap<String, ParamValue> =
            [("binding_energy".to_string(), ParamValue::Number(-1.0))].into_iter().collect();
        let err = Params::validate(&map, &schema()).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidParameter);
        assert!(err.message.contains("binding_energy") && err.message.contains("eV"), "{err}");
    }

    #[test]
    fn cold_night_surface_releases_nothing_measurable() {
        let mut law = law_with(&[]);
        let mut out = [f64::NAN];
        // At 100 K, U/kT = 214.7, so nu exp(-U/kT) ~ 1e13 * 6e-94 (C): effectively zero,
        // and the exponential must not produce NaN or a negative rate.
        law.release_rate(&[cell(100.0, 1.0e14)], &mut out).unwrap();
        assert!(out[0] >= 0.0 && out[0] < 1e-60, "rate {}", out[0]);
    }
}

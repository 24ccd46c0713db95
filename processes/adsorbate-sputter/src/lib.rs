//! adsorbate-sputter: removal of adsorbed atoms from the surface pool by
//! solar-wind ion impacts.
//!
//! Why this exists: an ion that strikes a grain ejects not only lattice
//! atoms (see the `ion-sputter` source) but also the weakly bound atoms
//! adsorbed on top of it. Where the solar wind reaches the surface this
//! empties the adsorbed pool at a rate proportional to both the ion flux
//! and the coverage, a sink that competes with thermal and photon
//! desorption for the same atoms. The law is first order in each:
//!
//! ```text
//! R = -sigma * F_sw * N_s      [atoms cm^-2 s^-1]
//! ```
//!
//! with sigma the removal cross-section per adsorbed atom (cm^2), F_sw the
//! ion flux reaching the surface (ions cm^-2 s^-1; the host sets it to zero
//! where the surface is shielded) and N_s the adsorbed surface density
//! (atoms cm^-2). The per-atom lifetime is 1 / (sigma F_sw).
//!
//! Accounting. The sputtered atoms leave energetic, with a Sigmund-Thompson
//! spectrum whose median is (1 + sqrt 2) U and whose tail reaches far above
//! the escape energy of Na from the Moon (0.67 eV) and from Mercury
//! (2.15 eV; both (1/2) m v_esc^2 with v_esc = sqrt(2GM/R) from the GM and
//! mean radius of JPL's planetary physical parameters, DE440), so most of
//! them escape. The module does not launch them: the host books the removed
//! atoms in the ledger column `sputtered-escape`, i.e. they are reported as
//! having escaped rather than followed as particles. Use the `ion-sputter`
//! source when sputtered atoms are wanted in the exosphere itself.
//!
//! The default sigma = 1e-17 cm^2 is an order of magnitude, not a
//! measurement: an adsorbed atom is taken to be removed as readily as an
//! atom of the top monolayer, i.e. sigma = Y / N_ml with the total yield
//! Y = 0.01 atom per ion of the `ion-sputter` default (Brötzner et al.
//! 2024, porous regolith) and N_ml = 1e15 atoms cm^-2 in a monolayer
//! (common practice). Weakly bound adsorbates may well be removed faster.
//!
//! What the law leaves out: the return of the slower sputtered atoms to the
//! surface (all are counted as escaped), ion-induced enhancement of
//! diffusion (see `regolith-diffusion`), and the dependence of sigma on ion
//! species, energy and incidence angle.

use exobound_sdk::{
    CellState, Check, ErrorCode, Input, Manifest, Origin, ParamKind, ParamSpec, Params, Process,
    ProcessError, ReferencePoint, ReservoirProcess, Role, Value,
};

/// Default removal cross-section per adsorbed atom, cm^2 (order of
/// magnitude; see the module documentation).
pub const DEFAULT_CROSS_SECTION: f64 = 1.0e-17;

/// Ion sputtering of the adsorbed pool, booked as escape.
#[derive(Clone, Debug, PartialEq)]
pub struct AdsorbateSputter {
    /// Removal cross-section sigma per adsorbed atom, cm^2.
    pub cross_section: f64,
}

impl AdsorbateSputter {
    /// Exchange rate -sigma F_sw N_s, atoms cm^-2 s^-1 (<= 0), for an ion flux
    /// `solar_wind_flux` (ions cm^-2 s^-1) and adsorbed density `adsorbed`
    /// (atoms cm^-2).
    #[inline]
    pub fn exchange_rate(&self, solar_wind_flux: f64, adsorbed: f64) -> f64 {
        -self.cross_section * solar_wind_flux * adsorbed
    }

    /// Lifetime of one adsorbed atom against ion sputtering, 1 / (sigma F_sw),
    /// s, for an ion flux `solar_wind_flux` in ions cm^-2 s^-1 (infinite
    /// where the flux or sigma is 0).
    #[inline]
    pub fn lifetime(&self, solar_wind_flux: f64) -> f64 {
        1.0 / (self.cross_section * solar_wind_flux)
    }
}

impl Process for AdsorbateSputter {
    const MANIFEST: Manifest = Manifest {
        name: "adsorbate-sputter",
        version: "1.0.0",
        description: "Removal of adsorbed atoms by solar-wind ions, R = -sigma F_sw N_s. The \
                      sputtered atoms leave energetic and mostly escape; they are not launched \
                      but booked in the ledger column `sputtered-escape`, i.e. reported as \
                      escaped rather than tracked.",
        roles: &[Role::ReservoirProcess],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "First-order removal by ion impact, R = -sigma F N_s: common practice. \
                     Order of magnitude of sigma from the porous-regolith yields of Brötzner, \
                     J., Biber, H. et al. (2024), arXiv:2410.14450 (abstract) spread over a \
                     monolayer of 1e15 atoms cm^-2 (common practice)",
        draws_on: None,
        ledger_label: "sputtered-escape",
        inputs: &[Input::SolarWindFlux, Input::Adsorbed],
        parameters: &[ParamSpec {
            name: "cross_section",
            unit: "cm^2",
            description: "Removal cross-section sigma per adsorbed atom per incident ion; the \
                          default 1e-17 is a total yield of 0.01 atom/ion over a monolayer of \
                          1e15 atoms cm^-2, an order of magnitude",
            kind: ParamKind::Number {
                default: Some(DEFAULT_CROSS_SECTION),
                min: 0.0,
                max: 1.0e-13,
            },
            origin: Origin::CommonPractice,
        }],
        reference_points: &[
            ReferencePoint {
                description: "sigma = 1e-16 cm^2, 1e8 ions cm^-2 s^-1, N_s = 1e10 cm^-2",
                check: Check::Exchange,
                parameters: &[("cross_section", Value::Number(1.0e-16))],
                input: &[("solar_wind_flux", 1.0e8), ("adsorbed", 1.0e10)],
                expected: -100.0,
                tolerance: 1.0e-12,
                source: "the law: R = -sigma F_sw N_s",
            },
            ReferencePoint {
                description: "Default sigma, 3e8 ions cm^-2 s^-1, N_s = 1e12 cm^-2",
                check: Check::Exchange,
                parameters: &[],
                input: &[("solar_wind_flux", 3.0e8), ("adsorbed", 1.0e12)],
                expected: -3000.0,
                tolerance: 1.0e-12,
                source: "the law: R = -sigma F_sw N_s with the manifest's default sigma",
            },
            ReferencePoint {
                description: "Shielded surface (solar-wind flux 0): the pool is not touched",
                check: Check::Exchange,
                parameters: &[],
                input: &[("solar_wind_flux", 0.0), ("adsorbed", 1.0e12)],
                expected: 0.0,
                tolerance: 0.0,
                source: "the law: R ~ F_sw, which the host sets to 0 where shielded",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        // The schema has checked sigma against [0, 1e-13] cm^2; 0 switches
        // the sink off.
        Ok(AdsorbateSputter { cross_section: params.number("cross_section")? })
    }
}

impl ReservoirProcess for AdsorbateSputter {
    fn exchange_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        let flux_ok = cell.solar_wind_flux.is_finite() && cell.solar_wind_flux >= 0.0;
        let pool_ok = cell.adsorbed.is_finite() && cell.adsorbed >= 0.0;
        if !(flux_ok && pool_ok) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: solar-wind flux {} ions cm^-2 s^-1 and adsorbed density {} \
                     atoms cm^-2; both must be finite and >= 0",
                    cell.cell, cell.solar_wind_flux, cell.adsorbed
                ),
            ));
        }
        // Out of the pool (< 0); the host caps a step's removal by the
        // pool and books it under `sputtered-escape`.
        Ok(self.exchange_rate(cell.solar_wind_flux, cell.adsorbed))
    }
}

exobound_sdk::export_process!(AdsorbateSputter: ReservoirProcess);

#[cfg(test)]
mod tests {
    use exobound_sdk::testing::{self, Roles};

    use super::*;

    /// Cell 30 with ion flux `flux` (ions cm^-2 s^-1) holding `adsorbed` atoms cm^-2.
    fn cell(flux: f64, adsorbed: f64) -> CellState {
        CellState { cell: 30, solar_wind_flux: flux, adsorbed, ..CellState::default() }
    }

    #[test]
    fn defaults_and_ledger_label() {
        let law = testing::law::<AdsorbateSputter>(&[]);
        // Order of magnitude (common practice): Y = 0.01 atom/ion (Brötzner et al. 2024,
        // abstract, H and He weighted 96:4) over a monolayer of 1e15 atoms cm^-2.
        assert!((law.cross_section - 0.01 / 1.0e15).abs() < 1e-30);
        let info = AdsorbateSputter::MANIFEST.to_info();
        // The products are booked as escaped (module documentation).
        assert_eq!(info.ledger_label, "sputtered-escape");
        assert_eq!(info.roles, vec!["reservoir-process".to_string()]);
        assert_eq!(info.draws_on, None);
        assert_eq!(info.parameters[0].default_origin, "common practice");
    }

    #[test]
    fn removal_is_first_order_in_flux_and_coverage() {
        let law = testing::law::<AdsorbateSputter>(&[("cross_section", Value::Number(1.0e-16))]);
        let one = |c: CellState| law.exchange_one(&c).unwrap();
        // The law: R = -sigma F N_s = -1e-16 * 1e8 * 1e10 = -100.
        let r = one(cell(1.0e8, 1.0e10));
        assert!((r + 100.0).abs() <= 1e-12 * 100.0, "{r}");
        // Linear in N_s and in F (first order in each, the law).
        let r2 = one(cell(1.0e8, 2.0e10));
        let r3 = one(cell(3.0e8, 1.0e10));
        assert!((r2 / r - 2.0).abs() < 1e-15 && (r3 / r - 3.0).abs() < 1e-15);
        // The rate only ever removes (sign convention of ReservoirProcess).
        assert!(r < 0.0);
        // Shielded or empty: nothing happens (exactly 0, also not -0 in effect).
        assert_eq!(one(cell(0.0, 1.0e10)), 0.0);
        assert_eq!(one(cell(1.0e8, 0.0)), 0.0);
        // Lifetime 1/(sigma F) = 1e8 s at 1e8 ions cm^-2 s^-1 (the law).
        assert!((law.lifetime(1.0e8) - 1.0e8).abs() < 1e-4);
        assert!(law.lifetime(0.0).is_infinite());
    }

    /// The manifest's promises, run the way the host's `module check` does.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<AdsorbateSputter>::new().reservoir());
    }

    #[test]
    fn batch_results_do_not_depend_on_order() {
        let mut law = testing::law::<AdsorbateSputter>(&[]);
        let cells = [cell(2.0e8, 5.0e11), cell(7.0e7, 3.0e12), cell(0.0, 1.0e12)];
        testing::assert_batch_invariant("exchange", &cells, |c, r| law.exchange(c, r));
    }

    #[test]
    fn refuses_nonsense_inputs_and_parameters() {
        let law = testing::law::<AdsorbateSputter>(&[]);
        let err = law.exchange_one(&cell(-1.0, 1.0e10)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("cell 30"), "{err}");
        assert_eq!(
            law.exchange_one(&cell(1e8, f64::NAN)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        assert_eq!(law.exchange_one(&cell(1e8, -5.0)).unwrap_err().code, ErrorCode::InvalidInput);
        let err =
            testing::validate::<AdsorbateSputter>(&[("cross_section", Value::Number(1.0e-12))])
                .unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidParameter);
        assert!(err.message.contains("cross_section") && err.message.contains("cm^2"), "{err}");
    }
}

//! regolith-diffusion: resupply of the adsorbed surface pool by thermally
//! activated diffusion of atoms out of the regolith grains.
//!
//! Why this exists: the desorption processes (thermal, photon-stimulated)
//! empty the outermost monolayers of the grains within minutes to hours on
//! Mercury's dayside, yet the exosphere persists. What keeps it going is
//! the slow migration of Na and K from grain interiors to the surface, so
//! the source becomes *diffusion-limited*: its rate is set by how fast the
//! bulk refills the surface, not by the desorption yield. Burger et al.
//! (2010) inferred such a limit, 1e6-1e7 Na cm^-2 s^-1, from the MESSENGER
//! flybys and needed the diffusion to be at least five times faster where
//! ions precipitate (ion-enhanced diffusion); Killen et al. (2004) and
//! Killen & Morgan (1993) treated diffusion as a supply at Mercury
//! (Burger et al. read from its abstract, with its volume and pages from
//! memory; the two Killen papers from memory). The law here is an
//! Arrhenius, first-order supply from a mobile bulk column,
//!
//! ```text
//! R = N_b * b * nu * exp(-E_a / (k_B T)) * f_enh * max(0, 1 - N_s / N_sat)
//!                                                     [atoms cm^-2 s^-1]
//! ```
//!
//! with N_b (`bulk_density`) the column of mobile atoms in the
//! diffusion-accessible layer of nominal regolith (atoms cm^-2), b the
//! cell's bulk abundance relative to nominal, nu (`frequency`) the attempt
//! frequency (s^-1), E_a (`activation_energy`) the diffusion activation
//! energy (eV), T the surface temperature (K), f_enh (`enhancement`) a
//! dimensionless factor for everything that speeds diffusion up (radiation
//! damage, ion precipitation), N_s the adsorbed density and N_sat
//! (`saturation`) the density at which the surface stops accepting atoms.
//! The rate is always >= 0: the module only adds to the pool.
//!
//! The defaults are illustrative and poorly constrained, and are meant to
//! be tuned: N_b = 1e16 cm^-2 is ~0.4 um of grain material with 0.4 wt% Na2O,
//! nu = 1e13 s^-1 is a lattice attempt frequency, and E_a = 2.7 eV is
//! chosen so that the default supply at 600 K (2.1e6 cm^-2 s^-1) falls in
//! the range Burger et al. inferred. With that E_a the supply is negligible
//! below ~450 K, i.e. everywhere on the Moon; lunar studies need a lower E_a.
//!
//! What the law leaves out: depletion of the grain interiors (N_b is a
//! fixed reservoir, as `draws_on = bulk` sources assume), the sqrt(t)
//! decline of a true diffusion profile after a surface is emptied, a
//! spread of activation energies, and regolith gardening.

use exobound_sdk::constants::{BOLTZMANN, ELECTRON_VOLT};
use exobound_sdk::{
    CellState, Check, ErrorCode, Input, Manifest, Origin, ParamKind, ParamSpec, Params, Process,
    ProcessError, ReferencePoint, ReservoirProcess, Role, Value, math,
};

/// Default column of mobile atoms in the diffusion-accessible layer,
/// atoms cm^-2 (illustrative, see the module documentation).
pub const DEFAULT_BULK_DENSITY: f64 = 1.0e16;

/// Default activation energy of the diffusion, eV (illustrative, see the
/// module documentation).
pub const DEFAULT_ACTIVATION_ENERGY: f64 = 2.7;

/// Default saturation density, atoms cm^-2: far above any alkali coverage
/// (a monolayer is ~1e15), so the saturation term is 1 to within 1e-14.
pub const DEFAULT_SATURATION: f64 = 1.0e30;

/// Arrhenius diffusion-limited supply of the adsorbed pool from the bulk.
#[derive(Clone, Debug, PartialEq)]
pub struct RegolithDiffusion {
    /// Mobile column of nominal regolith N_b, atoms cm^-2.
    pub bulk_density: f64,
    /// Attempt frequency nu, s^-1.
    pub frequency: f64,
    /// Activation energy E_a, eV.
    pub activation_energy: f64,
    /// Diffusion enhancement f_enh, dimensionless.
    pub enhancement: f64,
    /// Adsorbed density at which the supply stops, N_sat, atoms cm^-2.
    pub saturation: f64,
    /// E_a / k_B, the activation temperature, K (cached).
    activation_temperature: f64,
    /// N_b nu f_enh, the supply at infinite temperature from nominal
    /// regolith onto an empty surface, atoms cm^-2 s^-1 (cached).
    prefactor: f64,
}

impl RegolithDiffusion {
    /// Saturation term max(0, 1 - N_s / N_sat), dimensionless, in [0, 1],
    /// for an adsorbed density `adsorbed` (atoms cm^-2, >= 0).
    #[inline]
    pub fn saturation_factor(&self, adsorbed: f64) -> f64 {
        (1.0 - adsorbed / self.saturation).max(0.0)
    }

    /// Supply rate into the pool, atoms cm^-2 s^-1, at surface temperature
    /// `temperature` (K, > 0), relative bulk abundance `bulk_abundance`
    /// (>= 0) and adsorbed density `adsorbed` (atoms cm^-2, >= 0).
    ///
    /// The exponential underflows to exactly 0 for E_a / k_B T > 745 (below
    /// 42 K with the default E_a), the right limit for a frozen surface.
    #[inline]
    pub fn supply_rate(&self, temperature: f64, bulk_abundance: f64, adsorbed: f64) -> f64 {
        self.prefactor
            * bulk_abundance
            * math::exp(-self.activation_temperature / temperature)
            * self.saturation_factor(adsorbed)
    }
}

impl Process for RegolithDiffusion {
    const MANIFEST: Manifest = Manifest {
        name: "regolith-diffusion",
        version: "1.0.0",
        description: "Diffusion-limited resupply of the adsorbed pool from the regolith \
                      grains: R = bulk_density * bulk_abundance * frequency * \
                      exp(-activation_energy/(k_B T)) * enhancement * max(0, 1 - N_s/saturation), \
                      an Arrhenius law. Illustrative, poorly constrained defaults meant to be \
                      tuned.",
        roles: &[Role::ReservoirProcess],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Diffusion of Na from grain interiors as the limiting supply at Mercury: \
                     Burger, M. H. et al. (2010), Icarus 209, 63 (abstract: 1e6-1e7 Na \
                     cm^-2 s^-1, ion-enhanced diffusion >= 5x; volume and pages from memory); \
                     Killen, R. M., Sarantos, M., Potter, A. E. & Reiff, P. (2004), Icarus \
                     171, 1; Killen, R. M. & Morgan, T. H. (1993), Icarus 101, 293 (from \
                     memory). Arrhenius (thermally activated) form: common practice",
        draws_on: None,
        ledger_label: "diffusion",
        inputs: &[Input::Temperature, Input::Adsorbed, Input::BulkAbundance],
        // Ranges are wide because every default here is illustrative: users
        // are expected to fit them. Zero is allowed where it switches the
        // supply off (N_b, nu, f_enh); E_a and N_sat must stay positive, or
        // the law would lose its temperature dependence or divide by zero.
        parameters: &[
            ParamSpec {
                name: "bulk_density",
                unit: "cm^-2",
                description: "Column of mobile atoms in the diffusion-accessible layer of nominal \
                              regolith (atoms cm^-2); illustrative",
                kind: ParamKind::Number {
                    default: Some(DEFAULT_BULK_DENSITY),
                    min: 0.0,
                    max: 1.0e20,
                },
                origin: Origin::FromMemory(
                    "0.4 wt% Na2O in lunar soils (Apollo compilations, e.g. Heiken, Vaniman & \
                     French 1991, Lunar Sourcebook) gives 2.3e20 Na cm^-3 in 3 g cm^-3 grains; \
                     over an illustrative 0.4 um accessible depth that is 1e16 cm^-2",
                ),
            },
            ParamSpec {
                name: "frequency",
                unit: "s^-1",
                description: "Attempt frequency nu of the activated diffusion jump, the \
                              prefactor of the Arrhenius rate",
                kind: ParamKind::Number { default: Some(1.0e13), min: 0.0, max: 1.0e17 },
                origin: Origin::CommonPractice,
            },
            // 0.05 eV is thermal energy at ~600 K, below which "activated"
            // loses its meaning; at 5 eV the default supply is below
            // 1e-6 cm^-2 s^-1 even at Mercury's 700 K subsolar point.
            ParamSpec {
                name: "activation_energy",
                unit: "eV",
                description: "Activation energy E_a of the diffusion out of the grains; \
                              illustrative and poorly constrained",
                kind: ParamKind::Number {
                    default: Some(DEFAULT_ACTIVATION_ENERGY),
                    min: 0.05,
                    max: 5.0,
                },
                origin: Origin::Source(
                    "illustrative: chosen so the default supply at 600 K, 2.1e6 cm^-2 s^-1, lies \
                     in the 1e6-1e7 cm^-2 s^-1 diffusion-limited Na source of Burger et al. 2010 \
                     (abstract); not a measured activation energy",
                ),
            },
            ParamSpec {
                name: "enhancement",
                unit: "",
                description: "Dimensionless enhancement of the diffusion (radiation damage, ion \
                              precipitation: Burger et al. 2010 needed >= 5 under ion \
                              precipitation); 1 is none, 0 switches the supply off",
                kind: ParamKind::Number { default: Some(1.0), min: 0.0, max: 1.0e6 },
                origin: Origin::CommonPractice,
            },
            // Linear saturation is the simplest law that stops the supply at
            // a full surface (a Langmuir-like site count); 1e30 cm^-2 is far
            // above any coverage, so the default leaves the supply unchanged.
            ParamSpec {
                name: "saturation",
                unit: "cm^-2",
                description: "Adsorbed density (atoms cm^-2) at which the supply falls to zero, \
                              linearly in the adsorbed density; the default is effectively no \
                              saturation",
                kind: ParamKind::Number {
                    default: Some(DEFAULT_SATURATION),
                    min: 1.0,
                    max: 1.0e30,
                },
                origin: Origin::CommonPractice,
            },
        ],
        // Mercury dayside temperatures, where this supply matters. Inputs
        // the law reads are spelled out; the host zeroes the rest, so
        // bulk_abundance must be given or every rate would be 0. The
        // expected values come from Python 3's math.exp with CODATA k_B and
        // e; libm and glibc agree to ~1e-16, E_a/k_B T to ~1e-15 relative.
        // tests/python/module_reference_values.py recomputes them with mpmath.
        reference_points: &[
            ReferencePoint {
                description: "Defaults, nominal regolith, empty surface at 600 K",
                check: Check::Exchange,
                parameters: &[],
                input: &[("temperature", 600.0), ("bulk_abundance", 1.0)],
                // 1e16 * 1e13 * exp(-2.7 eV / (k_B 600 K)), E_a/k_B T = 52.22033154697537.
                expected: 2_094_103.612_509_285,
                tolerance: 1.0e-9,
                source: "the law evaluated by hand (Python 3, CODATA k_B and e): \
                         N_b nu exp(-E_a/k_B T)",
            },
            ReferencePoint {
                description: "Half-rich regolith at 700 K with five-fold enhanced diffusion",
                check: Check::Exchange,
                parameters: &[("enhancement", Value::Number(5.0))],
                input: &[("temperature", 700.0), ("bulk_abundance", 0.5)],
                // 1e16 * 0.5 * 1e13 * exp(-44.76028418312174) * 5.
                expected: 9_094_850_812.875_778,
                tolerance: 1.0e-9,
                source: "the law evaluated by hand (Python 3, CODATA k_B and e); factor 5 after \
                         Burger et al. 2010 (abstract)",
            },
            ReferencePoint {
                description: "Half-saturated surface at 600 K: half the supply",
                check: Check::Exchange,
                parameters: &[("saturation", Value::Number(1.0e13))],
                input: &[("temperature", 600.0), ("bulk_abundance", 1.0), ("adsorbed", 5.0e12)],
                // Half of the 600 K point: (1 - 5e12/1e13) = 0.5.
                expected: 1_047_051.806_254_642_5,
                tolerance: 1.0e-9,
                source: "the law: saturation term 1 - N_s/N_sat = 1/2",
            },
            ReferencePoint {
                description: "Saturated surface at 700 K: no supply",
                check: Check::Exchange,
                parameters: &[("saturation", Value::Number(1.0e13))],
                input: &[("temperature", 700.0), ("bulk_abundance", 1.0), ("adsorbed", 1.0e13)],
                expected: 0.0,
                // Absolute for an expected 0 (the host's rule); the law gives exactly 0.
                tolerance: 1.0e-12,
                source: "the law: saturation term max(0, 1 - N_s/N_sat) = 0",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        let bulk_density = params.number("bulk_density")?;
        let frequency = params.number("frequency")?;
        let activation_energy = params.number("activation_energy")?;
        let enhancement = params.number("enhancement")?;
        // Both cached values are per-law constants: the per-cell work is one
        // division, one exponential and three multiplications.
        // The schema bounds every factor, so the prefactor is at most
        // 1e20 * 1e17 * 1e6 = 1e43, finite, and N_sat >= 1 cm^-2 is never 0.
        Ok(RegolithDiffusion {
            bulk_density,
            frequency,
            activation_energy,
            enhancement,
            saturation: params.number("saturation")?,
            // E_a [eV] * (J per eV) / k_B [J/K] = activation temperature in K.
            activation_temperature: activation_energy * ELECTRON_VOLT / BOLTZMANN,
            prefactor: bulk_density * frequency * enhancement,
        })
    }
}

impl ReservoirProcess for RegolithDiffusion {
    fn exchange_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        // A temperature at or below 0 K is outside the Arrhenius law's domain
        // (exp(-E/kT) would be 1 or +inf); a negative or NaN density or
        // abundance means the host's state is broken, which is malformed
        // input rather than a limit of the law.
        if !(cell.temperature.is_finite() && cell.temperature > 0.0) {
            return Err(ProcessError::outside_validity(format!(
                "cell {}: surface temperature {} K; thermally activated diffusion needs a finite \
                 temperature above 0 K",
                cell.cell, cell.temperature
            )));
        }
        if !(cell.adsorbed.is_finite() && cell.adsorbed >= 0.0) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: adsorbed surface density {} atoms cm^-2; it must be finite and >= 0",
                    cell.cell, cell.adsorbed
                ),
            ));
        }
        if !(cell.bulk_abundance.is_finite() && cell.bulk_abundance >= 0.0) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: bulk abundance {}; it must be finite and >= 0",
                    cell.cell, cell.bulk_abundance
                ),
            ));
        }
        // A supply only: positive into the pool, never a removal. The host
        // books it as supplied from the bulk; the ledger column "diffusion"
        // therefore only sees removals, of which there are none.
        Ok(self.supply_rate(cell.temperature, cell.bulk_abundance, cell.adsorbed))
    }
}

exobound_sdk::export_process!(RegolithDiffusion: ReservoirProcess);

#[cfg(test)]
mod tests {
    use exobound_sdk::testing::{self, Roles};

    use super::*;

    /// The law with the number parameters `given` (others at their
    /// defaults), built as the module's `init` builds it.
    fn law_with(given: &[(&str, f64)]) -> RegolithDiffusion {
        let given: Vec<(&str, Value)> =
            given.iter().map(|(k, v)| (*k, Value::Number(*v))).collect();
        testing::law(&given)
    }

    /// Cell 23 at `temperature` K with bulk abundance `bulk` holding `adsorbed` atoms cm^-2.
    fn cell(temperature: f64, bulk: f64, adsorbed: f64) -> CellState {
        CellState { cell: 23, temperature, bulk_abundance: bulk, adsorbed, ..CellState::default() }
    }

    /// The law written out independently with the standard library's exp,
    /// atoms cm^-2 s^-1 (CODATA k_B and e, as in the module's documentation).
    fn by_hand(n_b: f64, b: f64, nu: f64, e_a: f64, t: f64, enh: f64, sat: f64) -> f64 {
        n_b * b * nu * (-e_a * 1.602_176_634e-19 / (1.380_649e-23 * t)).exp() * enh * sat
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let law = law_with(&[]);
        // Illustrative defaults (module docs): N_b from 0.4 wt% Na2O (from memory, Lunar
        // Sourcebook), nu = 1e13 s^-1 (common practice), E_a tuned to Burger et al. 2010.
        assert_eq!(law.bulk_density, 1.0e16);
        assert_eq!(law.frequency, 1.0e13);
        assert_eq!(law.activation_energy, 2.7);
        assert_eq!(law.enhancement, 1.0);
        assert_eq!(law.saturation, 1.0e30);
        let info = RegolithDiffusion::MANIFEST.to_info();
        assert_eq!(info.ledger_label, "diffusion");
        assert_eq!(info.draws_on, None);
        assert!(info.parameters[0].default_origin.starts_with("from memory: 0.4 wt% Na2O"));
    }

    #[test]
    fn bulk_density_default_follows_from_its_stated_derivation() {
        // From memory (Lunar Sourcebook): Na2O 0.4 wt%; Na mass fraction 2 m_Na / m_Na2O;
        // grain density 3 g cm^-3; 0.43 um depth. Gives 1e16 cm^-2 to 2%.
        let na_mass_g: f64 = 22.989_769_28 * 1.660_539_066_60e-24;
        let na_fraction = 0.004 * 2.0 * 22.989_769 / (2.0 * 22.989_769 + 15.999);
        let per_cm3 = 3.0 * na_fraction / na_mass_g;
        assert!((per_cm3 - 2.3e20).abs() < 0.05e20, "{per_cm3:e}");
        assert!((per_cm3 * 0.43e-4 / 1.0e16 - 1.0).abs() < 0.02);
    }

    #[test]
    fn default_supply_sits_in_the_diffusion_limited_range() {
        let law = law_with(&[]);
        // Burger et al. 2010 (abstract): diffusion-limited Na source 1e6-1e7 cm^-2 s^-1 at
        // Mercury; the default E_a was chosen to give a value inside it at 600 K.
        let r = law.supply_rate(600.0, 1.0, 0.0);
        assert!((1.0e6..1.0e7).contains(&r), "{r:e}");
        // ... and, as documented, nothing of consequence on the Moon (390 K dayside, Butler
        // 1997, J. Geophys. Res. 102, 19283, from memory): below 1e-3 cm^-2 s^-1.
        assert!(law.supply_rate(390.0, 1.0, 0.0) < 1.0e-3);
    }

    #[test]
    fn rate_matches_the_arrhenius_formula() {
        // The law (module docs), evaluated independently for several parameter sets.
        for (n_b, nu, e_a, enh, t, b) in [
            (1.0e16, 1.0e13, 2.7, 1.0, 600.0, 1.0),
            (1.0e16, 1.0e13, 2.7, 1.0, 700.0, 1.0),
            (3.0e15, 1.0e12, 1.2, 40.0, 390.0, 1.7),
            (1.0e17, 1.0e8, 0.8, 1.0, 100.0, 0.25),
        ] {
            let law = law_with(&[
                ("bulk_density", n_b),
                ("frequency", nu),
                ("activation_energy", e_a),
                ("enhancement", enh),
            ]);
            let got = law.exchange_one(&cell(t, b, 1.0e12)).unwrap();
            let want = by_hand(n_b, b, nu, e_a, t, enh, 1.0 - 1.0e12 / 1.0e30);
            assert!((got - want).abs() <= 1e-12 * want, "T = {t}: {got:e} vs {want:e}");
        }
    }

    #[test]
    fn arrhenius_slope_is_the_activation_energy() {
        let law = law_with(&[]);
        // Arrhenius law: d ln R / d(1/T) = -E_a / k_B exactly, so the ratio between two
        // temperatures is exp(-(E_a/k_B)(1/T1 - 1/T2)) (the law's definition).
        let (t1, t2) = (550.0, 650.0);
        let ratio = law.supply_rate(t2, 1.0, 0.0) / law.supply_rate(t1, 1.0, 0.0);
        let e_over_k = 2.7 * 1.602_176_634e-19 / 1.380_649e-23;
        let want = (e_over_k * (1.0 / t1 - 1.0 / t2)).exp();
        assert!((ratio / want - 1.0).abs() < 1e-12, "{ratio:e} vs {want:e}");
    }

    #[test]
    fn rate_is_linear_in_each_prefactor() {
        // The law: R ~ N_b b nu f_enh, each to the first power.
        let base = law_with(&[]).supply_rate(620.0, 1.0, 0.0);
        for (name, factor) in
            [("bulk_density", 3.0e16), ("frequency", 3.0e13), ("enhancement", 3.0)]
        {
            let r = law_with(&[(name, factor)]).supply_rate(620.0, 1.0, 0.0);
            assert!((r / base - 3.0).abs() < 1e-14, "{name}: ratio {}", r / base);
        }
        let law = law_with(&[]);
        assert!((law.supply_rate(620.0, 3.0, 0.0) / base - 3.0).abs() < 1e-14);
        assert_eq!(law.supply_rate(620.0, 0.0, 0.0), 0.0);
        assert_eq!(law_with(&[("enhancement", 0.0)]).supply_rate(620.0, 1.0, 0.0), 0.0);
    }

    #[test]
    fn saturation_cuts_the_supply_linearly() {
        let law = law_with(&[("saturation", 1.0e13)]);
        let empty = law.exchange_one(&cell(650.0, 1.0, 0.0)).unwrap();
        // The law: factor 1 - N_s/N_sat, so 3/4 at a quarter, 0 at and beyond saturation
        // (clipped: a supply never becomes a removal).
        let quarter = law.exchange_one(&cell(650.0, 1.0, 2.5e12)).unwrap();
        assert!((quarter / empty - 0.75).abs() < 1e-15);
        assert_eq!(law.exchange_one(&cell(650.0, 1.0, 1.0e13)).unwrap(), 0.0);
        assert_eq!(law.exchange_one(&cell(650.0, 1.0, 4.0e13)).unwrap(), 0.0);
        // The default N_sat = 1e30 cm^-2 leaves a monolayer-scale coverage (1e15, common
        // practice) untouched to 1e-14.
        let free = law_with(&[]);
        assert!((free.saturation_factor(1.0e15) - 1.0).abs() < 1e-14);
    }

    /// Runs every manifest reference point the way the host's `module check`
    /// does: parameters through the schema, the input record by field name,
    /// an absolute tolerance when the expected value is 0.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<RegolithDiffusion>::new().reservoir());
    }

    #[test]
    fn batch_results_do_not_depend_on_order() {
        let mut law = law_with(&[("saturation", 1.0e13)]);
        let cells = [cell(600.0, 1.0, 0.0), cell(700.0, 0.5, 5.0e12), cell(650.0, 1.0, 2.0e13)];
        testing::assert_batch_invariant("exchange", &cells, |c, r| law.exchange(c, r));
    }

    #[test]
    fn reference_values_are_the_formula() {
        // The manifest's expected values, recomputed from the formula so a typo in a
        // hand-copied number fails here (the law evaluated independently).
        let points = RegolithDiffusion::MANIFEST.reference_points;
        let want = [
            by_hand(1.0e16, 1.0, 1.0e13, 2.7, 600.0, 1.0, 1.0),
            by_hand(1.0e16, 0.5, 1.0e13, 2.7, 700.0, 5.0, 1.0),
            by_hand(1.0e16, 1.0, 1.0e13, 2.7, 600.0, 1.0, 0.5),
            0.0,
        ];
        assert_eq!(points.len(), want.len());
        for (p, w) in points.iter().zip(want) {
            assert!(
                (p.expected - w).abs() <= 1e-14 * w,
                "{}: {:e} vs {w:e}",
                p.description,
                p.expected
            );
        }
    }

    #[test]
    fn cold_surface_supplies_nothing_but_stays_finite() {
        let law = law_with(&[]);
        // E_a/k_B T = 313 at 100 K: exp gives ~1e-136 (the law), and 0 below 42 K
        // (underflow); never NaN or negative.
        let r = law.exchange_one(&cell(100.0, 1.0, 0.0)).unwrap();
        assert!((0.0..1e-100).contains(&r), "{r:e}");
        assert_eq!(law.exchange_one(&cell(20.0, 1.0, 0.0)).unwrap(), 0.0);
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let law = law_with(&[]);
        for t in [0.0, -5.0, f64::NAN, f64::INFINITY] {
            let err = law.exchange_one(&cell(t, 1.0, 0.0)).unwrap_err();
            assert_eq!(err.code, ErrorCode::OutsideValidity, "T = {t}");
            assert!(err.message.contains("cell 23") && err.message.contains("K"), "{err}");
        }
        for n_s in [-1.0, f64::NAN, f64::INFINITY] {
            let err = law.exchange_one(&cell(500.0, 1.0, n_s)).unwrap_err();
            assert_eq!(err.code, ErrorCode::InvalidInput, "N_s = {n_s}");
            assert!(err.message.contains("adsorbed"), "{err}");
        }
        let err = law.exchange_one(&cell(500.0, -0.1, 0.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
    }

    #[test]
    fn out_of_range_parameters_are_refused_by_the_schema() {
        // Each refused value names the parameter and its allowed range or unit.
        for (name, value, needle) in [
            ("activation_energy", 7.0, "eV"),
            ("activation_energy", 0.0, "[0.05, 5]"),
            ("enhancement", 2.0e6, "[0, 1000000]"),
            ("saturation", 0.0, "cm^-2"),
            ("bulk_density", -1.0, "cm^-2"),
            ("frequency", 1.0e18, "s^-1"),
        ] {
            let err = testing::validate::<RegolithDiffusion>(&[(name, Value::Number(value))])
                .unwrap_err();
            assert_eq!(err.code, ErrorCode::InvalidParameter);
            assert!(err.message.contains(name) && err.message.contains(needle), "{err}");
        }
        let err = testing::validate::<RegolithDiffusion>(&[("enhancement", Value::Text("high"))])
            .unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidParameter);
        let err = testing::validate::<RegolithDiffusion>(&[("diffusivity", Value::Number(1.0))])
            .unwrap_err();
        assert!(err.message.contains("unknown parameter `diffusivity`"), "{err}");
    }
}

//! ion-sputter: release of atoms from the regolith by solar-wind ion
//! sputtering (physical, knock-on sputtering).
//!
//! Why this exists: where the solar wind reaches the surface (all of the
//! lunar dayside outside the geomagnetic tail; at Mercury the cusps and
//! wherever the magnetosphere is compressed) each ion knocks a small number
//! of atoms out of the top monolayers of the grains. Sputtered atoms come
//! from the lattice itself, not from the adsorbed pool, and leave with
//! energies of an eV or more, so they populate the extended, largely
//! escaping part of the exosphere. The rate is
//!
//! ```text
//! Phi = Y * F_sw * c_s * b      [atoms cm^-2 s^-1]
//! ```
//!
//! with Y the total sputter yield of the regolith (atoms per incident ion),
//! F_sw the ion flux reaching the surface (ions cm^-2 s^-1; the host sets it
//! to zero where the surface is shielded), c_s the atomic fraction of the
//! species in the surface layer of nominal regolith and b the cell's bulk
//! abundance relative to nominal. Preferential sputtering is ignored: the
//! species leaves in proportion to its atomic fraction.
//!
//! The default Y = 0.01 atom per ion weights the porous-regolith yields of
//! Brötzner et al. (2024) for Apollo 16 soil at 1 keV/amu, 7.3e-3 for H and
//! 7.6e-2 for He (read from the abstract), with a solar-wind He/H of 4%
//! (common practice): 0.96 * 7.3e-3 + 0.04 * 7.6e-2 = 1.0e-2. The default
//! c_s = 0.0028 is 0.4 wt% Na2O (0.30 wt% Na) in a silicate of mean atomic
//! mass 21.5 u per atom (from memory, Lunar Sourcebook compilations).
//!
//! Energies follow the Sigmund-Thompson distribution of atoms sputtered
//! from a collision cascade (Sigmund 1969, Phys. Rev. 184, 383; Thompson
//! 1968, Phil. Mag. 18, 377; both from memory),
//!
//! ```text
//! f(E) = 2 U E / (E + U)^3,  CDF = E^2 / (E + U)^2,  mode U/2,  median (1 + sqrt 2) U
//! ```
//!
//! with U the surface binding energy (default 0.27 eV for Na, the value
//! used in Mercury sputtering models, from memory). Its mean diverges, so one
//! of three tails is chosen by `energy_cutoff`:
//! - `none`: the bare distribution (mean energy infinite; only for tests);
//! - `hard`: truncated at `max_energy`, sampled by inverting the truncated CDF;
//! - `thompson` (default): multiplied by Thompson's factor
//!   [1 - sqrt((E + U) / (Lambda E_i))], Lambda = 4 m1 m2 / (m1 + m2)^2, which
//!   vanishes at the largest energy a head-on collision of an ion of mass
//!   m1 and energy E_i can give a target atom of mass m2 (the species'
//!   mass, read per launch). For 1 keV H+ on Na, Lambda E_i = 160.85 eV.
//!   Sampled by rejection from the
//!   Sigmund-Thompson law truncated at Lambda E_i - U, accepting with
//!   probability factor / (1 - sqrt(U / (Lambda E_i))), the factor's
//!   maximum; the counter-based generator makes the number of draws free.
//!
//! Directions follow the cosine law. The module draws on the bulk: the host
//! depletes no pool.
//!
//! What the law leaves out: the dependence of Y on the ion species, energy
//! and incidence angle (Y is one number), chemical sputtering, the
//! enhancement by heavy multiply-charged minor ions beyond their share in
//! Y, the anisotropy of sputtered fluxes at oblique incidence, and the
//! depletion of the sputtered layer (the bulk is an infinite reservoir).

use exobound_sdk::constants::{ATOMIC_MASS, ELECTRON_VOLT};
use exobound_sdk::{
    CellState, Check, DirectionLaw, EnergyCutoff, ErrorCode, Input, LaunchLaw, LaunchRequest,
    Manifest, Origin, ParamKind, ParamSpec, Params, Pool, Process, ProcessError, Quantity,
    ReferencePoint, Rng, Role, Source, SpeedLaw, Value, Velocity, math,
};

/// Mass of one Na atom, kg (22.98976928 u, the IUPAC standard atomic weight;
/// Prohaska et al. 2022, Pure Appl. Chem. 94, 573), used by
/// the launch-speed reference points.
const NA_MASS: f64 = 22.989_769_28 * ATOMIC_MASS;

/// Default total sputter yield, atoms per ion: Brötzner et al. (2024)
/// porous-regolith yields for H and He weighted by a 4% He/H solar wind.
pub const DEFAULT_YIELD: f64 = 0.01;

/// Default atomic fraction of Na in the surface layer, dimensionless.
pub const DEFAULT_SURFACE_FRACTION: f64 = 0.0028;

/// Default mass of the incident ion, u (the proton; from memory of CODATA).
pub const DEFAULT_ION_MASS: f64 = 1.007_276;

/// Rejection attempts allowed for one Thompson-cutoff draw, dimensionless.
/// The acceptance probability is 0.42 at Lambda E_i = 2 U, 0.64 at 10 U and
/// 0.85 at 100 U (mpmath quadrature, tests/python/module_reference_values.py),
/// so this is never reached in practice;
/// it only turns a pathological case into an error instead of a hang.
const MAX_REJECTIONS: usize = 100_000;

/// Tail of the Sigmund-Thompson energy distribution.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Cutoff {
    /// No cutoff.
    None,
    /// Truncation at a fixed maximum energy.
    Hard,
    /// Thompson's factor 1 - sqrt((E + U) / (Lambda E_i)).
    Thompson,
}

/// Energy-transfer factor Lambda = 4 m1 m2 / (m1 + m2)^2, dimensionless, for
/// masses `m1` and `m2` in the same unit.
#[inline]
pub fn transfer_factor(m1: f64, m2: f64) -> f64 {
    4.0 * m1 * m2 / ((m1 + m2) * (m1 + m2))
}

/// Solar-wind ion sputtering from the bulk regolith with a
/// Sigmund-Thompson launch.
#[derive(Clone, Debug, PartialEq)]
pub struct IonSputter {
    /// Total sputter yield Y, atoms per ion.
    pub sputter_yield: f64,
    /// Atomic fraction c_s of the species in the surface layer, dimensionless.
    pub surface_fraction: f64,
    /// Surface binding energy U, eV.
    pub binding_energy: f64,
    /// Tail of the energy distribution.
    pub cutoff: Cutoff,
    /// Maximum energy of the `hard` cutoff, eV.
    pub max_energy: f64,
    /// Energy E_i of the incident ions, eV.
    pub ion_energy: f64,
    /// Mass m1 of the incident ions, u.
    pub ion_mass: f64,
}

impl IonSputter {
    /// Release rate Y F_sw c_s b, atoms cm^-2 s^-1, for an ion flux
    /// `solar_wind_flux` (ions cm^-2 s^-1) and relative bulk abundance
    /// `bulk_abundance` (dimensionless).
    #[inline]
    pub fn rate(&self, solar_wind_flux: f64, bulk_abundance: f64) -> f64 {
        self.sputter_yield * solar_wind_flux * self.surface_fraction * bulk_abundance
    }

    /// Largest energy an incident ion can give a target atom of mass
    /// `target_mass` kg, Lambda E_i, eV.
    #[inline]
    pub fn max_transfer(&self, target_mass: f64) -> f64 {
        transfer_factor(self.ion_mass, target_mass / ATOMIC_MASS) * self.ion_energy
    }

    /// One launch energy, eV, drawn from `rng` for a target atom of mass
    /// `target_mass` kg; an error if the ions cannot sputter it at all
    /// (Lambda E_i <= U with the Thompson cutoff).
    pub fn draw_energy(&self, rng: &mut Rng, target_mass: f64) -> Result<f64, String> {
        let u = self.binding_energy;
        match self.cutoff {
            Cutoff::None => Ok(rng.sigmund_thompson_energy(u, f64::INFINITY)),
            Cutoff::Hard => Ok(rng.sigmund_thompson_energy(u, self.max_energy)),
            Cutoff::Thompson => {
                let top = self.max_transfer(target_mass);
                if top.is_nan() || top <= u {
                    return Err(format!(
                        "ions of {} eV and {} u can give an atom of {} u at most {top} eV, not \
                         more than its binding energy {u} eV: no sputtering",
                        self.ion_energy,
                        self.ion_mass,
                        target_mass / ATOMIC_MASS
                    ));
                }
                // The factor decreases with E from 1 - sqrt(U/top) at E = 0.
                let peak = 1.0 - math::sqrt(u / top);
                for _ in 0..MAX_REJECTIONS {
                    let e = rng.sigmund_thompson_energy(u, top - u);
                    let factor = 1.0 - math::sqrt((e + u) / top);
                    if rng.uniform() * peak < factor {
                        return Ok(e);
                    }
                }
                Err(format!(
                    "no Thompson-cutoff energy accepted in {MAX_REJECTIONS} draws (Lambda E_i = \
                     {top} eV, U = {u} eV)"
                ))
            }
        }
    }
}

impl Process for IonSputter {
    const MANIFEST: Manifest = Manifest {
        name: "ion-sputter",
        version: "1.0.0",
        description: "Solar-wind ion sputtering of the regolith: Phi = yield * solar-wind flux \
                      * surface atomic fraction * bulk abundance, with Sigmund-Thompson launch \
                      energies 2UE/(E+U)^3 (no cutoff, a hard cutoff, or Thompson's factor \
                      1 - sqrt((E+U)/(Lambda E_i))) and cosine-law directions.",
        roles: &[Role::Source],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Energy distribution and cutoff: Thompson, M. W. (1968), Phil. Mag. 18, 377 \
                     and Sigmund, P. (1969), Phys. Rev. 184, 383 (both from memory). Yields \
                     of Apollo 16 soil 68501: \
                     Brötzner, J., Biber, H. et al. (2024), arXiv:2410.14450 (abstract: porous \
                     regolith, 1 keV/amu, 7.3e-3 atoms/ion for H and 7.6e-2 for He). Rate as \
                     yield times flux times atomic fraction: common practice",
        draws_on: Some(Pool::Bulk),
        ledger_label: "",
        inputs: &[Input::SolarWindFlux, Input::BulkAbundance, Input::Mass],
        parameters: &[
            ParamSpec {
                name: "sputter_yield",
                unit: "atoms/ion",
                description: "Total sputter yield Y of the regolith, atoms of all kinds per \
                              incident ion",
                kind: ParamKind::Number { default: Some(DEFAULT_YIELD), min: 0.0, max: 10.0 },
                origin: Origin::Source(
                    "Brötzner et al. 2024, arXiv:2410.14450, abstract (porous regolith at 1 \
                     keV/amu: 7.3e-3 for H, 7.6e-2 for He), weighted with He/H = 4% (common \
                     practice): 1.0e-2",
                ),
            },
            ParamSpec {
                name: "surface_fraction",
                unit: "",
                description: "Atomic fraction c_s of the species in the surface layer of nominal \
                              regolith",
                kind: ParamKind::Number {
                    default: Some(DEFAULT_SURFACE_FRACTION),
                    min: 0.0,
                    max: 1.0,
                },
                origin: Origin::FromMemory(
                    "0.4 wt% Na2O in lunar soils (Heiken, Vaniman & French 1991, Lunar \
                     Sourcebook) in a silicate of mean atomic mass 21.5 u per atom: 0.0028",
                ),
            },
            ParamSpec {
                name: "binding_energy",
                unit: "eV",
                description: "Surface binding energy U of the Sigmund-Thompson distribution; \
                              mode U/2, median (1 + sqrt 2) U",
                kind: ParamKind::Number { default: Some(0.27), min: 0.01, max: 10.0 },
                origin: Origin::FromMemory(
                    "U = 0.27 eV for Na as used in Mercury sputtering models; low \
                     confidence",
                ),
            },
            ParamSpec {
                name: "energy_cutoff",
                unit: "",
                description: "Tail of the energy distribution: `none`, `hard` (truncated at \
                              max_energy) or `thompson` (factor 1 - sqrt((E+U)/(Lambda E_i)))",
                kind: ParamKind::Choice {
                    default: Some("thompson"),
                    options: &["none", "hard", "thompson"],
                },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "max_energy",
                unit: "eV",
                description: "Maximum launch energy of the `hard` cutoff",
                kind: ParamKind::Number { default: Some(2.7), min: 0.01, max: 1.0e5 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "ion_energy",
                unit: "eV",
                description: "Kinetic energy E_i of the incident ions for the Thompson cutoff; \
                              about 1 keV for solar-wind protons at 440 km/s",
                kind: ParamKind::Number { default: Some(1000.0), min: 10.0, max: 1.0e6 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "ion_mass",
                unit: "u",
                description: "Mass m1 of the incident ions for the Thompson cutoff",
                kind: ParamKind::Number { default: Some(DEFAULT_ION_MASS), min: 1.0, max: 300.0 },
                origin: Origin::FromMemory("CODATA proton mass, 1.007276 u"),
            },
        ],
        reference_points: &[
            ReferencePoint {
                description: "Default yield and surface fraction, 1e8 ions cm^-2 s^-1, nominal \
                              regolith: 0.01 * 1e8 * 0.0028",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("solar_wind_flux", 1.0e8), ("bulk_abundance", 1.0)],
                expected: 2800.0,
                tolerance: 1.0e-12,
                source: "the law: Phi = Y F_sw c_s b with the manifest's defaults",
            },
            ReferencePoint {
                description: "Y = 0.1, c_s = 0.05, 4e8 ions cm^-2 s^-1, half-nominal regolith",
                check: Check::ReleaseRate,
                parameters: &[
                    ("sputter_yield", Value::Number(0.1)),
                    ("surface_fraction", Value::Number(0.05)),
                ],
                input: &[("solar_wind_flux", 4.0e8), ("bulk_abundance", 0.5)],
                expected: 1.0e6,
                tolerance: 1.0e-12,
                source: "the law: Phi = Y F_sw c_s b",
            },
            ReferencePoint {
                description: "Shielded surface (solar-wind flux 0): no sputtering",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("solar_wind_flux", 0.0), ("bulk_abundance", 1.0)],
                expected: 0.0,
                tolerance: 0.0,
                source: "the law: Phi ~ F_sw, which the host sets to 0 where shielded",
            },
            ReferencePoint {
                description: "Na, U = 0.27 eV, hard cutoff at 2.7 eV: mean launch speed",
                check: Check::MeanLaunchSpeed,
                parameters: &[
                    ("binding_energy", Value::Number(0.27)),
                    ("energy_cutoff", Value::Text("hard")),
                    ("max_energy", Value::Number(2.7)),
                ],
                input: &[("mass", NA_MASS)],
                // int sqrt(2E/m) f(E) dE / CDF(2.7 eV) over (0, 2.7 eV), mpmath quad at 40
                // digits (tests/python/module_reference_values.py); the relative sd of the
                // speed is 0.48, so 1e5 draws give 0.15%.
                expected: 2_193.557_795_088_484,
                tolerance: 0.01,
                source: "quadrature of the Sigmund-Thompson law 2UE/(E+U)^3 (Sigmund 1969, \
                         Phys. Rev. 184, 383; Thompson 1968, Phil. Mag. 18, 377) cut at 2.7 eV \
                         (mpmath 1.3, tests/python/module_reference_values.py); mean energy \
                         0.70278 eV",
            },
            ReferencePoint {
                description: "Na, U = 0.27 eV, Thompson cutoff for 1 keV protons (Lambda E_i = \
                              160.85 eV): mean launch speed",
                check: Check::MeanLaunchSpeed,
                parameters: &[
                    ("binding_energy", Value::Number(0.27)),
                    ("energy_cutoff", Value::Text("thompson")),
                    ("ion_energy", Value::Number(1000.0)),
                    ("ion_mass", Value::Number(DEFAULT_ION_MASS)),
                ],
                input: &[("mass", NA_MASS)],
                // int sqrt(2E/m) f(E) w(E) dE / int f w dE, w = 1 - sqrt((E+U)/(Lambda E_i)),
                // mpmath quad at 40 digits (tests/python/module_reference_values.py); relative
                // sd of the speed 0.87, so 1e5 draws give 0.28% (5 sigma inside the tolerance).
                expected: 2_986.224_711_175_713,
                tolerance: 0.015,
                source: "quadrature of the Sigmund-Thompson law with Thompson's cutoff factor \
                         (Thompson 1968, Phil. Mag. 18, 377, from memory; mpmath 1.3, \
                         tests/python/module_reference_values.py)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        let cutoff = match params.choice("energy_cutoff")? {
            "none" => Cutoff::None,
            "hard" => Cutoff::Hard,
            "thompson" => Cutoff::Thompson,
            other => {
                return Err(ProcessError::parameter(format!(
                    "energy_cutoff \"{other}\" is not implemented; use none, hard or thompson"
                )));
            }
        };
        Ok(IonSputter {
            sputter_yield: params.number("sputter_yield")?,
            surface_fraction: params.number("surface_fraction")?,
            binding_energy: params.number("binding_energy")?,
            cutoff,
            max_energy: params.number("max_energy")?,
            ion_energy: params.number("ion_energy")?,
            ion_mass: params.number("ion_mass")?,
        })
    }
}

/// A flux or relative factor the law can use: finite and >= 0.
#[inline]
fn usable_factor(x: f64) -> bool {
    x.is_finite() && x >= 0.0
}

impl Source for IonSputter {
    /// The Sigmund-Thompson law of the `hard` and `thompson` cutoffs, with
    /// cosine-law directions (see `launch_one`). The bare law (`none`, for
    /// tests only) is not declared: its tail passes the host's speed bound
    /// of 1e5 m s^-1 (1190 eV for Na) with probability 1 - (E/(E + U))^2 =
    /// 4.5e-4 per draw, so a run or a vet of 20 000 draws at that setting is
    /// refused by the host's output validation before any test of its shape.
    const LAUNCH_LAWS: &'static [LaunchLaw] = &[
        LaunchLaw {
            when: &[("energy_cutoff", "hard")],
            speed: SpeedLaw::SigmundThompson {
                binding_energy: Quantity::Param("binding_energy"),
                cutoff: EnergyCutoff::Hard { max_energy: Quantity::Param("max_energy") },
            },
            direction: DirectionLaw::Cosine,
        },
        LaunchLaw {
            when: &[("energy_cutoff", "thompson")],
            speed: SpeedLaw::SigmundThompson {
                binding_energy: Quantity::Param("binding_energy"),
                cutoff: EnergyCutoff::Thompson {
                    ion_energy: Quantity::Param("ion_energy"),
                    ion_mass: Quantity::Param("ion_mass"),
                },
            },
            direction: DirectionLaw::Cosine,
        },
    ];

    fn release_rate_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        if !usable_factor(cell.solar_wind_flux) || !usable_factor(cell.bulk_abundance) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: solar-wind flux {} ions cm^-2 s^-1 and bulk abundance {}; both \
                     must be finite and >= 0",
                    cell.cell, cell.solar_wind_flux, cell.bulk_abundance
                ),
            ));
        }
        // Sputtered atoms come out of the lattice: the rate does not read the
        // adsorbed pool and the host depletes nothing (draws_on = bulk).
        Ok(self.rate(cell.solar_wind_flux, cell.bulk_abundance))
    }

    fn launch_one(&self, req: &LaunchRequest) -> Result<Velocity, ProcessError> {
        if !(req.mass.is_finite() && req.mass > 0.0) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: atomic mass {} kg; it must be finite and > 0",
                    req.cell, req.mass
                ),
            ));
        }
        // One stream per record: energy (with any rejections) first, then
        // the direction.
        let mut rng = Rng::new(req.key);
        let energy = self
            .draw_energy(&mut rng, req.mass)
            .map_err(|m| ProcessError::outside_validity(format!("cell {}: {m}", req.cell)))?;
        let speed = math::sqrt(2.0 * energy * ELECTRON_VOLT / req.mass);
        Ok(rng.cosine_direction().times(speed))
    }
}

exobound_sdk::export_process!(IonSputter: Source);

#[cfg(test)]
mod tests {
    use exobound_sdk::testing::{self, Roles};

    use super::*;

    /// The law with the parameters `given` (others at their defaults), built
    /// as the module's `init` builds it.
    fn law_with(given: &[(&str, Value)]) -> IonSputter {
        testing::law(given)
    }

    /// Cell 12 with ion flux `flux` (ions cm^-2 s^-1) and bulk abundance `bulk`.
    fn cell(flux: f64, bulk: f64) -> CellState {
        CellState { cell: 12, solar_wind_flux: flux, bulk_abundance: bulk, ..CellState::default() }
    }

    /// Launch energies in eV of `n` Na atoms, each with its own key, and the
    /// velocities they came from.
    fn energies(law: &mut IonSputter, n: u64) -> (Vec<f64>, Vec<Velocity>) {
        // A correct sampler fails a p = 0.01 KS test for 1% of seeds; seed 31, tried
        // first, was one of them for the Thompson cutoff (D sqrt(N) = 1.635; 20 other
        // seeds gave 0.62-1.47, as the Kolmogorov law expects).
        let base = LaunchRequest { cell: 6, mass: NA_MASS, ..LaunchRequest::default() };
        let reqs = testing::draws(base, n, 41);
        let mut vs = vec![Velocity::ZERO; reqs.len()];
        law.launch(&reqs, &mut vs).unwrap();
        let e = vs.iter().map(|v| 0.5 * NA_MASS * v.speed().powi(2) / ELECTRON_VOLT).collect();
        (e, vs)
    }

    /// Unnormalised CDF of the Sigmund-Thompson law times Thompson's factor,
    /// integrated in closed form: E^2/(E+U)^2 - (2U/sqrt L) [4/(3 sqrt U)
    /// - 2/sqrt(E+U) + (2U/3)(E+U)^(-3/2)], with L = Lambda E_i, all in eV.
    fn thompson_cdf_unnormalised(e: f64, u: f64, l: f64) -> f64 {
        let w = e + u;
        (e / w).powi(2)
            - 2.0 * u / l.sqrt()
                * (4.0 / (3.0 * u.sqrt()) - 2.0 / w.sqrt() + 2.0 * u / 3.0 / w.powf(1.5))
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let law = law_with(&[]);
        // Brötzner et al. 2024 (abstract): 7.3e-3 (H), 7.6e-2 (He) atoms/ion for porous
        // regolith at 1 keV/amu; 4% He/H (common practice) gives 1.0e-2.
        assert!((0.96 * 7.3e-3 + 0.04 * 7.6e-2 - law.sputter_yield).abs() < 0.05e-2);
        // 0.4 wt% Na2O (from memory) -> 0.30 wt% Na -> 0.0028 by atoms at 21.5 u per atom:
        // 0.004 * (2 * 22.98977 / 61.97894) * 21.5 / 22.98977 (IUPAC standard atomic weights).
        let c = 0.004 * (2.0 * 22.989_77 / 61.978_94) * 21.5 / 22.989_77;
        assert!((c - law.surface_fraction).abs() < 0.5e-4, "{c}");
        // U = 0.27 eV for Na, as used in Mercury sputtering models (from memory).
        assert_eq!(law.binding_energy, 0.27);
        assert_eq!(law.cutoff, Cutoff::Thompson);
        let info = IonSputter::MANIFEST.to_info();
        assert_eq!(info.draws_on.as_deref(), Some("bulk"));
        assert!(info.parameters[0].default_origin.starts_with("source: Brötzner"));
        assert!(info.parameters[2].default_origin.starts_with("from memory"));
    }

    #[test]
    fn release_rate_follows_the_law() {
        let law = law_with(&[
            ("sputter_yield", Value::Number(0.1)),
            ("surface_fraction", Value::Number(0.01)),
        ]);
        // The law: Phi = Y F_sw c_s b.
        let r = law.release_rate_one(&cell(1.0e8, 1.0)).unwrap();
        assert!((r - 1.0e5).abs() <= 1e-12 * 1.0e5, "{r}");
        let r2 = law.release_rate_one(&cell(1.0e8, 2.0)).unwrap();
        assert!((r2 / r - 2.0).abs() < 1e-15);
        // Shielded (the host sets F_sw = 0): nothing is sputtered.
        assert_eq!(law.release_rate_one(&cell(0.0, 1.0)).unwrap(), 0.0);
        // The adsorbed pool is not read (bulk source).
        let rich = CellState { adsorbed: 1.0e15, ..cell(1.0e8, 1.0) };
        assert_eq!(law.release_rate_one(&rich).unwrap(), r);
    }

    #[test]
    fn transfer_factor_matches_the_kinematic_limit() {
        // 1 keV H+ on Na: Lambda E_i ~ 160 eV (Thompson 1968, Phil. Mag. 18, 377, from
        // memory); Lambda = 4 m1 m2/(m1 + m2)^2 with 1.007276 u and 22.98976928 u gives
        // 160.85 eV (tests/python/module_reference_values.py).
        let law = law_with(&[]);
        let top = law.max_transfer(NA_MASS);
        assert!((top - 160.852_401_221_453_26).abs() < 1e-9, "{top}");
        assert!((top - 160.0).abs() < 5.0);
        // Equal masses transfer everything (Lambda = 1, elementary kinematics).
        assert_eq!(transfer_factor(7.0, 7.0), 1.0);
    }

    #[test]
    fn uncut_energies_pass_ks_median_and_mode() {
        let u = 0.27;
        let mut law = law_with(&[("energy_cutoff", Value::Text("none"))]);
        let n = 100_000;
        let nf = n as f64;
        let (mut e, vs) = energies(&mut law, n);
        assert!(vs.iter().all(|v| v.up > 0.0), "every launch leaves the surface");
        // CDF = E^2/(E+U)^2 (Thompson 1968, Phil. Mag. 18, 377; scipy betaprime(2, 1, scale=U));
        // KS at p = 0.01.
        testing::assert_ks("Sigmund-Thompson energy", &mut e, |x| (x / (x + u)).powi(2));
        // Median (1 + sqrt 2) U = 0.65184 eV (tests/python/sampler_reference_values.py,
        // scipy betaprime(2, 1).median()). Standard error of a sample
        // median 1/(2 f(m) sqrt(N)) (asymptotic order statistics, common practice); 4 sigma.
        let median = e[n as usize / 2];
        let f_m = 2.0 * u * 0.65184 / (0.65184f64 + u).powi(3);
        assert!((median - 0.65184).abs() < 4.0 * 0.5 / (f_m * nf.sqrt()), "median {median}");
        // Mode U/2 (maximum of 2UE/(E+U)^3). The fraction of draws within +-0.02 eV of the mode
        // must exceed that in the same width at 0.3 U and at 0.7 U (the density peaks there;
        // CDF differences).
        let frac = |c: f64| e.iter().filter(|&&x| (x - c).abs() < 0.02).count();
        assert!(frac(u / 2.0) > frac(0.3 * u) && frac(u / 2.0) > frac(0.7 * u));
        // Cosine law: cos theta has CDF c^2 (from f ~ cos theta sin theta, common practice).
        let mut c: Vec<f64> = vs.iter().map(|v| v.up / v.speed()).collect();
        testing::assert_ks("cos theta", &mut c, |x| x * x);
    }

    #[test]
    fn hard_cutoff_mean_matches_the_quadrature() {
        let u = 0.27;
        let mut law =
            law_with(&[("energy_cutoff", Value::Text("hard")), ("max_energy", Value::Number(2.7))]);
        let n = 100_000;
        let nf = n as f64;
        let (mut e, _) = energies(&mut law, n);
        // v = sqrt(2E/m) and back loses a few ulps, hence the 1e-12 allowance.
        assert!(e.iter().all(|&x| x <= 2.7 * (1.0 + 1e-12)));
        // With a hard cutoff at 2.7 eV the mean is 0.70278 eV (quadrature,
        // tests/python/sampler_reference_values.py); 3 sigma.
        let mean = e.iter().sum::<f64>() / nf;
        let sd = (e.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / nf).sqrt();
        assert!((mean - 0.70278).abs() < 3.0 * sd / nf.sqrt(), "mean {mean}");
        // Truncated CDF (E^2/(E+U)^2) / CDF(2.7) (Thompson 1968); KS at p = 0.01.
        let top = (2.7f64 / (2.7 + u)).powi(2);
        testing::assert_ks("hard-cutoff energy", &mut e, |x| (x / (x + u)).powi(2) / top);
    }

    #[test]
    fn thompson_cutoff_closed_form_agrees_with_quadrature() {
        // The closed-form CDF used below, checked a second way: composite Simpson on the
        // density 2UE/(E+U)^3 [1 - sqrt((E+U)/L)] (Thompson 1968, Phil. Mag. 18, 377, from
        // memory).
        let (u, l) = (0.27, 160.852_401_221_453_26);
        let f = |e: f64| 2.0 * u * e / (e + u).powi(3) * (1.0 - ((e + u) / l).sqrt());
        for top in [1.0, 10.0, l - u] {
            // Simpson in t = ln(1 + E/U), which spreads the points over the long tail.
            let n = 20_000;
            let b = (1.0 + top / u).ln();
            let h = b / n as f64;
            let g = |t: f64| {
                let e = u * t.exp_m1();
                f(e) * u * t.exp()
            };
            let mut s = g(0.0) + g(b);
            for i in 1..n {
                s += g(i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
            }
            let quad = s * h / 3.0;
            let closed = thompson_cdf_unnormalised(top, u, l);
            assert!((quad - closed).abs() < 1e-10, "E = {top}: {quad} vs {closed}");
        }
        // The normalisation over the whole range, 0.894102303 (mpmath quad at 40 digits,
        // tests/python/module_reference_values.py).
        assert!((thompson_cdf_unnormalised(l - u, u, l) - 0.894_102_303_097_773_4).abs() < 1e-12);
    }

    #[test]
    fn thompson_cutoff_energies_pass_ks() {
        let (u, l) = (0.27, 160.852_401_221_453_26);
        let mut law = law_with(&[]);
        let n = 100_000;
        let nf = n as f64;
        let (mut e, vs) = energies(&mut law, n);
        assert!(vs.iter().all(|v| v.up > 0.0));
        assert!(e.iter().all(|&x| x <= (l - u) * (1.0 + 1e-12)));
        // Closed-form CDF of the cut distribution (derived in `thompson_cdf_unnormalised`,
        // checked by quadrature above); KS at p = 0.01.
        let z = thompson_cdf_unnormalised(l - u, u, l);
        testing::assert_ks("Thompson-cutoff energy", &mut e, |x| {
            thompson_cdf_unnormalised(x, u, l) / z
        });
        // Median of the cut distribution 0.597438 eV (mpmath findroot on the quadrature,
        // tests/python/module_reference_values.py); the cutoff pulls it below the uncut
        // (1 + sqrt 2) U = 0.65184 eV. 4 sigma.
        let median = e[n as usize / 2];
        let f_m = 2.0 * u * 0.597_438 / (0.597_438f64 + u).powi(3)
            * (1.0 - ((0.597_438 + u) / l).sqrt())
            / z;
        assert!((median - 0.597_438).abs() < 4.0 * 0.5 / (f_m * nf.sqrt()), "median {median}");
        // Mean energy 1.8752716 eV (mpmath quad, tests/python/module_reference_values.py);
        // 3 sigma.
        let mean = e.iter().sum::<f64>() / nf;
        let sd = (e.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / nf).sqrt();
        assert!((mean - 1.875_271_6).abs() < 3.0 * sd / nf.sqrt(), "mean {mean}");
    }

    /// The manifest's promises, run the way the host's `module check` does.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<IonSputter>::new().source());
    }

    /// The launches against the laws declared in `LAUNCH_LAWS`, as `vet`
    /// tests them (one-sample KS tests at p = 0.01 of speeds or energies and
    /// of directions; the distribution functions and their sources are in
    /// `exobound_sdk::launch_law`).
    #[test]
    fn launches_follow_the_declared_laws() {
        let base = LaunchRequest { mass: NA_MASS, ..LaunchRequest::default() };
        testing::assert_launch_laws::<IonSputter>(base, 20_000, 3);
    }

    #[test]
    fn launch_depends_only_on_the_key() {
        let mut law = law_with(&[]);
        let reqs = testing::draws(LaunchRequest { mass: NA_MASS, ..Default::default() }, 6, 8);
        // Counter-based streams, rejection included: the batch's order and cuts do not matter.
        testing::assert_batch_invariant("launch", &reqs, |r, v| law.launch(r, v));
        assert_ne!(law.launch_one(&reqs[0]).unwrap(), law.launch_one(&reqs[1]).unwrap());
        let cells = [cell(1.0e8, 1.0), cell(0.0, 1.0), cell(3.0e8, 0.5)];
        testing::assert_batch_invariant("release_rate", &cells, |c, r| law.release_rate(c, r));
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let law = law_with(&[]);
        let err = law.release_rate_one(&cell(-1.0, 1.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("cell 12"), "{err}");
        assert_eq!(
            law.release_rate_one(&cell(1e8, f64::NAN)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        let bad = LaunchRequest { cell: 2, mass: -1.0, ..LaunchRequest::default() };
        assert_eq!(law.launch_one(&bad).unwrap_err().code, ErrorCode::InvalidInput);
        // 10 eV protons on a heavy atom with U = 5 eV: Lambda E_i = 0.4 eV < U, so the
        // Thompson cutoff refuses (elementary kinematics).
        let weak = law_with(&[
            ("ion_energy", Value::Number(10.0)),
            ("binding_energy", Value::Number(5.0)),
        ]);
        let heavy =
            LaunchRequest { cell: 2, mass: 100.0 * ATOMIC_MASS, ..LaunchRequest::default() };
        let err = weak.launch_one(&heavy).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("cell 2") && err.message.contains("binding energy"), "{err}");
    }

    #[test]
    fn out_of_range_parameters_are_refused_by_the_schema() {
        for (name, value, needle) in [
            ("sputter_yield", Value::Number(-0.1), "atoms/ion"),
            ("surface_fraction", Value::Number(1.5), "[0, 1]"),
            ("binding_energy", Value::Number(0.0), "eV"),
            ("max_energy", Value::Number(0.0), "[0.01, 100000]"),
            ("ion_energy", Value::Number(1.0), "eV"),
            ("ion_mass", Value::Number(0.5), "u"),
            ("energy_cutoff", Value::Text("soft"), "thompson"),
        ] {
            let err = testing::validate::<IonSputter>(&[(name, value)]).unwrap_err();
            assert_eq!(err.code, ErrorCode::InvalidParameter);
            assert!(err.message.contains(name) && err.message.contains(needle), "{err}");
        }
    }
}

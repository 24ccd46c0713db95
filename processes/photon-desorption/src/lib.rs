//! photon-desorption: photon-stimulated desorption (PSD) of adsorbed alkali
//! atoms by solar near-UV photons.
//!
//! Why this exists: on the sunlit surface of the Moon and Mercury, photons
//! above a few eV break the bond of an adsorbed Na or K atom to the oxide
//! surface and eject it, whatever the surface temperature. PSD is the main
//! dayside source of the lunar Na exosphere and a major one at Mercury, and
//! it launches atoms faster than thermal desorption does. The law is a
//! first-order photon-driven rate,
//!
//! ```text
//! Phi = Q(T) * F_UV(r) * N_s * cos(SZA)      cos(SZA) > 0   [atoms cm^-2 s^-1]
//! Phi = 0                                    cos(SZA) <= 0 (night side)
//! F_UV(r) = F_UV(1 AU) / r_AU^2
//! ```
//!
//! with Q the PSD cross-section (cm^2), F_UV the solar photon flux above the
//! desorption threshold (photons cm^-2 s^-1), N_s the adsorbed surface
//! density (atoms cm^-2) and SZA the solar zenith angle; cos(SZA) projects
//! the flux onto the surface. The defaults Q = 3.0e-20 cm^2 (Na on an SiO2
//! film) and F_UV = 1.5e14 photons cm^-2 s^-1 at 1 AU are those of
//! Yakshinskiy & Madey (1999, Nature 400, 642) as used by Leblanc & Johnson
//! (2003, Icarus 164, 261), so the per-atom rate at the subsolar point at 1 AU is
//! Q F = 4.5e-6 s^-1.
//!
//! Optional temperature dependence. Laboratory PSD yields can grow with the
//! substrate temperature. The module takes it as an Arrhenius factor
//! normalised at a reference temperature T_ref, the temperature at which Q0
//! was measured:
//!
//! ```text
//! Q(T) = Q0 * exp(-(E_a / k_B) (1/T - 1/T_ref))
//! ```
//!
//! so Q(T_ref) = Q0 for every E_a and E_a = 0 (the default) gives Q0 at every
//! temperature; the surface temperature is then not read at all.
//!
//! Launch. Two velocity laws, chosen by `velocity_law`:
//! - `maxwellian`: speeds from the Maxwellian *flux* distribution at a fixed
//!   `launch_temperature` (1000-1500 K is common practice);
//! - `power-law`: energies from f(E) = beta (beta + 1) U^beta E / (E + U)^(beta + 2),
//!   the form Johnson et al. (2002) fitted to laboratory PSD of Na (from
//!   memory; beta = 0.7, U = 0.052 eV; Icarus 156, 136). Its CDF is
//!   1 - U^beta ((1 + beta) E + U) / (E + U)^(1 + beta) (integrated in closed form);
//!   it is inverted numerically by Newton's method in ln E (see
//!   [`power_law_inverse_cdf`]). The mode is U / (1 + beta); the mean energy
//!   is finite only for beta > 1 and the mean speed only for beta > 1/2.
//!
//! Directions follow the cosine (Lambert) law about the local vertical.
//!
//! The module draws on the adsorbed pool: the host caps the release of a
//! step by the pool and subtracts it.
//!
//! What the law leaves out: the reduction of the yield by regolith porosity
//! (a factor 4-10, Leblanc & Johnson 2003; fold it into Q), the spectral shape of
//! the solar flux and its variation with activity (F_UV is one number),
//! local shadowing by topography (the host gives one cos(SZA) per cell),
//! coverage-dependent cross-sections, and any energy cutoff of the
//! power-law form (a photon of a few eV cannot give an atom more than a
//! few eV; the untruncated tail carries about 1% of atoms above 100 eV for
//! beta = 0.7, all of which escape).

use exobound_sdk::constants::{BOLTZMANN, ELECTRON_VOLT};
use exobound_sdk::{
    CellState, Check, DirectionLaw, ErrorCode, Input, LaunchLaw, LaunchRequest, Manifest, Origin,
    ParamKind, ParamSpec, Params, Pool, Process, ProcessError, Quantity, ReferencePoint, Rng, Role,
    Source, SpeedLaw, Value, Velocity, math,
};

/// Mass of one Na atom, kg (22.98976928 u, the IUPAC standard atomic weight;
/// Prohaska et al. 2022, Pure Appl. Chem. 94, 573), used by
/// the launch-speed reference points.
const NA_MASS: f64 = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;

/// Default PSD cross-section, cm^2: Na on an SiO2 film (Yakshinskiy & Madey
/// 1999, Nature 400, 642, as used in Leblanc & Johnson 2003, Icarus 164, 261).
pub const DEFAULT_CROSS_SECTION: f64 = 3.0e-20;

/// Default solar photon flux above the PSD threshold at 1 AU, photons
/// cm^-2 s^-1 (Yakshinskiy & Madey 1999, Nature 400, 642, as used in Leblanc &
/// Johnson 2003, Icarus 164, 261).
pub const DEFAULT_PHOTON_FLUX_1AU: f64 = 1.5e14;

/// Newton iterations allowed when inverting the power-law CDF,
/// dimensionless; the iteration converges monotonically in fewer than 20
/// from the starting points used (see [`power_law_inverse_cdf`]).
const MAX_NEWTON_STEPS: usize = 60;

/// Launch velocity law.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum VelocityLaw {
    /// Maxwellian flux at the fixed launch temperature.
    Maxwellian,
    /// f(E) ~ E / (E + U)^(beta + 2) (Johnson et al. 2002).
    PowerLaw,
}

/// ln of the complementary CDF of the power-law form, ln Q(eps),
/// dimensionless, at reduced energy `eps` = E/U >= 0 for exponent `beta` > 0:
/// Q = (1 + (1 + beta) eps) / (1 + eps)^(1 + beta).
///
/// The two logarithms cancel to O(eps^2), so for (1 + beta) eps < 1e-2 the
/// Taylor series is summed instead: ln Q = sum over k >= 2 of
/// (-1)^(k+1) (1 + beta) ((1 + beta)^(k-1) - 1) eps^k / k, whose first term
/// is -beta (1 + beta) eps^2 / 2. Terms up to k = 10 leave a relative error
/// below 1e-16 there; the direct form is good to about 2e-14 / beta beyond.
#[inline]
fn ln_survival(eps: f64, beta: f64) -> f64 {
    let a = (1.0 + beta) * eps;
    if a >= 1.0e-2 {
        return math::ln_1p(a) - (1.0 + beta) * math::ln_1p(eps);
    }
    let ln_b = math::ln_1p(beta);
    let mut sum = 0.0;
    // (1 + beta) eps^k, one factor of eps per term.
    let mut power = a;
    let mut sign = -1.0;
    for k in 2..=10 {
        power *= eps;
        // (1 + beta)^(k-1) - 1 without cancellation for small beta.
        let growth = math::exp_m1((k - 1) as f64 * ln_b);
        sum += sign * power * growth / k as f64;
        sign = -sign;
    }
    sum
}

/// Density of the power-law form in the reduced energy eps = E/U,
/// dimensionless: beta (beta + 1) eps / (1 + eps)^(beta + 2), for `eps` >= 0
/// and `beta` > 0. It integrates to 1 over (0, inf).
#[inline]
pub fn power_law_density(eps: f64, beta: f64) -> f64 {
    beta * (beta + 1.0) * eps * math::exp(-(beta + 2.0) * math::ln_1p(eps))
}

/// CDF of the power-law form at reduced energy `eps` = E/U >= 0,
/// dimensionless: 1 - (1 + (1 + beta) eps) / (1 + eps)^(1 + beta), written as
/// -expm1(ln Q) so that it keeps its relative precision for small eps.
#[inline]
pub fn power_law_cdf(eps: f64, beta: f64) -> f64 {
    -math::exp_m1(ln_survival(eps, beta))
}

/// Reduced energy eps = E/U, dimensionless, at which the power-law CDF
/// equals `x` in (0, 1), for exponent `beta` > 0.
///
/// Newton's method in t = ln eps. Writing the density in t, eps^2 (1 +
/// eps)^-(beta + 2) up to a constant, its logarithm has second derivative
/// -(beta + 2) eps / (1 + eps)^2 < 0, so it is log-concave, and with it the
/// CDF P and the survival Q are log-concave in t. Newton on a concave
/// increasing function converges monotonically from a point left of the
/// root, and on a concave decreasing one from a point right of it. The
/// two branches start on those sides:
/// - x < 1/2 solves ln P(t) = ln x from eps0 = sqrt(2x / (beta (beta + 1))):
///   the density is at most beta (beta + 1) eps, so P(eps) <= beta (beta + 1)
///   eps^2 / 2 and P(eps0) <= x, i.e. eps0 lies left of the root;
/// - x >= 1/2 solves ln Q(t) = ln(1 - x) from eps0 = ((1 + beta)/(1 - x))^(1/beta) - 1:
///   1 + (1 + beta) eps <= (1 + beta)(1 + eps), so Q(eps) <= (1 + beta)(1 + eps)^-beta
///   and Q(eps0) <= 1 - x, i.e. eps0 lies right of the root.
///
/// The result satisfies P(eps) = x to about 1e-13 relative (tested).
pub fn power_law_inverse_cdf(x: f64, beta: f64) -> f64 {
    let lower = x < 0.5;
    let (mut t, target) = if lower {
        (0.5 * math::ln(2.0 * x / (beta * (beta + 1.0))), math::ln(x))
    } else {
        let y = 1.0 - x;
        (math::ln(math::exp_m1(math::ln((1.0 + beta) / y) / beta)), math::ln(y))
    };
    for _ in 0..MAX_NEWTON_STEPS {
        let eps = math::exp(t);
        let ln_q = ln_survival(eps, beta);
        // d/dt of ln P is eps p / P and of ln Q is -eps p / Q.
        let dens = eps * power_law_density(eps, beta);
        let (g, slope) = if lower {
            let p = -math::exp_m1(ln_q);
            (math::ln(p) - target, dens / p)
        } else {
            (ln_q - target, -dens / math::exp(ln_q))
        };
        if !(slope.is_finite() && slope != 0.0) {
            break;
        }
        let step = g / slope;
        t -= step;
        if step.abs() <= 1e-14 * t.abs().max(1.0) {
            break;
        }
    }
    math::exp(t)
}

/// Photon-stimulated desorption with an optional Arrhenius temperature
/// factor and a Maxwellian or power-law launch.
#[derive(Clone, Debug, PartialEq)]
pub struct PhotonDesorption {
    /// PSD cross-section Q0 at the reference temperature, cm^2.
    pub cross_section: f64,
    /// Solar photon flux above the desorption threshold at 1 AU, photons cm^-2 s^-1.
    pub photon_flux_1au: f64,
    /// Activation energy E_a of the temperature factor, eV (0: none).
    pub activation_energy: f64,
    /// Temperature T_ref at which Q(T) = Q0, K.
    pub reference_temperature: f64,
    /// Launch velocity law.
    pub velocity_law: VelocityLaw,
    /// Temperature of the Maxwellian-flux launch, K.
    pub launch_temperature: f64,
    /// Exponent beta of the power-law energy form, dimensionless.
    pub power_law_exponent: f64,
    /// Characteristic energy U of the power-law energy form, eV.
    pub power_law_energy: f64,
    /// E_a / k_B, K (cached).
    activation_temperature: f64,
}

impl PhotonDesorption {
    /// PSD cross-section Q(T), cm^2, on a surface at `temperature` K (> 0;
    /// not read when E_a = 0).
    #[inline]
    pub fn cross_section_at(&self, temperature: f64) -> f64 {
        if self.activation_energy == 0.0 {
            return self.cross_section;
        }
        let inv = 1.0 / temperature - 1.0 / self.reference_temperature;
        self.cross_section * math::exp(-self.activation_temperature * inv)
    }

    /// Per-atom desorption rate Q(T) F_UV(1 AU) / r^2 max(0, cos SZA), s^-1,
    /// for cosine of the solar zenith angle `cos_sza`, heliocentric distance
    /// `helio_distance` in AU (> 0) and surface temperature `temperature` in K.
    #[inline]
    pub fn rate_per_atom(&self, cos_sza: f64, helio_distance: f64, temperature: f64) -> f64 {
        if cos_sza <= 0.0 {
            return 0.0;
        }
        let flux = self.photon_flux_1au / (helio_distance * helio_distance);
        self.cross_section_at(temperature) * flux * cos_sza
    }

    /// Launch energy of the power-law form, eV, for a uniform deviate `x` in (0, 1).
    #[inline]
    pub fn power_law_launch_energy(&self, x: f64) -> f64 {
        self.power_law_energy * power_law_inverse_cdf(x, self.power_law_exponent)
    }
}

impl Process for PhotonDesorption {
    const MANIFEST: Manifest = Manifest {
        name: "photon-desorption",
        version: "1.0.0",
        description: "Photon-stimulated desorption of adsorbed atoms, \
                      Phi = Q(T) F_UV(1 AU)/r^2 N_s cos(SZA) on the day side and 0 at night, \
                      with Q(T) = Q0 exp(-(E_a/k)(1/T - 1/T_ref)) (E_a = 0: constant Q0). \
                      Launch speeds from a Maxwellian flux at a fixed temperature or from the \
                      power-law energy form E/(E+U)^(beta+2); cosine-law directions.",
        roles: &[Role::Source],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Yakshinskiy, B. V. & Madey, T. E. (1999), Nature 400, 642 (PSD of Na \
                     from SiO2, Q = 3e-20 cm^2, F_UV = 1.5e14 photons cm^-2 s^-1 at 1 AU), as \
                     used in Leblanc, F. & Johnson, R. E. (2003), Icarus 164, 261; power-law \
                     energy form: Johnson, R. E. et al. (2002), Icarus 156, 136 \
                     (from memory); Arrhenius temperature factor and Maxwellian-flux launch: \
                     common practice",
        draws_on: Some(Pool::Adsorbed),
        ledger_label: "",
        inputs: &[
            Input::CosSza,
            Input::Adsorbed,
            Input::HelioDistance,
            Input::Temperature,
            Input::Mass,
        ],
        parameters: &[
            ParamSpec {
                name: "cross_section",
                unit: "cm^2",
                description: "PSD cross-section Q0 at the reference temperature; 3e-20 for Na on \
                              an SiO2 film, to be reduced by a porosity factor of 4-10 for \
                              regolith",
                kind: ParamKind::Number {
                    default: Some(DEFAULT_CROSS_SECTION),
                    min: 0.0,
                    max: 1.0e-16,
                },
                origin: Origin::Source(
                    "Yakshinskiy & Madey 1999 (Nature 400, 642), as used in Leblanc & Johnson \
                     2003 (Icarus 164, 261)",
                ),
            },
            ParamSpec {
                name: "photon_flux_1au",
                unit: "cm^-2 s^-1",
                description: "Solar photon flux above the desorption threshold at 1 AU, \
                              photons cm^-2 s^-1; scaled as r^-2",
                kind: ParamKind::Number {
                    default: Some(DEFAULT_PHOTON_FLUX_1AU),
                    min: 0.0,
                    max: 1.0e17,
                },
                origin: Origin::Source(
                    "Yakshinskiy & Madey 1999 (Nature 400, 642), as used in Leblanc & Johnson \
                     2003 (Icarus 164, 261)",
                ),
            },
            ParamSpec {
                name: "activation_energy",
                unit: "eV",
                description: "Activation energy E_a of the optional temperature factor \
                              Q(T) = Q0 exp(-(E_a/k)(1/T - 1/T_ref)); 0 switches it off",
                kind: ParamKind::Number { default: Some(0.0), min: 0.0, max: 1.0 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "reference_temperature",
                unit: "K",
                description: "Temperature T_ref at which Q(T) equals cross_section (the \
                              temperature Q0 was measured at); read only when E_a > 0",
                kind: ParamKind::Number { default: Some(300.0), min: 10.0, max: 2000.0 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "velocity_law",
                unit: "",
                description: "Launch law: `maxwellian` (Maxwellian flux at launch_temperature) \
                              or `power-law` (f(E) ~ E/(E+U)^(beta+2))",
                kind: ParamKind::Choice {
                    default: Some("maxwellian"),
                    options: &["maxwellian", "power-law"],
                },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "launch_temperature",
                unit: "K",
                description: "Temperature of the Maxwellian-flux launch (1000-1500 K is usual \
                              for PSD)",
                kind: ParamKind::Number { default: Some(1200.0), min: 100.0, max: 10000.0 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "power_law_exponent",
                unit: "",
                description: "Exponent beta of the power-law energy form; the mean speed is \
                              finite only for beta > 1/2, the mean energy only for beta > 1",
                kind: ParamKind::Number { default: Some(0.7), min: 0.1, max: 10.0 },
                origin: Origin::FromMemory("Johnson et al. 2002, Icarus 156, 136"),
            },
            ParamSpec {
                name: "power_law_energy",
                unit: "eV",
                description: "Characteristic energy U of the power-law energy form; the mode is \
                              U/(1 + beta)",
                kind: ParamKind::Number { default: Some(0.052), min: 0.001, max: 5.0 },
                origin: Origin::FromMemory("Johnson et al. 2002, Icarus 156, 136"),
            },
        ],
        reference_points: &[
            ReferencePoint {
                description: "Na at the subsolar point at 1 AU, N_s = 1e10 cm^-2: Q F = 4.5e-6 \
                              s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("cos_sza", 1.0), ("helio_distance", 1.0), ("adsorbed", 1.0e10)],
                expected: 4.5e4,
                tolerance: 1.0e-12,
                source: "Yakshinskiy & Madey 1999, Nature 400, 642 (Q = 3e-20 cm^2, F_UV = \
                         1.5e14 photons cm^-2 s^-1 at 1 AU), as used in Leblanc & Johnson \
                         2003, Icarus 164, 261",
            },
            ReferencePoint {
                description: "Mercury perihelion (0.3075 AU), SZA 60 deg, N_s = 1e10 cm^-2",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("cos_sza", 0.5), ("helio_distance", 0.3075), ("adsorbed", 1.0e10)],
                // 4.5e-6 / 0.3075^2 * 0.5 * 1e10 (mpmath,
                // tests/python/module_reference_values.py).
                expected: 237_953.599_048_185_6,
                tolerance: 1.0e-12,
                source: "Yakshinskiy & Madey 1999, Nature 400, 642, as used in Leblanc & \
                         Johnson 2003, Icarus 164, 261 (Q F = 4.5e-6 s^-1 at 1 AU, F_UV ~ \
                         r^-2); q = 0.3075 AU (NASA NSSDCA Mercury fact sheet); the law's \
                         cos(SZA) factor",
            },
            ReferencePoint {
                description: "Night side (cos SZA = -0.3): no photons, no release",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("cos_sza", -0.3), ("helio_distance", 1.0), ("adsorbed", 1.0e10)],
                expected: 0.0,
                tolerance: 0.0,
                source: "the law: Phi = 0 for cos(SZA) <= 0",
            },
            ReferencePoint {
                description: "E_a = 0.1 eV, T = 600 K, T_ref = 300 K at 1 AU, subsolar, \
                              N_s = 1e10 cm^-2: Q = Q0 exp(1160.45 K / 600 K)",
                check: Check::ReleaseRate,
                parameters: &[
                    ("activation_energy", Value::Number(0.1)),
                    ("reference_temperature", Value::Number(300.0)),
                ],
                input: &[
                    ("cos_sza", 1.0),
                    ("helio_distance", 1.0),
                    ("adsorbed", 1.0e10),
                    ("temperature", 600.0),
                ],
                // 4.5e4 * exp(-(0.1 eV / k)(1/600 - 1/300)), SI-exact k_B and e (mpmath,
                // tests/python/module_reference_values.py).
                expected: 311_297.436_739_717_5,
                tolerance: 1.0e-12,
                source: "closed form of the module's temperature factor, on Q F = 4.5e-6 s^-1 \
                         (Yakshinskiy & Madey 1999, Nature 400, 642, as used in Leblanc & \
                         Johnson 2003, Icarus 164, 261)",
            },
            ReferencePoint {
                description: "Maxwellian launch of Na at 1200 K: mean flux speed \
                              (3 sqrt(pi)/4) sqrt(2kT/m)",
                check: Check::MeanLaunchSpeed,
                parameters: &[("velocity_law", Value::Text("maxwellian"))],
                input: &[("mass", NA_MASS)],
                expected: 1238.49,
                tolerance: 0.01,
                source: "mean of the Maxwellian flux (3 sqrt(pi)/4) sqrt(2kT/m), Na at 1200 K \
                         (closed form; tests/python/sampler_reference_values.py)",
            },
            ReferencePoint {
                description: "Power-law launch of Na, beta = 3, U = 0.052 eV: mean speed \
                              sqrt(2U/m) Gamma(5/2) Gamma(beta - 1/2) / Gamma(beta) = \
                              sqrt(2U/m) 9 pi/32",
                check: Check::MeanLaunchSpeed,
                parameters: &[
                    ("velocity_law", Value::Text("power-law")),
                    ("power_law_exponent", Value::Number(3.0)),
                    ("power_law_energy", Value::Number(0.052)),
                ],
                input: &[("mass", NA_MASS)],
                // Moments of betaprime(2, beta, scale U): E[(E/U)^(1/2)] =
                // Gamma(5/2) Gamma(beta - 1/2) / Gamma(beta); beta = 3 keeps the speed
                // variance finite so that 1e5 draws give 0.2% precision (mpmath,
                // tests/python/module_reference_values.py).
                expected: 583.743_980_484_920_2,
                tolerance: 0.01,
                source: "closed form: moments of betaprime(2, beta, scale U), the power-law \
                         PSD energy form of Johnson et al. 2002, Icarus 156, 136 (from memory)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        let velocity_law = match params.choice("velocity_law")? {
            "maxwellian" => VelocityLaw::Maxwellian,
            "power-law" => VelocityLaw::PowerLaw,
            other => {
                return Err(ProcessError::parameter(format!(
                    "velocity_law \"{other}\" is not implemented; use maxwellian or power-law"
                )));
            }
        };
        let activation_energy = params.number("activation_energy")?;
        // Every number has passed its schema range, so T_ref >= 10 K and the
        // cached E_a/k_B is finite.
        Ok(PhotonDesorption {
            cross_section: params.number("cross_section")?,
            photon_flux_1au: params.number("photon_flux_1au")?,
            activation_energy,
            reference_temperature: params.number("reference_temperature")?,
            velocity_law,
            launch_temperature: params.number("launch_temperature")?,
            power_law_exponent: params.number("power_law_exponent")?,
            power_law_energy: params.number("power_law_energy")?,
            activation_temperature: activation_energy * ELECTRON_VOLT / BOLTZMANN,
        })
    }
}

impl Source for PhotonDesorption {
    /// The Maxwellian flux of the `maxwellian` option, with cosine-law
    /// directions (see `launch_one`). The `power-law` option is not
    /// declared: at its default beta = 0.7, U = 0.052 eV its untruncated tail
    /// passes the host's speed bound of 1e5 m s^-1 (1191 eV for Na) with
    /// probability 1 - CDF = 1.5e-3 per draw, so `vet`'s 20 000 draws (and
    /// any run of more than a few hundred launches) are refused by the
    /// host's output validation before any test of their shape. Its
    /// energies are tested against the form natively, in the module's tests
    /// (`power_law_launch_energies_pass_ks_and_median`).
    const LAUNCH_LAWS: &'static [LaunchLaw] = &[LaunchLaw {
        when: &[("velocity_law", "maxwellian")],
        speed: SpeedLaw::MaxwellianFlux { temperature: Quantity::Param("launch_temperature") },
        direction: DirectionLaw::Cosine,
    }];

    fn release_rate_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        if !(cell.adsorbed.is_finite() && cell.adsorbed >= 0.0) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: adsorbed surface density {} atoms cm^-2; it must be finite and >= 0",
                    cell.cell, cell.adsorbed
                ),
            ));
        }
        if !(cell.cos_sza.is_finite() && cell.cos_sza.abs() <= 1.0) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!("cell {}: cos(SZA) = {}; it must lie in [-1, 1]", cell.cell, cell.cos_sza),
            ));
        }
        // Inputs are judged only where the law reads them: the night side
        // reads neither the distance nor the temperature.
        if cell.cos_sza > 0.0 {
            if !(cell.helio_distance.is_finite() && cell.helio_distance > 0.0) {
                return Err(ProcessError::outside_validity(format!(
                    "cell {}: heliocentric distance {} AU; the r^-2 photon-flux law needs a \
                     finite distance above 0 AU",
                    cell.cell, cell.helio_distance
                )));
            }
            let t = cell.temperature;
            if self.activation_energy > 0.0 && !(t.is_finite() && t > 0.0) {
                return Err(ProcessError::outside_validity(format!(
                    "cell {}: surface temperature {t} K; the temperature factor of Q needs a \
                     finite temperature above 0 K (or set activation_energy = 0)",
                    cell.cell
                )));
            }
        }
        // First order in the coverage; the host caps the step's release by
        // the pool it holds.
        Ok(cell.adsorbed * self.rate_per_atom(cell.cos_sza, cell.helio_distance, cell.temperature))
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
        // One stream per record, speed first, then the direction.
        let mut rng = Rng::new(req.key);
        let speed = match self.velocity_law {
            VelocityLaw::Maxwellian => rng.maxwellian_flux_speed(self.launch_temperature, req.mass),
            VelocityLaw::PowerLaw => {
                // E = m v^2 / 2 with E in J.
                let e = self.power_law_launch_energy(rng.uniform()) * ELECTRON_VOLT;
                math::sqrt(2.0 * e / req.mass)
            }
        };
        Ok(rng.cosine_direction().times(speed))
    }
}

exobound_sdk::export_process!(PhotonDesorption: Source);

#[cfg(test)]
mod tests {
    use exobound_sdk::sample::thermal_speed;
    use exobound_sdk::testing::{self, Roles};

    use super::*;

    use core::f64::consts::PI;

    /// The law with the parameters `given` (others at their defaults), built
    /// as the module's `init` builds it.
    fn law_with(given: &[(&str, Value)]) -> PhotonDesorption {
        testing::law(given)
    }

    /// Cell 21 with `cos_sza`, at `helio_distance` AU, holding `adsorbed` atoms cm^-2, at 400 K.
    fn cell(cos_sza: f64, helio_distance: f64, adsorbed: f64) -> CellState {
        CellState {
            cell: 21,
            cos_sza,
            helio_distance,
            adsorbed,
            temperature: 400.0,
            ..CellState::default()
        }
    }

    /// `n` launches of Na from cell 8, each with its own key.
    fn launches(law: &mut PhotonDesorption, n: u64) -> Vec<Velocity> {
        let base =
            LaunchRequest { cell: 8, temperature: 350.0, mass: NA_MASS, ..Default::default() };
        let reqs = testing::draws(base, n, 99);
        let mut vs = vec![Velocity::ZERO; reqs.len()];
        law.launch(&reqs, &mut vs).unwrap();
        vs
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let law = law_with(&[]);
        // Q = 3.0e-20 cm^2, F_UV = 1.5e14 photons cm^-2 s^-1 at 1 AU (Yakshinskiy & Madey
        // 1999, Nature 400, 642, as used in Leblanc & Johnson 2003, Icarus 164, 261).
        assert_eq!(law.cross_section, 3.0e-20);
        assert_eq!(law.photon_flux_1au, 1.5e14);
        // E_a = 0 (no temperature factor) and a 1200 K Maxwellian launch: common practice
        // (PSD launched as a Maxwellian at 1000-1500 K).
        assert_eq!(law.activation_energy, 0.0);
        assert_eq!(law.velocity_law, VelocityLaw::Maxwellian);
        assert_eq!(law.launch_temperature, 1200.0);
        // beta = 0.7, U = 0.052 eV (Johnson et al. 2002, Icarus 156, 136; from memory).
        assert_eq!(law.power_law_exponent, 0.7);
        assert_eq!(law.power_law_energy, 0.052);
        let info = PhotonDesorption::MANIFEST.to_info();
        assert_eq!(info.draws_on.as_deref(), Some("adsorbed"));
        assert!(info.parameters[0].default_origin.starts_with("source: Yakshinskiy & Madey"));
        assert!(info.parameters[6].default_origin.starts_with("from memory: Johnson"));
    }

    #[test]
    fn per_atom_rate_matches_the_laboratory_value() {
        let law = law_with(&[]);
        // Q F_UV = 4.5e-6 s^-1 at 1 AU (Yakshinskiy & Madey 1999, Nature 400, 642).
        let r = law.rate_per_atom(1.0, 1.0, 300.0);
        assert!((r - 4.5e-6).abs() <= 1e-15 * 4.5e-6, "{r:e}");
        // F_UV ~ r^-2 (exact); Mercury q = 0.30750 AU (NASA NSSDCA Mercury fact sheet).
        let q = law.rate_per_atom(1.0, 0.3075, 300.0);
        assert!((q - 4.5e-6 / (0.3075 * 0.3075)).abs() <= 1e-15 * q, "{q:e}");
        // The law's cos(SZA) factor: SZA 60 deg halves the rate, SZA 90 deg and beyond is 0.
        let half = law.rate_per_atom(0.5, 1.0, 300.0);
        assert!((half - 2.25e-6).abs() <= 1e-15 * half);
        assert_eq!(law.rate_per_atom(0.0, 1.0, 300.0), 0.0);
        assert_eq!(law.rate_per_atom(-0.7, 1.0, 300.0), 0.0);
    }

    #[test]
    fn release_is_first_order_and_zero_at_night() {
        let law = law_with(&[]);
        // 4.5e-6 s^-1 per atom at 1 AU (Yakshinskiy & Madey 1999), times N_s = 1e10.
        let r = law.release_rate_one(&cell(1.0, 1.0, 1.0e10)).unwrap();
        assert!((r - 4.5e4).abs() <= 1e-12 * 4.5e4, "{r}");
        // First order in the coverage (the law): tripling N_s triples Phi.
        let r3 = law.release_rate_one(&cell(1.0, 1.0, 3.0e10)).unwrap();
        assert!((r3 / r - 3.0).abs() < 1e-15);
        assert_eq!(law.release_rate_one(&cell(1.0, 1.0, 0.0)).unwrap(), 0.0);
        // Night side: no photons (the law). The distance is not read there, so a zero
        // distance is no error at night.
        assert_eq!(law.release_rate_one(&cell(-0.2, 1.0, 1.0e12)).unwrap(), 0.0);
        assert_eq!(law.release_rate_one(&cell(-1.0, 0.0, 1.0e12)).unwrap(), 0.0);
    }

    #[test]
    fn temperature_factor_is_normalised_at_the_reference() {
        let law = law_with(&[
            ("activation_energy", Value::Number(0.1)),
            ("reference_temperature", Value::Number(300.0)),
        ]);
        // Q(T_ref) = Q0 (definition of the normalised form).
        assert!((law.cross_section_at(300.0) - 3.0e-20).abs() <= 1e-15 * 3.0e-20);
        // Closed form exp(-(E_a/k)(1/T - 1/T_ref)) with E_a/k = 1160.45 K for 0.1 eV
        // (SI-exact k_B and e); at 600 K the factor is exp(1160.45/600) = 6.917721 (mpmath,
        // tests/python/module_reference_values.py).
        let f = law.cross_section_at(600.0) / 3.0e-20;
        assert!((f - 6.917_720_816_438_167).abs() < 1e-12, "{f}");
        // Colder than T_ref the yield falls: at 150 K, exp(-1160.45/300) = 0.020897
        // (tests/python/module_reference_values.py).
        let g = law.cross_section_at(150.0) / 3.0e-20;
        let want = (-0.1 * ELECTRON_VOLT / BOLTZMANN / 300.0).exp();
        assert!((g - want).abs() < 1e-12 * want, "{g}");
        // E_a = 0 ignores the temperature altogether (the law): even T = 0 gives Q0.
        let flat = law_with(&[]);
        assert_eq!(flat.cross_section_at(0.0), 3.0e-20);
        assert_eq!(flat.cross_section_at(1000.0), 3.0e-20);
    }

    /// The manifest's promises, run the way the host's `module check` does.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<PhotonDesorption>::new().source());
    }

    /// The launches against the laws declared in `LAUNCH_LAWS`, as `vet`
    /// tests them (one-sample KS tests at p = 0.01 of speeds or energies and
    /// of directions; the distribution functions and their sources are in
    /// `exobound_sdk::launch_law`).
    #[test]
    fn launches_follow_the_declared_laws() {
        let base = LaunchRequest { mass: NA_MASS, ..LaunchRequest::default() };
        testing::assert_launch_laws::<PhotonDesorption>(base, 20_000, 3);
    }

    #[test]
    fn reference_values_are_the_closed_forms() {
        // Recompute the manifest's literals from the SDK's constants so they cannot drift.
        // Perihelion point: 4.5e-6 / 0.3075^2 * 0.5 * 1e10 (Yakshinskiy & Madey 1999; NASA
        // NSSDCA Mercury fact sheet).
        let p = 4.5e-6 / (0.3075f64 * 0.3075) * 0.5 * 1e10;
        assert!((p - 237_953.599_048_185_6).abs() < 1e-12 * p);
        // Temperature point: 4.5e4 exp((0.1 eV/k)(1/300 - 1/600)) (closed form).
        let ta = 0.1 * ELECTRON_VOLT / BOLTZMANN;
        let t = 4.5e4 * (ta * (1.0 / 300.0 - 1.0 / 600.0)).exp();
        assert!((t - 311_297.436_739_717_5).abs() < 1e-12 * t);
        // Power-law mean speed, beta = 3: sqrt(2U/m) Gamma(5/2) Gamma(5/2) / Gamma(3)
        // = sqrt(2U/m) 9 pi / 32 (Gamma(5/2) = 3 sqrt(pi)/4, Gamma(3) = 2; Abramowitz &
        // Stegun 6.1.8, 6.1.6).
        let v = (2.0 * 0.052 * ELECTRON_VOLT / NA_MASS).sqrt() * 9.0 * PI / 32.0;
        assert!((v - 583.743_980_484_920_2).abs() < 1e-9 * v, "{v}");
        // Maxwellian point: <v> = (3 sqrt(pi)/4) a, a = 931.66 m/s for Na at 1200 K
        // (tests/python/sampler_reference_values.py, scipy.stats.chi(df=4)).
        let m = 0.75 * PI.sqrt() * thermal_speed(1200.0, NA_MASS);
        assert!((m - 1238.49).abs() < 0.005, "{m}");
    }

    #[test]
    fn power_law_cdf_and_pdf_match_the_closed_form() {
        let (beta, u) = (0.7, 0.052);
        // PSD power-law form of Johnson et al. 2002 (Icarus 156, 136; from memory), beta =
        // 0.7, U = 0.052 eV: CDF(0.1 eV) = 0.31068 and median 0.21282 eV (scipy
        // betaprime(2, beta, scale=U) and mpmath, tests/python/module_reference_values.py).
        assert!((power_law_cdf(0.1 / u, beta) - 0.31068).abs() < 5e-6);
        assert!((power_law_cdf(0.21282 / u, beta) - 0.5).abs() < 1e-5);
        let median = u * power_law_inverse_cdf(0.5, beta);
        assert!((median - 0.21282).abs() < 5e-6, "median {median}");
        // Mode 0.03059 eV = U/(1 + beta) (maximum of the density): it rises below it
        // and falls above it.
        let mode = 0.03059 / u;
        let d = |e: f64| power_law_density(e, beta);
        assert!(d(mode * 0.999) < d(mode) && d(mode * 1.001) < d(mode));
        assert!((u / (1.0 + beta) - 0.03059).abs() < 5e-6);
        // The density integrates to 1 (composite Simpson in ln eps over 1e-8..1e10; the
        // tails beyond carry CDF(1e-8) ~ 6e-17 and 1 - CDF(1e10) ~ 1.7e-7,
        // tests/python/module_reference_values.py).
        let (a, b, n) = ((1e-8f64).ln(), (1e10f64).ln(), 20_000);
        let h = (b - a) / n as f64;
        let f = |t: f64| t.exp() * d(t.exp());
        let mut s = f(a) + f(b);
        for i in 1..n {
            s += f(a + i as f64 * h) * if i % 2 == 1 { 4.0 } else { 2.0 };
        }
        let integral = s * h / 3.0;
        let tail = 1.0 - power_law_cdf(1e10, beta);
        assert!((integral + tail - 1.0).abs() < 1e-9, "integral {integral}");
    }

    #[test]
    fn power_law_cdf_keeps_its_precision_at_low_energy() {
        // CDF values computed with mpmath 1.3 at 40 digits from the closed form
        // 1 - ((1 + beta) eps + 1)/(1 + eps)^(1 + beta) (Johnson et al. 2002, Icarus 156, 136;
        // tests/python/module_reference_values.py), on both sides of the switch to the Taylor
        // series in
        // `ln_survival` ((1 + beta) eps = 1e-2).
        for (eps, beta, want) in [
            (1e-5, 0.7, 5.949_892_901_485_994e-11),
            (0.0058, 0.7, 1.980_850_455_264_847e-5),
            (0.006, 0.7, 2.119_057_549_212_293_4e-5),
            (3.0, 0.7, 0.422_133_059_017_910_7),
            (1e-7, 0.1, 5.499_999_230_000_09e-16),
        ] {
            let got = power_law_cdf(eps, beta);
            assert!((got - want).abs() <= 1e-13 * want, "eps {eps} beta {beta}: {got:e}");
        }
    }

    #[test]
    fn power_law_inversion_is_exact() {
        // The inverse must reproduce x through the CDF over the whole open interval and
        // for exponents across the schema's range (definition of an inverse CDF).
        for beta in [0.1, 0.7, 1.0, 3.0, 10.0] {
            for x in [1e-15, 1e-9, 1e-4, 0.01, 0.3, 0.4999, 0.5, 0.7, 0.99, 1.0 - 1e-9, 1.0 - 2e-16]
            {
                let eps = power_law_inverse_cdf(x, beta);
                assert!(eps.is_finite() && eps > 0.0, "beta {beta} x {x}: {eps}");
                if x < 0.5 {
                    let p = power_law_cdf(eps, beta);
                    assert!((p - x).abs() <= 1e-12 * x, "beta {beta} x {x}: P = {p}");
                } else {
                    let q = math::exp(ln_survival(eps, beta));
                    let y = 1.0 - x;
                    assert!((q - y).abs() <= 1e-12 * y, "beta {beta} x {x}: Q = {q}");
                }
            }
        }
    }

    #[test]
    fn power_law_launch_energies_pass_ks_and_median() {
        let (beta, u) = (0.7, 0.052);
        let mut law = law_with(&[("velocity_law", Value::Text("power-law"))]);
        let n = 100_000;
        let nf = n as f64;
        let vs = launches(&mut law, n);
        assert!(vs.iter().all(|v| v.up > 0.0), "every launch leaves the surface");
        let mut e: Vec<f64> =
            vs.iter().map(|v| 0.5 * NA_MASS * v.speed().powi(2) / ELECTRON_VOLT).collect();
        // CDF = 1 - U^beta((1+beta)E + U)/(E+U)^(1+beta) (Johnson et al. 2002, Icarus 156,
        // 136, from memory; scipy betaprime(2, beta, scale=U)); KS at p = 0.01 with N = 1e5.
        testing::assert_ks("power-law energy", &mut e, |x| power_law_cdf(x / u, beta));
        // Median 0.21282 eV (tests/python/module_reference_values.py). Standard error of a
        // sample median
        // 1/(2 f(m) sqrt(N)) (asymptotic order statistics, common practice); 4 sigma.
        let median = e[n as usize / 2];
        let f_m = power_law_density(0.21282 / u, beta) / u;
        assert!((median - 0.21282).abs() < 4.0 * 0.5 / (f_m * nf.sqrt()), "median {median}");
        // CDF(0.1 eV) = 0.31068 (tests/python/module_reference_values.py); binomial sd
        // sqrt(p(1-p)/N), 3 sigma.
        let below = e.iter().filter(|&&x| x < 0.1).count() as f64 / nf;
        assert!((below - 0.31068).abs() < 3.0 * (0.31068f64 * 0.68932 / nf).sqrt(), "{below}");
    }

    #[test]
    fn maxwellian_launch_is_a_flux_distribution_with_cosine_directions() {
        let mut law = law_with(&[]);
        let n = 100_000;
        let nf = n as f64;
        let vs = launches(&mut law, n);
        assert!(vs.iter().all(|v| v.up > 0.0), "every launch leaves the surface");
        let mut speeds: Vec<f64> = vs.iter().map(Velocity::speed).collect();
        // Maxwellian flux, Na at 1200 K: <v> = 1238.49 m/s, sd a sqrt(2 - 9 pi/16) (chi with
        // 4 degrees of freedom; tests/python/sampler_reference_values.py); 3 sigma. The
        // 350 K surface plays no part.
        let a = thermal_speed(1200.0, NA_MASS);
        let mean = speeds.iter().sum::<f64>() / nf;
        let sd = a * (2.0 - 9.0 * PI / 16.0).sqrt();
        assert!((mean - 1238.49).abs() < 3.0 * sd / nf.sqrt(), "mean {mean}");
        // Maxwellian flux CDF = 1 - (1 + v^2/a^2) exp(-v^2/a^2) (integral of v^3
        // exp(-v^2/a^2)); KS at p = 0.01.
        testing::assert_ks("Maxwellian flux speed", &mut speeds, |v| {
            let q = v * v / (a * a);
            1.0 - (1.0 + q) * (-q).exp()
        });
        // Median 1206.97 m/s (scipy.stats.chi(df=4).median()); sd of a sample median
        // 1/(2 f(m) sqrt(N)) with the chi(4) density f(v) = 2 v^3 / a^4 exp(-v^2/a^2); 4 sigma.
        let m = speeds[n as usize / 2];
        let x = 1206.97 / a;
        let f_m = 2.0 * x.powi(3) * (-x * x).exp() / a;
        assert!((m - 1206.97).abs() < 4.0 * 0.5 / (f_m * nf.sqrt()), "median {m}");
        // Cosine law: cos theta has CDF c^2 (from f ~ cos theta sin theta, common practice).
        let mut c: Vec<f64> = vs.iter().map(|v| v.up / v.speed()).collect();
        testing::assert_ks("cos theta", &mut c, |x| x * x);
        // Isotropic azimuth: <east> = 0 (symmetry).
        let mean_east = vs.iter().map(|v| v.east).sum::<f64>() / nf;
        assert!(mean_east.abs() < 3.0 * mean / nf.sqrt(), "mean east {mean_east}");
    }

    #[test]
    fn launch_depends_only_on_the_key() {
        let mut law = law_with(&[("velocity_law", Value::Text("power-law"))]);
        let reqs = testing::draws(LaunchRequest { mass: NA_MASS, ..Default::default() }, 5, 5);
        // Counter-based streams: the batch's order and cuts do not matter, the keys do.
        testing::assert_batch_invariant("launch", &reqs, |r, v| law.launch(r, v));
        assert_ne!(law.launch_one(&reqs[0]).unwrap(), law.launch_one(&reqs[1]).unwrap());
        let cells = [cell(1.0, 0.3075, 1.0e10), cell(-0.2, 1.0, 1.0e12), cell(0.5, 1.0, 0.0)];
        testing::assert_batch_invariant("release_rate", &cells, |c, r| law.release_rate(c, r));
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let law = law_with(&[("activation_energy", Value::Number(0.05))]);
        let err = law.release_rate_one(&cell(1.0, 1.0, -1.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("cell 21"), "{err}");
        assert_eq!(
            law.release_rate_one(&cell(1.5, 1.0, 1.0)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        assert_eq!(
            law.release_rate_one(&cell(f64::NAN, 1.0, 1.0)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        let err = law.release_rate_one(&cell(0.5, 0.0, 1.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("0 AU"), "{err}");
        // With E_a > 0 a sunlit cell must have a usable temperature.
        let frozen = CellState { temperature: 0.0, ..cell(0.5, 1.0, 1.0) };
        assert_eq!(law.release_rate_one(&frozen).unwrap_err().code, ErrorCode::OutsideValidity);
        // Without it the temperature is not read.
        let flat = law_with(&[]);
        assert_eq!(flat.release_rate_one(&frozen).unwrap(), 4.5e-6 * 0.5);
        let bad = LaunchRequest { cell: 4, mass: 0.0, ..LaunchRequest::default() };
        let err = flat.launch_one(&bad).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("cell 4"), "{err}");
    }

    #[test]
    fn out_of_range_parameters_are_refused_by_the_schema() {
        // Each refused value names the parameter and the allowed range or options.
        for (name, value, needle) in [
            ("cross_section", Value::Number(-1e-20), "cm^2"),
            ("photon_flux_1au", Value::Number(1e18), "[0, 100000000000000000]"),
            ("activation_energy", Value::Number(2.0), "[0, 1]"),
            ("reference_temperature", Value::Number(5.0), "K"),
            ("launch_temperature", Value::Number(50.0), "[100, 10000]"),
            ("power_law_exponent", Value::Number(0.0), "[0.1, 10]"),
            ("power_law_energy", Value::Number(10.0), "eV"),
            ("velocity_law", Value::Text("weibull"), "power-law"),
        ] {
            let err = testing::validate::<PhotonDesorption>(&[(name, value)]).unwrap_err();
            assert_eq!(err.code, ErrorCode::InvalidParameter);
            assert!(err.message.contains(name) && err.message.contains(needle), "{err}");
        }
    }
}

//! impact-vapor: release of alkali atoms from the regolith by the
//! vaporization of micrometeoroid impacts.
//!
//! Why this exists: interplanetary dust hits the Moon and Mercury at tens
//! of km s^-1 and vaporizes a few times its own mass of regolith. The vapour
//! carries Na and K out of the grains themselves, so this source acts day
//! and night, does not need an adsorbed pool, and launches atoms hot enough
//! to build the extended, high-altitude part of the exosphere. Impact
//! vaporization as a supply of Na and K follows Morgan, Zook & Potter
//! (1988) and Cintala (1992) (both from memory). The law is a flux per unit
//! area,
//!
//! ```text
//! Phi = F * b * m_f * P(latitude, local time)      [atoms cm^-2 s^-1]
//! ```
//!
//! with F (`flux`) the globally averaged vaporization flux of the species
//! for nominal regolith, b the cell's bulk abundance relative to nominal,
//! m_f the meteoroid flux relative to nominal and P a spatial pattern whose
//! average over the sphere is exactly 1, so that F stays the global mean
//! whatever the pattern. The default F = 2e4 cm^-2 s^-1 is the lunar Na
//! supply from sporadic meteoroids quoted in the abstract of Berezhnoy,
//! "Meteoroid bombardment as a source of the lunar exosphere"; Mercury's
//! rate is expected to be higher (faster impacts, more dust near the Sun)
//! and must be set.
//!
//! The patterns, with lat the latitude and h the local time in hours:
//! - `uniform`: P = 1;
//! - `apex`: P = 1 + A cos(psi), where psi is the angle between the cell
//!   and the apex of the body's orbital motion. For a prograde orbit and
//!   rotation the apex lies on the equator at h = 6 (dawn), so
//!   cos(psi) = cos(lat) cos((h - 6) pi / 12). Over the sphere cos(psi)
//!   averages to zero (it is odd about the plane through the poles
//!   perpendicular to the apex direction), so P averages to 1 exactly;
//!   A in [0, 1] keeps P >= 0. The apex:antapex ratio is (1 + A)/(1 - A);
//! - `equator`: P = cos^n(lat) / C(n). With dOmega = cos(lat) dlat dlon,
//!   the sphere average of cos^n(lat) is C(n), half the integral of
//!   cos^(n+1)(lat) over [-pi/2, pi/2], which is
//!   sqrt(pi) Gamma((n+2)/2) / (2 Gamma((n+3)/2)); so C(0) = 1,
//!   C(1) = pi/4, C(2) = 2/3 (Wallis integrals). n = 1 is the limit of
//!   dust confined to the orbital plane (a surface element at latitude lat
//!   presents cos(lat) of its area to it);
//! - `apex-equator`: P = (1 + A cos(psi)) cos^n(lat) / C(n). Its
//!   normalisation is C(n) exactly, not only numerically: the apex term
//!   carries a factor cos((h - 6) pi / 12), whose integral over local time
//!   vanishes at every latitude, so it adds nothing to the sphere average.
//!   The closed form is used; the tests integrate the product on a fine
//!   grid to confirm it.
//!
//! Released atoms leave as the Maxwellian *flux* of a vapour at
//! `vapor_temperature` (2000-5000 K is common practice for impact vapour)
//! with cosine-law directions, whatever the surface temperature.
//!
//! What the law leaves out: the vapour's expansion as a plume (atoms are
//! launched from the cell as if thermally emitted), condensation and
//! molecular (NaO, NaOH) release followed by photolysis, the shift of the
//! apex off 6 h on an eccentric orbit (by the flight-path angle, up to
//! 12 deg or 0.8 h at Mercury), the obliquity (the apex is put on the
//! equator; Mercury and the Moon are within 1.6 deg of that), and meteor
//! showers, which the host can carry through `meteoroid_factor`.

use exobound_sdk::{
    CellState, Check, DirectionLaw, ErrorCode, Input, LaunchLaw, LaunchRequest, Manifest, Origin,
    ParamKind, ParamSpec, Params, Pool, Process, ProcessError, Quantity, ReferencePoint, Rng, Role,
    Source, SpeedLaw, Value, Velocity, math,
};

/// Mass of one Na atom, kg (22.98976928 u, the IUPAC standard atomic weight;
/// Prohaska et al. 2022, Pure Appl. Chem. 94, 573), used by
/// the launch-speed reference point.
const NA_MASS: f64 = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;

/// Local time of the apex of orbital motion, hours (dawn, for a prograde
/// orbit and rotation).
pub const APEX_LOCAL_TIME: f64 = 6.0;

/// Radians of hour angle per hour of local time, rad h^-1 (24 h = 2 pi).
const RAD_PER_HOUR: f64 = core::f64::consts::PI / 12.0;

/// Default global mean vaporization flux, atoms cm^-2 s^-1: lunar Na from
/// sporadic meteoroids (Berezhnoy, abstract of "Meteoroid bombardment as a
/// source of the lunar exosphere").
pub const DEFAULT_FLUX: f64 = 2.0e4;

/// Lanczos coefficients for g = 7, nine terms (Lanczos 1964, SIAM J. Numer.
/// Anal. B1, 86; this coefficient set is the widely reproduced one of
/// P. Godfrey, from memory). The error in ln Gamma is below 1e-14 for
/// x >= 1/2 (absolute near its zeros at 1 and 2, relative elsewhere),
/// checked in the tests against exact values and Gamma(x + 1) = x Gamma(x).
/// The SDK's `math` has no gamma function, and libm's `lgamma` is not
/// reachable from a module that depends on the SDK alone.
const LANCZOS_G: f64 = 7.0;
/// See [`LANCZOS_G`]; c_0 first.
const LANCZOS_C: [f64; 9] = [
    0.999_999_999_999_809_9,
    676.520_368_121_885_1,
    -1_259.139_216_722_402_8,
    771.323_428_777_653_1,
    -176.615_029_162_140_6,
    12.507_343_278_686_905,
    -0.138_571_095_265_720_12,
    9.984_369_578_019_572e-6,
    1.505_632_735_149_311_6e-7,
];

/// ln Gamma(x) for x >= 1/2, dimensionless, by the Lanczos approximation
/// Gamma(z + 1) = sqrt(2 pi) t^(z + 1/2) e^-t A_g(z), t = z + g + 1/2.
fn ln_gamma(x: f64) -> f64 {
    // The series is written for Gamma(z + 1); z >= -1/2 keeps every
    // denominator z + i (i >= 1) at 1/2 or more, so no term blows up.
    let z = x - 1.0;
    let mut a = LANCZOS_C[0];
    for (i, c) in LANCZOS_C.iter().enumerate().skip(1) {
        a += c / (z + i as f64);
    }
    let t = z + LANCZOS_G + 0.5;
    // 0.5 ln(2 pi), written out so no logarithm is needed for it.
    0.918_938_533_204_672_8 + (z + 0.5) * math::ln(t) - t + math::ln(a)
}

/// Sphere average of cos^n(latitude), dimensionless, for an exponent
/// `n` >= 0: sqrt(pi) Gamma((n+2)/2) / (2 Gamma((n+3)/2)) (derivation in
/// the module documentation). Taken as a difference of logarithms, so it
/// stays finite for large n.
pub fn equator_mean(n: f64) -> f64 {
    let half_sqrt_pi = 0.5 * math::sqrt(core::f64::consts::PI);
    half_sqrt_pi * math::exp(ln_gamma(0.5 * (n + 2.0)) - ln_gamma(0.5 * (n + 3.0)))
}

/// Cosine of the angle between a point at `latitude` (rad) and local time
/// `local_time` (h) and the apex point (latitude 0, local time 6 h),
/// dimensionless: the dot product of the two unit vectors.
#[inline]
pub fn cos_from_apex(latitude: f64, local_time: f64) -> f64 {
    math::cos(latitude) * math::cos((local_time - APEX_LOCAL_TIME) * RAD_PER_HOUR)
}

/// How the release is spread over the surface.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Pattern {
    /// The same flux everywhere.
    Uniform,
    /// 1 + A cos(psi) about the apex of orbital motion.
    Apex,
    /// cos^n(latitude), normalised.
    Equator,
    /// The product of the apex and equator factors, normalised.
    ApexEquator,
}

/// Impact vaporization: a bulk-regolith source with a normalised spatial
/// pattern and a hot Maxwellian-flux launch.
#[derive(Clone, Debug, PartialEq)]
pub struct ImpactVapor {
    /// Global mean vaporization flux for nominal regolith, atoms cm^-2 s^-1.
    pub flux: f64,
    /// Spatial pattern of the release.
    pub pattern: Pattern,
    /// Apex asymmetry A of the `apex` patterns, dimensionless, in [0, 1].
    pub apex_asymmetry: f64,
    /// Exponent n of the `equator` patterns, dimensionless, >= 0.
    pub equator_exponent: f64,
    /// Temperature of the vapour the atoms leave with, K.
    pub vapor_temperature: f64,
    /// 1 / C(n), the normalisation of the equator factor, dimensionless
    /// (cached at `new`; 1 for the patterns without it).
    equator_scale: f64,
}

impl ImpactVapor {
    /// The pattern P at `latitude` (rad) and `local_time` (h),
    /// dimensionless, >= 0, with sphere average 1.
    #[inline]
    pub fn pattern_factor(&self, latitude: f64, local_time: f64) -> f64 {
        let apex = || 1.0 + self.apex_asymmetry * cos_from_apex(latitude, local_time);
        // max(0) guards against cos rounding to -1e-17 at a pole; pow of
        // a negative base with a fractional exponent would be NaN.
        let equator =
            || math::pow(math::cos(latitude).max(0.0), self.equator_exponent) * self.equator_scale;
        match self.pattern {
            Pattern::Uniform => 1.0,
            Pattern::Apex => apex(),
            Pattern::Equator => equator(),
            Pattern::ApexEquator => apex() * equator(),
        }
    }

    /// Whether the pattern reads the position of the cell.
    #[inline]
    fn reads_position(&self) -> bool {
        self.pattern != Pattern::Uniform
    }
}

impl Process for ImpactVapor {
    const MANIFEST: Manifest = Manifest {
        name: "impact-vapor",
        version: "1.0.0",
        description: "Micrometeoroid impact vaporization of the regolith: \
                      Phi = flux * bulk_abundance * meteoroid_factor * P(lat, local time), \
                      with P uniform, enhanced towards the dawn apex, concentrated towards \
                      the equator, or both, normalised to a sphere average of 1. Atoms \
                      leave as a Maxwellian flux at the vapour temperature with cosine-law \
                      directions.",
        roles: &[Role::Source],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Impact vaporization as a Na/K source: Morgan, T. H., Zook, H. A. & \
                     Potter, A. E. (1988), Icarus 75, 156; Cintala, M. J. (1992), JGR 97, 947 \
                     (both from memory). Lunar Na rate 2e4 cm^-2 s^-1 from sporadic \
                     meteoroids: Berezhnoy, A. A., \"Meteoroid bombardment as a source of the \
                     lunar exosphere\" (abstract). Vapour as a Maxwellian flux at 2000-5000 K: \
                     common practice. Apex and equator patterns: geometry, derived in the \
                     module documentation",
        draws_on: Some(Pool::Bulk),
        ledger_label: "",
        inputs: &[
            Input::Position,
            Input::LocalTime,
            Input::BulkAbundance,
            Input::MeteoroidFactor,
            Input::Mass,
        ],
        // Ranges are generous on purpose: these are the parameters users
        // tune. Zero is allowed for `flux` (switch the source off in a
        // validation run); 1e10 is four orders above any published
        // estimate for Na at Mercury that we know of.
        parameters: &[
            ParamSpec {
                name: "flux",
                unit: "cm^-2 s^-1",
                description: "Global mean vaporization flux of the species for nominal regolith \
                              and nominal meteoroid flux (atoms cm^-2 s^-1); the default is \
                              lunar Na from sporadic meteoroids, Mercury's is higher",
                kind: ParamKind::Number { default: Some(DEFAULT_FLUX), min: 0.0, max: 1.0e10 },
                origin: Origin::Source(
                    "Berezhnoy, \"Meteoroid bombardment as a source of the lunar exosphere\" \
                     (abstract: 2e4 Na cm^-2 s^-1 from sporadic meteoroids; journal and year \
                     not checked)",
                ),
            },
            ParamSpec {
                name: "pattern",
                unit: "",
                description: "Spatial pattern, normalised to a sphere average of 1: `uniform`; \
                              `apex` (1 + A cos psi about local time 6 h on the equator); \
                              `equator` (cos^n latitude); `apex-equator` (their product)",
                kind: ParamKind::Choice {
                    default: Some("uniform"),
                    options: &["uniform", "apex", "equator", "apex-equator"],
                },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "apex_asymmetry",
                unit: "",
                description: "Apex asymmetry A of the `apex` patterns; apex:antapex ratio \
                              (1 + A)/(1 - A). 0.4 gives 2.3, of the order of the dawn/dusk \
                              ratio of sporadic meteor rates at Earth; not measured at the Moon \
                              or Mercury",
                kind: ParamKind::Number { default: Some(0.4), min: 0.0, max: 1.0 },
                origin: Origin::CommonPractice,
            },
            // cos^50 has a half-width at half maximum of 9.5 deg, already
            // narrower than a coarse surface grid; larger n adds nothing.
            ParamSpec {
                name: "equator_exponent",
                unit: "",
                description: "Exponent n of the `equator` patterns, P ~ cos^n(latitude); 1 is \
                              the limit of dust confined to the orbital plane, 0 is uniform",
                kind: ParamKind::Number { default: Some(1.0), min: 0.0, max: 50.0 },
                origin: Origin::CommonPractice,
            },
            // 100 K is colder than any vapour but lets a user reproduce a
            // thermal launch; 10 000 K covers the hottest plume estimates.
            ParamSpec {
                name: "vapor_temperature",
                unit: "K",
                description: "Temperature of the impact vapour; atoms leave as a Maxwellian flux \
                              at this temperature (typically 2000-5000 K)",
                kind: ParamKind::Number { default: Some(3000.0), min: 100.0, max: 10000.0 },
                origin: Origin::CommonPractice,
            },
        ],
        // Every rate point uses flux = 1e6 and spells out the inputs the
        // law reads; the host zeroes the rest, so bulk_abundance and
        // meteoroid_factor must be given or the rate would be 0. The
        // pattern values are exact in binary (1, 2, 1.5, 0.5) except
        // C(2) = 2/3 and pi/4, hence a tolerance of 1e-12, not 0.
        reference_points: &[
            ReferencePoint {
                description: "Uniform pattern, flux 1e6, nominal regolith and meteoroid flux",
                check: Check::ReleaseRate,
                parameters: &[("flux", Value::Number(1.0e6))],
                input: &[("bulk_abundance", 1.0), ("meteoroid_factor", 1.0)],
                expected: 1.0e6,
                tolerance: 1.0e-12,
                source: "the law: Phi = flux b m_f with P = 1",
            },
            ReferencePoint {
                description: "Uniform pattern, flux 1e6, regolith twice as rich as nominal",
                check: Check::ReleaseRate,
                parameters: &[("flux", Value::Number(1.0e6))],
                input: &[("bulk_abundance", 2.0), ("meteoroid_factor", 1.0)],
                expected: 2.0e6,
                tolerance: 1.0e-12,
                source: "the law: Phi linear in the bulk abundance",
            },
            ReferencePoint {
                description: "Apex pattern, A = 0.5, at the apex (latitude 0, local time 6 h)",
                check: Check::ReleaseRate,
                parameters: &[
                    ("flux", Value::Number(1.0e6)),
                    ("pattern", Value::Text("apex")),
                    ("apex_asymmetry", Value::Number(0.5)),
                ],
                input: &[
                    ("bulk_abundance", 1.0),
                    ("meteoroid_factor", 1.0),
                    ("latitude", 0.0),
                    ("local_time", 6.0),
                ],
                // P = 1 + 0.5 cos(0) = 1.5.
                expected: 1.5e6,
                tolerance: 1.0e-12,
                source: "the law: P = 1 + A cos(psi), psi = 0 at the apex",
            },
            ReferencePoint {
                description: "Apex pattern, A = 0.5, at the antapex (latitude 0, local time 18 h)",
                check: Check::ReleaseRate,
                parameters: &[
                    ("flux", Value::Number(1.0e6)),
                    ("pattern", Value::Text("apex")),
                    ("apex_asymmetry", Value::Number(0.5)),
                ],
                input: &[
                    ("bulk_abundance", 1.0),
                    ("meteoroid_factor", 1.0),
                    ("latitude", 0.0),
                    ("local_time", 18.0),
                ],
                // P = 1 + 0.5 cos(pi) = 0.5: the antapex sees a third of the apex rate.
                expected: 5.0e5,
                tolerance: 1.0e-12,
                source: "the law: P = 1 + A cos(psi), psi = pi at the antapex",
            },
            ReferencePoint {
                description: "Equator pattern, n = 2, on the equator: 1 / C(2) = 3/2",
                check: Check::ReleaseRate,
                parameters: &[
                    ("flux", Value::Number(1.0e6)),
                    ("pattern", Value::Text("equator")),
                    ("equator_exponent", Value::Number(2.0)),
                ],
                input: &[("bulk_abundance", 1.0), ("meteoroid_factor", 1.0), ("latitude", 0.0)],
                expected: 1.5e6,
                tolerance: 1.0e-12,
                source: "derivation: the sphere average of cos^2(latitude) is 2/3",
            },
            ReferencePoint {
                description: "Apex-equator pattern, A = 0.5, n = 1, at the apex: 1.5 / (pi/4)",
                check: Check::ReleaseRate,
                parameters: &[
                    ("flux", Value::Number(1.0e6)),
                    ("pattern", Value::Text("apex-equator")),
                    ("apex_asymmetry", Value::Number(0.5)),
                    ("equator_exponent", Value::Number(1.0)),
                ],
                input: &[
                    ("bulk_abundance", 1.0),
                    ("meteoroid_factor", 1.0),
                    ("latitude", 0.0),
                    ("local_time", 6.0),
                ],
                // 1e6 * 1.5 * 4 / pi = 6e6 / pi.
                expected: 1_909_859.317_102_744,
                tolerance: 1.0e-12,
                source: "derivation: the sphere average of cos(latitude) is pi/4 and the apex \
                         term averages to zero",
            },
            ReferencePoint {
                description: "Na vapour at 3000 K: mean Maxwellian-flux speed \
                              (3 sqrt(pi)/4) sqrt(2kT/m)",
                check: Check::MeanLaunchSpeed,
                parameters: &[("vapor_temperature", Value::Number(3000.0))],
                input: &[("mass", NA_MASS)],
                // a = 1473.076873537 m/s from k_B = 1.380649e-23 J/K and
                // u = 1.66053906660e-27 kg (the SDK's constants).
                expected: 1_958.220_582_885_396,
                tolerance: 0.01,
                source: "mean of the Maxwellian flux (3 sqrt(pi)/4) sqrt(2kT/m), evaluated for \
                         Na at 3000 K (closed form; tests/python/module_reference_values.py)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        // The schema has refused unknown options already; the fallback arm
        // only guards against a manifest and this match drifting apart.
        let pattern = match params.choice("pattern")? {
            "uniform" => Pattern::Uniform,
            "apex" => Pattern::Apex,
            "equator" => Pattern::Equator,
            "apex-equator" => Pattern::ApexEquator,
            other => {
                return Err(ProcessError::parameter(format!(
                    "pattern \"{other}\" is not implemented; use uniform, apex, equator or \
                     apex-equator"
                )));
            }
        };
        // Every parameter has a default, so A and n are read whatever the
        // pattern; they are simply unused by the patterns that ignore them.
        let equator_exponent = params.number("equator_exponent")?;
        // C(n) in [0.17, 1] for the schema's n in [0, 50], so 1/C(n) is finite.
        let equator_scale = match pattern {
            Pattern::Equator | Pattern::ApexEquator => 1.0 / equator_mean(equator_exponent),
            Pattern::Uniform | Pattern::Apex => 1.0,
        };
        Ok(ImpactVapor {
            flux: params.number("flux")?,
            pattern,
            apex_asymmetry: params.number("apex_asymmetry")?,
            equator_exponent,
            vapor_temperature: params.number("vapor_temperature")?,
            equator_scale,
        })
    }
}

/// A relative factor (abundance, meteoroid flux) the law can use: finite and >= 0.
#[inline]
fn usable_factor(x: f64) -> bool {
    x.is_finite() && x >= 0.0
}

impl Source for ImpactVapor {
    /// Maxwellian-flux speeds at the vapour temperature, cosine-law
    /// directions (see `launch_one`).
    const LAUNCH_LAWS: &'static [LaunchLaw] = &[LaunchLaw {
        when: &[],
        speed: SpeedLaw::MaxwellianFlux { temperature: Quantity::Param("vapor_temperature") },
        direction: DirectionLaw::Cosine,
    }];

    fn release_rate_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
        if !usable_factor(cell.bulk_abundance) || !usable_factor(cell.meteoroid_factor) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: bulk abundance {} and meteoroid factor {}; both must be finite \
                     and >= 0",
                    cell.cell, cell.bulk_abundance, cell.meteoroid_factor
                ),
            ));
        }
        // The position is judged only when the pattern reads it: a uniform
        // source has no use for it, and refusing a record over a field the
        // law ignores would only break other hosts. The latitude check also
        // keeps cos(latitude) >= 0, which the fractional power in the
        // equator factor needs.
        let position_ok =
            cell.latitude.abs() <= core::f64::consts::FRAC_PI_2 && cell.local_time.is_finite();
        if self.reads_position() && !position_ok {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: latitude {} rad and local time {} h; the latitude must lie in \
                     [-pi/2, pi/2] and the local time must be finite",
                    cell.cell, cell.latitude, cell.local_time
                ),
            ));
        }
        // The vapour comes out of the grains, not the adsorbed pool, so the
        // rate does not depend on `adsorbed` and the host depletes nothing
        // (draws_on = bulk).
        Ok(self.flux
            * cell.bulk_abundance
            * cell.meteoroid_factor
            * self.pattern_factor(cell.latitude, cell.local_time))
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
        // Atoms crossing the surface of a vapour in equilibrium at T_v:
        // Maxwellian flux speeds and cosine-law directions. The surface
        // temperature plays no part. One stream per record, speed first. The
        // vapour temperature was range-checked by the schema, so only the
        // mass needs checking per record.
        let mut rng = Rng::new(req.key);
        let speed = rng.maxwellian_flux_speed(self.vapor_temperature, req.mass);
        Ok(rng.cosine_direction().times(speed))
    }
}

exobound_sdk::export_process!(ImpactVapor: Source);

#[cfg(test)]
mod tests {
    use exobound_sdk::constants::{ATOMIC_MASS, BOLTZMANN};
    use exobound_sdk::sample::thermal_speed;
    use exobound_sdk::testing::{self, Roles};

    use super::*;

    use core::f64::consts::{FRAC_PI_2, PI};

    /// The law with the parameters `given` (others at their defaults), built
    /// as the module's `init` builds it.
    fn law_with(given: &[(&str, Value)]) -> ImpactVapor {
        testing::law(given)
    }

    /// Cell 9 at `latitude` rad and `local_time` h, nominal regolith and dust.
    fn cell(latitude: f64, local_time: f64) -> CellState {
        CellState {
            cell: 9,
            latitude,
            local_time,
            bulk_abundance: 1.0,
            meteoroid_factor: 1.0,
            ..CellState::default()
        }
    }

    /// `n` launches of atoms of `mass` kg from cell 4, each with its own key.
    fn requests(n: u64, mass: f64, surface_temperature: f64) -> Vec<LaunchRequest> {
        let base =
            LaunchRequest { cell: 4, temperature: surface_temperature, mass, ..Default::default() };
        testing::draws(base, n, 77)
    }

    /// Sphere average of the law's pattern, dimensionless, by the midpoint
    /// rule on `n_lat` latitude bands and 96 local-time columns, weighted by
    /// cos(latitude) (dOmega = cos(lat) dlat dlon). The pattern is a
    /// first-degree trigonometric polynomial in local time, which the
    /// periodic midpoint rule integrates exactly; in latitude the rule's
    /// error is O(h^2) for the cos(lat) weight alone (about 1e-9 here).
    fn sphere_average(law: &ImpactVapor, n_lat: usize) -> f64 {
        let n_lt = 96;
        let (d_lat, d_lt) = (PI / n_lat as f64, 24.0 / n_lt as f64);
        let mut sum = 0.0;
        for i in 0..n_lat {
            let lat = -FRAC_PI_2 + (i as f64 + 0.5) * d_lat;
            let w = lat.cos();
            for j in 0..n_lt {
                sum += w * law.pattern_factor(lat, (j as f64 + 0.5) * d_lt);
            }
        }
        // Total weight: sum of cos(lat) d_lat over latitude -> 2, times n_lt columns.
        sum * d_lat / (2.0 * n_lt as f64)
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let law = law_with(&[]);
        // Berezhnoy (abstract): lunar Na from sporadic meteoroids, 2e4 cm^-2 s^-1.
        assert_eq!(law.flux, 2.0e4);
        assert_eq!(law.pattern, Pattern::Uniform);
        // Common practice: impact vapour at 2000-5000 K; 3000 K chosen.
        assert_eq!(law.vapor_temperature, 3000.0);
        // Common practice: apex:antapex of order 2-3 (A = 0.4 gives 2.33), n = 1.
        assert_eq!(law.apex_asymmetry, 0.4);
        assert_eq!(law.equator_exponent, 1.0);
        let info = ImpactVapor::MANIFEST.to_info();
        assert_eq!(info.draws_on.as_deref(), Some("bulk"));
        assert!(info.parameters[0].default_origin.starts_with("source: Berezhnoy"));
        assert_eq!(info.parameters[4].default_origin, "common practice");
    }

    #[test]
    fn lanczos_log_gamma_matches_exact_values() {
        // Gamma(n) = (n-1)! and Gamma(1/2) = sqrt(pi), Gamma(3/2) = sqrt(pi)/2
        // (Abramowitz & Stegun 6.1.6, 6.1.8).
        let exact = [
            (1.0, 0.0),
            (2.0, 0.0),
            (0.5, 0.5 * PI.ln()),
            (1.5, (0.5 * PI.sqrt()).ln()),
            (5.0, 24.0f64.ln()),
            (10.0, 362_880.0f64.ln()),
        ];
        for (x, want) in exact {
            let got = ln_gamma(x);
            assert!((got - want).abs() < 1e-14, "ln Gamma({x}) = {got}, want {want}");
        }
        // Recurrence Gamma(x + 1) = x Gamma(x) (A&S 6.1.15) at non-integer points,
        // up to the largest argument the schema allows, (50 + 3)/2 = 26.5.
        for x in [0.75, 1.3, 2.85, 7.25, 13.1, 26.5] {
            let lhs = ln_gamma(x + 1.0);
            let rhs = ln_gamma(x) + x.ln();
            assert!((lhs - rhs).abs() < 1e-13 * lhs.abs().max(1.0), "x = {x}");
        }
    }

    #[test]
    fn equator_mean_matches_wallis_integrals() {
        // Derivation (module docs): C(n) = (1/2) int cos^(n+1); Wallis integrals give
        // C(0) = 1, C(1) = pi/4, C(2) = 2/3, C(3) = 3 pi/16, C(4) = 8/15.
        for (n, want) in [
            (0.0, 1.0),
            (1.0, PI / 4.0),
            (2.0, 2.0 / 3.0),
            (3.0, 3.0 * PI / 16.0),
            (4.0, 8.0 / 15.0),
        ] {
            let got = equator_mean(n);
            assert!((got - want).abs() < 1e-14, "C({n}) = {got}, want {want}");
        }
        // C(50) = 0.1746409528736113 (mpmath at 40 digits, from the closed form and by
        // quadrature of cos^51; tests/python/module_reference_values.py).
        assert!((equator_mean(50.0) - 0.174_640_952_873_609_28).abs() < 1e-13);
    }

    #[test]
    fn every_pattern_averages_to_one_over_the_sphere() {
        // Derivation (module docs): each pattern is normalised so its sphere average
        // is exactly 1 and `flux` stays the global mean; a fine quadrature confirms it.
        // The cases span the schema: A at both ends, n from 0 (uniform) through
        // fractional values (non-smooth at the poles) to the largest allowed.
        let mut cases = vec![(Value::Text("uniform"), 0.0, 0.0)];
        for a in [0.0, 0.4, 1.0] {
            cases.push((Value::Text("apex"), a, 0.0));
        }
        for n in [0.0, 0.5, 1.0, 2.0, 3.7, 10.0, 50.0] {
            cases.push((Value::Text("equator"), 0.0, n));
            for a in [0.5, 1.0] {
                cases.push((Value::Text("apex-equator"), a, n));
            }
        }
        for (pattern, a, n) in cases {
            let law = law_with(&[
                ("pattern", pattern),
                ("apex_asymmetry", Value::Number(a)),
                ("equator_exponent", Value::Number(n)),
            ]);
            let mean = sphere_average(&law, 20_000);
            assert!((mean - 1.0).abs() < 1e-8, "{pattern:?} A = {a} n = {n}: average {mean}");
        }
    }

    #[test]
    fn release_rate_follows_the_law() {
        let law = law_with(&[("flux", Value::Number(1.0e6))]);
        // The law, uniform pattern: Phi = flux b m_f.
        assert_eq!(law.release_rate_one(&cell(0.3, 14.0)).unwrap(), 1.0e6);
        let rich = CellState { bulk_abundance: 2.0, ..cell(0.0, 0.0) };
        assert_eq!(law.release_rate_one(&rich).unwrap(), 2.0e6);
        let shower = CellState { meteoroid_factor: 3.5, ..cell(0.0, 0.0) };
        assert_eq!(law.release_rate_one(&shower).unwrap(), 3.5e6);
        let barren = CellState { bulk_abundance: 0.0, ..cell(0.0, 0.0) };
        assert_eq!(law.release_rate_one(&barren).unwrap(), 0.0);

        let apex = law_with(&[("flux", Value::Number(1.0e6)), ("pattern", Value::Text("apex"))]);
        // P = 1 + A cos(psi), A = 0.4 (default): 1.4 at the apex (6 h, equator), 0.6 at the
        // antapex (18 h), 1 on the noon and midnight meridians and at the poles (psi = 90 deg).
        let p = |law: &ImpactVapor, lat: f64, lt: f64| {
            law.release_rate_one(&cell(lat, lt)).unwrap() / 1e6
        };
        assert!((p(&apex, 0.0, 6.0) - 1.4).abs() < 1e-15);
        assert!((p(&apex, 0.0, 18.0) - 0.6).abs() < 1e-15);
        assert!((p(&apex, 0.0, 12.0) - 1.0).abs() < 1e-15);
        assert!((p(&apex, 0.0, 0.0) - 1.0).abs() < 1e-15);
        assert!((p(&apex, FRAC_PI_2, 6.0) - 1.0).abs() < 1e-15);
        // Spherical law of cosines: 45 deg north at 9 h is cos(45) cos(45) = 1/2 from the apex.
        let lat45 = PI / 4.0;
        assert!((p(&apex, lat45, 9.0) - 1.2).abs() < 1e-15);
        // Local time is periodic: 30 h is 6 h.
        assert!((p(&apex, 0.0, 30.0) - 1.4).abs() < 1e-14);

        let eq = law_with(&[
            ("flux", Value::Number(1.0e6)),
            ("pattern", Value::Text("equator")),
            ("equator_exponent", Value::Number(2.0)),
        ]);
        // cos^2(lat) / (2/3) (derivation): 1.5 on the equator, 0.75 at 45 deg, 0 at the pole.
        assert!((p(&eq, 0.0, 3.0) - 1.5).abs() < 1e-14);
        assert!((p(&eq, -lat45, 3.0) - 0.75).abs() < 1e-14);
        assert!(p(&eq, FRAC_PI_2, 3.0).abs() < 1e-30);
        assert!(p(&eq, -FRAC_PI_2, 3.0) >= 0.0);
    }

    /// The manifest's promises, run the way the host's `module check` does:
    /// parameters through the schema, the input record by field name, and
    /// the stochastic check averaged over 100 000 draws with fixed keys.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<ImpactVapor>::new().source());
    }

    /// The launches against the laws declared in `LAUNCH_LAWS`, as `vet`
    /// tests them (one-sample KS tests at p = 0.01 of speeds or energies and
    /// of directions; the distribution functions and their sources are in
    /// `exobound_sdk::launch_law`).
    #[test]
    fn launches_follow_the_declared_laws() {
        let base = LaunchRequest { mass: NA_MASS, ..LaunchRequest::default() };
        testing::assert_launch_laws::<ImpactVapor>(base, 20_000, 3);
    }

    #[test]
    fn mean_speed_reference_value_is_the_closed_form() {
        // Maxwellian flux: <v> = (3 sqrt(pi)/4) a, a = sqrt(2kT/m); recomputed here from
        // the SDK constants for Na at 3000 K, so the manifest's number cannot drift.
        let a = thermal_speed(3000.0, NA_MASS);
        let mean = 0.75 * PI.sqrt() * a;
        assert!((mean - 1_958.220_582_885_396).abs() < 1e-9, "{mean}");
        // a = 931.66 m/s at 1200 K (tests/python/sampler_reference_values.py) confirms the
        // formula and constants.
        assert!((thermal_speed(1200.0, NA_MASS) - 931.66).abs() < 0.005);
    }

    #[test]
    fn launch_is_a_maxwellian_flux_at_the_vapour_temperature() {
        let mut law = law_with(&[]);
        let n = 100_000;
        let nf = n as f64;
        // The surface is cold (100 K); the vapour (3000 K default) sets the speeds.
        let reqs = requests(n, NA_MASS, 100.0);
        let mut vs = vec![Velocity::ZERO; reqs.len()];
        law.launch(&reqs, &mut vs).unwrap();
        assert!(vs.iter().all(|v| v.up > 0.0), "every launch leaves the surface");
        let mut speeds: Vec<f64> = vs.iter().map(Velocity::speed).collect();
        let a = thermal_speed(3000.0, NA_MASS);
        // Maxwellian flux: <v> = (3 sqrt(pi)/4) a; sd = a sqrt(2 - 9 pi/16) (moments of chi
        // with 4 degrees of freedom, scipy.stats.chi(df=4)).
        let mean = speeds.iter().sum::<f64>() / nf;
        let sd = a * (2.0 - 9.0 * PI / 16.0).sqrt();
        assert!((mean - 0.75 * PI.sqrt() * a).abs() < 3.0 * sd / nf.sqrt(), "mean {mean}");
        // <E> = 2kT, and Var(E) = 2 (kT)^2 for the flux's Gamma(2, kT) energy distribution.
        let kt = BOLTZMANN * 3000.0;
        let mean_e = speeds.iter().map(|v| 0.5 * NA_MASS * v * v).sum::<f64>() / nf;
        assert!((mean_e - 2.0 * kt).abs() < 3.0 * 2f64.sqrt() * kt / nf.sqrt(), "{mean_e}");
        // Maxwellian flux CDF = 1 - (1 + v^2/a^2) exp(-v^2/a^2) (integral of v^3
        // exp(-v^2/a^2)); KS at p = 0.01.
        testing::assert_ks("Maxwellian flux speed", &mut speeds, |v| {
            let q = v * v / (a * a);
            1.0 - (1.0 + q) * (-q).exp()
        });
        // Cosine law: <cos theta> = 2/3, variance 1/18 (from f ~ cos theta sin theta,
        // common practice); azimuth isotropic, so <east> = 0 (symmetry).
        let mean_cos = vs.iter().map(|v| v.up / v.speed()).sum::<f64>() / nf;
        assert!((mean_cos - 2.0 / 3.0).abs() < 3.0 * (1.0f64 / 18.0 / nf).sqrt(), "{mean_cos}");
        let mean_east = vs.iter().map(|v| v.east).sum::<f64>() / nf;
        assert!(mean_east.abs() < 3.0 * mean / nf.sqrt(), "mean east {mean_east}");
    }

    #[test]
    fn launch_depends_only_on_the_key_and_the_vapour() {
        let mut law = law_with(&[("vapor_temperature", Value::Number(4500.0))]);
        // K, 39.0983 u (IUPAC standard atomic weight; Prohaska et al. 2022, Pure Appl. Chem.
        // 94, 573).
        let m = 39.0983 * ATOMIC_MASS;
        let reqs = requests(5, m, 300.0);
        // Counter-based streams: the batch's order and cuts do not matter, the keys do.
        testing::assert_batch_invariant("launch", &reqs, |r, v| law.launch(r, v));
        let first = law.launch_one(&reqs[0]).unwrap();
        assert_ne!(first, law.launch_one(&reqs[1]).unwrap());
        // The surface temperature is not read: a 700 K surface gives the same launch.
        let hot = LaunchRequest { temperature: 700.0, ..reqs[0] };
        assert_eq!(law.launch_one(&hot).unwrap(), first);
        let mut apex = law_with(&[("pattern", Value::Text("apex-equator"))]);
        let cells = [cell(0.0, 6.0), cell(0.7, 18.0), cell(-1.2, 0.5)];
        testing::assert_batch_invariant("release_rate", &cells, |c, r| apex.release_rate(c, r));
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let law = law_with(&[("pattern", Value::Text("apex"))]);
        let bad_bulk = CellState { bulk_abundance: -1.0, ..cell(0.0, 6.0) };
        let err = law.release_rate_one(&bad_bulk).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("cell 9"), "{err}");
        let bad_dust = CellState { meteoroid_factor: f64::NAN, ..cell(0.0, 6.0) };
        assert_eq!(law.release_rate_one(&bad_dust).unwrap_err().code, ErrorCode::InvalidInput);
        assert_eq!(
            law.release_rate_one(&cell(2.0, 6.0)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        assert_eq!(
            law.release_rate_one(&cell(0.0, f64::NAN)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        // The uniform pattern does not read the position, so it does not judge it.
        let uniform = law_with(&[]);
        assert_eq!(uniform.release_rate_one(&cell(f64::NAN, 6.0)).unwrap(), 2.0e4);
        let err = uniform.launch_one(&requests(1, 0.0, 300.0)[0]).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("cell 4"), "{err}");
    }

    #[test]
    fn out_of_range_parameters_are_refused_by_the_schema() {
        // Each refused value names the parameter and the allowed range or options.
        for (name, value, needle) in [
            ("apex_asymmetry", Value::Number(1.5), "[0, 1]"),
            ("equator_exponent", Value::Number(-1.0), "[0, 50]"),
            ("flux", Value::Number(-5.0), "cm^-2 s^-1"),
            ("flux", Value::Number(2.0e10), "10000000000"),
            ("vapor_temperature", Value::Number(50.0), "K"),
            ("pattern", Value::Text("dawn"), "apex-equator"),
            ("pattern", Value::Number(1.0), "options"),
        ] {
            let err = testing::validate::<ImpactVapor>(&[(name, value)]).unwrap_err();
            assert_eq!(err.code, ErrorCode::InvalidParameter);
            assert!(err.message.contains(name) && err.message.contains(needle), "{err}");
        }
    }
}

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
//! A spread of binding energies. Real regolith offers sites of different
//! depth (Hunten & Sprague used a distribution of U, from memory), which
//! makes the release less steep in T than one Arrhenius term. With
//! `binding_spread` = `uniform` (U uniform on [U0 - w, U0 + w]) or
//! `gaussian` (U normal about U0 with standard deviation s, truncated at
//! U0 +- 3 s), the per-atom rate is the average over the sites,
//!
//! ```text
//! k(T) = nu * <exp(-U / (k_B T))> = nu * int p(U) exp(-U/(k_B T)) dU / int p(U) dU
//! ```
//!
//! i.e. every site class is taken as equally populated and first order.
//! The integral is computed by a fixed composite Gauss-Legendre rule, 8
//! panels of 8 nodes, in x = (U - U_lo) / (k_B T) after factoring out
//! exp(-U_lo / (k_B T)), so nothing underflows but the overall factor. At
//! low T the integrand falls by e^-1 every k_B T above the lowest site, so
//! the rule covers [U_lo, min(U_hi, U_lo + 45 k_B T)] only: the rest weighs
//! less than e^-40 (the Gaussian weight can rise by at most e^4.5 inside
//! the +-3 s window). Each panel then spans at most 5.6 k_B T, where the
//! 8-node rule is exact to about 1e-10; the tests compare the rule with the
//! closed forms, (k_B T / 2w) (e^(-U_lo/kT) - e^(-U_hi/kT)) for the uniform
//! case and e^(-U0/kT + r^2/2) [Phi(3 - r) - Phi(-3 - r)] / [Phi(3) - Phi(-3)],
//! r = s / (k_B T), for the truncated Gaussian. A zero width is the single
//! value.
//!
//! Limits of the law, so that a user knows what is left out:
//! - the sites are populated in proportion to p(U) at every instant; in
//!   reality the shallow sites empty first and the deep ones fill, so the
//!   spread describes a fresh, randomly filled surface best;
//! - U independent of coverage, i.e. no lateral interaction between
//!   adsorbates, reasonable for the sub-monolayer coverages (< 1e14
//!   atoms cm^-2) of exospheric alkalis;
//! - no re-adsorption inside the porous regolith before escape to vacuum;
//!   the emitted flux is that of a flat surface.

use exobound_sdk::constants::{BOLTZMANN, ELECTRON_VOLT};
use exobound_sdk::{
    CellState, Check, DirectionLaw, ErrorCode, Input, LaunchLaw, LaunchRequest, Manifest, Origin,
    ParamKind, ParamSpec, Params, Pool, Process, ProcessError, Quantity, ReferencePoint, Rng, Role,
    Source, SpeedLaw, Value, Velocity, math,
};

/// Mass of one Na atom, kg (22.98976928 u, the IUPAC standard atomic weight;
/// Prohaska et al. 2022, Pure Appl. Chem. 94, 573), used by
/// the launch-speed reference point.
const NA_MASS: f64 = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;

/// Panels of the composite Gauss-Legendre rule over the binding energies.
const PANELS: usize = 8;

/// Nodes per panel of the Gauss-Legendre rule.
const NODES: usize = 8;

/// Span of the quadrature above the lowest binding energy, in units of
/// k_B T, dimensionless (the integrand has fallen by e^-45 there).
const SPAN_KT: f64 = 45.0;

/// Half-width of the truncated Gaussian spread, in standard deviations.
pub const GAUSSIAN_CUT: f64 = 3.0;

/// Nodes (on [-1, 1]) and weights of the `n`-point Gauss-Legendre rule,
/// dimensionless, by Newton's method on the Legendre polynomial P_n from
/// the Chebyshev estimate cos(pi (i + 3/4) / (n + 1/2)) (the textbook
/// construction, e.g. Press et al., Numerical Recipes §4.6).
fn gauss_legendre(n: usize) -> ([f64; NODES], [f64; NODES]) {
    let mut x = [0.0; NODES];
    let mut w = [0.0; NODES];
    for i in 0..n {
        let mut z = math::cos(core::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5));
        let mut dp = 1.0;
        for _ in 0..100 {
            // P_n(z) by the three-term recurrence, and P_n'(z) from P_n, P_(n-1).
            let (mut p0, mut p1) = (1.0, z);
            for k in 2..=n {
                let p2 = ((2 * k - 1) as f64 * z * p1 - (k - 1) as f64 * p0) / k as f64;
                p0 = p1;
                p1 = p2;
            }
            dp = n as f64 * (z * p1 - p0) / (z * z - 1.0);
            let step = p1 / dp;
            z -= step;
            if step.abs() < 1e-16 {
                break;
            }
        }
        x[i] = z;
        w[i] = 2.0 / ((1.0 - z * z) * dp * dp);
    }
    (x, w)
}

/// How the binding energies of the sites are spread.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum BindingSpread {
    /// Every site has the binding energy U0.
    Single,
    /// U uniform on [U0 - w, U0 + w].
    Uniform {
        /// Half-width w, eV.
        half_width: f64,
    },
    /// U normal about U0 with standard deviation s, truncated at U0 +- 3 s.
    Gaussian {
        /// Standard deviation s, eV.
        sigma: f64,
    },
}

/// First-order thermal desorption with a single binding energy or a
/// spread of them, and a thermal (Maxwellian-flux, cosine-law) launch at
/// the surface temperature.
#[derive(Clone, Debug, PartialEq)]
pub struct ThermalDesorption {
    /// Vibrational (attempt) frequency nu of the adsorption bond, s^-1.
    pub vibrational_frequency: f64,
    /// Binding energy U of the adsorbate (the centre of any spread), eV.
    pub binding_energy: f64,
    /// Spread of the binding energies over the sites.
    pub spread: BindingSpread,
    /// U / k_B, the activation temperature, K (cached so that the per-cell
    /// rate is one division and one exponential).
    activation_temperature: f64,
    /// Gauss-Legendre nodes on [-1, 1], dimensionless (cached).
    nodes: [f64; NODES],
    /// Gauss-Legendre weights, dimensionless (cached).
    weights: [f64; NODES],
}

impl ThermalDesorption {
    /// Per-atom desorption rate, s^-1, at surface temperature `temperature`
    /// in K (which must be > 0): nu * exp(-U / (k_B T)) for a single binding
    /// energy, its average over the sites for a spread.
    ///
    /// On a cold nightside (T ~ 100 K) the exponent is about -215 and the
    /// result is of order 1e-80 s^-1; for the default U and T below about
    /// 29 K (U/kT > 745) the exponential underflows to exactly 0, which is
    /// the right limit.
    #[inline]
    pub fn rate_per_atom(&self, temperature: f64) -> f64 {
        match self.spread {
            BindingSpread::Single => {
                self.vibrational_frequency * math::exp(-self.activation_temperature / temperature)
            }
            _ => self.vibrational_frequency * self.spread_average(temperature),
        }
    }

    /// Lowest and highest binding energy of the sites, eV.
    pub fn binding_range(&self) -> (f64, f64) {
        let half = match self.spread {
            BindingSpread::Single => 0.0,
            BindingSpread::Uniform { half_width } => half_width,
            BindingSpread::Gaussian { sigma } => GAUSSIAN_CUT * sigma,
        };
        (self.binding_energy - half, self.binding_energy + half)
    }

    /// <exp(-U / (k_B T))> over the spread of binding energies,
    /// dimensionless, at `temperature` K, by the fixed composite
    /// Gauss-Legendre rule described in the module documentation.
    pub fn spread_average(&self, temperature: f64) -> f64 {
        // k_B T in eV.
        let kt = BOLTZMANN * temperature / ELECTRON_VOLT;
        let (lo, hi) = self.binding_range();
        let top = hi.min(lo + SPAN_KT * kt);
        let panel = (top - lo) / PANELS as f64;
        // Relative weight p(U) (not normalised) and its integral over [lo, hi].
        let (weight, norm): (&dyn Fn(f64) -> f64, f64) = match self.spread {
            BindingSpread::Gaussian { sigma } => {
                // int of exp(-z^2/2) over [-3, 3] is sqrt(2 pi) (1 - erfc(3/sqrt 2)).
                let norm = sigma
                    * math::sqrt(2.0 * core::f64::consts::PI)
                    * (1.0 - math::erfc(GAUSSIAN_CUT / core::f64::consts::SQRT_2));
                let u0 = self.binding_energy;
                (
                    &move |u: f64| {
                        let z = (u - u0) / sigma;
                        math::exp(-0.5 * z * z)
                    },
                    norm,
                )
            }
            _ => (&|_u: f64| 1.0, hi - lo),
        };
        let mut sum = 0.0;
        for p in 0..PANELS {
            let mid = lo + (p as f64 + 0.5) * panel;
            for (x, w) in self.nodes.iter().zip(self.weights.iter()) {
                let u = mid + 0.5 * panel * x;
                sum += w * weight(u) * math::exp(-(u - lo) / kt);
            }
        }
        math::exp(-lo / kt) * sum * 0.5 * panel / norm
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
                      Phi = N_s nu exp(-U/(k_B T)), with U a single value or spread uniformly \
                      or as a truncated Gaussian over the sites (the rate is then the average \
                      over the spread, by fixed quadrature); launch speeds from the Maxwellian \
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
            ParamSpec {
                name: "binding_spread",
                unit: "",
                description: "Spread of binding energies over the sites: `single` (every site \
                              at binding_energy), `uniform` (on binding_energy +- \
                              binding_half_width) or `gaussian` (standard deviation \
                              binding_sigma, truncated at +-3 sigma)",
                kind: ParamKind::Choice {
                    default: Some("single"),
                    options: &["single", "uniform", "gaussian"],
                },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "binding_half_width",
                unit: "eV",
                description: "Half-width w of the `uniform` spread; the lowest site, \
                              binding_energy - w, must stay above 0 eV (illustrative default)",
                kind: ParamKind::Number { default: Some(0.2), min: 0.0, max: 1.0 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "binding_sigma",
                unit: "eV",
                description: "Standard deviation of the `gaussian` spread; binding_energy - 3 \
                              sigma must stay above 0 eV (illustrative default)",
                kind: ParamKind::Number { default: Some(0.1), min: 0.0, max: 0.5 },
                origin: Origin::CommonPractice,
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
                source: "nu exp(-U/kT) with nu = 1e13 s^-1 and U for Na (Hunten & Sprague 2002, \
                         Meteoritics & Planet. Sci. 37, 1191, from memory), evaluated in \
                         tests/python/module_reference_values.py",
            },
            ReferencePoint {
                description: "U = 1.85 eV, T = 400 K, N_s = 1e10 cm^-2: 4.91e-11 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[],
                input: &[("temperature", 400.0), ("adsorbed", 1.0e10)],
                expected: 4.91e-1,
                tolerance: 1.0e-3,
                source: "nu exp(-U/kT) with nu = 1e13 s^-1 and U for Na (Hunten & Sprague 2002, \
                         Meteoritics & Planet. Sci. 37, 1191, from memory), evaluated in \
                         tests/python/module_reference_values.py",
            },
            ReferencePoint {
                description: "U = 1.4 eV, T = 400 K, N_s = 1e10 cm^-2: 2.295e-5 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[("binding_energy", Value::Number(1.4))],
                input: &[("temperature", 400.0), ("adsorbed", 1.0e10)],
                expected: 2.295e5,
                tolerance: 1.0e-3,
                source: "nu exp(-U/kT) with nu = 1e13 s^-1 and U for Na (Hunten & Sprague 2002, \
                         Meteoritics & Planet. Sci. 37, 1191, from memory), evaluated in \
                         tests/python/module_reference_values.py",
            },
            ReferencePoint {
                description: "U = 2.0 eV, T = 700 K, N_s = 1e10 cm^-2: 3.987e-2 s^-1 per atom",
                check: Check::ReleaseRate,
                parameters: &[("binding_energy", Value::Number(2.0))],
                input: &[("temperature", 700.0), ("adsorbed", 1.0e10)],
                expected: 3.987e8,
                tolerance: 1.0e-3,
                source: "nu exp(-U/kT) with nu = 1e13 s^-1 and U for Na (Hunten & Sprague 2002, \
                         Meteoritics & Planet. Sci. 37, 1191, from memory), evaluated in \
                         tests/python/module_reference_values.py",
            },
            ReferencePoint {
                description: "Uniform spread 1.85 +- 0.2 eV, T = 600 K, N_s = 1e10 cm^-2: \
                              nu (kT/2w) (exp(-1.65 eV/kT) - exp(-2.05 eV/kT)) N_s",
                check: Check::ReleaseRate,
                parameters: &[
                    ("binding_spread", Value::Text("uniform")),
                    ("binding_half_width", Value::Number(0.2)),
                ],
                input: &[("temperature", 600.0), ("adsorbed", 1.0e10)],
                // Closed form, SI-exact k_B and e, mpmath at 40 digits
                // (tests/python/module_reference_values.py).
                expected: 178_601_234.296_213_6,
                tolerance: 1.0e-9,
                source: "closed form of the uniform average of exp(-U/kT) \
                         (tests/python/module_reference_values.py), on the law of Hunten & \
                         Sprague 2002, Meteoritics & Planet. Sci. 37, 1191 (from memory)",
            },
            ReferencePoint {
                description: "Gaussian spread about 1.85 eV, sigma 0.1 eV cut at 3 sigma, \
                              T = 600 K, N_s = 1e10 cm^-2",
                check: Check::ReleaseRate,
                parameters: &[
                    ("binding_spread", Value::Text("gaussian")),
                    ("binding_sigma", Value::Number(0.1)),
                ],
                input: &[("temperature", 600.0), ("adsorbed", 1.0e10)],
                // nu exp(-U0/kT + r^2/2) [Phi(3 - r) - Phi(-3 - r)] / [Phi(3) - Phi(-3)] N_s,
                // r = sigma/kT, mpmath at 40 digits, and its quadrature agrees to 1e-20
                // (tests/python/module_reference_values.py).
                expected: 161_065_270.543_741_06,
                tolerance: 1.0e-9,
                source: "closed form of the truncated-Gaussian average of exp(-U/kT) \
                         (tests/python/module_reference_values.py), on the law of Hunten & \
                         Sprague 2002, Meteoritics & Planet. Sci. 37, 1191 (from memory)",
            },
            ReferencePoint {
                description: "Na launched from a 1200 K surface: mean Maxwellian-flux speed \
                              (3 sqrt(pi)/4) sqrt(2kT/m)",
                check: Check::MeanLaunchSpeed,
                parameters: &[],
                input: &[("temperature", 1200.0), ("mass", NA_MASS)],
                expected: 1238.49,
                tolerance: 0.01,
                source: "mean of the Maxwellian flux (3 sqrt(pi)/4) sqrt(2kT/m), Na at 1200 K \
                         (closed form; tests/python/sampler_reference_values.py)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        let vibrational_frequency = params.number("vibrational_frequency")?;
        let binding_energy = params.number("binding_energy")?;
        // A zero width is the single value (the limit of either spread).
        let spread = match params.choice("binding_spread")? {
            "single" => BindingSpread::Single,
            "uniform" => match params.number("binding_half_width")? {
                0.0 => BindingSpread::Single,
                half_width => BindingSpread::Uniform { half_width },
            },
            "gaussian" => match params.number("binding_sigma")? {
                0.0 => BindingSpread::Single,
                sigma => BindingSpread::Gaussian { sigma },
            },
            other => {
                return Err(ProcessError::parameter(format!(
                    "binding_spread \"{other}\" is not implemented; use single, uniform or \
                     gaussian"
                )));
            }
        };
        // The schema has already refused values outside its ranges, so the
        // numbers are finite and U/k_B is a finite temperature (1.85 eV
        // corresponds to 21 468 K). What it cannot see is the combination:
        // the lowest site must stay bound.
        let (name, width, reach) = match spread {
            BindingSpread::Single => ("", 0.0, 0.0),
            BindingSpread::Uniform { half_width } => ("binding_half_width", half_width, 1.0),
            BindingSpread::Gaussian { sigma } => ("binding_sigma", sigma, GAUSSIAN_CUT),
        };
        if binding_energy - reach * width <= 0.0 {
            return Err(ProcessError::parameter(format!(
                "parameter `{name}` = {width} eV puts the lowest binding energy at {} eV; with \
                 binding_energy = {binding_energy} eV the allowed range is [0, {}) eV",
                binding_energy - reach * width,
                binding_energy / reach
            )));
        }
        let (nodes, weights) = gauss_legendre(NODES);
        Ok(ThermalDesorption {
            vibrational_frequency,
            binding_energy,
            spread,
            // U [eV] * (J per eV) / k_B [J/K] = activation temperature in K.
            activation_temperature: binding_energy * ELECTRON_VOLT / BOLTZMANN,
            nodes,
            weights,
        })
    }
}

impl Source for ThermalDesorption {
    /// Maxwellian-flux speeds at the surface temperature of the launch,
    /// cosine-law directions (see `launch_one`).
    const LAUNCH_LAWS: &'static [LaunchLaw] = &[LaunchLaw {
        when: &[],
        speed: SpeedLaw::MaxwellianFlux { temperature: Quantity::Input("temperature") },
        direction: DirectionLaw::Cosine,
    }];

    fn release_rate_one(&self, cell: &CellState) -> Result<f64, ProcessError> {
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
                    "cell {}: adsorbed surface density {} atoms cm^-2; it must be finite and >= 0",
                    cell.cell, cell.adsorbed
                ),
            ));
        }
        // First order in the coverage: every adsorbed atom leaves
        // independently at the Arrhenius rate of its site. The host, not the
        // law, caps the release of a step by the pool it holds, so a rate far
        // above N_s / dt (Mercury's subsolar point) is correct here and
        // simply empties the cell.
        Ok(cell.adsorbed * self.rate_per_atom(cell.temperature))
    }

    fn launch_one(&self, req: &LaunchRequest) -> Result<Velocity, ProcessError> {
        if !usable_temperature(req.temperature) {
            return Err(ProcessError::outside_validity(format!(
                "cell {}: surface temperature {} K at launch; a thermal launch needs a finite \
                 temperature above 0 K",
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
        // An atom that desorbs from a surface in equilibrium at T leaves with
        // the distribution of atoms crossing a plane, the Maxwellian *flux*
        // (weighted by v cos theta), not the Maxwellian of the gas itself:
        // hence v^3 exp(-v^2/a^2) and the cosine law, mean energy 2kT rather
        // than 3kT/2.
        //
        // One stream per record: the draw depends only on the key, never on
        // the record's place in the batch. Speed first, then direction.
        let mut rng = Rng::new(req.key);
        let speed = rng.maxwellian_flux_speed(req.temperature, req.mass);
        Ok(rng.cosine_direction().times(speed))
    }
}

exobound_sdk::export_process!(ThermalDesorption: Source);

#[cfg(test)]
mod tests {
    use exobound_sdk::constants::ATOMIC_MASS;
    use exobound_sdk::testing::{self, Roles};
    use exobound_sdk::{RngKey, stream};

    use super::*;

    /// The law with the parameters `given` (others at their defaults), built
    /// as the module's `init` builds it.
    fn law_with(given: &[(&str, Value)]) -> ThermalDesorption {
        testing::law(given)
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
    /// i.e. `got` rounds to the value as printed in its source.
    fn assert_rounds_to(got: f64, stated: f64, last_digit: f64) {
        assert!((got - stated).abs() <= 0.5 * last_digit, "got {got:e}, stated {stated:e}");
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let law = law_with(&[]);
        // nu = 1e13 s^-1: common practice.
        assert_eq!(law.vibrational_frequency, 1.0e13);
        // U = 1.85 eV for Na: from memory, Hunten & Sprague 2002 (Meteoritics & Planet. Sci.
        // 37, 1191).
        assert_eq!(law.binding_energy, 1.85);
        let info = ThermalDesorption::MANIFEST.to_info();
        assert_eq!(info.draws_on.as_deref(), Some("adsorbed"));
        assert_eq!(info.parameters[1].default_origin, "from memory: Hunten & Sprague 2002");
    }

    #[test]
    fn per_atom_rates_match_the_arrhenius_values() {
        let law = law_with(&[]);
        // nu exp(-U/kT), U = 1.85 eV (Hunten & Sprague 2002, Meteoritics & Planet. Sci. 37,
        // 1191, from memory), T = 600 K: 2.889e-3 s^-1 (tests/python/module_reference_values.py).
        assert_rounds_to(law.rate_per_atom(600.0), 2.889e-3, 1e-6);
        // U = 1.85 eV, T = 400 K: 4.91e-11 s^-1 (same law and script).
        assert_rounds_to(law.rate_per_atom(400.0), 4.91e-11, 1e-13);
        let law = law_with(&[("binding_energy", Value::Number(1.4))]);
        // U = 1.4 eV, T = 400 K: 2.295e-5 s^-1 (same law and script).
        assert_rounds_to(law.rate_per_atom(400.0), 2.295e-5, 1e-8);
        let law = law_with(&[("binding_energy", Value::Number(2.0))]);
        // U = 2.0 eV, T = 700 K: 3.987e-2 s^-1 (same law and script).
        assert_rounds_to(law.rate_per_atom(700.0), 3.987e-2, 1e-5);
    }

    #[test]
    fn release_rate_is_first_order_in_coverage() {
        let mut law = law_with(&[]);
        let cells = [cell(600.0, 1.0e10), cell(600.0, 3.0e10), cell(600.0, 0.0)];
        let mut rates = [f64::NAN; 3];
        law.release_rate(&cells, &mut rates).unwrap();
        // 2.889e-3 s^-1 per atom at 600 K (Hunten & Sprague 2002 law, from memory;
        // tests/python/module_reference_values.py), times N_s = 1e10 cm^-2.
        assert_rounds_to(rates[0], 2.889e7, 1e4);
        // First-order kinetics (Polanyi-Wigner, order 1, common practice): Phi ~ N_s.
        assert!((rates[1] / rates[0] - 3.0).abs() < 1e-15);
        assert_eq!(rates[2], 0.0);
    }

    #[test]
    fn residence_time_at_mercury_subsolar_is_short() {
        let law = law_with(&[]);
        // 1/(2.889e-3 s^-1) = 346 s at 600 K (the value above): adsorbed Na
        // cannot survive a Mercury dayside at perihelion.
        let tau = law.residence_time(600.0);
        assert!((tau - 1.0 / 2.889e-3).abs() < 0.1, "tau {tau}");
    }

    /// The manifest's promises are tested here and not only by the host:
    /// a wrong `expected`, a field name the records do not know or a
    /// parameter outside the schema fails this test before any module is
    /// shipped. The stochastic point is averaged exactly as the host does.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<ThermalDesorption>::new().source());
    }

    /// The launches against the laws declared in `LAUNCH_LAWS`, as `vet`
    /// tests them (one-sample KS tests at p = 0.01 of speeds or energies and
    /// of directions; the distribution functions and their sources are in
    /// `exobound_sdk::launch_law`).
    #[test]
    fn launches_follow_the_declared_laws() {
        let base = LaunchRequest { temperature: 600.0, mass: NA_MASS, ..LaunchRequest::default() };
        testing::assert_launch_laws::<ThermalDesorption>(base, 20_000, 3);
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
        // Maxwellian flux, Na 1200 K, a = 931.66 m/s, <v> = 1238.49 m/s
        // (tests/python/sampler_reference_values.py, scipy.stats.chi(df=4)); the standard
        // deviation of the flux speed is a sqrt(2 - 9 pi/16) (moments of chi with 4 degrees
        // of freedom).
        let a = 931.66;
        let sd = a * (2.0 - 9.0 * core::f64::consts::PI / 16.0).sqrt();
        assert!((mean - 1238.49).abs() < 3.0 * sd / nf.sqrt(), "mean speed {mean}");
        // <E> = 2kT = 0.20682 eV at 1200 K (mean of the flux energy distribution, a
        // Gamma(2, kT); tests/python/module_reference_values.py).
        let mean_e = speeds.iter().map(|v| 0.5 * m * v * v).sum::<f64>() / nf / ELECTRON_VOLT;
        // Var(E) = 2 (kT)^2 for a Gamma(2) energy, so sd(E) = sqrt(2) kT = 0.1462 eV
        // (tests/python/module_reference_values.py).
        assert!((mean_e - 0.20682).abs() < 3.0 * 0.1462 / nf.sqrt(), "mean energy {mean_e}");
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
        // K, 39.0983 u (IUPAC standard atomic weight; Prohaska et al. 2022, Pure Appl. Chem.
        // 94, 573).
        let m = 39.0983 * ATOMIC_MASS;
        let reqs: Vec<LaunchRequest> = (5..9).map(|i| request(i, 500.0 + i as f64, m)).collect();
        // Counter-based streams: the batch's order and cuts are irrelevant, keys differ.
        testing::assert_batch_invariant("launch", &reqs, |r, v| law.launch(r, v));
        let (a, b) = (law.launch_one(&reqs[0]).unwrap(), law.launch_one(&reqs[1]).unwrap());
        assert_ne!(a, b);
        let cells = [cell(600.0, 1.0e10), cell(400.0, 3.0e12), cell(100.0, 0.0)];
        testing::assert_batch_invariant("release_rate", &cells, |c, r| law.release_rate(c, r));
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let law = law_with(&[]);
        let err = law.release_rate_one(&cell(0.0, 1.0e10)).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("cell 17") && err.message.contains("0 K"), "{err}");
        let err = law.release_rate_one(&cell(f64::NAN, 1.0e10)).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        let err = law.release_rate_one(&cell(300.0, -1.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        let err = law.launch_one(&request(1, -5.0, 1e-26)).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("cell 3"), "{err}");
        let err = law.launch_one(&request(1, 300.0, 0.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
    }

    #[test]
    fn out_of_range_parameters_are_refused_by_the_schema() {
        let err =
            testing::validate::<ThermalDesorption>(&[("binding_energy", Value::Number(-1.0))])
                .unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidParameter);
        assert!(err.message.contains("binding_energy") && err.message.contains("eV"), "{err}");
    }

    /// Closed form of the uniform average of exp(-U/kT) over [lo, hi] eV at
    /// `t` K, dimensionless: (kT / (hi - lo)) (e^(-lo/kT) - e^(-hi/kT)) (integral of
    /// an exponential).
    fn uniform_closed_form(lo: f64, hi: f64, t: f64) -> f64 {
        let kt = BOLTZMANN * t / ELECTRON_VOLT;
        kt / (hi - lo) * (-lo / kt).exp() * -(-(hi - lo) / kt).exp_m1()
    }

    /// Scaled complementary error function exp(x^2) erfc(x), dimensionless:
    /// directly below x = 25, and by the asymptotic series
    /// 1/(x sqrt pi) (1 - 1/(2x^2) + 3/(2x^2)^2 - 15/(2x^2)^3 + 105/(2x^2)^4 -
    /// 945/(2x^2)^5) above (Abramowitz & Stegun 7.1.23; the first omitted term
    /// is below 3e-15 relative there).
    fn erfcx(x: f64) -> f64 {
        if x < 25.0 {
            return (x * x).exp() * math::erfc(x);
        }
        let q = 1.0 / (2.0 * x * x);
        let series =
            1.0 - q + 3.0 * q * q - 15.0 * q.powi(3) + 105.0 * q.powi(4) - 945.0 * q.powi(5);
        series / (x * core::f64::consts::PI.sqrt())
    }

    /// Closed form of the average of exp(-U/kT) over a normal spread about
    /// `u0` eV with standard deviation `s` eV truncated at +-3 s, at `t` K,
    /// dimensionless (completing the square): e^(-u0/kT + r^2/2) [Phi(3 - r) - Phi(-3 - r)] /
    /// [Phi(3) - Phi(-3)], r = s/kT. With Phi(a) - Phi(b) =
    /// (erfc(x1) - erfc(x2)) / 2, x1 = (r - 3)/sqrt 2, x2 = (r + 3)/sqrt 2, and
    /// r^2/2 - x1^2 = 3r - 9/2, x1^2 - x2^2 = -6r, it is written through erfcx
    /// so that a cold surface (r ~ 100) neither overflows nor underflows.
    fn gaussian_closed_form(u0: f64, s: f64, t: f64) -> f64 {
        let kt = BOLTZMANN * t / ELECTRON_VOLT;
        let r = s / kt;
        let sq2 = core::f64::consts::SQRT_2;
        let (x1, x2) = ((r - 3.0) / sq2, (r + 3.0) / sq2);
        let window = 0.5 * (erfcx(x1) - (-6.0 * r).exp() * erfcx(x2));
        let z = 1.0 - math::erfc(3.0 / sq2);
        (-u0 / kt + 3.0 * r - 4.5).exp() * window / z
    }

    #[test]
    fn gauss_legendre_rule_is_exact_to_degree_fifteen() {
        // An n-point Gauss-Legendre rule integrates polynomials of degree <= 2n - 1 exactly
        // (textbook property, e.g. Abramowitz & Stegun 25.4.29): int x^k over [-1, 1] is
        // 2/(k+1) for even k and 0 for odd k.
        let law = law_with(&[]);
        for k in 0..=15 {
            let got: f64 =
                law.nodes.iter().zip(law.weights.iter()).map(|(x, w)| w * x.powi(k)).sum();
            let want = if k % 2 == 0 { 2.0 / (k as f64 + 1.0) } else { 0.0 };
            assert!((got - want).abs() < 1e-14, "x^{k}: {got} vs {want}");
        }
        // ... and not of degree 16 (the rule has 8 nodes, not more).
        let x16: f64 = law.nodes.iter().zip(law.weights.iter()).map(|(x, w)| w * x.powi(16)).sum();
        assert!((x16 - 2.0 / 17.0).abs() > 1e-6);
    }

    #[test]
    fn spread_rates_match_the_closed_forms() {
        // The fixed quadrature against the closed forms (C, derived in the module docs),
        // across temperatures from a cold night to a hot day and widths up to the schema's
        // limits; 1e-9 relative.
        for t in [60.0, 100.0, 200.0, 400.0, 600.0, 700.0, 1000.0, 2000.0] {
            for (u0, w) in [(1.85, 0.2), (1.85, 1.0), (1.4, 0.05), (0.8, 0.75)] {
                let law = law_with(&[
                    ("binding_energy", Value::Number(u0)),
                    ("binding_spread", Value::Text("uniform")),
                    ("binding_half_width", Value::Number(w)),
                ]);
                let want = 1.0e13 * uniform_closed_form(u0 - w, u0 + w, t);
                let got = law.rate_per_atom(t);
                assert!(
                    (got - want).abs() <= 1e-9 * want,
                    "uniform {u0} +- {w} eV at {t} K: {got:e} vs {want:e}"
                );
            }
            for (u0, s) in [(1.85, 0.1), (1.85, 0.5), (2.0, 0.02), (1.6, 0.25)] {
                let law = law_with(&[
                    ("binding_energy", Value::Number(u0)),
                    ("binding_spread", Value::Text("gaussian")),
                    ("binding_sigma", Value::Number(s)),
                ]);
                let want = 1.0e13 * gaussian_closed_form(u0, s, t);
                let got = law.rate_per_atom(t);
                assert!(
                    (got - want).abs() <= 1e-9 * want,
                    "gaussian {u0} eV, sigma {s} eV at {t} K: {got:e} vs {want:e}"
                );
            }
        }
    }

    #[test]
    fn spread_rate_worked_points() {
        // Closed forms evaluated with mpmath at 40 digits
        // (tests/python/module_reference_values.py): uniform 1.85 +- 0.2 eV at 600 K gives
        // 1.786012343e-2 s^-1, 400 K gives 1.4005025747e-9 s^-1; the Gaussian (sigma 0.1 eV)
        // gives 1.6106527054e-2 and 1.7853589223e-9 s^-1.
        let uni = law_with(&[
            ("binding_spread", Value::Text("uniform")),
            ("binding_half_width", Value::Number(0.2)),
        ]);
        assert!((uni.rate_per_atom(600.0) / 1.786_012_342_962_136e-2 - 1.0).abs() < 1e-9);
        assert!((uni.rate_per_atom(400.0) / 1.400_502_574_724_996e-9 - 1.0).abs() < 1e-9);
        let gau = law_with(&[("binding_spread", Value::Text("gaussian"))]);
        assert!((gau.rate_per_atom(600.0) / 1.610_652_705_437_411e-2 - 1.0).abs() < 1e-9);
        assert!((gau.rate_per_atom(400.0) / 1.785_358_922_265_082e-9 - 1.0).abs() < 1e-9);
        // A spread raises the rate above the single-U value at the same centre (Jensen's
        // inequality, exp convex): single value 2.889e-3 s^-1 at 600 K.
        let single = law_with(&[]).rate_per_atom(600.0);
        assert!(uni.rate_per_atom(600.0) > single && gau.rate_per_atom(600.0) > single);
    }

    #[test]
    fn zero_width_is_the_single_value_and_bad_widths_are_refused() {
        // The limit of a spread of zero width is the single binding energy (definition).
        let single = law_with(&[]);
        for (spread, width) in [("uniform", "binding_half_width"), ("gaussian", "binding_sigma")] {
            let law =
                law_with(&[("binding_spread", Value::Text(spread)), (width, Value::Number(0.0))]);
            assert_eq!(law.spread, BindingSpread::Single);
            assert_eq!(law.rate_per_atom(500.0), single.rate_per_atom(500.0));
        }
        // A spread reaching 0 eV is refused, naming the parameter and the allowed range.
        for (spread, width, value, range) in [
            ("uniform", "binding_half_width", 0.6, "[0, 0.5)"),
            ("gaussian", "binding_sigma", 0.2, "[0, 0.16666"),
        ] {
            let err = testing::try_law::<ThermalDesorption>(&[
                ("binding_energy", Value::Number(0.5)),
                ("binding_spread", Value::Text(spread)),
                (width, Value::Number(value)),
            ])
            .unwrap_err();
            assert_eq!(err.code, ErrorCode::InvalidParameter);
            assert!(err.message.contains(width) && err.message.contains(range), "{err}");
        }
        // Out-of-range widths are refused by the schema itself.
        let err = testing::validate::<ThermalDesorption>(&[("binding_sigma", Value::Number(0.6))])
            .unwrap_err();
        assert!(err.message.contains("binding_sigma") && err.message.contains("[0, 0.5]"));
    }

    #[test]
    fn cold_night_surface_releases_nothing_measurable() {
        let law = law_with(&[]);
        // At 100 K, U/kT = 214.7, so nu exp(-U/kT) ~ 1e13 * 6e-94: effectively zero,
        // and the exponential must not produce NaN or a negative rate.
        let rate = law.release_rate_one(&cell(100.0, 1.0e14)).unwrap();
        assert!((0.0..1e-60).contains(&rate), "rate {rate}");
    }
}

//! Declared launch laws: the distribution a source says its launch
//! velocities follow, and the distribution functions a test of that claim
//! needs.
//!
//! Why this exists: a module's reference points pin a few numbers (a mean
//! launch speed), but a sampler can match a mean and still draw the wrong
//! shape: the Maxwellian of a gas instead of the Maxwellian *flux* through
//! a surface is the classic slip, with a mean speed only 15% lower. A
//! source may therefore declare, from a small set of published laws, which
//! distribution its speeds and directions follow and with which parameters;
//! `exobound module vet` then draws launches from the `.wasm` file and runs
//! a Kolmogorov-Smirnov test of them against the declaration.
//!
//! A declaration is a `const` on the `Source` trait
//! (`Source::LAUNCH_LAWS`), written into the manifest section by
//! `export_process!` under the key `launch_laws` (absent when nothing is
//! declared, so the manifests of modules without one are unchanged). Each
//! law applies when the choice parameters in its `when` list have the
//! given options (an empty list: always), so a module with a choice of
//! velocity laws declares one law per option. Its numbers come from a
//! parameter (`Quantity::Param`), a field of the launch request
//! (`Quantity::Input`, e.g. the surface temperature) or a constant.
//!
//! The laws and their distribution functions (x = v^2/a^2, eps = E/U):
//! - Maxwellian flux at temperature T, speeds f(v) ~ v^3 exp(-v^2/a^2),
//!   a = sqrt(2kT/m): CDF 1 - (1 + x) exp(-x) (the flux of a Maxwellian gas
//!   through a plane; e.g. Chamberlain & Hunten 1987, Theory of Planetary
//!   Atmospheres, 2nd ed.; the launch law of thermal and vapour sources in
//!   exosphere models such as Smyth & Marconi 1995, ApJ 441, 839; from
//!   memory);
//! - Sigmund-Thompson energies f(E) = 2UE/(E + U)^3 with surface binding
//!   energy U: CDF E^2/(E + U)^2 (Sigmund 1969, Phys. Rev. 184, 383;
//!   Thompson 1968, Phil. Mag. 18, 377; from memory), bare, truncated at a
//!   maximum energy, or times Thompson's factor 1 - sqrt((E + U)/(Lambda
//!   E_i)), Lambda = 4 m1 m2/(m1 + m2)^2 (Thompson 1968), whose CDF is
//!   integrated in closed form below;
//! - the power-law energy form f(E) ~ E/(E + U)^(beta + 2) of laboratory
//!   photon-stimulated desorption: CDF 1 - (1 + (1 + beta) eps)/(1 + eps)^(1 +
//!   beta) (Johnson et al. 2002, Icarus 156, 136; from memory);
//! - directions: the cosine (Lambert) law, cos(theta) with CDF c^2, or
//!   isotropic over the upward hemisphere, CDF c (theta from the local
//!   vertical; the cosine law is the angular part of the Maxwellian flux).

use std::collections::BTreeMap;

use serde::{Deserialize, Serialize};

use crate::constants::{ATOMIC_MASS, BOLTZMANN, ELECTRON_VOLT};
use crate::math;
use crate::params::ParamValue;
use crate::records::LaunchRequest;

/// A number in a declaration.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Quantity {
    /// The number parameter of this name, in its declared unit (which must
    /// be the unit the law states: K, eV, u).
    Param(&'static str),
    /// The field of the launch request of this name, as reference points
    /// name them (`temperature` in K, `mass` in kg, ...).
    Input(&'static str),
    /// A constant, in the unit the law states.
    Fixed(f64),
}

/// The tail of a Sigmund-Thompson energy distribution.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum EnergyCutoff {
    /// No cutoff (the mean energy diverges).
    None,
    /// Truncated at a maximum energy, eV.
    Hard {
        /// The maximum energy, eV.
        max_energy: Quantity,
    },
    /// Times Thompson's factor 1 - sqrt((E + U)/(Lambda E_i)).
    Thompson {
        /// Energy E_i of the incident ions, eV.
        ion_energy: Quantity,
        /// Mass m1 of the incident ions, u (the target's is the request's `mass`).
        ion_mass: Quantity,
    },
}

/// The law of the launch speeds (or energies, for the energy laws; the
/// speed is sqrt(2E/m) with the request's mass).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum SpeedLaw {
    /// The Maxwellian flux f(v) ~ v^3 exp(-v^2/a^2), a = sqrt(2kT/m).
    MaxwellianFlux {
        /// Temperature T, K.
        temperature: Quantity,
    },
    /// Sigmund-Thompson energies f(E) = 2UE/(E + U)^3.
    SigmundThompson {
        /// Surface binding energy U, eV.
        binding_energy: Quantity,
        /// The tail.
        cutoff: EnergyCutoff,
    },
    /// The power-law energy form f(E) ~ E/(E + U)^(beta + 2).
    PowerLaw {
        /// Exponent beta, dimensionless.
        exponent: Quantity,
        /// Characteristic energy U, eV.
        energy: Quantity,
    },
}

/// The law of the launch directions about the local vertical.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DirectionLaw {
    /// The cosine (Lambert) law: cos(theta) has CDF c^2.
    Cosine,
    /// Isotropic over the upward hemisphere: cos(theta) uniform on (0, 1).
    Isotropic,
}

impl DirectionLaw {
    /// The name on the wire.
    pub const fn as_str(self) -> &'static str {
        match self {
            DirectionLaw::Cosine => "cosine",
            DirectionLaw::Isotropic => "isotropic",
        }
    }
}

/// One declared launch law (authoring form, a `const`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LaunchLaw {
    /// Choice parameters and the option each must have for this law to
    /// apply; empty when it always applies.
    pub when: &'static [(&'static str, &'static str)],
    /// The speed or energy law.
    pub speed: SpeedLaw,
    /// The direction law.
    pub direction: DirectionLaw,
}

// ---------------------------------------------------------------------------
// Owned (wire) form
// ---------------------------------------------------------------------------

/// A number of a decoded declaration: a constant, or `param:NAME` /
/// `input:NAME` for a parameter or a launch-request field.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum QuantityInfo {
    /// A constant.
    Fixed(f64),
    /// `param:NAME` or `input:NAME`.
    Named(String),
}

/// A speed law as decoded: the law's name and the keys it uses.
#[derive(Clone, Debug, Default, PartialEq, Serialize, Deserialize)]
pub struct SpeedLawInfo {
    /// `maxwellian-flux`, `sigmund-thompson` or `power-law`.
    pub law: String,
    /// Maxwellian flux: temperature, K.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub temperature: Option<QuantityInfo>,
    /// Sigmund-Thompson: binding energy U, eV.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub binding_energy: Option<QuantityInfo>,
    /// Sigmund-Thompson: `none`, `hard` or `thompson`.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub cutoff: Option<String>,
    /// Hard cutoff: maximum energy, eV.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub max_energy: Option<QuantityInfo>,
    /// Thompson cutoff: ion energy, eV.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ion_energy: Option<QuantityInfo>,
    /// Thompson cutoff: ion mass, u.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ion_mass: Option<QuantityInfo>,
    /// Power law: exponent beta.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub exponent: Option<QuantityInfo>,
    /// Power law: characteristic energy U, eV.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub energy: Option<QuantityInfo>,
}

/// One launch law as decoded from a manifest (owned form of [`LaunchLaw`]).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct LaunchLawInfo {
    /// Choice parameters and their options for the law to apply.
    pub when: Vec<(String, String)>,
    /// The speed law.
    pub speed: SpeedLawInfo,
    /// `cosine` or `isotropic`.
    pub direction: String,
}

fn quantity_info(q: Quantity) -> QuantityInfo {
    match q {
        Quantity::Param(n) => QuantityInfo::Named(format!("param:{n}")),
        Quantity::Input(n) => QuantityInfo::Named(format!("input:{n}")),
        Quantity::Fixed(x) => QuantityInfo::Fixed(x),
    }
}

impl LaunchLaw {
    /// The owned form, as the host decodes it from the manifest section.
    pub fn to_info(&self) -> LaunchLawInfo {
        let q = |x: Quantity| Some(quantity_info(x));
        let speed = match self.speed {
            SpeedLaw::MaxwellianFlux { temperature } => SpeedLawInfo {
                law: "maxwellian-flux".into(),
                temperature: q(temperature),
                ..SpeedLawInfo::default()
            },
            SpeedLaw::SigmundThompson { binding_energy, cutoff } => {
                let mut s = SpeedLawInfo {
                    law: "sigmund-thompson".into(),
                    binding_energy: q(binding_energy),
                    ..SpeedLawInfo::default()
                };
                match cutoff {
                    EnergyCutoff::None => s.cutoff = Some("none".into()),
                    EnergyCutoff::Hard { max_energy } => {
                        s.cutoff = Some("hard".into());
                        s.max_energy = q(max_energy);
                    }
                    EnergyCutoff::Thompson { ion_energy, ion_mass } => {
                        s.cutoff = Some("thompson".into());
                        s.ion_energy = q(ion_energy);
                        s.ion_mass = q(ion_mass);
                    }
                }
                s
            }
            SpeedLaw::PowerLaw { exponent, energy } => SpeedLawInfo {
                law: "power-law".into(),
                exponent: q(exponent),
                energy: q(energy),
                ..SpeedLawInfo::default()
            },
        };
        LaunchLawInfo {
            when: self.when.iter().map(|(k, v)| (k.to_string(), v.to_string())).collect(),
            speed,
            direction: self.direction.as_str().to_string(),
        }
    }
}

// ---------------------------------------------------------------------------
// Evaluation: a declared law with its numbers, and its distribution functions
// ---------------------------------------------------------------------------

/// A speed law with its numbers resolved.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Speed {
    /// Maxwellian flux at temperature `t` K.
    MaxwellianFlux {
        /// Temperature, K.
        t: f64,
    },
    /// Sigmund-Thompson with binding energy `u` eV, truncated at `top` eV
    /// (infinite: no cutoff), times Thompson's factor when `thompson` is the
    /// largest transferable energy Lambda E_i in eV.
    SigmundThompson {
        /// Binding energy U, eV.
        u: f64,
        /// Hard cutoff, eV (infinite when none).
        top: f64,
        /// Lambda E_i, eV, for Thompson's cutoff.
        thompson: Option<f64>,
    },
    /// Power-law form with exponent `beta` and energy `u` eV.
    PowerLaw {
        /// Exponent beta.
        beta: f64,
        /// Energy U, eV.
        u: f64,
    },
}

/// A declared law resolved for one parameter set and one launch request.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Resolved {
    /// The speed law.
    pub speed: Speed,
    /// The direction law.
    pub direction: DirectionLaw,
    /// Mass of the launched atom, kg.
    pub mass: f64,
}

/// Unnormalised CDF of 2UE/(E + U)^3 times [1 - sqrt((E + U)/L)], E in eV:
/// E^2/(E + U)^2 - (2U/sqrt L) [4/(3 sqrt U) - 2/sqrt(E + U) + (2U/3)(E + U)^(-3/2)]
/// (the integral in closed form; checked against quadrature in the tests).
fn thompson_cdf_unnormalised(e: f64, u: f64, l: f64) -> f64 {
    let w = e + u;
    let r = e / w;
    r * r
        - 2.0 * u / math::sqrt(l)
            * (4.0 / (3.0 * math::sqrt(u)) - 2.0 / math::sqrt(w)
                + 2.0 * u / 3.0 / (w * math::sqrt(w)))
}

impl Speed {
    /// Whether the law is stated in energy (the speed is sqrt(2E/m)).
    pub fn in_energy(&self) -> bool {
        !matches!(self, Speed::MaxwellianFlux { .. })
    }

    /// The CDF at energy `e` eV (energy laws) or at speed `v` m s^-1 of an
    /// atom of `mass` kg (the Maxwellian flux), dimensionless.
    pub fn cdf(&self, x: f64, mass: f64) -> f64 {
        if x.is_nan() || x <= 0.0 {
            return 0.0;
        }
        match *self {
            Speed::MaxwellianFlux { t } => {
                let a2 = 2.0 * BOLTZMANN * t / mass;
                let q = x * x / a2;
                // 1 - (1 + q) e^-q, written so that small q keeps its precision.
                -math::exp_m1(-q) - q * math::exp(-q)
            }
            Speed::SigmundThompson { u, top, thompson } => {
                if x >= top {
                    return 1.0;
                }
                match thompson {
                    None => {
                        let c = |e: f64| (e / (e + u)) * (e / (e + u));
                        if top.is_finite() { c(x) / c(top) } else { c(x) }
                    }
                    Some(l) => {
                        thompson_cdf_unnormalised(x, u, l) / thompson_cdf_unnormalised(top, u, l)
                    }
                }
            }
            Speed::PowerLaw { beta, u } => {
                let eps = x / u;
                -math::exp_m1(math::ln_1p((1.0 + beta) * eps) - (1.0 + beta) * math::ln_1p(eps))
            }
        }
    }
}

impl DirectionLaw {
    /// The CDF of cos(theta) from the local vertical at `c` in [0, 1].
    pub fn cdf(&self, c: f64) -> f64 {
        let c = c.clamp(0.0, 1.0);
        match self {
            DirectionLaw::Cosine => c * c,
            DirectionLaw::Isotropic => c,
        }
    }
}

/// The value of launch-request field `name`, as reference points name them.
pub fn request_field(r: &LaunchRequest, name: &str) -> Option<f64> {
    Some(match name {
        "latitude" => r.latitude,
        "longitude" => r.longitude,
        "local_time" => r.local_time,
        "cos_sza" => r.cos_sza,
        "temperature" => r.temperature,
        "helio_distance" => r.helio_distance,
        "mass" => r.mass,
        "time" => r.time,
        _ => return None,
    })
}

impl LaunchLawInfo {
    /// Whether the law applies with the parameters `params` (defaults included).
    pub fn applies(&self, params: &BTreeMap<String, ParamValue>) -> bool {
        self.when.iter().all(|(k, v)| matches!(params.get(k), Some(ParamValue::Text(t)) if t == v))
    }

    /// The law with its numbers taken from `params` (every parameter,
    /// defaults included) and from the launch request `r`; the error says
    /// which number cannot be resolved and why.
    pub fn resolve(
        &self,
        params: &BTreeMap<String, ParamValue>,
        r: &LaunchRequest,
    ) -> Result<Resolved, String> {
        let num = |what: &str, q: &Option<QuantityInfo>| -> Result<f64, String> {
            let value = match q {
                None => return Err(format!("the {} law gives no `{what}`", self.speed.law)),
                Some(QuantityInfo::Fixed(x)) => *x,
                Some(QuantityInfo::Named(n)) => {
                    if let Some(p) = n.strip_prefix("param:") {
                        match params.get(p) {
                            Some(ParamValue::Number(x)) => *x,
                            Some(_) => return Err(format!("`{what}` names `{p}`, not a number")),
                            None => {
                                return Err(format!("`{what}` names the unknown parameter `{p}`"));
                            }
                        }
                    } else if let Some(f) = n.strip_prefix("input:") {
                        request_field(r, f)
                            .ok_or_else(|| format!("`{what}` names the unknown input `{f}`"))?
                    } else {
                        return Err(format!(
                            "`{what}` is `{n}`; expected param:NAME or input:NAME"
                        ));
                    }
                }
            };
            if value.is_finite() && value > 0.0 {
                Ok(value)
            } else {
                Err(format!("`{what}` is {value}; it must be finite and > 0"))
            }
        };
        let s = &self.speed;
        let speed = match s.law.as_str() {
            "maxwellian-flux" => Speed::MaxwellianFlux { t: num("temperature", &s.temperature)? },
            "sigmund-thompson" => {
                let u = num("binding_energy", &s.binding_energy)?;
                match s.cutoff.as_deref().unwrap_or("none") {
                    "none" => Speed::SigmundThompson { u, top: f64::INFINITY, thompson: None },
                    "hard" => Speed::SigmundThompson {
                        u,
                        top: num("max_energy", &s.max_energy)?,
                        thompson: None,
                    },
                    "thompson" => {
                        let e_i = num("ion_energy", &s.ion_energy)?;
                        let m1 = num("ion_mass", &s.ion_mass)?;
                        let m2 = r.mass / ATOMIC_MASS;
                        let l = 4.0 * m1 * m2 / ((m1 + m2) * (m1 + m2)) * e_i;
                        if l.is_nan() || l <= u {
                            return Err(format!(
                                "Lambda E_i = {l} eV is not above the binding energy {u} eV"
                            ));
                        }
                        Speed::SigmundThompson { u, top: l - u, thompson: Some(l) }
                    }
                    other => return Err(format!("unknown cutoff `{other}`")),
                }
            }
            "power-law" => Speed::PowerLaw {
                beta: num("exponent", &s.exponent)?,
                u: num("energy", &s.energy)?,
            },
            other => return Err(format!("unknown speed law `{other}`")),
        };
        let direction = match self.direction.as_str() {
            "cosine" => DirectionLaw::Cosine,
            "isotropic" => DirectionLaw::Isotropic,
            other => return Err(format!("unknown direction law `{other}`")),
        };
        if !(r.mass.is_finite() && r.mass > 0.0) {
            return Err(format!("the launch request's mass {} kg is not usable", r.mass));
        }
        Ok(Resolved { speed, direction, mass: r.mass })
    }

    /// A short description for reports, e.g. `maxwellian-flux, cosine when
    /// velocity_law = maxwellian`.
    pub fn label(&self) -> String {
        let mut s = format!("{} speeds, {} directions", self.speed.law, self.direction);
        if let Some(c) = &self.speed.cutoff {
            s = format!("{} (cutoff {c}), {} directions", self.speed.law, self.direction);
        }
        if !self.when.is_empty() {
            let w: Vec<String> = self.when.iter().map(|(k, v)| format!("{k} = {v}")).collect();
            s += &format!(" when {}", w.join(", "));
        }
        s
    }
}

impl Resolved {
    /// The CDF of the speed law at the launch velocity's speed `v` m s^-1
    /// (converted to energy E = m v^2/2 for the energy laws).
    pub fn speed_cdf(&self, v: f64) -> f64 {
        if self.speed.in_energy() {
            self.speed.cdf(0.5 * self.mass * v * v / ELECTRON_VOLT, self.mass)
        } else {
            self.speed.cdf(v, self.mass)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn maxwellian_flux_cdf_is_the_chi4_cdf() {
        // Na at 1200 K: median 1206.97 m/s (scipy.stats.chi(df=4).median();
        // tests/python/module_reference_values.py).
        let m = 22.989_769_28 * ATOMIC_MASS;
        let s = Speed::MaxwellianFlux { t: 1200.0 };
        assert!((s.cdf(1206.97, m) - 0.5).abs() < 5e-6);
        assert_eq!(s.cdf(0.0, m), 0.0);
        assert!(s.cdf(1.0e5, m) == 1.0);
    }

    #[test]
    fn sigmund_thompson_cdfs() {
        // Median (1 + sqrt 2) U of 2UE/(E+U)^3 (Thompson 1968, Phil. Mag. 18, 377).
        let bare = Speed::SigmundThompson { u: 0.27, top: f64::INFINITY, thompson: None };
        assert!((bare.cdf((1.0 + 2f64.sqrt()) * 0.27, 1.0) - 0.5).abs() < 1e-15);
        let hard = Speed::SigmundThompson { u: 0.27, top: 2.7, thompson: None };
        assert_eq!(hard.cdf(2.7, 1.0), 1.0);
        // The Thompson cutoff's median 0.597438 eV for 1 keV H+ on Na (Lambda E_i =
        // 160.85 eV; mpmath, tests/python/module_reference_values.py).
        let l = 160.852_401_221_453_26;
        let cut = Speed::SigmundThompson { u: 0.27, top: l - 0.27, thompson: Some(l) };
        assert!((cut.cdf(0.597_438, 1.0) - 0.5).abs() < 1e-6);
        assert!((cut.cdf(l - 0.27 - 1e-9, 1.0) - 1.0).abs() < 1e-9);
    }

    #[test]
    fn power_law_cdf() {
        // beta = 0.7, U = 0.052 eV: CDF(0.1 eV) = 0.31068 (Johnson et al. 2002 form;
        // scipy betaprime(2, 0.7, scale=0.052), tests/python/module_reference_values.py).
        let p = Speed::PowerLaw { beta: 0.7, u: 0.052 };
        assert!((p.cdf(0.1, 1.0) - 0.31068).abs() < 5e-6);
    }

    #[test]
    fn resolves_parameters_and_inputs_and_names_what_is_missing() {
        let law = LaunchLaw {
            when: &[("velocity_law", "maxwellian")],
            speed: SpeedLaw::MaxwellianFlux { temperature: Quantity::Input("temperature") },
            direction: DirectionLaw::Cosine,
        }
        .to_info();
        let mut params = BTreeMap::new();
        params.insert("velocity_law".to_string(), ParamValue::Text("maxwellian".into()));
        assert!(law.applies(&params));
        let r = LaunchRequest { temperature: 500.0, mass: 1e-26, ..LaunchRequest::default() };
        let got = law.resolve(&params, &r).unwrap();
        assert_eq!(got.speed, Speed::MaxwellianFlux { t: 500.0 });
        params.insert("velocity_law".to_string(), ParamValue::Text("power-law".into()));
        assert!(!law.applies(&params));
        let bad = LaunchLaw {
            when: &[],
            speed: SpeedLaw::PowerLaw {
                exponent: Quantity::Param("beta"),
                energy: Quantity::Fixed(0.05),
            },
            direction: DirectionLaw::Isotropic,
        }
        .to_info();
        let err = bad.resolve(&params, &r).unwrap_err();
        assert!(err.contains("unknown parameter `beta`"), "{err}");
    }
}

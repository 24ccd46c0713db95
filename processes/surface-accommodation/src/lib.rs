//! surface-accommodation: sticking or thermally accommodated re-emission of
//! an atom that lands on the regolith.
//!
//! Why this exists: an exospheric Na or K atom hops many times before it is
//! ionized or escapes, and what happens at each landing shapes the whole
//! exosphere. A cold nightside surface traps atoms into the adsorbed pool
//! (to be released later by desorption); a warm dayside surface returns
//! most of them after partial exchange of energy with the grains. This
//! module decides between the two and, for a bounce, draws the
//! re-emission velocity.
//!
//! Sticking. The atom sticks with probability S(T_s), either a constant or
//! a law linear in the surface temperature clipped to [0, 1],
//!
//! ```text
//! S(T_s) = min(1, max(0, A - B T_s))
//! ```
//!
//! The default linear coefficients put S = 1 at 100 K and S = 0.5 at 250 K,
//! the behaviour of Na on a lunar basalt sample reported by Yakshinskiy &
//! Madey (2005) (from memory); outside 100-250 K the line is an
//! extrapolation.
//!
//! Re-emission. An atom that does not stick leaves with an energy set by the
//! thermal accommodation coefficient alpha = (E_in - E_out) / (E_in - 2 k T_s)
//! (Hunten, Morgan & Shemansky 1988 and later exosphere models use 0.2-0.6;
//! from memory). Per atom we draw a fully accommodated energy E_th from the
//! Maxwellian flux at T_s, whose mean is 2 k T_s, and mix it with the
//! incident energy,
//!
//! ```text
//! E_out = alpha E_th + (1 - alpha) E_in
//! ```
//!
//! so the mean outgoing energy obeys the definition of alpha exactly, alpha
//! = 1 gives a Maxwellian-flux re-emission at T_s and alpha = 0 an elastic,
//! diffusely scattered bounce. The direction follows the cosine law
//! (diffuse scattering from a rough, porous surface). Setting
//! `reemit_temperature` > 0 replaces T_s by a fixed temperature in the
//! re-emission (the sticking law still sees the surface), which is what
//! the Chamberlain validation runs need.
//!
//! The two limiting cases are parameter settings, each with a reference
//! point in the manifest: perfect sticking is `sticking_model = constant`,
//! `sticking = 1`; full re-emission at a fixed temperature T is
//! `sticking = 0`, `accommodation = 1`, `reemit_temperature = T`.
//!
//! What the law leaves out: a dependence of S on the impact energy or
//! angle, sticking that depends on the coverage already present, and
//! permanent losses (burial, cold traps), which a separate module can add
//! with the `Lost` outcome. The re-emission is diffuse: no specular part is
//! kept, whatever alpha.

use exobound_sdk::{
    Check, ErrorCode, Impact, Input, Manifest, Origin, Outcome, ParamKind, ParamSpec, Params,
    Process, ProcessError, ReferencePoint, Rng, Role, SurfaceInteraction, Value,
};

/// Mass of one Na atom, kg (22.98976928 u, the IUPAC standard atomic weight;
/// Prohaska et al. 2022, Pure Appl. Chem. 94, 573), used by
/// the stick-fraction reference point.
const NA_MASS: f64 = 22.989_769_28 * exobound_sdk::constants::ATOMIC_MASS;

/// Default intercept A of the linear sticking law, dimensionless: with
/// [`DEFAULT_STICK_B`] it gives S(100 K) = 1 and S(250 K) = 0.5 (from memory:
/// Yakshinskiy & Madey 2005).
pub const DEFAULT_STICK_A: f64 = 4.0 / 3.0;

/// Default slope B of the linear sticking law, K^-1 (0.5 per 150 K; from
/// memory: Yakshinskiy & Madey 2005).
pub const DEFAULT_STICK_B: f64 = 1.0 / 300.0;

/// How the sticking probability depends on the surface temperature.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum StickingLaw {
    /// The same probability at every temperature, dimensionless, in [0, 1].
    Constant(f64),
    /// S = A - B T_s clipped to [0, 1].
    Linear {
        /// Intercept A, dimensionless.
        a: f64,
        /// Slope B, K^-1.
        b: f64,
    },
}

/// Temperature-dependent sticking with partial thermal accommodation of
/// the atoms that bounce.
#[derive(Clone, Debug, PartialEq)]
pub struct SurfaceAccommodation {
    /// Sticking probability law.
    pub sticking: StickingLaw,
    /// Thermal accommodation coefficient alpha, dimensionless, in [0, 1].
    pub accommodation: f64,
    /// Fixed re-emission temperature, K; 0 means the local surface temperature.
    pub reemit_temperature: f64,
}

impl SurfaceAccommodation {
    /// Sticking probability, dimensionless in [0, 1], on a surface at
    /// `temperature` K (only the linear law reads it).
    ///
    /// `clamp` keeps the linear law a probability at every temperature, so
    /// the extrapolation beyond the measured range saturates at 1 on cold
    /// surfaces and at 0 above A/B (400 K with the defaults).
    #[inline]
    pub fn sticking_probability(&self, temperature: f64) -> f64 {
        match self.sticking {
            StickingLaw::Constant(s) => s,
            StickingLaw::Linear { a, b } => (a - b * temperature).clamp(0.0, 1.0),
        }
    }

    /// Whether the sticking law reads the surface temperature.
    #[inline]
    fn sticking_needs_temperature(&self) -> bool {
        matches!(self.sticking, StickingLaw::Linear { .. })
    }

    /// Re-emission speed, m s^-1, of an atom that arrived at `speed_in`
    /// m s^-1 and is accommodated towards `temperature` K; `mass` in kg.
    /// Draws from `rng` only when alpha > 0.
    #[inline]
    pub fn reemission_speed(
        &self,
        rng: &mut Rng,
        speed_in: f64,
        temperature: f64,
        mass: f64,
    ) -> f64 {
        let alpha = self.accommodation;
        if alpha == 0.0 {
            // Elastic limit: the energy is kept, only the direction is randomised.
            return speed_in;
        }
        let v_th = rng.maxwellian_flux_speed(temperature, mass);
        if alpha == 1.0 {
            // Full accommodation: exactly the Maxwellian-flux law at T.
            return v_th;
        }
        // E = m v^2 / 2, so mixing energies is mixing squared speeds.
        exobound_sdk::math::sqrt(alpha * v_th * v_th + (1.0 - alpha) * speed_in * speed_in)
    }
}

/// A temperature the law can use: finite and strictly positive.
#[inline]
fn usable_temperature(t: f64) -> bool {
    t.is_finite() && t > 0.0
}

impl Process for SurfaceAccommodation {
    const MANIFEST: Manifest = Manifest {
        name: "surface-accommodation",
        version: "1.0.0",
        description: "Landing atoms stick with a constant or temperature-dependent \
                      (linear, clipped) probability; the others are re-emitted along the \
                      cosine law with an energy partially accommodated to the surface \
                      temperature, E_out = alpha E_th + (1 - alpha) E_in.",
        roles: &[Role::SurfaceInteraction],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Sticking: Yakshinskiy, B. V. & Madey, T. E. (2005), Surface Science 593, \
                     202 (Na on a lunar sample, S ~ 1 at 100 K falling to ~0.5 at 250 K; from \
                     memory). Accommodation coefficient alpha = (E_in - E_out)/(E_in - 2kT_s): \
                     Hunten, Morgan & Shemansky (1988), in Mercury (Univ. Arizona Press) \
                     (from memory)",
        draws_on: None,
        ledger_label: "",
        inputs: &[Input::Temperature, Input::ImpactVelocity, Input::Mass],
        parameters: &[
            ParamSpec {
                name: "sticking_model",
                unit: "",
                description: "Sticking law: `constant` uses `sticking`; `linear` uses \
                              S = stick_a - stick_b T_s clipped to [0, 1]",
                kind: ParamKind::Choice {
                    default: Some("constant"),
                    options: &["constant", "linear"],
                },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "sticking",
                unit: "",
                description: "Sticking probability of the constant law; 1 is perfect sticking, \
                              0 is full re-emission",
                kind: ParamKind::Number { default: Some(0.5), min: 0.0, max: 1.0 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "stick_a",
                unit: "",
                description: "Intercept A of the linear sticking law S = A - B T_s",
                kind: ParamKind::Number { default: Some(DEFAULT_STICK_A), min: 0.0, max: 10.0 },
                origin: Origin::FromMemory(
                    "Yakshinskiy & Madey 2005 (S = 1 at 100 K, 0.5 at 250 K)",
                ),
            },
            ParamSpec {
                name: "stick_b",
                unit: "K^-1",
                description: "Slope B of the linear sticking law S = A - B T_s",
                kind: ParamKind::Number { default: Some(DEFAULT_STICK_B), min: 0.0, max: 0.1 },
                origin: Origin::FromMemory(
                    "Yakshinskiy & Madey 2005 (S = 1 at 100 K, 0.5 at 250 K)",
                ),
            },
            ParamSpec {
                name: "accommodation",
                unit: "",
                description: "Thermal accommodation coefficient alpha = (E_in - E_out)/(E_in - \
                              2kT) of re-emitted atoms; 1 is full accommodation, 0 an elastic \
                              bounce; 0.2-0.6 is the range used in exosphere models",
                kind: ParamKind::Number { default: Some(0.5), min: 0.0, max: 1.0 },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "reemit_temperature",
                unit: "K",
                description: "Fixed temperature the re-emitted atoms accommodate to; 0 uses the \
                              local surface temperature",
                kind: ParamKind::Number { default: Some(0.0), min: 0.0, max: 5000.0 },
                origin: Origin::CommonPractice,
            },
        ],
        reference_points: &[
            ReferencePoint {
                description: "Constant sticking probability 0.3: 30% of landings stick",
                check: Check::StickFraction,
                parameters: &[
                    ("sticking_model", Value::Text("constant")),
                    ("sticking", Value::Number(0.3)),
                ],
                input: &[("temperature", 300.0), ("mass", NA_MASS), ("velocity_up", -1000.0)],
                expected: 0.3,
                tolerance: 0.02,
                source: "definition of a constant sticking probability (the law itself)",
            },
            ReferencePoint {
                description: "Linear sticking law with its default line, 175 K surface: S = 0.75",
                check: Check::StickFraction,
                parameters: &[("sticking_model", Value::Text("linear"))],
                input: &[("temperature", 175.0), ("mass", NA_MASS), ("velocity_up", -800.0)],
                expected: 0.75,
                tolerance: 0.02,
                source: "from memory: Yakshinskiy & Madey 2005 (S = 1 at 100 K, 0.5 at 250 K), the \
                     line through both points evaluated at 175 K",
            },
            ReferencePoint {
                description: "Limiting case of perfect sticking (S = 1): every landing sticks",
                check: Check::StickFraction,
                parameters: &[
                    ("sticking_model", Value::Text("constant")),
                    ("sticking", Value::Number(1.0)),
                ],
                input: &[("temperature", 120.0), ("mass", NA_MASS), ("velocity_up", -1500.0)],
                expected: 1.0,
                tolerance: 0.0,
                source: "definition of the law: S = 1, and the uniform deviate lies in (0, 1)",
            },
            ReferencePoint {
                description: "Limiting case of full re-emission at a fixed 1200 K (S = 0, alpha = 1): \
                          no landing sticks",
                check: Check::StickFraction,
                parameters: &[
                    ("sticking_model", Value::Text("constant")),
                    ("sticking", Value::Number(0.0)),
                    ("accommodation", Value::Number(1.0)),
                    ("reemit_temperature", Value::Number(1200.0)),
                ],
                input: &[("temperature", 95.0), ("mass", NA_MASS), ("velocity_up", -2300.0)],
                expected: 0.0,
                tolerance: 0.0,
                source: "definition of the law: S = 0, and the uniform deviate lies in (0, 1)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        let sticking = match params.choice("sticking_model")? {
            "constant" => StickingLaw::Constant(params.number("sticking")?),
            "linear" => {
                StickingLaw::Linear { a: params.number("stick_a")?, b: params.number("stick_b")? }
            }
            other => {
                return Err(ProcessError::parameter(format!(
                    "sticking_model \"{other}\" is not implemented; use constant or linear"
                )));
            }
        };
        Ok(SurfaceAccommodation {
            sticking,
            accommodation: params.number("accommodation")?,
            reemit_temperature: params.number("reemit_temperature")?,
        })
    }
}

impl SurfaceInteraction for SurfaceAccommodation {
    fn land_one(&self, hit: &Impact) -> Result<Outcome, ProcessError> {
        let surface_ok = usable_temperature(hit.temperature);
        if self.sticking_needs_temperature() && !surface_ok {
            return Err(ProcessError::outside_validity(format!(
                "cell {}: surface temperature {} K; the linear sticking law needs a finite \
                 temperature above 0 K",
                hit.cell, hit.temperature
            )));
        }
        // One stream per landing; the first number decides sticking, the
        // rest (if any) the re-emission speed and direction. The uniform
        // deviate lies in the open interval (0, 1), so S = 1 always sticks
        // and S = 0 never does: the limiting cases are exact.
        let mut rng = Rng::new(hit.key);
        if rng.uniform() < self.sticking_probability(hit.temperature) {
            return Ok(Outcome::STICK);
        }
        let temperature =
            if self.reemit_temperature > 0.0 { self.reemit_temperature } else { hit.temperature };
        let speed_in = hit.velocity.speed();
        if self.accommodation > 0.0 {
            if !usable_temperature(temperature) {
                return Err(ProcessError::outside_validity(format!(
                    "cell {}: surface temperature {} K; thermal re-emission needs a finite \
                     temperature above 0 K (or set reemit_temperature)",
                    hit.cell, hit.temperature
                )));
            }
            if !(hit.mass.is_finite() && hit.mass > 0.0) {
                return Err(ProcessError::new(
                    ErrorCode::InvalidInput,
                    format!(
                        "cell {}: atomic mass {} kg; it must be finite and > 0",
                        hit.cell, hit.mass
                    ),
                ));
            }
        }
        if self.accommodation < 1.0 && !(speed_in.is_finite() && speed_in > 0.0) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "cell {}: impact speed {} m s^-1; partial accommodation needs a finite \
                     impact speed above 0",
                    hit.cell, speed_in
                ),
            ));
        }
        // The cosine-law direction has up = sqrt(u) > 0 and the speed is > 0
        // (the thermal draw is a positive Gamma deviate, the impact speed was
        // checked), so every bounce leaves the surface.
        let speed = self.reemission_speed(&mut rng, speed_in, temperature, hit.mass);
        Ok(Outcome::bounce(rng.cosine_direction().times(speed)))
    }
}

exobound_sdk::export_process!(SurfaceAccommodation: SurfaceInteraction);

#[cfg(test)]
mod tests {
    use exobound_sdk::constants::{BOLTZMANN, ELECTRON_VOLT};
    use exobound_sdk::testing::{self, Roles};
    use exobound_sdk::{OutcomeKind, RngKey, Velocity, math, stream};

    use super::*;

    /// The law with the parameters `given` (others at their defaults), built
    /// as the module's `init` builds it.
    fn law_with(given: &[(&str, Value)]) -> SurfaceAccommodation {
        testing::law(given)
    }

    /// `n` landings of Na at `speed_in` m/s, straight down, on a surface at
    /// `temperature` K, each with its own key.
    fn impacts(n: u64, temperature: f64, speed_in: f64) -> Vec<Impact> {
        (0..n)
            .map(|i| Impact {
                key: RngKey { seed: 3, particle: i, event: 1, stream: stream::SURFACE },
                cell: 42,
                temperature,
                mass: NA_MASS,
                velocity: Velocity { east: 0.0, north: 0.0, up: -speed_in },
                ..Impact::default()
            })
            .collect()
    }

    /// Outcomes of `hits`, through the batch interface.
    fn land_all(law: &mut SurfaceAccommodation, hits: &[Impact]) -> Vec<Outcome> {
        let mut out = vec![Outcome::LOST; hits.len()];
        law.land(hits, &mut out).expect("landings succeed");
        out
    }

    /// Fraction of `out` that stuck, dimensionless.
    fn stick_fraction(out: &[Outcome]) -> f64 {
        out.iter().filter(|o| o.kind == OutcomeKind::Stick as u32).count() as f64 / out.len() as f64
    }

    /// Speeds of the bounces; every bounce must leave the surface.
    fn bounce_speeds(out: &[Outcome]) -> Vec<f64> {
        out.iter()
            .filter(|o| o.kind == OutcomeKind::Bounce as u32)
            .map(|o| {
                assert!(o.velocity.up > 0.0, "a bounce must leave the surface: {o:?}");
                o.velocity.speed()
            })
            .collect()
    }

    #[test]
    fn defaults_come_from_the_manifest() {
        let law = law_with(&[]);
        // Defaults: constant S = 0.5 and alpha = 0.5, common practice (exosphere models use
        // 0.2-0.6 for alpha; Hunten, Morgan & Shemansky 1988, from memory); re-emission at the
        // local surface temperature.
        assert_eq!(law.sticking, StickingLaw::Constant(0.5));
        assert_eq!(law.accommodation, 0.5);
        assert_eq!(law.reemit_temperature, 0.0);
        let linear = law_with(&[("sticking_model", Value::Text("linear"))]);
        assert_eq!(linear.sticking, StickingLaw::Linear { a: DEFAULT_STICK_A, b: DEFAULT_STICK_B });
    }

    #[test]
    fn linear_sticking_law_and_its_clipping() {
        let law = law_with(&[("sticking_model", Value::Text("linear"))]);
        // Yakshinskiy & Madey 2005, Na on a lunar sample: S ~ 1 at 100 K and ~0.5 at 250 K
        // (from memory); the default line passes through both.
        assert!((law.sticking_probability(100.0) - 1.0).abs() < 1e-12);
        assert!((law.sticking_probability(250.0) - 0.5).abs() < 1e-12);
        // Clipped to a probability (definition of the law): colder than 100 K sticks,
        // warmer than A/B = 400 K never does.
        assert_eq!(law.sticking_probability(40.0), 1.0);
        assert_eq!(law.sticking_probability(600.0), 0.0);
        // The drawn stick fraction follows S(T): at 175 K, S = 0.75 (from memory, as above);
        // binomial standard deviation sqrt(S(1-S)/N).
        let mut law = law;
        let n = 100_000;
        let f = stick_fraction(&land_all(&mut law, &impacts(n, 175.0, 800.0)));
        assert!((f - 0.75).abs() < 3.0 * (0.75 * 0.25 / n as f64).sqrt(), "fraction {f}");
    }

    #[test]
    fn perfect_sticking_limit() {
        // Limiting case: constant S = 1 keeps every atom (definition of the law).
        let mut law = law_with(&[("sticking", Value::Number(1.0))]);
        let out = land_all(&mut law, &impacts(50_000, 120.0, 1500.0));
        assert!(out.iter().all(|o| *o == Outcome::STICK));
    }

    #[test]
    fn full_reemission_at_a_fixed_temperature_is_a_maxwellian_flux() {
        // Limiting case: S = 0, alpha = 1, T_re = 1200 K. Every atom bounces with a
        // Maxwellian-flux speed at 1200 K whatever its impact speed and the surface
        // temperature (needed for the comparison with Chamberlain 1963, Planet. Space Sci.
        // 11, 901).
        let mut law = law_with(&[
            ("sticking", Value::Number(0.0)),
            ("accommodation", Value::Number(1.0)),
            ("reemit_temperature", Value::Number(1200.0)),
        ]);
        let n = 100_000;
        let out = land_all(&mut law, &impacts(n, 95.0, 2300.0));
        let mut v = bounce_speeds(&out);
        assert_eq!(v.len() as u64, n, "no atom sticks");
        let nf = n as f64;
        // Maxwellian flux, Na at 1200 K: a = 931.66 m/s, <v> = 1238.49 m/s
        // (tests/python/sampler_reference_values.py); sd of the flux speed a sqrt(2 - 9 pi/16)
        // (moments of chi with 4 degrees of freedom).
        let a = 931.66;
        let mean = v.iter().sum::<f64>() / nf;
        let sd = a * (2.0 - 9.0 * core::f64::consts::PI / 16.0).sqrt();
        assert!((mean - 1238.49).abs() < 3.0 * sd / nf.sqrt(), "mean {mean}");
        // Maxwellian flux CDF = 1 - (1 + v^2/a^2) exp(-v^2/a^2) (integral of v^3
        // exp(-v^2/a^2)); KS at p = 0.01.
        // a is rounded to 0.01 m/s (1e-5 relative), far below the KS resolution here.
        testing::assert_ks("re-emission speed", &mut v, |x| {
            let q = x * x / (a * a);
            1.0 - (1.0 + q) * math::exp(-q)
        });
        // Cosine law: <cos theta> = 2/3, variance 1/18 (from f ~ cos theta sin theta,
        // common practice).
        let mean_cos = out.iter().map(|o| o.velocity.up / o.velocity.speed()).sum::<f64>() / nf;
        assert!((mean_cos - 2.0 / 3.0).abs() < 3.0 * (1.0f64 / 18.0 / nf).sqrt(), "{mean_cos}");
    }

    #[test]
    fn mean_reemitted_energy_obeys_the_accommodation_definition() {
        // alpha = (E_in - E_out)/(E_in - 2kT_s) (Hunten, Morgan & Shemansky 1988, in Mercury,
        // Univ. Arizona Press; from memory), so
        // <E_out> = E_in - alpha (E_in - 2kT_s). Test a fast atom on a cool surface and a
        // slow atom on a hot one, for alpha within the 0.2-0.6 range quoted there.
        let n = 100_000;
        let nf = n as f64;
        for (alpha, t_s, v_in) in [(0.4, 300.0, 2000.0), (0.2, 600.0, 300.0), (0.6, 450.0, 1000.0)]
        {
            let mut law = law_with(&[
                ("sticking", Value::Number(0.0)),
                ("accommodation", Value::Number(alpha)),
            ]);
            let out = land_all(&mut law, &impacts(n, t_s, v_in));
            let e: Vec<f64> = bounce_speeds(&out).iter().map(|v| 0.5 * NA_MASS * v * v).collect();
            assert_eq!(e.len() as u64, n);
            let e_in = 0.5 * NA_MASS * v_in * v_in;
            let e_th = 2.0 * BOLTZMANN * t_s;
            let expected = e_in - alpha * (e_in - e_th);
            let mean = e.iter().sum::<f64>() / nf;
            // E_out = alpha E_th + const, and Var(E_th) = 2 (kT)^2 for the Maxwellian flux
            // (Gamma(2, kT) energy): sd(E_out) = alpha sqrt(2) kT_s.
            let sd = alpha * core::f64::consts::SQRT_2 * BOLTZMANN * t_s;
            assert!(
                (mean - expected).abs() < 3.0 * sd / nf.sqrt(),
                "alpha {alpha}: <E_out> = {} eV, expected {} eV",
                mean / ELECTRON_VOLT,
                expected / ELECTRON_VOLT
            );
            // The estimated coefficient itself.
            let alpha_hat = (e_in - mean) / (e_in - e_th);
            assert!((alpha_hat - alpha).abs() < 0.01, "alpha estimate {alpha_hat}");
        }
    }

    #[test]
    fn elastic_limit_keeps_the_speed() {
        // alpha = 0: E_out = E_in exactly (definition of alpha); only the direction
        // is redrawn from the cosine law.
        let mut law =
            law_with(&[("sticking", Value::Number(0.0)), ("accommodation", Value::Number(0.0))]);
        let hits = impacts(1000, 400.0, 1700.0);
        let out = land_all(&mut law, &hits);
        for s in bounce_speeds(&out) {
            assert!((s - 1700.0).abs() < 1e-9, "speed {s}");
        }
    }

    /// Runs every manifest reference point the way the host's `module check`
    /// does: parameters through the schema, the input record by field name,
    /// 100 000 landings with the host's keys for each stick fraction.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(
            &Roles::<SurfaceAccommodation>::new().surface_interaction(),
        );
    }

    #[test]
    fn outcomes_depend_only_on_the_key() {
        let mut law = law_with(&[]);
        let hits = impacts(8, 350.0, 1200.0);
        // Counter-based streams: the batch's order and cuts do not matter.
        testing::assert_batch_invariant("land", &hits, |h, o| law.land(h, o));
    }

    #[test]
    fn refuses_nonsense_inputs() {
        let linear = law_with(&[("sticking_model", Value::Text("linear"))]);
        let err = linear.land_one(&impacts(1, 0.0, 1000.0)[0]).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("cell 42") && err.message.contains("0 K"), "{err}");
        // Constant law, thermal re-emission at an unusable surface temperature.
        let bouncy = law_with(&[("sticking", Value::Number(0.0))]);
        let err = bouncy.land_one(&impacts(1, f64::NAN, 1000.0)[0]).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        // ... which a fixed re-emission temperature makes usable.
        let fixed = law_with(&[
            ("sticking", Value::Number(0.0)),
            ("reemit_temperature", Value::Number(500.0)),
        ]);
        let out = fixed.land_one(&impacts(1, f64::NAN, 1000.0)[0]).unwrap();
        assert_eq!(out.kind, OutcomeKind::Bounce as u32);
        // A zero impact speed cannot be partially accommodated.
        let err = bouncy.land_one(&impacts(1, 300.0, 0.0)[0]).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        // Out-of-range parameters are refused by the schema with name and range.
        let err =
            testing::validate::<SurfaceAccommodation>(&[("accommodation", Value::Number(1.5))])
                .unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidParameter);
        assert!(err.message.contains("accommodation") && err.message.contains("[0, 1]"), "{err}");
    }
}

//! photoionization: loss of neutral atoms in flight by solar EUV photons.
//!
//! Why this exists: for Na and K around the Moon and Mercury,
//! photoionization is the main loss of atoms that do not return to the
//! surface; a photoion is picked up by the solar wind or the magnetosphere
//! and leaves the neutral exosphere. The rate is a solar-flux-weighted
//! integral of the ionization cross-section, so it scales with the photon
//! flux, i.e. with the inverse square of the heliocentric distance, and it
//! acts only while the atom is in sunlight:
//!
//! ```text
//! beta = beta_1AU / r_AU^2 * f_sun      [s^-1]
//! ```
//!
//! with beta_1AU the rate at 1 AU (s^-1), r_AU the heliocentric distance in
//! AU and f_sun the fraction of the interval the atom spends in sunlight.
//! The default beta_1AU = 5.92e-6 s^-1 (lifetime 1.69e5 s) is the quiet-Sun
//! value for Na of Huebner et al. (1992) and Huebner & Mukherjee (2015),
//! from memory; for K a value of about 2-3e-5 s^-1 is quoted (same sources,
//! low confidence). The module is a rate law only: the host turns the rate
//! into a survival probability or a weight over its time step and books the
//! removed atoms under the ledger column `photoionized`.
//!
//! Solar activity. Huebner et al. tabulate separate quiet- and active-Sun
//! rates; for Na, ionized from 241 nm down mostly by near-UV photons, the
//! two differ modestly. `solar_activity` picks `rate_1au` (quiet Sun) or
//! `rate_1au_active` (active Sun), whose default 7.26e-6 s^-1 for Na is
//! recalled from the same table with low confidence;
//! give both for another species or epoch.
//!
//! What the law leaves out, so that a user can judge it:
//! - any solar activity between the two tabulated states, and the
//!   short-term (flare) variability of the EUV flux;
//! - Mercury's orbital eccentricity is carried by the host through
//!   `helio_distance`, which the law reads per particle;
//! - electron-impact ionization and charge exchange, which are separate
//!   loss modules;
//! - the shadow is treated as sharp: `sunlit_fraction` is the host's
//!   geometric average over the step, with no penumbra.

use exobound_sdk::{
    Check, ErrorCode, InFlight, Input, Loss, Manifest, Origin, ParamKind, ParamSpec, Params,
    Process, ProcessError, ReferencePoint, Role, Value,
};

/// Heliocentric distance of Mercury at perihelion, AU: q = a(1 - e) with
/// a = 0.387098 AU and e = 0.20563 (NASA NSSDCA Mercury fact sheet).
const MERCURY_PERIHELION_AU: f64 = 0.307_50;

/// Heliocentric distance of Mercury at aphelion, AU: Q = a(1 + e) with
/// a = 0.387098 AU and e = 0.20563 (NASA NSSDCA Mercury fact sheet).
const MERCURY_APHELION_AU: f64 = 0.466_70;

/// Default Na photoionization rate at 1 AU, quiet Sun, s^-1
/// (from memory: Huebner et al. 1992; Huebner & Mukherjee 2015).
const NA_RATE_1AU: f64 = 5.92e-6;

/// Default Na photoionization rate at 1 AU, active Sun, s^-1 (from memory,
/// low confidence: Huebner et al. 1992; not checked against the table).
const NA_RATE_1AU_ACTIVE: f64 = 7.26e-6;

/// Which tabulated state of the Sun the rate is for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SolarActivity {
    /// Quiet Sun (solar minimum).
    Quiet,
    /// Active Sun (solar maximum).
    Active,
}

/// Photoionization by solar photons, scaled as r^-2 and gated by sunlight.
#[derive(Clone, Debug, PartialEq)]
pub struct Photoionization {
    /// Photoionization rate of an unshadowed atom at 1 AU for the chosen
    /// solar activity, s^-1.
    pub rate_1au: f64,
    /// The solar activity the rate is for.
    pub activity: SolarActivity,
}

impl Photoionization {
    /// Loss rate, s^-1, of one atom at heliocentric distance `helio_distance`
    /// (AU, > 0) that spends the fraction `sunlit_fraction` (in [0, 1]) of the
    /// interval in sunlight.
    ///
    /// The ionizing photons (below 241 nm for Na) come from a source of
    /// negligible size at these distances, so their flux, and the rate,
    /// scale exactly as r^-2.
    #[inline]
    pub fn rate(&self, helio_distance: f64, sunlit_fraction: f64) -> f64 {
        self.rate_1au / (helio_distance * helio_distance) * sunlit_fraction
    }

    /// Photoionization lifetime of an unshadowed atom, 1 / beta, s, at
    /// heliocentric distance `helio_distance` in AU.
    #[inline]
    pub fn lifetime(&self, helio_distance: f64) -> f64 {
        1.0 / self.rate(helio_distance, 1.0)
    }
}

impl Process for Photoionization {
    const MANIFEST: Manifest = Manifest {
        name: "photoionization",
        version: "1.0.0",
        description: "Photoionization of atoms in flight by solar photons: \
                      beta = beta_1AU / r_AU^2 times the fraction of the interval spent \
                      in sunlight, with beta_1AU for a quiet or an active Sun.",
        roles: &[Role::Loss],
        authors: &["exobound developers"],
        institution: "exobound project",
        licence: "Apache-2.0",
        law_source: "Huebner, W. F., Keady, J. J. & Lyon, S. P. (1992), Astrophys. Space Sci. \
                     195, 1; Huebner, W. F. & Mukherjee, J. (2015), Planet. Space Sci. 106, 11 \
                     (rates at 1 AU, from memory); r^-2 scaling of the solar photon flux",
        draws_on: None,
        ledger_label: "photoionized",
        inputs: &[Input::HelioDistance, Input::Sunlight],
        parameters: &[
            ParamSpec {
                name: "rate_1au",
                unit: "s^-1",
                description: "Photoionization rate of an unshadowed atom at 1 AU for the quiet \
                              Sun; 5.92e-6 for Na, about 2-3e-5 for K",
                kind: ParamKind::Number { default: Some(NA_RATE_1AU), min: 0.0, max: 1.0e-2 },
                origin: Origin::FromMemory("Huebner et al. 1992; Huebner & Mukherjee 2015"),
            },
            ParamSpec {
                name: "solar_activity",
                unit: "",
                description: "Which rate applies: `quiet` uses rate_1au, `active` uses \
                              rate_1au_active",
                kind: ParamKind::Choice { default: Some("quiet"), options: &["quiet", "active"] },
                origin: Origin::CommonPractice,
            },
            ParamSpec {
                name: "rate_1au_active",
                unit: "s^-1",
                description: "Photoionization rate of an unshadowed atom at 1 AU for the active \
                              Sun; the default is for Na",
                kind: ParamKind::Number {
                    default: Some(NA_RATE_1AU_ACTIVE),
                    min: 0.0,
                    max: 1.0e-2,
                },
                origin: Origin::FromMemory(
                    "Huebner et al. 1992, active-Sun Na rate; low confidence, not checked \
                     against the table",
                ),
            },
        ],
        reference_points: &[
            ReferencePoint {
                description: "Na at 1 AU, fully sunlit, quiet Sun",
                check: Check::LossRate,
                parameters: &[],
                input: &[("helio_distance", 1.0), ("sunlit_fraction", 1.0)],
                expected: NA_RATE_1AU,
                tolerance: 1.0e-9,
                source: "Huebner, Keady & Lyon 1992, Astrophys. Space Sci. 195, 1, quiet-Sun Na \
                         rate at 1 AU (from memory); Huebner & Mukherjee 2015, Planet. Space \
                         Sci. 106, 11",
            },
            ReferencePoint {
                description: "Na at Mercury perihelion (0.3075 AU), fully sunlit",
                check: Check::LossRate,
                parameters: &[],
                input: &[("helio_distance", MERCURY_PERIHELION_AU), ("sunlit_fraction", 1.0)],
                // 5.92e-6 / 0.3075^2: rate(r) = rate(1 AU)/r^2, exact
                // (tests/python/module_reference_values.py).
                expected: 6.260_823_583_845_6e-5,
                tolerance: 1.0e-9,
                source: "Huebner et al. 1992, Astrophys. Space Sci. 195, 1 (from memory), scaled \
                         as r^-2 to q = 0.3075 AU (NASA NSSDCA Mercury fact sheet: a = \
                         0.387098 AU, e = 0.20563)",
            },
            ReferencePoint {
                description: "Na at Mercury aphelion (0.4667 AU), sunlit half the interval",
                check: Check::LossRate,
                parameters: &[],
                input: &[("helio_distance", MERCURY_APHELION_AU), ("sunlit_fraction", 0.5)],
                // 0.5 * 5.92e-6 / 0.4667^2 (r^-2 law, exact;
                // tests/python/module_reference_values.py).
                expected: 1.358_989_525_175_03e-5,
                tolerance: 1.0e-9,
                source: "Huebner et al. 1992, Astrophys. Space Sci. 195, 1 (from memory), scaled \
                         as r^-2 to Q = 0.4667 AU (NASA NSSDCA Mercury fact sheet: a = \
                         0.387098 AU, e = 0.20563)",
            },
            ReferencePoint {
                description: "Na at Mercury perihelion (0.3075 AU), fully sunlit, active Sun",
                check: Check::LossRate,
                parameters: &[("solar_activity", Value::Text("active"))],
                input: &[("helio_distance", MERCURY_PERIHELION_AU), ("sunlit_fraction", 1.0)],
                // 7.26e-6 / 0.3075^2 (r^-2 law, exact; mpmath,
                // tests/python/module_reference_values.py).
                expected: 7.677_969_462_621_456e-5,
                tolerance: 1.0e-9,
                source: "from memory, low confidence: Huebner et al. 1992 active-Sun Na rate \
                         7.26e-6 s^-1, scaled as r^-2 to q = 0.3075 AU (NASA NSSDCA Mercury \
                         fact sheet)",
            },
        ],
    };

    fn new(params: &Params) -> Result<Self, ProcessError> {
        // Both rates have passed the schema range [0, 1e-2] s^-1; 0 is
        // allowed on purpose, to switch photoionization off in a validation run.
        let (activity, rate_1au) = match params.choice("solar_activity")? {
            "quiet" => (SolarActivity::Quiet, params.number("rate_1au")?),
            "active" => (SolarActivity::Active, params.number("rate_1au_active")?),
            other => {
                return Err(ProcessError::parameter(format!(
                    "solar_activity \"{other}\" is not implemented; use quiet or active"
                )));
            }
        };
        Ok(Photoionization { rate_1au, activity })
    }
}

impl Loss for Photoionization {
    fn loss_rate_one(&self, p: &InFlight) -> Result<f64, ProcessError> {
        if !(p.helio_distance.is_finite() && p.helio_distance > 0.0) {
            return Err(ProcessError::outside_validity(format!(
                "particle {}: heliocentric distance {} AU; the r^-2 photon-flux law needs a \
                 finite distance above 0 AU",
                p.key.particle, p.helio_distance
            )));
        }
        // A fraction outside [0, 1] (or NaN) means the host's shadow
        // geometry is broken; refuse it rather than produce a negative or
        // inflated loss.
        if !(0.0..=1.0).contains(&p.sunlit_fraction) {
            return Err(ProcessError::new(
                ErrorCode::InvalidInput,
                format!(
                    "particle {}: sunlit fraction {}; it must lie in [0, 1]",
                    p.key.particle, p.sunlit_fraction
                ),
            ));
        }
        // A rate, not a decision: the host integrates exp(-beta dt) or draws
        // the event itself, so this law uses no random numbers.
        Ok(self.rate(p.helio_distance, p.sunlit_fraction))
    }
}

exobound_sdk::export_process!(Photoionization: Loss);

#[cfg(test)]
mod tests {
    use exobound_sdk::RngKey;
    use exobound_sdk::testing::{self, Roles};

    use super::*;

    /// An atom (particle 99) 100 km up at `helio_distance` AU, sunlit for
    /// `sunlit_fraction` of the interval.
    fn atom(helio_distance: f64, sunlit_fraction: f64) -> InFlight {
        InFlight {
            key: RngKey { seed: 1, particle: 99, event: 0, stream: 2 },
            altitude: 1.0e5,
            helio_distance,
            sunlit_fraction,
            ..InFlight::default()
        }
    }

    #[test]
    fn default_is_the_na_quiet_sun_rate() {
        let law = testing::law::<Photoionization>(&[]);
        // Na photoionization 5.92e-6 s^-1 at 1 AU, quiet Sun (Huebner, Keady & Lyon 1992,
        // Astrophys. Space Sci. 195, 1; Huebner & Mukherjee 2015, Planet. Space Sci. 106, 11;
        // from memory).
        assert_eq!(law.rate_1au, 5.92e-6);
        // Lifetime 1.69e5 s (same sources, from memory).
        assert!((law.lifetime(1.0) - 1.69e5).abs() < 0.005e5, "{}", law.lifetime(1.0));
        let info = Photoionization::MANIFEST.to_info();
        assert_eq!(info.ledger_label, "photoionized");
        assert!(info.parameters[0].default_origin.starts_with("from memory: Huebner"));
    }

    #[test]
    fn rate_scales_as_inverse_square_of_distance() {
        let law = testing::law::<Photoionization>(&[]);
        // rate(1 AU), 5.92e-6 s^-1 (Huebner et al. 1992, Astrophys. Space Sci. 195, 1; from
        // memory).
        assert_eq!(law.loss_rate_one(&atom(1.0, 1.0)).unwrap(), 5.92e-6);
        // Mercury q = 0.30750 AU (NASA NSSDCA Mercury fact sheet, a(1 - e)); rate(r) =
        // rate(1 AU)/r^2 (exact: the photon flux of a distant source).
        let q = law.loss_rate_one(&atom(0.3075, 1.0)).unwrap();
        assert!((q - 5.92e-6 / (0.3075 * 0.3075)).abs() <= 1e-15 * q, "{q}");
        // r^-2 law (exact): perihelion/aphelion ratio (Q/q)^2 = 2.3035
        // (tests/python/module_reference_values.py).
        let big_q = law.loss_rate_one(&atom(0.4667, 1.0)).unwrap();
        assert!((q / big_q - (0.4667f64 / 0.3075).powi(2)).abs() < 1e-12);
        assert!((q / big_q - 2.3035).abs() < 1e-4, "{}", q / big_q);
    }

    #[test]
    fn shadow_switches_the_loss_off() {
        let law = testing::law::<Photoionization>(&[]);
        // Photoionization needs solar photons: no loss in the body's shadow
        // (the law) and a linear interval average across the terminator.
        assert_eq!(law.loss_rate_one(&atom(1.0, 0.0)).unwrap(), 0.0);
        assert_eq!(law.loss_rate_one(&atom(0.3075, 0.0)).unwrap(), 0.0);
        let half = law.loss_rate_one(&atom(1.0, 0.5)).unwrap();
        assert_eq!(half, 0.5 * 5.92e-6);
    }

    #[test]
    fn active_sun_rate_is_chosen_and_scaled() {
        // Active Sun, Na: 7.26e-6 s^-1 at 1 AU (from memory, low confidence: Huebner et
        // al. 1992, Astrophys. Space Sci. 195, 1), scaled by the r^-2 law (exact).
        let law = testing::law::<Photoionization>(&[("solar_activity", Value::Text("active"))]);
        assert_eq!(law.activity, SolarActivity::Active);
        assert_eq!(law.loss_rate_one(&atom(1.0, 1.0)).unwrap(), 7.26e-6);
        let q = law.loss_rate_one(&atom(0.3075, 1.0)).unwrap();
        assert!((q - 7.26e-6 / (0.3075 * 0.3075)).abs() <= 1e-15 * q, "{q}");
        // Still zero in shadow (the law).
        assert_eq!(law.loss_rate_one(&atom(0.3075, 0.0)).unwrap(), 0.0);
        // The quiet rate is ignored when the Sun is active, and the reverse.
        let both = testing::law::<Photoionization>(&[
            ("solar_activity", Value::Text("active")),
            ("rate_1au", Value::Number(1.0e-5)),
            ("rate_1au_active", Value::Number(3.0e-5)),
        ]);
        assert_eq!(both.loss_rate_one(&atom(1.0, 1.0)).unwrap(), 3.0e-5);
        let quiet = testing::law::<Photoionization>(&[("rate_1au_active", Value::Number(3.0e-5))]);
        assert_eq!(quiet.activity, SolarActivity::Quiet);
        assert_eq!(quiet.rate_1au, 5.92e-6);
        let info = Photoionization::MANIFEST.to_info();
        assert!(info.parameters[2].default_origin.starts_with("from memory: Huebner"));
        // An unknown state is refused by the schema, naming the options.
        let err = testing::validate::<Photoionization>(&[("solar_activity", Value::Text("flare"))])
            .unwrap_err();
        assert!(err.message.contains("solar_activity") && err.message.contains("active"));
    }

    #[test]
    fn potassium_rate_is_a_parameter() {
        // K about 2-3e-5 s^-1 at 1 AU (Huebner et al. 1992, Astrophys. Space Sci. 195, 1;
        // from memory, low confidence); 2.5e-5 at Mercury perihelion gives 2.5e-5/0.3075^2
        // (r^-2 law).
        let law = testing::law::<Photoionization>(&[("rate_1au", Value::Number(2.5e-5))]);
        let r = law.loss_rate_one(&atom(0.3075, 1.0)).unwrap();
        assert!((r - 2.5e-5 / 0.3075f64.powi(2)).abs() <= 1e-15 * r);
    }

    /// Runs every manifest reference point the way the host's `module check`
    /// does: parameters through the schema, the input record by field name.
    /// A wrong `expected`, an unknown field or a parameter outside the schema
    /// fails here before the module ships.
    #[test]
    fn manifest_reference_points_hold() {
        testing::assert_reference_points(&Roles::<Photoionization>::new().loss());
    }

    #[test]
    fn refuses_nonsense_inputs_and_parameters() {
        let law = testing::law::<Photoionization>(&[]);
        let err = law.loss_rate_one(&atom(0.0, 1.0)).unwrap_err();
        assert_eq!(err.code, ErrorCode::OutsideValidity);
        assert!(err.message.contains("particle 99") && err.message.contains("0 AU"), "{err}");
        assert_eq!(
            law.loss_rate_one(&atom(f64::INFINITY, 1.0)).unwrap_err().code,
            ErrorCode::OutsideValidity
        );
        assert_eq!(law.loss_rate_one(&atom(1.0, 1.5)).unwrap_err().code, ErrorCode::InvalidInput);
        assert_eq!(
            law.loss_rate_one(&atom(1.0, f64::NAN)).unwrap_err().code,
            ErrorCode::InvalidInput
        );
        let err =
            testing::validate::<Photoionization>(&[("rate_1au", Value::Number(1.0))]).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidParameter);
        assert!(err.message.contains("rate_1au") && err.message.contains("s^-1"), "{err}");
    }

    /// The law is a pure function of each record, so the batch's order and
    /// cuts change nothing.
    #[test]
    fn batch_results_do_not_depend_on_order() {
        let mut law = testing::law::<Photoionization>(&[]);
        let atoms = [atom(0.39, 0.25), atom(0.31, 1.0), atom(1.0, 0.0)];
        testing::assert_batch_invariant("loss_rate", &atoms, |p, r| law.loss_rate(p, r));
    }
}

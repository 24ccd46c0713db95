//! Test helpers for module authors: build a law the way the host does,
//! rerun the manifest's reference points, compare draws with a
//! distribution, and check that results do not depend on how records are
//! batched.
//!
//! Why this exists: every law needs the same few tests, and before this
//! module each standard module carried its own copy of them (a reference
//! point runner of about forty lines, a Kolmogorov-Smirnov distance, a
//! parameter builder). A copy drifts: one ran its stochastic points with
//! 20 000 draws where the host uses 100 000. Here they are written once,
//! against the same protocol the host's `module check` and `vet` use, so a
//! native `cargo test` computes the very numbers the host will.
//!
//! Enabled by the SDK's `testing` feature, which adds no dependency; a
//! module crate turns it on for its tests only:
//!
//! ```toml
//! [dev-dependencies]
//! exobound-sdk = { version = "...", features = ["testing"] }
//! ```
//!
//! Everything here panics with a message on failure, as tests should; none
//! of it belongs in a law's own code.

use std::collections::BTreeMap;
use std::fmt::Debug;

use crate::manifest::{Check, ParamInfo, Value};
use crate::params::{ParamValue, Params};
use crate::records::{
    CellState, Impact, InFlight, LaunchRequest, NamedFields, Outcome, OutcomeKind, Record, RngKey,
    Velocity, as_bytes, stream,
};
use crate::roles::{Loss, Process, ProcessError, ReservoirProcess, Source, SurfaceInteraction};

pub use crate::wire::{REFERENCE_DRAWS, REFERENCE_SEED};

// ---------------------------------------------------------------------------
// Building a law
// ---------------------------------------------------------------------------

/// The parameter schema of `P`, exactly as the host decodes it from the
/// manifest section.
pub fn schema<P: Process>() -> Vec<ParamInfo> {
    P::MANIFEST.to_info().parameters
}

/// The parameters `given` (others take their defaults) validated against
/// the schema of `P`, as the host's scenario check does: an unknown name, a
/// wrong type or a value out of range is the error.
pub fn validate<P: Process>(given: &[(&str, Value)]) -> Result<Params, ProcessError> {
    let map: BTreeMap<String, ParamValue> = given
        .iter()
        .map(|(k, v)| {
            let v = match v {
                Value::Number(x) => ParamValue::Number(*x),
                Value::Text(s) => ParamValue::Text(s.to_string()),
            };
            (k.to_string(), v)
        })
        .collect();
    Params::validate(&map, &schema::<P>())
}

/// The law `P` built from the parameters `given` (others take their
/// defaults) through the path of the module's `init`: encoded as
/// MessagePack, decoded and validated against the manifest's schema, then
/// `P::new`. The error is the refusal of either step.
pub fn try_law<P: Process>(given: &[(&str, Value)]) -> Result<P, ProcessError> {
    let params = validate::<P>(given)?;
    let map: BTreeMap<String, ParamValue> =
        params.iter().map(|(k, v)| (k.to_string(), v.clone())).collect();
    let decoded = Params::decode(&Params::encode(&map), &schema::<P>())?;
    P::new(&decoded)
}

/// [`try_law`], panicking with the law's name and the refusal.
pub fn law<P: Process>(given: &[(&str, Value)]) -> P {
    try_law::<P>(given).unwrap_or_else(|e| {
        panic!("{} with parameters {given:?} refused to build: {e}", P::MANIFEST.name)
    })
}

// ---------------------------------------------------------------------------
// Keys
// ---------------------------------------------------------------------------

/// Input records that carry a random key, and the named stream the host
/// hands them with.
pub trait Keyed: Copy {
    /// The named stream of this kind of record ([`stream`]).
    const STREAM: u32;
    /// The record with its key replaced by `key`.
    fn with_key(self, key: RngKey) -> Self;
}

impl Keyed for LaunchRequest {
    const STREAM: u32 = stream::LAUNCH;
    fn with_key(self, key: RngKey) -> Self {
        LaunchRequest { key, ..self }
    }
}

impl Keyed for Impact {
    const STREAM: u32 = stream::SURFACE;
    fn with_key(self, key: RngKey) -> Self {
        Impact { key, ..self }
    }
}

impl Keyed for InFlight {
    const STREAM: u32 = stream::FLIGHT;
    fn with_key(self, key: RngKey) -> Self {
        InFlight { key, ..self }
    }
}

/// `n` copies of `base`, copy `i` keyed (run seed `seed`, particle `i`,
/// event 0, the record's stream): independent draws from one state.
pub fn draws<R: Keyed>(base: R, n: u64, seed: u64) -> Vec<R> {
    (0..n)
        .map(|i| base.with_key(RngKey { seed, particle: i, event: 0, stream: R::STREAM }))
        .collect()
}

// ---------------------------------------------------------------------------
// Reference points
// ---------------------------------------------------------------------------

/// A batch method of a role trait, as a function pointer.
type Batch<P, I, O> = fn(&mut P, &[I], &mut [O]) -> Result<(), ProcessError>;

/// The role methods of `P` that reference points may call. Build it with
/// the roles the law implements, e.g. `Roles::<MyLaw>::new().source()`;
/// Rust cannot ask whether a type implements a trait at run time, so the
/// test names them, as `export_process!` does.
pub struct Roles<P> {
    release_rate: Option<Batch<P, CellState, f64>>,
    launch: Option<Batch<P, LaunchRequest, Velocity>>,
    loss_rate: Option<Batch<P, InFlight, f64>>,
    land: Option<Batch<P, Impact, Outcome>>,
    exchange: Option<Batch<P, CellState, f64>>,
}

impl<P: Process> Default for Roles<P> {
    fn default() -> Self {
        Roles::new()
    }
}

impl<P: Process> Roles<P> {
    /// No role yet.
    pub fn new() -> Self {
        Roles { release_rate: None, launch: None, loss_rate: None, land: None, exchange: None }
    }

    /// The `Source` role: `release-rate` and `mean-launch-speed` points.
    pub fn source(mut self) -> Self
    where
        P: Source,
    {
        self.release_rate = Some(<P as Source>::release_rate);
        self.launch = Some(<P as Source>::launch);
        self
    }

    /// The `Loss` role: `loss-rate` points.
    pub fn loss(mut self) -> Self
    where
        P: Loss,
    {
        self.loss_rate = Some(<P as Loss>::loss_rate);
        self
    }

    /// The `SurfaceInteraction` role: `stick-fraction` points.
    pub fn surface_interaction(mut self) -> Self
    where
        P: SurfaceInteraction,
    {
        self.land = Some(<P as SurfaceInteraction>::land);
        self
    }

    /// The `ReservoirProcess` role: `exchange` points.
    pub fn reservoir(mut self) -> Self
    where
        P: ReservoirProcess,
    {
        self.exchange = Some(<P as ReservoirProcess>::exchange);
        self
    }
}

/// The result of one reference point.
#[derive(Clone, Debug, PartialEq)]
pub struct ReferenceOutcome {
    /// The point's description.
    pub description: &'static str,
    /// Which call it exercised.
    pub check: Check,
    /// Expected value, in the unit of the check.
    pub expected: f64,
    /// Value the law gave, in the unit of the check.
    pub got: f64,
    /// Allowed relative deviation (absolute for an expected 0), dimensionless.
    pub tolerance: f64,
    /// Whether |got - expected| is within the tolerance, judged as the host judges it.
    pub passed: bool,
    /// Where the expected value comes from.
    pub source: &'static str,
}

/// A record of type `T` with the point's input fields set by name; the
/// error names an unknown field.
fn record<T: NamedFields + Default>(input: &[(&str, f64)], point: &str) -> Result<T, String> {
    let mut r = T::default();
    for (k, v) in input {
        if !r.set_field(k, *v) {
            return Err(format!("reference point `{point}` sets the unknown input field `{k}`"));
        }
    }
    Ok(r)
}

/// One call of a batch method on one record; the output slot starts as NaN
/// (or the default record) so that an untouched output shows.
fn call_one<P, I, O: Copy>(
    law: &mut P,
    method: Option<Batch<P, I, O>>,
    input: I,
    empty: O,
    needs: &str,
) -> Result<O, String> {
    let method = method.ok_or_else(|| format!("this check needs `Roles::{needs}()`"))?;
    let mut out = [empty];
    method(law, &[input], &mut out).map_err(|e| format!("the law refused: {e}"))?;
    Ok(out[0])
}

/// Runs every reference point of `P`'s manifest the way the host's `module
/// check` does: the point's parameters through the schema, its input record
/// by field name, one record for a rate, [`REFERENCE_DRAWS`] records keyed
/// from [`REFERENCE_SEED`] for a stochastic check. The error names the
/// point and what kept it from running.
pub fn run_reference_points<P: Process>(roles: &Roles<P>) -> Result<Vec<ReferenceOutcome>, String> {
    let mut results = Vec::new();
    for point in P::MANIFEST.reference_points {
        let fail = |e: String| {
            format!("{}: reference point `{}`: {e}", P::MANIFEST.name, point.description)
        };
        let mut law = try_law::<P>(point.parameters).map_err(|e| fail(e.to_string()))?;
        let got = match point.check {
            Check::ReleaseRate => {
                let cell = record(point.input, point.description).map_err(fail)?;
                call_one(&mut law, roles.release_rate, cell, f64::NAN, "source").map_err(fail)?
            }
            Check::Exchange => {
                let cell = record(point.input, point.description).map_err(fail)?;
                call_one(&mut law, roles.exchange, cell, f64::NAN, "reservoir").map_err(fail)?
            }
            Check::LossRate => {
                let p = record(point.input, point.description).map_err(fail)?;
                call_one(&mut law, roles.loss_rate, p, f64::NAN, "loss").map_err(fail)?
            }
            Check::MeanLaunchSpeed => {
                let base: LaunchRequest = record(point.input, point.description).map_err(fail)?;
                let launch = roles
                    .launch
                    .ok_or_else(|| fail("this check needs `Roles::source()`".into()))?;
                let reqs = draws(base, REFERENCE_DRAWS, REFERENCE_SEED);
                let mut v = vec![Velocity::ZERO; reqs.len()];
                launch(&mut law, &reqs, &mut v)
                    .map_err(|e| fail(format!("the law refused: {e}")))?;
                v.iter().map(Velocity::speed).sum::<f64>() / v.len() as f64
            }
            Check::StickFraction => {
                let base: Impact = record(point.input, point.description).map_err(fail)?;
                let land = roles.land.ok_or_else(|| {
                    fail("this check needs `Roles::surface_interaction()`".into())
                })?;
                let hits = draws(base, REFERENCE_DRAWS, REFERENCE_SEED);
                let mut out = vec![Outcome::default(); hits.len()];
                land(&mut law, &hits, &mut out)
                    .map_err(|e| fail(format!("the law refused: {e}")))?;
                let stuck = out.iter().filter(|o| o.kind == OutcomeKind::Stick as u32).count();
                stuck as f64 / out.len() as f64
            }
        };
        let scale = if point.expected == 0.0 { 1.0 } else { point.expected.abs() };
        results.push(ReferenceOutcome {
            description: point.description,
            check: point.check,
            expected: point.expected,
            got,
            tolerance: point.tolerance,
            passed: (got - point.expected).abs() <= point.tolerance * scale,
            source: point.source,
        });
    }
    Ok(results)
}

/// [`run_reference_points`], failing with every point that does not hold
/// (its description, the value, the expected value, the tolerance and the
/// source), or that cannot run. A manifest with no reference point fails
/// too: the host's `vet` requires one per role.
pub fn assert_reference_points<P: Process>(roles: &Roles<P>) {
    let results = run_reference_points(roles).unwrap_or_else(|e| panic!("{e}"));
    assert!(!results.is_empty(), "{} has no reference point", P::MANIFEST.name);
    let failed: Vec<String> = results
        .iter()
        .filter(|r| !r.passed)
        .map(|r| {
            format!(
                "`{}` ({}): got {:e}, expected {:e} within {} ({})",
                r.description,
                r.check.as_str(),
                r.got,
                r.expected,
                r.tolerance,
                r.source
            )
        })
        .collect();
    assert!(
        failed.is_empty(),
        "{}: reference points that do not hold:\n{}",
        P::MANIFEST.name,
        failed.join("\n")
    );
}

// ---------------------------------------------------------------------------
// Distributions
// ---------------------------------------------------------------------------

/// sqrt(N) times the one-sample Kolmogorov-Smirnov critical distance at
/// significance 0.01, dimensionless: the asymptotic Kolmogorov quantile
/// sqrt(-ln(0.01 / 2) / 2) = 1.628 (Kolmogorov 1933; e.g. Press et al.,
/// Numerical Recipes, 3rd ed., 2007, section 14.3.3).
pub const KS_CRITICAL_1PC: f64 = 1.628;

/// The Kolmogorov-Smirnov distance between the empirical distribution of
/// `xs` (sorted in place) and the distribution function `cdf`:
/// max over i of |cdf(x_i) - i/N| and |cdf(x_i) - (i+1)/N|.
pub fn ks_distance(xs: &mut [f64], cdf: impl Fn(f64) -> f64) -> f64 {
    xs.sort_by(f64::total_cmp);
    let n = xs.len() as f64;
    xs.iter()
        .enumerate()
        .map(|(i, &x)| {
            let f = cdf(x);
            (f - i as f64 / n).abs().max((f - (i + 1) as f64 / n).abs())
        })
        .fold(0.0, f64::max)
}

/// Fails unless the draws `xs` (sorted in place) pass a one-sample KS test
/// against `cdf` at significance 0.01: D < [`KS_CRITICAL_1PC`] / sqrt(N).
/// A correct sampler fails it for 1% of seeds, so a test fixes its keys; a
/// failure names `what`, D and the critical distance.
pub fn assert_ks(what: &str, xs: &mut [f64], cdf: impl Fn(f64) -> f64) {
    assert!(xs.len() >= 100, "{what}: {} draws are too few for a KS test", xs.len());
    let d = ks_distance(xs, cdf);
    let critical = KS_CRITICAL_1PC / (xs.len() as f64).sqrt();
    assert!(
        d < critical,
        "{what}: KS distance {d:.5} >= {critical:.5} (p < 0.01, N = {})",
        xs.len()
    );
}

/// Fails unless the launches of `P` follow every law it declares in
/// `Source::LAUNCH_LAWS`, as `exobound module vet` tests them: for each law,
/// the law's `when` choices (other parameters at their defaults), `n` draws
/// from the launch request `base` keyed from `seed`, and one-sample KS tests
/// at p = 0.01 of the speeds (energies, for the energy laws) and of the
/// cosines of the angle from the vertical against the declared distribution
/// functions (see [`crate::launch_law`]). Fails too when nothing is declared.
pub fn assert_launch_laws<P: Source>(base: LaunchRequest, n: u64, seed: u64) {
    let name = P::MANIFEST.name;
    assert!(!P::LAUNCH_LAWS.is_empty(), "{name} declares no launch law");
    for declared in P::LAUNCH_LAWS {
        let info = declared.to_info();
        let given: Vec<(&str, Value)> =
            declared.when.iter().map(|(k, v)| (*k, Value::Text(v))).collect();
        let params: BTreeMap<String, ParamValue> = validate::<P>(&given)
            .unwrap_or_else(|e| panic!("{name}: `when` of {}: {e}", info.label()))
            .iter()
            .map(|(k, v)| (k.to_string(), v.clone()))
            .collect();
        let resolved = info
            .resolve(&params, &base)
            .unwrap_or_else(|e| panic!("{name}: {}: {e}", info.label()));
        let mut law = law::<P>(&given);
        let reqs = draws(base, n, seed);
        let mut v = vec![Velocity::ZERO; reqs.len()];
        law.launch(&reqs, &mut v)
            .unwrap_or_else(|e| panic!("{name}: {}: the law refused: {e}", info.label()));
        let mut speeds: Vec<f64> = v.iter().map(Velocity::speed).collect();
        let mut cosines: Vec<f64> = v.iter().map(|u| u.up / u.speed()).collect();
        assert_ks(&format!("{name}: {}: speed", info.label()), &mut speeds, |x| {
            resolved.speed_cdf(x)
        });
        assert_ks(&format!("{name}: {}: direction", info.label()), &mut cosines, |c| {
            resolved.direction.cdf(c)
        });
    }
}

// ---------------------------------------------------------------------------
// Batching
// ---------------------------------------------------------------------------

/// Fails unless a batch method gives bit-identical results for `records`
/// whole, split in two, one record at a time, and reversed (with the
/// results reversed). `call` is the batch method on one law, e.g.
/// `|i, o| law.launch(i, o)`. This is what lets the host cut its batches
/// anywhere and run them on any thread: a law's result for a record must
/// depend on that record (and its key) alone.
pub fn assert_batch_invariant<I: Copy, O: Record + Debug>(
    what: &str,
    records: &[I],
    mut call: impl FnMut(&[I], &mut [O]) -> Result<(), ProcessError>,
) {
    assert!(records.len() >= 2, "{what}: give at least two records");
    let mut run = |inputs: &[I]| -> Vec<O> {
        let mut out = vec![O::default(); inputs.len()];
        call(inputs, &mut out).unwrap_or_else(|e| panic!("{what}: the law refused: {e}"));
        out
    };
    let whole = run(records);
    let mid = records.len() / 2;
    let mut halves = run(&records[..mid]);
    halves.extend(run(&records[mid..]));
    let singles: Vec<O> = records.iter().flat_map(|r| run(std::slice::from_ref(r))).collect();
    let reversed_input: Vec<I> = records.iter().rev().copied().collect();
    let mut reversed = run(&reversed_input);
    reversed.reverse();
    for (how, other) in
        [("split in two", &halves), ("one at a time", &singles), ("reversed", &reversed)]
    {
        for (i, (a, b)) in whole.iter().zip(other.iter()).enumerate() {
            assert!(
                as_bytes(std::slice::from_ref(a)) == as_bytes(std::slice::from_ref(b)),
                "{what}: record {i} gives {a:?} in the whole batch but {b:?} {how}"
            );
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ks_distance_of_a_uniform_grid() {
        // The grid (i + 1/2)/N against U(0, 1): every step is 1/(2N) away from the CDF
        // (definition of the KS distance).
        let mut xs: Vec<f64> = (0..1000).map(|i| (i as f64 + 0.5) / 1000.0).collect();
        assert!((ks_distance(&mut xs, |x| x) - 0.0005).abs() < 1e-15);
        assert_ks("uniform grid", &mut xs, |x| x);
        // sqrt(-ln(0.005)/2) (Kolmogorov's asymptotic distribution).
        assert!((KS_CRITICAL_1PC - (-(0.005f64).ln() / 2.0).sqrt()).abs() < 5e-4);
    }

    #[test]
    #[should_panic(expected = "KS distance")]
    fn ks_test_rejects_a_shifted_sample() {
        let mut xs: Vec<f64> = (0..1000).map(|i| (i as f64 + 0.5) / 1000.0 * 0.9).collect();
        assert_ks("shifted", &mut xs, |x| x);
    }

    use crate::manifest::{Input, Manifest, ReferencePoint, Role};
    use crate::roles::ErrorCode;

    /// A launch law that is wrong on purpose: its speed is the record's
    /// place in the batch, which the host's batching would change.
    struct PositionDependent;

    /// A loss that implements neither `loss_rate` nor `loss_rate_one`.
    struct Unimplemented;

    const POINT: ReferencePoint = ReferencePoint {
        description: "one record",
        check: Check::LossRate,
        parameters: &[],
        input: &[("helio_distance", 1.0)],
        expected: 1.0,
        tolerance: 0.0,
        source: "the test",
    };

    const MANIFEST: Manifest = Manifest {
        name: "sdk-test",
        version: "0.0.0",
        description: "a law for the SDK's own tests",
        roles: &[Role::Source],
        authors: &[],
        institution: "",
        licence: "Apache-2.0",
        law_source: "none",
        draws_on: None,
        ledger_label: "",
        inputs: &[Input::Mass],
        parameters: &[],
        reference_points: &[POINT],
    };

    impl Process for PositionDependent {
        const MANIFEST: Manifest = MANIFEST;
        fn new(_: &Params) -> Result<Self, ProcessError> {
            Ok(PositionDependent)
        }
    }

    impl Source for PositionDependent {
        fn launch(
            &mut self,
            requests: &[LaunchRequest],
            velocities: &mut [Velocity],
        ) -> Result<(), ProcessError> {
            for (i, (_, v)) in requests.iter().zip(velocities.iter_mut()).enumerate() {
                *v = Velocity { east: 0.0, north: 0.0, up: 1.0 + i as f64 };
            }
            Ok(())
        }
    }

    impl Process for Unimplemented {
        const MANIFEST: Manifest = Manifest { roles: &[Role::Loss], ..MANIFEST };
        fn new(_: &Params) -> Result<Self, ProcessError> {
            Ok(Unimplemented)
        }
    }

    impl Loss for Unimplemented {}

    #[test]
    #[should_panic(expected = "record 2 gives")]
    fn batch_check_catches_a_position_dependent_law() {
        let mut law = law::<PositionDependent>(&[]);
        let reqs = draws(LaunchRequest::default(), 4, 1);
        assert_batch_invariant("launch", &reqs, |r, v| law.launch(r, v));
    }

    #[test]
    fn a_role_implemented_in_neither_form_is_refused_by_name() {
        let mut law = law::<Unimplemented>(&[]);
        let mut out = [0.0];
        let err = law.loss_rate(&[InFlight::default()], &mut out).unwrap_err();
        assert_eq!(err.code, ErrorCode::Unsupported);
        assert!(err.message.contains("loss_rate_one") && err.message.contains("`Loss::loss_rate`"));
        // The reference runner reports the refusal with the point's name.
        let err = run_reference_points(&Roles::<Unimplemented>::new().loss()).unwrap_err();
        assert!(err.contains("one record") && err.contains("refused"), "{err}");
        // ... and a role the test forgot to list, with the builder call that adds it.
        let err = run_reference_points(&Roles::<Unimplemented>::new()).unwrap_err();
        assert!(err.contains("Roles::loss()"), "{err}");
    }

    #[test]
    fn the_default_batch_loop_refuses_mismatched_slices() {
        let err = crate::roles::each_record(&[1.0, 2.0], &mut [0.0], |x| Ok(*x)).unwrap_err();
        assert_eq!(err.code, ErrorCode::InvalidInput);
        assert!(err.message.contains("2 input records but 1 output slots"), "{err}");
        let mut out = [0.0; 2];
        crate::roles::each_record(&[1.0, 2.0], &mut out, |x| Ok(2.0 * x)).unwrap();
        assert_eq!(out, [2.0, 4.0]);
    }

    #[test]
    fn draws_are_keyed_by_particle() {
        let d = draws(LaunchRequest::default(), 3, 7);
        assert_eq!(d[2].key, RngKey { seed: 7, particle: 2, event: 0, stream: stream::LAUNCH });
        let h = draws(Impact::default(), 1, 7);
        assert_eq!(h[0].key.stream, stream::SURFACE);
    }
}

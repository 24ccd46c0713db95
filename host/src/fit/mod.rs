//! Fitting poorly constrained parameters to observations.
//!
//! Why this exists: the impact vaporization rate, the vapour temperature,
//! the PSD cross-section, the sputtering yield and the diffusion
//! enhancement are tuned to what was observed. `exobound fit` minimises
//!
//!   chi-square = sum (model - observed)^2 / (sigma_obs^2 + sigma_model^2)
//!
//! over the free parameters, where sigma_model is the Monte Carlo standard
//! error of the model value ([`evaluate`]). Every evaluation runs the
//! scenario with the same seeds (common random numbers). A coarse grid
//! picks the start; then rounds of a small design of evaluations around the
//! current best point, a quadratic surrogate of each model value fitted to
//! them, and the exact minimum and profile-likelihood intervals of the
//! surrogate's chi-square ([`surrogate`]) move and shrink the design until
//! it matches the interval. `docs/fit.md` states the method. The runs of
//! each batch go to this machine's cores or, with `--slurm`, to a Slurm
//! job array ([`slurm`]), with the same result.

pub mod evaluate;
pub mod observed;
pub mod slurm;
pub mod surrogate;

use std::path::Path;
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use exobound_products::{Line, LinePlot, LineStyle, draw_lines};
use serde::Serialize;

use crate::checkpoint::ScenarioSource;
use crate::driver::{self, Session};
use crate::output::{PROVENANCE_FILE, atomic_write, number, staged};
use crate::runtime::Runtime;
use crate::scenario::quantity;
use observed::{Observable, Observation};

/// A free parameter: its scenario key and its range.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FreeParam {
    /// The scenario key, as for `--set`.
    pub key: String,
    /// Lower bound, in `unit`.
    pub lo: f64,
    /// Upper bound, in `unit`.
    pub hi: f64,
    /// Unit, "" for a plain number.
    pub unit: String,
    /// Searched in log space (when hi/lo >= 10 and lo > 0).
    pub log: bool,
}

impl FreeParam {
    /// Parse `KEY=LO..HI [UNIT]`, e.g. `processes.impact-vapor.parameters.flux=5e4..5e5 cm^-2 s^-1`.
    pub fn parse(s: &str) -> Result<FreeParam, String> {
        let (key, range) = s
            .split_once('=')
            .ok_or_else(|| format!("--free `{s}`: write KEY=LO..HI UNIT, e.g. run.x=1..2 K"))?;
        let (lo, hi) =
            range.split_once("..").ok_or_else(|| format!("--free `{s}`: the range is LO..HI"))?;
        let (hi_x, unit) = quantity::split(hi)
            .ok_or_else(|| format!("--free `{s}`: `{hi}` is not a number with a unit"))?;
        let (lo_x, lo_unit) =
            quantity::split(lo).ok_or_else(|| format!("--free `{s}`: `{lo}` is not a number"))?;
        if !lo_unit.is_empty() && lo_unit != unit {
            return Err(format!("--free `{s}`: LO is in `{lo_unit}` but HI in `{unit}`"));
        }
        if !(hi_x > lo_x) || !lo_x.is_finite() || !hi_x.is_finite() {
            return Err(format!("--free `{s}`: need LO < HI"));
        }
        let key = key.trim().to_string();
        if !key.contains('.') {
            return Err(format!("--free `{s}`: `{key}` is not a dotted scenario key"));
        }
        Ok(FreeParam { key, lo: lo_x, hi: hi_x, log: lo_x > 0.0 && hi_x / lo_x >= 10.0, unit })
    }

    /// The value at fraction `z` of the range (z in [0, 1]), in `unit`.
    pub fn at(&self, z: f64) -> f64 {
        let z = z.clamp(0.0, 1.0);
        if self.log {
            (self.lo.ln() + z * (self.hi.ln() - self.lo.ln())).exp()
        } else {
            self.lo + z * (self.hi - self.lo)
        }
    }

    /// d(value)/dz at `z`, in `unit` (to turn an uncertainty in z into one in the unit).
    pub fn slope(&self, z: f64) -> f64 {
        if self.log { self.at(z) * (self.hi.ln() - self.lo.ln()) } else { self.hi - self.lo }
    }

    /// `KEY=LO..HI UNIT`, as given.
    pub fn spec(&self) -> String {
        format!(
            "{}={:e}..{:e}{}{}",
            self.key,
            self.lo,
            self.hi,
            if self.unit.is_empty() { "" } else { " " },
            self.unit
        )
    }

    /// The override for value `x`.
    pub(crate) fn setting(&self, x: f64) -> String {
        if self.unit.is_empty() {
            format!("{}={x:e}", self.key)
        } else {
            format!("{}=\"{x:e} {}\"", self.key, self.unit)
        }
    }
}

/// Settings of a fit.
#[derive(Clone, Debug)]
pub struct FitSettings {
    /// Run seeds of every evaluation (common random numbers).
    pub seeds: Vec<u64>,
    /// Coarse-grid points per free parameter.
    pub grid: usize,
    /// Design rounds at most after the grid.
    pub max_rounds: usize,
    /// Runs at once (on this machine).
    pub jobs: usize,
    /// Run each batch as a Slurm job array instead; `None` to run here.
    pub slurm: Option<slurm::FitSlurm>,
}

impl Default for FitSettings {
    fn default() -> Self {
        FitSettings { seeds: vec![1, 2], grid: 3, max_rounds: 8, jobs: 1, slurm: None }
    }
}

/// One evaluation of chi-square.
#[derive(Clone, Debug, Serialize)]
pub struct Evaluation {
    /// Parameter values, in their units.
    pub values: Vec<f64>,
    /// chi-square with the model's Monte Carlo variance, dimensionless.
    pub chi2: f64,
    /// Where it came from: "grid", "design N" or "best".
    pub stage: String,
}

/// One observation at the best fit.
#[derive(Clone, Debug, Serialize)]
pub struct Residual {
    /// The observation's label.
    pub observation: String,
    /// Observed value, in `unit`.
    pub observed: f64,
    /// Its 1-sigma uncertainty, in `unit`.
    pub uncertainty: f64,
    /// The model at the best fit (surrogate), in `unit`.
    pub model: f64,
    /// The model's Monte Carlo standard error, in `unit`.
    pub model_error: f64,
    /// (model - observed) / sqrt(uncertainty^2 + model_error^2), dimensionless.
    pub normalised_residual: f64,
    /// The unit.
    pub unit: String,
}

/// The result of a fit.
#[derive(Clone, Debug, Serialize)]
pub struct FitResult {
    /// The free parameters.
    pub parameters: Vec<FreeParam>,
    /// Best-fit values, in their units.
    pub best: Vec<f64>,
    /// Half the width of the 1-sigma interval, in their units (NaN when
    /// the interval is open on a side).
    pub sigma: Vec<f64>,
    /// 1-sigma profile-likelihood interval (Delta chi2 = 1), in their units;
    /// NaN for a side not reached inside the searched range.
    pub interval_1sigma: Vec<[f64; 2]>,
    /// 2-sigma profile-likelihood interval (Delta chi2 = 4), in their units.
    pub interval_2sigma: Vec<[f64; 2]>,
    /// Correlation matrix of the parameters at the best fit, dimensionless.
    pub correlation: Vec<Vec<f64>>,
    /// chi-square of the surrogate at the best fit, dimensionless.
    pub chi2: f64,
    /// Degrees of freedom: observations - free parameters.
    pub dof: i64,
    /// chi-square per degree of freedom.
    pub chi2_per_dof: f64,
    /// How the best fit and the intervals were found.
    pub method: String,
    /// The model's Monte Carlo noise used in chi-square, per family of observations.
    pub model_noise: String,
    /// True if the search stopped on its round cap before the design
    /// matched the interval.
    pub stopped_on_cap: bool,
    /// Design rounds made after the grid.
    pub rounds: usize,
    /// Per observation at the best fit.
    pub residuals: Vec<Residual>,
    /// Every evaluation, in order.
    pub evaluations: Vec<Evaluation>,
    /// Points asked for again and answered from the record (not run again).
    pub reused_evaluations: usize,
    /// Model runs made (evaluations x seeds).
    pub runs: usize,
    /// Seeds used.
    pub seeds: Vec<u64>,
    /// Notes on the result (e.g. a best fit on a bound).
    pub notes: Vec<String>,
    /// A reminder of what the numbers are.
    pub caution: String,
}

/// Seeds run at the best grid point, besides the fit's own, to measure the model's noise.
const CALIBRATION_SEEDS: u64 = 6;

/// The method, as fit.json states it.
const METHOD: &str = "chi2 = sum (model - observed)^2 / (sigma_obs^2 + sigma_model^2), \
    sigma_model the Monte Carlo covariance of the model values (a relative shift common to each \
    family of observations plus independent scatter, measured from the fit's seeds and 6 more at \
    the best grid point; with one seed, the run's window-to-window errors); common \
    random numbers at every point; a coarse grid, then rounds of a design (centre, +-h and +-2h \
    along each axis, and the 2^d corners at +-h) around the best point, each model value fitted \
    by a quadratic in the scaled parameters (least squares), the surrogate chi2 minimised in the \
    design's box, and the design moved or resized until h is about 3 sigma (the box +-6 sigma); intervals = \
    profile likelihood (Delta chi2 = 1 and 4, minimising over the other parameters, Wilks 1938); \
    correlation from 2 H^-1 of the surrogate chi2";

/// The design around `c` with half-widths `h`: the centre, +-h and +-2h
/// on each axis, and the 2^d corners at +-h; points outside [0, 1] are
/// moved onto the range's edge.
fn design(c: &[f64], h: &[f64]) -> Vec<Vec<f64>> {
    let d = c.len();
    let mut out = vec![c.to_vec()];
    for j in 0..d {
        for f in [-2.0, -1.0, 1.0, 2.0] {
            let mut z = c.to_vec();
            z[j] += f * h[j];
            out.push(z);
        }
    }
    if d > 1 {
        for k in 0..(1usize << d) {
            out.push((0..d).map(|j| c[j] + if k >> j & 1 == 1 { h[j] } else { -h[j] }).collect());
        }
    }
    let mut unique: Vec<Vec<f64>> = Vec::new();
    for z in out {
        let z: Vec<f64> = z.iter().map(|v| v.clamp(0.0, 1.0)).collect();
        if !unique.contains(&z) {
            unique.push(z);
        }
    }
    unique
}

/// Check every free parameter against the scenario before any run: each
/// bound on its own must load, so an unknown key, a missing or wrong unit
/// or a value the module refuses is named with its `--free` text.
pub fn check_free(
    base: &ScenarioSource,
    params: &[FreeParam],
    runtime: &Arc<Runtime>,
) -> Result<(), String> {
    for p in params {
        for x in [p.lo, p.hi] {
            let mut s = base.clone();
            s.overrides.push(p.setting(x));
            s.load(runtime).map_err(|e| format!("--free `{}`: {e}", p.spec()))?;
        }
    }
    let mut s = base.clone();
    for p in params {
        s.overrides.push(p.setting(p.at(0.5)));
    }
    s.load(runtime).map(|_| ()).map_err(|e| format!("--free: the parameters together: {e}"))
}

/// Check, before any run, that the fit can run on Slurm as `s` says: the
/// tasks rebuild the fit's scenario, the runs write the profile tables the
/// observations need, and the job directory is ready.
fn check_slurm(
    s: &slurm::FitSlurm,
    base: &ScenarioSource,
    params: &[FreeParam],
    obs: &[Observation],
    runtime: &Arc<Runtime>,
) -> Result<(), String> {
    s.check_source(base)?;
    if evaluate::needs_profiles(obs) {
        let mut mid = base.clone();
        for p in params {
            mid.overrides.push(p.setting(p.at(0.5)));
        }
        let scenario = mid.load(runtime).map_err(|e| e.to_string())?;
        if !scenario.plan.products.csv {
            return Err(format!(
                "--slurm: the fit reads column profiles from each run's `profiles/*.csv`, but \
                 `outputs.products` of {} has no \"csv\"; add it to the scenario, or give \
                 --set 'outputs.products=[\"netcdf\", \"csv\"]'",
                base.origin
            ));
        }
    }
    s.prepare()
}

/// Fit `params` of the scenario `base` to `obs`, writing into `out`
/// (staged; renamed when complete). `log` hears a line per evaluation.
pub fn fit(
    base: &ScenarioSource,
    params: &[FreeParam],
    obs: &[Observation],
    settings: &FitSettings,
    out: &Path,
    runtime: &Arc<Runtime>,
    log: &(dyn Fn(&str) + Sync),
) -> Result<FitResult, String> {
    let d = params.len();
    if d == 0 {
        return Err("give at least one --free KEY=LO..HI UNIT".into());
    }
    if d > 4 {
        return Err(format!("{d} free parameters; at most 4 (the design grows as 2^d)"));
    }
    if settings.seeds.is_empty() {
        return Err("give at least one seed".into());
    }
    check_free(base, params, runtime)?;
    if let Some(s) = &settings.slurm {
        check_slurm(s, base, params, obs, runtime)?;
    }
    staged(out, |dir| {
        let ev = evaluate::Evaluator::new(
            base,
            params,
            obs,
            &settings.seeds,
            settings.jobs,
            runtime,
            dir.join("work"),
        )
        .on_slurm(settings.slurm.as_ref());
        std::fs::create_dir_all(&ev.work).map_err(|e| e.to_string())?;
        let mut notes = Vec::new();
        for fam in evaluate::unknown_noise(obs, settings.seeds.len()) {
            notes.push(format!(
                "with one seed the model's Monte Carlo error of `{fam}` is not known and is taken \
                 as 0; use --seeds 2 or more"
            ));
        }
        // 1. Coarse grid at the centres of `grid` equal strata of each range.
        let g = settings.grid.max(1);
        let grid: Vec<Vec<f64>> = (0..g.pow(d as u32))
            .map(|k| {
                let mut rem = k;
                (0..d)
                    .map(|_| {
                        let i = rem % g;
                        rem /= g;
                        (i as f64 + 0.5) / g as f64
                    })
                    .collect()
            })
            .collect();
        let pts = ev.batch(&grid, "grid", log)?;
        let start = pts.iter().min_by(|a, b| a.1.total_cmp(&b.1)).map(|p| p.0.z.clone());
        let mut centre = start.unwrap_or_else(|| vec![0.5; d]);
        // The model's noise, measured once at the best grid point from the
        // fit's seeds and six more.
        if settings.seeds.len() >= 2 {
            let last = settings.seeds.iter().copied().max().unwrap_or(0);
            let extra: Vec<u64> = (1..=CALIBRATION_SEEDS).map(|k| last.wrapping_add(k)).collect();
            ev.calibrate(&centre, &extra, log)?;
        }
        let mut h = vec![0.5 / g as f64; d];
        // 2. Design rounds.
        let mut state: Option<Smooth> = None;
        let mut converged = false;
        let mut rounds = 0;
        while rounds < settings.max_rounds.max(1) {
            rounds += 1;
            ev.batch(&design(&centre, &h), &format!("design {rounds}"), log)?;
            let noise = ev.noise().unwrap_or_else(|| {
                let pts = ev.points();
                let all: Vec<&evaluate::Point> = pts.iter().collect();
                evaluate::Noise::estimate(obs, &all, settings.seeds.len())
            });
            let s = smooth(&ev.points(), obs, &centre, &h, noise)
                .ok_or("the design's evaluations do not determine a quadratic; widen the ranges")?;
            let best = &s.best;
            let on_edge = (0..d).any(|j| {
                let edge = (best[j] - s.region.lo[j]).abs() < 1e-9 * h[j].max(1e-12)
                    || (best[j] - s.region.hi[j]).abs() < 1e-9 * h[j].max(1e-12);
                edge && best[j] > 1e-9 && best[j] < 1.0 - 1e-9
            });
            let mut next_h = h.clone();
            let mut again = on_edge;
            for j in 0..d {
                let (lo, hi) = s.one_sigma[j];
                match (lo, hi) {
                    (Some(a), Some(b)) => {
                        // The design's box (+-2h) should span +-6 sigma:
                        // wide enough that each model value changes across
                        // it by several times its Monte Carlo noise (a
                        // quadratic fitted to noise-dominated points has
                        // slopes whose noise adds to the curvature of
                        // chi2 and narrows the interval), and narrow enough
                        // for a quadratic to follow the model.
                        let target = (3.0 * 0.5 * (b - a)).max(1e-4);
                        if h[j] < 0.7 * target || h[j] > 2.5 * target {
                            next_h[j] = target;
                            again = true;
                        }
                    }
                    // Open towards a bound of the range: the design already reaches it.
                    _ if (best[j] - 2.0 * h[j] <= 0.0 && lo.is_none())
                        || (best[j] + 2.0 * h[j] >= 1.0 && hi.is_none()) =>
                    {
                        if lo.is_none() && hi.is_none() {
                            next_h[j] = (2.0 * h[j]).min(0.5);
                            again = true;
                        }
                    }
                    _ => {
                        next_h[j] = (2.0 * h[j]).min(0.5);
                        again = true;
                    }
                }
                // The 2-sigma crossings must lie inside the box too, unless
                // the box already ends at the range's bound on that side.
                let (lo2, hi2) = s.two_sigma[j];
                if (lo2.is_none() && s.region.lo[j] > 0.0)
                    || (hi2.is_none() && s.region.hi[j] < 1.0)
                {
                    next_h[j] = next_h[j].max(1.5 * h[j]).min(0.5);
                    again = true;
                }
                if (best[j] - centre[j]).abs() > h[j] {
                    again = true;
                }
            }
            let done = !again;
            centre = best.clone();
            h = next_h;
            state = Some(s);
            if done {
                converged = true;
                break;
            }
        }
        let Some(s) = state else { return Err("no design round ran".into()) };
        let stopped_on_cap = !converged;
        if stopped_on_cap {
            notes.push(format!(
                "the search stopped on its cap of {} design rounds before the design matched the \
                 interval; the intervals may be inaccurate: raise --max-rounds",
                settings.max_rounds
            ));
        }
        // 3. What the surrogate says at its minimum.
        let zbest = s.best.clone();
        let to_units = |j: usize, z: Option<f64>| z.map_or(f64::NAN, |z| params[j].at(z));
        let interval_1sigma: Vec<[f64; 2]> = (0..d)
            .map(|j| [to_units(j, s.one_sigma[j].0), to_units(j, s.one_sigma[j].1)])
            .collect();
        let interval_2sigma: Vec<[f64; 2]> = (0..d)
            .map(|j| [to_units(j, s.two_sigma[j].0), to_units(j, s.two_sigma[j].1)])
            .collect();
        for (j, p) in params.iter().enumerate() {
            let open = |(a, b): (Option<f64>, Option<f64>)| a.is_none() || b.is_none();
            if open(s.one_sigma[j]) || open(s.two_sigma[j]) {
                notes.push(format!(
                    "the {} interval of `{}` is open on a side (NaN): it reaches the end of the \
                     range or of the searched region; widen the range or add observations",
                    if open(s.one_sigma[j]) { "1-sigma" } else { "2-sigma" },
                    p.key
                ));
            }
            if !(0.001..=0.999).contains(&zbest[j]) {
                notes.push(format!("`{}` is at a bound of its range", p.key));
            }
        }
        let (model, model_se) = s.model_at(&zbest);
        let chi2 = s.chi2(&zbest);
        let dof = obs.len() as i64 - d as i64;
        // 4. Keep the best-fit run (first seed) for inspection; it is made
        // here, also when the batches went to Slurm.
        let source = ev.source(&zbest, settings.seeds[0]);
        let scenario = source.load(runtime).map_err(|e| e.to_string())?;
        let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
        driver::start(scenario, source, &dir.join("best"), session).map_err(|e| e.to_string())?;
        let _ = std::fs::remove_dir_all(&ev.work);
        let (evaluations, reused, runs) = ev.finish();
        let fr = FitResult {
            parameters: params.to_vec(),
            best: (0..d).map(|j| params[j].at(zbest[j])).collect(),
            sigma: interval_1sigma.iter().map(|[a, b]| 0.5 * (b - a)).collect(),
            interval_1sigma,
            interval_2sigma,
            correlation: s.correlation.clone(),
            chi2,
            dof,
            chi2_per_dof: if dof > 0 { chi2 / dof as f64 } else { f64::NAN },
            method: METHOD.into(),
            model_noise: s.noise.describe(obs),
            stopped_on_cap,
            rounds,
            residuals: obs
                .iter()
                .zip(model.iter().zip(&model_se))
                .map(|(o, (&m, &e))| Residual {
                    observation: o.label.clone(),
                    observed: o.value,
                    uncertainty: o.sigma,
                    model: m,
                    model_error: e,
                    normalised_residual: (m - o.value) / (o.sigma * o.sigma + e * e).sqrt(),
                    unit: o.unit.clone(),
                })
                .collect(),
            evaluations,
            reused_evaluations: reused,
            runs,
            seeds: settings.seeds.clone(),
            notes,
            caution: "Model output: a scientific estimate from a Monte Carlo model, not \
                      flight-operations data."
                .into(),
        };
        write_products(dir, &fr, obs)?;
        let prov = serde_json::json!({
            "engine": "exobound",
            "engine_version": env!("CARGO_PKG_VERSION"),
            "command": "fit",
            "scenario_origin": base.origin,
            "overrides": base.overrides,
            "free": params,
            "seeds": settings.seeds,
            "best_run": "best/ holds the run at the best fit (first seed) with its own provenance",
            "runs_made": match &settings.slurm {
                Some(s) => format!(
                    "as Slurm job arrays, one per batch; scripts and logs in {}",
                    s.job_dir.display()
                ),
                None => format!("here, {} at a time", settings.jobs.max(1)),
            },
        });
        let json = serde_json::to_vec_pretty(&prov).map_err(|e| e.to_string())?;
        atomic_write(&dir.join(PROVENANCE_FILE), &json).map_err(|e| e.to_string())?;
        Ok(fr)
    })
}

/// The surrogate of one design round and what it gives.
struct Smooth {
    /// Per observation: its quadratic.
    quads: Vec<surrogate::Quadratic>,
    /// The model's noise, from the points used.
    noise: evaluate::Noise,
    /// The observations.
    obs: Vec<Observation>,
    /// The box searched.
    region: surrogate::Region,
    /// The surrogate chi2's minimum in the box.
    best: Vec<f64>,
    /// Per parameter: the Delta chi2 = 1 crossings in z.
    one_sigma: Vec<(Option<f64>, Option<f64>)>,
    /// Per parameter: the Delta chi2 = 4 crossings in z.
    two_sigma: Vec<(Option<f64>, Option<f64>)>,
    /// Correlation matrix at the minimum.
    correlation: Vec<Vec<f64>>,
}

impl Smooth {
    fn model_at(&self, z: &[f64]) -> (Vec<f64>, Vec<f64>) {
        let m: Vec<f64> = self.quads.iter().map(|q| q.at(z)).collect();
        let se = self.noise.standard_errors(m.len(), &m);
        (m, se)
    }

    fn chi2(&self, z: &[f64]) -> f64 {
        let m: Vec<f64> = self.quads.iter().map(|q| q.at(z)).collect();
        self.noise.chi_square(&self.obs, &m)
    }
}

/// Fit the surrogate to the points within the design's box around
/// `centre` (half-widths 2h), minimise it there and profile it.
fn smooth(
    points: &[evaluate::Point],
    obs: &[Observation],
    centre: &[f64],
    h: &[f64],
    noise: evaluate::Noise,
) -> Option<Smooth> {
    let d = centre.len();
    let region = surrogate::Region {
        lo: (0..d).map(|j| (centre[j] - 2.0 * h[j]).max(0.0)).collect(),
        hi: (0..d).map(|j| (centre[j] + 2.0 * h[j]).min(1.0)).collect(),
    };
    let inside: Vec<&evaluate::Point> = points
        .iter()
        .filter(|p| {
            (0..d).all(|j| p.z[j] >= region.lo[j] - 1e-12 && p.z[j] <= region.hi[j] + 1e-12)
        })
        .filter(|p| p.model.iter().all(|m| m.is_finite()))
        .collect();
    let zs: Vec<Vec<f64>> = inside.iter().map(|p| p.z.clone()).collect();
    let mut quads = Vec::with_capacity(obs.len());
    for i in 0..obs.len() {
        let y: Vec<f64> = inside.iter().map(|p| p.model[i]).collect();
        quads.push(surrogate::Quadratic::fit(&zs, &y, centre, h)?);
    }
    let mut s = Smooth {
        quads,
        noise,
        obs: obs.to_vec(),
        region,
        best: centre.to_vec(),
        one_sigma: Vec::new(),
        two_sigma: Vec::new(),
        correlation: Vec::new(),
    };
    let step: Vec<f64> = h.iter().map(|x| 0.5 * x).collect();
    let f = |z: &[f64]| s.chi2(z);
    let best = surrogate::minimise(&f, &s.region, centre, &step);
    let one: Vec<_> =
        (0..d).map(|j| surrogate::interval(&f, &s.region, &best, &step, j, 1.0)).collect();
    let two: Vec<_> =
        (0..d).map(|j| surrogate::interval(&f, &s.region, &best, &step, j, 4.0)).collect();
    let fd: Vec<f64> = h.iter().map(|x| 1e-3 * x).collect();
    let hess = surrogate::hessian(&f, &best, &fd);
    let correlation = match invert(&hess) {
        Some(c) if (0..d).all(|j| c[j][j] > 0.0) => {
            (0..d).map(|i| (0..d).map(|j| c[i][j] / (c[i][i] * c[j][j]).sqrt()).collect()).collect()
        }
        _ => vec![vec![f64::NAN; d]; d],
    };
    s.best = best;
    s.one_sigma = one;
    s.two_sigma = two;
    s.correlation = correlation;
    Some(s)
}

/// Inverse of a small symmetric matrix by Gauss-Jordan elimination with
/// partial pivoting; `None` if singular.
fn invert(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut m: Vec<Vec<f64>> = a
        .iter()
        .enumerate()
        .map(|(i, r)| {
            let mut row = r.clone();
            row.extend((0..n).map(|j| f64::from(u8::from(i == j))));
            row
        })
        .collect();
    for c in 0..n {
        let p = (c..n).max_by(|&x, &y| m[x][c].abs().total_cmp(&m[y][c].abs()))?;
        if m[p][c].abs() < 1e-300 || !m[p][c].is_finite() {
            return None;
        }
        m.swap(c, p);
        let d = m[c][c];
        m[c].iter_mut().for_each(|v| *v /= d);
        for r in 0..n {
            if r != c {
                let f = m[r][c];
                let row_c = m[c].clone();
                m[r].iter_mut().zip(&row_c).for_each(|(v, w)| *v -= f * w);
            }
        }
    }
    Some(m.into_iter().map(|r| r[n..].to_vec()).collect())
}

fn write_products(dir: &Path, r: &FitResult, obs: &[Observation]) -> Result<(), String> {
    let io = |e: std::io::Error| e.to_string();
    let json = serde_json::to_vec_pretty(r).map_err(|e| e.to_string())?;
    atomic_write(&dir.join("fit.json"), &json).map_err(io)?;
    let mut csv = String::from(
        "observation,observed,uncertainty,model,model_error,normalised_residual,unit\n",
    );
    for q in &r.residuals {
        csv.push_str(&q.observation);
        number::push_cells(
            &mut csv,
            &[q.observed, q.uncertainty, q.model, q.model_error, q.normalised_residual],
        );
        csv.push_str(&format!(",{}\n", q.unit));
    }
    atomic_write(&dir.join("residuals.csv"), csv.as_bytes()).map_err(io)?;
    let mut ev = String::new();
    for p in &r.parameters {
        ev.push_str(&if p.unit.is_empty() {
            format!("{},", p.key)
        } else {
            format!("{} [{}],", p.key, p.unit)
        });
    }
    ev.push_str("chi2,stage\n");
    for e in &r.evaluations {
        for v in &e.values {
            number::push(&mut ev, *v);
            ev.push(',');
        }
        number::push(&mut ev, e.chi2);
        ev.push_str(&format!(",{}\n", e.stage));
    }
    atomic_write(&dir.join("evaluations.csv"), ev.as_bytes()).map_err(io)?;
    let plots = dir.join("plots");
    std::fs::create_dir_all(&plots).map_err(io)?;
    let e = |x: Result<(), exobound_products::ProductError>| x.map_err(|e| e.to_string());
    let title_params: Vec<String> = r
        .parameters
        .iter()
        .zip(&r.best)
        .map(|(p, b)| {
            format!("{} = {b:.3e} {}", p.key.rsplit('.').next().unwrap_or(&p.key), p.unit)
        })
        .collect();
    for (kind, label, xl) in [
        ("equator", "equatorial column", "local time (h)"),
        ("latitude", "dayside column", "latitude (deg)"),
    ] {
        let pick: Vec<(f64, &Observation, f64)> = obs
            .iter()
            .zip(&r.residuals)
            .filter_map(|(o, res)| match (kind, &o.what) {
                ("equator", Observable::EquatorColumn(x))
                | ("latitude", Observable::LatitudeColumn(x)) => Some((*x, o, res.model)),
                _ => None,
            })
            .collect();
        if pick.is_empty() {
            continue;
        }
        e(draw_lines(
            &LinePlot {
                title: format!("Fit: {label} ({})", title_params.join(", ")),
                x_label: xl.into(),
                y_label: "column (atoms cm^-2)".into(),
                lines: vec![
                    Line {
                        label: "observed".into(),
                        x: pick.iter().map(|p| p.0).collect(),
                        y: pick.iter().map(|p| p.1.value).collect(),
                        y_err: Some(pick.iter().map(|p| p.1.sigma).collect()),
                        style: LineStyle::Points,
                    },
                    Line {
                        label: format!("best fit, chi2/dof = {:.2}", r.chi2_per_dof),
                        x: pick.iter().map(|p| p.0).collect(),
                        y: pick.iter().map(|p| p.2).collect(),
                        y_err: None,
                        style: LineStyle::Solid,
                    },
                ],
                markers: vec![],
                log_x: false,
                log_y: false,
                x_range: None,
                x_ticks: None,
            },
            &plots.join(format!("fit_{kind}.png")),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn free_parameters_parse() {
        let p =
            FreeParam::parse("processes.impact-vapor.parameters.flux=5e4..5e5 cm^-2 s^-1").unwrap();
        assert_eq!(p.unit, "cm^-2 s^-1");
        assert!(p.log);
        // Log mapping: the midpoint is the geometric mean (definition).
        assert!((p.at(0.5) / (5e4f64 * 5e5).sqrt() - 1.0).abs() < 1e-12);
        let q = FreeParam::parse("a.b=2000..5000 K").unwrap();
        assert!(!q.log && (q.at(0.5) - 3500.0).abs() < 1e-9);
        assert!(FreeParam::parse("a.b=5..1 K").is_err());
        assert!(FreeParam::parse("a.b=1 m..2 K").is_err());
        assert!(FreeParam::parse("ab=1..2").is_err());
    }

    #[test]
    fn matrix_inverse() {
        // [[2, 1], [1, 3]]^-1 = [[3, -1], [-1, 2]] / 5 (2x2 inverse formula).
        let inv = invert(&[vec![2.0, 1.0], vec![1.0, 3.0]]).unwrap();
        assert!((inv[0][0] - 0.6).abs() < 1e-15 && (inv[0][1] + 0.2).abs() < 1e-15);
        assert!(invert(&[vec![1.0, 2.0], vec![2.0, 4.0]]).is_none());
    }
}

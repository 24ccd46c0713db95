//! One evaluation of the model for a fit: runs at a parameter point, the
//! model values the observations name, and their Monte Carlo errors.
//!
//! Why this exists: a fit is only as honest as the model values it
//! compares, and a Monte Carlo model value has an error of its own. Each
//! point runs the scenario once per seed (common random numbers: the same
//! seeds at every point), in parallel (`--jobs`), and gives for each
//! observation the mean over the seeds and its standard error:
//!
//! - with two or more seeds, the standard error of the mean over seeds;
//! - with one seed, the run's own estimate where it has one: the
//!   window-to-window standard error of a column profile, the stated
//!   uncertainty of the peak shift or cos^n exponent.
//!
//! The noise of a family of observations (the equatorial profile, the
//! latitude profile, one view's slit or scan, one view's image points) has two parts, estimated from
//! every point evaluated so far ([`Noise`]): a common relative shift of
//! the whole family from seed to seed (the reservoir and the source total
//! fluctuate together), and an independent relative scatter of each value.
//! chi-square uses their covariance (rank one plus diagonal, inverted by
//! the Sherman-Morrison formula: Sherman & Morrison 1950, Ann. Math.
//! Statist. 21, 124). A point evaluated before (the same parameter values
//! to the bit) is not run again.

use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

use super::observed::{Observable, Observation};
use super::slurm::{FitSlurm, Task};
use super::{Evaluation, FreeParam};
use crate::checkpoint::ScenarioSource;
use crate::driver::{self, Outcome, Session};
use crate::output::results::{self, MEASURES, Profile};
use crate::output::summary::Summary;
use crate::runtime::Runtime;

/// Image points per view file: (observation index, (x km, y km)).
type SkyPoints<'a> = HashMap<&'a PathBuf, Vec<(usize, (f64, f64))>>;

/// The model at one parameter point.
#[derive(Clone, Debug)]
pub struct Point {
    /// The point in scaled coordinates (each parameter's range mapped to [0, 1]).
    pub z: Vec<f64>,
    /// Per observation: the model value, mean over seeds, in the observation's unit.
    pub model: Vec<f64>,
    /// Per seed, per observation: the run's value, in the observation's unit.
    pub per_seed: Vec<Vec<f64>>,
    /// Per observation: the first seed's run's own standard error (NaN where it has none).
    pub own_error: Vec<f64>,
}

/// The model's Monte Carlo noise, for the mean over the seeds of a point.
#[derive(Clone, Debug)]
pub struct Noise {
    /// Families: the observations each holds, and its noise.
    families: Vec<(Vec<usize>, FamilyNoise)>,
}

/// The noise of one family of observations.
#[derive(Clone, Debug)]
enum FamilyNoise {
    /// Relative variances of the seeds' mean: common to the family, and
    /// of each value on its own (dimensionless).
    Relative { common: f64, independent: f64 },
    /// One summary measure: the variance of the seeds' mean, in its unit squared.
    Absolute(f64),
}

impl Noise {
    /// Estimate the noise of a mean over `mean_of` seeds from `points`
    /// (pooled over them): from the seed-to-seed scatter of points run with
    /// two or more seeds, else from the runs' own errors (independent part
    /// only; the common part is then unknown, 0).
    pub fn estimate(obs: &[Observation], points: &[&Point], mean_of: usize) -> Noise {
        let mut names: Vec<String> = obs.iter().map(|o| o.what.family()).collect();
        names.sort();
        names.dedup();
        let families = names
            .into_iter()
            .map(|name| {
                let members: Vec<usize> =
                    (0..obs.len()).filter(|&i| obs[i].what.family() == name).collect();
                let noise = if matches!(obs[members[0]].what, Observable::Summary(_)) {
                    FamilyNoise::Absolute(summary_variance(members[0], points, mean_of))
                } else {
                    relative_noise(&members, points, mean_of)
                };
                (members, noise)
            })
            .collect();
        Noise { families }
    }

    /// A line per family: its relative standard errors (common, independent)
    /// or its absolute one, for logs and fit.json.
    pub fn describe(&self, obs: &[Observation]) -> String {
        let parts: Vec<String> = self
            .families
            .iter()
            .map(|(m, n)| match n {
                FamilyNoise::Relative { common, independent } => format!(
                    "{}: {:.2} % common, {:.2} % each",
                    obs[m[0]].what.family(),
                    100.0 * common.sqrt(),
                    100.0 * independent.sqrt()
                ),
                FamilyNoise::Absolute(v) => {
                    format!("{}: {:.3e} {}", obs[m[0]].what.family(), v.sqrt(), obs[m[0]].unit)
                }
            })
            .collect();
        parts.join("; ")
    }

    /// Standard error of each model value in `model`, in its unit (the
    /// common and independent parts together).
    pub fn standard_errors(&self, k: usize, model: &[f64]) -> Vec<f64> {
        let mut se = vec![0.0; k];
        for (members, n) in &self.families {
            for &i in members {
                se[i] = match n {
                    FamilyNoise::Relative { common, independent } => {
                        ((common + independent) * model[i] * model[i]).sqrt()
                    }
                    FamilyNoise::Absolute(v) => v.sqrt(),
                };
            }
        }
        se
    }

    /// chi-square of `model` against `obs` with the observation variances
    /// and this noise's covariance.
    pub fn chi_square(&self, obs: &[Observation], model: &[f64]) -> f64 {
        if model.iter().any(|m| !m.is_finite()) {
            return f64::INFINITY;
        }
        let mut total = 0.0;
        for (members, n) in &self.families {
            match n {
                FamilyNoise::Absolute(v) => {
                    for &i in members {
                        total += (model[i] - obs[i].value).powi(2) / (obs[i].sigma.powi(2) + v);
                    }
                }
                FamilyNoise::Relative { common, independent } => {
                    // Sigma = D + common m m^T, D = diag(sigma_i^2 + independent m_i^2):
                    // r^T Sigma^-1 r = sum r^2/D - common (sum r m/D)^2 / (1 + common sum m^2/D).
                    let (mut a, mut b, mut c) = (0.0, 0.0, 0.0);
                    for &i in members {
                        let (m, r) = (model[i], model[i] - obs[i].value);
                        let d = obs[i].sigma.powi(2) + independent * m * m;
                        a += r * r / d;
                        b += r * m / d;
                        c += m * m / d;
                    }
                    total += a - common * b * b / (1.0 + common * c);
                }
            }
        }
        total
    }
}

/// The variance of a mean over `mean_of` seeds of summary measure `i`,
/// pooled over `points`.
fn summary_variance(i: usize, points: &[&Point], mean_of: usize) -> f64 {
    let mut acc = Vec::new();
    for p in points {
        let n = p.per_seed.len();
        if n >= 2 {
            let mean = p.per_seed.iter().map(|s| s[i]).sum::<f64>() / n as f64;
            let v = p.per_seed.iter().map(|s| (s[i] - mean).powi(2)).sum::<f64>() / (n - 1) as f64;
            acc.push(v / mean_of.max(1) as f64);
        } else if p.own_error[i].is_finite() {
            acc.push(p.own_error[i].powi(2));
        }
    }
    let v = acc.iter().filter(|v| v.is_finite()).sum::<f64>() / acc.len().max(1) as f64;
    if v.is_finite() { v } else { 0.0 }
}

/// Common and independent relative variances of a mean over `mean_of`
/// seeds of a family, pooled over `points` (method of moments: the
/// variance of the family-mean relative deviation is common + independent / k).
fn relative_noise(members: &[usize], points: &[&Point], mean_of: usize) -> FamilyNoise {
    let k = members.len() as f64;
    let (mut common, mut independent, mut used) = (0.0, 0.0, 0usize);
    let (mut own, mut own_n) = (0.0, 0usize);
    for p in points {
        let n = p.per_seed.len();
        let ok = |i: usize| p.model[i].is_finite() && p.model[i] != 0.0;
        if n >= 2 && members.iter().all(|&i| ok(i)) {
            // Relative deviations of each seed from the point's mean.
            let rel: Vec<Vec<f64>> = p
                .per_seed
                .iter()
                .map(|s| members.iter().map(|&i| s[i] / p.model[i] - 1.0).collect())
                .collect();
            let centre: Vec<f64> = rel.iter().map(|r| r.iter().sum::<f64>() / k).collect();
            // Per seed (sample) variances, unbiased over the n seeds.
            let var_centre = centre.iter().map(|c| c * c).sum::<f64>() / (n - 1) as f64;
            let var_each = if members.len() >= 2 {
                rel.iter()
                    .zip(&centre)
                    .map(|(r, c)| r.iter().map(|x| (x - c).powi(2)).sum::<f64>())
                    .sum::<f64>()
                    / ((n - 1) as f64 * (k - 1.0))
            } else {
                var_centre
            };
            let c = if members.len() >= 2 { (var_centre - var_each / k).max(0.0) } else { 0.0 };
            common += c / mean_of.max(1) as f64;
            independent += var_each / mean_of.max(1) as f64;
            used += 1;
        } else {
            for &i in members {
                if ok(i) && p.own_error[i].is_finite() {
                    own += (p.own_error[i] / p.model[i]).powi(2);
                    own_n += 1;
                }
            }
        }
    }
    if used > 0 {
        FamilyNoise::Relative {
            common: common / used as f64,
            independent: independent / used as f64,
        }
    } else {
        FamilyNoise::Relative {
            common: 0.0,
            independent: if own_n > 0 { own / own_n as f64 } else { 0.0 },
        }
    }
}

/// One run's value of each observation, in its unit, and the run's own
/// standard error of it (NaN where it has none).
type RunValues = (Vec<f64>, Vec<f64>);

/// What a run gives a fit: its summary and its two column profiles.
struct RunView<'r> {
    summary: &'r Summary,
    equator: &'r Profile,
    latitude: &'r Profile,
}

/// One run's values for the observations, and its own error estimates
/// (NaN where it has none).
fn run_values(r: RunView, dir: &std::path::Path, obs: &[Observation]) -> Result<RunValues, String> {
    let mut views: HashMap<&PathBuf, Vec<(f64, f64)>> = HashMap::new();
    // Image points: each view's points computed together, from one density field.
    let mut sky: SkyPoints = HashMap::new();
    for (i, o) in obs.iter().enumerate() {
        if let Observable::ImagePoint(v, x, y) = &o.what {
            sky.entry(v).or_default().push((i, (*x, *y)));
        }
    }
    let mut image = vec![f64::NAN; obs.len()];
    for (view, pts) in &sky {
        let xy: Vec<(f64, f64)> = pts.iter().map(|p| p.1).collect();
        let b = crate::observe::sky_brightness(dir, view, &xy)
            .map_err(|e| format!("image points through `{}`: {e}", view.display()))?;
        for ((i, _), v) in pts.iter().zip(b) {
            image[*i] = v;
        }
    }
    let mut values = Vec::with_capacity(obs.len());
    let mut errors = Vec::with_capacity(obs.len());
    for (i, o) in obs.iter().enumerate() {
        let (v, e) = match &o.what {
            Observable::EquatorColumn(lt) => {
                (r.equator.at(*lt, Some(24.0)), r.equator.error_at(*lt, Some(24.0)))
            }
            Observable::LatitudeColumn(l) => {
                (r.latitude.at(*l, None), r.latitude.error_at(*l, None))
            }
            Observable::Summary(m) => {
                let s = r.summary;
                let e = match MEASURES[*m].name {
                    "equatorial_peak_shift" => s.equatorial_column_peak.uncertainty_deg,
                    "latitude_cos_power_n" => s.latitude_profile_fit.uncertainty,
                    _ => f64::NAN,
                };
                ((MEASURES[*m].of)(s), e)
            }
            Observable::Brightness(view, alt) => {
                if !views.contains_key(view) {
                    let samples = crate::observe::view_samples(dir, view)
                        .map_err(|e| format!("brightness through `{}`: {e}", view.display()))?;
                    let p: Vec<(f64, f64)> = samples
                        .iter()
                        .filter(|s| s.altitude_km.is_finite())
                        .map(|s| (s.altitude_km, s.brightness_r))
                        .collect();
                    views.insert(view, p);
                }
                let p = &views[view];
                let prof = crate::output::results::Profile {
                    coordinate: p.iter().map(|q| q.0).collect(),
                    column: p.iter().map(|q| q.1).collect(),
                    error: vec![f64::NAN; p.len()],
                };
                if prof.coordinate.windows(2).any(|w| w[1] <= w[0]) {
                    return Err(format!(
                        "the view `{}` does not sample altitudes in increasing order; a fit needs a \
                         slit or scan whose altitudes increase",
                        view.display()
                    ));
                }
                (prof.at(*alt, None), f64::NAN)
            }
            Observable::ImagePoint(..) => (image[i], f64::NAN),
        };
        values.push(v);
        errors.push(e);
    }
    Ok((values, errors))
}

/// One run's values read back from its finished output directory:
/// `summary.json`, and the profile tables (`profiles/*.csv`) when an
/// observation is a column profile. The files hold the numbers the run
/// computed, bit for bit (shortest round-trip text), so this gives what
/// [`run_values`] gives for the same run in memory.
fn read_run(dir: &Path, obs: &[Observation]) -> Result<RunValues, String> {
    let summary = Summary::read(&dir.join("summary.json"))?;
    let wants = |f: fn(&Observable) -> bool| obs.iter().any(|o| f(&o.what));
    let equator = if wants(|w| matches!(w, Observable::EquatorColumn(_))) {
        results::read_profile(&dir.join(results::EQUATOR_FILE), "local_time_h")?
    } else {
        Profile::default()
    };
    let latitude = if wants(|w| matches!(w, Observable::LatitudeColumn(_))) {
        results::read_profile(&dir.join(results::LATITUDE_FILE), "latitude_deg")?
    } else {
        Profile::default()
    };
    run_values(RunView { summary: &summary, equator: &equator, latitude: &latitude }, dir, obs)
}

/// Whether the observations include a column profile, which a run
/// elsewhere hands back only through its CSV tables (`outputs.products`
/// must hold `csv`).
pub fn needs_profiles(obs: &[Observation]) -> bool {
    obs.iter()
        .any(|o| matches!(o.what, Observable::EquatorColumn(_) | Observable::LatitudeColumn(_)))
}

/// Which families have no estimate of the model's noise with these seeds.
pub fn unknown_noise(obs: &[Observation], seeds: usize) -> Vec<String> {
    if seeds >= 2 {
        return Vec::new();
    }
    let mut out: Vec<String> = obs
        .iter()
        .filter(|o| match &o.what {
            Observable::Brightness(..) | Observable::ImagePoint(..) => true,
            Observable::Summary(m) => {
                !matches!(MEASURES[*m].name, "equatorial_peak_shift" | "latitude_cos_power_n")
            }
            _ => false,
        })
        .map(|o| o.what.family())
        .collect();
    out.sort();
    out.dedup();
    out
}

/// Points per unit of a scaled coordinate on which evaluations are made.
const LATTICE: f64 = (1u64 << 30) as f64;

/// The evaluations of a fit so far, in order, and the points by their bits.
#[derive(Default)]
struct Record {
    /// Ordered by the bits of z (a map whose order is fixed: the noise and
    /// the surrogate sum over these points, and a sum's last bits depend on
    /// its order, so a hashed order would change them from one process to
    /// the next).
    points: BTreeMap<Vec<u64>, Point>,
    evaluations: Vec<Evaluation>,
    reused: usize,
    runs: usize,
    /// Batches sent to Slurm so far.
    batches: usize,
}

/// Runs the scenario at parameter points and remembers the answers.
pub struct Evaluator<'a> {
    /// The scenario every point starts from.
    pub base: &'a ScenarioSource,
    /// The free parameters.
    pub params: &'a [FreeParam],
    /// The observations.
    pub obs: &'a [Observation],
    /// Seeds of every point.
    pub seeds: &'a [u64],
    /// Runs at once.
    pub jobs: usize,
    /// The runtime shared by every run.
    pub runtime: &'a Arc<Runtime>,
    /// Scratch directory for the runs.
    pub work: PathBuf,
    /// Where the runs go as Slurm job arrays, one per batch; `None` to run
    /// them here.
    slurm: Option<&'a FitSlurm>,
    record: Mutex<Record>,
    /// The noise measured by [`Evaluator::calibrate`], once it has run.
    noise: Mutex<Option<Noise>>,
}

impl<'a> Evaluator<'a> {
    /// An evaluator with nothing evaluated yet.
    pub fn new(
        base: &'a ScenarioSource,
        params: &'a [FreeParam],
        obs: &'a [Observation],
        seeds: &'a [u64],
        jobs: usize,
        runtime: &'a Arc<Runtime>,
        work: PathBuf,
    ) -> Evaluator<'a> {
        Evaluator {
            base,
            params,
            obs,
            seeds,
            jobs: jobs.max(1),
            runtime,
            work,
            slurm: None,
            record: Mutex::default(),
            noise: Mutex::default(),
        }
    }

    /// Run every batch on Slurm as `slurm` says (`None`: here, `jobs` at a time).
    pub fn on_slurm(mut self, slurm: Option<&'a FitSlurm>) -> Evaluator<'a> {
        self.slurm = slurm;
        self
    }

    /// The scenario at `z` with `seed`. With more than one job at a time
    /// here, each run gets its share of the cores (results do not depend
    /// on it; a Slurm task's run gets its task's CPUs instead).
    pub fn source(&self, z: &[f64], seed: u64) -> ScenarioSource {
        let mut s = self.base.clone();
        for (p, &zi) in self.params.iter().zip(z) {
            s.overrides.push(p.setting(p.at(zi)));
        }
        s.overrides.push(format!("run.seed={seed}"));
        if self.slurm.is_none() && self.jobs > 1 {
            let cores = std::thread::available_parallelism().map_or(1, |n| n.get());
            s.overrides.push(format!("run.threads={}", (cores / self.jobs).max(1)));
        }
        s
    }

    /// Evaluate every point of `zs` (clamped into [0, 1]), running the ones
    /// not evaluated before, `jobs` runs at a time. `log` hears a line per
    /// finished point.
    pub fn batch(
        &self,
        zs: &[Vec<f64>],
        stage: &str,
        log: &(dyn Fn(&str) + Sync),
    ) -> Result<Vec<(Point, f64)>, String> {
        let key = |z: &[f64]| -> Vec<u64> { z.iter().map(|v| v.to_bits()).collect() };
        // On a lattice of 2^-30 of each range, so that a point reached twice
        // by different arithmetic (c + h - h) is one point.
        let snap = |v: f64| (v.clamp(0.0, 1.0) * LATTICE).round() / LATTICE;
        let zs: Vec<Vec<f64>> = zs.iter().map(|z| z.iter().map(|&v| snap(v)).collect()).collect();
        // The points to run, once each, in order.
        let mut todo: Vec<Vec<f64>> = Vec::new();
        {
            let mut rec = self.record.lock().map_err(|_| "a fit worker failed")?;
            for z in &zs {
                if rec.points.contains_key(&key(z)) || todo.contains(z) {
                    rec.reused += 1;
                } else {
                    todo.push(z.clone());
                }
            }
        }
        let runs: Vec<(Vec<f64>, u64)> =
            todo.iter().flat_map(|z| self.seeds.iter().map(move |&s| (z.clone(), s))).collect();
        let mut done = self.run_all(&runs, stage, log)?.into_iter();
        let per_point: Vec<Vec<RunValues>> =
            todo.iter().map(|_| done.by_ref().take(self.seeds.len()).collect()).collect();
        let mut rec = self.record.lock().map_err(|_| "a fit worker failed")?;
        rec.runs += runs.len();
        let k = self.obs.len();
        for (z, per_seed) in todo.iter().zip(&per_point) {
            let n = per_seed.len() as f64;
            let model: Vec<f64> =
                (0..k).map(|i| per_seed.iter().map(|s| s.0[i]).sum::<f64>() / n).collect();
            let point = Point {
                z: z.clone(),
                model,
                per_seed: per_seed.iter().map(|s| s.0.clone()).collect(),
                own_error: per_seed[0].1.clone(),
            };
            rec.points.insert(key(z), point);
        }
        // chi-square with the measured noise, or as known from every point so far.
        let noise = self.noise();
        let noise = noise.unwrap_or_else(|| {
            let all: Vec<&Point> = rec.points.values().collect();
            Noise::estimate(self.obs, &all, self.seeds.len())
        });
        let mut lines = Vec::new();
        for z in &todo {
            let chi2 = noise.chi_square(self.obs, &rec.points[&key(z)].model);
            let values: Vec<f64> = self.params.iter().zip(z).map(|(p, &zi)| p.at(zi)).collect();
            lines.push(format!(
                "evaluation {} ({stage}): {}: chi2 = {chi2:.3} ({} run(s))",
                rec.evaluations.len() + 1,
                self.describe(z),
                self.seeds.len()
            ));
            rec.evaluations.push(Evaluation { values, chi2, stage: stage.to_string() });
        }
        let out = zs
            .iter()
            .map(|z| {
                let p = rec.points[&key(z)].clone();
                let chi2 = noise.chi_square(self.obs, &p.model);
                (p, chi2)
            })
            .collect();
        drop(rec);
        for l in &lines {
            log(l);
        }
        Ok(out)
    }

    /// The parameter values at `z`, in their units, for log lines and messages.
    fn describe(&self, z: &[f64]) -> String {
        let shown: Vec<String> = self
            .params
            .iter()
            .zip(z)
            .map(|(p, &zi)| {
                let gap = if p.unit.is_empty() { "" } else { " " };
                format!("{} = {:.5e}{gap}{}", short(&p.key), p.at(zi), p.unit)
            })
            .collect();
        shown.join(", ")
    }

    /// Run every (point, seed) of `runs` for `stage`, `jobs` at a time, or
    /// as one Slurm job array; the answers in order.
    fn run_all(
        &self,
        runs: &[(Vec<f64>, u64)],
        stage: &str,
        log: &(dyn Fn(&str) + Sync),
    ) -> Result<Vec<RunValues>, String> {
        if let Some(slurm) = self.slurm {
            return self.run_on_slurm(slurm, runs, stage, log);
        }
        let results: Vec<Mutex<Option<Result<RunValues, String>>>> =
            runs.iter().map(|_| Mutex::new(None)).collect();
        let next = AtomicUsize::new(0);
        let failed = AtomicBool::new(false);
        let first = self.record.lock().map(|r| r.runs).unwrap_or(0);
        std::thread::scope(|scope| {
            for _ in 0..self.jobs.min(runs.len()) {
                scope.spawn(|| {
                    loop {
                        let k = next.fetch_add(1, Ordering::SeqCst);
                        if k >= runs.len() || failed.load(Ordering::SeqCst) {
                            break;
                        }
                        let (z, seed) = &runs[k];
                        let r = self.run(z, *seed, first + k);
                        if r.is_err() {
                            failed.store(true, Ordering::SeqCst);
                        }
                        if let Ok(mut slot) = results[k].lock() {
                            *slot = Some(r);
                        }
                    }
                });
            }
        });
        results
            .into_iter()
            .map(|slot| match slot.into_inner().map_err(|_| "a fit worker failed")? {
                Some(r) => r,
                None => Err("a fit run did not finish".into()),
            })
            .collect()
    }

    /// Run `runs` as one Slurm job array (one task per run, each the
    /// `exobound run` of [`Evaluator::source`] on the task's CPUs), wait
    /// for it, and read every run's directory as [`read_run`] does; then
    /// remove the runs.
    fn run_on_slurm(
        &self,
        slurm: &FitSlurm,
        runs: &[(Vec<f64>, u64)],
        stage: &str,
        log: &(dyn Fn(&str) + Sync),
    ) -> Result<Vec<RunValues>, String> {
        if runs.is_empty() {
            return Ok(Vec::new());
        }
        slurm.check_source(self.base)?;
        let number = {
            let mut rec = self.record.lock().map_err(|_| "a fit worker failed")?;
            rec.batches += 1;
            rec.batches
        };
        let tasks: Vec<Task> = runs
            .iter()
            .map(|(z, seed)| {
                let mut overrides = self.source(z, *seed).overrides;
                overrides.push(format!("run.threads={}", slurm.options.cpus_per_task.max(1)));
                Task { overrides, point: self.describe(z), seed: *seed }
            })
            .collect();
        let batch = slurm.write_batch(number, stage, &tasks)?;
        log(&format!(
            "batch {number} ({stage}): {} run(s) as a Slurm job array, `{}`; waiting for it",
            tasks.len(),
            batch.script().display()
        ));
        slurm.run(&batch)?;
        let mut out = Vec::with_capacity(runs.len());
        for k in 0..tasks.len() {
            let dir = batch.run_dir(k);
            let values = read_run(&dir, self.obs).map_err(|e| {
                format!(
                    "batch {number} ({stage}): the run of a task cannot be read:\n{}\nThe fit \
                     stopped and wrote no output.",
                    batch.describe_failure(k, &e)
                )
            })?;
            out.push(values);
        }
        batch.remove_runs()?;
        Ok(out)
    }

    /// Measure the model's noise at `z` (a point already evaluated) from
    /// its seeds and `extra` seeds more, and use it from now on: with the
    /// fit's own few seeds alone, the common part of the noise would rest
    /// on one or two differences.
    pub fn calibrate(
        &self,
        z: &[f64],
        extra: &[u64],
        log: &(dyn Fn(&str) + Sync),
    ) -> Result<(), String> {
        let key: Vec<u64> = z.iter().map(|v| v.to_bits()).collect();
        let point = self
            .record
            .lock()
            .map_err(|_| "a fit worker failed")?
            .points
            .get(&key)
            .cloned()
            .ok_or("calibrate: the point was not evaluated")?;
        let runs: Vec<(Vec<f64>, u64)> = extra.iter().map(|&s| (z.to_vec(), s)).collect();
        let more = self.run_all(&runs, "noise calibration", log)?;
        let mut per_seed = point.per_seed.clone();
        per_seed.extend(more.into_iter().map(|m| m.0));
        let n = per_seed.len() as f64;
        let model =
            (0..self.obs.len()).map(|i| per_seed.iter().map(|s| s[i]).sum::<f64>() / n).collect();
        let all = Point { z: z.to_vec(), model, per_seed, own_error: point.own_error.clone() };
        let noise = Noise::estimate(self.obs, &[&all], self.seeds.len());
        if let Ok(mut r) = self.record.lock() {
            r.runs += extra.len();
        }
        log(&format!(
            "noise: measured from {} seeds at the best grid point; per observation family: {}",
            all.per_seed.len(),
            noise.describe(self.obs)
        ));
        *self.noise.lock().map_err(|_| "a fit worker failed")? = Some(noise);
        Ok(())
    }

    /// The noise measured by [`Evaluator::calibrate`], if it has run.
    pub fn noise(&self) -> Option<Noise> {
        self.noise.lock().ok().and_then(|n| n.clone())
    }

    /// One run at `z` with `seed`, into its own scratch directory.
    fn run(&self, z: &[f64], seed: u64, k: usize) -> Result<RunValues, String> {
        let source = self.source(z, seed);
        let scenario = source.load(self.runtime).map_err(|e| e.to_string())?;
        let dir = self.work.join(format!("run-{k}-seed-{seed}"));
        let _ = std::fs::remove_dir_all(&dir);
        let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
        let out = match driver::start(scenario, source, &dir, session).map_err(|e| e.to_string())? {
            Outcome::Finished { result, .. } => {
                let view = RunView {
                    summary: &result.summary,
                    equator: &result.equator,
                    latitude: &result.latitude,
                };
                run_values(view, &dir, self.obs)
            }
            Outcome::Interrupted { .. } => Err("interrupted".into()),
        };
        let _ = std::fs::remove_dir_all(&dir);
        out
    }

    /// Every point evaluated so far, in a fixed order (by the bits of z).
    pub fn points(&self) -> Vec<Point> {
        self.record.lock().map(|r| r.points.values().cloned().collect()).unwrap_or_default()
    }

    /// (evaluations in order, points asked for again, runs made).
    pub fn finish(self) -> (Vec<Evaluation>, usize, usize) {
        let r = self.record.into_inner().unwrap_or_default();
        (r.evaluations, r.reused, r.runs)
    }
}

/// The last part of a dotted key, for log lines.
fn short(key: &str) -> &str {
    key.rsplit('.').next().unwrap_or(key)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn obs(what: Observable, value: f64, sigma: f64) -> Observation {
        Observation { what, value, sigma, unit: "cm^-2".into(), label: String::new() }
    }

    fn point(per_seed: Vec<Vec<f64>>, own: Vec<f64>) -> Point {
        let n = per_seed.len() as f64;
        let k = per_seed[0].len();
        let model = (0..k).map(|i| per_seed.iter().map(|s| s[i]).sum::<f64>() / n).collect();
        Point { z: vec![0.5], model, per_seed, own_error: own }
    }

    #[test]
    fn independent_noise_adds_to_the_observation_variance() {
        let o = [obs(Observable::EquatorColumn(10.0), 10.0, 3.0)];
        // One seed whose own error is 4 (relative 4/14): (14 - 10)^2 / (3^2 + 4^2) = 16 / 25.
        let p = point(vec![vec![14.0]], vec![4.0]);
        let noise = Noise::estimate(&o, &[&p], 1);
        assert!((noise.chi_square(&o, &[14.0]) - 0.64).abs() < 1e-12);
        assert!((noise.standard_errors(1, &[14.0])[0] - 4.0).abs() < 1e-12);
        assert_eq!(noise.chi_square(&o, &[f64::NAN]), f64::INFINITY);
    }

    #[test]
    fn a_common_shift_is_told_apart_from_independent_scatter() {
        // Three observations of one family; four seeds that shift the whole
        // family by +-2 % together (no independent scatter).
        let o: Vec<Observation> =
            (0..3).map(|k| obs(Observable::EquatorColumn(k as f64), 100.0, 1.0)).collect();
        let seeds: Vec<Vec<f64>> =
            [1.02, 0.98, 1.02, 0.98].iter().map(|f| vec![100.0 * f; 3]).collect();
        let noise = Noise::estimate(&o, &[&point(seeds, vec![f64::NAN; 3])], 4);
        match &noise.families[0].1 {
            FamilyNoise::Relative { common, independent } => {
                // Sample variance of (+-0.02) over 4 seeds: 4 x 0.0004 / 3;
                // for the mean of 4 seeds: / 4.
                assert!((common - 0.0004 / 3.0).abs() < 1e-15, "{common}");
                assert!(independent.abs() < 1e-15);
            }
            FamilyNoise::Absolute(_) => panic!("a profile family"),
        }
        // A model 1 % high everywhere: with the common variance v = 0.0004/3
        // and unit observation errors, chi2 = r^T (I + v m m^T)^-1 r with
        // r = (1, 1, 1), m = (101, 101, 101): 3 - v 303^2 / (1 + v 3 x 101^2)
        // (Sherman & Morrison 1950).
        let v: f64 = 0.0004 / 3.0;
        let want = 3.0 - v * 303.0f64.powi(2) / (1.0 + v * 3.0 * 101.0f64.powi(2));
        let got = noise.chi_square(&o, &[101.0, 101.0, 101.0]);
        assert!((got - want).abs() < 1e-9, "{got} vs {want}");
        // Far smaller than the 3 that independent errors alone would give.
        assert!(got < 1.0);
    }
}

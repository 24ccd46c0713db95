//! Fitting poorly constrained parameters to observations.
//!
//! Why this exists: the impact vaporization rate, the vapour temperature,
//! the PSD cross-section, the sputtering yield and the diffusion
//! enhancement are tuned to what was observed. `exobound fit` minimises
//! chi-square = sum ((model - observed) / sigma)^2 over the free
//! parameters. Every evaluation runs the scenario with the same seeds
//! (common random numbers), so chi-square is a smooth-enough function of
//! the parameters for a derivative-free optimiser: a coarse grid picks the
//! start, Nelder-Mead (the `argmin` crate) refines it, and the curvature of
//! chi-square at the best fit gives the uncertainty (covariance =
//! 2 H^-1, the Delta chi^2 = 1 rule for Gaussian errors).

pub mod observed;

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::AtomicBool;

use argmin::core::{CostFunction, Executor, State};
use argmin::solver::neldermead::NelderMead;
use exobound_products::{Line, LinePlot, LineStyle, draw_lines};
use serde::Serialize;

use crate::checkpoint::ScenarioSource;
use crate::driver::{self, Outcome, Session};
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

    /// The override for value `x`.
    fn setting(&self, x: f64) -> String {
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
    /// Coarse-grid points per free parameter before Nelder-Mead.
    pub grid: usize,
    /// Nelder-Mead iterations at most.
    pub max_iterations: u64,
    /// Step of the finite-difference curvature, as a fraction of each range.
    pub curvature_step: f64,
}

impl Default for FitSettings {
    fn default() -> Self {
        FitSettings { seeds: vec![1], grid: 3, max_iterations: 40, curvature_step: 0.05 }
    }
}

/// One evaluation of chi-square.
#[derive(Clone, Debug, Serialize)]
pub struct Evaluation {
    /// Parameter values, in their units.
    pub values: Vec<f64>,
    /// chi-square, dimensionless.
    pub chi2: f64,
    /// Where it came from: "grid", "simplex" or "curvature".
    pub stage: String,
}

/// The result of a fit.
#[derive(Clone, Debug, Serialize)]
pub struct FitResult {
    /// The free parameters.
    pub parameters: Vec<FreeParam>,
    /// Best-fit values, in their units.
    pub best: Vec<f64>,
    /// 1-sigma uncertainties from the curvature, in their units (NaN if
    /// the curvature is not positive definite there).
    pub sigma: Vec<f64>,
    /// chi-square at the best fit.
    pub chi2: f64,
    /// Degrees of freedom: observations - free parameters.
    pub dof: i64,
    /// chi-square per degree of freedom.
    pub chi2_per_dof: f64,
    /// Per observation: observed, sigma, model at the best fit.
    pub residuals: Vec<(String, f64, f64, f64, String)>,
    /// Every evaluation, in order.
    pub evaluations: Vec<Evaluation>,
    /// Seeds used.
    pub seeds: Vec<u64>,
    /// Notes on the result (e.g. a best fit on a bound).
    pub notes: Vec<String>,
    /// A reminder of what the numbers are.
    pub caution: String,
}

/// The model's values for the observations, from a run directory.
fn model_values(dir: &Path, obs: &[Observation]) -> Result<Vec<f64>, String> {
    let eq = crate::compare::read_profile(&dir.join("profiles/equator_local_time.csv"))?;
    let lat = crate::compare::read_profile(&dir.join("profiles/latitude.csv"))?;
    let s = dir.join("summary.json");
    let text = std::fs::read_to_string(&s).map_err(|e| format!("`{}`: {e}", s.display()))?;
    let summary: serde_json::Value = serde_json::from_str(&text).map_err(|e| e.to_string())?;
    let measures = crate::compare::measures_of(&summary);
    Ok(obs
        .iter()
        .map(|o| match o.what {
            Observable::EquatorColumn(lt) => interpolate(&eq, lt, Some(24.0)),
            Observable::LatitudeColumn(l) => interpolate(&lat, l, None),
            Observable::Summary(m) => measures[m],
        })
        .collect())
}

/// Linear interpolation in a profile of (bin centre, value); `period`
/// wraps the coordinate (local time), otherwise the ends are held.
fn interpolate(p: &[(f64, f64)], x: f64, period: Option<f64>) -> f64 {
    if p.is_empty() {
        return f64::NAN;
    }
    let n = p.len();
    let k = p.partition_point(|q| q.0 <= x);
    let (a, b) = match (k, period) {
        (0, Some(t)) => ((p[n - 1].0 - t, p[n - 1].1), p[0]),
        (0, None) => return p[0].1,
        (k, Some(t)) if k == n => (p[n - 1], (p[0].0 + t, p[0].1)),
        (k, None) if k == n => return p[n - 1].1,
        (k, _) => (p[k - 1], p[k]),
    };
    let f = (x - a.0) / (b.0 - a.0);
    a.1 + f * (b.1 - a.1)
}

/// chi-square of `model` against `obs`.
pub fn chi_square(obs: &[Observation], model: &[f64]) -> f64 {
    obs.iter()
        .zip(model)
        .map(|(o, m)| if m.is_finite() { ((m - o.value) / o.sigma).powi(2) } else { f64::INFINITY })
        .sum()
}

/// Evaluations by parameter vector (bits of z), the ordered record, and
/// the current stage's name.
type EvalCache = (HashMap<Vec<u64>, (f64, Vec<f64>)>, Vec<Evaluation>, String);

/// Runs the scenario at a parameter vector and remembers the answers.
struct Evaluator<'a> {
    base: &'a ScenarioSource,
    params: &'a [FreeParam],
    obs: &'a [Observation],
    seeds: &'a [u64],
    runtime: &'a Arc<Runtime>,
    work: PathBuf,
    cache: std::sync::Mutex<EvalCache>,
}

impl Evaluator<'_> {
    fn source(&self, z: &[f64], seed: u64) -> ScenarioSource {
        let mut s = self.base.clone();
        for (p, &zi) in self.params.iter().zip(z) {
            s.overrides.push(p.setting(p.at(zi)));
        }
        s.overrides.push(format!("run.seed={seed}"));
        s
    }

    /// chi-square and the model values (mean over seeds) at `z`.
    fn eval(&self, z: &[f64]) -> Result<(f64, Vec<f64>), String> {
        let key: Vec<u64> = z.iter().map(|v| v.clamp(0.0, 1.0).to_bits()).collect();
        if let Some(hit) = self.cache.lock().map_err(|_| "poisoned")?.0.get(&key) {
            return Ok(hit.clone());
        }
        let zc: Vec<f64> = z.iter().map(|v| v.clamp(0.0, 1.0)).collect();
        let mut sum = vec![0.0; self.obs.len()];
        for &seed in self.seeds {
            let source = self.source(&zc, seed);
            let scenario = source.load(self.runtime).map_err(|e| e.to_string())?;
            let dir = self.work.join(format!("eval-seed-{seed}"));
            let _ = std::fs::remove_dir_all(&dir);
            let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
            match driver::start(scenario, source, &dir, session).map_err(|e| e.to_string())? {
                Outcome::Finished { .. } => {}
                Outcome::Interrupted { .. } => return Err("interrupted".into()),
            }
            let m = model_values(&dir, self.obs)?;
            let _ = std::fs::remove_dir_all(&dir);
            for (s, v) in sum.iter_mut().zip(m) {
                *s += v / self.seeds.len() as f64;
            }
        }
        let chi2 = chi_square(self.obs, &sum);
        let mut c = self.cache.lock().map_err(|_| "poisoned")?;
        let stage = c.2.clone();
        c.1.push(Evaluation {
            values: self.params.iter().zip(&zc).map(|(p, &zi)| p.at(zi)).collect(),
            chi2,
            stage,
        });
        c.0.insert(key, (chi2, sum.clone()));
        Ok((chi2, sum))
    }

    fn stage(&self, s: &str) {
        if let Ok(mut c) = self.cache.lock() {
            c.2 = s.to_string();
        }
    }
}

/// The cost function handed to Nelder-Mead: chi-square, with a quadratic
/// penalty outside the unit box (where the parameters are held at the bound).
struct Cost<'a, 'b>(&'b Evaluator<'a>);

impl CostFunction for Cost<'_, '_> {
    type Param = Vec<f64>;
    type Output = f64;
    fn cost(&self, z: &Self::Param) -> Result<f64, argmin::core::Error> {
        let out: f64 = z.iter().map(|v| (v - v.clamp(0.0, 1.0)).powi(2)).sum();
        let (chi2, _) = self.0.eval(z).map_err(argmin::core::Error::msg)?;
        Ok(chi2 + 1e6 * out)
    }
}

/// Fit `params` of the scenario `base` to `obs`, writing into `out`
/// (staged; renamed when complete). `log` hears progress lines.
pub fn fit(
    base: &ScenarioSource,
    params: &[FreeParam],
    obs: &[Observation],
    settings: &FitSettings,
    out: &Path,
    runtime: &Arc<Runtime>,
    log: &dyn Fn(&str),
) -> Result<FitResult, String> {
    let d = params.len();
    if d == 0 {
        return Err("give at least one --free KEY=LO..HI".into());
    }
    if d > 4 {
        return Err(format!("{d} free parameters; at most 4 (the coarse grid grows as 3^d)"));
    }
    if settings.seeds.is_empty() {
        return Err("give at least one seed".into());
    }
    // Check the scenario and the keys once before any run.
    {
        let mut s = base.clone();
        for p in params {
            s.overrides.push(p.setting(p.at(0.5)));
        }
        s.load(runtime).map_err(|e| e.to_string())?;
    }
    staged(out, |dir| {
        let ev = Evaluator {
            base,
            params,
            obs,
            seeds: &settings.seeds,
            runtime,
            work: dir.join("work"),
            cache: std::sync::Mutex::new((HashMap::new(), Vec::new(), String::new())),
        };
        std::fs::create_dir_all(&ev.work).map_err(|e| e.to_string())?;
        // 1. Coarse grid at the centres of `grid` equal strata of each range.
        ev.stage("grid");
        let g = settings.grid.max(1);
        let mut best: (f64, Vec<f64>) = (f64::INFINITY, vec![0.5; d]);
        for k in 0..g.pow(d as u32) {
            let mut rem = k;
            let z: Vec<f64> = (0..d)
                .map(|_| {
                    let i = rem % g;
                    rem /= g;
                    (i as f64 + 0.5) / g as f64
                })
                .collect();
            let (c, _) = ev.eval(&z)?;
            log(&format!("grid {}/{}: chi2 = {c:.4}", k + 1, g.pow(d as u32)));
            if c < best.0 {
                best = (c, z);
            }
        }
        // 2. Nelder-Mead from the best grid point, simplex steps of one stratum.
        ev.stage("simplex");
        let step = 0.5 / g as f64;
        let mut simplex = vec![best.1.clone()];
        for i in 0..d {
            let mut v = best.1.clone();
            v[i] = if v[i] + step <= 1.0 { v[i] + step } else { v[i] - step };
            simplex.push(v);
        }
        let solver = NelderMead::new(simplex).with_sd_tolerance(1e-3).map_err(|e| e.to_string())?;
        let res = Executor::new(Cost(&ev), solver)
            .configure(|s| s.max_iters(settings.max_iterations))
            .run()
            .map_err(|e| format!("Nelder-Mead: {e}"))?;
        let zbest: Vec<f64> = res
            .state()
            .get_best_param()
            .cloned()
            .unwrap_or(best.1.clone())
            .iter()
            .map(|v| v.clamp(0.0, 1.0))
            .collect();
        let (chi2, model) = ev.eval(&zbest)?;
        log(&format!("simplex: chi2 = {chi2:.4} after {} iterations", res.state().get_iter()));
        // 3. Curvature by central differences in z.
        ev.stage("curvature");
        let h = settings.curvature_step;
        let f = |z: &[f64]| ev.eval(z).map(|r| r.0);
        let mut hess = vec![vec![0.0; d]; d];
        let shifted = |i: usize, a: f64, j: usize, b: f64| {
            let mut z = zbest.clone();
            z[i] += a;
            z[j] += b;
            z
        };
        let inside = |z: &[f64]| z.iter().all(|v| (0.0..=1.0).contains(v));
        let mut notes = Vec::new();
        let mut ok = true;
        for i in 0..d {
            let (zp, zm) = (shifted(i, h, i, 0.0), shifted(i, -h, i, 0.0));
            if !inside(&zp) || !inside(&zm) {
                ok = false;
                notes.push(format!(
                    "the best fit of `{}` lies within {h} of a bound of its range, so the \
                     curvature (and the uncertainty) is not computed; widen the range",
                    params[i].key
                ));
                continue;
            }
            hess[i][i] = (f(&zp)? - 2.0 * chi2 + f(&zm)?) / (h * h);
            #[allow(clippy::needless_range_loop)] // hess is filled symmetrically
            for j in 0..i {
                let v = (f(&shifted(i, h, j, h))?
                    - f(&shifted(i, h, j, -h))?
                    - f(&shifted(i, -h, j, h))?
                    + f(&shifted(i, -h, j, -h))?)
                    / (4.0 * h * h);
                hess[i][j] = v;
                hess[j][i] = v;
            }
        }
        let cov = if ok { invert(&hess).filter(|c| (0..d).all(|i| c[i][i] > 0.0)) } else { None };
        if ok && cov.is_none() {
            notes.push(
                "chi-square is not convex at the best fit (curvature not positive definite): \
                 no uncertainty; try more seeds or a larger curvature step"
                    .into(),
            );
        }
        let sigma: Vec<f64> = (0..d)
            .map(|i| {
                cov.as_ref()
                    .map_or(f64::NAN, |c| (2.0 * c[i][i]).sqrt() * params[i].slope(zbest[i]))
            })
            .collect();
        let best_values: Vec<f64> = params.iter().zip(&zbest).map(|(p, &z)| p.at(z)).collect();
        for (p, &z) in params.iter().zip(&zbest) {
            if !(0.001..=0.999).contains(&z) {
                notes.push(format!("`{}` is at a bound of its range", p.key));
            }
        }
        let dof = obs.len() as i64 - d as i64;
        // 4. Keep the best-fit run (first seed) for inspection.
        let source = ev.source(&zbest, settings.seeds[0]);
        let scenario = source.load(runtime).map_err(|e| e.to_string())?;
        let session = Session { stop: Arc::new(AtomicBool::new(false)), progress: None };
        driver::start(scenario, source, &dir.join("best"), session).map_err(|e| e.to_string())?;
        let _ = std::fs::remove_dir_all(&ev.work);
        let evaluations = ev.cache.into_inner().map_err(|_| "poisoned")?.1;
        let fr = FitResult {
            parameters: params.to_vec(),
            best: best_values,
            sigma,
            chi2,
            dof,
            chi2_per_dof: if dof > 0 { chi2 / dof as f64 } else { f64::NAN },
            residuals: obs
                .iter()
                .zip(&model)
                .map(|(o, m)| (o.label.clone(), o.value, o.sigma, *m, o.unit.clone()))
                .collect(),
            evaluations,
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
        });
        let json = serde_json::to_vec_pretty(&prov).map_err(|e| e.to_string())?;
        atomic_write(&dir.join(PROVENANCE_FILE), &json).map_err(|e| e.to_string())?;
        Ok(fr)
    })
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
    let mut csv = String::from("observation,observed,uncertainty,model,normalised_residual,unit\n");
    for (label, o, s, m, u) in &r.residuals {
        csv.push_str(label);
        number::push_cells(&mut csv, &[*o, *s, *m, (m - o) / s]);
        csv.push_str(&format!(",{u}\n"));
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
                | ("latitude", Observable::LatitudeColumn(x)) => Some((*x, o, res.3)),
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
    fn interpolation_and_inverse() {
        let p = [(0.5, 1.0), (1.5, 3.0), (23.5, 5.0)];
        assert!((interpolate(&p, 1.0, Some(24.0)) - 2.0).abs() < 1e-12);
        // Across midnight: halfway between 23.5 (5) and 24.5 (1).
        assert!((interpolate(&p, 0.0, Some(24.0)) - 3.0).abs() < 1e-12);
        assert_eq!(interpolate(&p, 30.0, None), 5.0);
        // [[2, 1], [1, 3]]^-1 = [[3, -1], [-1, 2]] / 5 (2x2 inverse formula).
        let inv = invert(&[vec![2.0, 1.0], vec![1.0, 3.0]]).unwrap();
        assert!((inv[0][0] - 0.6).abs() < 1e-15 && (inv[0][1] + 0.2).abs() < 1e-15);
        assert!(invert(&[vec![1.0, 2.0], vec![2.0, 4.0]]).is_none());
    }
}

//! Parameter sweeps: run every point of a plan, locally in parallel or as
//! shards of a batch-scheduler job array, and gather the results.
//!
//! Why this exists: users map how the observables respond to poorly
//! constrained parameters. A sweep expands a [`plan::Plan`] into points,
//! runs each point with each of the plan's seeds into
//! `OUT/points/pNNNN/seed-S/` (each a complete, atomically renamed run
//! directory, so a restarted sweep skips what is finished), records each
//! finished shard in `OUT/shards/`, and `collect` checks that every shard
//! of the same plan (by digest) is there before it writes `sweep.csv` and
//! the plots. Slurm job arrays run the shards unchanged
//! ([`slurm::script`]); there is no cluster protocol of our own.

pub mod plan;
pub mod slurm;

use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::{Arc, Mutex};

use exobound_products::ticks::format_number;
use exobound_products::{ColourScale, Line, LinePlot, LineStyle, MapPlot, draw_lines, draw_map};
use serde::{Deserialize, Serialize};

use crate::compare::stats::mean_and_se;
use crate::driver::{self, Outcome, Session};
use crate::output::results::MEASURES;
use crate::output::{PROVENANCE_FILE, atomic_write, number};
use crate::runtime::Runtime;
use plan::{Axis, Plan, Point};

/// The plan as recorded in the output directory.
pub const PLAN_FILE: &str = "plan.json";

/// One slice of a plan: shard `index` of `count` runs the points whose
/// index is congruent to `index` modulo `count`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Shard {
    /// This shard, from 0.
    pub index: usize,
    /// Number of shards.
    pub count: usize,
}

impl Shard {
    /// The whole plan.
    pub const ALL: Shard = Shard { index: 0, count: 1 };

    /// Parse `I/N`.
    pub fn parse(s: &str) -> Result<Shard, String> {
        let (i, n) =
            s.split_once('/').ok_or_else(|| format!("--shard `{s}`: write I/N, e.g. 0/4"))?;
        let (i, n) = (i.trim().parse::<usize>(), n.trim().parse::<usize>());
        match (i, n) {
            (Ok(i), Ok(n)) if n > 0 && i < n => Ok(Shard { index: i, count: n }),
            _ => Err(format!("--shard `{s}`: need 0 <= I < N")),
        }
    }

    /// Whether point `p` belongs to this shard.
    pub fn holds(&self, p: &Point) -> bool {
        p.index % self.count == self.index
    }

    fn file_name(&self) -> String {
        format!("shard-{}-of-{}.json", self.index, self.count)
    }
}

/// The record of a finished shard.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct ShardRecord {
    /// The plan's digest.
    pub plan_digest: String,
    /// The shard.
    pub shard: Shard,
    /// Indices of the points it ran.
    pub points: Vec<usize>,
}

/// The recorded plan: what `collect` needs without the plan file.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct PlanRecord {
    /// Digest of the plan.
    pub digest: String,
    /// Title.
    pub title: String,
    /// Plan origin.
    pub origin: String,
    /// Sampling.
    pub sampling: String,
    /// Keys of the parameters.
    pub keys: Vec<String>,
    /// Their units.
    pub units: Vec<String>,
    /// Grid levels per parameter (empty for a Latin hypercube).
    pub levels: Vec<usize>,
    /// Point values: per point, per parameter, (number, literal).
    pub points: Vec<Vec<(f64, String)>>,
    /// Per parameter: whether its values are spaced logarithmically (a range with
    /// `spacing = "log"`), so that plots draw its axis in log; absent in records written
    /// before this field existed (then linear).
    #[serde(default)]
    pub log_spaced: Vec<bool>,
    /// Seeds.
    pub seeds: Vec<u64>,
}

impl PlanRecord {
    fn of(plan: &Plan) -> PlanRecord {
        PlanRecord {
            digest: plan.digest.clone(),
            title: plan.title.clone(),
            origin: plan.origin.clone(),
            sampling: plan.sampling.clone(),
            keys: plan.parameters.iter().map(|p| p.key.clone()).collect(),
            units: plan.parameters.iter().map(|p| p.unit()).collect(),
            levels: if plan.sampling == "grid" {
                plan.parameters
                    .iter()
                    .map(|p| match &p.axis {
                        Axis::List(v) => v.len(),
                        Axis::Range { count, .. } => count.unwrap_or(2),
                    })
                    .collect()
            } else {
                Vec::new()
            },
            points: plan
                .points
                .iter()
                .map(|p| p.values.iter().map(|v| (v.number, v.literal.clone())).collect())
                .collect(),
            log_spaced: plan
                .parameters
                .iter()
                .map(|p| matches!(p.axis, Axis::Range { log: true, .. }))
                .collect(),
            seeds: plan.seeds.clone(),
        }
    }
}

/// Directory of one run of a sweep.
pub fn run_dir(out: &Path, point: &Point, seed: u64) -> PathBuf {
    out.join("points").join(point.dir_name()).join(format!("seed-{seed}"))
}

/// Whether a run directory holds a finished run.
fn finished(dir: &Path) -> bool {
    dir.join(PROVENANCE_FILE).is_file() && dir.join("summary.json").is_file()
}

/// What a shard did.
#[derive(Clone, Debug, Default)]
pub struct ShardReport {
    /// Runs done now.
    pub ran: usize,
    /// Runs found finished and skipped.
    pub skipped: usize,
}

/// Run shard `shard` of `plan` into `out` with `jobs` runs at a time.
/// With more than one job each run uses one thread (results do not depend
/// on the thread count). `log` hears one line per run.
pub fn run_shard(
    plan: &Plan,
    out: &Path,
    shard: Shard,
    jobs: usize,
    runtime: &Arc<Runtime>,
    stop: Arc<AtomicBool>,
    log: &(dyn Fn(&str) + Sync),
) -> Result<ShardReport, String> {
    let rec_path = out.join(PLAN_FILE);
    // A directory of other things is refused, and so (below) is one used
    // by another plan.
    // (Shards may start together, so a directory holding only what a
    // sweep writes is accepted before its plan record appears.)
    let ours = |n: &str| {
        ["plan.json", "shards", "points", "sweep.csv", "sweep.json", "plots"].contains(&n)
            || n.starts_with(".plan.json.tmp")
    };
    if out.is_file()
        || std::fs::read_dir(out)
            .is_ok_and(|d| d.flatten().any(|e| !ours(&e.file_name().to_string_lossy())))
    {
        return Err(format!(
            "`{}` exists and is not the directory of a sweep; choose another --out",
            out.display()
        ));
    }
    std::fs::create_dir_all(out.join("shards"))
        .map_err(|e| format!("cannot create `{}`: {e}", out.display()))?;
    if let Ok(text) = std::fs::read_to_string(&rec_path) {
        let old: PlanRecord = serde_json::from_str(&text)
            .map_err(|e| format!("`{}` is not a sweep plan record: {e}", rec_path.display()))?;
        if old.digest != plan.digest {
            return Err(format!(
                "`{}` holds a sweep of another plan (digest {} there, {} here); use another --out",
                out.display(),
                &old.digest[..12],
                &plan.digest[..12]
            ));
        }
    }
    let rec = serde_json::to_vec_pretty(&PlanRecord::of(plan)).map_err(|e| e.to_string())?;
    atomic_write(&rec_path, &rec).map_err(|e| e.to_string())?;
    let runs: Vec<(&Point, u64)> = plan
        .points
        .iter()
        .filter(|p| shard.holds(p))
        .flat_map(|p| plan.seeds.iter().map(move |&s| (p, s)))
        .collect();
    let jobs = jobs.max(1).min(runs.len().max(1));
    let threads = (jobs > 1).then_some(1);
    let next = AtomicUsize::new(0);
    let report = Mutex::new(ShardReport::default());
    let failure: Mutex<Option<String>> = Mutex::new(None);
    let total = runs.len();
    std::thread::scope(|scope| {
        for _ in 0..jobs {
            scope.spawn(|| {
                loop {
                    if failure.lock().map(|f| f.is_some()).unwrap_or(true)
                        || stop.load(Ordering::SeqCst)
                    {
                        return;
                    }
                    let k = next.fetch_add(1, Ordering::SeqCst);
                    let Some(&(point, seed)) = runs.get(k) else { return };
                    let dir = run_dir(out, point, seed);
                    if finished(&dir) {
                        if let Ok(mut r) = report.lock() {
                            r.skipped += 1;
                        }
                        continue;
                    }
                    let result = (|| {
                        let source = plan.source(point, seed, threads);
                        let scenario = source
                            .load(runtime)
                            .map_err(|e| format!("point {} seed {seed}: {e}", point.index))?;
                        if let Some(parent) = dir.parent() {
                            std::fs::create_dir_all(parent).map_err(|e| e.to_string())?;
                        }
                        let session = Session { stop: stop.clone(), progress: None };
                        match driver::start(scenario, source, &dir, session)
                            .map_err(|e| format!("point {} seed {seed}: {e}", point.index))?
                        {
                            Outcome::Finished { .. } => Ok(()),
                            Outcome::Interrupted { .. } => Err("interrupted".to_string()),
                        }
                    })();
                    match result {
                        Ok(()) => {
                            let done = report.lock().map(|mut r| {
                                r.ran += 1;
                                r.ran + r.skipped
                            });
                            log(&format!(
                                "run {}/{total}: point {} seed {seed} done",
                                done.unwrap_or(0),
                                point.dir_name()
                            ));
                        }
                        Err(e) => {
                            if let Ok(mut f) = failure.lock() {
                                f.get_or_insert(e);
                            }
                        }
                    }
                }
            });
        }
    });
    if let Some(e) = failure.into_inner().ok().flatten() {
        return Err(e);
    }
    if stop.load(Ordering::SeqCst) {
        return Err(
            "interrupted; finished runs are kept, rerun the same command to continue".into()
        );
    }
    let record = ShardRecord {
        plan_digest: plan.digest.clone(),
        shard,
        points: plan.points.iter().filter(|p| shard.holds(p)).map(|p| p.index).collect(),
    };
    let json = serde_json::to_vec_pretty(&record).map_err(|e| e.to_string())?;
    atomic_write(&out.join("shards").join(shard.file_name()), &json).map_err(|e| e.to_string())?;
    report.into_inner().map_err(|_| "a sweep worker panicked".to_string())
}

/// One point's gathered result.
#[derive(Clone, Debug, Serialize)]
pub struct PointResult {
    /// Point index.
    pub index: usize,
    /// Parameter values, in the parameters' units (NaN for words).
    pub values: Vec<f64>,
    /// Parameter values as given.
    pub literals: Vec<String>,
    /// Per measure: mean over seeds, in the measure's unit.
    pub mean: Vec<f64>,
    /// Per measure: standard error over seeds.
    pub se: Vec<f64>,
}

/// The gathered sweep.
#[derive(Clone, Debug, Serialize)]
pub struct SweepResult {
    /// The plan.
    pub plan: PlanRecord,
    /// Every point.
    pub points: Vec<PointResult>,
}

/// Check that every shard of the plan recorded in `out` is there, then
/// gather the points and write `sweep.csv`, `sweep.json` and the plots.
pub fn collect(out: &Path) -> Result<SweepResult, String> {
    let rec_path = out.join(PLAN_FILE);
    let text = std::fs::read_to_string(&rec_path).map_err(|e| {
        format!("`{}`: {e}; is `{}` the --out of a sweep?", rec_path.display(), out.display())
    })?;
    let plan: PlanRecord = serde_json::from_str(&text)
        .map_err(|e| format!("`{}` is not a sweep plan record: {e}", rec_path.display()))?;
    let mut shards: Vec<ShardRecord> = Vec::new();
    let dir = out.join("shards");
    let entries = std::fs::read_dir(&dir).map_err(|e| format!("`{}`: {e}", dir.display()))?;
    for e in entries.flatten() {
        let p = e.path();
        if p.extension().is_some_and(|x| x == "json") {
            let t = std::fs::read_to_string(&p).map_err(|e| format!("`{}`: {e}", p.display()))?;
            let r: ShardRecord = serde_json::from_str(&t)
                .map_err(|e| format!("`{}` is not a shard record: {e}", p.display()))?;
            if r.plan_digest != plan.digest {
                return Err(format!(
                    "`{}` comes from another plan (digest {}, this sweep's is {}); remove it or \
                     collect that plan's directory",
                    p.display(),
                    &r.plan_digest[..12.min(r.plan_digest.len())],
                    &plan.digest[..12]
                ));
            }
            shards.push(r);
        }
    }
    let mut covered = vec![false; plan.points.len()];
    for s in &shards {
        for &i in &s.points {
            if let Some(c) = covered.get_mut(i) {
                *c = true;
            }
        }
    }
    if covered.iter().any(|c| !c) {
        // Name the missing shards, for the sharding most recorded.
        let n = shards.iter().map(|s| s.shard.count).max().unwrap_or(1);
        let have: Vec<usize> =
            shards.iter().filter(|s| s.shard.count == n).map(|s| s.shard.index).collect();
        let missing: Vec<String> =
            (0..n).filter(|i| !have.contains(i)).map(|i| format!("{i}/{n}")).collect();
        let points = covered.iter().filter(|c| !**c).count();
        return Err(format!(
            "{points} of {} points have no finished shard in `{}`: missing shard(s) {}; run them \
             with `exobound sweep PLAN --out {} --shard I/N`",
            plan.points.len(),
            dir.display(),
            if missing.is_empty() {
                "(none of the recorded sharding)".to_string()
            } else {
                missing.join(", ")
            },
            out.display()
        ));
    }
    let mut points = Vec::new();
    for (index, vals) in plan.points.iter().enumerate() {
        let mut per_measure: Vec<Vec<f64>> = vec![Vec::new(); MEASURES.len()];
        for &seed in &plan.seeds {
            let d = out.join("points").join(format!("p{index:04}")).join(format!("seed-{seed}"));
            let s = crate::output::summary::Summary::read(&d.join("summary.json"))?;
            for (acc, m) in per_measure.iter_mut().zip(MEASURES) {
                acc.push((m.of)(&s));
            }
        }
        let stats: Vec<(f64, f64)> = per_measure.iter().map(|v| mean_and_se(v)).collect();
        points.push(PointResult {
            index,
            values: vals.iter().map(|v| v.0).collect(),
            literals: vals.iter().map(|v| v.1.clone()).collect(),
            mean: stats.iter().map(|s| s.0).collect(),
            se: stats.iter().map(|s| s.1).collect(),
        });
    }
    let result = SweepResult { plan, points };
    atomic_write(&out.join("sweep.csv"), sweep_csv(&result).as_bytes())
        .map_err(|e| e.to_string())?;
    let json = serde_json::to_vec_pretty(&result).map_err(|e| e.to_string())?;
    atomic_write(&out.join("sweep.json"), &json).map_err(|e| e.to_string())?;
    draw(out, &result)?;
    Ok(result)
}

/// `sweep.csv`: one row per point, its parameters then every measure's
/// mean and standard error over the seeds; units in the header.
pub fn sweep_csv(r: &SweepResult) -> String {
    let mut s = String::from("point");
    for (k, u) in r.plan.keys.iter().zip(&r.plan.units) {
        if u.is_empty() { s.push_str(&format!(",{k}")) } else { s.push_str(&format!(",{k} [{u}]")) }
    }
    for m in MEASURES {
        let (name, unit) = (m.name, m.unit);
        s.push_str(&format!(",{name} [{unit}],{name}_se [{unit}]"));
    }
    s.push('\n');
    for p in &r.points {
        s.push_str(&p.index.to_string());
        for (v, lit) in p.values.iter().zip(&p.literals) {
            if v.is_finite() {
                number::push_cells(&mut s, &[*v]);
            } else {
                // A word (e.g. a pattern name): a text column.
                s.push_str(&format!(",{}", lit.trim_matches('"')))
            }
        }
        for (m, e) in p.mean.iter().zip(&p.se) {
            number::push_cells(&mut s, &[*m, *e]);
        }
        s.push('\n');
    }
    s
}

/// Measures drawn against each parameter.
const DRAWN: &[&str] = &[
    "dayside_near_surface_density",
    "total_content",
    "equatorial_peak_shift",
    "latitude_cos_power_n",
    "escape_rate",
    "source_rate",
];

fn short(key: &str) -> String {
    key.rsplit('.')
        .next()
        .unwrap_or(key)
        .replace(|c: char| !c.is_ascii_alphanumeric() && c != '-' && c != '_', "_")
}

/// Whether parameter `k` is drawn on a log axis: declared log-spaced, and every value positive.
fn log_axis(r: &SweepResult, k: usize) -> bool {
    r.plan.log_spaced.get(k).copied().unwrap_or(false) && r.points.iter().all(|p| p.values[k] > 0.0)
}

/// The axis range of parameter values `v` (finite, ascending), widened by 5 % of the span each
/// way (of the log span on a log axis) so that the end points sit inside the frame.
fn padded_range(v: &[f64], log: bool) -> (f64, f64) {
    let f = |x: f64| if log { x.log10() } else { x };
    let g = |x: f64| if log { 10f64.powf(x) } else { x };
    let (lo, hi) = (f(v[0]), f(v[v.len() - 1]));
    let pad = if hi > lo {
        0.05 * (hi - lo)
    } else if log {
        0.5
    } else {
        0.5 * lo.abs().max(1.0)
    };
    (g(lo - pad), g(hi + pad))
}

/// Cell edges around the parameter values `v` of a sweep map, strictly increasing: halfway
/// between neighbours (the geometric mean on a log axis), the end cells as wide as their
/// neighbour; None if `v` is not strictly increasing (the map then falls back to index cells).
fn cell_edges(v: &[f64], log: bool) -> Option<Vec<f64>> {
    if v.windows(2).any(|w| !(w[1] > w[0])) || v.iter().any(|x| !x.is_finite()) {
        return None;
    }
    let f = |x: f64| if log { x.log10() } else { x };
    let g = |x: f64| if log { 10f64.powf(x) } else { x };
    let c: Vec<f64> = v.iter().map(|&x| f(x)).collect();
    let n = c.len();
    let half = |i: usize| if n > 1 { 0.5 * (c[i + 1] - c[i]) } else { 0.5 };
    let mut e = vec![c[0] - half(0)];
    e.extend((0..n.saturating_sub(1)).map(|i| c[i] + half(i)));
    e.push(c[n - 1] + if n > 1 { half(n - 2) } else { 0.5 });
    Some(e.into_iter().map(g).collect())
}

fn draw(out: &Path, r: &SweepResult) -> Result<(), String> {
    let plots = out.join("plots");
    std::fs::create_dir_all(&plots).map_err(|e| e.to_string())?;
    let e = |x: Result<(), exobound_products::ProductError>| x.map_err(|e| e.to_string());
    let mi = crate::output::results::measure_index;
    let axis_label = |k: usize| {
        let (key, unit) = (&r.plan.keys[k], &r.plan.units[k]);
        if unit.is_empty() { key.clone() } else { format!("{key} ({unit})") }
    };
    for (k, key) in r.plan.keys.iter().enumerate() {
        if r.points.iter().any(|p| !p.values[k].is_finite()) {
            continue; // words (e.g. a pattern name) have no axis
        }
        let log = log_axis(r, k);
        let mut xs: Vec<f64> = r.points.iter().map(|p| p.values[k]).collect();
        xs.sort_by(f64::total_cmp);
        for name in DRAWN {
            let Some(m) = mi(name) else { continue };
            let mut pts: Vec<(f64, f64, f64)> =
                r.points.iter().map(|p| (p.values[k], p.mean[m], p.se[m])).collect();
            pts.sort_by(|a, b| a.0.total_cmp(&b.0));
            e(draw_lines(
                &LinePlot {
                    title: format!("{}: {name} against {}", r.plan.title, short(key)),
                    x_label: axis_label(k),
                    y_label: format!("{name} ({})", MEASURES[m].unit),
                    lines: vec![Line {
                        label: format!("mean of {} seed(s)", r.plan.seeds.len()),
                        x: pts.iter().map(|p| p.0).collect(),
                        y: pts.iter().map(|p| p.1).collect(),
                        y_err: Some(
                            pts.iter().map(|p| if p.2.is_finite() { p.2 } else { 0.0 }).collect(),
                        ),
                        style: LineStyle::Points,
                    }],
                    markers: vec![],
                    log_x: log,
                    log_y: false,
                    x_range: Some(padded_range(&xs, log)),
                    x_ticks: None,
                },
                &plots.join(format!("{name}__{}.png", short(key))),
            ))?;
        }
    }
    // 2-D maps over the first two parameters of a grid (means over the others).
    if r.plan.levels.len() >= 2
        && r.points.iter().all(|p| p.values[0].is_finite() && p.values[1].is_finite())
    {
        let (n0, n1) = (r.plan.levels[0], r.plan.levels[1]);
        let axis = |k: usize, n: usize, stride: usize| -> Vec<f64> {
            (0..n).map(|i| r.points[i * stride].values[k]).collect()
        };
        let rest: usize = r.plan.levels[2..].iter().product();
        let x = axis(1, n1, rest);
        let y = axis(0, n0, n1 * rest);
        // Cells around the values, on a log axis for a log-spaced parameter, each tick at a
        // value and labelled with it; values not in ascending order fall back to one cell
        // per index, still labelled with the values.
        let layout = |k: usize, v: &[f64]| {
            let log = log_axis(r, k);
            let labels: Vec<String> = v.iter().map(|&x| format_number(x, x)).collect();
            match cell_edges(v, log) {
                Some(edges) => (edges, log, v.to_vec(), labels),
                None => {
                    let edges = (0..=v.len()).map(|i| i as f64 - 0.5).collect();
                    (edges, false, (0..v.len()).map(|i| i as f64).collect(), labels)
                }
            }
        };
        let (x_edges, x_log, x_ticks, x_tick_labels) = layout(1, &x);
        let (y_edges, y_log, y_ticks, y_tick_labels) = layout(0, &y);
        for name in DRAWN {
            let Some(m) = mi(name) else { continue };
            let mut v = vec![0.0; n0 * n1];
            for (i, p) in r.points.iter().enumerate() {
                let (a, b) = (i / (n1 * rest), (i / rest) % n1);
                v[a * n1 + b] += p.mean[m] / rest as f64;
            }
            e(draw_map(
                &MapPlot {
                    title: format!("{}: {name} ({})", r.plan.title, MEASURES[m].unit),
                    x_label: axis_label(1),
                    y_label: axis_label(0),
                    x_edges: x_edges.clone(),
                    y_edges: y_edges.clone(),
                    values: v,
                    colour_label: format!("{name} ({})", MEASURES[m].unit),
                    scale: ColourScale::Linear,
                    marks: None,
                    x_log,
                    y_log,
                    x_ticks: Some(x_ticks.clone()),
                    y_ticks: Some(y_ticks.clone()),
                    x_tick_labels: Some(x_tick_labels.clone()),
                    y_tick_labels: Some(y_tick_labels.clone()),
                    overlays: vec![],
                },
                &plots.join(format!("map_{name}.png")),
            ))?;
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sweep_map_cells_surround_the_values_halfway_in_log_or_linear() {
        // Log: the edges are the geometric means of neighbours, sqrt(1e5 1e6) = 10^5.5
        // (definition), and the end cells are as wide in log as their neighbours.
        let e = cell_edges(&[1e5, 1e6, 1e7], true).unwrap();
        let want = [4.5, 5.5, 6.5, 7.5].map(|p: f64| 10f64.powf(p));
        assert!(e.iter().zip(want).all(|(a, b)| (a / b - 1.0).abs() < 1e-12), "{e:?}");
        assert_eq!(cell_edges(&[1.0, 2.0, 4.0], false).unwrap(), vec![0.5, 1.5, 3.0, 5.0]);
        assert_eq!(cell_edges(&[3.0], false).unwrap(), vec![2.5, 3.5]);
        assert!(cell_edges(&[3.0, 1.0], false).is_none());
        let (lo, hi) = padded_range(&[1e5, 1e7], true);
        assert!((lo.log10() - 4.9).abs() < 1e-12 && (hi.log10() - 7.1).abs() < 1e-12);
        assert_eq!(padded_range(&[0.0, 10.0], false), (-0.5, 10.5));
    }

    #[test]
    fn a_log_spaced_range_is_recorded_and_drawn_on_log_axes_with_valued_ticks() {
        let text = "scenario = \"demo-quick\"\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.temperature\"\n\
             values = [\"2000 K\", \"3000 K\"]\n\
             [[parameters]]\nkey = \"processes.impact-vapor.parameters.flux\"\n\
             range = { from = \"1e5 cm^-2 s^-1\", to = \"1e7 cm^-2 s^-1\", count = 3, spacing = \"log\" }\n";
        let file: plan::PlanFile = toml::from_str(text).unwrap();
        let plan = plan::check(&file, "t.toml", Path::new(".")).unwrap();
        let record = PlanRecord::of(&plan);
        assert_eq!(record.log_spaced, vec![false, true]);
        let points = record
            .points
            .iter()
            .enumerate()
            .map(|(index, v)| PointResult {
                index,
                values: v.iter().map(|x| x.0).collect(),
                literals: v.iter().map(|x| x.1.clone()).collect(),
                mean: (0..MEASURES.len()).map(|m| (index * 10 + m) as f64).collect(),
                se: vec![0.5; MEASURES.len()],
            })
            .collect();
        let r = SweepResult { plan: record, points };
        assert!(log_axis(&r, 1) && !log_axis(&r, 0));
        let dir = std::env::temp_dir().join(format!("exobound-sweep-draw-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        draw(&dir, &r).expect("sweep plots");
        for f in
            ["map_total_content.png", "total_content__flux.png", "escape_rate__temperature.png"]
        {
            assert!(dir.join("plots").join(f).is_file(), "{f} missing");
        }
        if std::env::var_os("EXOBOUND_KEEP_TEST_OUTPUT").is_none() {
            std::fs::remove_dir_all(&dir).unwrap();
        }
        // An old record without the field reads back as linear.
        let mut json = serde_json::to_value(&r.plan).unwrap();
        json.as_object_mut().unwrap().remove("log_spaced");
        let old: PlanRecord = serde_json::from_value(json).unwrap();
        assert!(old.log_spaced.is_empty());
    }
}

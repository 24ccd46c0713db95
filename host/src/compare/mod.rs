//! Side-by-side comparison of process variants under common random numbers.
//!
//! Why this exists: a modeller judges one law against another (one PSD
//! cross-section against another, with and without adsorbate sputtering,
//! uniform against equator-peaked impacts) by the difference in what the
//! model predicts, and that difference means something only against the
//! Monte Carlo noise. `exobound compare` runs every variant with the same
//! list of seeds, tabulates every summary measure side by side with the
//! paired differences against the first variant and their significance
//! ([`stats`]), and draws overlays of the profiles and maps of the
//! relative column difference with the cells within the noise marked
//! ([`maps`]).

pub mod maps;
pub mod stats;

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};

use exobound_products::{Line, LinePlot, LineStyle, Marker, draw_lines, draw_map};
use serde::Serialize;

use crate::checkpoint::ScenarioSource;
use crate::driver::{self, Outcome, Progress, Session};
use crate::output::results::RunResult;
use crate::output::{PROVENANCE_FILE, atomic_write, number, staged};
use crate::runtime::Runtime;
use stats::{Difference, mean_and_se, paired};

pub use crate::output::results::MEASURES;

/// One variant: a name and where its scenario comes from.
#[derive(Clone, Debug)]
pub struct Variant {
    /// Name used in tables, plots and directory names.
    pub name: String,
    /// The scenario, with the variant's own overrides already in it.
    pub source: ScenarioSource,
}

/// One measure across the variants.
#[derive(Clone, Debug, Serialize)]
pub struct MeasureRow {
    /// Measure name.
    pub measure: String,
    /// Its unit.
    pub unit: String,
    /// Per variant: the values per seed, in the unit.
    pub values: Vec<Vec<f64>>,
    /// Per variant: mean over seeds, in the unit.
    pub mean: Vec<f64>,
    /// Per variant: standard error over seeds, in the unit.
    pub se: Vec<f64>,
    /// Per variant after the first: paired difference against the first.
    pub difference: Vec<Difference>,
    /// A signed measure (zero is not "none"): no relative difference is given.
    pub signed: bool,
}

/// The result of a comparison.
#[derive(Clone, Debug, Serialize)]
pub struct Comparison {
    /// Variant names, the reference first.
    pub variants: Vec<String>,
    /// Seeds shared by every variant.
    pub seeds: Vec<u64>,
    /// One row per measure.
    pub rows: Vec<MeasureRow>,
    /// The significance rule.
    pub rule: String,
    /// What the reader must know before trusting a verdict (too few seeds,
    /// the smallest change the test could detect).
    pub warnings: Vec<String>,
    /// A reminder of what the numbers are.
    pub caution: String,
}

/// Parse `NAME:KEY=VALUE[,KEY=VALUE...]` into a name and overrides. Values
/// containing commas can be given by repeating the option with the same name.
pub fn parse_variant(spec: &str) -> Result<(String, Vec<String>), String> {
    let (name, rest) = spec.split_once(':').ok_or_else(|| {
        format!("--variant `{spec}`: write NAME:KEY=VALUE, e.g. low-psd:processes.0.parameters.cross_section=\"1e-20 cm^2\"")
    })?;
    let name = name.trim();
    if name.is_empty() || !name.chars().all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_') {
        return Err(format!(
            "--variant `{spec}`: the name `{name}` must be letters, digits, '-' or '_'"
        ));
    }
    let sets: Vec<String> =
        split_top_level(rest).into_iter().map(|s| s.trim().to_string()).collect();
    if sets.iter().any(|s| !s.contains('=')) {
        return Err(format!("--variant `{spec}`: each setting must be KEY=VALUE"));
    }
    Ok((name.to_string(), sets))
}

/// Split at commas outside double quotes and brackets.
fn split_top_level(s: &str) -> Vec<&str> {
    let (mut out, mut depth, mut quoted, mut start) = (Vec::new(), 0i32, false, 0);
    for (i, c) in s.char_indices() {
        match c {
            '"' => quoted = !quoted,
            '[' | '{' if !quoted => depth += 1,
            ']' | '}' if !quoted => depth -= 1,
            ',' if !quoted && depth == 0 => {
                out.push(&s[start..i]);
                start = i + 1;
            }
            _ => {}
        }
    }
    out.push(&s[start..]);
    out
}

/// Names for scenario files: their stems, made unique.
pub fn names_for_files(paths: &[PathBuf]) -> Vec<String> {
    let mut names: Vec<String> = Vec::new();
    for p in paths {
        let stem = p.file_stem().map_or("variant".into(), |s| s.to_string_lossy().to_string());
        let mut name = stem.clone();
        let mut k = 2;
        while names.contains(&name) {
            name = format!("{stem}-{k}");
            k += 1;
        }
        names.push(name);
    }
    names
}

/// Run every variant with every seed into `out` (staged; renamed when
/// complete) and write the comparison. `progress` hears each run's start.
pub fn compare(
    variants: &[Variant],
    seeds: &[u64],
    out: &Path,
    runtime: &Arc<Runtime>,
    stop: Arc<AtomicBool>,
    progress: &mut dyn FnMut(&str, &Progress),
) -> Result<Comparison, String> {
    if variants.len() < 2 {
        return Err("compare needs at least two variants".into());
    }
    if seeds.is_empty() {
        return Err("compare needs at least one seed".into());
    }
    staged(out, |dir| {
        let mut results: Vec<Vec<RunResult>> = Vec::new();
        for v in variants {
            let mut per_seed = Vec::new();
            for &seed in seeds {
                let mut source = v.source.clone();
                source.overrides.push(format!("run.seed={seed}"));
                let scenario =
                    source.load(runtime).map_err(|e| format!("variant `{}`: {e}", v.name))?;
                let parent = dir.join("runs").join(&v.name);
                std::fs::create_dir_all(&parent).map_err(|e| e.to_string())?;
                let run_dir = parent.join(format!("seed-{seed}"));
                let label = format!("{} seed {seed}", v.name);
                let mut p = |pr: &Progress| progress(&label, pr);
                let session = Session { stop: stop.clone(), progress: Some(&mut p) };
                match driver::start(scenario, source, &run_dir, session)
                    .map_err(|e| format!("variant `{}`, seed {seed}: {e}", v.name))?
                {
                    Outcome::Finished { result, .. } => per_seed.push(*result),
                    Outcome::Interrupted { .. } => {
                        return Err("interrupted; the comparison was not finished".into());
                    }
                }
                if stop.load(Ordering::SeqCst) {
                    return Err("interrupted; the comparison was not finished".into());
                }
            }
            results.push(per_seed);
        }
        let cmp = tabulate(variants, seeds, &results);
        write_products(dir, &cmp, &results)?;
        let prov = serde_json::json!({
            "engine": "exobound",
            "engine_version": env!("CARGO_PKG_VERSION"),
            "command": "compare",
            "seeds": seeds,
            "variants": variants.iter().map(|v| serde_json::json!({
                "name": v.name, "scenario_origin": v.source.origin, "overrides": v.source.overrides,
            })).collect::<Vec<_>>(),
            "runs": "runs/<variant>/seed-<seed>/ hold each run's full output and provenance",
        });
        let json = serde_json::to_vec_pretty(&prov).map_err(|e| e.to_string())?;
        atomic_write(&dir.join(PROVENANCE_FILE), &json).map_err(|e| e.to_string())?;
        Ok(cmp)
    })
}

fn tabulate(variants: &[Variant], seeds: &[u64], results: &[Vec<RunResult>]) -> Comparison {
    let mut rows: Vec<MeasureRow> = MEASURES
        .iter()
        .map(|m| {
            let values: Vec<Vec<f64>> =
                results.iter().map(|r| r.iter().map(|x| (m.of)(&x.summary)).collect()).collect();
            let stats: Vec<(f64, f64)> = values.iter().map(|v| mean_and_se(v)).collect();
            MeasureRow {
                measure: m.name.to_string(),
                unit: m.unit.to_string(),
                mean: stats.iter().map(|s| s.0).collect(),
                se: stats.iter().map(|s| s.1).collect(),
                difference: values[1..].iter().map(|b| paired(&values[0], b)).collect(),
                values,
                signed: m.signed,
            }
        })
        .collect();
    // Holm's rule over the measures of each variant.
    for k in 0..variants.len().saturating_sub(1) {
        let mut diffs: Vec<&mut Difference> =
            rows.iter_mut().map(|r| &mut r.difference[k]).collect();
        stats::correct(&mut diffs);
    }
    let tests = MEASURES.len();
    let need = stats::seeds_the_test_can_use(tests);
    let mut warnings = Vec::new();
    if seeds.len() < 2 {
        warnings.push(
            "one seed: the Monte Carlo noise cannot be estimated, so no difference is judged \
             (every verdict is `unknown`); use --seeds 5 or more"
                .to_string(),
        );
    } else if seeds.len() < need {
        let crit = stats::t_quantile_two_sided(stats::FAMILY_ALPHA / tests as f64, seeds.len() - 1);
        let mut w = format!(
            "{} seeds: with {} degree(s) of freedom a difference must exceed {crit:.1} of its \
             standard errors to be flagged (the test can use {need} or more seeds, where this \
             falls within 25 % of its limit); smallest detectable changes:",
            seeds.len(),
            seeds.len() - 1
        );
        for r in &rows {
            for (k, d) in r.difference.iter().enumerate() {
                if d.smallest_detectable.is_finite() {
                    w.push_str(&format!(
                        " {} ({}) {:.3e} {};",
                        r.measure,
                        variants[k + 1].name,
                        d.smallest_detectable,
                        r.unit
                    ));
                }
            }
        }
        w.pop();
        warnings.push(w);
    }
    Comparison {
        variants: variants.iter().map(|v| v.name.clone()).collect(),
        seeds: seeds.to_vec(),
        rows,
        rule: format!(
            "paired differences against the first variant over common seeds; two-sided Student-t \
             p-values, judged together over the {tests} measures of each variant by Holm's \
             step-down rule at a family-wise error rate of 1 % (Holm 1979)"
        ),
        warnings,
        caution: "Model output: a scientific estimate from a Monte Carlo model, not \
                  flight-operations data."
            .into(),
    }
}

/// `1.234e5 ± 2.1e3` style text.
fn pm(m: f64, se: f64) -> String {
    if se.is_finite() { format!("{m:.4e} ± {se:.2e}") } else { format!("{m:.4e}") }
}

/// The comparison as CSV: one row per measure and variant.
pub fn comparison_csv(c: &Comparison) -> String {
    let mut s = String::from(
        "measure,unit,variant,mean,standard_error,difference_from_reference,difference_error,\
         relative_difference,p_value,smallest_detectable_difference,significant\n",
    );
    for r in &c.rows {
        for (k, v) in c.variants.iter().enumerate() {
            // The reference row has no difference from itself: NaN.
            // A signed measure has no relative difference: NaN.
            let (diff, verdict) = if k == 0 {
                ([f64::NAN; 5], "reference")
            } else {
                let d = &r.difference[k - 1];
                let rel = if r.signed { f64::NAN } else { d.mean / r.mean[0] };
                ([d.mean, d.se, rel, d.p_value, d.smallest_detectable], d.verdict.as_str())
            };
            s.push_str(&format!("{},{},{v}", r.measure, r.unit));
            number::push_cells(&mut s, &[r.mean[k], r.se[k]]);
            number::push_cells(&mut s, &diff);
            s.push_str(&format!(",{verdict}\n"));
        }
    }
    s
}

/// The comparison as aligned text for a terminal: a block per measure.
pub fn comparison_text(c: &Comparison) -> String {
    let mut s = format!(
        "Comparison of {} variants over seeds {:?} (reference: {})\n{}\n\n",
        c.variants.len(),
        c.seeds,
        c.variants[0],
        c.rule
    );
    for w in &c.warnings {
        s.push_str(&format!("WARNING: {w}\n\n"));
    }
    let w = c.variants.iter().map(|v| v.len()).max().unwrap_or(8).max(9);
    for r in &c.rows {
        s.push_str(&format!("{} [{}]\n", r.measure, r.unit));
        for (k, v) in c.variants.iter().enumerate() {
            let tail = if k == 0 {
                "reference".to_string()
            } else {
                let d = &r.difference[k - 1];
                let rel = if r.signed {
                    String::new()
                } else {
                    format!(" ({:+.1} %)", 100.0 * d.mean / r.mean[0])
                };
                let p = if d.p_value.is_finite() {
                    format!(", p = {:.2e}", d.p_value)
                } else {
                    String::new()
                };
                format!("diff {}{rel}{p}  beyond noise: {}", pm(d.mean, d.se), d.verdict.as_str())
            };
            s.push_str(&format!("  {v:<w$}  {:<24}  {tail}\n", pm(r.mean[k], r.se[k])));
        }
        s.push('\n');
    }
    s.push_str(&format!("{}\n", c.caution));
    s
}

fn mean_profile(
    runs: &[RunResult],
    pick: impl Fn(&RunResult) -> &crate::output::results::Profile,
) -> (Vec<f64>, Vec<f64>) {
    let x = pick(&runs[0]).coordinate.clone();
    let y: Vec<f64> = (0..x.len())
        .map(|i| {
            runs.iter().map(|r| pick(r).column.get(i).copied().unwrap_or(f64::NAN)).sum::<f64>()
                / runs.len() as f64
        })
        .collect();
    (x, y)
}

fn write_products(dir: &Path, c: &Comparison, results: &[Vec<RunResult>]) -> Result<(), String> {
    let io = |e: std::io::Error| e.to_string();
    atomic_write(&dir.join("comparison.csv"), comparison_csv(c).as_bytes()).map_err(io)?;
    atomic_write(&dir.join("comparison.txt"), comparison_text(c).as_bytes()).map_err(io)?;
    let json = serde_json::to_vec_pretty(c).map_err(|e| e.to_string())?;
    atomic_write(&dir.join("comparison.json"), &json).map_err(io)?;
    let plots = dir.join("plots");
    std::fs::create_dir_all(&plots).map_err(io)?;
    let e = |r: Result<(), exobound_products::ProductError>| r.map_err(|e| e.to_string());
    let styles = [LineStyle::Solid, LineStyle::Dashed, LineStyle::Dotted, LineStyle::Points];
    let lines = |pick: &dyn Fn(&RunResult) -> &crate::output::results::Profile| -> Vec<Line> {
        results
            .iter()
            .zip(&c.variants)
            .enumerate()
            .map(|(k, (runs, name))| {
                let (x, y) = mean_profile(runs, pick);
                Line { label: name.clone(), x, y, y_err: None, style: styles[k % styles.len()] }
            })
            .collect()
    };
    let n_seeds = c.seeds.len();
    e(draw_lines(
        &LinePlot {
            title: format!("Equatorial column by local time, mean of {n_seeds} seeds"),
            x_label: "local time (h)".into(),
            y_label: "column (atoms cm^-2)".into(),
            lines: lines(&|r| &r.equator),
            markers: vec![
                Marker { x: 6.0, label: "dawn".into() },
                Marker { x: 12.0, label: "subsolar".into() },
                Marker { x: 18.0, label: "dusk".into() },
            ],
            log_x: false,
            log_y: true,
            x_range: Some((0.0, 24.0)),
            x_ticks: Some(vec![0.0, 3.0, 6.0, 9.0, 12.0, 15.0, 18.0, 21.0, 24.0]),
        },
        &plots.join("equator_local_time.png"),
    ))?;
    e(draw_lines(
        &LinePlot {
            title: format!("Dayside column by latitude, mean of {n_seeds} seeds"),
            x_label: "latitude (deg)".into(),
            y_label: "column (atoms cm^-2)".into(),
            lines: lines(&|r| &r.latitude),
            markers: vec![],
            log_x: false,
            log_y: false,
            x_range: Some((-90.0, 90.0)),
            x_ticks: Some(vec![-90.0, -60.0, -30.0, 0.0, 30.0, 60.0, 90.0]),
        },
        &plots.join("latitude.png"),
    ))?;
    // Signed column difference maps against the reference, cells within the noise marked.
    let shape = |r: &RunResult| (r.column.local_time_h.len(), r.column.latitude_deg.len());
    let (n_lt, n_lat) = shape(&results[0][0]);
    fn columns(runs: &[RunResult]) -> Vec<&[f64]> {
        runs.iter().map(|r| r.column.column.as_slice()).collect()
    }
    for (k, runs) in results.iter().enumerate().skip(1) {
        if shape(&runs[0]) != (n_lt, n_lat) {
            continue;
        }
        let diff = maps::paired_difference(&columns(&results[0]), &columns(runs), n_lt * n_lat);
        e(draw_map(
            &maps::difference_plot(&c.variants[k], &c.variants[0], &diff, n_lt, n_lat),
            &plots.join(format!("column_difference_{}.png", c.variants[k])),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn variant_specs() {
        let (n, s) =
            parse_variant("low:run.seed=3,processes.0.parameters.q=\"1e-20 cm^2\"").unwrap();
        assert_eq!(n, "low");
        assert_eq!(s, vec!["run.seed=3", "processes.0.parameters.q=\"1e-20 cm^2\""]);
        let (_, s) = parse_variant("x:a=[1, 2],b=\"p,q\"").unwrap();
        assert_eq!(s, vec!["a=[1, 2]", "b=\"p,q\""]);
        assert!(parse_variant("nocolon").unwrap_err().contains("NAME:KEY=VALUE"));
        assert!(parse_variant("bad name:a=1").is_err());
        assert!(parse_variant("n:novalue").is_err());
        let names = names_for_files(&[PathBuf::from("a/x.toml"), PathBuf::from("b/x.toml")]);
        assert_eq!(names, vec!["x", "x-2"]);
    }
}

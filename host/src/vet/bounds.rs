//! The `bounds` check: outputs stay finite and physical over the envelope.
//!
//! Why this exists: a module can be wrong without trapping, and the worst
//! cases hide at the edges: the coldest night, the hottest noon, a
//! parameter at the end of its declared range. Vet sweeps every record
//! field over [`super::envelope::ENVELOPE`] and every parameter over its
//! declared range, and fails the module on any host-side failure (trap,
//! exhausted fuel or time, memory cap) or out-of-bounds value. The
//! runtime already refuses NaN, infinity, negative rates, launches that
//! do not go up or exceed its speed bound, and unknown outcome codes; vet
//! adds:
//!
//! - a loss rate at most [`MAX_LOSS_RATE`] (a lifetime of at least 1 s);
//! - a source that draws on the adsorbed pool releases nothing from an
//!   empty pool.
//!
//! A law's own refusal (a domain error: "outside my validity") is not a
//! failure; vet counts the refused records and reports the first message.

use exobound_sdk::{OutcomeKind, Velocity};

use super::envelope::{self, Call, Outputs, Records};
use super::{Check, Context, Status};

/// Largest loss rate accepted, s^-1: a lifetime under one second would
/// remove every atom before its first hop, which no Na or K process does.
pub const MAX_LOSS_RATE: f64 = 1.0;
/// Records per call in the sweep, so that a refusal loses little.
const CHUNK: usize = 64;
/// Most problems listed in the report.
const MAX_LISTED: usize = 12;

#[derive(Default)]
struct Tally {
    records: usize,
    refused: usize,
    first_refusal: Option<String>,
    max_speed: f64,
    max_release: f64,
    max_loss: f64,
    min_exchange: f64,
    max_exchange: f64,
    outcomes: [usize; 3],
}

fn speed(v: &Velocity) -> f64 {
    v.speed()
}

/// Judge the outputs of one accepted chunk; returns problems.
fn judge(
    call: Call,
    recs: &Records,
    out: &Outputs,
    adsorbed_source: bool,
    t: &mut Tally,
) -> Vec<String> {
    let mut problems = Vec::new();
    t.records += recs.len();
    match (out, recs) {
        (Outputs::Rates(r), Records::Cells(cells)) if call == Call::ReleaseRate => {
            for (x, c) in r.iter().zip(cells) {
                t.max_release = t.max_release.max(*x);
                if adsorbed_source && c.adsorbed == 0.0 && *x != 0.0 {
                    problems.push(format!(
                        "release-rate: {x:e} cm^-2 s^-1 from an empty adsorbed pool (the module draws on `adsorbed`)"
                    ));
                }
            }
        }
        (Outputs::Rates(r), _) if call == Call::LossRate => {
            for x in r {
                t.max_loss = t.max_loss.max(*x);
                if *x > MAX_LOSS_RATE {
                    problems.push(format!(
                        "loss-rate: {x:e} s^-1 exceeds {MAX_LOSS_RATE} s^-1 (a lifetime under 1 s)"
                    ));
                }
            }
        }
        (Outputs::Rates(r), _) => {
            for x in r {
                t.min_exchange = t.min_exchange.min(*x);
                t.max_exchange = t.max_exchange.max(*x);
            }
        }
        (Outputs::Velocities(v), _) => {
            for u in v {
                t.max_speed = t.max_speed.max(speed(u));
            }
        }
        (Outputs::Outcomes(o), _) => {
            for x in o {
                if let Some(k) = OutcomeKind::from_code(x.kind) {
                    t.outcomes[k as usize] += 1;
                    if k == OutcomeKind::Bounce {
                        t.max_speed = t.max_speed.max(speed(&x.velocity));
                    }
                }
            }
        }
    }
    problems
}

/// Run the check.
pub fn check(ctx: &Context) -> Check {
    let name = "bounds";
    let manifest = ctx.module.manifest();
    let adsorbed_source = manifest.draws_on.as_deref() == Some("adsorbed");
    let configs = envelope::configs(manifest);
    let mut problems: Vec<String> = Vec::new();
    let mut notes = Vec::new();
    let mut t =
        Tally { min_exchange: f64::INFINITY, max_exchange: f64::NEG_INFINITY, ..Tally::default() };
    let mut refused_configs = 0;
    'configs: for cfg in &configs {
        let mut inst = match ctx.instance(&cfg.params) {
            Ok(Ok(i)) => i,
            Ok(Err(d)) => {
                refused_configs += 1;
                notes.push(format!(
                    "{}: refused at initialisation ({})",
                    cfg.label, d.error.message
                ));
                continue;
            }
            Err(h) => {
                problems.push(format!("{}: instantiation failed: {h}", cfg.label));
                continue;
            }
        };
        for &call in &ctx.calls {
            let recs = envelope::sweep(call, ctx.options.sweep_records);
            let mut start = 0;
            while start < recs.len() {
                let chunk = recs.slice(start..(start + CHUNK).min(recs.len()));
                start += CHUNK;
                match envelope::run(&mut inst, call, &chunk) {
                    Err(h) => {
                        problems.push(format!("{}: {}: {h}", cfg.label, call.as_str()));
                        continue 'configs;
                    }
                    Ok(Ok(out)) => {
                        for p in judge(call, &chunk, &out, adsorbed_source, &mut t) {
                            problems.push(format!("{}: {p}", cfg.label));
                        }
                    }
                    Ok(Err(_)) => {
                        // Find which records the law refuses, one by one.
                        for i in 0..chunk.len() {
                            let one = chunk.slice(i..i + 1);
                            match envelope::run(&mut inst, call, &one) {
                                Err(h) => {
                                    problems.push(format!("{}: {}: {h}", cfg.label, call.as_str()));
                                    continue 'configs;
                                }
                                Ok(Ok(out)) => {
                                    for p in judge(call, &one, &out, adsorbed_source, &mut t) {
                                        problems.push(format!("{}: {p}", cfg.label));
                                    }
                                }
                                Ok(Err(d)) => {
                                    t.refused += 1;
                                    t.first_refusal.get_or_insert_with(|| {
                                        format!(
                                            "{}: {}: {}",
                                            cfg.label,
                                            call.as_str(),
                                            d.error.message
                                        )
                                    });
                                }
                            }
                        }
                    }
                }
                if problems.len() > 1000 {
                    break 'configs;
                }
            }
        }
    }
    let mut details: Vec<String> = Vec::new();
    details.push(format!(
        "{} parameter configurations ({} refused at initialisation), {} records accepted, {} refused by the law",
        configs.len(),
        refused_configs,
        t.records,
        t.refused
    ));
    if let Some(r) = &t.first_refusal {
        details.push(format!("first refusal: {r}"));
    }
    let mut c = Check::new(name, Status::Pass, "");
    if ctx.calls.contains(&Call::ReleaseRate) {
        c = c.measure("max_release_rate_cm-2_s-1", t.max_release);
    }
    if ctx.calls.contains(&Call::LossRate) {
        c = c.measure("max_loss_rate_s-1", t.max_loss);
    }
    if ctx.calls.contains(&Call::Exchange) && t.max_exchange.is_finite() {
        c = c.measure("min_exchange_cm-2_s-1", t.min_exchange);
        c = c.measure("max_exchange_cm-2_s-1", t.max_exchange);
    }
    if ctx.calls.iter().any(|k| matches!(k, Call::Launch | Call::Land)) {
        c = c.measure("max_speed_m_s-1", t.max_speed);
    }
    if ctx.calls.contains(&Call::Land) {
        let n = t.outcomes.iter().sum::<usize>().max(1) as f64;
        c = c.measure("stick_fraction", t.outcomes[0] as f64 / n);
        c = c.measure("bounce_fraction", t.outcomes[1] as f64 / n);
        c = c.measure("lost_fraction", t.outcomes[2] as f64 / n);
    }
    details.extend(notes.into_iter().take(MAX_LISTED));
    if problems.is_empty() {
        c.summary = format!(
            "finite and in bounds over {} records and {} parameter configurations",
            t.records,
            configs.len()
        );
        c.details(details)
    } else {
        c.status = Status::Fail;
        c.summary = format!("{} problems; first: {}", problems.len(), problems[0]);
        let more = problems.len().saturating_sub(MAX_LISTED);
        details.extend(problems.into_iter().take(MAX_LISTED));
        if more > 0 {
            details.push(format!("... and {more} more"));
        }
        c.details(details)
    }
}

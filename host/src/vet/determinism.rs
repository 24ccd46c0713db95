//! The `determinism` check: a module's outputs depend on its inputs alone.
//!
//! Why this exists: the engine promises bit-identical results at any
//! thread count, which holds only if every module is a pure function of
//! its records (randomness comes from the per-record key). A module that
//! keeps state between calls, or whose answer for one record depends on
//! its neighbours in the batch, breaks that promise silently. Vet calls
//! each role on the same swept records four ways and compares the bits:
//! twice on one instance, on a second instance, in reverse order, and
//! split into batches of seven.

use super::envelope::{self, Call, Records};
use super::{Check, Context, Status};
use crate::runtime::ProcessInstance;

/// Records per batch in the re-batched comparison.
const SMALL_BATCH: usize = 7;

type Outcome = Result<Vec<u64>, String>;

fn once(inst: &mut ProcessInstance, call: Call, recs: &Records) -> Result<Outcome, String> {
    match envelope::run(inst, call, recs) {
        Err(h) => Err(h.to_string()),
        Ok(Err(d)) => Ok(Err(d.to_string())),
        Ok(Ok(o)) => Ok(Ok(o.bits())),
    }
}

fn reversed(inst: &mut ProcessInstance, call: Call, recs: &Records) -> Result<Outcome, String> {
    match envelope::run(inst, call, &recs.reversed()) {
        Err(h) => Err(h.to_string()),
        Ok(Err(d)) => Ok(Err(d.to_string())),
        Ok(Ok(o)) => Ok(Ok(o.reversed().bits())),
    }
}

fn rebatched(inst: &mut ProcessInstance, call: Call, recs: &Records) -> Result<Outcome, String> {
    let mut bits = Vec::new();
    let mut start = 0;
    while start < recs.len() {
        let end = (start + SMALL_BATCH).min(recs.len());
        match envelope::run(inst, call, &recs.slice(start..end)) {
            Err(h) => return Err(h.to_string()),
            Ok(Err(d)) => return Ok(Err(d.to_string())),
            Ok(Ok(o)) => bits.extend(o.bits()),
        }
        start = end;
    }
    Ok(Ok(bits))
}

fn first_difference(a: &Outcome, b: &Outcome) -> String {
    match (a, b) {
        (Ok(x), Ok(y)) => match x.iter().zip(y).position(|(p, q)| p != q) {
            Some(i) => format!(
                "output word {i} differs: {:e} vs {:e}",
                f64::from_bits(x[i]),
                f64::from_bits(y[i])
            ),
            None => format!("{} vs {} output words", x.len(), y.len()),
        },
        (Err(x), Err(y)) => format!("refused differently: `{x}` vs `{y}`"),
        (Ok(_), Err(y)) => format!("accepted once, refused once: `{y}`"),
        (Err(x), Ok(_)) => format!("refused once, accepted once: `{x}`"),
    }
}

/// Run the check.
pub fn check(ctx: &Context) -> Check {
    let name = "determinism";
    let mut problems = Vec::new();
    let mut notes = Vec::new();
    for &call in &ctx.calls {
        let recs = envelope::sweep(call, ctx.options.determinism_records);
        let (mut one, mut two) = match (ctx.base_instance(name), ctx.base_instance(name)) {
            (Ok(a), Ok(b)) => (a, b),
            (Err(c), _) | (_, Err(c)) => return c,
        };
        let runs = (|| -> Result<[Outcome; 5], String> {
            let a = once(&mut one, call, &recs)?;
            let b = once(&mut one, call, &recs)?;
            let c = once(&mut two, call, &recs)?;
            let d = reversed(&mut two, call, &recs)?;
            let e = rebatched(&mut one, call, &recs)?;
            Ok([a, b, c, d, e])
        })();
        let [a, b, c, d, e] = match runs {
            Ok(r) => r,
            Err(h) => {
                problems.push(format!("{}: the call failed: {h}", call.as_str()));
                continue;
            }
        };
        let mut ok = true;
        for (what, other, applies) in [
            ("the same inputs a second time on one instance", &b, true),
            ("the same inputs on a second instance", &c, true),
            ("the inputs in reverse order", &d, a.is_ok()),
            (&*format!("the inputs in batches of {SMALL_BATCH}"), &e, a.is_ok()),
        ] {
            if applies && &a != other {
                ok = false;
                problems.push(format!(
                    "{}: {what} gave different outputs ({})",
                    call.as_str(),
                    first_difference(&a, other)
                ));
            }
        }
        if ok {
            notes.push(match &a {
                Ok(bits) => format!(
                    "{}: {} records bit-identical four ways ({} output words)",
                    call.as_str(),
                    recs.len(),
                    bits.len()
                ),
                Err(d) => format!("{}: refused identically each time ({d})", call.as_str()),
            });
        }
    }
    if problems.is_empty() {
        Check::new(
            name,
            Status::Pass,
            "bit-identical: twice, across two instances, reversed and re-batched",
        )
        .details(notes)
    } else {
        Check::new(name, Status::Fail, problems[0].clone()).details(problems)
    }
}

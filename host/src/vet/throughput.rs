//! The `throughput` check: what a module costs per record.
//!
//! Why this exists: a run makes hundreds of millions of calls' worth of
//! records, so a receiving group wants to know what a module costs before
//! it runs one. Vet times batches at the central state, reads the fuel the
//! last call used (fuel counts roughly one unit per wasm instruction, and,
//! unlike wall time, does not depend on the machine or its load) and the
//! linear memory the instance holds. Only fuel is judged; wall time is
//! reported with fuel metering on, which makes calls 20-40% slower than in
//! a run.

use std::time::Instant;

use super::envelope;
use super::{Check, Context, Status};

/// Most fuel a record may take on average, wasm instructions: about 0.1
/// to 1 ms of compute per record, a hundred times what the standard
/// modules need.
pub const MAX_FUEL_PER_RECORD: f64 = 200_000.0;
/// Least wall time spent timing each call, s.
const MIN_TIMING: f64 = 0.1;

/// Run the check.
pub fn check(ctx: &Context) -> Check {
    let name = "throughput";
    let mut c = Check::new(name, Status::Pass, "");
    let mut details = Vec::new();
    let mut worst: f64 = 0.0;
    for &call in &ctx.calls {
        let mut inst = match ctx.base_instance(name) {
            Ok(i) => i,
            Err(c) => return c,
        };
        let n = ctx.options.throughput_records;
        let recs = envelope::central(call, 0, n);
        let mut reps = 0u32;
        let t0 = Instant::now();
        let mut fuel_used = 0.0;
        loop {
            match envelope::run(&mut inst, call, &recs) {
                Err(h) => {
                    return Check::new(name, Status::Fail, format!("{}: {h}", call.as_str()));
                }
                Ok(Err(d)) => {
                    return Check::new(
                        name,
                        Status::Fail,
                        format!("{}: the law refused the central state: {d}", call.as_str()),
                    );
                }
                Ok(Ok(_)) => {}
            }
            if reps == 0 {
                // The whole batch call's fuel (one sub-batch: the records
                // are fewer than `max_batch`), fixed cost of the call included.
                fuel_used = inst.fuel_used() as f64;
            }
            reps += 1;
            if t0.elapsed().as_secs_f64() >= MIN_TIMING || reps >= 200 {
                break;
            }
        }
        let per_record_ns = t0.elapsed().as_secs_f64() * 1e9 / (reps as f64 * n as f64);
        let fuel = fuel_used / n as f64;
        worst = worst.max(fuel);
        let mem = inst.memory_bytes() as f64;
        let k = call.as_str().replace('-', "_");
        c = c
            .measure(&format!("{k}_ns_per_record"), per_record_ns)
            .measure(&format!("{k}_fuel_per_record"), fuel)
            .measure(&format!("{k}_memory_bytes"), mem);
        details.push(format!(
            "{}: {per_record_ns:.0} ns/record (fuel metering on), {fuel:.0} fuel/record, \
             {:.1} MiB linear memory, batches of {n}",
            call.as_str(),
            mem / (1024.0 * 1024.0)
        ));
        if fuel > ctx.options.max_fuel_per_record {
            c.status = Status::Fail;
        }
    }
    c.summary = if c.status == Status::Pass {
        format!("at most {worst:.0} fuel per record (limit {:.0})", ctx.options.max_fuel_per_record)
    } else {
        format!(
            "{worst:.0} fuel per record exceeds the limit of {:.0}",
            ctx.options.max_fuel_per_record
        )
    };
    c.details(details)
}

//! Checks on every value a module returns.
//!
//! Why this exists: a module can be wrong without trapping. A NaN rate
//! would silently poison the mass ledger, a negative loss rate would create
//! atoms, a launch faster than any physical process would leave the grid in
//! one step, and an unknown outcome code has no meaning. The host refuses
//! each of these at the boundary, naming the record.

use exobound_sdk::{Outcome, OutcomeKind, Velocity};

/// A rate that must be finite and non-negative (release, loss), in its unit.
pub fn nonnegative_rate(x: &f64, _max_speed: f64) -> Option<String> {
    if !x.is_finite() {
        Some(format!("the rate is {x}, not a finite number"))
    } else if *x < 0.0 {
        Some(format!("the rate is {x}, but this rate cannot be negative"))
    } else {
        None
    }
}

/// A rate that must be finite but may have either sign (exchange), atoms cm^-2 s^-1.
pub fn signed_rate(x: &f64, _max_speed: f64) -> Option<String> {
    (!x.is_finite()).then(|| format!("the exchange rate is {x}, not a finite number"))
}

/// An upward velocity with finite components below `max_speed`, m s^-1.
pub fn upward_velocity(v: &Velocity, max_speed: f64) -> Option<String> {
    if !(v.east.is_finite() && v.north.is_finite() && v.up.is_finite()) {
        return Some(format!("the velocity ({}, {}, {}) m/s is not finite", v.east, v.north, v.up));
    }
    let speed = v.speed();
    if speed > max_speed {
        return Some(format!("the speed {speed:.6e} m/s exceeds the bound of {max_speed:.3e} m/s"));
    }
    if v.up <= 0.0 {
        return Some(format!(
            "the upward velocity component is {} m/s; a launched or re-emitted atom must \
             leave the surface (up > 0)",
            v.up
        ));
    }
    None
}

/// A landing outcome: a known code, and an upward, bounded velocity for a bounce.
pub fn outcome(o: &Outcome, max_speed: f64) -> Option<String> {
    if o.reserved != 0 {
        return Some(format!("the reserved field is {}, but ABI v1 requires 0", o.reserved));
    }
    match OutcomeKind::from_code(o.kind) {
        None => Some(format!(
            "the outcome code is {}, but ABI v1 knows only 0 (stick), 1 (bounce) and 2 (lost)",
            o.kind
        )),
        Some(OutcomeKind::Bounce) => upward_velocity(&o.velocity, max_speed),
        Some(_) => None,
    }
}

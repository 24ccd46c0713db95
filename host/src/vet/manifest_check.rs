//! The `abi` and `manifest` checks of vet: what the file says about itself.
//!
//! Why this exists: the runtime already refuses a module whose ABI major
//! version is unsupported, whose manifest does not decode, or that imports
//! anything; vet turns those refusals into named, failed checks, and adds
//! what the runtime does not demand but a receiving group needs: a unit on
//! every number parameter written in a grammar the host can read, a
//! published source for the law, and reference points that exercise every
//! role the module declares, each with its own source.

use exobound_sdk::{ManifestInfo, Role};

use super::{Check, Status};
use crate::runtime::HostError;
use crate::runtime::module::{ModuleHeader, SUPPORTED_ABI_MAJOR, role_exports};

/// Unit symbols the unit grammar accepts (each may carry an integer power,
/// e.g. `cm^-2`, and be joined by spaces or one `/`).
pub const UNIT_SYMBOLS: [&str; 22] = [
    "m", "cm", "km", "s", "h", "d", "K", "eV", "keV", "J", "kg", "g", "u", "AU", "rad", "deg",
    "sr", "atoms", "atom", "ion", "ions", "photons",
];

/// Why a unit string is not readable, or `None` when it is. The empty
/// string means dimensionless (the SDK's convention) and is accepted.
pub fn unit_problem(unit: &str) -> Option<String> {
    let unit = unit.trim();
    if unit.is_empty() || unit == "1" {
        return None;
    }
    let mut parts: Vec<&str> = unit.splitn(2, '/').collect();
    if parts.len() == 2 && parts[1].contains('/') {
        return Some(format!("`{unit}` has more than one `/`"));
    }
    for part in parts.drain(..) {
        for token in part.split_whitespace() {
            let (sym, power) = match token.split_once('^') {
                Some((s, p)) => (s, Some(p)),
                None => (token, None),
            };
            if !UNIT_SYMBOLS.contains(&sym) {
                return Some(format!(
                    "`{unit}`: `{sym}` is not a unit vet knows ({})",
                    UNIT_SYMBOLS.join(", ")
                ));
            }
            if let Some(p) = power
                && p.parse::<i32>().is_err()
            {
                return Some(format!("`{unit}`: the power `^{p}` is not an integer"));
            }
        }
    }
    None
}

/// The `abi` check for a header that was read.
pub fn abi_pass(h: &ModuleHeader) -> Check {
    let mut details = vec![
        format!("ABI {} (this host implements major version {SUPPORTED_ABI_MAJOR})", h.abi),
        "imports: none (ABI v1 grants none)".to_string(),
    ];
    for role in &h.roles {
        details.push(format!("role {}: exports {}", role.as_str(), role_exports(*role).join(", ")));
    }
    Check::new("abi", Status::Pass, format!("ABI {} with the exports its roles need", h.abi))
        .details(details)
}

/// The checks for a file whose header the runtime refused: which check
/// failed depends on what was wrong.
pub fn refused(e: &HostError) -> (Check, Check) {
    let msg = e.to_string();
    let manifest_problem = matches!(
        e,
        HostError::ManifestMalformed { .. } | HostError::ManifestTooLarge { .. }
    ) || matches!(e, HostError::MissingSection { section, .. } if *section == exobound_sdk::MANIFEST_SECTION);
    if manifest_problem {
        (
            Check::new("abi", Status::NotRun, "not judged: the manifest could not be read"),
            Check::new("manifest", Status::Fail, msg),
        )
    } else {
        (
            Check::new("abi", Status::Fail, msg),
            Check::new("manifest", Status::NotRun, "not judged: the ABI check failed"),
        )
    }
}

fn role_checks(role: Role) -> &'static [&'static str] {
    match role {
        Role::Source => &["release-rate", "mean-launch-speed"],
        Role::Loss => &["loss-rate"],
        Role::SurfaceInteraction => &["stick-fraction"],
        Role::ReservoirProcess => &["exchange"],
    }
}

/// The `manifest` completeness check.
pub fn completeness(m: &ManifestInfo) -> Check {
    let mut problems = Vec::new();
    let mut notes = Vec::new();
    let blank = |s: &str| s.trim().is_empty();
    for (field, value) in
        [("description", &m.description), ("institution", &m.institution), ("licence", &m.licence)]
    {
        if blank(value) {
            problems.push(format!("`{field}` is empty"));
        }
    }
    if m.authors.iter().all(|a| blank(a)) {
        problems.push("`authors` is empty".to_string());
    }
    let src = m.law_source.trim().to_ascii_lowercase();
    if src.is_empty() || src.starts_with("none") {
        problems.push(format!(
            "`law_source` names no published source ({:?}); cite the paper or data the law follows",
            m.law_source
        ));
    }
    for p in &m.parameters {
        if blank(&p.description) {
            problems.push(format!("parameter `{}` has no description", p.name));
        }
        if p.choices.is_empty() {
            match unit_problem(&p.unit) {
                Some(why) => problems.push(format!("parameter `{}`: unit {why}", p.name)),
                None => notes.push(format!(
                    "parameter `{}`: unit {}",
                    p.name,
                    if p.unit.trim().is_empty() { "dimensionless" } else { p.unit.as_str() }
                )),
            }
            if p.min.is_none() || p.max.is_none() {
                problems.push(format!("parameter `{}` declares no allowed range", p.name));
            }
        } else if !blank(&p.unit) {
            problems.push(format!("choice parameter `{}` has a unit `{}`", p.name, p.unit));
        }
    }
    if m.reference_points.is_empty() {
        problems.push("the manifest holds no reference points".to_string());
    }
    for r in &m.reference_points {
        if blank(&r.source) {
            problems.push(format!("reference point `{}` names no source", r.description));
        }
        if !(r.tolerance >= 0.0 && r.tolerance.is_finite()) {
            problems
                .push(format!("reference point `{}` has tolerance {}", r.description, r.tolerance));
        }
    }
    if let Ok(roles) = m.parsed_roles() {
        for role in roles {
            let wanted = role_checks(role);
            if !m.reference_points.iter().any(|r| wanted.contains(&r.check.as_str())) {
                problems.push(format!(
                    "no reference point exercises the role `{}` (use a {} check)",
                    role.as_str(),
                    wanted.join(" or ")
                ));
            }
        }
    }
    if problems.is_empty() {
        Check::new(
            "manifest",
            Status::Pass,
            format!(
                "complete: {} parameters with units, a published source, {} reference points",
                m.parameters.len(),
                m.reference_points.len()
            ),
        )
        .details(notes)
    } else {
        Check::new("manifest", Status::Fail, problems.join("; ")).details(problems)
    }
}

#[cfg(test)]
mod tests {
    use super::unit_problem;

    #[test]
    fn the_units_of_the_standard_modules_read() {
        for u in ["", "cm^2", "cm^-2 s^-1", "K", "atoms/ion", "eV", "u", "s^-1", "K^-1"] {
            assert_eq!(unit_problem(u), None, "{u}");
        }
        assert!(unit_problem("bananas").is_some());
        assert!(unit_problem("cm^x").is_some());
        assert!(unit_problem("m/s/s").is_some());
    }
}

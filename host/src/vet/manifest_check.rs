//! The `abi` and `manifest` checks of vet: what the file says about itself.
//!
//! Why this exists: the runtime already refuses a module whose ABI major
//! version is unsupported, whose manifest does not decode, or that imports
//! anything; vet turns those refusals into named, failed checks, and adds
//! what the runtime does not demand but a receiving group needs: a unit on
//! every number parameter written in a grammar the host can read, a
//! published source for the law, reference points that exercise every
//! role the module declares, each with its own source, and text that prints
//! as it reads (no terminal control or invisible formatting characters).

use exobound_sdk::wire::ManifestInfo;
use exobound_sdk::{ParamValue, Role};

use super::{Check, Status};
use crate::runtime::HostError;
use crate::runtime::module::{ModuleHeader, SUPPORTED_ABI_MAJOR, role_exports};
use crate::text::{needs_escape, printable};

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
        if let Some(t) = &p.table {
            for c in &t.columns {
                match unit_problem(&c.unit) {
                    Some(why) => problems
                        .push(format!("table `{}`, column `{}`: unit {why}", p.name, c.name)),
                    None => notes.push(format!(
                        "table `{}`, column `{}`: unit {}",
                        p.name,
                        c.name,
                        if c.unit.trim().is_empty() { "dimensionless" } else { c.unit.as_str() }
                    )),
                }
            }
        } else if p.choices.is_empty() {
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
    for (field, value) in texts(m) {
        if let Some(c) = value.chars().find(|&c| needs_escape(c)) {
            problems.push(format!(
                "`{field}` holds U+{:04X}, a control or invisible formatting character that \
                 would act on the reader's terminal (the text, escaped: {}); write plain text",
                c as u32,
                printable(value)
            ));
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

/// Every string of the manifest with the field it sits in, e.g.
/// `parameters[0].description`.
fn texts(m: &ManifestInfo) -> Vec<(String, &str)> {
    let mut out: Vec<(String, &str)> = vec![
        ("name".into(), &m.name),
        ("version".into(), &m.version),
        ("description".into(), &m.description),
        ("institution".into(), &m.institution),
        ("licence".into(), &m.licence),
        ("law_source".into(), &m.law_source),
        ("ledger_label".into(), &m.ledger_label),
    ];
    if let Some(d) = &m.draws_on {
        out.push(("draws_on".into(), d));
    }
    for (list, field) in [(&m.roles, "roles"), (&m.authors, "authors"), (&m.inputs, "inputs")] {
        out.extend(list.iter().enumerate().map(|(i, s)| (format!("{field}[{i}]"), s.as_str())));
    }
    for (i, p) in m.parameters.iter().enumerate() {
        let at = |f: &str| format!("parameters[{i}].{f}");
        out.push((at("name"), &p.name));
        out.push((at("unit"), &p.unit));
        out.push((at("description"), &p.description));
        out.push((at("default_origin"), &p.default_origin));
        if let Some(ParamValue::Text(t)) = &p.default {
            out.push((at("default"), t));
        }
        out.extend(
            p.choices.iter().enumerate().map(|(j, c)| (at(&format!("choices[{j}]")), c.as_str())),
        );
        if let Some(t) = &p.table {
            for (j, c) in t.columns.iter().enumerate() {
                out.push((at(&format!("table.columns[{j}].name")), &c.name));
                out.push((at(&format!("table.columns[{j}].unit")), &c.unit));
            }
        }
    }
    for (i, r) in m.reference_points.iter().enumerate() {
        let at = |f: &str| format!("reference_points[{i}].{f}");
        out.push((at("description"), &r.description));
        out.push((at("check"), &r.check));
        out.push((at("source"), &r.source));
        for (name, v) in &r.parameters {
            out.push((at("parameters"), name));
            if let ParamValue::Text(t) = v {
                out.push((at(&format!("parameters.{name}")), t));
            }
        }
        out.extend(r.input.iter().map(|(name, _)| (at("input"), name.as_str())));
    }
    out
}

#[cfg(test)]
mod tests {
    use super::unit_problem;

    #[test]
    fn hidden_characters_anywhere_in_the_manifest_fail_the_check_naming_the_field() {
        use super::{Status, completeness};
        use exobound_sdk::ParamValue;
        use exobound_sdk::wire::{ManifestInfo, ParamInfo, ReferenceInfo};
        let clean = ManifestInfo {
            name: "clean".into(),
            version: "1.0.0".into(),
            description: "Na loss by photoionization, 5 µm–1 Å, 90°".into(),
            roles: vec!["loss".into()],
            authors: vec!["Åsa Öberg".into()],
            institution: "Institut für Exosphären".into(),
            licence: "Apache-2.0".into(),
            law_source: "Huebner & Mukherjee (2015)".into(),
            draws_on: None,
            ledger_label: "photoionization".into(),
            inputs: vec![],
            parameters: vec![ParamInfo {
                name: "mode".into(),
                unit: String::new(),
                description: "which branch".into(),
                default: Some(ParamValue::Text("quiet".into())),
                min: None,
                max: None,
                choices: vec!["quiet".into(), "active".into()],
                default_origin: "common practice".into(),
                table: None,
            }],
            reference_points: vec![ReferenceInfo {
                description: "1 AU".into(),
                check: "loss-rate".into(),
                parameters: vec![("mode".into(), ParamValue::Text("quiet".into()))],
                input: vec![("helio_distance".into(), 1.0)],
                expected: 1e-5,
                tolerance: 1e-9,
                source: "a table".into(),
            }],
            launch_laws: Vec::new(),
        };
        assert_eq!(completeness(&clean).status, Status::Pass, "{:?}", completeness(&clean));
        type Edit = fn(&mut ManifestInfo);
        let edits: [(&str, Edit); 5] = [
            ("description", |m| m.description.push_str("\u{1b}[2J")),
            ("authors[0]", |m| m.authors[0].push('\r')),
            ("parameters[0].choices[1]", |m| m.parameters[0].choices[1].push('\u{202e}')),
            ("reference_points[0].parameters.mode", |m| {
                m.reference_points[0].parameters[0].1 = ParamValue::Text("quiet\u{7}".into())
            }),
            ("ledger_label", |m| m.ledger_label.push('\u{9b}')),
        ];
        for (field, edit) in edits {
            let mut m = clean.clone();
            edit(&mut m);
            let c = completeness(&m);
            assert_eq!(c.status, Status::Fail, "{field}");
            assert!(c.summary.contains(&format!("`{field}` holds U+")), "{field}: {}", c.summary);
            assert!(!c.summary.chars().any(crate::text::needs_escape), "{}", c.summary);
        }
    }

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

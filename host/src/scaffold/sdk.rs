//! The SDK sources that `exobound module new` copies into a new crate.
//!
//! Why this exists: a module is known by its digest, so its bytes must not
//! depend on where its crate or the SDK lie. cargo hashes the absolute
//! location of a path dependency that lies outside the crate's workspace
//! into the symbol names of that dependency's code, and the symbol names
//! decide the order of the functions in the `.wasm` file: a crate that
//! reaches the SDK at `../../exobound/process-sdk` builds to different
//! bytes on every machine, path remapping or not. A copy inside the crate
//! is a member of the crate's own workspace, known by a relative path, and
//! builds to the same bytes wherever the crate is put. The copy is the SDK
//! this binary was built with, embedded here, so `module new` needs no
//! source tree: an installed binary scaffolds as well as a checkout.

use toml::{Table, Value};

/// The directory, inside a scaffolded crate, that holds its SDK copy.
pub const COPY_DIR: &str = "exobound-sdk";

/// The SDK's source files: (path inside the SDK crate, contents). The test
/// `every_sdk_source_is_embedded` fails when a file is added to
/// `process-sdk/src/` and not here.
pub const SOURCES: &[(&str, &str)] = &[
    ("src/abi.rs", include_str!("../../../process-sdk/src/abi.rs")),
    ("src/constants.rs", include_str!("../../../process-sdk/src/constants.rs")),
    ("src/launch_law.rs", include_str!("../../../process-sdk/src/launch_law.rs")),
    ("src/lib.rs", include_str!("../../../process-sdk/src/lib.rs")),
    ("src/manifest.rs", include_str!("../../../process-sdk/src/manifest.rs")),
    ("src/math.rs", include_str!("../../../process-sdk/src/math.rs")),
    ("src/params.rs", include_str!("../../../process-sdk/src/params.rs")),
    ("src/records.rs", include_str!("../../../process-sdk/src/records.rs")),
    ("src/rng.rs", include_str!("../../../process-sdk/src/rng.rs")),
    ("src/roles.rs", include_str!("../../../process-sdk/src/roles.rs")),
    ("src/sample.rs", include_str!("../../../process-sdk/src/sample.rs")),
    ("src/table.rs", include_str!("../../../process-sdk/src/table.rs")),
    ("src/testing.rs", include_str!("../../../process-sdk/src/testing.rs")),
    ("src/wire.rs", include_str!("../../../process-sdk/src/wire.rs")),
];

/// The SDK's own Cargo.toml, which inherits from the workspace's.
const SDK_MANIFEST: &str = include_str!("../../../process-sdk/Cargo.toml");
/// The workspace's Cargo.toml, for the values the SDK inherits.
const WORKSPACE_MANIFEST: &str = include_str!("../../../Cargo.toml");

/// Package keys that name files the copy does not carry.
const FILE_KEYS: [&str; 4] = ["readme", "license-file", "build", "workspace"];
/// Sections a copy that is only built, never tested, does not need.
const DROPPED: [&str; 5] = ["dev-dependencies", "test", "bench", "example", "workspace"];

/// The SDK's version, e.g. `0.1.0`.
pub fn version() -> String {
    match standalone_manifest() {
        Ok(m) => m
            .get("package")
            .and_then(|p| p.get("version"))
            .and_then(Value::as_str)
            .unwrap_or_default()
            .to_string(),
        Err(_) => String::new(),
    }
}

/// The SDK's Cargo.toml made standalone: every `workspace = true` key
/// replaced by the workspace's value, dev-dependencies and test targets
/// dropped (the copy is built, not tested).
pub fn standalone_manifest() -> Result<Table, String> {
    let sdk: Table = SDK_MANIFEST.parse().map_err(|e| format!("the SDK's Cargo.toml: {e}"))?;
    let ws: Table =
        WORKSPACE_MANIFEST.parse().map_err(|e| format!("the workspace's Cargo.toml: {e}"))?;
    let ws = ws.get("workspace").and_then(Value::as_table).cloned().unwrap_or_default();
    let section = |name: &str| ws.get(name).and_then(Value::as_table).cloned().unwrap_or_default();
    let (ws_package, ws_deps) = (section("package"), section("dependencies"));
    let mut out = Table::new();
    for (key, value) in sdk {
        if DROPPED.contains(&key.as_str()) {
            continue;
        }
        let value = match key.as_str() {
            "package" => Value::Table(resolve_package(value, &ws_package)?),
            "dependencies" | "build-dependencies" => {
                Value::Table(resolve_dependencies(&key, value, &ws_deps)?)
            }
            "target" => {
                let mut targets = Table::new();
                for (cfg, t) in value.as_table().cloned().unwrap_or_default() {
                    let mut t = t.as_table().cloned().unwrap_or_default();
                    t.remove("dev-dependencies");
                    for kind in ["dependencies", "build-dependencies"] {
                        if let Some(d) = t.remove(kind) {
                            t.insert(
                                kind.into(),
                                Value::Table(resolve_dependencies(kind, d, &ws_deps)?),
                            );
                        }
                    }
                    targets.insert(cfg, Value::Table(t));
                }
                Value::Table(targets)
            }
            "lints" if inherits(&value) => match ws.get("lints") {
                Some(l) => l.clone(),
                None => continue,
            },
            _ => value,
        };
        out.insert(key, value);
    }
    Ok(out)
}

/// Whether `value` is `{ workspace = true, ... }`.
fn inherits(value: &Value) -> bool {
    value.get("workspace").and_then(Value::as_bool) == Some(true)
}

fn resolve_package(value: Value, ws_package: &Table) -> Result<Table, String> {
    let mut out = Table::new();
    for (key, v) in value.as_table().cloned().unwrap_or_default() {
        if FILE_KEYS.contains(&key.as_str()) {
            continue;
        }
        let v = if inherits(&v) {
            ws_package.get(&key).cloned().ok_or_else(|| {
                format!("the SDK inherits `package.{key}`, which the workspace does not set")
            })?
        } else {
            v
        };
        out.insert(key, v);
    }
    Ok(out)
}

fn resolve_dependencies(kind: &str, value: Value, ws_deps: &Table) -> Result<Table, String> {
    let mut out = Table::new();
    for (name, spec) in value.as_table().cloned().unwrap_or_default() {
        let mut resolved = match &spec {
            v if inherits(v) => match ws_deps.get(&name) {
                Some(Value::String(version)) => {
                    Table::from_iter([("version".to_string(), Value::String(version.clone()))])
                }
                Some(Value::Table(t)) => t.clone(),
                _ => {
                    return Err(format!(
                        "the SDK inherits {kind} `{name}`, which the workspace does not declare"
                    ));
                }
            },
            Value::String(version) => {
                Table::from_iter([("version".to_string(), Value::String(version.clone()))])
            }
            Value::Table(t) => t.clone(),
            _ => return Err(format!("the SDK's {kind} `{name}` is neither a version nor a table")),
        };
        if let Value::Table(local) = &spec {
            for (k, v) in local {
                match (k.as_str(), resolved.get_mut(k)) {
                    ("workspace", _) => {}
                    ("features", Some(Value::Array(base))) => {
                        base.extend(v.as_array().cloned().unwrap_or_default())
                    }
                    _ => {
                        resolved.insert(k.clone(), v.clone());
                    }
                }
            }
        }
        if resolved.contains_key("path") || resolved.contains_key("git") {
            return Err(format!(
                "the SDK's {kind} `{name}` is a path or git dependency, which a copy of the SDK \
                 cannot follow; the SDK must depend on registry crates only"
            ));
        }
        out.insert(name, Value::Table(resolved));
    }
    Ok(out)
}

/// The text of the copy's Cargo.toml: `[package]` first, then the rest.
pub fn manifest_text() -> Result<String, String> {
    let mut m = standalone_manifest()?;
    let mut text = format!(
        "# A copy of exobound-sdk {}, written by `exobound module new`.\n\
         # It lives inside the module crate so that the module builds to the same bytes\n\
         # wherever the crate is put (see docs/sharing.md, \"Reproducible builds\").\n\
         # Edit it only if you mean to publish your edits with your module's source.\n\n",
        version()
    );
    let order = ["package", "lib", "features", "dependencies", "build-dependencies"];
    let mut keys: Vec<String> = order.iter().map(|k| k.to_string()).collect();
    keys.extend(m.keys().filter(|k| !order.contains(&k.as_str())).cloned());
    for key in keys {
        if let Some(v) = m.remove(&key) {
            let one = Table::from_iter([(key, v)]);
            text += &toml::to_string(&one).map_err(|e| e.to_string())?;
            text += "\n";
        }
    }
    Ok(text)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::path::{Path, PathBuf};

    fn files_under(dir: &Path, base: &Path, out: &mut Vec<String>) {
        for entry in std::fs::read_dir(dir).unwrap().flatten() {
            let p = entry.path();
            if p.is_dir() {
                files_under(&p, base, out);
            } else {
                out.push(p.strip_prefix(base).unwrap().to_string_lossy().replace('\\', "/"));
            }
        }
    }

    #[test]
    fn every_sdk_source_is_embedded() {
        let sdk = PathBuf::from(env!("EXOBOUND_SDK_DIR"));
        let mut on_disk = Vec::new();
        files_under(&sdk.join("src"), &sdk, &mut on_disk);
        on_disk.sort();
        let mut embedded: Vec<String> = SOURCES.iter().map(|(p, _)| p.to_string()).collect();
        embedded.sort();
        assert_eq!(
            on_disk, embedded,
            "process-sdk/src and SOURCES in host/src/scaffold/sdk.rs must list the same files"
        );
    }

    #[test]
    fn the_copy_manifest_stands_alone() {
        let m = standalone_manifest().unwrap();
        let text = manifest_text().unwrap();
        assert!(!text.contains("workspace = true"), "{text}");
        let package = m["package"].as_table().unwrap();
        assert_eq!(package["name"].as_str(), Some("exobound-sdk"));
        assert_eq!(package["version"].as_str(), Some(version().as_str()));
        assert!(!version().is_empty());
        for (name, spec) in m["dependencies"].as_table().unwrap() {
            assert!(spec.get("version").is_some(), "{name}: {spec}");
            assert!(!inherits(spec), "{name}: {spec}");
        }
        // The written text parses back to the same table.
        let back: Table = text.parse().unwrap();
        assert_eq!(back, m);
    }
}

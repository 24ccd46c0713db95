//! Reading the scenario text: syntax errors with file:line:column, unknown
//! keys with the nearest valid one, and `--set KEY=VALUE` overrides.
//!
//! Why this exists: the first thing a modeller sees of a mistyped scenario
//! is this module's message, so it must point at the place and suggest
//! the fix ("unknown key `dtt` in [run]; did you mean `dt`?").

use super::{ScenarioError, ScenarioFile};

/// Parse `text` (named `origin` in messages) into a [`ScenarioFile`] and
/// apply `overrides`, each `KEY=VALUE` with a dotted key such as
/// `run.seed` or `processes.0.parameters.flux` (a process may also be
/// named by its module, `processes.impact-vapor.parameters.flux`).
pub fn parse_file(
    text: &str,
    origin: &str,
    overrides: &[String],
) -> Result<ScenarioFile, ScenarioError> {
    let file: ScenarioFile =
        toml::from_str(text).map_err(|e| ScenarioError(describe(origin, text, &e)))?;
    if overrides.is_empty() {
        return Ok(file);
    }
    let mut table: toml::Table =
        toml::from_str(text).map_err(|e| ScenarioError(describe(origin, text, &e)))?;
    for o in overrides {
        apply(&mut table, o).map_err(|m| ScenarioError(format!("--set {o}: {m}")))?;
    }
    toml::Value::Table(table).try_into::<ScenarioFile>().map_err(|e| {
        ScenarioError(format!("{origin}: after the --set overrides: {}", suggest(e.message())))
    })
}

/// A toml error as `origin:line:column: message`, unknown keys with a suggestion.
pub(crate) fn describe(origin: &str, text: &str, e: &toml::de::Error) -> String {
    let msg = suggest(e.message());
    match e.span() {
        Some(span) => {
            let (line, col) = line_col(text, span.start);
            let section = section_at(text, span.start);
            let where_ =
                if section.is_empty() { String::new() } else { format!(" (in [{section}])") };
            format!("{origin}:{line}:{col}: {msg}{where_}")
        }
        None => format!("{origin}: {msg}"),
    }
}

/// 1-based line and column (in characters) of byte offset `at`.
pub fn line_col(text: &str, at: usize) -> (usize, usize) {
    let at = at.min(text.len());
    let before = &text[..at];
    let line = before.matches('\n').count() + 1;
    let col = before.rsplit('\n').next().map_or(0, |l| l.chars().count()) + 1;
    (line, col)
}

/// The `[section]` header in force at byte offset `at`, or "" at top level.
fn section_at(text: &str, at: usize) -> String {
    let before = &text[..at.min(text.len())];
    for line in before.lines().rev() {
        let t = line.trim();
        if t.starts_with('[') {
            return t.trim_matches(|c| c == '[' || c == ']').trim().to_string();
        }
    }
    String::new()
}

/// Rewrite serde's "unknown field `x`, expected one of `a`, `b`" into a
/// message with the nearest valid key.
fn suggest(msg: &str) -> String {
    let Some(rest) = msg.strip_prefix("unknown field `") else { return msg.to_string() };
    let Some((name, tail)) = rest.split_once('`') else { return msg.to_string() };
    let valid: Vec<&str> = tail.split('`').skip(1).step_by(2).collect();
    unknown_message(name, &valid, "key")
}

/// "unknown KIND `name`; did you mean `best`? (valid: ...)".
pub fn unknown_message(name: &str, valid: &[&str], kind: &str) -> String {
    let best = valid.iter().min_by_key(|v| edit_distance(name, v)).copied();
    let list = valid.iter().map(|v| format!("`{v}`")).collect::<Vec<_>>().join(", ");
    match best {
        Some(b) if edit_distance(name, b) <= (b.len().max(name.len()) / 2).max(2) => {
            format!("unknown {kind} `{name}`; did you mean `{b}`? (valid: {list})")
        }
        _ if valid.is_empty() => format!("unknown {kind} `{name}`; none are accepted here"),
        _ => format!("unknown {kind} `{name}`; valid: {list}"),
    }
}

/// Levenshtein distance between `a` and `b`, in characters.
pub fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        cur[0] = i + 1;
        for (j, cb) in b.iter().enumerate() {
            let sub = prev[j] + usize::from(ca != *cb);
            cur[j + 1] = sub.min(prev[j + 1] + 1).min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
}

/// Apply one `KEY=VALUE` to `table`.
fn apply(table: &mut toml::Table, setting: &str) -> Result<(), String> {
    let (key, raw) = setting.split_once('=').ok_or("expected KEY=VALUE, e.g. --set run.seed=7")?;
    let (key, raw) = (key.trim(), raw.trim());
    if key.is_empty() {
        return Err("the key is empty".into());
    }
    // A TOML value if it parses as one ("7", "true", "\"x\""), else text.
    let value = toml::from_str::<toml::Table>(&format!("v = {raw}"))
        .ok()
        .and_then(|mut t| t.remove("v"))
        .unwrap_or_else(|| toml::Value::String(raw.to_string()));
    let parts: Vec<&str> = key.split('.').collect();
    let mut here = table;
    for (n, part) in parts.iter().enumerate() {
        let last = n + 1 == parts.len();
        if last {
            here.insert(part.to_string(), value);
            return Ok(());
        }
        let entry =
            here.entry(part.to_string()).or_insert_with(|| toml::Value::Table(toml::Table::new()));
        here = match entry {
            toml::Value::Table(t) => t,
            toml::Value::Array(items) => {
                let sel = parts[n + 1];
                let idx = match sel.parse::<usize>() {
                    Ok(i) => i,
                    Err(_) => items
                        .iter()
                        .position(|it| {
                            it.get("module").and_then(|m| m.as_str()).is_some_and(|m| {
                                m == sel
                                    || m.strip_prefix("standard:") == Some(sel)
                                    || m.ends_with(&format!("/{sel}.wasm"))
                                    || m == format!("{sel}.wasm")
                            })
                        })
                        .ok_or_else(|| format!("no entry of `{part}` uses the module `{sel}`"))?,
                };
                let len = items.len();
                let item = items.get_mut(idx).ok_or_else(|| {
                    format!("`{part}` has {len} entries; index {idx} is out of range")
                })?;
                // Skip the selector part.
                return match item {
                    toml::Value::Table(t) => {
                        let rest = parts[n + 2..].join(".");
                        if rest.is_empty() {
                            return Err(format!("name a key inside `{part}.{sel}`"));
                        }
                        apply(t, &format!("{rest}={raw}"))
                    }
                    _ => Err(format!("`{part}.{sel}` is not a table")),
                };
            }
            _ => return Err(format!("`{}` is a value, not a section", parts[..=n].join("."))),
        };
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levenshtein_worked_values() {
        // Classic worked example (Levenshtein 1966; any textbook): kitten -> sitting = 3.
        assert_eq!(edit_distance("kitten", "sitting"), 3);
        assert_eq!(edit_distance("", "abc"), 3);
        assert_eq!(edit_distance("dt", "dt"), 0);
    }

    #[test]
    fn suggestion_picks_the_nearest_key() {
        let m = suggest("unknown field `dtt`, expected one of `dt`, `duration`, `seed`");
        assert!(m.contains("did you mean `dt`?"), "{m}");
        let m = suggest("unknown field `zzzzzzzz`, expected `dt`");
        assert!(!m.contains("did you mean"), "{m}");
    }

    #[test]
    fn line_and_column_are_one_based() {
        let t = "a = 1\nbb = 2\n";
        assert_eq!(line_col(t, 0), (1, 1));
        assert_eq!(line_col(t, 6), (2, 1));
        assert_eq!(line_col(t, 9), (2, 4));
    }

    #[test]
    fn overrides_reach_nested_and_listed_keys() {
        let mut t: toml::Table = toml::from_str(
            "[run]\nseed = 1\n[[processes]]\nmodule = \"standard:impact-vapor\"\n[processes.parameters]\nflux = \"1 x\"\n",
        )
        .unwrap();
        apply(&mut t, "run.seed=7").unwrap();
        apply(&mut t, "run.dt=600 s").unwrap();
        apply(&mut t, "processes.impact-vapor.parameters.flux=\"2e4 cm^-2 s^-1\"").unwrap();
        apply(&mut t, "processes.0.role=source").unwrap();
        assert_eq!(t["run"]["seed"].as_integer(), Some(7));
        assert_eq!(t["run"]["dt"].as_str(), Some("600 s"));
        let p = &t["processes"][0];
        assert_eq!(p["parameters"]["flux"].as_str(), Some("2e4 cm^-2 s^-1"));
        assert_eq!(p["role"].as_str(), Some("source"));
        assert!(apply(&mut t, "processes.9.role=x").unwrap_err().contains("out of range"));
        assert!(apply(&mut t, "processes.nope.role=x").unwrap_err().contains("`nope`"));
        assert!(apply(&mut t, "noequals").is_err());
    }
}

//! Replicas: one scenario run as N independent runs (on N nodes, say) whose
//! products are merged into one output directory with standard errors.
//!
//! Why this exists: a long or finely binned run is limited by Monte Carlo
//! noise, and one process can use only one machine. N replicas of one
//! scenario differ only in their seed, so they can run anywhere at once;
//! their mean has the noise of one N times longer run, and the scatter
//! between them measures that noise directly. This module defines what a
//! replica is and how it is recognised again:
//!
//! - replica `I/N` (0 <= I < N, the same 0-based convention as a sweep's
//!   `--shard I/N` and Slurm's `$SLURM_ARRAY_TASK_ID`) runs with the seed
//!   [`replica_seed`]`(S, I)` derived from the run seed S;
//! - the seed is applied as one more override, `run.seed=<seed> # exobound
//!   replica I/N, base seed S` ([`seed_override`]), so the replica's
//!   `provenance.json`, its NetCDF `overrides` attribute and any checkpoint
//!   (hence `--resume`) all carry which replica it is;
//! - [`ReplicaRun::read`] reads a finished replica back and checks that
//!   record against the seed actually used; [`scenario_digest`] identifies
//!   the scenario apart from its seed, so that replicas of different
//!   scenarios are never merged.
//!
//! [`merge`] does the merging, [`slurm`] writes job arrays of replicas.

pub mod figures;
pub mod merge;
pub mod slurm;
pub mod tables;

use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};
use serde_json::{Value, json};

use crate::checkpoint::ScenarioSource;
use crate::output::PROVENANCE_FILE;

pub use merge::{MergeOptions, MergeReport, merge};

/// SplitMix64's increment, the odd integer nearest 2^64 / golden ratio
/// (Steele, Lea & Flood 2014, "Fast splittable pseudorandom number
/// generators", OOPSLA; also Vigna's reference `splitmix64.c`).
pub const GOLDEN_GAMMA: u64 = 0x9E37_79B9_7F4A_7C15;

/// Replica seeds are kept below 2^63 because scenario integers (`run.seed`
/// in TOML) are signed 64-bit.
pub const SEED_MASK: u64 = i64::MAX as u64;

/// The SplitMix64 output function (finaliser): a bijection of u64 that
/// spreads every input bit over the whole output (Steele, Lea & Flood 2014;
/// constants from Vigna's `splitmix64.c`).
pub fn mix64(mut z: u64) -> u64 {
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The engine seed of replica `index` (0-based) of base seed `base`: the
/// (index + 1)-th output of a SplitMix64 generator seeded with `base`,
/// `mix64(base + (index + 1) * GOLDEN_GAMMA)` (wrapping arithmetic), with
/// the top bit cleared ([`SEED_MASK`]). It does not depend on the number of
/// replicas. Different indices give different values of `mix64` (a
/// bijection of distinct inputs); after the mask two coincide with
/// probability about 2^-63 per pair, and a replica seed equals a small
/// plain seed (below 2^32, say) with probability about 2^-31.
pub fn replica_seed(base: u64, index: usize) -> u64 {
    let step = GOLDEN_GAMMA.wrapping_mul(index as u64 + 1);
    mix64(base.wrapping_add(step)) & SEED_MASK
}

/// Which replica of how many: `index` from 0 to `count - 1`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
pub struct Replica {
    /// This replica, 0-based, dimensionless.
    pub index: usize,
    /// Number of replicas in the set, dimensionless (at least 2).
    pub count: usize,
}

impl Replica {
    /// Parse `I/N` as given to `--replica` (0 <= I < N, N >= 2).
    pub fn parse(s: &str) -> Result<Replica, String> {
        let usage = format!(
            "--replica `{s}`: write I/N with 0 <= I < N and N >= 2, e.g. --replica 0/4 for the \
             first of four replicas (indices are 0-based, like $SLURM_ARRAY_TASK_ID)"
        );
        let (i, n) = s.split_once('/').ok_or_else(|| usage.clone())?;
        match (i.trim().parse::<usize>(), n.trim().parse::<usize>()) {
            (Ok(index), Ok(count)) if count >= 2 && index < count => Ok(Replica { index, count }),
            _ => Err(usage),
        }
    }
}

impl std::fmt::Display for Replica {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

/// The comment that marks the replica's seed override.
const MARKER: &str = "exobound replica ";

/// The override that makes a run replica `r` of base seed `base`:
/// `run.seed=<replica seed> # exobound replica I/N, base seed S`. The TOML
/// comment is ignored by the scenario reader and kept, as written, in the
/// provenance and in checkpoints.
pub fn seed_override(base: u64, r: Replica) -> String {
    format!("run.seed={} # {MARKER}{r}, base seed {base}", replica_seed(base, r.index))
}

/// Make `source` replica `r` of its own run seed `base_seed` (the seed the
/// scenario resolves to with the overrides it already has).
pub fn apply(source: &mut ScenarioSource, base_seed: u64, r: Replica) {
    source.overrides.push(seed_override(base_seed, r));
}

/// What a replica marker override says.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Marker {
    /// The seed it sets.
    pub seed: u64,
    /// Which replica.
    pub replica: Replica,
    /// The base seed the replica seed was derived from.
    pub base_seed: u64,
}

/// Parse an override written by [`seed_override`]; `None` for any other.
pub fn parse_marker(s: &str) -> Option<Marker> {
    let rest = s.trim().strip_prefix("run.seed")?.trim_start().strip_prefix('=')?;
    let (seed, comment) = rest.split_once('#')?;
    let seed = seed.trim().parse().ok()?;
    let (r, base) = comment.trim().strip_prefix(MARKER)?.split_once(", base seed ")?;
    let (i, n) = r.split_once('/')?;
    let replica = Replica { index: i.trim().parse().ok()?, count: n.trim().parse().ok()? };
    Some(Marker { seed, replica, base_seed: base.trim().parse().ok()? })
}

/// One module as recorded in `provenance.json` (see `output::provenance`).
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ModuleEntry {
    /// Manifest name.
    pub name: String,
    /// Manifest version.
    pub version: String,
    /// Role it played.
    pub role: String,
    /// The `module` key as written.
    pub spec: String,
    /// The resolved file.
    pub path: String,
    /// SHA-256 of the file, hex.
    pub sha256: String,
    /// Parameters passed, in the module's units.
    pub parameters: Value,
    /// The tables of the module's table parameters (`None` in a record
    /// from before table parameters). Not part of [`identity`]: a given
    /// table's values are in `parameters`, and a default table is covered
    /// by the module's digest.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub tables: Option<Value>,
}

/// `provenance.json` read back, field by field in the order the run writes
/// them; fields this type does not know are kept in `other`, so a merged
/// provenance loses nothing a newer engine records.
#[derive(Clone, Debug, Serialize, Deserialize)]
pub struct ProvenanceFile {
    /// The program.
    pub engine: String,
    /// Its version.
    pub engine_version: String,
    /// The process ABI version.
    pub abi_version: String,
    /// Where the scenario came from.
    pub scenario_origin: String,
    /// The run seed.
    pub seed: u64,
    /// `KEY=VALUE` overrides applied, in order.
    pub overrides: Vec<String>,
    /// The scenario after overrides.
    pub scenario_resolved: Value,
    /// The scenario text as given.
    pub scenario_text: String,
    /// The modules, in scenario order.
    pub modules: Vec<ModuleEntry>,
    /// A reminder of what the numbers are.
    pub caution: String,
    /// Present only in a merged directory: what was merged.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub replicas: Option<Value>,
    /// Anything else the file holds.
    #[serde(flatten)]
    pub other: serde_json::Map<String, Value>,
}

impl ProvenanceFile {
    /// Read `dir/provenance.json`.
    pub fn read(dir: &Path) -> Result<ProvenanceFile, String> {
        let path = dir.join(PROVENANCE_FILE);
        let text = std::fs::read_to_string(&path)
            .map_err(|e| format!("cannot read `{}`: {e}", path.display()))?;
        serde_json::from_str(&text).map_err(|e| {
            format!(
                "`{}` is not an exobound provenance record ({e}); give the output directory of \
                 a finished `exobound run --replica I/N`",
                path.display()
            )
        })
    }

    /// The overrides other than the replica marker, in order.
    pub fn common_overrides(&self) -> Vec<String> {
        self.overrides.iter().filter(|o| parse_marker(o).is_none()).cloned().collect()
    }
}

/// Settings that never change a result (thread count, checkpoint
/// interval, sandbox limits) or that differ between replicas by design
/// (the seed); left out of [`scenario_digest`].
const RUN_KEYS_IGNORED: [&str; 3] = ["seed", "threads", "checkpoint_every"];

/// What [`scenario_digest`] hashes: the engine and ABI versions, the
/// resolved scenario without the keys of [`RUN_KEYS_IGNORED`] and the
/// `[sandbox]` table, every module's name, version, role, SHA-256 and
/// parameters, and the g-factor table's record if there is one.
pub fn identity(p: &ProvenanceFile) -> Value {
    let mut resolved = p.scenario_resolved.clone();
    if let Some(obj) = resolved.as_object_mut() {
        obj.remove("sandbox");
        if let Some(run) = obj.get_mut("run").and_then(Value::as_object_mut) {
            for k in RUN_KEYS_IGNORED {
                run.remove(k);
            }
        }
    }
    let modules: Vec<Value> = p
        .modules
        .iter()
        .map(|m| {
            json!({
                "name": m.name, "version": m.version, "role": m.role,
                "sha256": m.sha256, "parameters": m.parameters,
            })
        })
        .collect();
    let mut id = json!({
        "engine_version": p.engine_version,
        "abi_version": p.abi_version,
        "scenario": resolved,
        "modules": modules,
    });
    // The g-factor table (its origin and file digest), when the run records
    // one: replicas whose tables differ are different runs. Left out when
    // absent, so older runs keep their digest.
    if let (Some(g), Some(obj)) = (p.other.get("g_factor_table"), id.as_object_mut()) {
        obj.insert("g_factor_table".into(), g.clone());
    }
    id
}

/// SHA-256 (hex) of the compact JSON of [`identity`]: equal for replicas of
/// one scenario, whatever their seeds, thread counts or file paths. (JSON
/// objects serialise with sorted keys, so the text is canonical.)
pub fn scenario_digest(p: &ProvenanceFile) -> String {
    let text = serde_json::to_vec(&identity(p)).unwrap_or_default();
    crate::runtime::module::sha256_hex(&text)
}

/// The first place where two JSON values differ, as `path: a vs b` (each
/// value shortened), or `None` if they are equal.
pub fn first_difference(a: &Value, b: &Value) -> Option<String> {
    fn short(v: &Value) -> String {
        let s = v.to_string();
        if s.chars().count() > 60 {
            format!("{}...", s.chars().take(57).collect::<String>())
        } else {
            s
        }
    }
    fn walk(a: &Value, b: &Value, path: &str) -> Option<String> {
        if a == b {
            return None;
        }
        let join = |k: &str| if path.is_empty() { k.to_string() } else { format!("{path}.{k}") };
        match (a, b) {
            (Value::Object(x), Value::Object(y)) => {
                let keys: std::collections::BTreeSet<&String> = x.keys().chain(y.keys()).collect();
                keys.into_iter().find_map(|k| {
                    walk(
                        x.get(k).unwrap_or(&Value::Null),
                        y.get(k).unwrap_or(&Value::Null),
                        &join(k),
                    )
                })
            }
            (Value::Array(x), Value::Array(y)) if x.len() == y.len() => x
                .iter()
                .zip(y)
                .enumerate()
                .find_map(|(i, (p, q))| walk(p, q, &format!("{path}[{i}]"))),
            _ => Some(format!("{path}: {} vs {}", short(a), short(b))),
        }
    }
    walk(a, b, "")
}

/// A finished replica's output directory, read back and checked.
#[derive(Clone, Debug)]
pub struct ReplicaRun {
    /// The directory as given.
    pub dir: PathBuf,
    /// Its provenance.
    pub provenance: ProvenanceFile,
    /// What its marker override says (checked against the seed used).
    pub marker: Marker,
    /// [`scenario_digest`] of its provenance, hex.
    pub digest: String,
}

impl ReplicaRun {
    /// Read the replica in `dir`: it must be a finished output directory
    /// whose provenance records one replica marker, as the last `run.seed`
    /// override, whose seed is the one [`replica_seed`] gives and the one
    /// the run used. Each refusal names the file and the fix.
    pub fn read(dir: &Path) -> Result<ReplicaRun, String> {
        if !dir.join(PROVENANCE_FILE).is_file() {
            let partial = crate::output::staging_path(dir);
            let hint = if partial.is_dir() {
                format!(
                    " (`{}` holds an unfinished run: continue it with `exobound run --resume {}`)",
                    partial.display(),
                    dir.display()
                )
            } else if !dir.exists() {
                " (it does not exist: that replica has not run, or ran with another --out)"
                    .to_string()
            } else {
                String::new()
            };
            return Err(format!(
                "`{}` is not a finished exobound output directory: it has no `{PROVENANCE_FILE}`{hint}; \
                 give the --out of each finished `exobound run --replica I/N`",
                dir.display()
            ));
        }
        let provenance = ProvenanceFile::read(dir)?;
        let path = dir.join(PROVENANCE_FILE);
        if provenance.replicas.is_some() {
            return Err(format!(
                "`{}` is itself a merge of replicas, not one replica; give the replica \
                 directories it was made from",
                path.display()
            ));
        }
        let last_seed = provenance.overrides.iter().rposition(|o| {
            o.trim_start().strip_prefix("run.seed").is_some_and(|r| r.trim_start().starts_with('='))
        });
        let Some(marker) = last_seed.and_then(|k| parse_marker(&provenance.overrides[k])) else {
            return Err(format!(
                "`{}` records no replica (its overrides have no `run.seed=... # exobound replica \
                 I/N, base seed S` as the last seed setting): `{}` is an ordinary run; leave it \
                 out, or run it as a replica with `exobound run SCENARIO --replica I/N`",
                path.display(),
                dir.display()
            ));
        };
        let r = marker.replica;
        if r.count < 2 || r.index >= r.count {
            return Err(format!(
                "`{}` records replica {r}, which is not a valid I/N (0 <= I < N, N >= 2); \
                 the file was edited: rerun that replica",
                path.display()
            ));
        }
        let expected = replica_seed(marker.base_seed, r.index);
        if marker.seed != expected || provenance.seed != expected {
            return Err(format!(
                "`{}` says replica {r} of base seed {}, whose seed is {expected}, but it records \
                 seed {} (run seed {}); the file was edited or made by an exobound with another \
                 seed rule: rerun that replica with this version",
                path.display(),
                marker.base_seed,
                marker.seed,
                provenance.seed
            ));
        }
        let digest = scenario_digest(&provenance);
        Ok(ReplicaRun { dir: dir.to_path_buf(), provenance, marker, digest })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn mix64_matches_the_reference_splitmix64() {
        // The first three outputs of Vigna's splitmix64.c seeded with 0,
        // computed with an independent Python re-implementation of that file
        // (arbitrary-precision integers masked to 64 bits).
        let mut state: u64 = 0;
        let mut next = || {
            state = state.wrapping_add(GOLDEN_GAMMA);
            mix64(state)
        };
        assert_eq!(next(), 0xe220_a839_7b1d_cdaf);
        assert_eq!(next(), 0x6e78_9e6a_a1b9_65f4);
        assert_eq!(next(), 0x06c4_5d18_8009_454f);
        // So replica I of base seed 0 is the (I+1)-th output, masked.
        assert_eq!(replica_seed(0, 0), 0xe220_a839_7b1d_cdaf & SEED_MASK);
        assert_eq!(replica_seed(0, 2), 0x06c4_5d18_8009_454f & SEED_MASK);
    }

    #[test]
    fn replica_seeds_differ_from_each_other_and_from_plain_seeds() {
        for base in [0u64, 1, 7, 20_261_202, i64::MAX as u64, u64::MAX] {
            let mut seeds: Vec<u64> = (0..20_000).map(|i| replica_seed(base, i)).collect();
            assert!(seeds.iter().all(|&s| s <= SEED_MASK));
            // None is a small plain seed, nor the base seed itself.
            assert!(seeds.iter().all(|&s| s >= 1 << 32 && s != base), "base {base}");
            seeds.sort_unstable();
            seeds.dedup();
            assert_eq!(seeds.len(), 20_000, "base {base}");
        }
        // Neighbouring base seeds give unrelated replica seeds.
        assert_ne!(replica_seed(1, 0), replica_seed(2, 0));
        assert_ne!(replica_seed(1, 1), replica_seed(2, 0));
    }

    #[test]
    fn markers_round_trip_and_other_overrides_are_not_markers() {
        let r = Replica { index: 2, count: 5 };
        let o = seed_override(7, r);
        assert!(o.starts_with(&format!("run.seed={} #", replica_seed(7, 2))), "{o}");
        assert_eq!(
            parse_marker(&o),
            Some(Marker { seed: replica_seed(7, 2), replica: r, base_seed: 7 })
        );
        assert_eq!(parse_marker("run.seed=7"), None);
        assert_eq!(parse_marker("run.particles=2000 # exobound replica 1/2, base seed 3"), None);
        // The scenario reader takes the value and ignores the comment.
        let v: toml::Table =
            toml::from_str(&format!("v = {}", o.split_once('=').unwrap().1)).unwrap();
        assert_eq!(v["v"].as_integer(), Some(replica_seed(7, 2) as i64));
    }

    #[test]
    fn replica_specs_parse_with_zero_based_indices() {
        assert_eq!(Replica::parse("0/4"), Ok(Replica { index: 0, count: 4 }));
        assert_eq!(Replica::parse(" 3 / 4 "), Ok(Replica { index: 3, count: 4 }));
        for bad in ["4/4", "0/1", "1", "-1/3", "a/b", "1/0"] {
            let e = Replica::parse(bad).unwrap_err();
            assert!(e.contains("0 <= I < N") && e.contains(bad), "{bad}: {e}");
        }
    }

    #[test]
    fn first_difference_names_the_path() {
        let a = json!({"run": {"duration": "12 h", "dt": "900 s"}, "m": [1, 2]});
        let b = json!({"run": {"duration": "1 d", "dt": "900 s"}, "m": [1, 2]});
        assert_eq!(first_difference(&a, &b).unwrap(), "run.duration: \"12 h\" vs \"1 d\"");
        assert_eq!(first_difference(&a, &a), None);
        let c = json!({"run": {"duration": "12 h", "dt": "900 s"}, "m": [1, 3]});
        assert_eq!(first_difference(&a, &c).unwrap(), "m[1]: 2 vs 3");
    }
}

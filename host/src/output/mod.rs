//! The output directory of a run: atomic writes, the staging directory,
//! the writer lock, and writing every product.
//!
//! Why this exists: a run's products must appear whole or not at all, and
//! from one run only. All files go into a staging directory `<out>.partial`
//! beside the requested output directory (which also holds the checkpoints
//! of an unfinished run); only when every product is written is it renamed
//! to `<out>`, so an interrupted, failed or refused run never leaves a
//! half-written output directory behind. Before touching either directory a
//! process takes the exclusive lock `<out>.writer-lock` ([`lock`]) and keeps
//! it until the rename, so two processes aimed at one `--out` never share a
//! staging directory: the second is refused at once.

pub mod fields;
pub mod figures;
pub mod lock;
pub mod netcdf;
pub mod number;
pub mod provenance;
pub mod results;
pub mod summary;
pub mod tables;

use std::io::Write as _;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

use crate::checkpoint::ScenarioSource;
use crate::driver::RunRecord;
use crate::engine::Simulation;
use crate::output::lock::OutputLock;
use crate::scenario::Scenario;

/// Write `bytes` to `path` atomically: a temporary file beside it, fsync,
/// rename over `path`, then fsync the directory so the rename is durable.
pub fn atomic_write(path: &Path, bytes: &[u8]) -> std::io::Result<()> {
    let dir = path.parent().filter(|d| !d.as_os_str().is_empty()).unwrap_or(Path::new("."));
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
    {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(bytes)?;
        f.sync_all()?;
    }
    std::fs::rename(&tmp, path)?;
    sync_dir(dir);
    Ok(())
}

/// fsync a directory (best effort: not every filesystem allows it).
fn sync_dir(dir: &Path) {
    if let Ok(d) = std::fs::File::open(dir) {
        let _ = d.sync_all();
    }
}

/// Name of the checkpoint file inside a staging directory.
pub const CHECKPOINT_FILE: &str = "checkpoint.exck";

/// Marker file that every finished output directory holds.
pub const PROVENANCE_FILE: &str = "provenance.json";

/// A staging directory that becomes the output directory, with the
/// exclusive writer lock on both held from [`Staging::create`] or
/// [`Staging::existing`] until [`Staging::finish`], [`Staging::discard`] or
/// drop.
#[derive(Debug)]
pub struct Staging {
    out: PathBuf,
    dir: PathBuf,
    /// `None` once finished or discarded.
    lock: Mutex<Option<OutputLock>>,
}

/// The staging path of output directory `out`: `<out>.partial`.
pub fn staging_path(out: &Path) -> PathBuf {
    beside(out, ".partial")
}

/// The path beside `out` whose name is `out`'s name plus `suffix`, so that
/// `results/` and `results` both give `results<suffix>`.
pub(crate) fn beside(out: &Path, suffix: &str) -> PathBuf {
    // Collecting the components drops a trailing slash.
    let out: PathBuf = out.components().collect();
    let mut s = out.into_os_string();
    s.push(suffix);
    PathBuf::from(s)
}

impl Staging {
    /// A fresh staging directory for `out`, under the writer lock (see
    /// [`lock`]): refused at once if another process holds it. Also refuses
    /// if `out` exists and is not an earlier exobound output (which would be
    /// replaced at the end), or if an unfinished run's staging directory is
    /// in the way. Any other leftover staging directory is cleared, which is
    /// safe because the lock shows no process is using it.
    pub fn create(out: &Path) -> Result<Staging, String> {
        let out: PathBuf = out.components().collect();
        let lock = OutputLock::acquire(&out)?;
        check_replaceable(&out)?;
        let dir = staging_path(&out);
        if dir.join(CHECKPOINT_FILE).exists() {
            return Err(format!(
                "`{}` holds the checkpoint of an unfinished run; continue it with \
                 `exobound run --resume {}` or delete that directory",
                dir.display(),
                out.display()
            ));
        }
        if dir.exists() {
            std::fs::remove_dir_all(&dir)
                .map_err(|e| format!("cannot clear `{}`: {e}", dir.display()))?;
        }
        std::fs::create_dir_all(&dir)
            .map_err(|e| format!("cannot create `{}`: {e}", dir.display()))?;
        Ok(Staging { out, dir, lock: Mutex::new(Some(lock)) })
    }

    /// The staging directory of an unfinished run whose output was to be `out`
    /// (`out` may also name the staging directory itself), under the writer
    /// lock. Temporary files that a killed process left behind are removed.
    pub fn existing(out: &Path) -> Result<Staging, String> {
        let out: PathBuf = out.components().collect();
        let (out, dir) = if out.to_string_lossy().ends_with(".partial") {
            let s = out.to_string_lossy();
            (PathBuf::from(&s[..s.len() - ".partial".len()]), out.clone())
        } else {
            (out.clone(), staging_path(&out))
        };
        let lock = OutputLock::acquire(&out)?;
        if !dir.join(CHECKPOINT_FILE).is_file() {
            let hint = if out.join(PROVENANCE_FILE).is_file() {
                " (that run has already finished)"
            } else {
                ""
            };
            return Err(format!(
                "no checkpoint to resume: `{}` does not exist{hint}",
                dir.join(CHECKPOINT_FILE).display()
            ));
        }
        check_replaceable(&out)?;
        remove_temporaries(&dir);
        Ok(Staging { out, dir, lock: Mutex::new(Some(lock)) })
    }

    /// The staging directory.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// The lock file held for this output (`<out>.writer-lock`).
    pub fn lock_path(&self) -> PathBuf {
        lock::lock_path(&self.out)
    }

    /// Path of the checkpoint file.
    pub fn checkpoint_path(&self) -> PathBuf {
        self.dir.join(CHECKPOINT_FILE)
    }

    /// Whether a checkpoint has been written.
    pub fn has_checkpoint(&self) -> bool {
        self.checkpoint_path().is_file()
    }

    /// Remove the staging directory (after a failure with nothing to
    /// resume), then release the lock.
    pub fn discard(&self) {
        let _ = std::fs::remove_dir_all(&self.dir);
        self.release();
    }

    /// Drop the checkpoint and any temporary files, rename the staging
    /// directory to the output directory (replacing an earlier exobound
    /// output there), then release the lock. On an error the lock is kept
    /// until the `Staging` is dropped.
    pub fn finish(&self) -> Result<PathBuf, String> {
        let _ = std::fs::remove_file(self.checkpoint_path());
        remove_temporaries(&self.dir);
        sync_dir(&self.dir);
        check_replaceable(&self.out)?;
        if self.out.exists() {
            std::fs::remove_dir_all(&self.out).map_err(|e| {
                format!("cannot replace the earlier output `{}`: {e}", self.out.display())
            })?;
        }
        std::fs::rename(&self.dir, &self.out).map_err(|e| {
            format!("cannot rename `{}` to `{}`: {e}", self.dir.display(), self.out.display())
        })?;
        if let Some(parent) = self.out.parent() {
            sync_dir(if parent.as_os_str().is_empty() { Path::new(".") } else { parent });
        }
        self.release();
        Ok(self.out.clone())
    }

    /// Remove the lock file and release the lock (once; later calls and
    /// the drop do nothing).
    fn release(&self) {
        let held = match self.lock.lock() {
            Ok(mut g) => g.take(),
            Err(poisoned) => poisoned.into_inner().take(),
        };
        if let Some(l) = held {
            l.release();
        }
    }
}

/// Whether `name` is a temporary file of [`atomic_write`]: `.NAME.tmp-PID`.
fn is_temporary(name: &str) -> bool {
    name.starts_with('.')
        && name.rsplit_once(".tmp-").is_some_and(|(stem, pid)| {
            stem.len() > 1 && !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit())
        })
}

/// Remove every temporary file of [`atomic_write`] under `dir`, in
/// subdirectories too: what a process killed mid-write leaves behind. Call
/// only under the writer lock, when no write is in progress.
fn remove_temporaries(dir: &Path) {
    let Ok(entries) = std::fs::read_dir(dir) else { return };
    for e in entries.flatten() {
        let Ok(kind) = e.file_type() else { continue };
        if kind.is_dir() {
            remove_temporaries(&e.path());
        } else if is_temporary(&e.file_name().to_string_lossy()) {
            let _ = std::fs::remove_file(e.path());
        }
    }
}

/// Run `work` in a fresh staging directory for `out` (see [`Staging`]):
/// on success the directory is renamed to `out`, on failure it is removed,
/// so `out` holds either every product or none. The writer lock is held
/// throughout.
pub fn staged<T>(out: &Path, work: impl FnOnce(&Path) -> Result<T, String>) -> Result<T, String> {
    let staging = Staging::create(out)?;
    match work(staging.dir()) {
        Ok(v) => {
            staging.finish()?;
            Ok(v)
        }
        Err(e) => {
            staging.discard();
            Err(e)
        }
    }
}

/// `out` may be absent, or an earlier exobound output directory; anything
/// else (a file, a directory of other things) is refused.
fn check_replaceable(out: &Path) -> Result<(), String> {
    if !out.exists() {
        return Ok(());
    }
    if out.is_dir() && out.join(PROVENANCE_FILE).is_file() {
        return Ok(());
    }
    Err(format!(
        "`{}` exists and is not an exobound output directory; choose another --out",
        out.display()
    ))
}

/// How fast the run went (not part of the reproducible output).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Performance {
    /// Wall time over all sessions, s.
    pub wall_seconds: f64,
    /// Super-particle hops (landings), dimensionless.
    pub hops: u64,
    /// Worker threads of the last session.
    pub threads: usize,
}

/// Write every product of a finished run into `dir`, and return its typed result.
pub fn write_all(
    dir: &Path,
    scenario: &Scenario,
    source: &ScenarioSource,
    sim: &Simulation,
    record: &RunRecord,
    perf: &Performance,
) -> Result<results::RunResult, String> {
    let prov = provenance::Provenance::of(scenario, source);
    let fields = fields::Fields::of(scenario, sim, record);
    let summary = summary::Summary::of(scenario, sim, record, perf, &fields);
    let write_json = |name: &str, v: &serde_json::Value| -> Result<(), String> {
        let text = serde_json::to_string_pretty(v).map_err(|e| e.to_string())?;
        // Ledger labels and other module text stay escaped when the file is
        // printed with `cat` (same JSON values; see `text::json_printable`).
        let mut text = crate::text::json_printable(&text).into_owned();
        text.push('\n');
        atomic_write(&dir.join(name), text.as_bytes())
            .map_err(|e| format!("cannot write `{name}`: {e}"))
    };
    write_json(PROVENANCE_FILE, &serde_json::to_value(&prov).map_err(|e| e.to_string())?)?;
    write_json("summary.json", &summary.to_json())?;
    let products = scenario.plan.products;
    if products.csv {
        tables::write_all(dir, scenario, sim, record).map_err(|e| format!("csv: {e}"))?;
    }
    if products.netcdf {
        let ds = netcdf::dataset(scenario, sim, record, &prov);
        let path = dir.join("exosphere.nc");
        exobound_products::write_netcdf(&ds, &path).map_err(|e| format!("{e}"))?;
    }
    if products.plots {
        figures::draw_all(&dir.join("plots"), scenario, sim, record)
            .map_err(|e| format!("plots: {e}"))?;
    }
    Ok(results::RunResult::of(&fields, summary))
}

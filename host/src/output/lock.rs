//! One writer per output directory: an exclusive lock file beside it.
//!
//! Why this exists: two processes given the same `--out` at the same moment
//! would share one staging directory `<out>.partial`; each would clear or
//! rename it under the other, both could exit successfully, and `<out>` would
//! end up missing or holding the other run's files. Before a process touches
//! `<out>` or `<out>.partial` it takes an exclusive, non-blocking `flock` on
//! `<out>.writer-lock` (beside them, because both directories are renamed or
//! removed). A second process is refused at once with the holder's pid, host
//! and start time, which the holder writes into the file. The kernel drops
//! the lock when its holder exits, even by `kill -9`, so a lock file left
//! behind by a dead process never blocks a later run: the next process
//! simply takes the lock and overwrites the details.
//!
//! The holder removes the file while it still holds the lock. A process that
//! opened the file just before it was removed may then win the lock on the
//! orphaned file; it notices by comparing the path's device and inode with
//! those of its open file, and starts over.

use std::fs::{File, OpenOptions, TryLockError};
use std::io::{ErrorKind, Write as _};
use std::os::unix::fs::MetadataExt as _;
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use crate::text::printable;

/// Suffix of the lock file: `<out>.writer-lock`. Not `.lock`, so that an
/// output named `exobound` cannot collide with the scenario's module pins
/// in `exobound.lock`.
pub const LOCK_SUFFIX: &str = ".writer-lock";

/// How many times to start over when the lock file is replaced under us
/// before giving up (each round is a few system calls, never a wait).
const MAX_ROUNDS: usize = 64;

/// The lock file of output directory `out`: `<out>.writer-lock`.
pub fn lock_path(out: &Path) -> PathBuf {
    super::beside(out, LOCK_SUFFIX)
}

/// An exclusive lock on one output directory, held until dropped (or
/// [`OutputLock::release`]d); releasing removes the lock file first.
#[derive(Debug)]
pub struct OutputLock {
    path: PathBuf,
    file: File,
}

impl OutputLock {
    /// Take the lock for output directory `out`, creating its parent
    /// directory if needed. Refused at once, without waiting, if another
    /// open lock (another process, or another handle in this one) holds it;
    /// the message names the holder and the fix.
    pub fn acquire(out: &Path) -> Result<OutputLock, String> {
        let path = lock_path(out);
        if let Some(parent) = path.parent().filter(|p| !p.as_os_str().is_empty()) {
            std::fs::create_dir_all(parent)
                .map_err(|e| format!("cannot create `{}`: {e}", parent.display()))?;
        }
        for _ in 0..MAX_ROUNDS {
            let file = OpenOptions::new()
                .read(true)
                .write(true)
                .create(true)
                .truncate(false)
                .open(&path)
                .map_err(|e| {
                    format!(
                        "cannot open the lock file `{}`: {e}; check that its directory is \
                         writable, or choose another --out",
                        path.display()
                    )
                })?;
            match file.try_lock() {
                Ok(()) => {}
                Err(TryLockError::WouldBlock) => return Err(held_message(out, &path)),
                Err(TryLockError::Error(e)) => {
                    return Err(format!(
                        "cannot lock `{}`: {e}; the file system may not support file locks \
                         (choose an --out on a local disk)",
                        path.display()
                    ));
                }
            }
            if !names_this_file(&path, &file)? {
                // The holder removed the file between our open and our lock;
                // this handle locks an orphan. Drop it and start over.
                continue;
            }
            let lock = OutputLock { path, file };
            lock.record_holder()?;
            return Ok(lock);
        }
        Err(format!(
            "cannot lock `{}`: the file kept being replaced while we tried; another exobound \
             process is probably starting and finishing on the same output; wait, or choose \
             another --out",
            path.display()
        ))
    }

    /// The lock file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Remove the lock file and release the lock (dropping does the same).
    pub fn release(self) {}

    /// Write this process's pid, host, start time and command line into the
    /// lock file, for the message a refused process prints.
    fn record_holder(&self) -> Result<(), String> {
        let args: Vec<String> = std::env::args().map(|a| printable(&a).into_owned()).collect();
        let text = format!(
            "exobound writer lock: this process is writing the output directory beside this \
             file\npid: {}\nhost: {}\nstarted: {}\ncommand: {}\n",
            std::process::id(),
            host_name(),
            utc_timestamp(SystemTime::now()),
            args.join(" ")
        );
        let write = || -> std::io::Result<()> {
            self.file.set_len(0)?;
            (&self.file).write_all(text.as_bytes())?;
            self.file.sync_data()
        };
        write().map_err(|e| format!("cannot write the lock file `{}`: {e}", self.path.display()))
    }
}

impl Drop for OutputLock {
    fn drop(&mut self) {
        // Still holding the lock, so no other process can be using this path
        // for its own lock file yet; the flock goes when `file` closes.
        let _ = std::fs::remove_file(&self.path);
    }
}

/// Whether `path` still names the file open as `file` (same device and
/// inode); false if the path no longer exists.
fn names_this_file(path: &Path, file: &File) -> Result<bool, String> {
    let open = file.metadata().map_err(|e| format!("cannot stat `{}`: {e}", path.display()))?;
    match std::fs::metadata(path) {
        Ok(now) => Ok(now.dev() == open.dev() && now.ino() == open.ino()),
        Err(e) if e.kind() == ErrorKind::NotFound => Ok(false),
        Err(e) => Err(format!("cannot stat `{}`: {e}", path.display())),
    }
}

/// The refusal when `out` is locked by someone else, naming the holder as
/// recorded in the lock file.
fn held_message(out: &Path, path: &Path) -> String {
    let text = std::fs::read_to_string(path).unwrap_or_default();
    let field = |key: &str| {
        text.lines()
            .find_map(|l| l.strip_prefix(key).and_then(|r| r.strip_prefix(':')))
            .map(|v| printable(v.trim()).into_owned())
            .filter(|v| !v.is_empty())
    };
    let holder = match (field("pid"), field("host"), field("started")) {
        (Some(pid), host, started) => {
            let mut s = format!("pid {pid}");
            if let Some(h) = &host {
                s.push_str(&format!(" on host {h}"));
            }
            if let Some(t) = started {
                s.push_str(&format!(", started {t}"));
            }
            if pid == std::process::id().to_string() && host.is_some_and(|h| h == host_name()) {
                s.push_str(" (this process)");
            }
            s
        }
        // The holder has locked the file but not yet written its details.
        (None, ..) => "a process that has not yet recorded its details".to_string(),
    };
    format!(
        "`{}` is being written by another exobound process ({holder}, as recorded in `{}`); \
         wait for that process to finish, or choose another --out",
        out.display(),
        path.display()
    )
}

/// This machine's host name, or `unknown` if the system does not say.
fn host_name() -> String {
    ["/proc/sys/kernel/hostname", "/etc/hostname"]
        .iter()
        .find_map(|p| std::fs::read_to_string(p).ok())
        .map(|s| s.trim().to_string())
        .filter(|s| !s.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok().filter(|s| !s.is_empty()))
        .map(|s| printable(&s).into_owned())
        .unwrap_or_else(|| "unknown".to_string())
}

/// `t` as a UTC date and time, `YYYY-MM-DDTHH:MM:SSZ` (ISO 8601).
pub fn utc_timestamp(t: SystemTime) -> String {
    let secs = t.duration_since(UNIX_EPOCH).map(|d| d.as_secs()).unwrap_or(0);
    let (days, rem) = ((secs / 86_400) as i64, secs % 86_400);
    let (y, m, d) = civil_from_days(days);
    format!("{y:04}-{m:02}-{d:02}T{:02}:{:02}:{:02}Z", rem / 3600, rem % 3600 / 60, rem % 60)
}

/// Proleptic Gregorian (year, month, day) of `z` days after 1970-01-01.
/// Counts in 400-year eras of 146 097 days, with years starting on 1 March
/// so that the leap day falls at the end of the year.
fn civil_from_days(z: i64) -> (i64, u32, u32) {
    let z = z + 719_468; // days from 0000-03-01 to 1970-01-01
    let era = z.div_euclid(146_097);
    let doe = z.rem_euclid(146_097); // day of era, 0..146096
    let yoe = (doe - doe / 1460 + doe / 36_524 - doe / 146_096) / 365; // 0..399
    let doy = doe - (365 * yoe + yoe / 4 - yoe / 100); // day of March-based year
    let mp = (5 * doy + 2) / 153; // March = 0
    let d = (doy - (153 * mp + 2) / 5 + 1) as u32;
    let m = if mp < 10 { mp + 3 } else { mp - 9 } as u32;
    let y = yoe + era * 400 + i64::from(m <= 2);
    (y, m, d)
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::Duration;

    #[test]
    fn utc_timestamps_of_known_instants() {
        let at = |s: u64| utc_timestamp(UNIX_EPOCH + Duration::from_secs(s));
        assert_eq!(at(0), "1970-01-01T00:00:00Z");
        // 951_782_400 s is 2000-02-29 00:00:00 UTC (a leap day in a
        // century year divisible by 400).
        assert_eq!(at(951_782_400), "2000-02-29T00:00:00Z");
        assert_eq!(at(951_868_799), "2000-02-29T23:59:59Z");
        // 4_107_542_400 s is 2100-03-01: 2100 is not a leap year.
        assert_eq!(at(4_107_542_400 - 1), "2100-02-28T23:59:59Z");
        assert_eq!(at(4_107_542_400), "2100-03-01T00:00:00Z");
        assert_eq!(at(1_700_000_000), "2023-11-14T22:13:20Z");
    }

    #[test]
    fn civil_dates_advance_one_day_at_a_time() {
        // Walk 1970..2400 day by day: each date follows the previous one.
        let mut prev = civil_from_days(0);
        assert_eq!(prev, (1970, 1, 1));
        let month_len = |y: i64, m: u32| match m {
            2 if (y % 4 == 0 && y % 100 != 0) || y % 400 == 0 => 29,
            2 => 28,
            4 | 6 | 9 | 11 => 30,
            _ => 31,
        };
        for z in 1..157_000 {
            let (y, m, d) = civil_from_days(z);
            let (py, pm, pd) = prev;
            let expect = if pd < month_len(py, pm) {
                (py, pm, pd + 1)
            } else if pm < 12 {
                (py, pm + 1, 1)
            } else {
                (py + 1, 1, 1)
            };
            assert_eq!((y, m, d), expect, "day {z}");
            prev = (y, m, d);
        }
    }
}

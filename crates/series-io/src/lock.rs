//! An exclusive lock on an output directory, so two runs never write into one folder.
//!
//! The lock is an advisory file lock (`flock` on Unix) on `DIR/.ccm-triage.lock`. The
//! operating system releases it when the holding process ends, however it ends, so a lock
//! left by a killed run can never block a later one. The file itself records who holds the
//! lock (process id, host, start time) for the refusal message; a clean release empties it,
//! so a file found non-empty by a run that gets the lock was left by a run that died, and the
//! new run reports that it took it over. The file is never deleted: deleting a lock file
//! while another process waits on it would let two processes hold two different files.

use std::fs::{File, OpenOptions, TryLockError};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{SystemTime, UNIX_EPOCH};

use crate::error::OutputError;

/// Name of the lock file inside a locked directory.
pub const LOCK_FILE: &str = ".ccm-triage.lock";

/// The run that holds (or held) a lock, as recorded in the lock file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LockHolder {
    /// Process id.
    pub pid: u32,
    /// Host name.
    pub host: String,
    /// Start time, UTC.
    pub started: String,
}

impl std::fmt::Display for LockHolder {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "process {} on host {}, started {}",
            self.pid, self.host, self.started
        )
    }
}

/// A held lock; released when dropped (and by the operating system if the process dies).
#[derive(Debug)]
pub struct DirLock {
    file: File,
    path: PathBuf,
    taken_over: Option<LockHolder>,
}

impl DirLock {
    /// Take the lock on `dir` (which must exist), or fail at once with
    /// [`OutputError::Locked`] naming the run that holds it.
    pub fn acquire(dir: &Path) -> Result<Self, OutputError> {
        let path = dir.join(LOCK_FILE);
        let fail = |source| OutputError::Write {
            path: path.clone(),
            source,
        };
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(fail)?;
        match file.try_lock() {
            Ok(()) => {}
            Err(TryLockError::WouldBlock) => {
                // The holder writes its record just after taking the lock: give it a moment.
                let mut holder = read_holder(&mut file);
                for _ in 0..50 {
                    if holder.is_some() {
                        break;
                    }
                    std::thread::sleep(std::time::Duration::from_millis(10));
                    holder = read_holder(&mut file);
                }
                return Err(OutputError::Locked {
                    dir: dir.to_path_buf(),
                    holder: holder.map_or_else(
                        || "another run that is just starting".to_string(),
                        |h| h.to_string(),
                    ),
                });
            }
            Err(TryLockError::Error(e)) => return Err(fail(e)),
        }
        let taken_over = read_holder(&mut file);
        let me = LockHolder {
            pid: std::process::id(),
            host: host_name(),
            started: utc_now(),
        };
        let text = format!("pid {}\nhost {}\nstarted {}\n", me.pid, me.host, me.started);
        file.set_len(0).map_err(fail)?;
        file.seek(SeekFrom::Start(0)).map_err(fail)?;
        file.write_all(text.as_bytes()).map_err(fail)?;
        file.sync_all().map_err(fail)?;
        Ok(Self {
            file,
            path,
            taken_over,
        })
    }

    /// The run whose lock this one replaced: it died without releasing its record.
    pub fn taken_over(&self) -> Option<&LockHolder> {
        self.taken_over.as_ref()
    }

    /// The lock file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for DirLock {
    fn drop(&mut self) {
        // Best effort: an empty file marks a clean release; the lock itself goes with the file.
        let _ = self.file.set_len(0);
        let _ = self.file.unlock();
    }
}

fn read_holder(file: &mut File) -> Option<LockHolder> {
    let mut text = String::new();
    file.seek(SeekFrom::Start(0)).ok()?;
    file.take(4096).read_to_string(&mut text).ok()?;
    let field = |key: &str| {
        text.lines()
            .find_map(|l| l.strip_prefix(key).map(|v| v.trim().to_string()))
    };
    Some(LockHolder {
        pid: field("pid ")?.parse().ok()?,
        host: field("host ").unwrap_or_else(|| "unknown".into()),
        started: field("started ").unwrap_or_else(|| "at an unknown time".into()),
    })
}

fn host_name() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .or_else(|_| std::fs::read_to_string("/etc/hostname"))
        .map(|h| h.trim().to_string())
        .ok()
        .filter(|h| !h.is_empty())
        .or_else(|| std::env::var("HOSTNAME").ok())
        .unwrap_or_else(|| "unknown".into())
}

/// The current time as `YYYY-MM-DD HH:MM:SS UTC`.
fn utc_now() -> String {
    utc_date(now_secs())
}

/// The current time as an ISO 8601 UTC timestamp, `YYYY-MM-DDTHH:MM:SSZ` (for run records).
pub fn utc_timestamp() -> String {
    utc_timestamp_at(now_secs())
}

/// Seconds since 1970-01-01 00:00:00 UTC as an ISO 8601 timestamp, `YYYY-MM-DDTHH:MM:SSZ`.
pub fn utc_timestamp_at(secs: u64) -> String {
    let (date, time) = civil(secs);
    format!("{date}T{time}Z")
}

fn now_secs() -> u64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| d.as_secs())
}

/// Seconds since 1970-01-01 00:00:00 UTC as `YYYY-MM-DD HH:MM:SS UTC`.
fn utc_date(secs: u64) -> String {
    let (date, time) = civil(secs);
    format!("{date} {time} UTC")
}

/// Seconds since 1970-01-01 00:00:00 UTC as the date `YYYY-MM-DD` and the time `HH:MM:SS`.
fn civil(secs: u64) -> (String, String) {
    let (days, rem) = (secs / 86_400, secs % 86_400);
    let (year, month, day) = crate::timeaxis::civil_from_days(days as i64);
    (
        format!("{year:04}-{month:02}-{day:02}"),
        format!("{:02}:{:02}:{:02}", rem / 3600, rem % 3600 / 60, rem % 60),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    fn temp_dir(tag: &str) -> PathBuf {
        let dir = std::env::temp_dir().join(format!("series-io-lock-{tag}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).unwrap();
        dir
    }

    #[test]
    fn a_held_lock_refuses_a_second_holder_and_names_the_first() {
        let dir = temp_dir("held");
        let first = DirLock::acquire(&dir).unwrap();
        assert!(first.taken_over().is_none());
        let err = DirLock::acquire(&dir).unwrap_err();
        let text = err.to_string();
        assert!(matches!(err, OutputError::Locked { .. }), "{text}");
        assert!(
            text.contains(&format!("process {}", std::process::id())) && text.contains("in use"),
            "{text}"
        );
        drop(first);
        let again = DirLock::acquire(&dir).unwrap();
        assert!(again.taken_over().is_none(), "a clean release is not stale");
        drop(again);
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_record_left_by_a_dead_run_is_taken_over() {
        let dir = temp_dir("stale");
        std::fs::write(
            dir.join(LOCK_FILE),
            "pid 4000000\nhost elsewhere\nstarted 2026-01-01 00:00:00 UTC\n",
        )
        .unwrap();
        let lock = DirLock::acquire(&dir).unwrap();
        let old = lock.taken_over().expect("stale record reported");
        assert_eq!((old.pid, old.host.as_str()), (4_000_000, "elsewhere"));
        drop(lock);
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn civil_dates_match_python_datetime() {
        // Timestamps from Python 3's datetime module (datetime(...).timestamp(), UTC).
        assert_eq!(utc_date(0), "1970-01-01 00:00:00 UTC");
        assert_eq!(utc_date(1_796_234_709), "2026-12-02 18:05:09 UTC");
        assert_eq!(utc_date(951_868_799), "2000-02-29 23:59:59 UTC");
        assert_eq!(utc_timestamp_at(951_868_799), "2000-02-29T23:59:59Z");
    }
}

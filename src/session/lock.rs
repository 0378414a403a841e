//! One writer per session at a time: an advisory lock on `session.lock` in the session folder.
//!
//! The lock is the operating system's (`flock` on Unix, `LockFileEx` on Windows) on an open file,
//! so it is released when the holder exits, however it exits — a killed process never leaves a
//! session locked. The file's text names the holder (program, process id, purpose, start time)
//! so that whoever is refused can be told who has it.

use std::fs::{File, OpenOptions, TryLockError};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

use crate::acquire::InputError;

/// Name of the lock file in a session folder.
pub const LOCK_FILE: &str = "session.lock";

/// A held session lock; released when dropped.
#[derive(Debug)]
pub struct SessionLock {
    file: File,
    path: PathBuf,
}

impl SessionLock {
    /// Takes the lock of the session in `dir` for `purpose`, waiting up to `wait` for another
    /// holder to finish. The error names the holder.
    pub fn acquire(dir: &Path, purpose: &str, wait: Duration) -> Result<Self, InputError> {
        let path = dir.join(LOCK_FILE);
        let mut file = OpenOptions::new()
            .read(true)
            .write(true)
            .create(true)
            .truncate(false)
            .open(&path)
            .map_err(|e| InputError::new(&path, format!("cannot open the session lock: {e}")))?;
        let started = Instant::now();
        loop {
            match file.try_lock() {
                Ok(()) => break,
                Err(TryLockError::WouldBlock) if started.elapsed() < wait => {
                    std::thread::sleep(Duration::from_millis(25));
                }
                Err(TryLockError::WouldBlock) => {
                    let mut holder = String::new();
                    let _ = file.read_to_string(&mut holder);
                    let holder = holder.trim();
                    return Err(InputError::new(
                        dir,
                        format!(
                            "the session is in use by another program ({}); close it or wait, \
                             then try again",
                            if holder.is_empty() {
                                "unknown holder"
                            } else {
                                holder
                            }
                        ),
                    ));
                }
                Err(TryLockError::Error(e)) => {
                    return Err(InputError::new(
                        &path,
                        format!("cannot lock the session: {e}"),
                    ));
                }
            }
        }
        let since = crate::clock::utc_now();
        let text = format!(
            "tapgrid {} (process {}), {purpose}, since {since}\n",
            env!("CARGO_PKG_VERSION"),
            std::process::id()
        );
        // Best effort: the lock holds whether or not its label could be written.
        let _ = file
            .set_len(0)
            .and_then(|_| file.seek(SeekFrom::Start(0)))
            .and_then(|_| file.write_all(text.as_bytes()));
        // The only writer now: any temp file left here is from a writer that was killed.
        remove_stale_temp_files(dir);
        remove_stale_temp_files(&dir.join("raw"));
        Ok(Self { file, path })
    }

    /// Who holds the lock of the session in `dir`, when someone does (without taking it).
    pub fn holder(dir: &Path) -> Option<String> {
        let path = dir.join(LOCK_FILE);
        let file = OpenOptions::new().read(true).write(true).open(&path).ok()?;
        match file.try_lock() {
            Ok(()) => {
                let _ = file.unlock();
                None
            }
            Err(_) => {
                let mut s = String::new();
                let _ = (&file).read_to_string(&mut s);
                Some(s.trim().to_string())
            }
        }
    }

    /// The lock file.
    pub fn path(&self) -> &Path {
        &self.path
    }
}

impl Drop for SessionLock {
    fn drop(&mut self) {
        let _ = self.file.unlock();
    }
}

/// Removes the temp files of interrupted atomic writes (`.NAME.tmp-PID-N`) from `dir`; returns
/// how many. Only a lock holder may call it: another writer's temp file is not stale.
pub fn remove_stale_temp_files(dir: &Path) -> usize {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return 0;
    };
    entries
        .flatten()
        .filter(|e| {
            let name = e.file_name();
            let name = name.to_string_lossy();
            name.starts_with('.') && name.contains(".tmp-") && e.path().is_file()
        })
        .filter(|e| std::fs::remove_file(e.path()).is_ok())
        .count()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_second_writer_is_refused_with_the_holders_name_and_gets_it_once_free() {
        let dir = tempfile::tempdir().unwrap();
        let first = SessionLock::acquire(dir.path(), "verdict", Duration::ZERO).unwrap();
        let err = SessionLock::acquire(dir.path(), "model", Duration::from_millis(60)).unwrap_err();
        let text = err.to_string();
        assert!(
            text.contains("in use") && text.contains("verdict"),
            "{text}"
        );
        assert!(SessionLock::holder(dir.path()).unwrap().contains("verdict"));
        drop(first);
        assert!(SessionLock::holder(dir.path()).is_none());
        SessionLock::acquire(dir.path(), "model", Duration::ZERO).unwrap();
    }

    #[test]
    fn taking_the_lock_clears_temp_files_of_killed_writers() {
        let dir = tempfile::tempdir().unwrap();
        std::fs::create_dir(dir.path().join("raw")).unwrap();
        std::fs::write(dir.path().join(".session.json.tmp-123-0"), "x").unwrap();
        std::fs::write(dir.path().join("raw/.s01.wav.tmp-123-1"), "x").unwrap();
        std::fs::write(dir.path().join("session.json"), "{}").unwrap();
        let _l = SessionLock::acquire(dir.path(), "test", Duration::ZERO).unwrap();
        let left: Vec<_> = std::fs::read_dir(dir.path())
            .unwrap()
            .chain(std::fs::read_dir(dir.path().join("raw")).unwrap())
            .flatten()
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .collect();
        assert!(left.iter().all(|n| !n.contains(".tmp-")), "{left:?}");
        assert!(left.contains(&"session.json".to_string()));
    }
}

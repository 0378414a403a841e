//! Atomic file writes: temp file in the same folder, fsync, rename, fsync the folder (derived
//! outputs skip the fsyncs, see [`write_derived_with`]).
//!
//! A reader (or a crash) sees either the old file or the new one, never a half-written one.

use std::fs::{self, File, OpenOptions};
use std::io::{self, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

static COUNTER: AtomicU64 = AtomicU64::new(0);

fn temp_path(path: &Path) -> PathBuf {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "file".into());
    let k = COUNTER.fetch_add(1, Ordering::Relaxed);
    path.with_file_name(format!(".{name}.tmp-{}-{k}", std::process::id()))
}

/// Writes a file atomically with a closure that fills the open temp file.
pub fn write_with<F>(path: &Path, fill: F) -> io::Result<()>
where
    F: FnOnce(&mut File) -> io::Result<()>,
{
    write_impl(path, fill, true)
}

/// [`write_with`] for outputs derived from recordings (FRF tables, fit results): replaced by a
/// rename as well, so a reader never sees half a file, but not forced to the disk before
/// returning — a rerun regenerates them, and on a 40-station test the fsync of ~30 MB of text
/// costs more than the whole FRF stage. Raw recordings and session files never use this.
pub fn write_derived_with<F>(path: &Path, fill: F) -> io::Result<()>
where
    F: FnOnce(&mut File) -> io::Result<()>,
{
    write_impl(path, fill, false)
}

/// [`write_derived_with`] of bytes.
pub fn write_derived(path: &Path, bytes: &[u8]) -> io::Result<()> {
    write_derived_with(path, |f| f.write_all(bytes))
}

fn write_impl<F>(path: &Path, fill: F, sync: bool) -> io::Result<()>
where
    F: FnOnce(&mut File) -> io::Result<()>,
{
    let tmp = temp_path(path);
    let result = (|| {
        let mut f = OpenOptions::new().write(true).create_new(true).open(&tmp)?;
        fill(&mut f)?;
        f.flush()?;
        if sync {
            f.sync_all()?;
        }
        drop(f);
        fs::rename(&tmp, path)?;
        if let Some(dir) = path.parent().filter(|_| sync) {
            let dir = if dir.as_os_str().is_empty() {
                Path::new(".")
            } else {
                dir
            };
            // Persist the rename itself; not every platform can open a directory, so best effort.
            if let Ok(d) = File::open(dir) {
                let _ = d.sync_all();
            }
        }
        Ok(())
    })();
    if result.is_err() {
        let _ = fs::remove_file(&tmp);
    }
    result
}

/// Writes bytes atomically.
pub fn write_bytes(path: &Path, bytes: &[u8]) -> io::Result<()> {
    write_with(path, |f| f.write_all(bytes))
}

/// Copies a file atomically (the source is only read).
pub fn copy_file(src: &Path, dst: &Path) -> io::Result<u64> {
    let mut n = 0;
    write_with(dst, |f| {
        let mut r = File::open(src)?;
        n = io::copy(&mut r, f)?;
        Ok(())
    })?;
    Ok(n)
}

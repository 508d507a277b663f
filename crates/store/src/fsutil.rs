//! Durable file writes: temp file in the same folder, fsync, rename, fsync the folder; and a
//! writer that hashes what passes through it.

use std::fs::{File, OpenOptions};
use std::io::{BufWriter, Write};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};

use sha2::{Digest, Sha256};

use crate::error::{Result, StoreError};

/// Names of temporary files start with this; any found at start-up are left-overs of an
/// interrupted write and are removed.
pub(crate) const TEMP_PREFIX: &str = ".tmp-";

static COUNTER: AtomicU64 = AtomicU64::new(0);

/// Flushes a folder's entries (the rename) to disk.
pub(crate) fn sync_dir(dir: &Path) -> Result<()> {
    let f = File::open(dir).map_err(|e| StoreError::io("open", dir, e))?;
    f.sync_all().map_err(|e| StoreError::io("flush", dir, e))
}

/// Creates a folder (and its parents) and flushes its parent so the new entry is durable.
pub(crate) fn ensure_dir(dir: &Path) -> Result<()> {
    if dir.is_dir() {
        return Ok(());
    }
    std::fs::create_dir_all(dir).map_err(|e| StoreError::io("create", dir, e))?;
    if let Some(parent) = dir.parent() {
        sync_dir(parent)?;
    }
    Ok(())
}

/// Writes `dir/name` atomically: the content goes to a temp file in the same folder, which
/// is flushed to disk, renamed over the final name, and the folder is flushed. A reader
/// sees either the old file or the complete new one, never a partial one.
pub(crate) fn write_atomic<T>(
    dir: &Path,
    name: &str,
    write: impl FnOnce(&mut BufWriter<File>) -> Result<T>,
) -> Result<T> {
    let n = COUNTER.fetch_add(1, Ordering::Relaxed);
    let tmp = dir.join(format!("{TEMP_PREFIX}{name}.{}.{n}", std::process::id()));
    let target = dir.join(name);
    let result = (|| {
        let file = OpenOptions::new()
            .write(true)
            .create_new(true)
            .open(&tmp)
            .map_err(|e| StoreError::io("create", &tmp, e))?;
        let mut w = BufWriter::with_capacity(1 << 20, file);
        let value = write(&mut w)?;
        w.flush().map_err(|e| StoreError::io("write", &tmp, e))?;
        let file = w.into_inner().map_err(|e| StoreError::io("write", &tmp, e.into_error()))?;
        file.sync_all().map_err(|e| StoreError::io("flush", &tmp, e))?;
        drop(file);
        std::fs::rename(&tmp, &target).map_err(|e| StoreError::io("rename", &tmp, e))?;
        sync_dir(dir)?;
        Ok(value)
    })();
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

/// A writer that computes the SHA-256 and length of everything written through it.
pub(crate) struct HashingWriter<W> {
    inner: W,
    hasher: Sha256,
    bytes: u64,
}

impl<W: Write> HashingWriter<W> {
    pub fn new(inner: W) -> Self {
        Self { inner, hasher: Sha256::new(), bytes: 0 }
    }

    /// The checksum text (`sha256:` and hex) and the byte count.
    pub fn finish(self) -> (String, u64) {
        (format!("sha256:{}", hex::encode(self.hasher.finalize())), self.bytes)
    }
}

impl<W: Write> Write for HashingWriter<W> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.inner.write(buf)?;
        self.hasher.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.inner.flush()
    }
}

/// The checksum text of some bytes.
pub(crate) fn checksum(bytes: &[u8]) -> String {
    format!("sha256:{}", hex::encode(Sha256::digest(bytes)))
}

/// A path relative to the data folder, for log lines.
pub(crate) fn rel(root: &Path, path: &Path) -> PathBuf {
    path.strip_prefix(root).map(Path::to_path_buf).unwrap_or_else(|_| path.to_path_buf())
}

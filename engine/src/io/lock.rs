//! An advisory lock on an output file, so two runs never write one file.
//!
//! The lock is `flock` on `FILE.lock` (holding the owner's pid, for the
//! message). The kernel releases it when the owner exits, however it ends, so
//! a killed run never leaves a stale lock behind.

use crate::base::error::{EngineError, Result};
use std::io::Write;
use std::os::unix::fs::MetadataExt;
use std::os::unix::io::AsRawFd;
use std::path::{Path, PathBuf};

/// Holds the lock until dropped; dropping removes the lock file.
#[derive(Debug)]
pub struct OutputLock {
    path: PathBuf,
    file: std::fs::File,
}

/// Path of the lock file of an output.
pub fn lock_path(out: &Path) -> PathBuf {
    let mut s = out.as_os_str().to_owned();
    s.push(".lock");
    PathBuf::from(s)
}

impl OutputLock {
    /// Takes the lock of `out` without waiting.
    ///
    /// # Errors
    /// [`EngineError::OutputLocked`] when another process holds it;
    /// [`EngineError::OutputNotWritable`] when the lock file cannot be made.
    pub fn acquire(out: &Path) -> Result<Self> {
        let path = lock_path(out);
        let unwritable = |e: std::io::Error| EngineError::OutputNotWritable {
            file: out.to_path_buf(),
            reason: format!("cannot create the lock file {}: {e}", path.display()),
        };
        loop {
            let mut file = std::fs::OpenOptions::new()
                .read(true)
                .write(true)
                .create(true)
                .truncate(false)
                .open(&path)
                .map_err(unwritable)?;
            // SAFETY: flock on a descriptor we own; no memory is shared.
            let rc = unsafe { libc::flock(file.as_raw_fd(), libc::LOCK_EX | libc::LOCK_NB) };
            if rc != 0 {
                let err = std::io::Error::last_os_error();
                if err.raw_os_error() == Some(libc::EWOULDBLOCK) {
                    let holder = std::fs::read_to_string(&path).unwrap_or_default();
                    return Err(EngineError::OutputLocked {
                        file: out.to_path_buf(),
                        holder: match holder.trim() {
                            "" => "unknown".to_string(),
                            h => h.to_string(),
                        },
                    });
                }
                return Err(unwritable(err));
            }
            // A previous holder may have removed the file between our open and
            // our lock; then the lock is on a dead inode and we try again.
            let same = match (file.metadata(), std::fs::metadata(&path)) {
                (Ok(a), Ok(b)) => a.ino() == b.ino() && a.dev() == b.dev(),
                _ => false,
            };
            if !same {
                continue;
            }
            file.set_len(0).map_err(unwritable)?;
            writeln!(file, "{}", std::process::id()).map_err(unwritable)?;
            return Ok(Self { path, file });
        }
    }
}

impl Drop for OutputLock {
    fn drop(&mut self) {
        // Removed while still held, so a waiting run sees the inode change and retries.
        let _ = std::fs::remove_file(&self.path);
        // SAFETY: unlocking our own descriptor.
        unsafe { libc::flock(self.file.as_raw_fd(), libc::LOCK_UN) };
    }
}

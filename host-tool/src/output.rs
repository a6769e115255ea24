//! Writing output files atomically: write to a temporary file beside the target, then rename, so a failure
//! never leaves a half-written file.
//!
//! Each file is flushed to the disk before it is renamed ([`AtomicFile::commit`]). A batch that writes
//! thousands of files instead renames without waiting ([`AtomicFile::commit_deferred`]) and flushes the
//! whole file system once at the end ([`sync_all_deferred`]): a crash of the program still leaves only
//! whole files, and the data reach the disk in one flush instead of thousands.

use std::io::{self, Write};
use std::path::{Path, PathBuf};

/// An output file that appears under its final name only when [`AtomicFile::commit`] succeeds.
/// Dropped without commit, the temporary file is removed.
pub struct AtomicFile {
    target: PathBuf,
    tmp: PathBuf,
    file: Option<io::BufWriter<std::fs::File>>,
}

impl AtomicFile {
    /// Creates the temporary file beside `target`.
    pub fn create(target: &Path) -> io::Result<AtomicFile> {
        let dir = match target.parent() {
            Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
            _ => PathBuf::from("."),
        };
        let name = target.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
        let tmp = dir.join(format!(".{name}.tmp-{}", std::process::id()));
        let file = std::fs::File::create(&tmp)?;
        Ok(AtomicFile { target: target.to_path_buf(), tmp, file: Some(io::BufWriter::new(file)) })
    }

    /// Flushes, syncs and renames the temporary file to the target.
    pub fn commit(self) -> io::Result<()> {
        self.finish(true)
    }

    /// Flushes and renames without waiting for the disk; call [`sync_all_deferred`] when the batch is done.
    pub fn commit_deferred(self) -> io::Result<()> {
        self.finish(false)
    }

    /// Any failure (flush, sync, rename) removes the temporary file.
    fn finish(mut self, durable: bool) -> io::Result<()> {
        let done = self.settle(durable);
        if done.is_err() {
            let _ = std::fs::remove_file(&self.tmp);
        }
        done
    }

    fn settle(&mut self, durable: bool) -> io::Result<()> {
        if let Some(f) = self.file.take() {
            let f = f.into_inner().map_err(|e| e.into_error())?;
            if durable {
                f.sync_all()?;
            }
        }
        std::fs::rename(&self.tmp, &self.target)
    }
}

impl Write for AtomicFile {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        match self.file.as_mut() {
            Some(f) => f.write(buf),
            None => Err(io::Error::other("file already committed")),
        }
    }
    fn flush(&mut self) -> io::Result<()> {
        match self.file.as_mut() {
            Some(f) => f.flush(),
            None => Ok(()),
        }
    }
}

impl Drop for AtomicFile {
    fn drop(&mut self) {
        if self.file.take().is_some() {
            let _ = std::fs::remove_file(&self.tmp);
        }
    }
}

/// Writes `bytes` to `target` atomically.
pub fn write_atomic(target: &Path, bytes: &[u8]) -> io::Result<()> {
    let mut f = AtomicFile::create(target)?;
    f.write_all(bytes)?;
    f.commit()
}

/// Writes `bytes` to `target` atomically, leaving the flush to disk to [`sync_all_deferred`].
pub fn write_atomic_deferred(target: &Path, bytes: &[u8]) -> io::Result<()> {
    let mut f = AtomicFile::create(target)?;
    f.write_all(bytes)?;
    f.commit_deferred()
}

/// Flushes the file system holding `dir` to the disk (after deferred commits into it), and the folder's
/// own entries.
pub fn sync_all_deferred(dir: &Path) -> io::Result<()> {
    let d = std::fs::File::open(dir)?;
    rustix::fs::syncfs(&d).map_err(io::Error::from)?;
    d.sync_all()
}

/// Writes a group of files that appear together or not at all: every file is written to its temporary
/// file first, then each is renamed into place; if any step fails, the temporary files are removed and the
/// targets already renamed are removed again, and the first error is returned. The flush to disk is left
/// to [`sync_all_deferred`]. The targets must be distinct paths.
pub fn write_group_deferred(files: &[(PathBuf, Vec<u8>)]) -> io::Result<()> {
    let mut pending = Vec::with_capacity(files.len());
    for (target, bytes) in files {
        let mut f = AtomicFile::create(target)?;
        f.write_all(bytes)?;
        f.flush()?;
        pending.push(f);
    }
    let mut done: Vec<&Path> = Vec::with_capacity(files.len());
    for (f, (target, _)) in pending.into_iter().zip(files) {
        if let Err(e) = f.commit_deferred() {
            for t in done {
                let _ = std::fs::remove_file(t);
            }
            return Err(e);
        }
        done.push(target);
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dropped_file_leaves_nothing() {
        let dir = std::env::temp_dir().join(format!("logtrim-out-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let target = dir.join("a.txt");
        {
            let mut f = AtomicFile::create(&target).unwrap();
            f.write_all(b"half").unwrap();
        }
        assert!(!target.exists());
        assert_eq!(std::fs::read_dir(&dir).unwrap().count(), 0);
        write_atomic(&target, b"whole").unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"whole");
        write_atomic_deferred(&target, b"again").unwrap();
        sync_all_deferred(&dir).unwrap();
        assert_eq!(std::fs::read(&target).unwrap(), b"again");
        std::fs::remove_dir_all(&dir).unwrap();
    }

    #[test]
    fn a_group_appears_whole_or_not_at_all() {
        let dir = std::env::temp_dir().join(format!("logtrim-group-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let (a, b) = (dir.join("u.json"), dir.join("u.bin"));
        write_group_deferred(&[(a.clone(), b"{}".to_vec()), (b.clone(), vec![1, 2])]).unwrap();
        assert_eq!(std::fs::read(&b).unwrap(), [1, 2]);
        // The second target is a folder: nothing of the group stays, no temporary file either.
        std::fs::remove_file(&a).unwrap();
        std::fs::remove_file(&b).unwrap();
        std::fs::create_dir(&b).unwrap();
        std::fs::write(b.join("x"), b"x").unwrap();
        assert!(write_group_deferred(&[(a.clone(), b"{}".to_vec()), (b.clone(), vec![1])]).is_err());
        assert!(!a.exists());
        let names: Vec<String> = std::fs::read_dir(&dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert_eq!(names, ["u.bin"], "only the folder in the way remains");
        std::fs::remove_dir_all(&dir).unwrap();
    }
}

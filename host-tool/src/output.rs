//! Every output file goes through here: written whole or not at all, never over one of the inputs, never
//! over something that is not a file, and cleaned up on every failure and on SIGINT/SIGTERM.
//!
//! # How a file is written
//!
//! * A **regular file** (or a name that does not exist yet) is written to a temporary file beside it
//!   (`.NAME.tmp-PID-N`, made with `create_new`, so two writers never share one), flushed to the disk and
//!   renamed over the target ([`AtomicFile::commit`]). Every write error is an error: the buffer's flush,
//!   `sync_all` and the rename are all checked, and a failure removes the temporary file. A file that is
//!   replaced keeps its permissions.
//! * A **symbolic link** is followed (up to 40 links): its target is written atomically as above and the
//!   link itself stays a link.
//! * A **character device** (`/dev/null`, `/dev/full`, a serial port) or a **FIFO** is written in place:
//!   it cannot be replaced by a regular file, and its write errors (`/dev/full` answers "no space left")
//!   are errors. A FIFO with no reader is refused instead of waited on.
//! * A **directory**, a **block device** or a **socket** is refused before anything is written.
//!
//! # Before anything is written
//!
//! A verb checks all its outputs up front with a [`Plan`] of its inputs: an output that is one of the
//! inputs (the same file by identity, device and inode, so a hard link or a symbolic link to an input is
//! caught as well as the same name) is refused, and so is an output that cannot be written (see above),
//! or whose folder does not exist. Output folders ([`Plan::dir`]) must be folders or not exist yet.
//!
//! # Signals and groups
//!
//! Every temporary file in flight is registered. [`remove_in_flight_and_exit`] removes them all and ends
//! the process; the `logtrim` command calls it on SIGINT and SIGTERM (exit codes 130 and 143). A file is
//! created, registered, renamed and unregistered under one lock, so a signal never leaves a temporary file
//! behind and never removes a committed one.
//!
//! A [`Group`] commits several files together (a unit's calibration file and image): all are written and
//! flushed first, then renamed under the same lock, so a signal sees all of them or none; a rename that
//! fails removes the group's files already renamed.
//!
//! A batch that writes thousands of files renames without waiting for the disk
//! ([`AtomicFile::commit_deferred`]) and flushes the whole file system once at the end
//! ([`sync_all_deferred`]).
//!
//! How a number is printed in any of them (no negative zeros) is [`number`]'s.

pub mod number;

use std::fmt;
use std::fs::{File, OpenOptions};
use std::io::{self, Write};
use std::os::unix::fs::{FileTypeExt, MetadataExt, OpenOptionsExt};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::{Mutex, MutexGuard};

/// Temporary files in flight: removed by [`remove_in_flight_and_exit`].
static IN_FLIGHT: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());
/// Makes each temporary name of this process distinct.
static TMP_COUNTER: AtomicU64 = AtomicU64::new(0);
/// Symbolic links followed before giving up (as the kernel's own limit).
const MAX_LINKS: usize = 40;

fn in_flight() -> MutexGuard<'static, Vec<PathBuf>> {
    IN_FLIGHT.lock().unwrap_or_else(|p| p.into_inner())
}

fn unregister(list: &mut Vec<PathBuf>, tmp: &Path) {
    if let Some(i) = list.iter().position(|p| p == tmp) {
        list.swap_remove(i);
    }
}

/// Removes every temporary file in flight and ends the process with `code`, holding the lock so that no
/// other thread creates or commits a file meanwhile. For signal handlers (SIGINT: 130, SIGTERM: 143).
pub fn remove_in_flight_and_exit(code: i32) -> ! {
    let list = in_flight();
    for p in list.iter() {
        let _ = std::fs::remove_file(p);
    }
    std::process::exit(code)
}

/// The temporary files in flight now (for tests and diagnostics).
pub fn in_flight_count() -> usize {
    in_flight().len()
}

/// Why an output cannot be written where it was asked for.
#[derive(Debug)]
#[non_exhaustive]
pub enum OutputError {
    /// The output is one of the inputs (the same file, by device and inode).
    SameAsInput {
        /// The output as given.
        output: PathBuf,
        /// The input it is.
        input: PathBuf,
    },
    /// The output path cannot be written (a folder, a block device, a socket, a missing folder, …).
    Unusable {
        /// The output as given.
        output: PathBuf,
        /// Why.
        reason: String,
    },
}

impl fmt::Display for OutputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            OutputError::SameAsInput { output, input } if output == input => write!(
                f,
                "{}: the output is also an input; write to another file (an input is never overwritten)",
                output.display()
            ),
            OutputError::SameAsInput { output, input } => write!(
                f,
                "{}: the output is the input {} (the same file); write to another file (an input is never overwritten)",
                output.display(),
                input.display()
            ),
            OutputError::Unusable { output, reason } => write!(f, "{}: {reason}", output.display()),
        }
    }
}

impl std::error::Error for OutputError {}

/// Where the bytes of an output go.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Dest {
    /// A regular file (existing or not) at this path, symbolic links resolved: written atomically.
    Regular(PathBuf),
    /// A character device or FIFO: written in place.
    InPlace { path: PathBuf, fifo: bool },
}

fn unusable(reason: impl Into<String>) -> io::Error {
    io::Error::other(reason.into())
}

/// Resolves symbolic links and classifies what `target` is.
fn resolve(target: &Path) -> io::Result<Dest> {
    if target.as_os_str().is_empty() {
        return Err(unusable("an empty path: expected a file name"));
    }
    let mut path = target.to_path_buf();
    for _ in 0..MAX_LINKS {
        let meta = match std::fs::symlink_metadata(&path) {
            Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(Dest::Regular(path)),
            Err(e) => return Err(e),
            Ok(m) => m,
        };
        let ft = meta.file_type();
        if ft.is_symlink() {
            let link = std::fs::read_link(&path)?;
            path = match path.parent() {
                Some(dir) if link.is_relative() => dir.join(link),
                _ => link,
            };
            continue;
        }
        if ft.is_file() {
            return Ok(Dest::Regular(path));
        }
        if ft.is_dir() {
            return Err(io::Error::new(io::ErrorKind::IsADirectory, "is a folder: expected a file name"));
        }
        if ft.is_char_device() || ft.is_fifo() {
            return Ok(Dest::InPlace { path, fifo: ft.is_fifo() });
        }
        let what = if ft.is_block_device() { "a block device" } else { "a socket or other special file" };
        return Err(unusable(format!("is {what}: expected a file name (it is not overwritten)")));
    }
    Err(unusable(format!("more than {MAX_LINKS} levels of symbolic links")))
}

/// The folder a regular file is written in (`.` for a bare name).
fn folder_of(path: &Path) -> PathBuf {
    match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d.to_path_buf(),
        _ => PathBuf::from("."),
    }
}

/// Checks that a regular output's folder exists and is a folder.
fn check_folder(path: &Path) -> io::Result<()> {
    let dir = folder_of(path);
    match std::fs::metadata(&dir) {
        Ok(m) if m.is_dir() => Ok(()),
        Ok(_) => Err(unusable(format!("{} is not a folder", dir.display()))),
        Err(e) if e.kind() == io::ErrorKind::NotFound => {
            Err(unusable(format!("the folder {} does not exist", dir.display())))
        }
        Err(e) => Err(unusable(format!("the folder {}: {e}", dir.display()))),
    }
}

/// A file's identity: its device and inode.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct FileId {
    dev: u64,
    ino: u64,
}

fn file_id(path: &Path) -> Option<FileId> {
    std::fs::metadata(path).ok().map(|m| FileId { dev: m.dev(), ino: m.ino() })
}

/// A verb's inputs, to check its outputs against before anything is written.
#[derive(Debug, Default, Clone)]
pub struct Plan {
    inputs: Vec<(PathBuf, FileId)>,
}

impl Plan {
    /// A plan with these inputs (an input that does not exist is left to its reader to report).
    pub fn with_inputs<'a>(inputs: impl IntoIterator<Item = &'a Path>) -> Plan {
        let inputs = inputs.into_iter().filter_map(|p| file_id(p).map(|id| (p.to_path_buf(), id))).collect();
        Plan { inputs }
    }

    /// Checks an output file: not one of the inputs, and writable as the module docs say (not a folder,
    /// a block device or a socket; its folder exists).
    pub fn file(&self, output: &Path) -> Result<(), OutputError> {
        let bad = |reason: String| OutputError::Unusable { output: output.to_path_buf(), reason };
        match resolve(output).map_err(|e| bad(e.to_string()))? {
            Dest::Regular(p) => check_folder(&p).map_err(|e| bad(e.to_string()))?,
            Dest::InPlace { .. } => {}
        }
        self.not_an_input(output)
    }

    /// Checks an output folder: a folder or nothing yet (no file of that name, no file in its way), and no
    /// input.
    pub fn dir(&self, output: &Path) -> Result<(), OutputError> {
        let bad = |reason: String| OutputError::Unusable { output: output.to_path_buf(), reason };
        let mut p = output.to_path_buf();
        loop {
            match std::fs::metadata(&p) {
                Ok(m) if m.is_dir() => break,
                Ok(_) if p == output => return Err(bad("is a file: expected a folder".into())),
                Ok(_) => return Err(bad(format!("{} is a file, so the folder cannot be made", p.display()))),
                Err(e) if matches!(e.kind(), io::ErrorKind::NotFound | io::ErrorKind::NotADirectory) => {}
                Err(e) => return Err(bad(e.to_string())),
            }
            match p.parent() {
                Some(d) if !d.as_os_str().is_empty() => p = d.to_path_buf(),
                _ => break,
            }
        }
        self.not_an_input(output)
    }

    fn not_an_input(&self, output: &Path) -> Result<(), OutputError> {
        let Some(id) = file_id(output) else { return Ok(()) };
        match self.inputs.iter().find(|(_, i)| *i == id) {
            Some((input, _)) => {
                Err(OutputError::SameAsInput { output: output.to_path_buf(), input: input.clone() })
            }
            None => Ok(()),
        }
    }
}

/// An output file that appears under its final name only when [`AtomicFile::commit`] succeeds (a
/// regular file), or that is written in place (a character device or FIFO; see the module docs).
/// Dropped without commit, the temporary file is removed.
pub struct AtomicFile {
    /// The final path (symbolic links resolved).
    target: PathBuf,
    /// The temporary file, for a regular target.
    tmp: Option<PathBuf>,
    file: Option<io::BufWriter<File>>,
}

impl fmt::Debug for AtomicFile {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("AtomicFile").field("target", &self.target).field("tmp", &self.tmp).finish()
    }
}

impl AtomicFile {
    /// Opens `target` for writing as the module docs say: a temporary file beside a regular target (or
    /// beside a symbolic link's target), the device or FIFO itself otherwise.
    pub fn create(target: &Path) -> io::Result<AtomicFile> {
        match resolve(target)? {
            Dest::InPlace { path, fifo } => {
                let mut opts = OpenOptions::new();
                opts.write(true);
                if fifo {
                    // Without a reader, a FIFO's open would wait forever: open without blocking (ENXIO when
                    // nobody reads), then write blocking as usual.
                    opts.custom_flags(rustix::fs::OFlags::NONBLOCK.bits() as i32);
                }
                let file = opts.open(&path).map_err(|e| match e.raw_os_error() {
                    Some(code) if fifo && code == rustix::io::Errno::NXIO.raw_os_error() => {
                        unusable("a FIFO that no process reads: start its reader first")
                    }
                    _ => e,
                })?;
                if fifo {
                    let flags = rustix::fs::fcntl_getfl(&file)? - rustix::fs::OFlags::NONBLOCK;
                    rustix::fs::fcntl_setfl(&file, flags)?;
                }
                Ok(AtomicFile { target: path, tmp: None, file: Some(io::BufWriter::new(file)) })
            }
            Dest::Regular(path) => {
                check_folder(&path)?;
                let dir = folder_of(&path);
                let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
                let n = TMP_COUNTER.fetch_add(1, Ordering::Relaxed);
                let tmp = dir.join(format!(".{name}.tmp-{}-{n}", std::process::id()));
                let mut list = in_flight();
                let file = OpenOptions::new().write(true).create_new(true).open(&tmp)?;
                list.push(tmp.clone());
                drop(list);
                // A replaced file keeps its permissions (best effort: the new file is whole either way).
                if let Ok(old) = std::fs::metadata(&path) {
                    let _ = file.set_permissions(old.permissions());
                }
                Ok(AtomicFile { target: path, tmp: Some(tmp), file: Some(io::BufWriter::new(file)) })
            }
        }
    }

    /// The path the bytes end up at (symbolic links resolved).
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Flushes, syncs and renames the temporary file to the target (a device or FIFO: flushes).
    pub fn commit(self) -> io::Result<()> {
        self.finish(true)
    }

    /// Flushes and renames without waiting for the disk; call [`sync_all_deferred`] when the batch is done.
    pub fn commit_deferred(self) -> io::Result<()> {
        self.finish(false)
    }

    /// Flushes (and with `durable`, syncs) the data, leaving the rename to the caller.
    fn flush_all(&mut self, durable: bool) -> io::Result<()> {
        let Some(f) = self.file.take() else { return Err(io::Error::other("file already committed")) };
        let f = f.into_inner().map_err(|e| e.into_error())?;
        if durable && self.tmp.is_some() {
            f.sync_all()?;
        }
        // Dropping the file closes it; a regular file's data are flushed by now (close reports nothing more
        // on Linux for local files).
        drop(f);
        Ok(())
    }

    fn finish(mut self, durable: bool) -> io::Result<()> {
        let flushed = self.flush_all(durable);
        let Some(tmp) = self.tmp.take() else { return flushed };
        let mut list = in_flight();
        let result = flushed.and_then(|()| std::fs::rename(&tmp, &self.target));
        if result.is_err() {
            let _ = std::fs::remove_file(&tmp);
        }
        unregister(&mut list, &tmp);
        result
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
        if let Some(tmp) = self.tmp.take() {
            let mut list = in_flight();
            // Close before removing.
            drop(self.file.take());
            let _ = std::fs::remove_file(&tmp);
            unregister(&mut list, &tmp);
        }
    }
}

/// Files committed together: all appear, or none (see the module docs).
#[derive(Debug, Default)]
pub struct Group {
    files: Vec<AtomicFile>,
}

impl Group {
    /// An empty group.
    pub fn new() -> Group {
        Group::default()
    }

    /// Adds a file, written or still to be written through [`Group::file`].
    pub fn add(&mut self, file: AtomicFile) -> usize {
        self.files.push(file);
        self.files.len() - 1
    }

    /// The `i`-th file added, to write to.
    pub fn file(&mut self, i: usize) -> Option<&mut AtomicFile> {
        self.files.get_mut(i)
    }

    /// Flushes every file (syncs with `durable`), then renames them all under one lock; if any step fails,
    /// no file of the group is left: temporary files are removed and targets already renamed are removed.
    pub fn commit(mut self, durable: bool) -> io::Result<()> {
        for f in &mut self.files {
            f.flush_all(durable)?;
        }
        let mut list = in_flight();
        let mut done: Vec<PathBuf> = Vec::new();
        let mut failure = None;
        for f in &mut self.files {
            let Some(tmp) = f.tmp.take() else { continue };
            if failure.is_none() {
                match std::fs::rename(&tmp, &f.target) {
                    Ok(()) => done.push(f.target.clone()),
                    Err(e) => failure = Some(e),
                }
            }
            if failure.is_some() {
                let _ = std::fs::remove_file(&tmp);
            }
            unregister(&mut list, &tmp);
        }
        match failure {
            None => Ok(()),
            Some(e) => {
                for p in done {
                    let _ = std::fs::remove_file(p);
                }
                Err(e)
            }
        }
    }
}

/// Writes a group of files that appear together or not at all (a [`Group`] of `(target, bytes)`): if any
/// step fails, no file of the group is left and the first error is returned. The flush to disk is left to
/// [`sync_all_deferred`]. The targets must be distinct paths.
pub fn write_group_deferred(files: &[(PathBuf, Vec<u8>)]) -> io::Result<()> {
    let mut group = Group::new();
    for (target, bytes) in files {
        let mut f = AtomicFile::create(target)?;
        f.write_all(bytes)?;
        group.add(f);
    }
    group.commit(false)
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
    let d = File::open(dir)?;
    rustix::fs::syncfs(&d).map_err(io::Error::from)?;
    d.sync_all()
}

#[cfg(test)]
mod tests;

//! Writing results safely: never overwrite without being asked, never leave a partial file
//! or folder at a result's name, never let two runs write one folder at once.
//!
//! Files ([`prepare_file`] before the computation, then [`FileGuard::commit`]; or
//! [`write_atomic`] in one call) are written under a temporary name in the same folder and
//! renamed into place, under the same kind of lock as folders.
//!
//! Folders go in two steps, so that every output problem shows before a long computation
//! rather than after it:
//! 1. [`prepare_folder`] takes the folder's lock (`.<name>.lock` beside it, held with
//!    `flock` until the [`FolderGuard`] is dropped; a second run into the same folder is
//!    refused at once), finishes or reports what an interrupted run left (below), refuses an
//!    existing folder without `force`, and creates this run's temporary folder
//!    `.<name>.tmp-<pid>-<random>` exclusively; creating it proves the parent is writable
//!    and the names fit the file system.
//! 2. [`FolderGuard::commit`] fills the temporary folder, syncs it and renames it to the
//!    name. An existing folder (with `force`) is swapped with the new one in one step
//!    (`renameat2(RENAME_EXCHANGE)` on Linux, `renamex_np(RENAME_SWAP)` on macOS) and then
//!    deleted, so at every instant either the old or the new folder is at the name.
//!
//! Where the file system or the platform cannot swap, the old folder is first renamed
//! aside to `.<name>.old-<pid>-<random>` and the new one renamed in; if that second rename
//! fails the old folder is renamed back. A run that dies between the two renames leaves the
//! name empty and the old folder aside: the next run into the same folder renames it back
//! before anything else (and says so on stderr).
//!
//! Leftovers of runs that were killed — temporary folders, and set-aside folders whose
//! replacement did land — are listed in [`FolderGuard::notes`] for the caller to print; with
//! `force` they are removed. A temporary folder is never reused: each run's name carries a
//! random part and is created with an exclusive `mkdir`. The guard removes its temporary
//! folder and lock when dropped (on error too), and [`clean_up_on_signals`] makes SIGINT,
//! SIGTERM and SIGHUP do the same before the process ends. Only SIGKILL (or a power cut)
//! leaves leftovers, and the next run reports them.
//!
//! Long names: the hidden siblings carry the folder name plus up to 23 bytes. A name too
//! long for that keeps its first bytes and a hash of the whole name in the hidden siblings
//! (`.<start>~<hash>.lock`), so any name the file system accepts for the folder works.
//!
//! Locks are advisory and local: on Unix they use `flock`, which some network file systems
//! do not honour; elsewhere there is no lock.

use crate::error::{Error, ErrorKind, Result};
use std::fs::{File, OpenOptions};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

/// Name length limit assumed where the file system cannot be asked.
const DEFAULT_NAME_MAX: usize = 255;

/// Bytes the hidden siblings add to a name at most: `.` before it and
/// `.tmp-<pid up to 10 digits>-<6 random>` after it.
const SIBLING_ROOM: usize = 1 + ".tmp-".len() + 10 + 1 + RANDOM_LEN;

/// Random characters in a temporary name.
const RANDOM_LEN: usize = 6;

/// Refuses to proceed when `path` exists and `force` is false.
pub fn check_overwrite(path: &Path, force: bool) -> Result<()> {
    if path.exists() && !force {
        return Err(
            Error::new(ErrorKind::Input, "already exists; refusing to overwrite results (pass --force to replace it)").with_file(path)
        );
    }
    Ok(())
}

/// Writes `bytes` to `path` atomically; refuses to replace an existing file unless
/// `force`. For a result computed at some cost, call [`prepare_file`] before the
/// computation instead, so that output problems show first.
pub fn write_atomic(path: &Path, bytes: &[u8], force: bool) -> Result<()> {
    prepare_file(path, force)?.commit(bytes)
}

/// Everything checked and held for writing one output file, from before the computation
/// until it is in place: the file's lock, and its temporary sibling (created, so the folder
/// is writable and the names fit). Dropping it without [`commit`](Self::commit) removes the
/// temporary file and releases the lock; a file at the name is untouched.
#[derive(Debug)]
pub struct FileGuard {
    path: PathBuf,
    temp: PathBuf,
    file: Option<File>,
    force: bool,
    // Declared last: the lock is released after the temporary file is gone.
    _lock: FolderLock,
}

/// Checks that the file `path` can be written and takes it for this run; call it before
/// computing what goes in it. In order: creates the parent folder if needed; checks the
/// name fits the file system; takes the lock `.<name>.lock` beside it (an error at once if
/// another run holds it); refuses an existing file without `force`; creates this run's
/// temporary file `.<name>.tmp-<pid>-<random>` exclusively.
pub fn prepare_file(path: &Path, force: bool) -> Result<FileGuard> {
    let (parent, name) = split(path)?;
    create_parent(&parent)?;
    let max = name_max(&parent);
    if name.len() > max {
        return Err(Error::input(format!(
            "the file name is {} bytes long and this file system allows at most {max}: choose a shorter name",
            name.len()
        ))
        .with_file(path));
    }
    let stem = sibling_stem(&name, max);
    let lock = FolderLock::acquire(&parent.join(format!(".{stem}.lock")), path)?;
    check_overwrite(path, force)?;
    if path.is_dir() {
        return Err(Error::input("is a folder; give a file name for this output").with_file(path));
    }
    let (temp, file) = create_unique(&parent, &stem, |p| OpenOptions::new().write(true).create_new(true).open(p))?;
    live_paths().push(temp.clone());
    Ok(FileGuard { path: path.to_path_buf(), temp, file: Some(file), force, _lock: lock })
}

impl FileGuard {
    /// The file's final path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// Writes `bytes` and renames the file into place (replacing an existing one only if
    /// the guard was prepared with `force`).
    pub fn commit(mut self, bytes: &[u8]) -> Result<()> {
        let mut f = self.file.take().expect("a guard's file is taken only by commit");
        let written = f.write_all(bytes).and_then(|()| f.sync_all());
        drop(f);
        written.map_err(|e| Error::from(e).with_file(&self.temp))?;
        let renamed = if self.force { std::fs::rename(&self.temp, &self.path) } else { System.rename_new(&self.temp, &self.path) };
        match renamed {
            Ok(()) => Ok(()),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => check_overwrite(&self.path, false),
            Err(e) => Err(Error::from(e).with_file(&self.path)),
        }
    }
}

impl Drop for FileGuard {
    fn drop(&mut self) {
        // After a successful rename there is nothing at the temporary name.
        let _ = std::fs::remove_file(&self.temp);
        live_paths().retain(|p| p != &self.temp);
    }
}

/// Everything checked and held for writing one output folder, from before the computation
/// until its files are in place. Dropping it without [`commit`](Self::commit) removes the
/// temporary folder and releases the lock; the folder at the name is untouched.
#[derive(Debug)]
pub struct FolderGuard {
    dir: PathBuf,
    temp: PathBuf,
    aside: PathBuf,
    force: bool,
    notes: Vec<String>,
    // Declared last: the lock is released after the temporary folder is gone.
    _lock: FolderLock,
}

/// Checks that the folder `dir` can be written and takes it for this run; call it before
/// computing what goes in it.
///
/// In order: creates the parent folder if needed; checks the folder's name fits the file
/// system; takes the lock `.<name>.lock` in the parent (an error at once if another run
/// holds it); renames back an old folder that an interrupted replacement left aside;
/// reports (or with `force` removes) temporary folders left by killed runs; refuses an
/// existing folder without `force`; creates this run's temporary folder.
pub fn prepare_folder(dir: &Path, force: bool) -> Result<FolderGuard> {
    let (parent, name) = split(dir)?;
    create_parent(&parent)?;
    let max = name_max(&parent);
    let len = dir.file_name().map_or(0, |n| n.len());
    if len > max {
        return Err(Error::input(format!(
            "the folder name is {len} bytes long and this file system allows at most {max}: choose a shorter name"
        ))
        .with_file(dir));
    }
    let stem = sibling_stem(&name, max);
    let lock = FolderLock::acquire(&parent.join(format!(".{stem}.lock")), dir)?;
    let mut notes = Vec::new();
    recover(&parent, &stem, dir, force, &mut notes)?;
    if std::fs::symlink_metadata(dir).is_ok() && !force {
        return Err(exists(dir));
    }
    let (temp, ()) = create_unique(&parent, &stem, |p| std::fs::create_dir(p))?;
    let aside = parent.join(format!(".{stem}.old-{}", suffix_of(&temp)));
    live_paths().push(temp.clone());
    Ok(FolderGuard { dir: dir.to_path_buf(), temp, aside, force, notes, _lock: lock })
}

impl FolderGuard {
    /// What was found and done about earlier runs (one line each, for stderr).
    pub fn notes(&self) -> &[String] {
        &self.notes
    }

    /// Writes `files` (name, text) and puts the folder in place; an existing folder is
    /// replaced only if the guard was prepared with `force`, and stays whole at its name if
    /// anything fails.
    pub fn commit(self, files: &[(String, String)]) -> Result<()> {
        self.commit_with(files, &System)
    }

    fn commit_with(self, files: &[(String, String)], ops: &dyn Renames) -> Result<()> {
        for (name, text) in files {
            let p = self.temp.join(name);
            let written = File::create_new(&p).and_then(|mut f| f.write_all(text.as_bytes()).and_then(|()| f.sync_all()));
            written.map_err(|e| Error::from(e).with_file(&p))?;
        }
        sync_dir(&self.temp).map_err(|e| Error::from(e).with_file(&self.temp))?;
        {
            // A signal handler waits for the swap to finish before it cleans up.
            let _live = live_paths();
            replace(ops, &self.temp, &self.dir, &self.aside, self.force)?;
        }
        let parent = self.dir.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new("."));
        sync_dir(parent).map_err(|e| Error::from(e).with_file(parent))
    }
}

impl Drop for FolderGuard {
    fn drop(&mut self) {
        // After a swap the temporary name holds the old folder; either way it goes.
        let _ = remove_any(&self.temp);
        live_paths().retain(|p| p != &self.temp);
    }
}

/// The rename steps of a folder replacement, as a seam for tests that inject failures.
trait Renames {
    /// Renames `from` to `to`; fails with `AlreadyExists` if `to` exists.
    fn rename_new(&self, from: &Path, to: &Path) -> std::io::Result<()>;
    /// Swaps `a` and `b` in one step; fails with `Unsupported` where that cannot be done.
    fn exchange(&self, a: &Path, b: &Path) -> std::io::Result<()>;
}

/// The file system's own renames.
struct System;

#[cfg(any(target_os = "linux", target_os = "android", target_os = "macos", target_os = "ios"))]
impl Renames for System {
    fn rename_new(&self, from: &Path, to: &Path) -> std::io::Result<()> {
        use rustix::fs::{renameat_with, RenameFlags, CWD};
        match renameat_with(CWD, from, CWD, to, RenameFlags::NOREPLACE) {
            Err(e) if swap_unsupported(&e.into()) => rename_if_absent(from, to),
            r => Ok(r?),
        }
    }
    fn exchange(&self, a: &Path, b: &Path) -> std::io::Result<()> {
        use rustix::fs::{renameat_with, RenameFlags, CWD};
        match renameat_with(CWD, a, CWD, b, RenameFlags::EXCHANGE) {
            Err(e) if swap_unsupported(&e.into()) => Err(std::io::ErrorKind::Unsupported.into()),
            r => Ok(r?),
        }
    }
}

#[cfg(not(any(target_os = "linux", target_os = "android", target_os = "macos", target_os = "ios")))]
impl Renames for System {
    fn rename_new(&self, from: &Path, to: &Path) -> std::io::Result<()> {
        rename_if_absent(from, to)
    }
    fn exchange(&self, _: &Path, _: &Path) -> std::io::Result<()> {
        Err(std::io::ErrorKind::Unsupported.into())
    }
}

/// Check, then rename: for file systems without a no-replace rename. The lock keeps our
/// own runs out of the gap between the two.
fn rename_if_absent(from: &Path, to: &Path) -> std::io::Result<()> {
    if std::fs::symlink_metadata(to).is_ok() {
        return Err(std::io::ErrorKind::AlreadyExists.into());
    }
    std::fs::rename(from, to)
}

/// True when a rename flag is not supported by the kernel or the file system.
#[cfg_attr(not(unix), allow(dead_code))]
fn swap_unsupported(e: &std::io::Error) -> bool {
    #[cfg(unix)]
    {
        use rustix::io::Errno;
        let code = e.raw_os_error().map(Errno::from_raw_os_error);
        if [Errno::INVAL, Errno::NOSYS, Errno::NOTSUP, Errno::OPNOTSUPP].iter().any(|c| Some(*c) == code) {
            return true;
        }
    }
    e.kind() == std::io::ErrorKind::Unsupported
}

/// Moves the filled temporary folder `temp` to `dir`; see the module doc for the order of
/// the steps and what each failure leaves.
fn replace(ops: &dyn Renames, temp: &Path, dir: &Path, aside: &Path, force: bool) -> Result<()> {
    match ops.rename_new(temp, dir) {
        Ok(()) => return Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {
            if !force {
                return Err(exists(dir));
            }
        }
        Err(e) => return Err(Error::from(e).with_file(dir)),
    }
    match ops.exchange(temp, dir) {
        Ok(()) => {
            // The old folder is now at `temp`; the guard removes it if this fails.
            let _ = remove_any(temp);
            return Ok(());
        }
        Err(e) if e.kind() == std::io::ErrorKind::Unsupported => {}
        Err(e) => {
            return Err(
                Error::new(ErrorKind::Io, format!("cannot swap in the new results ({e}); the old results are unchanged")).with_file(dir)
            )
        }
    }
    ops.rename_new(dir, aside)
        .map_err(|e| Error::new(ErrorKind::Io, format!("cannot move the old results aside ({e}); they are unchanged")).with_file(dir))?;
    if let Err(e) = ops.rename_new(temp, dir) {
        return Err(match ops.rename_new(aside, dir) {
            Ok(()) => Error::new(ErrorKind::Io, format!("cannot move the new results into place ({e}); the old results are unchanged"))
                .with_file(dir),
            Err(back) => Error::new(
                ErrorKind::Io,
                format!(
                    "cannot move the new results into place ({e}) nor the old results back ({back}); the old results are in {}, and the next run into this folder moves them back",
                    aside.display()
                ),
            )
            .with_file(dir),
        });
    }
    let _ = remove_any(aside);
    Ok(())
}

/// What an interrupted run left beside `dir`, found and handled under the lock.
fn recover(parent: &Path, stem: &str, dir: &Path, force: bool, notes: &mut Vec<String>) -> Result<()> {
    let mut temps = Vec::new();
    let mut asides = Vec::new();
    let entries = std::fs::read_dir(parent).map_err(|e| Error::from(e).with_file(parent))?;
    for entry in entries.flatten() {
        let file_name = entry.file_name();
        let Some(rest) = file_name.to_str().and_then(|n| n.strip_prefix(&format!(".{stem}."))) else { continue };
        if let Some(s) = rest.strip_prefix("tmp-").filter(|s| is_run_suffix(s)) {
            temps.push((s.to_string(), entry.path()));
        } else if let Some(s) = rest.strip_prefix("old-").filter(|s| is_run_suffix(s)) {
            asides.push((s.to_string(), entry.path()));
        }
    }
    if std::fs::symlink_metadata(dir).is_err() {
        // An interrupted replacement: the newest folder set aside is the last result.
        let newest = asides.iter().enumerate().max_by_key(|(_, (_, p))| modified(p)).map(|(i, _)| i);
        if let Some(i) = newest {
            let (_, old) = asides.remove(i);
            System.rename_new(&old, dir).map_err(|e| {
                Error::new(
                    ErrorKind::Io,
                    format!("cannot move back the old results from {} ({e}); move that folder here by hand", old.display()),
                )
                .with_file(dir)
            })?;
            notes.push(format!("{}: moved back from {}, where a run interrupted while replacing it left it", dir.display(), old.display()));
        }
    }
    for (_, p) in temps.iter().chain(&asides) {
        if force {
            remove_any(p).map_err(|e| {
                Error::new(ErrorKind::Io, format!("cannot remove this leftover of an interrupted run ({e}); remove it by hand"))
                    .with_file(p)
            })?;
            notes.push(format!("{}: removed, a leftover of an interrupted run", p.display()));
        } else {
            notes.push(format!("{}: leftover of an interrupted run; remove it, or pass --force to have it removed", p.display()));
        }
    }
    Ok(())
}

/// The last-modified time of `p`, or the epoch if unknown.
fn modified(p: &Path) -> std::time::SystemTime {
    std::fs::symlink_metadata(p).and_then(|m| m.modified()).unwrap_or(std::time::UNIX_EPOCH)
}

/// True for `<pid>` (the older naming) or `<pid>-<alphanumerics>`.
fn is_run_suffix(s: &str) -> bool {
    let (pid, random) = s.split_once('-').unwrap_or((s, "x"));
    !pid.is_empty() && pid.bytes().all(|b| b.is_ascii_digit()) && !random.is_empty() && random.bytes().all(|b| b.is_ascii_alphanumeric())
}

/// `<pid>-<random>` of a temporary name.
fn suffix_of(temp: &Path) -> String {
    let name = temp.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    name.rsplit_once(".tmp-").map(|(_, s)| s.to_string()).unwrap_or(name)
}

/// Creates `.<stem>.tmp-<pid>-<random>` in `parent` with `create`, which must fail with
/// `AlreadyExists` if the name is taken; a taken name is never reused.
fn create_unique<T>(parent: &Path, stem: &str, create: impl Fn(&Path) -> std::io::Result<T>) -> Result<(PathBuf, T)> {
    use rand::distributions::{Alphanumeric, DistString};
    let mut last = None;
    for _ in 0..16 {
        let random = Alphanumeric.sample_string(&mut rand::thread_rng(), RANDOM_LEN);
        let p = parent.join(format!(".{stem}.tmp-{}-{random}", std::process::id()));
        match create(&p) {
            Ok(made) => return Ok((p, made)),
            Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => last = Some(p),
            Err(e) => return Err(unwritable(parent, e)),
        }
    }
    Err(Error::new(ErrorKind::Io, "cannot find a free temporary name (16 tries); remove old `.*.tmp-*` entries")
        .with_file(last.unwrap_or_default()))
}

/// Splits a result path into its folder and its final name.
fn split(path: &Path) -> Result<(PathBuf, String)> {
    let name = path
        .file_name()
        .ok_or_else(|| Error::input("an output path must end in a file or folder name (not `..` or `/`)").with_file(path))?
        .to_string_lossy()
        .into_owned();
    let parent = path.parent().filter(|p| !p.as_os_str().is_empty()).unwrap_or(Path::new(".")).to_path_buf();
    Ok((parent, name))
}

/// The longest name the file system under `dir` accepts.
fn name_max(dir: &Path) -> usize {
    #[cfg(unix)]
    if let Ok(s) = rustix::fs::statvfs(dir) {
        if s.f_namemax > 0 {
            return usize::try_from(s.f_namemax).unwrap_or(DEFAULT_NAME_MAX);
        }
    }
    let _ = dir;
    DEFAULT_NAME_MAX
}

/// The part of the hidden siblings' names that stands for `name`: the name itself, or if
/// that would make them longer than `name_max`, its first bytes, `~` and 16 hex digits of a
/// hash of the whole name (stable across runs and versions).
fn sibling_stem(name: &str, name_max: usize) -> String {
    let budget = name_max.saturating_sub(SIBLING_ROOM);
    if name.len() <= budget {
        return name.to_string();
    }
    let mut cut = budget.saturating_sub(17);
    while !name.is_char_boundary(cut) {
        cut -= 1;
    }
    // FNV-1a, 64 bits.
    let hash = name.bytes().fold(0xcbf2_9ce4_8422_2325_u64, |h, b| (h ^ u64::from(b)).wrapping_mul(0x0100_0000_01b3));
    format!("{}~{hash:016x}", &name[..cut])
}

fn exists(dir: &Path) -> Error {
    Error::input("output folder already exists; refusing to overwrite results (pass --force to replace it)").with_file(dir)
}

/// The error for a folder we cannot create things in.
fn unwritable(dir: &Path, e: std::io::Error) -> Error {
    #[cfg(unix)]
    if e.raw_os_error() == Some(rustix::io::Errno::NAMETOOLONG.raw_os_error()) {
        return Error::input(format!("a name is too long for this file system ({e}): choose a shorter name")).with_file(dir);
    }
    Error::new(ErrorKind::Io, format!("cannot write in this folder ({e}): make it writable or choose another place for the results"))
        .with_file(dir)
}

/// Creates the folder results go in, if needed.
fn create_parent(parent: &Path) -> Result<()> {
    std::fs::create_dir_all(parent).map_err(|e| {
        Error::new(
            ErrorKind::Io,
            format!("cannot create this folder ({e}): make its parent writable or choose another place for the results"),
        )
        .with_file(parent)
    })
}

/// Removes a file or a folder with its contents; a missing one is fine.
fn remove_any(p: &Path) -> std::io::Result<()> {
    let r = match std::fs::symlink_metadata(p) {
        Ok(m) if m.is_dir() => std::fs::remove_dir_all(p),
        Ok(_) => std::fs::remove_file(p),
        Err(e) => Err(e),
    };
    match r {
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
        r => r,
    }
}

/// Flushes a folder's entries to disk (where folders can be opened and synced).
fn sync_dir(dir: &Path) -> std::io::Result<()> {
    #[cfg(unix)]
    File::open(dir)?.sync_all()?;
    let _ = dir;
    Ok(())
}

/// The lock of one output folder: an open `.<name>.lock` held with `flock`, removed and
/// released on drop.
#[derive(Debug)]
struct FolderLock {
    path: PathBuf,
    file: File,
}

impl FolderLock {
    fn acquire(path: &Path, dir: &Path) -> Result<FolderLock> {
        loop {
            let file = OpenOptions::new().read(true).write(true).create(true).truncate(false).open(path).map_err(|e| {
                let parent = path.parent().unwrap_or(Path::new("."));
                unwritable(parent, e)
            })?;
            if let Err(e) = try_lock(&file) {
                if e.kind() == std::io::ErrorKind::WouldBlock {
                    return Err(Error::new(
                        ErrorKind::Io,
                        format!(
                            "another run is writing this output (it holds {}); wait for it to finish, or write elsewhere",
                            path.display()
                        ),
                    )
                    .with_file(dir));
                }
                return Err(Error::from(e).with_file(path));
            }
            // A holder removes the file before releasing it; if it did so after we opened
            // it, we hold a lock nobody else will see: open the new file instead.
            if same_file(&file, path) {
                live_paths().push(path.to_path_buf());
                return Ok(FolderLock { path: path.to_path_buf(), file });
            }
        }
    }
}

impl Drop for FolderLock {
    fn drop(&mut self) {
        if same_file(&self.file, &self.path) {
            let _ = std::fs::remove_file(&self.path);
        }
        live_paths().retain(|p| p != &self.path);
        // Closing `file` releases the lock.
    }
}

#[cfg(unix)]
fn try_lock(file: &File) -> std::io::Result<()> {
    use rustix::fs::{flock, FlockOperation};
    flock(file, FlockOperation::NonBlockingLockExclusive).map_err(|e| {
        if e == rustix::io::Errno::WOULDBLOCK {
            std::io::ErrorKind::WouldBlock.into()
        } else {
            e.into()
        }
    })
}

#[cfg(not(unix))]
fn try_lock(_: &File) -> std::io::Result<()> {
    Ok(())
}

#[cfg(unix)]
fn same_file(file: &File, path: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (file.metadata(), std::fs::metadata(path)) {
        (Ok(a), Ok(b)) => a.dev() == b.dev() && a.ino() == b.ino(),
        _ => false,
    }
}

#[cfg(not(unix))]
fn same_file(_: &File, path: &Path) -> bool {
    path.exists()
}

/// Temporary folders and lock files of this process, for the signal handler.
fn live_paths() -> std::sync::MutexGuard<'static, Vec<PathBuf>> {
    static LIVE: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());
    LIVE.lock().unwrap_or_else(|poisoned| poisoned.into_inner())
}

/// Makes SIGINT, SIGTERM and SIGHUP remove this process's temporary folders and lock files
/// before it ends the way the signal would have ended it. A replacement under way is
/// finished first. Call it once from a command that writes folders; later calls do nothing.
/// A library embedding this crate that has its own signal handling need not call it.
pub fn clean_up_on_signals() {
    #[cfg(unix)]
    {
        static INSTALLED: std::sync::Once = std::sync::Once::new();
        INSTALLED.call_once(|| {
            use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
            // Without a handler the signals keep their default action: nothing is lost but
            // the clean-up, which the next run reports.
            let Ok(mut signals) = signal_hook::iterator::Signals::new([SIGINT, SIGTERM, SIGHUP]) else { return };
            let spawned = std::thread::Builder::new().name("output-cleanup".into()).spawn(move || {
                if let Some(sig) = signals.forever().next() {
                    let live = live_paths();
                    for p in live.iter() {
                        let _ = remove_any(p);
                    }
                    let _ = signal_hook::low_level::emulate_default_handler(sig);
                    std::process::exit(128 + sig);
                }
            });
            drop(spawned);
        });
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::cell::Cell;

    #[test]
    fn a_prepared_file_is_refused_to_others_and_leaves_nothing_when_dropped() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("r.csv");
        let held = prepare_file(&path, false).unwrap();
        let err = prepare_file(&path, true).unwrap_err();
        assert!(err.to_string().contains("another run is writing this output"), "{err}");
        drop(held);
        assert_eq!(std::fs::read_dir(dir.path()).unwrap().count(), 0);
        prepare_file(&path, false).unwrap().commit(b"new").unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"new");
        assert!(prepare_file(&path, false).unwrap_err().to_string().contains("already exists"));
        // A file that appears at the name during the computation is not replaced.
        let guard = prepare_file(&dir.path().join("late.csv"), false).unwrap();
        std::fs::write(dir.path().join("late.csv"), "theirs").unwrap();
        assert!(guard.commit(b"ours").is_err());
        assert_eq!(std::fs::read(dir.path().join("late.csv")).unwrap(), b"theirs");
        let mut left: Vec<String> =
            std::fs::read_dir(dir.path()).unwrap().map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).collect();
        left.sort();
        assert_eq!(left, ["late.csv", "r.csv"]);
        prepare_file(&path, true).unwrap().commit(b"forced").unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"forced");
    }

    #[test]
    fn refuses_to_overwrite_without_force_and_leaves_no_temp_file() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("a.csv");
        write_atomic(&p, b"one", false).unwrap();
        assert!(write_atomic(&p, b"two", false).is_err());
        assert_eq!(std::fs::read(&p).unwrap(), b"one");
        write_atomic(&p, b"two", true).unwrap();
        assert_eq!(std::fs::read(&p).unwrap(), b"two");
        assert_eq!(names(dir.path()), ["a.csv"]);
    }

    fn names(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir).unwrap().map(|e| e.unwrap().file_name().to_string_lossy().into_owned()).collect();
        v.sort();
        v
    }

    fn files(tag: &str) -> Vec<(String, String)> {
        vec![("a.csv".to_string(), format!("{tag}\n")), ("b.md".to_string(), tag.to_string())]
    }

    /// A folder `results/small` holding the old results.
    fn old_results() -> (tempfile::TempDir, PathBuf) {
        let root = tempfile::tempdir().unwrap();
        let dir = root.path().join("small");
        prepare_folder(&dir, false).unwrap().commit(&files("old")).unwrap();
        (root, dir)
    }

    fn content(dir: &Path) -> String {
        std::fs::read_to_string(dir.join("a.csv")).unwrap()
    }

    /// The system's renames, failing at chosen calls (counted from 1 across both kinds), and
    /// optionally without swaps.
    struct Faulty {
        calls: Cell<usize>,
        fail_at: Vec<usize>,
        can_swap: bool,
        log: std::cell::RefCell<Vec<String>>,
    }

    impl Faulty {
        fn new(fail_at: &[usize], can_swap: bool) -> Faulty {
            Faulty { calls: Cell::new(0), fail_at: fail_at.to_vec(), can_swap, log: Default::default() }
        }
        fn step(&self, what: &str) -> std::io::Result<()> {
            self.calls.set(self.calls.get() + 1);
            self.log.borrow_mut().push(what.to_string());
            if self.fail_at.contains(&self.calls.get()) {
                return Err(std::io::Error::other("injected failure"));
            }
            Ok(())
        }
    }

    impl Renames for Faulty {
        fn rename_new(&self, from: &Path, to: &Path) -> std::io::Result<()> {
            self.step("rename")?;
            System.rename_new(from, to)
        }
        fn exchange(&self, a: &Path, b: &Path) -> std::io::Result<()> {
            if !self.can_swap {
                return Err(std::io::ErrorKind::Unsupported.into());
            }
            self.step("exchange")?;
            System.exchange(a, b)
        }
    }

    #[test]
    fn a_failed_swap_leaves_the_old_folder_whole_at_its_name() {
        let (root, dir) = old_results();
        // Call 1: rename_new refuses (the folder exists); call 2: the swap fails.
        let ops = Faulty::new(&[2], true);
        let err = prepare_folder(&dir, true).unwrap().commit_with(&files("new"), &ops).unwrap_err();
        assert_eq!(content(&dir), "old\n");
        assert_eq!(names(root.path()), ["small"]);
        assert_eq!(*ops.log.borrow(), ["rename", "exchange"]);
        assert!(err.to_string().contains("old results are unchanged"), "{err}");
    }

    #[test]
    fn without_swaps_a_failed_second_rename_is_rolled_back() {
        let (root, dir) = old_results();
        // 1: refused (exists); 2: old aside; 3: new in fails; 4: old back.
        let ops = Faulty::new(&[3], false);
        let result = prepare_folder(&dir, true).unwrap().commit_with(&files("new"), &ops);
        assert_eq!(content(&dir), "old\n");
        assert_eq!(names(root.path()), ["small"]);
        assert_eq!(ops.calls.get(), 4);
        let err = result.unwrap_err();
        assert!(err.to_string().contains("old results are unchanged"), "{err}");
    }

    #[test]
    fn an_interrupted_replacement_is_undone_by_the_next_run() {
        let (root, dir) = old_results();
        // The new folder cannot go in nor the old one back: as if the process died between
        // the two renames.
        let ops = Faulty::new(&[3, 4], false);
        let err = prepare_folder(&dir, true).unwrap().commit_with(&files("new"), &ops).unwrap_err();
        assert!(err.to_string().contains("next run"), "{err}");
        assert!(!dir.exists());
        let aside: Vec<String> = names(root.path()).into_iter().filter(|n| n.starts_with(".small.old-")).collect();
        assert_eq!(aside.len(), 1, "{:?}", names(root.path()));
        // The next run, even without --force, first moves the old folder back, then refuses.
        let again = prepare_folder(&dir, false).unwrap_err();
        assert!(again.to_string().contains("already exists"), "{again}");
        assert_eq!(content(&dir), "old\n");
        assert_eq!(names(root.path()), ["small"]);
    }

    #[test]
    fn replacement_with_and_without_swaps_leaves_one_folder() {
        for can_swap in [true, false] {
            let (root, dir) = old_results();
            let ops = Faulty::new(&[], can_swap);
            prepare_folder(&dir, true).unwrap().commit_with(&files("new"), &ops).unwrap();
            assert_eq!(content(&dir), "new\n");
            assert_eq!(names(&dir), ["a.csv", "b.md"]);
            assert_eq!(names(root.path()), ["small"], "swaps: {can_swap}");
        }
    }

    #[test]
    fn the_system_swaps_where_it_can() {
        let root = tempfile::tempdir().unwrap();
        let (a, b) = (root.path().join("a"), root.path().join("b"));
        std::fs::write(&a, "a").unwrap();
        std::fs::write(&b, "b").unwrap();
        match System.exchange(&a, &b) {
            Ok(()) => assert_eq!((std::fs::read_to_string(&a).unwrap(), std::fs::read_to_string(&b).unwrap()), ("b".into(), "a".into())),
            Err(e) => assert_eq!(e.kind(), std::io::ErrorKind::Unsupported, "{e}"),
        }
        let err = System.rename_new(&a, &b).unwrap_err();
        assert_eq!(err.kind(), std::io::ErrorKind::AlreadyExists);
    }

    #[test]
    fn a_stale_temporary_folder_is_never_merged_into_the_results() {
        let root = tempfile::tempdir().unwrap();
        let dir = root.path().join("small");
        // What a killed run of this very process id left, in the older naming and the new.
        for stale in [format!(".small.tmp-{}", std::process::id()), format!(".small.tmp-{}-AbC123", std::process::id())] {
            std::fs::create_dir(root.path().join(&stale)).unwrap();
            std::fs::write(root.path().join(&stale).join("stale.csv"), "stale").unwrap();
        }
        let guard = prepare_folder(&dir, false).unwrap();
        assert_eq!(guard.notes().len(), 2, "{:?}", guard.notes());
        assert!(guard.notes().iter().all(|n| n.contains("leftover of an interrupted run") && n.contains("--force")));
        guard.commit(&files("new")).unwrap();
        assert_eq!(names(&dir), ["a.csv", "b.md"]);
        // With --force the leftovers go.
        let guard = prepare_folder(&dir, true).unwrap();
        assert!(guard.notes().iter().all(|n| n.contains("removed")), "{:?}", guard.notes());
        drop(guard);
        assert_eq!(names(root.path()), ["small"]);
    }

    #[test]
    fn a_second_run_into_the_same_folder_is_refused_while_the_first_holds_it() {
        let root = tempfile::tempdir().unwrap();
        let dir = root.path().join("small");
        let first = prepare_folder(&dir, false).unwrap();
        let err = prepare_folder(&dir, true).unwrap_err();
        assert!(err.to_string().contains("another run is writing this output"), "{err}");
        assert!(err.to_string().contains(".small.lock"), "{err}");
        // Another name in the same results folder is independent.
        prepare_folder(&root.path().join("other"), false).unwrap().commit(&files("x")).unwrap();
        first.commit(&files("first")).unwrap();
        // Released: the next run gets it, and no lock file is left.
        drop(prepare_folder(&dir, true).unwrap());
        assert_eq!(names(root.path()), ["other", "small"]);
    }

    #[test]
    fn a_dropped_guard_leaves_nothing_and_never_touches_the_folder() {
        let (root, dir) = old_results();
        let guard = prepare_folder(&dir, true).unwrap();
        assert_eq!(names(root.path()).len(), 3, "folder, lock, temporary folder: {:?}", names(root.path()));
        drop(guard);
        assert_eq!(names(root.path()), ["small"]);
        assert_eq!(content(&dir), "old\n");
    }

    #[test]
    fn names_up_to_the_file_system_limit_work_and_longer_ones_fail_before_writing() {
        let root = tempfile::tempdir().unwrap();
        let max = name_max(root.path());
        let mut lengths = vec![max - SIBLING_ROOM, max - SIBLING_ROOM + 1, 248.min(max), max];
        lengths.dedup();
        for &len in &lengths {
            let dir = root.path().join("n".repeat(len));
            prepare_folder(&dir, false).unwrap().commit(&files("long")).unwrap();
            assert_eq!(content(&dir), "long\n", "length {len}");
            // A second, forced run replaces it (the hidden siblings fit too).
            prepare_folder(&dir, true).unwrap().commit(&files("again")).unwrap();
            assert_eq!(content(&dir), "again\n", "length {len}");
        }
        let err = prepare_folder(&root.path().join("n".repeat(max + 1)), false).unwrap_err();
        assert!(err.to_string().contains("choose a shorter name"), "{err}");
        assert_eq!(names(root.path()).len(), lengths.len());
        // Stems of long names differ when the names do, and fit.
        let (a, b) = (sibling_stem(&"a".repeat(300), 255), sibling_stem(&format!("{}b", "a".repeat(299)), 255));
        assert_ne!(a, b);
        assert!(a.len() + SIBLING_ROOM <= 255);
    }

    #[test]
    fn run_suffixes_are_recognised_exactly() {
        assert!(is_run_suffix("123") && is_run_suffix("123-AbC123"));
        for s in ["", "-abc", "12a-x", "12-", "12-a.b", "x.tmp-1-abc"] {
            assert!(!is_run_suffix(s), "{s}");
        }
    }
}

//! One run, one output folder, all or nothing.
//!
//! A run that writes an output folder first takes the folder's lock (a
//! small file beside it, created only if absent, holding the run's process
//! id, host and start time), so that a second run into the same folder is
//! refused at once with the first run's name. It then writes into a staging
//! copy of the folder, beside it on the same file system: the files of the
//! earlier run and any other files are carried over as hard links (a copy
//! where links are not possible), and every new file is written beside them
//! and renamed over its old name, so the earlier folder's files are never
//! changed. When everything is written, the earlier folder is renamed
//! aside, the staging copy renamed into its place, and the earlier folder
//! removed. A run that fails removes its staging copy; a run that is killed
//! leaves it, and the next run into the folder removes it (and puts the
//! earlier folder back if the kill came between the two renames).
//!
//! Where the swap cannot work or is not worth it, the run writes into the
//! folder itself, file by file (each file still whole, the lock still
//! held): when the folder is a mount point, the current folder or one of
//! its parents, holds files provisio did not write (`--overwrite`), or its
//! parent folder cannot be written (the lock then goes inside the folder).

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::error::{Error, Result};

/// End of the lock file's name: `PARENT/.NAME.provisio-lock`.
const LOCK_SUFFIX: &str = ".provisio-lock";
/// Lock file inside the folder when the run writes in place.
pub(super) const INNER_LOCK: &str = ".provisio-lock";
/// Part of the staging copy's name: `PARENT/.NAME.provisio-new-PID`.
const NEW_TAG: &str = ".provisio-new-";
/// Part of the earlier folder's name while it is swapped out.
const OLD_TAG: &str = ".provisio-old-";

/// The run that holds a folder's lock, as written in the lock file.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct LockHolder {
    /// Process id.
    pub pid: u32,
    /// When the run started (UTC, ISO 8601).
    pub started: String,
    /// Host name (empty when unknown).
    pub host: String,
}

impl LockHolder {
    fn me() -> LockHolder {
        LockHolder {
            pid: std::process::id(),
            started: now_utc(),
            host: host_name(),
        }
    }

    fn to_text(&self) -> String {
        format!(
            "provisio run lock\npid {}\nstarted {}\nhost {}\n",
            self.pid, self.started, self.host
        )
    }

    fn parse(text: &str) -> Option<LockHolder> {
        let mut lines = text.lines();
        if lines.next()? != "provisio run lock" {
            return None;
        }
        let pid = lines.next()?.strip_prefix("pid ")?.parse().ok()?;
        let started = lines.next()?.strip_prefix("started ")?.to_string();
        let host = lines.next()?.strip_prefix("host ")?.to_string();
        Some(LockHolder { pid, started, host })
    }
}

fn now_utc() -> String {
    std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .ok()
        .and_then(|d| i64::try_from(d.as_secs()).ok())
        .and_then(|s| chrono::DateTime::from_timestamp(s, 0))
        .map(|t| t.format("%Y-%m-%dT%H:%M:%SZ").to_string())
        .unwrap_or_default()
}

fn host_name() -> String {
    std::fs::read_to_string("/proc/sys/kernel/hostname")
        .map(|s| s.trim().to_string())
        .unwrap_or_default()
}

/// Whether the run holding a lock still runs: known only on Linux
/// (`/proc`), and only for a process of this host. A process id taken
/// since by another program (its name is not provisio's) is not the run.
fn holder_alive(h: &LockHolder) -> Option<bool> {
    if !Path::new("/proc/self").exists() || h.host != host_name() {
        return None;
    }
    let proc = PathBuf::from(format!("/proc/{}", h.pid));
    if !proc.exists() {
        return Some(false);
    }
    match std::fs::read_to_string(proc.join("comm")) {
        Ok(name) => Some(name.trim_end().starts_with("provisio")),
        Err(_) => Some(true),
    }
}

/// A folder's lock, held until dropped.
#[derive(Debug)]
struct RunLock {
    path: PathBuf,
    text: String,
}

impl RunLock {
    /// Takes the lock at `path` for `folder`. A lock left by a run that no
    /// longer runs is taken over; a lock of a live run (or of a run this
    /// host cannot check) is refused with the run's name.
    fn acquire(path: PathBuf, folder: &Path) -> std::result::Result<RunLock, LockError> {
        let text = LockHolder::me().to_text();
        for attempt in 0..50 {
            match std::fs::OpenOptions::new()
                .write(true)
                .create_new(true)
                .open(&path)
            {
                Ok(mut f) => {
                    let lock = RunLock { path, text };
                    f.write_all(lock.text.as_bytes())
                        .and_then(|()| f.sync_all())
                        .map_err(LockError::Io)?;
                    return Ok(lock);
                }
                Err(e) if e.kind() == std::io::ErrorKind::AlreadyExists => {}
                Err(e) => return Err(LockError::Io(e)),
            }
            let held = match std::fs::read_to_string(&path) {
                Ok(t) => t,
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => continue,
                Err(e) => return Err(LockError::Io(e)),
            };
            match LockHolder::parse(&held) {
                // Being written this instant: look again shortly.
                None if attempt < 40 && lock_is_young(&path) => {
                    std::thread::sleep(std::time::Duration::from_millis(25));
                }
                None => return Err(LockError::Busy(busy(folder, None, &path))),
                Some(h) => match holder_alive(&h) {
                    Some(false) => take_over_stale(&path, &held),
                    Some(true) => return Err(LockError::Busy(busy(folder, Some(&h), &path))),
                    None => return Err(LockError::Busy(busy_unknown(folder, &h, &path))),
                },
            }
        }
        Err(LockError::Busy(busy(folder, None, &path)))
    }
}

impl Drop for RunLock {
    fn drop(&mut self) {
        // Only our own lock: never one another run took after ours.
        if std::fs::read_to_string(&self.path).is_ok_and(|t| t == self.text) {
            let _ = std::fs::remove_file(&self.path);
        }
    }
}

enum LockError {
    Io(std::io::Error),
    Busy(Error),
}

fn lock_is_young(path: &Path) -> bool {
    std::fs::metadata(path)
        .and_then(|m| m.modified())
        .ok()
        .and_then(|t| t.elapsed().ok())
        .map_or(true, |age| age < std::time::Duration::from_secs(2))
}

/// Removes a lock whose process is gone. Two runs may find the same stale
/// lock at once: each moves it aside under its own name first, and one that
/// finds it moved a newer lock (of the other run) puts it back.
fn take_over_stale(path: &Path, held: &str) {
    let aside = path.with_extension(format!("stale-{}", std::process::id()));
    if std::fs::rename(path, &aside).is_err() {
        return;
    }
    if std::fs::read_to_string(&aside).is_ok_and(|t| t != held) {
        // Fails only if yet another lock was taken meanwhile: that one stands.
        let _ = std::fs::hard_link(&aside, path);
    }
    let _ = std::fs::remove_file(&aside);
}

fn busy(folder: &Path, h: Option<&LockHolder>, lock: &Path) -> Error {
    let message = match h {
        Some(h) => format!(
            "another provisio run is writing {} (pid {}, started {}); wait for it to finish, or choose another folder",
            folder.display(),
            h.pid,
            h.started
        ),
        None => format!(
            "another provisio run is writing {} (its lock file {} cannot be read); if no provisio run is writing there, remove {}",
            folder.display(),
            lock.display(),
            lock.display()
        ),
    };
    Error::Busy { message }
}

fn busy_unknown(folder: &Path, h: &LockHolder, lock: &Path) -> Error {
    let host = if h.host.is_empty() {
        String::new()
    } else {
        format!(" on host {}", h.host)
    };
    Error::Busy {
        message: format!(
            "another provisio run is writing {} (pid {}{host}, started {}); if no provisio run is writing there (a run that was stopped abruptly leaves its lock), remove {}",
            folder.display(),
            h.pid,
            h.started,
            lock.display()
        ),
    }
}

/// Where a run's lock is and how it writes its folder.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Mode {
    /// Lock beside the folder; `staged`: writing into a staging copy
    /// beside it, swapped in at the end (otherwise into the folder itself).
    Beside {
        /// The folder that holds the output folder.
        parent: PathBuf,
        /// The output folder's name.
        name: String,
        /// Whether the run writes into a staging copy.
        staged: bool,
    },
    /// Lock inside the folder (its parent cannot be written); written in
    /// place, file by file.
    Inside,
}

/// A run writing one output folder: holds its lock from [`FolderRun::start`]
/// until dropped, writes into the folder [`FolderRun::prepare`] returns,
/// and makes the files appear with [`FolderRun::commit`]. Dropped without
/// a commit, it removes what it wrote and leaves the folder as it was.
#[derive(Debug)]
pub struct FolderRun {
    target: PathBuf,
    mode: Mode,
    stage: Option<PathBuf>,
    _lock: RunLock,
}

impl FolderRun {
    /// Takes the lock of the output folder `target` (creating the folders
    /// above it if needed) and repairs what a run that was killed left
    /// beside it. Refuses, naming the other run, when another run is
    /// writing the folder.
    pub fn start(target: &Path) -> Result<FolderRun> {
        let target = resolve(target);
        if let Some((parent, name)) = sibling_place(&target) {
            let listed = if parent.as_os_str().is_empty() {
                Path::new(".")
            } else {
                parent.as_path()
            };
            std::fs::create_dir_all(listed).map_err(|source| Error::Io {
                path: listed.to_path_buf(),
                action: "cannot create the folder of the output folder",
                source,
            })?;
            let lock_path = parent.join(format!(".{name}{LOCK_SUFFIX}"));
            match RunLock::acquire(lock_path.clone(), &target) {
                Ok(lock) => {
                    let mut run = FolderRun {
                        target: target.clone(),
                        mode: Mode::Beside {
                            parent,
                            name,
                            staged: false,
                        },
                        stage: None,
                        _lock: lock,
                    };
                    run.recover()?;
                    // Decided under the lock, after the repair.
                    let can = can_stage(&run.target);
                    if let Mode::Beside { staged, .. } = &mut run.mode {
                        *staged = can;
                    }
                    return Ok(run);
                }
                Err(LockError::Busy(e)) => return Err(e),
                // The parent folder cannot be written: lock inside.
                Err(LockError::Io(e)) if e.kind() == std::io::ErrorKind::PermissionDenied => {}
                Err(LockError::Io(source)) => {
                    return Err(Error::Io {
                        path: lock_path,
                        action: "cannot create the lock file of the output folder",
                        source,
                    })
                }
            }
        }
        std::fs::create_dir_all(&target).map_err(|source| Error::Io {
            path: target.clone(),
            action: "cannot create the output folder",
            source,
        })?;
        let lock_path = target.join(INNER_LOCK);
        let lock = RunLock::acquire(lock_path.clone(), &target).map_err(|e| match e {
            LockError::Busy(e) => e,
            LockError::Io(source) => Error::Io {
                path: lock_path,
                action: "cannot create the lock file of the output folder",
                source,
            },
        })?;
        Ok(FolderRun {
            target,
            mode: Mode::Inside,
            stage: None,
            _lock: lock,
        })
    }

    /// The output folder (as given, or the folder a link given points to).
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// The folder to write into, ready: a staging copy of the output
    /// folder (or the folder itself when written in place), with the
    /// temporary files of killed runs removed and the folder marked as
    /// provisio's. Refuses a symbolic link to a folder inside it.
    pub fn prepare(&mut self) -> Result<PathBuf> {
        if let Some(stage) = &self.stage {
            return Ok(stage.clone());
        }
        let Mode::Beside {
            parent,
            name,
            staged: true,
        } = &self.mode
        else {
            super::OutputDir {
                path: self.target.clone(),
            }
            .prepare()?;
            return Ok(self.target.clone());
        };
        let stage = parent.join(format!(".{name}{NEW_TAG}{}", std::process::id()));
        remove_leftover(&stage);
        let io = |action: &'static str| {
            let p = stage.clone();
            move |source| Error::Io {
                path: p,
                action,
                source,
            }
        };
        std::fs::create_dir(&stage).map_err(io("cannot create the staging folder"))?;
        // From here on, dropping the run removes the staging folder.
        self.stage = Some(stage.clone());
        if std::fs::symlink_metadata(&self.target).is_ok_and(|m| m.is_dir()) {
            if let Ok(m) = std::fs::metadata(&self.target) {
                let _ = std::fs::set_permissions(&stage, m.permissions());
            }
            carry_over(&self.target, &stage, &self.target)?;
        }
        super::OutputDir {
            path: stage.clone(),
        }
        .prepare()?;
        Ok(stage)
    }

    /// Makes the files written appear in the output folder, all at once;
    /// on failure the folder is left as it was.
    pub fn commit(mut self) -> Result<()> {
        let (Mode::Beside { parent, name, .. }, Some(stage)) = (&self.mode, self.stage.clone())
        else {
            return Ok(());
        };
        let aside = parent.join(format!(".{name}{OLD_TAG}{}", std::process::id()));
        let had_old = std::fs::symlink_metadata(&self.target).is_ok();
        if had_old {
            remove_leftover(&aside);
            std::fs::rename(&self.target, &aside).map_err(|source| Error::Io {
                path: self.target.clone(),
                action: "cannot move the earlier outputs aside to put the new ones in place",
                source,
            })?;
        }
        if let Err(source) = std::fs::rename(&stage, &self.target) {
            if had_old {
                let _ = std::fs::rename(&aside, &self.target);
            }
            return Err(Error::Io {
                path: self.target.clone(),
                action: "cannot put the new outputs in place (the earlier ones are kept)",
                source,
            });
        }
        self.stage = None;
        // The renames reach the disk with the folder that holds them.
        let listed = if parent.as_os_str().is_empty() {
            Path::new(".")
        } else {
            parent.as_path()
        };
        if let Ok(d) = std::fs::File::open(listed) {
            let _ = d.sync_all();
        }
        if had_old {
            let _ = std::fs::remove_dir_all(&aside);
        }
        Ok(())
    }

    /// Repairs what a killed run left beside the folder: the earlier folder
    /// moved aside but not replaced is put back; staging copies and
    /// earlier folders left over are removed. Runs under the lock.
    fn recover(&self) -> Result<()> {
        let Mode::Beside { parent, name, .. } = &self.mode else {
            return Ok(());
        };
        let listed = if parent.as_os_str().is_empty() {
            Path::new(".")
        } else {
            parent.as_path()
        };
        let Ok(entries) = std::fs::read_dir(listed) else {
            return Ok(());
        };
        let new_prefix = format!(".{name}{NEW_TAG}");
        let old_prefix = format!(".{name}{OLD_TAG}");
        let mut olds = Vec::new();
        let mut news = Vec::new();
        for e in entries.flatten() {
            let n = e.file_name().to_string_lossy().into_owned();
            if !e.file_type().is_ok_and(|t| t.is_dir()) {
                continue;
            }
            if n.starts_with(&old_prefix) {
                olds.push(parent.join(&n));
            } else if n.starts_with(&new_prefix) {
                news.push(parent.join(&n));
            }
        }
        if std::fs::symlink_metadata(&self.target).is_err() {
            if let Some(old) = olds.pop() {
                std::fs::rename(&old, &self.target).map_err(|source| Error::Io {
                    path: old.clone(),
                    action: "cannot put back the output folder an interrupted run moved aside",
                    source,
                })?;
            }
        }
        for p in olds.iter().chain(&news) {
            remove_leftover(p);
        }
        Ok(())
    }
}

impl Drop for FolderRun {
    fn drop(&mut self) {
        if let Some(stage) = self.stage.take() {
            remove_leftover(&stage);
        }
    }
}

/// Removes a staging copy or a swapped-out folder (a real folder only:
/// never follows a link).
fn remove_leftover(p: &Path) {
    if std::fs::symlink_metadata(p).is_ok_and(|m| m.is_dir()) {
        let _ = std::fs::remove_dir_all(p);
    }
}

/// The output folder as the run names it: a link given is resolved, so
/// the folder it points to is replaced, not the link; so is a name without
/// a last part (`.`, `..`), so its lock goes beside it like any other.
fn resolve(target: &Path) -> PathBuf {
    let link = std::fs::symlink_metadata(target).is_ok_and(|m| m.file_type().is_symlink());
    if link || target.file_name().is_none() {
        std::fs::canonicalize(target).unwrap_or_else(|_| target.to_path_buf())
    } else {
        target.to_path_buf()
    }
}

/// The folder beside which the lock goes, and the folder's name; `None`
/// for the root of the file system.
fn sibling_place(target: &Path) -> Option<(PathBuf, String)> {
    let name = target.file_name()?.to_str()?.to_string();
    let parent = target.parent()?.to_path_buf();
    Some((parent, name))
}

/// Whether the folder can be written as a staging copy swapped in at the
/// end: it does not exist yet, is empty, or is provisio's (marked, or
/// holding a run manifest from before folders were marked); and renaming
/// it is safe: it is not the current folder or one above it (the shell
/// that started the run would be left in a removed folder) nor a mount
/// point (it cannot be renamed). A folder of other files given with
/// `--overwrite` is written in place: copying a tree that may be large and
/// span file systems is not worth the swap.
fn can_stage(target: &Path) -> bool {
    let Ok(mut entries) = std::fs::read_dir(target) else {
        return std::fs::symlink_metadata(target).is_err();
    };
    let ours = target.join(super::OUTPUT_MARKER).is_file()
        || super::written_by_provisio(&target.join("manifest.json"))
        || entries.next().is_none();
    if !ours {
        return false;
    }
    if let (Ok(t), Ok(cwd)) = (std::fs::canonicalize(target), std::env::current_dir()) {
        if cwd.starts_with(&t) {
            return false;
        }
    }
    let parent = target.parent().unwrap_or(Path::new(""));
    !is_mount_point(target, parent)
}

#[cfg(unix)]
fn is_mount_point(target: &Path, parent: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    let parent = if parent.as_os_str().is_empty() {
        Path::new(".")
    } else {
        parent
    };
    match (std::fs::metadata(target), std::fs::metadata(parent)) {
        (Ok(t), Ok(p)) => t.dev() != p.dev(),
        _ => false,
    }
}

#[cfg(not(unix))]
fn is_mount_point(_target: &Path, _parent: &Path) -> bool {
    false
}

/// Carries the contents of `from` over into `to`: files as hard links (a
/// copy where a link cannot be made), folders recreated, links to files
/// recreated. Temporary files of killed runs are left behind. `root` is
/// the output folder, named in a refusal.
fn carry_over(from: &Path, to: &Path, root: &Path) -> Result<()> {
    let io = |p: &Path, action: &'static str| {
        let p = p.to_path_buf();
        move |source| Error::Io {
            path: p,
            action,
            source,
        }
    };
    let entries = std::fs::read_dir(from).map_err(io(from, "cannot open the output folder"))?;
    for entry in entries {
        let entry = entry.map_err(io(from, "cannot list the output folder"))?;
        let name = entry.file_name();
        let shown = name.to_string_lossy().into_owned();
        let src = entry.path();
        let dst = to.join(&name);
        let kind = entry
            .file_type()
            .map_err(io(&src, "cannot read the file type of"))?;
        if kind.is_dir() {
            std::fs::create_dir(&dst).map_err(io(&dst, "cannot create in the staging folder"))?;
            if let Ok(m) = std::fs::metadata(&src) {
                let _ = std::fs::set_permissions(&dst, m.permissions());
            }
            carry_over(&src, &dst, root)?;
        } else if kind.is_symlink() {
            if src.is_dir() {
                let rel = src.strip_prefix(root).unwrap_or(&src).display().to_string();
                return Err(Error::Output {
                    path: root.to_path_buf(),
                    message: format!(
                        "'{rel}' in the output folder is a symbolic link to a folder; provisio writes only inside --out and does not follow it: remove the link or choose another folder"
                    ),
                });
            }
            copy_link(&src, &dst)?;
        } else if kind.is_file() {
            if super::is_temp_name(&shown) {
                continue;
            }
            if std::fs::hard_link(&src, &dst).is_err() {
                std::fs::copy(&src, &dst)
                    .map_err(io(&src, "cannot copy into the staging folder"))?;
            }
        } else {
            let rel = src.strip_prefix(root).unwrap_or(&src).display().to_string();
            return Err(Error::Output {
                path: root.to_path_buf(),
                message: format!(
                    "'{rel}' in the output folder is neither a file nor a folder (a pipe, socket or device); provisio replaces the folder as a whole and cannot carry it over: move it out of the folder"
                ),
            });
        }
    }
    Ok(())
}

#[cfg(unix)]
fn copy_link(src: &Path, dst: &Path) -> Result<()> {
    let to = std::fs::read_link(src).map_err(|source| Error::Io {
        path: src.to_path_buf(),
        action: "cannot read the link",
        source,
    })?;
    std::os::unix::fs::symlink(to, dst).map_err(|source| Error::Io {
        path: dst.to_path_buf(),
        action: "cannot recreate the link in the staging folder",
        source,
    })
}

#[cfg(not(unix))]
fn copy_link(src: &Path, dst: &Path) -> Result<()> {
    std::fs::copy(src, dst)
        .map(|_| ())
        .map_err(|source| Error::Io {
            path: src.to_path_buf(),
            action: "cannot copy into the staging folder",
            source,
        })
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read_all(dir: &Path) -> Vec<(String, Vec<u8>)> {
        let mut v: Vec<_> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap())
            .filter(|e| e.file_type().unwrap().is_file())
            .map(|e| {
                (
                    e.file_name().to_string_lossy().into_owned(),
                    std::fs::read(e.path()).unwrap(),
                )
            })
            .collect();
        v.sort();
        v
    }

    #[test]
    fn committed_run_replaces_files_and_keeps_others() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(out.join(super::super::OUTPUT_MARKER), "").unwrap();
        std::fs::write(out.join("a.csv"), "old a").unwrap();
        std::fs::write(out.join("notes.txt"), "mine").unwrap();
        let mut run = FolderRun::start(&out).unwrap();
        let w = run.prepare().unwrap();
        assert_ne!(w, out);
        super::super::write_atomic(&w.join("a.csv"), |f| f.write_all(b"new a")).unwrap();
        // Nothing visible before the commit.
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"old a");
        run.commit().unwrap();
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"new a");
        assert_eq!(std::fs::read(out.join("notes.txt")).unwrap(), b"mine");
        // Only the folder is left: no lock, no staging copy, no old folder.
        let names: Vec<_> = std::fs::read_dir(d.path())
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        assert_eq!(names, ["out"]);
    }

    #[test]
    fn dropped_run_leaves_folder_as_it_was() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(out.join(super::super::OUTPUT_MARKER), "").unwrap();
        std::fs::write(out.join("a.csv"), "old a").unwrap();
        let before = read_all(&out);
        {
            let mut run = FolderRun::start(&out).unwrap();
            let w = run.prepare().unwrap();
            super::super::write_atomic(&w.join("a.csv"), |f| f.write_all(b"new")).unwrap();
            super::super::write_atomic(&w.join("b.csv"), |f| f.write_all(b"new")).unwrap();
        }
        assert_eq!(read_all(&out), before);
        assert_eq!(std::fs::read_dir(d.path()).unwrap().count(), 1);
    }

    #[test]
    fn a_folder_of_other_files_is_written_in_place_under_the_same_lock() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("theirs");
        std::fs::create_dir(&out).unwrap();
        std::fs::write(out.join("notes.txt"), "mine").unwrap();
        let mut run = FolderRun::start(&out).unwrap();
        assert_eq!(run.prepare().unwrap(), out);
        assert!(FolderRun::start(&out)
            .unwrap_err()
            .to_string()
            .contains("another provisio run is writing"));
        run.commit().unwrap();
        assert_eq!(std::fs::read(out.join("notes.txt")).unwrap(), b"mine");
        // Once marked as provisio's, the next run is staged.
        let mut run = FolderRun::start(&out).unwrap();
        assert_ne!(run.prepare().unwrap(), out);
    }

    #[test]
    fn second_run_is_refused_naming_the_first() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        let first = FolderRun::start(&out).unwrap();
        let e = FolderRun::start(&out).unwrap_err().to_string();
        assert!(
            e.contains(&format!(
                "another provisio run is writing {} (pid {}, started ",
                out.display(),
                std::process::id()
            )),
            "{e}"
        );
        drop(first);
        FolderRun::start(&out).unwrap();
    }

    #[test]
    fn lock_of_a_gone_process_is_taken_over() {
        if !Path::new("/proc/self").exists() {
            return;
        }
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        // A process that has ended: its pid is free.
        let mut child = std::process::Command::new("true").spawn().unwrap();
        let pid = child.id();
        child.wait().unwrap();
        let stale = LockHolder {
            pid,
            started: "2026-01-01T00:00:00Z".into(),
            host: host_name(),
        };
        let lock = d.path().join(".out.provisio-lock");
        std::fs::write(&lock, stale.to_text()).unwrap();
        let run = FolderRun::start(&out).unwrap();
        let now = LockHolder::parse(&std::fs::read_to_string(&lock).unwrap()).unwrap();
        assert_eq!(now.pid, std::process::id());
        drop(run);
        assert!(!lock.exists());
        // A live process that is not provisio (its pid reused since).
        let mut other_program = std::process::Command::new("sleep")
            .arg("30")
            .spawn()
            .unwrap();
        let reused = LockHolder {
            pid: other_program.id(),
            ..stale.clone()
        };
        std::fs::write(&lock, reused.to_text()).unwrap();
        let run = FolderRun::start(&out);
        let _ = other_program.kill();
        let _ = other_program.wait();
        drop(run.unwrap());
        assert!(!lock.exists());
        // A lock from another host cannot be checked: refused, with the way out.
        let other = LockHolder {
            host: "elsewhere".into(),
            ..stale
        };
        std::fs::write(&lock, other.to_text()).unwrap();
        let e = FolderRun::start(&out).unwrap_err().to_string();
        assert!(e.contains("on host elsewhere"), "{e}");
        assert!(e.contains(&format!("remove {}", lock.display())), "{e}");
    }

    #[test]
    fn interrupted_swap_is_undone_by_the_next_run() {
        let d = tempfile::tempdir().unwrap();
        let out = d.path().join("out");
        // Killed between moving the old folder aside and moving the new in.
        let old = d.path().join(".out.provisio-old-77");
        let new = d.path().join(".out.provisio-new-77");
        std::fs::create_dir(&old).unwrap();
        std::fs::write(old.join("a.csv"), "old").unwrap();
        std::fs::create_dir(&new).unwrap();
        std::fs::write(new.join("a.csv"), "new").unwrap();
        let run = FolderRun::start(&out).unwrap();
        assert_eq!(std::fs::read(out.join("a.csv")).unwrap(), b"old");
        assert!(!old.exists() && !new.exists());
        drop(run);
    }

    #[test]
    fn lock_text_round_trips() {
        let h = LockHolder::me();
        assert_eq!(LockHolder::parse(&h.to_text()), Some(h));
        assert_eq!(LockHolder::parse("pid 1\n"), None);
    }
}

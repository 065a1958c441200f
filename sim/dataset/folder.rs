//! The atomic output folder: a dataset is written into `.NAME.partial-PID/`
//! and renamed when complete. `PartialDir` removes that folder on every
//! other way out (an error, a panic unwinding); [`sweep_stale`] removes the
//! partial folders of processes that died without unwinding (killed), so
//! nothing half-written stays behind. [`write_file`] writes a file next to
//! others without following a symbolic link planted at its name.

use std::io::{self, Write};
use std::path::{Path, PathBuf};

/// A temporary folder removed when dropped, unless [`PartialDir::keep`] was called.
pub(crate) struct PartialDir {
    path: PathBuf,
    armed: bool,
}

impl PartialDir {
    /// Creates `path` afresh (removing a leftover of the same name: our own
    /// process id, so no live process owns it).
    pub fn create(path: PathBuf) -> io::Result<PartialDir> {
        // `remove_dir_all` removes a symbolic link itself, never its target.
        match std::fs::symlink_metadata(&path) {
            Ok(m) if m.is_dir() => std::fs::remove_dir_all(&path)?,
            Ok(_) => std::fs::remove_file(&path)?,
            Err(_) => {}
        }
        std::fs::create_dir(&path)?;
        Ok(PartialDir { path, armed: true })
    }

    /// The partial folder's path (files are written inside it).
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The folder was renamed into place: nothing is left to remove.
    pub fn keep(mut self) {
        self.armed = false;
    }
}

impl Drop for PartialDir {
    fn drop(&mut self) {
        if self.armed {
            let _ = std::fs::remove_dir_all(&self.path);
        }
    }
}

/// The process id of a partial or old folder's name (`.NAME.partial-PID`,
/// `.NAME.old-PID`), if it is one.
fn owner_pid(name: &str) -> Option<i32> {
    if !name.starts_with('.') {
        return None;
    }
    let (_, pid) = name
        .rsplit_once(".partial-")
        .or_else(|| name.rsplit_once(".old-"))?;
    pid.parse().ok().filter(|p| *p > 0)
}

/// Whether process `pid` is alive (or we cannot tell: then it is left alone).
fn alive(pid: i32) -> bool {
    // SAFETY: signal 0 only checks that the process exists; it sends nothing.
    let r = unsafe { libc::kill(pid, 0) };
    r == 0 || io::Error::last_os_error().raw_os_error() != Some(libc::ESRCH)
}

/// Removes the partial and old folders in `dir` whose process has died.
/// Returns how many were removed.
pub fn sweep_stale(dir: &Path) -> usize {
    let Ok(entries) = std::fs::read_dir(dir) else {
        return 0;
    };
    let mut removed = 0;
    for e in entries.flatten() {
        let name = e.file_name().to_string_lossy().to_string();
        let Some(pid) = owner_pid(&name) else {
            continue;
        };
        if pid as u32 == std::process::id() || alive(pid) {
            continue;
        }
        let p = e.path();
        let gone = match std::fs::symlink_metadata(&p) {
            Ok(m) if m.is_dir() => std::fs::remove_dir_all(&p),
            _ => std::fs::remove_file(&p),
        };
        removed += usize::from(gone.is_ok());
    }
    removed
}

/// Writes `bytes` to `path`: into a new file beside it (created exclusively,
/// so a symbolic link planted at that name is refused, not followed), then
/// renamed over `path` (a link there is replaced, its target untouched).
pub fn write_file(path: &Path, bytes: &[u8]) -> io::Result<()> {
    let name = path
        .file_name()
        .map(|n| n.to_string_lossy().to_string())
        .unwrap_or_default();
    let tmp = path.with_file_name(format!(".{name}.partial-{}", std::process::id()));
    let _ = std::fs::remove_file(&tmp);
    let result = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&tmp)
        .and_then(|mut f| f.write_all(bytes).and_then(|()| f.sync_all()))
        .and_then(|()| std::fs::rename(&tmp, path));
    if result.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    result
}

#[cfg(test)]
mod tests {
    use super::*;

    fn scratch(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("loadloom-folder-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    #[test]
    fn names_of_partial_folders() {
        assert_eq!(owner_pid(".home.partial-123"), Some(123));
        assert_eq!(owner_pid(".home=00001.old-7"), Some(7));
        assert_eq!(owner_pid("home.partial-123"), None);
        assert_eq!(owner_pid(".home.partial-x"), None);
    }

    #[test]
    fn a_partial_folder_is_removed_when_dropped_or_unwound() {
        let d = scratch("drop");
        let p = d.join(".a.partial-1");
        drop(PartialDir::create(p.clone()).unwrap());
        assert!(!p.exists());
        let q = d.join(".b.partial-1");
        let q2 = q.clone();
        let r = std::panic::catch_unwind(move || {
            let _g = PartialDir::create(q2).unwrap();
            panic!("a run that panics");
        });
        assert!(r.is_err() && !q.exists());
        let k = PartialDir::create(d.join(".c.partial-1")).unwrap();
        let kp = k.path().to_path_buf();
        k.keep();
        assert!(kp.exists());
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn the_sweep_removes_dead_processes_folders_only() {
        let d = scratch("sweep");
        // A child that has exited and been reaped: its id names no process.
        let mut c = std::process::Command::new("true").spawn().unwrap();
        let dead = c.id();
        c.wait().unwrap();
        let stale = d.join(format!(".home.partial-{dead}"));
        let mine = d.join(format!(".home.partial-{}", std::process::id()));
        let keep = d.join("home");
        for p in [&stale, &mine, &keep] {
            std::fs::create_dir(p).unwrap();
        }
        assert_eq!(sweep_stale(&d), 1);
        assert!(!stale.exists() && mine.exists() && keep.exists());
        let _ = std::fs::remove_dir_all(&d);
    }

    #[test]
    fn writes_do_not_follow_a_planted_link() {
        let d = scratch("link");
        let target = d.join("elsewhere.txt");
        std::fs::write(&target, "keep me").unwrap();
        let p = d.join("fleet.json");
        std::os::unix::fs::symlink(&target, &p).unwrap();
        // A link planted at the temporary name too.
        let tmp = d.join(format!(".fleet.json.partial-{}", std::process::id()));
        std::os::unix::fs::symlink(&target, &tmp).unwrap();
        write_file(&p, b"{}").unwrap();
        assert_eq!(std::fs::read_to_string(&target).unwrap(), "keep me");
        assert_eq!(std::fs::read_to_string(&p).unwrap(), "{}");
        assert!(!std::fs::symlink_metadata(&p)
            .unwrap()
            .file_type()
            .is_symlink());
        let _ = std::fs::remove_dir_all(&d);
    }
}

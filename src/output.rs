//! Files the CLI writes, whole or not at all.
//!
//! A job's output directory (`--out DIR`) is an [`OutputSet`]: checked and prepared before
//! anything is computed (so an unwritable place fails at once, not after an hour of sweeping),
//! written into a hidden sibling staging directory, and moved into place only when every file
//! is written. If the job fails, or is interrupted (Ctrl-C, SIGTERM: [`on_interrupt`]), the
//! staging directory is removed and `DIR` is as it was. When `DIR` already exists, each file of
//! the set replaces its namesake there (the replaced ones are kept aside until every move has
//! succeeded, and put back if one fails); other files in `DIR` are left alone.

use crate::error::JobError;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

/// Staging directories of the sets being written, removed on an interrupt.
static STAGING: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

/// A set of output files written into a staging directory and moved into place whole.
pub struct OutputSet {
    target: PathBuf,
    staging: PathBuf,
    done: bool,
}

impl OutputSet {
    /// Checks that `target` can be written (its parent exists and `target` is a directory or
    /// absent) and creates the staging directory beside it.
    pub fn begin(target: &Path) -> Result<OutputSet, JobError> {
        let io = |what: String| JobError::Io(what);
        if target.exists() && !target.is_dir() {
            return Err(io(format!(
                "--out {}: it exists and is not a directory",
                target.display()
            )));
        }
        let name = target
            .file_name()
            .map(|n| n.to_string_lossy().to_string())
            .unwrap_or_else(|| "out".into());
        let parent = match target.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        std::fs::create_dir_all(&parent)
            .map_err(|e| io(format!("cannot create {}: {e}", parent.display())))?;
        let staging = parent.join(format!(".{name}.partial-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&staging);
        std::fs::create_dir(&staging).map_err(|e| {
            io(format!(
                "cannot write beside {}: {e}; choose another --out directory",
                target.display()
            ))
        })?;
        STAGING
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .push(staging.clone());
        Ok(OutputSet {
            target: target.to_path_buf(),
            staging,
            done: false,
        })
    }

    /// [`OutputSet::begin`] for an optional `--out`.
    pub fn begin_opt(target: Option<&Path>) -> Result<Option<OutputSet>, JobError> {
        target.map(OutputSet::begin).transpose()
    }

    /// The directory to write the set's files into.
    pub fn dir(&self) -> &Path {
        &self.staging
    }

    /// Where the set will be once committed.
    pub fn target(&self) -> &Path {
        &self.target
    }

    /// Moves the written set into place.
    pub fn commit(mut self) -> Result<(), JobError> {
        let mut names: Vec<String> = std::fs::read_dir(&self.staging)
            .map(|d| {
                d.filter_map(Result::ok)
                    .map(|e| e.file_name().to_string_lossy().to_string())
                    .collect()
            })
            .unwrap_or_default();
        names.sort();
        let fail = |e: std::io::Error| {
            JobError::Io(format!(
                "cannot move the output into {}: {e}",
                self.target.display()
            ))
        };
        if !self.target.exists() {
            std::fs::rename(&self.staging, &self.target).map_err(fail)?;
        } else {
            self.merge_into_existing().map_err(fail)?;
            let _ = std::fs::remove_dir_all(&self.staging);
        }
        self.done = true;
        self.unregister();
        let shown = if names.len() > 6 {
            format!("{}, ... ({} files)", names[..5].join(", "), names.len())
        } else {
            names.join(", ")
        };
        crate::note!("wrote {shown} to {}", self.target.display());
        Ok(())
    }

    /// Moves each staged file over its namesake in the existing target, keeping replaced files
    /// aside until every move succeeded, and putting them back if one fails.
    fn merge_into_existing(&self) -> std::io::Result<()> {
        let aside = self.staging.join(".replaced");
        std::fs::create_dir_all(&aside)?;
        let mut names: Vec<_> = std::fs::read_dir(&self.staging)?
            .filter_map(Result::ok)
            .map(|e| e.file_name())
            .filter(|n| n != ".replaced")
            .collect();
        names.sort();
        let mut moved: Vec<(PathBuf, bool)> = Vec::new();
        for n in &names {
            let dest = self.target.join(n);
            let replaced = dest.exists();
            let step = (|| {
                if replaced {
                    std::fs::rename(&dest, aside.join(n))?;
                }
                std::fs::rename(self.staging.join(n), &dest)
            })();
            if let Err(e) = step {
                // Undo: new files out, replaced files back.
                for (d, was) in moved.iter().rev() {
                    let _ = std::fs::remove_file(d).or_else(|_| std::fs::remove_dir_all(d));
                    if *was {
                        if let Some(name) = d.file_name() {
                            let _ = std::fs::rename(aside.join(name), d);
                        }
                    }
                }
                if replaced && !dest.exists() {
                    let _ = std::fs::rename(aside.join(n), &dest);
                }
                return Err(e);
            }
            moved.push((dest, replaced));
        }
        Ok(())
    }

    fn unregister(&self) {
        let mut s = STAGING.lock().unwrap_or_else(|p| p.into_inner());
        s.retain(|p| *p != self.staging);
    }
}

impl Drop for OutputSet {
    /// A set dropped before [`OutputSet::commit`] (the job failed) leaves nothing behind.
    fn drop(&mut self) {
        if !self.done {
            let _ = std::fs::remove_dir_all(&self.staging);
            self.unregister();
        }
    }
}

/// Installs the Ctrl-C and SIGTERM handler: remove every staging directory, say so, and exit
/// with 130. Call once, at start-up.
pub fn on_interrupt() {
    let _ = ctrlc::set_handler(|| {
        let dirs = std::mem::take(&mut *STAGING.lock().unwrap_or_else(|p| p.into_inner()));
        for d in &dirs {
            let _ = std::fs::remove_dir_all(d);
        }
        if dirs.is_empty() {
            crate::note!("interrupted");
        } else {
            crate::note!("interrupted: removed the unfinished output, nothing was written");
        }
        std::process::exit(130);
    });
}

/// Writes `bytes` to `path` through `path.partial`.
pub fn write_whole(path: &Path, bytes: &[u8]) -> Result<(), String> {
    let mut tmp = path.as_os_str().to_owned();
    tmp.push(".partial");
    let tmp = std::path::PathBuf::from(tmp);
    let fail = |e: std::io::Error| format!("cannot write {}: {e}", path.display());
    std::fs::write(&tmp, bytes).map_err(|e| {
        let _ = std::fs::remove_file(&tmp);
        fail(e)
    })?;
    std::fs::rename(&tmp, path).map_err(fail)
}

/// Creates the output directory if needed.
pub fn ensure_dir(dir: &Path) -> Result<(), String> {
    std::fs::create_dir_all(dir).map_err(|e| format!("cannot create {}: {e}", dir.display()))
}

/// CSV text from a header and rows of numbers.
pub fn csv(header: &[&str], rows: impl Iterator<Item = Vec<f64>>) -> String {
    let mut s = header.join(",");
    s.push('\n');
    for r in rows {
        s.push_str(
            &r.iter()
                .map(|v| format!("{v:e}"))
                .collect::<Vec<_>>()
                .join(","),
        );
        s.push('\n');
    }
    s
}

#[cfg(test)]
mod tests {
    use super::OutputSet;
    use std::path::PathBuf;

    fn scratch(name: &str) -> PathBuf {
        let d = std::env::temp_dir().join(format!("lamina-set-{name}-{}", std::process::id()));
        let _ = std::fs::remove_dir_all(&d);
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    fn entries(d: &std::path::Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(d)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
            .collect();
        v.sort();
        v
    }

    /// A job that fails after writing part of its set leaves nothing: the staging directory
    /// goes with the set.
    #[test]
    fn a_set_dropped_half_written_leaves_nothing() {
        let base = scratch("drop");
        {
            let set = OutputSet::begin(&base.join("out")).unwrap();
            std::fs::write(set.dir().join("half.csv"), "1,2\n").unwrap();
        }
        assert!(entries(&base).is_empty(), "{:?}", entries(&base));
        let _ = std::fs::remove_dir_all(&base);
    }

    /// A move into place that fails (here the target became a file meanwhile) is undone:
    /// the error is an I/O error, the target is as it was and nothing is left beside it.
    #[test]
    fn a_failed_move_is_undone() {
        let base = scratch("move");
        let target = base.join("out");
        let set = OutputSet::begin(&target).unwrap();
        std::fs::write(set.dir().join("a.csv"), "new").unwrap();
        std::fs::write(set.dir().join("b.csv"), "new").unwrap();
        std::fs::write(&target, "precious").unwrap();
        let e = set.commit().unwrap_err();
        assert_eq!(e.exit_code(), 4, "{e}");
        assert_eq!(std::fs::read_to_string(&target).unwrap(), "precious");
        assert_eq!(entries(&base), vec!["out"]);
        let _ = std::fs::remove_dir_all(&base);
    }
}

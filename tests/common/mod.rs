//! What the integration tests that run the `lamina` binary share.

#![allow(dead_code)]

use std::path::Path;
use std::process::{Command, Output};

/// Runs `lamina` with `args` from the package root and returns what it did.
pub fn lamina(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .expect("the lamina binary runs")
}

/// Runs `lamina` with `args`, requires success (showing its stderr otherwise) and returns what
/// it did.
pub fn lamina_ok(args: &[&str]) -> Output {
    let out = lamina(args);
    assert!(
        out.status.success(),
        "lamina {}: {}",
        args.join(" "),
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

/// Every file of a directory, by name, with its bytes.
pub fn files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut list: Vec<(String, Vec<u8>)> = std::fs::read_dir(dir)
        .expect("the directory")
        .map(|e| {
            let e = e.expect("an entry");
            let bytes = std::fs::read(e.path()).expect("the file");
            (e.file_name().to_string_lossy().into_owned(), bytes)
        })
        .collect();
    list.sort();
    list
}

/// A directory of its own under the system's temporary directory, named after `name`, the
/// process and a counter; removed with its files when dropped, except while the test is
/// panicking (a failing test's files stay to be looked at).
pub struct Scratch(std::path::PathBuf);

impl Scratch {
    pub fn new(name: &str) -> Self {
        static N: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);
        let n = N.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
        let dir = std::env::temp_dir().join(format!("lamina-{name}-{}-{n}", std::process::id()));
        let _ = std::fs::remove_dir_all(&dir);
        std::fs::create_dir_all(&dir).expect("temporary directory");
        Scratch(dir)
    }
}

impl std::ops::Deref for Scratch {
    type Target = Path;

    fn deref(&self) -> &Path {
        &self.0
    }
}

impl AsRef<Path> for Scratch {
    fn as_ref(&self) -> &Path {
        &self.0
    }
}

impl Drop for Scratch {
    fn drop(&mut self) {
        if !std::thread::panicking() {
            let _ = std::fs::remove_dir_all(&self.0);
        }
    }
}

/// A file with its own [`Scratch`] directory, removed with it; derefs to the file's path.
pub struct ScratchFile {
    path: std::path::PathBuf,
    _dir: Scratch,
}

impl ScratchFile {
    /// Writes `text` to `name` in a new scratch directory named after `prefix`.
    pub fn new(prefix: &str, name: &str, text: &str) -> Self {
        let dir = Scratch::new(prefix);
        let path = dir.join(name);
        std::fs::write(&path, text).expect("scratch file");
        ScratchFile { path, _dir: dir }
    }
}

impl std::ops::Deref for ScratchFile {
    type Target = Path;

    fn deref(&self) -> &Path {
        &self.path
    }
}

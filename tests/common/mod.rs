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

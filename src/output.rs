//! Files the CLI writes: each written to a temporary name beside its target and renamed, so a
//! file is there whole or not at all.

use std::path::Path;

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

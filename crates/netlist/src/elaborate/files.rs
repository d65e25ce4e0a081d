//! Reading circuit files: size and kind limits, includes spliced in place, cycles refused.

use super::Limits;
use crate::ast::Stmt;
use crate::diag::{Diagnostic, ErrorKind};
use crate::source::{FileId, Sources, Span};
use std::path::{Path, PathBuf};

/// Why a file could not be read.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum ReadError {
    /// The file is larger than the limit; nothing beyond the limit was read.
    TooLarge,
    /// Any other failure, with the reason.
    Other(String),
}

/// Reads files; tests can supply their own.
pub trait FileReader {
    /// The text of `path`, reading at most `max_bytes` bytes.
    fn read(&self, path: &Path, max_bytes: usize) -> Result<String, ReadError>;
}

/// Reads from the file system. Only regular files are read (a FIFO, a device or a directory
/// is refused before it is opened for reading), and never more than the limit.
pub struct DiskReader;

impl FileReader for DiskReader {
    fn read(&self, path: &Path, max_bytes: usize) -> Result<String, ReadError> {
        use std::io::Read;
        let other = |e: std::io::Error| ReadError::Other(e.to_string());
        let meta = std::fs::metadata(path).map_err(other)?;
        if !meta.is_file() {
            return Err(ReadError::Other(
                "it is not a regular file (a directory, a FIFO or a device); give a circuit file"
                    .into(),
            ));
        }
        if meta.len() > max_bytes as u64 {
            return Err(ReadError::TooLarge);
        }
        let file = std::fs::File::open(path).map_err(other)?;
        // The file may grow between the check and the read: read one byte past the limit at most.
        let mut bytes = Vec::new();
        file.take(max_bytes as u64 + 1)
            .read_to_end(&mut bytes)
            .map_err(other)?;
        if bytes.len() > max_bytes {
            return Err(ReadError::TooLarge);
        }
        String::from_utf8(bytes)
            .map_err(|_| ReadError::Other("the file is not valid UTF-8 text".into()))
    }
}

pub(super) struct Loader<'a> {
    pub(super) reader: &'a dyn FileReader,
    pub(super) sources: Sources,
    pub(super) diags: Vec<Diagnostic>,
    pub(super) limits: Limits,
    pub(super) stack: Vec<(PathBuf, Option<Span>)>,
    /// Every file read so far: a file is included once, however many files include it.
    pub(super) included: Vec<PathBuf>,
}

impl Loader<'_> {
    /// Reads, lexes and parses `path`, splicing included files in place of their `include`.
    pub(super) fn load(&mut self, path: &Path, from: Option<Span>) -> Option<Vec<Stmt>> {
        let key = std::fs::canonicalize(path).unwrap_or_else(|_| path.to_path_buf());
        if let Some(pos) = self.stack.iter().position(|(p, _)| *p == key) {
            let span = from?;
            let mut d = Diagnostic::new(
                ErrorKind::IncludeCycle,
                span,
                format!("including `{}` again makes a cycle", path.display()),
            )
            .with_help(
                "remove one of the includes; a file may be included only once along a chain",
            );
            for (_, s) in self.stack[pos + 1..].iter() {
                if let Some(s) = s {
                    d = d.with_note(*s, "part of the cycle");
                }
            }
            self.diags.push(d);
            return None;
        }
        // A file already read (a process file included by two others, say) is not read again:
        // its cards and cells are defined once.
        if from.is_some() && self.included.contains(&key) {
            return Some(Vec::new());
        }
        if self.stack.len() >= self.limits.max_include_depth {
            if let Some(span) = from {
                self.diags.push(Diagnostic::new(
                    ErrorKind::Limit,
                    span,
                    format!(
                        "includes nested deeper than {}",
                        self.limits.max_include_depth
                    ),
                ));
            }
            return None;
        }
        let text = match self.reader.read(path, self.limits.max_file_bytes) {
            Ok(t) => t,
            Err(e) => {
                let (kind, msg) = match e {
                    ReadError::TooLarge => (
                        ErrorKind::Limit,
                        format!(
                            "`{}` is larger than the limit of {} bytes",
                            path.display(),
                            self.limits.max_file_bytes
                        ),
                    ),
                    ReadError::Other(why) => (
                        ErrorKind::Io,
                        format!("cannot read `{}`: {why}", path.display()),
                    ),
                };
                let span = match from {
                    Some(span) => span,
                    None => Span::new(
                        self.sources.add(path.display().to_string(), String::new()),
                        0,
                        0,
                    ),
                };
                let help = match kind {
                    ErrorKind::Limit => "split the file, or check that it is a circuit file",
                    _ => "check the path (an include is relative to the file that includes it)",
                };
                self.diags
                    .push(Diagnostic::new(kind, span, msg).with_help(help));
                return None;
            }
        };
        let id: FileId = self.sources.add(path.display().to_string(), text);
        let stmts =
            crate::parser::SyntaxTree::parse(id, self.sources.text(id), &mut self.diags).statements;
        self.included.push(key.clone());
        self.stack.push((key, from));
        let dir = path.parent().map(Path::to_path_buf).unwrap_or_default();
        let out = self.splice(stmts, &dir);
        self.stack.pop();
        Some(out)
    }

    pub(super) fn splice(&mut self, stmts: Vec<Stmt>, dir: &Path) -> Vec<Stmt> {
        let mut out = Vec::with_capacity(stmts.len());
        for s in stmts {
            match s {
                Stmt::Include { path, span } => {
                    if let Some(inner) = self.load(&dir.join(&path), Some(span)) {
                        out.extend(inner);
                    }
                }
                other => out.push(other),
            }
        }
        out
    }
}

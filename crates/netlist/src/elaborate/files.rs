//! Reading circuit files: size and kind limits, includes spliced in place, cycles refused.

use super::Limits;
use crate::ast::Stmt;
use crate::diag::{Diagnostic, ErrorKind};
use crate::source::{FileId, Sources, Span};
use std::path::{Path, PathBuf};

/// Reads files from disk; tests can supply their own.
pub trait FileReader {
    /// The text of `path`, or an error message.
    fn read(&self, path: &Path) -> Result<String, String>;
}

/// Reads from the file system.
pub struct DiskReader;

impl FileReader for DiskReader {
    fn read(&self, path: &Path) -> Result<String, String> {
        std::fs::read(path)
            .map_err(|e| e.to_string())
            .and_then(|b| {
                String::from_utf8(b).map_err(|_| "the file is not valid UTF-8 text".to_string())
            })
    }
}

pub(super) struct Loader<'a> {
    pub(super) reader: &'a dyn FileReader,
    pub(super) sources: Sources,
    pub(super) diags: Vec<Diagnostic>,
    pub(super) limits: Limits,
    pub(super) stack: Vec<(PathBuf, Option<Span>)>,
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
        let text = match self.reader.read(path) {
            Ok(t) => t,
            Err(msg) => {
                match from {
                    Some(span) => self.diags.push(Diagnostic::new(
                        ErrorKind::Io,
                        span,
                        format!("cannot read `{}`: {msg}", path.display()),
                    )),
                    None => {
                        let id = self.sources.add(path.display().to_string(), String::new());
                        self.diags.push(Diagnostic::new(
                            ErrorKind::Io,
                            Span::new(id, 0, 0),
                            format!("cannot read `{}`: {msg}", path.display()),
                        ));
                    }
                }
                return None;
            }
        };
        if text.len() > self.limits.max_file_bytes {
            let id = self.sources.add(path.display().to_string(), String::new());
            self.diags.push(Diagnostic::new(
                ErrorKind::Limit,
                from.unwrap_or(Span::new(id, 0, 0)),
                format!(
                    "`{}` is {} bytes, more than the limit of {}",
                    path.display(),
                    text.len(),
                    self.limits.max_file_bytes
                ),
            ));
            return None;
        }
        let id: FileId = self.sources.add(path.display().to_string(), text);
        let stmts =
            crate::parser::SyntaxTree::parse(id, self.sources.text(id), &mut self.diags).statements;
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

//! Diagnostics: what went wrong, where, and what to change.
//!
//! Each [`Diagnostic`] has a kind (stable, for tests), a primary span, a message, optional
//! secondary labels ("first defined here") and a help line (often a "did you mean"). They are
//! rendered with the source line and a caret by `codespan-reporting`.

use crate::source::{Sources, Span};
use codespan_reporting::diagnostic::{Diagnostic as CsDiagnostic, Label};
use codespan_reporting::files::SimpleFiles;
use codespan_reporting::term::{emit_into_string, Config};

/// The kind of a diagnostic, stable across wording changes.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum ErrorKind {
    /// A character that starts no token.
    BadCharacter,
    /// A malformed number literal.
    BadNumber,
    /// A string literal that does not close.
    BadString,
    /// A token where something else was expected.
    Expected,
    /// An unknown unit after a number.
    UnknownUnit,
    /// A name that refers to nothing (parameter, cell, device card, element kind, pin).
    Unknown,
    /// A name defined twice in one scope.
    Duplicate,
    /// Quantities of different dimensions combined or assigned.
    UnitMismatch,
    /// A number without a unit where a dimension is expected.
    MissingUnit,
    /// A pin left unconnected.
    Unconnected,
    /// A pin connected twice.
    ConnectedTwice,
    /// A value that is not allowed (out of range, not an integer, division by zero).
    BadValue,
    /// A file that includes itself, directly or not.
    IncludeCycle,
    /// A file that cannot be read.
    Io,
    /// Nesting, repetition or size beyond the language's limits.
    Limit,
    /// A value the model accepts but that lies far outside what its physics covers (a
    /// warning).
    Implausible,
}

/// One finding, with where it is and what to change.
#[derive(Clone, Debug, PartialEq)]
pub struct Diagnostic {
    /// Stable kind.
    pub kind: ErrorKind,
    /// Where the fault is.
    pub span: Span,
    /// What was expected and what was found.
    pub message: String,
    /// Secondary places, with a note each.
    pub notes: Vec<(Span, String)>,
    /// What to change, if we can tell.
    pub help: Option<String>,
}

impl Diagnostic {
    /// A diagnostic of `kind` at `span`.
    pub fn new(kind: ErrorKind, span: Span, message: String) -> Self {
        Diagnostic {
            kind,
            span,
            message,
            notes: Vec::new(),
            help: None,
        }
    }

    /// Adds a secondary label.
    pub fn with_note(mut self, span: Span, note: impl Into<String>) -> Self {
        self.notes.push((span, note.into()));
        self
    }

    /// Adds a help line.
    pub fn with_help(mut self, help: impl Into<String>) -> Self {
        self.help = Some(help.into());
        self
    }
}

/// The closest of `candidates` to `name`, if it is close enough to be a likely misspelling.
pub fn did_you_mean<'a>(
    name: &str,
    candidates: impl IntoIterator<Item = &'a str>,
) -> Option<String> {
    // Edit distance with transpositions catches short names ("mdi" for "mid"); Jaro-Winkler
    // catches longer ones with a shared start.
    let limit = (name.chars().count() / 4).max(1);
    let mut best: Option<(usize, f64, &str)> = None;
    // Sorted, so that callers holding names in hash maps get the same answer on every run.
    let mut candidates: Vec<&str> = candidates.into_iter().collect();
    candidates.sort_unstable();
    candidates.dedup();
    // The same name in another case is the likeliest mistake (`pf` for `pF`).
    if let Some(c) = candidates
        .iter()
        .find(|c| **c != name && c.to_lowercase() == name.to_lowercase())
    {
        return Some(format!("did you mean `{c}`?"));
    }
    // Compared without case, so a misspelling in the wrong case (`Mos3`) still finds `MoS2`.
    let lower = name.to_lowercase();
    for c in candidates {
        if c == name {
            continue;
        }
        let b = c.to_lowercase();
        let d = strsim::osa_distance(&lower, &b);
        let jw = strsim::jaro_winkler(&lower, &b);
        if d <= limit || jw > 0.88 {
            let better = match best {
                None => true,
                Some((bd, bjw, _)) => d < bd || (d == bd && jw > bjw),
            };
            if better {
                best = Some((d, jw, c));
            }
        }
    }
    best.map(|(_, _, c)| format!("did you mean `{c}`?"))
}

/// Renders diagnostics as plain text: `file:line:column`, the message, the source line with a
/// caret under the fault, notes and help.
pub fn render(sources: &Sources, diags: &[Diagnostic]) -> String {
    render_as(sources, diags, false)
}

/// Renders findings that do not stop the design, as warnings.
pub fn render_warnings(sources: &Sources, diags: &[Diagnostic]) -> String {
    render_as(sources, diags, true)
}

fn render_as(sources: &Sources, diags: &[Diagnostic], warning: bool) -> String {
    let mut files = SimpleFiles::new();
    for id in 0..sources.len() {
        files.add(sources.name(id).to_string(), sources.text(id).to_string());
    }
    let config = Config::default();
    let mut out = String::new();
    for d in diags {
        let mut labels = vec![Label::primary(d.span.file, d.span.start..d.span.end)];
        for (span, note) in &d.notes {
            labels
                .push(Label::secondary(span.file, span.start..span.end).with_message(note.clone()));
        }
        let (line, col) = sources.line_column(d.span.file, d.span.start);
        let mut cs = if warning {
            CsDiagnostic::warning()
        } else {
            CsDiagnostic::error()
        }
        .with_message(format!(
            "{}:{line}:{col}: {}",
            sources.name(d.span.file),
            d.message
        ))
        .with_labels(labels);
        if let Some(h) = &d.help {
            cs = cs.with_notes(vec![format!("help: {h}")]);
        }
        match emit_into_string(&config, &files, &cs) {
            Ok(s) => out.push_str(&s),
            Err(_) => out.push_str(&format!(
                "error: {}:{line}:{col}: {}\n",
                sources.name(d.span.file),
                d.message
            )),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::did_you_mean;

    #[test]
    fn suggestions_for_transpositions_and_typos() {
        assert_eq!(
            did_you_mean("resistr", ["resistor", "capacitor"]).as_deref(),
            Some("did you mean `resistor`?")
        );
        assert_eq!(
            did_you_mean("mdi", ["mid", "vdd"]).as_deref(),
            Some("did you mean `mid`?")
        );
        assert_eq!(did_you_mean("zzz", ["mid", "vdd"]), None);
        // Without regard to case, and the same answer whatever the candidates' order.
        assert_eq!(
            did_you_mean("Mos3", ["WS2", "MoS2", "MoSe2"]).as_deref(),
            Some("did you mean `MoS2`?")
        );
        assert_eq!(
            did_you_mean("x1", ["x2", "x0"]),
            did_you_mean("x1", ["x0", "x2"])
        );
    }
}

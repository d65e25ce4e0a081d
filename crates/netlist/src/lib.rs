//! Lamina's circuit description language: text to syntax tree (with spans) to the engine's
//! circuit, with diagnostics that say where, what was expected and what to change.
//!
//! # Overview
//! * [`lexer`] splits text into tokens; newlines end statements outside brackets.
//! * [`parser`] builds the [`ast`], recovering after errors so one run reports many.
//! * [`elaborate`] evaluates parameters (numbers with SI prefixes and units, checked by
//!   [`units`]), reads includes, flattens cells, expands `for` loops, checks pins against the
//!   [`catalog`] of element kinds, and builds a [`lamina_engine::Circuit`].
//! * [`diag`] renders diagnostics with the source line and a caret.
//!
//! The language reference is `netlists/README.md` in the repository.
//!
//! ```
//! use lamina_netlist::{load_source, LoadOptions};
//! let text = "param vdd = 1 V\nvoltage_source supply (pos = top, neg = ground) { dc = vdd }\n\
//!             resistor load (a = top, b = ground) { resistance = 1 kOhm }\n";
//! let design = load_source("demo.lam", text, &LoadOptions::default()).unwrap();
//! assert_eq!(design.summary.elements["resistor"], 1);
//! assert_eq!(design.circuit.node_count(), 2);
//! ```
//!
//! What this crate does not do: solve circuits. It knows element kinds only to build them.

#![deny(missing_docs)]

pub mod ast;
pub mod catalog;
pub mod diag;
pub mod elaborate;
pub mod lexer;
pub mod parser;
pub mod rewrite;
pub mod source;
pub mod table;
pub mod units;
pub mod values;

pub use diag::{render, render_warnings, Diagnostic, ErrorKind};
pub use elaborate::{
    load_file, load_with, Analysis, AnalysisDecl, Design, DiskReader, Failure, FileReader, Limits,
    LoadOptions, ReadError, SettingKind, Summary, ANALYSES, MAX_TRANSIENT_SAMPLES,
};
pub use elaborate::{
    Distribution, Limit, Perturb, Perturbation, Scope, Target, Variation, Variations,
};
pub use source::{Sources, Span};

use std::path::Path;

/// Loads a design from text in memory; `include`s are resolved relative to the working
/// directory through the file system.
pub fn load_source(name: &str, text: &str, options: &LoadOptions) -> Result<Design, Failure> {
    struct One<'a> {
        name: &'a str,
        text: &'a str,
    }
    impl FileReader for One<'_> {
        fn read(&self, path: &Path, max_bytes: usize) -> Result<String, ReadError> {
            if path == Path::new(self.name) {
                if self.text.len() > max_bytes {
                    return Err(ReadError::TooLarge);
                }
                Ok(self.text.to_string())
            } else {
                DiskReader.read(path, max_bytes)
            }
        }
    }
    load_with(Path::new(name), options, &One { name, text })
}

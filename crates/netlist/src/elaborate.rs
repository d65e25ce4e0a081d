//! Elaboration: parameters evaluated, includes read, cells flattened, repetition expanded,
//! units and pins checked, and the engine's circuit built.
//!
//! Order: every top-level `param` is evaluated first, in file order (a parameter may use the
//! ones above it; `--set` replaces a parameter's expression in place). Device cards are then
//! evaluated in the top-level scope. Instances, loops and analyses follow in file order.
//!
//! Hierarchical names: an instance `x` of a cell inside instance `top[2]` is `top[2].x`; a node
//! `mid` local to a cell is `top[2].mid` in results and diagnostics. Ports take the caller's
//! nodes; `ground` is ground everywhere.

use crate::ast::*;
use crate::catalog::{self, Kind, Values};
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::lexer::lex;
use crate::parser::parse_expression;
use crate::source::{FileId, Sources, Span};
use crate::units::Dim;
use lamina_engine::elements::{Pulse, Sine, Waveform};
use lamina_engine::{Circuit, CircuitError, NodeId};
use std::collections::{BTreeMap, HashMap};
use std::path::{Path, PathBuf};

/// Limits that keep hostile or mistaken input from exhausting memory or stack.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Limits {
    /// Largest file in bytes (default 16 MiB).
    pub max_file_bytes: usize,
    /// Deepest include chain (default 32).
    pub max_include_depth: usize,
    /// Deepest cell-in-cell instantiation (default 64).
    pub max_cell_depth: usize,
    /// Most elements in one design (default 5,000,000).
    pub max_elements: usize,
    /// Most iterations of one `for` loop (default 10,000,000).
    pub max_repeat: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_file_bytes: 16 << 20,
            max_include_depth: 32,
            max_cell_depth: 64,
            max_elements: 5_000_000,
            max_repeat: 10_000_000,
        }
    }
}

/// How to load a design.
#[derive(Clone, Debug, Default)]
pub struct LoadOptions {
    /// `name = value` overrides of top-level parameters, value in the language's syntax.
    pub overrides: Vec<(String, String)>,
    /// Input limits.
    pub limits: Limits,
}

/// A value given to an analysis setting.
#[derive(Clone, Debug, PartialEq)]
pub enum SettingValue {
    /// A number (SI) with the dimension written, if any.
    Number(f64, Option<Dim>),
    /// A name that is not a parameter: a node, node array or element.
    Name(String),
    /// A string.
    Text(String),
}

/// One `key = value` of an analysis.
#[derive(Clone, Debug, PartialEq)]
pub struct Setting {
    /// The key.
    pub name: String,
    /// Its value.
    pub value: SettingValue,
    /// Where it is.
    pub span: Span,
}

/// An `analysis` declaration.
#[derive(Clone, Debug, PartialEq)]
pub struct AnalysisDecl {
    /// Which analysis.
    pub kind: String,
    /// Its settings in file order.
    pub settings: Vec<Setting>,
    /// The header.
    pub span: Span,
}

/// What a check reports about an elaborated design.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Summary {
    /// Nodes, ground included.
    pub nodes: usize,
    /// Element count by kind.
    pub elements: BTreeMap<String, usize>,
    /// Cells defined.
    pub cells: Vec<String>,
    /// Device cards defined.
    pub devices: Vec<String>,
    /// Analysis kinds declared, in order.
    pub analyses: Vec<String>,
}

/// An elaborated design: the engine's circuit plus what the file declares.
pub struct Design {
    /// The flat circuit.
    pub circuit: Circuit,
    /// Every file read.
    pub sources: Sources,
    /// Declared analyses.
    pub analyses: Vec<AnalysisDecl>,
    /// Top-level parameters after overrides, in SI units.
    pub parameters: Vec<(String, f64, Option<Dim>)>,
    /// Counts for a summary.
    pub summary: Summary,
    /// Findings that do not stop the design (a node with a single connection, say).
    pub warnings: Vec<Diagnostic>,
}

/// A failed load: the files read so far and every diagnostic.
pub struct Failure {
    /// Files read.
    pub sources: Sources,
    /// What went wrong, in order.
    pub diagnostics: Vec<Diagnostic>,
}

/// What an analysis setting takes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SettingKind {
    /// A number (an expression, parameters allowed).
    Number,
    /// The name of a node, node array or element, taken as written (even if a parameter has
    /// the same name).
    Name,
}

impl std::fmt::Debug for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&crate::diag::render(&self.sources, &self.diagnostics))
    }
}

impl std::fmt::Display for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&crate::diag::render(&self.sources, &self.diagnostics))
    }
}

/// Analyses the language knows, with the settings each accepts.
pub const ANALYSES: &[(&str, &[(&str, SettingKind)])] = &[
    ("operating_point", &[]),
    (
        "transfer",
        &[
            ("source", SettingKind::Name),
            ("output", SettingKind::Name),
            ("from", SettingKind::Number),
            ("to", SettingKind::Number),
            ("step", SettingKind::Number),
        ],
    ),
    (
        "delay",
        &[
            ("from", SettingKind::Name),
            ("to", SettingKind::Name),
            ("stop", SettingKind::Number),
        ],
    ),
    (
        "ring",
        &[
            ("nodes", SettingKind::Name),
            ("stages", SettingKind::Number),
            ("supply", SettingKind::Name),
            ("integrator", SettingKind::Name),
        ],
    ),
];

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

/// Loads and elaborates the circuit file at `path`.
pub fn load_file(path: &Path, options: &LoadOptions) -> Result<Design, Failure> {
    load_with(path, options, &DiskReader)
}

/// Loads and elaborates `path` through `reader`.
pub fn load_with(
    path: &Path,
    options: &LoadOptions,
    reader: &dyn FileReader,
) -> Result<Design, Failure> {
    let mut l = Loader {
        reader,
        sources: Sources::new(),
        diags: Vec::new(),
        limits: options.limits,
        stack: Vec::new(),
    };
    let stmts = l.load(path, None);
    let Loader {
        mut sources,
        mut diags,
        ..
    } = l;
    let overrides: Vec<(String, FileId)> = options
        .overrides
        .iter()
        .map(|(name, text)| {
            (
                name.clone(),
                sources.add(format!("--set {name}"), text.clone()),
            )
        })
        .collect();
    let Some(stmts) = stmts else {
        return Err(Failure {
            sources,
            diagnostics: diags,
        });
    };
    if !diags.is_empty() {
        return Err(Failure {
            sources,
            diagnostics: diags,
        });
    }
    let mut e = Elaborator::new(options.limits);
    e.run(&stmts, &overrides, &sources);
    // The same fault met again (in every iteration of a loop, say) is reported once.
    let mut seen = std::collections::HashSet::new();
    diags.extend(
        e.diags
            .into_iter()
            .filter(|d| seen.insert((d.kind, d.span, d.message.clone()))),
    );
    if !diags.is_empty() {
        return Err(Failure {
            sources,
            diagnostics: diags,
        });
    }
    let mut summary = e.summary;
    summary.nodes = e.circuit.node_count();
    // A node with one pin on it is usually a misspelt name.
    let mut warnings = Vec::new();
    let mut lonely: Vec<(NodeId, Span)> = e
        .node_uses
        .iter()
        .filter(|(_, (n, _))| *n == 1)
        .map(|(id, (_, s))| (*id, *s))
        .collect();
    lonely.sort_by_key(|(_, s)| (s.file, s.start));
    for (id, span) in lonely.into_iter().take(50) {
        let name = e.circuit.node_name(id).to_string();
        let others: Vec<&str> = e
            .node_uses
            .iter()
            .filter(|(o, (n, _))| **o != id && *n > 1)
            .map(|(o, _)| e.circuit.node_name(*o))
            .collect();
        let mut d = Diagnostic::new(
            ErrorKind::Unconnected,
            span,
            format!("node `{name}` connects to only one pin"),
        );
        if let Some(h) = did_you_mean(&name, others.iter().copied()) {
            d = d.with_help(h);
        }
        warnings.push(d);
    }
    Ok(Design {
        circuit: e.circuit,
        sources,
        analyses: e.analyses,
        parameters: e.parameter_list,
        summary,
        warnings,
    })
}

struct Loader<'a> {
    reader: &'a dyn FileReader,
    sources: Sources,
    diags: Vec<Diagnostic>,
    limits: Limits,
    stack: Vec<(PathBuf, Option<Span>)>,
}

impl Loader<'_> {
    /// Reads, lexes and parses `path`, splicing included files in place of their `include`.
    fn load(&mut self, path: &Path, from: Option<Span>) -> Option<Vec<Stmt>> {
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

    fn splice(&mut self, stmts: Vec<Stmt>, dir: &Path) -> Vec<Stmt> {
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

/// A number with an optional dimension (`None`: a bare number, accepted for any dimension).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Q {
    v: f64,
    dim: Option<Dim>,
}

struct DeviceCard {
    kind: &'static Kind,
    values: Vec<(String, Q, Span)>,
    texts: Vec<(String, String)>,
    waveform: Option<Waveform>,
}

struct Elaborator<'s> {
    limits: Limits,
    diags: Vec<Diagnostic>,
    circuit: Circuit,
    globals: HashMap<String, Q>,
    parameter_list: Vec<(String, f64, Option<Dim>)>,
    cells: HashMap<String, (&'s [Ident], &'s [Stmt], Span)>,
    devices: HashMap<String, DeviceCard>,
    analyses: Vec<AnalysisDecl>,
    summary: Summary,
    element_spans: HashMap<String, Span>,
    depth: usize,
    created: usize,
    /// Nodes and the spans of the connections the last `connect` made.
    last_pins: Vec<(NodeId, Span)>,
    /// Element pins on each node, with the first connection's place.
    node_uses: HashMap<NodeId, (usize, Span)>,
}

/// One level of the scope chain: a cell instance's parameters and ports, or a loop variable.
struct Frame {
    vars: HashMap<String, Q>,
    ports: HashMap<String, NodeId>,
    prefix: String,
}

impl<'s> Elaborator<'s> {
    fn new(limits: Limits) -> Self {
        Elaborator {
            limits,
            diags: Vec::new(),
            circuit: Circuit::new(),
            globals: HashMap::new(),
            parameter_list: Vec::new(),
            cells: HashMap::new(),
            devices: HashMap::new(),
            analyses: Vec::new(),
            summary: Summary::default(),
            element_spans: HashMap::new(),
            depth: 0,
            created: 0,
            last_pins: Vec::new(),
            node_uses: HashMap::new(),
        }
    }

    fn err(&mut self, kind: ErrorKind, span: Span, msg: String) {
        self.diags.push(Diagnostic::new(kind, span, msg));
    }

    fn run(&mut self, stmts: &'s [Stmt], overrides: &[(String, FileId)], sources: &Sources) {
        // Overrides: each value is its own small source file, parsed as one expression.
        let mut parsed: HashMap<String, Expr> = HashMap::new();
        let mut override_span: HashMap<String, Span> = HashMap::new();
        for (name, id) in overrides {
            let text = sources.text(*id);
            let mut d = Vec::new();
            let toks = lex(*id, text, &mut d);
            override_span.insert(name.clone(), Span::new(*id, 0, text.len()));
            match parse_expression(&toks, &mut d) {
                Some(e) if d.is_empty() => {
                    parsed.insert(name.clone(), e);
                }
                _ => self.diags.extend(d),
            }
        }
        let top = Frame {
            vars: HashMap::new(),
            ports: HashMap::new(),
            prefix: String::new(),
        };
        let mut seen: HashMap<String, Span> = HashMap::new();
        for s in stmts {
            if let Stmt::Param { name, value } = s {
                if let Some(first) = seen.get(&name.name) {
                    self.diags.push(
                        Diagnostic::new(
                            ErrorKind::Duplicate,
                            name.span,
                            format!("parameter `{}` is defined twice", name.name),
                        )
                        .with_note(*first, "first defined here"),
                    );
                    continue;
                }
                seen.insert(name.name.clone(), name.span);
                let q = match parsed.get(&name.name) {
                    Some(e) => self.eval(e, &[&top]),
                    None => self.eval(value, &[&top]),
                };
                if let Some(q) = q {
                    self.globals.insert(name.name.clone(), q);
                    self.parameter_list.push((name.name.clone(), q.v, q.dim));
                }
            }
        }
        for name in parsed.keys() {
            if !seen.contains_key(name) {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    override_span[name],
                    format!("no top-level parameter `{name}` to set"),
                );
                if let Some(h) = did_you_mean(name, seen.keys().map(String::as_str)) {
                    d = d.with_help(h);
                }
                self.diags.push(d);
            }
        }
        // Cells and device cards.
        for s in stmts {
            match s {
                Stmt::Cell { name, ports, body } => {
                    if let Some(&(_, _, first)) = self.cells.get(&name.name) {
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::Duplicate,
                                name.span,
                                format!("cell `{}` is defined twice", name.name),
                            )
                            .with_note(first, "first defined here"),
                        );
                        continue;
                    }
                    self.check_cell_body(body);
                    self.cells
                        .insert(name.name.clone(), (ports, body, name.span));
                    self.summary.cells.push(name.name.clone());
                }
                Stmt::Device {
                    name,
                    model,
                    params,
                } => {
                    self.device_card(name, model, params, &top);
                }
                _ => {}
            }
        }
        let mut frames = vec![top];
        for s in stmts {
            match s {
                Stmt::Param { .. }
                | Stmt::Cell { .. }
                | Stmt::Device { .. }
                | Stmt::Include { .. } => {}
                Stmt::Analysis { kind, params, span } => {
                    self.analysis(kind, params, *span, &frames)
                }
                other => self.body_stmt(other, &mut frames),
            }
        }
    }

    fn check_cell_body(&mut self, body: &[Stmt]) {
        for s in body {
            match s {
                Stmt::Cell { name, .. } => self.err(
                    ErrorKind::Expected,
                    name.span,
                    "cells cannot be defined inside cells".into(),
                ),
                Stmt::Device { name, .. } => self.err(
                    ErrorKind::Expected,
                    name.span,
                    "device cards belong at the top level, not inside a cell".into(),
                ),
                Stmt::Analysis { span, .. } => self.err(
                    ErrorKind::Expected,
                    *span,
                    "analyses belong at the top level, not inside a cell".into(),
                ),
                Stmt::For { body, .. } => self.check_cell_body(body),
                _ => {}
            }
        }
    }

    fn device_card(&mut self, name: &Ident, model: &Ident, params: &[Assign], top: &Frame) {
        if self.devices.contains_key(&name.name) || catalog::kind(&name.name).is_some() {
            self.err(
                ErrorKind::Duplicate,
                name.span,
                format!("`{}` is already defined", name.name),
            );
            return;
        }
        let Some(kind) = catalog::kind(&model.name) else {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                model.span,
                format!("no device model called `{}`", model.name),
            );
            if let Some(h) = did_you_mean(&model.name, catalog::KINDS.iter().map(|k| k.name)) {
                d = d.with_help(h);
            }
            self.diags.push(d);
            return;
        };
        let mut values = Vec::new();
        let mut texts = Vec::new();
        let mut waveform = None;
        for a in params {
            let Some(spec) = kind.params.iter().find(|p| p.name == a.name.name) else {
                self.unknown_param(&a.name, kind);
                continue;
            };
            if spec.text {
                if let Some(t) = self.text_value(&a.name, &a.value) {
                    texts.push((a.name.name.clone(), t));
                }
            } else if spec.waveform {
                waveform = self.waveform(&a.value, spec.dim, &[top]);
            } else if let Some(q) = self.eval(&a.value, &[top]) {
                values.push((a.name.name.clone(), q, a.value.span()));
            }
        }
        self.summary.devices.push(name.name.clone());
        self.devices.insert(
            name.name.clone(),
            DeviceCard {
                kind,
                values,
                texts,
                waveform,
            },
        );
    }

    /// A name-valued parameter: a bare name or a string, taken as written.
    fn text_value(&mut self, key: &Ident, e: &Expr) -> Option<String> {
        match e {
            Expr::Name(id) => Some(id.name.clone()),
            Expr::Str(t, _) => Some(t.clone()),
            other => {
                self.err(
                    ErrorKind::BadValue,
                    other.span(),
                    format!(
                        "`{}` takes a name, such as a material from the library",
                        key.name
                    ),
                );
                None
            }
        }
    }

    fn unknown_param(&mut self, name: &Ident, kind: &Kind) {
        let mut d = Diagnostic::new(
            ErrorKind::Unknown,
            name.span,
            format!("`{}` has no parameter `{}`", kind.name, name.name),
        );
        let names: Vec<&str> = kind.params.iter().map(|p| p.name).collect();
        d = d.with_help(match did_you_mean(&name.name, names.iter().copied()) {
            Some(h) => h,
            None => format!("its parameters are: {}", names.join(", ")),
        });
        self.diags.push(d);
    }

    fn analysis(&mut self, kind: &Ident, params: &[Assign], span: Span, frames: &[Frame]) {
        let Some((_, keys)) = ANALYSES.iter().find(|(k, _)| *k == kind.name) else {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                kind.span,
                format!("no analysis called `{}`", kind.name),
            );
            if let Some(h) = did_you_mean(&kind.name, ANALYSES.iter().map(|a| a.0)) {
                d = d.with_help(h);
            }
            self.diags.push(d);
            return;
        };
        let refs: Vec<&Frame> = frames.iter().collect();
        let mut settings = Vec::new();
        for a in params {
            let Some(&(_, setting_kind)) = keys.iter().find(|(k, _)| *k == a.name.name) else {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    a.name.span,
                    format!("analysis `{}` has no setting `{}`", kind.name, a.name.name),
                );
                let names: Vec<&str> = keys.iter().map(|k| k.0).collect();
                d = d.with_help(match did_you_mean(&a.name.name, names.iter().copied()) {
                    Some(h) => h,
                    None if names.is_empty() => "it takes no settings".to_string(),
                    None => format!("its settings are: {}", names.join(", ")),
                });
                self.diags.push(d);
                continue;
            };
            let value = match (setting_kind, &a.value) {
                (SettingKind::Name, Expr::Name(id)) => SettingValue::Name(id.name.clone()),
                (SettingKind::Name, Expr::Indexed(id, index, _)) => {
                    match self.eval_int(index, &refs) {
                        Some(i) => SettingValue::Name(format!("{}[{i}]", id.name)),
                        None => continue,
                    }
                }
                (SettingKind::Name, Expr::Str(s, _)) => SettingValue::Text(s.clone()),
                (SettingKind::Name, e) => {
                    self.err(
                        ErrorKind::BadValue,
                        e.span(),
                        format!("`{}` takes a name, such as `out`", a.name.name),
                    );
                    continue;
                }
                (SettingKind::Number, e) => match self.eval(e, &refs) {
                    Some(q) => SettingValue::Number(q.v, q.dim),
                    None => continue,
                },
            };
            settings.push(Setting {
                name: a.name.name.clone(),
                value,
                span: a.value.span(),
            });
        }
        self.summary.analyses.push(kind.name.clone());
        self.analyses.push(AnalysisDecl {
            kind: kind.name.clone(),
            settings,
            span,
        });
    }

    /// Whether elaboration should stop: too many errors to be useful, or the element limit.
    fn saturated(&self) -> bool {
        self.diags.len() > 200 || self.created > self.limits.max_elements
    }

    fn body_stmt(&mut self, s: &'s Stmt, frames: &mut Vec<Frame>) {
        if self.saturated() {
            return;
        }
        match s {
            Stmt::For {
                var,
                from,
                to,
                body,
                span,
            } => {
                let refs: Vec<&Frame> = frames.iter().collect();
                let (Some(a), Some(b)) = (self.eval_int(from, &refs), self.eval_int(to, &refs))
                else {
                    return;
                };
                let count = (b - a).max(0) as usize;
                if count > self.limits.max_repeat {
                    self.err(
                        ErrorKind::Limit,
                        *span,
                        format!(
                            "{count} repetitions exceed the limit of {}",
                            self.limits.max_repeat
                        ),
                    );
                    return;
                }
                let prefix = frames.last().map(|f| f.prefix.clone()).unwrap_or_default();
                for i in a..b {
                    let mut vars = HashMap::new();
                    vars.insert(
                        var.name.clone(),
                        Q {
                            v: i as f64,
                            dim: None,
                        },
                    );
                    frames.push(Frame {
                        vars,
                        ports: HashMap::new(),
                        prefix: prefix.clone(),
                    });
                    for s in body {
                        self.body_stmt(s, frames);
                    }
                    frames.pop();
                    if self.saturated() {
                        break;
                    }
                }
            }
            Stmt::Instance {
                kind,
                name,
                connections,
                params,
                span,
            } => {
                self.instance(kind, name, connections, params, *span, frames);
            }
            Stmt::Param { .. } => {}
            Stmt::Analysis { span, .. } => self.err(
                ErrorKind::Expected,
                *span,
                "analyses belong at the top level".into(),
            ),
            Stmt::Cell { .. } | Stmt::Device { .. } | Stmt::Include { .. } => {}
        }
    }

    fn lookup(&self, name: &str, frames: &[&Frame]) -> Option<Q> {
        for f in frames.iter().rev() {
            if let Some(q) = f.vars.get(name) {
                return Some(*q);
            }
        }
        self.globals.get(name).copied()
    }

    fn visible_names(&self, frames: &[&Frame]) -> Vec<String> {
        let mut v: Vec<String> = self.globals.keys().cloned().collect();
        for f in frames {
            v.extend(f.vars.keys().cloned());
        }
        v
    }

    fn eval_int(&mut self, e: &Expr, frames: &[&Frame]) -> Option<i64> {
        let q = self.eval(e, frames)?;
        if q.v.fract() != 0.0 || q.v.abs() > 1e15 {
            self.err(
                ErrorKind::BadValue,
                e.span(),
                format!("expected a whole number, found {}", q.v),
            );
            return None;
        }
        Some(q.v as i64)
    }

    fn eval(&mut self, e: &Expr, frames: &[&Frame]) -> Option<Q> {
        match e {
            Expr::Number { value, dim, .. } => Some(Q {
                v: *value,
                dim: *dim,
            }),
            Expr::Str(_, span) => {
                self.err(
                    ErrorKind::BadValue,
                    *span,
                    "expected a number, found a string".into(),
                );
                None
            }
            Expr::Name(id) => match self.lookup(&id.name, frames) {
                Some(q) => Some(q),
                None => {
                    let mut d = Diagnostic::new(
                        ErrorKind::Unknown,
                        id.span,
                        format!("no parameter called `{}`", id.name),
                    );
                    let names = self.visible_names(frames);
                    if let Some(h) = did_you_mean(&id.name, names.iter().map(String::as_str)) {
                        d = d.with_help(h);
                    }
                    self.diags.push(d);
                    None
                }
            },
            Expr::Indexed(id, _, span) => {
                self.err(
                    ErrorKind::BadValue,
                    *span,
                    format!(
                        "`{}[...]` names a node or element; a number is expected here",
                        id.name
                    ),
                );
                None
            }
            Expr::Neg(inner, _) => self.eval(inner, frames).map(|q| Q {
                v: -q.v,
                dim: q.dim,
            }),
            Expr::Binary { op, l, r, span } => {
                let a = self.eval(l, frames);
                let b = self.eval(r, frames);
                let (a, b) = (a?, b?);
                let v = match op {
                    BinOp::Add | BinOp::Sub => {
                        let dim = match (a.dim, b.dim) {
                            (Some(x), Some(y)) if x != y => {
                                self.err(
                                    ErrorKind::UnitMismatch,
                                    *span,
                                    format!("cannot add {} and {}", x.describe(), y.describe()),
                                );
                                return None;
                            }
                            (x, y) => x.or(y),
                        };
                        let v = if *op == BinOp::Add {
                            a.v + b.v
                        } else {
                            a.v - b.v
                        };
                        Q { v, dim }
                    }
                    BinOp::Mul => Q {
                        v: a.v * b.v,
                        dim: combine(a.dim, b.dim, Dim::times),
                    },
                    BinOp::Div => {
                        if b.v == 0.0 {
                            self.err(ErrorKind::BadValue, r.span(), "division by zero".into());
                            return None;
                        }
                        Q {
                            v: a.v / b.v,
                            dim: combine(a.dim, b.dim, Dim::per),
                        }
                    }
                    BinOp::Rem => {
                        if b.v == 0.0 {
                            self.err(ErrorKind::BadValue, r.span(), "remainder by zero".into());
                            return None;
                        }
                        Q {
                            v: a.v.rem_euclid(b.v),
                            dim: a.dim,
                        }
                    }
                    BinOp::Pow => {
                        if b.dim.is_some_and(|d| d != Dim::NONE) {
                            self.err(
                                ErrorKind::UnitMismatch,
                                r.span(),
                                "a power must be a pure number".into(),
                            );
                            return None;
                        }
                        let dim = match a.dim {
                            Some(d) if d != Dim::NONE => {
                                if b.v.fract() != 0.0 {
                                    self.err(ErrorKind::UnitMismatch, r.span(), "a quantity with a unit can only be raised to a whole power".into());
                                    return None;
                                }
                                Some(d.pow(b.v as i32))
                            }
                            d => d,
                        };
                        Q {
                            v: a.v.powf(b.v),
                            dim,
                        }
                    }
                };
                if !v.v.is_finite() {
                    self.err(
                        ErrorKind::BadValue,
                        *span,
                        "the result is not a finite number".into(),
                    );
                    return None;
                }
                Some(v)
            }
            Expr::Call { name, args, span } => self.call(name, args, *span, frames),
        }
    }

    fn call(&mut self, name: &Ident, args: &[Arg], span: Span, frames: &[&Frame]) -> Option<Q> {
        const ONE: &[&str] = &[
            "sqrt", "exp", "ln", "log10", "sin", "cos", "tan", "abs", "floor", "ceil", "round",
        ];
        const TWO: &[&str] = &["min", "max", "pow"];
        let n = name.name.as_str();
        let expected = if ONE.contains(&n) {
            1
        } else if TWO.contains(&n) {
            2
        } else {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                name.span,
                format!("no function called `{n}`"),
            );
            let all: Vec<&str> = ONE.iter().chain(TWO).copied().collect();
            if let Some(h) = did_you_mean(n, all.iter().copied()) {
                d = d.with_help(h);
            }
            self.diags.push(d);
            return None;
        };
        if args.len() != expected || args.iter().any(|a| a.name.is_some()) {
            self.err(
                ErrorKind::BadValue,
                span,
                format!("`{n}` takes {expected} unnamed argument(s)"),
            );
            return None;
        }
        let vals: Vec<Q> = args
            .iter()
            .filter_map(|a| self.eval(&a.value, frames))
            .collect();
        if vals.len() != expected {
            return None;
        }
        let x = vals[0];
        let pure = |d: Option<Dim>| d.is_none_or(|d| d == Dim::NONE);
        let out = match n {
            "sqrt" => {
                let dim = match x.dim {
                    Some(d) => match d.sqrt() {
                        Some(h) => Some(h),
                        None => {
                            self.err(
                                ErrorKind::UnitMismatch,
                                span,
                                format!("the square root of {} has no unit", d.describe()),
                            );
                            return None;
                        }
                    },
                    None => None,
                };
                Q { v: x.v.sqrt(), dim }
            }
            "abs" => Q {
                v: x.v.abs(),
                dim: x.dim,
            },
            "floor" => Q {
                v: x.v.floor(),
                dim: x.dim,
            },
            "ceil" => Q {
                v: x.v.ceil(),
                dim: x.dim,
            },
            "round" => Q {
                v: x.v.round(),
                dim: x.dim,
            },
            "min" | "max" => {
                let y = vals[1];
                if let (Some(a), Some(b)) = (x.dim, y.dim) {
                    if a != b {
                        self.err(
                            ErrorKind::UnitMismatch,
                            span,
                            format!("cannot compare {} and {}", a.describe(), b.describe()),
                        );
                        return None;
                    }
                }
                let v = if n == "min" {
                    x.v.min(y.v)
                } else {
                    x.v.max(y.v)
                };
                Q {
                    v,
                    dim: x.dim.or(y.dim),
                }
            }
            _ => {
                if !pure(x.dim) || (expected == 2 && !pure(vals[1].dim)) {
                    self.err(
                        ErrorKind::UnitMismatch,
                        span,
                        format!("`{n}` needs pure numbers"),
                    );
                    return None;
                }
                let v = match n {
                    "exp" => x.v.exp(),
                    "ln" => x.v.ln(),
                    "log10" => x.v.log10(),
                    "sin" => x.v.sin(),
                    "cos" => x.v.cos(),
                    "tan" => x.v.tan(),
                    _ => x.v.powf(vals[1].v),
                };
                Q { v, dim: None }
            }
        };
        if !out.v.is_finite() {
            self.err(
                ErrorKind::BadValue,
                span,
                format!("`{n}` gives no finite value here"),
            );
            return None;
        }
        Some(out)
    }

    fn waveform(&mut self, e: &Expr, dim: Dim, frames: &[&Frame]) -> Option<Waveform> {
        let Expr::Call { name, args, span } = e else {
            self.err(
                ErrorKind::BadValue,
                e.span(),
                "expected a waveform: `pulse(...)`, `pwl(...)` or `sine(...)`".into(),
            );
            return None;
        };
        let get = |me: &mut Self, key: &str, d: Dim, default: Option<f64>| -> Option<f64> {
            match args
                .iter()
                .find(|a| a.name.as_ref().is_some_and(|n| n.name == key))
            {
                Some(a) => {
                    let q = me.eval(&a.value, frames)?;
                    me.check_dim(q, d, a.value.span(), key)
                }
                None => match default {
                    Some(v) => Some(v),
                    None => {
                        me.err(
                            ErrorKind::Unconnected,
                            *span,
                            format!("`{}` needs `{key} = ...`", name.name),
                        );
                        None
                    }
                },
            }
        };
        let allowed: &[&str] = match name.name.as_str() {
            "pulse" => &["low", "high", "delay", "rise", "fall", "width", "period"],
            "sine" => &["offset", "amplitude", "frequency", "delay", "phase"],
            "pwl" => &[],
            other => {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    name.span,
                    format!("no waveform called `{other}`"),
                );
                if let Some(h) = did_you_mean(other, ["pulse", "sine", "pwl"]) {
                    d = d.with_help(h);
                }
                self.diags.push(d);
                return None;
            }
        };
        for a in args {
            if let Some(n) = &a.name {
                if !allowed.contains(&n.name.as_str()) {
                    let mut d = Diagnostic::new(
                        ErrorKind::Unknown,
                        n.span,
                        format!("`{}` has no argument `{}`", name.name, n.name),
                    );
                    if let Some(h) = did_you_mean(&n.name, allowed.iter().copied()) {
                        d = d.with_help(h);
                    }
                    self.diags.push(d);
                    return None;
                }
            } else if name.name != "pwl" {
                self.err(
                    ErrorKind::BadValue,
                    a.value.span(),
                    format!(
                        "`{}` takes named arguments, such as `high = 1 V`",
                        name.name
                    ),
                );
                return None;
            }
        }
        let result = match name.name.as_str() {
            "pulse" => {
                let low = get(self, "low", dim, Some(0.0));
                let high = get(self, "high", dim, None);
                let delay = get(self, "delay", Dim::TIME, Some(0.0));
                let rise = get(self, "rise", Dim::TIME, None);
                let fall = get(self, "fall", Dim::TIME, None);
                let width = get(self, "width", Dim::TIME, None);
                let period = match args
                    .iter()
                    .any(|a| a.name.as_ref().is_some_and(|n| n.name == "period"))
                {
                    true => Some(get(self, "period", Dim::TIME, None)?),
                    false => None,
                };
                Waveform::pulse(Pulse {
                    low: low?,
                    high: high?,
                    delay: delay?,
                    rise: rise?,
                    fall: fall?,
                    width: width?,
                    period,
                })
            }
            "sine" => {
                let offset = get(self, "offset", dim, Some(0.0));
                let amplitude = get(self, "amplitude", dim, None);
                let frequency = get(self, "frequency", Dim::FREQUENCY, None);
                let delay = get(self, "delay", Dim::TIME, Some(0.0));
                let phase = get(self, "phase", Dim::NONE, Some(0.0));
                Waveform::sine(Sine {
                    offset: offset?,
                    amplitude: amplitude?,
                    frequency: frequency?,
                    delay: delay?,
                    phase: phase?,
                })
            }
            _ => {
                if args.len() % 2 != 0 || args.is_empty() {
                    self.err(
                        ErrorKind::BadValue,
                        *span,
                        "`pwl` takes pairs: time, value, time, value, ...".into(),
                    );
                    return None;
                }
                let mut pts = Vec::new();
                for pair in args.chunks(2) {
                    let t = self
                        .eval(&pair[0].value, frames)
                        .and_then(|q| self.check_dim(q, Dim::TIME, pair[0].value.span(), "time"));
                    let v = self
                        .eval(&pair[1].value, frames)
                        .and_then(|q| self.check_dim(q, dim, pair[1].value.span(), "value"));
                    pts.push((t?, v?));
                }
                Waveform::piecewise_linear(pts)
            }
        };
        match result {
            Ok(w) => Some(w),
            Err(e) => {
                self.err(ErrorKind::BadValue, *span, e.to_string());
                None
            }
        }
    }

    fn check_dim(&mut self, q: Q, want: Dim, span: Span, what: &str) -> Option<f64> {
        match q.dim {
            Some(d) if d != want => {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::UnitMismatch,
                        span,
                        format!(
                            "`{what}` must be {}, found {}",
                            want.describe(),
                            d.describe()
                        ),
                    )
                    .with_help(format!(
                        "write it with a unit, such as `{}`",
                        want.example()
                    )),
                );
                None
            }
            _ => Some(q.v),
        }
    }

    fn index_name(
        &mut self,
        base: &str,
        index: &Option<Expr>,
        frames: &[&Frame],
    ) -> Option<String> {
        match index {
            None => Some(base.to_string()),
            Some(e) => {
                let i = self.eval_int(e, frames)?;
                Some(format!("{base}[{i}]"))
            }
        }
    }

    fn node(&mut self, r: &Indexed, frames: &[&Frame]) -> Option<NodeId> {
        let name = self.index_name(&r.name.name, &r.index, frames)?;
        if name == Circuit::GROUND_NAME {
            return Some(Circuit::GROUND);
        }
        if r.index.is_none() {
            for f in frames.iter().rev() {
                if let Some(&n) = f.ports.get(&name) {
                    return Some(n);
                }
            }
        }
        let prefix = frames.last().map(|f| f.prefix.as_str()).unwrap_or("");
        Some(self.circuit.node(&format!("{prefix}{name}")))
    }

    fn instance(
        &mut self,
        kind: &Ident,
        name: &Indexed,
        connections: &[Connection],
        params: &[Assign],
        span: Span,
        frames: &mut Vec<Frame>,
    ) {
        let refs: Vec<&Frame> = frames.iter().collect();
        let Some(local) = self.index_name(&name.name.name, &name.index, &refs) else {
            return;
        };
        let prefix = frames.last().map(|f| f.prefix.clone()).unwrap_or_default();
        let full = format!("{prefix}{local}");
        if let Some(&(ports, body, _)) = self.cells.get(&kind.name) {
            self.cell_instance(
                &kind.name,
                ports,
                body,
                &full,
                name.span,
                connections,
                params,
                span,
                frames,
            );
            return;
        }
        let (k, card): (&'static Kind, Option<&DeviceCard>) =
            if let Some(card) = self.devices.get(&kind.name) {
                (card.kind, Some(card))
            } else if let Some(k) = catalog::kind(&kind.name) {
                (k, None)
            } else {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    kind.span,
                    format!(
                        "no element kind, device card or cell called `{}`",
                        kind.name
                    ),
                );
                let mut names: Vec<&str> = catalog::KINDS.iter().map(|k| k.name).collect();
                names.extend(self.cells.keys().map(String::as_str));
                names.extend(self.devices.keys().map(String::as_str));
                if let Some(h) = did_you_mean(&kind.name, names.iter().copied()) {
                    d = d.with_help(h);
                }
                self.diags.push(d);
                return;
            };
        let card_values: Vec<(String, Q, Span)> =
            card.map(|c| c.values.clone()).unwrap_or_default();
        let mut waveform = card.and_then(|c| c.waveform.clone());
        let mut texts: Vec<Option<String>> = k
            .params
            .iter()
            .map(|p| {
                card.and_then(|c| {
                    c.texts
                        .iter()
                        .find(|(n, _)| n == p.name)
                        .map(|(_, t)| t.clone())
                })
            })
            .collect();
        // Pins.
        let pins = self.connect(k.terminals, k.name, connections, span, &refs);
        // Parameters: card values, then instance overrides.
        let mut given: Vec<Option<(Q, Span)>> = vec![None; k.params.len()];
        for (n, q, s) in &card_values {
            if let Some(i) = k.params.iter().position(|p| p.name == n) {
                given[i] = Some((*q, *s));
            }
        }
        let mut seen: HashMap<&str, Span> = HashMap::new();
        let mut failed = vec![false; k.params.len()];
        for a in params {
            if let Some(first) = seen.insert(a.name.name.as_str(), a.name.span) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Duplicate,
                        a.name.span,
                        format!("`{}` is set twice", a.name.name),
                    )
                    .with_note(first, "first set here"),
                );
                continue;
            }
            let Some(i) = k.params.iter().position(|p| p.name == a.name.name) else {
                self.unknown_param(&a.name, k);
                continue;
            };
            if k.params[i].waveform {
                waveform = self.waveform(&a.value, k.params[i].dim, &refs);
                continue;
            }
            if k.params[i].text {
                match self.text_value(&a.name, &a.value) {
                    Some(t) => texts[i] = Some(t),
                    None => failed[i] = true,
                }
                continue;
            }
            match self.eval(&a.value, &refs) {
                Some(q) => given[i] = Some((q, a.value.span())),
                None => failed[i] = true,
            }
        }
        let mut numbers = Vec::with_capacity(k.params.len());
        let mut ok = true;
        let set: Vec<bool> = given.iter().map(Option::is_some).collect();
        for ((spec, g), &bad) in k.params.iter().zip(&given).zip(&failed) {
            if bad {
                ok = false;
                numbers.push(0.0);
                continue;
            }
            if spec.waveform || spec.text {
                numbers.push(f64::NAN);
                continue;
            }
            let v = match g {
                Some((q, s)) => match self.check_dim(*q, spec.dim, *s, spec.name) {
                    Some(v) => {
                        if spec.positive && (v <= 0.0 || v.is_nan()) {
                            self.err(
                                ErrorKind::BadValue,
                                *s,
                                format!("`{}` must be positive, found {v}", spec.name),
                            );
                            ok = false;
                        }
                        v
                    }
                    None => {
                        ok = false;
                        0.0
                    }
                },
                None => match spec.default {
                    Some(d) => d,
                    None => {
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::Unconnected,
                                span,
                                format!("`{}` needs a value for `{}`", full, spec.name),
                            )
                            .with_help(format!(
                                "add `{{ {} = ... }}` after the connections",
                                spec.name
                            )),
                        );
                        ok = false;
                        0.0
                    }
                },
            };
            numbers.push(v);
        }
        let Some(pins) = pins else { return };
        if !ok {
            return;
        }
        if self.created >= self.limits.max_elements {
            self.created += 1;
            self.err(
                ErrorKind::Limit,
                span,
                format!("more than {} elements", self.limits.max_elements),
            );
            return;
        }
        let element = match (k.build)(&Values {
            numbers,
            given: set,
            texts,
            waveform,
        }) {
            Ok(e) => e,
            Err(msg) => {
                self.diags.push(
                    Diagnostic::new(ErrorKind::BadValue, span, format!("`{full}`: {msg}"))
                        .with_help("check the device card's parameters and material names"),
                );
                return;
            }
        };
        match self.circuit.add_boxed(&full, element, &pins) {
            Ok(_) => {
                for &(n, at) in &self.last_pins {
                    if !n.is_ground() {
                        self.node_uses.entry(n).or_insert((0, at)).0 += 1;
                    }
                }
                self.created += 1;
                *self.summary.elements.entry(k.name.to_string()).or_insert(0) += 1;
                self.element_spans.insert(full, name.span);
            }
            Err(CircuitError::DuplicateElement(n)) => {
                let mut d = Diagnostic::new(
                    ErrorKind::Duplicate,
                    name.span,
                    format!("an element called `{n}` already exists"),
                );
                if let Some(first) = self.element_spans.get(&n) {
                    d = d.with_note(*first, "first defined here");
                }
                self.diags.push(d);
            }
            Err(e) => self.err(ErrorKind::BadValue, span, e.to_string()),
        }
    }

    /// Maps connections to pins in `terminals` order, reporting unknown, doubled and missing pins.
    fn connect(
        &mut self,
        terminals: &[&str],
        what: &str,
        connections: &[Connection],
        span: Span,
        frames: &[&Frame],
    ) -> Option<Vec<NodeId>> {
        let mut pins: Vec<Option<(NodeId, Span)>> = vec![None; terminals.len()];
        let mut ok = true;
        self.last_pins.clear();
        for c in connections {
            let Some(i) = terminals.iter().position(|t| *t == c.pin.name) else {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    c.pin.span,
                    format!("`{what}` has no pin `{}`", c.pin.name),
                );
                d = d.with_help(match did_you_mean(&c.pin.name, terminals.iter().copied()) {
                    Some(h) => h,
                    None => format!("its pins are: {}", terminals.join(", ")),
                });
                self.diags.push(d);
                ok = false;
                continue;
            };
            if let Some((_, first)) = pins[i] {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::ConnectedTwice,
                        c.pin.span,
                        format!("pin `{}` is connected twice", c.pin.name),
                    )
                    .with_note(first, "first connected here"),
                );
                ok = false;
                continue;
            }
            match self.node(&c.node, frames) {
                Some(n) => {
                    pins[i] = Some((n, c.pin.span));
                    self.last_pins.push((n, c.node.span));
                }
                None => ok = false,
            }
        }
        let missing: Vec<&str> = terminals
            .iter()
            .zip(&pins)
            .filter(|(_, p)| p.is_none())
            .map(|(t, _)| *t)
            .collect();
        if ok && !missing.is_empty() {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Unconnected,
                    span,
                    format!(
                        "pin(s) {} of `{what}` are not connected",
                        missing.join(", ")
                    ),
                )
                .with_help(format!("connect them, e.g. `{} = ground`", missing[0])),
            );
            ok = false;
        }
        ok.then(|| {
            pins.into_iter()
                .map(|p| p.map(|p| p.0).unwrap_or(Circuit::GROUND))
                .collect()
        })
    }

    #[allow(clippy::too_many_arguments)]
    fn cell_instance(
        &mut self,
        cell: &str,
        ports: &'s [Ident],
        body: &'s [Stmt],
        full: &str,
        name_span: Span,
        connections: &[Connection],
        params: &[Assign],
        span: Span,
        frames: &mut Vec<Frame>,
    ) {
        if self.depth >= self.limits.max_cell_depth {
            self.err(
                ErrorKind::Limit,
                span,
                format!(
                    "cells nested deeper than {} levels (does `{cell}` contain itself?)",
                    self.limits.max_cell_depth
                ),
            );
            return;
        }
        let port_names: Vec<&str> = ports.iter().map(|p| p.name.as_str()).collect();
        let refs: Vec<&Frame> = frames.iter().collect();
        let Some(nodes) = self.connect(&port_names, cell, connections, span, &refs) else {
            return;
        };
        // Instance overrides, evaluated in the caller's scope.
        let defaults: Vec<(&Ident, &Expr)> = body
            .iter()
            .filter_map(|s| {
                if let Stmt::Param { name, value } = s {
                    Some((name, value))
                } else {
                    None
                }
            })
            .collect();
        let mut vars = HashMap::new();
        for a in params {
            if !defaults.iter().any(|(n, _)| n.name == a.name.name) {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    a.name.span,
                    format!("cell `{cell}` has no parameter `{}`", a.name.name),
                );
                if let Some(h) =
                    did_you_mean(&a.name.name, defaults.iter().map(|(n, _)| n.name.as_str()))
                {
                    d = d.with_help(h);
                }
                self.diags.push(d);
                continue;
            }
            if let Some(q) = self.eval(&a.value, &refs) {
                vars.insert(a.name.name.clone(), q);
            }
        }
        let mut port_map = HashMap::new();
        for (p, n) in ports.iter().zip(nodes) {
            port_map.insert(p.name.clone(), n);
        }
        frames.push(Frame {
            vars,
            ports: port_map,
            prefix: format!("{full}."),
        });
        // Defaults for parameters the instance did not set, in the cell's own scope.
        for (n, value) in defaults {
            if frames.last().is_some_and(|f| f.vars.contains_key(&n.name)) {
                continue;
            }
            let refs: Vec<&Frame> = frames.iter().collect();
            // A cell sees the top-level parameters and its own, not its caller's loop variables.
            let own: Vec<&Frame> = refs.last().copied().into_iter().collect();
            if let Some(q) = self.eval(value, &own) {
                if let Some(f) = frames.last_mut() {
                    f.vars.insert(n.name.clone(), q);
                }
            }
        }
        let _ = name_span;
        self.depth += 1;
        // Inside the cell, only its own frame (plus globals) is visible.
        let mut inner = vec![frames.pop().expect("frame was pushed")];
        for s in body {
            self.body_stmt(s, &mut inner);
        }
        self.depth -= 1;
    }
}

fn combine(a: Option<Dim>, b: Option<Dim>, f: fn(Dim, Dim) -> Dim) -> Option<Dim> {
    match (a, b) {
        (None, None) => None,
        (x, y) => Some(f(x.unwrap_or(Dim::NONE), y.unwrap_or(Dim::NONE))),
    }
}

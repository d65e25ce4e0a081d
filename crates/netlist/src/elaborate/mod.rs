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

mod analyses;
mod cards;
mod cells;
mod expr;
mod files;
mod variation;

pub use analyses::{
    Analysis, AnalysisDecl, SettingKind, ANALYSES, MAX_TRANSFER_POINTS, MAX_TRANSIENT_SAMPLES,
};
pub use files::{DiskReader, FileReader, ReadError};
pub use variation::{
    cholesky, AreaScaling, Distribution, Group, Limit, Perturb, Perturbation, Scope, Target,
    Variation, Variations,
};

use crate::ast::*;
use crate::catalog::CardOrigins;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::lexer::lex;
use crate::parser::parse_expression;
use crate::source::{FileId, Sources, Span};
use crate::units::Dim;
use cards::DeviceCard;
use files::Loader;
use lamina_devices::SheetFetCard;
use lamina_engine::{Circuit, NodeId};
use std::collections::{BTreeMap, HashMap};
use std::path::Path;
use std::sync::Arc;

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
    /// Most elaboration work in all: elements and cells placed plus loop iterations, counted
    /// across every level of nesting (default 20,000,000).
    pub max_work: usize,
}

impl Default for Limits {
    fn default() -> Self {
        Limits {
            max_file_bytes: 16 << 20,
            max_include_depth: 32,
            max_cell_depth: 64,
            max_elements: 5_000_000,
            max_repeat: 10_000_000,
            max_work: 20_000_000,
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
    /// Values for the devices of varied cards (one Monte Carlo sample); `None` builds the
    /// nominal design.
    pub perturbation: Option<Perturb>,
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
    pub parameters: Vec<(String, f64, Dim)>,
    /// Counts for a summary.
    pub summary: Summary,
    /// Findings that do not stop the design (a node with a single connection, say).
    pub warnings: Vec<Diagnostic>,
    /// Declared spreads of card keys (`variation` and `correlation` statements).
    pub variations: Variations,
    /// Specification limits on figures (`limit transfer.snm_v { above = 0.1 V }`), in file
    /// order.
    pub limits: Vec<variation::Limit>,
    /// The resolved card of each 2D-channel FET, by element position (shared between the
    /// instances of a card that change nothing).
    sheet_cards: BTreeMap<usize, SheetCard>,
}

/// A resolved 2D-FET card and where its values came from.
type SheetCard = (Arc<SheetFetCard>, Arc<CardOrigins>);

impl Design {
    /// The resolved card of a 2D-channel FET of the circuit (geometry, temperature and
    /// physics as the element was built), or `None` for any other element.
    pub fn sheet_card(&self, element: lamina_engine::ElementId) -> Option<&SheetFetCard> {
        self.sheet_cards.get(&element.index()).map(|c| c.0.as_ref())
    }

    /// Who set each value of a 2D-channel FET's resolved card (card or instance) and the
    /// material names it gave, for [`crate::catalog::resolved_values`].
    pub fn sheet_card_origins(&self, element: lamina_engine::ElementId) -> Option<&CardOrigins> {
        self.sheet_cards.get(&element.index()).map(|c| c.1.as_ref())
    }
}

/// A failed load: the files read so far and every diagnostic.
pub struct Failure {
    /// Files read.
    pub sources: Sources,
    /// What went wrong, in order.
    pub diagnostics: Vec<Diagnostic>,
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
        included: Vec::new(),
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
                sources.add(format!("--set/--param {name}"), text.clone()),
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
    e.perturbation = options.perturbation.clone();
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
    let mut seen = std::collections::HashSet::new();
    warnings.extend(
        e.warns
            .into_iter()
            .filter(|d| seen.insert((d.kind, d.span, d.message.clone()))),
    );
    Ok(Design {
        circuit: e.circuit,
        sources,
        analyses: e.analyses,
        parameters: e.parameter_list,
        summary,
        warnings,
        variations: e.declared_variations,
        limits: e.declared_limits,
        sheet_cards: e.sheet_cards,
    })
}

/// A number in SI units with its dimension (a bare number is a pure number).
#[derive(Clone, Copy, Debug, PartialEq)]
struct Q {
    v: f64,
    dim: Dim,
}

struct Elaborator<'s> {
    limits: Limits,
    diags: Vec<Diagnostic>,
    circuit: Circuit,
    globals: HashMap<String, Q>,
    parameter_list: Vec<(String, f64, Dim)>,
    cells: HashMap<String, (&'s [Ident], &'s [Stmt], Span)>,
    devices: HashMap<String, DeviceCard>,
    analyses: Vec<AnalysisDecl>,
    summary: Summary,
    element_spans: HashMap<String, Span>,
    /// Names instances were placed by (device cards, cells, element kinds placed directly),
    /// so a variation that reaches nothing is said.
    placed_by: std::collections::HashSet<String>,
    depth: usize,
    created: usize,
    /// Nodes and the spans of the connections the last `connect` made.
    last_pins: Vec<(NodeId, Span)>,
    /// Element pins on each node, with the first connection's place.
    node_uses: HashMap<NodeId, (usize, Span)>,
    /// Analyses collected in file order, checked once the circuit is complete.
    pending: Vec<analyses::Pending>,
    /// Findings that do not stop the design.
    warns: Vec<Diagnostic>,
    /// Elements placed and loop iterations run so far, across all nesting.
    work: usize,
    /// Product of the counts of the loops being expanded, through cells.
    multiplier: f64,
    /// Lower bounds on the elements each cell places (see `cost`).
    cell_costs: HashMap<String, f64>,
    /// Cells whose cost is being computed (recursion guard).
    costing: Vec<String>,
    /// Sheet-FET cards to check for plausibility: card, where its values are, where it is.
    plausible: Vec<(lamina_devices::SheetFetCard, cards::Given, Span)>,
    /// Resolved 2D-FET cards by element position, and the card of each device card used
    /// unchanged (computed once per card).
    sheet_cards: BTreeMap<usize, SheetCard>,
    card_cache: HashMap<String, SheetCard>,
    /// Largest voltage written in the design (sources, settings), for plausibility checks.
    max_voltage: f64,
    /// Declared spreads, read after the circuit is complete.
    declared_variations: Variations,
    declared_limits: Vec<variation::Limit>,
    /// Values for the devices of varied cards, if this load is a sample.
    perturbation: Option<Perturb>,
}

/// One level of the scope chain: a cell instance's parameters and ports, or a loop variable.
struct Frame {
    vars: HashMap<String, Q>,
    ports: HashMap<String, NodeId>,
    prefix: String,
}

impl<'s> Elaborator<'s> {
    pub(super) fn new(limits: Limits) -> Self {
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
            placed_by: Default::default(),
            depth: 0,
            created: 0,
            last_pins: Vec::new(),
            node_uses: HashMap::new(),
            pending: Vec::new(),
            warns: Vec::new(),
            work: 0,
            max_voltage: 0.0,
            sheet_cards: BTreeMap::new(),
            card_cache: HashMap::new(),
            plausible: Vec::new(),
            multiplier: 1.0,
            cell_costs: HashMap::new(),
            costing: Vec::new(),
            declared_variations: Variations::default(),
            declared_limits: Vec::new(),
            perturbation: None,
        }
    }

    pub(super) fn err(&mut self, kind: ErrorKind, span: Span, msg: String) {
        self.diags.push(Diagnostic::new(kind, span, msg));
    }

    pub(super) fn run(
        &mut self,
        stmts: &'s [Stmt],
        overrides: &[(String, FileId)],
        sources: &Sources,
    ) {
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
        // `card.key` overrides set a key of a device card; the rest set top-level parameters.
        let mut card_sets: HashMap<String, Vec<Assign>> = HashMap::new();
        let mut card_order: Vec<(String, Span)> = Vec::new();
        for (name, _) in overrides {
            let Some((card, key)) = name.split_once('.') else {
                continue;
            };
            if let Some(e) = parsed.remove(name) {
                let span = override_span[name];
                card_sets.entry(card.to_string()).or_default().push(Assign {
                    name: Ident {
                        name: key.to_string(),
                        span,
                    },
                    value: e,
                });
                card_order.push((card.to_string(), span));
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
                        .with_note(*first, "first defined here")
                        .with_help("remove one, or rename it; change a value from the command line with --set"),
                    );
                    continue;
                }
                seen.insert(name.name.clone(), name.span);
                let q = match parsed.get(&name.name) {
                    Some(e) => {
                        // The replacement must have the dimension the file gives the parameter.
                        let file = self.eval(value, &[&top]);
                        let given = self.eval(e, &[&top]);
                        match (file, given) {
                            // A plain zero is zero in every unit.
                            (Some(f), Some(g)) if g.dim == Dim::NONE && g.v == 0.0 => {
                                Some(Q { v: 0.0, dim: f.dim })
                            }
                            (Some(f), Some(g)) if f.dim != g.dim => {
                                let span = override_span[&name.name];
                                let msg = format!(
                                    "`{}` is {} in the file, but this value is {}",
                                    name.name,
                                    f.dim.describe(),
                                    g.dim.describe()
                                );
                                let kind = if g.dim == Dim::NONE {
                                    ErrorKind::MissingUnit
                                } else {
                                    ErrorKind::UnitMismatch
                                };
                                self.diags.push(
                                    Diagnostic::new(kind, span, msg)
                                        .with_note(name.span, "defined here")
                                        .with_help(format!(
                                            "write the value with a unit, such as `{}={}`",
                                            name.name,
                                            f.dim.example().replace(' ', "")
                                        )),
                                );
                                Some(f) // the file's value, so later uses do not fail again
                            }
                            // A value that did not evaluate was reported; the file's value
                            // stands in so that later uses are not reported again.
                            (f, None) => f,
                            (_, g) => g,
                        }
                    }
                    None => self.eval(value, &[&top]),
                };
                if let Some(q) = q {
                    self.globals.insert(name.name.clone(), q);
                    self.parameter_list.push((name.name.clone(), q.v, q.dim));
                }
            }
        }
        for (name, _) in overrides {
            if parsed.contains_key(name) && !seen.contains_key(name) {
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
                    if self.devices.contains_key(&name.name)
                        || crate::catalog::kind(&name.name).is_some()
                    {
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::Duplicate,
                                name.span,
                                format!(
                                    "`{}` is already {}",
                                    name.name,
                                    if self.devices.contains_key(&name.name) {
                                        "a device card"
                                    } else {
                                        "an element kind"
                                    }
                                ),
                            )
                            .with_help(
                                "device cards, cells and element kinds share one set of names: \
                                 rename the cell",
                            ),
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
                } => match card_sets.remove(&name.name) {
                    Some(sets) => {
                        // Each `card.key` replaces the card's own value of `key`, or adds it.
                        let mut merged: Vec<Assign> = params
                            .iter()
                            .filter(|a| !sets.iter().any(|b| b.name.name == a.name.name))
                            .cloned()
                            .collect();
                        let keys = sets.iter().map(|a| a.name.name.clone()).collect();
                        merged.extend(sets);
                        self.device_card(name, model, &merged, &top, keys);
                    }
                    None => self.device_card(name, model, params, &top, Vec::new()),
                },
                _ => {}
            }
        }
        for (card, span) in card_order {
            if card_sets.remove(&card).is_some() {
                let mut cards: Vec<&str> = self.devices.keys().map(String::as_str).collect();
                cards.sort_unstable();
                let help = match did_you_mean(&card, cards.iter().copied()) {
                    Some(h) => h,
                    None if cards.is_empty() => "the file defines no device card".to_string(),
                    None => format!("its device cards are: {}", cards.join(", ")),
                };
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Unknown,
                        span,
                        format!(
                            "no device card `{card}`: a name with a dot sets a key of a device \
                             card (`card.key=value`)"
                        ),
                    )
                    .with_help(help),
                );
            }
        }
        let mut frames = vec![top];
        for s in stmts {
            match s {
                Stmt::Param { .. }
                | Stmt::Cell { .. }
                | Stmt::Device { .. }
                | Stmt::Variation { .. }
                | Stmt::Correlation { .. }
                | Stmt::Limit { .. }
                | Stmt::Include { .. } => {}
                Stmt::Analysis { kind, params, span } => {
                    self.analysis(kind, params, *span, &frames)
                }
                other => self.body_stmt(other, &mut frames),
            }
        }
        // Names in analyses are checked against a complete circuit only: after other errors
        // they would mostly repeat them.
        if self.diags.is_empty() {
            self.variations(stmts, &frames[0]);
            self.limits(stmts, &frames[0]);
            self.check_analyses();
            self.plausibility_warnings();
        }
    }

    /// Whether elaboration should stop: too many errors to be useful, or the element limit.
    pub(super) fn saturated(&self) -> bool {
        self.diags.len() > 200
            || self.created > self.limits.max_elements
            || self.work > self.limits.max_work
    }

    /// Counts one unit of elaboration work (an instance placed, a loop iteration); past the
    /// limit, reports it once at `span` and returns false.
    pub(super) fn tick(&mut self, span: Span) -> bool {
        self.work += 1;
        if self.work == self.limits.max_work + 1 {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Limit,
                    span,
                    format!(
                        "elaboration needs more than {} steps (instances and loop iterations, \
                         counted through every level of cells and loops)",
                        self.limits.max_work
                    ),
                )
                .with_help("nested loops and cells multiply: check the loop bounds and how often each cell places the next"),
            );
        }
        self.work <= self.limits.max_work
    }
}

//! Analyses: the settings each analysis takes, collected in file order and checked against the
//! finished circuit, so that `lamina check` reports every setting error `lamina run` would
//! meet, each at its place.

use super::{Elaborator, Frame, Q};
use crate::ast::*;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;
use crate::units::{engineering, Dim};
use lamina_engine::{Circuit, Integrator};

/// What an analysis setting takes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum SettingKind {
    /// A number (an expression, parameters allowed).
    Number,
    /// The name of a node, node array or element, taken as written (even if a parameter has
    /// the same name).
    Name,
    /// A name or a list of names: `record = [out, in]`.
    Names,
    /// A list of numbers: `window = [1 ns, 5 ns]`.
    Numbers,
}

/// Analyses the language knows, with the settings each accepts (all required unless marked
/// optional in the language reference: `integrator` of `ring`).
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
        "transient",
        &[
            ("stop", SettingKind::Number),
            ("record", SettingKind::Names),
            ("currents", SettingKind::Names),
            ("interval", SettingKind::Number),
            ("window", SettingKind::Numbers),
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
    (
        "small_signal",
        &[
            ("source", SettingKind::Name),
            ("output", SettingKind::Name),
            ("from", SettingKind::Number),
            ("to", SettingKind::Number),
            ("per_decade", SettingKind::Number),
            ("device", SettingKind::Name),
        ],
    ),
];

/// Settings that may be left out.
const OPTIONAL: &[(&str, &str)] = &[
    ("ring", "integrator"),
    ("transient", "record"),
    ("transient", "currents"),
    ("transient", "interval"),
    ("transient", "window"),
    ("small_signal", "device"),
];

/// Most frequencies of one decade of a small-signal analysis.
pub const MAX_PER_DECADE: usize = 1000;

/// Most frequencies of a small-signal analysis.
pub const MAX_SMALL_SIGNAL_POINTS: f64 = 1e5;

/// Most samples a transient keeps of each signal: the accepted steps are thinned to this many
/// (the engine's decimation), and a fixed `interval` may not ask for more.
pub const MAX_TRANSIENT_SAMPLES: usize = 200_000;

/// Most points of a transfer sweep.
pub const MAX_TRANSFER_POINTS: f64 = 1e7;

/// A checked analysis, ready to run: every name it uses exists in the circuit and every
/// number has its dimension and range.
#[derive(Clone, Debug, PartialEq)]
pub enum Analysis {
    /// Every node voltage at the DC operating point.
    OperatingPoint,
    /// A DC sweep of one source with the output's transfer curve.
    Transfer {
        /// The swept voltage or current source (element name).
        source: String,
        /// The output node.
        output: String,
        /// First value (V or A, SI).
        from: f64,
        /// Last value.
        to: f64,
        /// Number of equal steps from `from` to `to` (points: `steps + 1`).
        steps: usize,
    },
    /// A transient from the operating point and the propagation delays from one node to
    /// another.
    Delay {
        /// Input node.
        from: String,
        /// Output node.
        to: String,
        /// End time (s).
        stop: f64,
    },
    /// A general transient from the operating point, recording chosen node voltages and branch
    /// currents and every voltage source's current and delivered power.
    Transient {
        /// End time (s).
        stop: f64,
        /// Recorded nodes (arrays expanded: `out` is `out[0]`, `out[1]`, ...).
        nodes: Vec<String>,
        /// Elements whose branch current is recorded (voltage sources, inductors,
        /// voltage-controlled voltage sources).
        currents: Vec<String>,
        /// Fixed output interval (s); `None` records the accepted steps.
        interval: Option<f64>,
        /// Window of the derived figures (s): the whole run unless given.
        window: (f64, f64),
    },
    /// A ring oscillator: stage outputs `nodes[0] .. nodes[stages - 1]`.
    Ring {
        /// Name of the node array.
        nodes: String,
        /// Number of stages (odd, at least 3).
        stages: usize,
        /// The supply node.
        supply: String,
        /// The voltage source that drives `supply` from ground.
        supply_source: String,
        /// Integration formula, if the file chose one.
        integrator: Option<Integrator>,
    },
    /// A small-signal analysis at the operating point over a logarithmic frequency list.
    SmallSignal {
        /// The voltage or current source whose unit small-signal value drives the circuit.
        source: String,
        /// The output node (not ground).
        output: String,
        /// Lowest frequency (Hz, positive).
        from: f64,
        /// Highest frequency (Hz, above `from`).
        to: f64,
        /// Frequencies per decade (1 to [`MAX_PER_DECADE`]).
        per_decade: usize,
        /// A FET (pins `drain`, `gate`, `source`) whose common-source two-port parameters
        /// are reported, if the file names one.
        device: Option<String>,
    },
}

/// An `analysis` declaration, checked.
#[derive(Clone, Debug, PartialEq)]
pub struct AnalysisDecl {
    /// Which analysis (`transfer`, ...).
    pub kind: String,
    /// Its checked settings.
    pub analysis: Analysis,
    /// The header.
    pub span: Span,
}

/// A setting's value as written, before the circuit is known.
#[derive(Clone, Debug)]
enum Raw {
    Number(Q),
    Name(String),
    Names(Vec<(String, Span)>),
    Numbers(Vec<(Q, Span)>),
}

/// An analysis collected during the walk and checked once the circuit is complete.
pub(super) struct Pending {
    kind: &'static str,
    header: Span,
    values: Vec<(&'static str, Raw, Span)>,
}

impl Pending {
    fn get(&self, key: &str) -> Option<(&Raw, Span)> {
        self.values
            .iter()
            .find(|(k, _, _)| *k == key)
            .map(|(_, r, s)| (r, *s))
    }
}

impl<'s> Elaborator<'s> {
    /// Collects an `analysis kind { ... }`: known kind, known and unrepeated keys, values
    /// evaluated. Names are checked later, against the finished circuit.
    pub(super) fn analysis(
        &mut self,
        kind: &Ident,
        params: &[Assign],
        span: Span,
        frames: &[Frame],
    ) {
        let Some(&(kind_name, keys)) = ANALYSES.iter().find(|(k, _)| *k == kind.name) else {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                kind.span,
                format!("no analysis called `{}`", kind.name),
            );
            if let Some(h) = did_you_mean(&kind.name, ANALYSES.iter().map(|a| a.0)) {
                d = d.with_help(h);
            } else {
                let all: Vec<&str> = ANALYSES.iter().map(|a| a.0).collect();
                d = d.with_help(format!("the analyses are: {}", all.join(", ")));
            }
            self.diags.push(d);
            return;
        };
        let refs: Vec<&Frame> = frames.iter().collect();
        let mut values: Vec<(&'static str, Raw, Span)> = Vec::new();
        let mut complete = true;
        for a in params {
            let Some(&(key, setting_kind)) = keys.iter().find(|(k, _)| *k == a.name.name) else {
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
                complete = false;
                continue;
            };
            if let Some(&(_, _, first)) = values.iter().find(|(k, _, _)| *k == key) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Duplicate,
                        a.name.span,
                        format!("`{key}` is set twice"),
                    )
                    .with_note(first, "first set here")
                    .with_help("keep one of the two"),
                );
                continue;
            }
            let value = match (setting_kind, &a.value) {
                (SettingKind::Names, e) => {
                    let items: &[Expr] = match e {
                        Expr::List(items, _) => items,
                        one => std::slice::from_ref(one),
                    };
                    let mut names = Vec::new();
                    for item in items {
                        match item {
                            Expr::Name(id) => names.push((id.name.clone(), id.span)),
                            Expr::Str(s, span) => names.push((s.clone(), *span)),
                            Expr::Indexed(id, index, span) => {
                                if let Some(i) = self.eval_int(index, &refs) {
                                    names.push((format!("{}[{i}]", id.name), *span));
                                }
                            }
                            other => self.diags.push(
                                Diagnostic::new(
                                    ErrorKind::BadValue,
                                    other.span(),
                                    format!("`{key}` takes names, not values"),
                                )
                                .with_help(format!("such as `{key} = [out, in]`")),
                            ),
                        }
                    }
                    (names.len() == items.len()).then_some(Raw::Names(names))
                }
                (SettingKind::Numbers, e) => {
                    let items: &[Expr] = match e {
                        Expr::List(items, _) => items,
                        one => std::slice::from_ref(one),
                    };
                    let values: Vec<(Q, Span)> = items
                        .iter()
                        .filter_map(|i| self.eval(i, &refs).map(|q| (q, i.span())))
                        .collect();
                    (values.len() == items.len()).then_some(Raw::Numbers(values))
                }
                (SettingKind::Name, Expr::Name(id)) => Some(Raw::Name(id.name.clone())),
                (SettingKind::Name, Expr::Str(s, _)) => Some(Raw::Name(s.clone())),
                (SettingKind::Name, Expr::Indexed(id, index, _)) => self
                    .eval_int(index, &refs)
                    .map(|i| Raw::Name(format!("{}[{i}]", id.name))),
                (SettingKind::Name, e) => {
                    self.diags.push(
                        Diagnostic::new(
                            ErrorKind::BadValue,
                            e.span(),
                            format!("`{key}` takes a name, not a value"),
                        )
                        .with_help(format!(
                            "write the name as it is in the circuit, such as `{key} = out`"
                        )),
                    );
                    None
                }
                (SettingKind::Number, e) => self.eval(e, &refs).map(Raw::Number),
            };
            match value {
                Some(v) => values.push((key, v, a.value.span())),
                None => complete = false,
            }
        }
        self.summary.analyses.push(kind.name.clone());
        if complete {
            self.pending.push(Pending {
                kind: kind_name,
                header: span,
                values,
            });
        }
    }

    /// Checks every collected analysis against the finished circuit.
    pub(super) fn check_analyses(&mut self) {
        for p in std::mem::take(&mut self.pending) {
            if let Some(analysis) = self.check_analysis(&p) {
                self.analyses.push(AnalysisDecl {
                    kind: p.kind.to_string(),
                    analysis,
                    span: p.header,
                });
            }
        }
    }

    fn check_analysis(&mut self, p: &Pending) -> Option<Analysis> {
        let keys = ANALYSES.iter().find(|(k, _)| *k == p.kind)?.1;
        let missing: Vec<&str> = keys
            .iter()
            .map(|k| k.0)
            .filter(|k| p.get(k).is_none() && !OPTIONAL.contains(&(p.kind, *k)))
            .collect();
        if !missing.is_empty() {
            let example = match p.kind {
                "transfer" => "source = drive, output = out, from = 0 V, to = 1 V, step = 5 mV",
                "delay" => "from = in, to = out, stop = 2 ns",
                "transient" => "stop = 5 ns, record = [in, out]",
                "small_signal" => {
                    "source = drive, output = out, from = 1 kHz, to = 100 GHz, per_decade = 10"
                }
                _ => "nodes = out, stages = 21, supply = vdd",
            };
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Unconnected,
                    p.header,
                    format!(
                        "analysis `{}` needs {}",
                        p.kind,
                        missing
                            .iter()
                            .map(|m| format!("`{m} = ...`"))
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                )
                .with_help(format!("for example `analysis {} {{ {example} }}`", p.kind)),
            );
            return None;
        }
        match p.kind {
            "operating_point" => Some(Analysis::OperatingPoint),
            "transfer" => self.check_transfer(p),
            "delay" => self.check_delay(p),
            "transient" => self.check_transient(p),
            "small_signal" => self.check_small_signal(p),
            _ => self.check_ring(p),
        }
    }

    fn name_of(&self, p: &Pending, key: &str) -> Option<(String, Span)> {
        match p.get(key) {
            Some((Raw::Name(n), s)) => Some((n.clone(), s)),
            _ => None,
        }
    }

    fn number_of(&self, p: &Pending, key: &str) -> Option<(Q, Span)> {
        match p.get(key) {
            Some((Raw::Number(q), s)) => Some((*q, s)),
            _ => None,
        }
    }

    /// A node of the circuit, or an error with the closest names.
    fn existing_node(&mut self, name: &str, span: Span, key: &str) -> bool {
        if name == Circuit::GROUND_NAME || self.circuit.find_node(name).is_some() {
            return true;
        }
        let mut d = Diagnostic::new(
            ErrorKind::Unknown,
            span,
            format!("`{key}`: the circuit has no node `{name}`"),
        );
        let names: Vec<String> = self
            .circuit
            .nodes()
            .map(|n| self.circuit.node_name(n).to_string())
            .collect();
        if let Some(h) = did_you_mean(name, names.iter().map(String::as_str)) {
            d = d.with_help(h);
        } else if self.circuit.find_element(name).is_some() {
            d = d.with_help(format!("`{name}` is an element; `{key}` takes a node"));
        } else {
            let mut some: Vec<&str> = names.iter().map(String::as_str).take(8).collect();
            if names.len() > 8 {
                some.push("...");
            }
            d = d.with_help(format!("the circuit's nodes are: {}", some.join(", ")));
        }
        self.diags.push(d);
        false
    }

    /// A number of dimension `dim`, as its SI value.
    fn number_in(&mut self, p: &Pending, key: &str, dim: Dim) -> Option<(f64, Span)> {
        let (q, s) = self.number_of(p, key)?;
        let v = self.check_dim(q, dim, s, key)?;
        Some((v, s))
    }

    fn bad(&mut self, span: Span, msg: String, help: String) {
        self.diags
            .push(Diagnostic::new(ErrorKind::BadValue, span, msg).with_help(help));
    }

    /// The unit of an independent source's value (V or A), or an error at `span` naming the
    /// circuit's sources.
    fn source_dim(&mut self, source: &str, span: Span, what: &str) -> Option<Dim> {
        match self.circuit.find_element(source) {
            Some(e) => match self.circuit.element_kind(e) {
                "voltage source" => Some(Dim::VOLTAGE),
                "current source" => Some(Dim::CURRENT),
                other => {
                    self.bad(
                        span,
                        format!("`source`: `{source}` is a {other}, not a source"),
                        what.into(),
                    );
                    None
                }
            },
            None => {
                self.unknown_element(
                    ("source", source, span),
                    |c, e| c.element_kind(e).ends_with(" source"),
                    "sources",
                    "add a voltage source, such as `voltage_source drive (pos = in, neg = ground)`",
                );
                None
            }
        }
    }

    /// Whether `from < to`; if not, an error at `to`.
    fn ascending(&mut self, (from, to): (f64, f64), to_span: Span, unit: &str) -> bool {
        if to > from {
            return true;
        }
        self.bad(
            to_span,
            format!(
                "`to` ({}) must be above `from` ({})",
                engineering(to, unit),
                engineering(from, unit)
            ),
            "go upwards: swap `from` and `to`".into(),
        );
        false
    }

    /// `key`: the circuit has no element `name`; the help names the closest element that
    /// `fits`, or all of them (`plural`), or says `none` when there are none.
    fn unknown_element(
        &mut self,
        (key, name, span): (&str, &str, Span),
        fits: impl Fn(&Circuit, lamina_engine::ElementId) -> bool,
        plural: &str,
        none: &str,
    ) {
        let names: Vec<String> = self
            .circuit
            .elements()
            .filter(|&e| fits(&self.circuit, e))
            .map(|e| self.circuit.element_name(e).to_string())
            .collect();
        let help = match did_you_mean(name, names.iter().map(String::as_str)) {
            Some(h) => h,
            None if names.is_empty() => none.to_string(),
            None => format!("the {plural} are: {}", names.join(", ")),
        };
        self.diags.push(
            Diagnostic::new(
                ErrorKind::Unknown,
                span,
                format!("`{key}`: the circuit has no element `{name}`"),
            )
            .with_help(help),
        );
    }

    /// `analysis small_signal { source, output, from, to, per_decade, device }`.
    fn check_small_signal(&mut self, p: &Pending) -> Option<Analysis> {
        let (source, src_span) = self.name_of(p, "source")?;
        let (output, out_span) = self.name_of(p, "output")?;
        let src_ok = self
            .source_dim(
                &source,
                src_span,
                "name the voltage or current source that drives the input",
            )
            .is_some();
        let out_ok = self.existing_node(&output, out_span, "output");
        let device = match self.name_of(p, "device") {
            None => Some(None),
            Some((name, span)) => self.existing_fet(&name, span).then_some(Some(name)),
        };
        let from = self.number_in(p, "from", Dim::FREQUENCY);
        let to = self.number_in(p, "to", Dim::FREQUENCY);
        let per = self.number_in(p, "per_decade", Dim::NONE);
        let ((from, from_span), (to, to_span), (per, per_span)) = (from?, to?, per?);
        let device = device?;
        if !(src_ok && out_ok) {
            return None;
        }
        if output == Circuit::GROUND_NAME {
            self.bad(
                out_span,
                "`output` is ground, whose small-signal voltage is always zero".into(),
                "name the node whose response you want, such as `output = out`".into(),
            );
            return None;
        }
        // A node an ideal voltage source holds against ground has no small-signal voltage of
        // its own (unless that source is the one driving).
        if let Some(node) = self.circuit.find_node(&output) {
            let holder = self.circuit.elements().find(|&e| {
                self.circuit.element_kind(e) == "voltage source"
                    && self.circuit.element_name(e) != source
                    && {
                        let pins = self.circuit.element_pins(e);
                        pins.contains(&node) && pins.iter().any(|n| n.is_ground())
                    }
            });
            if let Some(e) = holder {
                self.bad(
                    out_span,
                    format!(
                        "`output` `{output}` is held by the voltage source `{}`, so its \
                         small-signal voltage is always zero",
                        self.circuit.element_name(e)
                    ),
                    "name a node the circuit is free to move, such as a drain behind a load".into(),
                );
                return None;
            }
        }
        if from <= 0.0 {
            self.bad(
                from_span,
                format!(
                    "`from` must be a positive frequency, found {}",
                    engineering(from, "Hz")
                ),
                "a logarithmic list starts above zero, such as `from = 1 kHz`".into(),
            );
            return None;
        }
        if !self.ascending((from, to), to_span, "Hz") {
            return None;
        }
        if per.fract() != 0.0 || !(1.0..=MAX_PER_DECADE as f64).contains(&per) {
            self.bad(
                per_span,
                format!(
                    "`per_decade` must be a whole number from 1 to {MAX_PER_DECADE}, found {per}"
                ),
                "such as `per_decade = 10`".into(),
            );
            return None;
        }
        let points = (to.log10() - from.log10()) * per;
        if points > MAX_SMALL_SIGNAL_POINTS {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Limit,
                    per_span,
                    format!(
                        "{points:.3e} frequencies are more than the limit of {MAX_SMALL_SIGNAL_POINTS:e}"
                    ),
                )
                .with_help("use fewer points per decade or a narrower range"),
            );
            return None;
        }
        Some(Analysis::SmallSignal {
            source,
            output,
            from,
            to,
            per_decade: per as usize,
            device,
        })
    }

    /// An element with `drain`, `gate` and `source` pins, or an error with the closest FETs.
    fn existing_fet(&mut self, name: &str, span: Span) -> bool {
        let is_fet = |c: &Circuit, e: lamina_engine::ElementId| {
            let t = c.element_terminals(e);
            ["drain", "gate", "source"].iter().all(|p| t.contains(p))
        };
        match self.circuit.find_element(name) {
            Some(e) if is_fet(&self.circuit, e) => true,
            Some(e) => {
                let kind = self.circuit.element_kind(e);
                self.bad(
                    span,
                    format!("`device`: `{name}` is a {kind}, not a FET"),
                    "name a FET (an element with drain, gate and source pins)".into(),
                );
                false
            }
            None => {
                self.unknown_element(
                    ("device", name, span),
                    is_fet,
                    "FETs",
                    "the circuit has no FET; leave `device` out",
                );
                false
            }
        }
    }

    fn check_transfer(&mut self, p: &Pending) -> Option<Analysis> {
        let (source, src_span) = self.name_of(p, "source")?;
        let (output, out_span) = self.name_of(p, "output")?;
        let dim = self.source_dim(
            &source,
            src_span,
            "name the voltage or current source to sweep",
        );
        let out_ok = self.existing_node(&output, out_span, "output");
        let dim = dim?;
        let from = self.number_in(p, "from", dim);
        let to = self.number_in(p, "to", dim);
        let step = self.number_in(p, "step", dim);
        let ((from, _), (to, to_span), (step, step_span)) = (from?, to?, step?);
        if !out_ok {
            return None;
        }
        if !self.ascending((from, to), to_span, &dim.unit()) {
            return None;
        }
        if step <= 0.0 {
            self.bad(
                step_span,
                format!(
                    "`step` must be positive, found {}",
                    engineering(step, &dim.unit())
                ),
                format!(
                    "give a step such as `{}`",
                    if dim == Dim::VOLTAGE { "5 mV" } else { "1 uA" }
                ),
            );
            return None;
        }
        let count = (to - from) / step;
        if count > MAX_TRANSFER_POINTS {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Limit,
                    step_span,
                    format!("{count:.3e} steps are more than the limit of {MAX_TRANSFER_POINTS:e}"),
                )
                .with_help("use a larger step"),
            );
            return None;
        }
        if count < 2.0 - 1e-9 {
            self.bad(
                step_span,
                format!("`step` leaves fewer than 2 steps between `from` and `to` ({count:.3})"),
                "use a step well below `to - from`, such as a hundredth of it".into(),
            );
            return None;
        }
        let steps = count.round().max(2.0) as usize;
        if (count - steps as f64).abs() > 1e-6 * count {
            let used = (to - from) / steps as f64;
            self.warns.push(
                Diagnostic::new(
                    ErrorKind::BadValue,
                    step_span,
                    format!(
                        "`step` does not divide `to - from` into whole steps ({count:.4}); the sweep uses {steps} equal steps of {used:.6e} {}",
                        dim.unit()
                    ),
                )
                .with_help("choose a step that divides the range"),
            );
        }
        Some(Analysis::Transfer {
            source,
            output,
            from,
            to,
            steps,
        })
    }

    fn check_delay(&mut self, p: &Pending) -> Option<Analysis> {
        let (from, from_span) = self.name_of(p, "from")?;
        let (to, to_span) = self.name_of(p, "to")?;
        let ok_from = self.existing_node(&from, from_span, "from");
        let ok_to = self.existing_node(&to, to_span, "to");
        let stop = self.number_in(p, "stop", Dim::TIME);
        let (stop, stop_span) = stop?;
        if !(ok_from && ok_to) {
            return None;
        }
        if from == to {
            self.bad(
                to_span,
                format!("`from` and `to` are the same node `{to}`"),
                "`to` is the output whose delay after `from` is measured".into(),
            );
            return None;
        }
        if stop <= 0.0 {
            self.bad(
                stop_span,
                format!(
                    "`stop` must be a positive time, found {}",
                    engineering(stop, "s")
                ),
                "give the end of the transient, such as `stop = 2 ns`".into(),
            );
            return None;
        }
        Some(Analysis::Delay { from, to, stop })
    }

    fn check_ring(&mut self, p: &Pending) -> Option<Analysis> {
        let (nodes, nodes_span) = self.name_of(p, "nodes")?;
        let (supply, supply_span) = self.name_of(p, "supply")?;
        let (q, stages_span) = self.number_of(p, "stages")?;
        let integrator = match self.name_of(p, "integrator") {
            None => None,
            Some((name, s)) => match name.as_str() {
                "trapezoidal" => Some(Integrator::Trapezoidal),
                "euler" => Some(Integrator::BackwardEuler),
                "bdf2" => Some(Integrator::Bdf2),
                "variable_bdf" => Some(Integrator::VariableBdf),
                other => {
                    let mut d = Diagnostic::new(
                        ErrorKind::Unknown,
                        s,
                        format!("no integrator called `{other}`"),
                    );
                    d = d.with_help(
                        did_you_mean(other, ["trapezoidal", "euler", "bdf2", "variable_bdf"])
                            .unwrap_or_else(|| {
                                "use trapezoidal, euler, bdf2 or variable_bdf".into()
                            }),
                    );
                    self.diags.push(d);
                    return None;
                }
            },
        };
        let n = self.check_dim(q, Dim::NONE, stages_span, "stages")?;
        if n.fract() != 0.0 || n < 3.0 || n % 2.0 == 0.0 || n > 1e7 {
            self.bad(
                stages_span,
                format!("`stages` must be an odd whole number from 3 to 1e7, found {n}"),
                "a ring of inverting stages oscillates only with an odd count, such as 21".into(),
            );
            return None;
        }
        let stages = n as usize;
        // The array must have exactly `stages` members.
        let missing =
            (0..stages).find(|i| self.circuit.find_node(&format!("{nodes}[{i}]")).is_none());
        if let Some(i) = missing {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                nodes_span,
                format!("`nodes`: the circuit has no node `{nodes}[{i}]`"),
            );
            d = if i == 0 {
                let names: Vec<String> = self
                    .circuit
                    .nodes()
                    .filter_map(|n| {
                        let name = self.circuit.node_name(n);
                        name.strip_suffix("[0]").map(str::to_string)
                    })
                    .collect();
                d.with_help(
                    did_you_mean(&nodes, names.iter().map(String::as_str)).unwrap_or_else(|| {
                        "`nodes` names the array of stage outputs, such as `out` for `out[0]`, `out[1]`, ...".to_string()
                    }),
                )
            } else {
                d.with_note(
                    stages_span,
                    format!("the array has {i} nodes, not {stages}"),
                )
                .with_help(format!("set `stages = {i}` or extend the array"))
            };
            self.diags.push(d);
            return None;
        }
        if self
            .circuit
            .find_node(&format!("{nodes}[{stages}]"))
            .is_some()
        {
            let mut len = stages;
            while len < 10_000_000 && self.circuit.find_node(&format!("{nodes}[{len}]")).is_some() {
                len += 1;
            }
            self.bad(
                stages_span,
                format!("`stages = {stages}` but the array `{nodes}` has {len} nodes"),
                format!("set `stages = {len}`"),
            );
            return None;
        }
        let Some(supply_node) = self.circuit.find_node(&supply) else {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                supply_span,
                format!("`supply`: the circuit has no node `{supply}`"),
            );
            if self.circuit.find_element(&supply).is_some() {
                d = d.with_help(format!(
                    "`{supply}` is an element; `supply` takes the node it drives"
                ));
            } else {
                let names: Vec<String> = self
                    .circuit
                    .nodes()
                    .map(|n| self.circuit.node_name(n).to_string())
                    .collect();
                if let Some(h) = did_you_mean(&supply, names.iter().map(String::as_str)) {
                    d = d.with_help(h);
                }
            }
            self.diags.push(d);
            return None;
        };
        let driver = self.circuit.elements().find(|&e| {
            self.circuit.element_kind(e) == "voltage source"
                && self.circuit.element_pins(e) == [supply_node, Circuit::GROUND]
        });
        let Some(driver) = driver else {
            self.bad(
                supply_span,
                format!("no voltage source drives `{supply}` from ground"),
                format!(
                    "add `voltage_source supply (pos = {supply}, neg = ground) {{ dc = 1 V }}`"
                ),
            );
            return None;
        };
        Some(Analysis::Ring {
            nodes,
            stages,
            supply,
            supply_source: self.circuit.element_name(driver).to_string(),
            integrator,
        })
    }

    /// `analysis transient { stop, record, currents, interval, window }`.
    fn check_transient(&mut self, p: &Pending) -> Option<Analysis> {
        let (stop, stop_span) = self.number_in(p, "stop", Dim::TIME)?;
        if stop <= 0.0 {
            self.bad(
                stop_span,
                format!(
                    "`stop` must be a positive time, found {}",
                    engineering(stop, "s")
                ),
                "give the end of the run, such as `stop = 10 ns`".into(),
            );
            return None;
        }
        let mut ok = true;
        // Nodes: a node, or the name of an array (`out` for `out[0]`, `out[1]`, ...).
        let mut nodes = Vec::new();
        if let Some((Raw::Names(names), _)) = p.get("record") {
            for (name, span) in names {
                if self.circuit.find_node(name).is_some() {
                    nodes.push(name.clone());
                } else if self.circuit.find_node(&format!("{name}[0]")).is_some() {
                    let mut i = 0;
                    while i < MAX_TRANSIENT_SAMPLES
                        && self.circuit.find_node(&format!("{name}[{i}]")).is_some()
                    {
                        nodes.push(format!("{name}[{i}]"));
                        i += 1;
                    }
                } else {
                    ok &= self.existing_node(name, *span, "record");
                }
            }
        }
        let mut currents = Vec::new();
        if let Some((Raw::Names(names), _)) = p.get("currents") {
            for (name, span) in names {
                match self.circuit.find_element(name) {
                    Some(e) => {
                        let kind = self.circuit.element_kind(e);
                        if matches!(
                            kind,
                            "voltage source" | "inductor" | "voltage-controlled voltage source"
                        ) {
                            currents.push(name.clone());
                        } else {
                            self.bad(
                                *span,
                                format!("`{name}` is a {kind}, whose current is not an unknown of the circuit"),
                                "record the voltages across it, or put a `voltage_source` of `dc = 0 V` in series and record its current".into(),
                            );
                            ok = false;
                        }
                    }
                    None => {
                        let mut d = Diagnostic::new(
                            ErrorKind::Unknown,
                            *span,
                            format!("`currents`: the circuit has no element `{name}`"),
                        );
                        let names: Vec<String> = self
                            .circuit
                            .elements()
                            .map(|e| self.circuit.element_name(e).to_string())
                            .collect();
                        if let Some(h) = did_you_mean(name, names.iter().map(String::as_str)) {
                            d = d.with_help(h);
                        }
                        self.diags.push(d);
                        ok = false;
                    }
                }
            }
        }
        let interval = match self.number_of(p, "interval") {
            None => None,
            Some((q, s)) => {
                let dt = self.check_dim(q, Dim::TIME, s, "interval")?;
                if dt <= 0.0 {
                    self.bad(
                        s,
                        format!(
                            "`interval` must be a positive time, found {}",
                            engineering(dt, "s")
                        ),
                        "such as `interval = 10 ps`".into(),
                    );
                    return None;
                }
                if stop / dt > MAX_TRANSIENT_SAMPLES as f64 {
                    self.diags.push(
                        Diagnostic::new(
                            ErrorKind::Limit,
                            s,
                            format!(
                                "`interval` asks for {:.3e} samples, more than the limit of {MAX_TRANSIENT_SAMPLES}",
                                stop / dt
                            ),
                        )
                        .with_help("use a larger interval, or leave it out to record the accepted steps (thinned to the limit)"),
                    );
                    return None;
                }
                Some(dt)
            }
        };
        let window = match p.get("window") {
            None => (0.0, stop),
            Some((Raw::Numbers(v), s)) => {
                if v.len() != 2 {
                    self.bad(
                        s,
                        format!("`window` takes two times, found {}", v.len()),
                        "such as `window = [1 ns, 5 ns]`".into(),
                    );
                    return None;
                }
                let a = self.check_dim(v[0].0, Dim::TIME, v[0].1, "window");
                let b = self.check_dim(v[1].0, Dim::TIME, v[1].1, "window");
                let (a, b) = (a?, b?);
                if !(0.0 <= a && a < b && b <= stop) {
                    self.bad(
                        s,
                        format!(
                            "`window` must satisfy 0 <= start < end <= stop, found [{}, {}]",
                            engineering(a, "s"),
                            engineering(b, "s")
                        ),
                        "choose a part of the run, such as `window = [1 ns, 5 ns]`".into(),
                    );
                    return None;
                }
                (a, b)
            }
            Some(_) => return None,
        };
        if !ok {
            return None;
        }
        if nodes.is_empty() && currents.is_empty() {
            self.bad(
                p.header,
                "analysis `transient` records nothing".into(),
                "add `record = [out]` (nodes or node arrays) or `currents = [supply]`".into(),
            );
            return None;
        }
        Some(Analysis::Transient {
            stop,
            nodes,
            currents,
            interval,
            window,
        })
    }
}

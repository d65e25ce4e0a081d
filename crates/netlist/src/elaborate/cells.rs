//! Cells and loops: the statement walk, hierarchical names, pins and ports, repetition.

use super::{Elaborator, Frame, Q};
use crate::ast::*;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;
use crate::units::Dim;
use lamina_engine::{Circuit, NodeId};
use std::collections::HashMap;

impl<'s> Elaborator<'s> {
    pub(super) fn check_cell_body(&mut self, body: &[Stmt]) {
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
                Stmt::Variation { span, .. }
                | Stmt::Correlation { span, .. }
                | Stmt::Limit { span, .. } => self.err(
                    ErrorKind::Expected,
                    *span,
                    "variations and limits belong at the top level, not inside a cell".into(),
                ),
                Stmt::For { body, .. } => self.check_cell_body(body),
                _ => {}
            }
        }
    }

    pub(super) fn body_stmt(&mut self, s: &'s Stmt, frames: &mut Vec<Frame>) {
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
                    self.diags.push(
                        Diagnostic::new(
                            ErrorKind::Limit,
                            *span,
                            format!(
                                "{count} repetitions exceed the limit of {}",
                                self.limits.max_repeat
                            ),
                        )
                        .with_help("check the loop bounds; a design this large needs splitting"),
                    );
                    return;
                }
                let body_cost = self.cost(body);
                let n = count as f64;
                if !self.affordable(n * body_cost, n * (1.0 + body_cost), *span, "this loop") {
                    return;
                }
                let outer = self.multiplier;
                self.multiplier *= count as f64;
                let prefix = frames.last().map(|f| f.prefix.clone()).unwrap_or_default();
                for i in a..b {
                    if !self.tick(*span) {
                        break;
                    }
                    let mut vars = HashMap::new();
                    vars.insert(
                        var.name.clone(),
                        Q {
                            v: i as f64,
                            dim: Dim::NONE,
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
                self.multiplier = outer;
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
            Stmt::Variation { span, .. }
            | Stmt::Correlation { span, .. }
            | Stmt::Limit { span, .. } => self.err(
                ErrorKind::Expected,
                *span,
                "variations and limits belong at the top level, outside loops and cells".into(),
            ),
            Stmt::Cell { .. } | Stmt::Device { .. } | Stmt::Include { .. } => {}
        }
    }

    pub(super) fn index_name(
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

    pub(super) fn node(&mut self, r: &Indexed, frames: &[&Frame]) -> Option<NodeId> {
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

    /// Maps connections to pins in `terminals` order, reporting unknown, doubled and missing pins.
    pub(super) fn connect(
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
                    .with_note(first, "first connected here")
                    .with_help("connect each pin once; remove one of the two"),
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
    pub(super) fn cell_instance(
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
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Limit,
                    span,
                    format!(
                        "cells nested deeper than {} levels (does `{cell}` contain itself?)",
                        self.limits.max_cell_depth
                    ),
                )
                .with_help("a cell cannot place itself, directly or through other cells"),
            );
            return;
        }
        let cost = self.cost(body);
        if !self.affordable(
            cost,
            cost + 1.0,
            span,
            &format!("this instance of `{cell}`"),
        ) {
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
        let given: Vec<bool> = defaults
            .iter()
            .map(|(n, _)| vars.contains_key(&n.name))
            .collect();
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
        for &(n, value) in &defaults {
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
        self.perturb_cell(cell, full, &defaults, &given, name_span, frames);
        self.depth += 1;
        // Inside the cell, only its own frame (plus globals) is visible.
        let mut inner = vec![frames.pop().expect("frame was pushed")];
        for s in body {
            self.body_stmt(s, &mut inner);
        }
        self.depth -= 1;
    }

    /// A Monte Carlo sample's drawn values of the parameters of cell instance `full` (in the
    /// frame on top of `frames`): each changed value replaces the parameter, and a default
    /// the instance did not set is evaluated again, in order, from the changed values, so
    /// `param big = 2 * load` follows a varied `load`.
    fn perturb_cell(
        &mut self,
        cell: &str,
        full: &str,
        defaults: &[(&Ident, &Expr)],
        given: &[bool],
        name_span: Span,
        frames: &mut [Frame],
    ) {
        let (Some(p), Some(frame)) = (self.perturbation.clone(), frames.last()) else {
            return;
        };
        let before: Vec<Option<Q>> = defaults
            .iter()
            .map(|(n, _)| frame.vars.get(&n.name).copied())
            .collect();
        let mut numbers: Vec<f64> = before.iter().map(|q| q.map_or(f64::NAN, |q| q.v)).collect();
        p.0.apply(cell, full, &mut numbers);
        let changed: Vec<bool> = numbers
            .iter()
            .zip(&before)
            .map(|(new, old)| old.is_some_and(|q| q.v.to_bits() != new.to_bits()))
            .collect();
        if !changed.contains(&true) {
            return;
        }
        if let Some((i, _)) = numbers
            .iter()
            .enumerate()
            .find(|&(i, v)| changed[i] && !v.is_finite())
        {
            self.err(
                ErrorKind::BadValue,
                name_span,
                format!(
                    "this sample's variation makes `{}` of `{full}` {:e}",
                    defaults[i].0.name, numbers[i]
                ),
            );
            return;
        }
        for (i, (n, value)) in defaults.iter().enumerate() {
            if changed[i] {
                if let (Some(f), Some(q)) = (frames.last_mut(), before[i]) {
                    f.vars.insert(
                        n.name.clone(),
                        Q {
                            v: numbers[i],
                            dim: q.dim,
                        },
                    );
                }
            } else if !given[i] {
                let q = frames.last().and_then(|f| self.eval(value, &[f]));
                if let (Some(q), Some(f)) = (q, frames.last_mut()) {
                    f.vars.insert(n.name.clone(), q);
                }
            }
        }
    }

    /// A lower bound on the elements `stmts` place: elements count one, cells their own cost,
    /// loops with literal bounds their count times their body (others nothing). Used to refuse
    /// work that cannot fit in the limits before doing any of it.
    pub(super) fn cost(&mut self, stmts: &'s [Stmt]) -> f64 {
        let mut total = 0.0;
        for s in stmts {
            total += match s {
                Stmt::Instance { kind, .. } => match self.cells.get(&kind.name) {
                    Some(&(_, body, _)) => {
                        if let Some(&c) = self.cell_costs.get(&kind.name) {
                            c
                        } else if self.costing.contains(&kind.name) {
                            0.0 // recursion: reported by the depth limit
                        } else {
                            self.costing.push(kind.name.clone());
                            let c = self.cost(body);
                            self.costing.pop();
                            self.cell_costs.insert(kind.name.clone(), c);
                            c
                        }
                    }
                    None => 1.0,
                },
                Stmt::For { from, to, body, .. } => match (from, to) {
                    (Expr::Number { value: a, .. }, Expr::Number { value: b, .. }) => {
                        (b - a).max(0.0) * self.cost(body)
                    }
                    _ => 0.0,
                },
                _ => 0.0,
            };
        }
        total
    }

    /// Whether `elements` more elements and `steps` more steps, repeated by the enclosing
    /// loops, fit in the element and work limits; reports at `span` if not.
    pub(super) fn affordable(&mut self, elements: f64, steps: f64, span: Span, what: &str) -> bool {
        let (elements, steps) = (elements * self.multiplier, steps * self.multiplier);
        let room_work = self.limits.max_work.saturating_sub(self.work) as f64;
        let room_elements = self.limits.max_elements.saturating_sub(self.created) as f64;
        if steps <= room_work && elements <= room_elements {
            return true;
        }
        let projected = elements.max(steps);
        self.diags.push(
            Diagnostic::new(
                ErrorKind::Limit,
                span,
                format!(
                    "{what} would place at least {projected:.3e} elements and steps (counting \
                     through enclosing loops and nested cells), more than the limits of {} \
                     elements and {} steps",
                    self.limits.max_elements, self.limits.max_work
                ),
            )
            .with_help("check the loop bounds and how often each cell places the next"),
        );
        // Stop elaborating: everything after would be cut short anyway.
        self.work = self.limits.max_work + 2;
        false
    }
}

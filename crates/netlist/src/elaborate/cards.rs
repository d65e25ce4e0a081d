//! Device cards and element instances: parameters checked against the catalog, cards applied,
//! elements built and added to the circuit.

use super::{DeviceCard, Elaborator, Frame, Q};
use crate::ast::*;
use crate::catalog::{self, Kind, Values};
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;
use lamina_engine::CircuitError;
use std::collections::HashMap;

impl<'s> Elaborator<'s> {
    pub(super) fn device_card(
        &mut self,
        name: &Ident,
        model: &Ident,
        params: &[Assign],
        top: &Frame,
    ) {
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
    pub(super) fn text_value(&mut self, key: &Ident, e: &Expr) -> Option<String> {
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

    pub(super) fn unknown_param(&mut self, name: &Ident, kind: &Kind) {
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

    pub(super) fn instance(
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
}

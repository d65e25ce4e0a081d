//! Device cards and element instances: parameters checked against the catalog where they are
//! written, cards checked once at their own line, elements built and added to the circuit.

use super::{Elaborator, Frame};
use crate::ast::*;
use crate::catalog::{self, BuildError, CardOrigins, Kind, Values};
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;
use lamina_engine::elements::Waveform;
use lamina_engine::CircuitError;

/// Parameter values written in one place (a device card or an instance), each checked against
/// its kind's dimension and sign where it is written.
#[derive(Clone, Default)]
pub(super) struct Given {
    numbers: Vec<(&'static str, f64, Span)>,
    texts: Vec<(&'static str, String, Span)>,
    waveform: Option<(Waveform, Span)>,
    /// Whether every value was good.
    ok: bool,
}

impl Given {
    fn is_empty(&self) -> bool {
        self.numbers.is_empty() && self.texts.is_empty() && self.waveform.is_none()
    }

    pub(super) fn span_of(&self, name: &str) -> Option<Span> {
        self.numbers
            .iter()
            .find(|n| n.0 == name)
            .map(|n| n.2)
            .or_else(|| self.texts.iter().find(|t| t.0 == name).map(|t| t.2))
            .or_else(|| {
                self.waveform
                    .as_ref()
                    .filter(|_| name == "wave")
                    .map(|w| w.1)
            })
    }
}

/// A device card: its kind, its checked values, and whether it is bad.
pub(super) struct DeviceCard {
    pub(super) kind: &'static Kind,
    pub(super) values: Given,
    name_span: Span,
    /// The card's own error in `diags`, if it has one; instances of a bad card add nothing but
    /// a note on it.
    error: Option<usize>,
    /// Whether an instance has been noted on the card's error.
    noted: bool,
    /// Keys set from the command line (`--set card.key=value`).
    command_line: Vec<String>,
}

impl<'s> Elaborator<'s> {
    pub(super) fn device_card(
        &mut self,
        name: &Ident,
        model: &Ident,
        params: &[Assign],
        top: &Frame,
        command_line: Vec<String>,
    ) {
        if self.devices.contains_key(&name.name)
            || catalog::kind(&name.name).is_some()
            || self.cells.contains_key(&name.name)
        {
            let what = if catalog::kind(&name.name).is_some() {
                "an element kind"
            } else if self.cells.contains_key(&name.name) {
                "a cell"
            } else {
                "a device card"
            };
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Duplicate,
                    name.span,
                    format!("`{}` is already {what}", name.name),
                )
                .with_help(
                    "device cards, cells and element kinds share one set of names: rename the card",
                ),
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
        let errors_before = self.diags.len();
        let values = self.given(kind, params, &[top]);
        let mut error = (self.diags.len() > errors_before).then_some(errors_before);
        // A card that could make an element is checked now, so its faults are reported once.
        if values.ok {
            if let (Some(check), Some(v)) = (kind.check, assemble(kind, None, &values)) {
                if let Err(e) = check(&v) {
                    error = Some(self.diags.len());
                    self.build_error(e, None, &values, name.span, None);
                } else {
                    self.note_plausibility(kind, &v, &values, name.span);
                }
            }
        }
        self.summary.devices.push(name.name.clone());
        self.devices.insert(
            name.name.clone(),
            DeviceCard {
                kind,
                values,
                name_span: name.span,
                error,
                noted: false,
                command_line,
            },
        );
    }

    /// Evaluates and checks `params` against `k`: known, unrepeated, of the right dimension and
    /// sign. Each fault is reported at the value.
    fn given(&mut self, k: &'static Kind, params: &[Assign], frames: &[&Frame]) -> Given {
        let mut g = Given {
            ok: true,
            ..Given::default()
        };
        let mut seen: Vec<(&str, Span)> = Vec::new();
        for a in params {
            let Some(spec) = k.params.iter().find(|p| p.name == a.name.name) else {
                self.unknown_param(&a.name, k);
                g.ok = false;
                continue;
            };
            if let Some(&(_, first)) = seen.iter().find(|(n, _)| *n == spec.name) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Duplicate,
                        a.name.span,
                        format!("`{}` is set twice", spec.name),
                    )
                    .with_note(first, "first set here")
                    .with_help("keep one of the two; neither silently wins"),
                );
                g.ok = false;
                continue;
            }
            seen.push((spec.name, a.name.span));
            let at = a.value.span();
            if spec.text {
                match self.text_value(&a.name, &a.value) {
                    Some(t) => g.texts.push((spec.name, t, at)),
                    None => g.ok = false,
                }
                continue;
            }
            if spec.waveform {
                match self.waveform(&a.value, spec.dim, frames) {
                    Some(w) => g.waveform = Some((w, at)),
                    None => g.ok = false,
                }
                continue;
            }
            let Some(q) = self.eval(&a.value, frames) else {
                g.ok = false;
                continue;
            };
            let Some(v) = self.check_dim(q, spec.dim, at, spec.name) else {
                g.ok = false;
                continue;
            };
            if spec.positive && (v.is_nan() || v <= 0.0) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::BadValue,
                        at,
                        format!("`{}` must be positive, found {v:e}", spec.name),
                    )
                    .with_help(format!(
                        "such as `{} = {}`",
                        spec.name,
                        spec.dim.example()
                    )),
                );
                g.ok = false;
                continue;
            }
            if spec.dim == crate::units::Dim::VOLTAGE {
                self.max_voltage = self.max_voltage.max(v.abs());
            }
            g.numbers.push((spec.name, v, at));
        }
        g
    }

    /// Records the resolved card of a 2D-FET element; instances that change nothing share their
    /// device card's.
    fn keep_sheet_card(
        &mut self,
        element: usize,
        card: &str,
        inst: &Given,
        v: &Values,
        perturbed: bool,
    ) {
        let unchanged = inst.is_empty() && !perturbed;
        let cached = unchanged
            .then(|| self.card_cache.get(card).cloned())
            .flatten();
        let resolved = match cached {
            Some(c) => c,
            None => match catalog::sheet_card(v) {
                Ok(c) => {
                    let from_command_line = self
                        .devices
                        .get(card)
                        .map(|c| c.command_line.clone())
                        .unwrap_or_default();
                    let origins = CardOrigins::new(
                        card,
                        v,
                        |p| inst.span_of(p).is_some(),
                        |p| from_command_line.iter().any(|k| k == p),
                    );
                    let c = (std::sync::Arc::new(c), std::sync::Arc::new(origins));
                    if unchanged {
                        self.card_cache.insert(card.to_string(), c.clone());
                    }
                    c
                }
                Err(_) => return,
            },
        };
        self.sheet_cards.insert(element, resolved);
    }

    /// Keeps a sheet-FET card for the plausibility check at the end (when the largest voltage
    /// in the design is known); `given` locates its values, `at` is where it is defined.
    fn note_plausibility(&mut self, k: &'static Kind, v: &Values, given: &Given, at: Span) {
        if k.name != "sheet_fet" || self.plausible.iter().any(|p| p.2 == at) {
            return;
        }
        if let Ok(card) = catalog::sheet_card(v) {
            self.plausible.push((card, given.clone(), at));
        }
    }

    /// Warns, once per place, about sheet-FET values far outside what the model covers.
    pub(super) fn plausibility_warnings(&mut self) {
        let vmax = (self.max_voltage > 0.0).then_some(self.max_voltage);
        for (card, given, at) in std::mem::take(&mut self.plausible) {
            for w in lamina_devices::warnings::plausibility(&card, vmax) {
                let span = given.span_of(w.parameter).unwrap_or(at);
                self.warns.push(
                    Diagnostic::new(ErrorKind::Implausible, span, w.to_string()).with_help(
                        "a model estimate there is unreliable: check the value and its unit",
                    ),
                );
            }
        }
    }

    /// Reports a build error at the parameter it names: where the instance set it, else where
    /// the card set it, else at `fallback`; `note` points at the other place involved.
    fn build_error(
        &mut self,
        e: BuildError,
        inst: Option<&Given>,
        card: &Given,
        fallback: Span,
        note: Option<(Span, String)>,
    ) {
        let at = e
            .param
            .as_deref()
            .and_then(|p| inst.and_then(|g| g.span_of(p)).or_else(|| card.span_of(p)))
            .unwrap_or(fallback);
        let mut d = Diagnostic::new(ErrorKind::BadValue, at, e.message);
        if let Some((s, n)) = note {
            d = d.with_note(s, n);
        }
        let help = e.help.or_else(|| {
            // A library name's message carries its own suggestion and the known names.
            (!d.message.contains("did you mean") && !d.message.contains("library"))
                .then(|| "check this value against the model's documented range".into())
        });
        if let Some(h) = help {
            d = d.with_help(h);
        }
        self.diags.push(d);
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
        if !self.tick(span) {
            return;
        }
        let refs: Vec<&Frame> = frames.iter().collect();
        let Some(local) = self.index_name(&name.name.name, &name.index, &refs) else {
            return;
        };
        let prefix = frames.last().map(|f| f.prefix.clone()).unwrap_or_default();
        let full = format!("{prefix}{local}");
        if !self.placed_by.contains(&kind.name) {
            self.placed_by.insert(kind.name.clone());
        }
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
        let k: &'static Kind = if let Some(card) = self.devices.get(&kind.name) {
            card.kind
        } else if let Some(k) = catalog::kind(&kind.name) {
            k
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
        let pins = self.connect(k.terminals, k.name, connections, span, &refs);
        let inst = self.given(k, params, &refs);
        // A card key set from the command line does not reach an instance that sets it itself:
        // say so, or a sweep of it would silently stay flat for this instance.
        if let Some(card) = self.devices.get(&kind.name) {
            for key in &card.command_line {
                if let Some(at) = inst.span_of(key) {
                    self.warns.push(
                        Diagnostic::new(
                            ErrorKind::Duplicate,
                            at,
                            format!(
                                "`{full}` sets `{key}` itself, so `--set/--param {}.{key}` does not reach it",
                                kind.name
                            ),
                        )
                        .with_help("remove the instance's value to let the command line set it"),
                    );
                }
            }
        }
        // A bad card was reported at its own line: note the first instance there, add nothing.
        if let Some(card) = self.devices.get_mut(&kind.name) {
            if let Some(i) = card.error {
                if !card.noted {
                    card.noted = true;
                    if let Some(d) = self.diags.get_mut(i) {
                        d.notes
                            .push((name.name.span, format!("card used by `{full}`")));
                    }
                }
                return;
            }
        }
        let (Some(pins), true) = (pins, inst.ok) else {
            return;
        };
        let card = self
            .devices
            .get(&kind.name)
            .map(|c| (c.values.clone(), c.name_span));
        let empty = Given::default();
        let card_values = card.as_ref().map_or(&empty, |c| &c.0);
        let Some(mut values) = assemble(k, card.as_ref().map(|c| &c.0), &inst) else {
            let missing: Vec<&str> = k
                .params
                .iter()
                .filter(|p| p.default.is_none() && !p.waveform && !p.text)
                .filter(|p| inst.span_of(p.name).is_none() && card_values.span_of(p.name).is_none())
                .map(|p| p.name)
                .collect();
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Unconnected,
                    span,
                    format!(
                        "`{}` needs a value for `{}`",
                        kind.name,
                        missing.join("`, `")
                    ),
                )
                .with_help(format!(
                    "add `{{ {} = {} }}` after the connections",
                    missing.first().copied().unwrap_or(""),
                    k.params
                        .iter()
                        .find(|p| Some(&p.name) == missing.first())
                        .map_or("...".into(), |p| p.dim.example())
                )),
            );
            return;
        };
        // A Monte Carlo sample puts its drawn values into the devices of varied cards and
        // kinds (named by the card, or by the kind for an element placed without one).
        let mut changed = Vec::new();
        if let Some(p) = &self.perturbation {
            let before = values.numbers.clone();
            p.0.apply(&kind.name, &full, &mut values.numbers);
            for (i, (new, old)) in values.numbers.iter().zip(&before).enumerate() {
                if new.to_bits() != old.to_bits() {
                    values.given[i] = true;
                    changed.push(i);
                }
            }
        }
        let perturbed = !changed.is_empty();
        // A drawn value must stay finite and keep the sign rule its key has where written.
        let bad = changed
            .iter()
            .map(|&i| (&k.params[i], values.numbers[i]))
            .find(|(p, v)| !v.is_finite() || p.positive && *v <= 0.0);
        if let Some((p, v)) = bad {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::BadValue,
                    name.name.span,
                    format!(
                        "this sample's variation makes `{}` of `{full}` {v:e}, outside its \
                         range{}",
                        p.name,
                        if p.positive {
                            " (it must be positive)"
                        } else {
                            ""
                        }
                    ),
                )
                .with_help(
                    "a normal spread reaches any value: use `log_normal` for a quantity \
                     that must stay positive, or `truncated_normal` with a bound below the \
                     nominal value",
                ),
            );
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
        let element = match (k.build)(&values) {
            Ok(e) => {
                if !inst.is_empty() || card.is_none() {
                    self.note_plausibility(k, &values, &inst, name.name.span);
                }
                e
            }
            Err(e) => {
                // A fault from the instance's own values is reported there; one the card
                // alone causes (found only when building) at the card, once.
                let note = card
                    .as_ref()
                    .map(|(_, s)| (*s, "device card defined here".to_string()));
                let fallback = match (&card, inst.is_empty()) {
                    (Some((_, s)), true) => *s,
                    _ => name.name.span,
                };
                self.build_error(e, Some(&inst), card_values, fallback, note);
                return;
            }
        };
        match self.circuit.add_boxed(&full, element, &pins) {
            Ok(id) => {
                if k.name == "sheet_fet" {
                    self.keep_sheet_card(id.index(), &kind.name, &inst, &values, perturbed);
                }
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
                self.diags.push(
                    d.with_help("rename one of the two; element names are unique in their cell"),
                );
            }
            Err(e) => self.err(ErrorKind::BadValue, span, e.to_string()),
        }
    }
}

/// The values a builder sees: the instance's over the card's over the kind's defaults; `None`
/// if a required value is missing.
fn assemble(k: &'static Kind, card: Option<&Given>, inst: &Given) -> Option<Values> {
    let mut numbers = Vec::with_capacity(k.params.len());
    let mut given = Vec::with_capacity(k.params.len());
    let mut texts = Vec::with_capacity(k.params.len());
    let layers = [Some(inst), card];
    for spec in k.params {
        let text = layers
            .iter()
            .flatten()
            .find_map(|g| g.texts.iter().find(|t| t.0 == spec.name))
            .map(|t| t.1.clone());
        texts.push(text);
        if spec.waveform || spec.text {
            numbers.push(f64::NAN);
            given.push(false);
            continue;
        }
        match layers
            .iter()
            .flatten()
            .find_map(|g| g.numbers.iter().find(|n| n.0 == spec.name))
        {
            Some(n) => {
                numbers.push(n.1);
                given.push(true);
            }
            None => {
                numbers.push(spec.default?);
                given.push(false);
            }
        }
    }
    let waveform = layers
        .iter()
        .flatten()
        .find_map(|g| g.waveform.as_ref())
        .map(|w| w.0.clone());
    Some(Values {
        numbers,
        given,
        texts,
        waveform,
    })
}

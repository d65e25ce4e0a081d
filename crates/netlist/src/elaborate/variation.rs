//! Declared variation: spreads of numeric parameters of device cards, of cells and of element
//! kinds placed directly, their scope (one draw per sample shared by every device of a card,
//! instance of a cell or element of a kind, or one per device or instance), area scaling of
//! per-device spreads, and correlations between the parameters of one target. This module only reads and checks the
//! declarations into typed [`Variations`]; it draws no random numbers. A caller that samples
//! them hands its values back through a [`Perturbation`] when it loads the design again.
//!
//! ```text
//! variation n2d.gate_work_function { distribution = normal(sigma = 20 meV), scope = global }
//! variation n2d.gate_work_function { distribution = normal(sigma = 10 meV), scope = local,
//!                                    reference_area = 1 um^2 }
//! variation n2d.electron_mobility { distribution = log_normal(sigma = 0.1), scope = local }
//! correlation n2d { keys = [gate_work_function, electron_mobility], coefficient = -0.5,
//!                   scope = local }
//! ```
//!
//! How a draw changes a value: `normal`, `uniform` and `truncated_normal` add an offset with
//! the key's dimension to the nominal value; `log_normal` multiplies it by `exp(sigma z)`,
//! `z` standard normal, so `sigma` is the standard deviation of the logarithm (a pure
//! number; 0.1 is close to a 10 % spread). Global and local declarations of one key apply in
//! turn. Area scaling makes a local spread `sigma_ref sqrt(A_ref / (W L))` with the device's
//! own `width` and `length` (Pelgrom, Duinmaijer and Welbers, "Matching properties of MOS
//! transistors", IEEE J. Solid-State Circuits 24, 1433 (1989)). Correlations are between the
//! standard normal variables behind each draw (a Gaussian copula), so a uniform or truncated
//! spread keeps its own shape.

use super::{Elaborator, Frame};
use crate::ast::*;
use crate::catalog;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;
use crate::units::Dim;
use std::collections::HashMap;
use std::sync::Arc;

/// The shape of a spread.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Distribution {
    /// An offset `sigma z`, `z` standard normal (`sigma` in the key's unit).
    Normal {
        /// Standard deviation, SI.
        sigma: f64,
    },
    /// A factor `exp(sigma z)`: the value stays positive.
    LogNormal {
        /// Standard deviation of the natural logarithm of the value.
        sigma: f64,
    },
    /// An offset uniform on `[-half_width, half_width]`.
    Uniform {
        /// Half the width of the interval, SI.
        half_width: f64,
    },
    /// A normal offset cut to `[-bound, bound]` (drawn by the inverse of the truncated
    /// distribution function, never by rejection).
    TruncatedNormal {
        /// Standard deviation of the normal before truncation, SI.
        sigma: f64,
        /// Largest offset either way, SI.
        bound: f64,
    },
}

/// Whether a draw is shared by every device of a card in one sample, or made per device.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Scope {
    /// One draw per sample for all devices of the card (process, wafer to wafer).
    Global,
    /// One draw per device (mismatch).
    Local,
}

impl Scope {
    /// `global` or `local`.
    pub fn name(self) -> &'static str {
        match self {
            Scope::Global => "global",
            Scope::Local => "local",
        }
    }
}

/// Pelgrom area scaling of a local spread.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct AreaScaling {
    /// The gate area at which the declared spread holds, m^2.
    pub reference_area: f64,
    /// Position of `width` among the kind's parameters.
    pub width: usize,
    /// Position of `length` among the kind's parameters.
    pub length: usize,
}

/// What the first name of `variation NAME.key` designates.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Target {
    /// A device card: `key` of every device made from it.
    Card,
    /// A cell: its parameter `key` in each instance of the cell (the instance's value or the
    /// default), before the cell's later defaults are evaluated from it.
    Cell,
    /// An element kind: `key` of its instances placed by kind, not through a device card.
    Kind,
}

/// A parameter a target offers to vary.
struct Offered {
    name: String,
    /// Its dimension; `None` for text, waveforms and a cell parameter whose default does
    /// not evaluate.
    dim: Option<Dim>,
    /// Whether every device has a value to centre the spread on.
    centre: bool,
}

/// One declared spread of one parameter of one target.
#[derive(Clone, Debug, PartialEq)]
pub struct Variation {
    /// The device card, cell or element kind.
    pub card: String,
    /// What `card` names.
    pub target: Target,
    /// The key that varies.
    pub key: String,
    /// Position of the key among the target's parameters (a kind's in catalog order, a
    /// cell's in declaration order): the index into [`Perturbation::apply`]'s `numbers`.
    pub key_index: usize,
    /// The key's dimension.
    pub dim: Dim,
    /// The spread.
    pub distribution: Distribution,
    /// Its scope.
    pub scope: Scope,
    /// Area scaling, for a local spread that states a reference area.
    pub area: Option<AreaScaling>,
    /// Where it is declared.
    pub span: Span,
}

/// The varied keys of one card in one scope, drawn together: `members` index
/// [`Variations::list`], `cholesky` is the lower-triangular factor `L` of their correlation
/// matrix (`L L^T = R`; the identity where nothing is correlated).
#[derive(Clone, Debug, PartialEq)]
pub struct Group {
    /// The device card.
    pub card: String,
    /// The scope.
    pub scope: Scope,
    /// Declarations drawn together, in declaration order.
    pub members: Vec<usize>,
    /// Correlation matrix, row-major, `members.len()` square.
    pub correlation: Vec<Vec<f64>>,
    /// Its Cholesky factor.
    pub cholesky: Vec<Vec<f64>>,
}

/// A specification limit a design declares: `limit transfer.snm_v { above = 0.1 V }`. The
/// figure must be above `above` and below `below` (at least one is given), in SI units.
#[derive(Clone, Debug, PartialEq)]
pub struct Limit {
    /// The figure's key, `analysis.figure` as the reports name it (`transfer.snm_v`).
    pub figure: String,
    /// Lower limit (the figure must exceed it).
    pub above: Option<f64>,
    /// Upper limit (the figure must stay below it).
    pub below: Option<f64>,
    /// Where it is declared.
    pub span: Span,
}

/// Every spread a design declares.
#[derive(Clone, Debug, PartialEq, Default)]
pub struct Variations {
    /// Declarations in file order.
    pub list: Vec<Variation>,
    /// Declarations grouped by card and scope, in order of first declaration.
    pub groups: Vec<Group>,
}

impl Variations {
    /// Whether the design declares no spread.
    pub fn is_empty(&self) -> bool {
        self.list.is_empty()
    }
}

/// Values a caller puts into the design when it is loaded: called for every element before it
/// is built (with its card's name, or its kind's when placed without a card) and for every
/// cell instance once its parameters are known (with the cell's name). A value it changes
/// counts as given (it overrides the library and the kind's default); a changed cell
/// parameter is seen by the cell's later defaults.
pub trait Perturbation: Send + Sync {
    /// Changes `numbers` (SI) of `device` (its hierarchical name, such as
    /// `inv[2].pull_down`, or a cell instance's, such as `inv[2]`) made from `card` (a device
    /// card, an element kind or a cell): an element's parameters in catalog order with the
    /// card's and the instance's values merged, or a cell's parameters in declaration order.
    fn apply(&self, card: &str, device: &str, numbers: &mut [f64]);
}

/// A shared [`Perturbation`] in [`super::LoadOptions`].
#[derive(Clone)]
pub struct Perturb(pub Arc<dyn Perturbation>);

impl std::fmt::Debug for Perturb {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("Perturb(..)")
    }
}

/// The distributions and their named arguments (all required).
const DISTRIBUTIONS: &[(&str, &[&str])] = &[
    ("normal", &["sigma"]),
    ("log_normal", &["sigma"]),
    ("uniform", &["half_width"]),
    ("truncated_normal", &["sigma", "bound"]),
];

impl<'s> Elaborator<'s> {
    /// Reads every top-level `limit`: settings `above` and `below` (one at least), each of the
    /// dimension the figure's unit suffix names (`_v` a voltage, `_hz` a frequency, none a pure
    /// number), `above < below` when both are given.
    pub(super) fn limits(&mut self, stmts: &[Stmt], top: &Frame) {
        for s in stmts {
            let Stmt::Limit {
                analysis,
                figure,
                params,
                span,
            } = s
            else {
                continue;
            };
            let key = format!("{}.{}", analysis.name, figure.name);
            let want = crate::units::figure_dim(&figure.name);
            let mut limit = Limit {
                figure: key.clone(),
                above: None,
                below: None,
                span: *span,
            };
            let mut ok = self.settings_once(params);
            for a in params {
                let slot = match a.name.name.as_str() {
                    "above" => &mut limit.above,
                    "below" => &mut limit.below,
                    other => {
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::Unknown,
                                a.name.span,
                                format!("a limit has no setting `{other}`"),
                            )
                            .with_help("its settings are `above` and `below`"),
                        );
                        ok = false;
                        continue;
                    }
                };
                let Some(q) = self.eval(&a.value, &[top]) else {
                    ok = false;
                    continue;
                };
                if q.dim != want && !(q.v == 0.0 && q.dim == Dim::NONE) {
                    self.diags.push(
                        Diagnostic::new(
                            if q.dim == Dim::NONE {
                                ErrorKind::MissingUnit
                            } else {
                                ErrorKind::UnitMismatch
                            },
                            a.value.span(),
                            format!(
                                "`{key}` is {} (its unit suffix says so), but this limit is {}",
                                want.describe(),
                                q.dim.describe()
                            ),
                        )
                        .with_help(format!(
                            "such as `{} = {}`",
                            a.name.name,
                            want.example()
                        )),
                    );
                    ok = false;
                    continue;
                }
                *slot = Some(q.v);
            }
            if !ok {
                continue;
            }
            match (limit.above, limit.below) {
                (None, None) => self.err(
                    ErrorKind::BadValue,
                    *span,
                    format!("the limit on `{key}` needs `above`, `below` or both"),
                ),
                (Some(a), Some(b)) if a >= b => self.err(
                    ErrorKind::BadValue,
                    *span,
                    format!("the limit on `{key}` is empty: `above` must be less than `below`"),
                ),
                _ => self.declared_limits.push(limit),
            }
        }
    }

    /// Reads every top-level `variation` and `correlation` against the device cards.
    pub(super) fn variations(&mut self, stmts: &[Stmt], top: &Frame) {
        let mut out = Variations::default();
        let mut correlations = Vec::new();
        for s in stmts {
            match s {
                Stmt::Variation {
                    card,
                    key,
                    params,
                    span,
                } => {
                    if let Some(v) = self.variation(card, key, params, *span, top, &out) {
                        out.list.push(v);
                    }
                }
                Stmt::Correlation { card, params, span } => {
                    correlations.push((card, params, *span))
                }
                _ => {}
            }
        }
        // One warning per target that nothing is made from, at its first declaration.
        for (i, v) in out.list.iter().enumerate() {
            let first = out.list.iter().position(|w| w.card == v.card) == Some(i);
            if first && !self.placed_by.contains(&v.card) {
                let what = match v.target {
                    Target::Card => "no device is made from card",
                    Target::Cell => "no instance of cell",
                    Target::Kind => "no element is placed directly as",
                };
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    v.span,
                    format!(
                        "the variations of `{}` change nothing: {what} `{}`",
                        v.card, v.card
                    ),
                );
                if v.target == Target::Kind {
                    d = d.with_help(
                        "devices made from a device card vary through `variation card.key`",
                    );
                }
                self.warns.push(d);
            }
        }
        for v in 0..out.list.len() {
            let (card, scope) = (&out.list[v].card, out.list[v].scope);
            match out
                .groups
                .iter_mut()
                .find(|g| g.card == *card && g.scope == scope)
            {
                Some(g) => g.members.push(v),
                None => out.groups.push(Group {
                    card: card.clone(),
                    scope,
                    members: vec![v],
                    correlation: Vec::new(),
                    cholesky: Vec::new(),
                }),
            }
        }
        let mut placed: Vec<Vec<(Span, usize, usize)>> = Vec::new();
        for g in &mut out.groups {
            let n = g.members.len();
            g.correlation = (0..n)
                .map(|i| (0..n).map(|j| if i == j { 1.0 } else { 0.0 }).collect())
                .collect();
            placed.push(Vec::new());
        }
        for (card, params, span) in correlations {
            self.correlation(card, params, span, top, &mut out, &mut placed);
        }
        for (g, spans) in out.groups.iter_mut().zip(&placed) {
            match (cholesky(&g.correlation), spans.last()) {
                (Some(l), _) => g.cholesky = l,
                (None, None) => {}
                (None, Some(&(at, _, _))) => {
                    let mut d = Diagnostic::new(
                        ErrorKind::BadValue,
                        at,
                        format!(
                            "the {} correlations of card `{}` do not form a valid correlation \
                             matrix (it is not positive definite)",
                            g.scope.name(),
                            g.card
                        ),
                    )
                    .with_help(
                        "coefficients of three or more keys must be consistent: with `a` and \
                         `b` strongly correlated, `c` cannot be strongly correlated with one and \
                         anticorrelated with the other; weaken one of them",
                    );
                    for s in &spans[..spans.len().saturating_sub(1)] {
                        d = d.with_note(s.0, "correlation of the same card and scope");
                    }
                    self.diags.push(d);
                }
            }
        }
        self.declared_variations = out;
    }

    /// What the first name of a `variation` or `correlation` designates and the parameters
    /// it offers, or an error at the name. Cards, cells and element kinds share one namespace
    /// (a cell or card named like another is refused where it is defined).
    fn varied_target(&mut self, target: &Ident) -> Option<(Target, Vec<Offered>)> {
        if let Some(c) = self.devices.get(&target.name) {
            let values = &c.values;
            let offered = c
                .kind
                .params
                .iter()
                .map(|p| Offered {
                    name: p.name.to_string(),
                    dim: (!p.text && !p.waveform).then_some(p.dim),
                    centre: values.span_of(p.name).is_some()
                        || p.default.is_some_and(f64::is_finite),
                })
                .collect();
            return Some((Target::Card, offered));
        }
        if let Some(&(_, body, _)) = self.cells.get(&target.name) {
            // Each parameter's dimension, from its default evaluated as an instance would
            // (top-level parameters and the cell's earlier ones); errors in a default are
            // reported where an instance evaluates it, not here.
            let before = self.diags.len();
            let mut frame = Frame {
                vars: HashMap::new(),
                ports: HashMap::new(),
                prefix: String::new(),
            };
            let mut offered = Vec::new();
            for s in body {
                if let Stmt::Param { name, value } = s {
                    let q = self.eval(value, &[&frame]);
                    if let Some(q) = q {
                        frame.vars.insert(name.name.clone(), q);
                    }
                    offered.push(Offered {
                        name: name.name.clone(),
                        dim: q.map(|q| q.dim),
                        centre: true,
                    });
                }
            }
            self.diags.truncate(before);
            return Some((Target::Cell, offered));
        }
        if let Some(k) = catalog::kind(&target.name) {
            let offered = k
                .params
                .iter()
                .map(|p| Offered {
                    name: p.name.to_string(),
                    dim: (!p.text && !p.waveform).then_some(p.dim),
                    // A required key is set on every instance; an optional one without a
                    // default may be absent, and a spread of it would have no centre.
                    centre: p.default.is_none_or(f64::is_finite),
                })
                .collect();
            return Some((Target::Kind, offered));
        }
        let mut names: Vec<&str> = self.devices.keys().map(String::as_str).collect();
        names.extend(self.cells.keys().map(String::as_str));
        names.sort_unstable();
        let help = match did_you_mean(&target.name, names.iter().copied()) {
            Some(h) => h,
            None if names.is_empty() => "spreads belong to keys of device cards, parameters \
                                         of cells and parameters of element kinds such as \
                                         `capacitor.capacitance`"
                .into(),
            None => format!("its device cards and cells are: {}", names.join(", ")),
        };
        self.diags.push(
            Diagnostic::new(
                ErrorKind::Unknown,
                target.span,
                format!("no device card, cell or element kind `{}`", target.name),
            )
            .with_help(help),
        );
        None
    }

    fn variation(
        &mut self,
        card: &Ident,
        key: &Ident,
        params: &[Assign],
        span: Span,
        top: &Frame,
        so_far: &Variations,
    ) -> Option<Variation> {
        let (target, offered) = self.varied_target(card)?;
        let Some(key_index) = offered.iter().position(|p| p.name == key.name) else {
            let names: Vec<&str> = offered.iter().map(|p| p.name.as_str()).collect();
            let what = match target {
                Target::Cell => "cell",
                Target::Card => "device card",
                Target::Kind => "element kind",
            };
            let help = match did_you_mean(&key.name, names.iter().copied()) {
                Some(h) => h,
                None if names.is_empty() => format!("`{}` has no parameters", card.name),
                None => format!("its parameters are: {}", names.join(", ")),
            };
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Unknown,
                    key.span,
                    format!("{what} `{}` has no parameter `{}`", card.name, key.name),
                )
                .with_help(help),
            );
            return None;
        };
        let spec = &offered[key_index];
        let Some(dim) = spec.dim else {
            self.err(
                ErrorKind::BadValue,
                key.span,
                format!(
                    "`{}` is not a number and cannot vary; spreads apply to numeric keys",
                    key.name
                ),
            );
            return None;
        };
        if !spec.centre {
            let (message, help) = match target {
                Target::Card => (
                    format!(
                        "card `{}` does not set `{}`, so its spread has no centre",
                        card.name, key.name
                    ),
                    format!(
                        "write the nominal value on the card, such as `{} = {}`",
                        key.name,
                        dim.example()
                    ),
                ),
                _ => (
                    format!(
                        "`{}` has no default, so instances that leave it out give its spread \
                         no centre",
                        key.name
                    ),
                    format!(
                        "set it on a device card and vary `card.{}` instead",
                        key.name
                    ),
                ),
            };
            self.diags
                .push(Diagnostic::new(ErrorKind::BadValue, key.span, message).with_help(help));
            return None;
        }
        let mut distribution = None;
        let mut scope = None;
        let mut area = None;
        let mut ok = self.settings_once(params);
        for a in params {
            match a.name.name.as_str() {
                "distribution" => distribution = self.distribution(&a.value, dim, top),
                "scope" => match &a.value {
                    Expr::Name(id) if id.name == "global" => scope = Some(Scope::Global),
                    Expr::Name(id) if id.name == "local" => scope = Some(Scope::Local),
                    other => {
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::BadValue,
                                other.span(),
                                "`scope` is `global` (one draw per sample for every device of \
                                 the card) or `local` (one draw per device)"
                                    .to_string(),
                            )
                            .with_help("write `scope = global` or `scope = local`"),
                        );
                        ok = false;
                    }
                },
                "reference_area" => {
                    let q = self.eval(&a.value, &[top])?;
                    let v = self.check_dim(q, Dim::AREA, a.value.span(), "reference_area")?;
                    if !(v > 0.0 && v.is_finite()) {
                        self.err(
                            ErrorKind::BadValue,
                            a.value.span(),
                            format!("`reference_area` must be positive, found {v:e}"),
                        );
                        return None;
                    }
                    let pos = |n: &str| offered.iter().position(|p| p.name == n);
                    match (pos("width"), pos("length")) {
                        (Some(width), Some(length)) => {
                            area = Some((
                                AreaScaling {
                                    reference_area: v,
                                    width,
                                    length,
                                },
                                a.name.span,
                            ))
                        }
                        _ => {
                            self.err(
                                ErrorKind::BadValue,
                                a.name.span,
                                format!(
                                    "`{}` has no `width` and `length`, so a spread cannot scale \
                                     with its area; remove `reference_area`",
                                    card.name
                                ),
                            );
                            return None;
                        }
                    }
                }
                other => {
                    let mut d = Diagnostic::new(
                        ErrorKind::Unknown,
                        a.name.span,
                        format!("a variation has no setting `{other}`"),
                    );
                    d = d.with_help(
                        did_you_mean(other, ["distribution", "scope", "reference_area"])
                            .unwrap_or_else(|| {
                                "its settings are: distribution, scope, reference_area".into()
                            }),
                    );
                    self.diags.push(d);
                    ok = false;
                }
            }
        }
        // A setting that is absent (not one that was written and refused) is reported here.
        let written = |n: &str| params.iter().any(|a| a.name.name == n);
        for (name, example) in [
            ("distribution", "distribution = normal(sigma = ...)"),
            ("scope", "scope = global"),
        ] {
            if ok && !written(name) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Expected,
                        span,
                        format!("this variation needs `{name}`"),
                    )
                    .with_help(format!("add `{example}` inside the braces")),
                );
                ok = false;
            }
        }
        let (Some(distribution), Some(scope), true) = (distribution, scope, ok) else {
            return None;
        };
        if let (Some((_, at)), Scope::Global) = (area, scope) {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::BadValue,
                    at,
                    "a global spread is shared by every device, so it does not scale with area"
                        .to_string(),
                )
                .with_help("use `reference_area` with `scope = local`"),
            );
            return None;
        }
        if let Some(first) = so_far
            .list
            .iter()
            .find(|v| v.card == card.name && v.key == key.name && v.scope == scope)
        {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Duplicate,
                    span,
                    format!(
                        "`{}.{}` already has a {} variation",
                        card.name,
                        key.name,
                        scope.name()
                    ),
                )
                .with_note(first.span, "declared here")
                .with_help("one global and one local declaration per key at most"),
            );
            return None;
        }
        Some(Variation {
            card: card.name.clone(),
            target,
            key: key.name.clone(),
            key_index,
            dim,
            distribution,
            scope,
            area: area.map(|a| a.0),
            span,
        })
    }

    /// Whether each setting is written once; a repeated one is reported at its second place.
    fn settings_once(&mut self, params: &[Assign]) -> bool {
        let mut ok = true;
        for (i, a) in params.iter().enumerate() {
            if let Some(first) = params[..i].iter().find(|b| b.name.name == a.name.name) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Duplicate,
                        a.name.span,
                        format!("`{}` is set twice", a.name.name),
                    )
                    .with_note(first.name.span, "first set here")
                    .with_help("keep one of the two; neither silently wins"),
                );
                ok = false;
            }
        }
        ok
    }

    /// `normal(sigma = ...)` and the others, each argument checked where it is written.
    fn distribution(&mut self, e: &Expr, dim: Dim, top: &Frame) -> Option<Distribution> {
        let help = "write one of `normal(sigma = ...)`, `log_normal(sigma = ...)` (sigma of the \
                    logarithm, a pure number), `uniform(half_width = ...)`, \
                    `truncated_normal(sigma = ..., bound = ...)`";
        let Expr::Call { name, args, span } = e else {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::BadValue,
                    e.span(),
                    "`distribution` takes a distribution".to_string(),
                )
                .with_help(help),
            );
            return None;
        };
        let Some(&(dist, wanted)) = DISTRIBUTIONS.iter().find(|d| d.0 == name.name) else {
            let d = Diagnostic::new(
                ErrorKind::Unknown,
                name.span,
                format!("no distribution `{}`", name.name),
            );
            let h = did_you_mean(&name.name, DISTRIBUTIONS.iter().map(|d| d.0));
            self.diags
                .push(d.with_help(h.unwrap_or_else(|| help.into())));
            return None;
        };
        let want = if dist == "log_normal" { Dim::NONE } else { dim };
        let mut got: Vec<(&str, f64)> = Vec::new();
        for a in args {
            let Some(arg) = a.name.as_ref() else {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::BadValue,
                        a.value.span(),
                        format!("`{dist}` takes named arguments"),
                    )
                    .with_help(format!("write `{dist}({} = ...)`", wanted.join(" = ..., "))),
                );
                return None;
            };
            let Some(&w) = wanted.iter().find(|w| **w == arg.name) else {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Unknown,
                        arg.span,
                        format!("`{dist}` has no argument `{}`", arg.name),
                    )
                    .with_help(format!("its arguments are: {}", wanted.join(", "))),
                );
                return None;
            };
            let q = self.eval(&a.value, &[top])?;
            let v = if dist == "log_normal" && q.dim != Dim::NONE {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::UnitMismatch,
                        a.value.span(),
                        format!(
                            "a log-normal `sigma` is the spread of the logarithm, a pure number; \
                             found {}",
                            q.dim.describe()
                        ),
                    )
                    .with_help("write it without a unit: `sigma = 0.1` is close to a 10 % spread"),
                );
                return None;
            } else {
                self.check_dim(q, want, a.value.span(), w)?
            };
            if !(v.is_finite() && v >= 0.0) {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::BadValue,
                        a.value.span(),
                        format!("`{w}` must be zero or positive, found {v:e}"),
                    )
                    .with_help("a spread is a size; its direction comes from the draw"),
                );
                return None;
            }
            got.push((w, v));
        }
        let get = |n: &str| got.iter().find(|g| g.0 == n).map(|g| g.1);
        if let Some(missing) = wanted.iter().find(|w| get(w).is_none()) {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Expected,
                    *span,
                    format!("`{dist}` needs `{missing}`"),
                )
                .with_help(format!("write `{dist}({} = ...)`", wanted.join(" = ..., "))),
            );
            return None;
        }
        let v = |n| get(n).unwrap_or(0.0);
        Some(match dist {
            "normal" => Distribution::Normal { sigma: v("sigma") },
            "log_normal" => Distribution::LogNormal { sigma: v("sigma") },
            "uniform" => Distribution::Uniform {
                half_width: v("half_width"),
            },
            _ => {
                if v("bound") <= 0.0 {
                    self.err(
                        ErrorKind::BadValue,
                        *span,
                        "a truncated normal needs a positive `bound`".into(),
                    );
                    return None;
                }
                Distribution::TruncatedNormal {
                    sigma: v("sigma"),
                    bound: v("bound"),
                }
            }
        })
    }

    /// One `correlation card { keys = [a, b], coefficient = c, scope = ... }` into its group's
    /// matrix; `placed` collects each group's correlation statements and the pair each sets.
    fn correlation(
        &mut self,
        card: &Ident,
        params: &[Assign],
        span: Span,
        top: &Frame,
        out: &mut Variations,
        placed: &mut [Vec<(Span, usize, usize)>],
    ) {
        if self.varied_target(card).is_none() || !self.settings_once(params) {
            return;
        }
        let (mut keys, mut coefficient, mut scope) = (None, None, None);
        for a in params {
            match a.name.name.as_str() {
                "keys" => match &a.value {
                    Expr::List(items, _) if items.len() == 2 => {
                        let names: Vec<&Ident> = items
                            .iter()
                            .filter_map(|e| match e {
                                Expr::Name(id) => Some(id),
                                _ => None,
                            })
                            .collect();
                        if names.len() == 2 {
                            keys = Some((names[0], names[1]));
                        }
                    }
                    _ => {}
                },
                "coefficient" => {
                    let Some(q) = self.eval(&a.value, &[top]) else {
                        return;
                    };
                    if q.dim != Dim::NONE || !(-1.0..=1.0).contains(&q.v) {
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::BadValue,
                                a.value.span(),
                                "a correlation coefficient is a pure number from -1 to 1"
                                    .to_string(),
                            )
                            .with_help("such as `coefficient = 0.5`"),
                        );
                        return;
                    }
                    coefficient = Some(q.v);
                }
                "scope" => {
                    scope = match &a.value {
                        Expr::Name(id) if id.name == "global" => Some(Scope::Global),
                        Expr::Name(id) if id.name == "local" => Some(Scope::Local),
                        _ => {
                            self.err(
                                ErrorKind::BadValue,
                                a.value.span(),
                                "`scope` is `global` or `local`".into(),
                            );
                            return;
                        }
                    }
                }
                other => {
                    self.diags.push(
                        Diagnostic::new(
                            ErrorKind::Unknown,
                            a.name.span,
                            format!("a correlation has no setting `{other}`"),
                        )
                        .with_help("its settings are: keys, coefficient, scope"),
                    );
                    return;
                }
            }
        }
        if let (None, Some(k)) = (keys, params.iter().find(|a| a.name.name == "keys")) {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::BadValue,
                    k.value.span(),
                    "`keys` is a list of two varied keys of the card".to_string(),
                )
                .with_help("such as `keys = [gate_work_function, electron_mobility]`"),
            );
            return;
        }
        let (Some((a, b)), Some(c)) = (keys, coefficient) else {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Expected,
                    span,
                    "a correlation needs `keys` (two varied keys of the card) and `coefficient`"
                        .to_string(),
                )
                .with_help(
                    "such as `keys = [gate_work_function, electron_mobility], coefficient = 0.5`",
                ),
            );
            return;
        };
        if a.name == b.name {
            self.err(
                ErrorKind::BadValue,
                b.span,
                "a key is fully correlated with itself; name two different keys".into(),
            );
            return;
        }
        // The scopes both keys are declared with.
        let declared = |k: &Ident, s: Scope| {
            out.list
                .iter()
                .any(|v| v.card == card.name && v.key == k.name && v.scope == s)
        };
        let common: Vec<Scope> = [Scope::Global, Scope::Local]
            .into_iter()
            .filter(|s| scope.is_none_or(|w| w == *s) && declared(a, *s) && declared(b, *s))
            .collect();
        let scope = match common.as_slice() {
            [s] => *s,
            [] => {
                let missing = if [Scope::Global, Scope::Local]
                    .iter()
                    .any(|s| declared(a, *s))
                {
                    b
                } else {
                    a
                };
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Unknown,
                        missing.span,
                        format!(
                            "`{}.{}` has no variation{} to correlate",
                            card.name,
                            missing.name,
                            scope.map_or(String::new(), |s| format!(" of scope {}", s.name()))
                        ),
                    )
                    .with_help("declare `variation card.key { ... }` for both keys, in one scope"),
                );
                return;
            }
            _ => {
                self.diags.push(
                    Diagnostic::new(
                        ErrorKind::Expected,
                        span,
                        "both keys vary globally and locally: say which draws are correlated"
                            .to_string(),
                    )
                    .with_help("add `scope = global` or `scope = local`"),
                );
                return;
            }
        };
        let Some(gi) = out
            .groups
            .iter()
            .position(|g| g.card == card.name && g.scope == scope)
        else {
            return;
        };
        let g = &mut out.groups[gi];
        let pos = |k: &Ident| {
            g.members
                .iter()
                .position(|&m| out.list[m].key == k.name)
                .unwrap_or(0)
        };
        let (i, j) = (pos(a), pos(b));
        if let Some(&(first, _, _)) = placed[gi]
            .iter()
            .find(|p| (p.1, p.2) == (i, j) || (p.1, p.2) == (j, i))
        {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Duplicate,
                    span,
                    format!(
                        "`{}` and `{}` of card `{}` are already correlated",
                        a.name, b.name, card.name
                    ),
                )
                .with_note(first, "first correlated here")
                .with_help("keep one of the two; neither silently wins"),
            );
            return;
        }
        g.correlation[i][j] = c;
        g.correlation[j][i] = c;
        placed[gi].push((span, i, j));
    }
}

/// The lower-triangular `L` with `L L^T = r`, or `None` unless `r` is positive definite
/// (a pivot below 1e-12 counts as singular: two fully correlated keys are one draw, and
/// should be written as one).
pub fn cholesky(r: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = r.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let s: f64 = (0..j).map(|k| l[i][k] * l[j][k]).sum();
            if i == j {
                let d = r[i][i] - s;
                if d.is_nan() || d <= 1e-12 {
                    return None;
                }
                l[i][j] = d.sqrt();
            } else {
                l[i][j] = (r[i][j] - s) / l[j][j];
            }
        }
    }
    Some(l)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_reproduces_a_valid_matrix_and_refuses_an_invalid_one() {
        let r = vec![
            vec![1.0, 0.5, 0.2],
            vec![0.5, 1.0, -0.3],
            vec![0.2, -0.3, 1.0],
        ];
        let l = cholesky(&r).expect("positive definite");
        for i in 0..3 {
            for j in 0..3 {
                let p: f64 = (0..3).map(|k| l[i][k] * l[j][k]).sum();
                assert!((p - r[i][j]).abs() < 1e-14);
            }
        }
        // a~b and a~c strongly, but b and c strongly opposed: no such three variables.
        let bad = vec![
            vec![1.0, 0.9, 0.9],
            vec![0.9, 1.0, -0.9],
            vec![0.9, -0.9, 1.0],
        ];
        assert!(cholesky(&bad).is_none());
    }
}

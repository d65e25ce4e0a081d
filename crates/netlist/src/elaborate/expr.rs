//! Expressions and units: parameter arithmetic with dimensions, functions, waveforms.

use super::{Elaborator, Frame, Q};
use crate::ast::*;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;
use crate::units::Dim;
use lamina_engine::elements::{Pulse, Sine, Waveform};

impl<'s> Elaborator<'s> {
    pub(super) fn lookup(&self, name: &str, frames: &[&Frame]) -> Option<Q> {
        for f in frames.iter().rev() {
            if let Some(q) = f.vars.get(name) {
                return Some(*q);
            }
        }
        self.globals.get(name).copied()
    }

    pub(super) fn visible_names(&self, frames: &[&Frame]) -> Vec<String> {
        let mut v: Vec<String> = self.globals.keys().cloned().collect();
        for f in frames {
            v.extend(f.vars.keys().cloned());
        }
        v
    }

    pub(super) fn eval_int(&mut self, e: &Expr, frames: &[&Frame]) -> Option<i64> {
        let q = self.eval(e, frames)?;
        if q.dim != Dim::NONE {
            self.err(
                ErrorKind::UnitMismatch,
                e.span(),
                format!(
                    "expected a whole number without a unit, found {}",
                    q.dim.describe()
                ),
            );
            return None;
        }
        if q.v.fract() != 0.0 || q.v.abs() > 1e15 {
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::BadValue,
                    e.span(),
                    format!("expected a whole number, found {}", q.v),
                )
                .with_help("round it, such as `round(x)` or `floor(x)`"),
            );
            return None;
        }
        Some(q.v as i64)
    }

    pub(super) fn eval(&mut self, e: &Expr, frames: &[&Frame]) -> Option<Q> {
        match e {
            Expr::Number { value, dim, .. } => Some(Q {
                v: *value,
                dim: dim.unwrap_or(Dim::NONE),
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
            Expr::List(_, span) => {
                self.diags.push(
                    Diagnostic::new(ErrorKind::BadValue, *span, "a list is not a number".into())
                        .with_help(
                        "lists are taken only by analysis settings, such as `record = [out, in]`",
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
                        if !self.same_dims(a, b, *span, "add") {
                            return None;
                        }
                        let dim = a.dim;
                        let v = if *op == BinOp::Add {
                            a.v + b.v
                        } else {
                            a.v - b.v
                        };
                        Q { v, dim }
                    }
                    BinOp::Mul => Q {
                        v: a.v * b.v,
                        dim: a.dim.times(b.dim),
                    },
                    BinOp::Div => {
                        if b.v == 0.0 {
                            self.diags.push(
                                Diagnostic::new(
                                    ErrorKind::BadValue,
                                    r.span(),
                                    "division by zero".into(),
                                )
                                .with_help("check the divisor's parameters"),
                            );
                            return None;
                        }
                        Q {
                            v: a.v / b.v,
                            dim: a.dim.per(b.dim),
                        }
                    }
                    BinOp::Rem => {
                        if b.v == 0.0 {
                            self.err(ErrorKind::BadValue, r.span(), "remainder by zero".into());
                            return None;
                        }
                        if !self.same_dims(a, b, *span, "take the remainder of") {
                            return None;
                        }
                        Q {
                            v: a.v.rem_euclid(b.v),
                            dim: a.dim,
                        }
                    }
                    BinOp::Pow => {
                        if b.dim != Dim::NONE {
                            self.err(
                                ErrorKind::UnitMismatch,
                                r.span(),
                                "a power must be a pure number".into(),
                            );
                            return None;
                        }
                        let dim = if a.dim != Dim::NONE {
                            if b.v.fract() != 0.0 || b.v.abs() > 12.0 {
                                self.err(
                                    ErrorKind::UnitMismatch,
                                    r.span(),
                                    "a quantity with a unit can only be raised to a whole power up to 12"
                                        .into(),
                                );
                                return None;
                            }
                            a.dim.pow(b.v as i32)
                        } else {
                            Dim::NONE
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
                        "the result is too large or not a number".into(),
                    );
                    return None;
                }
                if v.v == 0.0 && matches!(op, BinOp::Mul | BinOp::Div | BinOp::Pow) && a.v != 0.0 {
                    self.err(
                        ErrorKind::BadValue,
                        *span,
                        "the result is too small to represent (it underflows to 0)".into(),
                    );
                    return None;
                }
                Some(v)
            }
            Expr::Call { name, args, span } => self.call(name, args, *span, frames),
        }
    }

    pub(super) fn call(
        &mut self,
        name: &Ident,
        args: &[Arg],
        span: Span,
        frames: &[&Frame],
    ) -> Option<Q> {
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
        let out = match n {
            "sqrt" => {
                let Some(dim) = x.dim.sqrt() else {
                    self.err(
                        ErrorKind::UnitMismatch,
                        span,
                        format!("the square root of {} has no unit", x.dim.describe()),
                    );
                    return None;
                };
                Q { v: x.v.sqrt(), dim }
            }
            "abs" => Q {
                v: x.v.abs(),
                dim: x.dim,
            },
            "min" | "max" => {
                let y = vals[1];
                if !self.same_dims(x, y, span, "compare") {
                    return None;
                }
                let v = if n == "min" {
                    x.v.min(y.v)
                } else {
                    x.v.max(y.v)
                };
                Q { v, dim: x.dim }
            }
            _ => {
                // Rounding a quantity with a unit would depend on the unit it is counted in.
                if x.dim != Dim::NONE || (expected == 2 && vals[1].dim != Dim::NONE) {
                    let mut d = Diagnostic::new(
                        ErrorKind::UnitMismatch,
                        span,
                        format!("`{n}` needs pure numbers"),
                    );
                    if x.dim != Dim::NONE {
                        d = d.with_help(format!(
                            "divide by a unit first, such as `{n}(x / 1 {})`",
                            x.dim.unit().split(',').next().unwrap_or("")
                        ));
                    }
                    self.diags.push(d);
                    return None;
                }
                let v = match n {
                    "floor" => x.v.floor(),
                    "ceil" => x.v.ceil(),
                    "round" => x.v.round(),
                    "exp" => x.v.exp(),
                    "ln" => x.v.ln(),
                    "log10" => x.v.log10(),
                    "sin" => x.v.sin(),
                    "cos" => x.v.cos(),
                    "tan" => x.v.tan(),
                    _ => x.v.powf(vals[1].v),
                };
                Q { v, dim: Dim::NONE }
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

    pub(super) fn waveform(&mut self, e: &Expr, dim: Dim, frames: &[&Frame]) -> Option<Waveform> {
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
                    let v = me.check_dim(q, d, a.value.span(), key)?;
                    if d == Dim::VOLTAGE {
                        me.max_voltage = me.max_voltage.max(v.abs());
                    }
                    Some(v)
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

    /// The value of `q` if it has dimension `want`. A bare number is a pure number, never read
    /// as SI: where a dimension is expected it is an error, except a plain zero, which is zero
    /// in every unit.
    pub(super) fn check_dim(&mut self, q: Q, want: Dim, span: Span, what: &str) -> Option<f64> {
        if q.dim == want || (q.dim == Dim::NONE && q.v == 0.0) {
            return Some(q.v);
        }
        let d = if q.dim == Dim::NONE {
            Diagnostic::new(
                ErrorKind::MissingUnit,
                span,
                format!(
                    "`{what}` is {}, but this is a number without a unit",
                    want.describe()
                ),
            )
            .with_help(format!(
                "write it with a unit, such as `{what} = {}`; a parameter defined without a \
                 unit is a pure number too (give it a unit where it is defined, or write `x * 1 {}`)",
                want.example(),
                want.example().split_once(' ').map_or("", |(_, u)| u)
            ))
        } else {
            Diagnostic::new(
                ErrorKind::UnitMismatch,
                span,
                format!(
                    "`{what}` must be {}, found {}",
                    want.describe(),
                    q.dim.describe()
                ),
            )
            .with_help(format!(
                "write it with a unit, such as `{what} = {}`",
                want.example()
            ))
        };
        self.diags.push(d);
        None
    }

    /// Whether `a` and `b` have one dimension; reports the mismatch at `span` if not.
    fn same_dims(&mut self, a: Q, b: Q, span: Span, verb: &str) -> bool {
        if a.dim == b.dim {
            return true;
        }
        let mut d = Diagnostic::new(
            ErrorKind::UnitMismatch,
            span,
            format!(
                "cannot {verb} {} and {}",
                a.dim.describe(),
                b.dim.describe()
            ),
        );
        if a.dim == Dim::NONE || b.dim == Dim::NONE {
            let other = if a.dim == Dim::NONE { b.dim } else { a.dim };
            d = d.with_help(format!(
                "a number without a unit is a pure number; give it a unit, such as `{}`",
                other.example()
            ));
        }
        self.diags.push(d);
        false
    }
}

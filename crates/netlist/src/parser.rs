//! Recursive-descent parser with error recovery: a bad statement is reported and skipped up
//! to the end of its line (or its closing brace), so one run reports many errors.

use crate::ast::*;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::lexer::{Tok, Token};
use crate::source::Span;
use crate::units::{all_symbols, run_together, unit_atom, Dim};

/// Deepest nesting of blocks and expressions the parser accepts.
pub const MAX_DEPTH: usize = 64;

const KEYWORDS: &[&str] = &[
    "param",
    "device",
    "cell",
    "for",
    "in",
    "include",
    "analysis",
    "variation",
    "correlation",
    "limit",
];

struct Parser<'a> {
    toks: &'a [Token],
    pos: usize,
    diags: &'a mut Vec<Diagnostic>,
    depth: usize,
}

type PResult<T> = Result<T, ()>;

/// Parses a token stream into statements, collecting diagnostics.
pub fn parse(toks: &[Token], diags: &mut Vec<Diagnostic>) -> Vec<Stmt> {
    let mut p = Parser {
        toks,
        pos: 0,
        diags,
        depth: 0,
    };
    p.statements(true)
}

/// Parses a single expression (used for `--set name=value`).
pub fn parse_expression(toks: &[Token], diags: &mut Vec<Diagnostic>) -> Option<Expr> {
    let mut p = Parser {
        toks,
        pos: 0,
        diags,
        depth: 0,
    };
    let e = p.expr().ok()?;
    p.skip_newlines();
    if !matches!(p.peek(), Tok::Eof) {
        p.error_here("the end of the value");
        return None;
    }
    Some(e)
}

fn describe(t: &Tok) -> String {
    match t {
        Tok::Ident(s) => format!("`{s}`"),
        Tok::Number(v) => format!("the number {v}"),
        Tok::Str(_) => "a string".into(),
        Tok::Newline => "the end of the line".into(),
        Tok::Punct(p) => format!("`{p}`"),
        Tok::Eof => "the end of the file".into(),
    }
}

impl<'a> Parser<'a> {
    fn peek(&self) -> &Tok {
        &self.toks[self.pos].tok
    }

    fn peek_at(&self, k: usize) -> &Tok {
        &self.toks[(self.pos + k).min(self.toks.len() - 1)].tok
    }

    fn span(&self) -> Span {
        self.toks[self.pos].span
    }

    fn prev_span(&self) -> Span {
        self.toks[self.pos.saturating_sub(1)].span
    }

    fn bump(&mut self) -> &Token {
        let t = &self.toks[self.pos];
        if self.pos + 1 < self.toks.len() {
            self.pos += 1;
        }
        t
    }

    fn is_punct(&self, p: &str) -> bool {
        matches!(self.peek(), Tok::Punct(q) if *q == p)
    }

    fn eat_punct(&mut self, p: &str) -> bool {
        if self.is_punct(p) {
            self.bump();
            true
        } else {
            false
        }
    }

    fn error_here(&mut self, expected: &str) {
        let found = describe(self.peek());
        let span = self.span();
        self.diags.push(Diagnostic::new(
            ErrorKind::Expected,
            span,
            format!("expected {expected}, found {found}"),
        ));
    }

    fn expect_punct(&mut self, p: &str) -> PResult<()> {
        if self.eat_punct(p) {
            Ok(())
        } else {
            self.error_here(&format!("`{p}`"));
            Err(())
        }
    }

    fn ident(&mut self, what: &str) -> PResult<Ident> {
        match self.peek().clone() {
            Tok::Ident(name) => {
                let span = self.span();
                self.bump();
                Ok(Ident { name, span })
            }
            _ => {
                self.error_here(what);
                Err(())
            }
        }
    }

    fn skip_newlines(&mut self) {
        while matches!(self.peek(), Tok::Newline) || self.is_punct(";") {
            self.bump();
        }
    }

    /// Skips to the end of the current statement, keeping braces balanced.
    fn recover(&mut self) {
        let mut depth = 0usize;
        loop {
            match self.peek() {
                Tok::Eof => return,
                Tok::Newline if depth == 0 => return,
                Tok::Punct("{") => depth += 1,
                Tok::Punct("}") => {
                    if depth == 0 {
                        return;
                    }
                    depth -= 1;
                    if depth == 0 {
                        self.bump();
                        return;
                    }
                }
                _ => {}
            }
            self.bump();
        }
    }

    fn enter(&mut self) -> PResult<()> {
        self.depth += 1;
        if self.depth > MAX_DEPTH {
            let span = self.span();
            self.diags.push(
                Diagnostic::new(
                    ErrorKind::Limit,
                    span,
                    format!("nesting deeper than {MAX_DEPTH} levels"),
                )
                .with_help("flatten the expression or the blocks"),
            );
            return Err(());
        }
        Ok(())
    }

    fn statements(&mut self, top: bool) -> Vec<Stmt> {
        let mut out = Vec::new();
        loop {
            self.skip_newlines();
            match self.peek() {
                Tok::Eof => {
                    if !top {
                        self.error_here("`}`");
                    }
                    return out;
                }
                Tok::Punct("}") if !top => return out,
                Tok::Punct("}") => {
                    let span = self.span();
                    self.diags.push(Diagnostic::new(
                        ErrorKind::Expected,
                        span,
                        "unmatched `}`".into(),
                    ));
                    self.bump();
                    continue;
                }
                _ => {}
            }
            let start = self.pos;
            match self.statement() {
                Ok(s) => {
                    out.push(s);
                    if !matches!(
                        self.peek(),
                        Tok::Newline | Tok::Eof | Tok::Punct("}") | Tok::Punct(";")
                    ) {
                        self.error_here("the end of the statement");
                        self.recover();
                    }
                }
                Err(()) => {
                    if self.pos == start {
                        self.bump();
                    }
                    self.recover();
                }
            }
        }
    }

    fn block(&mut self) -> PResult<Vec<Stmt>> {
        self.expect_punct("{")?;
        self.enter()?;
        let body = self.statements(false);
        self.depth -= 1;
        self.expect_punct("}")?;
        Ok(body)
    }

    fn statement(&mut self) -> PResult<Stmt> {
        let Tok::Ident(word) = self.peek().clone() else {
            self.error_here("a statement (`param`, `device`, `cell`, `for`, `include`, `analysis`, `variation`, `correlation`, `limit` or an instance)");
            return Err(());
        };
        let start = self.span();
        match word.as_str() {
            "param" => {
                self.bump();
                let name = self.ident("a parameter name")?;
                self.expect_punct("=")?;
                let value = self.expr()?;
                Ok(Stmt::Param { name, value })
            }
            "device" => {
                self.bump();
                let name = self.ident("a device card name")?;
                self.expect_punct(":")?;
                let model = self.ident("a device model, such as `square_nfet`")?;
                let params = self.assignments()?;
                Ok(Stmt::Device {
                    name,
                    model,
                    params,
                })
            }
            "cell" => {
                self.bump();
                let name = self.ident("a cell name")?;
                self.expect_punct("(")?;
                let mut ports = Vec::new();
                if !self.is_punct(")") {
                    loop {
                        ports.push(self.ident("a port name")?);
                        if !self.eat_punct(",") {
                            break;
                        }
                    }
                }
                self.expect_punct(")")?;
                let body = self.block()?;
                Ok(Stmt::Cell { name, ports, body })
            }
            "for" => {
                self.bump();
                let var = self.ident("a loop variable")?;
                match self.peek() {
                    Tok::Ident(w) if w == "in" => {
                        self.bump();
                    }
                    _ => {
                        self.error_here("`in`");
                        return Err(());
                    }
                }
                let from = self.expr()?;
                self.expect_punct("..")?;
                let to = self.expr()?;
                let span = start.to(self.prev_span());
                let body = self.block()?;
                Ok(Stmt::For {
                    var,
                    from,
                    to,
                    body,
                    span,
                })
            }
            "include" => {
                self.bump();
                match self.peek().clone() {
                    Tok::Str(path) => {
                        let span = start.to(self.span());
                        self.bump();
                        Ok(Stmt::Include { path, span })
                    }
                    _ => {
                        self.error_here("a file name in double quotes");
                        Err(())
                    }
                }
            }
            "analysis" => {
                self.bump();
                let kind = self.ident("an analysis kind")?;
                let span = start.to(kind.span);
                let params = if self.is_punct("{") {
                    self.assignments()?
                } else {
                    Vec::new()
                };
                Ok(Stmt::Analysis { kind, params, span })
            }
            "variation" => {
                self.bump();
                let card = self.ident("a device card name")?;
                self.expect_punct(".")?;
                let key = self.ident("a key of the card, such as `gate_work_function`")?;
                let span = start.to(key.span);
                let params = self.assignments()?;
                Ok(Stmt::Variation {
                    card,
                    key,
                    params,
                    span,
                })
            }
            "limit" => {
                self.bump();
                let analysis = self.ident("an analysis kind, such as `transfer`")?;
                self.expect_punct(".")?;
                let figure = self.ident("a figure with its unit, such as `snm_v`")?;
                let span = start.to(figure.span);
                let params = self.assignments()?;
                Ok(Stmt::Limit {
                    analysis,
                    figure,
                    params,
                    span,
                })
            }
            "correlation" => {
                self.bump();
                let card = self.ident("a device card name")?;
                let span = start.to(card.span);
                let params = self.assignments()?;
                Ok(Stmt::Correlation { card, params, span })
            }
            _ => self.instance(),
        }
    }

    fn instance(&mut self) -> PResult<Stmt> {
        let kind = self.ident("an element kind")?;
        if KEYWORDS.contains(&kind.name.as_str()) {
            self.diags.push(Diagnostic::new(
                ErrorKind::Expected,
                kind.span,
                format!("`{}` cannot start a statement here", kind.name),
            ));
            return Err(());
        }
        if !matches!(self.peek(), Tok::Ident(_)) {
            let found = describe(self.peek());
            let span = self.span();
            let mut d = Diagnostic::new(
                ErrorKind::Expected,
                span,
                format!(
                    "expected an instance name after `{}`, found {found}",
                    kind.name
                ),
            );
            if let Some(h) = did_you_mean(&kind.name, KEYWORDS.iter().copied()) {
                d = d.with_help(h);
            }
            self.diags.push(d);
            return Err(());
        }
        let name = self.indexed("an instance name")?;
        self.expect_punct("(")?;
        let mut connections = Vec::new();
        if !self.is_punct(")") {
            loop {
                let pin = self.ident("a pin name")?;
                self.expect_punct("=")?;
                let node = self.indexed("a node name")?;
                connections.push(Connection { pin, node });
                if !self.eat_punct(",") {
                    break;
                }
                if self.is_punct(")") {
                    break;
                }
            }
        }
        self.expect_punct(")")?;
        let span = kind.span.to(self.prev_span());
        let params = if self.is_punct("{") {
            self.assignments()?
        } else {
            Vec::new()
        };
        Ok(Stmt::Instance {
            kind,
            name,
            connections,
            params,
            span,
        })
    }

    fn indexed(&mut self, what: &str) -> PResult<Indexed> {
        let name = self.ident(what)?;
        let mut span = name.span;
        let index = if self.is_punct("[") && !self.toks[self.pos].spaced {
            self.bump();
            let e = self.expr()?;
            self.expect_punct("]")?;
            span = span.to(self.prev_span());
            Some(e)
        } else {
            None
        };
        Ok(Indexed { name, index, span })
    }

    /// `{ key = value (, | newline) ... }`
    fn assignments(&mut self) -> PResult<Vec<Assign>> {
        self.expect_punct("{")?;
        let mut out = Vec::new();
        loop {
            while matches!(self.peek(), Tok::Newline) || self.is_punct(",") || self.is_punct(";") {
                self.bump();
            }
            if self.eat_punct("}") {
                return Ok(out);
            }
            if matches!(self.peek(), Tok::Eof) {
                self.error_here("`}`");
                return Err(());
            }
            match self.assignment() {
                Ok(a) => out.push(a),
                Err(()) => {
                    // Skip to the next item of this block, so later items are still checked.
                    let mut depth = 0usize;
                    loop {
                        match self.peek() {
                            Tok::Eof => return Err(()),
                            Tok::Punct("(") | Tok::Punct("[") | Tok::Punct("{") => depth += 1,
                            Tok::Punct(")") | Tok::Punct("]") => depth = depth.saturating_sub(1),
                            Tok::Punct("}") if depth == 0 => break,
                            Tok::Punct("}") => depth -= 1,
                            Tok::Newline | Tok::Punct(",") | Tok::Punct(";") if depth == 0 => break,
                            _ => {}
                        }
                        self.bump();
                    }
                }
            }
        }
    }

    fn assignment(&mut self) -> PResult<Assign> {
        let name = self.ident("a parameter name or `}`")?;
        self.expect_punct("=")?;
        let value = self.expr()?;
        if !(matches!(self.peek(), Tok::Newline)
            || self.is_punct(",")
            || self.is_punct(";")
            || self.is_punct("}"))
        {
            match self.peek().clone() {
                Tok::Ident(w)
                    if ["f", "p", "n", "u", "µ", "m", "c", "k", "M", "G", "T"]
                        .contains(&w.as_str()) =>
                {
                    let span = self.span();
                    self.diags.push(
                        Diagnostic::new(
                            ErrorKind::UnknownUnit,
                            span,
                            format!("`{w}` is a prefix, not a unit"),
                        )
                        .with_help(format!(
                            "write the prefix on a unit symbol, such as `{w}Ohm`, `{w}V` or `{w}m`"
                        )),
                    );
                }
                _ => self.error_here("`,`, a new line or `}`"),
            }
            return Err(());
        }
        Ok(Assign { name, value })
    }

    fn expr(&mut self) -> PResult<Expr> {
        self.enter()?;
        let r = self.additive();
        self.depth -= 1;
        r
    }

    fn additive(&mut self) -> PResult<Expr> {
        let mut l = self.multiplicative()?;
        loop {
            let op = if self.is_punct("+") {
                BinOp::Add
            } else if self.is_punct("-") {
                BinOp::Sub
            } else {
                return Ok(l);
            };
            self.bump();
            let r = self.multiplicative()?;
            let span = l.span().to(r.span());
            l = Expr::Binary {
                op,
                l: Box::new(l),
                r: Box::new(r),
                span,
            };
        }
    }

    fn multiplicative(&mut self) -> PResult<Expr> {
        let mut l = self.unary()?;
        loop {
            let op = if self.is_punct("*") {
                BinOp::Mul
            } else if self.is_punct("/") {
                BinOp::Div
            } else if self.is_punct("%") {
                BinOp::Rem
            } else {
                return Ok(l);
            };
            self.bump();
            let r = self.unary()?;
            let span = l.span().to(r.span());
            l = Expr::Binary {
                op,
                l: Box::new(l),
                r: Box::new(r),
                span,
            };
        }
    }

    fn unary(&mut self) -> PResult<Expr> {
        if self.is_punct("-") {
            let start = self.span();
            self.bump();
            self.enter()?;
            let e = self.unary();
            self.depth -= 1;
            let e = e?;
            let span = start.to(e.span());
            return Ok(Expr::Neg(Box::new(e), span));
        }
        if self.is_punct("+") {
            self.bump();
        }
        self.power()
    }

    fn power(&mut self) -> PResult<Expr> {
        let base = self.atom()?;
        if self.eat_punct("^") {
            self.enter()?;
            let e = self.unary();
            self.depth -= 1;
            let e = e?;
            let span = base.span().to(e.span());
            return Ok(Expr::Binary {
                op: BinOp::Pow,
                l: Box::new(base),
                r: Box::new(e),
                span,
            });
        }
        Ok(base)
    }

    fn atom(&mut self) -> PResult<Expr> {
        let span = self.span();
        match self.peek().clone() {
            Tok::Number(v) => {
                self.bump();
                let (scale, dim, end) = self.unit_suffix()?;
                let span = match end {
                    Some(e) => span.to(e),
                    None => span,
                };
                let value = v * scale;
                if !value.is_finite() || (v != 0.0 && value.abs() < f64::MIN_POSITIVE) {
                    self.diags.push(Diagnostic::new(
                        ErrorKind::BadNumber,
                        span,
                        "the value with its unit is too large or too small to represent".into(),
                    ));
                    return Err(());
                }
                Ok(Expr::Number { value, dim, span })
            }
            Tok::Str(s) => {
                self.bump();
                Ok(Expr::Str(s, span))
            }
            Tok::Ident(name) => {
                self.bump();
                let id = Ident { name, span };
                if self.is_punct("(") && !self.toks[self.pos].spaced {
                    self.bump();
                    let mut args = Vec::new();
                    if !self.is_punct(")") {
                        loop {
                            let named = matches!(self.peek(), Tok::Ident(_))
                                && matches!(self.peek_at(1), Tok::Punct("="));
                            let name = if named {
                                let n = self.ident("an argument name")?;
                                self.bump();
                                Some(n)
                            } else {
                                None
                            };
                            let value = self.expr()?;
                            args.push(Arg { name, value });
                            if !self.eat_punct(",") {
                                break;
                            }
                        }
                    }
                    self.expect_punct(")")?;
                    let span = span.to(self.prev_span());
                    return Ok(Expr::Call {
                        name: id,
                        args,
                        span,
                    });
                }
                if self.is_punct("[") && !self.toks[self.pos].spaced {
                    self.bump();
                    let index = self.expr()?;
                    self.expect_punct("]")?;
                    let span = span.to(self.prev_span());
                    return Ok(Expr::Indexed(id, Box::new(index), span));
                }
                Ok(Expr::Name(id))
            }
            Tok::Punct("(") => {
                self.bump();
                let e = self.expr()?;
                self.expect_punct(")")?;
                Ok(e)
            }
            Tok::Punct("[") => {
                self.bump();
                let mut items = Vec::new();
                self.skip_newlines();
                if !self.is_punct("]") {
                    loop {
                        self.skip_newlines();
                        items.push(self.expr()?);
                        self.skip_newlines();
                        if !self.eat_punct(",") {
                            break;
                        }
                    }
                }
                self.skip_newlines();
                self.expect_punct("]")?;
                Ok(Expr::List(items, span.to(self.prev_span())))
            }
            _ => {
                self.error_here("a value (a number, a name or `(`)");
                Err(())
            }
        }
    }

    /// Reads a unit after a number literal: unit symbols joined by spaces, `*` or `/`, with
    /// integer powers and parentheses, e.g. `fF`, `cm^2/(V s)`, `/cm^2`, `uA/V^2`. A unit
    /// starting with `/` must be written against the symbol (`2e12 /cm^2`); `x / m` with a space
    /// after the slash is a division by `m`.
    fn unit_suffix(&mut self) -> PResult<(f64, Option<Dim>, Option<Span>)> {
        let starts_unit = |p: &Self| -> bool {
            match p.peek() {
                Tok::Ident(s) => unit_atom(s).is_some(),
                Tok::Punct("/") => {
                    let next = &p.toks[(p.pos + 1).min(p.toks.len() - 1)];
                    let after = &p.toks[(p.pos + 2).min(p.toks.len() - 1)];
                    !next.spaced
                        && (matches!(&next.tok, Tok::Ident(s) if unit_atom(s).is_some())
                            || (matches!(next.tok, Tok::Punct("("))
                                && matches!(&after.tok, Tok::Ident(s) if unit_atom(s).is_some())))
                }
                _ => false,
            }
        };
        if !starts_unit(self) {
            // A misspelt unit right after a number on the same line.
            if let Tok::Ident(s) = self.peek().clone() {
                let looks_like_unit =
                    s.chars().next().is_some_and(|c| c.is_alphabetic()) && s.len() <= 4;
                if looks_like_unit && !matches!(self.peek_at(1), Tok::Punct("=") | Tok::Punct("("))
                {
                    if let Some(h) = unit_hint(&s) {
                        let span = self.span();
                        self.diags.push(
                            Diagnostic::new(
                                ErrorKind::UnknownUnit,
                                span,
                                format!("`{s}` is not a unit"),
                            )
                            .with_help(h),
                        );
                        return Err(());
                    }
                }
            }
            return Ok((1.0, None, None));
        }
        let (scale, dim) = self.unit_product(0)?;
        Ok((scale, Some(dim), Some(self.prev_span())))
    }

    fn unit_product(&mut self, depth: usize) -> PResult<(f64, Dim)> {
        if depth > 8 {
            let span = self.span();
            self.diags.push(Diagnostic::new(
                ErrorKind::Limit,
                span,
                "unit nested too deeply".into(),
            ));
            return Err(());
        }
        let mut scale = 1.0;
        let mut dim = Dim::NONE;
        let mut first = true;
        loop {
            let divide = if self.is_punct("/") || self.is_punct("*") {
                let next = &self.toks[(self.pos + 1).min(self.toks.len() - 1)];
                let joins = !next.spaced
                    && (matches!(&next.tok, Tok::Ident(s) if unit_atom(s).is_some())
                        || matches!(next.tok, Tok::Punct("(")));
                if !joins {
                    // `cm^2/Vs`: symbols run together, or a misspelt symbol, right after a
                    // unit's `/` or `*` is a unit mistake, not a division by a parameter.
                    if let Tok::Ident(w) = &next.tok {
                        if !next.spaced && !first {
                            if let Some(h) = unit_hint(w) {
                                self.diags.push(
                                    Diagnostic::new(
                                        ErrorKind::UnknownUnit,
                                        next.span,
                                        format!("`{w}` is not a unit"),
                                    )
                                    .with_help(h),
                                );
                                return Err(());
                            }
                        }
                    }
                    break;
                }
                let d = self.is_punct("/");
                self.bump();
                d
            } else if first || matches!(self.peek(), Tok::Ident(s) if unit_atom(s).is_some()) {
                false
            } else {
                break;
            };
            let (s, d) = if self.is_punct("(") {
                self.bump();
                let inner = self.unit_product(depth + 1)?;
                self.expect_punct(")")?;
                inner
            } else {
                match self.peek().clone() {
                    Tok::Ident(sym) => match unit_atom(&sym) {
                        Some(u) => {
                            self.bump();
                            u
                        }
                        None => break,
                    },
                    _ => break,
                }
            };
            let (s, d) = if self.is_punct("^") {
                self.bump();
                let neg = self.eat_punct("-");
                match self.peek().clone() {
                    Tok::Number(k) if k.fract() == 0.0 && k.abs() <= 9.0 => {
                        self.bump();
                        let k = if neg { -(k as i32) } else { k as i32 };
                        (s.powi(k), d.pow(k))
                    }
                    _ => {
                        self.error_here("a whole-number power between -9 and 9");
                        return Err(());
                    }
                }
            } else {
                (s, d)
            };
            if divide {
                scale /= s;
                dim = dim.per(d);
            } else {
                scale *= s;
                dim = dim.times(d);
            }
            first = false;
        }
        Ok((scale, dim))
    }
}

/// What to write instead of `word` where a unit was expected: symbols run together need a
/// space and parentheses (`Vs` -> `(V s)`), a misspelt symbol gets the closest one (`fFF` ->
/// `fF`).
fn unit_hint(word: &str) -> Option<String> {
    let all = all_symbols();
    if let Some(s) = all
        .iter()
        .find(|s| s.as_str() != word && s.to_lowercase() == word.to_lowercase())
    {
        return Some(format!(
            "did you mean `{s}`? (unit symbols are case-sensitive)"
        ));
    }
    if let Some(parts) = run_together(word) {
        return Some(format!(
            "units are separated by a space: write `({})`, as in `cm^2/({})`",
            parts.join(" "),
            parts.join(" ")
        ));
    }
    did_you_mean(word, all.iter().map(String::as_str))
}

/// A parsed file: every token (comments and whitespace sit in the gaps between token spans,
/// so the token list reproduces the file byte for byte) and the statements built over them,
/// each carrying the spans of its parts.
#[derive(Clone, Debug, PartialEq)]
pub struct SyntaxTree {
    /// All tokens in order, ending with `Eof`.
    pub tokens: Vec<Token>,
    /// The statements.
    pub statements: Vec<Stmt>,
}

impl SyntaxTree {
    /// Lexes and parses `text` (file `file`), collecting diagnostics.
    pub fn parse(file: crate::source::FileId, text: &str, diags: &mut Vec<Diagnostic>) -> Self {
        let tokens = crate::lexer::lex(file, text, diags);
        let statements = parse(&tokens, diags);
        SyntaxTree { tokens, statements }
    }

    /// The trivia (whitespace, comments, skipped characters) before token `k`.
    pub fn trivia_before(&self, k: usize) -> Span {
        let t = self.tokens[k].span;
        let start = if k == 0 {
            0
        } else {
            self.tokens[k - 1].span.end
        };
        Span::new(t.file, start, t.start)
    }

    /// Rebuilds the source from the tokens and the trivia between them; equal to the text
    /// the tree was parsed from.
    pub fn to_source(&self, text: &str) -> String {
        let mut out = String::with_capacity(text.len());
        for k in 0..self.tokens.len() {
            let lead = self.trivia_before(k);
            out.push_str(&text[lead.start..lead.end]);
            let s = self.tokens[k].span;
            out.push_str(&text[s.start..s.end]);
        }
        out
    }
}

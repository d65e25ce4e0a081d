//! Syntax tree of a circuit file, every node with its span.

use crate::source::Span;
use crate::units::Dim;

/// A name as written.
#[derive(Clone, Debug, PartialEq)]
pub struct Ident {
    /// The text.
    pub name: String,
    /// Where it is.
    pub span: Span,
}

/// Binary operators.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BinOp {
    /// `+`
    Add,
    /// `-`
    Sub,
    /// `*`
    Mul,
    /// `/`
    Div,
    /// `%` (remainder, for index arithmetic)
    Rem,
    /// `^`
    Pow,
}

/// An expression.
#[derive(Clone, Debug, PartialEq)]
pub enum Expr {
    /// A number with an optional unit: value already scaled to SI.
    Number {
        /// Value in SI units.
        value: f64,
        /// Dimension of the unit written, if any.
        dim: Option<Dim>,
        /// Where the literal and its unit are.
        span: Span,
    },
    /// A string literal.
    Str(String, Span),
    /// A reference to a parameter or loop variable.
    Name(Ident),
    /// A function call such as `sqrt(x)` or `pulse(low = 0 V, high = 1 V, ...)`.
    Call {
        /// Function name.
        name: Ident,
        /// Arguments, positional or named.
        args: Vec<Arg>,
        /// The whole call.
        span: Span,
    },
    /// `name[index]`: an indexed name, meaningful where a node or element name is expected.
    Indexed(Ident, Box<Expr>, Span),
    /// `[a, b, ...]`: a list, meaningful where an analysis takes several names or values.
    List(Vec<Expr>, Span),
    /// `-e`
    Neg(Box<Expr>, Span),
    /// `l op r`
    Binary {
        /// Operator.
        op: BinOp,
        /// Left operand.
        l: Box<Expr>,
        /// Right operand.
        r: Box<Expr>,
        /// The whole expression.
        span: Span,
    },
}

impl Expr {
    /// Where the expression is.
    pub fn span(&self) -> Span {
        match self {
            Expr::Number { span, .. } | Expr::Str(_, span) | Expr::Call { span, .. } => *span,
            Expr::Name(id) => id.span,
            Expr::Neg(_, span)
            | Expr::Binary { span, .. }
            | Expr::Indexed(_, _, span)
            | Expr::List(_, span) => *span,
        }
    }
}

/// A call argument.
#[derive(Clone, Debug, PartialEq)]
pub struct Arg {
    /// `name =` for a named argument.
    pub name: Option<Ident>,
    /// The value.
    pub value: Expr,
}

/// `name` or `name[index]`: a node, or an instance name.
#[derive(Clone, Debug, PartialEq)]
pub struct Indexed {
    /// The base name.
    pub name: Ident,
    /// The index expression, if any.
    pub index: Option<Expr>,
    /// The whole reference.
    pub span: Span,
}

/// `name = value`.
#[derive(Clone, Debug, PartialEq)]
pub struct Assign {
    /// What is set.
    pub name: Ident,
    /// Its value.
    pub value: Expr,
}

/// `pin = node` in an instance's connection list.
#[derive(Clone, Debug, PartialEq)]
pub struct Connection {
    /// The pin (terminal or cell port).
    pub pin: Ident,
    /// The node it connects to.
    pub node: Indexed,
}

/// A statement.
#[derive(Clone, Debug, PartialEq)]
pub enum Stmt {
    /// `param name = expr`
    Param {
        /// Parameter name.
        name: Ident,
        /// Value (the default, inside a cell).
        value: Expr,
    },
    /// `device name : model { key = value, ... }`
    Device {
        /// Card name.
        name: Ident,
        /// The model kind it configures.
        model: Ident,
        /// Parameter values.
        params: Vec<Assign>,
    },
    /// `cell name(port, ...) { body }`
    Cell {
        /// Cell name.
        name: Ident,
        /// Its ports.
        ports: Vec<Ident>,
        /// Its statements.
        body: Vec<Stmt>,
    },
    /// `for var in from..to { body }` (`to` excluded)
    For {
        /// Loop variable.
        var: Ident,
        /// First value.
        from: Expr,
        /// One past the last value.
        to: Expr,
        /// Repeated statements.
        body: Vec<Stmt>,
        /// The `for` header.
        span: Span,
    },
    /// `include "path"`
    Include {
        /// The path as written (relative to the including file).
        path: String,
        /// Where it is.
        span: Span,
    },
    /// `analysis kind { key = value, ... }`
    Analysis {
        /// Which analysis.
        kind: Ident,
        /// Its settings.
        params: Vec<Assign>,
        /// The header.
        span: Span,
    },
    /// `kind name (pin = node, ...) { key = value, ... }`
    Instance {
        /// Element kind, device card or cell.
        kind: Ident,
        /// Instance name (optionally indexed).
        name: Indexed,
        /// Pin connections.
        connections: Vec<Connection>,
        /// Parameter overrides.
        params: Vec<Assign>,
        /// The instance header.
        span: Span,
    },
    /// `variation card.key { distribution = ..., scope = ..., ... }`: a spread of one
    /// numeric key of a device card (see `elaborate::variation`).
    Variation {
        /// The device card.
        card: Ident,
        /// The key of the card that varies.
        key: Ident,
        /// Its settings.
        params: Vec<Assign>,
        /// The header.
        span: Span,
    },
    /// `limit analysis.figure { above = ..., below = ... }`: a specification limit on a figure
    /// the analyses report (for yield in variability runs).
    Limit {
        /// The analysis kind (`transfer`, `ring`, ...).
        analysis: Ident,
        /// The figure's key with its unit suffix (`snm_v`, `frequency_hz`).
        figure: Ident,
        /// Its settings.
        params: Vec<Assign>,
        /// The header.
        span: Span,
    },
    /// `correlation card { keys = [a, b], coefficient = c }`: correlated draws of two varied
    /// keys of one card.
    Correlation {
        /// The device card.
        card: Ident,
        /// Its settings.
        params: Vec<Assign>,
        /// The header.
        span: Span,
    },
}

//! Measured device curves as CSV text with units in the headers, read into typed columns in SI.
//!
//! ```text
//! # Comment lines start with `#`; blank lines are skipped.
//! V_GS (V), V_DS (mV), I_D (uA), direction, L (nm), W (um)
//! 0.5, 50, 1.2, up, 100, 1
//! ```
//!
//! * Columns, in any order, each named once: `V_GS`, `V_DS` and `I_D` (required), `direction`
//!   (`up` or `down`, the sweep direction), `L` and `W` (the device's channel length and width
//!   on that row, so one file can hold several devices), `device` (a name for the row's
//!   device, for one fit per device; the names in order of first appearance are
//!   [`Table::devices`]).
//! * Units are read by the circuit language's own unit parser (`mV`, `uA`, `A/um`, `nm`), and
//!   checked: a voltage column in a voltage, `I_D` in a current or a current per width, `L` and
//!   `W` in a length. `direction` and `device` take no unit; every other column must name one.
//! * `I_D` per width (`A/um`) is multiplied by the row's `W`, or by
//!   [`TableOptions::width_m`] where the file has no `W` column, so every current is in A.
//! * Cells hold plain numbers (the unit is the header's); `nan` and `inf` are refused.
//!
//! Every fault is a [`TableError`] at its 1-based line and column with what to change; one
//! pass collects up to [`MAX_ERRORS`]. Rows stay in file order: grouping into curves and
//! everything numerical is the caller's (this module knows text, not devices).

use crate::units::Dim;
use std::fmt;

/// The most rows one file may hold.
pub const MAX_ROWS: usize = 1_000_000;
/// The most errors one pass reports before it stops.
pub const MAX_ERRORS: usize = 20;

/// What a column holds.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Quantity {
    /// Gate-source voltage.
    Vgs,
    /// Drain-source voltage.
    Vds,
    /// Drain current (or drain current per width).
    Id,
    /// Sweep direction, `up` or `down`.
    Direction,
    /// Channel length.
    Length,
    /// Channel width.
    Width,
    /// The device's name.
    Device,
}

/// Each column's header name and what it holds.
const NAMES: [(&str, Quantity); 7] = [
    ("V_GS", Quantity::Vgs),
    ("V_DS", Quantity::Vds),
    ("I_D", Quantity::Id),
    ("direction", Quantity::Direction),
    ("L", Quantity::Length),
    ("W", Quantity::Width),
    ("device", Quantity::Device),
];

/// The direction of a sweep.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, PartialOrd, Ord)]
pub enum Direction {
    /// Swept towards positive.
    Up,
    /// Swept towards negative.
    Down,
}

impl Direction {
    /// `up` or `down`.
    pub fn name(self) -> &'static str {
        match self {
            Direction::Up => "up",
            Direction::Down => "down",
        }
    }
}

/// One measured point, in SI units.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Row {
    /// 1-based line in the file.
    pub line: usize,
    /// Gate-source voltage (V).
    pub vgs: f64,
    /// Drain-source voltage (V).
    pub vds: f64,
    /// Drain current (A), per-width values already multiplied by the width.
    pub id: f64,
    /// Sweep direction, if the file has the column.
    pub direction: Option<Direction>,
    /// Channel length (m), if the file has the column.
    pub length_m: Option<f64>,
    /// Channel width (m), if the file has the column.
    pub width_m: Option<f64>,
    /// The row's device (index into [`Table::devices`]), if the file has the column.
    pub device: Option<usize>,
}

/// A file's points.
#[derive(Clone, Debug, PartialEq)]
pub struct Table {
    /// The points in file order.
    pub rows: Vec<Row>,
    /// Whether `I_D` was written per width (and multiplied by `W`).
    pub per_width: bool,
    /// The headers as written, in file order.
    pub headers: Vec<String>,
    /// The `device` column's names in order of first appearance (empty without the column).
    pub devices: Vec<String>,
}

/// How a file is read.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct TableOptions {
    /// The width (m) that turns a per-width current into a current where the file has no `W`
    /// column (from a device card, say).
    pub width_m: Option<f64>,
}

/// A located fault in a data file.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct TableError {
    /// 1-based line.
    pub line: usize,
    /// 1-based column (in characters).
    pub column: usize,
    /// What is wrong, lowercase, no full stop.
    pub message: String,
    /// What to change.
    pub help: String,
}

impl fmt::Display for TableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "{}:{}: {}; {}",
            self.line, self.column, self.message, self.help
        )
    }
}

/// One column of the header.
#[derive(Clone, Copy, Debug)]
struct Column {
    quantity: Quantity,
    /// Scale to SI.
    scale: f64,
}

/// Splits a line into cells with the 1-based column where each starts (after spaces).
fn cells(line: &str) -> Vec<(usize, &str)> {
    let mut out = Vec::new();
    let mut start = 0;
    for part in line.split(',') {
        let lead = part.len() - part.trim_start().len();
        let col = line[..start + lead].chars().count() + 1;
        out.push((col, part.trim()));
        start += part.len() + 1;
    }
    out
}

fn err(line: usize, column: usize, message: String, help: impl Into<String>) -> TableError {
    TableError {
        line,
        column,
        message,
        help: help.into(),
    }
}

fn known_names() -> String {
    NAMES
        .iter()
        .map(|n| format!("`{}`", n.0))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The unit a column of `q` is written in, for messages.
fn expected_unit(q: Quantity) -> &'static str {
    match q {
        Quantity::Vgs | Quantity::Vds => "V",
        Quantity::Id => "A (or A/um per width)",
        Quantity::Length | Quantity::Width => "m (such as nm or um)",
        Quantity::Direction | Quantity::Device => "no unit",
    }
}

/// Reads one header cell: its quantity and scale, and whether it is a current per width.
fn header_cell(line: usize, col: usize, cell: &str) -> Result<(Column, bool), TableError> {
    let (name, unit) = match cell.split_once('(') {
        Some((n, rest)) => match rest.trim_end().strip_suffix(')') {
            Some(u) => (n.trim(), Some(u.trim())),
            None => {
                return Err(err(
                    line,
                    col,
                    format!("the header `{cell}` opens a unit it does not close"),
                    "write the unit in parentheses, such as `V_GS (V)`",
                ))
            }
        },
        None => (cell, None),
    };
    let Some(&(canonical, quantity)) = NAMES.iter().find(|n| n.0.eq_ignore_ascii_case(name)) else {
        return Err(err(
            line,
            col,
            format!("unknown column `{name}`"),
            format!("the columns are {}", known_names()),
        ));
    };
    let unit = match (quantity, unit) {
        (Quantity::Direction | Quantity::Device, None) => {
            return Ok((
                Column {
                    quantity,
                    scale: 1.0,
                },
                false,
            ))
        }
        (Quantity::Direction | Quantity::Device, Some(u)) => {
            return Err(err(
                line,
                col,
                format!("the column `{canonical}` takes no unit, but `({u})` is written"),
                format!("write the header as `{canonical}`"),
            ))
        }
        (_, None) | (_, Some("")) => {
            return Err(err(
                line,
                col,
                format!("the column `{canonical}` has no unit"),
                format!(
                    "write its unit in parentheses: `{canonical} ({})`; expected {}",
                    match quantity {
                        Quantity::Id => "A",
                        Quantity::Length | Quantity::Width => "nm",
                        _ => "V",
                    },
                    expected_unit(quantity)
                ),
            ))
        }
        (_, Some(u)) => u,
    };
    let (scale, dim) = crate::values::unit_scale(unit).map_err(|why| {
        err(
            line,
            col,
            format!("`{unit}` is not a unit: {why}"),
            format!("expected {}", expected_unit(quantity)),
        )
    })?;
    let per_width = Dim::CURRENT.per(Dim::LENGTH);
    let (ok, pw) = match quantity {
        Quantity::Vgs | Quantity::Vds => (dim == Dim::VOLTAGE, false),
        Quantity::Id => (dim == Dim::CURRENT || dim == per_width, dim == per_width),
        Quantity::Length | Quantity::Width => (dim == Dim::LENGTH, false),
        Quantity::Direction | Quantity::Device => (false, false),
    };
    if !ok {
        return Err(err(
            line,
            col,
            format!(
                "the column `{canonical}` is in `{unit}`, {}",
                dim.describe()
            ),
            format!("expected {}", expected_unit(quantity)),
        ));
    }
    Ok((Column { quantity, scale }, pw))
}

/// Whether a line carries no data.
fn skipped(line: &str) -> bool {
    let t = line.trim();
    t.is_empty() || t.starts_with('#')
}

/// Reads a data file (see the module doc). On failure, every fault found, in file order.
pub fn parse_table(text: &str, options: &TableOptions) -> Result<Table, Vec<TableError>> {
    let mut lines = text.lines().enumerate().map(|(k, l)| (k + 1, l));
    let Some((hline, header)) = lines.by_ref().find(|(_, l)| !skipped(l)) else {
        return Err(vec![err(
            1,
            1,
            "the file has no header line".into(),
            "start with a header such as `V_GS (V), V_DS (V), I_D (A)`",
        )]);
    };
    let mut errors = Vec::new();
    let mut columns: Vec<Option<Column>> = Vec::new();
    let mut per_width = false;
    let mut headers = Vec::new();
    let mut named = Vec::new();
    for (col, cell) in cells(header) {
        headers.push(cell.to_string());
        let name = cell.split('(').next().unwrap_or("").trim();
        named.extend(
            NAMES
                .iter()
                .filter(|n| n.0.eq_ignore_ascii_case(name))
                .map(|n| n.1),
        );
        match header_cell(hline, col, cell) {
            Ok((c, pw)) => {
                if columns.iter().flatten().any(|o| o.quantity == c.quantity) {
                    errors.push(err(
                        hline,
                        col,
                        format!("the column `{}` is named twice", name_of(c.quantity)),
                        "keep one column per quantity; put each device's rows under one header",
                    ));
                }
                per_width |= pw;
                columns.push(Some(c));
            }
            Err(e) => {
                errors.push(e);
                columns.push(None);
            }
        }
    }
    let find = |q: Quantity| {
        columns
            .iter()
            .position(|c| c.is_some_and(|c| c.quantity == q))
    };
    let end = header.chars().count() + 1;
    for q in [Quantity::Vgs, Quantity::Vds, Quantity::Id] {
        if !named.contains(&q) {
            errors.push(err(
                hline,
                end,
                format!("the header has no `{}` column", name_of(q)),
                format!(
                    "add a column `{} ({})`",
                    name_of(q),
                    if q == Quantity::Id { "A" } else { "V" }
                ),
            ));
        }
    }
    let width_col = find(Quantity::Width);
    if per_width && width_col.is_none() && options.width_m.is_none() {
        let col = find(Quantity::Id).map_or(1, |k| cells(header)[k].0);
        errors.push(err(
            hline,
            col,
            "the current is per width but the file has no `W` column".into(),
            "add a column `W (um)` with each row's device width, give a device card with the \
             width, or write the current in A",
        ));
    }
    if !errors.is_empty() {
        return Err(errors);
    }
    let mut rows = Vec::new();
    let mut devices: Vec<String> = Vec::new();
    for (ln, line) in lines {
        if errors.len() >= MAX_ERRORS {
            break;
        }
        if skipped(line) {
            continue;
        }
        if rows.len() >= MAX_ROWS {
            errors.push(err(
                ln,
                1,
                format!("the file has more than {MAX_ROWS} rows"),
                "split it into several files",
            ));
            break;
        }
        let cs = cells(line);
        if cs.len() != columns.len() {
            let col = cs
                .get(columns.len())
                .map_or(line.chars().count() + 1, |c| c.0);
            errors.push(err(
                ln,
                col,
                format!(
                    "the row has {} cells but the header has {} columns",
                    cs.len(),
                    columns.len()
                ),
                format!("write one value per column: {}", headers.join(", ")),
            ));
            continue;
        }
        let mut row = Row {
            line: ln,
            vgs: 0.0,
            vds: 0.0,
            id: 0.0,
            direction: None,
            length_m: None,
            width_m: None,
            device: None,
        };
        let mut ok = true;
        for ((col, cell), c) in cs.iter().zip(&columns) {
            let c = c.expect("header errors return before rows are read");
            if c.quantity == Quantity::Direction {
                row.direction = match cell.to_ascii_lowercase().as_str() {
                    "up" => Some(Direction::Up),
                    "down" => Some(Direction::Down),
                    _ => {
                        errors.push(err(
                            ln,
                            *col,
                            format!("`{cell}` is not a sweep direction"),
                            "write `up` or `down`",
                        ));
                        ok = false;
                        continue;
                    }
                };
                continue;
            }
            if c.quantity == Quantity::Device {
                if cell.is_empty() {
                    errors.push(err(
                        ln,
                        *col,
                        "the row names no device".into(),
                        "write the device's name, such as `die07`",
                    ));
                    ok = false;
                } else if let Some(k) = devices.iter().position(|d| d == cell) {
                    row.device = Some(k);
                } else {
                    devices.push(cell.to_string());
                    row.device = Some(devices.len() - 1);
                }
                continue;
            }
            let v = match cell.parse::<f64>() {
                Ok(v) if v.is_finite() => v * c.scale,
                _ => {
                    errors.push(err(
                        ln,
                        *col,
                        format!("`{cell}` is not a number"),
                        format!(
                            "write a plain number; the unit is the header's ({})",
                            expected_unit(c.quantity)
                        ),
                    ));
                    ok = false;
                    continue;
                }
            };
            match c.quantity {
                Quantity::Vgs => row.vgs = v,
                Quantity::Vds => row.vds = v,
                Quantity::Id => row.id = v,
                Quantity::Length | Quantity::Width if v <= 0.0 => {
                    errors.push(err(
                        ln,
                        *col,
                        format!("`{cell}` is not a positive {}", name_of(c.quantity)),
                        "a channel's length and width are positive",
                    ));
                    ok = false;
                }
                Quantity::Length => row.length_m = Some(v),
                Quantity::Width => row.width_m = Some(v),
                Quantity::Direction | Quantity::Device => {}
            }
        }
        if ok {
            if per_width {
                row.id *= row.width_m.or(options.width_m).unwrap_or(f64::NAN);
            }
            rows.push(row);
        }
    }
    if rows.is_empty() && errors.is_empty() {
        errors.push(err(
            hline + 1,
            1,
            "the file has a header but no data rows".into(),
            "add one row per measured point under the header",
        ));
    }
    if errors.is_empty() {
        Ok(Table {
            rows,
            per_width,
            headers,
            devices,
        })
    } else {
        Err(errors)
    }
}

fn name_of(q: Quantity) -> &'static str {
    NAMES.iter().find(|n| n.1 == q).map_or("", |n| n.0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn first(text: &str) -> (usize, usize) {
        let e = parse_table(text, &TableOptions::default()).unwrap_err();
        (e[0].line, e[0].column)
    }

    #[test]
    fn units_in_the_headers_are_read_in_si() {
        let t = parse_table(
            "# measured\n\nV_GS (mV), V_DS (V), I_D (uA), direction, L (nm), W (um)\n\
             500, 0.05, 1.5, up, 100, 2\n# a comment between rows\n600, 0.05, 3, DOWN, 100, 2\n",
            &TableOptions::default(),
        )
        .unwrap();
        assert_eq!(t.rows.len(), 2);
        let r = t.rows[0];
        assert_eq!(r.line, 4);
        assert!((r.vgs - 0.5).abs() < 1e-15 && (r.id - 1.5e-6).abs() < 1e-20);
        assert!((r.length_m.unwrap() - 1e-7).abs() < 1e-22);
        assert_eq!(t.rows[1].direction, Some(Direction::Down));
        assert!(!t.per_width);
    }

    #[test]
    fn a_current_per_width_is_multiplied_by_the_width() {
        let t = parse_table(
            "W (um), V_GS (V), V_DS (V), I_D (A/um)\n2, 1, 0.1, 1e-6\n",
            &TableOptions::default(),
        )
        .unwrap();
        assert!(t.per_width);
        assert!((t.rows[0].id - 2e-6).abs() < 1e-20, "{}", t.rows[0].id);
        let text = "V_GS (V), V_DS (V), I_D (uA/um)\n1, 0.1, 3\n";
        let opts = TableOptions {
            width_m: Some(4e-6),
        };
        assert!((parse_table(text, &opts).unwrap().rows[0].id - 12e-6).abs() < 1e-18);
        assert_eq!(first(text), (1, 21));
    }

    #[test]
    fn faults_are_located() {
        // Missing unit, named with the expected one.
        let e = parse_table("V_GS, V_DS (V), I_D (A)\n", &TableOptions::default()).unwrap_err();
        assert_eq!((e[0].line, e[0].column), (1, 1));
        assert!(e[0].help.contains("V_GS (V)"), "{}", e[0].help);
        // A voltage column in amperes.
        assert_eq!(first("V_GS (V), V_DS (A), I_D (A)\n1,1,1\n"), (1, 11));
        // Unknown and duplicate headers.
        assert_eq!(first("V_GS (V), V_DS (V), I_D (A), T (K)\n"), (1, 30));
        assert_eq!(first("V_GS (V), V_DS (V), I_D (A), V_GS (V)\n"), (1, 30));
        // No I_D column: at the end of the header.
        assert_eq!(first("# c\nV_GS (V), V_DS (V)\n"), (2, 19));
        // Wrong cell count, a non-number, a bad direction.
        let h = "V_GS (V), V_DS (V), I_D (A), direction\n";
        assert_eq!(first(&format!("{h}1, 2, 3, up, 4\n")), (2, 14));
        assert_eq!(first(&format!("{h}1, 2\n")), (2, 5));
        assert_eq!(first(&format!("{h}\n1, 2, x3, up\n")), (3, 7));
        assert_eq!(first(&format!("{h}1, 2, nan, up\n")), (2, 7));
        assert_eq!(first(&format!("{h}1, 2, 3, sideways\n")), (2, 10));
        // Empty file, header only.
        assert_eq!(first("# nothing\n"), (1, 1));
        assert_eq!(first("V_GS (V), V_DS (V), I_D (A)\n"), (2, 1));
        // Several faults in one pass.
        let e = parse_table(
            &format!("{h}a,1,1,up\n1,b,1,up\n"),
            &TableOptions::default(),
        )
        .unwrap_err();
        assert_eq!(e.len(), 2);
    }

    #[test]
    fn device_names_are_kept_in_order_of_first_appearance() {
        let t = parse_table(
            "device, V_GS (V), V_DS (V), I_D (A)\nb7, 1, 0.1, 1e-6\na2, 1, 0.1, 2e-6\nb7, 2, 0.1, 3e-6\n",
            &TableOptions::default(),
        )
        .unwrap();
        assert_eq!(t.devices, ["b7", "a2"]);
        let which: Vec<Option<usize>> = t.rows.iter().map(|r| r.device).collect();
        assert_eq!(which, [Some(0), Some(1), Some(0)]);
        assert_eq!(first("device (V), V_GS (V), V_DS (V), I_D (A)\n"), (1, 1));
        assert_eq!(
            first("device, V_GS (V), V_DS (V), I_D (A)\n , 1, 0.1, 1\n"),
            (2, 2)
        );
    }
}

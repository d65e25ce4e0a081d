//! Values written on the command line (`--set`, `--param`, `iv --vgs`), read by the language's
//! own number and unit parser so that `0.8V`, `0.8 V`, `50nm` and `2e12 /cm^2` mean what they
//! mean in a circuit file.
//!
//! Forms:
//! * one value: `0.8V`, `50 nm`, `-0.2 V`, `10`;
//! * a list: `0.6V,0.8V,1V`, or `0.6,0.8,1 V` (a unit on the last item only applies to all);
//! * a range `START:STOP:STEP` with STOP included when the step reaches it: `0.6:1.2:0.2V`
//!   (a unit on the last part only applies to all three), `0.6V:1.2V:0.2V`, `0V:1V:10mV`.
//!
//! Range points are computed in decimal, not by repeated floating-point addition: the point
//! `0.6 + 3 x 0.2` of `0.6:1.2:0.2` is the number written `1.2`, exactly as if it had been typed.

use crate::diag::Diagnostic;
use crate::parser::parse_expression;
use crate::units::Dim;
use crate::{ast::Expr, lexer::lex};

/// One value from the command line.
#[derive(Clone, Debug, PartialEq)]
pub struct CliValue {
    /// The value in the language's syntax, for a parameter override (`12e-1 V`).
    pub text: String,
    /// Its SI value.
    pub si: f64,
    /// Its dimension.
    pub dim: Dim,
}

/// A number literal split into its decimal digits and exponent, with the unit after it.
struct Literal {
    /// The literal as written (sign included).
    number: String,
    /// The unit text after it, trimmed (may be empty).
    unit: String,
}

fn split_literal(part: &str) -> Result<Literal, String> {
    let t = part.trim();
    let bytes = t.as_bytes();
    let mut i = 0;
    if i < bytes.len() && (bytes[i] == b'-' || bytes[i] == b'+') {
        i += 1;
    }
    let digits_start = i;
    i = crate::lexer::number_end(bytes, i);
    if i == digits_start {
        return Err(format!("`{t}` does not start with a number"));
    }
    Ok(Literal {
        number: t[..i].to_string(),
        unit: t[i..].trim().to_string(),
    })
}

/// The scale to SI and dimension of a unit text, read by the language's parser.
pub(crate) fn unit_scale(unit: &str) -> Result<(f64, Dim), String> {
    if unit.is_empty() {
        return Ok((1.0, Dim::NONE));
    }
    let text = format!("1 {unit}");
    let mut diags: Vec<Diagnostic> = Vec::new();
    let toks = lex(0, &text, &mut diags);
    match parse_expression(&toks, &mut diags) {
        Some(Expr::Number { value, dim, .. }) if diags.is_empty() => {
            Ok((value, dim.unwrap_or(Dim::NONE)))
        }
        _ => {
            let why = diags
                .first()
                .map(|d| match &d.help {
                    Some(h) => format!("{}; {h}", d.message),
                    None => d.message.clone(),
                })
                .unwrap_or_else(|| format!("`{unit}` is not a unit"));
            Err(why)
        }
    }
}

/// A decimal literal as `mantissa x 10^exponent`, if it fits in 30 digits.
fn decimal(number: &str) -> Option<(i128, i32)> {
    let (mant, exp) = match number.find(['e', 'E']) {
        Some(k) => (&number[..k], number[k + 1..].parse::<i32>().ok()?),
        None => (number, 0),
    };
    let neg = mant.starts_with('-');
    let mant = mant.trim_start_matches(['-', '+']);
    let (int, frac) = mant.split_once('.').unwrap_or((mant, ""));
    let digits = format!("{int}{frac}");
    let digits = digits.trim_start_matches('0');
    if digits.len() > 30 || exp.abs() > 400 {
        return None;
    }
    let m: i128 = if digits.is_empty() {
        0
    } else {
        digits.parse().ok()?
    };
    Some((if neg { -m } else { m }, exp - frac.len() as i32))
}

/// `m x 10^e`, correctly rounded (through the standard library's decimal parser).
fn from_decimal(m: i128, e: i32) -> f64 {
    format!("{m}e{e}").parse().unwrap_or(f64::NAN)
}

fn finite(si: f64, number: &str, unit: &str) -> Result<f64, String> {
    if si.is_infinite() {
        return Err(format!("`{number}{unit}` is too large to represent"));
    }
    if si.is_nan() {
        return Err(format!("`{number}{unit}` is not a number"));
    }
    let written_zero = decimal(number).is_some_and(|(m, _)| m == 0);
    if !written_zero && (si == 0.0 || si.abs() < f64::MIN_POSITIVE) {
        return Err(format!(
            "`{number}{unit}` is too small to represent (it underflows to 0)"
        ));
    }
    Ok(si)
}

fn value(number: &str, unit: &str) -> Result<CliValue, String> {
    let (scale, dim) = unit_scale(unit)?;
    let v: f64 = number
        .parse()
        .map_err(|_| format!("`{number}` is not a number"))?;
    let si = finite(v * scale, number, unit)?;
    let text = if unit.is_empty() {
        number.to_string()
    } else {
        format!("{number} {unit}")
    };
    Ok(CliValue { text, si, dim })
}

/// Applies the rule "a unit on the last part only applies to every part".
fn share_unit(parts: &mut [Literal]) {
    let n = parts.len();
    if n > 1 && !parts[n - 1].unit.is_empty() && parts[..n - 1].iter().all(|p| p.unit.is_empty()) {
        let u = parts[n - 1].unit.clone();
        for p in &mut parts[..n - 1] {
            p.unit = u.clone();
        }
    }
}

/// One value, a list or a range (see the module doc). A part without a unit is read in
/// `default_unit` when one is given (a flag whose name fixes the quantity), else it is a pure
/// number. At most `max_points` values.
pub fn parse_values(
    text: &str,
    default_unit: Option<&str>,
    max_points: usize,
) -> Result<Vec<CliValue>, String> {
    let range = text.contains(':');
    let raw: Vec<&str> = if range {
        text.split(':').collect()
    } else {
        text.split(',').collect()
    };
    if range && raw.len() != 3 {
        return Err("a range has three parts, START:STOP:STEP, such as 0.6:1.2:0.2V".into());
    }
    let mut parts = raw
        .iter()
        .map(|p| split_literal(p))
        .collect::<Result<Vec<_>, _>>()?;
    // A unit written on the step alone (`0:1:1mV`) applies to all three parts.
    let unit_from_step =
        range && parts[0].unit.is_empty() && parts[1].unit.is_empty() && !parts[2].unit.is_empty();
    share_unit(&mut parts);
    if let Some(u) = default_unit {
        for p in &mut parts {
            if p.unit.is_empty() {
                p.unit = u.to_string();
            }
        }
    }
    let values = parts
        .iter()
        .map(|p| value(&p.number, &p.unit))
        .collect::<Result<Vec<_>, _>>()?;
    if let Some(v) = values.iter().find(|v| v.dim != values[0].dim) {
        return Err(format!(
            "`{}` is {} but `{}` is {}; write every value in one kind of unit",
            values[0].text,
            values[0].dim.describe(),
            v.text,
            v.dim.describe()
        ));
    }
    if !range {
        if values.len() > max_points {
            return Err(format!(
                "{} values are more than the limit of {max_points}",
                values.len()
            ));
        }
        return Ok(values);
    }
    // Parts in one unit are stepped in decimal; parts in different units (`0V:1V:10mV`) in
    // the first part's unit, by floating point.
    let same_unit = parts[0].unit == parts[1].unit && parts[1].unit == parts[2].unit;
    let (start, stop, step) = (&values[0], &values[1], &values[2]);
    if step.si == 0.0 || (stop.si - start.si) / step.si < 0.0 {
        return Err("the step must be non-zero and point from START to STOP".into());
    }
    let count = ((stop.si - start.si) / step.si * (1.0 + 1e-12)).floor();
    if count < 1.0 && stop.si != start.si {
        return Err(format!(
            "the step {} is larger than the range from {} to {}, which leaves one point; a unit \
             written once at the end applies to all three parts: write each part with its \
             unit, such as 0V:1V:10mV",
            step.text, start.text, stop.text
        ));
    }
    // `0:1:1mV` is 0 to 1 mV, two points, although 0 to 1 V in 1 mV steps was surely meant:
    // a prefixed unit written on the step alone that leaves three points or fewer is refused.
    if unit_from_step && count <= 2.0 && unit_scale(&parts[2].unit).is_ok_and(|(k, _)| k != 1.0) {
        return Err(format!(
            "`{text}` reads as {} to {} in steps of {} ({} points: a unit written once at the end \
             applies to all three parts); write each part with its unit, such as 0V:1V:1mV",
            start.text,
            stop.text,
            step.text,
            count as i64 + 1
        ));
    }
    if count.is_nan() || count >= max_points as f64 {
        return Err(format!(
            "the range has {:.3e} points, more than the limit of {max_points}",
            count + 1.0
        ));
    }
    let n = count as i64;
    let unit = &parts[0].unit;
    let (scale, dim) = unit_scale(unit)?;
    let exact = match (
        decimal(&parts[0].number),
        decimal(&parts[1].number),
        decimal(&parts[2].number),
    ) {
        (Some(a), Some(b), Some(h)) if same_unit => Some((a, b, h)),
        _ => None,
    };
    let step_in_first_unit = step.si / scale;
    let mut out = Vec::with_capacity(n as usize + 1);
    for k in 0..=n {
        let (number, v) = match exact.and_then(|(a, _, h)| {
            // Bring start and step to one exponent and step in integers.
            let e = a.1.min(h.1);
            let am = a.0.checked_mul(10i128.checked_pow((a.1 - e) as u32)?)?;
            let hm = h.0.checked_mul(10i128.checked_pow((h.1 - e) as u32)?)?;
            let m = am.checked_add(hm.checked_mul(k as i128)?)?;
            Some((m, e))
        }) {
            Some((m, e)) => (format!("{m}e{e}"), from_decimal(m, e)),
            None => {
                let v = parts[0].number.parse::<f64>().unwrap_or(f64::NAN)
                    + k as f64 * step_in_first_unit;
                (format!("{v:e}"), v)
            }
        };
        let si =
            finite(v * scale, &number, unit).or_else(
                |e| {
                    if v == 0.0 {
                        Ok(0.0)
                    } else {
                        Err(e)
                    }
                },
            )?;
        let text = if unit.is_empty() {
            number
        } else {
            format!("{number} {unit}")
        };
        out.push(CliValue { text, si, dim });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn si(text: &str, unit: Option<&str>) -> Vec<f64> {
        parse_values(text, unit, 1000)
            .unwrap()
            .iter()
            .map(|v| v.si)
            .collect()
    }

    #[test]
    fn ranges_land_on_the_written_decimals() {
        assert_eq!(si("0.6:1.2:0.2V", None), vec![0.6, 0.8, 1.0, 1.2]);
        assert_eq!(si("0:1:0.1", Some("V"))[3], 0.3);
        assert_eq!(si("600:1200:200 mV", None), vec![0.6, 0.8, 1.0, 1.2]);
        assert_eq!(si("1.2:0.6:-0.2V", None), vec![1.2, 1.0, 0.8, 0.6]);
        let v = parse_values("0.6:1.2:0.2V", None, 10).unwrap();
        assert_eq!(v[3].dim, Dim::VOLTAGE);
        assert_eq!(v[3].text, "12e-1 V");
    }

    #[test]
    fn lists_and_units() {
        // As in circuit files: the number times the prefix's scale.
        assert_eq!(si("50nm,100nm", None), vec![50.0 * 1e-9, 100.0 * 1e-9]);
        assert_eq!(si("0.6,0.8,1 V", None), vec![0.6, 0.8, 1.0]);
        assert_eq!(si("0.05,1", Some("V")), vec![0.05, 1.0]);
        assert_eq!(parse_values("3", None, 10).unwrap()[0].dim, Dim::NONE);
        assert_eq!(
            parse_values("2e12 /cm^2", None, 10).unwrap()[0].dim,
            Dim::PER_AREA
        );
    }

    #[test]
    fn refusals() {
        assert!(parse_values("1e-400V", None, 10).is_err());
        assert!(parse_values("1e400", None, 10).is_err());
        assert!(parse_values("0:1:1e-9", None, 1_000_000).is_err());
        assert!(parse_values("1V,2nm", None, 10).is_err());
        assert!(parse_values("0V:1nm:1V", None, 10).is_err());
        assert!(parse_values("0:1", None, 10).is_err());
        assert!(parse_values("0:1:0", None, 10).is_err());
        assert!(parse_values("1:0:0.1", None, 10).is_err());
        assert!(parse_values("0.8 Vs", None, 10).is_err());
        assert!(parse_values("abc", None, 10).is_err());
        // A unit on the step alone would make the whole range 0 to 1 mV in 10 mV steps.
        assert!(parse_values("0:1:10mV", None, 10).is_err());
        // ... and one that leaves two or three points (0 to 1 mV in 1 mV or 0.5 mV steps) is
        // refused too; without a prefix (0 to 1 V in 0.5 V steps) it is what was meant.
        assert!(parse_values("0:1:1mV", None, 10).is_err());
        assert!(parse_values("0:1:0.5mV", None, 10).is_err());
        assert_eq!(si("0:1:0.5V", None), vec![0.0, 0.5, 1.0]);
        assert_eq!(si("0:1:0.25mV", None).len(), 5);
        assert_eq!(si("0V:1V:500mV", None), vec![0.0, 0.5, 1.0]);
        assert_eq!(si("0.6V:1200mV:0.2V", None).len(), 4);
    }
}

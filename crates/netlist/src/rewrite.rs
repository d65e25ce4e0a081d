//! Text rewrites that keep a file as its author wrote it: a device card's keys set to new
//! values, every other byte (comments, layout, other statements) unchanged.
//!
//! The parser keeps each token's span, so a key the card already assigns has its value
//! expression replaced in place, and a key it does not assign is appended after the card's
//! last assignment (`, key = value`), which is valid on one line and across lines alike.
//!
//! ```
//! use lamina_netlist::rewrite::set_card_keys;
//! let text = "# demo\ndevice n : sheet_fet {\n    channel = MoS2\n    electron_mobility = 40 cm^2/(V s)\n}\n";
//! let out = set_card_keys(text, "n", &[
//!     ("electron_mobility".into(), "52 cm^2/(V s)".into()),
//!     ("source_resistance".into(), "300 Ohm um".into()),
//! ]).unwrap();
//! assert!(out.contains("electron_mobility = 52 cm^2/(V s), source_resistance = 300 Ohm um\n}"));
//! assert!(out.starts_with("# demo\n"));
//! ```

use crate::ast::Stmt;
use crate::parser::SyntaxTree;
use crate::source::Sources;

/// Whether `text` defines the device card `card` at its top level.
pub fn defines_card(text: &str, card: &str) -> bool {
    let mut sources = Sources::new();
    let file = sources.add("card", text);
    let mut diags = Vec::new();
    let tree = SyntaxTree::parse(file, text, &mut diags);
    tree.statements
        .iter()
        .any(|s| matches!(s, Stmt::Device { name, .. } if name.name == card))
}

/// `text` with the top-level device card `card`'s keys set: each `(key, value)` replaces the
/// value the card assigns to `key` (every assignment of it), or is appended to the card when
/// it assigns none. Values are written as given (the language's syntax, unit included).
/// Fails when the text does not parse or defines no card of that name.
pub fn set_card_keys(
    text: &str,
    card: &str,
    values: &[(String, String)],
) -> Result<String, String> {
    let mut sources = Sources::new();
    let file = sources.add("card", text);
    let mut diags = Vec::new();
    let tree = SyntaxTree::parse(file, text, &mut diags);
    if let Some(d) = diags.first() {
        let (line, col) = sources.line_column(file, d.span.start);
        return Err(format!(
            "the file does not parse at {line}:{col}: {}",
            d.message
        ));
    }
    let Some((model, params)) = tree.statements.iter().find_map(|s| match s {
        Stmt::Device {
            name,
            model,
            params,
        } if name.name == card => Some((model, params)),
        _ => None,
    }) else {
        return Err(format!("the file defines no device card `{card}`"));
    };
    // Edits as (start, end, replacement), applied from the back so earlier spans stay valid.
    let mut edits: Vec<(usize, usize, String)> = Vec::new();
    let mut appended = String::new();
    for (key, value) in values {
        let mut found = false;
        for a in params.iter().filter(|a| a.name.name == *key) {
            let s = a.value.span();
            edits.push((s.start, s.end, value.clone()));
            found = true;
        }
        if !found {
            if params.is_empty() && appended.is_empty() {
                appended.push_str(&format!(" {key} = {value}"));
            } else {
                appended.push_str(&format!(", {key} = {value}"));
            }
        }
    }
    if !appended.is_empty() {
        let at = match params.last() {
            Some(a) => a.value.span().end,
            None => {
                let from = model.span.end;
                text[from..]
                    .find('{')
                    .map(|k| from + k + 1)
                    .ok_or_else(|| format!("the card `{card}` has no `{{`"))?
            }
        };
        edits.push((at, at, appended));
    }
    edits.sort_by(|a, b| b.0.cmp(&a.0).then(b.1.cmp(&a.1)));
    let mut out = text.to_string();
    for (start, end, with) in edits {
        out.replace_range(start..end, &with);
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    const CARD: &str = "# keep me\ndevice n : sheet_fet { channel = MoS2, insulator = hBN, insulator_layers = 10 } # tail\ndevice p : sheet_fet {\n  channel = WSe2\n}\n";

    #[test]
    fn replaces_in_place_and_keeps_everything_else() {
        let out = set_card_keys(CARD, "n", &[("insulator_layers".into(), "12".into())]).unwrap();
        assert_eq!(
            out,
            CARD.replace("insulator_layers = 10", "insulator_layers = 12")
        );
    }

    #[test]
    fn appends_a_key_the_card_does_not_assign() {
        let out = set_card_keys(
            CARD,
            "p",
            &[("hole_mobility".into(), "30 cm^2/(V s)".into())],
        )
        .unwrap();
        assert!(
            out.contains("channel = WSe2, hole_mobility = 30 cm^2/(V s)\n}"),
            "{out}"
        );
        let empty = set_card_keys(
            "device e : sheet_fet { }\n",
            "e",
            &[("width".into(), "1 um".into())],
        )
        .unwrap();
        assert_eq!(empty, "device e : sheet_fet { width = 1 um }\n");
    }

    #[test]
    fn refuses_an_unknown_card_and_text_that_does_not_parse() {
        assert!(set_card_keys(CARD, "q", &[]).unwrap_err().contains("`q`"));
        assert!(set_card_keys("device n : { = }", "n", &[])
            .unwrap_err()
            .contains("1:"));
        assert!(defines_card(CARD, "p") && !defines_card(CARD, "q"));
    }
}

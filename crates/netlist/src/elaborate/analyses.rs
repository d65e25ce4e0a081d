//! Analyses: the settings each analysis takes, checked with the circuit.

use super::{AnalysisDecl, Elaborator, Frame, Setting, SettingKind, SettingValue};
use crate::ast::*;
use crate::diag::{did_you_mean, Diagnostic, ErrorKind};
use crate::source::Span;

/// Analyses the language knows, with the settings each accepts.
pub const ANALYSES: &[(&str, &[(&str, SettingKind)])] = &[
    ("operating_point", &[]),
    (
        "transfer",
        &[
            ("source", SettingKind::Name),
            ("output", SettingKind::Name),
            ("from", SettingKind::Number),
            ("to", SettingKind::Number),
            ("step", SettingKind::Number),
        ],
    ),
    (
        "delay",
        &[
            ("from", SettingKind::Name),
            ("to", SettingKind::Name),
            ("stop", SettingKind::Number),
        ],
    ),
    (
        "ring",
        &[
            ("nodes", SettingKind::Name),
            ("stages", SettingKind::Number),
            ("supply", SettingKind::Name),
            ("integrator", SettingKind::Name),
        ],
    ),
];

impl<'s> Elaborator<'s> {
    pub(super) fn analysis(
        &mut self,
        kind: &Ident,
        params: &[Assign],
        span: Span,
        frames: &[Frame],
    ) {
        let Some((_, keys)) = ANALYSES.iter().find(|(k, _)| *k == kind.name) else {
            let mut d = Diagnostic::new(
                ErrorKind::Unknown,
                kind.span,
                format!("no analysis called `{}`", kind.name),
            );
            if let Some(h) = did_you_mean(&kind.name, ANALYSES.iter().map(|a| a.0)) {
                d = d.with_help(h);
            }
            self.diags.push(d);
            return;
        };
        let refs: Vec<&Frame> = frames.iter().collect();
        let mut settings = Vec::new();
        for a in params {
            let Some(&(_, setting_kind)) = keys.iter().find(|(k, _)| *k == a.name.name) else {
                let mut d = Diagnostic::new(
                    ErrorKind::Unknown,
                    a.name.span,
                    format!("analysis `{}` has no setting `{}`", kind.name, a.name.name),
                );
                let names: Vec<&str> = keys.iter().map(|k| k.0).collect();
                d = d.with_help(match did_you_mean(&a.name.name, names.iter().copied()) {
                    Some(h) => h,
                    None if names.is_empty() => "it takes no settings".to_string(),
                    None => format!("its settings are: {}", names.join(", ")),
                });
                self.diags.push(d);
                continue;
            };
            let value = match (setting_kind, &a.value) {
                (SettingKind::Name, Expr::Name(id)) => SettingValue::Name(id.name.clone()),
                (SettingKind::Name, Expr::Indexed(id, index, _)) => {
                    match self.eval_int(index, &refs) {
                        Some(i) => SettingValue::Name(format!("{}[{i}]", id.name)),
                        None => continue,
                    }
                }
                (SettingKind::Name, Expr::Str(s, _)) => SettingValue::Text(s.clone()),
                (SettingKind::Name, e) => {
                    self.err(
                        ErrorKind::BadValue,
                        e.span(),
                        format!("`{}` takes a name, such as `out`", a.name.name),
                    );
                    continue;
                }
                (SettingKind::Number, e) => match self.eval(e, &refs) {
                    Some(q) => SettingValue::Number(q.v, q.dim),
                    None => continue,
                },
            };
            settings.push(Setting {
                name: a.name.name.clone(),
                value,
                span: a.value.span(),
            });
        }
        self.summary.analyses.push(kind.name.clone());
        self.analyses.push(AnalysisDecl {
            kind: kind.name.clone(),
            settings,
            span,
        });
    }
}

//! `lamina sweep`: a file's analyses over a grid of parameter values.

use super::Common;
use crate::design;
use crate::error::JobError;
use crate::out;
use crate::output::{ensure_dir, write_whole as write_file, OutputSet};
use crate::sweep::{axis_key, axis_label, columns, label, pretty, Axis, Row};
use std::path::{Path, PathBuf};

/// Flags of `lamina sweep`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Circuit file (`.lam`) with its analyses.
    pub file: PathBuf,
    /// A swept top-level parameter: `name=LIST` or `name=START:STOP:STEP`, values with units as
    /// in circuit files (`vdd=0.6:1.2:0.2V`; repeatable; the grid is every combination, first
    /// parameter slowest).
    #[arg(long = "param", value_name = "NAME=VALUES", required = true)]
    pub param: Vec<String>,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        param,
        common: Common { set, json, out },
    } = a;
    let set_out = OutputSet::begin_opt(out.as_deref())?;
    let sets = design::parse_sets(&set)?;
    let axes: Vec<crate::sweep::Axis> = param
        .iter()
        .map(|p| crate::sweep::parse_axis(p))
        .collect::<Result<_, _>>()?;
    crate::sweep::check_axes(&axes, &sets)?;
    // Check the file once, at the grid's first point, so that a broken file or a value
    // of the wrong dimension is reported once and not per point. A first point that is
    // refused only for its own values (the file loads without them) is a failed row instead.
    let mut first = sets.clone();
    first.extend(axes.iter().map(|a| (a.name.clone(), a.texts[0].clone())));
    if let Err(e) = design::load(&file, &first) {
        if matches!(e, JobError::Usage(_)) || design::load(&file, &sets).is_err() {
            return Err(e);
        }
    }
    let rows = crate::sweep::run_sweep(&file, &sets, &axes, true, set_out.is_some());
    if let Some(set) = set_out {
        write_sweep(set.dir(), &axes, &rows).map_err(JobError::Io)?;
        set.commit()?;
    }
    let keys = columns(&rows);
    if json {
        let items: Vec<serde_json::Value> = rows
            .iter()
            .map(|r| {
                let mut m = serde_json::Map::new();
                for (a, (_, v)) in axes.iter().zip(&r.point) {
                    m.insert(axis_key(a), serde_json::json!(v));
                }
                for (k, v) in &r.figures {
                    m.insert(k.clone(), serde_json::json!(v));
                }
                if let Some(e) = &r.error {
                    m.insert("error".into(), serde_json::json!(e));
                }
                serde_json::Value::Object(m)
            })
            .collect();
        out!(
            "{}",
            serde_json::json!({
                "rows": items,
                "caution": super::CAUTION,
            })
        );
    } else {
        print_table(&axes, &keys, &rows);
    }
    let failed: Vec<&crate::sweep::Row> = rows.iter().filter(|r| r.error.is_some()).collect();
    match failed.first() {
        None => Ok(()),
        Some(r) => Err(JobError::Analysis(format!(
            "{} of {} points failed (their rows say why); the first: {}",
            failed.len(),
            rows.len(),
            r.error.as_deref().unwrap_or("")
        ))),
    }
}

/// The rows as a table: one column per swept parameter and per figure any row has, each
/// headed by its quantity and unit and at least two spaces wide apart; a failed point shows
/// its reason in the last column, a figure a point could not measure shows `-`.
fn print_table(axes: &[Axis], keys: &[String], rows: &[Row]) {
    let mut header: Vec<String> = axes.iter().map(axis_label).collect();
    header.extend(keys.iter().map(|k| label(k)));
    let cells: Vec<Vec<String>> = rows
        .iter()
        .map(|r| {
            let mut c: Vec<String> = r.point.iter().map(|(_, v)| number(*v)).collect();
            for k in keys {
                c.push(
                    r.figures
                        .iter()
                        .find(|(n, _)| n == k)
                        .map_or("-".to_string(), |(_, v)| number(*v)),
                );
            }
            c
        })
        .collect();
    let widths: Vec<usize> = (0..header.len())
        .map(|j| {
            cells
                .iter()
                .map(|c| c[j].len())
                .chain([header[j].len()])
                .max()
                .unwrap_or(0)
        })
        .collect();
    let line = |c: &[String]| -> String {
        c.iter()
            .zip(&widths)
            .map(|(s, w)| format!("{s:>w$}"))
            .collect::<Vec<_>>()
            .join("  ")
    };
    out!("{}  error", line(&header));
    for (r, c) in rows.iter().zip(&cells) {
        match &r.error {
            Some(e) => out!("{}  {e}", line(c)),
            None => out!("{}  -", line(c)),
        }
    }
}

/// A number in a table: six significant digits, never `-0`.
fn number(v: f64) -> String {
    let v = if v == 0.0 { 0.0 } else { v };
    format!("{v:.6e}")
}

/// Sweep rows as CSV, each figure plotted against the first parameter (one curve per
/// combination of the others), and the family of transfer curves (one per point).
pub(crate) fn write_sweep(dir: &Path, axes: &[Axis], rows: &[Row]) -> Result<(), String> {
    ensure_dir(dir)?;
    let keys = columns(rows);
    let mut text = axes
        .iter()
        .map(axis_key)
        .chain(keys.iter().cloned())
        .chain(["error".to_string()])
        .map(|h| csv_field(&h))
        .collect::<Vec<_>>()
        .join(",");
    text.push('\n');
    for r in rows {
        let mut cells: Vec<String> = r.point.iter().map(|(_, v)| format!("{v:e}")).collect();
        for k in &keys {
            cells.push(
                r.figures
                    .iter()
                    .find(|(n, _)| n == k)
                    .map_or(String::new(), |(_, v)| format!("{v:e}")),
            );
        }
        cells.push(csv_field(r.error.as_deref().unwrap_or("")));
        text.push_str(&cells.join(","));
        text.push('\n');
    }
    write_file(&dir.join("sweep.csv"), text.as_bytes())?;
    let Some(first) = axes.first() else {
        return Ok(());
    };
    let legend = |r: &Row, from: usize| -> String {
        axes.iter()
            .zip(&r.point)
            .skip(from)
            .map(|(a, (n, v))| format!("{n} = {}", crate::plot::engineering(*v, &a.dim.unit())))
            .collect::<Vec<_>>()
            .join(", ")
    };
    let mut stems = Stems::default();
    for k in &keys {
        let mut series: Vec<(String, Vec<(f64, f64)>)> = Vec::new();
        for r in rows.iter().filter(|r| r.error.is_none()) {
            let name = legend(r, 1);
            let name = if name.is_empty() { label(k) } else { name };
            if let Some((_, v)) = r.figures.iter().find(|(n, _)| n == k) {
                match series.iter_mut().find(|(l, _)| *l == name) {
                    Some((_, pts)) => pts.push((r.point[0].1, *v)),
                    None => series.push((name, vec![(r.point[0].1, *v)])),
                }
            }
        }
        let what = pretty(k);
        crate::plot::curves(
            &dir.join(stems.unique(k)),
            &format!(
                "{} against {}",
                what.split(" (").next().unwrap_or(&what),
                first.name
            ),
            &axis_label(first),
            &what,
            &series,
        )?;
    }
    // Families of curves: one figure per family, one curve per point that kept it.
    let mut families: Vec<(&str, &str, String, Vec<Named>)> = Vec::new();
    for r in rows.iter().filter(|r| r.error.is_none()) {
        for c in &r.curves {
            let series = (legend(r, 0), c.points.clone());
            match families.iter_mut().find(|f| f.2 == c.family) {
                Some(f) => f.3.push(series),
                None => families.push((c.x_desc, c.y_desc, c.family.clone(), vec![series])),
            }
        }
    }
    for (x_desc, y_desc, family, series) in &families {
        let stem = stems.unique(&format!("{family} family"));
        let mut csv = String::from("point,x,y\n");
        for (name, pts) in series {
            for (x, y) in pts {
                csv.push_str(&format!("{},{x:e},{y:e}\n", csv_field(name)));
            }
        }
        write_file(&dir.join(format!("{stem}.csv")), csv.as_bytes())?;
        // A figure stays readable with up to a dozen curves: evenly chosen ones beyond that
        // (the CSV has them all).
        let shown: Vec<(String, Vec<(f64, f64)>)> = if series.len() > 12 {
            (0..12)
                .map(|k| series[k * (series.len() - 1) / 11].clone())
                .collect()
        } else {
            series.clone()
        };
        crate::plot::curves(&dir.join(&stem), family, x_desc, y_desc, &shown)?;
    }
    Ok(())
}

/// A named curve.
type Named = (String, Vec<(f64, f64)>);

/// A CSV field, quoted when it holds a comma, a quote or a line break.
pub(crate) fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// File stems for keys: letters, digits and `_` kept, other characters as `_`, and a number
/// appended when two keys map to one stem (`out[3]_v` and `out_3__v` cannot overwrite each
/// other's plots).
#[derive(Default)]
pub(crate) struct Stems(std::collections::HashSet<String>);

impl Stems {
    pub(crate) fn unique(&mut self, key: &str) -> String {
        let base: String = key
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '_' {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        let mut stem = base.clone();
        let mut k = 2;
        while !self.0.insert(stem.clone()) {
            stem = format!("{base}-{k}");
            k += 1;
        }
        stem
    }
}

#[cfg(test)]
mod tests {
    use super::Stems;
    use crate::sweep::{label, pretty};

    #[test]
    fn names_that_differ_in_punctuation_get_their_own_files() {
        let mut s = Stems::default();
        let a = s.unique("operating_point.out[3]_v");
        let b = s.unique("operating_point.out_3__v");
        assert_ne!(a, b);
        assert!(!a.contains('[') && !a.contains('.'));
    }

    #[test]
    fn node_columns_are_named_in_our_own_way() {
        assert_eq!(label("operating_point.out[3]_v"), "node out[3] (V)");
        assert_eq!(label("ring.frequency_hz"), "ring.frequency (Hz)");
        assert_eq!(label("transfer.gain_max"), "transfer.gain_max");
        assert_eq!(pretty("transfer.vm_v"), "transfer V_M (V)");
        assert_eq!(
            pretty("ring.energy_per_cycle_j"),
            "ring energy per cycle (J)"
        );
    }
}

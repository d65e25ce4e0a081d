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
    /// Run only shard K of N of the grid's points (`[floor((K-1) P / N), floor(K P / N))` of
    /// P points, in grid order) and write the partial result (`DIR/part.json` with `--out
    /// DIR`, else JSON on stdout), for `lamina merge` to put together.
    #[arg(long, value_name = "K/N")]
    pub shard: Option<String>,
    /// The shard of this task of a Slurm job array submitted as `--array=0-(N-1)`: K =
    /// SLURM_ARRAY_TASK_ID + 1 (the index counts from 0), N = SLURM_ARRAY_TASK_COUNT.
    #[arg(long, conflicts_with = "shard")]
    pub shard_from_env: bool,
    /// `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub common: Common,
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file,
        param,
        shard,
        shard_from_env,
        common: Common { set, json, out },
    } = a;
    let shard = crate::cluster::resolve_shard(shard.as_deref(), shard_from_env)?;
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
    let design = match design::load(&file, &first) {
        Ok(d) => d,
        Err(e) => {
            if matches!(e, JobError::Usage(_)) {
                return Err(e);
            }
            design::load(&file, &sets).map_err(|_| e)?
        }
    };
    let total: usize = axes.iter().map(|a| a.values.len()).product();
    if let Some((k, n)) = shard {
        // A shard keeps the curves whatever its flags, so a merge can draw the families.
        let range = crate::montecarlo::shard_range(k, n, total);
        let rows = crate::sweep::run_sweep(&file, &sets, &axes, range.clone(), true, true);
        let part = SweepPart {
            lamina_version: env!("CARGO_PKG_VERSION").to_string(),
            inputs_hash: crate::sweep::inputs_hash(&design, &sets, &param),
            file: file.display().to_string(),
            params: param,
            points: total,
            shard: k,
            shards: n,
            rows,
        };
        let text = serde_json::to_string(&part.to_json()).unwrap_or_default();
        let what = format!("points {}..{} of {total}", range.start, range.end);
        return super::cluster::emit_part(set_out, &text, (k, n), &what);
    }
    let rows = crate::sweep::run_sweep(&file, &sets, &axes, 0..total, true, set_out.is_some());
    report(&axes, &rows, json, set_out)
}

/// The report of a sweep's rows (in grid order): the `--out` files, then the table or JSON,
/// and an error when a point failed. The sweep on one machine and `lamina merge` both end
/// here, so a merge gives the same output.
pub(crate) fn report(
    axes: &[Axis],
    rows: &[Row],
    json: bool,
    set_out: Option<OutputSet>,
) -> Result<(), JobError> {
    if let Some(set) = set_out {
        write_sweep(set.dir(), axes, rows).map_err(JobError::Io)?;
        set.commit()?;
    }
    let keys = columns(rows);
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
        print_table(axes, &keys, rows);
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
    let widths = super::column_widths(&header, &cells);
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
        // A positive axis spanning a factor of 20 or more (a length from 10 nm to 1 µm, say)
        // reads better on a logarithmic scale.
        let xs = rows.iter().map(|r| r.point[0].1);
        let (lo, hi) = xs.fold((f64::INFINITY, 0.0f64), |(l, h), v| (l.min(v), h.max(v)));
        let mut x_axis = crate::plot::Axis::described(&axis_label(first));
        x_axis.log = lo > 0.0 && hi >= 20.0 * lo;
        crate::plot::curves_on(
            &dir.join(stems.unique(k)),
            &format!(
                "{} against {}",
                what.split(" (").next().unwrap_or(&what),
                first.name
            ),
            x_axis,
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

/// The file a sweep shard's `--out` directory holds.
pub const PART_FILE: &str = "part.json";

/// The version of the sweep part format; a merge takes only parts of this one.
pub const PART_FORMAT: u64 = 1;

/// The partial result of one shard of a sweep.
///
/// As JSON (`part.json`, or a shard's stdout): `format` ([`PART_FORMAT`]), `kind` (`sweep`),
/// `lamina_version`, `inputs_hash` ([`crate::sweep::inputs_hash`]), `file` (for people; not
/// checked), `params` (the `--param` flags as given), `points` (of the whole grid), `shard`
/// (K), `shards` (N), `range` (`[first, end)` of the grid's points) and `rows`, each with its
/// `index` in the grid, `point` and `figures` as `[key, value]` pairs, `error` (or null) and
/// `curves`; numbers as text that reads back to the same bits, as in the Monte Carlo parts
/// ([`super::montecarlo_merge`]).
#[derive(Clone, Debug, PartialEq)]
pub struct SweepPart {
    /// Lamina's version that ran it.
    pub lamina_version: String,
    /// [`crate::sweep::inputs_hash`] of its inputs.
    pub inputs_hash: String,
    /// The circuit file as given on the command line.
    pub file: String,
    /// The `--param` flags as given.
    pub params: Vec<String>,
    /// Points of the whole grid.
    pub points: usize,
    /// K, from 1.
    pub shard: usize,
    /// N.
    pub shards: usize,
    /// Its rows, in grid order.
    pub rows: Vec<Row>,
}

impl SweepPart {
    /// The part as JSON (see the type's documentation).
    pub fn to_json(&self) -> serde_json::Value {
        use super::montecarlo_merge::{curves_json, pairs};
        let range = crate::montecarlo::shard_range(self.shard, self.shards, self.points);
        let rows: Vec<serde_json::Value> = self
            .rows
            .iter()
            .zip(range.clone())
            .map(|(r, index)| {
                serde_json::json!({
                    "index": index, "point": pairs(&r.point), "figures": pairs(&r.figures),
                    "error": r.error, "curves": curves_json(&r.curves),
                })
            })
            .collect();
        serde_json::json!({
            "format": PART_FORMAT,
            "kind": "sweep",
            "lamina_version": self.lamina_version,
            "inputs_hash": self.inputs_hash,
            "file": self.file,
            "params": self.params,
            "points": self.points,
            "shard": self.shard,
            "shards": self.shards,
            "range": [range.start, range.end],
            "rows": rows,
        })
    }

    /// Reads a part, checking its shape and that its rows are exactly its shard's points.
    pub fn from_json(v: &serde_json::Value) -> Result<SweepPart, String> {
        use super::montecarlo_merge::{curves_of_json, pairs_of};
        use serde_json::Value;
        let field = |k: &str| v.get(k).ok_or_else(|| format!("no `{k}`"));
        let text = |k: &str| -> Result<String, String> {
            field(k)?
                .as_str()
                .map(str::to_string)
                .ok_or_else(|| format!("`{k}` is not text"))
        };
        let count = |x: &Value, k: &str| -> Result<usize, String> {
            x.as_u64()
                .and_then(|n| usize::try_from(n).ok())
                .ok_or_else(|| format!("`{k}` is not a whole number"))
        };
        if v.get("kind").and_then(Value::as_str) != Some("sweep") {
            return Err("its `kind` is not `sweep`".into());
        }
        let params = field("params")?
            .as_array()
            .ok_or("`params` is not a list")?
            .iter()
            .map(|p| {
                p.as_str()
                    .map(str::to_string)
                    .ok_or("`params` holds a non-text value")
            })
            .collect::<Result<Vec<_>, _>>()?;
        let mut indices = Vec::new();
        let rows = field("rows")?
            .as_array()
            .ok_or("`rows` is not a list")?
            .iter()
            .map(|r| {
                let index = count(r.get("index").unwrap_or(&Value::Null), "index")?;
                indices.push(index);
                let at = |e: String| format!("row {index}: {e}");
                let error = match r.get("error") {
                    Some(Value::String(e)) => Some(e.clone()),
                    Some(Value::Null) => None,
                    _ => return Err(at("`error` is neither text nor null".into())),
                };
                Ok(Row {
                    point: pairs_of(r.get("point"), "point").map_err(at)?,
                    figures: pairs_of(r.get("figures"), "figures").map_err(at)?,
                    curves: curves_of_json(r.get("curves"), &format!("row {index}"))?,
                    error,
                })
            })
            .collect::<Result<Vec<_>, String>>()?;
        let part = SweepPart {
            lamina_version: text("lamina_version")?,
            inputs_hash: text("inputs_hash")?,
            file: text("file")?,
            params,
            points: count(field("points")?, "points")?,
            shard: count(field("shard")?, "shard")?,
            shards: count(field("shards")?, "shards")?,
            rows,
        };
        crate::cluster::check_shard(part.shard, part.shards)?;
        let want: Vec<usize> =
            crate::montecarlo::shard_range(part.shard, part.shards, part.points).collect();
        if indices != want {
            return Err(format!(
                "shard {}/{} of {} points must hold points {}..{} in order, but holds {} rows",
                part.shard,
                part.shards,
                part.points,
                want.first().copied().unwrap_or(0),
                want.last().map_or(0, |l| l + 1),
                indices.len()
            ));
        }
        Ok(part)
    }
}

/// Puts sweep parts (read from `names`) back together and reports as the whole sweep does:
/// the parts must be of one Lamina version, one set of inputs (circuit files, `--set` and
/// `--param` values) and one split, each shard once.
pub(crate) fn merge(
    parts: Vec<SweepPart>,
    names: &[String],
    json: bool,
    set_out: Option<OutputSet>,
) -> Result<(), JobError> {
    let Some(first) = parts.first() else {
        return Err(JobError::Usage("give at least one part".into()));
    };
    for (p, name) in parts.iter().zip(names).skip(1) {
        let differs = |what: &str, a: &str, b: &str| {
            JobError::Invalid(format!(
                "error: {name} has {what} {b}, but {} has {what} {a}: the parts are not of one \
                 sweep",
                names[0]
            ))
        };
        if p.params != first.params {
            return Err(differs(
                "--param",
                &first.params.join(" "),
                &p.params.join(" "),
            ));
        }
        if p.inputs_hash != first.inputs_hash {
            return Err(differs(
                "inputs hash (circuit files and --set values)",
                &first.inputs_hash,
                &p.inputs_hash,
            ));
        }
    }
    let axes: Vec<Axis> = first
        .params
        .iter()
        .map(|p| crate::sweep::parse_axis(p))
        .collect::<Result<_, _>>()?;
    let points = first.points;
    let shards: Vec<(usize, usize)> = parts.iter().map(|p| (p.shard, p.shards)).collect();
    let order = crate::cluster::shard_order(&shards, names, |k, n| {
        let r = crate::montecarlo::shard_range(k, n, points);
        format!("points {}..{}", r.start, r.end)
    })?;
    let mut parts: Vec<Option<SweepPart>> = parts.into_iter().map(Some).collect();
    let rows: Vec<Row> = order
        .into_iter()
        .filter_map(|i| parts[i].take())
        .flat_map(|p| p.rows)
        .collect();
    report(&axes, &rows, json, set_out)
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

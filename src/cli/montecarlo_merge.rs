//! `lamina montecarlo-merge`: the partial results of `lamina montecarlo --shard K/N` put back
//! together into exactly the report and files of the run on one machine; and the part format
//! those shards write.
//!
//! # The part format
//! One JSON object (`part.json` in a shard's `--out` directory, or a shard's stdout):
//! `format` ([`FORMAT`]), `lamina_version`, `inputs_hash` ([`crate::montecarlo::inputs_hash`]),
//! `file` (for people; not checked), `seed`, `runs`, `specs`, `shard` (K), `shards` (N),
//! `samples` (`[first, end)`) and `rows`, each row as the run holds it: `sample`, `draws` and
//! `figures` as `[key, value]` pairs in their order, `error` (or null) and `curves` (the
//! samples below [`super::montecarlo::FAMILY_CURVES`], so a merge can draw the families).
//! Every number is a string in Rust's shortest round-trip form (`0.1`, `1e-20`, `NaN`,
//! `inf`), read back by the standard library's correctly rounded parser: serde_json writes
//! the shortest round-trip form too, but its default reader may land one unit in the last
//! place away, and JSON has no spelling for NaN or infinity.

use super::montecarlo::report;
use crate::error::JobError;
use crate::montecarlo::{parse_spec, shard_range, SampleRow, Spec, MAX_SHARDS};
use crate::output::OutputSet;
use crate::sweep::Curve;
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

/// The version of the part format; a merge takes only parts of this one.
pub const FORMAT: u64 = 1;

/// The file a shard's `--out` directory holds.
pub const PART_FILE: &str = "part.json";

/// Flags of `lamina montecarlo-merge`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// The shards' results: each a part file, or the `--out` directory of a shard holding one
    /// (`part.json`); every shard K of N exactly once, in any order.
    #[arg(required = true, value_name = "PART")]
    pub parts: Vec<PathBuf>,
    /// Print one JSON object on stdout instead of a table.
    #[arg(long)]
    pub json: bool,
    /// Write the data (CSV), the summary (JSON) and plots (SVG, PNG) into this directory.
    #[arg(long, value_name = "DIR")]
    pub out: Option<PathBuf>,
}

/// The partial result of one shard.
#[derive(Clone, Debug, PartialEq)]
pub struct Part {
    /// Lamina's version that ran it.
    pub lamina_version: String,
    /// [`crate::montecarlo::inputs_hash`] of its inputs.
    pub inputs_hash: String,
    /// The circuit file as given on the command line (for people; not checked).
    pub file: String,
    /// Seed of the draws.
    pub seed: u64,
    /// Samples of the whole run.
    pub runs: usize,
    /// The limits, as given.
    pub specs: Vec<String>,
    /// K, from 1.
    pub shard: usize,
    /// N.
    pub shards: usize,
    /// Its rows, in sample order.
    pub rows: Vec<SampleRow>,
}

/// Parses `K/N` (1 <= K <= N <= [`MAX_SHARDS`]).
pub fn parse_shard(text: &str) -> Result<(usize, usize), JobError> {
    let usage = |why: &str| JobError::Usage(format!("--shard {text}: {why}"));
    let (k, n) = text
        .split_once('/')
        .ok_or_else(|| usage("expected K/N, such as --shard 2/8 for the second of 8 shards"))?;
    let number = |s: &str, what: &str| {
        s.trim()
            .parse::<usize>()
            .map_err(|_| usage(&format!("{what} `{s}` is not a whole number")))
    };
    let (k, n) = (number(k, "K")?, number(n, "N")?);
    if n == 0 || n > MAX_SHARDS {
        return Err(usage(&format!("give from 1 to {MAX_SHARDS} shards")));
    }
    if k == 0 || k > n {
        return Err(usage(&format!("K counts the shards from 1 to {n}")));
    }
    Ok((k, n))
}

/// A number as text that reads back to the same bits (a NaN to a NaN, its sign and payload,
/// which no report reads, not kept).
pub(crate) fn num(v: f64) -> Value {
    Value::String(format!("{v:?}"))
}

/// `[key, value]` pairs, each value as [`num`] writes it.
pub(crate) fn pairs(list: &[(String, f64)]) -> Value {
    Value::Array(list.iter().map(|(k, v)| json!([k, num(*v)])).collect())
}

impl Part {
    /// The part as JSON (see the module documentation).
    pub fn to_json(&self) -> Value {
        let samples = shard_range(self.shard, self.shards, self.runs);
        let rows: Vec<Value> = self
            .rows
            .iter()
            .map(|r| {
                json!({
                    "sample": r.sample, "draws": pairs(&r.draws), "figures": pairs(&r.figures),
                    "error": r.error, "curves": curves_json(&r.curves),
                })
            })
            .collect();
        json!({
            "format": FORMAT,
            "lamina_version": self.lamina_version,
            "inputs_hash": self.inputs_hash,
            "file": self.file,
            "seed": self.seed,
            "runs": self.runs,
            "specs": self.specs,
            "shard": self.shard,
            "shards": self.shards,
            "samples": [samples.start, samples.end],
            "rows": rows,
        })
    }

    /// Reads a part, checking its shape and that its rows are exactly its shard's samples.
    /// `Err` is why it is not a part (the format version is checked by the caller).
    pub fn from_json(v: &Value) -> Result<Part, String> {
        let f = Fields(v);
        let rows = f
            .get("rows")?
            .as_array()
            .ok_or("`rows` is not a list")?
            .iter()
            .map(row_from_json)
            .collect::<Result<Vec<_>, _>>()?;
        let part = Part {
            lamina_version: f.text("lamina_version")?,
            inputs_hash: f.text("inputs_hash")?,
            file: f.text("file")?,
            seed: f
                .get("seed")?
                .as_u64()
                .ok_or("`seed` is not a whole number")?,
            runs: f.count("runs")?,
            specs: f.texts("specs")?,
            shard: f.count("shard")?,
            shards: f.count("shards")?,
            rows,
        };
        crate::cluster::check_shard(part.shard, part.shards)?;
        let want: Vec<usize> = shard_range(part.shard, part.shards, part.runs).collect();
        let have: Vec<usize> = part.rows.iter().map(|r| r.sample).collect();
        if have != want {
            return Err(format!(
                "shard {}/{} of {} runs must hold samples {}..{} in order, but holds {} rows",
                part.shard,
                part.shards,
                part.runs,
                want.first().copied().unwrap_or(0),
                want.last().map_or(0, |l| l + 1),
                have.len()
            ));
        }
        Ok(part)
    }
}

/// The fields of a part's JSON object, read with messages that name the field.
pub(crate) struct Fields<'a>(pub &'a Value);

impl Fields<'_> {
    /// The field `k`.
    pub fn get(&self, k: &str) -> Result<&Value, String> {
        self.0.get(k).ok_or_else(|| format!("no `{k}`"))
    }

    /// `x`, the field `k`, as text.
    pub fn text_of(x: &Value, k: &str) -> Result<String, String> {
        x.as_str()
            .map(str::to_string)
            .ok_or_else(|| format!("`{k}` is not text"))
    }

    /// The field `k` as text.
    pub fn text(&self, k: &str) -> Result<String, String> {
        Fields::text_of(self.get(k)?, k)
    }

    /// The field `k` as a list of texts.
    pub fn texts(&self, k: &str) -> Result<Vec<String>, String> {
        self.get(k)?
            .as_array()
            .ok_or_else(|| format!("`{k}` is not a list"))?
            .iter()
            .map(|x| Fields::text_of(x, k))
            .collect()
    }

    /// `x`, the field `k`, as a whole number.
    pub fn count_of(x: &Value, k: &str) -> Result<usize, String> {
        x.as_u64()
            .and_then(|n| usize::try_from(n).ok())
            .ok_or_else(|| format!("`{k}` is not a whole number"))
    }

    /// The field `k` as a whole number.
    pub fn count(&self, k: &str) -> Result<usize, String> {
        Fields::count_of(self.get(k)?, k)
    }
}

/// A number written by [`num`] read back.
pub(crate) fn number_of(x: &Value) -> Result<f64, String> {
    x.as_str()
        .and_then(|s| s.parse::<f64>().ok())
        .ok_or_else(|| format!("`{x}` is not a number written as text"))
}

/// Pairs written by [`pairs`] read back.
pub(crate) fn pairs_of(x: Option<&Value>, what: &str) -> Result<Vec<(String, f64)>, String> {
    x.and_then(Value::as_array)
        .ok_or_else(|| format!("a row's `{what}` is not a list"))?
        .iter()
        .map(|p| match p.as_array().map(Vec::as_slice) {
            Some([Value::String(k), v]) => Ok((k.clone(), number_of(v)?)),
            _ => Err(format!(
                "a row's `{what}` holds `{p}`, not a [key, value] pair"
            )),
        })
        .collect()
}

/// The `'static` axis description of a curve read back. Curves carry `'static` descriptions
/// (the few the analyses name); each distinct one read is kept for the rest of the process,
/// a handful of short strings.
fn static_desc(s: &str) -> &'static str {
    static SEEN: std::sync::Mutex<Vec<&'static str>> = std::sync::Mutex::new(Vec::new());
    let Ok(mut seen) = SEEN.lock() else {
        return "";
    };
    if let Some(d) = seen.iter().find(|d| **d == s) {
        return d;
    }
    let d: &'static str = Box::leak(s.to_string().into_boxed_str());
    seen.push(d);
    d
}

/// Curves as JSON: `family`, `x_desc`, `y_desc` and `points` as `[x, y]` pairs of [`num`].
pub(crate) fn curves_json(curves: &[Curve]) -> Value {
    let list: Vec<Value> = curves
        .iter()
        .map(|c| {
            let points: Vec<Value> = c
                .points
                .iter()
                .map(|(x, y)| json!([num(*x), num(*y)]))
                .collect();
            json!({ "family": c.family, "x_desc": c.x_desc, "y_desc": c.y_desc,
                    "points": points })
        })
        .collect();
    Value::Array(list)
}

/// Curves written by [`curves_json`] read back; `row` names their row in messages.
pub(crate) fn curves_of_json(x: Option<&Value>, row: &str) -> Result<Vec<Curve>, String> {
    x.and_then(Value::as_array)
        .ok_or_else(|| format!("{row}: `curves` is not a list"))?
        .iter()
        .map(|c| {
            let desc = |k: &str| {
                c.get(k)
                    .and_then(Value::as_str)
                    .ok_or_else(|| format!("{row}: a curve has no text `{k}`"))
            };
            let points = c
                .get("points")
                .and_then(Value::as_array)
                .ok_or_else(|| format!("{row}: a curve has no `points` list"))?
                .iter()
                .map(|p| match p.as_array().map(Vec::as_slice) {
                    Some([x, y]) => Ok((number_of(x)?, number_of(y)?)),
                    _ => Err(format!("{row}: `{p}` is not an [x, y] point")),
                })
                .collect::<Result<Vec<_>, _>>()?;
            Ok(Curve {
                family: desc("family")?.to_string(),
                x_desc: static_desc(desc("x_desc")?),
                y_desc: static_desc(desc("y_desc")?),
                points,
            })
        })
        .collect()
}

fn row_from_json(v: &Value) -> Result<SampleRow, String> {
    let sample = v
        .get("sample")
        .and_then(Value::as_u64)
        .and_then(|n| usize::try_from(n).ok())
        .ok_or("a row has no whole-number `sample`")?;
    let error = match v.get("error") {
        Some(Value::String(e)) => Some(e.clone()),
        Some(Value::Null) => None,
        _ => return Err(format!("row {sample}: `error` is neither text nor null")),
    };
    let curves = curves_of_json(v.get("curves"), &format!("row {sample}"))?;
    Ok(SampleRow {
        sample,
        draws: pairs_of(v.get("draws"), "draws").map_err(|e| format!("row {sample}: {e}"))?,
        figures: pairs_of(v.get("figures"), "figures").map_err(|e| format!("row {sample}: {e}"))?,
        error,
        curves,
    })
}

/// Reads the part at `path` (a part file or a directory holding [`PART_FILE`]); `Io` when it
/// cannot be read or is not a part, `Invalid` when it is of another format or version.
fn read_part(path: &Path) -> Result<Part, JobError> {
    let file = if path.is_dir() {
        path.join(PART_FILE)
    } else {
        path.to_path_buf()
    };
    let shown = file.display();
    let bytes = std::fs::read(&file).map_err(|e| JobError::Io(format!("{shown}: {e}")))?;
    let v: Value = serde_json::from_slice(&bytes).map_err(|e| {
        JobError::Io(format!(
            "{shown}: not a part file of `lamina montecarlo --shard` ({e})"
        ))
    })?;
    let not_part = |why: String| {
        JobError::Io(format!(
            "{shown}: not a part file of `lamina montecarlo --shard`: {why}"
        ))
    };
    let format = v
        .get("format")
        .and_then(Value::as_u64)
        .ok_or_else(|| not_part("no whole-number `format`".into()))?;
    if format != FORMAT {
        return Err(JobError::Invalid(format!(
            "error: {shown}: part format {format}, but this Lamina reads format {FORMAT}; run \
             the shard again with this version"
        )));
    }
    let part = Part::from_json(&v).map_err(not_part)?;
    same_version(&shown.to_string(), &part.lamina_version)?;
    Ok(part)
}

/// Refuses a part written by another Lamina version (`shown` names it).
pub(crate) fn same_version(shown: &str, version: &str) -> Result<(), JobError> {
    let ours = env!("CARGO_PKG_VERSION");
    if version != ours {
        return Err(JobError::Invalid(format!(
            "error: {shown}: written by Lamina {version}, but this is Lamina {ours}; merge with \
             the version that ran the shards"
        )));
    }
    Ok(())
}

/// Checks that `parts` are the shards of one run, each once, and returns their rows in sample
/// order. `names` are the parts' paths, for the messages.
pub fn combine(parts: Vec<Part>, names: &[String]) -> Result<Vec<SampleRow>, JobError> {
    let inconsistent = |m: String| JobError::Invalid(format!("error: {m}"));
    let Some(first) = parts.first() else {
        return Err(JobError::Usage("give at least one part".into()));
    };
    for (p, name) in parts.iter().zip(names).skip(1) {
        let differs = |what: &str, a: String, b: String| {
            inconsistent(format!(
                "{name} has {what} {b}, but {} has {what} {a}: the parts are not of one run",
                names[0]
            ))
        };
        if p.seed != first.seed {
            return Err(differs("seed", first.seed.to_string(), p.seed.to_string()));
        }
        if p.runs != first.runs {
            return Err(differs("runs", first.runs.to_string(), p.runs.to_string()));
        }
        if p.specs != first.specs {
            let show = |s: &[String]| format!("[{}]", s.join(", "));
            return Err(differs("specs", show(&first.specs), show(&p.specs)));
        }
        if p.shards != first.shards {
            let show = |n: usize| format!("N = {n}");
            return Err(differs("shards", show(first.shards), show(p.shards)));
        }
        if p.inputs_hash != first.inputs_hash {
            return Err(differs(
                "inputs hash (circuit files and --set values)",
                first.inputs_hash.clone(),
                p.inputs_hash.clone(),
            ));
        }
    }
    let runs = first.runs;
    let shards: Vec<(usize, usize)> = parts.iter().map(|p| (p.shard, p.shards)).collect();
    let order = crate::cluster::shard_order(&shards, names, |k, n| {
        let r = shard_range(k, n, runs);
        format!("samples {}..{}", r.start, r.end)
    })?;
    let mut parts: Vec<Option<Part>> = parts.into_iter().map(Some).collect();
    Ok(order
        .into_iter()
        .filter_map(|i| parts[i].take())
        .flat_map(|p| p.rows)
        .collect())
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let set_out = OutputSet::begin_opt(a.out.as_deref())?;
    let parts = a
        .parts
        .iter()
        .map(|p| read_part(p))
        .collect::<Result<Vec<_>, _>>()?;
    let names: Vec<String> = a.parts.iter().map(|p| p.display().to_string()).collect();
    let Some(first) = parts.first() else {
        return Err(JobError::Usage("give at least one part".into()));
    };
    let (runs, seed) = (first.runs, first.seed);
    let specs: Vec<Spec> = first
        .specs
        .iter()
        .map(|s| parse_spec(s))
        .collect::<Result<_, _>>()?;
    let rows = combine(parts, &names)?;
    report(&rows, &specs, runs, seed, a.json, set_out)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Values at the edges of the format: the extremes, a subnormal, negative zero, NaN and the
    /// infinities, and sums whose shortest form needs all 17 digits. A NaN reads back as a NaN
    /// (its sign and payload, which no report reads, are not kept).
    #[test]
    fn every_number_of_a_part_reads_back_to_the_same_bits() {
        let values = [
            0.1 + 0.2,
            1.0 / 3.0,
            f64::MAX,
            f64::MIN_POSITIVE,
            5e-324,
            -0.0,
            f64::NAN,
            f64::INFINITY,
            f64::NEG_INFINITY,
            2.225_073_858_507_201e-308,
            9_007_199_254_740_993.0,
        ];
        let pairs: Vec<(String, f64)> = values
            .iter()
            .enumerate()
            .map(|(i, v)| (format!("k{i}"), *v))
            .collect();
        let part = Part {
            lamina_version: "0".into(),
            inputs_hash: "0".into(),
            file: "f".into(),
            seed: u64::MAX,
            runs: 1,
            specs: vec![],
            shard: 1,
            shards: 1,
            rows: vec![SampleRow {
                sample: 0,
                draws: pairs.clone(),
                figures: pairs.clone(),
                error: Some("a, \"quoted\" error".into()),
                curves: vec![Curve {
                    family: "transient out".into(),
                    x_desc: "time (s)",
                    y_desc: "voltage (V)",
                    points: values.iter().map(|v| (*v, -*v)).collect(),
                }],
            }],
        };
        let text = serde_json::to_string(&part.to_json()).unwrap_or_default();
        let back = serde_json::from_str(&text)
            .map_err(|e| e.to_string())
            .and_then(|v| Part::from_json(&v))
            .unwrap_or_else(|e| panic!("the part reads back: {e}"));
        let bits = |p: &Part| -> Vec<u64> {
            let r = &p.rows[0];
            r.draws
                .iter()
                .chain(&r.figures)
                .map(|(_, v)| *v)
                .chain(r.curves[0].points.iter().flat_map(|(x, y)| [*x, *y]))
                .map(|v| if v.is_nan() { f64::NAN } else { v }.to_bits())
                .collect()
        };
        assert_eq!(bits(&back), bits(&part));
        assert_eq!(back.seed, u64::MAX);
        assert_eq!(back.rows[0].error, part.rows[0].error);
        assert_eq!(back.rows[0].curves[0].x_desc, "time (s)");
    }

    #[test]
    fn a_part_whose_rows_are_not_its_samples_is_refused() {
        let mut v = json!({
            "format": FORMAT, "lamina_version": "0", "inputs_hash": "0", "file": "f",
            "seed": 1, "runs": 4, "specs": [], "shard": 2, "shards": 2, "samples": [2, 4],
            "rows": [],
        });
        assert!(Part::from_json(&v).is_err());
        v["shard"] = json!(3);
        assert!(Part::from_json(&v).is_err());
    }
}

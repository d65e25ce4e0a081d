//! The Monte Carlo job: a file's analyses over random samples of its declared spreads
//! (`variation` statements), samples in parallel (rayon), results in sample order and
//! bit-identical for any thread count; statistics, yield against limits and the drawn
//! values that drive each figure.
//!
//! # Random numbers
//! Every draw is a pure function of its key `(seed, sample, device, declaration)`: the key is
//! hashed by the SplitMix64 finaliser (G. L. Steele, D. Lea and C. H. Flood, "Fast splittable
//! pseudorandom number generators", OOPSLA 2014), one round per part, into 53 uniform bits,
//! `u` in (0, 1), then `z = Φ⁻¹(u)` (statrs' standard normal quantile). No generator carries
//! state from one draw to the next, so neither the order in which threads run samples nor
//! the number of devices before a device changes any value, and a later shard can compute any
//! sample alone. A stream cipher such as ChaCha (the `rand_chacha` crate, seeded from a hash of
//! the key and positioned with `set_word_pos`) would serve as well with stronger statistical
//! guarantees; it is not used because one hash per draw needs no further dependency, no seek
//! and no state, and the draws pass the Kolmogorov-Smirnov checks in the tests.
//!
//! `device` is a hash of the device's hierarchical name (the same mixing over its bytes), so
//! adding or removing other devices leaves each device's draws as they were, or `u64::MAX`
//! for a global draw; `declaration` is the position of the `variation` statement in the file.
//! Correlated keys of one card and scope: `y = L z` with `L` the Cholesky factor of the
//! declared correlation matrix, then each `y` through its distribution (a uniform takes
//! `Φ(y)`, a truncated normal the inverse of its own distribution function at `Φ(y)`).
//!
//! # Columns
//! Each sample row holds, per declaration, the values drawn: for a global spread the offset
//! added to the key (`n2d.gate_work_function.global_shift_j`) or, for a log-normal one, the
//! factor it is multiplied by (`...global_factor`); for a local spread the same per device,
//! named in brackets (`n2d.gate_work_function.local_shift[inv.pull_down]_j`), so a mismatch
//! between two devices can show up as a driver. Then every figure of every analysis (the
//! sweep's keys: `transfer.snm_v`, `ring.frequency_hz`...), and the error of a sample that
//! failed.
//!
//! # Corners
//! A corner is a run whose global values are set instead of drawn: each global spread at `+K`
//! and at `-K` standard deviations with every other spread at nominal (`2 N + 1` runs with the
//! nominal one, for `N` global spreads), or every combination of `±K` over them (`2^N + 1`,
//! at most [`MAX_CORNER_COMBINATIONS`]). Local spreads (mismatch) stay at nominal: a corner is
//! a process condition, not a device pairing. `K` standard deviations means, per distribution:
//! normal, the offset `±K sigma`; log-normal, the factor `exp(±K sigma)`; uniform, the offset
//! `±K h / sqrt(3)` (its standard deviation is `h / sqrt(3)`), clamped to the half-width `h`;
//! truncated normal, `±min(K sigma, bound)`. Declared correlations are ignored: a corner
//! moves one key along its own axis (or each key along its own, in a combination), so a corner
//! can be one the correlated samples would rarely reach. The runs go through the same path as
//! the samples, so a corner's row has the same columns as a sample's.

use crate::design::{run_all_options, Outcome};
use crate::error::JobError;
use crate::ring::RingParams;
use indicatif::ParallelProgressIterator;
use lamina_netlist::units::Dim;
use lamina_netlist::{Design, Distribution, LoadOptions, Perturb, Perturbation, Scope, Variations};
use rayon::prelude::*;
use statrs::distribution::{ContinuousCDF, Normal};
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::{Arc, Mutex};

/// Most samples of one run.
pub const MAX_RUNS: usize = 10_000_000;

/// The device key of a global draw.
pub const GLOBAL_DEVICE: u64 = u64::MAX;

/// The SplitMix64 output function: a bijection of 64-bit words that mixes every input bit
/// into every output bit.
fn mix(mut z: u64) -> u64 {
    z = z.wrapping_add(0x9E37_79B9_7F4A_7C15);
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

/// The device key of a device's hierarchical name.
pub fn device_key(name: &str) -> u64 {
    name.bytes()
        .fold(mix(name.len() as u64), |h, b| mix(h ^ u64::from(b)))
}

/// A uniform number in (0, 1), never 0 or 1, from the key `(seed, sample, device, parameter)`.
pub fn uniform(seed: u64, sample: u64, device: u64, parameter: u64) -> f64 {
    let h = [sample, device, parameter]
        .iter()
        .fold(mix(seed), |h, &p| mix(h ^ mix(p)));
    ((h >> 11) as f64 + 0.5) * (1.0 / (1u64 << 53) as f64)
}

fn standard() -> Normal {
    // Mean 0 and standard deviation 1 are valid parameters; `standard` cannot fail.
    Normal::standard()
}

/// A standard normal number from the key, by the inverse distribution function.
pub fn standard_normal(seed: u64, sample: u64, device: u64, parameter: u64) -> f64 {
    standard().inverse_cdf(uniform(seed, sample, device, parameter))
}

/// What a draw does to a value.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Applied {
    /// Adds an offset (SI).
    Shift(f64),
    /// Multiplies by a factor.
    Factor(f64),
}

impl Applied {
    fn value(self) -> f64 {
        match self {
            Applied::Shift(v) | Applied::Factor(v) => v,
        }
    }

    fn to(self, x: &mut f64) {
        match self {
            Applied::Shift(d) => *x += d,
            Applied::Factor(f) => *x *= f,
        }
    }
}

/// The draw of distribution `d` for the standard normal `y`, its size multiplied by `scale`
/// (the area factor of a local spread, 1 otherwise).
pub fn transform(d: Distribution, y: f64, scale: f64) -> Applied {
    let n = standard();
    match d {
        Distribution::Normal { sigma } => Applied::Shift(sigma * scale * y),
        Distribution::LogNormal { sigma } => Applied::Factor((sigma * scale * y).exp()),
        Distribution::Uniform { half_width } => {
            Applied::Shift(half_width * scale * (2.0 * n.cdf(y) - 1.0))
        }
        Distribution::TruncatedNormal { sigma, bound } => {
            let s = sigma * scale;
            if s == 0.0 {
                return Applied::Shift(0.0);
            }
            let b = bound * scale / s;
            let (lo, hi) = (n.cdf(-b), n.cdf(b));
            let p = (lo + n.cdf(y) * (hi - lo)).clamp(f64::MIN_POSITIVE, 1.0 - f64::EPSILON);
            Applied::Shift((s * n.inverse_cdf(p)).clamp(-bound * scale, bound * scale))
        }
    }
}

/// The values of one sample, put into the devices as the design loads.
struct SampleDraws {
    variations: Arc<Variations>,
    seed: u64,
    sample: u64,
    /// The global draw of each declaration (`None` for local ones).
    global: Vec<Option<Applied>>,
    /// Whether local spreads are drawn (false in a corner: they stay at nominal).
    draw_local: bool,
    /// Local draws made so far, by (declaration, device name).
    local: Mutex<BTreeMap<(usize, String), f64>>,
}

impl SampleDraws {
    fn new(variations: Arc<Variations>, seed: u64, sample: u64) -> SampleDraws {
        let mut global = vec![None; variations.list.len()];
        for g in variations
            .groups
            .iter()
            .filter(|g| g.scope == Scope::Global)
        {
            for (m, y) in g
                .members
                .iter()
                .zip(correlated(g, seed, sample, GLOBAL_DEVICE))
            {
                global[*m] = Some(transform(variations.list[*m].distribution, y, 1.0));
            }
        }
        SampleDraws {
            variations,
            seed,
            sample,
            global,
            draw_local: true,
            local: Mutex::new(BTreeMap::new()),
        }
    }

    /// A corner: the global values given instead of drawn, local spreads at nominal.
    fn fixed(variations: Arc<Variations>, global: Vec<Option<Applied>>) -> SampleDraws {
        SampleDraws {
            variations,
            seed: 0,
            sample: 0,
            global,
            draw_local: false,
            local: Mutex::new(BTreeMap::new()),
        }
    }

    /// The sample's drawn-value columns (see the module documentation): declarations in file
    /// order, a local one's devices by name.
    fn columns(&self) -> Vec<(String, f64)> {
        let local = self.local.lock().map(|m| m.clone()).unwrap_or_default();
        let mut out = Vec::new();
        for (i, v) in self.variations.list.iter().enumerate() {
            match self.global[i] {
                Some(a) => out.push((draw_key(v, None), a.value())),
                None => {
                    for ((_, device), x) in local.range((i, String::new())..(i + 1, String::new()))
                    {
                        out.push((draw_key(v, Some(device)), *x));
                    }
                }
            }
        }
        out
    }
}

/// The standard normals of one group's members for one device, correlated (`y = L z`).
fn correlated(
    g: &lamina_netlist::elaborate::Group,
    seed: u64,
    sample: u64,
    device: u64,
) -> Vec<f64> {
    let z: Vec<f64> = g
        .members
        .iter()
        .map(|&m| standard_normal(seed, sample, device, m as u64))
        .collect();
    g.cholesky
        .iter()
        .map(|row| row.iter().zip(&z).map(|(l, z)| l * z).sum())
        .collect()
}

impl Perturbation for SampleDraws {
    fn apply(&self, card: &str, device: &str, numbers: &mut [f64]) {
        let groups = || self.variations.groups.iter().filter(|g| g.card == card);
        for g in groups().filter(|g| g.scope == Scope::Global) {
            for &m in &g.members {
                if let (Some(a), Some(x)) = (
                    self.global[m],
                    numbers.get_mut(self.variations.list[m].key_index),
                ) {
                    a.to(x);
                }
            }
        }
        for g in groups().filter(|g| self.draw_local && g.scope == Scope::Local) {
            let ys = correlated(g, self.seed, self.sample, device_key(device));
            for (&m, y) in g.members.iter().zip(ys) {
                let v = &self.variations.list[m];
                let scale = v.area.map_or(1.0, |a| {
                    let w = numbers.get(a.width).copied().unwrap_or(f64::NAN);
                    let l = numbers.get(a.length).copied().unwrap_or(f64::NAN);
                    (a.reference_area / (w * l)).sqrt()
                });
                let applied = transform(v.distribution, y, scale);
                if let Some(x) = numbers.get_mut(v.key_index) {
                    applied.to(x);
                }
                if let Ok(mut map) = self.local.lock() {
                    map.insert((m, device.to_string()), applied.value());
                }
            }
        }
    }
}

/// A column key with its unit, as the sweep names its parameters (`..._shift_v`); a local
/// draw names its device in brackets.
fn draw_key(v: &lamina_netlist::Variation, device: Option<&str>) -> String {
    let what = match (device, v.distribution) {
        (None, Distribution::LogNormal { .. }) => "global_factor".to_string(),
        (None, _) => "global_shift".to_string(),
        (Some(d), Distribution::LogNormal { .. }) => format!("local_factor[{d}]"),
        (Some(d), _) => format!("local_shift[{d}]"),
    };
    let dim = match v.distribution {
        Distribution::LogNormal { .. } => Dim::NONE,
        _ => v.dim,
    };
    crate::sweep::axis_key(&crate::sweep::Axis {
        name: format!("{}.{}.{what}", v.card, v.key),
        values: Vec::new(),
        texts: Vec::new(),
        dim,
    })
}

/// Most shards a run may be split into.
pub const MAX_SHARDS: usize = 10_000;

/// The samples of shard `k` of `n` (counted from 1) of a run of `runs`:
/// `[floor((k - 1) runs / n), floor(k runs / n))`. The shards cover `0..runs` once, in order,
/// and differ in size by at most one sample; a shard may be empty when `n > runs`.
pub fn shard_range(k: usize, n: usize, runs: usize) -> std::ops::Range<usize> {
    let at = |i: usize| (i as u128 * runs as u128 / n.max(1) as u128) as usize;
    at(k.saturating_sub(1))..at(k)
}

/// A 64-bit hash of byte strings that is the same on every machine and every Rust release
/// (std's `DefaultHasher` promises neither): each string's length and then its bytes go
/// through the SplitMix64 finaliser ([`mix`]) one at a time, so `["ab", "c"]` and
/// `["a", "bc"]` differ. It identifies inputs against accidental mismatch; it is not meant
/// to resist deliberate collisions.
pub fn stable_hash<'a>(pieces: impl IntoIterator<Item = &'a [u8]>) -> u64 {
    pieces.into_iter().fold(mix(0), |h, p| {
        p.iter()
            .fold(mix(h ^ p.len() as u64), |h, &b| mix(h ^ u64::from(b)))
    })
}

/// The hash of what a run's rows depend on, as 16 hex digits: the text of every file the
/// design read (in load order; paths left out, so the same files elsewhere hash the same), the
/// `--set` values, the seed, the number of runs and the limits. Threads are left out: the rows
/// do not depend on them.
pub fn inputs_hash(
    design: &Design,
    sets: &[(String, String)],
    seed: u64,
    runs: usize,
    specs: &[String],
) -> String {
    let sources = &design.sources;
    let texts = (0..sources.len()).map(|i| sources.text(i).as_bytes());
    let sets = sets.iter().flat_map(|(k, v)| [k.as_bytes(), v.as_bytes()]);
    let (seed, runs) = (seed.to_le_bytes(), (runs as u64).to_le_bytes());
    let tail = [b"seed".as_slice(), &seed, b"runs", &runs]
        .into_iter()
        .chain(specs.iter().map(|s| s.as_bytes()));
    format!(
        "{:016x}",
        stable_hash(texts.chain([b"sets".as_slice()]).chain(sets).chain(tail))
    )
}

/// One sample's drawn values, figures, or error.
#[derive(Clone, Debug, PartialEq)]
pub struct SampleRow {
    /// Its index (from 0).
    pub sample: usize,
    /// Drawn values, in declaration order (see the module documentation).
    pub draws: Vec<(String, f64)>,
    /// Figures of every analysis, keyed as the sweep keys them.
    pub figures: Vec<(String, f64)>,
    /// Why the sample failed, if it did.
    pub error: Option<String>,
    /// Its transfer curves, ring and transient waveforms, if kept (see [`run_samples`]).
    pub curves: Vec<crate::sweep::Curve>,
}

/// Runs samples `samples` (indices, usually `0..runs`; any sub-range gives exactly those rows
/// of the whole run, which is what splitting a run into shards needs) of `path`'s analyses;
/// `nominal` is the design loaded without draws (its declared spreads).
/// Rows come back in sample order; samples with an index below `keep_curves` keep their
/// curves (each thinned to the sweep's [`crate::sweep::CURVE_SAMPLES`]).
pub fn run_samples(
    path: &Path,
    sets: &[(String, String)],
    nominal: &Design,
    samples: std::ops::Range<usize>,
    seed: u64,
    progress: bool,
    keep_curves: usize,
) -> Vec<SampleRow> {
    let variations = Arc::new(nominal.variations.clone());
    let bar = crate::sweep::progress_bar(samples.len(), "samples", progress);
    samples
        .into_par_iter()
        .progress_with(bar)
        .map(|sample| {
            let draws = SampleDraws::new(variations.clone(), seed, sample as u64);
            run_one(path, sets, draws, sample, sample < keep_curves)
        })
        .collect()
}

/// Runs the analyses of one sample or corner with `draws` put into its devices.
fn run_one(
    path: &Path,
    sets: &[(String, String)],
    draws: SampleDraws,
    sample: usize,
    keep_curves: bool,
) -> SampleRow {
    let draws = Arc::new(draws);
    let options = LoadOptions {
        overrides: sets.to_vec(),
        perturbation: Some(Perturb(draws.clone())),
        ..LoadOptions::default()
    };
    let ring = RingParams::for_monte_carlo();
    let result = run_all_options(path, &options, &ring, None);
    let (figures, curves, error) = match result {
        Ok(results) => {
            let curves = if keep_curves {
                results
                    .iter()
                    .flat_map(|(_, o)| crate::sweep::curves_of(o))
                    .collect()
            } else {
                Vec::new()
            };
            (figures_of(&results), curves, None)
        }
        Err(e) => (
            Vec::new(),
            Vec::new(),
            Some(crate::sweep::first_line(e.message())),
        ),
    };
    SampleRow {
        sample,
        draws: draws.columns(),
        figures,
        error,
        curves,
    }
}

/// Every figure of a run's outcomes.
pub fn figures_of(results: &[(String, Outcome)]) -> Vec<(String, f64)> {
    results
        .iter()
        .flat_map(|(k, o)| crate::sweep::figures(k, o))
        .collect()
}

/// Statistics of one column over the samples that have it.
#[derive(Clone, Debug, PartialEq)]
pub struct Stats {
    /// Samples with a finite value.
    pub count: usize,
    /// Samples without one (failed, or the figure could not be measured).
    pub failures: usize,
    /// Mean.
    pub mean: f64,
    /// Sample standard deviation (divisor `n - 1`; 0 for one sample).
    pub std_dev: f64,
    /// 5 % quantile.
    pub q05: f64,
    /// Median.
    pub q50: f64,
    /// 95 % quantile.
    pub q95: f64,
    /// Smallest value.
    pub min: f64,
    /// Largest value.
    pub max: f64,
}

/// The `p` quantile of sorted values by linear interpolation between order statistics
/// (definition 7 of R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages",
/// The American Statistician 50, 361 (1996)).
pub fn quantile(sorted: &[f64], p: f64) -> f64 {
    if sorted.is_empty() {
        return f64::NAN;
    }
    let h = (sorted.len() - 1) as f64 * p;
    let lo = h.floor() as usize;
    let hi = (lo + 1).min(sorted.len() - 1);
    sorted[lo] + (h - lo as f64) * (sorted[hi] - sorted[lo])
}

/// Statistics of `values` (non-finite values count as failures), `None` if none is finite.
pub fn stats(values: &[Option<f64>]) -> Option<Stats> {
    let mut v: Vec<f64> = values
        .iter()
        .flatten()
        .copied()
        .filter(|x| x.is_finite())
        .collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let n = v.len() as f64;
    let mean = v.iter().sum::<f64>() / n;
    let var = if v.len() > 1 {
        v.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)
    } else {
        0.0
    };
    Some(Stats {
        count: v.len(),
        failures: values.len() - v.len(),
        mean,
        std_dev: var.sqrt(),
        q05: quantile(&v, 0.05),
        q50: quantile(&v, 0.5),
        q95: quantile(&v, 0.95),
        min: v[0],
        max: v[v.len() - 1],
    })
}

/// Every figure key of the rows, in order of first appearance.
pub fn figure_keys(rows: &[SampleRow]) -> Vec<String> {
    keys(rows.iter().map(|r| &r.figures))
}

/// Every drawn-value key of the rows, in order of first appearance.
pub fn draw_keys(rows: &[SampleRow]) -> Vec<String> {
    keys(rows.iter().map(|r| &r.draws))
}

fn keys<'a>(lists: impl Iterator<Item = &'a Vec<(String, f64)>>) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for l in lists {
        for (k, _) in l {
            if !out.contains(k) {
                out.push(k.clone());
            }
        }
    }
    out
}

/// The value of `key` in each row (`None` where the row lacks it).
pub fn column(rows: &[SampleRow], key: &str) -> Vec<Option<f64>> {
    rows.iter()
        .map(|r| {
            r.figures
                .iter()
                .chain(&r.draws)
                .find(|(k, _)| k == key)
                .map(|(_, v)| *v)
        })
        .collect()
}

/// A specification limit on a figure: `transfer.snm_v>0.1V`.
#[derive(Clone, Debug, PartialEq)]
pub struct Spec {
    /// The figure's key.
    pub key: String,
    /// Whether the figure must be above the limit (else below).
    pub above: bool,
    /// The limit, SI.
    pub limit: f64,
    /// The text as given.
    pub text: String,
}

/// The dimension a figure key's unit suffix names ([`lamina_netlist::units::figure_dim`]).
pub fn key_dim(key: &str) -> Dim {
    lamina_netlist::units::figure_dim(key)
}

/// Parses `FIGURE>VALUE` or `FIGURE<VALUE`, the value with its unit as in circuit files
/// and of the figure's dimension.
pub fn parse_spec(text: &str) -> Result<Spec, JobError> {
    let usage = |why: String| JobError::Usage(format!("--spec {text}: {why}"));
    let (at, above) = match (text.find('>'), text.find('<')) {
        (Some(i), None) => (i, true),
        (None, Some(i)) => (i, false),
        _ => {
            return Err(usage(
                "expected FIGURE>VALUE or FIGURE<VALUE, such as transfer.snm_v>0.1V".into(),
            ))
        }
    };
    let key = text[..at].trim().to_string();
    if key.is_empty() {
        return Err(usage("the figure's name is missing".into()));
    }
    let values =
        lamina_netlist::values::parse_values(text[at + 1..].trim(), None, 1).map_err(usage)?;
    let [v] = values.as_slice() else {
        return Err(usage("give one limit".into()));
    };
    let want = key_dim(&key);
    if v.dim != want && !(v.si == 0.0 && v.dim == Dim::NONE) {
        return Err(usage(format!(
            "`{key}` is {}, but the limit is {}; write it such as {key}{}{}",
            want.describe(),
            v.dim.describe(),
            if above { '>' } else { '<' },
            want.example().replace(' ', "")
        )));
    }
    Ok(Spec {
        key,
        above,
        limit: v.si,
        text: text.to_string(),
    })
}

/// The specs a design's `limit` statements declare, each bound its own spec, in file order,
/// written as `--spec` would take them.
pub fn specs_of_limits(limits: &[lamina_netlist::Limit]) -> Vec<Spec> {
    let mut out = Vec::new();
    for l in limits {
        for (above, v) in [(true, l.above), (false, l.below)] {
            if let Some(v) = v {
                out.push(Spec {
                    key: l.figure.clone(),
                    above,
                    limit: v,
                    // In the `--spec` form, the value in SI written to round-trip, so a shard's
                    // part can carry it and a merge read it back exactly.
                    text: format!(
                        "{}{}{v:e}{}",
                        l.figure,
                        if above { '>' } else { '<' },
                        key_dim(&l.figure).unit().split(',').next().unwrap_or("")
                    ),
                });
            }
        }
    }
    out
}

/// Whether `value` meets the spec.
pub fn meets(s: &Spec, value: Option<f64>) -> bool {
    match value {
        Some(v) if v.is_finite() => {
            if s.above {
                v > s.limit
            } else {
                v < s.limit
            }
        }
        _ => false,
    }
}

/// The fraction of samples meeting every spec (a failed sample fails) with its interval.
#[derive(Clone, Debug, PartialEq)]
pub struct Yield {
    /// Samples that pass.
    pub pass: usize,
    /// Samples in all.
    pub total: usize,
    /// `pass / total`.
    pub fraction: f64,
    /// Lower end of the 95 % Wilson score interval.
    pub low: f64,
    /// Upper end.
    pub high: f64,
}

/// The two-sided 95 % standard normal quantile, Φ⁻¹(0.975).
pub const Z95: f64 = 1.959_963_984_540_054;

/// The Wilson score interval for `k` successes in `n` trials at normal quantile `z`
/// (E. B. Wilson, "Probable inference, the law of succession, and statistical inference",
/// J. Am. Stat. Assoc. 22, 209 (1927)): it stays inside [0, 1] and keeps its coverage near
/// 0 and 1, where the plain normal interval collapses.
pub fn wilson(k: usize, n: usize, z: f64) -> (f64, f64) {
    if n == 0 {
        return (0.0, 1.0);
    }
    let n = n as f64;
    let p = k as f64 / n;
    let z2 = z * z;
    let d = 1.0 + z2 / n;
    let centre = (p + z2 / (2.0 * n)) / d;
    let half = z / d * (p * (1.0 - p) / n + z2 / (4.0 * n * n)).sqrt();
    ((centre - half).max(0.0), (centre + half).min(1.0))
}

/// The yield of `rows` against `specs`.
pub fn yield_of(rows: &[SampleRow], specs: &[Spec]) -> Yield {
    let pass = rows
        .iter()
        .filter(|r| r.error.is_none() && spec_results(r, specs).into_iter().all(|b| b))
        .count();
    let (low, high) = wilson(pass, rows.len(), Z95);
    Yield {
        pass,
        total: rows.len(),
        fraction: pass as f64 / rows.len().max(1) as f64,
        low,
        high,
    }
}

/// Most combinations `--all-combinations` runs (`2^12`, twelve global spreads).
pub const MAX_CORNER_COMBINATIONS: usize = 1 << 12;

/// One deterministic corner: its label and the value of each global declaration (`None` for
/// local declarations, which stay at nominal).
#[derive(Clone, Debug, PartialEq)]
pub struct Corner {
    /// `nominal`, or each moved key with its direction, such as `r.resistance+3sigma`.
    pub label: String,
    /// Per declaration (indices of [`Variations::list`]), the value put in.
    pub global: Vec<Option<Applied>>,
}

/// The value of distribution `d` at `k` standard deviations (negative `k` the other way);
/// see the module documentation.
pub fn corner_value(d: Distribution, k: f64) -> Applied {
    match d {
        Distribution::Normal { sigma } => Applied::Shift(k * sigma),
        Distribution::LogNormal { sigma } => Applied::Factor((k * sigma).exp()),
        Distribution::Uniform { half_width } => {
            Applied::Shift((k * half_width / 3f64.sqrt()).clamp(-half_width, half_width))
        }
        Distribution::TruncatedNormal { sigma, bound } => {
            Applied::Shift((k * sigma).clamp(-bound, bound))
        }
    }
}

/// The corners of the global spreads of `variations` at `k` standard deviations: the nominal
/// run first, then each global declaration in file order at `+k` and `-k`, or with
/// `all_combinations` every sign pattern (the first declaration's sign changing slowest).
/// Refused for `k` not positive and finite, for a design without global spreads, and for more
/// than [`MAX_CORNER_COMBINATIONS`] combinations.
pub fn corners(
    variations: &Variations,
    k: f64,
    all_combinations: bool,
) -> Result<Vec<Corner>, JobError> {
    if !(k.is_finite() && k > 0.0) {
        return Err(JobError::Usage(format!(
            "--corners {k}: give a positive number of standard deviations, such as --corners 3"
        )));
    }
    let globals: Vec<usize> = (0..variations.list.len())
        .filter(|&i| variations.list[i].scope == Scope::Global)
        .collect();
    if globals.is_empty() {
        return Err(JobError::Invalid(
            "the file declares no global spread, and corners move global spreads only (local \
             ones stay at nominal); add `scope = global` to a variation, or sample with --runs"
                .into(),
        ));
    }
    let name = |i: usize, sign: f64| {
        let v = &variations.list[i];
        format!(
            "{}.{}{}{k}sigma",
            v.card,
            v.key,
            if sign > 0.0 { '+' } else { '-' }
        )
    };
    let corner = |moved: &[(usize, f64)]| {
        let mut global = vec![None; variations.list.len()];
        for &i in &globals {
            global[i] = Some(corner_value(variations.list[i].distribution, 0.0));
        }
        for &(i, sign) in moved {
            global[i] = Some(corner_value(variations.list[i].distribution, sign * k));
        }
        let label = if moved.is_empty() {
            "nominal".to_string()
        } else {
            moved
                .iter()
                .map(|&(i, s)| name(i, s))
                .collect::<Vec<_>>()
                .join(",")
        };
        Corner { label, global }
    };
    let mut out = vec![corner(&[])];
    if all_combinations {
        let n = globals.len();
        if n > MAX_CORNER_COMBINATIONS.trailing_zeros() as usize {
            return Err(JobError::Usage(format!(
                "--all-combinations: {n} global spreads make 2^{n} corners, more than the \
                 {MAX_CORNER_COMBINATIONS} allowed; run the one-at-a-time corners (drop \
                 --all-combinations) or sample with --runs"
            )));
        }
        for pattern in 0..1usize << n {
            let moved: Vec<(usize, f64)> = globals
                .iter()
                .enumerate()
                .map(|(j, &i)| {
                    (
                        i,
                        if pattern >> (n - 1 - j) & 1 == 0 {
                            1.0
                        } else {
                            -1.0
                        },
                    )
                })
                .collect();
            out.push(corner(&moved));
        }
    } else {
        for &i in &globals {
            out.push(corner(&[(i, 1.0)]));
            out.push(corner(&[(i, -1.0)]));
        }
    }
    Ok(out)
}

/// Runs `path`'s analyses at each corner of `nominal`'s spreads, in parallel; rows come back
/// in corner order, `sample` the corner's position. Corners with a position below
/// `keep_curves` keep their curves.
pub fn run_corners(
    path: &Path,
    sets: &[(String, String)],
    nominal: &Design,
    corners: &[Corner],
    keep_curves: usize,
) -> Vec<SampleRow> {
    let variations = Arc::new(nominal.variations.clone());
    corners
        .par_iter()
        .enumerate()
        .map(|(i, c)| {
            let draws = SampleDraws::fixed(variations.clone(), c.global.clone());
            run_one(path, sets, draws, i, i < keep_curves)
        })
        .collect()
}

/// Whether a row meets each spec (a failed row meets none).
pub fn spec_results(row: &SampleRow, specs: &[Spec]) -> Vec<bool> {
    specs
        .iter()
        .map(|s| {
            row.error.is_none()
                && meets(
                    s,
                    row.figures.iter().find(|(k, _)| *k == s.key).map(|x| x.1),
                )
        })
        .collect()
}

/// Ranks from 1, ties given their mean rank.
fn ranks(v: &[f64]) -> Vec<f64> {
    let mut idx: Vec<usize> = (0..v.len()).collect();
    idx.sort_by(|&a, &b| v[a].total_cmp(&v[b]));
    let mut r = vec![0.0; v.len()];
    let mut i = 0;
    while i < idx.len() {
        let mut j = i;
        while j + 1 < idx.len() && v[idx[j + 1]] == v[idx[i]] {
            j += 1;
        }
        let mean = (i + j) as f64 / 2.0 + 1.0;
        for &k in &idx[i..=j] {
            r[k] = mean;
        }
        i = j + 1;
    }
    r
}

/// Spearman's rank correlation of paired values (the Pearson correlation of their ranks,
/// ties at mean rank; C. Spearman, Am. J. Psychol. 15, 72 (1904)); `None` with fewer than
/// three pairs or a constant column.
pub fn spearman(x: &[f64], y: &[f64]) -> Option<f64> {
    if x.len() != y.len() || x.len() < 3 {
        return None;
    }
    let (rx, ry) = (ranks(x), ranks(y));
    let n = x.len() as f64;
    let (mx, my) = (rx.iter().sum::<f64>() / n, ry.iter().sum::<f64>() / n);
    let (mut sxy, mut sxx, mut syy) = (0.0, 0.0, 0.0);
    for (a, b) in rx.iter().zip(&ry) {
        sxy += (a - mx) * (b - my);
        sxx += (a - mx).powi(2);
        syy += (b - my).powi(2);
    }
    (sxx > 0.0 && syy > 0.0).then(|| sxy / (sxx * syy).sqrt())
}

/// For each figure, the drawn values by the size of their rank correlation with it, largest
/// first.
pub fn drivers(rows: &[SampleRow]) -> Vec<(String, Vec<(String, f64)>)> {
    let draws = draw_keys(rows);
    // Each drawn value's column once, not once per figure.
    let dcols: Vec<Vec<Option<f64>>> = draws.iter().map(|d| column(rows, d)).collect();
    figure_keys(rows)
        .into_iter()
        .map(|f| {
            let fy = column(rows, &f);
            let mut list: Vec<(String, f64)> = draws
                .iter()
                .zip(&dcols)
                .filter_map(|(d, dx)| {
                    let (x, y): (Vec<f64>, Vec<f64>) = dx
                        .iter()
                        .zip(&fy)
                        .filter_map(|(a, b)| Some((*a.as_ref()?, *b.as_ref()?)))
                        .filter(|(a, b)| a.is_finite() && b.is_finite())
                        .unzip();
                    spearman(&x, &y).map(|r| (d.clone(), r))
                })
                .collect();
            list.sort_by(|a, b| b.1.abs().total_cmp(&a.1.abs()));
            (f, list)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn uniform_draws_differ_in_every_part_of_the_key_and_stay_inside_the_interval() {
        let base = uniform(1, 2, 3, 4);
        for other in [
            uniform(2, 2, 3, 4),
            uniform(1, 3, 3, 4),
            uniform(1, 2, 4, 4),
            uniform(1, 2, 3, 5),
        ] {
            assert_ne!(base, other);
        }
        for k in 0..10_000 {
            let u = uniform(0, k, GLOBAL_DEVICE, 0);
            assert!(u > 0.0 && u < 1.0);
        }
    }

    #[test]
    fn ranks_share_ties_and_spearman_sees_monotone_relations() {
        assert_eq!(ranks(&[3.0, 1.0, 3.0, 2.0]), vec![3.5, 1.0, 3.5, 2.0]);
        let x: Vec<f64> = (0..20).map(|i| i as f64).collect();
        let y: Vec<f64> = x.iter().map(|v| v.powi(3)).collect();
        assert!((spearman(&x, &y).unwrap_or(0.0) - 1.0).abs() < 1e-12);
        let y: Vec<f64> = x.iter().map(|v| -v.exp()).collect();
        assert!((spearman(&x, &y).unwrap_or(0.0) + 1.0).abs() < 1e-12);
        assert!(spearman(&x, &[1.0; 20]).is_none());
    }

    #[test]
    fn quantiles_interpolate_between_order_statistics() {
        // Definition 7 of Hyndman and Fan (1996): h = (n - 1) p.
        let v = [1.0, 2.0, 3.0, 4.0, 5.0];
        assert_eq!(quantile(&v, 0.5), 3.0);
        assert_eq!(quantile(&v, 0.05), 1.2);
        assert_eq!(quantile(&v, 1.0), 5.0);
    }

    #[test]
    fn truncated_draws_stay_within_their_bound_and_uniform_within_its_width() {
        for k in 0..2000 {
            let y = standard_normal(7, k, 0, 0) * 3.0;
            let t = transform(
                Distribution::TruncatedNormal {
                    sigma: 2.0,
                    bound: 1.0,
                },
                y,
                1.0,
            );
            assert!(matches!(t, Applied::Shift(t) if t.abs() <= 1.0));
            let u = transform(Distribution::Uniform { half_width: 0.5 }, y, 1.0);
            assert!(matches!(u, Applied::Shift(u) if u.abs() <= 0.5));
        }
    }

    #[test]
    fn specs_read_the_figure_the_direction_and_a_limit_with_its_unit() {
        let s = parse_spec("transfer.snm_v>100mV").expect("valid");
        assert!(s.above && (s.limit - 0.1).abs() < 1e-15 && s.key == "transfer.snm_v");
        let s = parse_spec("ring.frequency_hz<2GHz").expect("valid");
        assert!(!s.above && s.limit == 2e9);
        assert!(matches!(
            parse_spec("transfer.snm_v>100ns"),
            Err(JobError::Usage(_))
        ));
        assert!(matches!(
            parse_spec("transfer.snm_v=1V"),
            Err(JobError::Usage(_))
        ));
        assert!(matches!(
            parse_spec("transfer.snm_v>0.1"),
            Err(JobError::Usage(_))
        ));
    }
}

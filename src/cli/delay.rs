//! `lamina delay`: gate delay from a file's `analysis delay`.

use super::{print_single, Common, FileArgs};
use crate::delay::{run_file, DelayParams};
use crate::design::{self, Outcome};
use crate::error::JobError;
use crate::note;
use crate::output::OutputSet;

/// Flags of `lamina delay`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// The file, `--set`, `--json` and `--out`.
    #[command(flatten)]
    pub file: FileArgs,
    /// Reference levels of the output's rise and fall times, in percent of each transition's
    /// swing between its settled levels: `--levels 20,80` (0 < low < high < 100).
    #[arg(long, value_name = "LOW,HIGH", default_value = "10,90")]
    pub levels: String,
}

/// Parses `--levels LOW,HIGH` (percent, an optional `%` after each) into fractions.
pub fn parse_levels(text: &str) -> Result<(f64, f64), JobError> {
    let usage = |why: &str| {
        JobError::Usage(format!(
            "--levels {text}: {why}; give two percentages such as --levels 20,80"
        ))
    };
    let (a, b) = text
        .split_once(',')
        .ok_or_else(|| usage("expected LOW,HIGH"))?;
    let number = |s: &str| -> Result<f64, JobError> {
        let s = s.trim();
        s.strip_suffix('%')
            .unwrap_or(s)
            .trim()
            .parse::<f64>()
            .map_err(|_| usage(&format!("`{s}` is not a number")))
    };
    let (low, high) = (number(a)?, number(b)?);
    if high <= 1.0 {
        return Err(usage(&format!(
            "the levels are percentages; did you mean --levels {},{}?",
            low * 100.0,
            high * 100.0
        )));
    }
    if !(low > 0.0 && low < high && high < 100.0) {
        return Err(usage("the levels must satisfy 0 < low < high < 100"));
    }
    Ok((low / 100.0, high / 100.0))
}

/// Runs the job.
pub fn run(a: Args) -> Result<(), JobError> {
    let Args {
        file: FileArgs {
            file,
            common: Common { set, json, out },
        },
        levels,
    } = a;
    let set_out = OutputSet::begin_opt(out.as_deref())?;
    let sets = design::parse_sets(&set)?;
    let params = DelayParams {
        levels: parse_levels(&levels)?,
        ..DelayParams::default()
    };
    let results = run_file(&file, &sets, &params)?;
    if let Some(set) = set_out {
        super::run::write_run(set.dir(), &results).map_err(JobError::Io)?;
        set.commit()?;
    }
    let (kind, outcome) = &results[0];
    // The table prints its warnings itself; JSON carries them and stderr repeats them.
    if let (true, Outcome::Delay(d)) = (json, outcome) {
        for w in &d.warnings {
            note!("warning: {w}");
        }
    }
    print_single(kind, outcome, json);
    Ok(())
}

/// The delay run's waveforms (`waveforms.csv`) and a plot of input and output with each
/// measured pair of 50 % crossings marked and labelled with its delay.
pub(crate) fn write_delay(
    dir: &std::path::Path,
    d: &crate::delay::DelayReport,
) -> Result<(), String> {
    use crate::plot::{engineering, Axis, Figure, Mark, Series};
    crate::output::ensure_dir(dir)?;
    let w = &d.waves;
    let rows = w
        .time
        .iter()
        .zip(&w.input)
        .zip(&w.output)
        .map(|((t, a), b)| vec![*t, *a, *b]);
    crate::output::write_whole(
        &dir.join("waveforms.csv"),
        crate::output::csv(
            &["time_s", &format!("{}_v", w.from), &format!("{}_v", w.to)],
            rows,
        )
        .as_bytes(),
    )?;
    let at = |v: &[f64], x: f64| -> f64 {
        let k = w
            .time
            .partition_point(|&t| t < x)
            .clamp(1, w.time.len().max(2) - 1);
        let (t0, t1) = (w.time[k - 1], w.time[k]);
        if t1 > t0 {
            v[k - 1] + (v[k] - v[k - 1]) * (x - t0) / (t1 - t0)
        } else {
            v[k]
        }
    };
    let mut f = Figure::new("", Axis::new("time", "s"), Axis::new("voltage", "V"));
    let line = |name: &str, v: &[f64]| Series {
        markers: false,
        ..Series::line(
            name,
            w.time.iter().copied().zip(v.iter().copied()).collect(),
        )
    };
    f.series.push(line(&w.from, &w.input));
    f.series.push(line(&w.to, &w.output));
    if w.time.len() >= 2 {
        for e in d.edges.iter().take(8) {
            f.marks.push(Mark::Point(
                (e.input_mid, at(&w.input, e.input_mid)),
                String::new(),
            ));
            f.marks.push(Mark::Point(
                (e.output_mid, at(&w.output, e.output_mid)),
                format!(" {}", engineering(e.delay, "s")),
            ));
        }
    }
    crate::plot::draw(&dir.join("waveforms"), &f)
}

#[cfg(test)]
mod tests {
    use super::parse_levels;

    #[test]
    fn levels_are_percent_pairs() {
        assert_eq!(parse_levels("20,80").unwrap(), (0.2, 0.8));
        assert_eq!(parse_levels("10%, 90%").unwrap(), (0.1, 0.9));
        for bad in ["80,20", "0,90", "10,100", "50", "a,90", "10,90,95", "50,50"] {
            assert!(
                matches!(parse_levels(bad), Err(crate::error::JobError::Usage(_))),
                "{bad}"
            );
        }
    }
}

//! `lamina merge` and `lamina cluster-script`: a study split into shards over a batch
//! scheduler's job array, and its parts put back together.
//!
//! `merge` reads the parts of `sweep --shard`, `montecarlo --shard` and `fit --shard` (it
//! tells them apart by the part's `kind`: `sweep`, `fit`, or none for a Monte Carlo part) and
//! hands them to the merge of their job, which reproduces the run on one machine byte for byte. `cluster-script` runs one
//! trial item of the study here, estimates each task's requests from it
//! ([`crate::cluster::Resources`]) and writes a plain Slurm job-array script.

use super::montecarlo_merge::PART_FILE;
use super::sweep::{SweepPart, PART_FORMAT};
use crate::cluster::{memory_now_and_peak, script_text, Resources, Script, Trial};
use crate::error::JobError;
use crate::out;
use crate::output::{write_whole, OutputSet};
use serde_json::Value;
use std::path::{Path, PathBuf};
use std::time::Instant;

/// The part file at `path` (a file, or a directory holding [`PART_FILE`]) read as JSON.
fn read_json(path: &Path) -> Result<(String, Value), JobError> {
    let file = if path.is_dir() {
        path.join(PART_FILE)
    } else {
        path.to_path_buf()
    };
    let shown = file.display().to_string();
    let bytes = std::fs::read(&file).map_err(|e| JobError::Io(format!("{shown}: {e}")))?;
    let v = serde_json::from_slice(&bytes).map_err(|e| {
        JobError::Io(format!(
            "{shown}: not a part file of `lamina sweep --shard`, `lamina montecarlo --shard` or \
             `lamina fit --shard` ({e})"
        ))
    })?;
    Ok((shown, v))
}

/// A sweep part read from its JSON, its format and version checked.
fn sweep_part(shown: &str, v: &Value) -> Result<SweepPart, JobError> {
    let format = v.get("format").and_then(Value::as_u64);
    if format != Some(PART_FORMAT) {
        return Err(JobError::Invalid(format!(
            "error: {shown}: sweep part format {}, but this Lamina reads format {PART_FORMAT}; \
             run the shard again with this version",
            format.map_or("missing".to_string(), |f| f.to_string())
        )));
    }
    let part = SweepPart::from_json(v).map_err(|why| {
        JobError::Io(format!(
            "{shown}: not a part file of `lamina sweep --shard`: {why}"
        ))
    })?;
    super::montecarlo_merge::same_version(shown, &part.lamina_version)?;
    Ok(part)
}

/// Writes a shard's part (`text`): into `set_out` as [`PART_FILE`], saying which shard and
/// `what` it holds and where, or on stdout without `--out`.
pub(crate) fn emit_part(
    set_out: Option<OutputSet>,
    text: &str,
    (k, n): (usize, usize),
    what: &str,
) -> Result<(), JobError> {
    match set_out {
        Some(set) => {
            let file = set.target().join(PART_FILE);
            write_whole(&set.dir().join(PART_FILE), text.as_bytes()).map_err(JobError::Io)?;
            set.commit()?;
            out!("shard {k}/{n}: {what} in {}", file.display());
        }
        None => out!("{text}"),
    }
    Ok(())
}

/// Runs `lamina merge` (its flags are those of `montecarlo-merge`, which it extends).
pub fn run_merge(a: super::montecarlo_merge::Args) -> Result<(), JobError> {
    let read = a
        .parts
        .iter()
        .map(|p| read_json(p))
        .collect::<Result<Vec<_>, _>>()?;
    let kind = |v: &Value| match v.get("kind") {
        None => "montecarlo".to_string(),
        Some(k) => k.as_str().unwrap_or("unknown").to_string(),
    };
    let Some((first_name, first)) = read.first() else {
        return Err(JobError::Usage("give at least one part".into()));
    };
    let want = kind(first);
    if let Some((name, v)) = read.iter().find(|(_, v)| kind(v) != want) {
        return Err(JobError::Invalid(format!(
            "error: {name} is a {} part, but {first_name} is a {want} part: merge the parts of \
             one study",
            kind(v)
        )));
    }
    match want.as_str() {
        "montecarlo" => super::montecarlo_merge::run(a),
        "sweep" => {
            let set_out = OutputSet::begin_opt(a.out.as_deref())?;
            let parts = read
                .iter()
                .map(|(name, v)| sweep_part(name, v))
                .collect::<Result<Vec<_>, _>>()?;
            let names: Vec<String> = read.into_iter().map(|(n, _)| n).collect();
            super::sweep::merge(parts, &names, a.json, set_out)
        }
        "fit" => {
            let set_out = OutputSet::begin_opt(a.out.as_deref())?;
            super::fit::batch::merge(read, a.json, set_out)
        }
        other => Err(JobError::Io(format!(
            "{first_name}: a part of kind `{other}`, which this Lamina cannot merge"
        ))),
    }
}

/// Flags of `lamina cluster-script`.
#[derive(clap::Args, Debug)]
pub struct ScriptArgs {
    /// Tasks of the job array: the study is split into this many shards.
    #[arg(long, value_name = "N")]
    pub tasks: usize,
    /// Cores of each task (default: as many as a task has items, at most 8).
    #[arg(long, value_name = "C")]
    pub cpus_per_task: Option<usize>,
    /// Memory of each task in MiB (default: from the trial's measured peak memory).
    #[arg(long, value_name = "MIB")]
    pub mem_mib: Option<u64>,
    /// Time limit of each task in minutes (default: from the trial's time).
    #[arg(long, value_name = "MINUTES")]
    pub time_minutes: Option<u64>,
    /// Directory for the shards' results, the logs and the script (relative to the current
    /// directory, where the job runs).
    #[arg(long, value_name = "DIR", default_value = "lamina-results")]
    pub results: PathBuf,
    /// The scheduler's partition to ask for (default: the cluster's default partition).
    #[arg(long, value_name = "NAME")]
    pub partition: Option<String>,
    /// Print the script and write nothing.
    #[arg(long)]
    pub dry_run: bool,
    /// Submit the written script with `sbatch`.
    #[arg(long, conflicts_with = "dry_run")]
    pub submit: bool,
    /// The study, as after `lamina`: `sweep FILE --param ...`, `montecarlo FILE --runs R
    /// ...` or a batch fit `fit DATA... --card FILE --fit ...`, without `--shard`, `--out` or
    /// `--json`.
    #[arg(
        required = true,
        trailing_var_arg = true,
        allow_hyphen_values = true,
        value_name = "JOB"
    )]
    pub job: Vec<String>,
}

/// The jobs a script can split.
#[derive(clap::Subcommand, Debug)]
enum StudyJob {
    Sweep(super::sweep::Args),
    Montecarlo(super::montecarlo::Args),
    Fit(super::fit::Args),
}

#[derive(clap::Parser, Debug)]
#[command(name = "lamina")]
struct JobLine {
    #[command(subcommand)]
    job: StudyJob,
}

/// Runs one item of the study (the grid's first point, sample 0, or a batch's first device)
/// and returns the number of items and what the trial cost; the study's inputs are checked on
/// the way.
fn trial(job: &StudyJob) -> Result<(usize, Trial), JobError> {
    let refuse = |flag: &str| {
        Err(JobError::Usage(format!(
            "cluster-script: leave {flag} out of the job; the script adds the shard and its \
             --out (under --results)"
        )))
    };
    let measure = |run: &dyn Fn()| -> Trial {
        let before = memory_now_and_peak();
        let t0 = Instant::now();
        run();
        let seconds = t0.elapsed().as_secs_f64();
        match (before, memory_now_and_peak()) {
            (Some((rss, _)), Some((_, peak))) => Trial {
                seconds,
                base_bytes: rss,
                item_bytes: peak.saturating_sub(rss),
            },
            _ => Trial {
                seconds,
                base_bytes: 0,
                item_bytes: 0,
            },
        }
    };
    match job {
        StudyJob::Sweep(a) => {
            if a.shard.is_some() || a.shard_from_env {
                return refuse("--shard");
            }
            if a.common.out.is_some() || a.common.json {
                return refuse("--out and --json");
            }
            let sets = crate::design::parse_sets(&a.common.set)?;
            let axes: Vec<crate::sweep::Axis> = a
                .param
                .iter()
                .map(|p| crate::sweep::parse_axis(p))
                .collect::<Result<_, _>>()?;
            crate::sweep::check_axes(&axes, &sets)?;
            crate::design::load(&a.file, &sets)?;
            let total = axes.iter().map(|x| x.values.len()).product();
            let t = measure(&|| {
                crate::sweep::run_sweep(&a.file, &sets, &axes, 0..1, false, true);
            });
            Ok((total, t))
        }
        StudyJob::Montecarlo(a) => {
            if a.shard.is_some() || a.shard_from_env {
                return refuse("--shard");
            }
            if a.common.out.is_some() || a.common.json {
                return refuse("--out and --json");
            }
            let runs = match (a.runs, a.corners) {
                (Some(r), None) if (1..=crate::montecarlo::MAX_RUNS).contains(&r) => r,
                _ => {
                    return Err(JobError::Usage(format!(
                        "cluster-script: a Monte Carlo job needs --runs from 1 to {} (corners \
                         are few runs: run them on one machine)",
                        crate::montecarlo::MAX_RUNS
                    )))
                }
            };
            let sets = crate::design::parse_sets(&a.common.set)?;
            let nominal = crate::design::load(&a.file, &sets)?;
            if nominal.variations.is_empty() {
                return Err(JobError::Invalid(format!(
                    "{} declares no spread: a Monte Carlo run of it has nothing to sample",
                    a.file.display()
                )));
            }
            let t = measure(&|| {
                crate::montecarlo::run_samples(
                    &a.file,
                    &sets,
                    &nominal,
                    0..1,
                    a.seed,
                    false,
                    super::montecarlo::FAMILY_CURVES,
                );
            });
            Ok((runs, t))
        }
        StudyJob::Fit(a) => {
            if a.shard.is_some() || a.shard_from_env {
                return refuse("--shard");
            }
            if a.out.is_some() || a.json {
                return refuse("--out and --json");
            }
            let (card, members, cfg, facts) = super::fit::batch::trial_setup(a)?;
            let t = measure(&|| {
                crate::fit::batch::run_batch(&card, &members, 0..1, &cfg, &facts, false);
            });
            Ok((members.len(), t))
        }
    }
}

/// Runs `lamina cluster-script`.
pub fn run_script(a: ScriptArgs) -> Result<(), JobError> {
    let line = std::iter::once("lamina".to_string()).chain(a.job.iter().cloned());
    let parsed = <JobLine as clap::Parser>::try_parse_from(line).map_err(|e| {
        JobError::Usage(format!(
            "cluster-script: the job after the flags must be `sweep ...`, `montecarlo ...` or \
             `fit ...`:\n{}",
            e.render()
        ))
    })?;
    let (name, noun) = match &parsed.job {
        StudyJob::Sweep(_) => ("lamina-sweep", "points"),
        StudyJob::Montecarlo(_) => ("lamina-montecarlo", "samples"),
        StudyJob::Fit(_) => ("lamina-fit", "devices"),
    };
    if a.tasks == 0 || a.tasks > crate::montecarlo::MAX_SHARDS {
        return Err(JobError::Usage(format!(
            "--tasks {}: give from 1 to {} tasks",
            a.tasks,
            crate::montecarlo::MAX_SHARDS
        )));
    }
    if a.cpus_per_task == Some(0) {
        return Err(JobError::Usage(
            "--cpus-per-task 0: give at least one core".into(),
        ));
    }
    let results = a.results.display().to_string();
    if results.is_empty() || crate::cluster::shell_word(&results) != results {
        return Err(JobError::Usage(format!(
            "--results {results}: give a directory name of letters, digits and `-_./`, which \
             the script's #SBATCH lines can hold unquoted"
        )));
    }
    let (items, trial) = trial(&parsed.job)?;
    if a.tasks > items {
        return Err(JobError::Usage(format!(
            "--tasks {}: the study has only {items} {noun}; give at most {items} tasks",
            a.tasks
        )));
    }
    let mut r = Resources::estimate(items, a.tasks, a.cpus_per_task, &trial);
    let measured = trial.base_bytes > 0;
    let mut why = format!(
        "{items} {noun} in {} tasks; one took {:.3} s and {} MiB here{}",
        a.tasks,
        trial.seconds,
        (trial.base_bytes + trial.item_bytes) >> 20,
        if measured {
            ""
        } else {
            " (memory not measured on this system)"
        }
    );
    if let Some(m) = a.mem_mib {
        r.memory_mib = m;
        why.push_str("; memory as given");
    }
    if let Some(t) = a.time_minutes {
        r.minutes = t;
        why.push_str("; time as given");
    }
    let lamina = std::env::current_exe()
        .map_err(|e| JobError::Io(format!("cannot find the lamina program: {e}")))?;
    let workdir = std::env::current_dir()
        .map_err(|e| JobError::Io(format!("cannot read the current directory: {e}")))?;
    let text = script_text(&Script {
        name,
        lamina: &lamina.display().to_string(),
        workdir: &workdir.display().to_string(),
        job: &a.job,
        results: &results,
        partition: a.partition.as_deref(),
        resources: r,
        why,
    });
    if a.dry_run {
        out!("{}", text.trim_end());
        return Ok(());
    }
    let logs = a.results.join("logs");
    std::fs::create_dir_all(&logs)
        .map_err(|e| JobError::Io(format!("cannot create {}: {e}", logs.display())))?;
    let script = a.results.join("job.sh");
    write_whole(&script, text.as_bytes()).map_err(JobError::Io)?;
    let merge = format!("lamina merge {results}/shard-* --out {results}/merged");
    if !a.submit {
        out!(
            "wrote {}; submit it with: sbatch {}",
            script.display(),
            script.display()
        );
        out!("when every task is done: {merge}");
        return Ok(());
    }
    let done = std::process::Command::new("sbatch")
        .arg("--parsable")
        .arg(&script)
        .output()
        .map_err(|e| {
            JobError::Io(format!(
                "cannot run sbatch ({e}); the script is in {}: submit it on a machine of the \
                 cluster",
                script.display()
            ))
        })?;
    if !done.status.success() {
        return Err(JobError::Io(format!(
            "sbatch failed on {}: {}",
            script.display(),
            String::from_utf8_lossy(&done.stderr).trim()
        )));
    }
    let id = String::from_utf8_lossy(&done.stdout).trim().to_string();
    let id = id.split(';').next().unwrap_or("").to_string();
    out!("submitted job array {id} ({} tasks)", r.tasks);
    out!("watch it: squeue -j {id}   (logs in {results}/logs/)");
    out!("when every task is done: {merge}");
    Ok(())
}

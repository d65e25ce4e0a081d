//! Splitting a study over a batch scheduler's job array: the shard a task runs, read from the
//! scheduler's environment; the check that a set of shards is complete; the resource requests of
//! a job array and its script.
//!
//! # The shard of an array task
//! Slurm gives each task of a job array (`sbatch --array=0-7`) two variables that
//! [`shard_from_env`] reads: `SLURM_ARRAY_TASK_ID`, the task's index as listed in `--array`,
//! and `SLURM_ARRAY_TASK_COUNT`, the number of tasks in the array. Lamina reads the index as
//! counted **from 0**, so task `i` of `N` runs shard `K = i + 1` of `N` (shards count from 1,
//! as in `--shard K/N`). The array must therefore be `--array=0-(N-1)`; where the scheduler
//! also sets `SLURM_ARRAY_TASK_MIN` and `SLURM_ARRAY_TASK_MAX`, they are checked to be `0` and
//! `N - 1`, so that an array of another shape (a single task resubmitted as `--array=3`, or
//! `--array=1-8`) is refused rather than run as the wrong shard. Resubmit one shard with
//! `--shard K/N` instead.
//!
//! # Resource requests
//! [`Resources::estimate`] turns one trial item (a grid point or a sample run on this machine)
//! into the requests of the script: cores, memory from the measured peak resident memory, and
//! time from the trial's wall time; the rules are on its fields.

use crate::error::JobError;

/// The array task's index, counted from 0 (see the module documentation).
pub const TASK_ID: &str = "SLURM_ARRAY_TASK_ID";
/// The number of tasks in the array.
pub const TASK_COUNT: &str = "SLURM_ARRAY_TASK_COUNT";
/// The array's first index, checked to be 0 where it is set.
pub const TASK_MIN: &str = "SLURM_ARRAY_TASK_MIN";
/// The array's last index, checked to be `N - 1` where it is set.
pub const TASK_MAX: &str = "SLURM_ARRAY_TASK_MAX";

/// The shard `(K, N)` of this array task, from the variables `get` returns (the process's
/// environment in use: `|k| std::env::var(k).ok()`).
pub fn shard_from_env(get: impl Fn(&str) -> Option<String>) -> Result<(usize, usize), JobError> {
    let whole = |name: &str| -> Result<Option<usize>, JobError> {
        match get(name) {
            None => Ok(None),
            Some(v) => v.trim().parse::<usize>().map(Some).map_err(|_| {
                JobError::Usage(format!(
                    "--shard-from-env: {name}={v} is not a whole number"
                ))
            }),
        }
    };
    let missing = |name: &str| {
        JobError::Usage(format!(
            "--shard-from-env: {name} is not set; run inside a job array (sbatch --array=0-(N-1)), \
             or give --shard K/N"
        ))
    };
    let id = whole(TASK_ID)?.ok_or_else(|| missing(TASK_ID))?;
    let count = whole(TASK_COUNT)?.ok_or_else(|| missing(TASK_COUNT))?;
    let shape = |what: String| {
        JobError::Usage(format!(
            "--shard-from-env: {what}; submit the array as --array=0-{} (indices from 0), or run \
             one shard with --shard K/N",
            count.max(1) - 1
        ))
    };
    if count == 0 || count > crate::montecarlo::MAX_SHARDS {
        return Err(shape(format!(
            "{TASK_COUNT}={count}, but from 1 to {} tasks are allowed",
            crate::montecarlo::MAX_SHARDS
        )));
    }
    if let Some(min) = whole(TASK_MIN)?.filter(|m| *m != 0) {
        return Err(shape(format!("the array starts at {min} ({TASK_MIN})")));
    }
    if let Some(max) = whole(TASK_MAX)?.filter(|m| *m + 1 != count) {
        return Err(shape(format!(
            "the array ends at {max} ({TASK_MAX}) but has {count} tasks"
        )));
    }
    if id >= count {
        return Err(shape(format!("{TASK_ID}={id} but {TASK_COUNT}={count}")));
    }
    Ok((id + 1, count))
}

/// The shard a job runs: `--shard K/N`, or the array task's with `--shard-from-env`, or none.
pub fn resolve_shard(
    flag: Option<&str>,
    from_env: bool,
) -> Result<Option<(usize, usize)>, JobError> {
    match (flag, from_env) {
        (Some(_), true) => Err(JobError::Usage(
            "give --shard K/N or --shard-from-env, not both".into(),
        )),
        (Some(text), false) => crate::cli::montecarlo_merge::parse_shard(text).map(Some),
        (None, true) => shard_from_env(|k| std::env::var(k).ok()).map(Some),
        (None, false) => Ok(None),
    }
}

/// Checks that `shards` (each part's `(K, N)`, `names` its file for messages) are every shard
/// of one split exactly once and returns the parts' positions in shard order. `items(K, N)`
/// describes a shard's share for the message about missing ones (`points 4..8`).
pub fn shard_order(
    shards: &[(usize, usize)],
    names: &[String],
    items: impl Fn(usize, usize) -> String,
) -> Result<Vec<usize>, JobError> {
    let wrong = |m: String| JobError::Invalid(format!("error: {m}"));
    let Some(&(_, n)) = shards.first() else {
        return Err(JobError::Usage("give at least one part".into()));
    };
    let mut by_shard: Vec<Option<usize>> = vec![None; n];
    for (i, &(k, m)) in shards.iter().enumerate() {
        if m != n {
            return Err(wrong(format!(
                "{} is shard {k} of {m}, but {} is a shard of {n}: the parts are not of one split",
                names[i], names[0]
            )));
        }
        if let Some(j) = by_shard[k - 1] {
            return Err(wrong(format!(
                "shard {k}/{n} is given twice: {} and {}",
                names[j], names[i]
            )));
        }
        by_shard[k - 1] = Some(i);
    }
    let missing: Vec<String> = (1..=n)
        .filter(|k| by_shard[k - 1].is_none())
        .map(|k| format!("{k}/{n} ({})", items(k, n)))
        .collect();
    if !missing.is_empty() {
        let one = missing.len() == 1;
        return Err(wrong(format!(
            "shard{} {} {} missing; run {} with `--shard K/{n}` and the flags of the others",
            if one { "" } else { "s" },
            missing.join(", "),
            if one { "is" } else { "are" },
            if one { "it" } else { "each" }
        )));
    }
    Ok(by_shard.into_iter().flatten().collect())
}

/// This process's resident memory now and at its peak, in bytes (`VmRSS` and `VmHWM` of
/// `/proc/self/status`); `None` where the system does not report them.
pub fn memory_now_and_peak() -> Option<(u64, u64)> {
    let status = std::fs::read_to_string("/proc/self/status").ok()?;
    let field = |name: &str| -> Option<u64> {
        let line = status.lines().find(|l| l.starts_with(name))?;
        let kib: u64 = line[name.len()..]
            .trim()
            .trim_end_matches("kB")
            .trim()
            .parse()
            .ok()?;
        Some(kib * 1024)
    };
    Some((field("VmRSS:")?, field("VmHWM:")?))
}

/// What one trial item cost on this machine.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Trial {
    /// Wall time of the item, in seconds.
    pub seconds: f64,
    /// Resident memory before the item, in bytes.
    pub base_bytes: u64,
    /// Growth of the peak resident memory over `base_bytes` while the item ran, in bytes.
    pub item_bytes: u64,
}

/// The requests of each task of a job array.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Resources {
    /// Tasks (shards) in the array.
    pub tasks: usize,
    /// Cores of each task: as many as a task has items, at most [`MAX_DEFAULT_CORES`]
    /// (a share of a node that most clusters schedule quickly); the items of a task run in
    /// parallel on them.
    pub cores: usize,
    /// Memory of each task in MiB: twice the trial's resident memory with one item per core
    /// held at once (`base + cores × item`), plus 256 MiB for the runtime and the files,
    /// rounded up to 64 MiB.
    pub memory_mib: u64,
    /// Wall-time limit of each task in minutes: three times the trial's time per item (cluster
    /// cores may be slower, and items differ) times the rounds a task runs
    /// (`ceil(items / cores)`), plus 5 minutes for start-up and files, at least 10 minutes.
    pub minutes: u64,
}

/// Most cores a task asks for unless told.
pub const MAX_DEFAULT_CORES: usize = 8;

impl Resources {
    /// The requests for `items` items (grid points, samples) over `tasks` tasks, from one
    /// trial item; `cores` overrides the default.
    pub fn estimate(items: usize, tasks: usize, cores: Option<usize>, trial: &Trial) -> Resources {
        let per_task = items.div_ceil(tasks.max(1)).max(1);
        let cores = cores.unwrap_or(per_task.min(MAX_DEFAULT_CORES)).max(1);
        let mib = 1024.0 * 1024.0;
        let held = trial.base_bytes as f64 + cores as f64 * trial.item_bytes as f64;
        let memory = 2.0 * held / mib + 256.0;
        let memory_mib = ((memory / 64.0).ceil() as u64).max(1) * 64;
        let rounds = per_task.div_ceil(cores) as f64;
        let minutes = (3.0 * trial.seconds * rounds / 60.0 + 5.0).ceil() as u64;
        Resources {
            tasks,
            cores,
            memory_mib,
            minutes: minutes.max(10),
        }
    }
}

/// A word for a POSIX shell: as it is when it has only safe characters, else single-quoted.
pub fn shell_word(s: &str) -> String {
    let safe = !s.is_empty()
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_./=:,+@%".contains(c));
    if safe {
        s.to_string()
    } else {
        format!("'{}'", s.replace('\'', "'\\''"))
    }
}

/// What a job-array script runs.
#[derive(Clone, Debug)]
pub struct Script<'a> {
    /// The job's name (letters, digits, `-`).
    pub name: &'a str,
    /// The Lamina program, as an absolute path.
    pub lamina: &'a str,
    /// The directory the job runs in (the circuit files' paths are relative to it).
    pub workdir: &'a str,
    /// The job's arguments after `lamina` (`sweep FILE --param ...`).
    pub job: &'a [String],
    /// Where the shards' results and the logs go (relative to `workdir` or absolute).
    pub results: &'a str,
    /// A partition to ask for, if any.
    pub partition: Option<&'a str>,
    /// The requests.
    pub resources: Resources,
    /// One line saying how the requests were chosen.
    pub why: String,
}

/// The text of the job-array script: plain `#SBATCH` lines a person can edit, the task's
/// threads set to its cores, and the job with `--shard-from-env` writing
/// `RESULTS/shard-K/part.json`.
pub fn script_text(s: &Script) -> String {
    let r = &s.resources;
    let job: Vec<String> = s.job.iter().map(|a| shell_word(a)).collect();
    let mut t = String::new();
    t.push_str("#!/bin/bash\n");
    t.push_str(
        "# A Lamina study as a Slurm job array, written by `lamina cluster-script`; edit freely.\n",
    );
    t.push_str(&format!(
        "# Task i of the array (0..{}) runs shard i+1 of {} and writes {}/shard-<i+1>/part.json;\n",
        r.tasks - 1,
        r.tasks,
        s.results
    ));
    t.push_str(&format!(
        "# when all are done: lamina merge {}/shard-* --out {}/merged\n",
        s.results, s.results
    ));
    t.push_str(&format!("# Requests: {}\n", s.why));
    t.push_str(&format!("#SBATCH --job-name={}\n", s.name));
    t.push_str(&format!("#SBATCH --array=0-{}\n", r.tasks - 1));
    t.push_str("#SBATCH --ntasks=1\n");
    t.push_str(&format!("#SBATCH --cpus-per-task={}\n", r.cores));
    t.push_str(&format!("#SBATCH --mem={}M\n", r.memory_mib));
    t.push_str(&format!(
        "#SBATCH --time={:02}:{:02}:00\n",
        r.minutes / 60,
        r.minutes % 60
    ));
    if let Some(p) = s.partition {
        t.push_str(&format!("#SBATCH --partition={p}\n"));
    }
    // The log path is read before the script's `cd`, relative to where sbatch runs: start
    // the task in the working directory so the relative path holds wherever it is submitted.
    let plain = |p: &str| !p.is_empty() && !p.chars().any(|c| c.is_whitespace() || c == '"');
    if plain(s.workdir) {
        t.push_str(&format!("#SBATCH --chdir={}\n", s.workdir));
    }
    t.push_str(&format!(
        "#SBATCH --output={}/logs/task-%a.out\n",
        s.results
    ));
    t.push_str("set -euo pipefail\n");
    t.push_str(&format!("cd {}\n", shell_word(s.workdir)));
    t.push_str("# The items of a task run in parallel on its cores.\n");
    t.push_str(&format!(
        "export RAYON_NUM_THREADS=\"${{SLURM_CPUS_PER_TASK:-{}}}\"\n",
        r.cores
    ));
    t.push_str(&format!(
        "{} {} --shard-from-env --out {}/shard-$((SLURM_ARRAY_TASK_ID + 1))\n",
        shell_word(s.lamina),
        job.join(" "),
        shell_word(s.results)
    ));
    t
}

/// Whether a part's `shard` of `shards` can exist: `1 <= shard <= shards <= MAX_SHARDS` (a
/// part read from disk is not trusted to be small).
pub fn check_shard(shard: usize, shards: usize) -> Result<(), String> {
    if shards == 0 || shard == 0 || shard > shards || shards > crate::montecarlo::MAX_SHARDS {
        return Err(format!(
            "shard {shard}/{shards} does not exist (a run splits into 1 to {} shards)",
            crate::montecarlo::MAX_SHARDS
        ));
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A part read from disk may claim any shard count: more than the most a run splits into
    /// is refused before anything is allocated for it.
    #[test]
    fn shard_counts_are_bounded() {
        assert!(check_shard(1, 1).is_ok() && check_shard(3, 4).is_ok());
        assert!(check_shard(0, 4).is_err() && check_shard(5, 4).is_err());
        assert!(check_shard(1, 1_000_000_000_000).is_err());
    }

    fn env<'a>(vars: &'a [(&'a str, &'a str)]) -> impl Fn(&str) -> Option<String> + 'a {
        move |k| {
            vars.iter()
                .find(|(n, _)| *n == k)
                .map(|(_, v)| v.to_string())
        }
    }

    #[test]
    fn array_index_from_zero_is_shard_from_one() {
        let ok = [
            (TASK_ID, "0"),
            (TASK_COUNT, "4"),
            (TASK_MIN, "0"),
            (TASK_MAX, "3"),
        ];
        assert_eq!(shard_from_env(env(&ok)).ok(), Some((1, 4)));
        let last = [(TASK_ID, "3"), (TASK_COUNT, "4")];
        assert_eq!(shard_from_env(env(&last)).ok(), Some((4, 4)));
    }

    #[test]
    fn arrays_of_another_shape_are_refused() {
        for bad in [
            vec![(TASK_ID, "4"), (TASK_COUNT, "4")],
            vec![
                (TASK_ID, "3"),
                (TASK_COUNT, "1"),
                (TASK_MIN, "3"),
                (TASK_MAX, "3"),
            ],
            vec![
                (TASK_ID, "1"),
                (TASK_COUNT, "4"),
                (TASK_MIN, "1"),
                (TASK_MAX, "4"),
            ],
            vec![(TASK_ID, "x"), (TASK_COUNT, "4")],
            vec![(TASK_COUNT, "4")],
            vec![(TASK_ID, "0"), (TASK_COUNT, "0")],
        ] {
            assert!(
                matches!(shard_from_env(env(&bad)), Err(JobError::Usage(_))),
                "{bad:?} is refused"
            );
        }
    }

    #[test]
    fn requests_follow_the_trial() {
        let trial = Trial {
            seconds: 60.0,
            base_bytes: 64 << 20,
            item_bytes: 32 << 20,
        };
        // 100 items over 10 tasks: 10 per task, 8 cores, 2 rounds of 3 minutes, plus 5.
        let r = Resources::estimate(100, 10, None, &trial);
        assert_eq!((r.cores, r.minutes), (8, 11));
        // 2 x (64 + 8 x 32) + 256 = 896 MiB.
        assert_eq!(r.memory_mib, 896);
        let one = Resources::estimate(3, 3, Some(2), &trial);
        assert_eq!((one.cores, one.minutes), (2, 10));
    }

    #[test]
    fn shell_words_survive_spaces_and_quotes() {
        assert_eq!(shell_word("vdd=0.6:1.2:0.2V"), "vdd=0.6:1.2:0.2V");
        assert_eq!(shell_word("a b"), "'a b'");
        assert_eq!(shell_word("it's"), "'it'\\''s'");
        assert_eq!(shell_word("transfer.snm_v>0.2V"), "'transfer.snm_v>0.2V'");
    }
}

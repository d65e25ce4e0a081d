//! A study split over a job array and put back together: `sweep --shard`, `--shard-from-env`,
//! `lamina merge` and `lamina cluster-script`.
//!
//! * A sweep over a 3 x 2 grid split into 3 shards (given to the merge in shuffled order, one
//!   through stdout, one chosen by the array variables) merges into the single-machine table,
//!   JSON and `--out` files (CSV, figures, the family of waveforms) byte for byte; a Monte Carlo
//!   run's shards merge through `lamina merge` into its single-machine JSON.
//! * Missing, repeated and inconsistent parts (another `--set`, another `--param`, a sweep part
//!   with a Monte Carlo part, a file that is no part) are refused, each naming the problem
//!   (exit 3 for parts that do not belong together, 4 for a file that is not a part).
//! * `--shard-from-env` takes task `SLURM_ARRAY_TASK_ID` (from 0) of `SLURM_ARRAY_TASK_COUNT`
//!   as shard ID + 1 of COUNT and refuses arrays of another shape (exit 2).
//! * `cluster-script --dry-run` prints the job-array script and writes nothing; the written
//!   script, run by the shell once per array index with the variables Slurm would set, gives
//!   shards that merge into the single-machine sweep; `--submit` hands it to `sbatch` (a
//!   stand-in here) and says how to watch and merge, or says where the script is when there is
//!   no `sbatch`. Jobs the script cannot split are usage errors (exit 2).

mod common;

use common::{files, lamina, lamina_ok, Scratch};
use std::path::Path;
use std::process::{Command, Output};

const CIRCUIT: &str = "\
param vdd = 1 V
param rload = 1 kOhm
param cload = 1 pF
device r : resistor { resistance = 1 kOhm }
device rl : resistor { resistance = rload }
voltage_source supply (pos = top, neg = ground) { dc = vdd }
r upper (a = top, b = mid)
rl lower (a = mid, b = ground)
voltage_source drive (pos = in, neg = ground) {
    wave = pulse(low = 0 V, high = vdd, delay = 0.2 ns, rise = 10 ps, fall = 10 ps, width = 3 ns, period = 6 ns)
}
r load (a = in, b = out)
capacitor c (a = out, b = ground) { capacitance = cload }
analysis operating_point
analysis transient { stop = 2 ns, record = [out] }
";

const VDD: &str = "--param=vdd=0.5:1.0:0.25V";
const RLOAD: &str = "--param=rload=1kOhm,2kOhm";

/// A directory of its own for one test, holding the circuit as `circuit.lam` (removed when
/// the test ends).
fn scratch(name: &str) -> Scratch {
    let dir = Scratch::new(&format!("cluster-{name}"));
    std::fs::write(dir.join("circuit.lam"), CIRCUIT).expect("circuit file");
    dir
}

fn path(p: &Path) -> &str {
    p.to_str().expect("a UTF-8 path")
}

/// `lamina` with `args` and the array variables `env`, in `dir`.
fn lamina_in(dir: &Path, env: &[(&str, &str)], args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .current_dir(dir)
        .env_remove("SLURM_ARRAY_TASK_ID")
        .env_remove("SLURM_ARRAY_TASK_COUNT")
        .env_remove("SLURM_ARRAY_TASK_MIN")
        .env_remove("SLURM_ARRAY_TASK_MAX")
        .envs(env.iter().copied())
        .args(args)
        .output()
        .expect("the lamina binary runs")
}

/// Shard `k` of 3 of the sweep (with `extra` flags) into `dir/name`.
fn sweep_shard(dir: &Path, k: usize, name: &str, extra: &[&str]) -> String {
    let out = dir.join(name);
    let shard = format!("--shard={k}/3");
    let mut args = vec![
        "sweep",
        "circuit.lam",
        VDD,
        RLOAD,
        &shard,
        "--out",
        path(&out),
    ];
    args.extend(extra);
    let done = lamina_in(dir, &[], &args);
    assert!(
        done.status.success(),
        "{}",
        String::from_utf8_lossy(&done.stderr)
    );
    path(&out).to_string()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

#[test]
fn three_merged_sweep_shards_give_the_single_machine_output_byte_for_byte() {
    let dir = scratch("sweep");
    let single = dir.join("single");
    let run = |args: &[&str]| -> Output {
        let o = lamina_in(&dir, &[], args);
        assert!(o.status.success(), "{}", stderr(&o));
        o
    };
    let single_text = run(&["sweep", "circuit.lam", VDD, RLOAD, "--out", path(&single)]);
    let single_json = run(&["sweep", "circuit.lam", VDD, RLOAD, "--json"]);

    // Shard 1 into a directory, shard 2 through stdout, shard 3 chosen by the array variables.
    let first = sweep_shard(&dir, 1, "part1", &[]);
    let second = run(&["sweep", "circuit.lam", VDD, RLOAD, "--shard", "2/3"]);
    let second_file = dir.join("second.json");
    std::fs::write(&second_file, &second.stdout).expect("part file");
    let third = dir.join("part3");
    let array = [
        ("SLURM_ARRAY_TASK_ID", "2"),
        ("SLURM_ARRAY_TASK_COUNT", "3"),
    ];
    let o = lamina_in(
        &dir,
        &array,
        &[
            "sweep",
            "circuit.lam",
            VDD,
            RLOAD,
            "--shard-from-env",
            "--out",
            path(&third),
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let parts = [path(&third), path(&second_file), first.as_str()];

    let merged = dir.join("merged");
    let mut args = vec!["merge"];
    args.extend(parts);
    let merged_text = lamina_ok(&[args.as_slice(), &["--out", path(&merged)]].concat());
    let merged_json = lamina_ok(&[args.as_slice(), &["--json"]].concat());
    assert_eq!(
        String::from_utf8_lossy(&merged_text.stdout),
        String::from_utf8_lossy(&single_text.stdout)
    );
    assert_eq!(merged_json.stdout, single_json.stdout);
    let (a, b) = (files(&single), files(&merged));
    assert!(a.iter().any(|(n, _)| n == "sweep.csv"));
    assert!(a.iter().any(|(n, _)| n == "transient_out_family.csv"));
    assert_eq!(
        a.iter().map(|f| &f.0).collect::<Vec<_>>(),
        b.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    for ((name, x), (_, y)) in a.iter().zip(&b) {
        assert!(
            x == y,
            "{name} differs between the single run and the merge"
        );
    }
}

/// A spread on the load makes the circuit a Monte Carlo study.
const SPREAD: &str =
    "variation rl.resistance { distribution = normal(sigma = 50 Ohm), scope = local }\n";

#[test]
fn merge_takes_monte_carlo_parts_too() {
    let dir = scratch("mc");
    std::fs::write(dir.join("mc.lam"), format!("{CIRCUIT}{SPREAD}")).expect("circuit file");
    let base = ["montecarlo", "mc.lam", "--runs", "7", "--seed", "3"];
    let run = |extra: &[&str]| -> Output {
        let o = lamina_in(&dir, &[], &[base.as_slice(), extra].concat());
        assert!(o.status.success(), "{}", stderr(&o));
        o
    };
    let single = run(&["--json"]);
    run(&["--shard", "1/2", "--out", "a"]);
    let o = lamina_in(
        &dir,
        &[
            ("SLURM_ARRAY_TASK_ID", "1"),
            ("SLURM_ARRAY_TASK_COUNT", "2"),
        ],
        &[base.as_slice(), &["--shard-from-env", "--out", "b"]].concat(),
    );
    assert!(o.status.success(), "{}", stderr(&o));
    let merged = lamina_in(&dir, &[], &["merge", "b", "a", "--json"]);
    assert!(merged.status.success(), "{}", stderr(&merged));
    assert_eq!(merged.stdout, single.stdout);
    // A sweep part among Monte Carlo parts is refused.
    let sweep = sweep_shard(&dir, 1, "sweep1", &[]);
    let mixed = lamina_in(&dir, &[], &["merge", "a", &sweep]);
    assert_eq!(mixed.status.code(), Some(3), "{}", stderr(&mixed));
    assert!(
        stderr(&mixed).contains("is a sweep part"),
        "{}",
        stderr(&mixed)
    );
}

#[test]
fn merge_refuses_missing_repeated_and_inconsistent_parts() {
    let dir = scratch("refuse");
    let p1 = sweep_shard(&dir, 1, "p1", &[]);
    let p2 = sweep_shard(&dir, 2, "p2", &[]);
    let p3 = sweep_shard(&dir, 3, "p3", &[]);
    let refused = |parts: &[&str], code: i32, says: &str| {
        let o = lamina(&[["merge"].as_slice(), parts].concat());
        assert_eq!(o.status.code(), Some(code), "{parts:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(says), "{parts:?}: {}", stderr(&o));
    };
    refused(&[&p1, &p3], 3, "shard 2/3 (points 2..4) is missing");
    refused(
        &[&p1],
        3,
        "shards 2/3 (points 2..4), 3/3 (points 4..6) are missing",
    );
    refused(&[&p1, &p2, &p2, &p3], 3, "shard 2/3 is given twice");
    // Another --set: the inputs differ.
    let other_set = sweep_shard(&dir, 2, "set", &["--set", "cload=2pF"]);
    refused(&[&p1, &other_set, &p3], 3, "inputs hash");
    // Another circuit file of the same name.
    let other = scratch("refuse-other");
    std::fs::write(other.join("circuit.lam"), CIRCUIT.replace("1 pF", "3 pF")).expect("file");
    let other_file = sweep_shard(&other, 3, "p3", &[]);
    refused(&[&p1, &p2, &other_file], 3, "inputs hash");
    // Another grid.
    let out = dir.join("grid");
    let o = lamina_in(
        &dir,
        &[],
        &[
            "sweep",
            "circuit.lam",
            "--param=vdd=0.5:1.0:0.25V",
            "--param=rload=1kOhm,3kOhm",
            "--shard=2/3",
            "--out",
            path(&out),
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    refused(&[&p1, path(&out), &p3], 3, "has --param");
    // A part of a split into another number of shards.
    let out = dir.join("halves");
    let o = lamina_in(
        &dir,
        &[],
        &[
            "sweep",
            "circuit.lam",
            VDD,
            RLOAD,
            "--shard=2/2",
            "--out",
            path(&out),
        ],
    );
    assert!(o.status.success(), "{}", stderr(&o));
    refused(&[&p1, path(&out)], 3, "is shard 2 of 2");
    // A file that is no part.
    let junk = dir.join("junk.json");
    std::fs::write(&junk, "{\"kind\": \"sweep\", \"format\": 1}").expect("file");
    refused(
        &[&p1, path(&junk)],
        4,
        "not a part file of `lamina sweep --shard`",
    );
}

#[test]
fn the_array_variables_choose_the_shard_from_zero() {
    let dir = scratch("env");
    let args = ["sweep", "circuit.lam", VDD, RLOAD];
    let by_flag = lamina_in(&dir, &[], &[args.as_slice(), &["--shard", "1/3"]].concat());
    let by_env = lamina_in(
        &dir,
        &[
            ("SLURM_ARRAY_TASK_ID", "0"),
            ("SLURM_ARRAY_TASK_COUNT", "3"),
            ("SLURM_ARRAY_TASK_MIN", "0"),
            ("SLURM_ARRAY_TASK_MAX", "2"),
        ],
        &[args.as_slice(), &["--shard-from-env"]].concat(),
    );
    assert!(by_env.status.success(), "{}", stderr(&by_env));
    assert_eq!(by_env.stdout, by_flag.stdout);
    for (env, says) in [
        (
            vec![
                ("SLURM_ARRAY_TASK_ID", "3"),
                ("SLURM_ARRAY_TASK_COUNT", "3"),
            ],
            "SLURM_ARRAY_TASK_ID=3",
        ),
        (
            vec![("SLURM_ARRAY_TASK_COUNT", "3")],
            "SLURM_ARRAY_TASK_ID is not set",
        ),
        (
            vec![
                ("SLURM_ARRAY_TASK_ID", "2"),
                ("SLURM_ARRAY_TASK_COUNT", "1"),
                ("SLURM_ARRAY_TASK_MIN", "2"),
                ("SLURM_ARRAY_TASK_MAX", "2"),
            ],
            "--array=0-0",
        ),
    ] {
        let o = lamina_in(
            &dir,
            &env,
            &[args.as_slice(), &["--shard-from-env"]].concat(),
        );
        assert_eq!(o.status.code(), Some(2), "{env:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(says), "{env:?}: {}", stderr(&o));
    }
    let both = lamina_in(
        &dir,
        &[],
        &[args.as_slice(), &["--shard", "1/3", "--shard-from-env"]].concat(),
    );
    assert_eq!(both.status.code(), Some(2));
}

#[test]
fn the_script_is_plain_and_its_tasks_merge_into_the_single_sweep() {
    let dir = scratch("script");
    let job = ["sweep", "circuit.lam", VDD, "--set", "rload=1.5kOhm"];
    let dry = lamina_in(
        &dir,
        &[],
        &[
            ["cluster-script", "--tasks", "3", "--dry-run"].as_slice(),
            &job,
        ]
        .concat(),
    );
    assert!(dry.status.success(), "{}", stderr(&dry));
    let text = String::from_utf8_lossy(&dry.stdout).into_owned();
    assert!(
        !dir.join("lamina-results").exists(),
        "a dry run writes nothing"
    );
    for line in [
        "#!/bin/bash",
        "#SBATCH --array=0-2",
        "#SBATCH --cpus-per-task=1",
        "#SBATCH --time=00:10:00",
        "#SBATCH --output=lamina-results/logs/task-%a.out",
        "export RAYON_NUM_THREADS=\"${SLURM_CPUS_PER_TASK:-1}\"",
    ] {
        assert!(text.lines().any(|l| l == line), "no `{line}` in\n{text}");
    }
    let mem = text
        .lines()
        .find_map(|l| l.strip_prefix("#SBATCH --mem="))
        .and_then(|m| m.strip_suffix('M'))
        .and_then(|m| m.parse::<u64>().ok())
        .expect("a --mem line in MiB");
    assert!(mem >= 256 && mem % 64 == 0, "{mem}");
    let run_line = text.lines().last().expect("the job line");
    assert!(
        run_line.ends_with(
            "sweep circuit.lam --param=vdd=0.5:1.0:0.25V --set rload=1.5kOhm --shard-from-env \
             --out lamina-results/shard-$((SLURM_ARRAY_TASK_ID + 1))"
        ),
        "{run_line}"
    );

    // Written, then run by the shell as Slurm would run each task.
    let wrote = lamina_in(
        &dir,
        &[],
        &[["cluster-script", "--tasks", "3"].as_slice(), &job].concat(),
    );
    assert!(wrote.status.success(), "{}", stderr(&wrote));
    let script = dir.join("lamina-results").join("job.sh");
    assert!(dir.join("lamina-results").join("logs").is_dir());
    let written = std::fs::read_to_string(&script).expect("the script");
    let plain = |t: &str| -> Vec<String> {
        t.lines()
            .filter(|l| !l.starts_with("# Requests:"))
            .map(str::to_string)
            .collect()
    };
    assert_eq!(plain(&written), plain(&text));
    for id in ["0", "1", "2"] {
        let o = Command::new("bash")
            .arg(&script)
            .current_dir(&dir)
            .env("SLURM_ARRAY_TASK_ID", id)
            .env("SLURM_ARRAY_TASK_COUNT", "3")
            .output()
            .expect("bash runs");
        assert!(o.status.success(), "task {id}: {}", stderr(&o));
    }
    let single = lamina_in(&dir, &[], &[job.as_slice(), &["--json"]].concat());
    let merged = lamina_in(
        &dir,
        &[],
        &[
            "merge",
            "lamina-results/shard-2",
            "lamina-results/shard-3",
            "lamina-results/shard-1",
            "--json",
        ],
    );
    assert!(merged.status.success(), "{}", stderr(&merged));
    assert_eq!(merged.stdout, single.stdout);
}

#[test]
fn the_script_refuses_jobs_it_cannot_split() {
    let dir = scratch("refuse-script");
    for (args, says) in [
        (
            vec!["--tasks", "7", "sweep", "circuit.lam", VDD, RLOAD],
            "only 6 points",
        ),
        (
            vec!["--tasks", "2", "sweep", "circuit.lam", VDD, "--out", "x"],
            "leave --out",
        ),
        (
            vec![
                "--tasks",
                "2",
                "sweep",
                "circuit.lam",
                VDD,
                "--shard",
                "1/2",
            ],
            "leave --shard",
        ),
        (
            vec!["--tasks", "2", "transient", "circuit.lam"],
            "`sweep ...`, `montecarlo ...` or `fit ...`",
        ),
        (
            vec!["--tasks", "0", "sweep", "circuit.lam", VDD],
            "--tasks 0",
        ),
    ] {
        let o = lamina_in(&dir, &[], &[["cluster-script"].as_slice(), &args].concat());
        assert_eq!(o.status.code(), Some(2), "{args:?}: {}", stderr(&o));
        assert!(stderr(&o).contains(says), "{args:?}: {}", stderr(&o));
    }
}

#[test]
fn submit_hands_the_script_to_sbatch_and_says_how_to_merge() {
    let dir = scratch("submit");
    let bin = dir.join("bin");
    std::fs::create_dir_all(&bin).expect("directory");
    let args = [
        "cluster-script",
        "--tasks",
        "2",
        "--submit",
        "sweep",
        "circuit.lam",
        VDD,
    ];
    let run = |path: &Path| {
        Command::new(env!("CARGO_BIN_EXE_lamina"))
            .current_dir(&dir)
            .env("PATH", path)
            .args(args)
            .output()
            .expect("the lamina binary runs")
    };
    // No sbatch on the path: the script is written, and the error says where it is.
    let none = run(&bin);
    assert_eq!(none.status.code(), Some(4), "{}", stderr(&none));
    assert!(
        stderr(&none).contains("cannot run sbatch"),
        "{}",
        stderr(&none)
    );
    assert!(dir.join("lamina-results/job.sh").is_file());
    // A stand-in that answers as `sbatch --parsable` does (job id; cluster).
    let fake = bin.join("sbatch");
    std::fs::write(
        &fake,
        "#!/bin/sh\n[ \"$1\" = --parsable ] && [ -f \"$2\" ] && echo '42;local'\n",
    )
    .expect("stand-in");
    use std::os::unix::fs::PermissionsExt;
    std::fs::set_permissions(&fake, std::fs::Permissions::from_mode(0o755)).expect("mode");
    let done = run(&bin);
    assert!(done.status.success(), "{}", stderr(&done));
    let text = String::from_utf8_lossy(&done.stdout);
    assert!(text.contains("submitted job array 42 (2 tasks)"), "{text}");
    assert!(text.contains("squeue -j 42"), "{text}");
    assert!(
        text.contains("lamina merge lamina-results/shard-* --out lamina-results/merged"),
        "{text}"
    );
}

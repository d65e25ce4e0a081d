//! Batch fits (`lamina fit` over several devices, one fit each) on the invented demo wafer
//! (`netlists/demo/data/wafer-curves.csv`, made by `make-wafer-data.py` from the demo card with
//! known values per die):
//!
//! * each die's mobility and work function are recovered, and the statistics across the dies
//!   are those of the per-device values;
//! * the same dies as one file per die (a directory) give the same fits, named by file;
//! * one thread or two, the whole batch on one machine or three shards merged (one shard
//!   through stdout, one chosen by Slurm's array variables) give the same report, JSON and
//!   files, byte for byte;
//! * a merge refuses a missing shard, a shard given twice, and parts of other data or other
//!   settings, naming what is wrong (exit 3); `--shard` on a single fit and devices of one
//!   name are usage errors (exit 2);
//! * `cluster-script` writes a job array for a batch fit and refuses a single fit.

mod common;
use common::Scratch;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

const WAFER: &str = "netlists/demo/data/wafer-curves.csv";
const CARD: &str = "netlists/demo/n-device.lam";
const MOBILITY: &str = "n2d.electron_mobility=5:200cm^2/(V s):log";
const WORK_FUNCTION: &str = "n2d.gate_work_function=4.0:4.8eV";

/// The values each die was generated from (make-wafer-data.py, also listed in the data file's
/// comments): name, electron mobility (cm^2/(V s)), gate work function (eV).
const DIES: [(&str, f64, f64); 8] = [
    ("die01", 32.82, 4.365),
    ("die02", 43.21, 4.3659),
    ("die03", 40.63, 4.3389),
    ("die04", 38.98, 4.3618),
    ("die05", 43.88, 4.3733),
    ("die06", 39.93, 4.3547),
    ("die07", 36.5, 4.3698),
    ("die08", 45.48, 4.3304),
];

/// A directory of its own for one test (removed when the test ends).
fn scratch(name: &str) -> Scratch {
    Scratch::new(&format!("fit-batch-{name}"))
}

fn path(p: &Path) -> &str {
    p.to_str().expect("a UTF-8 path")
}

/// Runs `lamina` from the package root with `env` set (and Slurm's array variables cleared).
fn lamina_env(env: &[(&str, &str)], args: &[&str]) -> Output {
    let mut c = Command::new(env!("CARGO_BIN_EXE_lamina"));
    for v in [
        "SLURM_ARRAY_TASK_ID",
        "SLURM_ARRAY_TASK_COUNT",
        "SLURM_ARRAY_TASK_MIN",
        "SLURM_ARRAY_TASK_MAX",
    ] {
        c.env_remove(v);
    }
    c.envs(env.iter().copied())
        .args(args)
        .output()
        .expect("the binary runs")
}

fn lamina(args: &[&str]) -> Output {
    lamina_env(&[], args)
}

fn ok(o: Output) -> Output {
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    o
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// `fit DATA --card CARD --fit mobility --fit work function` followed by `extra`.
fn fit_args<'a>(data: &'a str, extra: &[&'a str]) -> Vec<&'a str> {
    let mut v = vec![
        "fit",
        data,
        "--card",
        CARD,
        "--fit",
        MOBILITY,
        "--fit",
        WORK_FUNCTION,
    ];
    v.extend_from_slice(extra);
    v
}

/// Every file under `dir` (recursively), by relative path, with its bytes.
fn tree(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut out = Vec::new();
    let mut stack = vec![dir.to_path_buf()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).expect("a directory") {
            let p = e.expect("an entry").path();
            if p.is_dir() {
                stack.push(p);
            } else {
                let name = p
                    .strip_prefix(dir)
                    .expect("under the directory")
                    .display()
                    .to_string();
                out.push((name, std::fs::read(&p).expect("the file")));
            }
        }
    }
    out.sort();
    out
}

fn same_tree(a: &Path, b: &Path) {
    let (x, y) = (tree(a), tree(b));
    assert_eq!(
        x.iter().map(|f| &f.0).collect::<Vec<_>>(),
        y.iter().map(|f| &f.0).collect::<Vec<_>>()
    );
    for ((name, p), (_, q)) in x.iter().zip(&y) {
        assert!(
            p == q,
            "{name} differs between {} and {}",
            a.display(),
            b.display()
        );
    }
}

fn json(o: &Output) -> serde_json::Value {
    serde_json::from_slice(&o.stdout).expect("JSON on stdout")
}

/// Each die's fitted values against the values it was generated from. The data carry 0.5 %
/// multiplicative noise on 58 points per die, so the fits land within about 0.2 % of the
/// mobility and 0.1 meV of the work function (measured at the time of writing: at most 0.17 %
/// and 0.05 meV); the bounds leave room for that and would catch a fit of the wrong die.
#[test]
fn a_batch_recovers_each_device_s_values_and_summarises_them() {
    let out = json(&ok(lamina(&fit_args(WAFER, &["--json"]))));
    let devices = out["devices"].as_array().expect("devices");
    assert_eq!(devices.len(), DIES.len());
    let q = 1.602_176_634e-19;
    let mut mobilities = Vec::new();
    for (d, (name, mu, wf)) in devices.iter().zip(DIES) {
        assert_eq!(d["device"], name);
        assert_eq!(d["error"], serde_json::Value::Null);
        let p = &d["parameters"];
        let got_mu = p[0]["value_si"].as_f64().expect("mobility") * 1e4;
        let got_wf = p[1]["value_si"].as_f64().expect("work function") / q;
        assert!((got_mu / mu - 1.0).abs() < 5e-3, "{name}: {got_mu} vs {mu}");
        assert!((got_wf - wf).abs() < 1e-3, "{name}: {got_wf} vs {wf}");
        assert!(p[0]["std_error_si"].as_f64().expect("an error") > 0.0);
        mobilities.push(got_mu * 1e-4);
    }
    // Statistics across the dies: those of the per-device values (sample standard deviation,
    // divisor n - 1; median of eight: the mean of the middle two).
    let s = &out["statistics"][0];
    let n = mobilities.len() as f64;
    let mean = mobilities.iter().sum::<f64>() / n;
    let sd = (mobilities.iter().map(|x| (x - mean).powi(2)).sum::<f64>() / (n - 1.0)).sqrt();
    let mut sorted = mobilities.clone();
    sorted.sort_by(f64::total_cmp);
    let median = 0.5 * (sorted[3] + sorted[4]);
    for (key, want) in [("mean_si", mean), ("std_dev_si", sd), ("median_si", median)] {
        let got = s[key].as_f64().expect(key);
        assert!((got / want - 1.0).abs() < 1e-12, "{key}: {got} vs {want}");
    }
    assert_eq!(s["devices"], 8);
    assert_eq!(out["failed"], 0);
}

/// Splits the wafer file into one file per die (without the `device` column) in `dir`.
fn one_file_per_die(dir: &Path) {
    let text = std::fs::read_to_string(WAFER).expect("the demo data");
    for (name, ..) in DIES {
        let mut csv = String::from("V_GS (V), V_DS (V), I_D (A)\n");
        for line in text.lines() {
            if let Some(rest) = line.strip_prefix(&format!("{name},")) {
                csv.push_str(rest.trim());
                csv.push('\n');
            }
        }
        std::fs::write(dir.join(format!("{name}.csv")), csv).expect("a die's file");
    }
}

/// A directory of one file per die is the same batch, each device named by its file; two
/// files of one name are refused.
#[test]
fn a_directory_of_files_is_a_batch_named_by_file() {
    let dir = scratch("files");
    let dies = dir.join("dies");
    std::fs::create_dir_all(&dies).expect("directory");
    one_file_per_die(&dies);
    let by_file = json(&ok(lamina(&fit_args(path(&dies), &["--json"]))));
    let by_column = json(&ok(lamina(&fit_args(WAFER, &["--json"]))));
    for (a, b) in by_file["devices"]
        .as_array()
        .expect("devices")
        .iter()
        .zip(by_column["devices"].as_array().expect("devices"))
    {
        assert_eq!(a["device"], b["device"]);
        assert_eq!(a["parameters"], b["parameters"]);
        assert!(a["source"].as_str().expect("source").ends_with(".csv"));
    }
    // Two files named die01.csv in different directories name two devices alike.
    let other = dir.join("other");
    std::fs::create_dir_all(&other).expect("directory");
    std::fs::copy(dies.join("die01.csv"), other.join("die01.csv")).expect("copy");
    let a = dies.join("die01.csv");
    let b = other.join("die01.csv");
    let o = lamina(&["fit", path(&a), path(&b), "--card", CARD, "--fit", MOBILITY]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(
        stderr(&o).contains("two devices are named `die01`"),
        "{}",
        stderr(&o)
    );
}

/// A data file of one device (two points) in `dir`: a single fit, not a batch.
fn one_small_file(dir: &Path) -> PathBuf {
    let single = dir.join("die.csv");
    std::fs::write(
        &single,
        "V_GS (V), V_DS (V), I_D (A)\n0.5, 0.05, 1e-7\n1, 0.05, 1e-6\n",
    )
    .expect("file");
    single
}

/// Runs shard `k` of `n` of the wafer into `dir/shard-k` and returns that directory.
fn shard(dir: &Path, k: usize, n: usize, extra: &[&str]) -> PathBuf {
    let out = dir.join(format!("shard-{k}"));
    let spec = format!("{k}/{n}");
    let mut args = fit_args(WAFER, &["--shard", &spec, "--out", path(&out)]);
    args.extend_from_slice(extra);
    ok(lamina(&args));
    out
}

#[test]
fn shards_merge_into_the_single_machine_output_byte_for_byte_on_any_thread_count() {
    let dir = scratch("merge");
    let single = dir.join("single");
    let one_thread = [("RAYON_NUM_THREADS", "1")];
    let two_threads = [("RAYON_NUM_THREADS", "2")];
    let text = ok(lamina_env(
        &one_thread,
        &fit_args(WAFER, &["--out", path(&single)]),
    ));
    let single_json = ok(lamina_env(&two_threads, &fit_args(WAFER, &["--json"])));
    let again = dir.join("again");
    ok(lamina_env(
        &two_threads,
        &fit_args(WAFER, &["--out", path(&again)]),
    ));
    same_tree(&single, &again);

    // Shard 1 into a directory, shard 2 through stdout, shard 3 chosen by the array variables.
    let first = shard(&dir, 1, 3, &[]);
    let second = ok(lamina(&fit_args(WAFER, &["--shard", "2/3"])));
    let second_file = dir.join("second.json");
    std::fs::write(&second_file, &second.stdout).expect("part file");
    let third = dir.join("shard-3");
    ok(lamina_env(
        &[
            ("SLURM_ARRAY_TASK_ID", "2"),
            ("SLURM_ARRAY_TASK_COUNT", "3"),
            ("RAYON_NUM_THREADS", "1"),
        ],
        &fit_args(WAFER, &["--shard-from-env", "--out", path(&third)]),
    ));
    let merged = dir.join("merged");
    let parts = [path(&third), path(&second_file), path(&first)];
    let merged_text = ok(lamina(
        &[&["merge"][..], &parts, &["--out", path(&merged)]].concat(),
    ));
    let merged_json = ok(lamina(&[&["merge"][..], &parts, &["--json"]].concat()));
    assert_eq!(merged_text.stdout, text.stdout);
    assert_eq!(merged_json.stdout, single_json.stdout);
    let files = tree(&single);
    for f in [
        "batch.csv",
        "batch.json",
        "batch-n2d_electron_mobility.svg",
        "batch-scatter.png",
        "devices/die08/fitted.lam",
        "devices/die01/device-1-transfer-log.svg",
    ] {
        assert!(files.iter().any(|(n, _)| n == f), "{f} is written");
    }
    same_tree(&single, &merged);
}

#[test]
fn merge_refuses_missing_repeated_and_foreign_parts_naming_them() {
    let dir = scratch("refuse");
    let p1 = shard(&dir, 1, 3, &[]);
    let p2 = shard(&dir, 2, 3, &[]);
    let p3 = shard(&dir, 3, 3, &[]);
    let merge = |parts: &[&Path]| -> Output {
        let mut args = vec!["merge"];
        args.extend(parts.iter().map(|p| path(p)));
        lamina(&args)
    };
    let missing = merge(&[&p1, &p3]);
    assert_eq!(missing.status.code(), Some(3));
    assert!(
        stderr(&missing).contains("shard 2/3 (devices 2..5: die03, die04, die05) is missing"),
        "{}",
        stderr(&missing)
    );
    let twice = merge(&[&p1, &p2, &p2, &p3]);
    assert_eq!(twice.status.code(), Some(3));
    assert!(
        stderr(&twice).contains("shard 2/3 is given twice"),
        "{}",
        stderr(&twice)
    );

    // A shard of other data: one current changed in a copy of the wafer.
    let text = std::fs::read_to_string(WAFER).expect("the demo data");
    let line = text
        .lines()
        .find(|l| l.starts_with("die05, 1,"))
        .expect("a die05 row");
    let edited = dir.join("wafer.csv");
    std::fs::write(&edited, text.replace(line, &line.replace("e-", "1e-"))).expect("copy");
    let other_dir = dir.join("shard-2-other");
    ok(lamina(&fit_args(
        path(&edited),
        &["--shard", "2/3", "--out", path(&other_dir)],
    )));
    let foreign = merge(&[&p1, &other_dir, &p3]);
    assert_eq!(foreign.status.code(), Some(3));
    assert!(
        stderr(&foreign).contains("inputs hash (card files and data)"),
        "{}",
        stderr(&foreign)
    );
    // A shard of other settings: a wider bound.
    let wider = dir.join("shard-3-wider");
    ok(lamina(&[
        "fit",
        WAFER,
        "--card",
        CARD,
        "--fit",
        MOBILITY,
        "--fit",
        "n2d.gate_work_function=3.9:4.8eV",
        "--shard",
        "3/3",
        "--out",
        path(&wider),
    ]));
    let settings = merge(&[&p1, &p2, &wider]);
    assert_eq!(settings.status.code(), Some(3));
    assert!(
        stderr(&settings).contains("the settings") && stderr(&settings).contains("3.9:4.8eV"),
        "{}",
        stderr(&settings)
    );

    // --shard on a single fit has nothing to split.
    let single = one_small_file(&dir);
    let o = lamina(&[
        "fit",
        path(&single),
        "--card",
        CARD,
        "--fit",
        MOBILITY,
        "--shard",
        "1/2",
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("this is one fit"), "{}", stderr(&o));
}

#[test]
fn cluster_script_writes_a_job_array_for_a_batch_fit() {
    let o = ok(lamina(
        &[
            &["cluster-script", "--tasks", "4", "--dry-run"][..],
            &fit_args(WAFER, &[]),
        ]
        .concat(),
    ));
    let script = String::from_utf8_lossy(&o.stdout);
    assert!(script.contains("#SBATCH --array=0-3"), "{script}");
    assert!(script.contains("#SBATCH --job-name=lamina-fit"), "{script}");
    assert!(script.contains("8 devices in 4 tasks"), "{script}");
    assert!(
        script.contains("--shard-from-env --out lamina-results/shard-"),
        "{script}"
    );
    let dir = scratch("script");
    let single = one_small_file(&dir);
    let o = lamina(&[
        "cluster-script",
        "--tasks",
        "2",
        "--dry-run",
        "fit",
        path(&single),
        "--card",
        CARD,
        "--fit",
        MOBILITY,
    ]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("cannot be split"), "{}", stderr(&o));
}

/// A device whose fit fails (every current below the floor: nothing to fit) is a row saying
/// why; the others are fitted and summarised, the files are written, the job exits 1, and the
/// merge of two shards does all of this alike.
#[test]
fn a_failed_device_is_a_row_saying_why_in_the_whole_batch_and_in_the_merge() {
    let dir = scratch("failed");
    let text = std::fs::read_to_string(WAFER).expect("the demo data");
    let mut csv: String = text
        .lines()
        .filter(|l| l.starts_with("device,") || l.starts_with("die01,") || l.starts_with("die02,"))
        .map(|l| format!("{l}\n"))
        .collect();
    csv.push_str("dead, 0.5, 0.05, 1e-15\ndead, 1, 0.05, 2e-15\n");
    let data = dir.join("wafer.csv");
    std::fs::write(&data, csv).expect("data file");
    let single = dir.join("single");
    let whole = lamina(&fit_args(path(&data), &["--out", path(&single)]));
    assert_eq!(whole.status.code(), Some(1), "{}", stderr(&whole));
    assert!(
        stderr(&whole).contains("1 of 3 device fits failed") && stderr(&whole).contains("dead"),
        "{}",
        stderr(&whole)
    );
    let batch = std::fs::read_to_string(single.join("batch.csv")).expect("batch.csv");
    let columns = |l: &str| l.split(',').count();
    let lines: Vec<&str> = batch.lines().collect();
    assert_eq!(lines.len(), 4);
    assert!(
        lines.iter().all(|l| columns(l) == columns(lines[0])),
        "{batch}"
    );
    assert!(
        lines[3].starts_with("3,dead,") && lines[3].ends_with("fit fewer"),
        "{batch}"
    );
    assert!(!single.join("devices/dead").exists());
    let mut parts = Vec::new();
    for k in 1..=2 {
        let out = dir.join(format!("shard-{k}"));
        let spec = format!("{k}/2");
        ok(lamina(&fit_args(
            path(&data),
            &["--shard", &spec, "--out", path(&out)],
        )));
        parts.push(out);
    }
    let merged = dir.join("merged");
    let m = lamina(&[
        "merge",
        path(&parts[1]),
        path(&parts[0]),
        "--out",
        path(&merged),
    ]);
    assert_eq!(m.status.code(), Some(1), "{}", stderr(&m));
    assert_eq!(m.stdout, whole.stdout);
    same_tree(&single, &merged);
}

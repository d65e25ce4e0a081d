//! A Monte Carlo run split into shards (`lamina montecarlo --shard K/N`) and put back together
//! (`lamina montecarlo-merge`) gives the run on one machine byte for byte.
//!
//! * A divider with local normal spreads and an RC transient with a global log-normal one, 37
//!   samples: the single run and four shards merged (given in shuffled order, one of them on
//!   one thread, one through stdout) print the same JSON and the same table, and write the
//!   same `--out` files, CSV, JSON and figures, the transient's family of waveforms included.
//! * A missing shard, a shard given twice, a shard of another seed, a shard of another circuit
//!   file, an unreadable file and a file that is not a part are refused, each naming the
//!   problem (exit 3 for parts that do not belong together, 4 for files that cannot be read).
//! * `--shard` values that are not `K/N` with 1 <= K <= N <= 10000, and `--shard` with
//!   `--corners`, are usage errors (exit 2).
//! * The shard ranges `[floor((K-1) R / N), floor(K R / N))` cover the run once, in order.

mod common;

use common::{files, Scratch};
use lamina::montecarlo::{shard_range, stable_hash};
use std::path::{Path, PathBuf};
use std::process::Output;

const CIRCUIT: &str = "\
device r : resistor { resistance = 1 kOhm }
device rc : resistor { resistance = 1 kOhm }
voltage_source supply (pos = top, neg = ground) { dc = 1 V }
r upper (a = top, b = mid)
r lower (a = mid, b = ground)
voltage_source drive (pos = in, neg = ground) {
    wave = pulse(low = 0 V, high = 1 V, delay = 0.2 ns, rise = 10 ps, fall = 10 ps, width = 3 ns, period = 6 ns)
}
rc load (a = in, b = out)
capacitor c (a = out, b = ground) { capacitance = 1 pF }
variation r.resistance { distribution = normal(sigma = 20 Ohm), scope = local }
variation rc.resistance { distribution = log_normal(sigma = 0.2), scope = global }
analysis operating_point
analysis transient { stop = 3 ns, record = [out] }
";

const SPEC: &str = "operating_point.mid_v>0.49V";

/// A directory of its own for one test (removed when the test ends).
fn scratch(name: &str) -> Scratch {
    Scratch::new(&format!("shards-{name}"))
}

fn lamina(args: &[&str]) -> Output {
    std::process::Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .expect("the binary runs")
}

fn ok(out: Output) -> Output {
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    out
}

fn path(p: &Path) -> &str {
    p.to_str().expect("a UTF-8 path")
}

/// Writes the circuit (with `from` replaced by `to`) and runs shard `k` of 4 of 37 samples
/// with `seed` into `dir/part{k}`; returns that directory.
fn shard(dir: &Path, k: usize, seed: &str, edit: (&str, &str)) -> PathBuf {
    let file = dir.join(format!("circuit-{k}-{seed}.lam"));
    std::fs::write(&file, CIRCUIT.replace(edit.0, edit.1)).expect("circuit file");
    let out = dir.join(format!("part{k}-{seed}"));
    let spec = format!("--shard={k}/4");
    ok(lamina(&[
        "montecarlo",
        path(&file),
        "--runs",
        "37",
        "--seed",
        seed,
        "--spec",
        SPEC,
        &spec,
        "--out",
        path(&out),
    ]));
    out
}

#[test]
fn four_merged_shards_give_the_single_machine_report_and_files_byte_for_byte() {
    let dir = scratch("merge");
    let file = dir.join("circuit.lam");
    std::fs::write(&file, CIRCUIT).expect("circuit file");
    let f = path(&file);
    let base = [
        "montecarlo",
        f,
        "--runs",
        "37",
        "--seed",
        "7",
        "--spec",
        SPEC,
    ];
    let with = |extra: &[&str]| -> Output {
        let args: Vec<&str> = base.iter().chain(extra).copied().collect();
        ok(lamina(&args))
    };
    let single_json = with(&["--json"]);
    let single_out = dir.join("single");
    let single_text = with(&["--out", path(&single_out)]);

    // Shards 1, 3 and 4 into directories (shard 3 on one thread), shard 2 through stdout.
    let mut parts: Vec<String> = Vec::new();
    for k in [3, 1, 4] {
        let out = dir.join(format!("part{k}"));
        let shard = format!("{k}/4");
        let threads = if k == 3 { "1" } else { "2" };
        with(&["--shard", &shard, "--out", path(&out), "--threads", threads]);
        parts.push(path(&out).to_string());
    }
    let second = with(&["--shard", "2/4"]);
    let part2 = dir.join("second.json");
    std::fs::write(&part2, &second.stdout).expect("part file");
    parts.insert(1, path(&part2).to_string());
    // The part is self-describing: its shard, its samples and every row.
    let v: serde_json::Value = serde_json::from_slice(&second.stdout).expect("JSON");
    assert_eq!(v["shard"], 2);
    assert_eq!(v["shards"], 4);
    assert_eq!(v["samples"], serde_json::json!([9, 18]));
    assert_eq!(v["rows"].as_array().map(Vec::len), Some(9));
    assert_eq!(v["lamina_version"], env!("CARGO_PKG_VERSION"));

    let merged = |extra: &[&str]| {
        let args: Vec<&str> = ["montecarlo-merge"]
            .into_iter()
            .chain(parts.iter().map(String::as_str))
            .chain(extra.iter().copied())
            .collect();
        ok(lamina(&args))
    };
    let merged_json = merged(&["--json"]);
    assert!(!single_json.stdout.is_empty());
    assert!(
        single_json.stdout == merged_json.stdout,
        "JSON reports differ"
    );
    let merged_out = dir.join("merged");
    let merged_text = merged(&["--out", path(&merged_out)]);
    assert!(
        single_text.stdout == merged_text.stdout,
        "text reports differ"
    );
    let (a, b) = (files(&single_out), files(&merged_out));
    let names: Vec<&str> = a.iter().map(|(n, _)| n.as_str()).collect();
    for want in [
        "samples.csv",
        "samples.json",
        "summary.json",
        "family_transient_out.csv",
    ] {
        assert!(names.contains(&want), "{want} missing from {names:?}");
    }
    assert_eq!(names, b.iter().map(|(n, _)| n.as_str()).collect::<Vec<_>>());
    for ((name, x), (_, y)) in a.iter().zip(&b) {
        assert!(
            x == y,
            "{name} differs between the single run and the merge"
        );
    }
}

#[test]
fn merge_refuses_parts_that_are_missing_twice_or_of_another_run() {
    let dir = scratch("refuse");
    let same = ("", "");
    let p: Vec<PathBuf> = (1..=4).map(|k| shard(&dir, k, "3", same)).collect();
    let merge = |parts: &[&Path]| {
        let args: Vec<&str> = ["montecarlo-merge"]
            .into_iter()
            .chain(parts.iter().map(|p| path(p)))
            .collect();
        let out = lamina(&args);
        (
            out.status.code(),
            String::from_utf8_lossy(&out.stderr).into_owned(),
        )
    };
    let (code, err) = merge(&[&p[0], &p[1], &p[3]]);
    assert_eq!(code, Some(3));
    assert!(
        err.contains("shard 3/4") && err.contains("missing"),
        "{err}"
    );
    let (code, err) = merge(&[&p[0], &p[1], &p[2], &p[3], &p[1]]);
    assert_eq!(code, Some(3));
    assert!(err.contains("shard 2/4") && err.contains("twice"), "{err}");
    let other_seed = shard(&dir, 4, "4", same);
    let (code, err) = merge(&[&p[0], &p[1], &p[2], &other_seed]);
    assert_eq!(code, Some(3));
    assert!(err.contains("seed 4") && err.contains("seed 3"), "{err}");
    let other_file = shard(&dir, 4, "3", ("dc = 1 V", "dc = 1.1 V"));
    let (code, err) = merge(&[&p[0], &p[1], &p[2], &other_file]);
    assert_eq!(code, Some(3));
    assert!(err.contains("inputs hash"), "{err}");
    // The same circuit at another path is the same input.
    let (code, err) = merge(&[&p[0], &p[1], &p[2], &shard(&dir, 4, "3", same)]);
    assert_eq!(code, Some(0), "{err}");
    // Files that cannot be read, or are not parts, are input errors.
    let (code, _) = merge(&[&dir.join("absent.json")]);
    assert_eq!(code, Some(4));
    let junk = dir.join("junk.json");
    std::fs::write(&junk, "{\"format\": 1}").expect("file");
    let (code, err) = merge(&[&junk]);
    assert_eq!(code, Some(4));
    assert!(err.contains("not a part file"), "{err}");
}

#[test]
fn shard_values_other_than_k_of_n_are_usage_errors() {
    let dir = scratch("syntax");
    let file = dir.join("circuit.lam");
    std::fs::write(&file, CIRCUIT).expect("circuit file");
    for bad in [
        "0/4", "5/4", "a/4", "4", "1/0", "1/10001", "-1/4", "1/4/2", "",
    ] {
        let shard = format!("--shard={bad}");
        let out = lamina(&["montecarlo", path(&file), "--runs", "8", &shard]);
        assert_eq!(out.status.code(), Some(2), "--shard {bad}");
    }
    let out = lamina(&[
        "montecarlo",
        path(&file),
        "--corners",
        "3",
        "--shard",
        "1/2",
    ]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn shard_ranges_cover_the_run_once_in_order_and_differ_by_at_most_one() {
    for (runs, n) in [(37, 4), (10, 10), (3, 7), (1_000_003, 10_000), (0, 3)] {
        let ranges: Vec<_> = (1..=n).map(|k| shard_range(k, n, runs)).collect();
        assert_eq!(ranges[0].start, 0);
        assert_eq!(ranges[n - 1].end, runs);
        for w in ranges.windows(2) {
            assert_eq!(w[0].end, w[1].start);
        }
        let sizes: Vec<usize> = ranges.iter().map(|r| r.len()).collect();
        let (lo, hi) = (sizes.iter().min(), sizes.iter().max());
        assert!(hi.zip(lo).is_some_and(|(h, l)| h - l <= 1), "{sizes:?}");
    }
    assert_eq!(shard_range(2, 4, 37), 9..18);
    // Where one string ends and the next begins is part of the hash.
    let a = stable_hash([b"ab".as_slice(), b"c"]);
    let b = stable_hash([b"a".as_slice(), b"bc"]);
    assert_ne!(a, b);
    assert_eq!(a, stable_hash([b"ab".as_slice(), b"c"]));
}

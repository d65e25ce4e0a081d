//! Outputs are whole or absent: `--out DIR` is checked before computing, written into a
//! staging sibling and moved into place at the end; a failure or an interrupt leaves nothing.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};

fn lamina(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap()
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("lamina-{name}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Entries of `dir`, sorted.
fn entries(dir: &Path) -> Vec<String> {
    let mut v: Vec<String> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    v.sort();
    v
}

#[test]
fn a_failed_job_leaves_no_output_and_an_unwritable_place_fails_first() {
    let base = scratch("fail");
    let bad = base.join("singular.lam");
    std::fs::write(
        &bad,
        "voltage_source a (pos = x, neg = ground) { dc = 1 V }\n\
         voltage_source b (pos = x, neg = ground) { dc = 2 V }\n\
         analysis transfer { source = a, output = x, from = 0 V, to = 1 V, step = 0.1 V }\n",
    )
    .unwrap();
    let out = base.join("result");
    let r = lamina(&["vtc", bad.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    assert_eq!(r.status.code(), Some(1));
    assert!(!out.exists(), "a failed job wrote {}", out.display());
    assert_eq!(
        entries(&base),
        vec!["singular.lam"],
        "no staging left behind"
    );
    // Under a regular file nothing can be created: refused before the analysis runs (exit 4,
    // and no analysis error on stderr).
    let r = lamina(&[
        "vtc",
        bad.to_str().unwrap(),
        "--out",
        bad.join("sub").to_str().unwrap(),
    ]);
    assert_eq!(r.status.code(), Some(4));
    assert!(!String::from_utf8_lossy(&r.stderr).contains("operating point"));
    let _ = std::fs::remove_dir_all(&base);
}

#[test]
fn a_set_replaces_its_own_files_and_leaves_others() {
    let base = scratch("merge");
    let out = base.join("result");
    std::fs::create_dir_all(&out).unwrap();
    std::fs::write(out.join("notes.txt"), "mine").unwrap();
    std::fs::write(out.join("summary.json"), "old").unwrap();
    let r = lamina(&[
        "vtc",
        "netlists/reference/square-inverter.lam",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let e = entries(&out);
    assert!(e.contains(&"notes.txt".to_string()) && e.contains(&"transfer.csv".to_string()));
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "mine"
    );
    assert_ne!(
        std::fs::read_to_string(out.join("summary.json")).unwrap(),
        "old"
    );
    assert_eq!(entries(&base), vec!["result"], "no staging left behind");
    let _ = std::fs::remove_dir_all(&base);
}

/// Ctrl-C during a sweep with `--out`: exit 130, the directory is absent, nothing is left.
#[test]
fn an_interrupted_sweep_leaves_nothing() {
    let base = scratch("sigint");
    let out = base.join("result");
    let child = Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args([
            "sweep",
            "netlists/demo/ring-21.lam",
            "--param",
            "vdd=0.5:1.2:0.01V",
            "--out",
            out.to_str().unwrap(),
        ])
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Wait until the staging directory exists (the job has started), then interrupt.
    let mut started = false;
    for _ in 0..400 {
        if entries(&base).iter().any(|e| e.contains("partial")) {
            started = true;
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(10));
    }
    assert!(started, "the sweep never created its staging directory");
    let killed = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let r = child.wait_with_output().unwrap();
    assert_eq!(
        r.status.code(),
        Some(130),
        "{}",
        String::from_utf8_lossy(&r.stderr)
    );
    assert!(String::from_utf8_lossy(&r.stderr).contains("interrupted"));
    assert!(
        entries(&base).is_empty(),
        "left behind: {:?}",
        entries(&base)
    );
    let _ = std::fs::remove_dir_all(&base);
}

/// `delay --out` writes the delay run's waveforms and a plot with the measured crossings.
#[test]
fn delay_out_writes_its_waveforms() {
    let base = scratch("delay-out");
    let out = base.join("result");
    let r = lamina(&[
        "delay",
        "netlists/fo4-chain.lam",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert!(r.status.success(), "{}", String::from_utf8_lossy(&r.stderr));
    let csv = std::fs::read_to_string(out.join("delay-1").join("waveforms.csv")).unwrap();
    let header = csv.lines().next().unwrap();
    assert!(
        header.starts_with("time_s,") && header.matches("_v").count() == 2,
        "{header}"
    );
    assert!(csv.lines().count() > 100);
    for f in ["waveforms.svg", "waveforms.png"] {
        assert!(out.join("delay-1").join(f).exists(), "{f}");
    }
    let _ = std::fs::remove_dir_all(&base);
}

//! The command line end to end: the README's main job, JSON output, Matrix Market export and
//! exit codes.

use std::process::Command;

fn lamina(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn ring_job_prints_a_frequency_table_and_json() {
    let out = lamina(&["ring", "--builtin", "square-ring"]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(text.contains("frequency") && text.contains("GHz"), "{text}");

    let out = lamina(&[
        "ring",
        "--builtin",
        "square-ring",
        "--stages",
        "5",
        "--json",
    ]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["stages"], 5);
    let f = v["frequency_hz"].as_f64().unwrap();
    let td = v["stage_delay_s"].as_f64().unwrap();
    assert!((2.0 * 5.0 * f * td - 1.0).abs() < 1e-9);
    assert!(f > 1e9 && f < 1e11, "{f}");
}

#[test]
fn bad_flags_exit_with_usage_errors() {
    let out = lamina(&["ring", "--builtin", "square-ring", "--stages", "4"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("odd number"));
    let out = lamina(&["ring", "--builtin", "no-such-thing"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn matrix_market_export_is_written_whole() {
    let dir = std::env::temp_dir().join(format!("lamina-cli-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let path = dir.join("ring.mtx");
    let out = lamina(&[
        "ring",
        "--builtin",
        "square-ring",
        "--stages",
        "3",
        "--dump-matrix",
        path.to_str().unwrap(),
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&path).unwrap();
    assert!(text.starts_with("%%MatrixMarket matrix coordinate real general"));
    // 3 outputs + vdd + the supply's branch current = 5 unknowns.
    assert!(text.lines().any(|l| l.trim().starts_with("5 5 ")), "{text}");
    assert!(!dir.join("ring.mtx.partial").exists());
    std::fs::remove_dir_all(&dir).unwrap();
}

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

#[test]
fn check_prints_a_summary_or_located_errors() {
    let out = lamina(&["check", "netlists/ring-21.lam"]);
    assert!(out.status.success());
    let text = String::from_utf8(out.stdout).unwrap();
    assert!(
        text.contains("square_nfet") && text.contains("21"),
        "{text}"
    );

    let out = lamina(&[
        "check",
        "netlists/ring-21.lam",
        "--json",
        "--set",
        "stages=9",
    ]);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    assert_eq!(v["elements"]["square_pfet"], 9);

    let out = lamina(&["check", "tests/corpus/bad/unknown-kind.lam"]);
    assert_eq!(out.status.code(), Some(3));
    let err = String::from_utf8(out.stderr).unwrap();
    assert!(
        err.contains("unknown-kind.lam:2:1") && err.contains("did you mean `resistor`?"),
        "{err}"
    );
    assert!(out.stdout.is_empty());

    let out = lamina(&["check", "no/such/file.lam"]);
    assert_eq!(out.status.code(), Some(4));
    let out = lamina(&["check", "netlists/ring-21.lam", "--set", "novalue"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn run_reproduces_the_declared_analyses() {
    let out = lamina(&["run", "netlists/reference/square-inverter.lam", "--json"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let t = &v["analyses"][0];
    assert_eq!(t["analysis"], "transfer");
    // Kang & Leblebici (2003) closed forms for the symmetric square-law inverter.
    assert!((t["vil"].as_f64().unwrap() - 0.45).abs() < 1e-3);
    assert!((t["vih"].as_f64().unwrap() - 0.55).abs() < 1e-3);

    // The ring file and the built-in ring are the same circuit: same stage delay.
    let file = lamina(&["ring", "netlists/reference/square-ring-11.lam", "--json"]);
    let builtin = lamina(&["ring", "--builtin", "square-ring", "--json"]);
    let a: serde_json::Value = serde_json::from_slice(&file.stdout).unwrap();
    let b: serde_json::Value = serde_json::from_slice(&builtin.stdout).unwrap();
    let (fa, fb) = (
        a["frequency_hz"].as_f64().unwrap(),
        b["frequency_hz"].as_f64().unwrap(),
    );
    assert!((fa / fb - 1.0).abs() < 1e-9, "{fa} vs {fb}");
}

#[test]
fn vtc_reports_the_named_keys_of_the_reference_inverter() {
    let out = lamina(&["vtc", "netlists/reference/square-inverter.lam", "--json"]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    // Closed forms for the symmetric square-law inverter (Kang & Leblebici 2003, ch. 5) and
    // its maximum-square margin (Seevinck, List, Lohstroh 1987): see tests/inverter_margins.rs.
    for (key, want, tol) in [
        ("vm", 0.5, 1e-3),
        ("voh", 1.0, 1e-6),
        ("vol", 0.0, 1e-6),
        ("vil", 0.45, 1e-3),
        ("vih", 0.55, 1e-3),
        ("nmh", 0.45, 1e-3),
        ("nml", 0.45, 1e-3),
        ("snm", 0.40, 2e-3),
    ] {
        let got = v[key].as_f64().unwrap_or_else(|| panic!("missing {key}"));
        assert!((got - want).abs() < tol, "{key} = {got}");
    }
    assert!(v["gain_max"].as_f64().unwrap() > 50.0);
    assert!(v["definitions"]["snm"]
        .as_str()
        .unwrap()
        .contains("Seevinck"));
}

#[test]
fn sweep_rows_come_in_grid_order_and_a_failed_point_does_not_stop_the_others() {
    let out = lamina(&[
        "sweep",
        "netlists/reference/square-ring-11.lam",
        "--param",
        "vdd=0,1,0.8V",
        "--json",
    ]);
    // A failed point makes the sweep fail (exit 1), with every row still written.
    assert_eq!(
        out.status.code(),
        Some(1),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = v["rows"].as_array().unwrap();
    assert_eq!(rows.len(), 3);
    let vdds: Vec<f64> = rows.iter().map(|r| r["vdd_v"].as_f64().unwrap()).collect();
    assert_eq!(vdds, vec![0.0, 1.0, 0.8]);
    assert!(
        rows[0]["error"].as_str().is_some(),
        "a ring without supply does not oscillate: {}",
        rows[0]
    );
    // The 1 V point is the reference ring: the same frequency as `lamina ring`.
    let single = lamina(&["ring", "netlists/reference/square-ring-11.lam", "--json"]);
    let s: serde_json::Value = serde_json::from_slice(&single.stdout).unwrap();
    let (a, b) = (
        rows[1]["ring.frequency_hz"].as_f64().unwrap(),
        s["frequency_hz"].as_f64().unwrap(),
    );
    assert!((a / b - 1.0).abs() < 1e-12, "{a} vs {b}");
    assert!(rows[2]["ring.frequency_hz"].as_f64().unwrap() < a);
    // The table takes its columns from every row, not the first (which failed here), heads
    // each with its unit, and gives the failed row its reason.
    let table = lamina(&[
        "sweep",
        "netlists/reference/square-ring-11.lam",
        "--param",
        "vdd=0,1V",
    ]);
    let text = String::from_utf8(table.stdout).unwrap();
    let mut lines = text.lines();
    let header = lines.next().unwrap();
    assert!(
        header.contains("vdd (V)") && header.contains("ring.frequency (Hz)"),
        "{header}"
    );
    assert!(header.contains("ring.energy_per_cycle (J)") && header.ends_with("error"));
    assert!(lines.next().unwrap().contains("positive supply"), "{text}");
    let bad = lamina(&[
        "sweep",
        "netlists/reference/square-ring-11.lam",
        "--param",
        "vdd",
    ]);
    assert_eq!(bad.status.code(), Some(2));
}

#[test]
fn out_writes_data_summary_and_plots() {
    let dir = std::env::temp_dir().join(format!("lamina-out-{}", std::process::id()));
    let d = dir.to_str().unwrap();
    let vtc = lamina(&["vtc", "netlists/reference/square-inverter.lam", "--out", d]);
    assert!(
        vtc.status.success(),
        "{}",
        String::from_utf8_lossy(&vtc.stderr)
    );
    let ring = lamina(&[
        "ring",
        "--builtin",
        "square-ring",
        "--stages",
        "5",
        "--out",
        &format!("{d}/ring"),
    ]);
    assert!(ring.status.success());
    let iv = lamina(&[
        "iv",
        "netlists/reference/sheet-fet-a.lam",
        "--vgs",
        "0:1:0.1",
        "--vds",
        "1",
        "--out",
        &format!("{d}/iv"),
    ]);
    assert!(iv.status.success());
    for f in [
        "transfer.csv",
        "summary.json",
        "transfer.svg",
        "transfer.png",
        "butterfly.svg",
        "ring/waveforms.png",
        "ring/summary.json",
        "iv/iv.csv",
        "iv/transfer-log.svg",
    ] {
        let bytes = std::fs::read(dir.join(f)).unwrap_or_else(|_| panic!("{f} missing"));
        assert!(bytes.len() > 100, "{f} is too small");
        if f.ends_with(".png") {
            assert_eq!(&bytes[1..4], b"PNG");
        }
        if f.ends_with(".svg") {
            assert!(String::from_utf8_lossy(&bytes).contains("<svg"));
        }
    }
    let run = lamina(&["run", "netlists/inverter.lam", "--out", &format!("{d}/run")]);
    assert!(run.status.success());
    let all: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("run/summary.json")).unwrap()).unwrap();
    assert_eq!(all["analyses"][0]["analysis"], "transfer");
    assert!(dir.join("run/transfer-1/butterfly.svg").exists());
    let summary: serde_json::Value =
        serde_json::from_slice(&std::fs::read(dir.join("summary.json")).unwrap()).unwrap();
    assert!((summary["snm"].as_f64().unwrap() - 0.4).abs() < 2e-3);
    assert!(!dir.join("summary.json.partial").exists());
    std::fs::remove_dir_all(&dir).unwrap();
}

/// The exit-code table (README, `--help`): 0 success, 1 an analysis failed, 2 bad usage, 3 the
/// circuit file has errors, 4 a file could not be read or written; each code for each command.
#[test]
fn every_command_follows_the_exit_code_table() {
    let dir = std::env::temp_dir().join(format!("lamina-codes-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // Two voltage sources fight over one node: every analysis fails in its operating point.
    let singular = dir.join("singular.lam");
    std::fs::write(
        &singular,
        "param vdd = 1 V\n\
         device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }\n\
         device pfet : square_pfet { k = 100 uA/V^2, threshold = -0.3 V }\n\
         voltage_source supply (pos = vdd, neg = ground) { dc = vdd }\n\
         voltage_source clash (pos = vdd, neg = ground) { dc = 2 V }\n\
         voltage_source drive (pos = in, neg = ground) { wave = pulse(high = 1 V, rise = 10 ps, fall = 10 ps, width = 1 ns) }\n\
         nfet pull_down (drain = out, gate = in, source = ground)\n\
         pfet pull_up (drain = out, gate = in, source = vdd)\n\
         for i in 0..3 {\n\
             nfet pd[i] (drain = r[i], gate = r[(i + 2) % 3], source = ground)\n\
             pfet pu[i] (drain = r[i], gate = r[(i + 2) % 3], source = vdd)\n\
             capacitor c[i] (a = r[i], b = ground) { capacitance = 1 fF }\n\
         }\n\
         analysis transfer { source = drive, output = out, from = 0 V, to = vdd, step = 10 mV }\n\
         analysis delay { from = in, to = out, stop = 2 ns }\n\
         analysis ring { nodes = r, stages = 3, supply = vdd }\n",
    )
    .unwrap();
    let singular_fet = dir.join("singular-fet.lam");
    std::fs::write(
        &singular_fet,
        "device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }\n\
         voltage_source vg (pos = g, neg = ground) { dc = 0 V }\n\
         voltage_source vd (pos = d, neg = ground) { dc = 0 V }\n\
         voltage_source clash (pos = x, neg = ground) { dc = 1 V }\n\
         voltage_source clash2 (pos = x, neg = ground) { dc = 2 V }\n\
         resistor r (a = x, b = ground) { resistance = 1 kOhm }\n\
         nfet m (drain = d, gate = g, source = ground)\n",
    )
    .unwrap();
    let broken = dir.join("broken.lam");
    std::fs::write(
        &broken,
        "resistr r1 (a = n, b = ground) { resistance = 1 kOhm }\n",
    )
    .unwrap();
    let (s, sf, b) = (
        singular.to_str().unwrap(),
        singular_fet.to_str().unwrap(),
        broken.to_str().unwrap(),
    );
    let inv = "netlists/reference/square-inverter.lam";
    let ring = "netlists/reference/square-ring-11.lam";
    let fet = "netlists/reference/sheet-fet-a.lam";
    let delay = "netlists/fo4-chain.lam";
    let missing = "no/such/file.lam";
    // `--out` under a regular file cannot be created.
    let unwritable = "Cargo.toml/out";
    let iv = ["--vgs", "0:1:0.5", "--vds", "0.1"];
    let cases: Vec<(Vec<&str>, i32)> = vec![
        (vec!["check", inv], 0),
        (vec!["check", inv, "--set", "vdd=1"], 2),
        (vec!["check", b], 3),
        (vec!["check", missing], 4),
        (vec!["run", inv], 0),
        (vec!["run", s], 1),
        (vec!["run", inv, "--set", "vdd=0.8 nm"], 2),
        (vec!["run", b], 3),
        (vec!["run", missing], 4),
        (vec!["run", inv, "--out", unwritable], 4),
        (vec!["vtc", inv], 0),
        (vec!["vtc", s], 1),
        (vec!["vtc", inv, "--set", "nothing=1V"], 2),
        (vec!["vtc", b], 3),
        (vec!["vtc", missing], 4),
        (vec!["vtc", inv, "--out", unwritable], 4),
        (vec!["delay", delay], 0),
        (vec!["delay", s], 1),
        (vec!["delay", delay, "--set", "size=1 V"], 2),
        (vec!["delay", b], 3),
        (vec!["delay", missing], 4),
        (vec!["ring", ring], 0),
        (vec!["ring", s], 1),
        (vec!["ring", ring, "--stages", "7"], 2),
        (
            vec!["ring", "--builtin", "square-ring", "--set", "vdd=1"],
            2,
        ),
        (vec!["ring", b], 3),
        (vec!["ring", missing], 4),
        (vec!["ring", ring, "--out", unwritable], 4),
        ([&["iv", fet][..], &iv[..]].concat(), 0),
        ([&["iv", sf][..], &iv[..]].concat(), 1),
        (vec!["iv", fet, "--vgs", "0:1:1e-7", "--vds", "0:1:1e-7"], 2),
        ([&["iv", b][..], &iv[..]].concat(), 3),
        // A file without the one FET iv needs has an error of its own (the inverter has two).
        ([&["iv", inv][..], &iv[..]].concat(), 3),
        ([&["iv", missing][..], &iv[..]].concat(), 4),
        (
            [&["iv", fet][..], &iv[..], &["--out", unwritable][..]].concat(),
            4,
        ),
        (vec!["sweep", ring, "--param", "vdd=0.9V,1V"], 0),
        (vec!["sweep", s, "--param", "vdd=0.9V,1V"], 1),
        (vec!["sweep", ring, "--param", "vdd=0.9,1"], 2),
        (
            vec!["sweep", ring, "--param", "vdd=1V", "--set", "vdd=1V"],
            2,
        ),
        (
            vec!["sweep", ring, "--param", "vdd=1V", "--param", "vdd=2V"],
            2,
        ),
        (
            vec![
                "sweep",
                ring,
                "--param",
                "vdd=0:1:1e-6V",
                "--param",
                "stages=0:1:1e-6",
            ],
            2,
        ),
        (vec!["sweep", b, "--param", "vdd=1V"], 3),
        (vec!["sweep", missing, "--param", "vdd=1V"], 4),
    ];
    let mut wrong = Vec::new();
    for (args, code) in &cases {
        let out = lamina(args);
        if out.status.code() != Some(*code) {
            wrong.push(format!(
                "{args:?}: expected {code}, got {:?}\n{}",
                out.status.code(),
                String::from_utf8_lossy(&out.stderr)
            ));
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
    assert!(wrong.is_empty(), "{}", wrong.join("\n"));
}

//! `lamina materials` and `lamina check --verbose` end to end: every library entry listed
//! with its sources, JSON that parses and agrees with the library's accessors, resolved cards
//! of the demo files, and the exit codes of bad input.

use lamina_devices::materials::{self, SECTIONS};
use serde_json::Value;
use std::process::{Command, Output};

fn lamina(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(args)
        .output()
        .unwrap()
}

fn stdout(o: &Output) -> String {
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8(o.stdout.clone()).unwrap()
}

fn json(o: &Output) -> Value {
    serde_json::from_str(&stdout(o)).unwrap()
}

fn entries(section: &str) -> Vec<String> {
    match section {
        "channels" => materials::channels(),
        "insulators" => materials::insulators(),
        _ => materials::gates(),
    }
}

#[test]
fn overview_lists_every_entry() {
    let text = stdout(&lamina(&["materials"]));
    for s in SECTIONS {
        assert!(text.contains(&format!("\n{s}\n")), "{s}");
        for name in entries(s) {
            assert!(
                text.lines().any(|l| l.trim_start().starts_with(&name)),
                "{name} missing"
            );
        }
    }
}

#[test]
fn each_entry_shows_every_value_with_unit_and_source() {
    for s in SECTIONS {
        for name in entries(s) {
            let text = stdout(&lamina(&["materials", &name]));
            for v in materials::values(s, &name).unwrap() {
                let line = text
                    .lines()
                    .find(|l| l.split_whitespace().next() == Some(v.key))
                    .unwrap_or_else(|| panic!("{name}/{} missing", v.key));
                assert!(
                    line.contains(materials::unit(v.key).unwrap()),
                    "{name}: {line}"
                );
                assert!(text.contains(&format!("source: {}", v.source)), "{name}");
            }
        }
    }
    // Names are found ignoring case.
    assert!(stdout(&lamina(&["materials", "hbn"])).starts_with("insulator hBN"));
}

#[test]
fn json_holds_the_library_values_with_units_in_keys() {
    let v = json(&lamina(&["materials", "--json"]));
    let mut count = 0;
    for s in SECTIONS {
        for name in entries(s) {
            let e = &v[s][&name];
            for lv in materials::values(s, &name).unwrap() {
                let unit = materials::unit(lv.key).unwrap();
                let key = lamina::describe::json_key(lv.key, unit);
                assert_eq!(e[&key]["value"].as_f64(), Some(lv.value), "{name}/{key}");
                assert_eq!(e[&key]["source"].as_str(), Some(lv.source));
                assert_eq!(e[&key]["unit"].as_str(), Some(unit));
                count += 1;
            }
        }
    }
    assert!(count > 50, "{count}");
    assert_eq!(v["channels"]["MoS2"]["band_gap_ev"]["value"], 2.24);
    assert_eq!(
        v["insulators"]["hBN"]["layer_thickness_m"]["value"],
        3.33e-10
    );
    assert_eq!(v["gates"]["Au"]["kind"], "metal");
    let one = json(&lamina(&["materials", "HfO2", "--json"]));
    assert_eq!(one["section"], "insulators");
    assert_eq!(
        one["values"]["permittivity"]["range"]
            .as_array()
            .map(Vec::len),
        Some(2)
    );
    assert_eq!(one["values"], v["insulators"]["HfO2"]);
}

#[test]
fn unknown_material_is_a_usage_error_with_suggestions() {
    let o = lamina(&["materials", "MoS3"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("did you mean `MoS2`"), "{err}");
    assert!(err.contains("graphene") && err.contains("hBN"), "{err}");
    assert_eq!(lamina(&["materials", "unobtainium"]).status.code(), Some(2));
}

#[test]
fn check_verbose_describes_the_demo_cards() {
    let text = stdout(&lamina(&[
        "check",
        "--verbose",
        "netlists/demo/n-device.lam",
    ]));
    assert!(text.contains("2D-FET card `n2d` used by dut"), "{text}");
    assert!(text.contains("library channel MoS2, band_gap"), "{text}");
    assert!(
        text.contains("EOT") && text.contains("model estimate"),
        "{text}"
    );
    // The plain check is unchanged: no card description without the flag.
    let plain = stdout(&lamina(&["check", "netlists/demo/n-device.lam"]));
    assert!(!plain.contains("2D-FET card"));
    assert!(text.starts_with(&plain));

    let v = json(&lamina(&[
        "check",
        "--verbose",
        "--json",
        "netlists/demo/inverter-graphene.lam",
    ]));
    let cards = v["cards"].as_array().unwrap();
    assert_eq!(cards.len(), 2);
    assert!(v["caution"].as_str().unwrap().contains("model estimates"));
    let n = &cards[0];
    assert_eq!(n["device"], "n2d");
    assert_eq!(n["values"]["band_gap_ev"]["from"], "library");
    assert_eq!(n["values"]["band_gap_ev"]["value"], 2.24);
    assert_eq!(n["values"]["width_m"]["from"], "card");
    assert_eq!(n["values"]["gate_work_function_ev"]["entry"], "graphene");
    let source = n["values"]["gate_work_function_ev"]["source"].as_str();
    assert_eq!(
        source,
        materials::source("gates", "graphene", "neutral_work_function")
    );
    let d = &n["derived"];
    for key in [
        "insulator_capacitance_f_per_m2",
        "eot_m",
        "flat_band_v",
        "threshold_n_v",
        "threshold_p_v",
        "thermal_voltage_v",
    ] {
        assert!(d[key].as_f64().is_some_and(f64::is_finite), "{key}");
    }
    assert_eq!(
        d["electron_mobility"]["lattice_source"]["model"], "given",
        "{d}"
    );
    assert!(v["definitions"]["threshold_n_v"]
        .as_str()
        .unwrap()
        .contains("1e11"));
}

#[test]
fn check_verbose_errors_keep_their_exit_codes() {
    assert_eq!(
        lamina(&["check", "-v", "netlists/demo/no-such-file.lam"])
            .status
            .code(),
        Some(4)
    );
    let dir = std::env::temp_dir().join(format!("lamina-materials-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let bad = dir.join("bad.lam");
    std::fs::write(
        &bad,
        "device n : sheet_fet { channel = MoS3, insulator = hBN, insulator_layers = 10 }\n",
    )
    .unwrap();
    let o = lamina(&["check", "-v", bad.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&o.stderr).contains("MoS2"));
    // A file without 2D FETs has nothing to describe and is fine.
    let text = stdout(&lamina(&["check", "-v", "netlists/inverter.lam"]));
    assert!(!text.contains("2D-FET card"));
    std::fs::remove_dir_all(&dir).ok();
}

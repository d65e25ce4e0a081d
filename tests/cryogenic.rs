//! Every demo card at 4 K, the temperature of liquid-helium measurements: the device's
//! operating points over the bias corners are computed (or the card is refused with its reason,
//! which none is today), with the warning that the library holds room-temperature values.

use std::process::Command;

#[test]
fn every_demo_card_runs_at_four_kelvin() {
    let dir = std::env::temp_dir().join(format!("lamina-cryo-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let demo = std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join("netlists/demo");
    for process in ["process.lam", "process-graphene.lam"] {
        for (card, sign) in [("n2d", 1.0), ("p2d", -1.0)] {
            for (vg, vd) in [(0.0, 0.05), (0.5, 0.05), (1.0, 1.0), (0.0, 1.0)] {
                let file = dir.join(format!("{card}.lam"));
                std::fs::write(
                    &file,
                    format!(
                        "include \"{}\"\n\
                         voltage_source vg (pos = g, neg = ground) {{ dc = {} V }}\n\
                         voltage_source vd (pos = d, neg = ground) {{ dc = {} V }}\n\
                         {card} m (drain = d, gate = g, source = ground) {{ temperature = 4 K }}\n\
                         analysis operating_point\n",
                        demo.join(process).display(),
                        sign * vg,
                        sign * vd
                    ),
                )
                .unwrap();
                let out = Command::new(env!("CARGO_BIN_EXE_lamina"))
                    .args(["run", file.to_str().unwrap(), "--json"])
                    .output()
                    .unwrap();
                let err = String::from_utf8_lossy(&out.stderr);
                assert_eq!(
                    out.status.code(),
                    Some(0),
                    "{process} {card} at V_G = {vg}, V_D = {vd}: {err}"
                );
                assert!(err.contains("temperature"), "the 4 K warning: {err}");
                let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
                let d = v["analyses"][0]["node_voltages_v"]["d"].as_f64().unwrap();
                assert!((d - sign * vd).abs() < 1e-9);
            }
        }
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

//! Gate delay of the square-law inverter driven by a (nearly) ideal step into a load C, against
//! the closed form of S.-M. Kang and Y. Leblebici, CMOS Digital Integrated Circuits, 3rd ed.
//! (2003), ch. 6: t_PHL = C / (k_n (V_DD - V_T)) [2 V_T / (V_DD - V_T) + ln(4 (V_DD - V_T)/V_DD - 1)],
//! and t_PLH the same by symmetry for k_p = k_n, |V_Tp| = V_Tn.

use std::process::Command;

#[test]
fn step_response_delay_matches_the_closed_form() {
    let text = r#"
param vdd = 1 V
device nfet : square_nfet { k = 100 uA/V^2, threshold = 0.3 V }
device pfet : square_pfet { k = 100 uA/V^2, threshold = -0.3 V }
voltage_source supply (pos = vdd, neg = ground) { dc = vdd }
voltage_source drive (pos = in, neg = ground) {
    wave = pulse(low = 0 V, high = vdd, delay = 0.5 ns, rise = 0.05 ps, fall = 0.05 ps, width = 1.5 ns, period = 3 ns)
}
nfet pd (drain = out, gate = in, source = ground)
pfet pu (drain = out, gate = in, source = vdd)
capacitor load (a = out, b = ground) { capacitance = 10 fF }
analysis delay { from = in, to = out, stop = 6 ns }
"#;
    let dir = std::env::temp_dir().join(format!("lamina-delay-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join("step.lam");
    std::fs::write(&file, text).unwrap();
    let out = Command::new(env!("CARGO_BIN_EXE_lamina"))
        .args(["delay", file.to_str().unwrap(), "--json"])
        .output()
        .unwrap();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let (vdd, vt, k, c): (f64, f64, f64, f64) = (1.0, 0.3, 100e-6, 10e-15);
    let closed =
        c / (k * (vdd - vt)) * (2.0 * vt / (vdd - vt) + (4.0 * (vdd - vt) / vdd - 1.0).ln());
    for key in ["t_phl_s", "t_plh_s"] {
        let t = v[key].as_f64().unwrap();
        assert!(
            (t / closed - 1.0).abs() < 1e-2,
            "{key} = {t:e} vs {closed:e}"
        );
    }
    std::fs::remove_dir_all(&dir).unwrap();
}

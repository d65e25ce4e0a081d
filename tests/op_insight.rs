//! The operating point with insight (`src/op.rs`): source currents and powers, each FET's
//! terminal currents, small-signal conductances and capacitances at its pins, and its region,
//! checked against closed forms and against finite differences of re-solved operating points.

use lamina::op::{operating_point, OpReport};
use lamina_engine::{DetailValue, OpParams, System};
use lamina_netlist::{load_source, LoadOptions};

mod common;

fn report(text: &str) -> OpReport {
    let d = load_source("t.lam", text, &LoadOptions::default()).unwrap_or_else(|e| panic!("{e}"));
    let mut sys = System::new(d.circuit).unwrap();
    operating_point(&mut sys).unwrap()
}

fn region(r: &OpReport, device: &str) -> &'static str {
    let d = r.devices.iter().find(|d| d.name == device).unwrap();
    d.details
        .iter()
        .find_map(|(k, v)| match (k, v) {
            (&"region", DetailValue::Word(w)) => Some(*w),
            _ => None,
        })
        .unwrap()
}

/// Ohm's law and power balance (common practice): a 1 V source across 1 kOhm + 3 kOhm delivers
/// V^2 / R = 250 uW and carries -250 uA into its positive terminal (plus gmin's 1 pA/V).
#[test]
fn source_current_and_power_of_a_divider() {
    let r = report(
        "voltage_source v (pos = top, neg = ground) { dc = 1 V }\n\
         resistor r1 (a = top, b = mid) { resistance = 1 kOhm }\n\
         resistor r2 (a = mid, b = ground) { resistance = 3 kOhm }\n",
    );
    let s = &r.sources[0];
    assert_eq!((s.name.as_str(), s.voltage), ("v", 1.0));
    assert!((s.current + 250e-6).abs() < 3e-12, "{}", s.current);
    assert!((s.power - 250e-6).abs() < 3e-12, "{}", s.power);
    let mid = r.nodes.iter().find(|(n, _)| n == "mid").unwrap().1;
    assert!((mid - 0.75).abs() < 1e-9);
    assert!(r.devices.is_empty());
}

const SQUARE: &str =
    "device nfet : square_nfet { k = 200 uA/V^2, threshold = 0.3 V, gate_capacitance = 1 fF }\n\
    device pfet : square_pfet { k = 200 uA/V^2, threshold = -0.3 V, gate_capacitance = 1 fF }\n\
    voltage_source vg (pos = g, neg = ground) { dc = VG }\n\
    voltage_source vd (pos = d, neg = ground) { dc = VD }\n\
    nfet m (drain = d, gate = g, source = ground)\n";

fn square(vg: f64, vd: f64) -> OpReport {
    report(
        &SQUARE
            .replace("VG", &format!("{vg} V"))
            .replace("VD", &format!("{vd} V")),
    )
}

/// The square law (S. M. Sze and K. K. Ng, Physics of Semiconductor Devices, 3rd ed., 2007,
/// ch. 6): in saturation I_D = k ov^2 / 2, g_m = k ov, g_ds = 0; in the linear region
/// g_m = k V_DS, g_ds = k (ov - V_DS). Ward-Dutton charges of the long channel (Y. Tsividis
/// and C. McAndrew, Operation and Modeling of the MOS Transistor, 3rd ed., 2011, ch. 8):
/// in saturation C_gg = C_gs = (2/3) W L C_ox and C_gd = 0; at V_DS = 0, C_gd = C_gs = C_g / 2.
#[test]
fn square_law_small_signal_and_regions() {
    let k = 200e-6;
    let sat = square(0.8, 1.0);
    let d = &sat.devices[0];
    let ss = d.small_signal.unwrap();
    assert!((d.terminals[0].2 - k * 0.25 / 2.0).abs() < 1e-15);
    assert!((ss.gm - k * 0.5).abs() < 1e-15, "{}", ss.gm);
    assert_eq!(ss.gds, 0.0);
    assert!((ss.cgg - 2.0 / 3.0 * 1e-15).abs() < 1e-27, "{}", ss.cgg);
    assert!((ss.cgs - 2.0 / 3.0 * 1e-15).abs() < 1e-27);
    assert_eq!(ss.cgd, 0.0);
    assert_eq!(region(&sat, "m"), "saturation");

    let lin = square(0.8, 0.1);
    let ss = lin.devices[0].small_signal.unwrap();
    assert!((ss.gm - k * 0.1).abs() < 1e-15);
    assert!((ss.gds - k * 0.4).abs() < 1e-15);
    assert_eq!(region(&lin, "m"), "linear");

    let zero = square(0.8, 0.0);
    let ss = zero.devices[0].small_signal.unwrap();
    assert!((ss.cgd - 0.5e-15).abs() < 1e-27, "{}", ss.cgd);
    assert!((ss.cgd - ss.cgs).abs() < 1e-27);
    assert_eq!(region(&square(0.2, 1.0), "m"), "off");
}

const SHEET: &str = "device n2d : sheet_fet {\n    channel = MoS2, insulator = hBN, insulator_layers = 10\n    gate_work_function = 4.26 eV, width = 1 um, length = 200 nm\n    electron_mobility = 40 cm^2/(V s), saturation_velocity = 3e4 m/s\n    source_resistance = 2 kOhm um, drain_resistance = 2 kOhm um\n    overlap_capacitance = 0.1 fF/um\n}\nvoltage_source vg (pos = g, neg = ground) { dc = VG }\nvoltage_source vd (pos = d, neg = ground) { dc = VD }\nn2d m (drain = d, gate = g, source = ground)\n";

/// Drain current and gate charge at the pins from a fresh operating point.
fn pins(vg: f64, vd: f64) -> (f64, f64, OpReport) {
    let text = SHEET
        .replace("VG", &format!("{vg:.17e} V"))
        .replace("VD", &format!("{vd:.17e} V"));
    let d = load_source("t.lam", &text, &LoadOptions::default()).unwrap();
    let id = d.circuit.find_element("m").unwrap();
    let mut sys = System::new(d.circuit).unwrap();
    let (sol, _) = sys.operating_point(&OpParams::default()).unwrap();
    let lin = sys.element_linearization(&sol.x, id).unwrap();
    let (i, q) = (lin.terminal_currents()[0], lin.terminal_charges()[1]);
    (i, q, operating_point(&mut sys).unwrap())
}

/// With contact resistances the figures at the pins include them: g_m, g_ds and C_gg (with the
/// internal contact nodes eliminated) agree with central differences of the drain current and
/// the gate charge of re-solved operating points (an independent computation).
#[test]
fn sheet_fet_pins_agree_with_finite_differences() {
    let (vg, vd, h) = (0.9, 0.6, 1e-4);
    let (_, _, r) = pins(vg, vd);
    let ss = r.devices[0].small_signal.unwrap();
    let (ip, qp, _) = pins(vg + h, vd);
    let (im, qm, _) = pins(vg - h, vd);
    let gm = (ip - im) / (2.0 * h);
    let cgg = (qp - qm) / (2.0 * h);
    let (ipd, qpd, _) = pins(vg, vd + h);
    let (imd, qmd, _) = pins(vg, vd - h);
    let gds = (ipd - imd) / (2.0 * h);
    let cgd = -(qpd - qmd) / (2.0 * h);
    for (what, exact, fd) in [
        ("g_m", ss.gm, gm),
        ("g_ds", ss.gds, gds),
        ("C_gg", ss.cgg, cgg),
        ("C_gd", ss.cgd, cgd),
    ] {
        assert!(
            (exact / fd - 1.0).abs() < 1e-4,
            "{what}: exact {exact:e}, finite difference {fd:e}"
        );
    }
    // The contacts matter here: the intrinsic g_m (no resistors) is larger.
    let bare = report(
        &SHEET
            .replace(
                "    source_resistance = 2 kOhm um, drain_resistance = 2 kOhm um\n",
                "",
            )
            .replace("VG", "0.9 V")
            .replace("VD", "0.6 V"),
    );
    assert!(bare.devices[0].small_signal.unwrap().gm > 1.05 * ss.gm);
    assert!(ss.cgg > 0.2e-15, "overlap alone is 0.2 fF: {}", ss.cgg);
}

/// Regions of the sheet FET by its stated definition: off far below threshold, linear at small
/// V_DS well above threshold, saturation at large V_DS; densities at both ends reported.
#[test]
fn sheet_fet_regions() {
    let (_, _, off) = pins(-0.5, 0.5);
    assert_eq!(region(&off, "m"), "off");
    let (_, _, lin) = pins(1.2, 0.01);
    assert_eq!(region(&lin, "m"), "linear");
    let (_, _, sat) = pins(0.8, 1.5);
    assert_eq!(region(&sat, "m"), "saturation");
    let n = |r: &OpReport, k: &str| {
        r.devices[0]
            .details
            .iter()
            .find_map(|(name, v)| match v {
                DetailValue::Number(x, _) if *name == k => Some(*x),
                _ => None,
            })
            .unwrap()
    };
    assert!(n(&sat, "electron density at source") > 10.0 * n(&sat, "electron density at drain"));
    assert!(n(&lin, "electron density at source") > 1e15);
}

/// End to end: `lamina run --json` and `--out` on the demo file.
#[test]
fn cli_reports_devices_and_writes_csv() {
    let out = common::lamina_ok(&["run", "netlists/demo/inverter-op.lam", "--json"]);
    let j: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let op = &j["analyses"][0];
    assert_eq!(op["devices"].as_array().unwrap().len(), 2);
    assert_eq!(op["devices"][0]["details"]["region"], "saturation");
    let supply = &op["sources"][0];
    assert_eq!(supply["name"], "supply");
    let p = supply["power_delivered_w"].as_f64().unwrap();
    let i = supply["current_a"].as_f64().unwrap();
    assert!(p > 0.0 && (p + i).abs() < 1e-18, "{p} {i}");
    let dir = std::env::temp_dir().join(format!("lamina-op-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    common::lamina_ok(&[
        "run",
        "netlists/demo/inverter-op.lam",
        "--out",
        dir.to_str().unwrap(),
    ]);
    let devices = std::fs::read_to_string(dir.join("operating_point-1/devices.csv")).unwrap();
    assert_eq!(devices.lines().count(), 3);
    let header: Vec<&str> = devices.lines().next().unwrap().split(',').collect();
    let row: Vec<&str> = devices.lines().nth(1).unwrap().split(',').collect();
    assert_eq!(header.len(), row.len());
    let col = |name: &str| row[header.iter().position(|h| *h == name).unwrap()];
    assert_eq!(col("region"), "saturation");
    assert_eq!(col("carrier"), "electrons");
    assert!(
        col("electron_density_at_source_per_m2")
            .parse::<f64>()
            .unwrap()
            > 1e15
    );
    let _ = std::fs::remove_dir_all(&dir);
}

/// A sweep of an operating point reports each source's current and power and each FET's
/// small-signal figures beside the node voltages, with their units in the headers.
#[test]
fn sweep_columns_of_an_operating_point() {
    use lamina::sweep::label;
    assert_eq!(label("operating_point.inv.x_v"), "node inv.x (V)");
    assert_eq!(
        label("operating_point.inv.pull_down.gm_siemens"),
        "inv.pull_down.gm (S)"
    );
    assert_eq!(label("operating_point.m.cgg_f"), "m.cgg (F)");
    assert_eq!(label("operating_point.supply.power_w"), "supply.power (W)");
    let out = common::lamina_ok(&[
        "sweep",
        "netlists/demo/inverter-op.lam",
        "--param",
        "n2d.electron_mobility=20,40cm^2/(V s)",
        "--json",
    ]);
    let text = String::from_utf8_lossy(&out.stdout);
    for key in [
        "operating_point.supply.power_w",
        "operating_point.inv.pull_down.gm_siemens",
        "operating_point.inv.pull_down.ft_hz",
    ] {
        assert!(text.contains(key), "{key} missing");
    }
}

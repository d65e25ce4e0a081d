//! The 2D-channel FET inside circuits: contact resistances are real series resistors (same
//! answer as explicit resistors in the netlist), and overlap capacitance adds linear charges.

use lamina_engine::{Element, EvalContext, OpParams, Stamp, System};
use lamina_netlist::{load_source, LoadOptions};

const CARD: &str = "device n2d : sheet_fet {\n    channel = MoS2, insulator = hBN, insulator_layers = 10\n    gate_work_function = 4.26 eV, width = 1 um, length = 200 nm\n    electron_mobility = 40 cm^2/(V s) EXTRA\n}\n";

fn drain_current(extra: &str, body: &str) -> f64 {
    let text = CARD.replace("EXTRA", extra) + body;
    let d = load_source("c.lam", &text, &LoadOptions::default()).unwrap_or_else(|e| panic!("{e}"));
    let vd = d.circuit.find_element("vd").unwrap();
    let mut sys = System::new(d.circuit).unwrap();
    let (sol, _) = sys.operating_point(&OpParams::default()).unwrap();
    -sol.x[sys.branch_unknown(vd).unwrap()]
}

/// Ohm's law in series with the channel (common practice): a contact resistance per width R
/// of a W-wide device equals explicit resistors R / W at source and drain.
#[test]
fn contact_resistance_equals_explicit_series_resistors() {
    let sources = "voltage_source vg (pos = g, neg = ground) { dc = 0.9 V }\nvoltage_source vd (pos = d, neg = ground) { dc = 0.6 V }\n";
    let inside = drain_current(
        ", source_resistance = 500 Ohm um, drain_resistance = 800 Ohm um",
        &format!("{sources}n2d m (drain = d, gate = g, source = ground)\n"),
    );
    let outside = drain_current(
        "",
        &format!(
            "{sources}resistor rd (a = d, b = di) {{ resistance = 800 Ohm }}\nresistor rs (a = si, b = ground) {{ resistance = 500 Ohm }}\nn2d m (drain = di, gate = g, source = si)\n"
        ),
    );
    let bare = drain_current(
        "",
        &format!("{sources}n2d m (drain = d, gate = g, source = ground)\n"),
    );
    // Both converge to the Newton tolerance; measured difference 1.6e-8.
    assert!(
        (inside / outside - 1.0).abs() < 1e-6,
        "{inside:e} vs {outside:e}"
    );
    assert!(
        inside < 0.97 * bare,
        "the resistors must matter here: {inside:e} vs {bare:e}"
    );
}

/// Overlap or fringe capacitance per width adds C_ov W (V_G - V_D) and C_ov W (V_G - V_S) to
/// the gate's charge (linear capacitors; common practice), keeping the sum of charges zero.
#[test]
fn overlap_capacitance_adds_linear_gate_charge() {
    let mut base = lamina_devices::SheetFetCard::default();
    lamina_devices::materials::apply_channel(&mut base, "MoS2").unwrap();
    let with = lamina_devices::SheetFetCard {
        overlap_capacitance: 0.2e-15 / 1e-6,
        ..base.clone()
    };
    let (a, b) = (
        lamina_devices::SheetFet::new(&base).unwrap(),
        lamina_devices::SheetFet::new(&with).unwrap(),
    );
    let eval = |e: &dyn Element, x: [f64; 3]| {
        let (mut f, mut q, mut df, mut dq) = ([0.0; 3], [0.0; 3], [0.0; 9], [0.0; 9]);
        e.evaluate(
            &x,
            &EvalContext::dc(),
            &mut Stamp::new(&mut f, &mut q, &mut df, &mut dq),
        );
        (q, dq)
    };
    let x = [0.7, 1.1, 0.2];
    let ((qa, dqa), (qb, dqb)) = (eval(&a, x), eval(&b, x));
    let c_ov = 0.2e-15; // per side for W = 1 um
    assert!(((qb[1] - qa[1]) - c_ov * (2.0 * x[1] - x[0] - x[2])).abs() < 1e-24);
    assert!(((qb[0] - qa[0]) + c_ov * (x[1] - x[0])).abs() < 1e-24);
    assert!((qb[0] + qb[1] + qb[2]).abs() < 1e-27, "charge conserved");
    // dQ_G/dV_G (row 1, column 1) grows by both overlaps.
    assert!((dqb[4] - dqa[4] - 2.0 * c_ov).abs() < 1e-24);
}

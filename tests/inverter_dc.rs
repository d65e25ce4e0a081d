//! DC transfer curve of the square-law inverter against the closed forms of S.-M. Kang and
//! Y. Leblebici, CMOS Digital Integrated Circuits: Analysis and Design, 3rd ed. (2003), ch. 5:
//! V_M = (V_Tn + sqrt(k_p/k_n) (V_DD + V_Tp)) / (1 + sqrt(k_p/k_n)) and, for the symmetric
//! inverter, V_IL = (3 V_DD + 2 V_T) / 8 and V_IH = (5 V_DD - 2 V_T) / 8.

use lamina::builtin::{square_inverter, SquareStage};
use lamina_engine::elements::{Capacitor, Resistor};
use lamina_engine::lu::LuStrategy;
use lamina_engine::{Circuit, EngineError, OpMethod, OpParams, Probe, SweepParams, System};
use lamina_measure::transfer::transfer_points;

fn sweep(stage: &SquareStage, strategy: LuStrategy, descending: bool) -> (Vec<f64>, Vec<f64>) {
    let inv = square_inverter(stage).unwrap();
    let mut sys = System::with_strategy(inv.circuit, strategy).unwrap();
    let mut values: Vec<f64> = (0..=2000).map(|i| i as f64 * 0.5e-3).collect();
    if descending {
        values.reverse();
    }
    let res = sys
        .dc_sweep(
            inv.input,
            &values,
            &[Probe::Voltage(inv.output)],
            &SweepParams::default(),
        )
        .unwrap();
    let mut pairs: Vec<(f64, f64)> = values
        .iter()
        .copied()
        .zip(res.signals[0].iter().copied())
        .collect();
    pairs.sort_by(|a, b| a.0.total_cmp(&b.0));
    pairs.into_iter().unzip()
}

#[test]
fn symmetric_inverter_matches_the_closed_forms() {
    let stage = SquareStage::default();
    for strategy in [LuStrategy::FixedPivot, LuStrategy::FaerOnly] {
        for descending in [false, true] {
            let (vin, vout) = sweep(&stage, strategy, descending);
            assert!((vout[0] - 1.0).abs() < 1e-6 && vout[vout.len() - 1].abs() < 1e-6);
            assert!(
                vout.windows(2).all(|w| w[1] <= w[0] + 1e-9),
                "output must fall monotonically"
            );
            let p = transfer_points(&vin, &vout).unwrap();
            assert!((p.vm - 0.5).abs() < 1e-3, "V_M {}", p.vm);
            assert!((p.vil - 0.45).abs() < 1e-3, "V_IL {}", p.vil);
            assert!((p.vih - 0.55).abs() < 1e-3, "V_IH {}", p.vih);
        }
    }
}

#[test]
fn skewed_inverter_switching_threshold() {
    // k_n = 4 k_p: V_M = (0.3 + 0.5 * 0.7) / 1.5 = 0.433333 V.
    let stage = SquareStage {
        kn: 400e-6,
        kp: 100e-6,
        lambda: 0.05,
        ..SquareStage::default()
    };
    let (vin, vout) = sweep(&stage, LuStrategy::FixedPivot, false);
    let p = transfer_points(&vin, &vout).unwrap();
    let expect = (0.3 + 0.5 * 0.7) / 1.5;
    // Channel-length modulation is symmetric between the devices at V_M only approximately;
    // λ = 0.05 /V moves V_M by well under 5 mV here.
    assert!((p.vm - expect).abs() < 5e-3, "V_M {} vs {expect}", p.vm);
}

#[test]
fn operating_point_reports_its_path_and_singular_nodes_are_named() {
    let inv = square_inverter(&SquareStage::default()).unwrap();
    let mut sys = System::new(inv.circuit).unwrap();
    let (sol, info) = sys.operating_point(&OpParams::default()).unwrap();
    assert_eq!(info.method, OpMethod::Newton);
    let out = sys.find_node("out").unwrap();
    assert!((sol.voltage(&sys, out) - 1.0).abs() < 1e-6);

    // A node touched only by a capacitor has no DC path: without gmin it is singular.
    let mut c = Circuit::new();
    let a = c.node("a");
    let lonely = c.node("lonely");
    c.add("r", Resistor::new(1e3), &[a, Circuit::GROUND])
        .unwrap();
    c.add("c", Capacitor::new(1e-12), &[lonely, a]).unwrap();
    let mut sys = System::new(c).unwrap();
    let params = OpParams {
        gmin: 0.0,
        ..OpParams::default()
    };
    match sys.operating_point(&params) {
        Err(EngineError::Singular { culprit, .. }) => {
            assert_eq!(culprit.unknown, "node lonely");
            assert!(culprit.elements.iter().any(|e| e.starts_with("c ")));
        }
        other => panic!("expected a singular-matrix error, got {other:?}"),
    }
    // With the default gmin the same circuit solves.
    assert!(sys.operating_point(&OpParams::default()).is_ok());
}

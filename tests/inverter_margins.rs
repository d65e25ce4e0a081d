//! Static figures of the square-law inverter from an engine sweep against closed forms:
//! V_M = 0.5, V_IL = (3 V_DD + 2 V_T)/8, V_IH = (5 V_DD - 2 V_T)/8 and unity-gain margins
//! NM_H = NM_L = 0.45 V for V_T = 0.3 V (S.-M. Kang and Y. Leblebici, CMOS Digital Integrated
//! Circuits, 3rd ed., 2003, ch. 5). The maximum-square margin (E. Seevinck, F. J. List,
//! J. Lohstroh, IEEE JSSC SC-22, 748, 1987) has its corners where the slope is -1 for monotone
//! curves, so for the symmetric inverter SNM = V_IL - v_out(V_IH) = V_IL - (V_IH - V_DD/2):
//! 0.40 V for V_T = 0.3 V and 0.35 V for V_T = 0.2 V.

use lamina::builtin::{square_inverter, SquareStage};
use lamina_engine::{Probe, SweepParams, System};
use lamina_measure::snm::butterfly;
use lamina_measure::transfer::transfer_metrics;

fn curve(vt: f64) -> (Vec<f64>, Vec<f64>) {
    let stage = SquareStage {
        vtn: vt,
        vtp: -vt,
        ..SquareStage::default()
    };
    let inv = square_inverter(&stage).unwrap();
    let mut sys = System::new(inv.circuit).unwrap();
    let vin: Vec<f64> = (0..=4000).map(|i| i as f64 * 0.25e-3).collect();
    let res = sys
        .dc_sweep(
            inv.input,
            &vin,
            &[Probe::Voltage(inv.output)],
            &SweepParams::default(),
        )
        .unwrap();
    (vin, res.signals[0].clone())
}

#[test]
fn square_law_inverter_metrics_and_margins() {
    let (vin, vout) = curve(0.3);
    let m = transfer_metrics(&vin, &vout).unwrap();
    assert!((m.voh - 1.0).abs() < 1e-6 && m.vol.abs() < 1e-6);
    assert!(
        (m.vil - 0.45).abs() < 1e-3 && (m.vih - 0.55).abs() < 1e-3,
        "{m:?}"
    );
    assert!((m.nmh - 0.45).abs() < 1e-3 && (m.nml - 0.45).abs() < 1e-3);
    assert!(m.gain_max > 50.0);
    let s = butterfly(&vin, &vout, &vin, &vout).unwrap();
    assert!((s.snm - 0.40).abs() < 2e-3, "{s:?}");
    assert!((s.upper_lobe - s.lower_lobe).abs() < 1e-3);

    let (vin, vout) = curve(0.2);
    let s = butterfly(&vin, &vout, &vin, &vout).unwrap();
    assert!((s.snm - 0.35).abs() < 2e-3, "{s:?}");
}

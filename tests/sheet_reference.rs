//! `lamina iv` on the reference 2D-channel devices against an independent charge-sheet
//! integration: I_D = (W/L) μ ∫_0^{V_DS} q n(V) dV (Pao and Sah, Solid-State Electron. 9, 927,
//! 1966; Brews, Solid-State Electron. 21, 345, 1978), with the local electron density n(V) from
//! the gate-stack charge balance solved here by bisection, the exact 2D Fermi-Dirac sheet
//! density (Lundstrom and Guo 2006) and, for the Dirac gate, the gapped-Dirac density, and the
//! integral taken by an independent double-exponential rule (`quadrature` crate). Holes are
//! negligible with a 1.8 eV gap and are left out here.

use lamina_devices::physics::{
    dirac_net_density, dirac_prefactor, f0, parabolic_dos, EPS0, K_B, Q,
};
use quadrature::double_exponential::integrate;
use std::process::Command;

struct Ref {
    file: &'static str,
    eps: f64,
    t_ins: f64,
    m_e: f64,
    temp: f64,
    mu: f64,
    w: f64,
    l: f64,
    dirac: Option<(f64, f64)>,
}

const REFS: [Ref; 3] = [
    Ref {
        file: "netlists/reference/sheet-fet-a.lam",
        eps: 3.4,
        t_ins: 5e-9,
        m_e: 0.5,
        temp: 300.0,
        mu: 100e-4,
        w: 1e-6,
        l: 1e-6,
        dirac: None,
    },
    Ref {
        file: "netlists/reference/sheet-fet-b.lam",
        eps: 3.76,
        t_ins: 3e-9,
        m_e: 0.45,
        temp: 350.0,
        mu: 60e-4,
        w: 2e-6,
        l: 0.5e-6,
        dirac: None,
    },
    Ref {
        file: "netlists/reference/sheet-fet-c.lam",
        eps: 3.4,
        t_ins: 2e-9,
        m_e: 0.5,
        temp: 300.0,
        mu: 40e-4,
        w: 1e-6,
        l: 0.2e-6,
        dirac: Some((1e6, 0.015)),
    },
];

fn bisect(mut lo: f64, mut hi: f64, f: impl Fn(f64) -> f64) -> f64 {
    // f increasing; 200 halvings reach the resolution of a double.
    for _ in 0..200 {
        let m = 0.5 * (lo + hi);
        if f(m) > 0.0 {
            hi = m;
        } else {
            lo = m;
        }
    }
    0.5 * (lo + hi)
}

/// Electron density at gate-to-channel voltage u (gate work function at the channel's electron
/// affinity: no offset).
fn density(r: &Ref, u: f64) -> f64 {
    let c = r.eps * EPS0 / r.t_ins;
    let kt = K_B * r.temp;
    let dos = parabolic_dos(r.m_e, 4.0);
    let n = |xi: f64| dos * kt * f0(Q * xi / kt);
    let xi = match r.dirac {
        None => bisect(-3.0, 3.0, |xi| xi + Q * n(xi) / c - u),
        Some((vf, half_gap)) => {
            let pre = dirac_prefactor(vf, 4.0);
            bisect(-3.0, 3.0, |xi| {
                // Gate charge Q_g = q n(ξ); the gate's net electron density is -Q_g/q.
                let target = -n(xi);
                let mu = bisect(-5.0 * Q, 5.0 * Q, |m| {
                    dirac_net_density(pre, kt, half_gap * Q, m).0 - target
                });
                xi - mu / Q + Q * n(xi) / c - u
            })
        }
    };
    n(xi)
}

fn independent_current(r: &Ref, vg: f64, vd: f64) -> f64 {
    let tol = 1e-12 * Q * density(r, vg) * vd.max(1e-3);
    let integral = integrate(|v| Q * density(r, vg - v), 0.0, vd, tol).integral;
    r.w / r.l * r.mu * integral
}

#[test]
fn iv_on_the_reference_devices_matches_an_independent_charge_sheet_integration() {
    for r in &REFS {
        let out = Command::new(env!("CARGO_BIN_EXE_lamina"))
            .args([
                "iv",
                r.file,
                "--vgs",
                "-0.2,0.3,0.8",
                "--vds",
                "0.002,0.1,0.8",
                "--json",
            ])
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let points = v["points"].as_array().unwrap();
        assert_eq!(points.len(), 9);
        for p in points {
            let (vg, vd, id) = (
                p["vgs"].as_f64().unwrap(),
                p["vds"].as_f64().unwrap(),
                p["id"].as_f64().unwrap(),
            );
            let exact = independent_current(r, vg, vd);
            assert!(
                (id / exact - 1.0).abs() < 1e-5,
                "{}: V_GS {vg}, V_DS {vd}: {id:e} vs {exact:e}",
                r.file
            );
        }
    }
}

#[test]
fn iv_flags_are_checked() {
    let run = |args: &[&str]| {
        Command::new(env!("CARGO_BIN_EXE_lamina"))
            .args(args)
            .output()
            .unwrap()
    };
    let out = run(&[
        "iv",
        "netlists/reference/sheet-fet-a.lam",
        "--vgs",
        "0:1",
        "--vds",
        "1",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("START:STOP:STEP"));
    // A file without exactly one FET is a file error (exit 3), not a failed analysis.
    let out = run(&["iv", "netlists/ring-5.lam", "--vgs", "0", "--vds", "1"]);
    assert_eq!(out.status.code(), Some(3));
    assert!(String::from_utf8_lossy(&out.stderr).contains("FETs"));
    let out = run(&[
        "iv",
        "netlists/reference/sheet-fet-b.lam",
        "--vgs",
        "-0.5:0.5:0.25",
        "--vds",
        "0.05",
    ]);
    assert!(out.status.success());
    // A header and five data rows, then a blank line and the figures.
    let text = String::from_utf8_lossy(&out.stdout).to_string();
    assert_eq!(text.lines().take_while(|l| !l.is_empty()).count(), 6);
}

/// `lamina iv` metrics on the reference devices: with no traps, doping or gate quantum
/// capacitance in play, the smallest swing is the thermal limit ln(10) kT/q within 0.5 %
/// (Sze and Ng 2007; Taur and Ning 2009).
#[test]
fn iv_metrics_give_the_thermal_swing() {
    for (file, temp) in [
        ("netlists/reference/sheet-fet-a.lam", 300.0),
        ("netlists/reference/sheet-fet-b.lam", 350.0),
    ] {
        let out = Command::new(env!("CARGO_BIN_EXE_lamina"))
            .args([
                "iv",
                file,
                "--vgs",
                "-0.6:0.6:0.01",
                "--vds",
                "0.05,1",
                "--json",
            ])
            .output()
            .unwrap();
        assert!(out.status.success());
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        let ss = v["metrics"]["ss_min_mv_per_dec"].as_f64().unwrap();
        let ideal = 10f64.ln() * K_B * temp / Q * 1e3;
        assert!(
            (ss / ideal - 1.0).abs() < 5e-3,
            "{file}: {ss} mV/dec vs {ideal}"
        );
        let (ion, ioff) = (
            v["metrics"]["ion_a"].as_f64().unwrap(),
            v["metrics"]["ioff_a"].as_f64().unwrap(),
        );
        assert!(ion / ioff > 1e6, "{ion:e} / {ioff:e}");
        assert!(v["metrics"]["vth_cc_v"].as_f64().is_some());
    }
}

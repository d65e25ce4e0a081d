//! Schottky contacts and short channels from the command line: the demo's cards with
//! contacts, the refusals of contradictory or incomplete options at their place in the file,
//! the operating point's contact and short-channel terms, and the `iv` figures that follow
//! the channel length.

mod common;
use common::{lamina, lamina_ok, ScratchFile};
use serde_json::Value;

/// A scratch file with `text` in a directory of its own (removed when it is dropped).
fn file(name: &str, text: &str) -> ScratchFile {
    ScratchFile::new("contacts", name, text)
}

const STACK: &str = "channel = MoS2, insulator = hBN, insulator_layers = 10";

/// A device card with `extra` keys and an operating point of it.
fn device(extra: &str) -> String {
    format!(
        "device n : sheet_fet {{\n    {STACK}\n    {extra}\n}}\n\
         voltage_source vg (pos = g, neg = ground) {{ dc = 0.8 V }}\n\
         voltage_source vd (pos = d, neg = ground) {{ dc = 0.5 V }}\n\
         n m1 (drain = d, gate = g, source = ground)\n\
         analysis operating_point {{}}\n"
    )
}

/// Each contradictory or incomplete option is refused at the key's line and column, saying
/// what to change.
#[test]
fn contradictions_are_refused_where_they_stand() {
    for (extra, key, says) in [
        (
            "contact_metal = Ti, contact_electron_barrier = 0.2 eV, natural_length = 3 nm",
            "contact_electron_barrier",
            "silently win",
        ),
        ("natural_length = 3 nm", "", "band alignment"),
        (
            "contact_metal = Ti, contact_pinning = 0.2",
            "contact_pinning",
            "neutrality level",
        ),
        (
            "contact_electron_barrier = 0.2 eV",
            "",
            "relaxes into the channel",
        ),
        (
            "contact_electron_barrier = 0.2 eV, natural_length = 3 nm, source_resistance = 100 Ohm um",
            "",
            "cannot be combined",
        ),
        ("channel_thickness = 0.65 nm", "channel_thickness", "channel_permittivity"),
        ("contact_pinning = 0.5", "contact_pinning", "no Schottky contacts"),
        (
            "contact_metal = graphene, natural_length = 3 nm",
            "contact_metal",
            "not a metal",
        ),
    ] {
        let f = file("bad.lam", &device(extra));
        let out = lamina(&["check", f.to_str().unwrap()]);
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(!out.status.success(), "{extra}: accepted");
        assert!(err.contains(says), "{extra}: {err}");
        assert!(err.contains("bad.lam:"), "{extra}: not located: {err}");
        if !key.is_empty() {
            assert!(err.contains(key), "{extra}: {err}");
        }
    }
}

/// The operating point shows the barriers the Schottky-Mott rule gives for the library's Au
/// on MoS2 (`φ_n = W_Au - χ`, pinning factor 1; Sze and Ng 2007, recalled) and the contact
/// and short-channel terms; a transparent contact drops less than a high barrier.
#[test]
fn operating_point_reports_contacts() {
    let run = |extra: &str| -> Value {
        let f = file("op.lam", &device(extra));
        let out = lamina_ok(&["run", f.to_str().unwrap(), "--json"]);
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let dev = |v: &Value| v["analyses"][0]["devices"][0]["details"].clone();
    let au = dev(&run(
        "contact_metal = Au, channel_thickness = 0.65 nm, channel_permittivity = 15.5, length = 20 nm",
    ));
    // The library's MoS2 at 300 K and Au: the card's channel values.
    let mut card = lamina_devices::SheetFetCard::default();
    lamina_devices::materials::apply_channel(&mut card, "MoS2").unwrap();
    let gap = lamina_devices::materials::band_gap_at("MoS2", 300.0).unwrap_or(card.band_gap);
    let chi = card.electron_affinity + 0.5 * (card.band_gap - gap);
    let lamina_devices::Gate::Metal { work_function } =
        lamina_devices::materials::gate("Au").unwrap()
    else {
        panic!("Au is a metal")
    };
    let barrier = au["contact_electron_barrier_v"].as_f64().unwrap();
    let hole = au["contact_hole_barrier_v"].as_f64().unwrap();
    assert!((barrier - (work_function - chi)).abs() < 1e-9, "{au}");
    assert!((barrier + hole - gap).abs() < 1e-9, "{au}");
    assert!(au["short_channel_barrier_shift_v"].is_number(), "{au}");
    assert!(au["natural_length_m"].as_f64().unwrap() > 1e-9, "{au}");
    let low = dev(&run(
        "contact_electron_barrier = 0 eV, contact_screening_length = 3 nm",
    ));
    let high = dev(&run(
        "contact_electron_barrier = 0.3 eV, contact_screening_length = 3 nm",
    ));
    let drop = |d: &Value| d["source_contact_drop_v"].as_f64().unwrap().abs();
    assert!(drop(&low) < drop(&high), "{low} {high}");
}

/// `iv` on the demo's device with contacts: DIBL and the swing grow as the channel shortens
/// (the scale-length picture: both fall off as `e^{-L/2λ}`), and the long device's DIBL is
/// the few mV/V of its subthreshold current's own drain dependence.
#[test]
fn iv_figures_follow_the_length() {
    let figures = |len: &str| -> (f64, f64) {
        let out = lamina_ok(&[
            "iv",
            "netlists/demo/n-device-contacts.lam",
            "--vgs",
            "-0.3:0.5:0.02",
            "--vds",
            "0.05,1",
            "--set",
            &format!("len={len}"),
            "--json",
        ]);
        let v: Value = serde_json::from_slice(&out.stdout).unwrap();
        let m = &v["metrics"];
        (
            m["dibl_mv_per_v"].as_f64().unwrap(),
            m["ss_min_mv_per_dec"].as_f64().unwrap(),
        )
    };
    let (d15, s15) = figures("15nm");
    let (d30, s30) = figures("30nm");
    let (d1u, s1u) = figures("1um");
    assert!(
        d15 > 3.0 * d30 && d30 > d1u && d1u < 6.0,
        "{d15} {d30} {d1u}"
    );
    assert!(
        s15 > s30 + 5.0 && s30 >= s1u && s1u < 60.0,
        "{s15} {s30} {s1u}"
    );
}

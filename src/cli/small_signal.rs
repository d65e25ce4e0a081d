//! The report of `analysis small_signal` (printed by `lamina run`): a short table (about three
//! frequencies per decade), the figures with their definitions, the device's f_T beside its
//! quasi-static estimate; JSON with every frequency; with `--out` the data as CSV, a Bode plot
//! and |h21| against frequency.

use crate::out;
use crate::output::{ensure_dir, write_whole as write_file};
use crate::plot::{draw, engineering, Axis, Figure, Mark, Series, Style};
use crate::small_signal::{DeviceReport, SmallSignalReport};
use lamina_engine::{c64, SourceKind};
use std::path::Path;

/// Definitions the JSON summary carries.
const DEFINITIONS: &[(&str, &str)] = &[
    ("transfer", "output node voltage per unit small-signal value of the source (V/V for a voltage source, V/A for a current source), at the DC operating point"),
    ("magnitude_db", "20 log10 |transfer|"),
    ("phase_deg", "phase of the transfer function, unwrapped along the frequency list"),
    ("input_admittance_s", "small-signal current the source delivers per volt (a resistor to ground reads positive); for a current source, one over its voltage per ampere"),
    ("output_admittance_s", "one over the output voltage per ampere injected into the output node with the source at zero"),
    ("low_frequency_gain", "|transfer| at DC (omega = 0) where the circuit has a DC path, else at the lowest listed frequency (low_frequency_gain_from_dc says which)"),
    ("bandwidth_3db_hz", "first frequency where |transfer| falls through the low-frequency gain / sqrt 2, interpolated linearly in dB against log frequency"),
    ("unity_gain_hz", "first frequency where |transfer| falls through 1 (voltage sources only), interpolated likewise"),
    ("y_s", "common-source two-port admittances of the device alone: port 1 gate-source, port 2 drain-source, currents into the pins"),
    ("f_t_hz", "first frequency where |h21| = |Y21 / Y11| falls through 1, log-log interpolation"),
    ("f_t_extrapolated_hz", "f |h21(f)| at the lowest listed frequency (-20 dB/decade extrapolation)"),
    ("f_t_quasi_static_hz", "g_m / (2 pi C_gg) from the device's conductance and capacitance at the operating point"),
];

fn split(z: Option<c64>) -> (Option<f64>, Option<f64>) {
    (z.map(|z| z.re), z.map(|z| z.im))
}

fn figure_json(v: &mut serde_json::Value, key: &str, fig: &Result<f64, String>) {
    match fig {
        Ok(x) => v[key] = serde_json::json!(x),
        Err(why) => {
            v[key] = serde_json::Value::Null;
            v[format!("{key}_absent")] = serde_json::json!(why);
        }
    }
}

fn device_json(d: &DeviceReport, f: &[f64]) -> serde_json::Value {
    let points: Vec<serde_json::Value> = f
        .iter()
        .zip(&d.y)
        .zip(&d.h21)
        .map(|((fk, y), h)| {
            serde_json::json!({
                "frequency_hz": fk,
                "y11_re_s": y[0].re, "y11_im_s": y[0].im,
                "y12_re_s": y[1].re, "y12_im_s": y[1].im,
                "y21_re_s": y[2].re, "y21_im_s": y[2].im,
                "y22_re_s": y[3].re, "y22_im_s": y[3].im,
                "h21_magnitude": h.norm(),
                "h21_phase_deg": h.im.atan2(h.re).to_degrees(),
            })
        })
        .collect();
    let mut v = serde_json::json!({
        "name": d.name,
        "g_m_siemens": d.g_m,
        "c_gg_f": d.c_gg,
        "f_t_extrapolated_hz": d.f_t_extrapolated,
        "points": points,
    });
    figure_json(&mut v, "f_t_hz", &d.f_t);
    figure_json(&mut v, "f_t_quasi_static_hz", &d.f_t_quasi_static);
    v
}

/// The summary and every frequency as JSON.
pub(crate) fn small_signal_json(kind: &str, r: &SmallSignalReport) -> serde_json::Value {
    let points: Vec<serde_json::Value> = (0..r.frequencies.len())
        .map(|k| {
            let (yi_re, yi_im) = split(r.input_admittance[k]);
            let (yo_re, yo_im) = split(r.output_admittance[k]);
            serde_json::json!({
                "frequency_hz": r.frequencies[k],
                "transfer_re": r.transfer[k].re,
                "transfer_im": r.transfer[k].im,
                "magnitude": r.transfer[k].norm(),
                "magnitude_db": r.magnitude_db[k],
                "phase_deg": r.phase_deg[k],
                "input_admittance_re_s": yi_re,
                "input_admittance_im_s": yi_im,
                "output_admittance_re_s": yo_re,
                "output_admittance_im_s": yo_im,
            })
        })
        .collect();
    let defs: serde_json::Map<String, serde_json::Value> = DEFINITIONS
        .iter()
        .map(|(k, d)| (k.to_string(), serde_json::json!(d)))
        .collect();
    let mut v = serde_json::json!({
        "analysis": kind,
        "source": r.source,
        "source_kind": match r.source_kind {
            SourceKind::Voltage => "voltage",
            SourceKind::Current => "current",
        },
        "output": r.output,
        "transfer_unit": r.transfer_unit(),
        "low_frequency_gain": r.figures.low_frequency_gain,
        "low_frequency_gain_db": r.figures.low_frequency_gain_db,
        "low_frequency_gain_from_dc": r.figures.from_dc,
        "flat_band_warning": r.figures.flat_band_warning,
        "peak_gain": r.figures.peak.0,
        "peak_gain_hz": r.figures.peak.1,
        "definitions": defs,
        "solver": {
            "block_unknowns": r.info.unknowns,
            "block_nnz": r.info.nnz,
            "pivot_searches": r.info.lu.faer_factorizations,
            "fixed_refactorizations": r.info.lu.fixed_refactorizations,
        },
        "points": points,
    });
    figure_json(&mut v, "bandwidth_3db_hz", &r.figures.bandwidth_3db);
    figure_json(&mut v, "unity_gain_hz", &r.figures.unity_gain);
    if let Some(d) = &r.device {
        v["device"] = device_json(d, &r.frequencies);
    }
    v
}

/// Indices of about three frequencies per decade, the first and the last always included.
fn table_rows(f: &[f64]) -> Vec<usize> {
    let n = f.len();
    if n == 0 {
        return Vec::new();
    }
    let decades = (f[n - 1].log10() - f[0].log10()).max(1.0);
    let stride = (n as f64 / (3.0 * decades + 1.0)).ceil().max(1.0) as usize;
    let mut rows: Vec<usize> = (0..n).step_by(stride).collect();
    if rows.last() != Some(&(n - 1)) {
        rows.push(n - 1);
    }
    rows
}

fn complex(z: Option<c64>) -> String {
    match z {
        Some(z) => format!("{:>10.3e} {:+10.3e}j", z.re, z.im),
        None => format!("{:>22}", "-"),
    }
}

fn figure_line(name: &str, fig: &Result<f64, String>, what: &str) {
    match fig {
        Ok(f) => out!("  {name:<16} {:>12}   {what}", engineering(*f, "Hz")),
        Err(why) => out!("  {name:<16} {:>12}   {why}", "-"),
    }
}

/// The summary and a short table.
pub(crate) fn print_small_signal(r: &SmallSignalReport) {
    let f = &r.frequencies;
    out!(
        "small-signal, {} -> {}, {} to {}, {} frequencies (model estimate)",
        r.source,
        r.output,
        engineering(f[0], "Hz"),
        engineering(f[f.len() - 1], "Hz"),
        f.len()
    );
    out!(
        "  {:>12} {:>10} {:>10} {:>22} {:>22}",
        "frequency",
        "|H| (dB)",
        "phase (°)",
        "Y_in (S)",
        "Y_out (S)"
    );
    for k in table_rows(f) {
        out!(
            "  {:>12} {:>10.3} {:>10.2} {} {}",
            engineering(f[k], "Hz"),
            r.magnitude_db[k],
            r.phase_deg[k],
            complex(r.input_admittance[k]),
            complex(r.output_admittance[k])
        );
    }
    let shown = table_rows(f).len();
    if shown < f.len() {
        out!(
            "  ({shown} of {} frequencies shown; --json or --out for every one)",
            f.len()
        );
    }
    out!(
        "  low-frequency gain {} ({:.3} dB)   {}",
        engineering(r.figures.low_frequency_gain, r.transfer_unit()),
        r.figures.low_frequency_gain_db,
        if r.figures.from_dc {
            "|H(0)|, the DC gain".to_string()
        } else {
            format!(
                "|H| at {} (no DC gain: the circuit blocks or floats in DC)",
                engineering(f[0], "Hz")
            )
        }
    );
    if let Some(w) = &r.figures.flat_band_warning {
        out!("  warning: {w}");
    }
    out!(
        "  peak |H|           {} at {}",
        engineering(r.figures.peak.0, r.transfer_unit()),
        engineering(r.figures.peak.1, "Hz")
    );
    figure_line(
        "-3 dB bandwidth",
        &r.figures.bandwidth_3db,
        "|H| falls 3 dB below its low-frequency value",
    );
    figure_line("unity gain", &r.figures.unity_gain, "|H| falls through 1");
    if let Some(d) = &r.device {
        out!(
            "  device {}: g_m {}, C_gg {} (common source, gate-source port 1, drain-source port 2)",
            d.name,
            engineering(d.g_m, "S"),
            engineering(d.c_gg, "F")
        );
        figure_line("f_T", &d.f_t, "|h21| = |Y21/Y11| falls through 1");
        out!(
            "  {:<16} {:>12}   f |h21| at the lowest frequency",
            "f_T extrapolated",
            engineering(d.f_t_extrapolated, "Hz")
        );
        figure_line(
            "f_T quasi-static",
            &d.f_t_quasi_static,
            "g_m / (2 pi C_gg) at the operating point",
        );
    }
}

/// `small_signal.csv` (every frequency), `device.csv` with a device, `bode` and `h21` plots.
pub(crate) fn write_small_signal(dir: &Path, r: &SmallSignalReport) -> Result<(), String> {
    ensure_dir(dir)?;
    let opt = |v: Option<f64>| v.map_or(String::new(), |x| format!("{x:e}"));
    let mut text = String::from(
        "frequency_hz,transfer_re,transfer_im,magnitude_db,phase_deg,input_admittance_re_s,input_admittance_im_s,output_admittance_re_s,output_admittance_im_s\n",
    );
    for k in 0..r.frequencies.len() {
        let (yi_re, yi_im) = split(r.input_admittance[k]);
        let (yo_re, yo_im) = split(r.output_admittance[k]);
        text.push_str(&format!(
            "{:e},{:e},{:e},{:e},{:e},{},{},{},{}\n",
            r.frequencies[k],
            r.transfer[k].re,
            r.transfer[k].im,
            r.magnitude_db[k],
            r.phase_deg[k],
            opt(yi_re),
            opt(yi_im),
            opt(yo_re),
            opt(yo_im)
        ));
    }
    write_file(&dir.join("small_signal.csv"), text.as_bytes())?;
    let mut bode = Figure::new(
        &format!("transfer {} -> {}", r.source, r.output),
        Axis::log("frequency", "Hz"),
        Axis::new(&format!("|H| re 1 {}", r.transfer_unit()), "dB"),
    );
    bode.y_right = Some(Axis::new("phase", "°"));
    let pts = |v: &[f64]| -> Vec<(f64, f64)> {
        r.frequencies
            .iter()
            .copied()
            .zip(v.iter().copied())
            .collect()
    };
    bode.series
        .push(Series::line("magnitude", pts(&r.magnitude_db)));
    bode.series.push(Series {
        style: Style::Dashed,
        right: true,
        ..Series::line("phase", pts(&r.phase_deg))
    });
    if let Ok(f3) = r.figures.bandwidth_3db {
        bode.marks.push(Mark::Vertical(f3, "-3 dB".into()));
    }
    if let Ok(fu) = r.figures.unity_gain {
        bode.marks.push(Mark::Vertical(fu, "unity gain".into()));
    }
    draw(&dir.join("bode"), &bode)?;
    if let Some(d) = &r.device {
        let mut text = String::from("frequency_hz,y11_re_s,y11_im_s,y12_re_s,y12_im_s,y21_re_s,y21_im_s,y22_re_s,y22_im_s,h21_magnitude\n");
        for (k, y) in d.y.iter().enumerate() {
            text.push_str(&format!("{:e}", r.frequencies[k]));
            for z in y {
                text.push_str(&format!(",{:e},{:e}", z.re, z.im));
            }
            text.push_str(&format!(",{:e}\n", d.h21[k].norm()));
        }
        write_file(&dir.join("device.csv"), text.as_bytes())?;
        let mut fig = Figure::new(
            &format!("current gain of {}", d.name),
            Axis::log("frequency", "Hz"),
            Axis::log("|h21|", ""),
        );
        let h: Vec<f64> = d.h21.iter().map(|z| z.norm()).collect();
        fig.series
            .push(Series::line("|h21| = |Y21 / Y11|", pts(&h)));
        if let Ok(ft) = d.f_t {
            fig.marks.push(Mark::Point(
                (ft, 1.0),
                format!("f_T {}", engineering(ft, "Hz")),
            ));
        }
        if let Ok(fq) = d.f_t_quasi_static {
            fig.marks.push(Mark::Vertical(
                fq,
                format!("g_m/(2π C_gg) {}", engineering(fq, "Hz")),
            ));
        }
        draw(&dir.join("h21"), &fig)?;
    }
    Ok(())
}

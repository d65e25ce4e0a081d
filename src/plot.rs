//! Plots: SVG and PNG with plotters, labelled in the embedded DejaVu Sans (see
//! `assets/DejaVuSans-LICENSE.txt`), written whole or not at all.
//!
//! * transfer curve with the gain on a second axis and V_IL, V_IH, V_M marked;
//! * the butterfly of a curve and its mirror;
//! * ring waveforms;
//! * device transfer characteristics on a log scale, with the swing annotated.

use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;
use std::sync::Once;

const FONT: &[u8] = include_bytes!("../assets/DejaVuSans.ttf");
const SIZE: (u32, u32) = (900, 560);
/// Our palette: ink blue, warm orange, muted green.
const INK: RGBColor = RGBColor(31, 58, 147);
const WARM: RGBColor = RGBColor(214, 110, 24);
const MOSS: RGBColor = RGBColor(64, 130, 80);

fn register() {
    static ONCE: Once = Once::new();
    ONCE.call_once(|| {
        // The font is compiled in; a failure here would be a broken build, so labels fall back.
        let _ = plotters::style::register_font("sans-serif", FontStyle::Normal, FONT);
    });
}

type DrawResult = Result<(), String>;

fn err<E: std::fmt::Debug>(e: E) -> String {
    format!("cannot draw the plot: {e:?}")
}

/// Draws with `draw` into `stem.svg` and `stem.png`.
fn both(
    stem: &Path,
    size: (u32, u32),
    draw: impl Fn(&DrawingArea<SVGBackend<'_>, Shift>) -> DrawResult + Copy,
    draw_png: impl Fn(&DrawingArea<BitMapBackend<'_>, Shift>) -> DrawResult,
) -> DrawResult {
    register();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, size).into_drawing_area();
        draw(&root)?;
        root.present().map_err(err)?;
    }
    crate::output::write_whole(&stem.with_extension("svg"), svg.as_bytes())?;
    let mut buf = vec![0u8; (size.0 * size.1 * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut buf, size).into_drawing_area();
        draw_png(&root)?;
        root.present().map_err(err)?;
    }
    let mut png_bytes = Vec::new();
    {
        let mut enc = png::Encoder::new(&mut png_bytes, size.0, size.1);
        enc.set_color(png::ColorType::Rgb);
        enc.set_depth(png::BitDepth::Eight);
        let mut w = enc.write_header().map_err(err)?;
        w.write_image_data(&buf).map_err(err)?;
    }
    crate::output::write_whole(&stem.with_extension("png"), &png_bytes)
}

fn span(v: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = v.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
        (a.min(x), b.max(x))
    });
    if lo.is_finite() && hi > lo {
        (lo, hi)
    } else {
        (0.0, 1.0)
    }
}

/// Transfer curve, gain on the right axis, V_IL, V_IH and V_M marked.
pub fn transfer(stem: &Path, vin: &[f64], vout: &[f64], marks: &[(&str, f64)]) -> DrawResult {
    let gain: Vec<(f64, f64)> = (1..vin.len().saturating_sub(1))
        .map(|k| {
            (
                vin[k],
                -(vout[k + 1] - vout[k - 1]) / (vin[k + 1] - vin[k - 1]),
            )
        })
        .collect();
    let (x0, x1) = span(vin.iter().copied());
    let (_, y1) = span(vout.iter().copied());
    let (_, g1) = span(gain.iter().map(|p| p.1));
    macro_rules! body {
        ($root:expr) => {{
            let root = $root;
            root.fill(&WHITE).map_err(err)?;
            let mut chart = ChartBuilder::on(root)
                .caption("Transfer curve (model estimate)", ("sans-serif", 22))
                .margin(14)
                .x_label_area_size(44)
                .y_label_area_size(56)
                .right_y_label_area_size(56)
                .build_cartesian_2d(x0..x1, 0.0..y1 * 1.05)
                .map_err(err)?
                .set_secondary_coord(x0..x1, 0.0..g1 * 1.1);
            chart
                .configure_mesh()
                .x_desc("input (V)")
                .y_desc("output (V)")
                .light_line_style(RGBColor(235, 235, 235))
                .draw()
                .map_err(err)?;
            chart
                .configure_secondary_axes()
                .y_desc("gain |dv_out/dv_in|")
                .draw()
                .map_err(err)?;
            chart
                .draw_series(LineSeries::new(
                    vin.iter().copied().zip(vout.iter().copied()),
                    INK.stroke_width(2),
                ))
                .map_err(err)?
                .label("output")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], INK.stroke_width(2)));
            chart
                .draw_secondary_series(LineSeries::new(gain.iter().copied(), WARM.stroke_width(1)))
                .map_err(err)?
                .label("gain")
                .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], WARM));
            for (name, x) in marks {
                chart
                    .draw_series(std::iter::once(PathElement::new(
                        vec![(*x, 0.0), (*x, y1 * 1.05)],
                        MOSS.stroke_width(1),
                    )))
                    .map_err(err)?;
                chart
                    .draw_series(std::iter::once(Text::new(
                        name.to_string(),
                        (*x, y1 * 1.0),
                        ("sans-serif", 15).into_font().color(&MOSS),
                    )))
                    .map_err(err)?;
            }
            chart
                .configure_series_labels()
                .background_style(WHITE)
                .border_style(RGBColor(180, 180, 180))
                .draw()
                .map_err(err)?;
            Ok(())
        }};
    }
    both(stem, SIZE, |r| body!(r), |r| body!(r))
}

/// The butterfly: the curve and its mirror image, with the largest square of each lobe.
pub fn butterfly(
    stem: &Path,
    vin: &[f64],
    vout: &[f64],
    snm: Option<f64>,
    squares: &[lamina_measure::snm::Square],
) -> DrawResult {
    let (lo, hi) = span(vin.iter().copied().chain(vout.iter().copied()));
    let title = match snm {
        Some(s) => format!("Butterfly, largest square {:.3} V (model estimate)", s),
        None => "Butterfly (no lobes; model estimate)".to_string(),
    };
    macro_rules! body {
        ($root:expr) => {{
            let root = $root;
            root.fill(&WHITE).map_err(err)?;
            let mut chart = ChartBuilder::on(root)
                .caption(&title, ("sans-serif", 22))
                .margin(14)
                .x_label_area_size(44)
                .y_label_area_size(56)
                .build_cartesian_2d(lo..hi, lo..hi)
                .map_err(err)?;
            chart
                .configure_mesh()
                .x_desc("node A (V)")
                .y_desc("node B (V)")
                .light_line_style(RGBColor(235, 235, 235))
                .draw()
                .map_err(err)?;
            chart
                .draw_series(LineSeries::new(
                    vin.iter().copied().zip(vout.iter().copied()),
                    INK.stroke_width(2),
                ))
                .map_err(err)?;
            chart
                .draw_series(LineSeries::new(
                    vout.iter().copied().zip(vin.iter().copied()),
                    WARM.stroke_width(2),
                ))
                .map_err(err)?;
            for &((x0, y0), (x1, y1)) in squares {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(x0.min(x1), y0.min(y1)), (x0.max(x1), y0.max(y1))],
                        MOSS.stroke_width(2),
                    )))
                    .map_err(err)?;
            }
            Ok(())
        }};
    }
    both(stem, (640, 640), |r| body!(r), |r| body!(r))
}

/// Waveforms against time (ns).
pub fn waveforms(stem: &Path, t: &[f64], series: &[(&str, &[f64])]) -> DrawResult {
    let (t0, t1) = span(t.iter().map(|x| x * 1e9));
    let (y0, y1) = span(series.iter().flat_map(|(_, s)| s.iter().copied()));
    let colors = [INK, WARM, MOSS];
    macro_rules! body {
        ($root:expr) => {{
            let root = $root;
            root.fill(&WHITE).map_err(err)?;
            let mut chart = ChartBuilder::on(root)
                .caption("Ring waveforms (model estimate)", ("sans-serif", 22))
                .margin(14)
                .x_label_area_size(44)
                .y_label_area_size(56)
                .build_cartesian_2d(t0..t1, y0 - 0.05 * (y1 - y0)..y1 + 0.05 * (y1 - y0))
                .map_err(err)?;
            chart
                .configure_mesh()
                .x_desc("time (ns)")
                .y_desc("voltage (V)")
                .light_line_style(RGBColor(235, 235, 235))
                .draw()
                .map_err(err)?;
            for (k, (name, s)) in series.iter().enumerate() {
                let c = colors[k % colors.len()];
                chart
                    .draw_series(LineSeries::new(
                        t.iter().map(|x| x * 1e9).zip(s.iter().copied()),
                        c.stroke_width(2),
                    ))
                    .map_err(err)?
                    .label(name.to_string())
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 20, y)], c.stroke_width(2))
                    });
            }
            chart
                .configure_series_labels()
                .background_style(WHITE)
                .border_style(RGBColor(180, 180, 180))
                .draw()
                .map_err(err)?;
            Ok(())
        }};
    }
    both(stem, SIZE, |r| body!(r), |r| body!(r))
}

/// Device transfer characteristics |I_D|(V_GS) on a log scale, one curve per V_DS.
pub fn transfer_log(
    stem: &Path,
    curves: &[(f64, Vec<(f64, f64)>)],
    swing: Option<f64>,
) -> DrawResult {
    let (x0, x1) = span(curves.iter().flat_map(|(_, c)| c.iter().map(|p| p.0)));
    let mags = curves
        .iter()
        .flat_map(|(_, c)| c.iter().map(|p| p.1.abs()))
        .filter(|v| *v > 0.0);
    let (ylo, yhi) = span(mags);
    let title = match swing {
        Some(s) => {
            format!("Transfer characteristics, minimum swing {s:.1} mV/dec (model estimate)")
        }
        None => "Transfer characteristics (model estimate)".to_string(),
    };
    let colors = [INK, WARM, MOSS];
    macro_rules! body {
        ($root:expr) => {{
            let root = $root;
            root.fill(&WHITE).map_err(err)?;
            let mut chart = ChartBuilder::on(root)
                .caption(&title, ("sans-serif", 20))
                .margin(14)
                .x_label_area_size(44)
                .y_label_area_size(70)
                .build_cartesian_2d(x0..x1, (ylo * 0.5..yhi * 2.0).log_scale())
                .map_err(err)?;
            chart
                .configure_mesh()
                .x_desc("V_GS (V)")
                .y_desc("|I_D| (A)")
                .y_label_formatter(&|v| format!("{v:.0e}"))
                .draw()
                .map_err(err)?;
            for (k, (vds, c)) in curves.iter().enumerate() {
                let col = colors[k % colors.len()];
                chart
                    .draw_series(LineSeries::new(
                        c.iter().map(|p| (p.0, p.1.abs().max(ylo * 0.5))),
                        col.stroke_width(2),
                    ))
                    .map_err(err)?
                    .label(format!("V_DS = {vds} V"))
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 20, y)], col.stroke_width(2))
                    });
            }
            chart
                .configure_series_labels()
                .background_style(WHITE)
                .border_style(RGBColor(180, 180, 180))
                .draw()
                .map_err(err)?;
            Ok(())
        }};
    }
    both(stem, SIZE, |r| body!(r), |r| body!(r))
}

/// Curves `y(x)` with their own legend labels (output characteristics, swept figures).
pub fn curves(
    stem: &Path,
    title: &str,
    x_desc: &str,
    y_desc: &str,
    series: &[(String, Vec<(f64, f64)>)],
) -> DrawResult {
    let (x0, x1) = span(series.iter().flat_map(|(_, c)| c.iter().map(|p| p.0)));
    let (y0, y1) = span(series.iter().flat_map(|(_, c)| c.iter().map(|p| p.1)));
    let pad = 0.05 * (y1 - y0);
    let colors = [
        INK,
        WARM,
        MOSS,
        RGBColor(120, 60, 150),
        RGBColor(150, 40, 60),
        RGBColor(30, 120, 140),
    ];
    macro_rules! body {
        ($root:expr) => {{
            let root = $root;
            root.fill(&WHITE).map_err(err)?;
            let mut chart = ChartBuilder::on(root)
                .caption(title, ("sans-serif", 20))
                .margin(14)
                .x_label_area_size(44)
                .y_label_area_size(70)
                .build_cartesian_2d(x0..x1, y0 - pad..y1 + pad)
                .map_err(err)?;
            chart
                .configure_mesh()
                .x_desc(x_desc)
                .y_desc(y_desc)
                .y_label_formatter(&|v| format!("{v:.2e}"))
                .light_line_style(RGBColor(235, 235, 235))
                .draw()
                .map_err(err)?;
            for (k, (name, c)) in series.iter().enumerate() {
                let col = colors[k % colors.len()];
                chart
                    .draw_series(LineSeries::new(c.iter().copied(), col.stroke_width(2)))
                    .map_err(err)?
                    .label(name.clone())
                    .legend(move |(x, y)| {
                        PathElement::new(vec![(x, y), (x + 20, y)], col.stroke_width(2))
                    });
            }
            chart
                .configure_series_labels()
                .background_style(WHITE)
                .border_style(RGBColor(180, 180, 180))
                .draw()
                .map_err(err)?;
            Ok(())
        }};
    }
    both(stem, SIZE, |r| body!(r), |r| body!(r))
}

/// A value in engineering notation with an SI prefix on its unit, four significant digits:
/// `engineering(6e-10, "s")` is `600 ps`, `engineering(0.6, "V")` is `600 mV`. Without a
/// unit, or for zero, the plain number.
pub fn engineering(v: f64, unit: &str) -> String {
    const PREFIXES: [&str; 10] = ["f", "p", "n", "µ", "m", "", "k", "M", "G", "T"];
    let short = |x: f64| {
        let s = format!("{x:.4}");
        let s = s.trim_end_matches('0').trim_end_matches('.').to_string();
        if s == "-0" {
            "0".to_string()
        } else {
            s
        }
    };
    if unit.is_empty() || v == 0.0 || !v.is_finite() {
        let plain = if v != 0.0 && (v.abs() < 1e-3 || v.abs() >= 1e5) {
            format!("{v:.3e}")
        } else {
            short(v)
        };
        return if unit.is_empty() {
            plain
        } else {
            format!("{plain} {unit}")
        };
    }
    let e = ((v.abs().log10() / 3.0).floor() as i32).clamp(-5, 4);
    let m = v / 10f64.powi(3 * e);
    // Rounding can carry a mantissa to 1000: move to the next prefix.
    let (m, e) = if (m.abs() * 1e4).round() / 1e4 >= 1000.0 && e < 4 {
        (m / 1000.0, e + 1)
    } else {
        (m, e)
    };
    format!("{} {}{unit}", short(m), PREFIXES[(e + 5) as usize])
}

#[cfg(test)]
mod engineering_tests {
    use super::engineering;

    #[test]
    fn prefixes_follow_the_value() {
        assert_eq!(engineering(6e-10, "s"), "600 ps");
        assert_eq!(engineering(0.6, "V"), "600 mV");
        assert_eq!(engineering(1.2, "V"), "1.2 V");
        assert_eq!(engineering(7.36e8, "Hz"), "736 MHz");
        assert_eq!(engineering(-3.3e-5, "A"), "-33 µA");
        assert_eq!(engineering(0.0, "V"), "0 V");
        assert_eq!(engineering(7.0, ""), "7");
        assert_eq!(engineering(999.99996, "V"), "1 kV");
    }
}

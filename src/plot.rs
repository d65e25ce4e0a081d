//! Figures: one builder ([`Figure`], drawn by [`draw`]) for every plot Lamina makes, so they
//! share one look: quantity and unit on every axis (the unit with the SI prefix that suits the
//! data, `output (mV)`, `time (ps)`), plain tick numbers, log axes labelled by decade in
//! engineering notation (`1 pA`, `10 pA`, ...), markers on sampled points, legends naming each
//! series, our palette. Each figure is written as SVG (900 x 560 units) and PNG at print
//! resolution (1800 x 1120 pixels, everything drawn at twice the size), whole or not at all.
//! Labels use the embedded DejaVu Sans (see `assets/DejaVuSans-LICENSE.txt`).
//!
//! The figures: transfer curve with its gain and marks, butterfly with the largest squares,
//! waveforms, device characteristics on a log axis, and curves of any figure against a
//! parameter. Model estimates are flagged in the README and in the JSON summaries, not in
//! every title.

pub use lamina_netlist::units::engineering;
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::Path;
use std::sync::Once;

const FONT: &[u8] = include_bytes!("../assets/DejaVuSans.ttf");
/// SVG size in user units; the PNG is drawn at [`PNG_SCALE`] times this.
const SIZE: (u32, u32) = (900, 560);
/// PNG pixels per SVG unit.
const PNG_SCALE: u32 = 2;
/// Our palette: ink blue, warm orange, moss green, plum, brick, teal, ochre, slate.
const PALETTE: [RGBColor; 8] = [
    RGBColor(31, 58, 147),
    RGBColor(214, 110, 24),
    RGBColor(64, 130, 80),
    RGBColor(120, 60, 150),
    RGBColor(170, 50, 60),
    RGBColor(30, 125, 140),
    RGBColor(170, 135, 20),
    RGBColor(90, 95, 110),
];
const GRID: RGBColor = RGBColor(232, 232, 232);

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

/// An axis: the quantity and its SI unit (`"output"`, `"V"`), linear or logarithmic.
#[derive(Clone, Debug, PartialEq)]
pub struct Axis {
    /// What is plotted, in words or symbols (`input`, `V_GS`, `|I_D|`).
    pub quantity: String,
    /// Its SI unit without prefix (`V`, `A/µm`, `s`), empty for a pure number.
    pub unit: String,
    /// Logarithmic (of the magnitude; non-positive values are left out).
    pub log: bool,
}

impl Axis {
    /// A linear axis.
    pub fn new(quantity: &str, unit: &str) -> Axis {
        Axis {
            quantity: quantity.into(),
            unit: unit.into(),
            log: false,
        }
    }

    /// A logarithmic axis.
    pub fn log(quantity: &str, unit: &str) -> Axis {
        Axis {
            log: true,
            ..Axis::new(quantity, unit)
        }
    }

    /// From a description `quantity (unit)`; no parentheses: a pure number.
    pub fn described(desc: &str) -> Axis {
        match desc.rsplit_once(" (") {
            Some((q, u)) if u.ends_with(')') => Axis::new(q, &u[..u.len() - 1]),
            _ => Axis::new(desc, ""),
        }
    }
}

/// How a series is drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Style {
    /// A solid line.
    Line,
    /// A dashed line (a second quantity on the right axis, say).
    Dashed,
    /// Markers only.
    Points,
}

/// A named series of points.
#[derive(Clone, Debug, PartialEq)]
pub struct Series {
    /// Legend text (empty: no legend entry).
    pub name: String,
    /// The points, in the axes' SI units.
    pub points: Vec<(f64, f64)>,
    /// How it is drawn.
    pub style: Style,
    /// Whether each sample gets a marker (on by default for up to 60 points).
    pub markers: bool,
    /// Drawn against the right axis.
    pub right: bool,
    /// Palette index, so two series can share a colour (data and fit); default its position.
    pub colour: Option<usize>,
}

impl Series {
    /// A line, with markers when it has few enough samples to show them.
    pub fn line(name: &str, points: Vec<(f64, f64)>) -> Series {
        Series {
            name: name.into(),
            markers: points.len() <= 60,
            points,
            style: Style::Line,
            right: false,
            colour: None,
        }
    }
}

/// Something drawn over the data.
#[derive(Clone, Debug, PartialEq)]
pub enum Mark {
    /// A labelled vertical line at `x`.
    Vertical(f64, String),
    /// A rectangle between two corners.
    Rect((f64, f64), (f64, f64)),
    /// A labelled point.
    Point((f64, f64), String),
}

/// A figure: axes, series, marks and an optional title.
#[derive(Clone, Debug, PartialEq)]
pub struct Figure {
    /// Title (empty for none).
    pub title: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Left axis.
    pub y: Axis,
    /// Right axis, if any series is drawn against it.
    pub y_right: Option<Axis>,
    /// The data.
    pub series: Vec<Series>,
    /// Marks over the data.
    pub marks: Vec<Mark>,
    /// Square plot area with equal ranges (a butterfly).
    pub square: bool,
}

impl Figure {
    /// An empty figure on two axes.
    pub fn new(title: &str, x: Axis, y: Axis) -> Figure {
        Figure {
            title: title.into(),
            x,
            y,
            y_right: None,
            series: Vec::new(),
            marks: Vec::new(),
            square: false,
        }
    }
}

const PREFIXES: [(i32, &str); 10] = [
    (-15, "f"),
    (-12, "p"),
    (-9, "n"),
    (-6, "µ"),
    (-3, "m"),
    (0, ""),
    (3, "k"),
    (6, "M"),
    (9, "G"),
    (12, "T"),
];

/// How an axis maps data to drawing coordinates: a power of 1000 (linear) or log10 (log).
#[derive(Clone, Debug)]
struct Scale {
    log: bool,
    /// Linear: data times `factor`.
    factor: f64,
    /// The axis title with the prefixed unit.
    title: String,
    unit: String,
    range: (f64, f64),
}

impl Scale {
    fn new(
        axis: &Axis,
        values: impl Iterator<Item = f64>,
        square_with: Option<(f64, f64)>,
    ) -> Scale {
        let v: Vec<f64> = values
            .filter(|x| x.is_finite() && (!axis.log || *x > 0.0))
            .collect();
        if axis.log {
            let lo = v.iter().map(|x| x.log10()).fold(f64::INFINITY, f64::min);
            let hi = v
                .iter()
                .map(|x| x.log10())
                .fold(f64::NEG_INFINITY, f64::max);
            let (lo, hi) = if lo.is_finite() {
                (lo.floor(), hi.ceil().max(lo.floor() + 1.0))
            } else {
                (0.0, 1.0)
            };
            let title = if axis.unit.is_empty() {
                axis.quantity.clone()
            } else {
                format!("{} ({})", axis.quantity, axis.unit)
            };
            return Scale {
                log: true,
                factor: 1.0,
                title,
                unit: axis.unit.clone(),
                range: (lo, hi),
            };
        }
        let (lo, hi) = match square_with {
            Some(r) => r,
            None => span(v.iter().copied()),
        };
        let big = lo.abs().max(hi.abs());
        let e = if axis.unit.is_empty() || big == 0.0 || !big.is_finite() {
            0
        } else {
            // A little slack, so 0.99999 V reads as volts and not as 999.99 mV.
            (((big.log10() + 0.002) / 3.0).floor() as i32 * 3).clamp(-15, 12)
        };
        let prefix = PREFIXES.iter().find(|p| p.0 == e).map_or("", |p| p.1);
        let factor = 10f64.powi(-e);
        let title = if axis.unit.is_empty() {
            axis.quantity.clone()
        } else {
            format!("{} ({prefix}{})", axis.quantity, axis.unit)
        };
        let pad = if square_with.is_some() {
            0.0
        } else {
            0.04 * (hi - lo)
        };
        Scale {
            log: false,
            factor,
            title,
            unit: axis.unit.clone(),
            range: ((lo - pad) * factor, (hi + pad) * factor),
        }
    }

    fn map(&self, v: f64) -> Option<f64> {
        if self.log {
            (v > 0.0 && v.is_finite()).then(|| v.log10())
        } else {
            v.is_finite().then_some(v * self.factor)
        }
    }

    fn label(&self, v: f64) -> String {
        if self.log {
            if (v - v.round()).abs() > 1e-6 {
                return String::new();
            }
            engineering(10f64.powi(v.round() as i32), &self.unit)
        } else {
            let s = format!("{v:.4}");
            let s = s.trim_end_matches('0').trim_end_matches('.');
            if s == "-0" {
                "0".into()
            } else {
                s.to_string()
            }
        }
    }

    fn labels(&self) -> usize {
        if self.log {
            ((self.range.1 - self.range.0).round() as usize + 1).clamp(2, 30)
        } else {
            8
        }
    }
}

/// At most about 4000 points for drawing: when there are more, each of 2000 bins along x keeps
/// its lowest and highest point, in order, so spikes and edges survive.
fn reduce(pts: Vec<(f64, f64)>, (x0, x1): (f64, f64)) -> Vec<(f64, f64)> {
    const BINS: usize = 2000;
    if pts.len() <= 2 * BINS || x1 <= x0 {
        return pts;
    }
    let bin = |x: f64| (((x - x0) / (x1 - x0) * BINS as f64) as usize).min(BINS - 1);
    let mut out = Vec::with_capacity(2 * BINS + 2);
    let mut k = 0;
    while k < pts.len() {
        let b = bin(pts[k].0);
        let (mut lo, mut hi) = (k, k);
        let mut j = k;
        while j < pts.len() && bin(pts[j].0) == b {
            if pts[j].1 < pts[lo].1 {
                lo = j;
            }
            if pts[j].1 > pts[hi].1 {
                hi = j;
            }
            j += 1;
        }
        let (a, c) = (lo.min(hi), lo.max(hi));
        out.push(pts[a]);
        if c != a {
            out.push(pts[c]);
        }
        k = j.max(k + 1);
    }
    out
}

fn span(v: impl Iterator<Item = f64>) -> (f64, f64) {
    let (lo, hi) = v.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
        (a.min(x), b.max(x))
    });
    if lo.is_finite() && hi > lo {
        (lo, hi)
    } else if lo.is_finite() {
        (
            lo - 0.5 * lo.abs().max(1e-30),
            hi + 0.5 * hi.abs().max(1e-30),
        )
    } else {
        (0.0, 1.0)
    }
}

/// Draws `fig` into `stem.svg` and `stem.png`.
pub fn draw(stem: &Path, fig: &Figure) -> DrawResult {
    register();
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, SIZE).into_drawing_area();
        render(&root, fig, 1)?;
        root.present().map_err(err)?;
    }
    crate::output::write_whole(&stem.with_extension("svg"), svg.as_bytes())?;
    let size = (SIZE.0 * PNG_SCALE, SIZE.1 * PNG_SCALE);
    let mut buf = vec![0u8; (size.0 * size.1 * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut buf, size).into_drawing_area();
        render(&root, fig, PNG_SCALE)?;
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

fn render<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, fig: &Figure, k: u32) -> DrawResult
where
    DB::ErrorType: 'static,
{
    let k = k as i32;
    let font = |size: i32| ("sans-serif", (size * k) as f64);
    root.fill(&WHITE).map_err(err)?;
    let left: Vec<&Series> = fig.series.iter().filter(|s| !s.right).collect();
    let right: Vec<&Series> = fig.series.iter().filter(|s| s.right).collect();
    let xs = fig.series.iter().flat_map(|s| s.points.iter().map(|p| p.0));
    let mark_x = fig.marks.iter().flat_map(|m| match m {
        Mark::Rect(a, b) => vec![a.0, b.0],
        _ => Vec::new(),
    });
    let square = fig.square.then(|| {
        span(
            fig.series
                .iter()
                .flat_map(|s| s.points.iter().flat_map(|p| [p.0, p.1])),
        )
    });
    let sx = Scale::new(&fig.x, xs.chain(mark_x), square);
    let sy = Scale::new(
        &fig.y,
        left.iter().flat_map(|s| s.points.iter().map(|p| p.1)),
        square,
    );
    let sr = fig.y_right.as_ref().map(|a| {
        Scale::new(
            a,
            right.iter().flat_map(|s| s.points.iter().map(|p| p.1)),
            None,
        )
    });
    let area = if fig.square {
        let side = (SIZE.1 as i32) * k;
        let off = ((SIZE.0 as i32) * k - side) / 2;
        root.margin(0, 0, off, off)
    } else {
        root.clone()
    };
    let mut builder = ChartBuilder::on(&area);
    if !fig.title.is_empty() {
        builder.caption(&fig.title, font(18));
    }
    // Room for the longest tick label, then the axis title.
    let room = |s: &Scale| {
        let chars = [s.range.0, s.range.1, 0.5 * (s.range.0 + s.range.1)]
            .iter()
            .map(|&v| s.label(if s.log { v.round() } else { v }).chars().count())
            .max()
            .unwrap_or(4) as i32;
        (chars * 9 + 40).max(64) * k
    };
    builder
        .margin(12 * k)
        .x_label_area_size(52 * k)
        .y_label_area_size(room(&sy));
    if let Some(r) = &sr {
        builder.right_y_label_area_size(room(r));
    }
    let mut chart = builder
        .build_cartesian_2d(sx.range.0..sx.range.1, sy.range.0..sy.range.1)
        .map_err(err)?
        .set_secondary_coord(
            sx.range.0..sx.range.1,
            sr.as_ref().map_or(0.0..1.0, |s| s.range.0..s.range.1),
        );
    let xl = |v: &f64| sx.label(*v);
    let yl = |v: &f64| sy.label(*v);
    chart
        .configure_mesh()
        .x_desc(&sx.title)
        .y_desc(&sy.title)
        .x_labels(sx.labels())
        .y_labels(sy.labels())
        .x_label_formatter(&xl)
        .y_label_formatter(&yl)
        .axis_desc_style(font(16))
        .label_style(font(14))
        .light_line_style(GRID)
        .bold_line_style(GRID.mix(0.0))
        .axis_style(BLACK.stroke_width(k as u32))
        .draw()
        .map_err(err)?;
    if let Some(r) = &sr {
        let rl = |v: &f64| r.label(*v);
        chart
            .configure_secondary_axes()
            .y_desc(&r.title)
            .y_labels(r.labels())
            .y_label_formatter(&rl)
            .axis_desc_style(font(16))
            .label_style(font(14))
            .draw()
            .map_err(err)?;
    }
    let stroke = (2 * k) as u32;
    let segments = k > 1;
    let mut any_legend = false;
    for (n, s) in fig.series.iter().enumerate() {
        let colour = PALETTE[s.colour.unwrap_or(n) % PALETTE.len()];
        let scale_y = if s.right {
            sr.as_ref().unwrap_or(&sy)
        } else {
            &sy
        };
        let pts: Vec<(f64, f64)> = reduce(
            s.points
                .iter()
                .filter_map(|&(x, y)| Some((sx.map(x)?, scale_y.map(y)?)))
                .collect(),
            (sx.range.0, sx.range.1),
        );
        let style = colour.stroke_width(stroke);
        let markers = s.markers || s.style == Style::Points;
        let r = 3 * k;
        macro_rules! put {
            ($draw:ident) => {{
                let anno = match s.style {
                    Style::Points => chart
                        .$draw(pts.iter().map(|&p| Circle::new(p, r, colour.filled())))
                        .map_err(err)?,
                    Style::Dashed => chart
                        .$draw(DashedLineSeries::new(
                            pts.iter().copied(),
                            8 * k,
                            5 * k,
                            style,
                        ))
                        .map_err(err)?,
                    // Segment by segment on bitmaps: a thick polyline's mitred joins spike far
                    // past the data at sharp turns there (vector renderers limit the mitre).
                    Style::Line if segments => chart
                        .$draw(
                            pts.windows(2)
                                .map(|w| PathElement::new(vec![w[0], w[1]], style)),
                        )
                        .map_err(err)?,
                    Style::Line => chart
                        .$draw(LineSeries::new(pts.iter().copied(), style))
                        .map_err(err)?,
                };
                if !s.name.is_empty() {
                    any_legend = true;
                    anno.label(s.name.clone()).legend(move |(x, y)| {
                        let line = PathElement::new(
                            vec![(x, y), (x + 22 * k, y)],
                            colour.stroke_width(stroke),
                        );
                        EmptyElement::at((0, 0))
                            + line
                            + Circle::new(
                                (x + 11 * k, y),
                                if markers { r } else { 0 },
                                colour.filled(),
                            )
                    });
                }
                if markers && s.style != Style::Points {
                    chart
                        .$draw(pts.iter().map(|&p| Circle::new(p, r, colour.filled())))
                        .map_err(err)?;
                }
            }};
        }
        if s.right {
            put!(draw_secondary_series);
        } else {
            put!(draw_series);
        }
    }
    let accent = PALETTE[2];
    for (i, m) in fig.marks.iter().enumerate() {
        match m {
            Mark::Vertical(x, label) => {
                if let Some(x) = sx.map(*x) {
                    // Labels of nearby marks at staggered heights.
                    let y_text = sy.range.1 - (i % 3) as f64 * 0.06 * (sy.range.1 - sy.range.0);
                    chart
                        .draw_series(std::iter::once(PathElement::new(
                            vec![(x, sy.range.0), (x, sy.range.1)],
                            accent.stroke_width(k as u32),
                        )))
                        .map_err(err)?;
                    chart
                        .draw_series(std::iter::once(Text::new(
                            format!(" {label}"),
                            (x, y_text),
                            font(14).into_font().color(&accent),
                        )))
                        .map_err(err)?;
                }
            }
            Mark::Rect(a, b) => {
                if let (Some(x0), Some(y0), Some(x1), Some(y1)) =
                    (sx.map(a.0), sy.map(a.1), sx.map(b.0), sy.map(b.1))
                {
                    chart
                        .draw_series(std::iter::once(Rectangle::new(
                            [(x0.min(x1), y0.min(y1)), (x0.max(x1), y0.max(y1))],
                            accent.stroke_width(stroke),
                        )))
                        .map_err(err)?;
                }
            }
            Mark::Point(p, label) => {
                if let (Some(x), Some(y)) = (sx.map(p.0), sy.map(p.1)) {
                    chart
                        .draw_series(std::iter::once(Circle::new((x, y), 5 * k, accent.filled())))
                        .map_err(err)?;
                    chart
                        .draw_series(std::iter::once(Text::new(
                            label.clone(),
                            (x, y),
                            font(14).into_font().color(&accent),
                        )))
                        .map_err(err)?;
                }
            }
        }
    }
    if any_legend {
        // The corner with the fewest points, so the legend hides the least data.
        let (x0, x1, y0, y1) = (sx.range.0, sx.range.1, sy.range.0, sy.range.1);
        let corners = [
            (SeriesLabelPosition::UpperLeft, x0, y1),
            (SeriesLabelPosition::UpperRight, x1, y1),
            (SeriesLabelPosition::LowerRight, x1, y0),
            (SeriesLabelPosition::LowerLeft, x0, y0),
        ];
        let crowd = |cx: f64, cy: f64| {
            fig.series
                .iter()
                .filter(|s| !s.right)
                .flat_map(|s| s.points.iter())
                .filter_map(|&(x, y)| Some((sx.map(x)?, sy.map(y)?)))
                .filter(|(x, y)| {
                    (x - cx).abs() < 0.35 * (x1 - x0) && (y - cy).abs() < 0.3 * (y1 - y0)
                })
                .count()
        };
        let best = corners
            .into_iter()
            .min_by_key(|c| crowd(c.1, c.2))
            .map_or(SeriesLabelPosition::UpperLeft, |c| c.0);
        chart
            .configure_series_labels()
            .label_font(font(14))
            .legend_area_size(30 * k)
            .background_style(WHITE.mix(0.9))
            .border_style(RGBColor(190, 190, 190))
            .position(best)
            .draw()
            .map_err(err)?;
    }
    Ok(())
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
    let mut f = Figure::new("", Axis::new("input", "V"), Axis::new("output", "V"));
    f.y_right = Some(Axis::new("gain |dv_out/dv_in|", ""));
    f.series.push(Series::line(
        "output",
        vin.iter().copied().zip(vout.iter().copied()).collect(),
    ));
    f.series.push(Series {
        style: Style::Dashed,
        right: true,
        markers: false,
        ..Series::line("gain", gain)
    });
    f.marks = marks
        .iter()
        .map(|(n, x)| Mark::Vertical(*x, n.to_string()))
        .collect();
    draw(stem, &f)
}

/// The butterfly: the curve and its mirror image, with the largest square of each lobe.
pub fn butterfly(
    stem: &Path,
    vin: &[f64],
    vout: &[f64],
    snm: Option<f64>,
    squares: &[lamina_measure::snm::Square],
) -> DrawResult {
    let title = match snm {
        Some(s) => format!("largest square {}", engineering(s, "V")),
        None => "no lobes".to_string(),
    };
    let mut f = Figure::new(&title, Axis::new("node A", "V"), Axis::new("node B", "V"));
    f.square = true;
    f.series.push(Series {
        markers: false,
        ..Series::line(
            "curve",
            vin.iter().copied().zip(vout.iter().copied()).collect(),
        )
    });
    f.series.push(Series {
        markers: false,
        ..Series::line(
            "mirror",
            vout.iter().copied().zip(vin.iter().copied()).collect(),
        )
    });
    f.marks = squares.iter().map(|&(a, b)| Mark::Rect(a, b)).collect();
    draw(stem, &f)
}

/// Waveforms (V) against time (s).
pub fn waveforms(stem: &Path, t: &[f64], series: &[(&str, &[f64])]) -> DrawResult {
    let mut f = Figure::new("", Axis::new("time", "s"), Axis::new("voltage", "V"));
    for (name, v) in series {
        f.series.push(Series {
            markers: false,
            ..Series::line(name, t.iter().copied().zip(v.iter().copied()).collect())
        });
    }
    draw(stem, &f)
}

/// Device transfer characteristics |I_D|(V_GS) on a log scale, one curve per V_DS; per
/// width in A/µm (the field's unit) when the width `width_m` is known.
pub fn transfer_log(
    stem: &Path,
    curves: &[(f64, Vec<(f64, f64)>)],
    swing: Option<f64>,
    width_m: Option<f64>,
) -> DrawResult {
    let title = match swing {
        Some(s) => format!("minimum swing {s:.1} mV/dec"),
        None => String::new(),
    };
    let (y, per) = match width_m {
        Some(w) if w > 0.0 => (Axis::log("|I_D| / W", "A/µm"), 1.0 / (w * 1e6)),
        _ => (Axis::log("|I_D|", "A"), 1.0),
    };
    let mut f = Figure::new(&title, Axis::new("V_GS", "V"), y);
    for (vds, c) in curves {
        f.series.push(Series::line(
            &format!("V_DS = {}", engineering(*vds, "V")),
            c.iter().map(|p| (p.0, p.1.abs() * per)).collect(),
        ));
    }
    draw(stem, &f)
}

/// Curves `y(x)` with their own legend labels (output characteristics, swept figures); the
/// axis descriptions are `quantity (unit)` in SI units.
pub fn curves(
    stem: &Path,
    title: &str,
    x_desc: &str,
    y_desc: &str,
    series: &[(String, Vec<(f64, f64)>)],
) -> DrawResult {
    curves_on(stem, title, Axis::described(x_desc), y_desc, series)
}

/// [`curves`] on a given x axis (a logarithmic one, say).
pub fn curves_on(
    stem: &Path,
    title: &str,
    x: Axis,
    y_desc: &str,
    series: &[(String, Vec<(f64, f64)>)],
) -> DrawResult {
    let mut f = Figure::new(title, x, Axis::described(y_desc));
    for (name, pts) in series {
        f.series.push(Series::line(name, pts.clone()));
    }
    draw(stem, &f)
}

//! Plots as PNG and SVG (plotters): curves with shaded bands and an optional residual panel,
//! and a correlation heat map. Every axis names its quantity and unit. Lines differ by style,
//! not colour alone, so they stay apart in grey-scale print and for colour-blind readers:
//! measured thin solid black, best-fit model thick solid blue, median long-dashed dark blue,
//! truth dotted orange; bands are shaded with a thin outline at both edges.
//!
//! Each figure is drawn twice from the same description, once per backend, into memory, and
//! written with `write_atomically`.

use std::path::{Path, PathBuf};

use plotters::coord::Shift;
use plotters::prelude::*;

use super::write_atomically;

/// Pixel size of every figure (width, height).
pub const FIGURE_SIZE: (u32, u32) = (1000, 640);

/// Errors drawing or writing a figure.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    #[error("drawing {what}: {message}")]
    Draw { what: String, message: String },
    #[error("encoding {what} as PNG: {message}")]
    Encode { what: String, message: String },
    #[error("cannot write {}", path.display())]
    Write {
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
}

/// What a line shows; sets its colour, width and dash pattern.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LineKind {
    /// Test data: thin black.
    Measured,
    /// The best-fit model: blue.
    Model,
    /// The median of a prediction band: dark blue, long dashes.
    Median,
    /// The known truth of a twin experiment: orange, dotted (short dashes).
    Truth,
}

/// What a shaded band shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ShadeKind {
    /// The measured spread (repeats, or the σ the fit used): grey.
    Measured,
    /// A prediction band from the fit's uncertainty: light blue.
    Prediction,
}

/// One line of a chart.
#[derive(Debug, Clone)]
pub struct Line {
    /// Legend text (also an SVG `<text>` element).
    pub label: String,
    pub x: Vec<f64>,
    pub y: Vec<f64>,
    pub kind: LineKind,
}

/// A band between two curves on the same x values.
#[derive(Debug, Clone)]
pub struct Shade {
    pub label: String,
    pub x: Vec<f64>,
    pub lower: Vec<f64>,
    pub upper: Vec<f64>,
    pub kind: ShadeKind,
}

/// Points shown in a panel under the main chart (standardised residuals).
#[derive(Debug, Clone)]
pub struct Residuals {
    /// Axis label with unit, e.g. `residual (σ)`.
    pub label: String,
    pub x: Vec<f64>,
    pub y: Vec<f64>,
}

/// A chart: axes labelled with quantity and unit, lines, bands, optional residual panel.
#[derive(Debug, Clone)]
pub struct Chart {
    pub title: String,
    pub x_label: String,
    pub y_label: String,
    pub lines: Vec<Line>,
    pub shades: Vec<Shade>,
    pub residuals: Option<Residuals>,
}

fn colour(kind: LineKind) -> RGBColor {
    match kind {
        LineKind::Measured => RGBColor(20, 20, 20),
        LineKind::Model => RGBColor(31, 94, 184),
        LineKind::Median => RGBColor(10, 50, 110),
        LineKind::Truth => RGBColor(230, 120, 0),
    }
}

fn width(kind: LineKind) -> u32 {
    match kind {
        LineKind::Measured => 1,
        LineKind::Median | LineKind::Truth => 2,
        LineKind::Model => 3,
    }
}

/// Dash and gap lengths in pixels; `None` for a solid line.
fn dashes(kind: LineKind) -> Option<(u32, u32)> {
    match kind {
        LineKind::Measured | LineKind::Model => None,
        LineKind::Median => Some((12, 6)),
        LineKind::Truth => Some((3, 4)),
    }
}

fn shade_colour(kind: ShadeKind) -> RGBAColor {
    match kind {
        ShadeKind::Measured => RGBColor(150, 150, 150).mix(0.45),
        ShadeKind::Prediction => RGBColor(90, 150, 230).mix(0.45),
    }
}

fn shade_edge(kind: ShadeKind) -> RGBColor {
    match kind {
        ShadeKind::Measured => RGBColor(110, 110, 110),
        ShadeKind::Prediction => RGBColor(60, 120, 210),
    }
}

/// The range of the finite values, widened when empty or flat.
fn span(values: impl Iterator<Item = f64>, include_zero: bool) -> (f64, f64) {
    let (mut lo, mut hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        return (0.0, 1.0);
    }
    if include_zero {
        lo = lo.min(0.0);
        hi = hi.max(0.0);
    }
    if hi - lo <= 1e-12 * hi.abs().max(1.0) {
        return (lo - 0.5, hi + 0.5);
    }
    let pad = 0.05 * (hi - lo);
    (
        if include_zero && lo == 0.0 {
            0.0
        } else {
            lo - pad
        },
        hi + pad,
    )
}

fn draw_chart<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    chart: &Chart,
) -> Result<(), String> {
    let e = |err: DrawingAreaErrorKind<DB::ErrorType>| err.to_string();
    root.fill(&WHITE).map_err(e)?;
    let (_, height) = root.dim_in_pixel();
    let (main, lower) = match &chart.residuals {
        Some(_) => {
            let (a, b) = root.split_vertically((height as f64 * 0.72) as u32);
            (a, Some(b))
        }
        None => (root.clone(), None),
    };
    let xs = chart
        .lines
        .iter()
        .flat_map(|l| l.x.iter().copied())
        .chain(chart.shades.iter().flat_map(|s| s.x.iter().copied()));
    let (x0, x1) = span(xs, false);
    let ys = chart.lines.iter().flat_map(|l| l.y.iter().copied()).chain(
        chart
            .shades
            .iter()
            .flat_map(|s| s.lower.iter().chain(&s.upper).copied()),
    );
    let (y0, y1) = span(ys, true);
    let mut cc = ChartBuilder::on(&main)
        .caption(&chart.title, ("sans-serif", 24))
        .margin(14)
        .x_label_area_size(if lower.is_some() { 20 } else { 50 })
        .y_label_area_size(80)
        .build_cartesian_2d(x0..x1, y0..y1)
        .map_err(e)?;
    let mut mesh = cc.configure_mesh();
    mesh.y_desc(chart.y_label.as_str())
        .label_style(("sans-serif", 16))
        .axis_desc_style(("sans-serif", 18))
        .light_line_style(RGBColor(235, 235, 235));
    if lower.is_none() {
        mesh.x_desc(chart.x_label.as_str());
    }
    mesh.draw().map_err(e)?;
    for shade in &chart.shades {
        let fill = shade_colour(shade.kind);
        let mut outline: Vec<(f64, f64)> = shade
            .x
            .iter()
            .zip(&shade.upper)
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .map(|(x, y)| (*x, *y))
            .collect();
        outline.extend(
            shade
                .x
                .iter()
                .zip(&shade.lower)
                .rev()
                .filter(|(x, y)| x.is_finite() && y.is_finite())
                .map(|(x, y)| (*x, *y)),
        );
        cc.draw_series(std::iter::once(Polygon::new(outline, fill.filled())))
            .map_err(e)?
            .label(shade.label.as_str())
            .legend(move |(x, y)| Rectangle::new([(x, y - 6), (x + 22, y + 6)], fill.filled()));
        // A thin line at each edge, so the band shows even where it is narrow or printed pale.
        let edge = ShapeStyle {
            color: shade_edge(shade.kind).to_rgba(),
            filled: false,
            stroke_width: 1,
        };
        for side in [&shade.upper, &shade.lower] {
            let points: Vec<(f64, f64)> = shade
                .x
                .iter()
                .zip(side)
                .filter(|(x, y)| x.is_finite() && y.is_finite())
                .map(|(x, y)| (*x, *y))
                .collect();
            cc.draw_series(LineSeries::new(points, edge)).map_err(e)?;
        }
    }
    for line in &chart.lines {
        let style = ShapeStyle {
            color: colour(line.kind).to_rgba(),
            filled: false,
            stroke_width: width(line.kind),
        };
        let points: Vec<(f64, f64)> = line
            .x
            .iter()
            .zip(&line.y)
            .filter(|(x, y)| x.is_finite() && y.is_finite())
            .map(|(x, y)| (*x, *y))
            .collect();
        match dashes(line.kind) {
            None => {
                cc.draw_series(LineSeries::new(points, style))
                    .map_err(e)?
                    .label(line.label.as_str())
                    .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 22, y)], style));
            }
            Some((dash, gap)) => {
                cc.draw_series(DashedLineSeries::new(points, dash, gap, style))
                    .map_err(e)?
                    .label(line.label.as_str())
                    .legend(move |(x, y)| {
                        plotters::element::DashedPathElement::new(
                            vec![(x, y), (x + 26, y)],
                            dash,
                            gap,
                            style,
                        )
                    });
            }
        }
    }
    cc.configure_series_labels()
        .position(SeriesLabelPosition::UpperRight)
        .background_style(WHITE.mix(0.9))
        .border_style(RGBColor(120, 120, 120))
        .label_font(("sans-serif", 16))
        .draw()
        .map_err(e)?;
    if let (Some(area), Some(residuals)) = (lower, &chart.residuals) {
        let bound = residuals
            .y
            .iter()
            .filter(|v| v.is_finite())
            .fold(1.0f64, |m, v| m.max(v.abs()))
            * 1.1;
        let mut rc = ChartBuilder::on(&area)
            .margin(14)
            .margin_top(4)
            .x_label_area_size(50)
            .y_label_area_size(80)
            .build_cartesian_2d(x0..x1, -bound..bound)
            .map_err(e)?;
        rc.configure_mesh()
            .x_desc(chart.x_label.as_str())
            .y_desc(residuals.label.as_str())
            .y_labels(5)
            .label_style(("sans-serif", 16))
            .axis_desc_style(("sans-serif", 18))
            .light_line_style(RGBColor(235, 235, 235))
            .draw()
            .map_err(e)?;
        rc.draw_series(LineSeries::new(vec![(x0, 0.0), (x1, 0.0)], &BLACK))
            .map_err(e)?;
        let point_colour = colour(LineKind::Model);
        rc.draw_series(
            residuals
                .x
                .iter()
                .zip(&residuals.y)
                .filter(|(x, y)| x.is_finite() && y.is_finite())
                .map(|(x, y)| Circle::new((*x, *y), 2, point_colour.filled())),
        )
        .map_err(e)?;
    }
    root.present().map_err(e)?;
    Ok(())
}

/// A correlation matrix as a heat map: blue −1, white 0, red +1, the value in each cell, and a
/// numbered key of the parameter names.
#[derive(Debug, Clone)]
pub struct HeatMap {
    pub title: String,
    pub names: Vec<String>,
    /// Row-major, names.len() × names.len().
    pub values: Vec<Vec<f64>>,
}

fn diverging(value: f64) -> RGBColor {
    let v = value.clamp(-1.0, 1.0);
    let (end, t) = if v < 0.0 {
        ((33.0, 102.0, 172.0), -v)
    } else {
        ((178.0, 24.0, 43.0), v)
    };
    let mix = |a: f64| (255.0 + (a - 255.0) * t).round() as u8;
    RGBColor(mix(end.0), mix(end.1), mix(end.2))
}

fn draw_heat_map<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    map: &HeatMap,
) -> Result<(), String> {
    let e = |err: DrawingAreaErrorKind<DB::ErrorType>| err.to_string();
    root.fill(&WHITE).map_err(e)?;
    let (width, _) = root.dim_in_pixel();
    let (grid_area, key_area) = root.split_horizontally((width as f64 * 0.55) as u32);
    let p = map.names.len().max(1);
    let n = p as f64;
    let mut cc = ChartBuilder::on(&grid_area)
        .caption(&map.title, ("sans-serif", 22))
        .margin(14)
        .x_label_area_size(40)
        .y_label_area_size(40)
        .build_cartesian_2d(-0.5..n - 0.5, -0.5..n - 0.5)
        .map_err(e)?;
    // Cells are centred on the integers, so the integer ticks name the cells.
    cc.configure_mesh()
        .disable_mesh()
        .x_labels(p)
        .y_labels(p)
        .x_label_formatter(&|x| label_of_centre(*x, p, false))
        .y_label_formatter(&|y| label_of_centre(*y, p, true))
        .x_desc("parameter (key at right)")
        .label_style(("sans-serif", 15))
        .axis_desc_style(("sans-serif", 15))
        .draw()
        .map_err(e)?;
    for (i, row) in map.values.iter().enumerate() {
        for (j, &value) in row.iter().enumerate() {
            let (x, y) = (j as f64 - 0.5, n - 1.5 - i as f64);
            cc.draw_series(std::iter::once(Rectangle::new(
                [(x, y), (x + 1.0, y + 1.0)],
                diverging(value).filled(),
            )))
            .map_err(e)?;
            let text_colour = if value.abs() > 0.6 { WHITE } else { BLACK };
            cc.draw_series(std::iter::once(Text::new(
                format!("{value:+.2}"),
                (x + 0.3, y + 0.6),
                ("sans-serif", 15).into_font().color(&text_colour),
            )))
            .map_err(e)?;
        }
    }
    for (k, name) in map.names.iter().enumerate() {
        key_area
            .draw(&Text::new(
                format!("{} = {name}", k + 1),
                (10, 60 + 28 * k as i32),
                ("sans-serif", 16).into_font(),
            ))
            .map_err(e)?;
    }
    key_area
        .draw(&Text::new(
            "colour: correlation, blue −1 … white 0 … red +1 (–)",
            (10, 60 + 28 * p as i32 + 10),
            ("sans-serif", 15).into_font(),
        ))
        .map_err(e)?;
    root.present().map_err(e)?;
    Ok(())
}

/// Axis tick text: the parameter number at a cell centre (an integer position; rows count
/// from the top), blank elsewhere.
fn label_of_centre(position: f64, p: usize, is_vertical: bool) -> String {
    let index = position.round() as i64;
    if (position - position.round()).abs() > 1e-6 || index < 0 || index as usize >= p {
        return String::new();
    }
    let number = if is_vertical {
        p - index as usize
    } else {
        index as usize + 1
    };
    number.to_string()
}

fn write_figure(
    stem: &Path,
    what: &str,
    draw_png: impl Fn(&DrawingArea<BitMapBackend<'_>, Shift>) -> Result<(), String>,
    draw_svg: impl Fn(&DrawingArea<SVGBackend<'_>, Shift>) -> Result<(), String>,
) -> Result<[PathBuf; 2], PlotError> {
    register_fonts()?;
    let (w, h) = FIGURE_SIZE;
    let draw_error = |message: String| PlotError::Draw {
        what: what.to_string(),
        message,
    };
    let mut pixels = vec![255u8; (w * h * 3) as usize];
    {
        let root = BitMapBackend::with_buffer(&mut pixels, (w, h)).into_drawing_area();
        draw_png(&root).map_err(draw_error)?;
    }
    let mut svg = String::new();
    {
        let root = SVGBackend::with_string(&mut svg, (w, h)).into_drawing_area();
        draw_svg(&root).map_err(draw_error)?;
    }
    let encode_error = |err: png::EncodingError| PlotError::Encode {
        what: what.to_string(),
        message: err.to_string(),
    };
    let mut png_bytes = Vec::new();
    {
        let mut encoder = png::Encoder::new(&mut png_bytes, w, h);
        encoder.set_color(png::ColorType::Rgb);
        encoder.set_depth(png::BitDepth::Eight);
        let mut writer = encoder.write_header().map_err(encode_error)?;
        writer.write_image_data(&pixels).map_err(encode_error)?;
        writer.finish().map_err(encode_error)?;
    }
    let png_path = stem.with_extension("png");
    let svg_path = stem.with_extension("svg");
    for (path, bytes) in [
        (&png_path, &png_bytes),
        (&svg_path, &svg.clone().into_bytes()),
    ] {
        write_atomically(path, bytes).map_err(|source| PlotError::Write {
            path: path.clone(),
            source,
        })?;
    }
    Ok([png_path, svg_path])
}

/// The font of every figure's text: DejaVu Sans, shipped in assets/fonts/ (Bitstream Vera
/// licence, beside it) and compiled into the program, so plots need no system font library.
const SANS_SERIF: &[u8] = include_bytes!("../../assets/fonts/DejaVuSans.ttf");

/// Registers the shipped font as plotters' `sans-serif`, once per process.
pub fn register_fonts() -> Result<(), PlotError> {
    static REGISTERED: std::sync::OnceLock<bool> = std::sync::OnceLock::new();
    let ok = *REGISTERED.get_or_init(|| {
        plotters::style::register_font("sans-serif", plotters::style::FontStyle::Normal, SANS_SERIF)
            .is_ok()
    });
    if ok {
        Ok(())
    } else {
        Err(PlotError::Draw {
            what: "the figure text".into(),
            message: "the shipped font assets/fonts/DejaVuSans.ttf could not be read".into(),
        })
    }
}

/// Writes `stem.png` and `stem.svg` of a chart; returns their paths.
pub fn write_chart(chart: &Chart, stem: &Path) -> Result<[PathBuf; 2], PlotError> {
    write_figure(
        stem,
        &chart.title,
        |root| draw_chart(root, chart),
        |root| draw_chart(root, chart),
    )
}

/// Writes `stem.png` and `stem.svg` of a heat map; returns their paths.
pub fn write_heat_map(map: &HeatMap, stem: &Path) -> Result<[PathBuf; 2], PlotError> {
    write_figure(
        stem,
        &map.title,
        |root| draw_heat_map(root, map),
        |root| draw_heat_map(root, map),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn span_includes_zero_and_pads_the_top() {
        let (lo, hi) = span([2.0, 10.0].into_iter(), true);
        assert_eq!(lo, 0.0);
        assert!((hi - 10.5).abs() < 1e-12);
        assert_eq!(span(std::iter::empty(), true), (0.0, 1.0));
    }

    #[test]
    fn the_diverging_scale_is_white_at_zero_and_saturated_at_the_ends() {
        assert_eq!(diverging(0.0), RGBColor(255, 255, 255));
        assert_eq!(diverging(1.0), RGBColor(178, 24, 43));
        assert_eq!(diverging(-1.0), RGBColor(33, 102, 172));
    }
}

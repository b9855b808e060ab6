//! Plots as PNG and SVG (plotters), with an embedded font so no system fonts
//! are needed. Each file is drawn to a temporary name beside the target and
//! renamed into place, so a failed run never leaves a half-written plot.

use crate::error::{Result, SimError};
use plotters::coord::Shift;
use plotters::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::Once;

static FONT: Once = Once::new();

fn register_font() {
    FONT.call_once(|| {
        let _ = plotters::style::register_font("sans-serif", FontStyle::Normal, epaint_default_fonts::UBUNTU_LIGHT);
        let _ = plotters::style::register_font("sans-serif", FontStyle::Bold, epaint_default_fonts::UBUNTU_LIGHT);
    });
}

/// One line series.
pub struct Series {
    /// Legend name.
    pub name: String,
    /// Points (x, y).
    pub points: Vec<(f64, f64)>,
    /// Colour.
    pub color: RGBColor,
    /// Draw as points instead of a line.
    pub dots: bool,
}

/// A chart: title, axis labels with units, series.
pub struct Chart {
    /// Title.
    pub title: String,
    /// X label with unit.
    pub x_label: String,
    /// Y label with unit.
    pub y_label: String,
    /// Series.
    pub series: Vec<Series>,
    /// Optional fixed y range.
    pub y_range: Option<(f64, f64)>,
}

fn tmp_path(final_path: &Path) -> PathBuf {
    let name = final_path.file_name().map(|n| n.to_string_lossy().to_string()).unwrap_or_default();
    final_path.with_file_name(format!(".tmp-{}-{}", std::process::id(), name))
}

fn finish(tmp: &Path, path: &Path) -> Result<()> {
    std::fs::rename(tmp, path).map_err(|e| SimError::io(path, "write plot", e))
}

/// Draw a chart to `stem.png` and `stem.svg`; returns both paths.
pub fn line_chart(stem: &Path, chart: &Chart) -> Result<Vec<PathBuf>> {
    render_both(stem, (1100, 600), |r| draw_lines(r, chart), |r| draw_lines(r, chart))
}

/// Render one figure as PNG and SVG through temporary files.
fn render_both(
    stem: &Path,
    size: (u32, u32),
    png_draw: impl Fn(&DrawingArea<BitMapBackend, Shift>) -> std::result::Result<(), Box<dyn std::error::Error>>,
    svg_draw: impl Fn(&DrawingArea<SVGBackend, Shift>) -> std::result::Result<(), Box<dyn std::error::Error>>,
) -> Result<Vec<PathBuf>> {
    register_font();
    let png = stem.with_extension("png");
    let svg = stem.with_extension("svg");
    let (tp, ts) = (tmp_path(&png), tmp_path(&svg));
    let fail = |p: &Path, e: String| {
        let _ = std::fs::remove_file(&tp);
        let _ = std::fs::remove_file(&ts);
        SimError::Arg { name: p.display().to_string(), msg: e }
    };
    {
        let root = BitMapBackend::new(&tp, size).into_drawing_area();
        png_draw(&root).map_err(|e| fail(&png, format!("cannot draw: {e}")))?;
        root.present().map_err(|e| fail(&png, format!("cannot write: {e}")))?;
    }
    {
        let root = SVGBackend::new(&ts, size).into_drawing_area();
        svg_draw(&root).map_err(|e| fail(&svg, format!("cannot draw: {e}")))?;
        root.present().map_err(|e| fail(&svg, format!("cannot write: {e}")))?;
    }
    finish(&tp, &png)?;
    finish(&ts, &svg)?;
    Ok(vec![png, svg])
}

fn bounds(chart: &Chart) -> ((f64, f64), (f64, f64)) {
    let mut xr = (f64::INFINITY, f64::NEG_INFINITY);
    let mut yr = (f64::INFINITY, f64::NEG_INFINITY);
    for s in &chart.series {
        for &(x, y) in &s.points {
            if x.is_finite() && y.is_finite() {
                xr = (xr.0.min(x), xr.1.max(x));
                yr = (yr.0.min(y), yr.1.max(y));
            }
        }
    }
    if !xr.0.is_finite() {
        xr = (0.0, 1.0);
    }
    if !yr.0.is_finite() {
        yr = (0.0, 1.0);
    }
    if xr.1 - xr.0 < 1e-12 {
        xr.1 = xr.0 + 1.0;
    }
    if yr.1 - yr.0 < 1e-12 {
        yr = (yr.0 - 0.5, yr.1 + 0.5);
    }
    let pad = 0.05 * (yr.1 - yr.0);
    (xr, chart.y_range.unwrap_or((yr.0 - pad, yr.1 + pad)))
}

fn draw_lines<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, chart: &Chart) -> std::result::Result<(), Box<dyn std::error::Error>>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE)?;
    let (xr, yr) = bounds(chart);
    let mut c = ChartBuilder::on(root)
        .caption(&chart.title, ("sans-serif", 26))
        .margin(15)
        .x_label_area_size(50)
        .y_label_area_size(80)
        .build_cartesian_2d(xr.0..xr.1, yr.0..yr.1)?;
    c.configure_mesh()
        .x_desc(&chart.x_label)
        .y_desc(&chart.y_label)
        .label_style(("sans-serif", 16))
        .axis_desc_style(("sans-serif", 18))
        .draw()?;
    for s in &chart.series {
        let col = s.color;
        let pts: Vec<(f64, f64)> = s.points.iter().cloned().filter(|p| p.0.is_finite() && p.1.is_finite()).collect();
        if s.dots {
            c.draw_series(pts.iter().map(|&p| Circle::new(p, 2, col.filled())))?
                .label(&s.name)
                .legend(move |(x, y)| Circle::new((x + 10, y), 4, col.filled()));
        } else {
            c.draw_series(LineSeries::new(pts, col.stroke_width(2)))?
                .label(&s.name)
                .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], col.stroke_width(2)));
        }
    }
    c.configure_series_labels()
        .background_style(WHITE.mix(0.85))
        .border_style(BLACK)
        .label_font(("sans-serif", 16))
        .position(SeriesLabelPosition::UpperRight)
        .draw()?;
    Ok(())
}

/// A track drawn over a heat map: legend name, points (x, y) in m, colour.
pub type Track = (String, Vec<(f64, f64)>, RGBColor);

/// A heat map of `values[iy][ix]` over x and y ranges, with an optional track.
pub struct Heatmap {
    /// Title.
    pub title: String,
    /// X label with unit.
    pub x_label: String,
    /// Y label with unit.
    pub y_label: String,
    /// What the colour means, with unit.
    pub value_label: String,
    /// X range.
    pub x: (f64, f64),
    /// Y range.
    pub y: (f64, f64),
    /// Rows of values, bottom row first.
    pub values: Vec<Vec<f64>>,
    /// Tracks to draw on top: legend name, points (x, y), colour.
    pub tracks: Vec<Track>,
    /// Cells to outline (ix, iy), e.g. where an error passes a limit.
    pub marked: Vec<(usize, usize)>,
    /// Labels of the columns and rows when the grid is categorical (cell centres).
    pub cell_labels: Option<(Vec<String>, Vec<String>)>,
    /// Legend name of the marked cells.
    pub marked_name: String,
}

/// Draw a heat map to `stem.png` and `stem.svg`.
pub fn heatmap(stem: &Path, h: &Heatmap) -> Result<Vec<PathBuf>> {
    render_both(stem, (1000, 800), |r| draw_heat(r, h), |r| draw_heat(r, h))
}

fn draw_heat<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, h: &Heatmap) -> std::result::Result<(), Box<dyn std::error::Error>>
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE)?;
    let (main, bar) = root.split_horizontally(860);
    let ny = h.values.len().max(1);
    let nx = h.values.first().map(|r| r.len()).unwrap_or(1).max(1);
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for v in h.values.iter().flatten() {
        if v.is_finite() {
            lo = lo.min(*v);
            hi = hi.max(*v);
        }
    }
    if !lo.is_finite() {
        lo = 0.0;
        hi = 1.0;
    }
    if hi - lo < 1e-12 {
        hi = lo + 1.0;
    }
    let mut c = ChartBuilder::on(&main)
        .caption(&h.title, ("sans-serif", 24))
        .margin(15)
        .x_label_area_size(50)
        .y_label_area_size(70)
        .build_cartesian_2d(h.x.0..h.x.1, h.y.0..h.y.1)?;
    match &h.cell_labels {
        Some((xs, ys)) => {
            let xl = |v: &f64| {
                let i = v.floor();
                if (v - i - 0.5).abs() < 1e-6 {
                    xs.get(i as usize).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            };
            let yl = |v: &f64| {
                let i = v.floor();
                if (v - i - 0.5).abs() < 1e-6 {
                    ys.get(i as usize).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            };
            c.configure_mesh()
                .disable_mesh()
                .x_labels(2 * xs.len() + 1)
                .y_labels(2 * ys.len() + 1)
                .x_label_formatter(&xl)
                .y_label_formatter(&yl)
                .x_desc(&h.x_label)
                .y_desc(&h.y_label)
                .label_style(("sans-serif", 16))
                .axis_desc_style(("sans-serif", 18))
                .draw()?;
        }
        None => {
            c.configure_mesh()
                .disable_mesh()
                .x_desc(&h.x_label)
                .y_desc(&h.y_label)
                .label_style(("sans-serif", 16))
                .axis_desc_style(("sans-serif", 18))
                .draw()?;
        }
    }
    let dx = (h.x.1 - h.x.0) / nx as f64;
    let dy = (h.y.1 - h.y.0) / ny as f64;
    let cmap = |v: f64| -> RGBColor {
        if !v.is_finite() {
            return RGBColor(200, 200, 200);
        }
        ViridisRGB::get_color_normalized(v, lo, hi)
    };
    c.draw_series(h.values.iter().enumerate().flat_map(|(iy, row)| {
        row.iter().enumerate().map(move |(ix, v)| {
            let x0 = h.x.0 + ix as f64 * dx;
            let y0 = h.y.0 + iy as f64 * dy;
            Rectangle::new([(x0, y0), (x0 + dx, y0 + dy)], cmap(*v).filled())
        })
    }))?;
    if !h.marked.is_empty() {
        c.draw_series(h.marked.iter().map(|&(ix, iy)| {
            let x0 = h.x.0 + ix as f64 * dx;
            let y0 = h.y.0 + iy as f64 * dy;
            Rectangle::new([(x0, y0), (x0 + dx, y0 + dy)], RED.stroke_width(2))
        }))?
        .label(&h.marked_name)
        .legend(|(x, y)| Rectangle::new([(x, y - 5), (x + 15, y + 5)], RED.stroke_width(2)));
    }
    for (name, pts, col) in &h.tracks {
        let col = *col;
        c.draw_series(LineSeries::new(pts.clone(), col.stroke_width(3)))?
            .label(name)
            .legend(move |(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], col.stroke_width(3)));
    }
    if !h.marked.is_empty() || !h.tracks.is_empty() {
        c.configure_series_labels().background_style(WHITE.mix(0.85)).border_style(BLACK).label_font(("sans-serif", 16)).draw()?;
    }
    // Colour bar.
    let mut cb = ChartBuilder::on(&bar)
        .margin_top(60)
        .margin_bottom(65)
        .margin_right(10)
        .y_label_area_size(60)
        .caption(&h.value_label, ("sans-serif", 14))
        .build_cartesian_2d(0.0..1.0, lo..hi)?;
    cb.configure_mesh().disable_mesh().disable_x_axis().label_style(("sans-serif", 14)).draw()?;
    let steps = 100;
    cb.draw_series((0..steps).map(|k| {
        let a = lo + (hi - lo) * k as f64 / steps as f64;
        let b = lo + (hi - lo) * (k + 1) as f64 / steps as f64;
        Rectangle::new([(0.0, a), (1.0, b)], cmap(0.5 * (a + b)).filled())
    }))?;
    Ok(())
}

//! Plots as PNG and SVG (plotters), with an embedded font so no system fonts
//! are needed. Each file is drawn into a temporary file beside the target
//! (`tempfile`) and persisted into place, so a failed run never leaves a
//! half-written plot.
//!
//! A [`Figure`] is a column of [`Panel`]s sharing one legend, drawn to the
//! right of the data so it never covers it, and a caption (the caution) under
//! them. Each panel has one quantity per axis (a second quantity goes on the
//! right-hand axis), points with ±σ bars where the series carries σ, dashed
//! vertical marks (the point over the sonde, the peak, the nulls), and points
//! beyond a fixed range drawn as triangles on the edge they left by.

use crate::error::{Result, SimError};
use crate::output::{persist, temp_beside};
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

/// How a series is drawn.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Style {
    /// A line through the points.
    Line,
    /// A dashed line through the points.
    Dashed,
    /// Dots.
    Dots,
    /// Dots with ±σ bars (σ from [`Series::sigma`]).
    Bars,
}

/// One series.
#[derive(Clone, Debug)]
pub struct Series {
    /// Legend name.
    pub name: String,
    /// Points (x, y).
    pub points: Vec<(f64, f64)>,
    /// One-sigma of each point (for [`Style::Bars`]; empty otherwise).
    pub sigma: Vec<f64>,
    /// Colour.
    pub color: RGBColor,
    /// How it is drawn.
    pub style: Style,
    /// On the right-hand axis.
    pub secondary: bool,
}

impl Series {
    /// A line on the left axis.
    pub fn line(name: impl Into<String>, points: Vec<(f64, f64)>, color: RGBColor) -> Self {
        Series { name: name.into(), points, sigma: Vec::new(), color, style: Style::Line, secondary: false }
    }

    /// Dots on the left axis.
    pub fn dots(name: impl Into<String>, points: Vec<(f64, f64)>, color: RGBColor) -> Self {
        Series { style: Style::Dots, ..Series::line(name, points, color) }
    }

    /// Dots with ±σ bars on the left axis.
    pub fn bars(name: impl Into<String>, points: Vec<(f64, f64, f64)>, color: RGBColor) -> Self {
        Series {
            name: name.into(),
            sigma: points.iter().map(|p| p.2).collect(),
            points: points.into_iter().map(|p| (p.0, p.1)).collect(),
            color,
            style: Style::Bars,
            secondary: false,
        }
    }
}

/// A dashed vertical mark across a panel.
#[derive(Clone, Debug)]
pub struct VLine {
    /// Legend name.
    pub name: String,
    /// Where, in x units.
    pub x: f64,
    /// Colour.
    pub color: RGBColor,
    /// Dashed (else a thin solid line).
    pub dashed: bool,
}

/// One chart: a title, one quantity per axis, series and marks.
#[derive(Clone, Debug)]
pub struct Panel {
    /// Title above the panel.
    pub title: String,
    /// X label with unit.
    pub x_label: String,
    /// Left-axis label with unit.
    pub y_label: String,
    /// Right-axis label with unit (for the series marked `secondary`).
    pub y2_label: Option<String>,
    /// Series.
    pub series: Vec<Series>,
    /// Fixed left-axis range (points beyond it are marked on the edge).
    pub y_range: Option<(f64, f64)>,
    /// Fixed right-axis range.
    pub y2_range: Option<(f64, f64)>,
    /// Vertical marks.
    pub vlines: Vec<VLine>,
}

impl Panel {
    /// A panel with these labels and series, automatic ranges, no marks.
    pub fn new(title: impl Into<String>, x_label: impl Into<String>, y_label: impl Into<String>, series: Vec<Series>) -> Self {
        Panel {
            title: title.into(),
            x_label: x_label.into(),
            y_label: y_label.into(),
            y2_label: None,
            series,
            y_range: None,
            y2_range: None,
            vlines: Vec::new(),
        }
    }
}

/// A figure: panels in a column, one legend, a caption.
#[derive(Clone, Debug)]
pub struct Figure {
    /// Title at the top.
    pub title: String,
    /// The panels, top to bottom.
    pub panels: Vec<Panel>,
    /// Text under the panels (the caution).
    pub caption: Option<String>,
}

/// Draw a figure to `stem.png` and `stem.svg`; returns both paths.
pub fn figure(stem: &Path, fig: &Figure) -> Result<Vec<PathBuf>> {
    let h = 60 + 320 * fig.panels.len().max(1) as u32 + if fig.caption.is_some() { 50 } else { 10 };
    render_both(stem, (1280, h), |r| draw_figure(r, fig), |r| draw_figure(r, fig))
}

type DrawResult = std::result::Result<(), Box<dyn std::error::Error>>;

/// Render one figure as PNG and SVG through temporary files.
fn render_both(
    stem: &Path,
    size: (u32, u32),
    png_draw: impl Fn(&DrawingArea<BitMapBackend, Shift>) -> DrawResult,
    svg_draw: impl Fn(&DrawingArea<SVGBackend, Shift>) -> DrawResult,
) -> Result<Vec<PathBuf>> {
    register_font();
    let png = stem.with_extension("png");
    let svg = stem.with_extension("svg");
    let (tp, ts) = (temp_beside(&png)?, temp_beside(&svg)?);
    let fail = |p: &Path, e: String| SimError::Arg { name: p.display().to_string(), msg: e };
    {
        let root = BitMapBackend::new(tp.path(), size).into_drawing_area();
        png_draw(&root).map_err(|e| fail(&png, format!("cannot draw: {e}")))?;
        root.present().map_err(|e| fail(&png, format!("cannot write: {e}")))?;
    }
    {
        let root = SVGBackend::new(ts.path(), size).into_drawing_area();
        svg_draw(&root).map_err(|e| fail(&svg, format!("cannot draw: {e}")))?;
        root.present().map_err(|e| fail(&svg, format!("cannot write: {e}")))?;
    }
    persist(tp, &png)?;
    persist(ts, &svg)?;
    Ok(vec![png, svg])
}

fn range_of<'a>(points: impl Iterator<Item = &'a (f64, f64)>) -> (f64, f64) {
    let mut r = (f64::INFINITY, f64::NEG_INFINITY);
    for &(_, y) in points {
        if y.is_finite() {
            r = (r.0.min(y), r.1.max(y));
        }
    }
    pad(r)
}

fn pad(r: (f64, f64)) -> (f64, f64) {
    let mut r = if r.0.is_finite() { r } else { (0.0, 1.0) };
    if r.1 - r.0 < 1e-12 {
        r = (r.0 - 0.5, r.1 + 0.5);
    }
    let p = 0.05 * (r.1 - r.0);
    (r.0 - p, r.1 + p)
}

fn x_range(p: &Panel) -> (f64, f64) {
    let mut r = (f64::INFINITY, f64::NEG_INFINITY);
    for x in p.series.iter().flat_map(|s| s.points.iter().map(|q| q.0)).chain(p.vlines.iter().map(|v| v.x)) {
        if x.is_finite() {
            r = (r.0.min(x), r.1.max(x));
        }
    }
    if !r.0.is_finite() {
        return (0.0, 1.0);
    }
    if r.1 - r.0 < 1e-12 {
        return (r.0 - 0.5, r.1 + 0.5);
    }
    let p = 0.01 * (r.1 - r.0);
    (r.0 - p, r.1 + p)
}

/// What the shared legend lists.
#[derive(Clone, Debug, PartialEq)]
enum Key {
    Series(Style, RGBColor),
    Mark(RGBColor),
    OffScale,
}

fn split_caption(text: &str, width_chars: usize) -> Vec<String> {
    let mut lines = vec![String::new()];
    for w in text.split_whitespace() {
        let last = lines.last_mut().map(|l| l.len()).unwrap_or(0);
        if last + w.len() + 1 > width_chars && last > 0 {
            lines.push(String::new());
        }
        if let Some(l) = lines.last_mut() {
            if !l.is_empty() {
                l.push(' ');
            }
            l.push_str(w);
        }
    }
    lines
}

/// Draw the caption at the bottom of `area`.
fn draw_caption<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, caption: &str) -> DrawResult
where
    DB::ErrorType: 'static,
{
    let (w, _) = area.dim_in_pixel();
    let style = ("sans-serif", 15).into_font().color(&RGBColor(60, 60, 60));
    for (i, line) in split_caption(caption, (w as usize / 8).max(40)).iter().enumerate() {
        area.draw(&Text::new(line.clone(), (15, 5 + 18 * i as i32), style.clone()))?;
    }
    Ok(())
}

fn draw_legend<DB: DrawingBackend>(area: &DrawingArea<DB, Shift>, keys: &[(String, Key)]) -> DrawResult
where
    DB::ErrorType: 'static,
{
    let font = ("sans-serif", 15).into_font();
    let mut y = 10;
    for (name, key) in keys {
        let (x0, yc) = (8, y + 9);
        match key {
            Key::Series(Style::Line, c) => area.draw(&PathElement::new(vec![(x0, yc), (x0 + 26, yc)], c.stroke_width(2)))?,
            Key::Series(Style::Dashed, c) | Key::Mark(c) => {
                area.draw(&PathElement::new(vec![(x0, yc), (x0 + 9, yc)], c.stroke_width(2)))?;
                area.draw(&PathElement::new(vec![(x0 + 16, yc), (x0 + 26, yc)], c.stroke_width(2)))?
            }
            Key::Series(Style::Dots, c) => area.draw(&Circle::new((x0 + 13, yc), 4, c.filled()))?,
            Key::Series(Style::Bars, c) => {
                area.draw(&Circle::new((x0 + 13, yc), 4, c.filled()))?;
                area.draw(&PathElement::new(vec![(x0 + 13, yc - 9), (x0 + 13, yc + 9)], c.stroke_width(1)))?
            }
            Key::OffScale => area.draw(&TriangleMarker::new((x0 + 13, yc), 6, BLACK.filled()))?,
        }
        // Long names wrap onto a second line.
        let lines = split_caption(name, 30);
        for (k, l) in lines.iter().enumerate() {
            area.draw(&Text::new(l.clone(), (x0 + 34, y + 18 * k as i32), font.clone()))?;
        }
        y += 18 * lines.len() as i32 + 8;
    }
    Ok(())
}

fn draw_figure<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, fig: &Figure) -> DrawResult
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE)?;
    let (w, h) = root.dim_in_pixel();
    let root = root.titled(&fig.title, ("sans-serif", 26))?;
    let cap_h = if fig.caption.is_some() { 50 } else { 0 };
    let (body, cap) = root.split_vertically(h as i32 - 40 - cap_h);
    if let Some(c) = &fig.caption {
        draw_caption(&cap, c)?;
    }
    let (plots, legend) = body.split_horizontally(w as i32 - 280);
    let mut keys: Vec<(String, Key)> = Vec::new();
    let mut add = |name: &str, k: Key| {
        if !keys.iter().any(|(n, _)| n == name) {
            keys.push((name.to_string(), k));
        }
    };
    let areas = plots.split_evenly((fig.panels.len().max(1), 1));
    for (panel, area) in fig.panels.iter().zip(areas.iter()) {
        let off = draw_panel(area, panel)?;
        for s in &panel.series {
            add(&s.name, Key::Series(s.style, s.color));
        }
        for v in &panel.vlines {
            add(&v.name, if v.dashed { Key::Mark(v.color) } else { Key::Series(Style::Line, v.color) });
        }
        if let Some(text) = off {
            add(&text, Key::OffScale);
        }
    }
    draw_legend(&legend, &keys)?;
    Ok(())
}

/// A point with its index in its series.
type Indexed = (usize, (f64, f64));

/// Draw one panel; returns the legend text of its off-scale points, if any.
fn draw_panel<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    p: &Panel,
) -> std::result::Result<Option<String>, Box<dyn std::error::Error>>
where
    DB::ErrorType: 'static,
{
    let xr = x_range(p);
    let left: Vec<&Series> = p.series.iter().filter(|s| !s.secondary).collect();
    let right: Vec<&Series> = p.series.iter().filter(|s| s.secondary).collect();
    let yr = p.y_range.unwrap_or_else(|| range_of(left.iter().flat_map(|s| s.points.iter())));
    let y2r = p.y2_range.unwrap_or_else(|| range_of(right.iter().flat_map(|s| s.points.iter())));
    let mut c = ChartBuilder::on(area)
        .caption(&p.title, ("sans-serif", 19))
        .margin(8)
        .margin_right(12)
        .x_label_area_size(42)
        .y_label_area_size(72)
        .right_y_label_area_size(if p.y2_label.is_some() { 64 } else { 0 })
        .build_cartesian_2d(xr.0..xr.1, yr.0..yr.1)?
        .set_secondary_coord(xr.0..xr.1, y2r.0..y2r.1);
    c.configure_mesh()
        .x_desc(&p.x_label)
        .y_desc(&p.y_label)
        .label_style(("sans-serif", 15))
        .axis_desc_style(("sans-serif", 16))
        .light_line_style(RGBColor(235, 235, 235))
        .draw()?;
    if let Some(l) = &p.y2_label {
        c.configure_secondary_axes().y_desc(l).label_style(("sans-serif", 15)).axis_desc_style(("sans-serif", 16)).draw()?;
    }
    for v in &p.vlines {
        if v.dashed {
            c.draw_series(DashedLineSeries::new(vec![(v.x, yr.0), (v.x, yr.1)], 8, 6, v.color.stroke_width(2)))?;
        } else {
            c.draw_series(LineSeries::new(vec![(v.x, yr.0), (v.x, yr.1)], v.color.stroke_width(2)))?;
        }
    }
    let mut off: Vec<f64> = Vec::new();
    let inside = |y: f64| y >= yr.0 && y <= yr.1;
    for s in &p.series {
        let col = s.color;
        let pts: Vec<(usize, (f64, f64))> =
            s.points.iter().cloned().enumerate().filter(|(_, q)| q.0.is_finite() && q.1.is_finite()).collect();
        if s.secondary {
            let line: Vec<(f64, f64)> = pts.iter().map(|q| q.1).collect();
            match s.style {
                Style::Dots | Style::Bars => {
                    c.draw_secondary_series(line.iter().map(|&q| Circle::new(q, 2, col.filled())))?;
                }
                Style::Line | Style::Dashed => {
                    c.draw_secondary_series(LineSeries::new(line, col.stroke_width(2)))?;
                }
            }
            continue;
        }
        // Points beyond a fixed range: a triangle on the edge they left by.
        let (shown, beyond): (Vec<&Indexed>, Vec<&Indexed>) = pts.iter().partition(|q| inside(q.1 .1) || p.y_range.is_none());
        off.extend(beyond.iter().map(|q| q.1 .1));
        c.draw_series(beyond.iter().map(|q| {
            let top = q.1 .1 > yr.1;
            let y = if top { yr.1 } else { yr.0 };
            TriangleMarker::new((q.1 .0, y), if top { 6 } else { -6 }, col.filled())
        }))?;
        match s.style {
            Style::Line => {
                c.draw_series(LineSeries::new(pts.iter().map(|q| q.1), col.stroke_width(2)))?;
            }
            Style::Dashed => {
                c.draw_series(DashedLineSeries::new(pts.iter().map(|q| q.1), 8, 5, col.stroke_width(2)))?;
            }
            Style::Dots => {
                c.draw_series(shown.iter().map(|q| Circle::new(q.1, 2, col.filled())))?;
            }
            Style::Bars => {
                let bar = col.mix(0.45).stroke_width(1);
                c.draw_series(shown.iter().filter_map(|q| {
                    let sd = s.sigma.get(q.0).copied().filter(|v| v.is_finite())?;
                    let (x, y) = q.1;
                    Some(PathElement::new(vec![(x, (y - sd).max(yr.0)), (x, (y + sd).min(yr.1))], bar))
                }))?;
                c.draw_series(shown.iter().map(|q| Circle::new(q.1, 3, col.filled())))?;
            }
        }
    }
    Ok((!off.is_empty()).then(|| {
        let hi = off.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
        let lo = off.iter().cloned().fold(f64::INFINITY, f64::min);
        let what = if hi > yr.1 && lo < yr.0 {
            format!("off scale, on the edge ({} points, {lo:.3} to {hi:.3})", off.len())
        } else if hi > yr.1 {
            format!("off the top edge ({} points, up to {hi:.2})", off.len())
        } else {
            format!("off the bottom edge ({} points, down to {lo:.2})", off.len())
        };
        what
    }))
}

/// A track drawn over a heat map: legend name, points (x, y) in m, colour.
pub type Track = (String, Vec<(f64, f64)>, RGBColor);

/// Points marked on a heat map: legend name, points (x, y), colour, drawn as crosses.
pub type Marks = (String, Vec<(f64, f64)>, RGBColor);

/// A heat map of `values[iy][ix]` over x and y ranges, with tracks and marks.
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
    /// Points to mark on top (crosses).
    pub marks: Vec<Marks>,
    /// Cells to outline (ix, iy), e.g. where an error passes a limit.
    pub marked: Vec<(usize, usize)>,
    /// Labels of the columns and rows when the grid is categorical (cell centres).
    pub cell_labels: Option<(Vec<String>, Vec<String>)>,
    /// Legend name of the marked cells.
    pub marked_name: String,
    /// Text under the map (the caution).
    pub caption: Option<String>,
}

/// Draw a heat map to `stem.png` and `stem.svg`.
pub fn heatmap(stem: &Path, h: &Heatmap) -> Result<Vec<PathBuf>> {
    render_both(stem, (1280, 860), |r| draw_heat(r, h), |r| draw_heat(r, h))
}

fn draw_heat<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, h: &Heatmap) -> DrawResult
where
    DB::ErrorType: 'static,
{
    root.fill(&WHITE)?;
    let (_, height) = root.dim_in_pixel();
    let (body, cap) = root.split_vertically(height as i32 - if h.caption.is_some() { 50 } else { 0 });
    if let Some(c) = &h.caption {
        draw_caption(&cap, c)?;
    }
    let (main, rest) = body.split_horizontally(860);
    let (bar, legend) = rest.split_horizontally(120);
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
    // The title, one line per '\n'.
    let lines: Vec<&str> = h.title.lines().collect();
    for (i, l) in lines.iter().enumerate() {
        main.draw(&Text::new(l.to_string(), (20, 8 + 26 * i as i32), ("sans-serif", 22).into_font()))?;
    }
    let mut c = ChartBuilder::on(&main)
        .margin(15)
        .margin_top(20 + 26 * lines.len() as i32)
        .x_label_area_size(50)
        .y_label_area_size(70)
        .build_cartesian_2d(h.x.0..h.x.1, h.y.0..h.y.1)?;
    match &h.cell_labels {
        Some((xs, ys)) => {
            let pick = |labels: &[String], v: &f64| {
                let i = v.floor();
                if (v - i - 0.5).abs() < 1e-6 {
                    labels.get(i as usize).cloned().unwrap_or_default()
                } else {
                    String::new()
                }
            };
            let xl = |v: &f64| pick(xs, v);
            let yl = |v: &f64| pick(ys, v);
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
    let mut keys: Vec<(String, Key)> = Vec::new();
    if !h.marked.is_empty() {
        c.draw_series(h.marked.iter().map(|&(ix, iy)| {
            let x0 = h.x.0 + ix as f64 * dx;
            let y0 = h.y.0 + iy as f64 * dy;
            Rectangle::new([(x0, y0), (x0 + dx, y0 + dy)], RED.stroke_width(2))
        }))?;
        keys.push((h.marked_name.clone(), Key::Mark(RED)));
    }
    for (name, pts, col) in &h.tracks {
        c.draw_series(LineSeries::new(pts.clone(), col.stroke_width(3)))?;
        // Unnamed tracks share the key of the first of their kind.
        if !name.is_empty() {
            keys.push((name.clone(), Key::Series(Style::Line, *col)));
        }
    }
    for (name, pts, col) in &h.marks {
        let col = *col;
        c.draw_series(pts.iter().map(|&p| Cross::new(p, 7, col.stroke_width(3))))?;
        c.draw_series(pts.iter().map(|&p| Circle::new(p, 9, col.stroke_width(1))))?;
        keys.push((name.clone(), Key::Series(Style::Dots, col)));
    }
    // The legend beside the map, on a grey ground so white tracks show.
    if !keys.is_empty() {
        legend.fill(&RGBColor(150, 150, 150))?;
        draw_legend(&legend.margin(40, 0, 0, 0), &keys)?;
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

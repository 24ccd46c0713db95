//! The run's figures: gridded maps (column density over local time and latitude, reservoir
//! over longitude and latitude, signed differences between runs, sweep maps over two
//! parameters) and line plots (profiles with marked points, reference curves, ledgers over
//! time). The host fills a plain description; the layout (left-aligned title, key panel on the
//! right, colour bar with its unit) is decided here. Each figure is drawn once for any plotters
//! backend and written as PNG or SVG by the file's extension ([`crate::canvas`]).

use std::path::Path;

use crate::ProductError;
use crate::canvas::{self, DrawError, DrawResult, Figure};
use crate::colour::{colour, diverging};
use crate::font::{FAMILY, ensure_registered};
use crate::text::{Align, Baseline, Label, Weight, text_width};
use crate::ticks::{Axis, format_number};
use plotters::coord::Shift;
use plotters::coord::ranged1d::{DefaultFormatting, KeyPointHint, Ranged};
use plotters::element::DashedPathElement;
use plotters::prelude::*;

/// Size of a map figure, in pixels (width, height).
pub const MAP_SIZE: (u32, u32) = (1040, 600);
/// Size of a line figure, in pixels (width, height).
pub const LINE_SIZE: (u32, u32) = (1040, 600);

/// How a map's values become colours.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum ColourScale {
    /// The sequential scale, linear in the value.
    Linear,
    /// The sequential scale, linear in log10 of the value (non-positive cells are drawn grey).
    Log,
    /// The diverging scale for signed values: limits ±max|value|, zero at the neutral middle.
    Diverging,
}

impl ColourScale {
    /// The colour coordinate of value `v` (log10 on a log scale), None where there is none.
    fn coordinate(self, v: f64) -> Option<f64> {
        match self {
            Self::Log if v > 0.0 && v.is_finite() => Some(v.log10()),
            Self::Linear | Self::Diverging if v.is_finite() => Some(v),
            _ => None,
        }
    }

    /// The colour at fraction `t` of the colour bar.
    fn colour(self, t: f64) -> (u8, u8, u8) {
        match self {
            Self::Diverging => diverging(t),
            Self::Linear | Self::Log => colour(t),
        }
    }

    /// The colour bar's axis for colour coordinates `coords`.
    fn bar(self, coords: impl Iterator<Item = f64>) -> Axis {
        if self == Self::Diverging {
            let m = coords.filter(|c| c.is_finite()).fold(0.0f64, |m, c| m.max(c.abs()));
            let m = if m > 0.0 { m } else { 1.0 };
            return Axis::linear(-m, m, None, 6);
        }
        let (mut lo, mut hi) = finite_extent(coords).unwrap_or((0.0, 1.0));
        if hi <= lo {
            let pad = if self == Self::Log { 0.5 } else { lo.abs().max(1.0) * 0.5 };
            (lo, hi) = (lo - pad, hi + pad);
        }
        if self == Self::Log { Axis::log10(lo, hi, 7) } else { Axis::linear(lo, hi, None, 6) }
    }

    /// What the grey cells stand for.
    fn no_data_text(self) -> &'static str {
        if self == Self::Log { "no data or ≤ 0" } else { "no data" }
    }
}

/// Cells of a map singled out by a mark (a dot in the cell), with the key entry saying what a
/// mark means; e.g. the cells of a difference map where the difference is within the noise.
#[derive(Debug, Clone, PartialEq)]
pub struct CellMarks {
    /// Which cells are marked, row-major `[y][x]` like the values; empty when no cell could be
    /// judged (the key then shows `label` alone, without a marked swatch).
    pub mask: Vec<bool>,
    /// Key text: what a marked cell means, or why no cell is marked.
    pub label: String,
}

/// A gridded field drawn as coloured cells, with a colour bar.
#[derive(Debug, Clone, PartialEq)]
pub struct MapPlot {
    /// Figure title.
    pub title: String,
    /// Horizontal axis label, with its unit, e.g. "local time (h)".
    pub x_label: String,
    /// Vertical axis label, with its unit, e.g. "latitude (°)".
    pub y_label: String,
    /// Cell edges along x, strictly increasing (nx + 1 values; positive on a log axis).
    pub x_edges: Vec<f64>,
    /// Cell edges along y, strictly increasing (ny + 1 values; positive on a log axis).
    pub y_edges: Vec<f64>,
    /// Cell values, row-major `[y][x]` (ny × nx); NaN cells are drawn grey.
    pub values: Vec<f64>,
    /// Colour-bar label, with the unit, e.g. "Na column (m⁻²)".
    pub colour_label: String,
    /// How values become colours.
    pub scale: ColourScale,
    /// Cells to mark, with their key entry.
    pub marks: Option<CellMarks>,
    /// Logarithmic x axis (cells and overlays placed by log10 of x).
    pub x_log: bool,
    /// Logarithmic y axis.
    pub y_log: bool,
    /// Tick positions along x, in data units (default: round values, or decades on a log axis).
    pub x_ticks: Option<Vec<f64>>,
    /// Tick positions along y, in data units.
    pub y_ticks: Option<Vec<f64>>,
    /// The text of each of `x_ticks` (default: the numbers).
    pub x_tick_labels: Option<Vec<String>>,
    /// The text of each of `y_ticks` (default: the numbers).
    pub y_tick_labels: Option<Vec<String>>,
    /// Lines drawn over the cells (terminators, a limb, a scale bar), in data coordinates.
    pub overlays: Vec<Overlay>,
}

/// A labelled line drawn over a map's cells, in the map's data coordinates.
#[derive(Debug, Clone, PartialEq)]
pub struct Overlay {
    /// Text written next to the line's last point (empty for none).
    pub label: String,
    /// The points of the line, (x, y) in data units; one point draws a small cross.
    pub points: Vec<(f64, f64)>,
    /// [`LineStyle::Solid`], [`LineStyle::Dashed`] or [`LineStyle::Dotted`].
    pub style: LineStyle,
}

/// How a [`Line`] is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LineStyle {
    /// A continuous line.
    Solid,
    /// A dashed line.
    Dashed,
    /// A line of dots.
    Dotted,
    /// Unjoined points (the style for measured or sampled values with error bars).
    Points,
}

/// One data series of a [`LinePlot`].
#[derive(Debug, Clone, PartialEq)]
pub struct Line {
    /// Legend text.
    pub label: String,
    /// Abscissae (same unit as the plot's x axis); non-finite points break the line.
    pub x: Vec<f64>,
    /// Ordinates (same unit as the plot's y axis).
    pub y: Vec<f64>,
    /// Half-length of an error bar at each point (same unit as `y`), if any.
    pub y_err: Option<Vec<f64>>,
    /// Drawing style.
    pub style: LineStyle,
}

/// A labelled vertical line at `x` (e.g. "subsolar", "dawn terminator").
#[derive(Debug, Clone, PartialEq)]
pub struct Marker {
    /// Position, in the unit of the plot's x axis.
    pub x: f64,
    /// Text written above the plot at this position.
    pub label: String,
}

/// Several series against one x axis, with a legend and optional markers.
#[derive(Debug, Clone, PartialEq)]
pub struct LinePlot {
    /// Figure title.
    pub title: String,
    /// Horizontal axis label, with its unit.
    pub x_label: String,
    /// Vertical axis label, with its unit.
    pub y_label: String,
    /// The series, drawn in order and listed in the key in order.
    pub lines: Vec<Line>,
    /// Labelled vertical lines.
    pub markers: Vec<Marker>,
    /// Logarithmic x axis (only positive abscissae are shown).
    pub log_x: bool,
    /// Logarithmic y axis (only positive values are shown).
    pub log_y: bool,
    /// Fixed x range, in data units (default: the extent of the data).
    pub x_range: Option<(f64, f64)>,
    /// Tick positions along x, in data units (default: round values, or decades on a log axis).
    pub x_ticks: Option<Vec<f64>>,
}

// ---- Layout (pixels) and style: this crate's own. ----

/// Left edge and baseline area of the title.
const TITLE_POS: (f64, f64) = (28.0, 18.0);
/// Title font size.
const TITLE_SIZE: f64 = 22.0;
/// Tick-label font size.
const TICK_SIZE: f64 = 16.0;
/// Axis-label font size.
const AXIS_LABEL_SIZE: f64 = 17.0;
/// Key and marker text size.
const KEY_SIZE: f64 = 15.0;
/// Line spacing of wrapped key text.
const KEY_LINE: i32 = 19;
/// Space above the chart taken by the title.
const TITLE_BAND: u32 = 58;
/// Height of one row of marker labels above the chart.
const MARKER_ROW: u32 = 22;
/// Width of the area left of the y axis (tick labels and axis label).
const Y_LABEL_AREA: u32 = 96;
/// Height of the area under the x axis (tick labels and axis label).
const X_LABEL_AREA: u32 = 58;
/// Gap left of the y-label area and right of the chart.
const SIDE_GAP: u32 = 14;
/// Width of the panel right of a map (colour bar).
const BAR_PANEL: u32 = 186;
/// Width of the colour bar itself.
const BAR_WIDTH: i32 = 24;
/// Width of the panel right of a line plot (key).
const KEY_PANEL: u32 = 250;
/// Length of a line sample in the key.
const KEY_SAMPLE: i32 = 34;

const INK: RGBColor = RGBColor(34, 34, 42);
const INK_RGB: (u8, u8, u8) = (34, 34, 42);
const SOFT_INK: RGBColor = RGBColor(96, 96, 108);
const SOFT_INK_RGB: (u8, u8, u8) = (96, 96, 108);
const GRID_MAJOR: RGBColor = RGBColor(218, 218, 226);
const GRID_MINOR: RGBColor = RGBColor(238, 238, 243);
/// Cells without a value.
const NO_DATA: RGBColor = RGBColor(150, 150, 150);
/// Line colours, in order of the series; chosen for this crate, distinct on white.
const SERIES: [RGBColor; 6] = [
    RGBColor(36, 62, 150),
    RGBColor(196, 104, 10),
    RGBColor(18, 128, 112),
    RGBColor(168, 36, 78),
    RGBColor(96, 112, 28),
    RGBColor(112, 76, 160),
];

/// A chart whose two axes are this crate's [`Axis`].
type Chart<'a, DB> = ChartContext<'a, DB, Cartesian2d<Axis, Axis>>;
/// The root drawing area of a figure.
type Root<DB> = DrawingArea<DB, Shift>;

/// The value `v` in the coordinate of an axis: log10 on a log axis (NaN where not positive).
fn axis_coord(log: bool, v: f64) -> f64 {
    match log {
        true if v > 0.0 => v.log10(),
        true => f64::NAN,
        false => v,
    }
}

/// An axis from data value `lo` to `hi`: linear or log10, with `ticks` (data units) if given,
/// written as `labels` if given (else as numbers), or about `target` round ones.
fn data_axis(
    (lo, hi): (f64, f64),
    log: bool,
    ticks: Option<&[f64]>,
    labels: Option<&[String]>,
    target: usize,
) -> Axis {
    let f = |v: f64| axis_coord(log, v);
    let at = |t: &[f64]| t.iter().map(|&v| f(v)).collect::<Vec<f64>>();
    match (ticks, labels, log) {
        (Some(t), Some(l), _) => Axis::labelled(f(lo), f(hi), &at(t), l),
        (Some(t), None, true) => {
            let l: Vec<String> = t.iter().map(|&v| format_number(v, v)).collect();
            Axis::labelled(f(lo), f(hi), &at(t), &l)
        }
        (None, _, true) => Axis::log10(f(lo), f(hi), target),
        (t, _, false) => Axis::linear(lo, hi, t, target),
    }
}

/// Checks the cell edges and tick labels of a map; the message of what is wrong.
fn check_grid(plot: &MapPlot) -> Result<(), String> {
    for (axis, e, log) in [("x", &plot.x_edges, plot.x_log), ("y", &plot.y_edges, plot.y_log)] {
        if e.iter().any(|v| !v.is_finite()) || e.windows(2).any(|w| w[1] <= w[0]) {
            return Err(format!("{axis} edges must be finite and strictly increasing"));
        }
        if log && e.first().is_some_and(|&v| v <= 0.0) {
            return Err(format!("{axis} edges must be positive on a log axis"));
        }
    }
    let ticks =
        [("x", &plot.x_ticks, &plot.x_tick_labels), ("y", &plot.y_ticks, &plot.y_tick_labels)];
    for (axis, t, l) in ticks {
        match (t, l) {
            (None, Some(_)) => return Err(format!("{axis} tick labels need {axis} ticks")),
            (Some(t), Some(l)) if t.len() != l.len() => {
                return Err(format!("{} {axis} ticks but {} labels", t.len(), l.len()));
            }
            _ => {}
        }
    }
    Ok(())
}

/// Draws `plot` as a figure of [`MAP_SIZE`] at `path` (`.png` or `.svg`).
pub fn draw_map(plot: &MapPlot, path: &Path) -> Result<(), ProductError> {
    let nx = plot.x_edges.len().saturating_sub(1);
    let ny = plot.y_edges.len().saturating_sub(1);
    let bad = |m: String| Err(ProductError::file(path, format!("map `{}`: {m}", plot.title)));
    if nx == 0 || ny == 0 {
        return bad("needs at least two edges along each axis".into());
    }
    if plot.values.len() != nx * ny {
        return bad(format!("{} values for a {ny}×{nx} grid", plot.values.len()));
    }
    if let Some(m) = &plot.marks
        && !m.mask.is_empty()
        && m.mask.len() != nx * ny
    {
        return bad(format!("{} marks for a {ny}×{nx} grid", m.mask.len()));
    }
    if let Err(m) = check_grid(plot) {
        return bad(m);
    }
    canvas::Format::of(path)?;
    ensure_registered().map_err(|e| e.in_file(path))?;

    // Colour coordinate of each cell (log10 on a log scale), None where there is no value.
    let coord: Vec<Option<f64>> = plot.values.iter().map(|&v| plot.scale.coordinate(v)).collect();
    let bar = plot.scale.bar(coord.iter().flatten().copied());
    let xf: Vec<f64> = plot.x_edges.iter().map(|&v| axis_coord(plot.x_log, v)).collect();
    let yf: Vec<f64> = plot.y_edges.iter().map(|&v| axis_coord(plot.y_log, v)).collect();
    let x_extent = (plot.x_edges[0], plot.x_edges[nx]);
    let y_extent = (plot.y_edges[0], plot.y_edges[ny]);
    let xa =
        data_axis(x_extent, plot.x_log, plot.x_ticks.as_deref(), plot.x_tick_labels.as_deref(), 8);
    let ya =
        data_axis(y_extent, plot.y_log, plot.y_ticks.as_deref(), plot.y_tick_labels.as_deref(), 6);
    let overlays = plot
        .overlays
        .iter()
        .map(|o| Overlay {
            points: o
                .points
                .iter()
                .map(|&(x, y)| (axis_coord(plot.x_log, x), axis_coord(plot.y_log, y)))
                .collect(),
            ..o.clone()
        })
        .collect();
    let figure = MapFigure { plot, coord, bar, xa, ya, xf, yf, overlays };
    canvas::render(path, MAP_SIZE, &figure)
}

/// A [`MapPlot`] made ready to draw: colour coordinates, axes, and cell edges and overlays in
/// axis coordinates.
struct MapFigure<'p> {
    plot: &'p MapPlot,
    coord: Vec<Option<f64>>,
    bar: Axis,
    xa: Axis,
    ya: Axis,
    xf: Vec<f64>,
    yf: Vec<f64>,
    overlays: Vec<Overlay>,
}

impl Figure for MapFigure<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &Root<DB>, labels: &mut Vec<Label>) -> DrawResult<DB> {
        let Self { plot, coord, bar, xa, ya, xf, yf, overlays } = self;
        let (nx, ny) = (xf.len() - 1, yf.len() - 1);
        let scale = plot.scale;
        let (w, _) = MAP_SIZE;
        labels.push(title(&plot.title));
        let area = root.margin(TITLE_BAND, 10, SIDE_GAP, 0);
        let (chart_area, _) = area.split_horizontally(w - BAR_PANEL);
        let mut chart = frame(&chart_area, xa, ya, false)?;
        chart.draw_series((0..ny).flat_map(|j| (0..nx).map(move |i| (i, j))).map(|(i, j)| {
            let fill = match coord[j * nx + i] {
                Some(c) => rgb(scale.colour(bar.fraction(c))),
                None => NO_DATA,
            };
            Rectangle::new([(xf[i], yf[j]), (xf[i + 1], yf[j + 1])], fill.filled())
        }))?;
        let marks = plot.marks.as_ref();
        if let Some(m) = marks.filter(|m| !m.mask.is_empty()) {
            for j in 0..ny {
                for i in 0..nx {
                    if !m.mask[j * nx + i] || coord[j * nx + i].is_none() {
                        continue;
                    }
                    let (a, b) = (
                        chart.backend_coord(&(xf[i], yf[j])),
                        chart.backend_coord(&(xf[i + 1], yf[j + 1])),
                    );
                    let centre = ((a.0 + b.0) / 2, (a.1 + b.1) / 2);
                    let room = f64::from((b.0 - a.0).abs().min((b.1 - a.1).abs()));
                    mark_dot(root, centre, room)?;
                }
            }
        }
        let (x0, x1, y0, y1) = (xf[0], xf[nx], yf[0], yf[ny]);
        chart.draw_series([Rectangle::new([(x0, y0), (x1, y1)], INK.stroke_width(1))])?;
        for o in overlays {
            draw_overlay(&mut chart, o, (x0, x1, y0, y1), labels)?;
        }
        axis_text(&chart, xa, ya, &plot.x_label, &plot.y_label, labels);

        let (_, py) = chart.plotting_area().get_pixel_range();
        let bar_left = (w - BAR_PANEL) as i32 + 12;
        // The marks' key entry takes the foot of the colour bar's column.
        let text_left = bar_left + BAR_WIDTH + 8;
        let room = f64::from(w as i32 - text_left - 8);
        let mark_lines = marks.map(|m| wrap(&m.label, room)).unwrap_or_default();
        let reserved =
            if mark_lines.is_empty() { 0 } else { 26 + KEY_LINE * mark_lines.len() as i32 };
        let bar_bottom = py.end - 1 - reserved;
        let widest = colour_bar(root, bar, scale, bar_left, py.start, bar_bottom, labels)?;
        let label_x = f64::from(bar_left + BAR_WIDTH + 10) + widest + 14.0;
        let label_y = f64::from(py.start + bar_bottom + 1) / 2.0;
        labels.push(
            Label::new(&plot.colour_label, (label_x, label_y), AXIS_LABEL_SIZE, INK_RGB)
                .anchored(Align::Middle, Baseline::Top)
                .upright(),
        );
        if let Some(m) = marks
            && !mark_lines.is_empty()
        {
            let top = bar_bottom + 20;
            let with_swatch = !m.mask.is_empty();
            if with_swatch {
                let swatch = [(bar_left, top), (bar_left + BAR_WIDTH, top + 14)];
                root.draw(&Rectangle::new(swatch, rgb(scale.colour(0.5)).filled()))?;
                root.draw(&Rectangle::new(swatch, INK.stroke_width(1)))?;
                mark_dot(root, (bar_left + BAR_WIDTH / 2, top + 7), 14.0)?;
            }
            let left = if with_swatch { text_left } else { bar_left };
            for (n, text) in mark_lines.iter().enumerate() {
                let at = (f64::from(left), f64::from(top + 7 + KEY_LINE * n as i32));
                labels.push(Label::new(text, at, KEY_SIZE, INK_RGB));
            }
        }
        if coord.iter().any(Option::is_none) {
            let top = py.end + 22;
            let swatch = [(bar_left, top), (bar_left + BAR_WIDTH, top + 14)];
            root.draw(&Rectangle::new(swatch, NO_DATA.filled()))?;
            root.draw(&Rectangle::new(swatch, INK.stroke_width(1)))?;
            let at = (f64::from(bar_left + BAR_WIDTH + 8), f64::from(top + 7));
            labels.push(Label::new(scale.no_data_text(), at, KEY_SIZE, INK_RGB));
        }
        Ok(())
    }
}

/// The mark of a cell: a dark dot in a white ring at pixel `centre`, sized to a cell whose
/// smaller side is `room` pixels (readable on every colour of both scales).
fn mark_dot<DB: DrawingBackend>(root: &Root<DB>, centre: (i32, i32), room: f64) -> DrawResult<DB> {
    let r = (0.22 * room).clamp(1.0, 3.0);
    root.draw(&Circle::new(centre, r + 1.2, WHITE.filled()))?;
    root.draw(&Circle::new(centre, r, INK.filled()))
}

/// Draws `plot` as a figure of [`LINE_SIZE`] at `path` (`.png` or `.svg`).
pub fn draw_lines(plot: &LinePlot, path: &Path) -> Result<(), ProductError> {
    for line in &plot.lines {
        let bad = |m: &str| {
            Err(ProductError::file(path, format!("line `{}` of `{}`: {m}", line.label, plot.title)))
        };
        if line.x.len() != line.y.len() {
            return bad("x and y differ in length");
        }
        if line.y_err.as_ref().is_some_and(|e| e.len() != line.y.len()) {
            return bad("y_err and y differ in length");
        }
    }
    if let Some((a, b)) = plot.x_range
        && !(a.is_finite() && b.is_finite() && b > a && (!plot.log_x || a > 0.0))
    {
        let m = format!(
            "`{}`: x_range must be finite and increasing (positive on a log axis)",
            plot.title
        );
        return Err(ProductError::file(path, m));
    }
    canvas::Format::of(path)?;
    ensure_registered().map_err(|e| e.in_file(path))?;

    let xcoord = |x: f64| axis_coord(plot.log_x, x);
    let (x0, x1) = match plot.x_range {
        Some((a, b)) => (xcoord(a), xcoord(b)),
        None => {
            let xs = plot.lines.iter().flat_map(|l| l.x.iter().map(|&x| xcoord(x)));
            widen(finite_extent(xs).unwrap_or((0.0, 1.0)), 0.5)
        }
    };
    let ycoord = |y: f64| axis_coord(plot.log_y, y);
    let ys = plot.lines.iter().flat_map(|l| {
        (0..l.y.len()).filter(|&i| xcoord(l.x[i]) >= x0 && xcoord(l.x[i]) <= x1).flat_map(
            move |i| {
                let e = l.y_err.as_ref().map_or(0.0, |e| e[i].abs());
                let e = if e.is_finite() { e } else { 0.0 };
                let lower = if plot.log_y && l.y[i] - e <= 0.0 { l.y[i] } else { l.y[i] - e };
                [lower, l.y[i] + e]
            },
        )
    });
    let y_extent = finite_extent(ys.map(ycoord));
    let any_point = y_extent.is_some();
    let (y0, y1) = y_extent.unwrap_or((0.0, 1.0));
    let (y0, y1) = widen((y0, y1), if plot.log_y { 0.5 } else { y0.abs().max(1.0) * 0.5 });
    let pad = 0.05 * (y1 - y0);
    let (y0, y1) = (y0 - pad, y1 + pad);
    let ya = if plot.log_y { Axis::log10(y0, y1, 8) } else { Axis::linear(y0, y1, None, 6) };
    let xa = match (plot.log_x, plot.x_ticks.as_deref()) {
        (true, Some(t)) => {
            let at: Vec<f64> = t.iter().map(|&v| xcoord(v)).collect();
            let text: Vec<String> = t.iter().map(|&v| format_number(v, v)).collect();
            Axis::labelled(x0, x1, &at, &text)
        }
        (true, None) => Axis::log10(x0, x1, 8),
        (false, t) => Axis::linear(x0, x1, t, 8),
    };

    // Marker labels go in rows above the chart, a label moving down a row when it would
    // overlap one already placed; the chart's pixel span is known from the layout constants.
    let (w, _) = LINE_SIZE;
    let plot_left = f64::from(2 * SIDE_GAP + Y_LABEL_AREA);
    let plot_right = f64::from(w - KEY_PANEL - SIDE_GAP);
    let markers: Vec<Marker> = plot
        .markers
        .iter()
        .map(|m| Marker { x: xcoord(m.x), label: m.label.clone() })
        .filter(|m| m.x.is_finite() && m.x >= x0 && m.x <= x1)
        .collect();
    let mut row_ends: Vec<f64> = Vec::new();
    let mut rows = Vec::new();
    for m in &markers {
        let width = text_width(&m.label, KEY_SIZE, Weight::Regular);
        let centre = plot_left + xa.fraction(m.x) * (plot_right - plot_left);
        let left = centre - width / 2.0;
        let row = row_ends.iter().position(|&end| left > end + 12.0).unwrap_or(row_ends.len());
        if row == row_ends.len() {
            row_ends.push(f64::NEG_INFINITY);
        }
        row_ends[row] = left + width;
        rows.push(row);
    }
    let top = TITLE_BAND + MARKER_ROW * row_ends.len() as u32;
    let figure = LineFigure { plot, xa, ya, x0, x1, any_point, markers, rows, top };
    canvas::render(path, LINE_SIZE, &figure)
}

/// A [`LinePlot`] made ready to draw: axes, x extent in axis coordinates, and the marker
/// labels' rows.
struct LineFigure<'p> {
    plot: &'p LinePlot,
    xa: Axis,
    ya: Axis,
    x0: f64,
    x1: f64,
    any_point: bool,
    markers: Vec<Marker>,
    rows: Vec<usize>,
    top: u32,
}

impl Figure for LineFigure<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &Root<DB>, labels: &mut Vec<Label>) -> DrawResult<DB> {
        let Self { plot, xa, ya, x0, x1, any_point, markers, rows, top } = self;
        let (x0, x1) = (*x0, *x1);
        let (w, _) = LINE_SIZE;
        let xcoord = |x: f64| axis_coord(plot.log_x, x);
        let ycoord = |y: f64| axis_coord(plot.log_y, y);
        labels.push(title(&plot.title));
        let area = root.margin(*top, 10, SIDE_GAP, 0);
        let (chart_area, _) = area.split_horizontally(w - KEY_PANEL);
        let mut chart = frame(&chart_area, xa, ya, true)?;

        for (m, row) in markers.iter().zip(rows) {
            let dash =
                DashedLineSeries::new([(m.x, ya.lo), (m.x, ya.hi)], 6, 5, SOFT_INK.stroke_width(1));
            chart.draw_series(dash)?;
            let x = f64::from(chart.backend_coord(&(m.x, ya.lo)).0);
            let y = f64::from(TITLE_BAND + MARKER_ROW * *row as u32 + MARKER_ROW / 2);
            labels.push(
                Label::new(&m.label, (x, y), KEY_SIZE, SOFT_INK_RGB)
                    .anchored(Align::Middle, Baseline::Middle),
            );
        }

        let clip = (x0, x1, ya.lo, ya.hi);
        for (k, line) in plot.lines.iter().enumerate() {
            let ink = SERIES[k % SERIES.len()];
            let pts: Vec<(f64, f64)> =
                line.x.iter().zip(&line.y).map(|(&x, &y)| (xcoord(x), ycoord(y))).collect();
            if let Some(err) = &line.y_err {
                for (i, &(x, y)) in pts.iter().enumerate() {
                    let e = err[i].abs();
                    if !(x.is_finite() && y.is_finite() && e.is_finite() && x >= x0 && x <= x1) {
                        continue;
                    }
                    let lo = ycoord(line.y[i] - e);
                    let lo = if lo.is_finite() { lo.max(ya.lo) } else { ya.lo };
                    let hi = ycoord(line.y[i] + e).min(ya.hi);
                    if hi <= lo {
                        continue;
                    }
                    chart.draw_series([PathElement::new(vec![(x, lo), (x, hi)], ink)])?;
                    for end in [lo, hi] {
                        if end > ya.lo && end < ya.hi {
                            let cap = EmptyElement::at((x, end))
                                + PathElement::new(vec![(-4, 0), (4, 0)], ink);
                            chart.draw_series([cap])?;
                        }
                    }
                }
            }
            for piece in clipped_pieces(&pts, clip) {
                match line.style {
                    LineStyle::Solid => {
                        chart.draw_series(LineSeries::new(piece, ink.stroke_width(2)))?;
                    }
                    LineStyle::Dashed => {
                        chart.draw_series(DashedLineSeries::new(
                            piece,
                            9,
                            6,
                            ink.stroke_width(2),
                        ))?;
                    }
                    LineStyle::Dotted => {
                        chart.draw_series(DottedLineSeries::new(piece, 0, 6, move |c| {
                            Circle::new(c, 1.6, ink.filled())
                        }))?;
                    }
                    LineStyle::Points => {}
                }
            }
            if line.style == LineStyle::Points {
                let inside = pts.iter().filter(|&&(x, y)| {
                    x.is_finite() && y.is_finite() && x >= x0 && x <= x1 && y >= ya.lo && y <= ya.hi
                });
                chart.draw_series(inside.map(|&p| Circle::new(p, 3.5, ink.filled())))?;
            }
        }
        let border = Rectangle::new([(x0, ya.lo), (x1, ya.hi)], INK.stroke_width(1));
        chart.draw_series([border])?;
        axis_text(&chart, xa, ya, &plot.x_label, &plot.y_label, labels);

        let (px, py) = chart.plotting_area().get_pixel_range();
        if !any_point {
            let centre = (f64::from(px.start + px.end) / 2.0, f64::from(py.start + py.end) / 2.0);
            labels.push(
                Label::new("no data", centre, AXIS_LABEL_SIZE, SOFT_INK_RGB)
                    .anchored(Align::Middle, Baseline::Middle),
            );
        }
        key(root, &plot.lines, (w - KEY_PANEL) as i32 + 8, py.start + 4, labels)?;
        Ok(())
    }
}

/// An [`Axis`] is a plotters coordinate: linear in its own coordinate, ticks where it says
/// (minor positions as the light grid).
impl Ranged for Axis {
    type FormatOption = DefaultFormatting;
    type ValueType = f64;

    fn map(&self, value: &f64, limit: (i32, i32)) -> i32 {
        let f = self.fraction(*value);
        limit.0 + (f * f64::from(limit.1 - limit.0)).round() as i32
    }

    fn key_points<H: KeyPointHint>(&self, hint: H) -> Vec<f64> {
        if hint.weight().allow_light_points() { self.minor.clone() } else { self.ticks.clone() }
    }

    fn range(&self) -> std::ops::Range<f64> {
        self.lo..self.hi
    }
}

/// The chart on `area`: axes with tick marks (numbers are painted later by [`axis_text`]) and,
/// if `grid`, grid lines at the ticks and minor positions.
fn frame<'a, DB: DrawingBackend>(
    area: &'a Root<DB>,
    xa: &Axis,
    ya: &Axis,
    grid: bool,
) -> Result<Chart<'a, DB>, DrawError<DB>> {
    let mut chart = ChartBuilder::on(area)
        .margin_right(SIDE_GAP)
        .margin_left(SIDE_GAP)
        .x_label_area_size(X_LABEL_AREA)
        .y_label_area_size(Y_LABEL_AREA)
        .build_cartesian_2d(xa.clone(), ya.clone())?;
    let mut mesh = chart.configure_mesh();
    mesh.axis_style(INK)
        .label_style(unseen((FAMILY, TICK_SIZE)))
        .axis_desc_style((FAMILY, AXIS_LABEL_SIZE))
        .set_all_tick_mark_size(6)
        .bold_line_style(GRID_MAJOR)
        .light_line_style(GRID_MINOR)
        .x_label_formatter(&|_| String::new())
        .y_label_formatter(&|_| String::new());
    if !grid {
        mesh.disable_mesh();
    }
    mesh.draw()?;
    Ok(chart)
}

/// Colour of overlays: white with a dark edge reads on every part of the colour scale.
const OVERLAY: RGBColor = RGBColor(255, 255, 255);

/// Draws overlay `o` on a map `chart` whose data extent is (x0, x1, y0, y1), clipped to it.
fn draw_overlay<DB: DrawingBackend>(
    chart: &mut Chart<'_, DB>,
    o: &Overlay,
    (x0, x1, y0, y1): (f64, f64, f64, f64),
    labels: &mut Vec<Label>,
) -> DrawResult<DB> {
    let inside = |&(x, y): &(f64, f64)| x >= x0 && x <= x1 && y >= y0 && y <= y1;
    let (dash, gap) = match o.style {
        LineStyle::Dashed => (8, 5),
        LineStyle::Dotted => (2, 4),
        _ => (0, 0),
    };
    if let [p] = o.points.as_slice() {
        if inside(p) {
            chart.draw_series([Cross::new(*p, 7, INK.stroke_width(4))])?;
            chart.draw_series([Cross::new(*p, 7, OVERLAY.stroke_width(2))])?;
        }
    } else {
        // Runs of consecutive points inside the extent.
        let mut runs: Vec<Vec<(f64, f64)>> = vec![Vec::new()];
        for p in &o.points {
            if inside(p) {
                runs.last_mut().expect("one run at least").push(*p);
            } else if !runs.last().expect("one run at least").is_empty() {
                runs.push(Vec::new());
            }
        }
        for r in runs.into_iter().filter(|r| r.len() > 1) {
            for (pen, width) in [(INK, 4), (OVERLAY, 2)] {
                if dash == 0 {
                    chart.draw_series([PathElement::new(r.clone(), pen.stroke_width(width))])?;
                } else {
                    chart.draw_series([DashedPathElement::new(
                        r.clone(),
                        dash,
                        gap,
                        pen.stroke_width(width),
                    )])?;
                }
            }
        }
    }
    if let Some(&last) = o.points.iter().rev().find(|p| inside(p))
        && !o.label.is_empty()
    {
        // Dark text on a white box, below and right of the last point (so
        // that a line ending at the top edge keeps its label inside).
        let (x, y) = chart.backend_coord(&last);
        let area = chart.plotting_area().strip_coord_spec();
        let (bx, by) = area.get_base_pixel();
        let (dim_x, _) = area.dim_in_pixel();
        let width = text_width(&o.label, KEY_SIZE, Weight::Regular).ceil() as i32 + 8;
        let left = (x + 8).min(bx + dim_x as i32 - width - 2);
        let top = y + 8;
        let corner = |(px, py): (i32, i32)| (px - bx, py - by);
        area.draw(&Rectangle::new(
            [corner((left, top)), corner((left + width, top + KEY_SIZE as i32 + 6))],
            WHITE.mix(0.85).filled(),
        ))?;
        labels.push(
            Label::new(&o.label, (f64::from(left + 4), f64::from(top + 3)), KEY_SIZE, INK_RGB)
                .anchored(Align::Start, Baseline::Top),
        );
    }
    Ok(())
}

/// Tick numbers and axis labels around the chart's plotting area. Tick numbers that would
/// touch are thinned to every second (third, …) one.
fn axis_text<DB: DrawingBackend>(
    chart: &Chart<'_, DB>,
    xa: &Axis,
    ya: &Axis,
    x_label: &str,
    y_label: &str,
    labels: &mut Vec<Label>,
) {
    let (px, py) = chart.plotting_area().get_pixel_range();
    let xs: Vec<f64> =
        xa.ticks.iter().map(|&t| f64::from(chart.backend_coord(&(t, ya.lo)).0)).collect();
    let widths: Vec<f64> =
        xa.labels.iter().map(|l| text_width(l, TICK_SIZE, Weight::Regular)).collect();
    let mut every = 1;
    while every < xs.len()
        && (every..xs.len())
            .step_by(every)
            .any(|i| xs[i] - xs[i - every] < (widths[i] + widths[i - every]) / 2.0 + 10.0)
    {
        every += 1;
    }
    let below = f64::from(py.end) + 10.0;
    for (i, (x, text)) in xs.iter().zip(&xa.labels).enumerate().step_by(every) {
        let _ = i;
        labels.push(
            Label::new(text, (*x, below), TICK_SIZE, INK_RGB)
                .anchored(Align::Middle, Baseline::Top),
        );
    }
    let ys: Vec<f64> =
        ya.ticks.iter().map(|&t| f64::from(chart.backend_coord(&(xa.lo, t)).1)).collect();
    let mut every = 1;
    while every < ys.len()
        && (every..ys.len()).step_by(every).any(|i| (ys[i] - ys[i - every]).abs() < TICK_SIZE + 6.0)
    {
        every += 1;
    }
    let left = f64::from(px.start) - 11.0;
    let mut widest: f64 = 0.0;
    for (y, text) in ys.iter().zip(&ya.labels).step_by(every) {
        widest = widest.max(text_width(text, TICK_SIZE, Weight::Regular));
        labels.push(
            Label::new(text, (left, *y), TICK_SIZE, INK_RGB).anchored(Align::End, Baseline::Middle),
        );
    }
    let mid_x = f64::from(px.start + px.end) / 2.0;
    labels.push(
        Label::new(x_label, (mid_x, below + TICK_SIZE + 12.0), AXIS_LABEL_SIZE, INK_RGB)
            .anchored(Align::Middle, Baseline::Top),
    );
    let mid_y = f64::from(py.start + py.end) / 2.0;
    let y_label_x = (left - widest - 12.0).max(AXIS_LABEL_SIZE + 4.0);
    labels.push(
        Label::new(y_label, (y_label_x, mid_y), AXIS_LABEL_SIZE, INK_RGB)
            .anchored(Align::Middle, Baseline::Bottom)
            .upright(),
    );
}

/// The figure title, left-aligned at the top.
fn title(text: &str) -> Label {
    Label::new(text, TITLE_POS, TITLE_SIZE, INK_RGB).anchored(Align::Start, Baseline::Top).bold()
}

/// A vertical colour bar of `scale` from pixel row `top` to `bottom`, ticks and numbers on its
/// right; returns the width of the widest number (pixels).
fn colour_bar<DB: DrawingBackend>(
    root: &Root<DB>,
    axis: &Axis,
    scale: ColourScale,
    left: i32,
    top: i32,
    bottom: i32,
    labels: &mut Vec<Label>,
) -> Result<f64, DrawError<DB>> {
    let height = (bottom - top).max(1);
    for y in top..=bottom {
        let t = f64::from(bottom - y) / f64::from(height);
        let row = vec![(left, y), (left + BAR_WIDTH, y)];
        root.draw(&PathElement::new(row, rgb(scale.colour(t))))?;
    }
    root.draw(&Rectangle::new([(left, top), (left + BAR_WIDTH, bottom)], INK.stroke_width(1)))?;
    let right = left + BAR_WIDTH;
    let mut widest: f64 = 0.0;
    for (tick, text) in axis.ticks.iter().zip(&axis.labels) {
        let y = bottom - (axis.fraction(*tick) * f64::from(height)).round() as i32;
        root.draw(&PathElement::new(vec![(right, y), (right + 6, y)], INK))?;
        let at = (f64::from(right + 10), f64::from(y));
        labels.push(Label::new(text, at, TICK_SIZE, INK_RGB));
        widest = widest.max(text_width(text, TICK_SIZE, Weight::Regular));
    }
    for tick in &axis.minor {
        let y = bottom - (axis.fraction(*tick) * f64::from(height)).round() as i32;
        root.draw(&PathElement::new(vec![(right, y), (right + 3, y)], INK))?;
    }
    Ok(widest)
}

/// The key: one row per labelled line, a sample of its style and its label (wrapped to fit).
fn key<DB: DrawingBackend>(
    root: &Root<DB>,
    lines: &[Line],
    left: i32,
    top: i32,
    labels: &mut Vec<Label>,
) -> DrawResult<DB> {
    let text_left = left + KEY_SAMPLE + 10;
    let room = f64::from(LINE_SIZE.0 as i32 - text_left - 12);
    let mut y = top + 10;
    for (k, line) in lines.iter().enumerate() {
        if line.label.is_empty() {
            continue;
        }
        let ink = SERIES[k % SERIES.len()];
        let (a, b) = (left, left + KEY_SAMPLE);
        match line.style {
            LineStyle::Solid => {
                root.draw(&PathElement::new(vec![(a, y), (b, y)], ink.stroke_width(2)))?
            }
            LineStyle::Dashed => {
                for (s, e) in [(a, a + 9), (a + 15, a + 24), (a + 30, b)] {
                    root.draw(&PathElement::new(vec![(s, y), (e, y)], ink.stroke_width(2)))?;
                }
            }
            LineStyle::Dotted => {
                for x in (a..=b).step_by(6) {
                    root.draw(&Circle::new((x, y), 1.6, ink.filled()))?;
                }
            }
            LineStyle::Points => {
                let m = (a + b) / 2;
                root.draw(&Circle::new((m, y), 3.5, ink.filled()))?;
                if line.y_err.is_some() {
                    root.draw(&PathElement::new(vec![(m, y - 8), (m, y + 8)], ink))?;
                    for e in [y - 8, y + 8] {
                        root.draw(&PathElement::new(vec![(m - 4, e), (m + 4, e)], ink))?;
                    }
                }
            }
        }
        for (n, text) in wrap(&line.label, room).iter().enumerate() {
            if n > 0 {
                y += KEY_LINE;
            }
            labels.push(Label::new(text, (f64::from(text_left), f64::from(y)), KEY_SIZE, INK_RGB));
        }
        y += 30;
    }
    Ok(())
}

/// `text` broken at spaces into lines no wider than `room` pixels (a long word stays whole).
fn wrap(text: &str, room: f64) -> Vec<String> {
    let mut lines: Vec<String> = Vec::new();
    let mut current = String::new();
    for word in text.split_whitespace() {
        let candidate =
            if current.is_empty() { word.to_owned() } else { format!("{current} {word}") };
        if text_width(&candidate, KEY_SIZE, Weight::Regular) > room && !current.is_empty() {
            lines.push(std::mem::replace(&mut current, word.to_owned()));
        } else {
            current = candidate;
        }
    }
    lines.push(current);
    lines
}

/// A text style that draws nothing: plotters' own tick numbers are left out (ours are laid out
/// by [`axis_text`]), and an SVG gets no empty `<text>` elements.
fn unseen(style: (&'static str, f64)) -> TextStyle<'static> {
    TextStyle::from(style.into_font()).color(&TRANSPARENT)
}

/// A colour-scale triple as a plotters colour.
fn rgb((r, g, b): (u8, u8, u8)) -> RGBColor {
    RGBColor(r, g, b)
}

/// Smallest and largest finite value, if any.
fn finite_extent(values: impl Iterator<Item = f64>) -> Option<(f64, f64)> {
    values.filter(|v| v.is_finite()).fold(None, |acc, v| match acc {
        None => Some((v, v)),
        Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
    })
}

/// The range itself if it has width, else widened by `pad` each way.
fn widen((lo, hi): (f64, f64), pad: f64) -> (f64, f64) {
    if hi > lo { (lo, hi) } else { (lo - pad, hi + pad) }
}

/// The polyline `pts` cut into finite pieces and clipped to the box (x0, x1, y0, y1): a piece
/// ends at a non-finite point or where the line leaves the box (Liang–Barsky clipping).
fn clipped_pieces(
    pts: &[(f64, f64)],
    (x0, x1, y0, y1): (f64, f64, f64, f64),
) -> Vec<Vec<(f64, f64)>> {
    let mut pieces: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    let finite = |p: &(f64, f64)| p.0.is_finite() && p.1.is_finite();
    for w in pts.windows(2) {
        let (a, b) = (w[0], w[1]);
        if !(finite(&a) && finite(&b)) {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            }
            current.clear();
            continue;
        }
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let (mut t0, mut t1) = (0.0f64, 1.0f64);
        let mut visible = true;
        for (p, q) in [(-dx, a.0 - x0), (dx, x1 - a.0), (-dy, a.1 - y0), (dy, y1 - a.1)] {
            if p == 0.0 {
                if q < 0.0 {
                    visible = false;
                }
            } else {
                let r = q / p;
                if p < 0.0 {
                    t0 = t0.max(r);
                } else {
                    t1 = t1.min(r);
                }
            }
        }
        if !visible || t0 > t1 {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            }
            current.clear();
            continue;
        }
        let start = (a.0 + t0 * dx, a.1 + t0 * dy);
        let end = (a.0 + t1 * dx, a.1 + t1 * dy);
        if current.is_empty() || t0 > 0.0 {
            if current.len() > 1 {
                pieces.push(std::mem::take(&mut current));
            }
            current = vec![start];
        }
        current.push(end);
        if t1 < 1.0 {
            pieces.push(std::mem::take(&mut current));
        }
    }
    if current.len() > 1 {
        pieces.push(current);
    }
    pieces
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn clipping_cuts_at_gaps_and_box_edges() {
        let bx = (0.0, 10.0, 0.0, 10.0);
        let pts = [(1.0, 1.0), (2.0, 2.0), (f64::NAN, 3.0), (4.0, 4.0), (5.0, 5.0), (15.0, 5.0)];
        let pieces = clipped_pieces(&pts, bx);
        assert_eq!(
            pieces,
            vec![vec![(1.0, 1.0), (2.0, 2.0)], vec![(4.0, 4.0), (5.0, 5.0), (10.0, 5.0)]]
        );
        let outside = clipped_pieces(&[(-5.0, 20.0), (-1.0, 30.0)], bx);
        assert!(outside.is_empty());
    }
}

/// Several maps of one quantity on one shared colour scale, drawn as a grid of small panels
/// (small multiples): e.g. the column map of each averaging window of a run, so that its
/// change with the phase or season shows at a glance.
#[derive(Debug, Clone, PartialEq)]
pub struct MapPanels {
    /// Figure title.
    pub title: String,
    /// Horizontal axis label, with its unit.
    pub x_label: String,
    /// Vertical axis label, with its unit.
    pub y_label: String,
    /// Cell edges along x, strictly increasing (nx + 1 values), shared by every panel.
    pub x_edges: Vec<f64>,
    /// Cell edges along y, strictly increasing (ny + 1 values), shared by every panel.
    pub y_edges: Vec<f64>,
    /// One (panel title, values row-major `[y][x]`) per panel, in reading order.
    pub panels: Vec<(String, Vec<f64>)>,
    /// Colour-bar label, with the unit.
    pub colour_label: String,
    /// How values become colours (one scale for every panel).
    pub scale: ColourScale,
    /// Panels per row, at least 1.
    pub columns: usize,
    /// Tick positions along x (default: round values).
    pub x_ticks: Option<Vec<f64>>,
    /// Tick positions along y (default: round values).
    pub y_ticks: Option<Vec<f64>>,
}

/// Height of one row of [`MapPanels`], in pixels.
const PANEL_ROW: u32 = 190;
/// Size of the tick numbers of [`MapPanels`], in pixels.
const PANEL_TICK_SIZE: f64 = 12.0;

/// Draws `plot` at `path` (`.png` or `.svg`): [`MAP_SIZE`]'s width, one [`PANEL_ROW`] per row
/// of panels.
pub fn draw_map_panels(plot: &MapPanels, path: &Path) -> Result<(), ProductError> {
    let nx = plot.x_edges.len().saturating_sub(1);
    let ny = plot.y_edges.len().saturating_sub(1);
    let bad = |m: String| Err(ProductError::file(path, format!("panels `{}`: {m}", plot.title)));
    if nx == 0 || ny == 0 || plot.panels.is_empty() || plot.columns == 0 {
        return bad("needs two edges along each axis, a panel and a column".into());
    }
    if let Some((name, v)) = plot.panels.iter().find(|(_, v)| v.len() != nx * ny) {
        return bad(format!("panel `{name}` has {} values for a {ny}×{nx} grid", v.len()));
    }
    for (axis, edges) in [("x", &plot.x_edges), ("y", &plot.y_edges)] {
        if edges.iter().any(|e| !e.is_finite()) || edges.windows(2).any(|w| w[1] <= w[0]) {
            return bad(format!("{axis} edges must be finite and strictly increasing"));
        }
    }
    canvas::Format::of(path)?;
    ensure_registered().map_err(|e| e.in_file(path))?;
    // One colour scale for every panel, so that panels compare by colour.
    let all =
        plot.panels.iter().flat_map(|(_, v)| v.iter().filter_map(|&x| plot.scale.coordinate(x)));
    let bar = plot.scale.bar(all);
    let (x0, x1) = (plot.x_edges[0], plot.x_edges[nx]);
    let (y0, y1) = (plot.y_edges[0], plot.y_edges[ny]);
    let xa = Axis::linear(x0, x1, plot.x_ticks.as_deref(), 5);
    let ya = Axis::linear(y0, y1, plot.y_ticks.as_deref(), 4);
    let cols = plot.columns.min(plot.panels.len());
    let rows = plot.panels.len().div_ceil(cols);
    let size = (MAP_SIZE.0, TITLE_BAND + rows as u32 * PANEL_ROW + PANEL_FOOT);
    canvas::render(path, size, &PanelsFigure { plot, bar, xa, ya, cols, rows })
}

/// Height of the band under the panels (tick numbers and the x label), in pixels.
const PANEL_FOOT: u32 = 56;

/// A [`MapPanels`] made ready to draw: the shared colour bar, axes and grid of panels.
struct PanelsFigure<'p> {
    plot: &'p MapPanels,
    bar: Axis,
    xa: Axis,
    ya: Axis,
    cols: usize,
    rows: usize,
}

impl Figure for PanelsFigure<'_> {
    fn draw<DB: DrawingBackend>(&self, root: &Root<DB>, labels: &mut Vec<Label>) -> DrawResult<DB> {
        let Self { plot, bar, xa, ya, cols, rows } = self;
        let (cols, rows) = (*cols, *rows);
        let nx = plot.x_edges.len() - 1;
        let ny = plot.y_edges.len() - 1;
        let (x0, x1) = (plot.x_edges[0], plot.x_edges[nx]);
        let (y0, y1) = (plot.y_edges[0], plot.y_edges[ny]);
        let w = MAP_SIZE.0;
        labels.push(title(&plot.title));
        let area = root.margin(TITLE_BAND, PANEL_FOOT, 64, 0);
        let (grid, _) = area.split_horizontally(w - 64 - BAR_PANEL);
        let cells = grid.split_evenly((rows, cols));
        let mut extent = (i32::MAX, i32::MIN, i32::MAX, i32::MIN);
        for (k, (name, values)) in plot.panels.iter().enumerate() {
            let mut chart = ChartBuilder::on(&cells[k])
                .margin_top(20)
                .margin_right(10)
                .x_label_area_size(18)
                .y_label_area_size(30)
                .build_cartesian_2d(xa.clone(), ya.clone())?;
            chart
                .configure_mesh()
                .disable_mesh()
                .axis_style(INK)
                .label_style(unseen((FAMILY, PANEL_TICK_SIZE)))
                .axis_desc_style((FAMILY, PANEL_TICK_SIZE))
                .set_all_tick_mark_size(3)
                .x_label_formatter(&|_| String::new())
                .y_label_formatter(&|_| String::new())
                .draw()?;
            chart.draw_series((0..ny).flat_map(|j| (0..nx).map(move |i| (i, j))).map(
                |(i, j)| {
                    let fill = match plot.scale.coordinate(values[j * nx + i]) {
                        Some(c) => rgb(plot.scale.colour(bar.fraction(c))),
                        None => NO_DATA,
                    };
                    Rectangle::new(
                        [
                            (plot.x_edges[i], plot.y_edges[j]),
                            (plot.x_edges[i + 1], plot.y_edges[j + 1]),
                        ],
                        fill.filled(),
                    )
                },
            ))?;
            chart.draw_series([Rectangle::new([(x0, y0), (x1, y1)], INK.stroke_width(1))])?;
            let (px, py) = chart.plotting_area().get_pixel_range();
            extent = (
                extent.0.min(px.start),
                extent.1.max(px.end),
                extent.2.min(py.start),
                extent.3.max(py.end),
            );
            labels.push(
                Label::new(
                    name,
                    (f64::from(px.start), f64::from(py.start) - 4.0),
                    KEY_SIZE,
                    INK_RGB,
                )
                .anchored(Align::Start, Baseline::Bottom),
            );
            if k % cols == 0 {
                for (t, text) in ya.ticks.iter().zip(&ya.labels) {
                    let y = f64::from(chart.backend_coord(&(xa.lo, *t)).1);
                    let at = (f64::from(px.start) - 6.0, y);
                    labels.push(
                        Label::new(text, at, PANEL_TICK_SIZE, INK_RGB)
                            .anchored(Align::End, Baseline::Middle),
                    );
                }
            }
            if k / cols == rows - 1 || k + cols >= plot.panels.len() {
                for (t, text) in xa.ticks.iter().zip(&xa.labels) {
                    let x = f64::from(chart.backend_coord(&(*t, ya.lo)).0);
                    labels.push(
                        Label::new(text, (x, f64::from(py.end) + 5.0), PANEL_TICK_SIZE, INK_RGB)
                            .anchored(Align::Middle, Baseline::Top),
                    );
                }
            }
        }
        let (left, right, top, bottom) = extent;
        let mid_x = f64::from(left + right) / 2.0;
        labels.push(
            Label::new(&plot.x_label, (mid_x, f64::from(bottom) + 24.0), AXIS_LABEL_SIZE, INK_RGB)
                .anchored(Align::Middle, Baseline::Top),
        );
        let mid_y = f64::from(top + bottom) / 2.0;
        labels.push(
            Label::new(&plot.y_label, (AXIS_LABEL_SIZE + 4.0, mid_y), AXIS_LABEL_SIZE, INK_RGB)
                .anchored(Align::Middle, Baseline::Bottom)
                .upright(),
        );
        let bar_left = (w - BAR_PANEL) as i32 + 12;
        let widest = colour_bar(root, bar, plot.scale, bar_left, top, bottom, labels)?;
        let label_x = f64::from(bar_left + BAR_WIDTH + 10) + widest + 14.0;
        labels.push(
            Label::new(&plot.colour_label, (label_x, mid_y), AXIS_LABEL_SIZE, INK_RGB)
                .anchored(Align::Middle, Baseline::Top)
                .upright(),
        );
        Ok(())
    }
}

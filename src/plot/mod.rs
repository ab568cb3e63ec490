//! Figures: line charts and heat maps, described as plain data ([`LineChart`], [`HeatMap`])
//! and rendered in memory to PNG or SVG bytes. Pure: no files, no terminal; the caller
//! writes the bytes.
//!
//! Text is drawn with DejaVu Sans embedded in the library (`font/DejaVuSans.ttf`, its
//! licence in `font/LICENSE-DejaVu.txt`), so rendering needs no system font libraries.
//!
//! [`figures`] turns the project's data (grid slices, curves of growth, line profiles,
//! interpolation errors, departure coefficients) into charts; [`departure`] reads tables of
//! departure coefficients; [`style`] holds the colours, dash patterns and markers.

pub mod departure;
pub mod figures;
mod render;
pub mod style;

use std::path::Path;

pub use style::{Dash, Marker, Rgb};

/// Default picture size, pixels.
pub const DEFAULT_SIZE: (u32, u32) = (800, 600);
/// Smallest and largest accepted picture side, pixels.
pub const SIZE_RANGE: (u32, u32) = (200, 8000);

/// Picture format.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Format {
    /// PNG, 8-bit RGB.
    Png,
    /// SVG 1.1 (text as `<text>` in the sans-serif family).
    Svg,
}

impl Format {
    /// The format a file name asks for (`.png` or `.svg`, any case).
    pub fn from_path(path: &Path) -> Option<Format> {
        let ext = path.extension()?.to_str()?.to_ascii_lowercase();
        match ext.as_str() {
            "png" => Some(Format::Png),
            "svg" => Some(Format::Svg),
            _ => None,
        }
    }
}

/// One axis of a chart.
#[derive(Debug, Clone, PartialEq)]
pub struct Axis {
    /// Label with units, e.g. "temperature (K)".
    pub label: String,
    /// Logarithmic scale.
    pub log: bool,
}

impl Axis {
    /// An axis.
    pub fn new(label: impl Into<String>, log: bool) -> Axis {
        Axis {
            label: label.into(),
            log,
        }
    }
}

/// One curve.
#[derive(Debug, Clone, PartialEq)]
pub struct Series {
    /// Legend text.
    pub label: String,
    /// Points (x, y); non-finite points (and non-positive ones on a log axis) break the line.
    pub points: Vec<(f64, f64)>,
    /// Colour.
    pub colour: Rgb,
    /// Dash pattern.
    pub dash: Dash,
    /// Marker at every point, if any.
    pub marker: Option<Marker>,
    /// Line width, pixels.
    pub width: u32,
    /// Whether the curve decides the axis ranges (asymptotes do not: they are clipped).
    pub sets_range: bool,
}

/// A labelled band of x (e.g. a regime of a curve of growth): its inner edges are drawn as
/// vertical lines and its label at the top of the plot.
#[derive(Debug, Clone, PartialEq)]
pub struct Region {
    /// Start (x units).
    pub from: f64,
    /// End (x units).
    pub to: f64,
    /// Label.
    pub label: String,
}

/// A horizontal reference line (e.g. the continuum level).
#[derive(Debug, Clone, PartialEq)]
pub struct Reference {
    /// Height (y units).
    pub y: f64,
    /// Label, drawn at the right end.
    pub label: String,
}

/// A line chart.
#[derive(Debug, Clone, PartialEq)]
pub struct LineChart {
    /// Title.
    pub title: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// Curves.
    pub series: Vec<Series>,
    /// Labelled x bands.
    pub regions: Vec<Region>,
    /// Horizontal reference lines.
    pub references: Vec<Reference>,
    /// A line of small text under the legend (fixed parameters, source).
    pub note: Vec<String>,
}

/// A heat map over cells of two axes.
#[derive(Debug, Clone, PartialEq)]
pub struct HeatMap {
    /// Title.
    pub title: String,
    /// Horizontal axis.
    pub x: Axis,
    /// Vertical axis.
    pub y: Axis,
    /// Cell edges along x (increasing), nx + 1 of them.
    pub x_edges: Vec<f64>,
    /// Cell edges along y (increasing), ny + 1 of them.
    pub y_edges: Vec<f64>,
    /// Cell values, `values[iy * nx + ix]`; `None` where there is no value.
    pub values: Vec<Option<f64>>,
    /// Label of the colour bar, with units.
    pub value_label: String,
    /// Colour by log10 of the value.
    pub log_value: bool,
    /// Small text beside the colour bar.
    pub note: Vec<String>,
}

/// Errors of rendering.
#[derive(Debug, thiserror::Error)]
pub enum PlotError {
    /// A picture side outside [`SIZE_RANGE`].
    #[error("invalid picture size {width}×{height}: each side must be between {} and {} pixels", SIZE_RANGE.0, SIZE_RANGE.1)]
    Size {
        /// Width asked for.
        width: u32,
        /// Height asked for.
        height: u32,
    },
    /// Nothing to draw (every value missing, or none positive on a log axis).
    #[error("nothing to plot: {0}")]
    Empty(String),
    /// Malformed chart data (edges not increasing, value count wrong).
    #[error("malformed figure: {0}")]
    Malformed(String),
    /// An axis name the grid does not have.
    #[error("{what} {name}: no such axis (the grid has: {known})")]
    UnknownAxis {
        /// The option.
        what: String,
        /// The name given.
        name: String,
        /// The grid's axes.
        known: String,
    },
    /// A fixed value outside an axis.
    #[error("--fix {axis}={value}: outside the grid's range [{lo}, {hi}]")]
    OutOfRange {
        /// The axis.
        axis: String,
        /// The value given.
        value: f64,
        /// Smallest node.
        lo: f64,
        /// Largest node.
        hi: f64,
    },
    /// A fixed value between nodes.
    #[error("--fix {axis}={value}: not a node of the axis (nodes: {nodes})")]
    NotANode {
        /// The axis.
        axis: String,
        /// The value given.
        value: f64,
        /// The axis' nodes.
        nodes: String,
    },
    /// Contradicting choices (an axis both drawn and fixed, given twice).
    #[error("{0}")]
    Conflict(String),
    /// The drawing library failed.
    #[error("drawing failed: {0}")]
    Draw(String),
    /// The PNG encoder failed.
    #[error("PNG encoding failed: {0}")]
    Encode(String),
}

impl PlotError {
    /// True when the error comes from the caller's input (exit code 2).
    pub fn is_bad_input(&self) -> bool {
        matches!(
            self,
            PlotError::Size { .. }
                | PlotError::Empty(_)
                | PlotError::Malformed(_)
                | PlotError::UnknownAxis { .. }
                | PlotError::OutOfRange { .. }
                | PlotError::NotANode { .. }
                | PlotError::Conflict(_)
        )
    }
}

fn check_size(width: u32, height: u32) -> Result<(), PlotError> {
    let ok = |v: u32| (SIZE_RANGE.0..=SIZE_RANGE.1).contains(&v);
    if ok(width) && ok(height) {
        Ok(())
    } else {
        Err(PlotError::Size { width, height })
    }
}

/// Render a line chart to PNG or SVG bytes.
pub fn render_chart(
    chart: &LineChart,
    format: Format,
    width: u32,
    height: u32,
) -> Result<Vec<u8>, PlotError> {
    check_size(width, height)?;
    render::chart(chart, format, width, height)
}

/// Render a heat map to PNG or SVG bytes.
pub fn render_heatmap(
    map: &HeatMap,
    format: Format,
    width: u32,
    height: u32,
) -> Result<Vec<u8>, PlotError> {
    check_size(width, height)?;
    let (nx, ny) = (
        map.x_edges.len().saturating_sub(1),
        map.y_edges.len().saturating_sub(1),
    );
    if nx == 0 || ny == 0 || map.values.len() != nx * ny {
        return Err(PlotError::Malformed(format!(
            "{} x edges, {} y edges and {} values",
            map.x_edges.len(),
            map.y_edges.len(),
            map.values.len()
        )));
    }
    for (name, e, log) in [
        ("x", &map.x_edges, map.x.log),
        ("y", &map.y_edges, map.y.log),
    ] {
        if !e.windows(2).all(|w| w[0] < w[1]) || e.iter().any(|v| !v.is_finite()) {
            return Err(PlotError::Malformed(format!(
                "{name} edges must be finite and increasing"
            )));
        }
        if log && e[0] <= 0.0 {
            return Err(PlotError::Malformed(format!(
                "{name} edges must be positive on a log axis"
            )));
        }
    }
    render::heatmap(map, format, width, height)
}

/// Format a number for a CSV cell: the shortest text that reads back to the same f64, empty
/// for NaN.
pub fn csv_number(x: f64) -> String {
    if x.is_nan() {
        String::new()
    } else {
        format!("{x:e}")
    }
}

/// Quote a CSV field when it needs it (RFC 4180).
pub fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

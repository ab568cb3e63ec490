//! Drawing with `plotters` primitives in pixel coordinates: the frame, ticks and labels, the
//! legend and the colour bar are laid out here, so linear and logarithmic axes share one
//! code path (a log axis maps log10 of the value linearly).

use std::sync::Once;

use plotters::backend::{BitMapBackend, DrawingBackend, SVGBackend};
use plotters::coord::Shift;
use plotters::element::DashedPathElement;
use plotters::prelude::*;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters::style::{FontStyle, FontTransform, register_font};

use super::style::{self, Dash, Marker, Rgb};
use super::{Format, HeatMap, LineChart, PlotError, Series};

static FONT: Once = Once::new();
const FONT_BYTES: &[u8] = include_bytes!("font/DejaVuSans.ttf");
const FAMILY: &str = "sans-serif";

fn register() {
    FONT.call_once(|| {
        // The embedded file is a valid TrueType font (checked by the rendering tests).
        let _ = register_font(FAMILY, FontStyle::Normal, FONT_BYTES);
    });
}

fn rgb(c: Rgb) -> RGBColor {
    RGBColor(c.0, c.1, c.2)
}

/// A text style of about `size` pixels, rounded to an even number: the glyph placement of the
/// drawing library truncates half the size plus each glyph's (whole-pixel) top, which keeps
/// all glyphs on one baseline only when half the size is whole.
fn font(size: f64) -> TextStyle<'static> {
    let even = (2.0 * (size / 2.0).round()).max(6.0);
    TextStyle::from((FAMILY, even).into_font()).color(&BLACK)
}

type Res<T> = Result<T, PlotError>;

fn draw_err(e: impl std::fmt::Display) -> PlotError {
    PlotError::Draw(e.to_string())
}

/// Render with either backend, then encode.
fn with_backend(
    format: Format,
    width: u32,
    height: u32,
    draw_png: impl FnOnce(&DrawingArea<BitMapBackend<'_>, Shift>) -> Res<()>,
    draw_svg: impl FnOnce(&DrawingArea<SVGBackend<'_>, Shift>) -> Res<()>,
) -> Res<Vec<u8>> {
    register();
    match format {
        Format::Png => {
            let mut buf = vec![255u8; width as usize * height as usize * 3];
            {
                let root =
                    BitMapBackend::with_buffer(&mut buf, (width, height)).into_drawing_area();
                draw_png(&root)?;
                root.present().map_err(draw_err)?;
            }
            let mut out = Vec::new();
            {
                let mut enc = png::Encoder::new(&mut out, width, height);
                enc.set_color(png::ColorType::Rgb);
                enc.set_depth(png::BitDepth::Eight);
                let mut w = enc
                    .write_header()
                    .map_err(|e| PlotError::Encode(e.to_string()))?;
                w.write_image_data(&buf)
                    .map_err(|e| PlotError::Encode(e.to_string()))?;
            }
            Ok(out)
        }
        Format::Svg => {
            let mut s = String::new();
            {
                let root = SVGBackend::with_string(&mut s, (width, height)).into_drawing_area();
                draw_svg(&root)?;
                root.present().map_err(draw_err)?;
            }
            Ok(s.into_bytes())
        }
    }
}

pub(super) fn chart(c: &LineChart, format: Format, width: u32, height: u32) -> Res<Vec<u8>> {
    let frame = Frame::of_chart(c)?;
    with_backend(
        format,
        width,
        height,
        |r| draw_chart(r, c, &frame),
        |r| draw_chart(r, c, &frame),
    )
}

pub(super) fn heatmap(m: &HeatMap, format: Format, width: u32, height: u32) -> Res<Vec<u8>> {
    let frame = Frame::of_heatmap(m)?;
    with_backend(
        format,
        width,
        height,
        |r| draw_heatmap(r, m, &frame),
        |r| draw_heatmap(r, m, &frame),
    )
}

// ---------------------------------------------------------------------------------------------
// Axis ranges and ticks
// ---------------------------------------------------------------------------------------------

/// Data ranges of both axes in the plotted coordinate (log10 on a log axis).
#[derive(Debug, Clone, Copy)]
struct Frame {
    x: (f64, f64),
    y: (f64, f64),
    x_log: bool,
    y_log: bool,
}

fn to_axis(v: f64, log: bool) -> Option<f64> {
    let u = if log {
        if v > 0.0 { v.log10() } else { return None }
    } else {
        v
    };
    u.is_finite().then_some(u)
}

fn from_axis(u: f64, log: bool) -> f64 {
    if log { 10f64.powf(u) } else { u }
}

fn padded(lo: f64, hi: f64, pad: f64) -> (f64, f64) {
    if hi > lo {
        let d = (hi - lo) * pad;
        (lo - d, hi + d)
    } else {
        let d = if lo.abs() > 0.0 { 0.05 * lo.abs() } else { 1.0 };
        (lo - d, hi + d)
    }
}

impl Frame {
    fn of_chart(c: &LineChart) -> Res<Frame> {
        let (mut xs, mut ys) = (Vec::new(), Vec::new());
        for s in c.series.iter().filter(|s| s.sets_range) {
            for &(x, y) in &s.points {
                if let (Some(u), Some(v)) = (to_axis(x, c.x.log), to_axis(y, c.y.log)) {
                    xs.push(u);
                    ys.push(v);
                }
            }
        }
        for r in &c.references {
            if let Some(v) = to_axis(r.y, c.y.log) {
                ys.push(v);
            }
        }
        if xs.is_empty() {
            return Err(PlotError::Empty(format!(
                "'{}': no finite point{}",
                c.title,
                if c.y.log {
                    " with a positive value"
                } else {
                    ""
                }
            )));
        }
        let span = |v: &[f64]| {
            (
                v.iter().copied().fold(f64::INFINITY, f64::min),
                v.iter().copied().fold(f64::NEG_INFINITY, f64::max),
            )
        };
        let (x0, x1) = span(&xs);
        let (y0, y1) = span(&ys);
        Ok(Frame {
            x: padded(x0, x1, 0.02),
            y: padded(y0, y1, 0.06),
            x_log: c.x.log,
            y_log: c.y.log,
        })
    }

    fn of_heatmap(m: &HeatMap) -> Res<Frame> {
        let t = |v: f64, log: bool| to_axis(v, log).unwrap_or(f64::NAN);
        Ok(Frame {
            x: (
                t(m.x_edges[0], m.x.log),
                t(*m.x_edges.last().unwrap_or(&1.0), m.x.log),
            ),
            y: (
                t(m.y_edges[0], m.y.log),
                t(*m.y_edges.last().unwrap_or(&1.0), m.y.log),
            ),
            x_log: m.x.log,
            y_log: m.y.log,
        })
    }
}

/// A "nice" step (1, 2 or 5 × 10^k) giving about `n` intervals over `span`.
fn nice_step(span: f64, n: f64) -> f64 {
    let raw = span / n;
    let p = 10f64.powf(raw.log10().floor());
    let m = raw / p;
    p * if m < 1.5 {
        1.0
    } else if m < 3.5 {
        2.0
    } else if m < 7.5 {
        5.0
    } else {
        10.0
    }
}

/// Tick positions (plotted coordinate) and their labels. `major` ticks get labels; `minor`
/// ones only grid lines.
fn ticks(lo: f64, hi: f64, log: bool, n: f64) -> (Vec<(f64, String)>, Vec<f64>) {
    let mut major = Vec::new();
    let mut minor = Vec::new();
    let eps = 1e-9 * (hi - lo).abs().max(1e-300);
    if log && hi - lo >= 1.2 {
        // Decades (every k-th if many), with 2..9 as minor ticks where there is room.
        let every = ((hi - lo) / n).ceil().max(1.0);
        let mut k = (lo / every).ceil() * every;
        while k <= hi + eps {
            major.push((k, label_number(10f64.powf(k))));
            k += every;
        }
        // One style per axis: if any decade needs a power of ten, write them all so.
        if major.iter().any(|(_, s)| !s.is_ascii()) {
            for (k, s) in &mut major {
                *s = format!("10{}", superscript(k.round() as i32));
            }
        }
        if every <= 1.0 {
            let mut d = lo.floor();
            while d <= hi {
                for m in 2..10 {
                    let u = d + f64::from(m).log10();
                    if u > lo && u < hi {
                        minor.push(u);
                    }
                }
                d += 1.0;
            }
        }
    } else if log {
        // About a decade or less: 1, 2, 3, 5 × 10^k labelled when that gives four ticks,
        // else every 1…9 × 10^k (overlapping labels are dropped when drawn); the rest minor.
        let mut round = Vec::new();
        let mut all = Vec::new();
        let mut d = lo.floor();
        while d <= hi {
            for m in 1..10 {
                let u = d + f64::from(m).log10();
                if u >= lo - eps && u <= hi + eps {
                    let t = (u, label_number(10f64.powf(d) * f64::from(m)));
                    if [1, 2, 3, 5].contains(&m) {
                        round.push(t.clone());
                    } else {
                        minor.push(u);
                    }
                    all.push(t);
                }
            }
            d += 1.0;
        }
        if round.len() >= 4 {
            major = round;
        } else {
            major = all;
            minor.clear();
        }
    } else {
        let step = nice_step(hi - lo, n);
        let mut i = (lo / step).ceil();
        while i * step <= hi + eps {
            let v = i * step;
            major.push((v, label_number(if v.abs() < eps { 0.0 } else { v })));
            i += 1.0;
        }
    }
    (major, minor)
}

fn superscript(n: i32) -> String {
    const DIGITS: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    let mut s = String::new();
    if n < 0 {
        s.push('⁻');
    }
    for c in n.unsigned_abs().to_string().chars() {
        s.push(DIGITS[c.to_digit(10).unwrap_or(0) as usize]);
    }
    s
}

/// Tick label: plain for 10⁻³ ≤ |v| < 10⁵, else m×10ⁿ (10ⁿ for m = 1).
pub(super) fn label_number(v: f64) -> String {
    if v == 0.0 || !v.is_finite() {
        return if v.is_nan() {
            "NaN".into()
        } else {
            format!("{v}")
        };
    }
    let a = v.abs();
    if (1e-3..1e5).contains(&a) {
        let s = format!("{:.6}", v);
        let s = s.trim_end_matches('0').trim_end_matches('.');
        return s.replace('-', "−");
    }
    let mut e = a.log10().floor() as i32;
    let mut m = v / 10f64.powi(e);
    if (m.abs() - 10.0).abs() < 1e-9 {
        e += 1;
        m /= 10.0;
    }
    if (m.abs() - 1.0).abs() < 1e-9 {
        format!("{}10{}", if m < 0.0 { "−" } else { "" }, superscript(e))
    } else {
        let ms = format!("{:.2}", m);
        let ms = ms.trim_end_matches('0').trim_end_matches('.');
        format!("{}×10{}", ms.replace('-', "−"), superscript(e))
    }
}

// ---------------------------------------------------------------------------------------------
// Pixel mapping and clipping
// ---------------------------------------------------------------------------------------------

/// The plotting rectangle in pixels and the map from plotted coordinates onto it.
#[derive(Debug, Clone, Copy)]
struct Plot {
    left: i32,
    top: i32,
    right: i32,
    bottom: i32,
    f: Frame,
}

impl Plot {
    fn px(&self, u: f64, v: f64) -> (i32, i32) {
        let x = self.left as f64
            + (u - self.f.x.0) / (self.f.x.1 - self.f.x.0) * (self.right - self.left) as f64;
        let y = self.bottom as f64
            - (v - self.f.y.0) / (self.f.y.1 - self.f.y.0) * (self.bottom - self.top) as f64;
        (x.round() as i32, y.round() as i32)
    }

    /// Pieces of a polyline (data units) inside the frame, in pixels.
    fn pieces(&self, pts: &[(f64, f64)]) -> Vec<Vec<(i32, i32)>> {
        let mut out: Vec<Vec<(i32, i32)>> = Vec::new();
        let mut cur: Vec<(i32, i32)> = Vec::new();
        let mut prev: Option<(f64, f64)> = None;
        for &(x, y) in pts {
            let p = match (to_axis(x, self.f.x_log), to_axis(y, self.f.y_log)) {
                (Some(u), Some(v)) => Some((u, v)),
                _ => None,
            };
            match (prev, p) {
                (Some(a), Some(b)) => {
                    if let Some((c, d, cut_start, cut_end)) = self.clip(a, b) {
                        if cut_start || cur.is_empty() {
                            if cur.len() > 1 {
                                out.push(std::mem::take(&mut cur));
                            }
                            cur.clear();
                            cur.push(self.px(c.0, c.1));
                        }
                        cur.push(self.px(d.0, d.1));
                        if cut_end {
                            out.push(std::mem::take(&mut cur));
                        }
                    } else if !cur.is_empty() {
                        out.push(std::mem::take(&mut cur));
                    }
                }
                (None, Some(b)) => {
                    if cur.len() > 1 {
                        out.push(std::mem::take(&mut cur));
                    }
                    cur.clear();
                    if self.inside(b) {
                        cur.push(self.px(b.0, b.1));
                    }
                }
                (_, None) => {
                    if cur.len() > 1 {
                        out.push(std::mem::take(&mut cur));
                    }
                    cur.clear();
                }
            }
            prev = p;
        }
        if !cur.is_empty() {
            out.push(cur);
        }
        out
    }

    fn inside(&self, (u, v): (f64, f64)) -> bool {
        u >= self.f.x.0 && u <= self.f.x.1 && v >= self.f.y.0 && v <= self.f.y.1
    }

    /// Liang–Barsky clipping of segment a→b to the frame: the clipped ends and whether each
    /// end was moved.
    #[allow(clippy::type_complexity)]
    fn clip(&self, a: (f64, f64), b: (f64, f64)) -> Option<((f64, f64), (f64, f64), bool, bool)> {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let (mut t0, mut t1) = (0.0f64, 1.0f64);
        for (p, q) in [
            (-dx, a.0 - self.f.x.0),
            (dx, self.f.x.1 - a.0),
            (-dy, a.1 - self.f.y.0),
            (dy, self.f.y.1 - a.1),
        ] {
            if p == 0.0 {
                if q < 0.0 {
                    return None;
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
        if t0 > t1 {
            return None;
        }
        let at = |t: f64| (a.0 + t * dx, a.1 + t * dy);
        Some((at(t0), at(t1), t0 > 0.0, t1 < 1.0))
    }
}

fn stroke(c: Rgb, width: u32) -> ShapeStyle {
    ShapeStyle {
        color: rgb(c).to_rgba(),
        filled: false,
        stroke_width: width,
    }
}

fn draw_polyline<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    pts: Vec<(i32, i32)>,
    colour: Rgb,
    width: u32,
    dash: Dash,
) -> Res<()> {
    let st = stroke(colour, width);
    match dash.pattern() {
        None => root.draw(&PathElement::new(pts, st)).map_err(draw_err),
        Some((on, off)) => root
            .draw(&DashedPathElement::new(pts, on as i32, off as i32, st))
            .map_err(draw_err),
    }
}

fn draw_marker<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    (x, y): (i32, i32),
    m: Marker,
    c: Rgb,
) -> Res<()> {
    let fill = rgb(c).filled();
    let line = stroke(c, 2);
    let r = 4;
    match m {
        Marker::Disc => root.draw(&Circle::new((x, y), r, fill)),
        Marker::Ring => root.draw(&Circle::new((x, y), r, line)),
        Marker::Square => root.draw(&Rectangle::new([(x - r, y - r), (x + r, y + r)], line)),
        Marker::Triangle => root.draw(&Polygon::new(
            vec![(x, y - r - 1), (x + r + 1, y + r), (x - r - 1, y + r)],
            fill,
        )),
        Marker::Diamond => root.draw(&Polygon::new(
            vec![
                (x, y - r - 1),
                (x + r + 1, y),
                (x, y + r + 1),
                (x - r - 1, y),
            ],
            fill,
        )),
        Marker::Cross => {
            root.draw(&PathElement::new(
                vec![(x - r, y - r), (x + r, y + r)],
                line,
            ))
            .map_err(draw_err)?;
            root.draw(&PathElement::new(
                vec![(x - r, y + r), (x + r, y - r)],
                line,
            ))
        }
    }
    .map_err(draw_err)
}

fn text<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    s: &str,
    style: &TextStyle,
    at: (i32, i32),
) -> Res<()> {
    root.draw_text(s, style, at).map_err(draw_err)
}

fn text_width<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    s: &str,
    style: &TextStyle,
) -> i32 {
    root.estimate_text_size(s, style)
        .map(|(w, _)| w as i32)
        .unwrap_or(8 * s.chars().count() as i32)
}

/// The black frame around the plotting rectangle.
fn draw_frame<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>, plot: &Plot) -> Res<()> {
    let (l, t, r, b) = (plot.left, plot.top, plot.right, plot.bottom);
    let corners = vec![(l, t), (r, t), (r, b), (l, b), (l, t)];
    draw_polyline(root, corners, Rgb(0, 0, 0), 1, Dash::Solid)
}

/// Frame, grid lines, ticks, tick labels and axis labels. Returns the plotting rectangle.
#[allow(clippy::too_many_arguments)]
fn draw_axes<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    title: &str,
    x_label: &str,
    y_label: &str,
    f: Frame,
    right_reserve: i32,
    grid: bool,
) -> Res<Plot> {
    let (w, h) = root.dim_in_pixel();
    let scale = text_scale(w, h);
    let (w, h) = (w as i32, h as i32);
    let title_font = font(20.0 * scale);
    let label_font = font(16.0 * scale);
    let tick_font = font(13.5 * scale);
    let title_h = (34.0 * scale) as i32;
    let left = (84.0 * scale) as i32;
    let bottom_reserve = (58.0 * scale) as i32;
    let plot = Plot {
        left,
        top: title_h + (8.0 * scale) as i32,
        right: w - right_reserve - (14.0 * scale) as i32,
        bottom: h - bottom_reserve,
        f,
    };
    if plot.right - plot.left < 40 || plot.bottom - plot.top < 40 {
        return Err(PlotError::Size {
            width: w as u32,
            height: h as u32,
        });
    }
    text(
        root,
        title,
        &title_font.pos(Pos::new(HPos::Center, VPos::Center)),
        ((plot.left + plot.right) / 2, title_h / 2 + 4),
    )?;
    let (xt, xm) = ticks(f.x.0, f.x.1, f.x_log, 7.0);
    let (yt, ym) = ticks(f.y.0, f.y.1, f.y_log, 6.0);
    if grid {
        for &u in &xm {
            let (px, _) = plot.px(u, f.y.0);
            draw_polyline(
                root,
                vec![(px, plot.top), (px, plot.bottom)],
                style::GRID_LIGHT,
                1,
                Dash::Solid,
            )?;
        }
        for &v in &ym {
            let (_, py) = plot.px(f.x.0, v);
            draw_polyline(
                root,
                vec![(plot.left, py), (plot.right, py)],
                style::GRID_LIGHT,
                1,
                Dash::Solid,
            )?;
        }
        for (u, _) in &xt {
            let (px, _) = plot.px(*u, f.y.0);
            draw_polyline(
                root,
                vec![(px, plot.top), (px, plot.bottom)],
                style::GRID_BOLD,
                1,
                Dash::Solid,
            )?;
        }
        for (v, _) in &yt {
            let (_, py) = plot.px(f.x.0, *v);
            draw_polyline(
                root,
                vec![(plot.left, py), (plot.right, py)],
                style::GRID_BOLD,
                1,
                Dash::Solid,
            )?;
        }
    }
    let black = Rgb(0, 0, 0);
    let tick = (6.0 * scale) as i32;
    let mut last_right = i32::MIN;
    for (u, s) in &xt {
        let (px, _) = plot.px(*u, f.y.0);
        draw_polyline(
            root,
            vec![(px, plot.bottom), (px, plot.bottom + tick)],
            black,
            1,
            Dash::Solid,
        )?;
        // Leave out a label that would touch the previous one.
        let half = text_width(root, s, &tick_font) / 2;
        if px - half < last_right + (8.0 * scale) as i32 {
            continue;
        }
        last_right = px + half;
        text(
            root,
            s,
            &tick_font.pos(Pos::new(HPos::Center, VPos::Top)),
            (px, plot.bottom + tick + 3),
        )?;
    }
    let mut last_y = i32::MAX;
    let min_gap = (20.0 * scale) as i32;
    for (v, s) in &yt {
        let (_, py) = plot.px(f.x.0, *v);
        draw_polyline(
            root,
            vec![(plot.left - tick, py), (plot.left, py)],
            black,
            1,
            Dash::Solid,
        )?;
        if last_y.saturating_sub(py) < min_gap {
            continue;
        }
        last_y = py;
        text(
            root,
            s,
            &tick_font.pos(Pos::new(HPos::Right, VPos::Center)),
            (plot.left - tick - 4, py),
        )?;
    }
    draw_frame(root, &plot)?;
    text(
        root,
        x_label,
        &label_font.pos(Pos::new(HPos::Center, VPos::Bottom)),
        ((plot.left + plot.right) / 2, h - (6.0 * scale) as i32),
    )?;
    text(
        root,
        y_label,
        &label_font
            .transform(FontTransform::Rotate270)
            .pos(Pos::new(HPos::Center, VPos::Top)),
        ((8.0 * scale) as i32, (plot.top + plot.bottom) / 2),
    )?;
    Ok(plot)
}

fn legend_sample<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    s: &Series,
    x: i32,
    y: i32,
    len: i32,
) -> Res<()> {
    draw_polyline(root, vec![(x, y), (x + len, y)], s.colour, s.width, s.dash)?;
    if let Some(m) = s.marker {
        draw_marker(root, (x + len / 2, y), m, s.colour)?;
    }
    Ok(())
}

/// White canvas; its width and the text scale (1 at 800×600).
fn begin<DB: DrawingBackend>(root: &DrawingArea<DB, Shift>) -> Res<(u32, f64)> {
    root.fill(&WHITE).map_err(draw_err)?;
    let (w, h) = root.dim_in_pixel();
    Ok((w, text_scale(w, h)))
}

fn text_scale(w: u32, h: u32) -> f64 {
    (f64::from(h.min(w * 3 / 4)) / 600.0).clamp(0.6, 3.0)
}

fn draw_chart<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    c: &LineChart,
    f: &Frame,
) -> Res<()> {
    let (w, scale) = begin(root)?;
    let legend_font = font(13.0 * scale);
    let note_font = font(11.5 * scale).color(&RGBColor(0x40, 0x40, 0x40));
    let sample_len = (44.0 * scale) as i32;
    let entries: Vec<&Series> = c.series.iter().filter(|s| !s.label.is_empty()).collect();
    let widest = entries
        .iter()
        .map(|s| text_width(root, &s.label, &legend_font))
        .chain(c.note.iter().map(|n| text_width(root, n, &note_font)))
        .max()
        .unwrap_or(0);
    let reserve = (widest + sample_len + (26.0 * scale) as i32).min(w as i32 * 2 / 5);
    let plot = draw_axes(root, &c.title, &c.x.label, &c.y.label, *f, reserve, true)?;
    // Regions: inner boundaries and labels at the top.
    let grey = rgb(style::REFERENCE);
    let label_font = font(13.0 * scale).color(&grey);
    for (i, r) in c.regions.iter().enumerate() {
        if i > 0 {
            let pts = plot.pieces(&[
                (r.from, from_axis(f.y.0, f.y_log)),
                (r.from, from_axis(f.y.1, f.y_log)),
            ]);
            for p in pts {
                draw_polyline(root, p, style::REFERENCE, 1, Dash::Short)?;
            }
        }
        let (a, b) = (
            to_axis(r.from, f.x_log).unwrap_or(f.x.0).max(f.x.0),
            to_axis(r.to, f.x_log).unwrap_or(f.x.1).min(f.x.1),
        );
        if b > a {
            let (px, _) = plot.px(0.5 * (a + b), f.y.1);
            text(
                root,
                &r.label,
                &label_font.pos(Pos::new(HPos::Center, VPos::Top)),
                (px, plot.top + 6),
            )?;
        }
    }
    for r in &c.references {
        let pts = plot.pieces(&[
            (from_axis(f.x.0, f.x_log), r.y),
            (from_axis(f.x.1, f.x_log), r.y),
        ]);
        for p in pts {
            draw_polyline(root, p, style::REFERENCE, 1, Dash::Long)?;
        }
        if let Some(v) = to_axis(r.y, f.y_log) {
            let (_, py) = plot.px(f.x.1, v);
            text(
                root,
                &r.label,
                &label_font.pos(Pos::new(HPos::Right, VPos::Bottom)),
                (plot.right - 6, py - 3),
            )?;
        }
    }
    for s in &c.series {
        for piece in plot.pieces(&s.points) {
            draw_polyline(root, piece, s.colour, s.width, s.dash)?;
        }
        if let Some(m) = s.marker {
            for &(x, y) in &s.points {
                if let (Some(u), Some(v)) = (to_axis(x, f.x_log), to_axis(y, f.y_log))
                    && plot.inside((u, v))
                {
                    draw_marker(root, plot.px(u, v), m, s.colour)?;
                }
            }
        }
    }
    // Legend to the right of the plot.
    let x0 = plot.right + (14.0 * scale) as i32;
    let row = ((20.0 * scale) as i32)
        .min(((plot.bottom - plot.top) / (entries.len() + c.note.len() + 1).max(1) as i32).max(10));
    let mut y = plot.top + row / 2;
    for s in &entries {
        legend_sample(root, s, x0, y, sample_len)?;
        text(
            root,
            &s.label,
            &legend_font.pos(Pos::new(HPos::Left, VPos::Center)),
            (x0 + sample_len + 6, y),
        )?;
        y += row;
    }
    y += row / 2;
    for n in &c.note {
        text(
            root,
            n,
            &note_font.pos(Pos::new(HPos::Left, VPos::Center)),
            (x0, y),
        )?;
        y += row * 4 / 5;
    }
    Ok(())
}

fn draw_heatmap<DB: DrawingBackend>(
    root: &DrawingArea<DB, Shift>,
    m: &HeatMap,
    f: &Frame,
) -> Res<()> {
    let (w, scale) = begin(root)?;
    let note_font = font(11.5 * scale).color(&RGBColor(0x40, 0x40, 0x40));
    let vals: Vec<f64> = m
        .values
        .iter()
        .flatten()
        .filter_map(|&v| to_axis(v, m.log_value))
        .collect();
    if vals.is_empty() {
        return Err(PlotError::Empty(format!(
            "'{}': no cell has a value",
            m.title
        )));
    }
    let lo = vals.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = vals.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    // Colour-bar range: whole decades on a log scale.
    let (c0, c1) = if m.log_value {
        let (a, b) = (lo.floor(), hi.ceil());
        if b > a { (a, b) } else { (a, a + 1.0) }
    } else if hi > lo {
        (lo, hi)
    } else {
        padded(lo, hi, 0.0)
    };
    let bar_w = (22.0 * scale) as i32;
    let tick_font = font(13.5 * scale);
    let widest_note = m
        .note
        .iter()
        .map(|n| text_width(root, n, &note_font))
        .max()
        .unwrap_or(0);
    let reserve = ((110.0 * scale) as i32).max(widest_note + (20.0 * scale) as i32);
    let reserve = reserve.min(w as i32 * 2 / 5);
    let plot = draw_axes(root, &m.title, &m.x.label, &m.y.label, *f, reserve, false)?;
    let nx = m.x_edges.len() - 1;
    let t = |v: f64, log: bool| to_axis(v, log).unwrap_or(f64::NAN);
    for iy in 0..m.y_edges.len() - 1 {
        for ix in 0..nx {
            let (x0, y0) = plot.px(t(m.x_edges[ix], m.x.log), t(m.y_edges[iy], m.y.log));
            let (x1, y1) = plot.px(t(m.x_edges[ix + 1], m.x.log), t(m.y_edges[iy + 1], m.y.log));
            match m.values[iy * nx + ix].and_then(|v| to_axis(v, m.log_value)) {
                Some(v) => {
                    let c = style::ramp((v - c0) / (c1 - c0));
                    root.draw(&Rectangle::new([(x0, y1), (x1, y0)], rgb(c).filled()))
                        .map_err(draw_err)?;
                }
                None => {
                    root.draw(&Rectangle::new(
                        [(x0, y1), (x1, y0)],
                        rgb(style::MISSING).filled(),
                    ))
                    .map_err(draw_err)?;
                    let grey = stroke(style::REFERENCE, 1);
                    root.draw(&PathElement::new(vec![(x0, y0), (x1, y1)], grey))
                        .map_err(draw_err)?;
                    root.draw(&PathElement::new(vec![(x0, y1), (x1, y0)], grey))
                        .map_err(draw_err)?;
                }
            }
        }
    }
    // Cell borders in white, then the frame again on top.
    for e in &m.x_edges {
        let (px, _) = plot.px(t(*e, m.x.log), f.y.0);
        draw_polyline(
            root,
            vec![(px, plot.top), (px, plot.bottom)],
            Rgb(255, 255, 255),
            1,
            Dash::Solid,
        )?;
    }
    for e in &m.y_edges {
        let (_, py) = plot.px(f.x.0, t(*e, m.y.log));
        draw_polyline(
            root,
            vec![(plot.left, py), (plot.right, py)],
            Rgb(255, 255, 255),
            1,
            Dash::Solid,
        )?;
    }
    draw_frame(root, &plot)?;
    // Colour bar.
    let bx = plot.right + (18.0 * scale) as i32;
    let (bt, bb) = (
        plot.top + (26.0 * scale) as i32,
        plot.bottom - (90.0 * scale) as i32,
    );
    text(
        root,
        &m.value_label,
        &font(13.0 * scale).pos(Pos::new(HPos::Left, VPos::Bottom)),
        (bx, bt - 6),
    )?;
    let steps = (bb - bt).max(1);
    for i in 0..steps {
        let c = style::ramp(1.0 - f64::from(i) / f64::from(steps));
        root.draw(&Rectangle::new(
            [(bx, bt + i), (bx + bar_w, bt + i + 1)],
            rgb(c).filled(),
        ))
        .map_err(draw_err)?;
    }
    root.draw(&Rectangle::new(
        [(bx, bt), (bx + bar_w, bb)],
        stroke(Rgb(0, 0, 0), 1),
    ))
    .map_err(draw_err)?;
    let (bticks, _) = ticks(c0, c1, m.log_value, 5.0);
    for (v, s) in bticks {
        let py = bb - ((v - c0) / (c1 - c0) * f64::from(bb - bt)).round() as i32;
        draw_polyline(
            root,
            vec![(bx + bar_w, py), (bx + bar_w + 5, py)],
            Rgb(0, 0, 0),
            1,
            Dash::Solid,
        )?;
        text(
            root,
            &s,
            &tick_font.pos(Pos::new(HPos::Left, VPos::Center)),
            (bx + bar_w + 8, py),
        )?;
    }
    let mut y = bb + (24.0 * scale) as i32;
    root.draw(&Rectangle::new(
        [(bx, y - 6), (bx + 12, y + 6)],
        rgb(style::MISSING).filled(),
    ))
    .map_err(draw_err)?;
    text(
        root,
        "no value",
        &note_font.pos(Pos::new(HPos::Left, VPos::Center)),
        (bx + 18, y),
    )?;
    y += (20.0 * scale) as i32;
    for n in &m.note {
        text(
            root,
            n,
            &note_font.pos(Pos::new(HPos::Left, VPos::Center)),
            (bx, y),
        )?;
        y += (16.0 * scale) as i32;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tick_labels() {
        assert_eq!(label_number(1e4), "10000");
        assert_eq!(label_number(1e5), "10⁵");
        assert_eq!(label_number(2.5e-7), "2.5×10⁻⁷");
        assert_eq!(label_number(-0.5), "−0.5");
        assert_eq!(label_number(0.0), "0");
    }

    #[test]
    fn decade_ticks_on_a_log_axis() {
        let (major, minor) = ticks(-1.2, 2.3, true, 7.0);
        let at: Vec<f64> = major.iter().map(|m| m.0).collect();
        assert_eq!(at.len(), 4);
        for (a, b) in at.iter().zip([-1.0, 0.0, 1.0, 2.0]) {
            assert!((a - b).abs() < 1e-12);
        }
        assert!(minor.len() > 20);
    }

    #[test]
    fn clipping_keeps_the_inside_part() {
        let p = Plot {
            left: 0,
            top: 0,
            right: 100,
            bottom: 100,
            f: Frame {
                x: (0.0, 1.0),
                y: (0.0, 1.0),
                x_log: false,
                y_log: false,
            },
        };
        // From inside to far above: the piece ends on the top edge, at x = 0.5 + 0.5·(0.5/1.5).
        let pieces = p.pieces(&[(0.5, 0.5), (1.0, 2.0)]);
        assert_eq!(pieces.len(), 1);
        assert_eq!(pieces[0], vec![(50, 50), (67, 0)]);
        // A NaN breaks the line into two pieces.
        let pieces = p.pieces(&[
            (0.1, 0.1),
            (0.2, 0.2),
            (f64::NAN, 0.3),
            (0.4, 0.4),
            (0.5, 0.5),
        ]);
        assert_eq!(pieces.len(), 2);
    }
}

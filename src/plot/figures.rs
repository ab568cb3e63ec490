//! The project's figures as charts, each with the CSV of exactly what it plots:
//!
//! - [`strength_chart`]: a per-line grid quantity against one axis (usually temperature), one
//!   curve per line and per value of a second axis, the other axes held at chosen nodes;
//! - [`growth_chart`]: a curve of growth with its linear, flat and damping asymptotes and
//!   the three regimes marked;
//! - [`profile_chart`]: the normalised spectrum across one line with the continuum level;
//! - [`audit_map`]: interpolation error per cell over two axes;
//! - [`departure_chart`]: departure coefficients b_n against electron density.

use ndarray::ArrayD;

use super::departure::DepartureTable;
use super::style::{self, Dash, Marker};
use super::{
    Axis, HeatMap, LineChart, PlotError, Reference, Region, Series, csv_field, csv_number,
};
use crate::formation::growth::GrowthPoint;
use crate::grid::store::{AxisMeta, DatasetMeta};

/// A short symbol for an axis in legends (`metallicity` → `[M/H]`).
pub fn axis_symbol(name: &str) -> String {
    match name {
        "temperature" => "T".into(),
        "metallicity" => "[M/H]".into(),
        "gas_pressure" => "P_gas".into(),
        "electron_pressure" => "P_e".into(),
        "electron_density" => "n_e".into(),
        "hydrogen_density" => "n_H".into(),
        "helium_ratio" => "He/H".into(),
        other => other.replace('_', " "),
    }
}

/// Axis label with units: "long name (units)", units left out when dimensionless.
pub fn axis_label(long_name: &str, units: &str) -> String {
    match units.trim() {
        "" | "1" => long_name.to_string(),
        "angstrom" | "Angstrom" | "A" => format!("{long_name} (Å)"),
        u => format!("{long_name} ({})", pretty_units(u)),
    }
}

/// Units with superscripts (`cm-3` → `cm⁻³`, `dyn cm-2` → `dyn cm⁻²`).
pub fn pretty_units(u: &str) -> String {
    let mut out = String::new();
    let mut chars = u.chars().peekable();
    while let Some(c) = chars.next() {
        let exponent = (c == '^' || c == '-')
            && chars
                .peek()
                .is_some_and(|d| d.is_ascii_digit() || *d == '-');
        if exponent && out.chars().last().is_some_and(|p| p.is_alphabetic()) || c == '^' {
            if c == '-' {
                out.push('⁻');
            }
            while let Some(&d) = chars.peek() {
                let sup = match d {
                    '-' => '⁻',
                    '0' => '⁰',
                    '1' => '¹',
                    '2' => '²',
                    '3' => '³',
                    '4' => '⁴',
                    '5' => '⁵',
                    '6' => '⁶',
                    '7' => '⁷',
                    '8' => '⁸',
                    '9' => '⁹',
                    _ => break,
                };
                out.push(sup);
                chars.next();
            }
        } else {
            out.push(c);
        }
    }
    out
}

fn number_text(v: f64) -> String {
    super::render::label_number(v)
}

// ---------------------------------------------------------------------------------------------
// Line strength against an axis
// ---------------------------------------------------------------------------------------------

/// Which slice of a grid to draw.
#[derive(Debug, Clone)]
pub struct StrengthSpec {
    /// The grid's axes.
    pub axes: Vec<AxisMeta>,
    /// The per-line dataset.
    pub dataset: DatasetMeta,
    /// The horizontal axis.
    pub x_axis: usize,
    /// One curve per node of this axis (per line), if any.
    pub by_axis: Option<usize>,
    /// Node index of every axis (used for the axes that are neither `x_axis` nor `by_axis`).
    pub fixed: Vec<usize>,
    /// (index in the line table, label) of each line drawn.
    pub lines: Vec<(usize, String)>,
    /// Logarithmic x.
    pub log_x: bool,
    /// Logarithmic y.
    pub log_y: bool,
}

/// One curve of a [`StrengthSpec`]: stored values along the x axis.
#[derive(Debug, Clone, PartialEq)]
pub struct StrengthCurve {
    /// Line label.
    pub line: String,
    /// Node value of the `by_axis`, if any.
    pub by_value: Option<f64>,
    /// Node values of the x axis.
    pub x: Vec<f64>,
    /// Stored values (NaN where not computed).
    pub value: Vec<f64>,
    /// Status code of each point (0 converged).
    pub status: Vec<u8>,
}

/// Resolve `AXIS=VALUE` choices into node indices. `x` and `by` name the free axes; every
/// other axis takes the given node, else its middle node. A value must be one of the axis'
/// nodes (to 1e-9 relative) — no interpolation.
pub fn resolve_nodes(
    axes: &[AxisMeta],
    x: &str,
    by: Option<&str>,
    fixes: &[(String, f64)],
) -> Result<(usize, Option<usize>, Vec<usize>), PlotError> {
    let known = || {
        axes.iter()
            .map(|a| a.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    };
    let find = |name: &str, what: &str| {
        axes.iter()
            .position(|a| a.name == name)
            .ok_or_else(|| PlotError::UnknownAxis {
                what: what.to_string(),
                name: name.to_string(),
                known: known(),
            })
    };
    let xi = find(x, "--x")?;
    let bi = by.map(|b| find(b, "--by")).transpose()?;
    if bi == Some(xi) {
        return Err(PlotError::Conflict(format!("--by {x} is also the x axis")));
    }
    let mut fixed: Vec<usize> = axes.iter().map(|a| a.values.len() / 2).collect();
    let mut seen = Vec::new();
    for (name, v) in fixes {
        let k = find(name, "--fix")?;
        if k == xi || Some(k) == bi {
            return Err(PlotError::Conflict(format!(
                "--fix {name}: that axis is drawn (x or --by), it cannot be fixed"
            )));
        }
        if seen.contains(&k) {
            return Err(PlotError::Conflict(format!("--fix {name} given twice")));
        }
        seen.push(k);
        let a = &axes[k];
        let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        if !v.is_finite() || *v < lo - 1e-9 * lo.abs() || *v > hi + 1e-9 * hi.abs() {
            return Err(PlotError::OutOfRange {
                axis: name.clone(),
                value: *v,
                lo,
                hi,
            });
        }
        let tol = |n: f64| 1e-9 * n.abs().max(1e-300);
        fixed[k] = a
            .values
            .iter()
            .position(|n| (n - v).abs() <= tol(*n))
            .ok_or_else(|| PlotError::NotANode {
                axis: name.clone(),
                value: *v,
                nodes: a
                    .values
                    .iter()
                    .map(|n| csv_number(*n))
                    .collect::<Vec<_>>()
                    .join(", "),
            })?;
    }
    Ok((xi, bi, fixed))
}

/// The curves of a spec from a per-line dataset (shape axes…, line) and the status codes.
pub fn strength_curves(
    spec: &StrengthSpec,
    data: &ArrayD<f64>,
    status: &ArrayD<u8>,
) -> Vec<StrengthCurve> {
    let by_nodes: Vec<Option<usize>> = match spec.by_axis {
        Some(b) => (0..spec.axes[b].values.len()).map(Some).collect(),
        None => vec![None],
    };
    let mut out = Vec::new();
    for (k, label) in &spec.lines {
        for &bn in &by_nodes {
            let mut idx = spec.fixed.clone();
            if let (Some(b), Some(n)) = (spec.by_axis, bn) {
                idx[b] = n;
            }
            let xs = &spec.axes[spec.x_axis].values;
            let mut c = StrengthCurve {
                line: label.clone(),
                by_value: spec.by_axis.zip(bn).map(|(b, n)| spec.axes[b].values[n]),
                x: xs.clone(),
                value: Vec::with_capacity(xs.len()),
                status: Vec::with_capacity(xs.len()),
            };
            for i in 0..xs.len() {
                idx[spec.x_axis] = i;
                let mut full = idx.clone();
                full.push(*k);
                c.value.push(data[full.as_slice()]);
                c.status.push(status[idx.as_slice()]);
            }
            out.push(c);
        }
    }
    out
}

/// The chart of [`strength_curves`]. Colour and marker follow the line; the dash pattern
/// follows the `by` value (with one line, colour follows the `by` value too).
pub fn strength_chart(spec: &StrengthSpec, curves: &[StrengthCurve], title: &str) -> LineChart {
    let xa = &spec.axes[spec.x_axis];
    let n_by = spec.by_axis.map_or(1, |b| spec.axes[b].values.len());
    let one_line = spec.lines.len() == 1;
    let series = curves
        .iter()
        .enumerate()
        .map(|(i, c)| {
            let (li, bi) = (i / n_by, i % n_by);
            let ci = if one_line { bi } else { li };
            let label = match (spec.by_axis, c.by_value) {
                (Some(b), Some(v)) => {
                    let a = &spec.axes[b];
                    let u = match a.units.as_str() {
                        "" | "1" => String::new(),
                        u => format!(" {}", pretty_units(u)),
                    };
                    if one_line {
                        format!("{} = {}{u}", axis_symbol(&a.name), number_text(v))
                    } else {
                        format!(
                            "{}, {} = {}{u}",
                            c.line,
                            axis_symbol(&a.name),
                            number_text(v)
                        )
                    }
                }
                _ => c.line.clone(),
            };
            Series {
                label,
                points: c
                    .x
                    .iter()
                    .zip(c.value.iter().zip(&c.status))
                    .map(|(&x, (&v, &s))| (x, if s == 0 { v } else { f64::NAN }))
                    .collect(),
                colour: style::colour(ci),
                dash: Dash::nth(bi),
                marker: Some(Marker::nth(ci)),
                width: 2,
                sets_range: true,
            }
        })
        .collect();
    let note = spec
        .axes
        .iter()
        .enumerate()
        .filter(|(d, _)| *d != spec.x_axis && Some(*d) != spec.by_axis)
        .map(|(d, a)| {
            let u = match a.units.as_str() {
                "" | "1" => String::new(),
                u => format!(" {}", pretty_units(u)),
            };
            format!(
                "{} = {}{u}",
                axis_symbol(&a.name),
                number_text(a.values[spec.fixed[d]])
            )
        })
        .collect();
    LineChart {
        title: title.to_string(),
        x: Axis::new(axis_label(&xa.long_name, &xa.units), spec.log_x),
        y: Axis::new(
            axis_label(&spec.dataset.long_name, &spec.dataset.units),
            spec.log_y,
        ),
        series,
        regions: vec![],
        references: vec![],
        note,
    }
}

/// CSV of [`strength_curves`]: `line,<by axis>,<x axis>,<other axes…>,<dataset>,status`, one
/// row per plotted point, values in shortest round-trip form.
pub fn strength_csv(spec: &StrengthSpec, curves: &[StrengthCurve]) -> String {
    let others: Vec<usize> = (0..spec.axes.len())
        .filter(|d| *d != spec.x_axis && Some(*d) != spec.by_axis)
        .collect();
    let mut head = vec!["line".to_string()];
    if let Some(b) = spec.by_axis {
        head.push(spec.axes[b].name.clone());
    }
    head.push(spec.axes[spec.x_axis].name.clone());
    head.extend(others.iter().map(|d| spec.axes[*d].name.clone()));
    head.push(spec.dataset.name.clone());
    head.push("status".into());
    let mut s = head.join(",");
    s.push('\n');
    for c in curves {
        for i in 0..c.x.len() {
            let mut row = vec![csv_field(&c.line)];
            if let Some(v) = c.by_value {
                row.push(csv_number(v));
            }
            row.push(csv_number(c.x[i]));
            row.extend(
                others
                    .iter()
                    .map(|d| csv_number(spec.axes[*d].values[spec.fixed[*d]])),
            );
            row.push(csv_number(c.value[i]));
            row.push(c.status[i].to_string());
            s.push_str(&row.join(","));
            s.push('\n');
        }
    }
    s
}

// ---------------------------------------------------------------------------------------------
// Curve of growth
// ---------------------------------------------------------------------------------------------

/// What a curve-of-growth chart says about its line.
#[derive(Debug, Clone, PartialEq)]
pub struct GrowthInfo {
    /// Line label.
    pub label: String,
    /// Customary wavelength, Å.
    pub wavelength_angstrom: f64,
    /// Doppler width, Å.
    pub doppler_width_angstrom: f64,
    /// Voigt damping parameter.
    pub damping_parameter: f64,
    /// The gas, in words (for the note).
    pub gas: String,
}

/// Where the regimes of a curve of growth meet, as values of N f λ (cm): τ₀ = 1 (linear →
/// flat) and the first crossing of the flat and damping asymptotes (flat → damping).
pub fn growth_regimes(points: &[GrowthPoint]) -> (Option<f64>, Option<f64>) {
    // τ₀ is proportional to N at fixed line, so τ₀ = 1 lies at N f λ / τ₀ of any point.
    let lin_flat = points
        .iter()
        .find(|p| p.tau0 > 0.0 && p.tau0.is_finite())
        .map(|p| 10f64.powf(p.log_nf_lambda) / p.tau0);
    let mut flat_damp = None;
    for w in points.windows(2) {
        if let (Some(f0), Some(f1)) = (w[0].flat, w[1].flat) {
            let (r0, r1) = ((w[0].damping / f0).ln(), (w[1].damping / f1).ln());
            if r0 < 0.0 && r1 >= 0.0 {
                let t = r0 / (r0 - r1);
                flat_damp = Some(
                    10f64.powf(w[0].log_nf_lambda + t * (w[1].log_nf_lambda - w[0].log_nf_lambda)),
                );
                break;
            }
        }
    }
    (lin_flat, flat_damp)
}

/// Curve of growth: W_λ against N f λ (log–log), the three asymptotes (dashed, clipped to the
/// computed curve's range) and the regimes.
pub fn growth_chart(info: &GrowthInfo, points: &[GrowthPoint]) -> LineChart {
    let x = |p: &GrowthPoint| 10f64.powf(p.log_nf_lambda);
    let mk = |label: &str, i: usize, dash: Dash, pts: Vec<(f64, f64)>, main: bool| Series {
        label: label.to_string(),
        points: pts,
        colour: style::colour(i),
        dash,
        marker: None,
        width: if main { 3 } else { 2 },
        sets_range: main,
    };
    let stark = points.iter().any(|p| p.stark.is_some());
    let mut series = vec![
        mk(
            if stark {
                "W_λ (Stark profile)"
            } else {
                "W_λ (Voigt profile)"
            },
            0,
            Dash::Solid,
            points.iter().map(|p| (x(p), p.equivalent_width)).collect(),
            true,
        ),
        mk(
            "linear: (πe²/mₑc²) N f λ²",
            3,
            Dash::Long,
            points.iter().map(|p| (x(p), p.linear)).collect(),
            false,
        ),
        mk(
            "flat: 2Δλ_D √(ln τ₀)",
            2,
            Dash::Short,
            points
                .iter()
                .map(|p| (x(p), p.flat.unwrap_or(f64::NAN)))
                .collect(),
            false,
        ),
        mk(
            "damping: 2√(π A)",
            1,
            Dash::Dotted,
            points.iter().map(|p| (x(p), p.damping)).collect(),
            false,
        ),
    ];
    if stark {
        series.push(mk(
            "quasi-static (ions): 2Γ(3/5) K^{2/5}",
            4,
            Dash::Dotted,
            points
                .iter()
                .map(|p| (x(p), p.stark.unwrap_or(f64::NAN)))
                .collect(),
            false,
        ));
    }
    let (lo, hi) = (points.first().map_or(1.0, x), points.last().map_or(10.0, x));
    let (b1, b2) = growth_regimes(points);
    let mut regions = Vec::new();
    let b1c = b1.map(|b| b.clamp(lo, hi));
    let b2c = b2.map(|b| b.clamp(b1c.unwrap_or(lo), hi));
    regions.push(Region {
        from: lo,
        to: b1c.unwrap_or(hi),
        label: "linear".into(),
    });
    if let Some(b) = b1c {
        regions.push(Region {
            from: b,
            to: b2c.unwrap_or(hi),
            label: "flat (Doppler)".into(),
        });
    }
    if let Some(b) = b2c {
        regions.push(Region {
            from: b,
            to: hi,
            label: "damping".into(),
        });
    }
    LineChart {
        title: format!(
            "Curve of growth: {} ({} Å)",
            info.label,
            number_text((info.wavelength_angstrom * 1000.0).round() / 1000.0)
        ),
        x: Axis::new("N f λ (cm⁻¹: N in cm⁻², λ in cm)", true),
        y: Axis::new("equivalent width W_λ (Å)", true),
        series,
        regions,
        references: vec![],
        note: vec![
            info.gas.clone(),
            format!(
                "Δλ_D = {} Å, a = {}",
                number_text(sig(info.doppler_width_angstrom, 3)),
                number_text(sig(info.damping_parameter, 3))
            ),
            "regimes meet at τ₀ = 1".into(),
            "and where flat = damping".into(),
        ],
    }
}

/// Round to `n` significant figures (for labels).
fn sig(v: f64, n: i32) -> f64 {
    if v == 0.0 || !v.is_finite() {
        return v;
    }
    let p = 10f64.powi(n - 1 - v.abs().log10().floor() as i32);
    (v * p).round() / p
}

/// CSV of a curve of growth.
pub fn growth_csv(points: &[GrowthPoint]) -> String {
    let mut s = String::from(
        "column_cm-2,nf_lambda_cm,tau0,w_angstrom,w_linear_angstrom,w_flat_angstrom,w_damping_angstrom,w_stark_angstrom\n",
    );
    for p in points {
        let row = [
            csv_number(p.column),
            csv_number(10f64.powf(p.log_nf_lambda)),
            csv_number(p.tau0),
            csv_number(p.equivalent_width),
            csv_number(p.linear),
            p.flat.map_or(String::new(), csv_number),
            csv_number(p.damping),
            p.stark.map_or(String::new(), csv_number),
        ];
        s.push_str(&row.join(","));
        s.push('\n');
    }
    s
}

// ---------------------------------------------------------------------------------------------
// Line profile
// ---------------------------------------------------------------------------------------------

/// A sampled line profile.
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// Line label.
    pub label: String,
    /// Customary wavelength of the line centre (air above 200 nm), Å.
    pub centre_angstrom: f64,
    /// Whether the customary wavelength is in air.
    pub air: bool,
    /// Offsets from line centre, Å.
    pub offset_angstrom: Vec<f64>,
    /// F/F_c at each offset.
    pub normalised: Vec<f64>,
    /// Flux or intensity (for the axis label).
    pub intensity: bool,
    /// Notes (the slab, the line strength).
    pub note: Vec<String>,
}

/// The profile chart: F/F_c against wavelength with the continuum level.
pub fn profile_chart(p: &Profile) -> LineChart {
    let q = if p.intensity { "I" } else { "F" };
    LineChart {
        title: format!(
            "Line profile: {} ({} Å)",
            p.label,
            number_text((p.centre_angstrom * 1000.0).round() / 1000.0)
        ),
        x: Axis::new(
            format!(
                "wavelength{} (Å)",
                if p.air { " in air" } else { " in vacuum" }
            ),
            false,
        ),
        y: Axis::new(
            format!(
                "normalised {}: {q}_λ / {q}_λ,cont",
                if p.intensity { "intensity" } else { "flux" }
            ),
            false,
        ),
        series: vec![Series {
            label: format!("{} ({q}/{q}_cont)", p.label),
            points: p
                .offset_angstrom
                .iter()
                .zip(&p.normalised)
                .map(|(d, f)| (p.centre_angstrom + d, *f))
                .collect(),
            colour: style::colour(0),
            dash: Dash::Solid,
            marker: None,
            width: 2,
            sets_range: true,
        }],
        regions: vec![],
        references: vec![Reference {
            y: 1.0,
            label: "continuum".into(),
        }],
        note: p.note.clone(),
    }
}

/// CSV of a profile: `offset_angstrom,wavelength_angstrom,normalised` (wavelength customary).
pub fn profile_csv(p: &Profile) -> String {
    let mut s = String::from("offset_angstrom,wavelength_angstrom,normalised\n");
    for (d, f) in p.offset_angstrom.iter().zip(&p.normalised) {
        s.push_str(&format!(
            "{},{},{}\n",
            csv_number(*d),
            csv_number(p.centre_angstrom + d),
            csv_number(*f)
        ));
    }
    s
}

// ---------------------------------------------------------------------------------------------
// Interpolation error map
// ---------------------------------------------------------------------------------------------

/// Largest relative interpolation error per cell of two axes.
#[derive(Debug, Clone, PartialEq)]
pub struct ErrorMap {
    /// Horizontal axis.
    pub x: AxisMeta,
    /// Vertical axis.
    pub y: AxisMeta,
    /// `errors[iy * nx + ix]`: the largest error over the cells of the other axes, `None`
    /// where no tested cell projects.
    pub errors: Vec<Option<f64>>,
    /// The line that gave it.
    pub worst_line: Vec<Option<String>>,
    /// Cells of the full grid behind each map cell that were tested.
    pub tested: Vec<usize>,
    /// What was audited (dataset, line(s), scheme).
    pub what: String,
    /// Notes.
    pub note: Vec<String>,
}

/// The error map as a heat map (log colour scale).
pub fn audit_map(m: &ErrorMap) -> HeatMap {
    let edges = |a: &AxisMeta| {
        let mut v = a.values.clone();
        if v.first() > v.last() {
            v.reverse();
        }
        v
    };
    let log = |a: &AxisMeta| {
        let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        lo > 0.0 && hi / lo > 4.0
    };
    // Stored order may be decreasing; edges are increasing, so flip the value order to match.
    let nx = m.x.values.len() - 1;
    let ny = m.y.values.len() - 1;
    let fx = m.x.values.first() > m.x.values.last();
    let fy = m.y.values.first() > m.y.values.last();
    let mut values = vec![None; nx * ny];
    for iy in 0..ny {
        for ix in 0..nx {
            let sx = if fx { nx - 1 - ix } else { ix };
            let sy = if fy { ny - 1 - iy } else { iy };
            values[iy * nx + ix] = m.errors[sy * nx + sx];
        }
    }
    HeatMap {
        title: format!("Interpolation error: {}", m.what),
        x: Axis::new(axis_label(&m.x.long_name, &m.x.units), log(&m.x)),
        y: Axis::new(axis_label(&m.y.long_name, &m.y.units), log(&m.y)),
        x_edges: edges(&m.x),
        y_edges: edges(&m.y),
        values,
        value_label: "max |relative error|".into(),
        log_value: true,
        note: m.note.clone(),
    }
}

/// CSV of the error map: one row per map cell.
pub fn audit_csv(m: &ErrorMap) -> String {
    let nx = m.x.values.len() - 1;
    let mut s = format!(
        "{x}_lo,{x}_hi,{y}_lo,{y}_hi,max_relative_error,line,cells_tested\n",
        x = m.x.name,
        y = m.y.name
    );
    for (i, e) in m.errors.iter().enumerate() {
        let (ix, iy) = (i % nx, i / nx);
        s.push_str(&format!(
            "{},{},{},{},{},{},{}\n",
            csv_number(m.x.values[ix]),
            csv_number(m.x.values[ix + 1]),
            csv_number(m.y.values[iy]),
            csv_number(m.y.values[iy + 1]),
            e.map_or(String::new(), csv_number),
            m.worst_line[i].as_deref().map_or(String::new(), csv_field),
            m.tested[i]
        ));
    }
    s
}

// ---------------------------------------------------------------------------------------------
// Departure coefficients
// ---------------------------------------------------------------------------------------------

/// b_n against n_e, one curve per level, log–log, with the LTE level b = 1.
pub fn departure_chart(t: &DepartureTable, title: &str, note: Vec<String>) -> LineChart {
    let series = t
        .levels
        .iter()
        .enumerate()
        .map(|(k, n)| Series {
            label: format!("b_{n}  (n = {n})"),
            points: t
                .electron_density
                .iter()
                .zip(&t.b)
                .map(|(ne, row)| (*ne, row[k]))
                .collect(),
            colour: style::colour(k),
            dash: Dash::nth(k / style::PALETTE.len()),
            marker: Some(Marker::nth(k)),
            width: 2,
            sets_range: true,
        })
        .collect();
    LineChart {
        title: title.to_string(),
        x: Axis::new("electron density n_e (cm⁻³)", true),
        y: Axis::new("departure coefficient b_n = n_n / n_n(LTE)", true),
        series,
        regions: vec![],
        references: vec![Reference {
            y: 1.0,
            label: "LTE (b = 1)".into(),
        }],
        note,
    }
}

/// CSV of the plotted table, in the input's CSV form.
pub fn departure_csv(t: &DepartureTable) -> String {
    let mut s = String::from("n_e");
    for n in &t.levels {
        s.push_str(&format!(",b_{n}"));
    }
    s.push('\n');
    for (ne, row) in t.electron_density.iter().zip(&t.b) {
        s.push_str(&csv_number(*ne));
        for b in row {
            s.push(',');
            s.push_str(&csv_number(*b));
        }
        s.push('\n');
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    fn axis(name: &str, v: &[f64]) -> AxisMeta {
        AxisMeta {
            name: name.into(),
            units: "K".into(),
            long_name: name.into(),
            values: v.to_vec(),
        }
    }

    #[test]
    fn units_get_superscripts() {
        assert_eq!(pretty_units("cm-3"), "cm⁻³");
        assert_eq!(pretty_units("dyn cm-2"), "dyn cm⁻²");
        assert_eq!(pretty_units("erg s-1 cm-2"), "erg s⁻¹ cm⁻²");
        assert_eq!(pretty_units("K"), "K");
    }

    #[test]
    fn nodes_resolve_and_bad_choices_are_refused() {
        let axes = vec![
            axis("temperature", &[5000.0, 6000.0, 7000.0]),
            axis("gas_pressure", &[1e3, 1e4, 1e5]),
            axis("metallicity", &[-1.0, 0.0]),
        ];
        let (x, by, fixed) = resolve_nodes(
            &axes,
            "temperature",
            Some("metallicity"),
            &[("gas_pressure".into(), 1e5)],
        )
        .unwrap();
        assert_eq!((x, by, fixed[1]), (0, Some(2), 2));
        // Default: the middle node.
        let (_, _, fixed) = resolve_nodes(&axes, "temperature", None, &[]).unwrap();
        assert_eq!(fixed, vec![1, 1, 1]);
        let e = resolve_nodes(&axes, "temprature", None, &[]).unwrap_err();
        assert!(e.to_string().contains("temprature") && e.to_string().contains("gas_pressure"));
        let e =
            resolve_nodes(&axes, "temperature", None, &[("gas_pressure".into(), 1e6)]).unwrap_err();
        assert!(matches!(e, PlotError::OutOfRange { .. }), "{e}");
        let e =
            resolve_nodes(&axes, "temperature", None, &[("gas_pressure".into(), 2e4)]).unwrap_err();
        assert!(matches!(e, PlotError::NotANode { .. }), "{e}");
        let e =
            resolve_nodes(&axes, "temperature", None, &[("temperature".into(), 5e3)]).unwrap_err();
        assert!(matches!(e, PlotError::Conflict(_)), "{e}");
    }

    #[test]
    fn regime_boundaries_of_a_curve_of_growth() {
        use crate::formation::growth::curve_of_growth;
        use crate::transfer::growth::AbsorptionLine;
        let l = AbsorptionLine {
            wavelength: 589.16e-7,
            f_value: 0.64,
            doppler_b: 2e5,
            gamma: 1e8,
        };
        let cols: Vec<f64> = (0..=60)
            .map(|i| 10f64.powf(8.0 + 0.2 * f64::from(i)))
            .collect();
        let pts = curve_of_growth(&l, &cols);
        let (b1, b2) = growth_regimes(&pts);
        // τ₀ = 1 exactly where the line's own τ₀(N) says so.
        let n1 = b1.unwrap() / (l.f_value * l.wavelength);
        let t = curve_of_growth(&l, &[n1])[0].tau0;
        assert!((t - 1.0).abs() < 1e-9, "τ₀ = {t}");
        // At the second boundary flat and damping asymptotes agree (to the interpolation in
        // log N over 0.2 dex steps, 1 %).
        let n2 = b2.unwrap() / (l.f_value * l.wavelength);
        let p = curve_of_growth(&l, &[n2])[0];
        assert!((p.damping / p.flat.unwrap() - 1.0).abs() < 0.01, "{p:?}");
        assert!(n2 > n1);
    }
}

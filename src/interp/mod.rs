//! Grids in downstream fitters: a reader ([`Grid`]) over a grid file and interpolators
//! ([`Interpolator`]) over any of its datasets, returning the value and its gradient with
//! respect to the physical parameters.
//!
//! Two schemes, both tensor products of one-dimensional rules applied in a chosen coordinate
//! per axis ([`Coord`]: linear, log10, or θ = 5040/T):
//!
//! - [`Method::Linear`]: multilinear (two nodes per axis).
//! - [`Method::Cubic`]: the cubic Hermite spline on non-uniform nodes with Catmull–Rom
//!   (cardinal, zero tension) slopes, m_i = (y_{i+1} − y_{i−1}) / (u_{i+1} − u_{i−1}) inside
//!   and the one-sided secant at the ends (Catmull & Rom 1974, "A class of local
//!   interpolating splines", in Computer Aided Geometric Design, Academic Press, 317–326).
//!   It is C¹, local (four nodes per axis), linear in the node values, and reproduces
//!   linear functions of the coordinate exactly.
//!
//! The value may be interpolated in log10 ([`Options::log_value`]); the result is then
//! 10^p and its gradient 10^p · ln 10 · ∇p. Gradients are with respect to the physical
//! parameters (the chain rule through the coordinate). Points outside an axis are an error
//! unless clamping is asked for (the gradient along a clamped axis is then zero). A point
//! whose stencil touches a flagged node (status ≠ 0, NaN, or a non-positive value under
//! log10) is an error, never silently used.
//!
//! Evaluation allocates nothing ([`Interpolator::evaluate_into`], [`Interpolator::value`];
//! [`Interpolator::evaluate`] wraps them in a [`Sample`]). Built once per table: the nodes
//! in each axis' coordinate with every axis stored increasing, log10 of the values, a
//! per-axis bucket guide that finds a point's cell in one or two comparisons, reciprocal
//! cell widths, and a per-cell map of the cells whose stencil touches a flagged node (one
//! byte checked per point). The tensor-product sums are specialised by the number of axes
//! (up to six) and, for multilinear, use precomputed corner offsets.

// The kernels index several parallel small arrays by the same axis or node: explicit
// indices read best.
#![allow(clippy::needless_range_loop)]

pub mod fit;

use std::collections::HashMap;
use std::path::{Path, PathBuf};

use ndarray::ArrayD;
use rayon::prelude::*;

use crate::grid::store::{AxisMeta, DataKind, DatasetMeta, GridFile, LineRecord, StoreError};

/// Errors of the reader and the interpolators; each names the file and the dataset.
#[derive(Debug, thiserror::Error)]
pub enum InterpError {
    /// The grid store failed (the message names file and dataset).
    #[error(transparent)]
    Store(#[from] StoreError),
    /// An axis name the grid does not have.
    #[error("{}: no axis '{name}' (the grid has: {known})", path.display())]
    UnknownAxis {
        /// The grid file.
        path: PathBuf,
        /// The name given.
        name: String,
        /// The grid's axes.
        known: String,
    },
    /// A line label the grid does not have.
    #[error("{}: no line '{label}' (the grid has: {known})", path.display())]
    UnknownLine {
        /// The grid file.
        path: PathBuf,
        /// The label given.
        label: String,
        /// The grid's lines.
        known: String,
    },
    /// A per-line dataset without a line, or a per-point dataset with one, or the status.
    #[error("{}: dataset '{dataset}': {reason}", path.display())]
    DatasetUse {
        /// The grid file.
        path: PathBuf,
        /// The dataset.
        dataset: String,
        /// What was wrong.
        reason: String,
    },
    /// A coordinate that cannot be applied to an axis (log10 or θ of a non-positive node).
    #[error("{}: axis '{axis}': {reason}", path.display())]
    BadCoordinate {
        /// The grid file.
        path: PathBuf,
        /// The axis.
        axis: String,
        /// What was wrong.
        reason: String,
    },
    /// A point with the wrong number of coordinates or a non-finite one.
    #[error("{}: {dataset}: {reason}", path.display())]
    BadPoint {
        /// The grid file.
        path: PathBuf,
        /// The dataset.
        dataset: String,
        /// What was wrong.
        reason: String,
    },
    /// A point outside an axis (and no clamping).
    #[error("{}: {dataset}: {axis} = {value} is outside the grid's range [{lo}, {hi}]", path.display())]
    OutOfRange {
        /// The grid file.
        path: PathBuf,
        /// The dataset.
        dataset: String,
        /// The axis.
        axis: String,
        /// The value given.
        value: f64,
        /// Smallest node.
        lo: f64,
        /// Largest node.
        hi: f64,
    },
    /// The stencil of a point touches a flagged node.
    #[error("{}: {dataset}: the interpolation stencil touches a flagged grid node at {node} ({reason})", path.display())]
    Flagged {
        /// The grid file.
        path: PathBuf,
        /// The dataset.
        dataset: String,
        /// The node, as `axis=value` pairs.
        node: String,
        /// Status code meaning, NaN, or non-positive under log10.
        reason: String,
        /// Whether the node is usable except that its value is not positive, so that its
        /// log10 cannot be taken (interpolating the value itself would use it).
        non_positive: bool,
    },
}

/// Result alias.
pub type Result<T> = std::result::Result<T, InterpError>;

/// Most axes an interpolator takes.
pub const MAX_AXES: usize = 12;

/// Most axes of the kernels specialised by axis count (more take the general path).
const MAX_FAST_AXES: usize = 6;

/// A grid file opened for interpolation.
#[derive(Debug)]
pub struct Grid {
    file: GridFile,
}

impl Grid {
    /// Open a grid file (read-only).
    pub fn open(path: &Path) -> Result<Grid> {
        Ok(Grid {
            file: GridFile::open(path)?,
        })
    }

    /// The underlying store reader.
    pub fn file(&self) -> &GridFile {
        &self.file
    }

    /// The file.
    pub fn path(&self) -> &Path {
        self.file.path()
    }

    /// The axes, storage order.
    pub fn axes(&self) -> &[AxisMeta] {
        self.file.axes()
    }

    /// Axis names, storage order.
    pub fn axis_names(&self) -> Vec<String> {
        self.axes().iter().map(|a| a.name.clone()).collect()
    }

    /// The line table.
    pub fn lines(&self) -> &[LineRecord] {
        self.file.lines()
    }

    /// The data variables.
    pub fn datasets(&self) -> &[DatasetMeta] {
        self.file.datasets()
    }

    /// Index of an axis by name.
    pub fn axis_index(&self, name: &str) -> Result<usize> {
        self.axes()
            .iter()
            .position(|a| a.name == name)
            .ok_or_else(|| InterpError::UnknownAxis {
                path: self.path().to_path_buf(),
                name: name.to_string(),
                known: self.axis_names().join(", "),
            })
    }

    /// Index of a line by label.
    pub fn line_index(&self, label: &str) -> Result<usize> {
        self.lines()
            .iter()
            .position(|l| l.label == label)
            .ok_or_else(|| InterpError::UnknownLine {
                path: self.path().to_path_buf(),
                label: label.to_string(),
                known: self
                    .lines()
                    .iter()
                    .map(|l| l.label.as_str())
                    .collect::<Vec<_>>()
                    .join(", "),
            })
    }

    /// A float64 dataset whole, shape (axes...[, line]).
    pub fn read(&self, name: &str) -> Result<ArrayD<f64>> {
        Ok(self.file.read(name)?)
    }

    /// The status codes, shape (axes...).
    pub fn status(&self) -> Result<ArrayD<u8>> {
        Ok(self.file.status()?)
    }

    /// The default per-line quantity (`equivalent_width`, else the first per-line dataset).
    pub fn default_dataset(&self) -> Option<String> {
        let ds = self.datasets();
        ds.iter()
            .find(|d| d.name == "equivalent_width" && d.kind == DataKind::F64)
            .or_else(|| ds.iter().find(|d| d.per_line && d.kind == DataKind::F64))
            .map(|d| d.name.clone())
    }

    /// One table over the axes: a per-point dataset (`line` None) or one line of a per-line
    /// dataset, with the status codes.
    pub fn table(&self, dataset: &str, line: Option<&str>) -> Result<Table> {
        let mut t = self.tables_of(dataset, &[line])?;
        Ok(t.remove(0))
    }

    /// One table per line of a per-line dataset, reading the dataset and the status codes
    /// once (rather than once per line, as repeated [`Grid::table`] calls do).
    pub fn tables(&self, dataset: &str, lines: &[&str]) -> Result<Vec<Table>> {
        let lines: Vec<Option<&str>> = lines.iter().map(|&l| Some(l)).collect();
        self.tables_of(dataset, &lines)
    }

    fn tables_of(&self, dataset: &str, lines: &[Option<&str>]) -> Result<Vec<Table>> {
        let meta = self
            .datasets()
            .iter()
            .find(|d| d.name == dataset)
            .ok_or_else(|| StoreError::UnknownDataset {
                path: self.path().to_path_buf(),
                name: dataset.to_string(),
                known: self.file.dataset_names().join(", "),
            })?;
        let use_err = |reason: &str| InterpError::DatasetUse {
            path: self.path().to_path_buf(),
            dataset: dataset.to_string(),
            reason: reason.to_string(),
        };
        if meta.kind == DataKind::Status {
            return Err(use_err("is the status code, not an interpolable quantity"));
        }
        // Check every name before reading anything.
        let mut index = Vec::with_capacity(lines.len());
        for &line in lines {
            index.push(match (meta.per_line, line) {
                (true, Some(label)) => Some(self.line_index(label)?),
                (true, None) => return Err(use_err("is per line: name the line")),
                (false, Some(_)) => return Err(use_err("is per point: it takes no line")),
                (false, None) => None,
            });
        }
        let data = self.read(dataset)?;
        let status: Vec<u8> = self.status()?.iter().copied().collect();
        let last = data.ndim() - 1;
        Ok(lines
            .iter()
            .zip(index)
            .map(|(line, k)| {
                let values: Vec<f64> = match k {
                    Some(k) => data
                        .index_axis(ndarray::Axis(last), k)
                        .iter()
                        .copied()
                        .collect(),
                    None => data.iter().copied().collect(),
                };
                Table {
                    path: self.path().to_path_buf(),
                    name: match line {
                        Some(l) => format!("{dataset}[{l}]"),
                        None => dataset.to_string(),
                    },
                    axes: self.axes().to_vec(),
                    values,
                    status: status.clone(),
                    status_flags: self.file.status_flags().to_vec(),
                }
            })
            .collect())
    }
}

/// Values of one quantity on the grid's nodes (row-major, last axis fastest), with status.
#[derive(Debug, Clone)]
pub struct Table {
    /// The file (for messages).
    pub path: PathBuf,
    /// The dataset (and line) name, for messages.
    pub name: String,
    /// The axes.
    pub axes: Vec<AxisMeta>,
    /// Node values.
    pub values: Vec<f64>,
    /// Node status codes (0 = converged).
    pub status: Vec<u8>,
    /// Status meanings.
    pub status_flags: Vec<(u8, String)>,
}

impl Table {
    /// Whether every converged, finite node value is positive (so that log10 of the value
    /// can be interpolated anywhere a stencil is allowed).
    pub fn all_positive(&self) -> bool {
        self.values
            .iter()
            .zip(&self.status)
            .filter(|(v, s)| **s == 0 && v.is_finite())
            .all(|(v, _)| *v > 0.0)
    }
}

/// The coordinate an axis is interpolated in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Coord {
    /// u = x.
    Linear,
    /// u = log10 x.
    Log10,
    /// u = 5040 / x (x a temperature in K).
    Theta,
}

impl Coord {
    /// Parse `linear`, `log10` (or `log`), `theta`.
    pub fn parse(s: &str) -> Option<Coord> {
        match s {
            "linear" | "lin" => Some(Coord::Linear),
            "log10" | "log" => Some(Coord::Log10),
            "theta" => Some(Coord::Theta),
            _ => None,
        }
    }

    /// The name.
    pub fn name(self) -> &'static str {
        match self {
            Coord::Linear => "linear",
            Coord::Log10 => "log10",
            Coord::Theta => "theta",
        }
    }

    /// u(x) and du/dx.
    pub fn apply(self, x: f64) -> (f64, f64) {
        let u = self.forward(x);
        (u, self.derivative(x, u))
    }

    /// u(x) (the same operation for nodes and points, so that a node maps exactly onto
    /// its transformed value). log10 is taken as ln x · log10 e: within an ulp or two of
    /// `f64::log10` and about half its cost.
    #[inline(always)]
    pub fn forward(self, x: f64) -> f64 {
        match self {
            Coord::Linear => x,
            Coord::Log10 => x.ln() * std::f64::consts::LOG10_E,
            Coord::Theta => 5040.0 / x,
        }
    }

    /// du/dx at x, given u = u(x).
    #[inline(always)]
    pub fn derivative(self, x: f64, u: f64) -> f64 {
        match self {
            Coord::Linear => 1.0,
            Coord::Log10 => std::f64::consts::LOG10_E / x,
            // −5040/x² = −u²/5040.
            Coord::Theta => -u * u * (1.0 / 5040.0),
        }
    }

    /// The default for an axis: θ for `temperature`, log10 for positive axes spanning more
    /// than a decade, else linear.
    pub fn default_for(axis: &AxisMeta) -> Coord {
        let lo = axis.values.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = axis
            .values
            .iter()
            .copied()
            .fold(f64::NEG_INFINITY, f64::max);
        if axis.name == "temperature" && lo > 0.0 {
            Coord::Theta
        } else if lo > 0.0 && hi / lo > 10.0 {
            Coord::Log10
        } else {
            Coord::Linear
        }
    }
}

/// The interpolation scheme.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Method {
    /// Multilinear.
    Linear,
    /// Cubic Hermite with Catmull–Rom slopes (non-uniform nodes).
    Cubic,
}

impl Method {
    /// The name.
    pub fn name(self) -> &'static str {
        match self {
            Method::Linear => "linear",
            Method::Cubic => "cubic",
        }
    }
}

/// Interpolator options.
#[derive(Debug, Clone, PartialEq)]
pub struct Options {
    /// Scheme.
    pub method: Method,
    /// Coordinate per axis (None: [`Coord::default_for`]).
    pub coords: Option<Vec<Coord>>,
    /// Interpolate log10 of the value (the value must be positive at the stencil's nodes).
    pub log_value: bool,
    /// Clamp points outside an axis to its range instead of failing.
    pub clamp: bool,
}

/// The plain choices: multilinear, in each axis's default coordinate, on the value itself,
/// no clamping. The `sample` and `fit` commands start from [`Options::for_table`] instead.
impl Default for Options {
    fn default() -> Options {
        Options {
            method: Method::Linear,
            coords: None,
            log_value: false,
            clamp: false,
        }
    }
}

impl Options {
    /// The defaults of the `sample` and `fit` commands for one table, so that a program
    /// using the library gets their numbers: cubic (the smallest errors in `linegrid
    /// audit`), each axis's default coordinate, log10 of the value exactly when
    /// [`Table::all_positive`], no clamping.
    pub fn for_table(table: &Table) -> Options {
        Options {
            method: Method::Cubic,
            log_value: table.all_positive(),
            ..Options::default()
        }
    }
}

/// A value and its gradient with respect to the physical parameters (axis order).
#[derive(Debug, Clone, PartialEq)]
pub struct Sample {
    /// The interpolated value.
    pub value: f64,
    /// ∂value/∂x_a per axis.
    pub gradient: Vec<f64>,
    /// Per axis: whether the point was clamped to the axis range.
    pub clamped: Vec<bool>,
}

#[derive(Debug, Clone)]
struct AxisNodes {
    name: String,
    coord: Coord,
    /// Transformed nodes, increasing.
    u: Vec<f64>,
    /// Whether storage order is decreasing in u (sorted index k ↔ storage n−1−k).
    reversed: bool,
    lo: f64,
    hi: f64,
    /// Physical node values, storage order.
    x: Vec<f64>,
    /// Cell lookup: `guide[b]` is the cell holding the lower edge of bucket b, the buckets
    /// splitting [u_0, u_{n−1}] evenly; the exact cell is at most a few steps away.
    guide: Vec<u32>,
    /// Buckets per unit of u.
    guide_scale: f64,
    /// Per cell i: 1 / (u_{i+1} − u_i).
    inv_h: Vec<f64>,
    /// Per node k: 1 / (u_{k+1} − u_{k−1}) inside, 0 at the ends (Catmull–Rom slopes).
    inv_span: Vec<f64>,
}

impl AxisNodes {
    fn new(name: &str, coord: Coord, x: &[f64]) -> AxisNodes {
        let mut u: Vec<f64> = x.iter().map(|&v| coord.forward(v)).collect();
        let reversed = u.len() > 1 && u[0] > u[u.len() - 1];
        if reversed {
            u.reverse();
        }
        let lo = x.iter().copied().fold(f64::INFINITY, f64::min);
        let hi = x.iter().copied().fold(f64::NEG_INFINITY, f64::max);
        let n = u.len();
        // Buckets no wider than the narrowest cell (so a bucket holds at most one node and
        // the guide is exact or one cell short), at most 64 per cell and 65536 in all
        // unless the axis has more cells.
        let (guide, guide_scale) = if n > 1 {
            let span = u[n - 1] - u[0];
            let narrowest = u
                .windows(2)
                .map(|w| w[1] - w[0])
                .fold(f64::INFINITY, f64::min);
            let buckets = ((span / narrowest).ceil() as usize + 1)
                .clamp(n - 1, (64 * (n - 1)).min(1 << 16).max(n - 1));
            let scale = buckets as f64 / span;
            let guide = (0..buckets)
                .map(|b| {
                    let edge = u[0] + b as f64 / scale;
                    (u.partition_point(|&v| v <= edge).clamp(1, n - 1) - 1) as u32
                })
                .collect();
            (guide, scale)
        } else {
            (vec![0], 0.0)
        };
        let inv_h = u.windows(2).map(|w| 1.0 / (w[1] - w[0])).collect();
        let inv_span = (0..n)
            .map(|k| {
                if k > 0 && k + 1 < n {
                    1.0 / (u[k + 1] - u[k - 1])
                } else {
                    0.0
                }
            })
            .collect();
        AxisNodes {
            name: name.to_string(),
            coord,
            u,
            reversed,
            lo,
            hi,
            x: x.to_vec(),
            guide,
            guide_scale,
            inv_h,
            inv_span,
        }
    }

    /// The cell of u ∈ [u_0, u_{n−1}] (n ≥ 2): the largest i ≤ n − 2 with u_i ≤ u.
    #[inline(always)]
    fn cell(&self, u: f64) -> usize {
        let nodes = &self.u;
        let n = nodes.len();
        // u ≥ u_0, so the bucket is never negative; the float-to-int conversion saturates.
        let b = (((u - nodes[0]) * self.guide_scale) as u32 as usize).min(self.guide.len() - 1);
        let mut i = self.guide[b] as usize;
        // One step without a branch (the usual case), then exact.
        i += usize::from(i + 2 < n && nodes[i + 1] <= u);
        while i + 2 < n && nodes[i + 1] <= u {
            i += 1;
        }
        while i > 0 && nodes[i] > u {
            i -= 1;
        }
        i
    }

    /// Storage index of sorted index k.
    fn storage(&self, k: usize) -> usize {
        if self.reversed {
            self.u.len() - 1 - k
        } else {
            k
        }
    }

    /// Cells along the axis (one for a single-node axis).
    fn cells(&self) -> usize {
        self.u.len().saturating_sub(1).max(1)
    }

    /// Sorted node indices of cell i's stencil, inclusive.
    fn stencil_span(&self, method: Method, i: usize) -> (usize, usize) {
        let n = self.u.len();
        if n == 1 {
            return (0, 0);
        }
        match method {
            Method::Linear => (i, i + 1),
            Method::Cubic => (i.saturating_sub(1), (i + 2).min(n - 1)),
        }
    }
}

/// One axis' stencil: up to four consecutive sorted nodes from `start`, their weights and
/// d weight / du.
#[derive(Debug, Clone, Copy)]
struct Stencil {
    start: usize,
    len: usize,
    w: [f64; 4],
    dw: [f64; 4],
}

const EMPTY_STENCIL: Stencil = Stencil {
    start: 0,
    len: 0,
    w: [0.0; 4],
    dw: [0.0; 4],
};

/// Where a point falls on one axis: cell i, t = (u − u_i)/(u_{i+1} − u_i), 1/(u_{i+1} − u_i)
/// and du/dx (all 0 on a single-node axis; du/dx 0 on a clamped one).
#[derive(Debug, Clone, Copy)]
struct Position {
    cell: usize,
    t: f64,
    inv_h: f64,
    dudx: f64,
}

/// An interpolator over one table.
///
/// Internally the node values are stored with every axis increasing in its interpolation
/// coordinate (log10 already taken under [`Options::log_value`]), so that a stencil is a
/// run of consecutive nodes; a per-cell map says whether a cell's stencil touches a flagged
/// node, so that evaluation checks one byte instead of every node.
#[derive(Debug, Clone)]
pub struct Interpolator {
    path: PathBuf,
    name: String,
    axes: Vec<AxisNodes>,
    /// Node values, sorted layout (row-major, last axis fastest).
    values: Vec<f64>,
    /// Flagged nodes (sorted flat index) and why.
    flagged: HashMap<usize, (String, bool)>,
    /// Node strides of the sorted layout.
    strides: Vec<usize>,
    /// Per cell (row-major over the axes' cells): whether its stencil touches a flagged node.
    bad_cell: Vec<bool>,
    /// Cell strides.
    cell_strides: Vec<usize>,
    /// Multilinear, at most [`MAX_FAST_AXES`] axes: offsets of a cell's 2^ndim corners from
    /// its first node (bit ndim−1−a of the corner ↔ axis a; a single-node axis has stride 0,
    /// its two "corners" being the same node with weights 1 and 0). Else empty.
    corners: Vec<usize>,
    method: Method,
    log_value: bool,
    clamp: bool,
}

/// Row-major strides of a shape.
fn strides_of(shape: &[usize]) -> Vec<usize> {
    let mut s = vec![1; shape.len()];
    for d in (0..shape.len().saturating_sub(1)).rev() {
        s[d] = s[d + 1] * shape[d + 1];
    }
    s
}

/// The flat sorted-layout index of the node with storage index `flat` (and back: the map
/// is an involution, each reversed axis being flipped).
fn flip_reversed(axes: &[AxisNodes], strides: &[usize], flat: usize) -> usize {
    let mut rest = flat;
    let mut out = 0;
    for (ax, &s) in axes.iter().zip(strides) {
        let k = rest / s;
        rest %= s;
        out += ax.storage(k) * s;
    }
    out
}

/// Sum factorisation of the tensor-product stencil over the first `nd` ≤ N axes, last axis
/// innermost (stride 1): the value and, if `GRAD`, ∂/∂u_e for every axis. Walks the outer
/// stencil digits like an odometer, folding each completed level into the one above.
#[inline(always)]
fn contract<const N: usize, const GRAD: bool>(
    values: &[f64],
    strides: &[usize],
    st: &[Stencil; N],
    nd: usize,
) -> (f64, [f64; N]) {
    let last = nd - 1;
    let mut digit = [0usize; N];
    let mut acc_v = [0.0f64; N];
    let mut acc_g = [[0.0f64; N]; N];
    let mut off: usize = (0..nd).map(|a| st[a].start * strides[a]).sum();
    loop {
        let s = &st[last];
        let row = &values[off..off + s.len];
        let mut cv = 0.0;
        let mut dv = 0.0;
        for j in 0..s.len {
            cv += s.w[j] * row[j];
            if GRAD {
                dv += s.dw[j] * row[j];
            }
        }
        let mut cg = [0.0f64; N];
        if GRAD {
            cg[last] = dv;
        }
        // Fold the completed level k (axes k..nd) into level k − 1.
        let mut k = last;
        loop {
            if k == 0 {
                return (cv, cg);
            }
            let p = k - 1;
            let j = digit[p];
            let w = st[p].w[j];
            acc_v[p] += w * cv;
            if GRAD {
                acc_g[p][p] += st[p].dw[j] * cv;
                for e in k..nd {
                    acc_g[p][e] += w * cg[e];
                }
            }
            digit[p] += 1;
            off += strides[p];
            if digit[p] < st[p].len {
                break;
            }
            cv = acc_v[p];
            acc_v[p] = 0.0;
            if GRAD {
                cg = acc_g[p];
                acc_g[p] = [0.0; N];
            }
            digit[p] = 0;
            off -= st[p].len * strides[p];
            k = p;
        }
    }
}

/// One level of the multilinear sum factorisation: contract axis `a` (the lowest corner bit
/// left) over the first 2·`half` entries, pairing neighbours in place; the gradient rows of
/// the axes already contracted (e > a) follow, and axis a's own row is started.
#[inline(always)]
fn fold_level<const N: usize, const C: usize, const H: usize, const GRAD: bool>(
    v: &mut [f64; C],
    g: &mut [[f64; H]; N],
    a: usize,
    half: usize,
    p: &Position,
) {
    let (t, ih) = (p.t, p.inv_h);
    let w0 = 1.0 - t;
    for k in 0..half {
        let (lo, hi) = (v[2 * k], v[2 * k + 1]);
        v[k] = w0 * lo + t * hi;
        if GRAD {
            for e in a + 1..N {
                g[e][k] = w0 * g[e][2 * k] + t * g[e][2 * k + 1];
            }
        }
        if GRAD {
            g[a][k] = (hi - lo) * ih;
        }
    }
}

/// Multilinear sum factorisation over N ≤ 6 axes (C = 2^N corners at `base + corners[c]`,
/// H = C/2): the value and, if `GRAD`, ∂/∂u per axis. Contracts the last axis first; the
/// levels are written out so that every loop has a fixed trip count.
#[inline(always)]
fn multilinear<const N: usize, const C: usize, const H: usize, const GRAD: bool>(
    values: &[f64],
    base: usize,
    corners: &[usize; C],
    pos: &[Position; N],
) -> (f64, [f64; N]) {
    let mut v = [0.0f64; C];
    for c in 0..C {
        v[c] = values[base + corners[c]];
    }
    let mut g = [[0.0f64; H]; N];
    macro_rules! level {
        ($k:literal) => {
            if N > $k {
                let a = N - 1 - $k;
                fold_level::<N, C, H, GRAD>(&mut v, &mut g, a, C >> ($k + 1), &pos[a]);
            }
        };
    }
    level!(0);
    level!(1);
    level!(2);
    level!(3);
    level!(4);
    level!(5);
    let mut grad = [0.0f64; N];
    if GRAD {
        for a in 0..N {
            grad[a] = g[a][0];
        }
    }
    (v[0], grad)
}

impl Interpolator {
    /// Build an interpolator over a table.
    pub fn new(table: &Table, options: &Options) -> Result<Interpolator> {
        let nd = table.axes.len();
        let coords = match &options.coords {
            Some(c) => {
                if c.len() != nd {
                    return Err(InterpError::BadPoint {
                        path: table.path.clone(),
                        dataset: table.name.clone(),
                        reason: format!("{} coordinates given for {nd} axes", c.len()),
                    });
                }
                c.clone()
            }
            None => table.axes.iter().map(Coord::default_for).collect(),
        };
        if nd == 0 || nd > MAX_AXES {
            return Err(InterpError::BadPoint {
                path: table.path.clone(),
                dataset: table.name.clone(),
                reason: format!("{nd} axes; 1 to {MAX_AXES} are supported"),
            });
        }
        let mut axes = Vec::with_capacity(nd);
        for (a, &coord) in table.axes.iter().zip(&coords) {
            if coord != Coord::Linear && a.values.iter().any(|&v| v <= 0.0) {
                return Err(InterpError::BadCoordinate {
                    path: table.path.clone(),
                    axis: a.name.clone(),
                    reason: format!("{} needs positive nodes", coord.name()),
                });
            }
            axes.push(AxisNodes::new(&a.name, coord, &a.values));
        }
        let shape: Vec<usize> = axes.iter().map(|a| a.u.len()).collect();
        let strides = strides_of(&shape);
        let total: usize = shape.iter().product();
        if table.values.len() != total || table.status.len() != total {
            return Err(InterpError::BadPoint {
                path: table.path.clone(),
                dataset: table.name.clone(),
                reason: format!(
                    "{} values and {} status codes for {total} nodes",
                    table.values.len(),
                    table.status.len()
                ),
            });
        }
        let meaning = |code: u8| {
            table
                .status_flags
                .iter()
                .find(|(c, _)| *c == code)
                .map_or_else(
                    || format!("status {code}"),
                    |(_, m)| format!("status {code}: {m}"),
                )
        };
        let mut values = vec![0.0; total];
        let mut node_bad = vec![false; total];
        let mut flagged = HashMap::new();
        for (flat, (&v, &s)) in table.values.iter().zip(&table.status).enumerate() {
            let flag = if s != 0 {
                Some((meaning(s), false))
            } else if !v.is_finite() {
                Some(("value is not finite".to_string(), false))
            } else if options.log_value && v <= 0.0 {
                Some((format!("value {v} is not positive, log10 impossible"), true))
            } else {
                None
            };
            let k = flip_reversed(&axes, &strides, flat);
            match flag {
                Some(f) => {
                    node_bad[k] = true;
                    flagged.insert(k, f);
                }
                None => values[k] = if options.log_value { v.log10() } else { v },
            }
        }
        // Dilate the node flags to cells, one axis at a time (the stencil is a product set).
        let mut bad = node_bad;
        let mut cur = shape.clone();
        for (a, ax) in axes.iter().enumerate() {
            let outer: usize = cur[..a].iter().product();
            let inner: usize = cur[a + 1..].iter().product();
            let (n, c) = (cur[a], ax.cells());
            let mut next = vec![false; outer * c * inner];
            for o in 0..outer {
                for i in 0..c {
                    let (k0, k1) = ax.stencil_span(options.method, i);
                    for k in k0..=k1 {
                        let src = &bad[(o * n + k) * inner..(o * n + k + 1) * inner];
                        let dst = &mut next[(o * c + i) * inner..(o * c + i + 1) * inner];
                        for (d, &s) in dst.iter_mut().zip(src) {
                            *d |= s;
                        }
                    }
                }
            }
            bad = next;
            cur[a] = c;
        }
        let cell_strides = strides_of(&cur);
        let corners = if options.method == Method::Linear && nd <= MAX_FAST_AXES {
            (0..1usize << nd)
                .map(|c| {
                    (0..nd)
                        .filter(|&a| c >> (nd - 1 - a) & 1 == 1 && shape[a] > 1)
                        .map(|a| strides[a])
                        .sum()
                })
                .collect()
        } else {
            Vec::new()
        };
        Ok(Interpolator {
            path: table.path.clone(),
            name: table.name.clone(),
            axes,
            values,
            flagged,
            strides,
            bad_cell: bad,
            cell_strides,
            corners,
            method: options.method,
            log_value: options.log_value,
            clamp: options.clamp,
        })
    }

    /// Number of axes.
    pub fn ndim(&self) -> usize {
        self.axes.len()
    }

    /// The coordinates in use, per axis.
    pub fn coords(&self) -> Vec<Coord> {
        self.axes.iter().map(|a| a.coord).collect()
    }

    /// (min, max) of every axis, physical units.
    pub fn ranges(&self) -> Vec<(f64, f64)> {
        self.axes.iter().map(|a| (a.lo, a.hi)).collect()
    }

    /// The dataset (and line) name.
    pub fn name(&self) -> &str {
        &self.name
    }

    /// Where `x` falls on axis `a` (du/dx only if `GRAD`), or None if x is outside the axis
    /// (or NaN) and not clamped.
    #[inline(always)]
    fn position<const GRAD: bool>(&self, a: usize, x: f64) -> Option<Position> {
        let ax = &self.axes[a];
        let mut x = x;
        let mut clamped = false;
        if !(x >= ax.lo && x <= ax.hi) {
            if self.clamp && !x.is_nan() {
                x = x.clamp(ax.lo, ax.hi);
                clamped = true;
            } else {
                return None;
            }
        }
        let n = ax.u.len();
        if n == 1 {
            return Some(Position {
                cell: 0,
                t: 0.0,
                inv_h: 0.0,
                dudx: 0.0,
            });
        }
        // Exact node values give u exactly (same transform as the nodes), so nodes are hit.
        let u = ax.coord.forward(x);
        let dudx = if GRAD && !clamped {
            ax.coord.derivative(x, u)
        } else {
            0.0
        };
        let u = u.clamp(ax.u[0], ax.u[n - 1]);
        let i = ax.cell(u);
        let inv_h = ax.inv_h[i];
        Some(Position {
            cell: i,
            t: (u - ax.u[i]) * inv_h,
            inv_h,
            dudx,
        })
    }

    /// The stencil of axis `a` at a position (weights and d weight / du).
    #[inline(always)]
    fn stencil<const GRAD: bool>(&self, a: usize, p: &Position) -> Stencil {
        let ax = &self.axes[a];
        let n = ax.u.len();
        let mut st = EMPTY_STENCIL;
        if n == 1 {
            st.len = 1;
            st.w[0] = 1.0;
            return st;
        }
        let (i, t, ih) = (p.cell, p.t, p.inv_h);
        match self.method {
            Method::Linear => {
                st.start = i;
                st.len = 2;
                st.w = [1.0 - t, t, 0.0, 0.0];
                st.dw = [-ih, ih, 0.0, 0.0];
            }
            Method::Cubic => {
                let h = ax.u[i + 1] - ax.u[i];
                let t2 = t * t;
                let t3 = t2 * t;
                let h00 = 2.0 * t3 - 3.0 * t2 + 1.0;
                let h10 = t3 - 2.0 * t2 + t;
                let h01 = -2.0 * t3 + 3.0 * t2;
                let h11 = t3 - t2;
                // d/du of the basis (d/dt · 1/h), and the slope terms' h · d/du = d/dt.
                let d00 = (6.0 * t2 - 6.0 * t) * ih;
                let d01 = -d00;
                let e10 = 3.0 * t2 - 4.0 * t + 1.0;
                let e11 = 3.0 * t2 - 2.0 * t;
                // Local node slots: 0 = i−1, 1 = i, 2 = i+1, 3 = i+2.
                let mut w = [0.0, h00, h01, 0.0];
                let mut dw = [0.0, d00, d01, 0.0];
                // m_i = Σ c_k y_k over slots (0, 1, 2): central secant inside, one-sided at
                // the first node; m_{i+1} over slots (1, 2, 3), one-sided at the last.
                let (ma, mb, mc) = if i > 0 {
                    let s = ax.inv_span[i];
                    (-s, 0.0, s)
                } else {
                    (0.0, -ih, ih)
                };
                let (na, nb, nc) = if i + 2 < n {
                    let s = ax.inv_span[i + 1];
                    (-s, 0.0, s)
                } else {
                    (-ih, ih, 0.0)
                };
                let (p10, p11) = (h * h10, h * h11);
                w[0] += p10 * ma;
                w[1] += p10 * mb + p11 * na;
                w[2] += p10 * mc + p11 * nb;
                w[3] += p11 * nc;
                if GRAD {
                    dw[0] += e10 * ma;
                    dw[1] += e10 * mb + e11 * na;
                    dw[2] += e10 * mc + e11 * nb;
                    dw[3] += e11 * nc;
                }
                let first = if i > 0 { 0 } else { 1 };
                let last = if i + 2 < n { 3 } else { 2 };
                st.start = i + first - 1;
                st.len = last - first + 1;
                st.w[..st.len].copy_from_slice(&w[first..=last]);
                st.dw[..st.len].copy_from_slice(&dw[first..=last]);
            }
        }
        st
    }

    /// The fast path over N ≥ ndim axes: the value (and the gradient into `grad` if `GRAD`),
    /// or None when the point is outside the grid or its cell touches a flagged node.
    /// `C` = 2^N (and H = C/2) selects the multilinear kernel over precomputed corner
    /// offsets (0: the general stencil walk).
    #[inline(always)]
    fn eval_n<const N: usize, const C: usize, const H: usize, const GRAD: bool>(
        &self,
        point: &[f64],
        grad: &mut [f64],
    ) -> Option<f64> {
        let nd = if N < MAX_AXES { N } else { self.axes.len() };
        let mut pos = [Position {
            cell: 0,
            t: 0.0,
            inv_h: 0.0,
            dudx: 0.0,
        }; N];
        let mut cell = 0;
        for a in 0..nd {
            pos[a] = self.position::<GRAD>(a, point[a])?;
            cell += pos[a].cell * self.cell_strides[a];
        }
        if self.bad_cell[cell] {
            return None;
        }
        let (p, g) = if C > 0 && self.method == Method::Linear {
            let corners: &[usize; C] = self.corners.as_slice().try_into().ok()?;
            let mut base = 0;
            for a in 0..nd {
                base += pos[a].cell * self.strides[a];
            }
            multilinear::<N, C, H, GRAD>(&self.values, base, corners, &pos)
        } else {
            let mut st = [EMPTY_STENCIL; N];
            for a in 0..nd {
                st[a] = self.stencil::<GRAD>(a, &pos[a]);
            }
            contract::<N, GRAD>(&self.values, &self.strides, &st, nd)
        };
        let value = if self.log_value {
            (p * std::f64::consts::LN_10).exp()
        } else {
            p
        };
        if GRAD {
            let scale = if self.log_value {
                value * std::f64::consts::LN_10
            } else {
                1.0
            };
            for a in 0..nd {
                grad[a] = g[a] * pos[a].dudx * scale;
            }
        }
        Some(value)
    }

    fn eval_fast<const GRAD: bool>(&self, point: &[f64], grad: &mut [f64]) -> Option<f64> {
        match self.axes.len() {
            1 => self.eval_n::<1, 2, 1, GRAD>(point, grad),
            2 => self.eval_n::<2, 4, 2, GRAD>(point, grad),
            3 => self.eval_n::<3, 8, 4, GRAD>(point, grad),
            4 => self.eval_n::<4, 16, 8, GRAD>(point, grad),
            5 => self.eval_n::<5, 32, 16, GRAD>(point, grad),
            6 => self.eval_n::<6, 64, 32, GRAD>(point, grad),
            _ => self.eval_n::<MAX_AXES, 0, 0, GRAD>(point, grad),
        }
    }

    fn bad_point(&self, reason: String) -> InterpError {
        InterpError::BadPoint {
            path: self.path.clone(),
            dataset: self.name.clone(),
            reason,
        }
    }

    fn check_len(&self, point: &[f64]) -> Result<()> {
        let nd = self.axes.len();
        if point.len() != nd {
            return Err(self.bad_point(format!("{} coordinates given for {nd} axes", point.len())));
        }
        Ok(())
    }

    /// Why the fast path refused a point: the first axis it lies outside of, else the first
    /// flagged node of its stencil (sorted node order, last axis fastest).
    fn diagnose(&self, point: &[f64]) -> InterpError {
        let mut st = Vec::with_capacity(point.len());
        for (a, &x) in point.iter().enumerate() {
            match self.position::<false>(a, x) {
                Some(p) => st.push(self.stencil::<false>(a, &p)),
                None => {
                    let ax = &self.axes[a];
                    return InterpError::OutOfRange {
                        path: self.path.clone(),
                        dataset: self.name.clone(),
                        axis: ax.name.clone(),
                        value: x,
                        lo: ax.lo,
                        hi: ax.hi,
                    };
                }
            }
        }
        let count: usize = st.iter().map(|s| s.len).product();
        for mut k in 0..count {
            let mut flat = 0;
            for a in (0..st.len()).rev() {
                flat += (st[a].start + k % st[a].len) * self.strides[a];
                k /= st[a].len;
            }
            if let Some((reason, non_positive)) = self.flagged.get(&flat) {
                return InterpError::Flagged {
                    path: self.path.clone(),
                    dataset: self.name.clone(),
                    node: self.node_name(flat),
                    reason: reason.clone(),
                    non_positive: *non_positive,
                };
            }
        }
        self.bad_point("refused, but neither outside the grid nor flagged (a bug)".into())
    }

    /// `axis=value` pairs of the node with sorted flat index `flat`.
    fn node_name(&self, flat: usize) -> String {
        let mut rest = flat;
        let mut parts = Vec::new();
        for (d, ax) in self.axes.iter().enumerate() {
            let k = rest / self.strides[d];
            rest %= self.strides[d];
            parts.push(format!("{}={}", ax.name, ax.x[ax.storage(k)]));
        }
        parts.join(",")
    }

    /// The value at a point (physical parameters, axis order), without the gradient.
    pub fn value(&self, point: &[f64]) -> Result<f64> {
        self.check_len(point)?;
        self.eval_fast::<false>(point, &mut [])
            .ok_or_else(|| self.diagnose(point))
    }

    /// The value at a point, and its gradient (∂value/∂x per axis, physical units) written
    /// into `gradient` (length [`Interpolator::ndim`]); allocates nothing.
    pub fn evaluate_into(&self, point: &[f64], gradient: &mut [f64]) -> Result<f64> {
        self.check_len(point)?;
        if gradient.len() != self.axes.len() {
            return Err(self.bad_point(format!(
                "gradient buffer of {} for {} axes",
                gradient.len(),
                self.axes.len()
            )));
        }
        self.eval_fast::<true>(point, gradient)
            .ok_or_else(|| self.diagnose(point))
    }

    /// Value and gradient at a point (physical parameters, axis order).
    pub fn evaluate(&self, point: &[f64]) -> Result<Sample> {
        let mut gradient = vec![0.0; self.axes.len()];
        let value = self.evaluate_into(point, &mut gradient)?;
        let clamped = self
            .axes
            .iter()
            .zip(point)
            .map(|(ax, &x)| self.clamp && !(x >= ax.lo && x <= ax.hi))
            .collect();
        Ok(Sample {
            value,
            gradient,
            clamped,
        })
    }

    /// Evaluate many points serially.
    pub fn evaluate_serial(&self, points: &[Vec<f64>]) -> Vec<Result<Sample>> {
        points.iter().map(|p| self.evaluate(p)).collect()
    }

    /// Evaluate many points in parallel (rayon); identical, bit for bit, to
    /// [`Interpolator::evaluate_serial`] (each point is computed alone, in the same order of
    /// operations).
    pub fn evaluate_many(&self, points: &[Vec<f64>]) -> Vec<Result<Sample>> {
        points.par_iter().map(|p| self.evaluate(p)).collect()
    }
}

#[cfg(test)]
mod tests;

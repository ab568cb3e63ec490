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

pub mod fit;

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
    },
}

/// Result alias.
pub type Result<T> = std::result::Result<T, InterpError>;

/// Most axes an interpolator takes.
pub const MAX_AXES: usize = 12;

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
        let data = self.read(dataset)?;
        let values: Vec<f64> = match (meta.per_line, line) {
            (true, Some(label)) => {
                let k = self.line_index(label)?;
                let last = data.ndim() - 1;
                data.index_axis(ndarray::Axis(last), k)
                    .iter()
                    .copied()
                    .collect()
            }
            (true, None) => return Err(use_err("is per line: name the line")),
            (false, Some(_)) => return Err(use_err("is per point: it takes no line")),
            (false, None) => data.iter().copied().collect(),
        };
        let status: Vec<u8> = self.status()?.iter().copied().collect();
        let name = match line {
            Some(l) => format!("{dataset}[{l}]"),
            None => dataset.to_string(),
        };
        Ok(Table {
            path: self.path().to_path_buf(),
            name,
            axes: self.axes().to_vec(),
            values,
            status,
            status_flags: self.file.status_flags().to_vec(),
        })
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
        match self {
            Coord::Linear => (x, 1.0),
            Coord::Log10 => (x.log10(), 1.0 / (x * std::f64::consts::LN_10)),
            Coord::Theta => (5040.0 / x, -5040.0 / (x * x)),
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
}

/// One axis' stencil: up to four (storage index, weight, d weight / du).
#[derive(Debug, Clone, Copy)]
struct Stencil {
    len: usize,
    idx: [usize; 4],
    w: [f64; 4],
    dw: [f64; 4],
}

/// An interpolator over one table.
#[derive(Debug, Clone)]
pub struct Interpolator {
    path: PathBuf,
    name: String,
    axes: Vec<AxisNodes>,
    values: Vec<f64>,
    /// Why a node is flagged (None = usable).
    flags: Vec<Option<String>>,
    strides: Vec<usize>,
    method: Method,
    log_value: bool,
    clamp: bool,
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
        if nd > MAX_AXES {
            return Err(InterpError::BadPoint {
                path: table.path.clone(),
                dataset: table.name.clone(),
                reason: format!("{nd} axes; at most {MAX_AXES} are supported"),
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
            let mut u: Vec<f64> = a.values.iter().map(|&x| coord.apply(x).0).collect();
            let reversed = u.len() > 1 && u[0] > u[u.len() - 1];
            if reversed {
                u.reverse();
            }
            let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            axes.push(AxisNodes {
                name: a.name.clone(),
                coord,
                u,
                reversed,
                lo,
                hi,
                x: a.values.clone(),
            });
        }
        let mut strides = vec![1; nd];
        for d in (0..nd.saturating_sub(1)).rev() {
            strides[d] = strides[d + 1] * axes[d + 1].u.len();
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
        let mut values = Vec::with_capacity(table.values.len());
        let mut flags = Vec::with_capacity(table.values.len());
        for (&v, &s) in table.values.iter().zip(&table.status) {
            let flag = if s != 0 {
                Some(meaning(s))
            } else if !v.is_finite() {
                Some("value is not finite".to_string())
            } else if options.log_value && v <= 0.0 {
                Some(format!("value {v} is not positive, log10 impossible"))
            } else {
                None
            };
            values.push(if options.log_value && flag.is_none() {
                v.log10()
            } else {
                v
            });
            flags.push(flag);
        }
        Ok(Interpolator {
            path: table.path.clone(),
            name: table.name.clone(),
            axes,
            values,
            flags,
            strides,
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

    fn stencil(&self, a: usize, x: f64) -> Result<(Stencil, f64, bool)> {
        let ax = &self.axes[a];
        let mut x = x;
        let mut clamped = false;
        if !(x >= ax.lo && x <= ax.hi) {
            if self.clamp && !x.is_nan() {
                x = x.clamp(ax.lo, ax.hi);
                clamped = true;
            } else {
                return Err(InterpError::OutOfRange {
                    path: self.path.clone(),
                    dataset: self.name.clone(),
                    axis: ax.name.clone(),
                    value: x,
                    lo: ax.lo,
                    hi: ax.hi,
                });
            }
        }
        let n = ax.u.len();
        let map = |k: usize| if ax.reversed { n - 1 - k } else { k };
        let mut st = Stencil {
            len: 0,
            idx: [0; 4],
            w: [0.0; 4],
            dw: [0.0; 4],
        };
        if n == 1 {
            st.len = 1;
            st.w[0] = 1.0;
            return Ok((st, 0.0, clamped));
        }
        // Exact node values give u exactly (same transform as the nodes), so nodes are hit.
        let (u, dudx) = ax.coord.apply(x);
        let u = u.clamp(ax.u[0], ax.u[n - 1]);
        let i = ax.u.partition_point(|&v| v <= u).clamp(1, n - 1) - 1;
        let h = ax.u[i + 1] - ax.u[i];
        let t = (u - ax.u[i]) / h;
        match self.method {
            Method::Linear => {
                st.len = 2;
                st.idx[0] = map(i);
                st.idx[1] = map(i + 1);
                st.w = [1.0 - t, t, 0.0, 0.0];
                st.dw = [-1.0 / h, 1.0 / h, 0.0, 0.0];
            }
            Method::Cubic => {
                let t2 = t * t;
                let t3 = t2 * t;
                let h00 = 2.0 * t3 - 3.0 * t2 + 1.0;
                let h10 = t3 - 2.0 * t2 + t;
                let h01 = -2.0 * t3 + 3.0 * t2;
                let h11 = t3 - t2;
                let d00 = (6.0 * t2 - 6.0 * t) / h;
                let d10 = (3.0 * t2 - 4.0 * t + 1.0) / h;
                let d01 = (-6.0 * t2 + 6.0 * t) / h;
                let d11 = (3.0 * t2 - 2.0 * t) / h;
                // Local node slots: 0 = i−1, 1 = i, 2 = i+1, 3 = i+2.
                let mut w = [0.0; 4];
                let mut dw = [0.0; 4];
                w[1] += h00;
                dw[1] += d00;
                w[2] += h01;
                dw[2] += d01;
                // m_i = Σ c_k y_k: central secant inside, one-sided at the first node.
                let (ma, mb, mc) = if i > 0 {
                    let s = 1.0 / (ax.u[i + 1] - ax.u[i - 1]);
                    (-s, 0.0, s)
                } else {
                    (0.0, -1.0 / h, 1.0 / h)
                };
                let (na, nb, nc) = if i + 2 < n {
                    let s = 1.0 / (ax.u[i + 2] - ax.u[i]);
                    (-s, 0.0, s)
                } else {
                    (-1.0 / h, 1.0 / h, 0.0)
                };
                // m_i over slots (0, 1, 2); m_{i+1} over slots (1, 2, 3).
                for (slot, c) in [(0usize, ma), (1, mb), (2, mc)] {
                    w[slot] += h * h10 * c;
                    dw[slot] += h * d10 * c;
                }
                for (slot, c) in [(1usize, na), (2, nb), (3, nc)] {
                    w[slot] += h * h11 * c;
                    dw[slot] += h * d11 * c;
                }
                let first = if i > 0 { 0 } else { 1 };
                let last = if i + 2 < n { 3 } else { 2 };
                for (j, slot) in (first..=last).enumerate() {
                    st.idx[j] = map(i + slot - 1);
                    st.w[j] = w[slot];
                    st.dw[j] = dw[slot];
                }
                st.len = last - first + 1;
            }
        }
        Ok((st, if clamped { 0.0 } else { dudx }, clamped))
    }

    fn node_name(&self, flat: usize) -> String {
        let mut rest = flat;
        let mut parts = Vec::new();
        for (d, ax) in self.axes.iter().enumerate() {
            let k = rest / self.strides[d];
            rest %= self.strides[d];
            parts.push(format!("{}={}", ax.name, ax.x[k]));
        }
        parts.join(",")
    }

    /// Sum factorisation over the axes from `d` on: value and ∂/∂u_e for e ≥ d of the
    /// tensor-product stencil, or the flat index of a flagged node it touches.
    fn contract(
        &self,
        st: &[Stencil],
        d: usize,
        offset: usize,
    ) -> std::result::Result<[f64; MAX_AXES + 1], usize> {
        let mut acc = [0.0; MAX_AXES + 1];
        if d == st.len() {
            if self.flags[offset].is_some() {
                return Err(offset);
            }
            acc[0] = self.values[offset];
            return Ok(acc);
        }
        let s = &st[d];
        for j in 0..s.len {
            let sub = self.contract(st, d + 1, offset + s.idx[j] * self.strides[d])?;
            acc[0] += s.w[j] * sub[0];
            acc[1 + d] += s.dw[j] * sub[0];
            for e in d + 1..st.len() {
                acc[1 + e] += s.w[j] * sub[1 + e];
            }
        }
        Ok(acc)
    }

    /// Value and gradient at a point (physical parameters, axis order).
    pub fn evaluate(&self, point: &[f64]) -> Result<Sample> {
        let nd = self.axes.len();
        if point.len() != nd {
            return Err(InterpError::BadPoint {
                path: self.path.clone(),
                dataset: self.name.clone(),
                reason: format!("{} coordinates given for {nd} axes", point.len()),
            });
        }
        let mut stencils = Vec::with_capacity(nd);
        let mut dudx = Vec::with_capacity(nd);
        let mut clamped = Vec::with_capacity(nd);
        for (a, &x) in point.iter().enumerate() {
            let (s, d, c) = self.stencil(a, x)?;
            stencils.push(s);
            dudx.push(d);
            clamped.push(c);
        }
        let acc = self
            .contract(&stencils, 0, 0)
            .map_err(|flat| InterpError::Flagged {
                path: self.path.clone(),
                dataset: self.name.clone(),
                node: self.node_name(flat),
                reason: self.flags[flat].clone().unwrap_or_default(),
            })?;
        let mut value = acc[0];
        let mut grad = acc[1..=nd].to_vec();
        for (g, d) in grad.iter_mut().zip(&dudx) {
            *g *= d;
        }
        if self.log_value {
            let v = 10f64.powf(value);
            for g in &mut grad {
                *g *= v * std::f64::consts::LN_10;
            }
            value = v;
        }
        Ok(Sample {
            value,
            gradient: grad,
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

//! Fitting observed line strengths with grid interpolators: bound-constrained
//! Levenberg–Marquardt (Moré 1978, "The Levenberg–Marquardt algorithm: implementation and
//! theory", Numerical Analysis, Springer LNM vol. 630, 105–116; Marquardt's
//! diagonal scaling, steps projected onto the grid box) from several seeded starting points,
//! with χ², reduced χ², the covariance (JᵀJ)⁻¹ in physical units and every distinct local
//! minimum.
//!
//! The search runs in normalised coordinates z ∈ [0, 1] per free axis (linear in the axis'
//! interpolation coordinate), so that all axes are equally scaled.

// Small dense linear algebra reads best with explicit indices.
#![allow(clippy::needless_range_loop)]

use super::{Coord, Interpolator};

/// Fit options.
#[derive(Debug, Clone)]
pub struct FitOptions {
    /// Random starting points (in addition to the best grid node).
    pub starts: usize,
    /// Seed of the starting points.
    pub seed: u64,
    /// Iteration limit per start.
    pub max_iterations: usize,
    /// Two minima are distinct when some free axis differs by more than this in z.
    pub distinct: f64,
}

impl Default for FitOptions {
    fn default() -> FitOptions {
        FitOptions {
            starts: 16,
            seed: 1,
            max_iterations: 200,
            distinct: 0.03,
        }
    }
}

/// One local minimum.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Minimum {
    /// All axis values (fixed ones included), physical units.
    pub parameters: Vec<f64>,
    /// 1σ uncertainty per axis from the covariance (0 for fixed axes; None if the
    /// parameter is not constrained: singular JᵀJ).
    pub uncertainties: Vec<Option<f64>>,
    /// Covariance over the free axes (row-major, free-axis order), if JᵀJ is regular.
    pub covariance: Option<Vec<f64>>,
    /// χ².
    pub chi2: f64,
    /// χ² / (observations − free parameters), if positive degrees of freedom.
    pub reduced_chi2: Option<f64>,
    /// Whether some free parameter sits on the grid's edge.
    pub at_edge: bool,
    /// How many starts ended here.
    pub hits: usize,
}

/// The result of a fit.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct FitResult {
    /// Distinct local minima, best first.
    pub minima: Vec<Minimum>,
    /// Minima other than the best one whose χ² is within 1 of the best (Δχ² < 1: the data
    /// cannot tell them apart at 1σ).
    pub degenerate: bool,
    /// Starting points that could not be evaluated (stencil on flagged nodes).
    pub failed_starts: usize,
}

/// SplitMix64 (Steele, Lea & Flood 2014, OOPSLA).
fn splitmix(state: &mut u64) -> f64 {
    *state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *state;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    ((z ^ (z >> 31)) >> 11) as f64 / (1u64 << 53) as f64
}

struct Problem<'a> {
    models: &'a [&'a Interpolator],
    obs: &'a [f64],
    sigma: &'a [f64],
    base: Vec<f64>,
    free: Vec<usize>,
    coords: Vec<Coord>,
    /// Per axis (u_lo, u_hi) of the coordinate, and physical (lo, hi).
    u_range: Vec<(f64, f64)>,
    x_range: Vec<(f64, f64)>,
}

fn inverse(c: Coord, u: f64) -> f64 {
    match c {
        Coord::Linear => u,
        Coord::Log10 => 10f64.powf(u),
        Coord::Theta => 5040.0 / u,
    }
}

impl Problem<'_> {
    fn x_of(&self, z: &[f64]) -> Vec<f64> {
        let mut x = self.base.clone();
        for (j, &d) in self.free.iter().enumerate() {
            let (a, b) = self.u_range[d];
            let u = a + z[j].clamp(0.0, 1.0) * (b - a);
            x[d] = inverse(self.coords[d], u).clamp(self.x_range[d].0, self.x_range[d].1);
        }
        x
    }

    /// The covariance (JᵀJ)⁻¹ over the free axes (physical units, row-major) at `z`, or None
    /// where JᵀJ is singular or a stencil is flagged.
    ///
    /// Where the interpolant has a kink along a free axis at `z` (a node of a multilinear
    /// table: its gradient jumps there), J is one-sided and which side the minimiser's last
    /// rounding put it on would decide the answer. The gradient is therefore taken just
    /// below and just above z on each free axis (±`KINK_PROBE` in z); along an axis whose
    /// two one-sided columns differ by more than `KINK_TOLERANCE` relative, both sides are
    /// tried (every combination, up to `KINK_AXES` such axes), and the largest covariance
    /// (smallest det JᵀJ: the side of the smaller slopes) is returned. If any combination
    /// leaves JᵀJ singular, or a probed slope is not finite, the answer is None
    /// (unconstrained). Beyond `KINK_AXES` kinked axes the rest keep the gradient at z
    /// itself (the side the minimiser ended on). Elsewhere J is taken at z itself.
    fn covariance(&self, z: &[f64]) -> Option<Vec<f64>> {
        let nf = self.free.len();
        let (r, jac) = self.residuals(z, true)?;
        // one-sided columns per free axis (None: smooth there, or at the box's edge)
        let mut sides: Vec<Option<[Vec<f64>; 2]>> = vec![None; nf];
        for j in 0..nf {
            let column = |dz: f64| -> Option<Vec<f64>> {
                let mut zz = z.to_vec();
                zz[j] = (z[j] + dz).clamp(0.0, 1.0);
                (zz[j].to_bits() != z[j].to_bits()).then_some(())?;
                self.residuals(&zz, true)
                    .map(|(_, jj)| jj.iter().map(|row| row[j]).collect())
            };
            if let (Some(lo), Some(hi)) = (column(-KINK_PROBE), column(KINK_PROBE)) {
                // a slope that is not a number on either side: unconstrained, not smooth
                if lo.iter().chain(&hi).any(|v| !v.is_finite()) {
                    return None;
                }
                let scale = lo.iter().chain(&hi).fold(0.0f64, |m, v| m.max(v.abs()));
                let jump = lo
                    .iter()
                    .zip(&hi)
                    .fold(0.0f64, |m, (a, b)| m.max((a - b).abs()));
                if scale > 0.0 && jump > KINK_TOLERANCE * scale {
                    sides[j] = Some([lo, hi]);
                }
            }
        }
        let kinked: Vec<usize> = (0..nf).filter(|&j| sides[j].is_some()).collect();
        let kinked = &kinked[..kinked.len().min(KINK_AXES)];
        let mut best: Option<(f64, Vec<f64>)> = None;
        for pick in 0..(1usize << kinked.len()) {
            let mut jj = jac.clone();
            for (bit, &j) in kinked.iter().enumerate() {
                let col =
                    &sides[j].as_ref().expect("kinked axis has both sides")[(pick >> bit) & 1];
                for (row, &v) in jj.iter_mut().zip(col) {
                    row[j] = v;
                }
            }
            let (a, _) = normal_equations(&r, &jj, nf);
            // one side that leaves a direction unconstrained makes the whole answer so
            let (inv, det) = invert(&a)?;
            // the largest covariance: the smallest det(JᵀJ)
            if best.as_ref().is_none_or(|(d, _)| det < *d) {
                best = Some((det, inv));
            }
        }
        best.map(|(_, inv)| inv)
    }

    /// Residuals and Jacobian in z (rows = observations), or None on a flagged stencil.
    fn residuals(&self, z: &[f64], wrt_x: bool) -> Option<(Vec<f64>, Vec<Vec<f64>>)> {
        let x = self.x_of(z);
        let mut r = Vec::with_capacity(self.obs.len());
        let mut jac = Vec::with_capacity(self.obs.len());
        let mut gradient = vec![0.0; x.len()];
        for ((m, &y), &s) in self.models.iter().zip(self.obs).zip(self.sigma) {
            let value = m.evaluate_into(&x, &mut gradient).ok()?;
            r.push((value - y) / s);
            let row: Vec<f64> = self
                .free
                .iter()
                .map(|&d| {
                    let g = gradient[d] / s;
                    if wrt_x {
                        return g;
                    }
                    // dx/dz = dx/du · (u_hi − u_lo).
                    let (a, b) = self.u_range[d];
                    let dxdu = match self.coords[d] {
                        Coord::Linear => 1.0,
                        Coord::Log10 => x[d] * std::f64::consts::LN_10,
                        Coord::Theta => -x[d] * x[d] / 5040.0,
                    };
                    g * dxdu * (b - a)
                })
                .collect();
            jac.push(row);
        }
        Some((r, jac))
    }
}

/// Cholesky factor L (A = L Lᵀ) of a symmetric positive matrix; None if not positive definite.
fn cholesky(a: &[Vec<f64>]) -> Option<Vec<Vec<f64>>> {
    let n = a.len();
    let mut l = vec![vec![0.0; n]; n];
    for i in 0..n {
        for j in 0..=i {
            let mut s = a[i][j];
            for k in 0..j {
                s -= l[i][k] * l[j][k];
            }
            if i == j {
                if s <= 1e-14 * a[i][i].abs().max(f64::MIN_POSITIVE) || !s.is_finite() {
                    return None;
                }
                l[i][i] = s.sqrt();
            } else {
                l[i][j] = s / l[j][j];
            }
        }
    }
    Some(l)
}

/// x with L Lᵀ x = b, by forward and back substitution.
fn cholesky_substitute(l: &[Vec<f64>], b: &[f64]) -> Vec<f64> {
    let n = b.len();
    let mut y = vec![0.0; n];
    for i in 0..n {
        let mut s = b[i];
        for k in 0..i {
            s -= l[i][k] * y[k];
        }
        y[i] = s / l[i][i];
    }
    let mut x = vec![0.0; n];
    for i in (0..n).rev() {
        let mut s = y[i];
        for k in i + 1..n {
            s -= l[k][i] * x[k];
        }
        x[i] = s / l[i][i];
    }
    x
}

/// Solve the symmetric positive system A x = b (Cholesky); None if not positive definite.
fn cholesky_solve(a: &[Vec<f64>], b: &[f64]) -> Option<Vec<f64>> {
    cholesky(a).map(|l| cholesky_substitute(&l, b))
}

/// Probe distance in z for one-sided gradients (see `Problem::covariance`).
const KINK_PROBE: f64 = 1e-7;
/// Relative jump of a Jacobian column that counts as a kink.
const KINK_TOLERANCE: f64 = 1e-4;
/// At most this many kinked axes are combined (2^k covariances).
const KINK_AXES: usize = 4;

/// A⁻¹ (row-major) of a symmetric positive definite n×n matrix and det A, from one
/// Cholesky factorisation; None if not positive definite.
fn invert(a: &[Vec<f64>]) -> Option<(Vec<f64>, f64)> {
    let n = a.len();
    let l = cholesky(a)?;
    let det = (0..n).map(|i| l[i][i] * l[i][i]).product();
    let mut inv = vec![0.0; n * n];
    for j in 0..n {
        let mut e = vec![0.0; n];
        e[j] = 1.0;
        for (i, v) in cholesky_substitute(&l, &e).into_iter().enumerate() {
            inv[i * n + j] = v;
        }
    }
    Some((inv, det))
}

fn normal_equations(r: &[f64], jac: &[Vec<f64>], n: usize) -> (Vec<Vec<f64>>, Vec<f64>) {
    let mut a = vec![vec![0.0; n]; n];
    let mut g = vec![0.0; n];
    for (row, &ri) in jac.iter().zip(r) {
        for i in 0..n {
            g[i] += row[i] * ri;
            for j in 0..n {
                a[i][j] += row[i] * row[j];
            }
        }
    }
    (a, g)
}

fn chi2(r: &[f64]) -> f64 {
    r.iter().map(|x| x * x).sum()
}

/// One projected Levenberg–Marquardt descent from `z0`; returns (z, χ²).
fn descend(p: &Problem, z0: Vec<f64>, max_iterations: usize) -> Option<(Vec<f64>, f64)> {
    let n = z0.len();
    let mut z = z0;
    let (mut r, mut jac) = p.residuals(&z, false)?;
    let mut c = chi2(&r);
    let mut lambda = 1e-3;
    for _ in 0..max_iterations {
        let (a, g) = normal_equations(&r, &jac, n);
        let mut improved = false;
        for _ in 0..30 {
            let mut m = a.clone();
            for i in 0..n {
                m[i][i] += lambda * a[i][i].max(1e-12);
            }
            let neg: Vec<f64> = g.iter().map(|x| -x).collect();
            let Some(step) = cholesky_solve(&m, &neg) else {
                lambda *= 10.0;
                continue;
            };
            let trial: Vec<f64> = z
                .iter()
                .zip(&step)
                .map(|(a, b)| (a + b).clamp(0.0, 1.0))
                .collect();
            match p.residuals(&trial, false) {
                Some((rt, jt)) if chi2(&rt) < c => {
                    let ct = chi2(&rt);
                    let moved = trial
                        .iter()
                        .zip(&z)
                        .map(|(a, b)| (a - b).abs())
                        .fold(0.0, f64::max);
                    let done = (c - ct) <= 1e-12 * c.max(1e-300) || moved < 1e-12;
                    z = trial;
                    r = rt;
                    jac = jt;
                    c = ct;
                    lambda = (lambda / 3.0).max(1e-12);
                    improved = true;
                    if done {
                        return Some((z, c));
                    }
                    break;
                }
                _ => lambda *= 4.0,
            }
            if lambda > 1e12 {
                break;
            }
        }
        if !improved {
            break;
        }
    }
    Some((z, c))
}

/// Fit observations `obs ± sigma` of the quantities `models` (one interpolator per
/// observation, all over the same grid) over the axes not fixed in `fixed` (per axis:
/// `Some(value)` holds the axis at that value).
pub fn fit(
    models: &[&Interpolator],
    obs: &[f64],
    sigma: &[f64],
    fixed: &[Option<f64>],
    options: &FitOptions,
) -> FitResult {
    let m0 = models[0];
    let nd = m0.ndim();
    let coords = m0.coords();
    let x_range = m0.ranges();
    let u_range: Vec<(f64, f64)> = (0..nd)
        .map(|d| {
            let a = coords[d].apply(x_range[d].0).0;
            let b = coords[d].apply(x_range[d].1).0;
            (a, b)
        })
        .collect();
    let free: Vec<usize> = (0..nd).filter(|&d| fixed[d].is_none()).collect();
    let base: Vec<f64> = (0..nd)
        .map(|d| fixed[d].unwrap_or(0.5 * (x_range[d].0 + x_range[d].1)))
        .collect();
    let p = Problem {
        models,
        obs,
        sigma,
        base,
        free: free.clone(),
        coords,
        u_range,
        x_range,
    };
    let nf = free.len();
    // Starting points: seeded uniform in the box, plus the best of a coarse lattice.
    let mut state = options.seed;
    let mut starts: Vec<Vec<f64>> = (0..options.starts)
        .map(|_| (0..nf).map(|_| splitmix(&mut state)).collect())
        .collect();
    let lattice = 9usize;
    let mut best: Option<(f64, Vec<f64>)> = None;
    let total = lattice.pow(nf as u32);
    for k in 0..total {
        let mut rest = k;
        let z: Vec<f64> = (0..nf)
            .map(|_| {
                let i = rest % lattice;
                rest /= lattice;
                (i as f64 + 0.5) / lattice as f64
            })
            .collect();
        if let Some((r, _)) = p.residuals(&z, false) {
            let c = chi2(&r);
            if best.as_ref().is_none_or(|b| c < b.0) {
                best = Some((c, z));
            }
        }
    }
    if let Some((_, z)) = best {
        starts.push(z);
    }
    let mut failed = 0;
    let mut found: Vec<(Vec<f64>, f64, usize)> = Vec::new();
    for z0 in starts {
        match descend(&p, z0, options.max_iterations) {
            None => failed += 1,
            Some((z, c)) => {
                if let Some(f) = found.iter_mut().find(|f| {
                    f.0.iter()
                        .zip(&z)
                        .all(|(a, b)| (a - b).abs() <= options.distinct)
                }) {
                    f.2 += 1;
                    if c < f.1 {
                        f.0 = z;
                        f.1 = c;
                    }
                } else {
                    found.push((z, c, 1));
                }
            }
        }
    }
    found.sort_by(|a, b| a.1.total_cmp(&b.1));
    let dof = obs.len() as isize - nf as isize;
    let minima: Vec<Minimum> = found
        .into_iter()
        .map(|(z, c, hits)| {
            let x = p.x_of(&z);
            let mut unc = vec![Some(0.0); nd];
            let cov = p.covariance(&z);
            for (j, &d) in free.iter().enumerate() {
                unc[d] = cov.as_ref().map(|c| c[j * nf + j].sqrt());
            }
            Minimum {
                at_edge: z.iter().any(|&v| v <= 1e-9 || v >= 1.0 - 1e-9),
                parameters: x,
                uncertainties: unc,
                covariance: cov,
                chi2: c,
                reduced_chi2: (dof > 0).then(|| c / dof as f64),
                hits,
            }
        })
        .collect();
    let degenerate = minima.len() > 1 && minima[1].chi2 - minima[0].chi2 < 1.0;
    FitResult {
        minima,
        degenerate,
        failed_starts: failed,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::grid::store::AxisMeta;
    use crate::interp::{Method, Options, Table};

    /// A one-axis table (metallicity, linear coordinate) with the given node values.
    fn line_table(nodes: &[f64], values: &[f64]) -> Table {
        Table {
            path: "test.h5".into(),
            name: "q".into(),
            axes: vec![AxisMeta {
                name: "metallicity".into(),
                units: String::new(),
                long_name: String::new(),
                values: nodes.to_vec(),
            }],
            values: values.to_vec(),
            status: vec![0; values.len()],
            status_flags: vec![(0, "converged".into())],
        }
    }

    /// A two-axis table (linear coordinates, nodes −1, 0, 1 on both) with node values
    /// f(x, y), row-major (x slowest).
    fn square_table(f: impl Fn(usize, usize) -> f64) -> Table {
        let axis = |name: &str| AxisMeta {
            name: name.into(),
            units: String::new(),
            long_name: String::new(),
            values: vec![-1.0, 0.0, 1.0],
        };
        Table {
            path: "test.h5".into(),
            name: "q".into(),
            axes: vec![axis("x"), axis("y")],
            values: (0..3)
                .flat_map(|i| (0..3).map(move |j| (i, j)))
                .map(|(i, j)| f(i, j))
                .collect(),
            status: vec![0; 9],
            status_flags: vec![(0, "converged".into())],
        }
    }

    fn one_minimum(table: &Table, method: Method, y: f64, sigma: f64) -> Minimum {
        let options = Options {
            method,
            ..Options::default()
        };
        let m = Interpolator::new(table, &options).unwrap();
        let r = fit(&[&m], &[y], &[sigma], &[None], &FitOptions::default());
        r.minima[0].clone()
    }

    #[test]
    fn a_minimum_on_a_kink_takes_the_larger_one_sided_uncertainty() {
        // Linear error propagation (common practice, no source): σ_x = σ_y/|dy/dx|. On a node
        // of a multilinear table the slope jumps; the answer must not depend on the side the
        // minimiser ends on, and is the conservative one, σ_y over the smaller slope.
        let nodes = [-1.0, 0.0, 1.0];
        for values in [[0.0, 1.0, 3.0], [0.0, 2.0, 3.0]] {
            let t = line_table(&nodes, &values);
            let m = one_minimum(&t, Method::Linear, values[1], 0.1);
            assert!(m.parameters[0].abs() < 1e-6, "{m:?}");
            let u = m.uncertainties[0].unwrap();
            assert!((u - 0.1).abs() < 1e-9, "slopes {values:?}: σ = {u}");
            let c = m.covariance.as_ref().unwrap();
            assert!((c[0] - u * u).abs() < 1e-15);
        }
        // away from a node: the local slope (2 in the upper cell of the first table)
        let t = line_table(&nodes, &[0.0, 1.0, 3.0]);
        let m = one_minimum(&t, Method::Linear, 2.0, 0.1);
        assert!((m.parameters[0] - 0.5).abs() < 1e-6, "{m:?}");
        assert!((m.uncertainties[0].unwrap() - 0.05).abs() < 1e-9, "{m:?}");
        // a smooth interpolant keeps its own gradient at the node
        let t = line_table(&[-2.0, -1.0, 0.0, 1.0, 2.0], &[-4.0, -1.0, 1.0, 3.0, 6.0]);
        let ip = Interpolator::new(
            &t,
            &Options {
                method: Method::Cubic,
                ..Options::default()
            },
        )
        .unwrap();
        let g = ip.evaluate(&[0.0]).unwrap().gradient[0];
        let m = one_minimum(&t, Method::Cubic, 1.0, 0.1);
        assert!(m.parameters[0].abs() < 1e-6, "{m:?}");
        let expect = 0.1 / g.abs();
        assert!(
            (m.uncertainties[0].unwrap() / expect - 1.0).abs() < 1e-6,
            "{m:?} against {expect}"
        );
    }

    #[test]
    fn a_minimum_on_a_corner_of_four_cells_takes_the_smaller_slope_on_each_axis() {
        // Two observables on a 3 × 3 bilinear table, one varying along each axis with slopes
        // 1 then 2 (x) and 2 then 1 (y): at the corner (0, 0) J is diagonal in every one of
        // the four side combinations, and σ = σ_y/(smaller slope) on both axes (linear error
        // propagation, common practice, no source).
        let gx = [0.0, 1.0, 3.0];
        let gy = [0.0, 2.0, 3.0];
        let a = square_table(|i, _| gx[i]);
        let b = square_table(|_, j| gy[j]);
        let options = Options::default();
        let ma = Interpolator::new(&a, &options).unwrap();
        let mb = Interpolator::new(&b, &options).unwrap();
        let r = fit(
            &[&ma, &mb],
            &[1.0, 2.0],
            &[0.1, 0.1],
            &[None, None],
            &FitOptions::default(),
        );
        let m = &r.minima[0];
        assert!(m.parameters.iter().all(|v| v.abs() < 1e-6), "{m:?}");
        for (d, u) in m.uncertainties.iter().enumerate() {
            let u = u.unwrap();
            assert!((u - 0.1).abs() < 1e-9, "axis {d}: σ = {u}");
        }
        let c = m.covariance.as_ref().unwrap();
        assert!(c[1].abs() < 1e-12 && c[2].abs() < 1e-12, "{c:?}");
    }

    #[test]
    fn a_side_without_slope_leaves_the_minimum_unconstrained() {
        // Slope 1 below the node, 0 above: a fit of the node value is not bounded above, so
        // no finite uncertainty may be reported whichever side the minimiser ends on.
        let t = line_table(&[-1.0, 0.0, 1.0], &[0.0, 1.0, 1.0]);
        let options = Options::default();
        let m = Interpolator::new(&t, &options).unwrap();
        let r = fit(&[&m], &[1.0], &[0.1], &[None], &FitOptions::default());
        assert!(!r.minima.is_empty());
        for m in &r.minima {
            assert!(m.uncertainties[0].is_none(), "{m:?}");
            assert!(m.covariance.is_none(), "{m:?}");
        }
    }
}

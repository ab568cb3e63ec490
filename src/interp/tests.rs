#![allow(clippy::needless_range_loop)]

use super::*;
use proptest::prelude::*;

fn axis(name: &str, values: &[f64]) -> AxisMeta {
    AxisMeta {
        name: name.into(),
        units: String::new(),
        long_name: String::new(),
        values: values.to_vec(),
    }
}

/// A 3-axis table: temperature (θ coordinate, so reversed), pressure (log10), metallicity.
fn table_of(f: impl Fn(&[f64]) -> f64) -> Table {
    let axes = vec![
        axis("temperature", &[5000.0, 6500.0, 8000.0, 11000.0, 15000.0]),
        axis("gas_pressure", &[1e3, 1e4, 3e4, 1e5]),
        axis("metallicity", &[-1.0, -0.5, 0.0]),
    ];
    let mut values = Vec::new();
    for &t in &axes[0].values {
        for &p in &axes[1].values {
            for &m in &axes[2].values {
                values.push(f(&[t, p, m]));
            }
        }
    }
    let n = values.len();
    Table {
        path: "test.h5".into(),
        name: "q".into(),
        axes,
        values,
        status: vec![0; n],
        status_flags: vec![(0, "converged".into()), (1, "no_root".into())],
    }
}

fn wiggly(x: &[f64]) -> f64 {
    (x[0] / 3000.0).sin() * 2.0 + x[1].log10().powi(2) * 0.3 + (x[2] * 3.0).cos() + 5.0
}

/// A linear function of the default coordinates (θ, log10 P, [M/H]).
fn linear_in_coords(x: &[f64]) -> f64 {
    3.0 * (5040.0 / x[0]) - 0.7 * x[1].log10() + 0.25 * x[2] + 10.0
}

fn opts(method: Method) -> Options {
    Options {
        method,
        ..Options::default()
    }
}

/// Slow reference twin of the multilinear kernel: recursion over the axes in the chosen
/// coordinates, interpolating between two sub-results per axis.
fn naive_multilinear(t: &Table, coords: &[Coord], x: &[f64]) -> f64 {
    fn rec(t: &Table, coords: &[Coord], x: &[f64], d: usize, offset: usize, stride: usize) -> f64 {
        if d == t.axes.len() {
            return t.values[offset];
        }
        let n = t.axes[d].values.len();
        let sub = stride / n;
        let u: Vec<f64> = t.axes[d]
            .values
            .iter()
            .map(|&v| coords[d].apply(v).0)
            .collect();
        let ux = coords[d].apply(x[d]).0;
        // Find j with ux between u[j] and u[j+1] (either order).
        let mut j = 0;
        while j + 2 < n && (u[j] - ux) * (u[j + 1] - ux) > 0.0 {
            j += 1;
        }
        let s = (ux - u[j]) / (u[j + 1] - u[j]);
        let a = rec(t, coords, x, d + 1, offset + j * sub, sub);
        let b = rec(t, coords, x, d + 1, offset + (j + 1) * sub, sub);
        a + s * (b - a)
    }
    let total = t.values.len();
    rec(t, coords, x, 0, 0, total)
}

#[test]
fn nodes_are_reproduced_exactly_by_both_schemes() {
    let t = table_of(wiggly);
    for m in [Method::Linear, Method::Cubic] {
        for log_value in [false, true] {
            let o = Options {
                method: m,
                log_value,
                ..Options::default()
            };
            let ip = Interpolator::new(&t, &o).unwrap();
            let mut k = 0;
            for &a in &t.axes[0].values {
                for &b in &t.axes[1].values {
                    for &c in &t.axes[2].values {
                        let s = ip.evaluate(&[a, b, c]).unwrap();
                        let tol = if log_value { 1e-13 * s.value } else { 1e-13 };
                        assert!(
                            (s.value - t.values[k]).abs() <= tol,
                            "{m:?} log={log_value} node {k}: {} vs {}",
                            s.value,
                            t.values[k]
                        );
                        k += 1;
                    }
                }
            }
        }
    }
}

#[test]
fn linear_functions_are_reproduced_by_both_schemes() {
    let t = table_of(linear_in_coords);
    for m in [Method::Linear, Method::Cubic] {
        let ip = Interpolator::new(&t, &opts(m)).unwrap();
        for &x in &[
            [5200.0, 1.5e3, -0.9],
            [7777.0, 2e4, -0.3],
            [14999.0, 9.9e4, -0.01],
            [9000.0, 1e4, 0.0],
        ] {
            let s = ip.evaluate(&x).unwrap();
            let want = linear_in_coords(&x);
            assert!(
                (s.value - want).abs() < 1e-12,
                "{m:?} {x:?}: {} vs {want}",
                s.value
            );
            // Exact gradient through the coordinates.
            let g = [
                -3.0 * 5040.0 / (x[0] * x[0]),
                -0.7 / (x[1] * std::f64::consts::LN_10),
                0.25,
            ];
            for d in 0..3 {
                assert!(
                    (s.gradient[d] - g[d]).abs() <= 1e-9 * g[d].abs(),
                    "{m:?} d={d}: {} vs {}",
                    s.gradient[d],
                    g[d]
                );
            }
        }
    }
}

#[test]
fn out_of_range_is_an_error_naming_the_axis_unless_clamped() {
    let t = table_of(wiggly);
    let ip = Interpolator::new(&t, &opts(Method::Cubic)).unwrap();
    let e = ip.evaluate(&[4000.0, 1e4, 0.0]).unwrap_err();
    let msg = e.to_string();
    assert!(
        msg.contains("temperature = 4000") && msg.contains("[5000, 15000]"),
        "{msg}"
    );
    let c = Interpolator::new(
        &t,
        &Options {
            clamp: true,
            ..opts(Method::Cubic)
        },
    )
    .unwrap();
    let s = c.evaluate(&[4000.0, 1e4, 0.0]).unwrap();
    let edge = c.evaluate(&[5000.0, 1e4, 0.0]).unwrap();
    assert_eq!(s.value.to_bits(), edge.value.to_bits());
    assert_eq!(s.clamped, vec![true, false, false]);
    assert_eq!(s.gradient[0].to_bits(), 0f64.to_bits());
    assert!(ip.evaluate(&[f64::NAN, 1e4, 0.0]).is_err());
    assert!(c.evaluate(&[f64::NAN, 1e4, 0.0]).is_err());
}

#[test]
fn flagged_nodes_in_the_stencil_are_an_error() {
    let mut t = table_of(wiggly);
    // Flag node (temperature index 2, pressure 1, metallicity 1).
    let k = 2 * 12 + 3 + 1;
    t.status[k] = 1;
    for m in [Method::Linear, Method::Cubic] {
        let ip = Interpolator::new(&t, &opts(m)).unwrap();
        let e = ip.evaluate(&[8500.0, 1.2e4, -0.3]).unwrap_err().to_string();
        assert!(
            e.contains("temperature=8000,gas_pressure=10000,metallicity=-0.5"),
            "{e}"
        );
        assert!(e.contains("no_root"), "{e}");
        // Far away is fine (the cubic stencil spans up to four nodes per axis).
        assert_eq!(
            ip.evaluate(&[14000.0, 9e4, -0.1]).is_ok(),
            m == Method::Linear
        );
    }
    let mut t = table_of(wiggly);
    t.values[5] = f64::NAN;
    let ip = Interpolator::new(&t, &opts(Method::Linear)).unwrap();
    assert!(
        ip.evaluate(&[5000.0, 1e4, -0.3])
            .unwrap_err()
            .to_string()
            .contains("not finite")
    );
}

#[test]
fn parallel_batch_agrees_bit_for_bit_with_serial() {
    let t = table_of(wiggly);
    let mut points = Vec::new();
    let mut s: u64 = 12345;
    let mut r = || {
        s = s
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    for _ in 0..5000 {
        points.push(vec![
            5000.0 + 10000.0 * r(),
            10f64.powf(3.0 + 2.0 * r()),
            -1.0 + r(),
        ]);
    }
    for m in [Method::Linear, Method::Cubic] {
        let ip = Interpolator::new(&t, &opts(m)).unwrap();
        let a = ip.evaluate_serial(&points);
        let b = ip.evaluate_many(&points);
        for (x, y) in a.iter().zip(&b) {
            let (x, y) = (x.as_ref().unwrap(), y.as_ref().unwrap());
            assert_eq!(x.value.to_bits(), y.value.to_bits());
            for (g, h) in x.gradient.iter().zip(&y.gradient) {
                assert_eq!(g.to_bits(), h.to_bits());
            }
        }
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]

    #[test]
    fn fast_multilinear_matches_the_naive_recursive_twin(
        a in 5000.0f64..15000.0, b in 3.0f64..5.0, c in -1.0f64..0.0
    ) {
        let t = table_of(wiggly);
        let ip = Interpolator::new(&t, &opts(Method::Linear)).unwrap();
        let x = [a, 10f64.powf(b), c];
        let fast = ip.evaluate(&x).unwrap().value;
        let slow = naive_multilinear(&t, &ip.coords(), &x);
        prop_assert!((fast - slow).abs() < 1e-12 * slow.abs().max(1.0), "{} vs {}", fast, slow);
    }

    #[test]
    fn gradients_match_central_differences(
        a in 5100.0f64..14900.0, b in 3.02f64..4.98, c in -0.98f64..-0.02, log_value: bool,
        cubic: bool
    ) {
        let t = table_of(wiggly);
        let m = if cubic { Method::Cubic } else { Method::Linear };
        let ip = Interpolator::new(&t, &Options { method: m, log_value, ..Options::default() }).unwrap();
        let x = [a, 10f64.powf(b), c];
        let s = ip.evaluate(&x).unwrap();
        for d in 0..3 {
            let h = 1e-6 * x[d].abs().max(1e-3);
            let mut xp = x;
            let mut xm = x;
            xp[d] += h;
            xm[d] -= h;
            let fd = (ip.evaluate(&xp).unwrap().value - ip.evaluate(&xm).unwrap().value) / (2.0 * h);
            // Multilinear has kinks at nodes: skip a difference that straddles one.
            let scale = s.gradient[d].abs().max(fd.abs()).max(1e-6 / x[d].abs().max(1.0));
            let straddles = t.axes[d].values.iter().any(|&v| (v - xm[d]) * (v - xp[d]) <= 0.0);
            if !straddles || cubic {
                prop_assert!((s.gradient[d] - fd).abs() <= 1e-5 * scale,
                    "{:?} axis {}: {} vs {}", m, d, s.gradient[d], fd);
            }
        }
    }
}

/// Slow reference twin of both kernels, value and gradient: at each axis, the sub-results
/// (value and gradient over the later axes) at every node of the axis, then the obvious 1-D
/// rule over the interval holding the point, in storage order (increasing or decreasing).
/// Cubic: the Hermite cubic with Catmull–Rom slopes (central secants inside, one-sided at
/// the ends). Log values: 10^p with the chain rule. Returns (value, ∂/∂x per axis).
fn naive(
    t: &Table,
    coords: &[Coord],
    method: Method,
    log_value: bool,
    x: &[f64],
) -> (f64, Vec<f64>) {
    struct Ctx<'a> {
        t: &'a Table,
        coords: &'a [Coord],
        method: Method,
        log_value: bool,
        x: &'a [f64],
    }
    fn rec(c: &Ctx, d: usize, offset: usize, stride: usize) -> Vec<f64> {
        let Ctx {
            t,
            coords,
            method,
            log_value,
            x,
        } = *c;
        let nd = t.axes.len();
        if d == nd {
            let v = t.values[offset];
            return vec![if log_value { v.log10() } else { v }];
        }
        let n = t.axes[d].values.len();
        let sub = stride / n;
        let width = nd - d + 1; // value, then ∂/∂u_e for e = d..nd
        if n == 1 {
            let s = rec(c, d + 1, offset, sub);
            let mut out = vec![s[0], 0.0];
            out.extend_from_slice(&s[1..]);
            return out;
        }
        let u: Vec<f64> = t.axes[d]
            .values
            .iter()
            .map(|&v| coords[d].apply(v).0)
            .collect();
        let ux = coords[d].apply(x[d]).0;
        let mut j = 0;
        while j + 2 < n && (u[j] - ux) * (u[j + 1] - ux) > 0.0 {
            j += 1;
        }
        let y: Vec<Vec<f64>> = (0..n)
            .map(|k| rec(c, d + 1, offset + k * sub, sub))
            .collect();
        let h = u[j + 1] - u[j];
        let s = (ux - u[j]) / h;
        let mut out = vec![0.0; width];
        // Component `comp` of the sub-results: 0 = value, 1.. = later-axis derivatives.
        for comp in 0..width - 1 {
            let yk = |k: usize| y[k][comp];
            let (p, dp) = match method {
                Method::Linear => (yk(j) + s * (yk(j + 1) - yk(j)), (yk(j + 1) - yk(j)) / h),
                Method::Cubic => {
                    let slope = |k: usize| {
                        if k == 0 {
                            (yk(1) - yk(0)) / (u[1] - u[0])
                        } else if k == n - 1 {
                            (yk(n - 1) - yk(n - 2)) / (u[n - 1] - u[n - 2])
                        } else {
                            (yk(k + 1) - yk(k - 1)) / (u[k + 1] - u[k - 1])
                        }
                    };
                    let (m0, m1) = (slope(j), slope(j + 1));
                    let p = (2.0 * s.powi(3) - 3.0 * s * s + 1.0) * yk(j)
                        + (s.powi(3) - 2.0 * s * s + s) * h * m0
                        + (-2.0 * s.powi(3) + 3.0 * s * s) * yk(j + 1)
                        + (s.powi(3) - s * s) * h * m1;
                    let dp = ((6.0 * s * s - 6.0 * s) * yk(j)
                        + (3.0 * s * s - 4.0 * s + 1.0) * h * m0
                        + (-6.0 * s * s + 6.0 * s) * yk(j + 1)
                        + (3.0 * s * s - 2.0 * s) * h * m1)
                        / h;
                    (p, dp)
                }
            };
            if comp == 0 {
                out[0] = p;
                out[1] = dp;
            } else {
                out[1 + comp] = p;
            }
        }
        out
    }
    let total = t.values.len();
    let ctx = Ctx {
        t,
        coords,
        method,
        log_value,
        x,
    };
    let r = rec(&ctx, 0, 0, total);
    let mut grad: Vec<f64> = (0..x.len())
        .map(|d| {
            if t.axes[d].values.len() == 1 {
                0.0
            } else {
                r[1 + d] * coords[d].apply(x[d]).1
            }
        })
        .collect();
    let mut value = r[0];
    if log_value {
        value = 10f64.powf(value);
        for g in &mut grad {
            *g *= value * std::f64::consts::LN_10;
        }
    }
    (value, grad)
}

/// Sorted-order nodes of the naive stencil of axis d at x (storage indices).
fn naive_stencil_nodes(
    t: &Table,
    coords: &[Coord],
    method: Method,
    d: usize,
    x: f64,
) -> Vec<usize> {
    let n = t.axes[d].values.len();
    if n == 1 {
        return vec![0];
    }
    let u: Vec<f64> = t.axes[d]
        .values
        .iter()
        .map(|&v| coords[d].apply(v).0)
        .collect();
    let ux = coords[d].apply(x).0;
    let mut j = 0;
    while j + 2 < n && (u[j] - ux) * (u[j + 1] - ux) > 0.0 {
        j += 1;
    }
    match method {
        Method::Linear => vec![j, j + 1],
        Method::Cubic => (j.saturating_sub(1)..=(j + 2).min(n - 1)).collect(),
    }
}

/// A table over the given axes filled with a smooth positive function of all of them.
fn table_over(axes: Vec<AxisMeta>) -> Table {
    let shape: Vec<usize> = axes.iter().map(|a| a.values.len()).collect();
    let total: usize = shape.iter().product();
    let mut values = Vec::with_capacity(total);
    for mut flat in 0..total {
        let mut idx = vec![0; shape.len()];
        for d in (0..shape.len()).rev() {
            idx[d] = flat % shape[d];
            flat /= shape[d];
        }
        let mut v = 3.0;
        for (d, &k) in idx.iter().enumerate() {
            let x = axes[d].values[k];
            v +=
                (0.3 * (d as f64 + 1.0) * x.abs().ln_1p()).sin() * 0.4 + 0.01 * x / (1.0 + x.abs());
        }
        values.push(v.exp());
    }
    Table {
        path: "test.h5".into(),
        name: "q".into(),
        axes,
        values,
        status: vec![0; total],
        status_flags: vec![(0, "converged".into()), (1, "no_root".into())],
    }
}

struct Lcg(u64);
impl Lcg {
    fn next(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
    /// A point inside the axes, uniform in each axis' default coordinate.
    fn point(&mut self, t: &Table, coords: &[Coord]) -> Vec<f64> {
        t.axes
            .iter()
            .zip(coords)
            .map(|(a, c)| {
                let lo = a.values.iter().copied().fold(f64::INFINITY, f64::min);
                let hi = a.values.iter().copied().fold(f64::NEG_INFINITY, f64::max);
                let r = self.next();
                match c {
                    Coord::Linear => lo + r * (hi - lo),
                    Coord::Log10 => lo * (hi / lo).powf(r),
                    Coord::Theta => 1.0 / (1.0 / lo + r * (1.0 / hi - 1.0 / lo)),
                }
            })
            .collect()
    }
}

/// Check the fast kernels against [`naive`] at `count` seeded points: value to 1e-13
/// relative; gradient components, compared in the interpolation coordinate (∂/∂u), to 1e-13
/// of the larger of the component and the value over the axis' span in u (a component that
/// cancels to nearly zero is compared on the scale of its terms).
fn check_against_naive(t: &Table, count: usize, seed: u64) {
    let mut rng = Lcg(seed);
    for method in [Method::Linear, Method::Cubic] {
        for log_value in [false, true] {
            let o = Options {
                method,
                log_value,
                ..Options::default()
            };
            let ip = Interpolator::new(t, &o).unwrap();
            let coords = ip.coords();
            for _ in 0..count {
                let x = rng.point(t, &coords);
                let (want, want_g) = naive(t, &coords, method, log_value, &x);
                let s = ip.evaluate(&x).unwrap();
                assert!(
                    (s.value - want).abs() <= 1e-13 * want.abs(),
                    "{method:?} log={log_value} at {x:?}: {} vs {want}",
                    s.value
                );
                let v = ip.value(&x).unwrap();
                assert_eq!(v.to_bits(), s.value.to_bits());
                for d in 0..x.len() {
                    let (lo, hi) = ip.ranges()[d];
                    let span_u = (coords[d].apply(hi).0 - coords[d].apply(lo).0).abs();
                    let dudx = coords[d].apply(x[d]).1;
                    let (got_u, want_u) = (s.gradient[d] / dudx, want_g[d] / dudx);
                    let scale = want_u.abs().max(want.abs() / span_u.max(f64::MIN_POSITIVE));
                    assert!(
                        (got_u - want_u).abs() <= 1e-13 * scale,
                        "{method:?} log={log_value} axis {d} at {x:?}: {} vs {}",
                        s.gradient[d],
                        want_g[d]
                    );
                }
            }
        }
    }
}

#[test]
fn fast_kernels_match_the_naive_twin_in_three_axes() {
    check_against_naive(&table_of(wiggly), 2000, 7);
}

#[test]
fn fast_kernels_match_the_naive_twin_in_four_axes_with_a_single_node_axis() {
    let t = table_over(vec![
        axis(
            "temperature",
            &(0..9).map(|i| 5000.0 * 1.3f64.powi(i)).collect::<Vec<_>>(),
        ),
        axis("gas_pressure", &[1e2, 1e3, 3e3, 1e4, 1e5, 1e6]),
        axis("microturbulence", &[2.0]),
        axis("metallicity", &[-2.0, -1.0, -0.5, 0.0, 0.3]),
    ]);
    check_against_naive(&t, 1000, 11);
}

#[test]
fn fast_kernels_match_the_naive_twin_in_seven_axes() {
    // More axes than the specialised kernels take: the general path.
    let t = table_over(vec![
        axis("temperature", &[4000.0, 6000.0, 9000.0, 15000.0]),
        axis("a", &[0.0, 1.0, 2.5]),
        axis("b", &[-1.0, 0.0, 1.0, 2.0, 4.0]),
        axis("c", &[0.5, 0.7]),
        axis("d", &[10.0, 100.0, 1000.0, 1e4]),
        axis("e", &[3.0, 2.0, 1.0, 0.0]),
        axis("f", &[-0.5, 0.5, 1.5]),
    ]);
    check_against_naive(&t, 200, 13);
}

#[test]
fn a_point_is_refused_exactly_when_its_stencil_touches_a_flagged_node() {
    let mut t = table_over(vec![
        axis(
            "temperature",
            &(0..8).map(|i| 4000.0 * 1.4f64.powi(i)).collect::<Vec<_>>(),
        ),
        axis("gas_pressure", &[1e2, 1e3, 1e4, 1e5, 1e6]),
        axis("metallicity", &[-1.0, -0.5, 0.0, 0.5]),
    ]);
    for k in [17, 60, 61, 130] {
        t.status[k] = 1;
    }
    t.values[95] = -1.0; // flagged only under log10
    let strides = [20, 4, 1];
    let mut rng = Lcg(3);
    for method in [Method::Linear, Method::Cubic] {
        for log_value in [false, true] {
            let o = Options {
                method,
                log_value,
                ..Options::default()
            };
            let ip = Interpolator::new(&t, &o).unwrap();
            let coords = ip.coords();
            let (mut ok, mut refused) = (0, 0);
            for _ in 0..3000 {
                let x = rng.point(&t, &coords);
                let nodes: Vec<Vec<usize>> = (0..3)
                    .map(|d| naive_stencil_nodes(&t, &coords, method, d, x[d]))
                    .collect();
                let mut touches = false;
                for &a in &nodes[0] {
                    for &b in &nodes[1] {
                        for &c in &nodes[2] {
                            let k = a * strides[0] + b * strides[1] + c * strides[2];
                            touches |= t.status[k] != 0 || (log_value && t.values[k] <= 0.0);
                        }
                    }
                }
                match ip.evaluate(&x) {
                    Ok(_) => {
                        assert!(
                            !touches,
                            "{method:?} log={log_value} {x:?} used a flagged node"
                        );
                        ok += 1;
                    }
                    Err(e) => {
                        assert!(touches, "{method:?} log={log_value} {x:?}: {e}");
                        assert!(matches!(e, InterpError::Flagged { .. }), "{e}");
                        refused += 1;
                    }
                }
            }
            assert!(
                ok > 100 && refused > 100,
                "{method:?}: {ok} ok, {refused} refused"
            );
        }
    }
}

#[test]
fn value_and_evaluate_into_check_their_arguments() {
    let t = table_of(wiggly);
    let ip = Interpolator::new(&t, &opts(Method::Cubic)).unwrap();
    let x = [7000.0, 2e4, -0.4];
    let mut g = [0.0; 3];
    let v = ip.evaluate_into(&x, &mut g).unwrap();
    let s = ip.evaluate(&x).unwrap();
    assert_eq!(v.to_bits(), s.value.to_bits());
    assert_eq!(g.to_vec(), s.gradient);
    assert!(ip.evaluate_into(&x, &mut [0.0; 2]).is_err());
    assert!(ip.value(&x[..2]).is_err());
    let e = ip.value(&[7000.0, 2e6, -0.4]).unwrap_err().to_string();
    assert!(e.contains("gas_pressure = 2000000"), "{e}");
}

/// `Options::for_table` is what the commands start from: cubic, log10 exactly when every
/// converged finite value is positive (a non-positive value at a flagged node does not count).
#[test]
fn options_for_a_table_follow_the_commands_defaults() {
    let mut t = table_of(wiggly);
    let o = Options::for_table(&t);
    assert_eq!(o.method, Method::Cubic);
    assert!(o.log_value && !o.clamp && o.coords.is_none());
    t.values[7] = -1.0;
    assert!(!Options::for_table(&t).log_value);
    t.status[7] = 1;
    assert!(Options::for_table(&t).log_value);
    t.values[3] = f64::NAN;
    assert!(Options::for_table(&t).log_value);
    t.values[4] = 0.0;
    assert!(!Options::for_table(&t).log_value);
}

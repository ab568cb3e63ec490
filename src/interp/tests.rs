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

//! One bounded Levenberg–Marquardt fit with the default options (16 seeded starts plus the
//! best point of a 9³ lattice): three free parameters (temperature, gas pressure,
//! metallicity) from eight lines, on a table shaped like the demo grid (22 × 5 × 3 nodes;
//! temperature in θ, pressure in log10), cubic interpolation in log10 of the value.
//! The eight "lines" are smooth positive synthetic functions, each with its own temperature
//! maximum and pressure and metallicity slopes (common practice, no source); the
//! observations are the interpolated values at an off-node point with 3 % uncertainties.

use criterion::{Criterion, criterion_group, criterion_main};
use linegrid::grid::store::AxisMeta;
use linegrid::interp::fit::{FitOptions, fit};
use linegrid::interp::{Interpolator, Method, Options, Table};
use std::hint::black_box;

fn axis(name: &str, values: Vec<f64>) -> AxisMeta {
    AxisMeta {
        name: name.into(),
        units: String::new(),
        long_name: String::new(),
        values,
    }
}

/// Line k: a bump in θ centred at θ_k, scaled by pressure and metallicity powers.
fn line_value(k: usize, t: f64, p: f64, m: f64) -> f64 {
    let kf = k as f64;
    let theta = 5040.0 / t;
    let centre = 0.2 + 0.09 * kf;
    let bump = (-((theta - centre) / 0.18).powi(2)).exp();
    let slope_p = -0.15 + 0.05 * kf;
    let slope_m = 0.2 + 0.1 * (kf % 3.0);
    0.05 * (1.0 + 4.0 * bump) * 10f64.powf(slope_p * (p.log10() - 4.0) + slope_m * m)
}

fn tables() -> Vec<Table> {
    let t: Vec<f64> = (0..22)
        .map(|i| 5000.0 * 8f64.powf(i as f64 / 21.0))
        .collect();
    let p: Vec<f64> = (0..5).map(|i| 10f64.powf(3.0 + 0.5 * i as f64)).collect();
    let m = vec![-1.0, -0.5, 0.0];
    (0..8)
        .map(|k| {
            let mut values = Vec::new();
            for &a in &t {
                for &b in &p {
                    for &c in &m {
                        values.push(line_value(k, a, b, c));
                    }
                }
            }
            let n = values.len();
            Table {
                path: "bench".into(),
                name: format!("equivalent_width[line {k}]"),
                axes: vec![
                    axis("temperature", t.clone()),
                    axis("gas_pressure", p.clone()),
                    axis("metallicity", m.clone()),
                ],
                values,
                status: vec![0; n],
                status_flags: vec![(0, "converged".into())],
            }
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let o = Options {
        method: Method::Cubic,
        log_value: true,
        ..Options::default()
    };
    let interps: Vec<Interpolator> = tables()
        .iter()
        .map(|t| Interpolator::new(t, &o).unwrap())
        .collect();
    let refs: Vec<&Interpolator> = interps.iter().collect();
    let truth = [8700.0, 2.2e4, -0.35];
    let obs: Vec<f64> = interps
        .iter()
        .map(|ip| ip.evaluate(&truth).unwrap().value)
        .collect();
    let sigma: Vec<f64> = obs.iter().map(|v| 0.03 * v).collect();
    let fixed = [None, None, None];
    let options = FitOptions::default();
    // The fit must find the truth, or the benchmark measures the wrong thing.
    let r = fit(&refs, &obs, &sigma, &fixed, &options);
    let best = &r.minima[0].parameters;
    assert!(
        (best[0] / truth[0] - 1.0).abs() < 1e-3 && (best[1] / truth[1] - 1.0).abs() < 1e-3,
        "fit found {best:?}, truth {truth:?}"
    );
    c.bench_function("fit_3_parameters_8_lines", |b| {
        b.iter(|| fit(black_box(&refs), black_box(&obs), &sigma, &fixed, &options))
    });
}

criterion_group!(benches, bench);
criterion_main!(benches);

//! Interpolation throughput on a 4-axis table (22 × 10 × 8 × 6 nodes; temperature in θ,
//! pressure in log10), 16384 seeded points per iteration, multilinear and cubic: one point
//! at a time with the value and its 4-component gradient into a reused buffer
//! (`evaluate_into`), the value alone (`value`), the allocating `evaluate` (returns a
//! `Sample`), and the parallel batch `evaluate_many`.

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use linegrid::grid::store::AxisMeta;
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

fn table() -> Table {
    let t: Vec<f64> = (0..22)
        .map(|i| 5000.0 * 8f64.powf(i as f64 / 21.0))
        .collect();
    let p: Vec<f64> = (0..10).map(|i| 10f64.powf(2.0 + 0.4 * i as f64)).collect();
    let m: Vec<f64> = (0..8).map(|i| -2.0 + 0.3 * i as f64).collect();
    let v: Vec<f64> = (0..6).map(|i| 1.0 + i as f64).collect();
    let mut values = Vec::new();
    for &a in &t {
        for &b in &p {
            for &c in &m {
                for &d in &v {
                    values.push((a / 7000.0).sin() + b.log10() * 0.2 + c.cos() + d.sqrt() + 5.0);
                }
            }
        }
    }
    let n = values.len();
    Table {
        path: "bench".into(),
        name: "q".into(),
        axes: vec![
            axis("temperature", t),
            axis("gas_pressure", p),
            axis("metallicity", m),
            axis("microturbulence", v),
        ],
        values,
        status: vec![0; n],
        status_flags: vec![(0, "converged".into())],
    }
}

fn points(n: usize) -> Vec<Vec<f64>> {
    let mut s: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut u = move || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|_| {
            vec![
                5000.0 * 8f64.powf(u()),
                10f64.powf(2.0 + 3.6 * u()),
                -2.0 + 2.1 * u(),
                1.0 + 5.0 * u(),
            ]
        })
        .collect()
}

fn bench(c: &mut Criterion) {
    let t = table();
    let pts = points(16384);
    let mut g = c.benchmark_group("interp4d");
    for m in [Method::Linear, Method::Cubic] {
        let ip = Interpolator::new(
            &t,
            &Options {
                method: m,
                ..Options::default()
            },
        )
        .unwrap();
        g.throughput(Throughput::Elements(pts.len() as u64));
        g.bench_function(format!("{}_gradient", m.name()), |b| {
            let mut grad = [0.0; 4];
            b.iter(|| {
                let mut acc = 0.0;
                for p in &pts {
                    acc += ip.evaluate_into(black_box(p), &mut grad).unwrap() + grad[0];
                }
                acc
            })
        });
        g.bench_function(format!("{}_value", m.name()), |b| {
            b.iter(|| {
                let mut acc = 0.0;
                for p in &pts {
                    acc += ip.value(black_box(p)).unwrap();
                }
                acc
            })
        });
        g.bench_function(format!("{}_sample", m.name()), |b| {
            b.iter(|| {
                let mut acc = 0.0;
                for p in &pts {
                    acc += ip.evaluate(black_box(p)).unwrap().value;
                }
                acc
            })
        });
        g.bench_function(format!("{}_parallel", m.name()), |b| {
            b.iter(|| ip.evaluate_many(black_box(&pts)).len())
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

//! Throughput of the Voigt function H(a, v) over a fixed set of points: a in [1e-5, 1e2] and
//! |v| in [1e-3, 1e4], both log-uniform (the distribution of the Python cross-check), in random
//! order and in profile order (v ascending at fixed a). Brief: beat
//! scipy.special.voigt_profile per evaluation by at least 8x on one core (scripts/bench-voigt
//! measures the ratio).

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use linegrid::opacity::voigt::{voigt_h, voigt_h_slice};
use std::hint::black_box;

const POINTS: usize = 1 << 14;

/// Log-uniform points from a fixed-seed xorshift generator.
fn scattered() -> (Vec<f64>, Vec<f64>) {
    let mut state: u64 = 0x9e37_79b9_7f4a_7c15;
    let mut uniform = move || {
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..POINTS)
        .map(|_| {
            (
                10f64.powf(-5.0 + 7.0 * uniform()),
                10f64.powf(-3.0 + 7.0 * uniform()),
            )
        })
        .unzip()
}

/// The same values of a and v on a 128 x 128 grid, v ascending within each a.
fn profiles() -> (Vec<f64>, Vec<f64>) {
    let side = 128;
    let axis =
        |lo: f64, decades: f64, i: usize| 10f64.powf(lo + decades * i as f64 / (side - 1) as f64);
    (0..side * side)
        .map(|k| (axis(-5.0, 7.0, k / side), axis(-3.0, 7.0, k % side)))
        .unzip()
}

fn bench(c: &mut Criterion) {
    let mut g = c.benchmark_group("voigt_h");
    g.throughput(Throughput::Elements(POINTS as u64));
    for (order, (a, v)) in [("random_order", scattered()), ("profile_order", profiles())] {
        let mut out = vec![0.0; a.len()];
        g.bench_function(format!("per_call_{order}"), |b| {
            b.iter(|| {
                for ((o, &a), &v) in out.iter_mut().zip(black_box(&a)).zip(black_box(&v)) {
                    *o = voigt_h(a, v);
                }
                black_box(&mut out);
            })
        });
        g.bench_function(format!("slice_{order}"), |b| {
            b.iter(|| {
                voigt_h_slice(black_box(&a), black_box(&v), &mut out);
                black_box(&mut out);
            })
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

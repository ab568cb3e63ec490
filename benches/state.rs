//! One full-mix state solve (18 elements, up to four stages each, hydrogen and He II with
//! occupation probabilities). Target (foundation issue): ≥ 50,000 solves per second per core.

use criterion::{Criterion, criterion_group, criterion_main};
use linegrid::eos::{Composition, Density, EosOptions, StateRequest, solve};
use std::hint::black_box;

fn bench(c: &mut Criterion) {
    let cases = [
        (
            "photosphere_5800K_pgas1e5",
            5800.0,
            Density::GasPressure(1e5),
        ),
        (
            "a_star_9500K_pe200",
            9500.0,
            Density::ElectronPressure(200.0),
        ),
        ("hot_20000K_nh1e15", 20000.0, Density::HydrogenDensity(1e15)),
    ];
    let mut g = c.benchmark_group("state_solve_full_mix");
    for (name, t, d) in cases {
        let req = StateRequest {
            temperature: t,
            density: d,
            composition: Composition::default(),
            options: EosOptions::default(),
        };
        g.bench_function(name, |b| b.iter(|| solve(black_box(&req)).unwrap()));
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

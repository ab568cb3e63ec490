//! Cost of the hydrogen Stark profile: constructing a `StarkProfile` (the component pattern,
//! widths and table stencils of one line in one gas) and one evaluation of φ(Δλ), for lines
//! from Lyman α to 6→30 at 10⁴ K, with and without a common Lorentz width, and with the
//! electrons' impact widths (as in every slab and grid build). Profiles are
//! evaluated across ±5 widths of the line (the widest Stark shift plus the Doppler width);
//! the tables behind them are built on first use, before the measurement.

use criterion::{Criterion, Throughput, criterion_group, criterion_main};
use linegrid::atoms::hydrogenic::Hydrogenic;
use linegrid::constants::{C, K_B, M_P};
use linegrid::opacity::stark::{ElectronGas, StarkProfile};
use std::hint::black_box;

const T: f64 = 1.0e4;
const POINTS: usize = 256;

fn bench(c: &mut Criterion) {
    let h = Hydrogenic::HYDROGEN;
    let mut g = c.benchmark_group("stark");
    for &(nl, nu, ne, lorentz, electrons) in &[
        (1u32, 2u32, 1e16, 0.0, false),
        (2, 3, 1e16, 0.0, false),
        (2, 4, 1e16, 0.0, false),
        (2, 4, 1e13, 0.0, false),
        (2, 10, 1e16, 0.0, false),
        (2, 30, 1e14, 0.0, false),
        (6, 30, 1e14, 0.0, false),
        (2, 4, 1e16, 1.0, false),
        (2, 4, 1e16, 0.0, true),
        (2, 10, 1e16, 0.0, true),
    ] {
        let lam = h.vacuum_wavelength(nl, nu);
        let doppler = lam * (2.0 * K_B * T / M_P).sqrt() / C;
        let make = |ne: f64| {
            let gas = electrons.then_some(ElectronGas {
                density: ne,
                temperature: T,
            });
            StarkProfile::with_electrons(nl, nu, 1, lam, ne, doppler, lorentz * doppler, gas)
        };
        let p = make(ne);
        let width = p.unit_shift().max(doppler);
        let xs: Vec<f64> = (0..POINTS)
            .map(|i| (i as f64 / POINTS as f64 - 0.5) * 10.0 * width)
            .collect();
        let kind = if electrons { "_electrons" } else { "" };
        let name = format!("{nl}-{nu}_ne{ne:.0e}_lorentz{lorentz}{kind}");
        g.throughput(Throughput::Elements(POINTS as u64));
        g.bench_function(format!("phi_{name}"), |b| {
            b.iter(|| xs.iter().map(|&x| p.phi(black_box(x))).sum::<f64>())
        });
        g.throughput(Throughput::Elements(1));
        g.bench_function(format!("new_{name}"), |b| {
            b.iter(|| make(black_box(ne * 1.01)))
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

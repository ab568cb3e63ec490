//! Collisional–radiative hydrogen solves with N = 20 shells, escape probabilities iterated
//! with the populations and n_e. Target (non-LTE issue): ≥ 5,000 solves per second per core.

use criterion::{Criterion, criterion_group, criterion_main};
use linegrid::nlte::{CrInput, CrOptions, Escape, Model, RadiationField, solve_with};
use std::hint::black_box;

fn bench(c: &mut Criterion) {
    let model = Model::new(20);
    let cases = [
        // A chromosphere-like slab: 1,000 km, thick Lyman and Balmer lines.
        (
            "chromosphere_8000K_nh1e11_1000km",
            8.0e3,
            1.0e11,
            1.0e8,
            RadiationField::DARK,
        ),
        // A photoionised nebula seen through a dilute hot field.
        (
            "nebula_10000K_nh1e3_1pc",
            1.0e4,
            1.0e3,
            3.0e18,
            RadiationField {
                dilution: 1e-14,
                temperature: 4.0e4,
            },
        ),
        // A laboratory plasma: 1 cm at high density.
        (
            "lab_15000K_nh1e17_1cm",
            1.5e4,
            1.0e17,
            1.0,
            RadiationField::DARK,
        ),
    ];
    let mut g = c.benchmark_group("cr_solve_n20_slab_escape");
    for (name, t, nh, thickness, field) in cases {
        let inp = CrInput {
            temperature: t,
            hydrogen_density: nh,
            other_electrons: 0.0,
            occupation: None,
            electron_density_guess: None,
        };
        let opts = CrOptions {
            levels: 20,
            field,
            escape: Escape::Slab {
                thickness,
                microturbulence: 2e5,
            },
            case_b: false,
        };
        let sol = solve_with(&model, &inp, &opts).unwrap();
        eprintln!("{name}: {} iterations", sol.iterations);
        g.bench_function(name, |b| {
            b.iter(|| solve_with(&model, black_box(&inp), &opts).unwrap())
        });
    }
    g.finish();
}

criterion_group!(benches, bench);
criterion_main!(benches);

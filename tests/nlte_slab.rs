//! Hydrogen lines of a slab with collisional–radiative populations: consistency with LTE in
//! the limit where the two must agree, and the direction of the departures where they must not.

use linegrid::atoms::AtomicData;
use linegrid::atoms::lines::Catalogue;
use linegrid::eos::{Composition, Density, EosOptions, State, StateRequest, solve};
use linegrid::formation::departures::{CrSettings, line_strengths_with, solve_departures};
use linegrid::formation::{Background, Geometry, SlabOptions, View, line_strengths};
use linegrid::nlte::RadiationField;

fn state(t: f64, nh: f64) -> State {
    solve(&StateRequest {
        temperature: t,
        density: Density::HydrogenDensity(nh),
        composition: Composition::default(),
        options: EosOptions::default(),
    })
    .unwrap()
}

fn slab(column: f64, background: Background) -> SlabOptions {
    SlabOptions {
        geometry: Geometry::HydrogenColumn(column),
        background,
        microturbulence: 2e5,
        view: View::Flux,
        continuum: true,
        damping: None,
    }
}

const LABELS: [&str; 4] = ["Ly-alpha", "H-alpha", "H-beta", "Pa-alpha"];

/// In a black-body field at the gas temperature the collisional–radiative populations are
/// the LTE ones (detailed balance; common practice, no source), so the line strengths must
/// be the LTE strengths. They agree to 2×10⁻⁴ rather than to rounding because the model's
/// ground-state binding energy (Bohr levels with the mean fine-structure shift) exceeds the
/// measured ionisation energy of the equation of state by the 1s Lamb shift, 0.27 cm⁻¹
/// (NIST ASD, from memory), which moves the ionisation balance by ~4×10⁻⁵ at 10⁴ K.
#[test]
fn thermal_field_reproduces_lte_strengths() {
    let data = AtomicData::embedded();
    let cat = Catalogue::embedded();
    let lines: Vec<_> = LABELS.iter().map(|l| cat.get(l).unwrap()).collect();
    for &(t, nh) in &[(8.0e3, 1e14), (1.2e4, 1e16), (2.0e4, 1e12)] {
        let st = state(t, nh);
        let opts = slab(1e20, Background::Planck(1.2 * t));
        let cr = CrSettings {
            levels: 20,
            field: RadiationField {
                dilution: 1.0,
                temperature: t,
            },
            case_b: false,
        };
        let sol = solve_departures(data, &st, &opts, &cr).unwrap();
        let lte = line_strengths(data, &st, &opts, &lines).unwrap();
        let nlte = line_strengths_with(data, &st, &opts, &lines, Some(&sol)).unwrap();
        for (a, b) in lte.iter().zip(&nlte) {
            let (wa, wb) = (a.equivalent_width.unwrap(), b.equivalent_width.unwrap());
            let rel = (wb / wa - 1.0).abs();
            eprintln!(
                "T={t} nH={nh:e} {}: LTE {wa:e} CR {wb:e} ({rel:e})",
                a.label
            );
            assert!(rel < 1e-4, "{}: {wa:e} vs {wb:e}", a.label);
        }
    }
}

/// Collision-dominated gas (n_H = 10¹⁸ cm⁻³, 1.2×10⁴ K, a 10 cm slab, no external field):
/// the populations are close to LTE (McWhirter 1965 criterion exceeded tenfold): the lower
/// levels within 2.5 % of their LTE-state values (the CR model's own ionisation balance
/// moves n_e n_p, b₁ = 1.023), and each line's W moves by no more than its lower level's
/// population plus its source-function change, |b_u/b_l − 1| (W is at most linear in the
/// absorbers; 2.1 % of the n = 3 population moves Paα by 1.0 %, as W ∝ N^½ on its damping
/// wings).
#[test]
fn dense_slab_is_close_to_lte() {
    let data = AtomicData::embedded();
    let cat = Catalogue::embedded();
    let lines: Vec<_> = LABELS.iter().map(|l| cat.get(l).unwrap()).collect();
    let t = 1.2e4;
    let st = state(t, 1e18);
    let opts = slab(1e19, Background::Planck(1.2 * t));
    let sol = solve_departures(data, &st, &opts, &CrSettings::default()).unwrap();
    let lte = line_strengths(data, &st, &opts, &lines).unwrap();
    let nlte = line_strengths_with(data, &st, &opts, &lines, Some(&sol)).unwrap();
    for ((a, c), l) in lte.iter().zip(&nlte).zip(&lines) {
        let (wa, wc) = (a.equivalent_width.unwrap(), c.equivalent_width.unwrap());
        let d = linegrid::formation::departures::line_departures(data, &st, &sol, l).unwrap();
        let bound = (d.population_ratio - 1.0).abs() + (d.b_upper / d.b_lower - 1.0).abs();
        eprintln!(
            "{}: LTE {wa:e} CR {wc:e}; population ratio {:.4}, bound {bound:.4}",
            a.label, d.population_ratio
        );
        assert!(
            (d.population_ratio - 1.0).abs() < 0.025,
            "{}: {d:?}",
            a.label
        );
        assert!(
            (wc / wa - 1.0).abs() <= bound,
            "{}: {wa:e} vs {wc:e} (bound {bound:e})",
            a.label
        );
    }
}

/// A thin, low-density slab without radiation field: collisions cannot hold the excited
/// shells against radiative decay, so n = 2 is underpopulated relative to the ground shell
/// (b₂/b₁ ≪ 1; common practice, no source), and the lower columns the lines report follow
/// the collisional–radiative populations, not the LTE ones.
#[test]
fn dark_low_density_slab_reports_its_own_populations() {
    let data = AtomicData::embedded();
    let cat = Catalogue::embedded();
    let lines: Vec<_> = ["H-alpha", "H-beta", "Ly-alpha"]
        .iter()
        .map(|l| cat.get(l).unwrap())
        .collect();
    let t = 1.0e4;
    let st = state(t, 1e11);
    let opts = slab(1e19, Background::Planck(1.2 * t));
    let sol = solve_departures(data, &st, &opts, &CrSettings::default()).unwrap();
    let b = sol.departures();
    assert!(b[1] / b[0] < 0.1, "b2/b1 = {}", b[1] / b[0]);
    let nlte = line_strengths_with(data, &st, &opts, &lines, Some(&sol)).unwrap();
    let thickness = opts.thickness(&st);
    // The reported column carries the dissolution factor w_u/w_l of the transition.
    let w = linegrid::formation::departures::hydrogen_occupation(&st, 20);
    for (s, (lower, upper)) in nlte.iter().zip([(2usize, 3usize), (2, 4), (1, 2)]) {
        let expected = sol.levels[lower - 1].population * w[upper - 1] / w[lower - 1] * thickness;
        assert!(
            (s.lower_column / expected - 1.0).abs() < 1e-12,
            "{}: {:e} vs {expected:e}",
            s.label,
            s.lower_column
        );
    }
}

//! The physics behind one grid point, for the engine: state → slab → line strengths, as flat
//! numbers per dataset with a status code. This is the only grid module that knows physics.

use crate::atoms::AtomicData;
use crate::eos::{self, StateError};
use crate::formation;

use super::plan::Plan;

/// Status codes stored per point.
pub mod status {
    /// Converged.
    pub const OK: u8 = 0;
    /// Charge conservation has no root.
    pub const NO_ROOT: u8 = 1;
    /// Iteration limit.
    pub const ITERATION_LIMIT: u8 = 2;
    /// Implied density out of range.
    pub const DENSITY_OUT_OF_RANGE: u8 = 3;
    /// Invalid input at this point (e.g. a parameter combination out of range).
    pub const INVALID_INPUT: u8 = 4;
    /// The slab computation failed.
    pub const SLAB_FAILED: u8 = 5;
    /// Collisional–radiative populations: iteration limit.
    pub const CR_ITERATION_LIMIT: u8 = 6;
    /// Collisional–radiative populations: singular rate matrix.
    pub const CR_SINGULAR: u8 = 7;
    /// Collisional–radiative populations: a non-finite rate or population.
    pub const CR_NON_FINITE: u8 = 8;
    /// A line's equivalent-width integral stopped at its evaluation budget short of its
    /// tolerance; the values are kept (the best estimate) but flagged.
    pub const LINE_INTEGRAL_UNCONVERGED: u8 = 9;
    /// Not computed yet.
    pub const NOT_COMPUTED: u8 = 255;

    /// (code, meaning) for the file's flag attributes.
    pub fn meanings() -> Vec<(u8, String)> {
        vec![
            (OK, "converged".into()),
            (NO_ROOT, "no_charge_balance_root".into()),
            (ITERATION_LIMIT, "iteration_limit".into()),
            (DENSITY_OUT_OF_RANGE, "implied_density_out_of_range".into()),
            (INVALID_INPUT, "invalid_input".into()),
            (SLAB_FAILED, "slab_failed".into()),
            (CR_ITERATION_LIMIT, "cr_iteration_limit".into()),
            (CR_SINGULAR, "cr_singular_matrix".into()),
            (CR_NON_FINITE, "cr_non_finite".into()),
            (
                LINE_INTEGRAL_UNCONVERGED,
                "line_integral_unconverged".into(),
            ),
            (NOT_COMPUTED, "not_computed".into()),
        ]
    }
}

/// A dataset the model produces.
#[derive(Debug, Clone, PartialEq)]
pub struct Quantity {
    /// Dataset name.
    pub name: String,
    /// Units.
    pub units: &'static str,
    /// Description.
    pub long_name: String,
    /// One value per line (else one per point).
    pub per_line: bool,
}

/// The quantities of a plan: per-line strengths, then per-point state variables and the
/// ionisation fraction of every species that carries a selected line.
pub fn quantities(plan: &Plan) -> Vec<Quantity> {
    let emission = !plan.spec.has_background;
    let q = |name: &str, units, long_name: &str, per_line| Quantity {
        name: name.into(),
        units,
        long_name: long_name.into(),
        per_line,
    };
    let mut v = vec![
        if emission {
            q(
                "line_emission",
                "erg s-1 cm-2",
                "integrated line emission above the continuum",
                true,
            )
        } else {
            q(
                "equivalent_width",
                "angstrom",
                "equivalent width (positive in absorption)",
                true,
            )
        },
        q(
            "central_depth",
            "1",
            "central depth 1 - F/Fc (emission: peak contrast F/Fc - 1)",
            true,
        ),
        q(
            "tau0",
            "1",
            "line-centre optical depth of the line alone",
            true,
        ),
        q(
            "fwhm",
            "angstrom",
            "full width at half maximum of the line profile",
            true,
        ),
        q("lower_column", "cm-2", "lower-level column density", true),
        q("electron_density", "cm-3", "electron number density", false),
        q("gas_pressure", "dyn cm-2", "gas pressure", false),
        q(
            "hydrogen_density",
            "cm-3",
            "total hydrogen number density",
            false,
        ),
        q("mass_density", "g cm-3", "mass density", false),
    ];
    // A state variable that is also an axis is stored once, as the axis.
    v.retain(|x| x.per_line || !plan.axes.iter().any(|a| a.name == x.name));
    for s in line_species(plan) {
        v.push(q(
            &format!("fraction_{}", s.replace(' ', "_")),
            "1",
            &format!("fraction of the element in stage {s}"),
            false,
        ));
    }
    if let Some(levels) = plan.spec.physics.cr_levels {
        for n in 1..=levels {
            v.push(q(
                &format!("departure_{n}"),
                "1",
                &format!("departure coefficient b_{n} of hydrogen shell n = {n}"),
                false,
            ));
        }
    }
    v
}

/// Species carrying the plan's lines, in first-appearance order.
pub fn line_species(plan: &Plan) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for l in &plan.lines {
        if !out.contains(&l.species) {
            out.push(l.species.clone());
        }
    }
    out
}

/// Values of one point: for each quantity, `n_lines` values (per-line) or one.
#[derive(Debug, Clone, PartialEq)]
pub struct PointValues {
    /// Per quantity (in [`quantities`] order) its values.
    pub values: Vec<Vec<f64>>,
    /// Status code.
    pub status: u8,
}

/// Evaluate one point of a plan. Failures give NaN values and a status code, never a panic.
pub fn evaluate(plan: &Plan, quantities: &[Quantity], flat: usize) -> PointValues {
    evaluate_inputs(plan, quantities, &plan.point(flat))
}

/// Evaluate the physics at arbitrary axis values (e.g. between nodes; see
/// [`Plan::inputs_at`]). Same contract as [`evaluate`].
pub fn evaluate_at(plan: &Plan, quantities: &[Quantity], axis_values: &[f64]) -> PointValues {
    evaluate_inputs(plan, quantities, &plan.inputs_at(axis_values))
}

fn evaluate_inputs(
    plan: &Plan,
    quantities: &[Quantity],
    inputs: &super::plan::PointInputs,
) -> PointValues {
    let data = AtomicData::embedded();
    let n_lines = plan.lines.len();
    let nan = |st: u8| PointValues {
        values: quantities
            .iter()
            .map(|q| vec![f64::NAN; if q.per_line { n_lines } else { 1 }])
            .collect(),
        status: st,
    };
    let state = match eos::solve_with(data, &inputs.state) {
        Ok(s) => s,
        Err(StateError::Input(_)) => return nan(status::INVALID_INPUT),
        Err(StateError::NotConverged(nc)) => {
            return nan(match nc.reason {
                eos::ConvergenceFailure::NoRoot => status::NO_ROOT,
                eos::ConvergenceFailure::IterationLimit => status::ITERATION_LIMIT,
                eos::ConvergenceFailure::ImpliedDensityOutOfRange => status::DENSITY_OUT_OF_RANGE,
            });
        }
    };
    let departures = match &inputs.populations {
        None => None,
        Some(cr) => match formation::departures::solve_departures(data, &state, &inputs.slab, cr) {
            Ok(sol) => Some(sol),
            Err(crate::nlte::CrError::Invalid { .. }) => return nan(status::INVALID_INPUT),
            Err(crate::nlte::CrError::NotConverged { reason, .. }) => {
                return nan(match reason {
                    crate::nlte::CrFailure::IterationLimit => status::CR_ITERATION_LIMIT,
                    crate::nlte::CrFailure::Singular => status::CR_SINGULAR,
                    crate::nlte::CrFailure::NonFinite => status::CR_NON_FINITE,
                });
            }
        },
    };
    let lines: Vec<&crate::atoms::lines::Line> = plan.lines.iter().collect();
    let strengths = match formation::departures::line_strengths_with(
        data,
        &state,
        &inputs.slab,
        &lines,
        departures.as_ref(),
    ) {
        Ok(s) => s,
        Err(_) => return nan(status::SLAB_FAILED),
    };
    // With collisional–radiative hydrogen, n_e and hydrogen's ionisation are its own.
    let electron_density = departures
        .as_ref()
        .map_or(state.electron_density, |d| d.electron_density);
    let species = line_species(plan);
    let mut values = Vec::with_capacity(quantities.len());
    for q in quantities {
        let v: Vec<f64> = match q.name.as_str() {
            "equivalent_width" => strengths
                .iter()
                .map(|s| s.equivalent_width.unwrap_or(f64::NAN))
                .collect(),
            "line_emission" => strengths
                .iter()
                .map(|s| s.emission.unwrap_or(f64::NAN))
                .collect(),
            "central_depth" => strengths.iter().map(|s| s.central_depth).collect(),
            "tau0" => strengths.iter().map(|s| s.tau0).collect(),
            "fwhm" => strengths.iter().map(|s| s.fwhm_angstrom).collect(),
            "lower_column" => strengths.iter().map(|s| s.lower_column).collect(),
            "electron_density" => vec![electron_density],
            "gas_pressure" => vec![state.gas_pressure],
            "hydrogen_density" => vec![state.hydrogen_density],
            "mass_density" => vec![state.mass_density],
            other if other.starts_with("departure_") => {
                let n: usize = other["departure_".len()..].parse().expect("own name");
                vec![
                    departures
                        .as_ref()
                        .map_or(f64::NAN, |d| d.levels[n - 1].departure),
                ]
            }
            other => {
                let name = other.trim_start_matches("fraction_").replace('_', " ");
                if let Some(d) = &departures {
                    match name.as_str() {
                        "H I" => {
                            values.push(vec![1.0 - d.ionised_fraction]);
                            continue;
                        }
                        "H II" => {
                            values.push(vec![d.ionised_fraction]);
                            continue;
                        }
                        _ => {}
                    }
                }
                let k = species
                    .iter()
                    .find(|s| **s == name)
                    .and_then(|s| data.species_index(s));
                vec![k.map_or(f64::NAN, |k| state.species[k].fraction)]
            }
        };
        values.push(v);
    }
    PointValues {
        values,
        status: point_status(&strengths),
    }
}

/// The status of a point whose state and populations converged: flagged when any line's
/// integral did not.
fn point_status(strengths: &[formation::LineStrength]) -> u8 {
    if strengths.iter().all(|s| s.converged) {
        status::OK
    } else {
        status::LINE_INTEGRAL_UNCONVERGED
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::atoms::lines::Catalogue;
    use crate::eos::{Composition, Density, EosOptions, StateRequest};
    use crate::formation::{Background, Geometry, SlabOptions, View};

    #[test]
    fn an_unconverged_line_integral_flags_the_point() {
        let state = crate::eos::solve(&StateRequest {
            temperature: 6000.0,
            density: Density::GasPressure(1e4),
            composition: Composition::default(),
            options: EosOptions::default(),
        })
        .unwrap();
        let opts = SlabOptions {
            geometry: Geometry::HydrogenColumn(1e22),
            background: Background::Planck(7200.0),
            microturbulence: 2e5,
            view: View::Flux,
            continuum: true,
            damping: None,
        };
        let line = Catalogue::embedded().get("Ca II K").unwrap();
        let ok = formation::line_strength(AtomicData::embedded(), &state, &opts, line).unwrap();
        assert!(ok.converged);
        assert_eq!(point_status(std::slice::from_ref(&ok)), status::OK);
        let stopped = formation::LineStrength {
            converged: false,
            ..ok.clone()
        };
        assert_eq!(
            point_status(&[ok, stopped]),
            status::LINE_INTEGRAL_UNCONVERGED
        );
        assert!(
            status::meanings()
                .iter()
                .any(|(c, m)| *c == status::LINE_INTEGRAL_UNCONVERGED
                    && m == "line_integral_unconverged")
        );
    }
}

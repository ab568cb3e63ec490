//! Hydrogen departure coefficients for a slab: the collisional–radiative model of
//! [`crate::nlte`] run on a solved LTE state, with the slab's own thickness and
//! microturbulence for the line escape probabilities.
//!
//! The coupling is deliberately lite: the other elements keep their LTE ionisation at the
//! LTE electron density and contribute a fixed number of electrons; hydrogen's shells, its
//! ionisation and the electron density come from the collisional–radiative solution.

use crate::atoms::AtomicData;
use crate::eos::State;
use crate::eos::occupation::{LevelCutoff, OccupationModel};
use crate::nlte::{self, CrError, CrInput, CrOptions, CrSolution, Escape, RadiationField};

use super::SlabOptions;

/// Settings of the collisional–radiative populations model.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct CrSettings {
    /// Bundled shells N.
    pub levels: u32,
    /// External radiation field (dilution W, temperature T_R).
    pub field: RadiationField,
    /// Case B (Lyman lines thick, no recombination to n = 1).
    pub case_b: bool,
}

impl Default for CrSettings {
    fn default() -> Self {
        CrSettings {
            levels: nlte::DEFAULT_LEVELS,
            field: RadiationField::DARK,
            case_b: false,
        }
    }
}

/// Occupation probabilities of hydrogen shells 1…levels in a state (the same cut-off the
/// state was solved with).
pub fn hydrogen_occupation(state: &State, levels: u32) -> Vec<f64> {
    match state.cutoff {
        LevelCutoff::MaxShell(max) => (1..=levels)
            .map(|n| if n <= max { 1.0 } else { 0.0 })
            .collect(),
        _ => {
            let m = OccupationModel::new(1, &state.perturbers);
            (1..=levels).map(|n| m.w(n)).collect()
        }
    }
}

/// Solve the collisional–radiative hydrogen populations for `state` seen as the slab `opts`.
pub fn solve_departures(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    cr: &CrSettings,
) -> Result<CrSolution, CrError> {
    solve_with_escape(
        data,
        state,
        cr,
        Escape::Slab {
            thickness: opts.thickness(state),
            microturbulence: opts.microturbulence,
        },
    )
}

/// Solve the collisional–radiative hydrogen populations for `state` with a given line
/// escape (e.g. [`Escape::Thin`] when no slab is given).
pub fn solve_with_escape(
    data: &AtomicData,
    state: &State,
    cr: &CrSettings,
    escape: Escape,
) -> Result<CrSolution, CrError> {
    let density = |name: &str| {
        data.species_index(name)
            .map_or(0.0, |k| state.species[k].density)
    };
    let other = (state.electron_density - density("H II")).max(0.0);
    let input = CrInput {
        temperature: state.temperature,
        hydrogen_density: density("H I") + density("H II"),
        other_electrons: other,
        occupation: Some(hydrogen_occupation(state, cr.levels)),
        electron_density_guess: Some(state.electron_density),
    };
    let options = CrOptions {
        levels: cr.levels,
        field: cr.field,
        escape,
        case_b: cr.case_b,
    };
    nlte::solve(&input, &options)
}

/// How a line's populations depart from those of the LTE state it was set up with.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LineDepartures {
    /// b of the lower shell (relative to the collisional–radiative continuum).
    pub b_lower: f64,
    /// b of the upper shell.
    pub b_upper: f64,
    /// Lower-level population over its value in the LTE state.
    pub population_ratio: f64,
}

/// The departures of `line` (hydrogen shells only; `None` for every other line). Shells above
/// the model's N are taken in LTE with the collisional–radiative continuum (b = 1).
pub fn line_departures(
    data: &AtomicData,
    state: &State,
    sol: &CrSolution,
    line: &crate::atoms::lines::Line,
) -> Option<LineDepartures> {
    let (lo, up) = line.shells?;
    if line.species != "H I" {
        return None;
    }
    let b = |n: u32| sol.levels.get(n as usize - 1).map_or(1.0, |l| l.departure);
    // The lower shell's population over its LTE-state value: from the populations themselves
    // where both exist (the model's Bohr-level energies and the state's measured ionisation
    // energy differ by the 1s Lamb shift), else from b and the continua.
    let np_lte = data
        .species_index("H II")
        .map_or(0.0, |k| state.species[k].density);
    let continuum_ratio =
        sol.electron_density * sol.proton_density / (state.electron_density * np_lte);
    let population_ratio = match (
        sol.levels.get(lo as usize - 1),
        state.hydrogen_levels.get(lo as usize - 1),
    ) {
        (Some(c), Some(l)) if l.population > 0.0 => c.population / l.population,
        _ => b(lo) * continuum_ratio,
    };
    Some(LineDepartures {
        b_lower: b(lo),
        b_upper: b(up),
        population_ratio,
    })
}

/// Strengths of `lines`, with hydrogen's departure coefficients applied where a
/// collisional–radiative solution is given (LTE otherwise, bit for bit
/// [`super::line_strengths`]).
pub fn line_strengths_with(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    lines: &[&crate::atoms::lines::Line],
    departures: Option<&CrSolution>,
) -> Result<Vec<super::LineStrength>, super::SlabError> {
    let Some(sol) = departures else {
        return super::line_strengths(data, state, opts, lines);
    };
    opts.validate()?;
    lines
        .iter()
        .map(|l| match line_departures(data, state, sol, l) {
            Some(d) => line_strength_departing(data, state, opts, l, &d),
            None => super::line_strength(data, state, opts, l),
        })
        .collect()
}

/// Strength of one line whose level populations depart from LTE: line opacity scaled by the
/// lower population and the non-LTE stimulated-emission factor 1 − (b_u/b_l) e^{−hν/kT}, line
/// source function S_l = (2hν³/c²)/((b_l/b_u) e^{hν/kT} − 1), mixed with the continuum's
/// Planck source by opacity weight in the homogeneous slab. A population inversion
/// (b_u/b_l > e^{hν/kT}) is given no line opacity.
pub fn line_strength_departing(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    line: &crate::atoms::lines::Line,
    dep: &LineDepartures,
) -> Result<super::LineStrength, super::SlabError> {
    use crate::constants::{C, HC_OVER_K};
    use crate::transfer::{quadrature, slab as rt, special};
    let mut su = super::setup_line(data, state, opts, line)?;
    let t = state.temperature;
    let x0 = HC_OVER_K * su.nu0 / C / t;
    let stim_lte = -(-x0).exp_m1();
    let ratio_bu_bl = dep.b_upper / dep.b_lower;
    let stim = (1.0 - ratio_bu_bl * (-x0).exp()).max(0.0);
    su.kappa_scale *= dep.population_ratio * stim / stim_lte;
    su.lower_density *= dep.population_ratio;
    let tau_c = su.kappa_cont * su.thickness;
    let absorption = matches!(opts.background, super::Background::Planck(_));
    let emergent = |tau: f64, s: f64, bg: f64| match opts.view {
        super::View::Flux => rt::emergent_flux(tau, s, bg),
        super::View::Intensity(mu) => rt::emergent_intensity(tau, mu, s, bg),
    };
    let profile = |x: f64| -> f64 {
        let lam = su.lambda0 + x;
        let nu = C / lam;
        let b = special::planck_nu(nu, t);
        let bg = match opts.background {
            super::Background::Planck(tb) => special::planck_nu(nu, tb),
            super::Background::None => 0.0,
        };
        let tau_l = su.tau_line(x);
        // S_l = B_ν(T) (e^{y} − 1)/((b_l/b_u) e^{y} − 1), y = hν/kT: the Planck function
        // times a factor that is exactly 1 without departures.
        let y = HC_OVER_K / (lam * t);
        let r = 1.0 / ratio_bu_bl;
        let factor = if y > 1.0 {
            let e = (-y).exp();
            (1.0 - e) / (r - e)
        } else {
            y.exp_m1() / (r * y.exp() - 1.0)
        };
        let s_line = if factor > 0.0 && factor.is_finite() {
            b * factor
        } else {
            0.0
        };
        let tau = tau_l + tau_c;
        let s = if tau > 0.0 {
            (tau_l * s_line + tau_c * b) / tau
        } else {
            b
        };
        let f = emergent(tau, s, bg);
        let fc = emergent(tau_c, b, bg);
        if absorption {
            if fc > 0.0 { 1.0 - f / fc } else { 0.0 }
        } else {
            (f - fc) * C / (lam * lam)
        }
    };
    let tau0 = su.tau_line(0.0);
    let core = match &su.stark {
        Some(sp) => su.widths.doppler_cm.max(sp.unit_shift()),
        None => su.widths.doppler_cm,
    };
    let scale = quadrature::LineScale::doppler(core, tau0)
        .and_then(|s| s.with_wing(su.wing_coefficient()))
        .or_else(|_| quadrature::LineScale::doppler(su.widths.doppler_cm, 0.0))
        .expect("a positive Doppler width");
    let integral = quadrature::integrate_line(profile, &scale, 5e-5);
    let centre = profile(0.0);
    let fwhm = super::half_width(&profile, centre, su.widths.doppler_cm, 1.0)
        + super::half_width(&profile, centre, su.widths.doppler_cm, -1.0);
    let (equivalent_width, emission, central_depth) = if absorption {
        (Some(integral.value * 1e8), None, centre)
    } else {
        let bg0 = 0.0;
        let fc0 =
            emergent(tau_c, special::planck_nu(su.nu0, t), bg0) * C / (su.lambda0 * su.lambda0);
        let contrast = if fc0 > 0.0 {
            centre / fc0
        } else {
            f64::INFINITY
        };
        (None, Some(integral.value), contrast)
    };
    Ok(super::LineStrength {
        label: line.label.clone(),
        wavelength_angstrom: line.wavelength() * 1e8,
        lower_column: su.lower_density * su.thickness,
        tau0,
        continuum_tau: tau_c,
        equivalent_width,
        emission,
        central_depth,
        fwhm_angstrom: fwhm * 1e8,
        evaluations: integral.evaluations,
        widths: su.widths,
        damping: su.a,
    })
}

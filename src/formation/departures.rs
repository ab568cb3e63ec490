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
///
/// The depth is formed without differencing two fluxes: with S = (τ_l S_l + τ_c B)/τ and
/// τ = τ_l + τ_c, F_c − F = 2π [(B − S)(½ − E₃(τ)) + (I_bg − B)(E₃(τ_c) − E₃(τ))] in flux and
/// I_c − I = (B − S)(1 − e^{−τ/μ}) + (I_bg − B) e^{−τ_c/μ}(1 − e^{−τ_l/μ}) in intensity,
/// which is the LTE expression when b_l = b_u.
pub fn line_strength_departing(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    line: &crate::atoms::lines::Line,
    dep: &LineDepartures,
) -> Result<super::LineStrength, super::SlabError> {
    use super::{Background, View};
    use crate::constants::{C, HC_OVER_K};
    use crate::transfer::{slab as rt, special};
    let mut su = super::setup_line(data, state, opts, line)?;
    let t = state.temperature;
    let x0 = HC_OVER_K * su.nu0 / C / t;
    let stim_lte = -(-x0).exp_m1();
    let ratio_bu_bl = dep.b_upper / dep.b_lower;
    let stim = (1.0 - ratio_bu_bl * (-x0).exp()).max(0.0);
    su.kappa_scale *= dep.population_ratio * stim / stim_lte;
    su.lower_density *= dep.population_ratio;
    su.stim0 = stim;
    su.departure_ratio = Some(ratio_bu_bl);
    let tau_c = su.kappa_cont * su.thickness;
    let absorption = matches!(opts.background, Background::Planck(_));
    let drop = rt::E3Drop::new(tau_c);
    let ec_view = match opts.view {
        View::Intensity(mu) => (-tau_c / mu).exp(),
        View::Flux => 0.0,
    };
    let r = 1.0 / ratio_bu_bl; // b_l/b_u
    let profile = |x: f64, tau_even: f64| -> f64 {
        let lam = su.wavelength_at(x);
        let nu = C / lam;
        let b = special::planck_nu(nu, t);
        let bg = match opts.background {
            Background::Planck(tb) => special::planck_nu(nu, tb),
            Background::None => 0.0,
        };
        // S_l − B = B (1 − r) e^{y}/(r e^{y} − 1) = B (1 − r)/(r − e^{−y}), y = hν/kT.
        let y = HC_OVER_K / (lam * t);
        let tau_l = tau_even * su.stim_ratio(y);
        let denom = r - (-y).exp();
        let sl_minus_b = if stim > 0.0 && denom > 0.0 {
            b * (1.0 - r) / denom
        } else {
            -b // inverted: no line source (and no line opacity)
        };
        let tau = tau_l + tau_c;
        let s_minus_b = if tau > 0.0 {
            tau_l / tau * sl_minus_b
        } else {
            0.0
        };
        let (loss, fc) = match opts.view {
            View::Flux => (
                2.0 * std::f64::consts::PI
                    * ((bg - b) * drop.at(tau_l) - s_minus_b * special::expn_deficit(3, tau)),
                2.0 * std::f64::consts::PI * (bg * drop.e3() + b * drop.deficit()),
            ),
            View::Intensity(mu) => (
                (bg - b) * ec_view * -(-tau_l / mu).exp_m1() - s_minus_b * -(-tau / mu).exp_m1(),
                bg * ec_view + b * (1.0 - ec_view),
            ),
        };
        if absorption {
            if fc > 0.0 { loss / fc } else { 0.0 }
        } else {
            -loss * C / (lam * lam)
        }
    };
    let fc0 = super::emergent(
        opts.view,
        tau_c,
        special::planck_nu(su.nu0, t),
        match opts.background {
            Background::Planck(tb) => special::planck_nu(su.nu0, tb),
            Background::None => 0.0,
        },
    );
    Ok(super::strengths_of(
        &su,
        line,
        profile,
        |x, tau| (profile(x, tau), profile(-x, tau)),
        absorption,
        tau_c,
        fc0,
    ))
}

//! Line widths: thermal Doppler with microturbulence, radiative damping, van der Waals
//! broadening by neutral hydrogen and quadratic Stark broadening by electrons.
//!
//! Conventions: Doppler width Δν_D = (ν₀/c)√(2kT/m + ξ²) (the 1/e half width of the Gaussian
//! core); damping widths Γ are full widths at half maximum of the Lorentzian in angular
//! frequency (rad s⁻¹), so the Voigt parameter is a = Γ/(4π Δν_D).
//!
//! Rules (used when a line carries no measured constant):
//! - radiative: for hydrogen-like lines the sum of all spontaneous decay rates out of the
//!   upper and the lower shell (bundled-n A-values); otherwise the classical value
//!   γ_cl = 8π²e²/(3 m_e c λ²) = 0.22235/λ² s⁻¹ (λ in cm);
//! - van der Waals: Unsöld's hydrogenic estimate (Unsöld 1955; as presented in Gray, *The
//!   Observation and Analysis of Stellar Photospheres*, 3rd ed. 2005, ch. 11, from memory):
//!   ΔC₆ = 0.3×10⁻³⁰ [(I − χ_u)⁻² − (I − χ_l)⁻²] cm⁶ s⁻¹ (energies in eV), Γ₆ = 8.08 ΔC₆^{2/5}
//!   v̄^{3/5} N_H with v̄ the mean relative speed of the radiator and a hydrogen atom.
//!   Unsöld's estimate is known to be too small by a factor of ~2 for many metal lines; a
//!   tabulated `log_gamma_vdw` (at 10⁴ K) is scaled as T^{0.3};
//! - quadratic Stark: a tabulated `log_gamma_stark` (per electron at 10⁴ K) scaled as T^{1/6};
//!   otherwise the estimate Γ₄ = 10⁻⁸ n*⁵ N_e rad s⁻¹ with the effective quantum number of
//!   the upper level n*² = Z² R/(I − χ_u) (Cowley 1971, The Observatory 91, 139; from memory).
//!
//! - self-broadening of neutral-hydrogen lines by ground-state hydrogen atoms
//!   ([`hydrogen_self_broadening`]): for Hα, Hβ and Hγ the cross-sections of Barklem,
//!   Piskunov & O'Mara (2000, A&A 363, 1091, Table 3; σ and α from memory), which include
//!   resonance and van der Waals interaction together (the Unsöld term is then dropped),
//!   with the half width w = (4/π)^{α/2} Γ(2 − α/2) v̄ σ(v₀) (v̄/v₀)^{−α} N_H (Anstee & O'Mara
//!   1995, MNRAS 276, 859), v₀ = 10⁶ cm s⁻¹, v̄ = √(8kT/(πμ)), μ = m_H/2; for every other H I
//!   line the impact resonance width of each shell ℓ ≥ 2 through its p states,
//!   Γ_ℓ = 4πk √(g₁/g_p) e² f₁ℓ/(m_e ω₁ℓ) N_H with k = 0.96 (Ali & Griem 1965, Phys. Rev. 140,
//!   A1044; 1966, Phys. Rev. 144, 366; constants from memory), weighted by the share 3/ℓ² of
//!   the shell's states that are p states (1 for the upper shell of a Lyman line, which
//!   only p states feed), added to Unsöld's van der Waals width (with hydrogenic binding
//!   energies). The Balmer lines above Hγ take that rule times the ratio of the
//!   cross-section width to the rule's width for Hγ at the same temperature (3.8 at
//!   5000 K): the rule alone would drop the width by that factor from Hγ to Hδ, so the
//!   series is continued from its last published member (an extrapolation; common
//!   practice, no source).
//!
//! The linear Stark effect of hydrogen-like lines is in [`crate::opacity::stark`]; these
//! Lorentz widths are convolved with every one of its components.

use crate::atoms::hydrogenic::Hydrogenic;
use crate::atoms::lines::Line;
use crate::constants::{AMU, C, E_CHARGE, EV, HC, K_B, M_E, RYDBERG_INF};

/// The gas properties broadening needs.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct BroadeningGas {
    /// Temperature, K.
    pub temperature: f64,
    /// Electron density, cm⁻³.
    pub electron_density: f64,
    /// Density of ground-state neutral hydrogen (the perturbers of self- and van der Waals
    /// broadening), cm⁻³.
    pub neutral_hydrogen: f64,
    /// Microturbulent velocity ξ, cm s⁻¹.
    pub microturbulence: f64,
}

/// Widths of one line in one gas.
#[derive(Debug, Clone, Copy, PartialEq, Default, serde::Serialize)]
pub struct Widths {
    /// Doppler width Δν_D, Hz.
    pub doppler_hz: f64,
    /// Doppler width in wavelength Δλ_D = λ Δν_D/ν, cm.
    pub doppler_cm: f64,
    /// Radiative damping, rad s⁻¹ (FWHM).
    pub gamma_rad: f64,
    /// van der Waals damping, rad s⁻¹ (FWHM).
    pub gamma_vdw: f64,
    /// Quadratic Stark damping, rad s⁻¹ (FWHM).
    pub gamma_stark: f64,
    /// Self-broadening by ground-state hydrogen (H I lines only), rad s⁻¹ (FWHM).
    pub gamma_self: f64,
}

impl Widths {
    /// Total Lorentzian width Γ, rad s⁻¹.
    pub fn gamma(&self) -> f64 {
        self.gamma_rad + self.gamma_vdw + self.gamma_stark + self.gamma_self
    }
    /// Voigt damping parameter a = Γ/(4π Δν_D).
    pub fn damping_parameter(&self) -> f64 {
        self.gamma() / (4.0 * std::f64::consts::PI * self.doppler_hz)
    }
}

/// Classical radiative damping 8π²e²/(3 m_e c λ²), s⁻¹, λ in cm.
pub fn classical_damping(lambda_cm: f64) -> f64 {
    8.0 * std::f64::consts::PI.powi(2) * E_CHARGE * E_CHARGE
        / (3.0 * M_E * C * lambda_cm * lambda_cm)
}

/// Total spontaneous decay rate out of shell n of a hydrogen-like system, s⁻¹.
pub fn hydrogenic_decay_rate(h: &Hydrogenic, n: u32) -> f64 {
    (1..n).map(|m| h.einstein_a(m, n)).sum()
}

/// Widths of `line` (of a species with ionisation energy `ionization_ev`, radiator mass
/// `mass_g`, hydrogen-like data `hydrogenic` where it applies) in `gas`.
pub fn widths(
    line: &Line,
    mass_g: f64,
    ionization_ev: Option<f64>,
    charge: i32,
    hydrogenic: Option<&Hydrogenic>,
    gas: &BroadeningGas,
) -> Widths {
    let t = gas.temperature;
    let nu = C / line.wavelength_vac;
    let v2 = 2.0 * K_B * t / mass_g + gas.microturbulence * gas.microturbulence;
    let doppler_hz = nu / C * v2.sqrt();
    let gamma_rad = match (line.broadening.gamma_rad, hydrogenic, line.shells) {
        (Some(g), _, _) => g,
        (None, Some(h), Some((lo, up))) => {
            hydrogenic_decay_rate(h, up) + hydrogenic_decay_rate(h, lo)
        }
        _ => classical_damping(line.wavelength_vac),
    };
    // Self-broadening of H I lines; where it comes from cross-sections that include the
    // van der Waals interaction, the Unsöld estimate is not added.
    let (gamma_self, self_includes_vdw) = match (hydrogenic, line.shells) {
        (Some(h), Some((lo, up))) if h.z == 1 && charge == 0 => (
            hydrogen_self_broadening(lo, up, t, gas.neutral_hydrogen),
            self_broadening_includes_vdw(lo, up),
        ),
        _ => (0.0, false),
    };
    let gamma_vdw = match line.broadening.log_gamma_vdw {
        Some(lg) => 10f64.powf(lg) * gas.neutral_hydrogen * (t / 1e4).powf(0.3),
        None if self_includes_vdw => 0.0,
        None => unsold_vdw(line, mass_g, ionization_ev, gas),
    };
    let gamma_stark = match line.broadening.log_gamma_stark {
        Some(lg) => 10f64.powf(lg) * gas.electron_density * (t / 1e4).powf(1.0 / 6.0),
        None => match (ionization_ev, line.shells) {
            (Some(chi), None) => {
                let z = f64::from(charge + 1);
                let bind = chi - line.upper_cm * HC / EV;
                if bind > 0.0 {
                    let n_eff2 = z * z * RYDBERG_INF * HC / EV / bind;
                    1e-8 * n_eff2.powf(2.5) * gas.electron_density
                } else {
                    0.0
                }
            }
            _ => 0.0,
        },
    };
    Widths {
        doppler_hz,
        doppler_cm: line.wavelength_vac * doppler_hz / nu,
        gamma_rad,
        gamma_vdw,
        gamma_stark,
        gamma_self,
    }
}

/// Self-broadening cross-section σ(v₀) (in a₀²) and velocity exponent α of the H I lines
/// with published values (Barklem, Piskunov & O'Mara 2000, Table 3; from memory).
pub fn self_broadening_cross_section(n_lo: u32, n_up: u32) -> Option<(f64, f64)> {
    match (n_lo, n_up) {
        (2, 3) => Some((1180.0, 0.677)),
        (2, 4) => Some((2320.0, 0.455)),
        (2, 5) => Some((4208.0, 0.380)),
        _ => None,
    }
}

/// Upper shell of the highest Balmer line with a published cross-section: the higher
/// Balmer lines are scaled from it (module docs).
const LAST_TABULATED_BALMER: u32 = 5;

/// Whether the self-broadening width of n_lo → n_up already contains the van der Waals
/// interaction (so that Unsöld's estimate must not be added to it).
pub fn self_broadening_includes_vdw(n_lo: u32, n_up: u32) -> bool {
    self_broadening_cross_section(n_lo, n_up).is_some()
        || (n_lo == 2 && n_up > LAST_TABULATED_BALMER)
}

/// Self-broadening (FWHM, rad s⁻¹) of the H I line n_lo → n_up by `n_h` ground-state
/// hydrogen atoms per cm³ at temperature `t`: the cross-section rule for lines that have
/// one; for the higher Balmer lines the resonance-plus-Unsöld rule scaled by the ratio of
/// the cross-section rule to that rule for the last tabulated Balmer line at the same
/// temperature; the resonance rule alone otherwise (module docs).
pub fn hydrogen_self_broadening(n_lo: u32, n_up: u32, t: f64, n_h: f64) -> f64 {
    if let Some(width) = cross_section_width(n_lo, n_up, t) {
        return width * n_h;
    }
    if n_lo == 2 && n_up > LAST_TABULATED_BALMER {
        let anchor = LAST_TABULATED_BALMER;
        let scale = cross_section_width(2, anchor, t).unwrap_or(0.0)
            / (resonance_width(2, anchor) + hydrogen_unsold_width(2, anchor, t));
        return scale * (resonance_width(n_lo, n_up) + hydrogen_unsold_width(n_lo, n_up, t)) * n_h;
    }
    resonance_width(n_lo, n_up) * n_h
}

/// Mean relative speed of two hydrogen atoms, √(8kT/(πμ)) with μ = m_H/2, cm s⁻¹.
fn hydrogen_pair_speed(t: f64) -> f64 {
    let mu = 0.5 * 1.008 * AMU;
    (8.0 * K_B * t / (std::f64::consts::PI * mu)).sqrt()
}

/// Self-broadening per perturber (FWHM, rad s⁻¹ cm³) from the published cross-section of
/// n_lo → n_up, if there is one.
fn cross_section_width(n_lo: u32, n_up: u32, t: f64) -> Option<f64> {
    use std::f64::consts::PI;
    let (sigma, alpha) = self_broadening_cross_section(n_lo, n_up)?;
    let vbar = hydrogen_pair_speed(t);
    let w = (4.0 / PI).powf(0.5 * alpha)
        * gamma_fn(2.0 - 0.5 * alpha)
        * vbar
        * sigma
        * crate::constants::A0
        * crate::constants::A0
        * (vbar / 1e6).powf(-alpha);
    Some(2.0 * w)
}

/// Unsöld's van der Waals width per perturber (FWHM, rad s⁻¹ cm³) of the H I line
/// n_lo → n_up with hydrogenic binding energies (the formula of [`unsold_vdw`]).
fn hydrogen_unsold_width(n_lo: u32, n_up: u32, t: f64) -> f64 {
    let h = Hydrogenic::HYDROGEN;
    let bind = |n: u32| h.binding_wavenumber(n) * HC / EV;
    let (bl, bu) = (bind(n_lo), bind(n_up));
    let dc6 = 0.3e-30 * (1.0 / (bu * bu) - 1.0 / (bl * bl));
    8.08 * dc6.powf(0.4) * hydrogen_pair_speed(t).powf(0.6)
}

/// Impact resonance width per perturber (FWHM, rad s⁻¹ cm³) of the H I line n_lo → n_up
/// (module docs).
fn resonance_width(n_lo: u32, n_up: u32) -> f64 {
    use std::f64::consts::PI;
    let h = Hydrogenic::HYDROGEN;
    // Γ_ℓ = 4πk √(g₁/g_p) e² f₁ℓ/(m_e ω₁ℓ) N_H, g₁ = 2 (1s), g_p = 6 (np).
    let level = |l: u32, share: f64| {
        let omega = 2.0 * PI * C * h.wavenumber(1, l);
        4.0 * PI * 0.96 * (1.0f64 / 3.0).sqrt() * E_CHARGE * E_CHARGE * h.oscillator_strength(1, l)
            / (M_E * omega)
            * share
    };
    let mut per_atom = 0.0;
    if n_lo == 1 {
        per_atom += level(n_up, 1.0);
    } else {
        for l in [n_lo, n_up] {
            per_atom += level(l, 3.0 / f64::from(l * l));
        }
    }
    per_atom
}

/// Γ(x) for x > 0 (Lanczos approximation, g = 7, nine coefficients; relative error ~1e-15;
/// common practice, no source).
pub fn gamma_fn(x: f64) -> f64 {
    use std::f64::consts::PI;
    const G: [f64; 9] = [
        0.999_999_999_999_809_9,
        676.520_368_121_885_1,
        -1_259.139_216_722_402_8,
        771.323_428_777_653_1,
        -176.615_029_162_140_6,
        12.507_343_278_686_905,
        -0.138_571_095_265_720_12,
        9.984_369_578_019_572e-6,
        1.505_632_735_149_311_6e-7,
    ];
    if x < 0.5 {
        return PI / ((PI * x).sin() * gamma_fn(1.0 - x));
    }
    let x = x - 1.0;
    let mut a = G[0];
    let t = x + 7.5;
    for (i, &g) in G.iter().enumerate().skip(1) {
        a += g / (x + i as f64);
    }
    (2.0 * PI).sqrt() * t.powf(x + 0.5) * (-t).exp() * a
}

/// Unsöld's van der Waals width by neutral hydrogen, rad s⁻¹ (0 when the levels lie above
/// the ionisation limit or no ionisation energy is known).
pub fn unsold_vdw(
    line: &Line,
    mass_g: f64,
    ionization_ev: Option<f64>,
    gas: &BroadeningGas,
) -> f64 {
    let Some(chi) = ionization_ev else {
        return 0.0;
    };
    let to_ev = HC / EV;
    let (el, eu) = (line.lower_cm * to_ev, line.upper_cm * to_ev);
    let (bl, bu) = (chi - el, chi - eu);
    if bl <= 0.0 || bu <= 0.0 {
        return 0.0;
    }
    let dc6 = 0.3e-30 * (1.0 / (bu * bu) - 1.0 / (bl * bl));
    if dc6 <= 0.0 {
        return 0.0;
    }
    let m_h = 1.008 * AMU;
    let mu = mass_g * m_h / (mass_g + m_h);
    let vbar = (8.0 * K_B * gas.temperature / (std::f64::consts::PI * mu)).sqrt();
    8.08 * dc6.powf(0.4) * vbar.powf(0.6) * gas.neutral_hydrogen
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::atoms::lines::Catalogue;

    fn gas() -> BroadeningGas {
        BroadeningGas {
            temperature: 5800.0,
            electron_density: 1e13,
            neutral_hydrogen: 1e17,
            microturbulence: 0.0,
        }
    }

    #[test]
    fn doppler_width_of_h_alpha() {
        // Common practice, no source: thermal width of Hα at 10⁴ K, b = √(2kT/m_H) = 12.85 km/s,
        // Δλ_D = λ b/c = 0.281 Å.
        let cat = Catalogue::embedded();
        let ha = cat.get("H-alpha").unwrap();
        let g = BroadeningGas {
            temperature: 1e4,
            ..gas()
        };
        let h = Hydrogenic::HYDROGEN;
        let w = widths(ha, 1.008 * AMU, Some(13.598), 0, Some(&h), &g);
        assert!(
            (w.doppler_cm * 1e8 - 0.2811).abs() < 0.002,
            "{}",
            w.doppler_cm * 1e8
        );
        // Radiative width: A-sum out of n = 3 plus out of n = 2 (bundled): ≈ 1.0e8 + 4.7e8.
        assert!(
            w.gamma_rad > 4.5e8 && w.gamma_rad < 6.5e8,
            "{}",
            w.gamma_rad
        );
        assert!(w.gamma_stark.abs() < 1e-300);
    }

    #[test]
    fn gamma_function_values() {
        // Exact values: Γ(1) = Γ(2) = 1, Γ(1/2) = √π, Γ(5) = 24, Γ(3/2) = √π/2; Γ(4/3) =
        // 0.892979511569249 (Abramowitz & Stegun 1964, Table 6.1, from memory).
        let sp = std::f64::consts::PI.sqrt();
        for (x, want) in [
            (1.0, 1.0),
            (2.0, 1.0),
            (0.5, sp),
            (5.0, 24.0),
            (1.5, 0.5 * sp),
            (4.0 / 3.0, 0.892_979_511_569_249),
        ] {
            let got = gamma_fn(x);
            assert!(
                (got / want - 1.0).abs() < 1e-13,
                "Γ({x}) = {got}, want {want}"
            );
        }
    }

    #[test]
    fn self_broadening_of_balmer_lines() {
        // Hα at 5000 K from the cross-section rule worked by hand: v̄ = √(8kT/(πμ)) =
        // 1.4477e6 cm/s for μ = m_H/2; w/N_H = (4/π)^{0.3385} Γ(1.6615) v̄ σ (v̄/v₀)^{−0.677}
        // = 1.0852 × 0.9019 × 1.4477e6 × 3.3044e-14 × 0.7785 ≈ 3.64e-8 rad s⁻¹ cm³ (half
        // width), so Γ = 7.3e-8 N_H.
        let g = hydrogen_self_broadening(2, 3, 5000.0, 1.0);
        assert!((g / 7.28e-8 - 1.0).abs() < 0.01, "{g:e}");
        // T^{(1−α)/2} scaling of the cross-section rule.
        let g2 = hydrogen_self_broadening(2, 3, 10_000.0, 1.0);
        assert!((g2 / g / 2f64.powf(0.5 * (1.0 - 0.677)) - 1.0).abs() < 1e-12);
        // Linear in the perturber density.
        assert!(
            (hydrogen_self_broadening(2, 4, 6000.0, 1e17)
                / hydrogen_self_broadening(2, 4, 6000.0, 1e16)
                - 10.0)
                .abs()
                < 1e-12
        );
        // Resonance rule for Lyman α by hand: 4π·0.96·√(1/3)·e² f/(m_e ω), f = 0.4164,
        // ω = 2πc/121.57 nm = 1.5495e16 s⁻¹: 6.96·2.5343e8·0.4164/1.5495e16 ≈ 4.74e-8.
        let ly = hydrogen_self_broadening(1, 2, 5000.0, 1.0);
        assert!((ly / 4.74e-8 - 1.0).abs() < 0.01, "{ly:e}");
        // The Balmer lines above Hγ continue from Hγ with the rule's own step from line to
        // line, so the width rises along the whole series without a jump at Hδ (the rule
        // alone is 3.8× below the cross-section width for Hγ at 5000 K).
        for t in [3000.0, 5000.0, 10_000.0] {
            let rule = |up: u32| resonance_width(2, up) + hydrogen_unsold_width(2, up, t);
            let series: Vec<f64> = (3..=30)
                .map(|up| hydrogen_self_broadening(2, up, t, 1.0))
                .collect();
            assert!(series.windows(2).all(|w| w[1] > w[0]), "{t} K: {series:?}");
            let step = series[3] / series[2];
            assert!((step / (rule(6) / rule(5)) - 1.0).abs() < 1e-12, "{t} K");
            assert!(
                step > 1.0 && step < series[2] / series[1],
                "{t} K: Hδ/Hγ {step}"
            );
            assert!(self_broadening_includes_vdw(2, 6) && self_broadening_includes_vdw(2, 30));
        }
        let jump = cross_section_width(2, 5, 5000.0).unwrap()
            / (resonance_width(2, 5) + hydrogen_unsold_width(2, 5, 5000.0));
        assert!((jump - 3.8).abs() < 0.1, "{jump}");
        // Paschen and Lyman lines keep the resonance rule, with Unsöld's term added by
        // `widths`.
        assert!(!self_broadening_includes_vdw(3, 4) && !self_broadening_includes_vdw(1, 2));
        // Lines with cross-sections drop the Unsöld term; others keep it.
        let cat = Catalogue::embedded();
        let h = Hydrogenic::HYDROGEN;
        let ha = widths(
            cat.get("H-alpha").unwrap(),
            1.008 * AMU,
            Some(13.598),
            0,
            Some(&h),
            &gas(),
        );
        assert!(ha.gamma_vdw == 0.0 && ha.gamma_self > 0.0);
        assert!((ha.gamma_self / hydrogen_self_broadening(2, 3, 5800.0, 1e17) - 1.0).abs() < 1e-15);
        let hd_line = cat.get("H-delta").unwrap();
        let hd = widths(hd_line, 1.008 * AMU, Some(13.598), 0, Some(&h), &gas());
        assert!(hd.gamma_vdw == 0.0 && hd.gamma_self > ha.gamma_self);
        // The hydrogenic Unsöld term is the general one with the catalogue's energies and
        // the ground state's binding energy as the ionisation energy.
        let chi = h.binding_wavenumber(1) * HC / EV;
        let general = unsold_vdw(hd_line, 1.008 * AMU, Some(chi), &gas());
        let hydrogenic = hydrogen_unsold_width(2, 6, 5800.0) * gas().neutral_hydrogen;
        assert!(
            (hydrogenic / general - 1.0).abs() < 1e-12,
            "{hydrogenic:e} {general:e}"
        );
        let pa = widths(
            cat.get("H I 3-4").unwrap(),
            1.008 * AMU,
            Some(13.598),
            0,
            Some(&h),
            &gas(),
        );
        assert!(pa.gamma_vdw > 0.0);
    }

    #[test]
    fn classical_damping_value() {
        // physics.md §1: γ_cl = 0.22235/λ² s⁻¹ with λ in cm.
        let l = 5000e-8;
        assert!((classical_damping(l) * l * l / 0.22235 - 1.0).abs() < 5e-5);
    }

    #[test]
    fn unsold_width_scales_with_density_and_temperature() {
        let cat = Catalogue::embedded();
        let na = cat.get("Na I D2").unwrap();
        let m = 22.99 * AMU;
        let mut line = na.clone();
        line.broadening.log_gamma_vdw = None;
        let g1 = unsold_vdw(&line, m, Some(5.139), &gas());
        let mut g = gas();
        g.neutral_hydrogen *= 10.0;
        g.temperature *= 2.0;
        let g2 = unsold_vdw(&line, m, Some(5.139), &g);
        // Γ ∝ N T^{0.3}: ×10 × 2^{0.3}.
        assert!((g2 / g1 / (10.0 * 2f64.powf(0.3)) - 1.0).abs() < 1e-12);
        // Order of magnitude for Na D at N_H = 1e17, 5800 K: Γ₆ ~ 1e9 s⁻¹ (Unsöld; the
        // measured value is ~2× larger). Common practice, no source.
        assert!(g1 > 2e8 && g1 < 5e9, "{g1:e}");
    }
}

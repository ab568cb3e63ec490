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
//! Not yet included: the linear Stark effect and resonance (self-) broadening of hydrogen
//! lines — hydrogen lines have thermal, radiative and van der Waals widths only.

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
    /// Neutral hydrogen density (all shells), cm⁻³.
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
}

impl Widths {
    /// Total Lorentzian width Γ, rad s⁻¹.
    pub fn gamma(&self) -> f64 {
        self.gamma_rad + self.gamma_vdw + self.gamma_stark
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
    let gamma_vdw = match line.broadening.log_gamma_vdw {
        Some(lg) => 10f64.powf(lg) * gas.neutral_hydrogen * (t / 1e4).powf(0.3),
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
    }
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

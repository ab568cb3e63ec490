//! Physical constants in CGS units, CODATA 2018 (Tiesinga et al. 2021, Rev. Mod. Phys. 93,
//! 025010), the edition `scipy.constants` ships; the cross-check script compares every value
//! here with it.
//!
//! Conventions: lengths in cm, masses in g, energies in erg unless a name says `_EV`,
//! charge in statcoulomb (esu), temperatures in K.

/// The CODATA edition these values come from.
pub const EDITION: &str = "CODATA 2018";

/// Speed of light in vacuum, cm s⁻¹ (exact).
pub const C: f64 = 2.997_924_58e10;
/// Planck constant, erg s (exact).
pub const H: f64 = 6.626_070_15e-27;
/// Reduced Planck constant ħ = h/2π, erg s.
pub const HBAR: f64 = H / (2.0 * std::f64::consts::PI);
/// Boltzmann constant, erg K⁻¹ (exact).
pub const K_B: f64 = 1.380_649e-16;
/// Elementary charge in statcoulomb: e[C] × 10 c[m s⁻¹] (exact through the SI definitions).
pub const E_CHARGE: f64 = 1.602_176_634e-19 * 2.997_924_58e9;
/// Electron mass, g.
pub const M_E: f64 = 9.109_383_701_5e-28;
/// Proton mass, g.
pub const M_P: f64 = 1.672_621_923_69e-24;
/// Atomic mass constant (1 u), g.
pub const AMU: f64 = 1.660_539_066_60e-24;
/// Alpha-particle mass (⁴He nucleus), g.
pub const M_ALPHA: f64 = 6.644_657_335_7e-24;
/// One electronvolt in erg (exact).
pub const EV: f64 = 1.602_176_634e-12;
/// Bohr radius, cm.
pub const A0: f64 = 5.291_772_109_03e-9;
/// Rydberg constant for infinite nuclear mass, cm⁻¹.
pub const RYDBERG_INF: f64 = 109_737.315_681_60;
/// Fine-structure constant α.
pub const ALPHA_FS: f64 = 7.297_352_569_3e-3;
/// Thomson cross-section, cm².
pub const SIGMA_THOMSON: f64 = 6.652_458_732_1e-25;
/// Stefan–Boltzmann constant, erg cm⁻² s⁻¹ K⁻⁴.
pub const SIGMA_SB: f64 = 5.670_374_419e-5;
/// Boltzmann constant in eV K⁻¹.
pub const K_EV: f64 = K_B / EV;
/// hc in erg cm (so E = HC × wavenumber).
pub const HC: f64 = H * C;
/// hc/k in cm K (the second radiation constant c₂).
pub const HC_OVER_K: f64 = H * C / K_B;

/// π e²/(m_e c), cm² s⁻¹: integrated line absorption per unit oscillator strength.
pub const PI_E2_OVER_MC: f64 = std::f64::consts::PI * E_CHARGE * E_CHARGE / (M_E * C);

/// (2π m_e k/h²)^{3/2}, cm⁻³ K⁻³ᐟ²: the Saha-equation constant.
pub fn saha_constant() -> f64 {
    (2.0 * std::f64::consts::PI * M_E * K_B / (H * H)).powf(1.5)
}

/// One named constant, for listings (`linegrid constants`).
#[derive(Debug, Clone, Copy, serde::Serialize)]
pub struct NamedConstant {
    /// Short name, stable (used as a JSON key).
    pub name: &'static str,
    /// Value in the units below.
    pub value: f64,
    /// Units (CGS).
    pub units: &'static str,
    /// What it is.
    pub description: &'static str,
}

/// Every constant the project uses, with units, for listing and cross-checking.
pub fn table() -> Vec<NamedConstant> {
    let c = |name, value, units, description| NamedConstant {
        name,
        value,
        units,
        description,
    };
    vec![
        c("c", C, "cm s^-1", "speed of light in vacuum"),
        c("h", H, "erg s", "Planck constant"),
        c("hbar", HBAR, "erg s", "reduced Planck constant"),
        c("k", K_B, "erg K^-1", "Boltzmann constant"),
        c("e", E_CHARGE, "statC", "elementary charge (esu)"),
        c("m_e", M_E, "g", "electron mass"),
        c("m_p", M_P, "g", "proton mass"),
        c("amu", AMU, "g", "atomic mass constant"),
        c("m_alpha", M_ALPHA, "g", "alpha-particle mass"),
        c("ev", EV, "erg", "electronvolt"),
        c("a0", A0, "cm", "Bohr radius"),
        c(
            "rydberg_inf",
            RYDBERG_INF,
            "cm^-1",
            "Rydberg constant, infinite nuclear mass",
        ),
        c("alpha", ALPHA_FS, "1", "fine-structure constant"),
        c(
            "sigma_thomson",
            SIGMA_THOMSON,
            "cm^2",
            "Thomson cross-section",
        ),
        c(
            "sigma_sb",
            SIGMA_SB,
            "erg cm^-2 s^-1 K^-4",
            "Stefan-Boltzmann constant",
        ),
        c("k_ev", K_EV, "eV K^-1", "Boltzmann constant in eV"),
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    #[test]
    fn derived_constants_match_design_values() {
        // physics.md §1 (computed there with scipy): π e²/(m_e c) = 0.026540 cm² s⁻¹.
        assert!(rel(PI_E2_OVER_MC, 0.026540) < 2e-5, "{PI_E2_OVER_MC}");
        // physics.md §1: (2π m_e k/h²)^{3/2} = 2.4147e15 cm⁻³ K⁻³ᐟ².
        assert!(rel(saha_constant(), 2.4147e15) < 5e-5);
        // physics.md §1: π e²/(m_e c²) = 8.8528e-13 cm.
        assert!(rel(PI_E2_OVER_MC / C, 8.8528e-13) < 5e-5);
        // physics.md §1: classical damping 8π²e²/(3 m_e c λ²) = 0.22235/λ² s⁻¹ (λ in cm).
        let g = 8.0 * std::f64::consts::PI.powi(2) * E_CHARGE.powi(2) / (3.0 * M_E * C);
        assert!(rel(g, 0.22235) < 5e-5, "{g}");
        // CODATA 2018: m_p/m_e = 1836.15267343.
        assert!(rel(M_P / M_E, 1_836.152_673_43) < 1e-10);
        // CODATA 2018: α = e²/(ħc) in Gaussian units.
        assert!(rel(E_CHARGE * E_CHARGE / (HBAR * C), ALPHA_FS) < 1e-9);
        // CODATA 2018: R∞ = α² m_e c/(2h).
        assert!(rel(ALPHA_FS * ALPHA_FS * M_E * C / (2.0 * H), RYDBERG_INF) < 1e-9);
    }
}

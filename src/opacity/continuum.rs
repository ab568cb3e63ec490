//! Continuum opacity of a hydrogen-dominated gas, per cm of path (cm⁻¹).
//!
//! Sources (each evaluated at a wavelength λ and temperature T):
//! - H⁻ bound–free: the fit of John (1988, A&A 193, 189, eq. 5 and Table 2; coefficients
//!   from memory), σ = 10⁻¹⁸ λ³ (1/λ − 1/λ₀)^{3/2} Σ_{n=1}^{6} C_n (1/λ − 1/λ₀)^{(n−1)/2} cm²,
//!   λ in µm, threshold λ₀ = 1.6419 µm; used for 0.125 µm ≤ λ < λ₀ (zero elsewhere).
//!   Multiplied by the stimulated-emission factor 1 − e^{−hν/kT}.
//! - H⁻ free–free: John (1988, eq. 6 and Table 3; coefficients from memory), per neutral
//!   hydrogen atom and unit electron pressure, two wavelength ranges split at 0.3645 µm;
//!   stimulated emission included in the fit.
//! - H I bound–free from every shell n: Kramers' cross-section 7.907×10⁻¹⁸ n (λ/λ_n)³ cm²
//!   (Gray, *The Observation and Analysis of Stellar Photospheres*, 3rd ed. 2005, eq. 8.4,
//!   from memory) with the bound–free Gaunt factor of Gray's eq. 8.5 (Menzel & Pekeris 1935
//!   first-order expansion), × (1 − e^{−hν/kT}).
//! - Free–free of every positive ion (hydrogenic, charge Z): α = 3.692×10⁸ Z² g_ff
//!   T^{−1/2} ν^{−3} n_e n_i (1 − e^{−hν/kT}) cm⁻¹ (Rybicki & Lightman 1979, eq. 5.18b), with
//!   the Gaunt factor of Gray's eq. 8.6 (from memory).
//! - Thomson scattering n_e σ_T and Rayleigh scattering by ground-state H I,
//!   σ = 5.799×10⁻¹³/λ⁴ + 1.422×10⁻⁶/λ⁶ + 2.784/λ⁸ cm² (λ in Å; Dalgarno 1962 as given by
//!   Gray 2005, ch. 8; from memory), used for λ ≥ 1300 Å (it diverges towards Lyα).
//!
//! Approximations and where they break down: Kramers cross-sections with a first-order
//! Gaunt factor are good to ~5–10 % near the thresholds; dissolved-level (pre-edge)
//! absorption from the occupation probabilities is not included, so opacity just short of
//! each series limit is too low where levels dissolve; no metal bound–free opacity (it
//! matters below ~4000 Å in cool gas); no molecules; no helium continua.

use crate::constants::{C, H, HC_OVER_K, K_B, SIGMA_THOMSON};

/// The populations a continuum needs (cm⁻³).
#[derive(Debug, Clone, Default)]
pub struct ContinuumGas {
    /// Temperature, K.
    pub temperature: f64,
    /// Electron density.
    pub electron_density: f64,
    /// Negative hydrogen ions.
    pub h_minus: f64,
    /// Neutral hydrogen in its ground state.
    pub h_ground: f64,
    /// All neutral hydrogen.
    pub h_neutral: f64,
    /// Hydrogen shell populations, n = 1, 2, … (index 0 is n = 1).
    pub h_levels: Vec<f64>,
    /// Binding wavenumber of each listed shell, cm⁻¹ (same indexing).
    pub h_binding_cm: Vec<f64>,
    /// Σ Z² n_i over positive ions (free–free).
    pub ion_charge_squared: f64,
}

/// Continuum opacity split by source, cm⁻¹ (absorption includes stimulated emission).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Continuum {
    /// H⁻ bound–free.
    pub h_minus_bf: f64,
    /// H⁻ free–free.
    pub h_minus_ff: f64,
    /// H I bound–free, all listed shells.
    pub h_bf: f64,
    /// Free–free of positive ions.
    pub ion_ff: f64,
    /// Thomson scattering by free electrons.
    pub thomson: f64,
    /// Rayleigh scattering by ground-state H I.
    pub rayleigh: f64,
}

impl Continuum {
    /// True absorption (everything but scattering).
    pub fn absorption(&self) -> f64 {
        self.h_minus_bf + self.h_minus_ff + self.h_bf + self.ion_ff
    }
    /// Scattering.
    pub fn scattering(&self) -> f64 {
        self.thomson + self.rayleigh
    }
    /// Total extinction.
    pub fn total(&self) -> f64 {
        self.absorption() + self.scattering()
    }
}

/// H⁻ photodetachment threshold, µm (John 1988).
pub const H_MINUS_THRESHOLD_UM: f64 = 1.6419;

/// H⁻ bound–free cross-section, cm², at wavelength `lambda_um` (µm); no stimulated emission.
pub fn h_minus_bf_cross_section(lambda_um: f64) -> f64 {
    const C: [f64; 6] = [152.519, 49.534, -118.858, 92.536, -34.194, 4.982];
    if !(0.125..H_MINUS_THRESHOLD_UM).contains(&lambda_um) {
        return 0.0;
    }
    let d = 1.0 / lambda_um - 1.0 / H_MINUS_THRESHOLD_UM;
    let sd = d.sqrt();
    let mut f = 0.0;
    let mut p = 1.0;
    for c in C {
        f += c * p;
        p *= sd;
    }
    1e-18 * lambda_um.powi(3) * d * sd * f
}

/// H⁻ free–free absorption coefficient per neutral hydrogen atom per unit electron
/// pressure, cm⁴ dyn⁻¹ (stimulated emission included), John (1988) eq. 6, for
/// λ ≥ 0.1823 µm (zero below).
pub fn h_minus_ff_coefficient(lambda_um: f64, t: f64) -> f64 {
    // Rows n = 1…6; columns A, B, C, D, E, F.
    const LONG: [[f64; 6]; 6] = [
        [0.0, 0.0, 0.0, 0.0, 0.0, 0.0],
        [2483.346, 285.827, -2054.291, 2827.776, -1341.537, 208.952],
        [
            -3449.889, -1158.382, 8746.523, -11485.632, 5303.609, -812.939,
        ],
        [
            2200.040, 2427.719, -13651.105, 16755.524, -7510.494, 1132.738,
        ],
        [
            -696.271, -1841.400, 8624.970, -10051.530, 4400.067, -655.020,
        ],
        [88.283, 444.517, -1863.864, 2095.288, -901.788, 132.985],
    ];
    const SHORT: [[f64; 6]; 6] = [
        [518.1021, -734.8666, 1021.1775, -479.0721, 93.1373, -6.4285],
        [
            473.2636, 1443.4137, -1977.3395, 922.3575, -178.9275, 12.3600,
        ],
        [
            -482.2089, -737.1616, 1096.8827, -521.1341, 101.7963, -7.0571,
        ],
        [115.5291, 169.6374, -245.6490, 114.2430, -21.9972, 1.5097],
        [0.0; 6],
        [0.0; 6],
    ];
    if lambda_um < 0.1823 {
        return 0.0;
    }
    let table = if lambda_um >= 0.3645 { &LONG } else { &SHORT };
    let theta = 5040.0 / t;
    let l = lambda_um;
    let mut sum = 0.0;
    for (i, row) in table.iter().enumerate() {
        let n = (i + 1) as f64;
        let poly = l * l * row[0]
            + row[1]
            + row[2] / l
            + row[3] / (l * l)
            + row[4] / (l * l * l)
            + row[5] / (l * l * l * l);
        sum += theta.powf((n + 1.0) / 2.0) * poly;
    }
    1e-29 * sum
}

/// Kramers' bound–free cross-section of hydrogen shell n at wavelength λ (cm) with the
/// first-order Gaunt factor; zero beyond the threshold wavelength 1/binding.
pub fn hydrogen_bf_cross_section(n: u32, binding_cm: f64, lambda_cm: f64) -> f64 {
    let threshold = 1.0 / binding_cm;
    if lambda_cm > threshold {
        return 0.0;
    }
    let nf = f64::from(n);
    // Gray eq. 8.5 with R the Rydberg constant: λR/n² ≈ λ · binding.
    let lr = lambda_cm * binding_cm * nf * nf;
    let gaunt = 1.0 - 0.3456 / lr.cbrt() * (lr / (nf * nf) - 0.5);
    7.907e-18 * nf * (lambda_cm / threshold).powi(3) * gaunt.max(0.0)
}

/// Free–free Gaunt factor of a hydrogenic ion (Gray eq. 8.6, from memory).
fn gaunt_ff(lambda_cm: f64, t: f64) -> f64 {
    let lr = lambda_cm * crate::constants::RYDBERG_INF;
    let g = 1.0 + 0.3456 / lr.cbrt() * (lambda_cm * K_B * t / (H * C) + 0.5);
    g.max(1.0)
}

/// Rayleigh scattering cross-section of ground-state H I, cm², λ in cm.
pub fn rayleigh_h(lambda_cm: f64) -> f64 {
    let la = (lambda_cm * 1e8).max(1300.0);
    let l2 = la * la;
    let l4 = l2 * l2;
    5.799e-13 / l4 + 1.422e-6 / (l4 * l2) + 2.784 / (l4 * l4)
}

/// Continuum opacity at vacuum wavelength `lambda_cm` for the gas described.
pub fn continuum(lambda_cm: f64, gas: &ContinuumGas) -> Continuum {
    let t = gas.temperature;
    let stim = -(-HC_OVER_K / (lambda_cm * t)).exp_m1();
    let lum = lambda_cm * 1e4;
    let pe = gas.electron_density * K_B * t;
    let mut h_bf = 0.0;
    for (i, (&pop, &b)) in gas.h_levels.iter().zip(&gas.h_binding_cm).enumerate() {
        if pop > 0.0 {
            h_bf += pop * hydrogen_bf_cross_section(i as u32 + 1, b, lambda_cm);
        }
    }
    let nu = C / lambda_cm;
    Continuum {
        h_minus_bf: gas.h_minus * h_minus_bf_cross_section(lum) * stim,
        h_minus_ff: gas.h_ground * pe * h_minus_ff_coefficient(lum, t),
        h_bf: h_bf * stim,
        ion_ff: 3.692e8 * gaunt_ff(lambda_cm, t) / (t.sqrt() * nu * nu * nu)
            * gas.electron_density
            * gas.ion_charge_squared
            * stim,
        thomson: gas.electron_density * SIGMA_THOMSON,
        rayleigh: gas.h_ground * rayleigh_h(lambda_cm),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn h_minus_bf_peaks_near_850_nm() {
        // physics.md §6 (John 1988): σ peaks at ≈ 4.0e-17 cm² near 850 nm.
        let (mut best, mut at) = (0.0, 0.0);
        for i in 0..2000 {
            let l = 0.2 + 1.4 * f64::from(i) / 2000.0;
            let s = h_minus_bf_cross_section(l);
            if s > best {
                best = s;
                at = l;
            }
        }
        assert!((at - 0.85).abs() < 0.03, "peak at {at} µm");
        assert!((best / 4.0e-17 - 1.0).abs() < 0.05, "peak {best:e}");
        assert!(h_minus_bf_cross_section(1.65) < 1e-300);
    }

    #[test]
    fn h_minus_ff_ranges_join_at_the_balmer_limit() {
        // Common practice, no source: John's two fits should meet at 0.3645 µm within a few
        // per cent over 2500–10,000 K.
        for t in [2520.0, 5040.0, 10080.0] {
            let a = h_minus_ff_coefficient(0.3645 - 1e-9, t);
            let b = h_minus_ff_coefficient(0.3645, t);
            assert!((a / b - 1.0).abs() < 0.05, "T={t}: {a:e} vs {b:e}");
            assert!(b > 0.0);
        }
    }

    #[test]
    fn kramers_threshold_of_the_ground_state() {
        // Lyman edge: 7.907e-18 cm² times the Gaunt factor (0.827 from the first-order form;
        // the exact value is 0.797, Karzas & Latter 1961, from memory).
        let r = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN.binding_wavenumber(1);
        let s = hydrogen_bf_cross_section(1, r, 1.0 / r);
        assert!((s / 6.3e-18 - 1.0).abs() < 0.05, "{s:e}");
        assert!(hydrogen_bf_cross_section(1, r, 1.001 / r) < 1e-300);
    }

    #[test]
    fn thomson_and_rayleigh() {
        let gas = ContinuumGas {
            temperature: 10_000.0,
            electron_density: 1e14,
            h_ground: 1e15,
            ..ContinuumGas::default()
        };
        let c = continuum(5000e-8, &gas);
        // CODATA 2018 σ_T = 6.6524587321e-25 cm².
        assert!((c.thomson / (1e14 * 6.652_458_732_1e-25) - 1.0).abs() < 1e-12);
        assert!(c.rayleigh > 0.0);
        // Long-wavelength limit: Rayleigh scattering by the static dipole polarisability of
        // H(1s), α = 4.5 a₀³ (exact; Bethe & Salpeter 1957): σ = (8π/3)(2π/λ)⁴ α². At 2 µm the
        // dispersion terms add < 1 %.
        let lam = 2e-4;
        let alpha = 4.5 * crate::constants::A0.powi(3);
        let k = 2.0 * std::f64::consts::PI / lam;
        let static_limit = 8.0 * std::f64::consts::PI / 3.0 * k.powi(4) * alpha * alpha;
        assert!(
            (rayleigh_h(lam) / static_limit - 1.0).abs() < 0.01,
            "{:e} vs {static_limit:e}",
            rayleigh_h(lam)
        );
    }
}

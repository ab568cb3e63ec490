//! Where the bound levels end: occupation probabilities of hydrogen-like levels, or a plain
//! cut-off from Debye–Hückel lowering of the ionisation energy.
//!
//! Occupation probabilities follow Hummer & Mihalas (1988, ApJ 331, 794):
//! w_n = w_neutral · w_charged.
//! - Neutral perturbers (hard spheres): w_neutral = exp[−(4π/3) Σ_j N_j (r_n + r_j)³] with
//!   the l-averaged hydrogenic mean radius r_n = a₀(5n² + 1)/(4Z) (the expectation value of r
//!   averaged over the 2l+1 sub-states, Bethe & Salpeter 1957 eq. 3.26); perturbers are the
//!   ground states of H I (r = 1.5 a₀) and He I (r = 0.93 a₀, the mean radius of a helium
//!   ground-state electron, from memory).
//! - Charged perturbers: the fit of Hubeny, Hummer & Lanz (1994, A&A 282, 151; from memory)
//!   to the Hummer–Mihalas integral over the Holtsmark distribution with electron screening:
//!   w = f/(1+f), f = 0.1402 (x + 4 Z_r a³) β_c³ / (1 + 0.1285 x β_c^{3/2}),
//!   a = 0.09 N_e^{1/6} T^{−1/2}, x = (1 + a)^{3.15},
//!   β_c = 8.3×10¹⁴ N_e^{−2/3} K_n Z³/n⁴, K_n = 1 for n ≤ 3, else (16/3) n/(n+1)²,
//!   with Z the charge seen by the electron (1 for H I) and Z_r the radiator's net charge.

use crate::constants::{A0, E_CHARGE, K_B};

/// How the sum over bound levels is ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "kebab-case")]
pub enum LevelCutoff {
    /// Hummer–Mihalas occupation probabilities (default).
    #[default]
    OccupationProbability,
    /// Levels above the Debye-lowered ionisation limit are dropped; the Saha ionisation energy
    /// is lowered by the same Δχ = Z e²/λ_D.
    Debye,
    /// Hydrogen-like shells n ≤ the given maximum count fully, higher shells not at all; no
    /// lowering of the ionisation energy (a textbook hard cut-off, for comparisons with
    /// simplified models).
    MaxShell(u32),
}

impl LevelCutoff {
    /// Stable name ("occupation-probability", "debye", "hard").
    pub fn name(&self) -> &'static str {
        match self {
            LevelCutoff::OccupationProbability => "occupation-probability",
            LevelCutoff::Debye => "debye",
            LevelCutoff::MaxShell(_) => "hard",
        }
    }
}

/// The perturbing particles seen by a radiator.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Perturbers {
    /// Temperature, K.
    pub temperature: f64,
    /// Electron density, cm⁻³.
    pub electron_density: f64,
    /// Σ Z² n_ion over positive ions, cm⁻³ (for the Debye length).
    pub ion_charge_squared_density: f64,
    /// Ground-state neutral hydrogen density, cm⁻³.
    pub neutral_hydrogen: f64,
    /// Neutral helium density, cm⁻³.
    pub neutral_helium: f64,
}

/// Precomputed density-dependent factors of the occupation-probability formula for one
/// radiator, so that evaluating many levels costs one exponential each.
#[derive(Debug, Clone, Copy)]
pub struct OccupationModel {
    z: f64,
    beta_scale: f64,
    a_term: f64,
    x: f64,
    neutral_coef_h: f64,
    neutral_coef_he: f64,
    r_perturber_h: f64,
    r_perturber_he: f64,
}

impl OccupationModel {
    /// Model for a hydrogen-like radiator of nuclear charge `z` (net charge z − 1).
    pub fn new(z: u32, p: &Perturbers) -> OccupationModel {
        let ne = p.electron_density.max(0.0);
        let zf = f64::from(z);
        let zr = zf - 1.0;
        let a = 0.09 * ne.powf(1.0 / 6.0) / p.temperature.sqrt();
        let x = (1.0 + a).powf(3.15);
        let beta_scale = if ne > 0.0 {
            8.3e14 * ne.powf(-2.0 / 3.0) * zf.powi(3)
        } else {
            f64::INFINITY
        };
        let four_thirds_pi = 4.0 * std::f64::consts::PI / 3.0;
        OccupationModel {
            z: zf,
            beta_scale,
            a_term: x + 4.0 * zr * a * a * a,
            x,
            neutral_coef_h: four_thirds_pi * p.neutral_hydrogen.max(0.0),
            neutral_coef_he: four_thirds_pi * p.neutral_helium.max(0.0),
            r_perturber_h: 1.5 * A0,
            r_perturber_he: 0.93 * A0,
        }
    }

    /// Charged-perturber factor w_charged(n).
    pub fn charged(&self, n: u32) -> f64 {
        if self.beta_scale.is_infinite() {
            return 1.0;
        }
        let nf = f64::from(n);
        let k = if n <= 3 {
            1.0
        } else {
            16.0 / 3.0 * nf / ((nf + 1.0) * (nf + 1.0))
        };
        let beta = self.beta_scale * k / (nf * nf * nf * nf);
        let b15 = beta * beta.sqrt();
        let f = 0.1402 * self.a_term * b15 * b15 / (1.0 + 0.1285 * self.x * b15);
        f / (1.0 + f)
    }

    /// Neutral-perturber factor w_neutral(n).
    pub fn neutral(&self, n: u32) -> f64 {
        let nf = f64::from(n);
        let r = A0 * (5.0 * nf * nf + 1.0) / (4.0 * self.z);
        let sh = r + self.r_perturber_h;
        let she = r + self.r_perturber_he;
        let x = self.neutral_coef_h * sh * sh * sh + self.neutral_coef_he * she * she * she;
        // exp(−x) = 1 to rounding below 1e-17: skip the exponential.
        if x < 1e-17 { 1.0 } else { (-x).exp() }
    }

    /// Occupation probability w_n = w_neutral · w_charged.
    pub fn w(&self, n: u32) -> f64 {
        self.charged(n) * self.neutral(n)
    }
}

/// Debye length λ_D = [kT/(4π e² (n_e + Σ Z² n_i))]^{1/2}, cm (common practice, no source).
pub fn debye_length(p: &Perturbers) -> f64 {
    let denom = 4.0
        * std::f64::consts::PI
        * E_CHARGE
        * E_CHARGE
        * (p.electron_density + p.ion_charge_squared_density);
    if denom > 0.0 {
        (K_B * p.temperature / denom).sqrt()
    } else {
        f64::INFINITY
    }
}

/// Debye–Hückel lowering of the ionisation energy of a stage whose next stage has charge
/// `z_next`: Δχ = z_next e²/λ_D, in eV.
pub fn debye_lowering_ev(z_next: f64, p: &Perturbers) -> f64 {
    z_next * E_CHARGE * E_CHARGE / debye_length(p) / crate::constants::EV
}

/// Inglis & Teller (1939, ApJ 90, 439): the principal quantum number of the last resolvable
/// Balmer line, from log10 N_ion = 23.26 − 7.5 log10 n_max (cgs).
pub fn inglis_teller_n_max(ion_density: f64) -> f64 {
    10f64.powf((23.26 - ion_density.log10()) / 7.5)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn plasma(ne: f64) -> Perturbers {
        Perturbers {
            temperature: 1.0e4,
            electron_density: ne,
            ion_charge_squared_density: ne,
            neutral_hydrogen: 0.0,
            neutral_helium: 0.0,
        }
    }

    /// Level where the charged-perturber occupation probability crosses 1/2.
    fn n_half(ne: f64) -> f64 {
        let m = OccupationModel::new(1, &plasma(ne));
        let mut n = 1;
        while m.charged(n + 1) > 0.5 {
            n += 1;
        }
        // interpolate in ln w between n and n+1
        let (w0, w1) = (m.charged(n), m.charged(n + 1));
        f64::from(n) + (w0.ln() - 0.5f64.ln()) / (w0.ln() - w1.ln())
    }

    #[test]
    fn low_levels_are_intact_and_high_levels_dissolve() {
        let m = OccupationModel::new(1, &plasma(1e14));
        // Deep levels keep only the far Holtsmark tail: 1 − w → ∫_{β_c}^∞ W(β) dβ with
        // W(β) → 1.496 β^{−5/2} (physics.md §5), i.e. 0.997 β_c^{−3/2}. For n = 1 at
        // 10¹⁴ cm⁻³, β_c = 8.3e14 × 10^{−28/3}; the fit must reproduce that limit to 10%.
        let beta_c = 8.3e14 * 1e14f64.powf(-2.0 / 3.0);
        let tail = 0.997 * beta_c.powf(-1.5);
        assert!(
            ((1.0 - m.w(1)) / tail - 1.0).abs() < 0.1,
            "{} vs {tail}",
            1.0 - m.w(1)
        );
        assert!((m.w(3) - 1.0).abs() < 1e-5);
        assert!(m.w(40) < 1e-5 && m.w(60) < 1e-7);
        for n in 1..60 {
            assert!(m.w(n + 1) <= m.w(n), "w must fall with n");
        }
    }

    #[test]
    fn dissolution_follows_inglis_teller_scaling() {
        // Inglis & Teller (1939): n_max ∝ N^{-2/15}; the occupation probabilities must follow
        // the same power law (both come from the Holtsmark normal field ∝ N^{2/3} against the
        // level spacing ∝ n^{-5}). Check the slope to 3% over 10¹²–10¹⁷ cm⁻³ and the ratio
        // n_half/n_IT, which is a constant of order one (the criteria differ: dissolution of
        // half the level against merging of adjacent lines).
        let ns: Vec<(f64, f64)> = [1e12, 1e13, 1e14, 1e15, 1e16, 1e17]
            .iter()
            .map(|&ne| (ne, n_half(ne)))
            .collect();
        let (first, last) = (ns[0], ns[ns.len() - 1]);
        let slope = (last.1.ln() - first.1.ln()) / (last.0.ln() - first.0.ln());
        assert!((slope / (-2.0 / 15.0) - 1.0).abs() < 0.03, "slope {slope}");
        for (ne, nh) in ns {
            let ratio = nh / inglis_teller_n_max(ne);
            assert!(
                (0.6..1.1).contains(&ratio),
                "ne={ne}: n_half {nh}, ratio {ratio}"
            );
        }
    }

    #[test]
    fn neutral_perturbers_squeeze_large_orbits() {
        let mut p = plasma(0.0);
        p.neutral_hydrogen = 1e17;
        let m = OccupationModel::new(1, &p);
        assert!((m.w(2) - 1.0).abs() < 1e-4);
        // r_n = a0 (5n² + 1)/4: at n = 20, (4π/3) N r³ ≈ 4.19e17 (2.65e-6)³ ≈ 7.8 → w ≈ 4e-4.
        assert!(m.w(20) < 1e-3 && m.w(20) > 1e-5, "{}", m.w(20));
    }

    #[test]
    fn debye_length_and_lowering() {
        // λ_D = 6.9 (T/n)^{1/2} cm for electrons alone; with ions of equal density the
        // factor becomes 6.9/√2 = 4.88 (NRL Plasma Formulary, from memory).
        let mut p = plasma(1e14);
        p.ion_charge_squared_density = 0.0;
        let ld = debye_length(&p);
        assert!(
            (ld / (6.90 * (1e4f64 / 1e14).sqrt()) - 1.0).abs() < 0.01,
            "{ld}"
        );
        let dchi = debye_lowering_ev(1.0, &plasma(1e14));
        // e²/λ_D with λ_D = 4.88e-5 cm: 1.44e-7 eV cm / 4.88e-5 cm = 2.95e-3 eV.
        assert!((dchi / 2.95e-3 - 1.0).abs() < 0.02, "{dchi}");
    }
}

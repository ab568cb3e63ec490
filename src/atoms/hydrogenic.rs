//! Hydrogen and hydrogen-like ions, computed exactly: bundled-n levels, statistical weights,
//! absorption oscillator strengths from the closed form, Einstein A-values, vacuum and air
//! wavelengths.
//!
//! Conventions
//! - Levels are bundled over l and j: g_n = 2n².
//! - Level energies use the reduced-mass Rydberg constant R_M = R∞/(1 + m_e/M) plus the
//!   statistically weighted mean over j of the Dirac fine-structure energies (derived from
//!   the Dirac formula, Bethe & Salpeter 1957, §16): the mean binding correction of shell n is
//!   α² Z⁴ R_M (5n − 4)/(4n⁵). The Lamb shift is neglected (≤ 3×10⁻⁶ relative on
//!   Balmer wavenumbers).
//! - Oscillator strengths follow the NIST convention (Wiese & Fuhr 2009, J. Phys. Chem. Ref.
//!   Data 38, 565): the infinite-mass closed form of Gordon (1929) multiplied by
//!   (1 + m_e/M), i.e. scaled by the reduced mass.
//! - Air wavelengths from vacuum ones with the refractive index of standard air of Morton
//!   (2000, ApJS 130, 403, eq. 3); by custom, air wavelengths are quoted above 200 nm.

use crate::constants::{ALPHA_FS, C, E_CHARGE, HC, M_ALPHA, M_E, M_P, RYDBERG_INF};

/// A one-electron system: nuclear charge, nuclear mass and ionisation energy.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Hydrogenic {
    /// Nuclear charge Z (1 for H I, 2 for He II).
    pub z: u32,
    /// Nuclear mass, g (f64::INFINITY for the infinite-mass idealisation).
    pub nuclear_mass: f64,
}

impl Hydrogenic {
    /// Neutral hydrogen (nucleus: proton).
    pub const HYDROGEN: Hydrogenic = Hydrogenic {
        z: 1,
        nuclear_mass: M_P,
    };
    /// Singly ionised helium (nucleus: alpha particle).
    pub const HELIUM_ION: Hydrogenic = Hydrogenic {
        z: 2,
        nuclear_mass: M_ALPHA,
    };

    /// Reduced-mass factor 1/(1 + m_e/M).
    pub fn reduced_mass_factor(&self) -> f64 {
        1.0 / (1.0 + M_E / self.nuclear_mass)
    }

    /// Reduced-mass Rydberg constant R_M, cm⁻¹.
    pub fn rydberg(&self) -> f64 {
        RYDBERG_INF * self.reduced_mass_factor()
    }

    /// Binding energy of shell n (positive), cm⁻¹, including the mean fine-structure shift.
    pub fn binding_wavenumber(&self, n: u32) -> f64 {
        let z2 = f64::from(self.z * self.z);
        let nf = f64::from(n);
        let bohr = z2 * self.rydberg() / (nf * nf);
        let fine =
            ALPHA_FS * ALPHA_FS * z2 * z2 * self.rydberg() * (5.0 * nf - 4.0) / (4.0 * nf.powi(5));
        bohr + fine
    }

    /// Energy of shell n above the ground state, cm⁻¹.
    pub fn excitation_wavenumber(&self, n: u32) -> f64 {
        self.binding_wavenumber(1) - self.binding_wavenumber(n)
    }

    /// Statistical weight of the bundled shell n: 2n².
    pub fn weight(n: u32) -> f64 {
        2.0 * f64::from(n) * f64::from(n)
    }

    /// Transition wavenumber n_lo → n_up, cm⁻¹.
    pub fn wavenumber(&self, n_lo: u32, n_up: u32) -> f64 {
        self.binding_wavenumber(n_lo) - self.binding_wavenumber(n_up)
    }

    /// Vacuum wavelength of n_lo → n_up, cm.
    pub fn vacuum_wavelength(&self, n_lo: u32, n_up: u32) -> f64 {
        1.0 / self.wavenumber(n_lo, n_up)
    }

    /// Transition energy n_lo → n_up, erg.
    pub fn transition_energy(&self, n_lo: u32, n_up: u32) -> f64 {
        HC * self.wavenumber(n_lo, n_up)
    }

    /// Absorption oscillator strength f(n_lo → n_up), NIST convention (finite nuclear mass).
    /// For a hydrogen-like ion of charge Z the infinite-mass value is Z-independent.
    pub fn oscillator_strength(&self, n_lo: u32, n_up: u32) -> f64 {
        gordon_oscillator_strength(n_lo, n_up) / self.reduced_mass_factor()
    }

    /// Einstein A-coefficient for spontaneous emission n_up → n_lo, s⁻¹, from
    /// A = (8π² e²/(m_e c λ²)) (g_l/g_u) f_lu with the vacuum wavelength.
    pub fn einstein_a(&self, n_lo: u32, n_up: u32) -> f64 {
        let lam = self.vacuum_wavelength(n_lo, n_up);
        let pi = std::f64::consts::PI;
        8.0 * pi * pi * E_CHARGE * E_CHARGE / (M_E * C * lam * lam) * Self::weight(n_lo)
            / Self::weight(n_up)
            * self.oscillator_strength(n_lo, n_up)
    }
}

/// Absorption oscillator strength of the bundled transition n → n′ (n < n′) for infinite
/// nuclear mass, from the closed form of Gordon (1929) in the form of Menzel & Pekeris (1935):
///
/// f = (32/3) n² n′⁴ (n′−n)^{2n+2n′−4} / (n′+n)^{2n+2n′+3} · |F(−n, 1−n′; 1; x)² − F(1−n, −n′; 1; x)²|,
/// x = −4nn′/(n′−n)², with F the terminating hypergeometric polynomial ₂F₁.
///
/// The difference of squares is formed as a product of sum and difference and the whole
/// expression in logarithms, so nothing overflows up to n′ ≈ 80.
///
/// # Panics
/// If `n == 0` or `n_up <= n`.
pub fn gordon_oscillator_strength(n: u32, n_up: u32) -> f64 {
    assert!(n >= 1 && n_up > n, "need 1 <= n < n_up, got {n} -> {n_up}");
    let nf = f64::from(n);
    let mf = f64::from(n_up);
    let d = mf - nf;
    let x = -4.0 * nf * mf / (d * d);
    let f_a = hyp2f1_poly(n, n_up - 1, x); // F(−n, 1−n′; 1; x)
    let f_b = hyp2f1_poly(n - 1, n_up, x); // F(1−n, −n′; 1; x)
    let diff = (f_a - f_b).abs();
    let sum = (f_a + f_b).abs();
    if diff == 0.0 || sum == 0.0 {
        return 0.0;
    }
    let s = 2.0 * nf + 2.0 * mf;
    let ln_f = (32.0f64 / 3.0).ln() + 2.0 * nf.ln() + 4.0 * mf.ln() + (s - 4.0) * d.ln()
        - (s + 3.0) * (nf + mf).ln()
        + diff.ln()
        + sum.ln();
    ln_f.exp()
}

/// ₂F₁(−a, −b; 1; x) for non-negative integers a, b: Σ_k (−a)_k (−b)_k x^k/(k!)², a polynomial
/// of degree min(a, b), summed term by term with the exact term ratio.
fn hyp2f1_poly(a: u32, b: u32, x: f64) -> f64 {
    let kmax = a.min(b);
    let mut term = 1.0;
    let mut sum = 1.0;
    for k in 0..kmax {
        let kf = f64::from(k);
        // t_{k+1}/t_k = (k − a)(k − b) x / (k + 1)²
        term *= (kf - f64::from(a)) * (kf - f64::from(b)) * x / ((kf + 1.0) * (kf + 1.0));
        sum += term;
    }
    sum
}

/// Refractive index of standard air at a vacuum wavelength, Morton (2000, ApJS 130, 403,
/// eq. 3; the IAU-adopted form of Edlén 1966 as revised by Peck & Reeder 1972).
/// `vacuum_cm` in cm.
pub fn air_refractive_index(vacuum_cm: f64) -> f64 {
    let sigma = 1.0e-4 / vacuum_cm; // µm⁻¹
    let s2 = sigma * sigma;
    1.0 + 8.342_54e-5 + 2.406_147e-2 / (130.0 - s2) + 1.5998e-4 / (38.9 - s2)
}

/// Air wavelength from a vacuum wavelength (both cm), by λ_air = λ_vac/n(λ_vac).
pub fn vacuum_to_air(vacuum_cm: f64) -> f64 {
    vacuum_cm / air_refractive_index(vacuum_cm)
}

/// The customary wavelength for quoting a line: air above 200 nm, vacuum below.
/// Returns (wavelength in cm, true if air).
pub fn customary_wavelength(vacuum_cm: f64) -> (f64, bool) {
    if vacuum_cm > 2.0e-5 {
        (vacuum_to_air(vacuum_cm), true)
    } else {
        (vacuum_cm, false)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    const INFINITE: Hydrogenic = Hydrogenic {
        z: 1,
        nuclear_mass: f64::INFINITY,
    };

    #[test]
    fn lyman_alpha_is_8192_over_19683() {
        // Exact closed-form value for infinite nuclear mass (physics.md §2).
        assert!(rel(gordon_oscillator_strength(1, 2), 8192.0 / 19683.0) < 1e-14);
    }

    #[test]
    fn oscillator_strengths_match_check_values() {
        // physics.md §2 check values, infinite nuclear mass (computed there).
        // Each value is quoted to five significant figures: the tolerance is half a unit in
        // the last quoted place.
        let cases = [
            (1, 2, 0.41620, 1e-5),
            (1, 3, 0.079102, 1e-6),
            (1, 4, 0.028991, 1e-6),
            (2, 3, 0.64075, 1e-5),
            (2, 4, 0.11932, 1e-5),
            (2, 5, 0.044670, 1e-6),
            (2, 6, 0.022093, 1e-6),
            (3, 4, 0.84210, 1e-5),
            (3, 5, 0.15058, 1e-5),
            (4, 5, 1.03774, 1e-5),
        ];
        for (n, m, f, unit) in cases {
            let got = gordon_oscillator_strength(n, m);
            assert!(
                (got - f).abs() <= 0.5 * unit * (1.0 + 1e-9),
                "f({n}->{m}) = {got}, want {f}"
            );
            assert!((INFINITE.oscillator_strength(n, m) - got).abs() < 1e-15);
        }
        // NIST convention (Wiese & Fuhr 2009): Lyα 0.41641, Hα 0.64108 (quoted to 5 figures).
        let h = Hydrogenic::HYDROGEN;
        assert!(rel(h.oscillator_strength(1, 2), 0.41641) < 5e-5);
        assert!(rel(h.oscillator_strength(2, 3), 0.64108) < 5e-5);
    }

    #[test]
    fn lyman_alpha_einstein_a() {
        // physics.md §2: bundled n = 2 → 1, A = 4.699e8 s⁻¹ (NIST ASD multiplet value
        // 4.6986e8, from memory).
        let a = Hydrogenic::HYDROGEN.einstein_a(1, 2);
        assert!(rel(a, 4.6986e8) < 3e-4, "{a}");
    }

    #[test]
    fn hydrogen_wavelengths_match_nist() {
        // NIST ASD values as listed in physics.md §2 (nm). Tolerances: 0.003 nm, the
        // rounding of the quoted values plus the neglected Lamb shift.
        let h = Hydrogenic::HYDROGEN;
        let nm = |cm: f64| cm * 1e7;
        assert!((nm(h.vacuum_wavelength(1, 2)) - 121.567).abs() < 0.001);
        assert!((nm(h.vacuum_wavelength(2, 3)) - 656.463).abs() < 0.003);
        let air = |n, m| nm(vacuum_to_air(h.vacuum_wavelength(n, m)));
        assert!((air(2, 3) - 656.282).abs() < 0.003, "{}", air(2, 3));
        assert!((air(2, 4) - 486.13).abs() < 0.01, "{}", air(2, 4));
        assert!((air(2, 5) - 434.05).abs() < 0.01);
        assert!((air(2, 6) - 410.17).abs() < 0.01);
        assert!((air(3, 4) - 1875.1).abs() < 0.1);
        // Balmer limit: 1/(binding of n = 2).
        let limit = nm(vacuum_to_air(1.0 / h.binding_wavenumber(2)));
        assert!((limit - 364.60).abs() < 0.01, "{limit}");
        // Common practice, no source: n = 1 → 2 takes 10.2 eV.
        let ev = h.transition_energy(1, 2) / crate::constants::EV;
        assert!((ev - 10.2).abs() < 0.005, "{ev}");
    }

    #[test]
    fn helium_ion_scales_as_z_squared() {
        // He II 468.6 nm (n = 3 → 4), NIST ASD air wavelength 468.57 nm (from memory).
        let he = Hydrogenic::HELIUM_ION;
        let air = vacuum_to_air(he.vacuum_wavelength(3, 4)) * 1e7;
        assert!((air - 468.57).abs() < 0.02, "{air}");
        // f-values are Z-independent apart from the reduced mass.
        let ratio = he.oscillator_strength(3, 4) / Hydrogenic::HYDROGEN.oscillator_strength(3, 4);
        assert!((ratio - 1.0).abs() < 6e-4);
    }

    #[test]
    fn morton_index_of_air() {
        // Morton (2000) Table 3 (from memory): n − 1 = 2.77e-4 at 600 nm, roughly.
        let n = air_refractive_index(600e-7);
        assert!((n - 1.0 - 2.77e-4).abs() < 2e-6, "{n}");
        let (w, is_air) = customary_wavelength(121.567e-7);
        assert!(!is_air && w.to_bits() == 121.567e-7f64.to_bits());
    }
}

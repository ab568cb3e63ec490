//! Curve of growth of an absorption line without re-emission (a screen in front of a
//! continuum source), and its three asymptotes.
//!
//! For a pure Doppler profile the optical depth at Δλ from line centre is
//! τ = τ₀ exp(−(Δλ/Δλ_D)²), Δλ_D = bλ/c, with (Spitzer, *Physical Processes in the
//! Interstellar Medium*, 1978, §3.4; Draine, *Physics of the Interstellar and Intergalactic
//! Medium*, 2011, §9.4 — both from memory)
//!
//! τ₀ = √π e² N f λ/(m_e c b),
//!
//! and the equivalent width is W_λ = Δλ_D F(τ₀) with the dimensionless
//!
//! F(τ₀) = ∫_{−∞}^{∞} (1 − exp(−τ₀ e^{−x²})) dx.
//!
//! ## Computing F
//!
//! - τ₀ ≤ 3: termwise integration of 1 − e^{−y} = Σ (−1)^{n+1} yⁿ/n! with
//!   ∫ e^{−n x²} dx = √(π/n) gives F = √π Σ_{n≥1} (−1)^{n+1} τ₀ⁿ/(n! √n); the alternating
//!   terms peak near e^{τ₀}/√(2πτ₀) (4.6 at τ₀ = 3, against a sum of 1.3), so cancellation
//!   costs a few units of rounding.
//! - τ₀ > 3: integrating by parts (the boundary term 2xD vanishes at 0 and ∞),
//!   F = 4 ∫₀^∞ x² τ e^{−τ} dx with τ = τ₀ e^{−x²}: a single smooth bump centred where τ = 1
//!   (x = √ln τ₀), entire in x and decaying on both sides faster than exponentially. The
//!   trapezoidal rule on the whole line converges geometrically for such integrands
//!   (Trefethen & Weideman 2014, SIAM Review 56, 385); the step h = 0.1/√(ln τ₀) resolves
//!   the bump's width ~1/√(ln τ₀), and the sum starts where τ < 800 (e^{−τ} underflows
//!   before): 70–250 terms whatever τ₀; ≤ 10⁻¹⁴ relative against 40-digit quadrature
//!   (tests).
//! - The flat-part asymptote F ≈ 2√L + γ/√L (L = ln τ₀, γ Euler's constant; from
//!   √(L − ln τ) = √L (1 − ln τ/(2L) − …) and ∫₀^∞ ln τ e^{−τ} dτ = −γ) has relative error
//!   ≈ (γ² + π²/6)/(8L²) ≈ 0.25/L², 7×10⁻⁴ at τ₀ = 10⁸: it never reaches 10⁻¹⁰ in double
//!   precision (L ≤ 710), so F never uses it; it is offered for the asymptote lines only.
//!
//! ## Asymptotes (wavelength units: cm)
//!
//! - linear (τ₀ ≪ 1): W_λ = (π e²/(m_e c²)) N f λ², independent of b;
//! - flat (Doppler core saturated): W_λ ≈ (2bλ/c) √(ln τ₀);
//! - damping (Lorentz wings saturated): derivation of the wing coefficient. A line of natural
//!   (or total damping) width Γ, FWHM in rad s⁻¹, has the Lorentz profile
//!   φ(ν) = (γ_ν/π)/(Δν² + γ_ν²), γ_ν = Γ/(4π) (half width in Hz), so far from the core
//!   φ ≈ Γ/(4π² Δν²). The cross-section is σ = (π e²/(m_e c)) f φ(ν) and Δν = c Δλ/λ², so
//!   τ(Δλ) = N σ = (π e²/(m_e c)) N f Γ λ⁴/(4π² c² Δλ²) = A/Δλ² with
//!
//!   A = (e²/(m_e c)) N f λ⁴ Γ/(4π c²)   (cm²).
//!
//!   Then ∫(1 − e^{−A/Δλ²}) dΔλ = 2√(πA) (the tail formula of `quadrature` from X → 0), so
//!   W_λ = 2√(πA) = (λ²/c) √(e² N f Γ/(m_e c)), growing as √N. The same A follows from the
//!   Voigt profile: A = τ₀ a Δλ_D²/√π with a = Γ/(4π Δν_D), Δν_D = b/λ (checked in the tests).

use super::quadrature::{InvalidLineScale, LineScale};
use super::special::EULER_GAMMA;
use crate::constants::{C, E_CHARGE, M_E};
use std::f64::consts::PI;

/// Below this τ₀ the power series is used, above it the trapezoidal rule.
const SERIES_LIMIT: f64 = 3.0;
/// Trapezoidal step in units of 1/√(ln τ₀).
const STEP: f64 = 0.1;
/// Optical depth beyond which e^{−τ} counts as zero in the trapezoidal sum.
const TAU_NEGLIGIBLE: f64 = 800.0;

/// F(τ₀) = ∫_{−∞}^{∞} (1 − exp(−τ₀ e^{−x²})) dx, the curve of growth of a pure Doppler line
/// in units of the Doppler width (≤ 10⁻¹⁴ relative; see the module docs). F(0) = 0,
/// F(+∞) = +∞; NaN for negative or NaN τ₀.
pub fn doppler_growth(tau0: f64) -> f64 {
    if tau0.is_nan() || tau0 < 0.0 {
        return f64::NAN;
    }
    if tau0.is_infinite() {
        return f64::INFINITY;
    }
    if tau0 <= SERIES_LIMIT {
        growth_series(tau0)
    } else {
        growth_trapezoid(tau0)
    }
}

/// √π Σ_{n≥1} (−1)^{n+1} τ₀ⁿ/(n! √n).
fn growth_series(tau0: f64) -> f64 {
    let mut sum = 0.0;
    let mut power = 1.0; // τ₀ⁿ/n!
    for n in 1..200 {
        let nf = n as f64;
        power *= tau0 / nf;
        let term = power / nf.sqrt();
        sum += if n % 2 == 1 { term } else { -term };
        if term <= 1e-17 * sum.abs() {
            break;
        }
    }
    PI.sqrt() * sum
}

/// F = 4 ∫₀^∞ x² τ e^{−τ} dx, τ = τ₀ e^{−x²}, by the trapezoidal rule on the whole line
/// (the integrand is even), for τ₀ > 3.
fn growth_trapezoid(tau0: f64) -> f64 {
    let big_l = tau0.ln();
    let h = STEP / big_l.sqrt();
    // first node where τ ≤ TAU_NEGLIGIBLE: x² ≥ ln(τ₀/800)
    let x_start = (tau0 / TAU_NEGLIGIBLE).ln().max(0.0).sqrt();
    let k_start = (x_start / h).floor() as usize;
    let mut sum = 0.0;
    let mut k = k_start;
    loop {
        let x = k as f64 * h;
        let tau = tau0 * (-x * x).exp();
        let g = 4.0 * x * x * tau * (-tau).exp();
        sum += if k == 0 { 0.5 * g } else { g };
        // past the bump and negligible: the rest falls faster than geometrically
        if x * x > big_l + 2.0 && g <= 1e-18 * sum {
            break;
        }
        k += 1;
    }
    sum * h
}

/// The flat-part asymptote 2√L + γ/√L of F, L = ln τ₀ (relative error ≈ 0.25/L²; for
/// τ₀ > 1 only — NaN otherwise).
pub fn doppler_growth_flat_asymptote(tau0: f64) -> f64 {
    if tau0.is_nan() || tau0 <= 1.0 {
        return f64::NAN;
    }
    let l = tau0.ln();
    2.0 * l.sqrt() + EULER_GAMMA / l.sqrt()
}

/// An absorption line for curve-of-growth work (CGS).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AbsorptionLine {
    /// Wavelength λ, cm.
    pub wavelength: f64,
    /// Absorption oscillator strength f.
    pub f_value: f64,
    /// Doppler parameter b = √(2kT/m + ξ²), cm s⁻¹.
    pub doppler_b: f64,
    /// Damping width Γ (FWHM of the Lorentzian), rad s⁻¹.
    pub gamma: f64,
}

/// The three asymptotes of the curve of growth at one column density, W_λ in cm.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GrowthAsymptotes {
    /// Linear part (π e²/(m_e c²)) N f λ².
    pub linear: f64,
    /// Flat part (2bλ/c)√(ln τ₀); NaN for τ₀ ≤ 1, where it has no meaning.
    pub flat: f64,
    /// Damping part 2√(πA); 0 without damping.
    pub damping: f64,
}

impl AbsorptionLine {
    /// Doppler width Δλ_D = bλ/c, cm.
    pub fn doppler_width(&self) -> f64 {
        self.doppler_b * self.wavelength / C
    }

    /// Line-centre optical depth of the Doppler core, τ₀ = √π e² N f λ/(m_e c b), for a
    /// column density `column` in cm⁻².
    pub fn peak_optical_depth(&self, column: f64) -> f64 {
        PI.sqrt() * E_CHARGE * E_CHARGE * column * self.f_value * self.wavelength
            / (M_E * C * self.doppler_b)
    }

    /// Voigt damping parameter a = Γ/(4π Δν_D) with Δν_D = b/λ.
    pub fn damping_parameter(&self) -> f64 {
        self.gamma * self.wavelength / (4.0 * PI * self.doppler_b)
    }

    /// Wing coefficient A = (e²/(m_e c)) N f λ⁴ Γ/(4π c²), cm², with τ(Δλ) ≈ A/Δλ²
    /// (derivation in the module docs).
    pub fn wing_coefficient(&self, column: f64) -> f64 {
        E_CHARGE * E_CHARGE / (M_E * C)
            * column
            * self.f_value
            * self.wavelength.powi(4)
            * self.gamma
            / (4.0 * PI * C * C)
    }

    /// W_λ = Δλ_D F(τ₀) of the pure Doppler line (damping ignored), cm.
    pub fn doppler_equivalent_width(&self, column: f64) -> f64 {
        self.doppler_width() * doppler_growth(self.peak_optical_depth(column))
    }

    /// The asymptotes at column density `column`.
    pub fn asymptotes(&self, column: f64) -> GrowthAsymptotes {
        let tau0 = self.peak_optical_depth(column);
        let linear = PI * E_CHARGE * E_CHARGE / (M_E * C * C)
            * column
            * self.f_value
            * self.wavelength
            * self.wavelength;
        let flat = if tau0 > 1.0 {
            2.0 * self.doppler_width() * tau0.ln().sqrt()
        } else {
            f64::NAN
        };
        let damping = 2.0 * (PI * self.wing_coefficient(column)).sqrt();
        GrowthAsymptotes {
            linear,
            flat,
            damping,
        }
    }

    /// The Voigt `LineScale` of this line at column density `column`, in cm of wavelength,
    /// for `quadrature::integrate_line`: core Δλ_D, line-centre τ₀ H(a, 0), wing A.
    pub fn line_scale(&self, column: f64) -> Result<LineScale, InvalidLineScale> {
        let a = self.damping_parameter();
        let centre = self.peak_optical_depth(column) * super::special::erfcx(a);
        LineScale::voigt(self.doppler_width(), centre, a)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::transfer::quadrature::integrate_line;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    // reference: mpmath (computed, 40 digits, adaptive quadrature of the definition)
    const F_REF: [(f64, f64); 18] = [
        (1e-8, 1.7724538446389454e-8),
        (1e-3, 0.00177182736435439),
        (0.1, 0.17114574130670069),
        (0.5, 0.7487657830037102),
        (1.0, 1.2851445209578957),
        (2.0, 1.9726886662516635),
        (2.9, 2.3449266823395892),
        (3.1, 2.408635287346649),
        (5.0, 2.8247454532295135),
        (10.0, 3.3137533383692786),
        (30.0, 3.9410133007047932),
        (100.0, 4.520558451124489),
        (1e4, 6.244281087506487),
        (1e8, 8.712506833725634),
        (1e16, 12.232380354112765),
        (1e50, 21.51306002968138),
        (1e150, 37.20020394793287),
        (1e300, 52.58715239919667),
    ];

    #[test]
    fn growth_function_to_1e_10_everywhere() {
        let mut worst: f64 = 0.0;
        for &(tau0, want) in F_REF.iter() {
            let r = rel(doppler_growth(tau0), want);
            worst = worst.max(r);
            assert!(
                r <= 1e-10,
                "F({tau0:e}) = {}, want {want}",
                doppler_growth(tau0)
            );
        }
        eprintln!("F(τ₀) vs 40-digit quadrature: worst {worst:.1e}");
        // continuity at the series / trapezoid switch
        let below = doppler_growth(SERIES_LIMIT);
        let above = doppler_growth(SERIES_LIMIT * (1.0 + 1e-15));
        assert!(rel(above, below) <= 1e-13);
        assert!(doppler_growth(0.0).abs() <= 0.0);
        assert!(doppler_growth(-1.0).is_nan());
        assert!(doppler_growth(f64::INFINITY).is_infinite());
        assert!(doppler_growth(f64::MAX).is_finite());
    }

    #[test]
    fn growth_check_values() {
        // physics reference (computed), rounded: tolerance half a unit in the last digit
        let checks = [
            (0.1, 0.171146, 5e-7),
            (1.0, 1.285145, 5e-7),
            (3.0, 2.377465, 5e-7),
            (1e4, 6.24428, 5e-6),
            (1e8, 8.71251, 5e-6),
        ];
        for (tau0, want, tol) in checks {
            let got = doppler_growth(tau0);
            assert!((got - want).abs() <= tol, "F({tau0}) = {got}");
        }
    }

    #[test]
    fn growth_is_monotone() {
        let mut prev = 0.0;
        for i in 0..200 {
            let tau0 = 10f64.powf(-4.0 + 0.1 * i as f64);
            let f = doppler_growth(tau0);
            assert!(f > prev);
            prev = f;
        }
    }

    #[test]
    fn flat_asymptote_error_follows_its_next_term() {
        // relative error (γ² + π²/6)/(8L²) to leading order
        for &tau0 in &[1e8, 1e30, 1e300] {
            let l = f64::ln(tau0);
            let r =
                (doppler_growth_flat_asymptote(tau0) - doppler_growth(tau0)) / doppler_growth(tau0);
            let predicted = (EULER_GAMMA * EULER_GAMMA + PI * PI / 6.0) / (8.0 * l * l);
            eprintln!("flat asymptote τ₀={tau0:e}: rel error {r:.2e}, next term {predicted:.2e}");
            assert!(
                r > 0.0 && rel(r, predicted) <= 0.35,
                "τ₀={tau0:e}: {r:e} vs {predicted:e}"
            );
        }
        assert!(doppler_growth_flat_asymptote(0.5).is_nan());
    }

    /// A Lyman-α-like line (λ = 1215.67 Å, f = 0.4164, Γ = 6.265×10⁸ s⁻¹, b = 10 km/s;
    /// values from memory, used only as plausible inputs).
    fn test_line() -> AbsorptionLine {
        AbsorptionLine {
            wavelength: 1215.67e-8,
            f_value: 0.4164,
            doppler_b: 1.0e6,
            gamma: 6.265e8,
        }
    }

    #[test]
    fn linear_limit_of_the_doppler_width() {
        let line = test_line();
        for &tau0 in &[1e-8, 1e-6, 1e-5] {
            let column = tau0 / line.peak_optical_depth(1.0);
            let w = line.doppler_equivalent_width(column);
            let lin = line.asymptotes(column).linear;
            assert!(rel(w, lin) <= 1e-4, "τ₀={tau0}: {w:e} vs {lin:e}");
        }
        // √π τ₀ (bλ/c) = π e² N f λ²/(m_e c²) identically
        let column = 1e12;
        let a = line.asymptotes(column);
        let direct = PI.sqrt() * line.peak_optical_depth(column) * line.doppler_width();
        assert!(rel(a.linear, direct) <= 1e-14);
    }

    #[test]
    fn flat_asymptote_of_the_width() {
        let line = test_line();
        let column = 1e8 / line.peak_optical_depth(1.0);
        let a = line.asymptotes(column);
        let w = line.doppler_equivalent_width(column);
        // (2bλ/c)√ln τ₀ misses γ/√L: 3.4 % at τ₀ = 10⁸
        assert!(rel(a.flat, w) <= 0.04);
        assert!(line.asymptotes(1.0).flat.is_nan());
    }

    #[test]
    fn wing_coefficient_agrees_with_the_voigt_scale() {
        // A = τ₀ a Δλ_D²/√π from the Voigt profile, τ₀ the Doppler (a = 0) centre value
        let line = test_line();
        let column = 1e20;
        let a = line.damping_parameter();
        let via_voigt =
            line.peak_optical_depth(column) * a * line.doppler_width().powi(2) / PI.sqrt();
        assert!(rel(line.wing_coefficient(column), via_voigt) <= 1e-13);
        let scale = line.line_scale(column).unwrap();
        assert!(rel(scale.wing().unwrap(), via_voigt) <= 1e-13);
        // the damped Lyman-α width at 10²⁰ cm⁻² is about 7.3 Å (from memory)
        let w = line.asymptotes(column).damping;
        assert!((w - 7.3e-8).abs() <= 0.1e-8, "{w:e}");
    }

    #[test]
    fn damping_asymptote_against_a_pure_lorentz_line() {
        // τ(Δλ) = A/(Δλ² + γ_λ²), γ_λ = λ²Γ/(4πc) the half width: W → 2√(πA) and
        // d ln W/d ln N → ½.
        let line = test_line();
        let half_width = line.wavelength.powi(2) * line.gamma / (4.0 * PI * C);
        let width_at = |column: f64| {
            let a = line.wing_coefficient(column);
            let tau0 = a / (half_width * half_width);
            let scale = LineScale::doppler(half_width, tau0)
                .unwrap()
                .with_wing(a)
                .unwrap();
            let w = integrate_line(
                |x| -(-a / (x * x + half_width * half_width)).exp_m1(),
                &scale,
                1e-6,
            );
            assert!(w.converged);
            w.value
        };
        let mut last = None;
        for &column in &[1e19, 1e20, 1e21, 1e22] {
            let w = width_at(column);
            let asym = line.asymptotes(column).damping;
            assert!(rel(w, asym) <= 0.01, "N={column:e}: {w:e} vs {asym:e}");
            if let Some((n0, w0)) = last {
                let slope = (f64::ln(w) - f64::ln(w0)) / (f64::ln(column) - f64::ln(n0));
                eprintln!(
                    "pure Lorentz N={column:e}: W/2√(πA) − 1 = {:.1e}, slope {slope:.5}",
                    w / asym - 1.0
                );
                assert!((slope - 0.5).abs() <= 0.005, "slope {slope}");
            }
            last = Some((column, w));
        }
    }
}

//! Curve of growth of one catalogue line in a given gas: equivalent width against column
//! density for pure absorption (no re-emission) through the line's Voigt profile, with the
//! analytic asymptotes of [`crate::transfer::growth`] (linear, flat, damping).

use crate::opacity::voigt::voigt_h;
use crate::transfer::growth::AbsorptionLine;
use crate::transfer::quadrature;

/// One point of a curve of growth.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct GrowthPoint {
    /// Lower-level column N, cm⁻².
    pub column: f64,
    /// log10(N f λ) with λ in cm.
    pub log_nf_lambda: f64,
    /// Line-centre optical depth τ₀ H(a, 0) (Voigt centre).
    pub tau0: f64,
    /// Equivalent width, Å.
    pub equivalent_width: f64,
    /// Linear asymptote, Å.
    pub linear: f64,
    /// Flat (Doppler) asymptote, Å (`None` where τ₀ ≤ 1).
    pub flat: Option<f64>,
    /// Damping asymptote, Å.
    pub damping: f64,
    /// Profile evaluations used.
    pub evaluations: usize,
}

/// Curve of growth of `line` at the given columns (cm⁻²).
pub fn curve_of_growth(line: &AbsorptionLine, columns: &[f64]) -> Vec<GrowthPoint> {
    let lam = line.wavelength;
    let a = line.damping_parameter();
    columns
        .iter()
        .map(|&n| {
            // τ(x) = τ₀ H(a, v), τ₀ the pure-Doppler centre depth, v = Δλ/Δλ_D (symmetric in
            // wavelength, so the damping wings fall exactly as 1/Δλ²).
            let t0 = line.peak_optical_depth(n);
            let dl = line.doppler_width();
            let tau = |x: f64| t0 * voigt_h(a, x / dl);
            let scale = line
                .line_scale(n)
                .or_else(|_| quadrature::LineScale::doppler(line.doppler_width(), 0.0))
                .expect("a positive Doppler width");
            // even depth: fold the two sides into one evaluation
            let r = quadrature::integrate_folded(|x| -2.0 * (-tau(x)).exp_m1(), &scale, 1e-6);
            let asy = line.asymptotes(n);
            GrowthPoint {
                column: n,
                log_nf_lambda: (n * line.f_value * lam).log10(),
                tau0: tau(0.0),
                equivalent_width: r.value * 1e8,
                linear: asy.linear * 1e8,
                flat: asy.flat.is_finite().then_some(asy.flat * 1e8),
                damping: asy.damping * 1e8,
                evaluations: r.evaluations,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn line(gamma: f64) -> AbsorptionLine {
        // A Na D2-like line: 589 nm, f = 0.64, b = 2 km/s.
        AbsorptionLine {
            wavelength: 589.16e-7,
            f_value: 0.64,
            doppler_b: 2e5,
            gamma,
        }
    }

    #[test]
    fn linear_part_matches_the_optically_thin_limit() {
        // physics.md §7 (Draine 2011 §9.4): W = (π e²/(m_e c²)) N f λ² for τ₀ ≪ 1; at
        // τ₀ = 1e-5 the saturation correction τ₀/(2√2) is 3.5e-6, inside the 1e-4 check.
        let l = line(1e7);
        let n = 1e-5 / l.peak_optical_depth(1.0);
        let p = curve_of_growth(&l, &[n])[0];
        assert!((p.equivalent_width / p.linear - 1.0).abs() < 1e-4, "{p:?}");
    }

    #[test]
    fn damping_part_has_slope_one_half() {
        // physics.md §7: in the damping regime W ∝ √(N f γ): log–log slope ½ to 1 %, and
        // W approaches 2√(πA).
        let l = line(1e9);
        let cols = [1e19, 1e20];
        let p = curve_of_growth(&l, &cols);
        let slope =
            (p[1].equivalent_width / p[0].equivalent_width).log10() / (cols[1] / cols[0]).log10();
        assert!((slope - 0.5).abs() < 0.005, "slope {slope}");
        assert!(
            (p[1].equivalent_width / p[1].damping - 1.0).abs() < 0.02,
            "{:?}",
            p[1]
        );
    }

    #[test]
    fn doppler_regime_follows_f_of_tau0() {
        // physics.md §7 (computed): F(10⁴) = 6.24428 for a pure Gaussian, W = Δλ_D F(τ₀).
        // With Γ = 1 s⁻¹ (a ≈ 2e-9) the Lorentz wing beyond the saturated core adds
        // 2aτ₀/(√π 3.5) ≈ 6e-6. Tolerance: half a unit in the quoted last digit, plus the
        // integrator's 1e-6 relative, plus that wing.
        let l = line(1.0);
        let p = curve_of_growth(&l, &[1e4 / l.peak_optical_depth(1.0)])[0];
        let f = p.equivalent_width / (l.doppler_width() * 1e8);
        assert!((f - 6.24428).abs() < 5e-6 + 6.3e-6 + 6e-6, "F = {f}");
    }
}

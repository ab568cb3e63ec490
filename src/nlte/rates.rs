//! Rate coefficients of the bundled-n hydrogen atom: electron-impact excitation and
//! ionisation, photo-ionisation and radiative recombination (spontaneous and stimulated).
//!
//! Electron-impact rates are the semi-empirical fits of Vriens & Smeets (1980, Phys. Rev. A 22,
//! 940, their eqs. 17 and 22 for excitation and ionisation; transcribed from memory), which
//! cover every pair of shells p < q and every temperature with one formula. Bound–free
//! cross-sections are Kramers' with the first-order Gaunt factor, the same function the
//! continuum opacity uses, so that absorption and the rates agree.

use crate::constants::{C, EV, H, K_B, RYDBERG_INF};
use crate::opacity::continuum::hydrogen_bf_cross_section;

/// Rydberg energy R∞ h c in eV (the energy scale of the Vriens–Smeets fits).
pub fn rydberg_ev() -> f64 {
    RYDBERG_INF * H * C / EV
}

/// Electron-impact excitation rate coefficient p → q (p < q), cm³ s⁻¹, at temperature `t` (K).
///
/// `e_p` and `e_q` are the binding energies of the shells (eV) and `f_pq` the absorption
/// oscillator strength. Vriens & Smeets (1980), eq. 17 (from memory):
/// K = 1.6×10⁻⁷ (kT)^{1/2}/(kT + Γ) e^{−E_pq/kT} [A ln(0.3 kT/R + Δ) + B] with
/// A = 2R f/E_pq, B = (4R²/q³)(1/E_pq² + 4E_p/(3E_pq³) + b_p E_p²/E_pq⁴),
/// b_p = 1.4 ln p/p − 0.7/p − 0.51/p² + 1.16/p³ − 0.55/p⁴, Δ = e^{−B/A} + 0.06 s²/(p q²),
/// Γ = R ln(1 + p³kT/R)(3 + 11 s²/p²)/(6 + 1.6 q s + 0.3/s² + 0.8 q^{3/2} s^{−1/2}|s − 0.6|),
/// s = q − p, energies in eV.
pub fn excitation_rate(p: u32, q: u32, e_p: f64, e_q: f64, f_pq: f64, t: f64) -> f64 {
    let r = rydberg_ev();
    let kt = t * K_B / EV;
    let (pf, qf) = (f64::from(p), f64::from(q));
    let s = qf - pf;
    let e_pq = e_p - e_q;
    let a = 2.0 * r / e_pq * f_pq;
    let bp = 1.4 * pf.ln() / pf - 0.7 / pf - 0.51 / (pf * pf) + 1.16 / (pf * pf * pf)
        - 0.55 / (pf * pf * pf * pf);
    let b = 4.0 * r * r / (qf * qf * qf)
        * (1.0 / (e_pq * e_pq)
            + 4.0 * e_p / (3.0 * e_pq * e_pq * e_pq)
            + bp * e_p * e_p / (e_pq * e_pq * e_pq * e_pq));
    let delta = (-b / a).exp() + 0.06 * s * s / (pf * qf * qf);
    let gamma = r * (1.0 + pf * pf * pf * kt / r).ln() * (3.0 + 11.0 * s * s / (pf * pf))
        / (6.0 + 1.6 * qf * s + 0.3 / (s * s) + 0.8 * qf.powf(1.5) / s.sqrt() * (s - 0.6).abs());
    let bracket = a * (0.3 * kt / r + delta).ln() + b;
    (1.6e-7 * kt.sqrt() / (kt + gamma) * (-e_pq / kt).exp() * bracket).max(0.0)
}

/// Electron-impact ionisation rate coefficient of a shell with binding energy `e_p` (eV),
/// cm³ s⁻¹. Vriens & Smeets (1980), eq. 22 (from memory):
/// K = 9.56×10⁻⁶ (kT)^{−3/2} e^{−E_p/kT}/(E_p^{2.33} + 4.38 E_p^{1.72} kT + 1.32 E_p kT²).
pub fn ionisation_rate(e_p: f64, t: f64) -> f64 {
    let kt = t * K_B / EV;
    9.56e-6 * kt.powf(-1.5) * (-e_p / kt).exp()
        / (e_p.powf(2.33) + 4.38 * e_p.powf(1.72) * kt + 1.32 * e_p * kt * kt)
}

/// Bound–free integrals of one shell: ∫ over frequency beyond the threshold of
/// 4π σ(ν)/(hν) × a weight, evaluated on one set of nodes.
///
/// The nodes are laid out in u = h(ν − ν₀)/(k T_q), with T_q the temperature whose
/// exponential dominates the integrand: Gauss–Legendre in ln(x₀ + u) up to u = 8, then
/// Gauss–Laguerre (x₀ = hν₀/kT_q).
#[derive(Debug, Clone)]
pub struct Nodes {
    /// Frequencies, Hz.
    pub nu: Vec<f64>,
    /// 4π σ(ν)/(hν) × dν quadrature weight (cm² s⁻¹... per unit of the integrand's weight
    /// function), so that ∫ 4π σ/(hν) g(ν) dν ≈ Σ weight_k g(ν_k).
    pub weight: Vec<f64>,
}

/// Gauss–Laguerre nodes beyond u = SPLIT.
const LAGUERRE_NODES: usize = 12;
/// Gauss–Legendre nodes over u ∈ [0, SPLIT].
const LEGENDRE_NODES: usize = 14;
/// Where the finite part of the integral ends, in units of k T_q.
const SPLIT: f64 = 8.0;

/// A quadrature rule: (nodes, weights).
type Rule = (Vec<f64>, Vec<f64>);

fn rules() -> &'static (Rule, Rule) {
    static RULES: std::sync::OnceLock<(Rule, Rule)> = std::sync::OnceLock::new();
    RULES.get_or_init(|| {
        (
            crate::opacity::stark::gauss_laguerre(LAGUERRE_NODES),
            crate::opacity::stark::gauss_legendre(LEGENDRE_NODES),
        )
    })
}

impl Nodes {
    /// Nodes for shell `n` with binding wavenumber `binding_cm` (cm⁻¹), scaled to `t_q` (K).
    pub fn new(n: u32, binding_cm: f64, t_q: f64) -> Nodes {
        let ((lag_x, lag_w), (leg_x, leg_w)) = rules();
        let nu0 = C * binding_cm;
        let scale = K_B * t_q / H; // Hz per unit of u
        let x0 = nu0 / scale;
        let mut nu = Vec::with_capacity(LAGUERRE_NODES + LEGENDRE_NODES);
        let mut dnu = Vec::with_capacity(LAGUERRE_NODES + LEGENDRE_NODES);
        // u ∈ [0, U]: Gauss–Legendre in s = ln(x₀ + u), du = (x₀ + u) ds (the integrand
        // behaves like 1/(x₀ + u)² near a threshold far below k T_q); beyond U Gauss–Laguerre,
        // ∫_U^∞ f(u) du ≈ Σ w_k e^{t_k} f(U + t_k), where the remaining rational factor is
        // smooth because its pole at u = −x₀ lies at least U away.
        let (s0, s1) = (x0.ln(), (x0 + SPLIT).ln());
        let half = 0.5 * (s1 - s0);
        for (&xi, &wi) in leg_x.iter().zip(leg_w) {
            let s = s0 + half * (xi + 1.0);
            let u = s.exp() - x0;
            nu.push(nu0 + scale * u);
            dnu.push(scale * half * wi * (x0 + u));
        }
        for (&ti, &wi) in lag_x.iter().zip(lag_w) {
            nu.push(nu0 + scale * (SPLIT + ti));
            dnu.push(scale * wi * ti.exp());
        }
        let weight = nu
            .iter()
            .zip(&dnu)
            .map(|(&f, &d)| {
                let sigma = hydrogen_bf_cross_section(n, binding_cm, C / f);
                4.0 * std::f64::consts::PI * sigma / (H * f) * d
            })
            .collect();
        Nodes { nu, weight }
    }

    /// Σ weight_k g(ν_k).
    pub fn integrate(&self, g: impl Fn(f64) -> f64) -> f64 {
        self.nu
            .iter()
            .zip(&self.weight)
            .map(|(&f, &w)| w * g(f))
            .sum()
    }
}

/// 2hν³/c², erg cm⁻² (per Hz per sr).
pub fn two_h_nu3_over_c2(nu: f64) -> f64 {
    2.0 * H * nu * nu * nu / (C * C)
}

/// Photon occupation number of a diluted Planck field, W/(e^{hν/kT_R} − 1) (0 when W = 0).
pub fn occupation(nu: f64, dilution: f64, t_rad: f64) -> f64 {
    if dilution == 0.0 {
        return 0.0;
    }
    dilution / (H * nu / (K_B * t_rad)).exp_m1()
}

/// Radiative bound–free rates of shell `n` at electron temperature `t` in a field of
/// dilution `w` and temperature `t_rad`: (photo-ionisation per atom, spontaneous
/// recombination per LTE population, stimulated recombination per LTE population), s⁻¹.
///
/// The recombination rates are per LTE population n*: the rate into the shell per unit
/// volume is n* × rate (the Milne relation), so that with w = 1 and t_rad = t the
/// photo-ionisation rate equals the sum of the two recombination rates node by node.
pub fn bound_free(n: u32, binding_cm: f64, t: f64, w: f64, t_rad: f64) -> (f64, f64, f64) {
    let boltz = |nu: f64| (-H * nu / (K_B * t)).exp();
    let spont = Nodes::new(n, binding_cm, t).integrate(|nu| two_h_nu3_over_c2(nu) * boltz(nu));
    if w == 0.0 {
        return (0.0, spont, 0.0);
    }
    let nodes = Nodes::new(n, binding_cm, t_rad);
    let mut photo = 0.0;
    let mut stim = 0.0;
    for (&nu, &wt) in nodes.nu.iter().zip(&nodes.weight) {
        let j = two_h_nu3_over_c2(nu) * occupation(nu, w, t_rad);
        photo += wt * j;
        stim += wt * j * boltz(nu);
    }
    (photo, spont, stim)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::atoms::hydrogenic::Hydrogenic;

    /// Slow twin of [`Nodes::integrate`]: composite Simpson in ln ν over 20,000 panels out to
    /// where the integrand has fallen by e^{−60}.
    fn brute(n: u32, binding_cm: f64, g: impl Fn(f64) -> f64, t_q: f64) -> f64 {
        // Start a hair above the threshold, where the cross-section is defined.
        let nu0 = C * binding_cm * (1.0 + 1e-12);
        let nu1 = nu0 + 60.0 * K_B * t_q / H;
        let (a, b) = (nu0.ln(), nu1.ln());
        let m = 20_000;
        let h = (b - a) / m as f64;
        let f = |s: f64| {
            let nu = s.exp();
            let sigma = hydrogen_bf_cross_section(n, binding_cm, C / nu);
            4.0 * std::f64::consts::PI * sigma / (H * nu) * g(nu) * nu
        };
        let mut sum = f(a) + f(b);
        for k in 1..m {
            let s = a + h * k as f64;
            sum += if k % 2 == 1 { 4.0 } else { 2.0 } * f(s);
        }
        sum * h / 3.0
    }

    #[test]
    fn bound_free_quadrature_matches_brute_force() {
        let hyd = Hydrogenic::HYDROGEN;
        for &n in &[1u32, 2, 5, 12, 30] {
            let bind = hyd.binding_wavenumber(n);
            for &t in &[3.0e3, 1.0e4, 5.0e4, 3.0e5] {
                let (_, spont, _) = bound_free(n, bind, t, 0.0, t);
                let reference = brute(
                    n,
                    bind,
                    |nu| two_h_nu3_over_c2(nu) * (-H * nu / (K_B * t)).exp(),
                    t,
                );
                let rel = (spont / reference - 1.0).abs();
                assert!(rel < 1e-6, "n={n} T={t}: {spont} vs {reference} ({rel:e})");
                let (photo, _, _) = bound_free(n, bind, 1.0e4, 1.0, t);
                let reference = brute(
                    n,
                    bind,
                    |nu| two_h_nu3_over_c2(nu) * occupation(nu, 1.0, t),
                    t,
                );
                let rel = (photo / reference - 1.0).abs();
                assert!(
                    rel < 1e-6,
                    "photo n={n} T_R={t}: {photo} vs {reference} ({rel:e})"
                );
            }
        }
    }

    #[test]
    fn thermal_field_balances_node_by_node() {
        // Milne relation: photo-ionisation in a Planck field = spontaneous + stimulated
        // recombination at the same temperature (detailed balance, exact).
        let hyd = Hydrogenic::HYDROGEN;
        for n in 1..=40 {
            for &t in &[1.0e3, 8.0e3, 1.0e5, 1.0e6] {
                let (p, s, st) = bound_free(n, hyd.binding_wavenumber(n), t, 1.0, t);
                assert!(((s + st) / p - 1.0).abs() < 1e-13, "n={n} T={t}");
            }
        }
    }

    #[test]
    fn total_recombination_coefficient_near_published_values() {
        // Case A and case B recombination coefficients of hydrogen at 10⁴ K:
        // α_A = 4.18×10⁻¹³ and α_B = 2.59×10⁻¹³ cm³ s⁻¹ (Osterbrock & Ferland 2006, Table 2.1,
        // from memory). Kramers cross-sections with the first-order Gaunt factor are good to a
        // few per cent for these sums; the sum over shells is carried to n = 400.
        let hyd = Hydrogenic::HYDROGEN;
        let t: f64 = 1.0e4;
        let saha = crate::constants::saha_constant() * t.powf(1.5);
        let mut alpha = [0.0; 2];
        for n in 1..=400u32 {
            let bind = hyd.binding_wavenumber(n);
            let (_, spont, _) = bound_free(n, bind, t, 0.0, t);
            // n*/(n_e n_p) = (g_n/2)/saha × e^{χ_n/kT}
            let g = 2.0 * f64::from(n * n);
            let phi = g / 2.0 / saha * (H * C * bind / (K_B * t)).exp();
            alpha[0] += spont * phi;
            if n >= 2 {
                alpha[1] += spont * phi;
            }
        }
        assert!(
            (alpha[0] / 4.18e-13 - 1.0).abs() < 0.03,
            "alpha_A = {:e}",
            alpha[0]
        );
        assert!(
            (alpha[1] / 2.59e-13 - 1.0).abs() < 0.03,
            "alpha_B = {:e}",
            alpha[1]
        );
        // The same sum against Seaton's (1959) fit of α_A (physics notes, from memory):
        // 5.197×10⁻¹⁴ λ^{1/2} (0.4288 + ½ ln λ + 0.469 λ^{−1/3}), λ = 157890/T.
        let l: f64 = 157_890.0 / t;
        let seaton = 5.197e-14 * l.sqrt() * (0.4288 + 0.5 * l.ln() + 0.469 * l.powf(-1.0 / 3.0));
        // Tolerance 4%: the Kramers cross-section of n = 1 with the first-order Gaunt factor is
        // 3.8% above the exact threshold value 6.30×10⁻¹⁸ cm² (Osterbrock & Ferland 2006
        // eq. 2.4, from memory), and recombination to n = 1 carries 38% of α_A.
        assert!(
            (alpha[0] / seaton - 1.0).abs() < 0.04,
            "{:e} vs {seaton:e}",
            alpha[0]
        );
    }

    #[test]
    fn collision_rates_are_positive_and_grow_towards_high_temperature() {
        let r = rydberg_ev();
        let hyd = Hydrogenic::HYDROGEN;
        // Rates of the low shells rise from 3,000 K to 30,000 K (thresholds ≥ 1.5 eV ≫ kT at
        // the low end); Rydberg shells need not, their rates fall as T^{-1/2} at high T.
        for p in 1..=3u32 {
            for q in p + 1..=20 {
                let f = hyd.oscillator_strength(p, q);
                let ep = r / f64::from(p * p);
                let eq = r / f64::from(q * q);
                let lo = excitation_rate(p, q, ep, eq, f, 3.0e3);
                let hi = excitation_rate(p, q, ep, eq, f, 3.0e4);
                assert!(lo >= 0.0 && hi > lo, "{p}->{q}: {lo:e} {hi:e}");
            }
            // Ionisation of n = 3 (1.5 eV) already peaks below 30,000 K; test n = 1, 2.
            let ep = r / f64::from(p * p);
            let (lo, hi) = (ionisation_rate(ep, 3.0e3), ionisation_rate(ep, 3.0e4));
            assert!(lo > 0.0 && hi.is_finite());
            if p <= 2 {
                assert!(hi > lo, "ionisation of {p}: {lo:e} {hi:e}");
            }
        }
    }
}

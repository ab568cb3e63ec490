//! Linear Stark effect of hydrogen(-like) lines in the quasi-static (Holtsmark) approximation.
//!
//! Physics
//! - Component pattern. In a static field F a parabolic state |n n₁ n₂ m⟩ of a one-electron
//!   ion of nuclear charge Z is shifted to first order by (3/2) n k e a₀ F/Z, k = n₁ − n₂
//!   (Bethe & Salpeter 1957, *Quantum Mechanics of One- and Two-Electron Atoms*, §63–65).
//!   A component n_l k_l m_l → n_u k_u m_u is therefore shifted by ΔE = (3/2) e a₀ F X/Z with
//!   X = n_u k_u − n_l k_l. The parabolic states are obtained here by diagonalising z inside
//!   each (n, m) block of the |n l m⟩ basis, where the only non-zero elements are
//!   ⟨n l m|z|n l−1 m⟩ = −(3/2) n (a₀/Z) √((n²−l²)(l²−m²)/((2l+1)(2l−1))) (Bethe & Salpeter
//!   1957, §63; the sign belongs to radial functions positive at the origin and
//!   Condon–Shortley spherical harmonics). The dipole moments between parabolic states then
//!   follow from the radial integrals ∫R_{n_u l′}R_{n_l l} r³ dr, done by Gauss–Laguerre
//!   quadrature (exact for the polynomial × exponential integrand), and the angular factors
//!   of the rank-1 tensor C¹ (Wigner–Eckart theorem with 3j symbols from Racah's formula;
//!   Edmonds 1957, *Angular Momentum in Quantum Mechanics*). The strength of a component is
//!   the squared dipole moment summed over both polarisations and all m (the intensity of an
//!   isotropic ensemble of field directions); components with equal |X| are merged.
//! - Holtsmark distribution of the field strength of uncorrelated point charges (Holtsmark
//!   1919, Ann. Phys. 363, 577; Chandrasekhar 1943, Rev. Mod. Phys. 15, 1):
//!   W(β) = (2β/π)∫₀^∞ x sin(βx) e^{−x^{3/2}} dx, β = F/F₀, F₀ = 2π(4/15)^{2/3} e N^{2/3}.
//!   Its small-β series and large-β asymptotic series are derived term by term from the
//!   integral; W → A β^{−5/2}, A = 15√2/(8√π) = 1.49603.
//! - Profile. Each pair ±X is a distribution of shifts Δλ = ±C F, C = (3/2) e a₀ λ²|X|/(Z h c);
//!   the pair's density in y = Δλ/(C F₀) is Q(y) = W(|y|)/2. Its Fourier transform is exactly
//!   Q̂(τ) = d/dτ[τ e^{−τ^{3/2}}] = (1 − (3/2)τ^{3/2}) e^{−τ^{3/2}} (because
//!   ∫W(β) sin(βτ)/(βτ) dβ = e^{−τ^{3/2}}, the Fourier transform of the 3-D Holtsmark
//!   density, Chandrasekhar 1943, ch. IV). This closed form is what the Doppler-convolved
//!   component profiles are built from.
//!
//! Numerics. W is interpolated (cubic) in a table of W (1+β²)^{9/4}/β² over u = β/(β+2)
//! (β ≤ 60, built at first use from the series and the Fourier integral), asymptotic series
//! beyond; error ≤ 2e-9 against direct integration. The Doppler convolution of a pair,
//! H(y; r) = (Q ∗ G_r)(y) with G_r the unit Gaussian of 1/e half width r (the Doppler width
//! in units of the component's C F₀), is one universal function of two variables. It is
//! tabulated (~40k Fourier integrals, each row of 403 values of v on one set of nodes with
//! rotated phases, a row built at its first use) in ln(b H) on a grid in (v = y/b,
//! ln r), b = √(1 + r²), for 0.8 ≤ r ≤ 1000, v ≤ 8; outside that: Gauss–Hermite quadrature
//! over Q (4–12 nodes) for r < 0.8, G_r plus the first two Holtsmark corrections for
//! r > 1000, and the double asymptotic series in y^{−3/2} and (r/y)² for the far wing.
//! Error ≤ 1e-6 against a real-space convolution. This was chosen over a per-profile table
//! because widths and density change at every depth point (a profile is built once and
//! called ~50 times), and a profile is then a sum of one look-up per distinct |X|: cost of
//! `phi` ≈ 30 ns (table) to 200 ns (Gauss–Hermite) per component.
//!
//! A Lorentzian (FWHM Γ_λ; radiative, self- and van der Waals broadening) acts on every
//! component: H(y; r, g) = Q ∗ G_r ∗ L_g with g = Γ_λ/(C F₀), whose Fourier transform is
//! Q̂(τ) e^{−r²τ²/4 − gτ/2}. Tables of (H − V)/W (V the unit Voigt function, W the
//! Holtsmark wing regularised at y = 0: the Stark part relative to its own scale, smooth
//! also as g → 0, where ln H is not) in (v = y/b, ln r, q = ln(1 + x/X0)), x = (g/2)/√(1+r²),
//! b = √(1+r²)(1 + x), rows built at first use from the same Fourier rows, tricubic
//! interpolation; for r < 0.8 Gauss–Hermite quadrature over a table of H(·; 0, g) (linear
//! values, bicubic); beyond v = 8: V exactly plus the asymptotic series of the rest,
//! Σ_{m≥1} c_m FT[τ^{3m/2} e^{−gτ/2 − r²τ²/4}], expanded in (b/y)^{1/2} with coefficients
//! computed once per component. Error ≤ 1.3e-5 of the value plus 1 % of the component's
//! peak against the Fourier integral over r ∈ [0.01, 2e5], x ∈ [1e-6, 2e4]; whole profiles
//! agree with the Fourier twin to 4e-6 and with a real-space convolution to 1e-6.
//!
//! Electron impacts ([`ElectronGas`], [`impact_hwhm`]): each component n_l k_l m_l → n_u k_u m_u
//! gets the second-order dipole impact width γ = (4π/3) N (ħ/m)² (2m/πkT)^{1/2} R² F/Z² of
//! its state pair, R² = ⟨R²⟩_u + ⟨R²⟩_l − 2⟨R⟩_u·⟨R⟩_l, ⟨R²⟩ of a parabolic state in closed
//! form (9/8) n² (n² − 1 + k² − m²) (a₀/Z)² ([`shell_r_squared`]), F = ½ + ln(ρ_max/ρ_min)
//! (½(ρ_max/ρ_min)² once ρ_max < ρ_min), ρ_min the Weisskopf radius and ρ_max the Debye
//! length, shortened to v/Δω in the wing. The off-diagonal (interference) part of the impact
//! operator is neglected: each component is broadened by its own width. Shortening ρ_max
//! along the wing takes area out of the components' Lorentz wings (the collisions slower
//! than 1/Δω no longer shift the line by Δω but by less, so their share belongs nearer the
//! core): 0.3 % for Hα and 1.1 % for Hβ at n_e = 10¹⁵ cm⁻³ and 10⁴ K, 8.5 % for Hβ and
//! 28 % for Hδ at 10¹⁷. The profile is rescaled by 1/(1 + ∫ change) so that its area stays
//! 1 (the sum rule: a line's integrated absorption is fixed by its f-value), which puts
//! that share back in proportion to the profile, mostly into the core (common practice, no
//! source; not a unified theory). The ions' quasi-static far wing, exact as it stands, is
//! scaled with it: by 1.011 for Hβ and 1.056 for Hδ at 10¹⁵ cm⁻³, 1.09 and 1.39 at 10¹⁷.
//! The change is tapered inside the line core's width (`ImpactWing::correction`); without
//! taper and rescaling the area fell short by 12 % for Hβ and 66 % for Hδ at 10¹⁷ cm⁻³ and
//! 10⁴ K.
//!
//! Not included: ion dynamics, the electrons' quasi-static far wing beyond the Weisskopf
//! frequency, Coulomb focusing of the electrons by ionic emitters (He II), quadratic Stark
//! effect, fine structure, field ionisation, Debye shielding of the ion field, the
//! reduced-mass correction of a₀.

use std::collections::BTreeMap;
use std::f64::consts::PI;
use std::sync::OnceLock;

use crate::constants::{A0, C, E_CHARGE, HBAR, HC, K_B, M_E};
use crate::opacity::voigt::voigt_h;

/// Largest lower principal quantum number for which patterns are computed.
pub const MAX_LOWER: u32 = 6;
/// Largest upper principal quantum number for which patterns are computed.
pub const MAX_UPPER: u32 = 30;

/// Coefficient A of the Holtsmark asymptote W(β) → A β^{−5/2}: A = 15√2/(8√π).
pub const HOLTSMARK_TAIL: f64 = 1.496_033_551_505_372_6;

/// Stark component pattern of a bundled hydrogen-like transition n_l → n_u.
#[derive(Debug, Clone, PartialEq)]
pub struct StarkPattern {
    /// Shifted components (X > 0, relative strength of the pair ±X together), ascending X.
    /// The shift of +X in a field F is ΔE = (3/2) e a₀ F X/Z.
    pub components: Vec<(f64, f64)>,
    /// Relative strength of the unshifted (X = 0) components. `central` + Σ weights = 1.
    pub central: f64,
    /// Electron-impact factor of each shifted component (same order as `components`): the
    /// strength-weighted mean over its state pairs u, l of ⟨R²⟩_u + ⟨R²⟩_l − 2⟨R⟩_u·⟨R⟩_l,
    /// R the dipole operator within each shell, in (a₀/Z)² (the diagonal element of the
    /// impact operator in the parabolic basis; see [`impact_hwhm`]).
    pub impact: Vec<f64>,
    /// The same factor for the unshifted components.
    pub central_impact: f64,
    /// Total line strength Σ|⟨u|r|l⟩|² over all m of both levels (spin not counted), in units
    /// of (a₀/Z)²; f = (1/3)(1/n_l² − 1/n_u²) S / n_l² for infinite nuclear mass.
    pub strength: f64,
}

impl StarkPattern {
    /// Σ_k I_k |X_k|^{3/2} over the shifted components: fixes the far-wing coefficient.
    pub fn wing_moment(&self) -> f64 {
        self.components.iter().map(|&(x, w)| w * x.powf(1.5)).sum()
    }
}

/// The cached component pattern of n_lo → n_up.
///
/// # Panics
/// Unless 1 ≤ n_lo ≤ 6 and n_lo < n_up ≤ 30.
pub fn pattern(n_lo: u32, n_up: u32) -> &'static StarkPattern {
    assert!(
        (1..=MAX_LOWER).contains(&n_lo) && n_up > n_lo && n_up <= MAX_UPPER,
        "Stark pattern needs 1 <= n_lo <= {MAX_LOWER} and n_lo < n_up <= {MAX_UPPER}, got {n_lo} -> {n_up}"
    );
    const SLOTS: usize = (MAX_LOWER * MAX_UPPER) as usize;
    static CACHE: [OnceLock<StarkPattern>; SLOTS] = [const { OnceLock::new() }; SLOTS];
    let slot = ((n_lo - 1) * MAX_UPPER + (n_up - 1)) as usize;
    CACHE[slot].get_or_init(|| compute_pattern(n_lo, n_up))
}

/// Normal field strength F₀ = 2π(4/15)^{2/3} e N^{2/3} (statvolt cm⁻¹) of singly charged
/// perturbers of number density N (cm⁻³).
pub fn normal_field(perturber_density: f64) -> f64 {
    2.0 * PI * (4.0f64 / 15.0).powf(2.0 / 3.0) * E_CHARGE * perturber_density.powf(2.0 / 3.0)
}

// ---------------------------------------------------------------------------------------
// Small linear algebra and Gauss rules
// ---------------------------------------------------------------------------------------

/// Eigen-decomposition of a real symmetric n×n matrix (row-major) by cyclic Jacobi
/// rotations. Returns eigenvalues and the eigenvectors as columns of a row-major matrix.
fn jacobi_eigen(mut a: Vec<f64>, n: usize) -> (Vec<f64>, Vec<f64>) {
    let mut v = vec![0.0; n * n];
    for i in 0..n {
        v[i * n + i] = 1.0;
    }
    for _sweep in 0..100 {
        let mut off = 0.0;
        let mut diag = 0.0;
        for i in 0..n {
            diag += a[i * n + i] * a[i * n + i];
            for j in (i + 1)..n {
                off += a[i * n + j] * a[i * n + j];
            }
        }
        if off <= 1e-34 * diag.max(f64::MIN_POSITIVE) || off == 0.0 {
            break;
        }
        for p in 0..n {
            for q in (p + 1)..n {
                let apq = a[p * n + q];
                if apq == 0.0 {
                    continue;
                }
                let theta = (a[q * n + q] - a[p * n + p]) / (2.0 * apq);
                let t = theta.signum() / (theta.abs() + (theta * theta + 1.0).sqrt());
                let t = if theta == 0.0 { 1.0 } else { t };
                let c = 1.0 / (t * t + 1.0).sqrt();
                let s = t * c;
                for k in 0..n {
                    let akp = a[k * n + p];
                    let akq = a[k * n + q];
                    a[k * n + p] = c * akp - s * akq;
                    a[k * n + q] = s * akp + c * akq;
                }
                for k in 0..n {
                    let apk = a[p * n + k];
                    let aqk = a[q * n + k];
                    a[p * n + k] = c * apk - s * aqk;
                    a[q * n + k] = s * apk + c * aqk;
                }
                for k in 0..n {
                    let vkp = v[k * n + p];
                    let vkq = v[k * n + q];
                    v[k * n + p] = c * vkp - s * vkq;
                    v[k * n + q] = s * vkp + c * vkq;
                }
            }
        }
    }
    ((0..n).map(|i| a[i * n + i]).collect(), v)
}

/// Nodes of an n-point Gauss rule from its Jacobi matrix (diagonal `d`, off-diagonal `e`)
/// by the Golub–Welsch method (Golub & Welsch 1969, Math. Comp. 23, 221), ascending;
/// weights μ₀ v₁².
fn golub_welsch(d: &[f64], e: &[f64], mu0: f64) -> (Vec<f64>, Vec<f64>) {
    let n = d.len();
    let mut a = vec![0.0; n * n];
    for i in 0..n {
        a[i * n + i] = d[i];
        if i + 1 < n {
            a[i * n + i + 1] = e[i];
            a[(i + 1) * n + i] = e[i];
        }
    }
    let (vals, vecs) = jacobi_eigen(a, n);
    let mut pairs: Vec<(f64, f64)> = (0..n).map(|j| (vals[j], mu0 * vecs[j] * vecs[j])).collect();
    pairs.sort_by(|x, y| x.0.total_cmp(&y.0));
    pairs.into_iter().unzip()
}

/// Gauss–Legendre rule on [−1, 1], nodes polished by Newton's method on P_n.
pub(crate) fn gauss_legendre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let d = vec![0.0; n];
    let e: Vec<f64> = (1..n)
        .map(|k| {
            let k = k as f64;
            k / (4.0 * k * k - 1.0).sqrt()
        })
        .collect();
    let (mut x, mut w) = golub_welsch(&d, &e, 2.0);
    for i in 0..n {
        let mut xi = x[i];
        let mut dp = 1.0;
        for _ in 0..3 {
            let (p, dpi) = legendre_with_derivative(n, xi);
            dp = dpi;
            xi -= p / dpi;
        }
        x[i] = xi;
        w[i] = 2.0 / ((1.0 - xi * xi) * dp * dp);
    }
    (x, w)
}

fn legendre_with_derivative(n: usize, x: f64) -> (f64, f64) {
    let (mut p0, mut p1) = (1.0, x);
    for k in 1..n {
        let k = k as f64;
        let p2 = ((2.0 * k + 1.0) * x * p1 - k * p0) / (k + 1.0);
        p0 = p1;
        p1 = p2;
    }
    let nf = n as f64;
    (p1, nf * (x * p1 - p0) / (x * x - 1.0))
}

/// Gauss–Laguerre rule (weight e^{−t} on [0, ∞)), nodes polished by Newton's method and
/// weights from w_i = t_i/((n+1)² L_{n+1}(t_i)²) so that the tiny outer weights keep their
/// relative accuracy.
pub(crate) fn gauss_laguerre(n: usize) -> (Vec<f64>, Vec<f64>) {
    let d: Vec<f64> = (0..n).map(|k| 2.0 * k as f64 + 1.0).collect();
    let e: Vec<f64> = (1..n).map(|k| k as f64).collect();
    let (mut x, mut w) = golub_welsch(&d, &e, 1.0);
    for i in 0..n {
        let mut t = x[i];
        for _ in 0..4 {
            // L_n and L_{n-1} by recurrence; L_n' = n (L_n − L_{n−1})/t.
            let (ln, lnm1) = laguerre_pair(n, t);
            let dl = n as f64 * (ln - lnm1) / t;
            t -= ln / dl;
        }
        x[i] = t;
        let (ln1, _) = laguerre_pair(n + 1, t);
        let n1 = (n + 1) as f64;
        w[i] = t / (n1 * n1 * ln1 * ln1);
    }
    (x, w)
}

/// (L_k(t), L_{k−1}(t)) of the ordinary Laguerre polynomials.
fn laguerre_pair(k: usize, t: f64) -> (f64, f64) {
    let (mut l0, mut l1) = (1.0, 1.0 - t);
    if k == 0 {
        return (1.0, 0.0);
    }
    for j in 1..k {
        let j = j as f64;
        let l2 = ((2.0 * j + 1.0 - t) * l1 - j * l0) / (j + 1.0);
        l0 = l1;
        l1 = l2;
    }
    (l1, l0)
}

/// Gauss–Hermite rule (weight e^{−x²} on ℝ).
fn gauss_hermite(n: usize) -> (Vec<f64>, Vec<f64>) {
    let d = vec![0.0; n];
    let e: Vec<f64> = (1..n).map(|k| (k as f64 / 2.0).sqrt()).collect();
    golub_welsch(&d, &e, PI.sqrt())
}

// ---------------------------------------------------------------------------------------
// Hydrogen radial functions, angular factors, parabolic states
// ---------------------------------------------------------------------------------------

/// Generalised Laguerre polynomial L_k^{(α)}(x) by its three-term recurrence.
fn gen_laguerre(k: u32, alpha: f64, x: f64) -> f64 {
    if k == 0 {
        return 1.0;
    }
    let (mut l0, mut l1) = (1.0, 1.0 + alpha - x);
    for j in 1..k {
        let j = f64::from(j);
        let l2 = ((2.0 * j + 1.0 + alpha - x) * l1 - (j + alpha) * l0) / (j + 1.0);
        l0 = l1;
        l1 = l2;
    }
    l1
}

/// Radial function R_nl(r) for Z = 1, r in a₀: N (2r/n)^l e^{−r/n} L_{n−l−1}^{(2l+1)}(2r/n)
/// with N² = (2/n)³ (n−l−1)!/(2n (n+l)!), positive at the origin, without the factor
/// e^{−r/n} (the Gauss–Laguerre weight carries it).
fn radial_no_exp(n: u32, l: u32, r: f64) -> f64 {
    let nf = f64::from(n);
    // (n−l−1)!/(n+l)! = 1/∏_{j=n−l}^{n+l} j
    let mut ratio = 1.0;
    for j in (n - l)..=(n + l) {
        ratio /= f64::from(j);
    }
    let norm = ((2.0 / nf).powi(3) * ratio / (2.0 * nf)).sqrt();
    let rho = 2.0 * r / nf;
    norm * rho.powi(l as i32) * gen_laguerre(n - l - 1, f64::from(2 * l + 1), rho)
}

fn laguerre_rule() -> &'static (Vec<f64>, Vec<f64>) {
    static RULE: OnceLock<(Vec<f64>, Vec<f64>)> = OnceLock::new();
    // 40 nodes integrate polynomials of degree ≤ 79 exactly; the integrand has degree
    // n + n′ + 1 ≤ 61 for every pair of shells up to n = 30.
    RULE.get_or_init(|| gauss_laguerre(40))
}

/// Radial dipole integral ∫₀^∞ R_{n1 l1}(r) R_{n2 l2}(r) r³ dr for Z = 1, in a₀.
fn radial_integral(n1: u32, l1: u32, n2: u32, l2: u32) -> f64 {
    let (t, w) = laguerre_rule();
    let alpha = 1.0 / f64::from(n1) + 1.0 / f64::from(n2);
    let mut s = 0.0;
    for (&ti, &wi) in t.iter().zip(w) {
        let r = ti / alpha;
        s += wi * radial_no_exp(n1, l1, r) * radial_no_exp(n2, l2, r) * r * r * r;
    }
    s / alpha
}

fn factorial(n: i64) -> f64 {
    (1..=n).map(|k| k as f64).product()
}

/// Wigner 3j symbol (j1 j2 j3; m1 m2 m3) for integer arguments, Racah's formula.
fn three_j(j1: i64, j2: i64, j3: i64, m1: i64, m2: i64, m3: i64) -> f64 {
    if m1 + m2 + m3 != 0
        || j3 < (j1 - j2).abs()
        || j3 > j1 + j2
        || m1.abs() > j1
        || m2.abs() > j2
        || m3.abs() > j3
    {
        return 0.0;
    }
    let delta = factorial(j1 + j2 - j3) * factorial(j1 - j2 + j3) * factorial(-j1 + j2 + j3)
        / factorial(j1 + j2 + j3 + 1);
    let pre = (delta
        * factorial(j1 + m1)
        * factorial(j1 - m1)
        * factorial(j2 + m2)
        * factorial(j2 - m2)
        * factorial(j3 + m3)
        * factorial(j3 - m3))
    .sqrt();
    let kmin = 0.max(j2 - j3 - m1).max(j1 - j3 + m2);
    let kmax = (j1 + j2 - j3).min(j1 - m1).min(j2 + m2);
    let mut sum = 0.0;
    for k in kmin..=kmax {
        let den = factorial(k)
            * factorial(j3 - j2 + k + m1)
            * factorial(j3 - j1 + k - m2)
            * factorial(j1 + j2 - j3 - k)
            * factorial(j1 - k - m1)
            * factorial(j2 - k + m2);
        let sign = if k % 2 == 0 { 1.0 } else { -1.0 };
        sum += sign / den;
    }
    let phase = if (j1 - j2 - m3).rem_euclid(2) == 0 {
        1.0
    } else {
        -1.0
    };
    phase * pre * sum
}

/// ⟨l′ m′|C¹_q|l m⟩ with q = m′ − m (C¹ the rank-1 Racah tensor, z = r C¹₀), by the
/// Wigner–Eckart theorem: (−1)^{m′} √((2l′+1)(2l+1)) (l′ 1 l; 0 0 0)(l′ 1 l; −m′ q m).
fn angular(lp: i64, mp: i64, l: i64, m: i64) -> f64 {
    let q = mp - m;
    if q.abs() > 1 {
        return 0.0;
    }
    let phase = if mp.rem_euclid(2) == 0 { 1.0 } else { -1.0 };
    phase
        * (((2 * lp + 1) * (2 * l + 1)) as f64).sqrt()
        * three_j(lp, 1, l, 0, 0, 0)
        * three_j(lp, 1, l, -mp, q, m)
}

/// Matrix element ⟨n l m|z|n l−1 m⟩ in a₀ (Z = 1), Bethe & Salpeter (1957) §63.
fn z_within_shell(n: u32, l: u32, m: u32) -> f64 {
    let (n, l, m) = (f64::from(n), f64::from(l), f64::from(m));
    -1.5 * n * ((n * n - l * l) * (l * l - m * m) / ((2.0 * l + 1.0) * (2.0 * l - 1.0))).sqrt()
}

/// A parabolic state: k = n₁ − n₂ and its coefficients over l = |m| … n−1.
struct Parabolic {
    k: i64,
    coeffs: Vec<f64>,
    /// Eigenvalue of z in units of (3/2) n a₀ (should equal k).
    #[cfg_attr(not(test), allow(dead_code))]
    k_exact: f64,
}

/// Parabolic states of shell n with magnetic number |m| (z diagonalised in the l basis).
fn parabolic_states(n: u32, m: u32) -> Vec<Parabolic> {
    let dim = (n - m) as usize;
    let mut a = vec![0.0; dim * dim];
    for i in 1..dim {
        let l = m + i as u32;
        let zij = z_within_shell(n, l, m);
        a[i * dim + i - 1] = zij;
        a[(i - 1) * dim + i] = zij;
    }
    let (vals, vecs) = jacobi_eigen(a, dim);
    (0..dim)
        .map(|j| {
            let k_exact = vals[j] / (1.5 * f64::from(n));
            Parabolic {
                k: k_exact.round() as i64,
                coeffs: (0..dim).map(|i| vecs[i * dim + j]).collect(),
                k_exact,
            }
        })
        .collect()
}

/// ⟨R²⟩ of the parabolic state |n k m⟩ with R = r restricted to its own shell, in (a₀/Z)²:
/// inside a shell r = (3/2) n A (A the Runge–Lenz vector in units where A_z = k = n₁ − n₂;
/// Bethe & Salpeter 1957, §63–67), A² + L² = n² − 1, and in the parabolic basis
/// |j m₁⟩|j m₂⟩ (j = (n−1)/2, m₁,₂ = (m ± k)/2) A = J₁ − J₂, L = J₁ + J₂ give
/// ⟨A²⟩ = 2j(j+1) − 2m₁m₂ = (n² − 1 + k² − m²)/2. So ⟨R²⟩ = (9/8) n² (n² − 1 + k² − m²),
/// whose shell average is (9/8) n²(n² − 1).
pub(crate) fn shell_r_squared(n: i64, k: i64, m: i64) -> f64 {
    (9.0 / 8.0 * (n * n * (n * n - 1 + k * k - m * m)) as f64).max(0.0)
}

/// Strengths Σ|d|² by signed X, in (a₀/Z)², each with the strength-weighted sum of the
/// electron-impact factor ⟨R²⟩_u + ⟨R²⟩_l − 2⟨R⟩_u·⟨R⟩_l of its state pairs (see
/// [`shell_r_squared`]; ⟨R⟩ = (0, 0, (3/2) n k) in a parabolic state), in (a₀/Z)⁴.
fn signed_strengths(n_lo: u32, n_up: u32) -> BTreeMap<i64, (f64, f64)> {
    let (nl, nu) = (n_lo as i64, n_up as i64);
    // Radial integrals R[l′][l] between the shells (only |l′ − l| = 1 is needed).
    let mut rad = vec![vec![0.0; n_lo as usize]; n_up as usize];
    for lp in 0..n_up {
        for l in 0..n_lo {
            if lp.abs_diff(l) == 1 {
                rad[lp as usize][l as usize] = radial_integral(n_up, lp, n_lo, l);
            }
        }
    }
    let upper: Vec<Vec<Parabolic>> = (0..n_up).map(|m| parabolic_states(n_up, m)).collect();
    let lower: Vec<Vec<Parabolic>> = (0..n_lo).map(|m| parabolic_states(n_lo, m)).collect();
    let mut by_x: BTreeMap<i64, (f64, f64)> = BTreeMap::new();
    for mu in -(nu - 1)..=(nu - 1) {
        for ml in (mu - 1)..=(mu + 1) {
            if ml.abs() > nl - 1 {
                continue;
            }
            // Transition matrix in the l bases: M[l′][l] = R · ⟨l′ m_u|C¹_q|l m_l⟩.
            let (amu, aml) = (mu.unsigned_abs() as usize, ml.unsigned_abs() as usize);
            let du = n_up as usize - amu;
            let dl = n_lo as usize - aml;
            let mut mat = vec![0.0; du * dl];
            for i in 0..du {
                let lp = (amu + i) as i64;
                for j in 0..dl {
                    let l = (aml + j) as i64;
                    if (lp - l).abs() == 1 {
                        mat[i * dl + j] = rad[lp as usize][l as usize] * angular(lp, mu, l, ml);
                    }
                }
            }
            for su in &upper[amu] {
                for sl in &lower[aml] {
                    let mut amp = 0.0;
                    for i in 0..du {
                        let mut row = 0.0;
                        for j in 0..dl {
                            row += mat[i * dl + j] * sl.coeffs[j];
                        }
                        amp += su.coeffs[i] * row;
                    }
                    let x = nu * su.k - nl * sl.k;
                    let impact = shell_r_squared(nu, su.k, mu) + shell_r_squared(nl, sl.k, ml)
                        - 4.5 * (nu * su.k * nl * sl.k) as f64;
                    let e = by_x.entry(x).or_insert((0.0, 0.0));
                    e.0 += amp * amp;
                    e.1 += amp * amp * impact;
                }
            }
        }
    }
    by_x
}

fn compute_pattern(n_lo: u32, n_up: u32) -> StarkPattern {
    let mut by_x: BTreeMap<i64, (f64, f64)> = BTreeMap::new();
    let mut total = 0.0;
    for (x, (s, si)) in signed_strengths(n_lo, n_up) {
        total += s;
        let e = by_x.entry(x.abs()).or_insert((0.0, 0.0));
        e.0 += s;
        e.1 += si;
    }
    let (c, ci) = by_x.get(&0).copied().unwrap_or((0.0, 0.0));
    let mean = |s: f64, si: f64| if s > 0.0 { si / s } else { 0.0 };
    let shifted = by_x.iter().filter(|(x, _)| **x != 0);
    StarkPattern {
        components: shifted
            .clone()
            .map(|(&x, &(s, _))| (x as f64, s / total))
            .collect(),
        impact: shifted.map(|(_, &(s, si))| mean(s, si)).collect(),
        central: c / total,
        central_impact: mean(c, ci),
        strength: total,
    }
}

// ---------------------------------------------------------------------------------------
// Holtsmark distribution
// ---------------------------------------------------------------------------------------

/// Γ(1/3), Γ(2/3) (Abramowitz & Stegun 1964, Table 6.1 constants).
const GAMMA_THIRD: f64 = 2.678_938_534_707_747_6;
const GAMMA_TWO_THIRDS: f64 = 1.354_117_939_426_400_4;

/// Γ(p/3) for a positive integer p, by Γ(x+1) = xΓ(x) from Γ(1/3), Γ(2/3), Γ(1).
fn gamma_thirds(p: u32) -> f64 {
    let (mut g, mut x) = match p % 3 {
        1 => (GAMMA_THIRD, 1.0 / 3.0),
        2 => (GAMMA_TWO_THIRDS, 2.0 / 3.0),
        _ => (1.0, 1.0),
    };
    while x + 0.5 < f64::from(p) / 3.0 {
        g *= x;
        x += 1.0;
    }
    g
}

/// Γ(p/2) for a positive integer p.
fn gamma_halves(p: u32) -> f64 {
    let (mut g, mut x) = if p % 2 == 1 {
        (PI.sqrt(), 0.5)
    } else {
        (1.0, 1.0)
    };
    while x + 0.25 < f64::from(p) / 2.0 {
        g *= x;
        x += 1.0;
    }
    g
}

const SERIES_TERMS: usize = 16;
/// Table of W up to this β, asymptotic series beyond.
const ASYMPTOTIC_MIN: f64 = 60.0;
const TAIL_J: usize = 24;
const TAIL_M: usize = 14;
/// Nodes of the W table in u = β/(β + 2).
const NW: usize = 1200;

struct HoltsmarkTables {
    /// Asymptotic coefficients a[j][m]: H(y; r) ~ Σ_{j≥1, m≥0} a[j][m] r^{2m} y^{−3j/2−2m−1}
    /// (W = 2 H(β; 0)).
    tail: Vec<[f64; TAIL_M]>,
    /// F(u) = W(β) (1+β²)^{9/4}/β² on a uniform grid in u = β/(β+2): smooth and of order
    /// one from β = 0 (F = 4/(3π)) to the tail (F → A), evaluated without transcendentals.
    f: Vec<f64>,
    hu: f64,
}

fn holtsmark_tables() -> &'static HoltsmarkTables {
    static T: OnceLock<HoltsmarkTables> = OnceLock::new();
    T.get_or_init(|| {
        // W(β) = β² Σ_k series[k] β^{2k} = (4/(3π)) Σ_k (−1)^k Γ((4k+6)/3)/(2k+1)! β^{2k+2},
        // used to build the table below β = 1.
        let mut series = [0.0; SERIES_TERMS];
        for (k, c) in series.iter_mut().enumerate() {
            let sign = if k % 2 == 0 { 1.0 } else { -1.0 };
            *c = sign * 4.0 / (3.0 * PI) * gamma_thirds(4 * k as u32 + 6)
                / factorial(2 * k as i64 + 1);
        }
        // Q̂(τ) e^{−r²τ²/4} = Σ_{j,m} c_j (−r²/4)^m/m! τ^{3j/2+2m}, c_j = (−1)^j (1 + 3j/2)/j!;
        // each non-even power τ^μ gives (1/π) Γ(μ+1) cos(π(μ+1)/2) y^{−μ−1}.
        let mut tail = vec![[0.0; TAIL_M]; TAIL_J + 1];
        for (j, row) in tail.iter_mut().enumerate().skip(1) {
            let cj =
                if j % 2 == 0 { 1.0 } else { -1.0 } * (1.0 + 1.5 * j as f64) / factorial(j as i64);
            for (m, a) in row.iter_mut().enumerate() {
                // μ + 1 = (3j + 4m + 2)/2
                let twice = 3 * j as u32 + 4 * m as u32 + 2;
                let cosv = (PI * f64::from(twice) / 4.0).cos();
                let cosv = if cosv.abs() < 1e-12 { 0.0 } else { cosv };
                let mfac = (-0.25f64).powi(m as i32) / factorial(m as i64);
                *a = cj * mfac * gamma_halves(twice) * cosv / PI;
            }
        }
        let umax = ASYMPTOTIC_MIN / (ASYMPTOTIC_MIN + 2.0);
        let hu = umax / (NW - 3) as f64;
        let f = (0..NW)
            .map(|i| {
                let u = i as f64 * hu;
                let b = 2.0 * u / (1.0 - u);
                let b2 = b * b;
                if b < 1.0 {
                    let mut s = 0.0;
                    for &c in series.iter().rev() {
                        s = s * b2 + c;
                    }
                    s * (1.0 + b2).powf(2.25)
                } else {
                    2.0 * fourier_h(b, 0.0, 0.0) * (1.0 + b2).powf(2.25) / b2
                }
            })
            .collect();
        HoltsmarkTables { tail, f, hu }
    })
}

/// Far-wing series of H(y; r) (y ≫ 1, y ≫ r), without the Gaussian core.
fn tail_series(t: &HoltsmarkTables, y: f64, r: f64) -> f64 {
    let x = (r / y) * (r / y);
    // Terms of the r-series needed: x^M below 1e-17 (x ≤ 1/64 where this is used).
    let m_used = if x < 1e-17 {
        1
    } else {
        ((-39.2 / x.ln()).ceil() as usize + 1).min(TAIL_M)
    };
    let z = y.powf(-1.5);
    let mut sum = 0.0;
    let mut zj = 1.0 / y;
    for row in t.tail.iter().skip(1) {
        zj *= z;
        let mut p = 0.0;
        for &a in row[..m_used].iter().rev() {
            p = p * x + a;
        }
        let term = zj * p;
        sum += term;
        // Rows with j ≡ 0 (mod 4) vanish for r = 0: stop only on a small non-zero term.
        if term != 0.0 && term.abs() < 1e-17 * sum.abs() {
            break;
        }
    }
    sum
}

/// 4-point Lagrange weights for nodes at −1, 0, 1, 2 and a point t ∈ [0, 1].
#[inline]
fn lagrange4(t: f64) -> [f64; 4] {
    [
        -t * (t - 1.0) * (t - 2.0) / 6.0,
        (t + 1.0) * (t - 1.0) * (t - 2.0) / 2.0,
        -(t + 1.0) * t * (t - 2.0) / 2.0,
        (t + 1.0) * t * (t - 1.0) / 6.0,
    ]
}

/// Stencil start and weights on a uniform grid x_i = x0 + i h (i = 0..len), the stencil
/// kept inside the grid.
#[inline]
fn stencil(x: f64, x0: f64, h: f64, len: usize) -> (usize, [f64; 4]) {
    let s = (x - x0) / h;
    let i = (s.floor() as i64).clamp(1, len as i64 - 3) as usize;
    (i - 1, lagrange4(s - i as f64))
}

/// Holtsmark distribution W(β) of the reduced field strength β = F/F₀ (∫₀^∞ W dβ = 1);
/// 0 for β < 0. Interpolation (cubic) in a table of W (1+β²)^{9/4}/β² over u = β/(β+2)
/// built from the small-β series and the Fourier integral, asymptotic series above β = 60.
pub fn holtsmark(beta: f64) -> f64 {
    if beta.is_nan() || beta <= 0.0 {
        return 0.0;
    }
    holtsmark_abs(beta)
}

#[inline]
fn holtsmark_abs(beta: f64) -> f64 {
    let t = holtsmark_tables();
    if beta >= ASYMPTOTIC_MIN {
        return 2.0 * tail_series(t, beta, 0.0);
    }
    let (i, w) = stencil(beta / (beta + 2.0), 0.0, t.hu, t.f.len());
    let f = w[0] * t.f[i] + w[1] * t.f[i + 1] + w[2] * t.f[i + 2] + w[3] * t.f[i + 3];
    let q = 1.0 + beta * beta;
    f * beta * beta / (q * q * q.sqrt().sqrt())
}

/// The symmetric pair density Q(y) = W(|y|)/2 (unit area over ℝ).
#[inline]
fn pair_density(y: f64) -> f64 {
    let a = y.abs();
    if a == 0.0 {
        0.0
    } else {
        0.5 * holtsmark_abs(a)
    }
}

/// 8-point Gauss–Legendre rule on [−1, 1] (the table rows' panels).
fn gl8() -> &'static (Vec<f64>, Vec<f64>) {
    static R: OnceLock<(Vec<f64>, Vec<f64>)> = OnceLock::new();
    R.get_or_init(|| gauss_legendre(8))
}

fn gl12() -> &'static (Vec<f64>, Vec<f64>) {
    static R: OnceLock<(Vec<f64>, Vec<f64>)> = OnceLock::new();
    R.get_or_init(|| gauss_legendre(12))
}

/// H(y; r, g) = (1/π) ∫₀^∞ Q̂(τ) e^{−r²τ²/4 − gτ/2} cos(yτ) dτ with τ = u², which makes the
/// integrand analytic: (2/π) ∫₀^∞ u (1 − 1.5u³) e^{−u³ − r²u⁴/4 − g u²/2} cos(y u²) du.
/// Composite 12-point Gauss–Legendre, panels resolving the phase y u². The building block of
/// the tables (and of W itself: W(β) = 2 H(β; 0, 0)).
fn fourier_h(y: f64, r: f64, g: f64) -> f64 {
    // Upper limit: exponent u³ + r²u⁴/4 + g u²/2 = 46 (e^{−46} ≈ 1e-20).
    let expo = |u: f64| u * u * u + 0.25 * r * r * u.powi(4) + 0.5 * g * u * u;
    let (mut lo, mut hi) = (0.0, 4.0);
    for _ in 0..80 {
        let mid = 0.5 * (lo + hi);
        if expo(mid) > 46.0 {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    let umax = hi;
    let panels = ((y * umax * umax / 2.0).ceil() as usize + (umax / 0.2).ceil() as usize).max(8);
    let h = umax / panels as f64;
    let (x, w) = gl12();
    let mut sum = 0.0;
    for p in 0..panels {
        let a = p as f64 * h;
        for (&xi, &wi) in x.iter().zip(w) {
            let u = a + 0.5 * h * (xi + 1.0);
            let u3 = u * u * u;
            sum += wi * u * (1.0 - 1.5 * u3) * (-expo(u)).exp() * (y * u * u).cos();
        }
    }
    2.0 / PI * sum * 0.5 * h
}

/// Outputs of a Fourier row between two directly computed phases (see [`fourier_h_row`]).
const ROW_ANCHOR: usize = 256;

/// Partial sums of a Fourier row's nodes (see [`row_sums`]).
const LANES: usize = 16;

/// H(i·dy; r, g) for i = 0 … count − 1 (see [`fourier_h`]): the same integral on one set of
/// nodes for the whole row, with panels resolving the phase of its largest y (at most ~4 rad
/// per panel, where 8 Gauss–Legendre points agree with [`fourier_h`]'s 12 to the row's own
/// rounding, ~1e-9 relative; a third fewer nodes than 12 for the tables' start-up). The factor
/// u(1 − 1.5u³)e^{−u³ − r²u⁴/4 − g u²/2} is computed once per node, and cos(i·dy·u²) by rotating
/// e^{i·dy·u²} step by step, re-anchored to a directly computed sin/cos every
/// `ROW_ANCHOR` steps so that rounding cannot accumulate (≤ 256 steps of ≈ 2ε each).
fn fourier_h_row(dy: f64, count: usize, r: f64, g: f64) -> Vec<f64> {
    let expo = |u: f64| u * u * u + 0.25 * r * r * u.powi(4) + 0.5 * g * u * u;
    let (mut lo, mut hi) = (0.0, 4.0);
    for _ in 0..80 {
        let mid = 0.5 * (lo + hi);
        if expo(mid) > 46.0 {
            hi = mid;
        } else {
            lo = mid;
        }
    }
    let umax = hi;
    let y_max = dy * count.saturating_sub(1) as f64;
    let panels =
        ((y_max * umax * umax / 2.0).ceil() as usize + (umax / 0.2).ceil() as usize).max(8);
    let h = umax / panels as f64;
    let (x, w) = gl8();
    let mut weight = Vec::with_capacity(panels * x.len());
    let mut phase = Vec::with_capacity(panels * x.len());
    for p in 0..panels {
        let a = p as f64 * h;
        for (&xi, &wi) in x.iter().zip(w) {
            let u = a + 0.5 * h * (xi + 1.0);
            let u3 = u * u * u;
            weight.push(2.0 / PI * 0.5 * h * wi * u * (1.0 - 1.5 * u3) * (-expo(u)).exp());
            phase.push(dy * u * u);
        }
    }
    // the step's sine and cosine as two arrays, so that the rotation below vectorises
    let (step_s, step_c): (Vec<f64>, Vec<f64>) = phase.iter().map(|t| t.sin_cos()).unzip();
    #[cfg(target_arch = "x86_64")]
    if std::arch::is_x86_feature_detected!("avx2") {
        // SAFETY: the processor has AVX2 (just checked).
        return unsafe { row_sums_wide(&weight, &phase, &step_s, &step_c, count) };
    }
    row_sums(&weight, &phase, &step_s, &step_c, count)
}

/// [`row_sums`] compiled for 256-bit vectors: the same operations in the same order (no
/// contraction into multiply-adds), so the same bits, about twice as many per instruction.
///
/// # Safety
/// The processor must support AVX2.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
unsafe fn row_sums_wide(
    weight: &[f64],
    phase: &[f64],
    step_s: &[f64],
    step_c: &[f64],
    count: usize,
) -> Vec<f64> {
    row_sums(weight, phase, step_s, step_c, count)
}

/// The sums of [`fourier_h_row`]: Σ_k weight_k cos(i·phase_k) for i = 0 … count − 1, with
/// e^{i·phase_k} rotated by (step_c, step_s) from one output to the next and re-anchored every
/// `ROW_ANCHOR` outputs.
#[inline(always)]
fn row_sums(
    weight: &[f64],
    phase: &[f64],
    step_s: &[f64],
    step_c: &[f64],
    count: usize,
) -> Vec<f64> {
    let mut out = Vec::with_capacity(count);
    let mut re = vec![0.0; phase.len()];
    let mut im = vec![0.0; phase.len()];
    for i in 0..count {
        if i % ROW_ANCHOR == 0 {
            for ((t, c), s) in phase.iter().zip(&mut re).zip(&mut im) {
                (*s, *c) = (i as f64 * t).sin_cos();
            }
        }
        // Σ weight·cos in sixteen partial sums (four independent chains of 4-wide vectors;
        // the order is fixed, so the result is too), each node's phase rotated on as it is
        // summed
        let mut acc = [0.0f64; LANES];
        let n_main = weight.len() / LANES * LANES;
        for ((((w, c), s), ss), cs) in weight[..n_main]
            .chunks_exact(LANES)
            .zip(re[..n_main].chunks_exact_mut(LANES))
            .zip(im[..n_main].chunks_exact_mut(LANES))
            .zip(step_s[..n_main].chunks_exact(LANES))
            .zip(step_c[..n_main].chunks_exact(LANES))
        {
            for k in 0..LANES {
                acc[k] += w[k] * c[k];
                (c[k], s[k]) = rotated(c[k], s[k], cs[k], ss[k]);
            }
        }
        let mut rest = 0.0;
        for k in n_main..weight.len() {
            rest += weight[k] * re[k];
            (re[k], im[k]) = rotated(re[k], im[k], step_c[k], step_s[k]);
        }
        // pairwise over the partial sums
        let mut width = LANES;
        while width > 1 {
            width /= 2;
            for k in 0..width {
                acc[k] += acc[k + width];
            }
        }
        out.push(acc[0] + rest);
    }
    out
}

/// (cos, sin) of the sum of two angles from those of each.
#[inline(always)]
fn rotated(c: f64, s: f64, step_c: f64, step_s: f64) -> (f64, f64) {
    (c * step_c - s * step_s, c * step_s + s * step_c)
}

/// A table row of `len` values: `value(y, H(y; r, g))` at y = i·dy for i = 0 … len − 3,
/// stored from index 2 on, and the two entries of y < 0 mirrored (H is even in y).
fn mirrored_row(dy: f64, len: usize, r: f64, g: f64, value: impl Fn(f64, f64) -> f64) -> Vec<f64> {
    let mut f = vec![0.0; len];
    for (i, h) in fourier_h_row(dy, len - 2, r, g).into_iter().enumerate() {
        f[i + 2] = value(i as f64 * dy, h);
    }
    f[0] = f[4];
    f[1] = f[3];
    f
}

/// Large-r corrections T_j(v) = (c_j/π) ∫₀^∞ σ^{3j/2} e^{−σ²/4} cos(vσ) dσ (c₁ = −5/2,
/// c₂ = 2), so that H(y; r) = G_r(y) + r^{−5/2} T₁(y/r) + r^{−4} T₂(y/r) + O(r^{−11/2}).
/// With σ = u²: (2c_j/π) ∫ u^{3j+1} e^{−u⁴/4} cos(v u²) du.
fn fourier_tj(j: i32, v: f64) -> f64 {
    let cj = if j == 1 { -2.5 } else { 2.0 };
    let umax = (4.0f64 * 46.0).powf(0.25);
    let panels = ((v * umax * umax / 2.0).ceil() as usize + 20).max(8);
    let h = umax / panels as f64;
    let (x, w) = gl12();
    let mut sum = 0.0;
    for p in 0..panels {
        let a = p as f64 * h;
        for (&xi, &wi) in x.iter().zip(w) {
            let u = a + 0.5 * h * (xi + 1.0);
            let u2 = u * u;
            sum += wi * u.powi(3 * j + 1) * (-0.25 * u2 * u2).exp() * (v * u2).cos();
        }
    }
    2.0 * cj / PI * sum * 0.5 * h
}

// ---------------------------------------------------------------------------------------
// Holtsmark ⊗ Gauss table
// ---------------------------------------------------------------------------------------

/// Doppler ratios r below which Gauss–Hermite quadrature over Q is used (the table of
/// ln H would have to resolve the dip of width ~r at y = 0).
const R_LO: f64 = 0.8;
/// Doppler ratios r above which H = G_r + r^{−5/2} T₁ + r^{−4} T₂ is used.
const R_HI: f64 = 1000.0;
/// Table extent in v = y/√(1+r²); beyond it the far-wing series.
const V_MAX: f64 = 8.0;
const NV: usize = 400;
const NP: usize = 100;
const NT1: usize = 400;

struct GaussTable {
    /// Rows j of ln(b H(b v; r)) at v_i = (i − 2) hv, p_j = p0 + (j − 1) hp, each built at
    /// its first use (a profile needs four rows per component, so a process builds only
    /// the rows of its Doppler ratios, and threads build different rows at once); two
    /// mirrored entries of v < 0 and two extra so every stencil lies inside.
    rows: Vec<OnceLock<Vec<f64>>>,
    hv: f64,
    p0: f64,
    hp: f64,
    nv: usize,
    np: usize,
    /// T₁ and T₂ of `fourier_tj` at u_i = i ht1 (r > R_HI only), built at first use.
    large_r: OnceLock<(Vec<f64>, Vec<f64>)>,
    ht1: f64,
    /// Gauss–Hermite rules of 4, 8 and 12 nodes (for r < 0.05, < 0.3, < R_LO).
    gh: [(Vec<f64>, Vec<f64>); 3],
}

fn gauss_table() -> &'static GaussTable {
    static T: OnceLock<GaussTable> = OnceLock::new();
    T.get_or_init(|| {
        let hv = V_MAX / NV as f64;
        let p_lo = R_LO.ln();
        let hp = (R_HI.ln() - p_lo) / NP as f64;
        let p0 = p_lo - hp;
        let nv = NV + 5; // v from −2hv to (NV+2)hv
        let np = NP + 4; // p from p_lo − hp to p_hi + 2hp
        GaussTable {
            rows: (0..np).map(|_| OnceLock::new()).collect(),
            hv,
            p0,
            hp,
            nv,
            np,
            large_r: OnceLock::new(),
            ht1: (V_MAX + 1.0) / NT1 as f64,
            gh: [gauss_hermite(4), gauss_hermite(8), gauss_hermite(12)],
        }
    })
}

impl GaussTable {
    /// Row j of the table, built on first use.
    fn row(&self, j: usize) -> &[f64] {
        self.rows[j].get_or_init(|| {
            let nv = self.nv;
            let r = (self.p0 + j as f64 * self.hp).exp();
            let b = (1.0 + r * r).sqrt();
            mirrored_row(b * self.hv, nv, r, 0.0, |_, h| (b * h).ln())
        })
    }

    /// (T₁, T₂) tables, built on first use.
    fn large_r(&self) -> &(Vec<f64>, Vec<f64>) {
        self.large_r.get_or_init(|| {
            let t = |j| {
                (0..=NT1 + 2)
                    .map(|i| fourier_tj(j, i as f64 * self.ht1))
                    .collect()
            };
            (t(1), t(2))
        })
    }
}

/// A component's Doppler ratio r = Δλ_D/(C F₀), with what `gauss_h` needs precomputed.
#[derive(Debug, Clone, Copy)]
struct RatioStencil {
    r: f64,
    b: f64,
    j: usize,
    wp: [f64; 4],
}

impl RatioStencil {
    fn new(r: f64) -> RatioStencil {
        let b = (1.0 + r * r).sqrt();
        if (R_LO..=R_HI).contains(&r) {
            let t = gauss_table();
            let (j, wp) = stencil(r.ln(), t.p0, t.hp, t.np);
            RatioStencil { r, b, j, wp }
        } else {
            RatioStencil {
                r,
                b,
                j: 0,
                wp: [0.0; 4],
            }
        }
    }
}

/// H(y; r) = ∫ Q(y − x) G_r(x) dx: the Doppler-convolved density of a symmetric pair of
/// Holtsmark components, in units of the component's C F₀ (unit area over y ∈ ℝ).
fn gauss_h(y: f64, s: &RatioStencil) -> f64 {
    let y = y.abs();
    let r = s.r;
    let v = y / s.b;
    if v > V_MAX {
        let core = if r > 0.0 {
            (-(y / r) * (y / r)).exp() / (r * PI.sqrt())
        } else {
            0.0
        };
        return core + tail_series(holtsmark_tables(), y, r);
    }
    let t = gauss_table();
    if r < R_LO {
        // Error ~ n! (r²/2)^n a_n (a_n the series coefficients of Q): below 1e-9 relative
        // for these choices.
        let (x, w) = &t.gh[if r < 0.05 {
            0
        } else if r < 0.3 {
            1
        } else {
            2
        }];
        let mut sum = 0.0;
        for (&xi, &wi) in x.iter().zip(w) {
            sum += wi * pair_density(y - r * xi);
        }
        return sum / PI.sqrt();
    }
    if r > R_HI {
        let u = y / r;
        let (tt1, tt2) = t.large_r();
        let (i, w) = stencil(u, 0.0, t.ht1, tt1.len());
        let t1 = w[0] * tt1[i] + w[1] * tt1[i + 1] + w[2] * tt1[i + 2] + w[3] * tt1[i + 3];
        let t2 = w[0] * tt2[i] + w[1] * tt2[i + 1] + w[2] * tt2[i + 2] + w[3] * tt2[i + 3];
        return (-u * u).exp() / (r * PI.sqrt()) + t1 * r.powf(-2.5) + t2 * r.powi(-4);
    }
    let sv = v / t.hv + 2.0;
    let i = (sv.floor() as usize).clamp(1, t.nv - 3);
    let wv = lagrange4(sv - i as f64);
    let mut f = 0.0;
    for (a, &wpa) in s.wp.iter().enumerate() {
        let row = &t.row(s.j + a)[i - 1..i + 3];
        f += wpa * (wv[0] * row[0] + wv[1] * row[1] + wv[2] * row[2] + wv[3] * row[3]);
    }
    f.exp() / s.b
}

// ---------------------------------------------------------------------------------------
// Holtsmark ⊗ Voigt: a Lorentzian on every component
// ---------------------------------------------------------------------------------------

/// Largest Doppler ratio tabulated for components with a Lorentzian. Beyond, the table's
/// last rows are used: (H − V)/W tends to a limit as r → ∞ (the Holtsmark part of the
/// core scales as r^{−5/2}, like W), reached to O(r^{−3/2}) ≈ 3e-8.
const R_HI_V: f64 = 1.0e5;
/// The Lorentz coordinate of the tables: q = ln(1 + x/X0) with x = (g/2)/b₀ the Lorentz
/// half width relative to b₀ = √(1 + r²) (b₀ = 1 for the table at r = 0), so that the
/// nodes are X0 hq apart in x for narrow Lorentzians and 10 % apart (hq = 0.1) for wide
/// ones; the width scale of a row is b = b₀ (1 + x).
const X0: f64 = 0.03;
/// Largest q tabulated: x up to 10⁴. Wider Lorentzians make the component the Voigt
/// function alone.
const Q_MAX: f64 = 12.716_901_269_291_665; // ln(1 + 1e4/X0)
const NQ: usize = 128;
/// Extent in v of the table for r < R_LO (its Gauss–Hermite nodes reach past V_MAX).
const V_MAX_S: f64 = 14.0;
/// Spacings of the Lorentz table in v and ln r, in units of the Gauss table's.
const V_SPACING_FACTOR: f64 = 2.0;
const P_SPACING_FACTOR: f64 = 1.0;
/// Terms n = 3 … NS of the far-wing series in (b/y)^{n/2}.
const NS: usize = 72;

struct VoigtTables {
    /// Rows (j, k) (index j·nq + k) of (H − V)/W (see [`wing_scale`]) at y = b v_i,
    /// v_i = (i − 2) hv, for p_j = ln r_j = p0 + j hp (r ≥ R_LO, the Gauss table's nodes
    /// continued to R_HI_V) and q_k = k hq (see [`X0`]);
    /// each built at first use.
    rows: Vec<OnceLock<Vec<f64>>>,
    /// Rows k of b H(b v; 0, g) (linear: H(0; 0, 0) = 0) for r < R_LO, b = 1 + g/2,
    /// at v_i = (i − 2) hv_small up to V_MAX_S.
    small: Vec<OnceLock<Vec<f64>>>,
    hv: f64,
    p0: f64,
    hp: f64,
    np: usize,
    hq: f64,
    nq: usize,
    nv: usize,
    nv_small: usize,
    /// v spacing of the r = 0 rows (finer: their minimum at y = 0 is not filled by a
    /// Gaussian).
    hv_small: f64,
    /// M[n] = Γ(n/2 + 1) cos(π(n + 2)/4)/π: (1/π)∫₀^∞ τ^{n/2} cos(yτ) dτ = M[n] y^{−n/2−1}.
    moments: [f64; NS + 1],
}

fn voigt_tables() -> &'static VoigtTables {
    static T: OnceLock<VoigtTables> = OnceLock::new();
    T.get_or_init(|| {
        let g = gauss_table();
        // Coarser than the Gauss table in v and in ln r: (H − V)/W varies slowly.
        let hv = V_SPACING_FACTOR * g.hv;
        let hp = P_SPACING_FACTOR * g.hp;
        let p0 = R_LO.ln() - hp;
        let np = ((R_HI_V.ln() - p0) / hp).ceil() as usize + 3;
        let nq = NQ + 3;
        let mut moments = [0.0; NS + 1];
        for (n, m) in moments.iter_mut().enumerate() {
            let c = (PI * (n as f64 + 2.0) / 4.0).cos();
            let c = if c.abs() < 1e-12 { 0.0 } else { c };
            *m = gamma_halves(n as u32 + 2) * c / PI;
        }
        VoigtTables {
            rows: (0..np * nq).map(|_| OnceLock::new()).collect(),
            small: (0..nq).map(|_| OnceLock::new()).collect(),
            hv,
            p0,
            hp,
            np,
            hq: Q_MAX / NQ as f64,
            nq,
            nv: (V_MAX / hv).round() as usize + 5,
            nv_small: (2.0 * V_MAX_S / g.hv).ceil() as usize + 5,
            hv_small: 0.5 * g.hv,
            moments,
        }
    })
}

impl VoigtTables {
    fn row(&self, j: usize, k: usize) -> &[f64] {
        self.rows[j * self.nq + k].get_or_init(|| {
            let r = (self.p0 + j as f64 * self.hp).exp();
            let b0 = (1.0 + r * r).sqrt();
            let x = X0 * (k as f64 * self.hq).exp_m1();
            let (b, g) = (b0 * (1.0 + x), 2.0 * b0 * x);
            mirrored_row(b * self.hv, self.nv, r, g, |y, h| {
                (h - unit_voigt(y, r, g)) / wing_scale(y, b)
            })
        })
    }

    fn small_row(&self, k: usize) -> &[f64] {
        self.small[k].get_or_init(|| {
            let x = X0 * (k as f64 * self.hq).exp_m1();
            let (b, g) = (1.0 + x, 2.0 * x);
            mirrored_row(b * self.hv_small, self.nv_small, 0.0, g, |_, h| b * h)
        })
    }
}

/// The unit-area Voigt function of Gaussian 1/e half width r and Lorentz FWHM g.
#[inline]
fn unit_voigt(y: f64, r: f64, g: f64) -> f64 {
    voigt_h(0.5 * g / r, y / r) / (r * PI.sqrt())
}

/// W(y) = (A/2)(b² + y²)^{−5/4}: the Holtsmark wing of a pair, regularised at y = 0. The
/// tables hold (H − V)/W, V the unit Voigt function: the Stark part of the component
/// relative to its own scale, of order one and smooth in all three variables (also as
/// g → 0, where the Lorentz floor that V and H share would make H/V or ln H jump).
#[inline]
fn wing_scale(y: f64, b: f64) -> f64 {
    let q = b * b + y * y;
    0.5 * HOLTSMARK_TAIL / (q * q.sqrt().sqrt())
}

/// How a component with a Lorentzian is evaluated inside the far wing.
#[derive(Debug, Clone, Copy)]
enum VoigtCore {
    /// r ≥ R_LO: V plus W times the tricubic interpolation of (H − V)/W (stencils in
    /// p = ln r and q).
    Table {
        j: usize,
        wp: [f64; 4],
        k: usize,
        wq: [f64; 4],
    },
    /// r < R_LO: Gauss–Hermite quadrature over the Doppler variable of H(·; 0, g),
    /// interpolated (bicubic, linear values) in the table for r = 0; `gh` picks the rule.
    Small {
        k: usize,
        wq: [f64; 4],
        b0: f64,
        gh: usize,
    },
    /// x > 10⁴ (see [`X0`]): the Voigt function alone, the Stark part being
    /// ≈ 2.5 x^{−3/2} ≤ 3e-6 of it.
    Plain,
}

/// A component's Doppler ratio r and Lorentz width g (FWHM), both in units of its C F₀,
/// with what [`voigt_component`] needs precomputed.
#[derive(Debug, Clone)]
struct VoigtStencil {
    r: f64,
    g: f64,
    /// Width scale b = √(1 + r²) + g/2; beyond y = V_MAX b the far-wing form.
    b: f64,
    core: VoigtCore,
    /// D_n of H − V ≈ (1/y) Σ_{n=3}^{n_used} D_n (b/y)^{n/2} (V the unit Voigt function).
    tail: [f64; NS + 1],
    n_used: usize,
}

impl VoigtStencil {
    fn new(r: f64, g: f64) -> VoigtStencil {
        let t = voigt_tables();
        let b0 = (1.0 + r * r).sqrt();
        let b = b0 + 0.5 * g;
        let q_small = (0.5 * g / X0).ln_1p();
        let q = (0.5 * g / (b0 * X0)).ln_1p();
        let core = if (r < R_LO && q_small > Q_MAX) || q > Q_MAX {
            VoigtCore::Plain
        } else if r < R_LO {
            let (k, wq) = stencil(q_small, 0.0, t.hq, t.nq);
            let gh = if r < 0.05 {
                0
            } else if r < 0.3 {
                1
            } else {
                2
            };
            VoigtCore::Small {
                k,
                wq,
                b0: 1.0 + 0.5 * g,
                gh,
            }
        } else {
            let (j, wp) = stencil(r.ln().min(R_HI_V.ln()), t.p0, t.hp, t.np);
            let (k, wq) = stencil(q, 0.0, t.hq, t.nq);
            VoigtCore::Table { j, wp, k, wq }
        };
        // Q̂(τ) − 1 = Σ_{m≥1} c_m τ^{3m/2}, c_m = (−1)^m (1 + 3m/2)/m!, and
        // e^{−gτ/2 − r²τ²/4} = Σ_k e_k τ^k ((k+1) e_{k+1} = −(g/2) e_k − (r²/2) e_{k−1});
        // both scaled by b so that every coefficient is of order one or less.
        let mut e = [0.0; NS / 2 + 1];
        e[0] = 1.0;
        let (c1, c2) = (0.5 * g / b, 0.5 * (r / b) * (r / b));
        for k in 0..NS / 2 {
            let prev = if k > 0 { e[k - 1] } else { 0.0 };
            e[k + 1] = -(c1 * e[k] + c2 * prev) / (k as f64 + 1.0);
        }
        let mut tail = [0.0; NS + 1];
        let bm = b.powf(-1.5);
        let mut cm = 1.0;
        let mut fact = 1.0;
        for m in 1..=NS / 3 {
            cm *= -bm;
            fact *= m as f64;
            let c = cm * (1.0 + 1.5 * m as f64) / fact;
            let mut n = 3 * m;
            let mut k = 0;
            while n <= NS {
                tail[n] += c * e[k];
                n += 2;
                k += 1;
            }
        }
        let mut n_used = 3;
        // Size of each term at the nearest point the series serves, y = V_MAX b.
        let w1 = (1.0 / V_MAX).sqrt();
        let mut wn = 1.0;
        let mut largest: f64 = 0.0;
        for (n, d) in tail.iter_mut().enumerate() {
            *d *= t.moments[n];
            let size = d.abs() * wn;
            wn *= w1;
            largest = largest.max(size);
            if size > 1e-18 * largest {
                n_used = n;
            }
        }
        VoigtStencil {
            r,
            g,
            b,
            core,
            tail,
            n_used,
        }
    }

    #[inline]
    fn voigt(&self, y: f64) -> f64 {
        unit_voigt(y, self.r, self.g)
    }

    /// H − V in the far wing, y ≥ V_MAX b.
    #[inline]
    fn far(&self, y: f64) -> f64 {
        let w = (self.b / y).sqrt();
        let mut s = 0.0;
        for &d in self.tail[3..=self.n_used].iter().rev() {
            s = s * w + d;
        }
        s * w * w * w / y
    }
}

/// H(y; r, g) = (Q ∗ G_r ∗ L_g)(y): the Doppler- and Lorentz-convolved density of a
/// symmetric pair of Holtsmark components, in units of the component's C F₀.
fn voigt_component(y: f64, s: &VoigtStencil) -> f64 {
    let y = y.abs();
    let v = y / s.b;
    if v > V_MAX {
        return s.voigt(y) + s.far(y);
    }
    let t = voigt_tables();
    match s.core {
        VoigtCore::Plain => s.voigt(y),
        VoigtCore::Table { j, wp, k, wq } => {
            let sv = v / t.hv + 2.0;
            let i = (sv.floor() as usize).clamp(1, t.nv - 3);
            let wv = lagrange4(sv - i as f64);
            let mut f = 0.0;
            for (a, &wpa) in wp.iter().enumerate() {
                let mut fa = 0.0;
                for (c, &wqc) in wq.iter().enumerate() {
                    let row = &t.row(j + a, k + c)[i - 1..i + 3];
                    fa += wqc * (wv[0] * row[0] + wv[1] * row[1] + wv[2] * row[2] + wv[3] * row[3]);
                }
                f += wpa * fa;
            }
            s.voigt(y) + f * wing_scale(y, s.b)
        }
        VoigtCore::Small { k, wq, b0, gh } => {
            let (x, w) = &gauss_table().gh[gh];
            let rows = [
                t.small_row(k),
                t.small_row(k + 1),
                t.small_row(k + 2),
                t.small_row(k + 3),
            ];
            let mut sum = 0.0;
            for (&xi, &wi) in x.iter().zip(w) {
                let sv = (y - s.r * xi).abs() / (b0 * t.hv_small) + 2.0;
                let i = (sv.floor() as usize).clamp(1, t.nv_small - 3);
                let wv = lagrange4(sv - i as f64);
                let mut h = 0.0;
                for (row, &wqc) in rows.iter().zip(&wq) {
                    let row = &row[i - 1..i + 3];
                    h += wqc * (wv[0] * row[0] + wv[1] * row[1] + wv[2] * row[2] + wv[3] * row[3]);
                }
                sum += wi * h;
            }
            sum / (b0 * PI.sqrt())
        }
    }
}

// ---------------------------------------------------------------------------------------
// Line profile
// ---------------------------------------------------------------------------------------

#[derive(Debug, Clone)]
struct Component {
    /// C F₀ for this |X|, cm.
    scale: f64,
    /// Relative strength of the pair.
    weight: f64,
    ratio: RatioStencil,
    /// With a Lorentzian: its stencil (the Lorentz width in units of `scale`).
    voigt: Option<VoigtStencil>,
}

/// The electron gas whose collisions broaden every Stark component (impact approximation).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ElectronGas {
    /// Electron density, cm⁻³.
    pub density: f64,
    /// Electron temperature, K.
    pub temperature: f64,
}

impl ElectronGas {
    /// Thermal speed √(2kT/m) used for the impact parameters, cm s⁻¹.
    fn speed(&self) -> f64 {
        (2.0 * K_B * self.temperature / M_E).sqrt()
    }

    /// Debye length √(kT/(4π N e²)) of the electrons, cm.
    fn debye_length(&self) -> f64 {
        (K_B * self.temperature / (4.0 * PI * self.density * E_CHARGE * E_CHARGE)).sqrt()
    }

    /// (4π/3) N (ħ/m)² (2m/πkT)^{1/2}: the impact half width per unit of R² (R in a₀) and of
    /// the collision factor, rad s⁻¹.
    fn rate(&self) -> f64 {
        let hm = HBAR / M_E;
        4.0 * PI / 3.0 * self.density * hm * hm * (2.0 * M_E / (PI * K_B * self.temperature)).sqrt()
    }
}

/// Electron-impact half width (HWHM, rad s⁻¹) of a Stark component with impact factor `r2`
/// (⟨R²⟩_u + ⟨R²⟩_l − 2⟨R⟩_u·⟨R⟩_l in (a₀/Z)², [`StarkPattern::impact`]) of an ion of nuclear
/// charge `z`, at angular-frequency offset `domega` from it (0 for the line core):
/// γ = (4π/3) N (ħ/m)² (2m/πkT)^{1/2} (R²/a₀²) F, the second-order dipole impact width of
/// weak collisions, ∫2πρ dρ (2/3)(ħR/(m v ρ))², cut off at ρ_min, where that probability
/// reaches 1 (ρ_min = √(2/3) R ħ/(m v)), and at ρ_max ≈ min(λ_D, v/|Δω|) (Debye screening;
/// in the wing, collisions slower than 1/Δω act quasi-statically; joined smoothly as
/// ρ_max = λ_D/√(1 + (Δω λ_D/v)²), common practice, no source), plus strong collisions
/// πρ_min² inside ρ_min: F = ½ + ln(ρ_max/ρ_min), or ½(ρ_max/ρ_min)² when ρ_max < ρ_min
/// (strong collisions only, out to ρ_max). Classical straight paths at v = √(2kT/m), no
/// quenching between shells, no Coulomb focusing by an ionic radiator. (Weak-collision
/// impact theory, e.g. Griem 1974, *Spectral Line Broadening by Plasmas*, ch. II; the
/// constants follow from the integral above, not from a table.)
pub fn impact_hwhm(r2: f64, z: u32, gas: &ElectronGas, domega: f64) -> f64 {
    if r2 <= 0.0 || gas.density <= 0.0 {
        return 0.0;
    }
    let zz = f64::from(z);
    let v = gas.speed();
    let rho_min = (2.0f64 / 3.0).sqrt() * r2.sqrt() / zz * HBAR / (M_E * v);
    let debye = gas.debye_length();
    // min(λ_D, v/|Δω|), joined smoothly
    let rho_max = debye / (1.0 + (domega * debye / v).powi(2)).sqrt();
    let factor = if rho_max > rho_min {
        0.5 + (rho_max / rho_min).ln()
    } else {
        0.5 * (rho_max / rho_min).powi(2)
    };
    gas.rate() * r2 / (zz * zz) * factor
}

/// The electron-impact part of a profile, for the wing's frequency dependence of the
/// impact widths ([`impact_hwhm`] at Δω instead of its core value).
#[derive(Debug, Clone)]
struct ImpactWing {
    /// cm of wavelength per rad s⁻¹ at the line: λ²/(2πc).
    cm_per_omega: f64,
    /// |Δλ| (cm) of Δω = v/λ_D, so that u = Δω λ_D/v = Δλ/`onset`.
    onset: f64,
    /// Per component (the unshifted ones included) with d = λ_D/ρ_min > 1, by descending
    /// d: d² and the partial sums from the first to this one of I_k γ̂_k, I_k γ̂_k d_k² and
    /// I_k γ̂_k (½ + ln d_k), γ̂_k = rate R²/Z² (rad s⁻¹) the impact width per unit
    /// collision factor.
    parts: Vec<(f64, [f64; 3])>,
    /// Σ I_k γ̂_k d_k² over the components with d ≤ 1 (strong collisions only in the core).
    strong_core: f64,
    /// (w/`onset`)², w the half width of the line's core (largest component shift plus the
    /// Doppler and the mean Lorentz half width): inside it the change of the Lorentz wings
    /// is tapered off ([`ImpactWing::correction`]).
    taper: f64,
}

impl ImpactWing {
    fn new(
        gas: ElectronGas,
        z: u32,
        cm_per_omega: f64,
        parts: &[(f64, f64)],
        core_width: f64,
    ) -> ImpactWing {
        let zz = f64::from(z);
        let v = gas.speed();
        let debye = gas.debye_length();
        let rho_unit = (2.0f64 / 3.0).sqrt() / zz * HBAR / (M_E * v);
        let mut weak: Vec<(f64, f64)> = vec![];
        let mut strong_core = 0.0;
        for &(w, r2) in parts.iter().filter(|p| p.0 > 0.0 && p.1 > 0.0) {
            let (rate, d) = (gas.rate() * r2 / (zz * zz), debye / (rho_unit * r2.sqrt()));
            if d > 1.0 {
                weak.push((w * rate, d));
            } else {
                strong_core += w * rate * d * d;
            }
        }
        weak.sort_by(|x, y| y.1.total_cmp(&x.1));
        let mut sums = [0.0; 3];
        let parts = weak
            .iter()
            .map(|&(wr, d)| {
                sums[0] += wr;
                sums[1] += wr * d * d;
                sums[2] += wr * (0.5 + d.ln());
                (d * d, sums)
            })
            .collect();
        let onset = v / debye * cm_per_omega;
        ImpactWing {
            cm_per_omega,
            onset,
            parts,
            strong_core,
            taper: (core_width / onset).powi(2),
        }
    }

    /// Σ_k I_k (γ_k(Δω) − γ_k(0)) / (π (Δλ² + w²)), per cm, with γ in wavelength: the change
    /// of the components' electron Lorentz wings from their core width to the width at
    /// their offset. Far out this is the change of each wing, I_k Δγ_k/(π Δλ²); the w² of
    /// the line's core width (the Lorentzian's own denominator form) keeps the asymptotic
    /// form from acting inside the core, where it does not hold (our choice, no source: the
    /// area it moves depends on that width).
    fn correction(&self, dl: f64) -> f64 {
        let u2 = (dl / self.onset).powi(2);
        self.change_per_u2(u2) * self.cm_per_omega / (PI * self.onset * self.onset)
            * (u2 / (u2 + self.taper))
    }

    /// ∫ `correction` dΔλ over all Δλ: the area the falling impact widths take out of the
    /// wings (negative). Gauss–Legendre panels in ln u (u = Δλ/`onset`, 8 nodes per factor
    /// e) from 10⁻³ of the smaller of 1 and √`taper` to 10³ beyond the last component's
    /// change of branch and the core width, where every component is in its
    /// strong-collision branch and the rest is −(Σ I_k γ̂_k (½ + ln d_k) + ½ Σ_core)/u.
    fn integral(&self) -> f64 {
        let (gx, gw) = gl8();
        let d2_max = self.parts.first().map_or(1.0, |p| p.0);
        let lo = (1e-3 * self.taper.sqrt().min(1.0)).ln();
        let hi = (1e3 * (d2_max.max(self.taper).max(1.0)).sqrt()).ln();
        let panels = (hi - lo).ceil().max(1.0);
        let h = (hi - lo) / panels;
        let mut sum = 0.0;
        for i in 0..panels as usize {
            let (mid, half) = (lo + (i as f64 + 0.5) * h, 0.5 * h);
            for (&t, &w) in gx.iter().zip(gw) {
                let u = (mid + half * t).exp();
                let u2 = u * u;
                sum += w * half * self.change_per_u2(u2) * u2 * u / (u2 + self.taper);
            }
        }
        let all_log = self.parts.last().map_or(0.0, |p| p.1[2]);
        sum -= (all_log + 0.5 * self.strong_core) / hi.exp();
        2.0 * self.cm_per_omega / (PI * self.onset) * sum
    }

    /// Σ_k I_k (γ_k(Δω) − γ_k(0)) in wavelength (cm) at Δλ = `dl`.
    fn change(&self, dl: f64) -> f64 {
        let u2 = (dl / self.onset).powi(2);
        self.change_per_u2(u2) * u2 * self.cm_per_omega
    }

    /// Σ_k I_k (γ_k(u) − γ_k(0))/u² (rad s⁻¹), in closed form per branch of the collision
    /// factor F (ρ_max = λ_D/√(1 + u²), d = λ_D/ρ_min): d ≤ 1, strong collisions only,
    /// ΔF = ½d²(1/(1 + u²) − 1); d² > 1 + u², both logarithmic, ΔF = −½ ln(1 + u²); else
    /// ΔF = ½d²/(1 + u²) − ½ − ln d. The components are sorted by d, so each branch is a
    /// partial sum.
    fn change_per_u2(&self, u2: f64) -> f64 {
        let per = 1.0 / (1.0 + u2);
        let mut sum = -0.5 * self.strong_core * per;
        // the components still in the logarithmic branch (d² > 1 + u²) come first
        let n_log = self.parts.partition_point(|p| p.0 > 1.0 + u2);
        let head = if n_log > 0 {
            self.parts[n_log - 1].1
        } else {
            [0.0; 3]
        };
        if n_log > 0 {
            let log_per_u2 = if u2 > 0.0 { u2.ln_1p() / u2 } else { 1.0 };
            sum -= 0.5 * log_per_u2 * head[0];
        }
        if let Some(&(_, all)) = self.parts.last() {
            if n_log < self.parts.len() && u2 > 0.0 {
                let (s2, s_ln) = (all[1] - head[1], all[2] - head[2]);
                sum += (0.5 * s2 * per - s_ln) / u2;
            }
        }
        sum
    }
}

/// Quasi-static Stark profile of one hydrogen-like line in wavelength, Doppler-convolved,
/// optionally with a Lorentzian and electron-impact widths on every component.
#[derive(Debug, Clone)]
pub struct StarkProfile {
    components: Vec<Component>,
    central: f64,
    doppler: f64,
    /// Lorentzian half width at half maximum common to all components, cm.
    #[cfg_attr(not(test), allow(dead_code))]
    lorentz_hwhm: f64,
    /// That of the unshifted components: `lorentz_hwhm` plus their electron-impact width.
    central_hwhm: f64,
    /// Σ_k I_k γ_k over all components (common and impact HWHM), cm: the Lorentz wing.
    mean_hwhm: f64,
    impact: Option<ImpactWing>,
    /// 1/(1 + ∫ the impact wings' change dΔλ): restores unit area (1 without electrons).
    norm: f64,
    /// C F₀ for |X| = 1, cm.
    unit_scale: f64,
    wing: f64,
}

impl StarkProfile {
    /// Profile of n_lo → n_up of a hydrogen-like ion of nuclear charge `z`, at rest
    /// wavelength `lambda_cm`, in a field of singly charged ions of density `ion_density`
    /// (cm⁻³), with a Gaussian of 1/e half width `doppler_cm` and an impact Lorentzian of full
    /// width at half maximum `lorentz_fwhm_cm` (0 for none).
    ///
    /// # Panics
    /// If the transition is outside [`pattern`]'s range, `z` is 0, or a width, the density
    /// or the wavelength is negative or not finite, or `doppler_cm` is not positive.
    pub fn new(
        n_lo: u32,
        n_up: u32,
        z: u32,
        lambda_cm: f64,
        ion_density: f64,
        doppler_cm: f64,
        lorentz_fwhm_cm: f64,
    ) -> StarkProfile {
        Self::with_electrons(
            n_lo,
            n_up,
            z,
            lambda_cm,
            ion_density,
            doppler_cm,
            lorentz_fwhm_cm,
            None,
        )
    }

    /// As [`StarkProfile::new`], and with `electrons` every component also gets its own
    /// electron-impact Lorentzian ([`impact_hwhm`] of its [`StarkPattern::impact`] factor) in
    /// the core; beyond the offset where v/|Δω| falls below the Debye length the impact
    /// width of each component's wing follows its offset ([`impact_hwhm`] at Δω), as a
    /// correction to the components' Lorentz wings (the profile is kept ≥ 0).
    #[allow(clippy::too_many_arguments)]
    pub fn with_electrons(
        n_lo: u32,
        n_up: u32,
        z: u32,
        lambda_cm: f64,
        ion_density: f64,
        doppler_cm: f64,
        lorentz_fwhm_cm: f64,
        electrons: Option<ElectronGas>,
    ) -> StarkProfile {
        assert!(z >= 1, "nuclear charge must be at least 1");
        assert!(
            lambda_cm > 0.0 && lambda_cm.is_finite(),
            "wavelength must be positive, got {lambda_cm}"
        );
        assert!(
            ion_density >= 0.0 && ion_density.is_finite(),
            "ion density must be non-negative, got {ion_density}"
        );
        assert!(
            doppler_cm > 0.0 && doppler_cm.is_finite(),
            "Doppler width must be positive, got {doppler_cm}"
        );
        assert!(
            lorentz_fwhm_cm >= 0.0 && lorentz_fwhm_cm.is_finite(),
            "Lorentz width must be non-negative, got {lorentz_fwhm_cm}"
        );
        let pat = pattern(n_lo, n_up);
        let unit_scale = 1.5 * E_CHARGE * A0 * lambda_cm * lambda_cm / (f64::from(z) * HC)
            * normal_field(ion_density);
        let electrons = electrons.filter(|e| e.density > 0.0 && e.temperature > 0.0);
        let cm_per_omega = lambda_cm * lambda_cm / (2.0 * PI * C);
        // electron-impact HWHM of the core (rad s⁻¹) for an impact factor
        let core = |r2: f64| electrons.map_or(0.0, |e| impact_hwhm(r2, z, &e, 0.0));
        let mut central = pat.central;
        let mut central_core = pat.central * core(pat.central_impact);
        let mut parts = vec![(pat.central, pat.central_impact, core(pat.central_impact))];
        let mut components = Vec::with_capacity(pat.components.len());
        for (&(x, w), &r2) in pat.components.iter().zip(&pat.impact) {
            let scale = unit_scale * x;
            let gamma = core(r2);
            parts.push((w, r2, gamma));
            if scale > 0.0 {
                let fwhm = lorentz_fwhm_cm + 2.0 * gamma * cm_per_omega;
                components.push(Component {
                    scale,
                    weight: w,
                    ratio: RatioStencil::new(doppler_cm / scale),
                    voigt: (fwhm > 0.0)
                        .then(|| VoigtStencil::new(doppler_cm / scale, fwhm / scale)),
                });
            } else {
                // No field: everything is unshifted (with the strength-weighted width).
                central += w;
                central_core += w * gamma;
            }
        }
        let central_hwhm = 0.5 * lorentz_fwhm_cm
            + if central > 0.0 {
                central_core / central * cm_per_omega
            } else {
                0.0
            };
        let mean_hwhm =
            0.5 * lorentz_fwhm_cm + parts.iter().map(|p| p.0 * p.2).sum::<f64>() * cm_per_omega;
        let parts: Vec<(f64, f64)> = parts.iter().map(|p| (p.0, p.1)).collect();
        let core_width = components.last().map_or(0.0, |c| c.scale) + doppler_cm + mean_hwhm;
        let impact = electrons
            .map(|gas| ImpactWing::new(gas, z, cm_per_omega, &parts, core_width))
            .filter(|e| !e.parts.is_empty() || e.strong_core > 0.0);
        let norm = impact.as_ref().map_or(1.0, |e| 1.0 / (1.0 + e.integral()));
        let wing = 0.5 * HOLTSMARK_TAIL * pat.wing_moment() * unit_scale.powf(1.5);
        StarkProfile {
            components,
            central,
            doppler: doppler_cm,
            lorentz_hwhm: 0.5 * lorentz_fwhm_cm,
            central_hwhm,
            mean_hwhm,
            impact,
            norm,
            unit_scale,
            wing,
        }
    }

    /// C F₀ for |X| = 1: the wavelength shift (cm) per unit X in the normal field.
    pub fn unit_shift(&self) -> f64 {
        self.unit_scale
    }

    /// Weight of the unshifted components (a δ-function in the static profile).
    pub fn central(&self) -> f64 {
        self.central
    }

    /// Static (field-only) density φ_S(Δλ) = Σ_k I_k Q(Δλ/s_k)/s_k of the shifted components,
    /// per cm; ∫φ_S dΔλ + `central()` = 1.
    pub fn static_density(&self, dlambda_cm: f64) -> f64 {
        self.components
            .iter()
            .map(|c| c.weight * pair_density(dlambda_cm / c.scale) / c.scale)
            .sum()
    }

    /// Doppler-convolved profile without the Lorentzian, per cm.
    fn phi_gauss(&self, dl: f64) -> f64 {
        let d = self.doppler;
        let mut sum = self.central * (-(dl / d) * (dl / d)).exp() / (d * PI.sqrt());
        for c in &self.components {
            sum += c.weight * gauss_h(dl / c.scale, &c.ratio) / c.scale;
        }
        sum
    }

    /// Line profile φ(Δλ), per cm, unit area: central·K + φ_S ∗ K with K the Gaussian (or,
    /// with a Lorentzian, the Voigt function); with electrons, plus the change of the
    /// impact wings along the wing (kept ≥ 0), all times the unit-area factor. Δλ in cm from
    /// the unperturbed line.
    pub fn phi(&self, dlambda_cm: f64) -> f64 {
        if self.mean_hwhm > 0.0 {
            let core = self.phi_voigt(dlambda_cm);
            match &self.impact {
                Some(e) => self.norm * (core + e.correction(dlambda_cm)).max(0.0),
                None => core,
            }
        } else {
            self.phi_gauss(dlambda_cm)
        }
    }

    /// The profile with the Lorentzian on every component: the central weight times the
    /// Voigt function plus one look-up per shifted component ([`voigt_component`]).
    fn phi_voigt(&self, dl: f64) -> f64 {
        let d = self.doppler;
        let mut sum = self.central * voigt_h(self.central_hwhm / d, dl / d) / (d * PI.sqrt());
        for c in &self.components {
            if let Some(v) = &c.voigt {
                sum += c.weight * voigt_component(dl / c.scale, v) / c.scale;
            }
        }
        sum
    }

    /// Lorentz convolution of `phi_gauss` by the substitution x = γ tan θ (the slow twin of
    /// `phi_voigt`, kept for the tests) (the Lorentzian
    /// becomes dθ/π), Gauss–Legendre panels between the images of geometrically spaced
    /// points of both the profile's structure (around its centre) and the Lorentzian's
    /// (around Δλ). Accurate (~1e-6) but some 300 evaluations of the Gaussian profile.
    #[cfg(test)]
    fn phi_lorentz(&self, dl: f64) -> f64 {
        let g = self.lorentz_hwhm;
        let smin = self
            .components
            .first()
            .map_or(self.doppler, |c| c.scale)
            .min(self.doppler);
        let smax = self
            .components
            .last()
            .map_or(self.doppler, |c| c.scale)
            .max(self.doppler);
        let reach = 64.0 * (smax + dl.abs() + g);
        // Offsets x′ of the Lorentzian variable; the profile is evaluated at Δλ − x′.
        let mut thetas = vec![-0.5 * PI, 0.5 * PI, 0.0, (dl / g).atan()];
        let mut xi = 0.25 * smin;
        while xi < reach {
            thetas.push(((dl - xi) / g).atan());
            thetas.push(((dl + xi) / g).atan());
            xi *= 2.0;
        }
        let mut t = 0.25;
        while t * g < reach {
            thetas.push(t.atan());
            thetas.push(-t.atan());
            t *= 2.0;
        }
        thetas.sort_by(f64::total_cmp);
        let (x, w) = gl6();
        let mut sum = 0.0;
        for pair in thetas.windows(2) {
            let (a, b) = (pair[0], pair[1]);
            if b - a < 1e-13 {
                continue;
            }
            let (mid, half) = (0.5 * (a + b), 0.5 * (b - a));
            for (&xn, &wn) in x.iter().zip(w) {
                let th = mid + half * xn;
                sum += wn * half * self.phi_gauss(dl - g * th.tan());
            }
        }
        sum / PI
    }

    /// K such that φ → K |Δλ|^{−5/2} far from the line (the Holtsmark wing):
    /// K = (A/2) Σ_k I_k (C_k F₀)^{3/2}, A = 1.49603. With a Lorentzian the profile also has
    /// the wing `lorentz_wing_coefficient()/Δλ²`, which dominates eventually.
    pub fn far_wing_coefficient(&self) -> f64 {
        self.norm * self.wing
    }

    /// Whether the components carry electron-impact widths (which change along the wing).
    pub fn has_electron_impacts(&self) -> bool {
        self.impact.is_some()
    }

    /// Σ_k I_k γ_k/π (γ_k the Lorentz half width of component k, cm, electron impacts with
    /// their core width): the components' Lorentz wings φ → (Σ I_k γ_k/π) Δλ^{−2}.
    pub fn lorentz_wing_coefficient(&self) -> f64 {
        self.norm * self.mean_hwhm / PI
    }

    /// As `lorentz_wing_coefficient`, with the electron-impact widths of the offset
    /// `dlambda_cm` ([`impact_hwhm`] at Δω): the Lorentz wing's local coefficient there.
    pub fn lorentz_wing_coefficient_at(&self, dlambda_cm: f64) -> f64 {
        match &self.impact {
            Some(e) => self.norm * (self.mean_hwhm + e.change(dlambda_cm)) / PI,
            None => self.mean_hwhm / PI,
        }
    }
}

#[cfg(test)]
fn gl6() -> &'static (Vec<f64>, Vec<f64>) {
    static R: OnceLock<(Vec<f64>, Vec<f64>)> = OnceLock::new();
    R.get_or_init(|| gauss_legendre(6))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::atoms::hydrogenic::gordon_oscillator_strength;
    use crate::constants::{C, K_B, M_P};
    use num_bigint::BigInt;
    use num_rational::BigRational;
    use num_traits::{One, Signed, ToPrimitive, Zero};

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    // ---- slow reference twins ----------------------------------------------------------

    fn big_fact(n: u32) -> BigInt {
        (1..=n).fold(BigInt::one(), |acc, k| acc * BigInt::from(k))
    }

    fn big_binom(n: u32, k: u32) -> BigInt {
        big_fact(n) / (big_fact(k) * big_fact(n - k))
    }

    /// Coefficients (index = power of r) of (2r/n)^l L_{n−l−1}^{(2l+1)}(2r/n), exactly, from
    /// L_N^{(α)}(x) = Σ_i (−1)^i C(N+α, N−i) x^i/i!.
    fn exact_poly(n: u32, l: u32) -> Vec<BigRational> {
        let nn = n - l - 1;
        let alpha = 2 * l + 1;
        let mut c = vec![BigRational::zero(); (n) as usize];
        for i in 0..=nn {
            let sign = if i % 2 == 0 { 1 } else { -1 };
            let coef = BigRational::new(
                BigInt::from(sign) * big_binom(nn + alpha, nn - i) * BigInt::from(2u32).pow(l + i),
                big_fact(i) * BigInt::from(n).pow(l + i),
            );
            c[(l + i) as usize] = coef;
        }
        c
    }

    /// Exact (sign, R²) of ∫R_{n1 l1} R_{n2 l2} r³ dr in rational arithmetic.
    fn exact_radial_squared(n1: u32, l1: u32, n2: u32, l2: u32) -> (f64, f64) {
        let p1 = exact_poly(n1, l1);
        let p2 = exact_poly(n2, l2);
        let alpha = BigRational::new(BigInt::from(n1 + n2), BigInt::from(n1 * n2));
        let mut j = BigRational::zero();
        for (a, ca) in p1.iter().enumerate() {
            if ca.is_zero() {
                continue;
            }
            for (b, cb) in p2.iter().enumerate() {
                if cb.is_zero() {
                    continue;
                }
                let p = (a + b + 3) as u32;
                j += ca * cb * BigRational::from_integer(big_fact(p))
                    / num_traits::pow(alpha.clone(), (p + 1) as usize);
            }
        }
        let norm2 = |n: u32, l: u32| {
            BigRational::new(
                BigInt::from(8u32) * big_fact(n - l - 1),
                BigInt::from(n).pow(3) * BigInt::from(2 * n) * big_fact(n + l),
            )
        };
        let r2 = norm2(n1, l1) * norm2(n2, l2) * j.clone() * j.clone();
        let sign = if j.is_negative() { -1.0 } else { 1.0 };
        (sign, r2.to_f64().unwrap())
    }

    /// W(β) = (2β/π) ∫₀^∞ x sin(βx) e^{−x^{3/2}} dx directly in x (Holtsmark's form), with
    /// geometric panels towards x = 0 (the integrand has an x^{5/2} term there) and panels
    /// resolving sin(βx) further out.
    fn holtsmark_slow(beta: f64) -> f64 {
        let (gx, gw) = gauss_legendre(20);
        let xmax = 70.0f64.powf(2.0 / 3.0);
        let mut edges = vec![0.0];
        let mut a = 1e-10;
        while a < 0.25 {
            edges.push(a);
            a *= 2.0;
        }
        let h = (0.5 / beta.max(1.0)).min(0.25);
        let mut a = 0.25;
        while a < xmax {
            edges.push(a);
            a += h;
        }
        edges.push(xmax);
        let mut s = 0.0;
        for e in edges.windows(2) {
            let (m, hh) = (0.5 * (e[0] + e[1]), 0.5 * (e[1] - e[0]));
            for (&x, &w) in gx.iter().zip(&gw) {
                let x = m + hh * x;
                s += w * hh * x * (beta * x).sin() * (-x.powf(1.5)).exp();
            }
        }
        2.0 * beta / PI * s
    }

    /// H(y; r) = ∫ Q(x) G_r(y − x) dx in real space (Q from `holtsmark`, itself checked
    /// against `holtsmark_slow`), panels graded with |x| and no wider than r/3.
    fn gauss_h_slow(y: f64, r: f64) -> f64 {
        let (gx, gw) = gauss_legendre(20);
        let (lo, hi) = (y - 9.0 * r, y + 9.0 * r);
        let mut edges = vec![lo];
        let mut x = lo;
        while x < hi {
            let step = (r / 3.0).min((x.abs() / 6.0).max(0.2));
            x = (x + step).min(hi);
            edges.push(x);
        }
        let mut s = 0.0;
        for e in edges.windows(2) {
            let (m, hh) = (0.5 * (e[0] + e[1]), 0.5 * (e[1] - e[0]));
            for (&t, &w) in gx.iter().zip(&gw) {
                let x = m + hh * t;
                let u = (y - x) / r;
                s += w * hh * pair_density(x) * (-u * u).exp();
            }
        }
        s / (r * PI.sqrt())
    }

    /// ∫ f over [−l, l] on panels graded geometrically away from 0 (smallest `h0`).
    fn integrate_symmetric(f: &dyn Fn(f64) -> f64, h0: f64, l: f64) -> f64 {
        let (gx, gw) = gauss_legendre(16);
        let mut edges = vec![0.0];
        let mut x = h0;
        while x < l {
            edges.push(x);
            x = (x * 1.15).max(x + h0);
        }
        edges.push(l);
        let mut s = 0.0;
        for e in edges.windows(2) {
            let (m, hh) = (0.5 * (e[0] + e[1]), 0.5 * (e[1] - e[0]));
            for (&t, &w) in gx.iter().zip(&gw) {
                s += w * hh * (f(m + hh * t) + f(-(m + hh * t)));
            }
        }
        s
    }

    fn hydrogen_doppler(lambda: f64, t: f64) -> f64 {
        lambda * (2.0 * K_B * t / M_P).sqrt() / C
    }

    // ---- numerical building blocks -----------------------------------------------------

    #[test]
    fn gauss_rules_integrate_polynomials_exactly() {
        // ∫_{−1}^{1} x^{2k} = 2/(2k+1); ∫₀^∞ t^k e^{−t} = k!; ∫ x^{2k} e^{−x²} = Γ(k+1/2).
        let (x, w) = gauss_legendre(12);
        for k in 0..12 {
            let s: f64 = x.iter().zip(&w).map(|(x, w)| w * x.powi(2 * k)).sum();
            assert!(rel(s, 2.0 / (2 * k + 1) as f64) < 1e-14, "GL x^{}", 2 * k);
        }
        let (t, w) = laguerre_rule();
        for k in 0..=79 {
            let s: f64 = t.iter().zip(w).map(|(t, w)| w * t.powi(k)).sum();
            assert!(rel(s, factorial(k as i64)) < 1e-12, "Laguerre t^{k}: {s}");
        }
        let (x, w) = gauss_hermite(8);
        for k in 0..8 {
            let s: f64 = x.iter().zip(&w).map(|(x, w)| w * x.powi(2 * k)).sum();
            assert!(
                rel(s, gamma_halves(2 * k as u32 + 1)) < 1e-13,
                "GH x^{}",
                2 * k
            );
        }
    }

    #[test]
    fn gamma_values_by_recurrence() {
        // Γ(4/3) = Γ(1/3)/3, Γ(5/2) = 3√π/4, Γ(6/3) = 1 (exact identities).
        assert!(rel(gamma_thirds(4), GAMMA_THIRD / 3.0) < 1e-15);
        assert!(rel(gamma_thirds(6), 1.0) < 1e-15);
        assert!(rel(gamma_thirds(12), 6.0) < 1e-15);
        assert!(rel(gamma_halves(5), 0.75 * PI.sqrt()) < 1e-15);
        assert!(rel(gamma_halves(8), 6.0) < 1e-15);
        // Γ(1/3)Γ(2/3) = 2π/√3 (reflection formula).
        assert!(rel(GAMMA_THIRD * GAMMA_TWO_THIRDS, 2.0 * PI / 3.0f64.sqrt()) < 1e-15);
    }

    #[test]
    fn three_j_symbols_and_cosine_matrix_elements() {
        // Condon & Shortley 1935, *The Theory of Atomic Spectra*, ch. III (from memory):
        // ⟨l+1 m|cos θ|l m⟩ = √(((l+1)² − m²)/((2l+1)(2l+3))).
        for l in 0..12i64 {
            for m in -l..=l {
                let want = ((((l + 1) * (l + 1) - m * m) as f64)
                    / (((2 * l + 1) * (2 * l + 3)) as f64))
                    .sqrt();
                assert!((angular(l + 1, m, l, m) - want).abs() < 1e-14);
                assert!((angular(l, m, l + 1, m) - want).abs() < 1e-14);
            }
            // Σ_{m′,q} |⟨l′ m′|C¹_q|l m⟩|² = (l+1)/(2l+1) for l′ = l+1, l/(2l+1) for l′ = l−1.
            for m in -l..=l {
                let up: f64 = (m - 1..=m + 1)
                    .map(|mp| angular(l + 1, mp, l, m).powi(2))
                    .sum();
                assert!(rel(up, (l + 1) as f64 / (2 * l + 1) as f64) < 1e-13);
                if l > 0 {
                    let dn: f64 = (m - 1..=m + 1)
                        .map(|mp| angular(l - 1, mp, l, m).powi(2))
                        .sum();
                    assert!(rel(dn, l as f64 / (2 * l + 1) as f64) < 1e-13);
                }
            }
        }
    }

    // ---- pattern -----------------------------------------------------------------------

    #[test]
    fn within_shell_eigenvalues_are_three_halves_n_k() {
        // Bethe & Salpeter (1957) §63: eigenvalues (3/2) n k, k = n₁ − n₂ ∈ {−(n−|m|−1), …,
        // n−|m|−1} in steps of 2, each once.
        let mut worst: f64 = 0.0;
        for n in 1..=MAX_UPPER {
            for m in 0..n {
                let states = parabolic_states(n, m);
                let mut ks: Vec<i64> = states.iter().map(|s| s.k).collect();
                ks.sort_unstable();
                let top = i64::from(n - m - 1);
                let want: Vec<i64> = (0..=top).map(|i| -top + 2 * i).collect();
                assert_eq!(ks, want, "n = {n}, m = {m}");
                for s in &states {
                    worst = worst.max((s.k_exact - s.k as f64).abs());
                    let norm: f64 = s.coeffs.iter().map(|c| c * c).sum();
                    assert!((norm - 1.0).abs() < 1e-13);
                }
            }
        }
        eprintln!("within-shell eigenvalues: worst |λ/(1.5n) − k| = {worst:.1e}");
        assert!(worst < 1e-12, "{worst}");
    }

    #[test]
    fn within_shell_element_is_radial_times_angular() {
        // The quoted ⟨n l m|z|n l−1 m⟩ equals our numerical radial integral times our
        // angular factor: the same phase conventions are used for the inter-shell moments.
        for n in 2..=14 {
            for l in 1..n {
                let radial = radial_integral(n, l, n, l - 1);
                let closed = -1.5 * f64::from(n) * f64::from(n * n - l * l).sqrt();
                assert!(
                    rel(radial, closed) < 1e-12,
                    "n={n} l={l}: {radial} vs {closed}"
                );
                for m in 0..l {
                    let prod = radial
                        * angular(i64::from(l), i64::from(m), i64::from(l - 1), i64::from(m));
                    assert!(rel(prod, z_within_shell(n, l, m)) < 1e-12);
                }
            }
        }
    }

    #[test]
    fn radial_integrals_match_exact_rational_twin() {
        // Slow twin: the polynomial × exponential integral in exact rational arithmetic.
        let mut worst: f64 = 0.0;
        for nl in 1..=MAX_LOWER {
            for nu in (nl + 1)..=MAX_UPPER {
                for l in 0..nl {
                    for lp in [l.wrapping_sub(1), l + 1] {
                        if lp >= nu {
                            continue;
                        }
                        let fast = radial_integral(nu, lp, nl, l);
                        let (sign, r2) = exact_radial_squared(nu, lp, nl, l);
                        assert!(fast.signum() * sign > 0.0 || r2 < 1e-300);
                        worst = worst.max(rel(fast * fast, r2));
                    }
                }
            }
        }
        eprintln!("radial integrals vs exact rationals: worst relative error of R² {worst:.1e}");
        assert!(worst < 1e-11, "{worst}");
    }

    #[test]
    fn sum_rule_reproduces_the_bundled_oscillator_strength() {
        // f = (2/3) ΔE S/g (atomic units, g = n_l² without spin) must equal the closed form
        // of Gordon (1929) in `atoms::hydrogenic`.
        let f_of = |nl: u32, nu: u32| {
            let (a, b) = (f64::from(nl), f64::from(nu));
            (1.0 / (a * a) - 1.0 / (b * b)) / 3.0 * pattern(nl, nu).strength / (a * a)
        };
        let mut worst_small: f64 = 0.0;
        let mut worst_all: f64 = 0.0;
        for nl in 1..=MAX_LOWER {
            for nu in (nl + 1)..=MAX_UPPER {
                let e = rel(f_of(nl, nu), gordon_oscillator_strength(nl, nu));
                worst_all = worst_all.max(e);
                if nl <= 4 && nu <= 12 {
                    worst_small = worst_small.max(e);
                }
            }
        }
        eprintln!(
            "sum rule: worst {worst_small:.1e} (n_l <= 4, n_u <= 12), {worst_all:.1e} (n_l <= 6, n_u <= 30)"
        );
        assert!(worst_small < 1e-10, "{worst_small}");
        assert!(worst_all < 1e-9, "{worst_all}");
    }

    #[test]
    fn patterns_are_normalised_and_symmetric() {
        for nl in 1..=MAX_LOWER {
            for nu in (nl + 1)..=MAX_UPPER {
                let p = pattern(nl, nu);
                let total: f64 = p.central + p.components.iter().map(|c| c.1).sum::<f64>();
                assert!((total - 1.0).abs() < 1e-13);
                assert!(p.components.iter().all(|&(x, w)| x > 0.0 && w >= 0.0));
                assert!(p.components.windows(2).all(|w| w[0].0 < w[1].0));
            }
        }
        // ±X symmetry of the signed strengths.
        for (nl, nu) in [(1, 2), (2, 3), (2, 4), (3, 7), (4, 11), (6, 30)] {
            let signed = signed_strengths(nl, nu);
            let scale: f64 = signed.values().map(|v| v.0).sum();
            for (&x, &(s, si)) in &signed {
                let (other, other_i) = signed.get(&-x).copied().unwrap_or((0.0, 0.0));
                assert!((s - other).abs() < 1e-12 * scale, "{nl}->{nu} X={x}");
                assert!((si - other_i).abs() < 1e-9 * scale, "{nl}->{nu} X={x}");
            }
        }
    }

    #[test]
    fn lyman_alpha_pattern_from_first_principles() {
        // n = 2: k = ±1 (m = 0, (2s ± 2p₀)/√2) and k = 0 (m = ±1, 2p±1); 1s has k = 0, so X = 2k_u.
        // m = 0: π to 1s with |⟨2p₀|z|1s⟩|²/2 each → X = ±2, total |z|²; m = ±1: σ with
        // |⟨2p₀|z|1s⟩|² each (isotropy) → X = 0, total 2|z|². Hence central 2/3, ±2 carry 1/3.
        let p = pattern(1, 2);
        assert!((p.central - 2.0 / 3.0).abs() < 1e-14, "{}", p.central);
        assert_eq!(p.components.len(), 1);
        assert!((p.components[0].0 - 2.0).abs() < 1e-15);
        assert!((p.components[0].1 - 1.0 / 3.0).abs() < 1e-14);
        // |⟨2p₀|z|1s⟩|² = 2^15/3^10 (elementary integral of R₂₁R₁₀r³ times 1/3): S = 3 × that.
        assert!(rel(p.strength, 3.0 * 32768.0 / 59049.0) < 1e-13);
    }

    #[test]
    fn lines_with_even_delta_n_have_no_central_component() {
        // Derived here: a k = 0 state needs n − |m| − 1 even, and as the zero-eigenvalue
        // vector of the zero-diagonal tridiagonal z block it has only l ≡ |m| (mod 2) parts.
        // If n_u − n_l is even, k_u = k_l = 0 forces |m_u| ≡ |m_l| (mod 2), so Δm = 0 and
        // l′ − l even: no dipole. When n_u k_u = n_l k_l has no other solution with
        // |k| < n, X = 0 needs k_u = k_l = 0 and the line has no unshifted component (Lyβ,
        // Hβ; for Hβ also Griem 1974, ch. 4, from memory). Brackett β (4→6) has 6·2 = 4·3 and keeps
        // a small central part.
        for (nl, nu) in [
            (1, 3),
            (1, 5),
            (1, 29),
            (2, 4),
            (2, 6),
            (2, 8),
            (3, 5),
            (3, 7),
            (5, 7),
        ] {
            assert!(
                pattern(nl, nu).central < 1e-14,
                "{nl}->{nu}: {}",
                pattern(nl, nu).central
            );
        }
        for (nl, nu) in [(1, 2), (1, 4), (2, 3), (2, 5), (3, 4)] {
            assert!(pattern(nl, nu).central > 0.01, "{nl}->{nu}");
        }
        assert!(pattern(4, 6).central > 1e-3);
    }

    #[test]
    fn balmer_alpha_and_beta_patterns() {
        for (nl, nu) in [(2, 3), (2, 4)] {
            let p = pattern(nl, nu);
            eprintln!("pattern {nl}->{nu}: central {:.6}", p.central);
            for &(x, w) in &p.components {
                eprintln!("  X = {x:>3}: {w:.6}");
            }
        }
        // Independent twin: the same physics in exact symbolic arithmetic (sympy: hydrogen
        // radial functions integrated symbolically, its own 3j symbols, exact eigenvectors),
        // quoted to 12 decimals; some are simple fractions (Hα X = 4: 41/345; Hβ X = 2, 4, 8,
        // 12: 51/836, 4/11, 32/209, 4/627).
        let check = |nl: u32, nu: u32, central: f64, want: &[(f64, f64)]| {
            let p = pattern(nl, nu);
            assert!(
                (p.central - central).abs() < 1e-11,
                "{nl}->{nu} central {}",
                p.central
            );
            assert_eq!(p.components.len(), want.len());
            for (&(x, w), &(xw, ww)) in p.components.iter().zip(want) {
                assert!(
                    (x - xw).abs() < 1e-12 && (w - ww).abs() < 1e-11,
                    "{nl}->{nu} X={x}: {w:.12}"
                );
            }
        };
        check(
            2,
            3,
            0.388123011665,
            &[
                (1.0, 0.273736302580),
                (2.0, 0.051537645811),
                (3.0, 0.162884411453),
                (4.0, 41.0 / 345.0),
                (5.0, 0.002262283492),
                (6.0, 0.002545068929),
                (8.0, 0.000070696359),
            ],
        );
        check(
            2,
            4,
            0.0,
            &[
                (2.0, 51.0 / 836.0),
                (4.0, 4.0 / 11.0),
                (6.0, 0.266746411483),
                (8.0, 32.0 / 209.0),
                (10.0, 0.148724082935),
                (12.0, 4.0 / 627.0),
                (14.0, 0.000398724083),
            ],
        );
    }

    // ---- Holtsmark ---------------------------------------------------------------------

    #[test]
    fn holtsmark_constants() {
        assert!(rel(HOLTSMARK_TAIL, 15.0 * 2.0f64.sqrt() / (8.0 * PI.sqrt())) < 1e-15);
        // Physics reference value 1.496 (Chandrasekhar 1943).
        assert!((HOLTSMARK_TAIL - 1.496).abs() < 5e-4);
        // F₀ = 2.6031 e N^{2/3} (Chandrasekhar 1943, ch. IV, from memory).
        let f0 = normal_field(1e15) / (E_CHARGE * 1e10);
        assert!((f0 - 2.6031).abs() < 5e-5, "{f0}");
    }

    #[test]
    fn holtsmark_matches_direct_integration() {
        let mut worst: f64 = 0.0;
        let mut b = 1e-3;
        while b < 200.0 {
            let fast = holtsmark(b);
            let slow = holtsmark_slow(b);
            worst = worst.max(rel(fast, slow));
            b *= 1.037;
        }
        // Across the series/table/asymptotic seams.
        for b in [0.999, 1.0, 1.001, 59.99, 60.0, 60.01] {
            worst = worst.max(rel(holtsmark(b), holtsmark_slow(b)));
        }
        eprintln!(
            "holtsmark vs direct integral: worst relative error {worst:.1e} (0.001 <= beta <= 200)"
        );
        assert!(worst < 1e-6, "{worst}");
        // Small β: W ≈ 4β²/(3π).
        assert!(rel(holtsmark(1e-4), 4e-8 / (3.0 * PI)) < 1e-7);
        assert!(holtsmark(0.0).abs() < 1e-300 && holtsmark(-1.0).abs() < 1e-300);
    }

    #[test]
    fn holtsmark_is_normalised() {
        let b = 400.0;
        let inner = 0.5 * integrate_symmetric(&|x: f64| holtsmark(x.abs()), 1e-3, b);
        // ∫_B^∞ of the first three asymptotic terms A β^{−5/2} + a₂ β^{−4} + a₃ β^{−11/2}.
        let t = holtsmark_tables();
        let a2 = 2.0 * t.tail[2][0];
        let a3 = 2.0 * t.tail[3][0];
        let tail = HOLTSMARK_TAIL * (2.0 / 3.0) * b.powf(-1.5)
            + a2 / 3.0 * b.powi(-3)
            + a3 / 4.5 * b.powf(-4.5);
        let total = inner + tail;
        eprintln!("holtsmark normalisation: {:.3e}", total - 1.0);
        assert!((total - 1.0).abs() < 1e-8, "{total}");
    }

    #[test]
    fn holtsmark_asymptote() {
        // W → A β^{−5/2}(1 + 5.107 β^{−3/2} + 14.43 β^{−3} + …) (the expansion derived here;
        // coefficients as in Chandrasekhar 1943, ch. IV, from memory).
        let t = holtsmark_tables();
        let c2 = 2.0 * t.tail[2][0] / HOLTSMARK_TAIL;
        let c3 = 2.0 * t.tail[3][0] / HOLTSMARK_TAIL;
        assert!(
            (c2 - 5.107).abs() < 1e-3 && (c3 - 14.43).abs() < 1e-2,
            "{c2} {c3}"
        );
        let lead = |b: f64| HOLTSMARK_TAIL * b.powf(-2.5);
        let ratio50 = holtsmark_slow(50.0) / lead(50.0);
        let three = |b: f64| lead(b) * (1.0 + c2 * b.powf(-1.5) + c3 * b.powi(-3));
        eprintln!(
            "W(50)/(A 50^-2.5) = {ratio50:.6}, W(100)/(A 100^-2.5) = {:.6}",
            holtsmark_slow(100.0) / lead(100.0)
        );
        // The leading term alone is 1.46 % low at β = 50 (second term 5.107·50^{−3/2});
        // with three terms the asymptote holds to 1e-5 there.
        assert!((ratio50 - 1.0).abs() < 0.015);
        assert!(
            rel(holtsmark_slow(50.0), three(50.0)) < 1e-5,
            "{}",
            rel(holtsmark_slow(50.0), three(50.0))
        );
        assert!((holtsmark_slow(100.0) / lead(100.0) - 1.0).abs() < 0.01);
    }

    // ---- Holtsmark ⊗ Gauss -------------------------------------------------------------

    #[test]
    fn fourier_row_matches_pointwise_integral() {
        // The row evaluation (shared nodes, rotated phases) against fourier_h at each y,
        // over the table's range of r; relative to H plus the pointwise rounding level.
        // Rows use 8-point panels, the pointwise integral 12-point ones; with a Lorentz
        // width g (the Lorentz table's rows) as well.
        let mut worst: f64 = 0.0;
        for &r in &[0.8, 3.0, 40.0, 1000.0] {
            for &g in &[0.0, 0.1, 10.0] {
                let b = (1.0f64 + r * r).sqrt() * (1.0 + 0.5 * g);
                let dy = b * V_MAX / NV as f64;
                let row = fourier_h_row(dy, NV + 3, r, g);
                for (i, &h) in row.iter().enumerate() {
                    let direct = fourier_h(i as f64 * dy, r, g);
                    let err = (h - direct).abs() / (direct.abs() + 1e-15 / b);
                    worst = worst.max(err);
                    assert!(err <= 1e-8, "r={r} g={g} i={i}: {h} vs {direct}");
                }
            }
        }
        eprintln!("fourier row vs pointwise: worst {worst:.1e}");
    }

    #[test]
    #[cfg(target_arch = "x86_64")]
    fn wide_row_sums_equal_the_plain_ones_bit_for_bit() {
        // The AVX2 build of the row sums against the baseline one, on node counts that leave
        // every remainder of the sixteen partial sums and outputs past a re-anchoring.
        if !std::arch::is_x86_feature_detected!("avx2") {
            return;
        }
        for n in [1usize, 15, 16, 17, 100, 333] {
            let weight: Vec<f64> = (0..n).map(|k| (k as f64 * 0.37).sin() + 1.5).collect();
            let phase: Vec<f64> = (0..n).map(|k| 0.01 + 1e-3 * (k * k) as f64).collect();
            let (step_s, step_c): (Vec<f64>, Vec<f64>) = phase.iter().map(|t| t.sin_cos()).unzip();
            let count = ROW_ANCHOR + 40;
            let plain = row_sums(&weight, &phase, &step_s, &step_c, count);
            // SAFETY: AVX2 checked above.
            let wide = unsafe { row_sums_wide(&weight, &phase, &step_s, &step_c, count) };
            assert_eq!(plain.len(), count);
            for (i, (p, w)) in plain.iter().zip(&wide).enumerate() {
                assert_eq!(p.to_bits(), w.to_bits(), "n={n} i={i}: {p} vs {w}");
            }
            // and the sums are the sums: output i is Σ w cos(i·phase), checked at i = 7
            let direct: f64 = weight
                .iter()
                .zip(&phase)
                .map(|(w, t)| w * (7.0 * t).cos())
                .sum();
            assert!((plain[7] - direct).abs() <= 1e-12 * weight.iter().sum::<f64>());
        }
    }

    #[test]
    fn gauss_convolved_pair_matches_real_space_twin() {
        let mut worst: f64 = 0.0;
        let mut worst_at = (0.0, 0.0);
        for &r in &[
            0.0, 0.01, 0.049, 0.051, 0.1, 0.29, 0.31, 0.5, 0.77, 0.79, 0.81, 1.0, 1.9, 2.7, 5.0,
            10.0, 33.0, 100.0, 400.0, 999.0, 1001.0, 3000.0, 1e4,
        ] {
            let s = RatioStencil::new(r);
            let b = (1.0 + r * r).sqrt();
            for &v in &[
                0.0, 0.013, 0.1, 0.3, 0.55, 1.0, 1.37, 2.0, 2.5, 3.0, 3.7, 4.4, 5.0, 6.1, 7.0,
                7.99, 8.01, 9.0, 12.0, 20.0, 50.0, 300.0,
            ] {
                let y = v * b;
                let fast = gauss_h(y, &s);
                let slow = if r == 0.0 {
                    pair_density(y)
                } else {
                    gauss_h_slow(y, r)
                };
                if r == 0.0 && y == 0.0 {
                    assert!(fast.abs() < 1e-300);
                    continue;
                }
                let e = rel(fast, slow);
                if e > worst {
                    worst = e;
                    worst_at = (r, v);
                }
            }
        }
        eprintln!(
            "Holtsmark (x) Gauss vs real-space twin: worst {worst:.1e} at (r, v) = {worst_at:?}"
        );
        if std::env::var("STARK_DIAG").is_ok() {
            for &r in &[
                0.05, 0.2, 0.3, 0.5, 0.7, 0.79, 0.81, 1.0, 2.0, 5.0, 20.0, 100.0, 500.0, 990.0,
                1010.0, 3000.0,
            ] {
                let s = RatioStencil::new(r);
                let b = (1.0 + r * r).sqrt();
                let mut w: f64 = 0.0;
                let mut at = 0.0;
                let mut v = 0.0;
                while v < 8.0 {
                    let e = rel(gauss_h(v * b, &s), gauss_h_slow(v * b, r));
                    if e > w {
                        w = e;
                        at = v;
                    }
                    v += 0.0173;
                }
                eprintln!("  r = {r}: worst {w:.1e} at v = {at:.3}");
            }
        }
        assert!(worst < 2e-6, "{worst} at {worst_at:?}");
    }

    #[test]
    fn lorentz_components_match_the_fourier_integral() {
        // H(y; r, g) against the direct Fourier integral over the whole (r, g) plane the
        // profiles use: both sides of R_LO, past R_HI and R_HI_V, Lorentz half widths from
        // 1e-6 to 2e4 times b₀ = √(1 + r²), cores, the table's edge v = 8 and far wings.
        // Error relative to the value plus 1 % of the component's peak (the bottom of the
        // minimum at y = 0 of a Stark-dominated component is never what the profile is made
        // of there: the central components and the neighbours fill it).
        let mut worst: f64 = 0.0;
        let mut worst_at = (0.0, 0.0, 0.0);
        for &r in &[
            0.01, 0.1, 0.5, 0.79, 0.81, 1.5, 5.0, 30.0, 300.0, 2000.0, 2.0e5,
        ] {
            let b0 = f64::hypot(1.0, r);
            for &ratio in &[1e-6, 1e-3, 0.03, 0.3, 1.0, 3.0, 30.0, 300.0, 5e3, 2e4] {
                let g = 2.0 * b0 * ratio;
                let s = VoigtStencil::new(r, g);
                let peak = (0..200)
                    .map(|i| fourier_h(0.02 * i as f64 * s.b, r, g))
                    .fold(0.0, f64::max);
                for &v in &[
                    0.0, 0.05, 0.3, 1.0, 2.0, 4.0, 7.9, 8.1, 12.0, 30.0, 100.0, 1000.0,
                ] {
                    let y = v * s.b;
                    let slow = fourier_h(y, r, g);
                    let e = (voigt_component(y, &s) - slow).abs() / (slow.abs() + 1e-2 * peak);
                    if e > worst {
                        worst = e;
                        worst_at = (r, ratio, v);
                    }
                }
            }
        }
        eprintln!(
            "Lorentz components vs Fourier integral: worst {worst:.1e} at (r, g/2b0, v) = {worst_at:?}"
        );
        assert!(worst < 2e-5, "{worst:.2e} at {worst_at:?}");
    }

    // ---- profiles ----------------------------------------------------------------------

    /// The profile by the other route: each component's exact Fourier integral
    /// (`fourier_h` with the Lorentzian factor) and the central Voigt by direct cosine
    /// quadrature of e^{−d²τ²/4 − Γτ/2}.
    fn phi_fourier_twin(p: &StarkProfile, dl: f64) -> f64 {
        let d = p.doppler;
        let gam = 2.0 * p.lorentz_hwhm;
        let mut sum = 0.0;
        for c in &p.components {
            sum += c.weight * fourier_h(dl / c.scale, d / c.scale, gam / c.scale) / c.scale;
        }
        // Central: (1/π) ∫₀^∞ e^{−d²τ²/4 − Γτ/2} cos(Δλ τ) dτ, τ = t/d.
        let (gx, gw) = gauss_legendre(20);
        let tmax = 2.0 * 46.0f64.sqrt();
        let panels = ((dl.abs() / d * tmax / 2.0).ceil() as usize).max(40);
        let h = tmax / panels as f64;
        let mut c = 0.0;
        for k in 0..panels {
            for (&x, &w) in gx.iter().zip(&gw) {
                let t = (k as f64 + 0.5 * (x + 1.0)) * h;
                c += w * 0.5 * h * (-0.25 * t * t - 0.5 * gam / d * t).exp() * (dl / d * t).cos();
            }
        }
        sum + p.central * c / (PI * d)
    }

    const T4: f64 = 1.0e4;

    fn balmer(n_up: u32, ne: f64, lorentz: f64) -> StarkProfile {
        let lam = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN.vacuum_wavelength(2, n_up);
        StarkProfile::new(2, n_up, 1, lam, ne, hydrogen_doppler(lam, T4), lorentz)
    }

    #[test]
    fn profile_matches_fourier_twin() {
        let mut worst: f64 = 0.0;
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let mut cases = vec![];
        for &(nl, nu) in &[(1u32, 2u32), (2, 3), (2, 4), (2, 10), (3, 12)] {
            let lam = h.vacuum_wavelength(nl, nu);
            for &ne in &[1e12, 1e15, 1e17] {
                let dop = hydrogen_doppler(lam, T4);
                for &lor in &[0.0, 0.3 * dop, 5.0 * dop] {
                    cases.push(StarkProfile::new(nl, nu, 1, lam, ne, dop, lor));
                }
            }
        }
        for p in &cases {
            let w = p.components.last().map_or(0.0, |c| c.scale) + p.doppler;
            let w = w.max(p.lorentz_hwhm);
            for &x in &[
                0.0, 0.01, 0.1, 0.3, 0.7, 1.0, 1.6, 2.5, 4.0, 7.0, 15.0, 40.0, 150.0,
            ] {
                let dl = x * w;
                let e = rel(p.phi(dl), phi_fourier_twin(p, dl));
                if std::env::var("STARK_DIAG").is_ok() && e > 2e-5 {
                    eprintln!(
                        "DIAG comps={} s1={:.3e} d={:.3e} g={:.3e} x={x}: e={e:.2e} gauss-part={:.3e}",
                        p.components.len(),
                        p.unit_shift(),
                        p.doppler,
                        p.lorentz_hwhm,
                        rel(p.phi_gauss(dl), {
                            let mut q = p.clone();
                            q.lorentz_hwhm = 0.0;
                            phi_fourier_twin(&q, dl)
                        })
                    );
                    continue;
                }
                worst = worst.max(e);
                assert!(
                    e < 2e-5,
                    "n={:?} x={x}: {} vs {}",
                    p.components.len(),
                    p.phi(dl),
                    phi_fourier_twin(p, dl)
                );
            }
        }
        eprintln!(
            "profile vs Fourier twin: worst relative error {worst:.1e} over {} profiles",
            cases.len()
        );
    }

    #[test]
    fn lorentz_profiles_match_the_real_space_convolution() {
        // The tables are built from Fourier integrals; this twin convolves the Gaussian
        // profile with the Lorentzian in real space instead (an independent route).
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let mut worst: f64 = 0.0;
        for &(nl, nu, ne) in &[(1u32, 2u32, 1e14), (2, 3, 1e17), (2, 4, 1e13), (2, 8, 1e15)] {
            let lam = h.vacuum_wavelength(nl, nu);
            let dop = hydrogen_doppler(lam, T4);
            for &lor in &[0.02 * dop, 2.0 * dop] {
                let p = StarkProfile::new(nl, nu, 1, lam, ne, dop, lor);
                let w = p.components.last().map_or(0.0, |c| c.scale) + dop;
                for &x in &[0.0, 0.2, 0.9, 2.0, 5.0, 20.0, 300.0] {
                    let dl = x * w;
                    worst = worst.max(rel(p.phi(dl), p.phi_lorentz(dl)));
                }
            }
        }
        eprintln!("Lorentz profiles vs real-space convolution: worst {worst:.1e}");
        assert!(worst < 2e-5, "{worst:.2e}");
    }

    #[test]
    fn profiles_have_unit_area_and_the_holtsmark_wing() {
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let mut worst_area: f64 = 0.0;
        let mut worst_static: f64 = 0.0;
        for &(nl, nu) in &[(1u32, 2u32), (2, 3), (2, 4), (2, 10), (4, 20)] {
            let lam = h.vacuum_wavelength(nl, nu);
            for &ne in &[1e13, 1e16] {
                let dop = hydrogen_doppler(lam, T4);
                // The Lorentz path is slow (~1 ms a call): two cases only.
                let with_lorentz = (nl, nu, ne) == (2, 4, 1e16) || (nl, nu, ne) == (1, 2, 1e13);
                let lors: &[f64] = if with_lorentz { &[0.0, 1.0] } else { &[0.0] };
                for &lor in lors {
                    let lor = lor * dop;
                    let p = StarkProfile::new(nl, nu, 1, lam, ne, dop, lor);
                    let smax = p.components.last().unwrap().scale;
                    let smin = p.components[0].scale;
                    let l = 1e4 * (smax + dop);
                    let k = p.far_wing_coefficient();
                    let tail = 2.0 * k * (2.0 / 3.0) * l.powf(-1.5)
                        + 2.0 * p.lorentz_wing_coefficient() / l;
                    let area = integrate_symmetric(&|x| p.phi(x), 0.01 * smin.min(dop), l) + tail;
                    worst_area = worst_area.max((area - 1.0).abs());
                    assert!(
                        (area - 1.0).abs() < 1e-5,
                        "{nl}->{nu} ne={ne} lor={lor}: {area}"
                    );
                    if lor > 0.0 {
                        continue;
                    }
                    let st = integrate_symmetric(&|x| p.static_density(x), 0.01 * smin, l)
                        + 2.0 * k * (2.0 / 3.0) * l.powf(-1.5);
                    worst_static = worst_static.max((st + p.central() - 1.0).abs());
                    assert!((st + p.central() - 1.0).abs() < 1e-6);
                    // Far wing: φ |Δλ|^{5/2}/K → 1; the next Holtsmark term is
                    // 5.107 (s/Δλ)^{3/2} relative (s the component scale).
                    for &(far, tol) in &[(1e3, 1e-3), (1e5, 1e-6)] {
                        let x = far * (smax + dop);
                        let ratio = p.phi(x) * x.powf(2.5) / k;
                        assert!((ratio - 1.0).abs() < tol, "{nl}->{nu} at {far}: {ratio}");
                    }
                }
            }
        }
        eprintln!(
            "unit area: worst |area - 1| = {worst_area:.1e}; static part + central: {worst_static:.1e}"
        );
        // K from the pattern: (A/2) Σ I_k (C_k F₀)^{3/2} (derived in the module docs).
        let p = balmer(4, 1e16, 0.0);
        let want = 0.5 * HOLTSMARK_TAIL * pattern(2, 4).wing_moment() * p.unit_shift().powf(1.5);
        assert!(rel(p.far_wing_coefficient(), want) < 1e-14);
    }

    fn fwhm(p: &StarkProfile) -> f64 {
        // Peak by a fine scan, outermost half-maximum crossing by bisection.
        let smax = p.components.last().unwrap().scale + p.doppler;
        let mut peak: f64 = 0.0;
        for i in 0..=20000 {
            peak = peak.max(p.phi(i as f64 * 3e-4 * smax));
        }
        let half = 0.5 * peak;
        let mut hi = 20.0 * smax;
        while p.phi(hi) > half {
            hi *= 2.0;
        }
        let mut lo = hi;
        while p.phi(lo) < half {
            lo *= 0.98;
        }
        for _ in 0..60 {
            let mid = 0.5 * (lo + hi);
            if p.phi(mid) > half {
                lo = mid
            } else {
                hi = mid
            }
        }
        2.0 * lo
    }

    #[test]
    fn balmer_widths_against_published_relations() {
        // Published Stark FWHM–density fits of computer-simulated profiles that include ion
        // dynamics and electrons (Gigosos, González & Cardeñoso 2003, Spectrochim. Acta B
        // 58, 1489; from memory): Hβ w = 4.800 nm (n_e/10¹⁷ cm⁻³)^{1/1.4681}, Hα
        // w = 1.098 nm (n_e/10¹⁷)^{1/1.47135}; Stark widths, Doppler excluded. Here: protons
        // as the only quasi-static perturbers (N = n_e), no electrons; Doppler switched off
        // (1e-4 of C F₀) for the comparison and at 10⁴ K for the report.
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let mut ratios = vec![];
        for &ne in &[1e15, 1e16, 1e17] {
            let lam_b = h.vacuum_wavelength(2, 4);
            let unit = StarkProfile::new(2, 4, 1, lam_b, ne, 1e-20, 0.0).unit_shift();
            let wb = fwhm(&StarkProfile::new(2, 4, 1, lam_b, ne, 1e-4 * unit, 0.0)) * 1e7;
            let wb_t = fwhm(&balmer(4, ne, 0.0)) * 1e7;
            let pub_b = 4.8 * (ne / 1e17).powf(1.0 / 1.4681);
            let pa = balmer(3, ne, 0.0);
            let wa = fwhm(&pa) * 1e7;
            let pub_a = 1.098 * (ne / 1e17).powf(1.0 / 1.47135);
            let dop_fwhm = 2.0 * 2.0f64.ln().sqrt() * pa.doppler * 1e7;
            eprintln!(
                "n_e = {ne:.0e}: Hβ quasi-static FWHM {wb:.4} nm (with Doppler {wb_t:.4}), published {pub_b:.4}, ratio {:.3}; Hα with Doppler {wa:.4} nm, published {pub_a:.4}, Doppler FWHM {dop_fwhm:.4}",
                pub_b / wb
            );
            ratios.push(pub_b / wb);
            // Hα: the unshifted components (38.8 %) sit in a Doppler core far taller than the
            // shifted ones, so without electron impacts the FWHM is the Doppler width once
            // n_e ≥ 1e16 — the quasi-static ion field cannot give Hα's width.
            if ne >= 1e16 {
                assert!(rel(wa, dop_fwhm) < 0.06, "{wa} vs {dop_fwhm}");
                assert!(wa < 0.25 * pub_a);
            }
        }
        // Hβ: the ion-only quasi-static width can only fall short of the full width
        // (electrons add broadening): ratio ≥ 1; and by less than the factor 2^{2/3} = 1.587
        // that treating the electrons as static too would add to the field scale (impact
        // broadening by electrons is weaker than their static limit in the core). The
        // electron share grows with density (impact width ∝ n_e, quasi-static ∝ n_e^{2/3}).
        for &r in &ratios {
            assert!((1.0..1.587).contains(&r), "{ratios:?}");
        }
        assert!(ratios[2] > ratios[0], "{ratios:?}");
    }

    #[test]
    fn shell_r_squared_matches_the_dipole_sum() {
        // Slow twin of `shell_r_squared`: Σ over the shell's |n l′ m′⟩ and the three
        // polarisations of |⟨n k m|r_q|n l′ m′⟩|², from the parabolic state's coefficients,
        // the radial integrals and the C¹ angular factors (as the patterns are built).
        let mut worst: f64 = 0.0;
        for n in 1u32..=7 {
            for m in 0..n {
                for st in parabolic_states(n, m) {
                    let mut sum = 0.0;
                    for mp in (m as i64 - 1)..=(m as i64 + 1) {
                        for lp in mp.unsigned_abs() as u32..n {
                            let mut amp = 0.0;
                            for (i, c) in st.coeffs.iter().enumerate() {
                                let l = m + i as u32;
                                if l.abs_diff(lp) == 1 {
                                    amp += c
                                        * radial_integral(n, lp, n, l)
                                        * angular(lp as i64, mp, l as i64, m as i64);
                                }
                            }
                            sum += amp * amp;
                        }
                    }
                    let want = shell_r_squared(n as i64, st.k, m as i64);
                    worst = worst.max((sum - want).abs() / want.max(1.0));
                }
            }
        }
        assert!(worst < 1e-9, "{worst:e}");
    }

    #[test]
    fn impact_wing_follows_the_width_at_each_offset() {
        // `ImpactWing::change` (closed forms per branch) against Σ I_k (γ_k(Δω) − γ_k(0))
        // from `impact_hwhm` itself, across the core, the logarithmic wing and the
        // strong-collision wing, at densities where ρ_min is below and above λ_D.
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let mut worst: f64 = 0.0;
        for &(nl, nu) in &[(1u32, 2u32), (2, 3), (2, 4), (2, 10), (4, 12)] {
            for &(ne, t) in &[(1e12, 5e3), (1e15, 1e4), (1e19, 3e4), (1e21, 1e4)] {
                let lam = h.vacuum_wavelength(nl, nu);
                let gas = ElectronGas {
                    density: ne,
                    temperature: t,
                };
                let p = StarkProfile::with_electrons(nl, nu, 1, lam, ne, 1e-9, 0.0, Some(gas));
                let e = p.impact.as_ref().unwrap();
                let pat = pattern(nl, nu);
                let mut parts = vec![(pat.central, pat.central_impact)];
                parts.extend(
                    pat.components
                        .iter()
                        .zip(&pat.impact)
                        .map(|(c, &r2)| (c.1, r2)),
                );
                for k in -30..=30 {
                    let dl = e.onset * 10f64.powf(f64::from(k) / 5.0);
                    let domega = dl / e.cm_per_omega;
                    let want: f64 = parts
                        .iter()
                        .map(|&(w, r2)| {
                            w * (impact_hwhm(r2, 1, &gas, domega) - impact_hwhm(r2, 1, &gas, 0.0))
                        })
                        .sum::<f64>()
                        * e.cm_per_omega;
                    let core = p.mean_hwhm;
                    let got = e.change(dl);
                    worst = worst.max((got - want).abs() / core);
                    // and never more than the whole core width is taken away
                    assert!(got <= 0.0 && got >= -core * (1.0 + 1e-12), "{got} {core}");
                }
            }
        }
        assert!(worst < 1e-12, "{worst:e}");
    }

    #[test]
    fn balmer_widths_with_electron_impacts_against_published_relations() {
        // The same published fits as above (Gigosos, González & Cardeñoso 2003, from memory:
        // Hβ w = 4.800 nm (n_e/10¹⁷)^{1/1.4681}, Hα 1.098 nm (n_e/10¹⁷)^{1/1.47135}), now
        // with the electrons' impact widths on every component (`impact_hwhm`), Doppler
        // switched off, at 5,000, 10,000 and 20,000 K and n_e = 10¹⁴–10¹⁸ cm⁻³.
        // Hβ: 1.01–1.24 times the fit. The fits include ion dynamics, which would widen
        // the static-ion profile further, so this second-order impact treatment (straight
        // paths, diagonal operator, strong collisions as ½) over-broadens by up to 24 %;
        // the tolerance is the range reached. Hα: its width comes from ion dynamics at low
        // density, which are not modelled (0.17–0.30 of the fit at 10¹⁴), and the impact
        // widths of its unshifted components over-broaden it at high density (1.8 at 10¹⁸).
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let (mut lo_b, mut hi_b) = (f64::INFINITY, 0.0f64);
        for &t in &[5e3, 1e4, 2e4] {
            for &ne in &[1e14, 1e15, 1e16, 1e17, 1e18] {
                let gas = Some(ElectronGas {
                    density: ne,
                    temperature: t,
                });
                let width = |nu: u32| {
                    let lam = h.vacuum_wavelength(2, nu);
                    let unit = StarkProfile::new(2, nu, 1, lam, ne, 1e-20, 0.0).unit_shift();
                    let p = StarkProfile::with_electrons(2, nu, 1, lam, ne, 1e-4 * unit, 0.0, gas);
                    fwhm(&p) * 1e7
                };
                let (wb, wa) = (width(4), width(3));
                let rb = wb / (4.8 * (ne / 1e17).powf(1.0 / 1.4681));
                let ra = wa / (1.098 * (ne / 1e17).powf(1.0 / 1.47135));
                eprintln!(
                    "T = {t:.0} K, n_e = {ne:.0e}: Hβ {wb:.4} nm ({rb:.3} of the fit), Hα {wa:.4} nm ({ra:.3})"
                );
                (lo_b, hi_b) = (lo_b.min(rb), hi_b.max(rb));
                if ne >= 1e16 {
                    assert!((0.6..2.0).contains(&ra), "Hα {ra}");
                }
                if ne <= 1e14 {
                    assert!(ra < 0.5, "Hα {ra}");
                }
            }
        }
        assert!(lo_b >= 1.0 && hi_b <= 1.25, "Hβ {lo_b}..{hi_b}");
    }

    #[test]
    fn profiles_with_electron_impacts_have_unit_area() {
        // The impact widths fall along the wings (`impact_hwhm` at Δω), which takes area
        // out of them: up to half of it for H 2-10 at n_e = 10¹⁷. The profile is rescaled
        // by 1/(1 + ∫ change), with the integral by `ImpactWing::integral`; here it is
        // checked against a direct quadrature of the change, and the rescaled profile's
        // area against 1 (the sum rule: the line's strength is its f-value).
        let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
        let (mut worst_area, mut worst_integral, mut lowest): (f64, f64, f64) = (0.0, 0.0, 1.0);
        for &(nl, nu) in &[(1u32, 2u32), (2, 3), (2, 4), (2, 6), (2, 10)] {
            let lam = h.vacuum_wavelength(nl, nu);
            for &ne in &[1e13, 1e15, 1e17] {
                for &t in &[5e3, 1e4, 2e4] {
                    let dop = hydrogen_doppler(lam, t);
                    let gas = ElectronGas {
                        density: ne,
                        temperature: t,
                    };
                    let p = StarkProfile::with_electrons(nl, nu, 1, lam, ne, dop, 0.0, Some(gas));
                    let e = p.impact.as_ref().unwrap();
                    let smax = p.components.last().unwrap().scale;
                    let smin = p.components[0].scale;
                    let l = 1e5 * (smax + dop);
                    let h0 = 0.01 * smin.min(dop);
                    let direct = integrate_symmetric(&|x| e.correction(x), h0, l)
                        + 2.0 * e.change(l) / (PI * l);
                    let got = e.integral();
                    worst_integral = worst_integral.max((got / direct - 1.0).abs());
                    let tail = 2.0 * p.far_wing_coefficient() * (2.0 / 3.0) * l.powf(-1.5)
                        + 2.0 * p.lorentz_wing_coefficient_at(l) / l;
                    let area = integrate_symmetric(&|x| p.phi(x), h0, l) + tail;
                    worst_area = worst_area.max((area - 1.0).abs());
                    lowest = lowest.min(1.0 / p.norm);
                    assert!(
                        (area - 1.0).abs() < 1e-5,
                        "{nl}->{nu} n_e {ne:e} {t} K: area {area}"
                    );
                }
            }
        }
        eprintln!(
            "with electrons: worst |area - 1| = {worst_area:.1e}, integral vs quadrature \
             {worst_integral:.1e}, area before rescaling down to {lowest:.3}"
        );
        // Panels of one unit in ln u with 8 nodes: the kinks where components change branch
        // limit the convergence (panels of 2: 2.8e-5; of 1: 4.8e-6; of ½: 7.6e-7, at 2× the
        // cost); 1e-5 of the removed area is ≤ 5e-6 of the profile's.
        assert!(worst_integral < 1e-5, "{worst_integral:e}");
    }
}

//! The Voigt function H(a, v) and the Faddeeva function w(z).
//!
//! # Conventions
//!
//! The Faddeeva (complex probability) function is w(z) = exp(−z²) erfc(−iz) (DLMF §7.2),
//! here for Im z ≥ 0. The Voigt function is its real part (Armstrong 1967, JQSRT 7, 61):
//!
//! H(a, v) = Re w(v + ia) = (a/π) ∫ exp(−t²) / ((v − t)² + a²) dt,   a ≥ 0,
//!
//! even in v and normalised to ∫ H(a, v) dv = √π. H(0, v) = exp(−v²), and in the far wings
//! H → a/(√π v²). The imaginary part L(a, v) = Im w(v + ia) = (1/π) ∫ exp(−t²) (v − t) /
//! ((v − t)² + a²) dt is the (odd) dispersion profile, for line shifts and dispersion.
//!
//! For a line at ν₀ with Doppler width Δν_D (the 1/e half width of the Gaussian) and
//! Lorentzian damping Γ (full width at half maximum in angular frequency, rad s⁻¹):
//!
//! v = (ν − ν₀)/Δν_D,   a = Γ/(4π Δν_D),   φ(ν) = H(a, v)/(√π Δν_D),   ∫ φ(ν) dν = 1.
//!
//! scipy's `voigt_profile(x, σ, γ)` (Gaussian standard deviation σ, Lorentzian half width at
//! half maximum γ) is Re w(z)/(σ√(2π)) with z = (x + iγ)/(σ√2): it equals H(a, v)/(σ√(2π))
//! with v = x/(σ√2) and a = γ/(σ√2).
//!
//! # Method
//!
//! With x = |v| and y = a, the quarter plane is split into three regions.
//!
//! 1. **y < 0.1, x < 7.75: Taylor series about the real axis.** w(z) = exp(−z²) + (2i/√π) F(z),
//!    F Dawson's integral (DLMF §7.2, §7.5). Both parts are summed as Taylor series in
//!    ζ = z − x_j about the nearest node x_j = j/8 on the real axis (|ζ| < 0.12), to degree
//!    11 for exp(−z²) and 9 for F. Their coefficients obey one recurrence,
//!    c_{n+1} = −2 (x_j c_n + c_{n−1})/(n + 1) (from the derivative relations, DLMF §7.10),
//!    started from c₁ = −2x_j c₀ for the Gaussian and c₁ = 1 − 2x_j c₀ for F; F(x_j) is carried
//!    from F(0) = 0 by summing the series from node to node, the direction in which
//!    F′ = 1 − 2xF is stable. Each real-coefficient series is evaluated at the complex ζ with
//!    the second-order recurrence for its remainder modulo (t − ζ)(t − ζ̄) (Knuth, *The Art of
//!    Computer Programming* vol. 2, §4.6.4), which returns Im of the sum as y times a real
//!    number. So H keeps its relative accuracy down to y = 0, and the Gaussian core and the
//!    Lorentzian wing never cancel: at a = 10⁻⁵, v = 5 the two terms exp(−25) ≈ 1.4 × 10⁻¹¹
//!    and a/(√π v²) ≈ 2.3 × 10⁻⁷ are each computed to full precision.
//! 2. **y ≥ 0.1, |z| < 6.8: Weideman's rational series** (Weideman 1994, SIAM J. Numer. Anal.
//!    31, 1497): w(z) ≈ 2 p(Z)/(L − iz)² + 1/(√π (L − iz)), Z = (L + iz)/(L − iz), with
//!    N = 28 coefficients of p from his discrete Fourier transform and L = (N/√2)^{1/2}.
//! 3. **Elsewhere: the Laplace continued fraction** w(z) = (i/√π) / (z − ½/(z − 1/(z − (3/2)/(z
//!    − …)))) (as in Gautschi 1970, SIAM J. Numer. Anal. 7, 187; its second convergent is region
//!    I of Humlíček 1982, JQSRT 27, 437), evaluated as the ratio of the polynomials of its n-th
//!    convergent (built at compile time from the three-term recurrence): n = 3 for |z| ≥ 64,
//!    n = 5 for |z| ≥ 15.3, n = 9 below; w ≈ i/(√π z) for |z| ≥ 1.5 × 10⁵. The fraction misses
//!    the exponentially small term exp(−z²) next to the real axis; for y ≥ 10⁻⁶ it is below
//!    10⁻¹⁸ of H wherever this region is used, and for smaller y it is added explicitly.
//!
//! The region boundaries, convergent orders and series degrees were chosen so that each
//! truncation error stays below about 10⁻¹⁰ relative, measured against `scipy.special.wofz`
//! (the Faddeeva package of S. G. Johnson).
//!
//! # Accuracy
//!
//! For a ∈ [10⁻⁵, 10²] and |v| ≤ 10⁴ the relative error of H is below 10⁻⁹ (largest, ~5 × 10⁻¹⁰,
//! at the Weideman region's edge y = 0.1, x ≈ 6.6); the tests compare against a direct adaptive
//! quadrature of the integral above and `tests/python/crosscheck.py` against `scipy.special.wofz`.
//! Im w has an error below 10⁻¹⁰ |w|. Outside that domain: a = 0 gives `exp(−v²)` itself (so 0,
//! not NaN, once it underflows); 0 < a < 10⁻⁶ adds exp(−z²) computed directly to the Dawson
//! series or the continued fraction; large a is handled by the continued fraction (and
//! i/(√π z)); a < 0 or NaN gives NaN; an infinite a or v gives 0.
//!
//! # Speed
//!
//! [`voigt_h`] chooses the region with a branch per call, which is cheap when successive
//! points fall in one region (a profile on a frequency grid). [`voigt_h_slice`] is meant for
//! many points in any order: per block of 512 it evaluates the continued fraction for every
//! point in one branch-free loop the compiler vectorises (the convergent chosen per point by
//! selecting zero-padded coefficients, which gives the same bits), then lists the points of
//! regions 1 and 2 and evaluates those four (Taylor) or eight (Weideman) at a time, which avoids
//! branch mispredictions and lets the processor overlap the recurrences. On x86-64 processors
//! with FMA and AVX2 (detected at run time) the recurrences use fused multiply-adds; elsewhere
//! a·b + c is rounded twice. The two flavours agree to ~10⁻¹⁶ relative, and within one flavour
//! [`voigt_h`], [`faddeeva`] and [`voigt_h_slice`] give bitwise equal results.

use std::ops::{Add, Div, Mul, Sub};
use std::sync::LazyLock;

/// 2/√π.
const FRAC_2_SQRT_PI: f64 = std::f64::consts::FRAC_2_SQRT_PI;
/// 1/√π.
const FRAC_1_SQRT_PI: f64 = FRAC_2_SQRT_PI / 2.0;

/// Region 1 (Taylor series about the real axis) holds for y below this...
const TAYLOR_MAX_Y: f64 = 0.1;
/// ... and x below this (there exp(−x²) < e⁻⁶⁰).
const TAYLOR_MAX_X: f64 = 7.75;
/// Spacing of the real nodes x_j = j STEP.
const STEP: f64 = 0.125;
/// Nodes in the tables (x_j ≤ 7.75 needs j ≤ 62; a power of two lets a mask bound the index).
const NODES: usize = 64;
/// Terms of the exp(−z²) series (degree 11).
const GAUSS_TERMS: usize = 12;
/// Terms of the Dawson series (degree 9).
const DAWSON_TERMS: usize = 10;
/// Terms used to carry F(x_j) from node to node when the table is built.
const MARCH_TERMS: usize = 40;
/// 1.5 × 2⁵²: for 0 ≤ t < 2⁵¹, t + ROUNDER is exact with round(t) in the low mantissa bits.
const ROUNDER: f64 = 6_755_399_441_055_744.0;

/// Region 2 (Weideman) holds for y ≥ TAYLOR_MAX_Y and |z| below this.
const CORE_RADIUS: f64 = 6.8;
/// Terms of Weideman's series.
const WEIDEMAN_N: usize = 28;

/// |z| from which the third convergent of the continued fraction is used.
const RADIUS_CF3: f64 = 64.0;
/// |z| from which the fifth convergent is used (the ninth below).
const RADIUS_CF5: f64 = 15.3;
/// |z| from which w ≈ i/(√π z).
const RADIUS_ONE_TERM: f64 = 1.5e5;
/// Below this y the continued fraction alone may miss exp(−z²): such points take the slow path.
const TINY_Y: f64 = 1e-6;

/// The Voigt function H(a, v) = Re w(v + ia), normalised to ∫ H dv = √π (see the module docs
/// for conventions, method and accuracy).
///
/// Relative error below 10⁻⁹ for a ∈ [10⁻⁵, 10²], |v| ≤ 10⁴; H(0, v) = exp(−v²); NaN for a < 0
/// or NaN input.
#[inline]
pub fn voigt_h(a: f64, v: f64) -> f64 {
    #[cfg(target_arch = "x86_64")]
    if fused::available() {
        // SAFETY: the processor has FMA and AVX2 (just checked).
        return unsafe { fused::w(v.abs(), a) }.0;
    }
    w_first_quadrant::<Separate>(v.abs(), a).0
}

/// The Faddeeva function w(x + iy) = exp(−z²) erfc(−iz) for y ≥ 0, as (Re w, Im w).
///
/// Re w(v + ia) = [`voigt_h`]`(a, v)` exactly; Im w is the dispersion profile (odd in x).
/// NaN for y < 0 or NaN input.
#[inline]
pub fn faddeeva(x: f64, y: f64) -> (f64, f64) {
    #[cfg(target_arch = "x86_64")]
    let (re, im) = if fused::available() {
        // SAFETY: the processor has FMA and AVX2 (just checked).
        unsafe { fused::w(x.abs(), y) }
    } else {
        w_first_quadrant::<Separate>(x.abs(), y)
    };
    #[cfg(not(target_arch = "x86_64"))]
    let (re, im) = w_first_quadrant::<Separate>(x.abs(), y);
    (re, if x < 0.0 { -im } else { im })
}

/// [`voigt_h`] for many points: `out[i] = voigt_h(a[i], v[i])`, bitwise equal, faster on
/// scattered input (see "Speed" in the module docs).
///
/// # Panics
///
/// If the three slices differ in length.
pub fn voigt_h_slice(a: &[f64], v: &[f64], out: &mut [f64]) {
    assert!(
        a.len() == v.len() && a.len() == out.len(),
        "voigt_h_slice: a, v and out must have the same length ({}, {}, {})",
        a.len(),
        v.len(),
        out.len()
    );
    #[cfg(target_arch = "x86_64")]
    if fused::available() {
        // SAFETY: the processor has FMA and AVX2 (just checked).
        return unsafe { fused::slice(a, v, out) };
    }
    slice_flavoured::<Separate>(a, v, out);
}

/// The fused flavour on x86-64, where FMA (with AVX2) is an extension found at run time.
#[cfg(target_arch = "x86_64")]
mod fused {
    use super::{Fused, slice_flavoured, w_first_quadrant};

    /// Whether this processor has fused multiply-add and 256-bit vectors (the answers are
    /// cached by std).
    #[inline(always)]
    pub(super) fn available() -> bool {
        std::arch::is_x86_feature_detected!("fma") && std::arch::is_x86_feature_detected!("avx2")
    }

    /// # Safety
    /// The processor must support FMA and AVX2.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn w(x: f64, y: f64) -> (f64, f64) {
        w_first_quadrant::<Fused>(x, y)
    }

    /// # Safety
    /// The processor must support FMA and AVX2.
    #[target_feature(enable = "avx2,fma")]
    pub(super) unsafe fn slice(a: &[f64], v: &[f64], out: &mut [f64]) {
        slice_flavoured::<Fused>(a, v, out)
    }
}

/// [`voigt_h_slice`] with multiply-adds of flavour M.
#[inline(always)]
fn slice_flavoured<M: MulAdd>(a: &[f64], v: &[f64], out: &mut [f64]) {
    if a.len() < 256 {
        // Too few points to repay sorting them.
        for ((o, &a), &v) in out.iter_mut().zip(a).zip(v) {
            *o = w_first_quadrant::<M>(v.abs(), a).0;
        }
        return;
    }
    let t = &*TABLES;
    // idx[(r << 9) + p]: position in the block of the p-th point of region r.
    let mut idx = [0u16; 4 * BLOCK];
    let mut codes = [0u8; BLOCK];
    let mut scratch = Scratch {
        x: [0.0; BLOCK],
        y: [0.0; BLOCK],
        h: [0.0; BLOCK],
    };
    for ((ab, vb), ob) in a
        .chunks(BLOCK)
        .zip(v.chunks(BLOCK))
        .zip(out.chunks_mut(BLOCK))
    {
        // Every point as if in region 3 (a plain loop the compiler vectorises; zero-padded
        // convergents give the same bits as the shorter ones), and its region.
        for (((o, c), &a), &v) in ob.iter_mut().zip(codes.iter_mut()).zip(ab).zip(vb) {
            let x = v.abs();
            *c = region(x, a);
            *o = continued_fraction_any::<M>(x, a);
        }
        // Then every point listed by region (four counters of 10 bits in one register,
        // BLOCK ≤ 1023), and regions 1, 2 and the special points evaluated again from their
        // lists, over the fraction's value.
        let mut counts: u64 = 0;
        for (i, &c) in codes[..ab.len()].iter().enumerate() {
            let r = usize::from(c & 3);
            let shift = 10 * r as u32;
            let p = ((counts >> shift) as usize) & (BLOCK - 1);
            idx[(r << 9) | p] = i as u16;
            counts += 1 << shift;
        }
        let list = |r: u8| {
            let n = ((counts >> (10 * u32::from(r))) & 1023) as usize;
            &idx[usize::from(r) << 9..][..n]
        };
        let block = (ab, vb);
        run_in_place::<4, M, _>(list(TAYLOR), block, ob, TaylorSeries(t));
        run_copied::<8, M, _>(list(WEIDEMAN), block, ob, Weideman(t), &mut scratch);
        for &i in list(SPECIAL) {
            let i = usize::from(i);
            ob[i] = special::<M>(t, vb[i].abs(), ab[i]).0;
        }
    }
}

/// Points sorted per block in [`voigt_h_slice`] (a power of two, at most 512).
const BLOCK: usize = 512;

/// Evaluate `kernel` on the points `list` of one region, N at a time (the last few one by one),
/// reading and writing the points where they are: suits kernels that look up tables.
#[inline(always)]
fn run_in_place<const N: usize, M: MulAdd, K: Kernel>(
    list: &[u16],
    (a, v): (&[f64], &[f64]),
    out: &mut [f64],
    kernel: K,
) where
    Pack<N>: Lanes,
{
    let mut groups = list.chunks_exact(N);
    for g in &mut groups {
        let i: [usize; N] = std::array::from_fn(|l| usize::from(g[l]));
        let h = kernel.re::<_, M>(Pack(i.map(|i| v[i].abs())), Pack(i.map(|i| a[i])));
        for (&i, h) in i.iter().zip(h.0) {
            out[i] = h;
        }
    }
    for &i in groups.remainder() {
        let i = usize::from(i);
        out[i] = kernel.re::<_, M>(v[i].abs(), a[i]);
    }
}

/// Contiguous copies of one region's points and results.
struct Scratch {
    x: [f64; BLOCK],
    y: [f64; BLOCK],
    h: [f64; BLOCK],
}

/// As [`run_in_place`], through contiguous copies: lets the compiler turn the lock-step
/// arithmetic into vector instructions (suits kernels without table look-ups).
#[inline(always)]
fn run_copied<const N: usize, M: MulAdd, K: Kernel>(
    list: &[u16],
    (a, v): (&[f64], &[f64]),
    out: &mut [f64],
    kernel: K,
    s: &mut Scratch,
) where
    Pack<N>: Lanes,
{
    let n = list.len() / N * N;
    for (p, &i) in list[..n].iter().enumerate() {
        let i = usize::from(i);
        s.x[p & (BLOCK - 1)] = v[i].abs();
        s.y[p & (BLOCK - 1)] = a[i];
    }
    let groups = s.x[..n]
        .chunks_exact(N)
        .zip(s.y[..n].chunks_exact(N))
        .zip(s.h[..n].chunks_exact_mut(N));
    for ((x, y), h) in groups {
        let r = kernel.re::<_, M>(
            Pack(std::array::from_fn(|l| x[l])),
            Pack(std::array::from_fn(|l| y[l])),
        );
        h.copy_from_slice(&r.0);
    }
    for (p, &i) in list[..n].iter().enumerate() {
        out[usize::from(i)] = s.h[p & (BLOCK - 1)];
    }
    for &i in &list[n..] {
        let i = usize::from(i);
        out[i] = kernel.re::<_, M>(v[i].abs(), a[i]);
    }
}

// ---------------------------------------------------------------------------------------------
// Regions
// ---------------------------------------------------------------------------------------------

/// Region 1: Taylor series about the real axis.
const TAYLOR: u8 = 0;
/// Region 2: Weideman's series.
const WEIDEMAN: u8 = 1;
/// Region 3: the continued fraction.
const FRACTION: u8 = 2;
/// y < 10⁻⁶ (including y = 0, y < 0 and NaN), |z| ≥ 1.5 × 10⁵, infinities: [`special`].
const SPECIAL: u8 = 3;

/// The region of x + iy (x ≥ 0), computed without branches.
#[inline(always)]
fn region(x: f64, y: f64) -> u8 {
    let r2 = x * x + y * y;
    // NaN in x or y lands here too.
    let special =
        (y < TINY_Y) | y.is_nan() | (r2 >= RADIUS_ONE_TERM * RADIUS_ONE_TERM) | r2.is_nan();
    let taylor = (y < TAYLOR_MAX_Y) & (x < TAYLOR_MAX_X);
    let weideman = (y >= TAYLOR_MAX_Y) & (r2 < CORE_RADIUS * CORE_RADIUS);
    let code = if weideman { WEIDEMAN } else { FRACTION };
    let code = if taylor { TAYLOR } else { code };
    if special { SPECIAL } else { code }
}

/// w(x + iy) for x ≥ 0: the kernel [`region`] would choose, found by branches (cheap when
/// successive points stay in one region).
#[inline(always)]
fn w_first_quadrant<M: MulAdd>(x: f64, y: f64) -> (f64, f64) {
    let t = &*TABLES;
    let r2 = x * x + y * y;
    if (TINY_Y..TAYLOR_MAX_Y).contains(&y) {
        if x < TAYLOR_MAX_X {
            return taylor::<_, M>(t, x, y);
        }
    } else if y >= TAYLOR_MAX_Y {
        if r2 < CORE_RADIUS * CORE_RADIUS {
            return weideman::<_, M>(t, x, y);
        }
    } else {
        return special::<M>(t, x, y);
    }
    // y ≥ 10⁻⁶ and outside regions 1 and 2.
    if r2 < RADIUS_CF5 * RADIUS_CF5 {
        continued_fraction::<_, M>(&CF9, x, y)
    } else if r2 < RADIUS_CF3 * RADIUS_CF3 {
        continued_fraction::<_, M>(&CF5, x, y)
    } else if r2 < RADIUS_ONE_TERM * RADIUS_ONE_TERM {
        continued_fraction::<_, M>(&CF3, x, y)
    } else {
        special::<M>(t, x, y)
    }
}

/// The points [`region`] sets aside: y < 10⁻⁶ (and invalid y), huge or infinite |z|, NaN.
#[inline(never)]
fn special<M: MulAdd>(t: &Tables, x: f64, y: f64) -> (f64, f64) {
    if y < 0.0 || y.is_nan() || x.is_nan() {
        return (f64::NAN, f64::NAN);
    }
    if x.is_infinite() || y.is_infinite() {
        return (0.0, 0.0);
    }
    let r2 = x * x + y * y;
    if r2 >= RADIUS_ONE_TERM * RADIUS_ONE_TERM {
        // w ≈ i/(√π z) = (y + ix)/(√π |z|²), scaled so that |z|² cannot overflow.
        let m = x.max(y);
        let (xs, ys) = (x / m, y / m);
        let f = FRAC_1_SQRT_PI / (m * (xs * xs + ys * ys));
        return (ys * f, xs * f);
    }
    // From here 0 ≤ y < 10⁻⁶, where exp(−z²) may be all of H: it is computed directly.
    let e = (x - y) * (x + y);
    let (g_re, g_im) = if e < 745.0 {
        let g = (-e).exp();
        let (s, c) = (2.0 * x * y).sin_cos();
        (g * c, -g * s)
    } else {
        (0.0, 0.0)
    };
    if x < TAYLOR_MAX_X {
        let (_, dawson_re, dawson_im) = taylor_parts::<_, M>(t, x, y);
        return (
            g_re - FRAC_2_SQRT_PI * dawson_im,
            g_im + FRAC_2_SQRT_PI * dawson_re,
        );
    }
    let (re, im) = if r2 >= RADIUS_CF3 * RADIUS_CF3 {
        continued_fraction::<_, M>(&CF3, x, y)
    } else if r2 >= RADIUS_CF5 * RADIUS_CF5 {
        continued_fraction::<_, M>(&CF5, x, y)
    } else {
        continued_fraction::<_, M>(&CF9, x, y)
    };
    // The fraction does not represent exp(−z²) = exp(y² − x²)(cos 2xy − i sin 2xy); adding
    // it also turns a −0 real part into +0.
    (re + g_re, im + g_im)
}

// ---------------------------------------------------------------------------------------------
// Kernels, generic over the number of points evaluated at once
// ---------------------------------------------------------------------------------------------

/// Region 1: w(z) = exp(−z²) + (2i/√π) F(z) by Taylor series about the nearest real node.
#[inline(always)]
fn taylor<V: Lanes, M: MulAdd>(t: &Tables, x: V, y: V) -> (V, V) {
    let ((gauss_re, gauss_im), dawson_re, dawson_im) = taylor_parts::<V, M>(t, x, y);
    (
        gauss_re - V::splat(FRAC_2_SQRT_PI) * dawson_im,
        gauss_im + V::splat(FRAC_2_SQRT_PI) * dawson_re,
    )
}

/// The two series of [`taylor`]: (exp(−z²) as (Re, Im), Re F(z), Im F(z)).
#[inline(always)]
fn taylor_parts<V: Lanes, M: MulAdd>(t: &Tables, x: V, y: V) -> ((V, V), V, V) {
    let k = x * V::splat(1.0 / STEP) + V::splat(ROUNDER);
    let j = k.node();
    let h = x - (k - V::splat(ROUNDER)) * V::splat(STEP);
    // ζ = h + iy; both series are reduced modulo t² − rt + s = (t − ζ)(t − ζ̄).
    let r = V::splat(2.0) * h;
    let s = h * h + y * y;
    let minus_s = V::splat(0.0) - s;
    let mut g1 = V::gather(&t.gauss, j, GAUSS_TERMS - 1);
    let mut g2 = V::splat(0.0);
    let mut d1 = V::gather(&t.dawson, j, DAWSON_TERMS - 1);
    let mut d2 = V::splat(0.0);
    for m in (1..GAUSS_TERMS - 1).rev() {
        let g0 = M::mul_add(r, g1, M::mul_add(minus_s, g2, V::gather(&t.gauss, j, m)));
        g2 = g1;
        g1 = g0;
        if m < DAWSON_TERMS - 1 {
            let d0 = M::mul_add(r, d1, M::mul_add(minus_s, d2, V::gather(&t.dawson, j, m)));
            d2 = d1;
            d1 = d0;
        }
    }
    // p(ζ) = b₁ζ + c₀ − s b₂.
    let gauss_re = g1 * h + V::gather(&t.gauss, j, 0) - s * g2;
    let gauss_im = g1 * y;
    let dawson_re = d1 * h + V::gather(&t.dawson, j, 0) - s * d2;
    let dawson_im = d1 * y;
    ((gauss_re, gauss_im), dawson_re, dawson_im)
}

/// Region 2: Weideman's series, p(Z) split as E(Z²) + Z O(Z²) to halve the recurrence.
#[inline(always)]
fn weideman<V: Lanes, M: MulAdd>(t: &Tables, x: V, y: V) -> (V, V) {
    let l = t.weideman_l;
    // L − iz = (L + y) − ix,  L + iz = (L − y) + ix.
    let lp = V::splat(l) + y;
    let lm = V::splat(l) - y;
    let den = V::splat(1.0) / (lp * lp + x * x);
    let zr = (lm * lp - x * x) * den;
    let zi = V::splat(2.0 * l) * x * den;
    let wr = (zr - zi) * (zr + zi);
    let wi = V::splat(2.0) * zr * zi;
    let (er, ei) = real_poly::<_, M>(&t.weideman_even, wr, wi);
    let (or, oi) = real_poly::<_, M>(&t.weideman_odd, wr, wi);
    let pr = er + zr * or - zi * oi;
    let pi = ei + zr * oi + zi * or;
    // 1/(L − iz) = ((L + y) + ix)/|L − iz|²;  w = (1/(L − iz)) (2p/(L − iz) + 1/√π).
    let (dr, di) = (lp * den, x * den);
    let tr = V::splat(2.0) * (pr * dr - pi * di) + V::splat(FRAC_1_SQRT_PI);
    let ti = V::splat(2.0) * (pr * di + pi * dr);
    (dr * tr - di * ti, dr * ti + di * tr)
}

/// Region 3: the n-th convergent (odd n) of the Laplace continued fraction,
/// w ≈ (i/√π) P(z²)/(z Q(z²)).
#[inline(always)]
fn continued_fraction<V: Lanes, M: MulAdd>(c: &Convergent, x: V, y: V) -> (V, V) {
    convergent_ratio::<V, M>(&c.p[..c.terms], &c.q[..c.terms], x, y)
}

/// Re w in region 3 for one point, with the convergent chosen by |z| as in
/// [`w_first_quadrant`] but without a branch: the coefficients of the third and fifth
/// convergents, padded with zeros to the ninth's length, give bitwise the same result (the
/// recurrence carries exact zeros until the first true coefficient).
#[inline(always)]
fn continued_fraction_any<M: MulAdd>(x: f64, y: f64) -> f64 {
    let r2 = x * x + y * y;
    let (far, mid) = (r2 >= RADIUS_CF3 * RADIUS_CF3, r2 >= RADIUS_CF5 * RADIUS_CF5);
    let pick = |c3: &[f64; 5], c5: &[f64; 5], c9: &[f64; 5]| -> [f64; 5] {
        std::array::from_fn(|k| {
            if far {
                c3[k]
            } else if mid {
                c5[k]
            } else {
                c9[k]
            }
        })
    };
    let p = pick(&CF3.p, &CF5.p, &CF9.p);
    let q = pick(&CF3.q, &CF5.q, &CF9.q);
    convergent_ratio::<f64, M>(&p, &q, x, y).0
}

/// (i/√π) P(z²)/(z Q(z²)) for the coefficients `p`, `q` (ascending powers of z²).
#[inline(always)]
fn convergent_ratio<V: Lanes, M: MulAdd>(p: &[f64], q: &[f64], x: V, y: V) -> (V, V) {
    let ur = (x - y) * (x + y);
    let ui = V::splat(2.0) * x * y;
    let (pr, pi) = real_poly::<_, M>(p, ur, ui);
    let (qr, qi) = real_poly::<_, M>(q, ur, ui);
    let (dr, di) = (x * qr - y * qi, x * qi + y * qr);
    // (i/√π) P/D = (i/√π) P D̄/|D|².
    let f = V::splat(FRAC_1_SQRT_PI) / (dr * dr + di * di);
    ((pr * di - pi * dr) * f, (pr * dr + pi * di) * f)
}

/// Σ c_k u^k for complex u = ur + i ui and real c (at least two terms), by the second-order
/// recurrence for the remainder modulo t² − 2 ur t + |u|² (Knuth, TAOCP vol. 2, §4.6.4).
#[inline(always)]
fn real_poly<V: Lanes, M: MulAdd>(c: &[f64], ur: V, ui: V) -> (V, V) {
    let n = c.len();
    let r = V::splat(2.0) * ur;
    let s = ur * ur + ui * ui;
    let minus_s = V::splat(0.0) - s;
    let mut b1 = V::splat(c[n - 1]);
    let mut b2 = V::splat(0.0);
    for &ck in c[1..n - 1].iter().rev() {
        // b₀ = r b₁ + (c_k − s b₂), the newest term last (one operation on the critical path).
        let b0 = M::mul_add(r, b1, M::mul_add(minus_s, b2, V::splat(ck)));
        b2 = b1;
        b1 = b0;
    }
    (b1 * ur + V::splat(c[0]) - s * b2, b1 * ui)
}

/// A kernel as [`voigt_h_slice`] runs it: the real part of w, one point or several.
trait Kernel {
    fn re<V: Lanes, M: MulAdd>(&self, x: V, y: V) -> V;
}

/// [`taylor`] as a [`Kernel`].
struct TaylorSeries<'a>(&'a Tables);
/// [`weideman`] as a [`Kernel`].
struct Weideman<'a>(&'a Tables);

impl Kernel for TaylorSeries<'_> {
    #[inline(always)]
    fn re<V: Lanes, M: MulAdd>(&self, x: V, y: V) -> V {
        taylor::<V, M>(self.0, x, y).0
    }
}
impl Kernel for Weideman<'_> {
    #[inline(always)]
    fn re<V: Lanes, M: MulAdd>(&self, x: V, y: V) -> V {
        weideman::<V, M>(self.0, x, y).0
    }
}

/// One point (`f64`) or N points in lock step ([`Pack`]), with identical arithmetic per point.
trait Lanes:
    Copy + Add<Output = Self> + Sub<Output = Self> + Mul<Output = Self> + Div<Output = Self>
{
    /// Table row per point.
    type Node: Copy;
    fn splat(v: f64) -> Self;
    /// The node index held in the low mantissa bits of `self` (a rounded value + [`ROUNDER`]).
    fn node(self) -> Self::Node;
    /// `table[row][m]` for each point's row.
    fn gather<const W: usize>(table: &[[f64; W]; NODES], row: Self::Node, m: usize) -> Self;
    /// self · b + c rounded once.
    fn fused_mul_add(self, b: Self, c: Self) -> Self;
}

/// How the series recurrences form a·b + c: rounded twice ([`Separate`], any processor) or
/// once ([`Fused`], where the processor has fused multiply-add).
trait MulAdd {
    fn mul_add<V: Lanes>(a: V, b: V, c: V) -> V;
}

/// a·b + c with two roundings.
struct Separate;
/// a·b + c with one rounding.
#[cfg_attr(not(any(target_arch = "x86_64", test)), allow(dead_code))]
struct Fused;

impl MulAdd for Separate {
    #[inline(always)]
    fn mul_add<V: Lanes>(a: V, b: V, c: V) -> V {
        a * b + c
    }
}
impl MulAdd for Fused {
    #[inline(always)]
    fn mul_add<V: Lanes>(a: V, b: V, c: V) -> V {
        a.fused_mul_add(b, c)
    }
}

impl Lanes for f64 {
    type Node = usize;
    #[inline(always)]
    fn splat(v: f64) -> f64 {
        v
    }
    #[inline(always)]
    fn node(self) -> usize {
        (self.to_bits() as usize) & (NODES - 1)
    }
    #[inline(always)]
    fn gather<const W: usize>(table: &[[f64; W]; NODES], row: usize, m: usize) -> f64 {
        table[row][m]
    }
    #[inline(always)]
    fn fused_mul_add(self, b: f64, c: f64) -> f64 {
        self.mul_add(b, c)
    }
}

/// N values operated on element by element.
#[derive(Clone, Copy)]
struct Pack<const N: usize>([f64; N]);

macro_rules! pack_op {
    ($trait:ident, $method:ident, $op:tt) => {
        impl<const N: usize> $trait for Pack<N> {
            type Output = Pack<N>;
            #[inline(always)]
            fn $method(self, o: Pack<N>) -> Pack<N> {
                Pack(std::array::from_fn(|l| self.0[l] $op o.0[l]))
            }
        }
    };
}
pack_op!(Add, add, +);
pack_op!(Sub, sub, -);
pack_op!(Mul, mul, *);
pack_op!(Div, div, /);

impl<const N: usize> Lanes for Pack<N> {
    type Node = [usize; N];
    #[inline(always)]
    fn splat(v: f64) -> Pack<N> {
        Pack([v; N])
    }
    #[inline(always)]
    fn node(self) -> [usize; N] {
        self.0.map(f64::node)
    }
    #[inline(always)]
    fn gather<const W: usize>(table: &[[f64; W]; NODES], row: [usize; N], m: usize) -> Pack<N> {
        Pack(row.map(|j| table[j][m]))
    }
    #[inline(always)]
    fn fused_mul_add(self, b: Pack<N>, c: Pack<N>) -> Pack<N> {
        Pack(std::array::from_fn(|l| self.0[l].mul_add(b.0[l], c.0[l])))
    }
}

// ---------------------------------------------------------------------------------------------
// Continued-fraction convergents (built at compile time)
// ---------------------------------------------------------------------------------------------

/// The n-th convergent (n odd, n ≤ 9) of (i/√π)/(z − ½/(z − 1/(z − …))), as (i/√π) A/B with
/// A = P(z²) and B = z Q(z²); `p`, `q` in ascending powers of z², `terms` of each.
struct Convergent {
    p: [f64; 5],
    q: [f64; 5],
    terms: usize,
}

/// Numerator and denominator of the n-th convergent from A_k = z A_{k−1} − ((k−1)/2) A_{k−2}
/// (likewise B), A₀ = 0, A₁ = 1, B₀ = 1, B₁ = z; their coefficients are exact binary fractions.
const fn convergent(n: usize) -> Convergent {
    assert!(n % 2 == 1 && n <= 9);
    let (mut a_prev, mut a) = ([0.0; 10], [0.0; 10]);
    let (mut b_prev, mut b) = ([0.0; 10], [0.0; 10]);
    a[0] = 1.0;
    b_prev[0] = 1.0;
    b[1] = 1.0;
    let mut k = 2;
    while k <= n {
        let c = (k - 1) as f64 / 2.0;
        let (mut a_next, mut b_next) = ([0.0; 10], [0.0; 10]);
        let mut i = 0;
        while i < 10 {
            let (za, zb) = if i > 0 {
                (a[i - 1], b[i - 1])
            } else {
                (0.0, 0.0)
            };
            a_next[i] = za - c * a_prev[i];
            b_next[i] = zb - c * b_prev[i];
            i += 1;
        }
        a_prev = a;
        a = a_next;
        b_prev = b;
        b = b_next;
        k += 1;
    }
    // n odd: A_n is even in z, B_n odd.
    let (mut p, mut q) = ([0.0; 5], [0.0; 5]);
    let mut j = 0;
    while j < 5 {
        p[j] = a[2 * j];
        q[j] = b[2 * j + 1];
        j += 1;
    }
    Convergent {
        p,
        q,
        terms: n / 2 + 1,
    }
}

static CF3: Convergent = convergent(3);
static CF5: Convergent = convergent(5);
static CF9: Convergent = convergent(9);

// ---------------------------------------------------------------------------------------------
// Tables (built once, on first use)
// ---------------------------------------------------------------------------------------------

/// Series coefficients.
struct Tables {
    /// Taylor coefficients of exp(−x²) at x_j = j STEP.
    gauss: [[f64; GAUSS_TERMS]; NODES],
    /// Taylor coefficients of Dawson's F at x_j.
    dawson: [[f64; DAWSON_TERMS]; NODES],
    /// Weideman's coefficients a₀, a₂, … and a₁, a₃, … of p(Z) (ascending powers).
    weideman_even: [f64; WEIDEMAN_N / 2],
    weideman_odd: [f64; WEIDEMAN_N / 2],
    /// Weideman's L = (N/√2)^{1/2}.
    weideman_l: f64,
}

static TABLES: LazyLock<Tables> = LazyLock::new(build_tables);

/// Taylor coefficients c₀ … c_{W−1} about x of a function f with f′ = s − 2xf (s = 0: the
/// Gaussian, s = 1: Dawson's F), given c₀ = f(x).
fn taylor_coefficients<const W: usize>(x: f64, f0: f64, s: f64) -> [f64; W] {
    let mut c = [0.0; W];
    c[0] = f0;
    c[1] = s - 2.0 * x * f0;
    for n in 1..W - 1 {
        c[n + 1] = (-2.0 * x * c[n] - 2.0 * c[n - 1]) / (n + 1) as f64;
    }
    c
}

fn build_tables() -> Tables {
    let mut gauss = [[0.0; GAUSS_TERMS]; NODES];
    let mut dawson = [[0.0; DAWSON_TERMS]; NODES];
    let mut f = 0.0; // F(0)
    for j in 0..NODES {
        let x = j as f64 * STEP;
        gauss[j] = taylor_coefficients(x, (-x * x).exp(), 0.0);
        let c: [f64; MARCH_TERMS] = taylor_coefficients(x, f, 1.0);
        dawson[j].copy_from_slice(&c[..DAWSON_TERMS]);
        f = c.iter().rev().fold(0.0, |acc, &ck| acc * STEP + ck); // F(x_{j+1})
    }
    // Weideman (1994): with M = 2N, t_k = L tan(kπ/(2M)) and f_k = exp(−t_k²)(L² + t_k²),
    // a_n = (1/2M) Σ_{k=−M+1}^{M−1} f_k cos(πkn/M), and p(Z) = Σ_{n=0}^{N−1} a_{n+1} Zⁿ.
    let n = WEIDEMAN_N;
    let m = 2 * n;
    let l = (n as f64 / std::f64::consts::SQRT_2).sqrt();
    let samples: Vec<(f64, f64)> = (-(m as i64) + 1..m as i64)
        .map(|k| {
            let t = l * (k as f64 * std::f64::consts::PI / (2 * m) as f64).tan();
            (k as f64, (-t * t).exp() * (l * l + t * t))
        })
        .collect();
    let coefficient = |order: usize| {
        let sum: f64 = samples
            .iter()
            .map(|&(k, fk)| fk * (std::f64::consts::PI * k * order as f64 / m as f64).cos())
            .sum();
        sum / (2 * m) as f64
    };
    let mut weideman_even = [0.0; WEIDEMAN_N / 2];
    let mut weideman_odd = [0.0; WEIDEMAN_N / 2];
    for i in 0..WEIDEMAN_N / 2 {
        weideman_even[i] = coefficient(2 * i + 1);
        weideman_odd[i] = coefficient(2 * i + 2);
    }
    Tables {
        gauss,
        dawson,
        weideman_even,
        weideman_odd,
        weideman_l: l,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // -----------------------------------------------------------------------------------------
    // Slow reference twin: H and L by adaptive Gauss–Legendre quadrature of their integrals
    // -----------------------------------------------------------------------------------------

    /// Gauss–Legendre nodes and weights on [−1, 1] (Newton's method on P_n).
    fn gauss_legendre(n: usize) -> Vec<(f64, f64)> {
        let legendre = |x: f64| {
            let (mut p0, mut p1) = (1.0, x);
            for k in 2..=n {
                let k = k as f64;
                let p2 = ((2.0 * k - 1.0) * x * p1 - (k - 1.0) * p0) / k;
                p0 = p1;
                p1 = p2;
            }
            // P_n(x) and P_n'(x).
            (p1, n as f64 * (x * p1 - p0) / (x * x - 1.0))
        };
        (0..n)
            .map(|i| {
                let mut x = (std::f64::consts::PI * (i as f64 + 0.75) / (n as f64 + 0.5)).cos();
                for _ in 0..100 {
                    let (p, dp) = legendre(x);
                    let dx = p / dp;
                    x -= dx;
                    if dx.abs() < 1e-16 {
                        break;
                    }
                }
                let (_, dp) = legendre(x);
                (x, 2.0 / ((1.0 - x * x) * dp * dp))
            })
            .collect()
    }

    struct Quadrature {
        rule: Vec<(f64, f64)>,
    }

    impl Quadrature {
        fn new() -> Quadrature {
            Quadrature {
                rule: gauss_legendre(20),
            }
        }

        fn fixed(&self, f: &dyn Fn(f64) -> f64, lo: f64, hi: f64) -> f64 {
            let (mid, half) = (0.5 * (lo + hi), 0.5 * (hi - lo));
            half * self
                .rule
                .iter()
                .map(|&(x, w)| w * f(mid + half * x))
                .sum::<f64>()
        }

        /// Bisect [lo, hi] until the two halves agree with the whole (`whole`, its integral
        /// by one rule) to 10⁻¹⁴ relative or to `floor` absolute, at most 60 levels deep.
        fn adaptive(
            &self,
            f: &dyn Fn(f64) -> f64,
            (lo, hi): (f64, f64),
            whole: f64,
            floor: f64,
            depth: u32,
        ) -> f64 {
            let mid = 0.5 * (lo + hi);
            let (left, right) = (self.fixed(f, lo, mid), self.fixed(f, mid, hi));
            let both = left + right;
            if (both - whole).abs() <= 1e-14 * both.abs() + floor || depth == 60 {
                return both;
            }
            self.adaptive(f, (lo, mid), left, floor, depth + 1)
                + self.adaptive(f, (mid, hi), right, floor, depth + 1)
        }

        /// ∫ f over the real line split at `breaks` (sorted), f negligible beyond their ends.
        fn integral(&self, f: &dyn Fn(f64) -> f64, g: &dyn Fn(f64) -> f64, breaks: &[f64]) -> f64 {
            // Scale for the absolute floor: the integral of |f| (g = |f|), coarsely.
            let scale: f64 = breaks.windows(2).map(|w| self.fixed(g, w[0], w[1])).sum();
            breaks
                .windows(2)
                .map(|w| {
                    let whole = self.fixed(f, w[0], w[1]);
                    self.adaptive(f, (w[0], w[1]), whole, 1e-17 * scale, 0)
                })
                .sum()
        }
    }

    /// (H, L) = (Re w, Im w)(v + ia) from (a/π) ∫ e^{−t²}/((v−t)² + a²) dt and
    /// (1/π) ∫ e^{−t²}(v−t)/((v−t)² + a²) dt, split at 0, ±1, ±2, ±4, ±8 and at v ± a·2^k.
    fn twin(q: &Quadrature, a: f64, v: f64) -> (f64, f64) {
        const T: f64 = 12.0; // e^{−144}: nothing beyond
        let mut breaks = vec![-T, -8.0, -4.0, -2.0, -1.0, 0.0, 1.0, 2.0, 4.0, 8.0, T];
        if v.abs() < T {
            breaks.push(v);
        }
        let mut d = a;
        while d < 2.0 * T + v.abs() {
            for p in [v - d, v + d] {
                if p.abs() < T {
                    breaks.push(p);
                }
            }
            d *= 2.0;
        }
        breaks.sort_by(f64::total_cmp);
        breaks.dedup_by(|p, q| (*p - *q).abs() <= 1e-300);
        let pi = std::f64::consts::PI;
        let re = |t: f64| a / pi * (-t * t).exp() / ((v - t) * (v - t) + a * a);
        let im = |t: f64| (-t * t).exp() * (v - t) / ((v - t) * (v - t) + a * a) / pi;
        let im_abs = |t: f64| im(t).abs();
        (
            q.integral(&re, &re, &breaks),
            q.integral(&im, &im_abs, &breaks),
        )
    }

    fn rel(value: f64, reference: f64) -> f64 {
        (value - reference).abs() / reference.abs()
    }

    fn log_space(lo: f64, hi: f64, n: usize) -> impl Iterator<Item = f64> {
        (0..n).map(move |i| lo * (hi / lo).powf(i as f64 / (n - 1) as f64))
    }

    /// The test domain as a log grid, plus points on both sides of every region boundary.
    fn test_points() -> Vec<(f64, f64)> {
        let mut points = Vec::new();
        for a in log_space(1e-5, 1e2, 60) {
            points.push((a, 0.0));
            for v in log_space(1e-3, 1e4, 49) {
                points.push((a, v));
            }
        }
        let eps = [-1e-9, 1e-9];
        for e in eps {
            for v in [0.0, 0.5, 2.0, 4.0, 5.5, 6.5, 6.7] {
                points.push((TAYLOR_MAX_Y * (1.0 + e), v));
            }
            for a in [1e-5, 1e-3, 0.05, 0.0999] {
                points.push((a, TAYLOR_MAX_X * (1.0 + e)));
            }
            for r in [CORE_RADIUS, RADIUS_CF5, RADIUS_CF3] {
                for angle in [0.02, 0.3, 0.8, 1.2, 1.5] {
                    let (s, c) = f64::sin_cos(angle);
                    let r = r * (1.0 + e);
                    if r * s >= 1e-5 {
                        points.push((r * s, r * c));
                    }
                }
            }
            for v in [-1.0, 3.0] {
                points.push((TINY_Y * (1.0 + e), v + 10.0));
            }
        }
        points
    }

    #[test]
    fn matches_the_quadrature_twin_across_the_domain() {
        let q = Quadrature::new();
        let points = test_points();
        let reference: Vec<(f64, f64)> = points.iter().map(|&(a, v)| twin(&q, a, v)).collect();
        // Both flavours of multiply-add (the fused one through the library's fma, whatever the
        // processor) and the public function (the flavour this processor gets).
        type Flavour = fn(f64, f64) -> (f64, f64);
        let flavours: [(&str, Flavour); 3] = [
            ("separate", |a, v| w_first_quadrant::<Separate>(v, a)),
            ("fused", |a, v| w_first_quadrant::<Fused>(v, a)),
            ("public", |a, v| faddeeva(v, a)),
        ];
        for (name, w) in flavours {
            let (mut worst_re, mut at_re) = (0.0, (0.0, 0.0));
            let (mut worst_im, mut at_im) = (0.0, (0.0, 0.0));
            for (&(a, v), &(h, l)) in points.iter().zip(&reference) {
                let (re, im) = w(a, v);
                let e = rel(re, h);
                if e > worst_re {
                    (worst_re, at_re) = (e, (a, v));
                }
                // Im w crosses zero at v = 0: measure it against |w|.
                let e = (im - l).abs() / h.hypot(l);
                if e > worst_im {
                    (worst_im, at_im) = (e, (a, v));
                }
            }
            println!(
                "{name}: {} points: max rel error of H {worst_re:.2e} at (a, v) = {at_re:?}; \
                 max |Im error|/|w| {worst_im:.2e} at {at_im:?}",
                points.len()
            );
            assert!(worst_re < 1e-9, "{name} H: {worst_re:e} at {at_re:?}");
            assert!(worst_im < 1e-9, "{name} Im w: {worst_im:e} at {at_im:?}");
        }
    }

    #[test]
    fn twin_is_consistent_with_known_values() {
        // The twin itself, on closed forms: H(a, 0) = e^{a²} erfc(a) at a = 1 is
        // 0.4275835761558070 (e·erfc(1), erfc(1) = 0.1572992070502851: A&S table 7.1 /
        // common knowledge, from memory), and the Lorentzian wing a/(√π v²) for v ≫ 1.
        let q = Quadrature::new();
        let (h, l) = twin(&q, 1.0, 0.0);
        assert!(
            rel(h, std::f64::consts::E * 0.157_299_207_050_285_1) < 1e-13,
            "{h}"
        );
        assert!(l.abs() < 1e-15, "{l}");
        let (a, v) = (1e-3, 1e4);
        let (h, _) = twin(&q, a, v);
        assert!(rel(h, a * FRAC_1_SQRT_PI / (v * v)) < 1e-7, "{h}");
    }

    #[test]
    fn even_in_v_and_faddeeva_odd_part() {
        for &(a, v) in &test_points() {
            assert_eq!(
                voigt_h(a, v).to_bits(),
                voigt_h(a, -v).to_bits(),
                "a={a} v={v}"
            );
            let (re, im) = faddeeva(v, a);
            let (re_m, im_m) = faddeeva(-v, a);
            assert_eq!(re.to_bits(), voigt_h(a, v).to_bits());
            assert_eq!(re_m.to_bits(), re.to_bits());
            if v > 0.0 {
                assert_eq!(im_m.to_bits(), (-im).to_bits(), "a={a} v={v}");
            }
        }
    }

    #[test]
    fn normalised_to_root_pi() {
        // ∫ H dv = 2 (∫₀^V H dv + ∫₀¹ H(a, V/u) V/u² du): the substitution v = V/u maps the
        // a/(√π v²) wing onto a bounded integrand.
        let q = Quadrature::new();
        for a in [1e-4, 1e-2, 0.3, 1.0, 30.0] {
            let wing = 20.0 + 10.0 * a;
            let core = |v: f64| voigt_h(a, v);
            let tail = |u: f64| {
                if u > 0.0 {
                    voigt_h(a, wing / u) * wing / (u * u)
                } else {
                    a * FRAC_1_SQRT_PI / wing
                }
            };
            let mut breaks: Vec<f64> = vec![0.0, 1.0, 2.0, 3.0, 4.0, 6.0, 8.0, wing];
            breaks.retain(|&b| b <= wing);
            breaks.dedup();
            let inner = q.integral(&core, &core, &breaks);
            let outer = q.integral(&tail, &tail, &[0.0, 0.25, 0.5, 1.0]);
            let total = 2.0 * (inner + outer);
            let pi_sqrt = std::f64::consts::PI.sqrt();
            assert!(
                rel(total, pi_sqrt) < 1e-9,
                "a={a}: ∫H dv = {total}, √π = {pi_sqrt}"
            );
        }
    }

    #[test]
    fn gaussian_limit() {
        for i in 0..=3000 {
            let v = i as f64 * 0.01;
            // a = 0 is computed as exp(−v²) itself.
            let g = (-v * v).exp();
            assert_eq!(voigt_h(0.0, v).to_bits(), g.to_bits(), "v={v}");
            // a → 0 from above.
            let h = voigt_h(1e-14, v);
            let lorentz = 1e-14 * FRAC_1_SQRT_PI / (v * v).max(1.0);
            assert!(
                (h - g).abs() <= 1e-9 * g + 10.0 * lorentz,
                "v={v}: {h} vs {g}"
            );
        }
        for v in [30.0, 1e3, 1e200, f64::INFINITY] {
            assert_eq!(voigt_h(0.0, v).to_bits(), 0, "v={v}: not +0");
        }
    }

    #[test]
    fn lorentzian_wing() {
        for a in [1e-5, 1e-2, 1.0, 100.0] {
            for v in [1e3, 1e4, 1e6] {
                let wing = a * FRAC_1_SQRT_PI / (v * v);
                // H = a/(√π v²) (1 + (3/2 − a²)/v² + …).
                let tol = 2.0 * (1.5 + a * a) / (v * v) + 1e-12;
                assert!(rel(voigt_h(a, v), wing) < tol, "a={a} v={v}");
            }
        }
    }

    #[test]
    fn large_a_and_edge_inputs() {
        // a > 100: H(a, 0) = e^{a²} erfc(a) → 1/(√π a) (1 − 1/(2a²) + 3/(4a⁴)).
        for a in [200.0, 1e4, 1e8, 1e150, 1e300] {
            let expected = FRAC_1_SQRT_PI / a * (1.0 - 0.5 / (a * a) + 0.75 / a.powi(4));
            assert!(rel(voigt_h(a, 0.0), expected) < 1e-12, "a={a}");
            assert!(voigt_h(a, 3.0 * a).is_finite());
        }
        assert_eq!(voigt_h(f64::INFINITY, 1.0).to_bits(), 0);
        assert!(voigt_h(-1e-3, 1.0).is_nan());
        assert!(voigt_h(f64::NAN, 1.0).is_nan());
        assert!(voigt_h(1.0, f64::NAN).is_nan());
        let (re, im) = faddeeva(1.0, -0.5);
        assert!(re.is_nan() && im.is_nan());
    }

    #[test]
    fn slice_is_bitwise_the_scalar_function() {
        // A fixed-seed scatter over every region plus the special inputs.
        let mut state: u64 = 0x2545_f491_4f6c_dd1d;
        let mut uniform = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            (state >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut a = Vec::new();
        let mut v = Vec::new();
        for _ in 0..20_000 {
            a.push(10f64.powf(-7.0 + 10.0 * uniform()));
            let s = if uniform() < 0.5 { -1.0 } else { 1.0 };
            v.push(s * 10f64.powf(-4.0 + 10.0 * uniform()));
        }
        for (x, y) in [
            (0.0, 0.0),
            (0.0, 3.0),
            (-1.0, 2.0),
            (f64::NAN, 1.0),
            (1.0, f64::NAN),
            (f64::INFINITY, 0.1),
            (1e300, 5.0),
            (2.0, 1e-300),
        ] {
            a.push(x);
            v.push(y);
        }
        let mut out = vec![0.0; a.len()];
        voigt_h_slice(&a, &v, &mut out);
        for i in 0..a.len() {
            assert_eq!(
                out[i].to_bits(),
                voigt_h(a[i], v[i]).to_bits(),
                "a={} v={}",
                a[i],
                v[i]
            );
        }
        // Each flavour on its own (the fused one through the library's fma).
        slice_flavoured::<Separate>(&a, &v, &mut out);
        for i in 0..a.len() {
            let h = w_first_quadrant::<Separate>(v[i].abs(), a[i]).0;
            assert_eq!(out[i].to_bits(), h.to_bits(), "a={} v={}", a[i], v[i]);
        }
        slice_flavoured::<Fused>(&a, &v, &mut out);
        for i in 0..a.len() {
            let h = w_first_quadrant::<Fused>(v[i].abs(), a[i]).0;
            assert_eq!(out[i].to_bits(), h.to_bits(), "a={} v={}", a[i], v[i]);
        }
        // Short and empty slices.
        let mut short = [0.0; 3];
        voigt_h_slice(&a[..3], &v[..3], &mut short);
        assert_eq!(
            short.map(f64::to_bits),
            [0, 1, 2].map(|i| voigt_h(a[i], v[i]).to_bits())
        );
        voigt_h_slice(&[], &[], &mut []);
    }

    #[test]
    fn convergent_polynomials_are_the_continued_fraction() {
        // Bottom-up evaluation of (i/√π)/(z − ½/(z − 1/(z − …))) with n − 1 fractions against
        // the closed forms.
        let mul = |(a, b): (f64, f64), (c, d): (f64, f64)| (a * c - b * d, a * d + b * c);
        let div = |(a, b): (f64, f64), (c, d): (f64, f64)| {
            let m = c * c + d * d;
            ((a * c + b * d) / m, (b * c - a * d) / m)
        };
        for (c, n) in [(&CF3, 3), (&CF5, 5), (&CF9, 9)] {
            for (x, y) in [(7.0, 0.3), (20.0, 1e-4), (3.0, 9.0), (100.0, 50.0)] {
                let mut r = (0.0, 0.0);
                for k in (1..n).rev() {
                    r = div((k as f64 / 2.0, 0.0), (x - r.0, y - r.1));
                }
                let w = mul((0.0, FRAC_1_SQRT_PI), div((1.0, 0.0), (x - r.0, y - r.1)));
                let (re, im) = continued_fraction::<f64, Separate>(c, x, y);
                assert!(
                    rel(re, w.0) < 1e-13 && rel(im, w.1) < 1e-13,
                    "n={n} z={x}+{y}i"
                );
            }
        }
    }
}

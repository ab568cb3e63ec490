//! Slow reference twin of the hydrogen oscillator-strength kernel: the same closed form
//! (Gordon 1929; Menzel & Pekeris 1935) evaluated in exact rational arithmetic, then rounded
//! once to f64. The fast kernel must agree to 1e-11 relative for every pair with
//! 1 ≤ n < n′ ≤ 40 (lower shells to 10).

use linegrid::atoms::hydrogenic::gordon_oscillator_strength;
use num_bigint::BigInt;
use num_rational::BigRational;
use num_traits::{One, Signed, ToPrimitive, Zero};

fn q(v: i64) -> BigRational {
    BigRational::from_integer(BigInt::from(v))
}

/// ₂F₁(−a, −b; 1; x) exactly.
fn hyp(a: i64, b: i64, x: &BigRational) -> BigRational {
    let mut term = BigRational::one();
    let mut sum = BigRational::one();
    for k in 0..a.min(b) {
        term = term * q((k - a) * (k - b)) * x / q((k + 1) * (k + 1));
        sum += &term;
    }
    sum
}

fn exact_f(n: i64, m: i64) -> f64 {
    let d = m - n;
    let x = BigRational::new(BigInt::from(-4 * n * m), BigInt::from(d * d));
    let fa = hyp(n, m - 1, &x);
    let fb = hyp(n - 1, m, &x);
    let diff = (&fa * &fa - &fb * &fb).abs();
    let s = 2 * n + 2 * m;
    let num = BigInt::from(32)
        * BigInt::from(n * n)
        * BigInt::from(m).pow(4)
        * BigInt::from(d).pow((s - 4) as u32);
    let den = BigInt::from(3) * BigInt::from(n + m).pow((s + 3) as u32);
    let f = BigRational::new(num, den) * diff;
    assert!(!f.is_zero());
    // Convert via a scaled integer to keep all f64 digits.
    let scale = BigInt::from(10).pow(30);
    let scaled = (f * BigRational::from_integer(scale.clone())).to_integer();
    scaled.to_f64().unwrap() / scale.to_f64().unwrap()
}

#[test]
fn closed_form_matches_exact_arithmetic() {
    let mut worst: f64 = 0.0;
    for n in 1..=10i64 {
        for m in n + 1..=40 {
            let fast = gordon_oscillator_strength(n as u32, m as u32);
            let exact = exact_f(n, m);
            let rel = (fast / exact - 1.0).abs();
            worst = worst.max(rel);
            assert!(
                rel < 1e-11,
                "f({n}->{m}): {fast} vs exact {exact} (rel {rel:e})"
            );
        }
    }
    eprintln!("worst relative difference {worst:e}");
}

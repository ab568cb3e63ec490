//! Partition functions U(T) = Σ g_i w_i exp(−E_i/kT).
//!
//! Tabulated species sum their curated level lists (levels above a Debye-lowered limit are
//! dropped in that mode). Hydrogen-like species sum bundled shells n = 1, 2, … with the
//! occupation probabilities w_n (or a hard cut at the lowered limit), stopping once a
//! rigorous bound on the remaining terms falls below 10⁻¹⁶ of the sum, or at
//! [`MAX_SHELL`].

use crate::atoms::Level;
use crate::atoms::hydrogenic::Hydrogenic;
use crate::constants::HC_OVER_K;

use super::occupation::OccupationModel;

/// The largest principal quantum number ever summed (reached only below ~10⁻⁴ cm⁻³).
pub const MAX_SHELL: u32 = 20_000;

/// Partition function of a tabulated level list at temperature `t`, keeping levels below
/// `limit_cm` (cm⁻¹ above the ground level; `f64::INFINITY` keeps all).
pub fn tabulated(levels: &[Level], t: f64, limit_cm: f64) -> f64 {
    let c = -HC_OVER_K / t;
    levels
        .iter()
        .take_while(|l| l.energy_cm < limit_cm)
        .map(|l| l.g * (c * l.energy_cm).exp())
        .sum::<f64>()
        .max(levels.first().map_or(1.0, |l| l.g))
}

/// How the shells of a hydrogen-like species end.
#[derive(Debug, Clone, Copy)]
pub enum ShellWeights {
    /// Occupation probabilities.
    Occupation(OccupationModel),
    /// Shells with binding energy above `min_binding_cm` count fully, the rest not at all.
    HardCut {
        /// Smallest binding energy (cm⁻¹) a shell must have.
        min_binding_cm: f64,
    },
    /// Shells n ≤ `max_shell` count fully, the rest not at all.
    MaxShell {
        /// Highest shell counted.
        max_shell: u32,
    },
}

impl ShellWeights {
    /// Weight of shell n.
    pub fn w(&self, h: &Hydrogenic, n: u32) -> f64 {
        match self {
            ShellWeights::Occupation(m) => m.w(n),
            ShellWeights::HardCut { min_binding_cm } => {
                if h.binding_wavenumber(n) > *min_binding_cm {
                    1.0
                } else {
                    0.0
                }
            }
            ShellWeights::MaxShell { max_shell } => {
                if n <= *max_shell {
                    1.0
                } else {
                    0.0
                }
            }
        }
    }

    /// First shell whose weight is negligible (< 10⁻¹⁶), capped at [`MAX_SHELL`] + 1.
    /// Weights never rise with n, so this is found by bisection.
    pub fn end_shell(&self, h: &Hydrogenic) -> u32 {
        let negligible = |n: u32| self.w(h, n) < 1e-16;
        if !negligible(MAX_SHELL) {
            return MAX_SHELL + 1;
        }
        let (mut lo, mut hi) = (1u32, MAX_SHELL); // w(lo) may or may not be negligible
        if negligible(lo) {
            return lo;
        }
        while hi - lo > 1 {
            let mid = lo + (hi - lo) / 2;
            if negligible(mid) {
                hi = mid;
            } else {
                lo = mid;
            }
        }
        hi
    }
}

/// Partition function of a hydrogen-like species and the number of shells summed.
pub fn hydrogenic(h: &Hydrogenic, t: f64, weights: &ShellWeights) -> (f64, u32) {
    let end = weights.end_shell(h);
    let c = -HC_OVER_K / t;
    let ground = h.binding_wavenumber(1);
    let mut u = 0.0;
    let mut n = 1;
    while n < end {
        let boltz = (c * (ground - h.binding_wavenumber(n))).exp();
        u += Hydrogenic::weight(n) * weights.w(h, n) * boltz;
        // Bound on the rest: Σ_{m=n+1}^{end-1} 2m² w_m e^{-E_m/kT} ≤ e^{-E_n/kT} (2/3)(end)³.
        let e = f64::from(end);
        if n >= 2 && boltz * (2.0 / 3.0) * e * e * e < 1e-16 * u {
            break;
        }
        n += 1;
    }
    (
        u.max(Hydrogenic::weight(1) * weights.w(h, 1))
            .max(f64::MIN_POSITIVE),
        n.min(end - 1).max(1),
    )
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::eos::occupation::Perturbers;

    fn plasma(ne: f64, t: f64) -> Perturbers {
        Perturbers {
            temperature: t,
            electron_density: ne,
            ion_charge_squared_density: ne,
            neutral_hydrogen: 0.0,
            neutral_helium: 0.0,
        }
    }

    #[test]
    fn hydrogen_partition_is_two_at_low_temperature() {
        // Common practice, no source (and physics.md §3): U(H I) = 2 to 1e-6 at 5000 K and low
        // density, where the n = 2 Boltzmann factor is 8 e^{-23.7} ≈ 4e-10.
        let h = Hydrogenic::HYDROGEN;
        let w = ShellWeights::Occupation(OccupationModel::new(1, &plasma(1e10, 5000.0)));
        let (u, _) = hydrogenic(&h, 5000.0, &w);
        assert!((u - 2.0).abs() < 1e-6, "{u}");
    }

    #[test]
    fn hydrogen_partition_matches_a_direct_sum() {
        // Slow reference twin: sum every shell to MAX_SHELL with no early stop.
        let h = Hydrogenic::HYDROGEN;
        for (ne, t) in [
            (1e12, 12000.0),
            (1e15, 20000.0),
            (1e17, 9000.0),
            (1e8, 40000.0),
        ] {
            let m = OccupationModel::new(1, &plasma(ne, t));
            let w = ShellWeights::Occupation(m);
            let (u, _) = hydrogenic(&h, t, &w);
            let c = -HC_OVER_K / t;
            let direct: f64 = (1..=MAX_SHELL)
                .map(|n| 2.0 * f64::from(n * n) * m.w(n) * (c * h.excitation_wavenumber(n)).exp())
                .sum();
            assert!(
                (u / direct - 1.0).abs() < 1e-13,
                "ne={ne} T={t}: {u} vs {direct}"
            );
        }
    }

    #[test]
    fn hard_cut_drops_shells_above_the_lowered_limit() {
        let h = Hydrogenic::HYDROGEN;
        // Keep shells bound by more than R/100 → n ≤ 9 (R_H/81 > R_H/100 > R_H/100 at n = 10).
        let w = ShellWeights::HardCut {
            min_binding_cm: h.rydberg() / 100.0 * 1.0001,
        };
        assert_eq!(w.end_shell(&h), 10);
        let t = 30000.0;
        let (u, _) = hydrogenic(&h, t, &w);
        let c = -HC_OVER_K / t;
        let direct: f64 = (1..=9u32)
            .map(|n| 2.0 * f64::from(n * n) * (c * h.excitation_wavenumber(n)).exp())
            .sum();
        assert!((u / direct - 1.0).abs() < 1e-14);
    }

    #[test]
    fn tabulated_sum_and_limit() {
        let levels = [
            Level {
                energy_cm: 0.0,
                g: 2.0,
            },
            Level {
                energy_cm: 1000.0,
                g: 4.0,
            },
            Level {
                energy_cm: 5000.0,
                g: 6.0,
            },
        ];
        let t = 3000.0;
        let want = 2.0 + 4.0 * (-HC_OVER_K * 1000.0 / t).exp();
        assert!((tabulated(&levels, t, 2000.0) - want).abs() < 1e-14);
        assert!(tabulated(&levels, t, f64::INFINITY) > want);
    }
}

//! Non-LTE-lite: a bundled-n hydrogen collisional–radiative model.
//!
//! Shells n = 1 … N plus the continuum (protons) in statistical equilibrium:
//!
//! * spontaneous emission in every line, multiplied by an escape probability from the slab's
//!   own line-centre optical depth, β(τ) = (1 − e^{−3τ})/(3τ), the plane-parallel slab form of
//!   de Jong, Boland & Dalgarno (1980, A&A 91, 68; from memory); the line's photons that do not
//!   escape are reabsorbed on the spot, so the net radiative rate is β times the optically
//!   thin one (the escape-probability closure);
//! * photo-excitation and stimulated emission by a diluted Planck field of dilution W and
//!   temperature T_R (W = 0: no external field), seen through the same escape probability;
//! * two-photon decay of 2s (A = 8.23 s⁻¹, Spitzer & Greenstein 1951, from memory) shared
//!   over the bundled n = 2 shell (2s holds 2 of its 8 states), both photons taken at half the
//!   transition energy for the induced terms;
//! * photo-ionisation by the diluted field and radiative recombination (spontaneous and
//!   stimulated) to every shell, from the Kramers cross-sections by the Milne relation;
//! * electron-impact excitation and ionisation (Vriens & Smeets 1980), with de-excitation and
//!   three-body recombination from detailed balance.
//!
//! Charge conservation closes the system: n_e = n_p + n_e(other elements). The unknowns are
//! x_i = b_i n_p with n_i = b_i n_i* and n_i* = n_e n_p Φ_i(T), so that the equations are linear
//! in (x, n_p) at fixed n_e and the LTE solution is x_i = n_p. The linear system is solved by
//! dense LU with partial pivoting; n_e and the escape probabilities are iterated together.
//!
//! Pure: no files, terminal or threads.

pub mod rates;

use crate::atoms::hydrogenic::Hydrogenic;
use crate::constants::{AMU, C, EV, H, HC, K_B, PI_E2_OVER_MC, saha_constant};

/// Default number of bundled shells.
pub const DEFAULT_LEVELS: u32 = 20;
/// Largest accepted number of shells (the closed-form oscillator strengths stay finite to
/// n ≈ 72 in double precision).
pub const MAX_LEVELS: u32 = 70;
/// Two-photon decay rate of H 2s → 1s, s⁻¹ (Spitzer & Greenstein 1951, from memory).
pub const TWO_PHOTON_2S: f64 = 8.23;
/// Mass of the hydrogen atom in atomic mass units (for Doppler widths).
const HYDROGEN_MASS_AMU: f64 = 1.007_94;

/// The external radiation field: a Planck spectrum of temperature `temperature` diluted by
/// `dilution` (W = 1: a black body; W = 0: darkness).
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct RadiationField {
    /// Dilution factor W, 0 ≤ W ≤ 1.
    pub dilution: f64,
    /// Radiation temperature T_R, K (ignored when W = 0).
    pub temperature: f64,
}

impl RadiationField {
    /// No radiation field.
    pub const DARK: RadiationField = RadiationField {
        dilution: 0.0,
        temperature: 1.0e4,
    };
}

/// How line photons escape.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Escape {
    /// Every line optically thin (β = 1).
    Thin,
    /// A homogeneous slab of this thickness (cm) and microturbulence (cm s⁻¹): β from the
    /// line-centre optical depth of the Doppler core normal to the slab.
    Slab {
        /// Thickness, cm.
        thickness: f64,
        /// Microturbulent velocity, cm s⁻¹.
        microturbulence: f64,
    },
}

/// Options of the collisional–radiative model.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct CrOptions {
    /// Number of bundled shells N.
    pub levels: u32,
    /// External radiation field.
    pub field: RadiationField,
    /// Line escape.
    pub escape: Escape,
    /// Case B (Baker & Menzel 1938): the Lyman lines are optically thick (β = 0) and
    /// recombinations to n = 1 are reabsorbed on the spot (omitted).
    pub case_b: bool,
}

impl Default for CrOptions {
    fn default() -> Self {
        CrOptions {
            levels: DEFAULT_LEVELS,
            field: RadiationField::DARK,
            escape: Escape::Thin,
            case_b: false,
        }
    }
}

/// One point to solve.
#[derive(Debug, Clone, PartialEq)]
pub struct CrInput {
    /// Electron temperature, K.
    pub temperature: f64,
    /// Hydrogen nuclei per cm³ (atoms and protons).
    pub hydrogen_density: f64,
    /// Electrons from everything but hydrogen, cm⁻³.
    pub other_electrons: f64,
    /// Occupation probabilities w_n of the shells (length ≥ N), or `None` for w = 1.
    pub occupation: Option<Vec<f64>>,
    /// Starting electron density (e.g. the LTE value), cm⁻³; `None`: a coronal guess.
    pub electron_density_guess: Option<f64>,
}

/// Why a solve failed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum CrFailure {
    /// The iteration limit was reached before populations, n_e and escape agreed.
    IterationLimit,
    /// The linear system was singular to working precision.
    Singular,
    /// A rate or population was not finite.
    NonFinite,
}

impl CrFailure {
    /// A stable numeric code (distinct from the equation-of-state codes 1–3).
    pub fn code(&self) -> u8 {
        match self {
            CrFailure::IterationLimit => 6,
            CrFailure::Singular => 7,
            CrFailure::NonFinite => 8,
        }
    }
}

/// Errors of [`solve`].
#[derive(Debug, Clone, thiserror::Error)]
pub enum CrError {
    /// Invalid input.
    #[error("invalid {field} = {value}: {expected}")]
    Invalid {
        /// The option.
        field: &'static str,
        /// Its value.
        value: f64,
        /// The accepted range.
        expected: &'static str,
    },
    /// No converged solution.
    #[error(
        "collisional-radiative populations not converged at T = {temperature} K, n_H = {hydrogen_density:e} cm^-3 ({reason:?}): {detail}"
    )]
    NotConverged {
        /// The reason.
        reason: CrFailure,
        /// Temperature, K.
        temperature: f64,
        /// Hydrogen density, cm⁻³.
        hydrogen_density: f64,
        /// Detail.
        detail: String,
    },
}

/// Population of one shell.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct CrLevel {
    /// Principal quantum number.
    pub n: u32,
    /// Number density, cm⁻³.
    pub population: f64,
    /// LTE population at the same n_e, n_p and T, cm⁻³.
    pub lte_population: f64,
    /// Departure coefficient b_n = population / lte_population.
    pub departure: f64,
}

/// Escape of one line.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize)]
pub struct LineEscape {
    /// Lower shell.
    pub lower: u32,
    /// Upper shell.
    pub upper: u32,
    /// Line-centre optical depth (normal, Doppler core, stimulated emission included).
    pub tau: f64,
    /// Escape probability.
    pub beta: f64,
}

/// A converged solution.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct CrSolution {
    /// Shells n = 1 … N.
    pub levels: Vec<CrLevel>,
    /// Protons, cm⁻³.
    pub proton_density: f64,
    /// Electrons, cm⁻³.
    pub electron_density: f64,
    /// Ionised fraction n_p/n_H.
    pub ionised_fraction: f64,
    /// Iterations used.
    pub iterations: u32,
    /// Escape of every line (lower < upper), in order (1,2), (1,3), …, (2,3), …
    pub escape: Vec<LineEscape>,
}

impl CrSolution {
    /// Departure coefficients b_1 … b_N.
    pub fn departures(&self) -> Vec<f64> {
        self.levels.iter().map(|l| l.departure).collect()
    }
}

/// The T-independent atomic data of an N-shell model.
#[derive(Debug, Clone)]
pub struct Model {
    n: usize,
    /// Binding energies, erg.
    chi: Vec<f64>,
    /// Binding wavenumbers, cm⁻¹.
    binding_cm: Vec<f64>,
    /// Binding energies, eV.
    chi_ev: Vec<f64>,
    /// Statistical weights 2n².
    g: Vec<f64>,
    /// A_ul at [u * n + l], s⁻¹.
    a: Vec<f64>,
    /// f_lu at [l * n + u].
    f: Vec<f64>,
}

impl Model {
    /// The model with `levels` shells.
    pub fn new(levels: u32) -> Model {
        let hyd = Hydrogenic::HYDROGEN;
        let n = levels as usize;
        let binding_cm: Vec<f64> = (1..=levels).map(|k| hyd.binding_wavenumber(k)).collect();
        let chi: Vec<f64> = binding_cm.iter().map(|b| HC * b).collect();
        let chi_ev = chi.iter().map(|c| c / EV).collect();
        let g = (1..=levels).map(Hydrogenic::weight).collect();
        let mut a = vec![0.0; n * n];
        let mut f = vec![0.0; n * n];
        for l in 0..n {
            for u in l + 1..n {
                let (lo, up) = (l as u32 + 1, u as u32 + 1);
                a[u * n + l] = hyd.einstein_a(lo, up);
                f[l * n + u] = hyd.oscillator_strength(lo, up);
            }
        }
        Model {
            n,
            chi,
            binding_cm,
            chi_ev,
            g,
            a,
            f,
        }
    }

    /// Number of shells.
    pub fn levels(&self) -> usize {
        self.n
    }
}

/// Rates that depend on T and the field but not on n_e or the populations.
struct Rates {
    /// n_i*/(n_e n_p), cm³.
    phi: Vec<f64>,
    /// Collisional excitation coefficients q_lu at [l * n + u], de-excitation q_ul at
    /// [u * n + l], cm³ s⁻¹.
    q: Vec<f64>,
    /// Collisional ionisation coefficients, cm³ s⁻¹.
    q_ion: Vec<f64>,
    /// Photo-ionisation per atom, s⁻¹.
    photo: Vec<f64>,
    /// Radiative recombination (spontaneous + stimulated) per LTE population, s⁻¹.
    recomb: Vec<f64>,
    /// Field occupation number in each line at [l * n + u].
    nbar: Vec<f64>,
    /// g_i w_i.
    gw: Vec<f64>,
    /// Two-photon (down, up) rates of n = 2 ↔ 1, s⁻¹ (without escape: both photons escape).
    two_photon: (f64, f64),
    /// Line-centre opacity per unit (n_l w_u/w_l − n_u g_l/g_u) and unit length, at [l * n + u].
    kappa: Vec<f64>,
}

fn validate(inp: &CrInput, opts: &CrOptions) -> Result<(), CrError> {
    let bad = |field, value, expected| {
        Err(CrError::Invalid {
            field,
            value,
            expected,
        })
    };
    let t = inp.temperature;
    if !(t.is_finite() && (1.0e3..=1.0e6).contains(&t)) {
        return bad("--temperature", t, "must be between 1000 and 1e6 K");
    }
    let nh = inp.hydrogen_density;
    if !(nh.is_finite() && nh > 0.0 && nh <= 1e30) {
        return bad(
            "hydrogen density",
            nh,
            "must be a positive number <= 1e30 cm^-3",
        );
    }
    if !(inp.other_electrons.is_finite() && inp.other_electrons >= 0.0) {
        return bad("other electrons", inp.other_electrons, "must be >= 0");
    }
    if opts.levels < 2 || opts.levels > MAX_LEVELS {
        return bad(
            "--cr-levels",
            f64::from(opts.levels),
            "must be between 2 and 70",
        );
    }
    let w = opts.field.dilution;
    if !(w.is_finite() && (0.0..=1.0).contains(&w)) {
        return bad("--dilution", w, "must lie in [0, 1]");
    }
    let tr = opts.field.temperature;
    if w > 0.0 && !(tr.is_finite() && tr > 0.0 && tr <= 1e7) {
        return bad(
            "--radiation-temperature",
            tr,
            "must be a positive number of kelvin",
        );
    }
    if let Escape::Slab {
        thickness,
        microturbulence,
    } = opts.escape
    {
        if !(thickness.is_finite() && thickness > 0.0) {
            return bad("--thickness", thickness, "must be a finite positive number");
        }
        if !(microturbulence.is_finite() && microturbulence >= 0.0) {
            return bad("--microturbulence", microturbulence, "must be >= 0");
        }
    }
    if let Some(w) = &inp.occupation {
        if w.len() < opts.levels as usize {
            return bad(
                "occupation probabilities",
                w.len() as f64,
                "need one per shell",
            );
        }
        if let Some(&bad_w) = w
            .iter()
            .find(|w| !(w.is_finite() && (0.0..=1.0).contains(*w)))
        {
            return bad("occupation probability", bad_w, "must lie in [0, 1]");
        }
    }
    Ok(())
}

/// Occupation probabilities below this count as dissolved levels (left out of the balance).
const DISSOLVED: f64 = 1e-100;

impl Model {
    fn rates(&self, inp: &CrInput, opts: &CrOptions) -> Rates {
        let n = self.n;
        let t = inp.temperature;
        let kt = K_B * t;
        let w = |i: usize| inp.occupation.as_ref().map_or(1.0, |w| w[i]);
        let saha = saha_constant() * t.powf(1.5);
        let phi: Vec<f64> = (0..n)
            .map(|i| {
                let wi = w(i);
                if wi < DISSOLVED {
                    0.0
                } else {
                    wi * self.g[i] / 2.0 / saha * (self.chi[i] / kt).exp()
                }
            })
            .collect();
        let field = opts.field;
        let mut q = vec![0.0; n * n];
        let mut nbar = vec![0.0; n * n];
        let mut kappa = vec![0.0; n * n];
        let doppler_v2 = 2.0 * kt / (HYDROGEN_MASS_AMU * AMU)
            + match opts.escape {
                Escape::Slab {
                    microturbulence, ..
                } => microturbulence * microturbulence,
                Escape::Thin => 0.0,
            };
        for l in 0..n {
            for u in l + 1..n {
                if phi[l] == 0.0 || phi[u] == 0.0 {
                    continue;
                }
                let f = self.f[l * n + u];
                let qlu = rates::excitation_rate(
                    l as u32 + 1,
                    u as u32 + 1,
                    self.chi_ev[l],
                    self.chi_ev[u],
                    f,
                    t,
                );
                q[l * n + u] = qlu;
                q[u * n + l] = qlu * phi[l] / phi[u];
                let nu = (self.chi[l] - self.chi[u]) / H;
                nbar[l * n + u] = rates::occupation(nu, field.dilution, field.temperature);
                let dnu_d = nu / C * doppler_v2.sqrt();
                kappa[l * n + u] = PI_E2_OVER_MC * f / (std::f64::consts::PI.sqrt() * dnu_d);
            }
        }
        let mut q_ion = vec![0.0; n];
        let mut photo = vec![0.0; n];
        let mut recomb = vec![0.0; n];
        for i in 0..n {
            if phi[i] == 0.0 {
                continue;
            }
            q_ion[i] = rates::ionisation_rate(self.chi_ev[i], t);
            let (p, sp, st) = rates::bound_free(
                i as u32 + 1,
                self.binding_cm[i],
                t,
                field.dilution,
                field.temperature,
            );
            photo[i] = p;
            recomb[i] = if opts.case_b && i == 0 { st } else { sp + st };
        }
        // Two-photon 2 → 1: down A(1 + ñ)², up (Φ₂/Φ₁)·A·ñ²·e^{hν/kT}… written so that the pair
        // balances exactly in a thermal field: up = (g₂w₂/(g₁w₁)) A ñ².
        let two_photon = if n >= 2 && phi[0] > 0.0 && phi[1] > 0.0 {
            let a2 = TWO_PHOTON_2S * 2.0 / 8.0;
            let nu_half = 0.5 * (self.chi[0] - self.chi[1]) / H;
            let nt = rates::occupation(nu_half, field.dilution, field.temperature);
            let ratio = w(1) * self.g[1] / (w(0) * self.g[0]);
            (a2 * (1.0 + nt) * (1.0 + nt), ratio * a2 * nt * nt)
        } else {
            (0.0, 0.0)
        };
        Rates {
            gw: (0..n).map(|i| self.g[i] * w(i)).collect(),
            phi,
            q,
            q_ion,
            photo,
            recomb,
            nbar,
            two_photon,
            kappa,
        }
    }
}

/// Escape probability of a plane-parallel slab of line-centre optical depth τ,
/// β = (1 − e^{−3τ})/(3τ) (de Jong, Boland & Dalgarno 1980, from memory); masing lines (τ < 0)
/// are treated as optically thin.
pub fn slab_escape(tau: f64) -> f64 {
    if tau <= 1e-8 {
        return if tau > 0.0 { 1.0 - 1.5 * tau } else { 1.0 };
    }
    -(-3.0 * tau).exp_m1() / (3.0 * tau)
}

/// Solve one point with a model built for it.
pub fn solve(inp: &CrInput, opts: &CrOptions) -> Result<CrSolution, CrError> {
    validate(inp, opts)?;
    solve_with(&Model::new(opts.levels), inp, opts)
}

/// The smallest relaxation of the escape iteration (in ln β).
const RELAX_FLOOR: f64 = 0.05;

/// A line at the edge of inversion, in an escape iteration that has stalled at the smallest
/// relaxation: its τ swings between large positive and negative values for a small change
/// of β, so that its fixed point lies where τ(β) is too steep for any relaxation. As
/// β ↦ β(τ(β)) is decreasing, a target above β puts the fixed point above it and one below
/// puts it below; once τ has changed sign twice (from the stall on), the line keeps that
/// bracket and halves it geometrically whenever the relaxed step would leave it. A bracket
/// shrunk to rounding is dropped (the rest of the atom may have moved the fixed point).
#[derive(Debug, Clone, Copy)]
struct InversionEdge {
    sign: f64,
    flips: u32,
    lo: f64,
    hi: f64,
}

impl Default for InversionEdge {
    fn default() -> Self {
        Self {
            sign: 0.0,
            flips: 0,
            lo: 0.0,
            hi: f64::INFINITY,
        }
    }
}

impl InversionEdge {
    /// The next β of a line given its optical depth, its present β, the target β(τ) and the
    /// relaxed step.
    fn step(&mut self, tau: f64, old: f64, target: f64, relaxed: f64) -> f64 {
        if self.sign * tau < 0.0 {
            self.flips += 1;
        }
        self.sign = tau.signum();
        if self.flips < 2 {
            return relaxed;
        }
        if self.hi <= self.lo * (1.0 + 1e-12) {
            (self.lo, self.hi) = (0.0, f64::INFINITY);
        }
        if target > old {
            self.lo = self.lo.max(old);
        } else if target < old {
            self.hi = self.hi.min(old);
        }
        if self.lo > 0.0 && self.hi.is_finite() && !(relaxed > self.lo && relaxed < self.hi) {
            (self.lo * self.hi).sqrt()
        } else {
            relaxed
        }
    }
}

/// Reusable work space of the linear solve.
struct Work {
    m: Vec<f64>,
    lu: Vec<f64>,
    rhs: Vec<f64>,
    perm: Vec<usize>,
}

/// Solve one point with a prepared model (its shell count must equal `opts.levels`).
pub fn solve_with(model: &Model, inp: &CrInput, opts: &CrOptions) -> Result<CrSolution, CrError> {
    validate(inp, opts)?;
    assert_eq!(
        model.n, opts.levels as usize,
        "model built for another shell count"
    );
    let n = model.n;
    let r = model.rates(inp, opts);
    let nh = inp.hydrogen_density;
    let other = inp.other_electrons;
    let fail = |reason, detail: String| CrError::NotConverged {
        reason,
        temperature: inp.temperature,
        hydrogen_density: nh,
        detail,
    };
    let thickness = match opts.escape {
        Escape::Thin => None,
        Escape::Slab { thickness, .. } => Some(thickness),
    };
    let w = |i: usize| inp.occupation.as_ref().map_or(1.0, |w| w[i]);
    let mut beta = vec![1.0; n * n];
    let mut edges = vec![InversionEdge::default(); n * n];
    if opts.case_b {
        // Lyman lines sit at [l = 0, u].
        beta[1..n].iter_mut().for_each(|b| *b = 0.0);
    }
    let mut work = Work {
        m: vec![0.0; (n + 1) * (n + 1)],
        lu: vec![0.0; (n + 1) * (n + 1)],
        rhs: vec![0.0; n + 1],
        perm: vec![0; n + 1],
    };
    // Electron density bracket and start.
    let (lo0, hi0) = (other.max(1e-20 * nh), other + nh);
    let (mut lo, mut hi) = (lo0, hi0);
    let mut y = inp
        .electron_density_guess
        .filter(|g| g.is_finite() && *g > 0.0)
        .unwrap_or(0.5 * (lo + hi))
        .clamp(lo, hi)
        .ln();
    let mut prev: Option<(f64, f64)> = None;
    let mut pops_prev: Vec<f64> = vec![f64::NAN; n + 1];
    let (mut relax, mut stalls, mut best_beta_change) = (1.0f64, 0u32, f64::INFINITY);
    let max_iter = 400u32;
    let tol = 1e-9;
    let _ = &work.perm;
    for iter in 1..=max_iter {
        let ne = y.exp();
        let x = assemble_and_solve(model, &r, &beta, ne, nh, &mut work)
            .map_err(|e| fail(e, format!("at n_e = {ne:e} cm^-3")))?;
        let np = x[n];
        let pops: Vec<f64> = (0..n).map(|i| x[i] * ne * r.phi[i]).collect();
        if !(np.is_finite() && pops.iter().all(|p| p.is_finite())) {
            return Err(fail(CrFailure::NonFinite, format!("at n_e = {ne:e} cm^-3")));
        }
        // Escape probabilities from these populations.
        let mut beta_change = 0.0f64;
        if let Some(l_cm) = thickness {
            for l in 0..n {
                for u in l + 1..n {
                    if r.kappa[l * n + u] == 0.0 || (opts.case_b && l == 0) {
                        continue;
                    }
                    let net = pops[l] * w(u) / w(l) - pops[u] * model.g[l] / model.g[u];
                    let tau = r.kappa[l * n + u] * net * l_cm;
                    let target = slab_escape(tau);
                    let k = l * n + u;
                    let old = beta[k];
                    let mut b = target;
                    if relax < 1.0 && old > 0.0 && b > 0.0 {
                        // Under-relaxed in ln β once the plain iteration has shown it swings.
                        b = (old.ln() + relax * (b.ln() - old.ln())).exp();
                    }
                    if relax <= RELAX_FLOOR {
                        b = edges[k].step(tau, old, target, b);
                    }
                    beta_change = beta_change.max((b - old).abs() / old.max(b).max(1e-300));
                    beta[k] = b;
                }
            }
        }
        // An escape iteration that does not shrink (very thick lines flip between two
        // states) is damped, harder each time it stalls again.
        if beta_change < 0.7 * best_beta_change {
            best_beta_change = beta_change;
            stalls = 0;
        } else if beta_change > 1e-3 {
            stalls += 1;
            if stalls >= 4 {
                relax = (relax * 0.5).max(RELAX_FLOOR);
                stalls = 0;
                best_beta_change = beta_change;
            }
        }
        // Charge conservation in log n_e: g(y) = ln(n_p + other) − y. While the escape
        // probabilities still move, the function itself moves: forget bracket and history.
        if beta_change > 1e-6 {
            lo = lo0;
            hi = hi0;
            prev = None;
        }
        let target = (np + other).max(1e-300);
        let g = target.ln() - y;
        if g > 0.0 {
            lo = lo.max(ne);
        } else {
            hi = hi.min(ne);
        }
        let mut pop_change = 0.0f64;
        for (&p, &q) in pops.iter().chain(std::iter::once(&np)).zip(&pops_prev) {
            let d = (p - q).abs() / p.abs().max(q.abs()).max(1e-300 * nh);
            pop_change = pop_change.max(if d.is_nan() { 1.0 } else { d });
        }
        pops_prev[..n].copy_from_slice(&pops);
        pops_prev[n] = np;
        // Converged when charge, populations and escape agree, or when the electron-density
        // bracket has shrunk to rounding (the residual is then the solve's own noise).
        let collapsed = hi <= lo * (1.0 + 8.0 * f64::EPSILON) && pop_change < 1e3 * tol;
        // Where the linear solve's own noise exceeds the tolerance (minute neutral
        // populations in hot gas, say), the tolerance widens after 40 iterations by a decade
        // per 40, to at most 10⁻⁶.
        let tol_now = if iter > 40 {
            (tol * 10f64.powf(f64::from(iter - 40) / 40.0)).min(1e-6)
        } else {
            tol
        };
        if (g.abs() < tol_now && pop_change < tol_now || collapsed) && beta_change < tol_now {
            let levels = (0..n)
                .map(|i| {
                    let lte = ne * np * r.phi[i];
                    CrLevel {
                        n: i as u32 + 1,
                        population: pops[i],
                        lte_population: lte,
                        departure: if r.phi[i] > 0.0 { x[i] / np } else { 1.0 },
                    }
                })
                .collect();
            let mut escape = Vec::with_capacity(n * (n - 1) / 2);
            for l in 0..n {
                for u in l + 1..n {
                    let b = beta[l * n + u];
                    let tau = match thickness {
                        Some(l_cm) => {
                            let net = pops[l] * w(u) / w(l).max(DISSOLVED)
                                - pops[u] * model.g[l] / model.g[u];
                            r.kappa[l * n + u] * net * l_cm
                        }
                        None => 0.0,
                    };
                    escape.push(LineEscape {
                        lower: l as u32 + 1,
                        upper: u as u32 + 1,
                        tau,
                        beta: b,
                    });
                }
            }
            return Ok(CrSolution {
                levels,
                proton_density: np,
                electron_density: ne,
                ionised_fraction: np / nh,
                iterations: iter,
                escape,
            });
        }
        // Next n_e: secant on g (slope in [−2, −1] for Saha-like ionisation), safeguarded.
        let slope = match prev {
            Some((yp, gp)) if (y - yp).abs() > 1e-300 => {
                let s = (g - gp) / (y - yp);
                if s < -0.05 && s.is_finite() { s } else { -1.5 }
            }
            _ => -1.5,
        };
        prev = Some((y, g));
        let mut y_new = y - g / slope;
        let (mut ylo, mut yhi) = (lo.ln(), hi.ln());
        if !(y_new > ylo && y_new < yhi) && yhi > ylo {
            if beta_change > 0.0 {
                // The bracket was found while the escape probabilities still moved: it may
                // no longer hold the root. Trust the step, within the physical bounds.
                (lo, hi) = (lo0, hi0);
                (ylo, yhi) = (lo0.ln(), hi0.ln());
            } else {
                y_new = 0.5 * (ylo + yhi);
            }
        }
        y = y_new.clamp(ylo, yhi);
    }
    Err(fail(
        CrFailure::IterationLimit,
        format!("no agreement of populations, n_e and escape after {max_iter} iterations"),
    ))
}

/// Build the rate matrix in the unknowns (x_1 … x_N, n_p) at electron density `ne` and
/// solve it with the particle-conservation row; returns (x, n_p) in one vector.
fn assemble_and_solve(
    model: &Model,
    r: &Rates,
    beta: &[f64],
    ne: f64,
    nh: f64,
    work: &mut Work,
) -> Result<Vec<f64>, CrFailure> {
    let n = model.n;
    let dim = n + 1;
    let m = &mut work.m;
    m.iter_mut().for_each(|v| *v = 0.0);
    // s_i: n_i = s_i x_i.
    let s: Vec<f64> = r.phi.iter().map(|p| ne * p).collect();
    // Column j of row i: rate from state j into state i times the scale of j; the diagonal
    // collects the losses. Row index i, column j: m[i * dim + j].
    for l in 0..n {
        if s[l] == 0.0 {
            continue;
        }
        for u in l + 1..n {
            if s[u] == 0.0 {
                continue;
            }
            let a = model.a[u * n + l];
            let b = beta[l * n + u];
            let nb = r.nbar[l * n + u];
            // Down per upper atom A β (1 + ñ); up per lower atom (g_u w_u/(g_l w_l)) A β ñ: the
            // pair balances exactly in a thermal field (W = 1, T_R = T), for any β.
            let mut down = a * b * (1.0 + nb) + ne * r.q[u * n + l];
            let mut up = r.gw[u] / r.gw[l] * a * b * nb + ne * r.q[l * n + u];
            if l == 0 && u == 1 {
                down += r.two_photon.0;
                up += r.two_photon.1;
            }
            // Flow u → l: enters row l from column u; leaves row u.
            m[l * dim + u] += down * s[u];
            m[u * dim + u] -= down * s[u];
            // Flow l → u.
            m[u * dim + l] += up * s[l];
            m[l * dim + l] -= up * s[l];
        }
    }
    for i in 0..n {
        if s[i] == 0.0 {
            continue;
        }
        // Ionisation i → continuum (per atom), recombination continuum → i (per proton).
        let ion = r.photo[i] + ne * r.q_ion[i];
        let rec = s[i] * (r.recomb[i] + ne * r.q_ion[i]);
        m[i * dim + i] -= ion * s[i];
        m[i * dim + n] += rec;
        m[n * dim + n] -= rec;
        m[n * dim + i] += ion * s[i];
    }
    // Dissolved shells: x_i = n_p (b = 1, no population).
    for i in 0..n {
        if s[i] == 0.0 {
            m[i * dim + i] = 1.0;
            m[i * dim + n] = -1.0;
        }
    }
    // Replace the proton row by particle conservation Σ s_i x_i + n_p = n_H (in units of n_H).
    for j in 0..n {
        m[n * dim + j] = s[j];
    }
    m[n * dim + n] = 1.0;
    let rhs = &mut work.rhs;
    rhs.iter_mut().for_each(|v| *v = 0.0);
    rhs[n] = 1.0;
    // Equilibrate columns (unknowns whose scales s_j differ by hundreds of decades at low
    // temperature), then rows, by powers of two (exact).
    let pow2 = |v: f64| v.log2().round().exp2();
    let mut col_scale = vec![1.0; dim];
    for (j, cs) in col_scale.iter_mut().enumerate() {
        let big = (0..dim).fold(0.0f64, |a, i| a.max(m[i * dim + j].abs()));
        if big.is_nan() || big.is_infinite() {
            return Err(CrFailure::NonFinite);
        }
        if big == 0.0 {
            return Err(CrFailure::Singular);
        }
        *cs = pow2(big);
        for i in 0..dim {
            m[i * dim + j] /= *cs;
        }
    }
    for i in 0..dim {
        let row = &mut m[i * dim..(i + 1) * dim];
        let big = row.iter().fold(0.0f64, |a, v| a.max(v.abs()));
        if !(big > 0.0 && big.is_finite()) {
            return Err(if big.is_finite() {
                CrFailure::Singular
            } else {
                CrFailure::NonFinite
            });
        }
        let inv = 1.0 / pow2(big);
        row.iter_mut().for_each(|v| *v *= inv);
        rhs[i] *= inv;
    }
    // Factor a copy, solve, and refine once with the residual of the equilibrated system:
    // populations spanning many decades keep their last digits.
    work.lu.copy_from_slice(m);
    lu_factor(&mut work.lu, &mut work.perm, dim)?;
    let mut x = vec![0.0; dim];
    lu_apply(&work.lu, &work.perm, dim, rhs, &mut x);
    let mut res = vec![0.0; dim];
    for i in 0..dim {
        let row = &m[i * dim..(i + 1) * dim];
        res[i] = rhs[i] - row.iter().zip(&x).map(|(a, b)| a * b).sum::<f64>();
    }
    let mut dx = vec![0.0; dim];
    lu_apply(&work.lu, &work.perm, dim, &res, &mut dx);
    Ok(x.iter()
        .zip(&dx)
        .zip(&col_scale)
        .map(|((v, d), c)| (v + d) / c * nh)
        .collect())
}

/// In-place LU factorisation with partial pivoting (row permutation in `perm`).
fn lu_factor(m: &mut [f64], perm: &mut [usize], dim: usize) -> Result<(), CrFailure> {
    for (k, p) in perm.iter_mut().enumerate() {
        *p = k;
    }
    for k in 0..dim {
        let (mut piv, mut big) = (k, m[k * dim + k].abs());
        for i in k + 1..dim {
            let v = m[i * dim + k].abs();
            if v > big {
                big = v;
                piv = i;
            }
        }
        if big.is_nan() || big <= 1e-300 {
            return Err(CrFailure::Singular);
        }
        if piv != k {
            for j in 0..dim {
                m.swap(k * dim + j, piv * dim + j);
            }
            perm.swap(k, piv);
        }
        let d = 1.0 / m[k * dim + k];
        for i in k + 1..dim {
            let f = m[i * dim + k] * d;
            m[i * dim + k] = f;
            if f == 0.0 {
                continue;
            }
            for j in k + 1..dim {
                m[i * dim + j] -= f * m[k * dim + j];
            }
        }
    }
    Ok(())
}

/// Solve with the factors of [`lu_factor`]: `b` (original row order) in, x out in `x`.
fn lu_apply(lu: &[f64], perm: &[usize], dim: usize, b: &[f64], x: &mut [f64]) {
    for i in 0..dim {
        let mut v = b[perm[i]];
        for j in 0..i {
            v -= lu[i * dim + j] * x[j];
        }
        x[i] = v;
    }
    for k in (0..dim).rev() {
        let mut v = x[k];
        for j in k + 1..dim {
            v -= lu[k * dim + j] * x[j];
        }
        x[k] = v / lu[k * dim + k];
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Slow twin of the matrix assembly: the net rate into every shell and the continuum,
    /// summed process by process from the rate formulas, at a solution of the fast path.
    fn residuals(inp: &CrInput, opts: &CrOptions, sol: &CrSolution) -> Vec<(f64, f64)> {
        let model = Model::new(opts.levels);
        let n = model.n;
        let t = inp.temperature;
        let ne = sol.electron_density;
        let np = sol.proton_density;
        let pop: Vec<f64> = sol.levels.iter().map(|l| l.population).collect();
        let hyd = Hydrogenic::HYDROGEN;
        let field = opts.field;
        let kt = K_B * t;
        // (net, gross) per state; index n is the continuum.
        let mut net = vec![0.0; n + 1];
        let mut gross = vec![0.0; n + 1];
        let mut flow = |from: usize, to: usize, rate: f64| {
            net[from] -= rate;
            net[to] += rate;
            gross[from] += rate.abs();
            gross[to] += rate.abs();
        };
        let lte = |i: usize| {
            let g = Hydrogenic::weight(i as u32 + 1);
            let chi = HC * hyd.binding_wavenumber(i as u32 + 1);
            ne * np * g / 2.0 / (saha_constant() * t.powf(1.5)) * (chi / kt).exp()
        };
        let beta = |l: usize, u: usize| {
            sol.escape
                .iter()
                .find(|e| e.lower == l as u32 + 1 && e.upper == u as u32 + 1)
                .unwrap()
                .beta
        };
        for l in 0..n {
            for u in l + 1..n {
                let (lo, up) = (l as u32 + 1, u as u32 + 1);
                let a = hyd.einstein_a(lo, up);
                let nu = hyd.wavenumber(lo, up) * C;
                let occ = rates::occupation(nu, field.dilution, field.temperature);
                let gl = Hydrogenic::weight(lo);
                let gu = Hydrogenic::weight(up);
                let b = beta(l, u);
                flow(u, l, pop[u] * a * b * (1.0 + occ));
                flow(l, u, pop[l] * gu / gl * a * b * occ);
                let q = rates::excitation_rate(
                    lo,
                    up,
                    hyd.binding_wavenumber(lo) * HC / EV,
                    hyd.binding_wavenumber(up) * HC / EV,
                    hyd.oscillator_strength(lo, up),
                    t,
                );
                flow(l, u, pop[l] * ne * q);
                flow(u, l, pop[u] * ne * q * lte(l) / lte(u));
            }
        }
        let tp = TWO_PHOTON_2S / 4.0;
        let nu_half = 0.5 * hyd.wavenumber(1, 2) * C;
        let occ = rates::occupation(nu_half, field.dilution, field.temperature);
        flow(1, 0, pop[1] * tp * (1.0 + occ) * (1.0 + occ));
        flow(0, 1, pop[0] * 4.0 * tp * occ * occ);
        for (i, &pop_i) in pop.iter().enumerate() {
            let k = i as u32 + 1;
            let bind = hyd.binding_wavenumber(k);
            let (photo, sp, st) = rates::bound_free(k, bind, t, field.dilution, field.temperature);
            let sp = if opts.case_b && i == 0 { 0.0 } else { sp };
            let qi = rates::ionisation_rate(bind * HC / EV, t);
            flow(i, n, pop_i * (photo + ne * qi));
            flow(n, i, lte(i) * (sp + st + ne * qi));
        }
        net.into_iter().zip(gross).collect()
    }

    #[test]
    fn solutions_balance_every_process_sum() {
        let cases = [
            (
                1.0e4,
                1e2,
                RadiationField {
                    dilution: 1e-14,
                    temperature: 4e4,
                },
                Escape::Thin,
                true,
            ),
            (
                5.0e3,
                1e12,
                RadiationField::DARK,
                Escape::Slab {
                    thickness: 1e8,
                    microturbulence: 2e5,
                },
                false,
            ),
            (
                2.0e4,
                1e16,
                RadiationField {
                    dilution: 0.3,
                    temperature: 1.5e4,
                },
                Escape::Slab {
                    thickness: 1.0,
                    microturbulence: 0.0,
                },
                false,
            ),
            (8.0e3, 1e19, RadiationField::DARK, Escape::Thin, false),
        ];
        for (t, nh, field, escape, case_b) in cases {
            let opts = CrOptions {
                levels: 15,
                field,
                escape,
                case_b,
            };
            let inp = CrInput {
                temperature: t,
                hydrogen_density: nh,
                other_electrons: 0.0,
                occupation: None,
                electron_density_guess: None,
            };
            let sol = solve(&inp, &opts).unwrap();
            for (i, (net, gross)) in residuals(&inp, &opts, &sol).into_iter().enumerate() {
                assert!(
                    net.abs() <= 1e-8 * gross,
                    "T={t} nH={nh:e} state {i}: net {net:e} of gross {gross:e}"
                );
            }
            let total: f64 =
                sol.levels.iter().map(|l| l.population).sum::<f64>() + sol.proton_density;
            assert!((total / nh - 1.0).abs() < 1e-12);
            assert!((sol.electron_density / sol.proton_density - 1.0).abs() < 1e-8);
        }
    }

    #[test]
    fn oscillator_strengths_finite_up_to_the_largest_model() {
        let hyd = Hydrogenic::HYDROGEN;
        for l in 1..MAX_LEVELS {
            for u in l + 1..=MAX_LEVELS {
                let f = hyd.oscillator_strength(l, u);
                assert!(f.is_finite() && f > 0.0, "f({l},{u}) = {f}");
            }
        }
    }

    #[test]
    fn escape_probability_limits() {
        // β → 1 − 3τ/2 for small τ and → 1/(3τ) for large τ (the closed form's own limits).
        assert!((slab_escape(1e-9) - 1.0).abs() < 2e-9);
        assert!((slab_escape(1e-5) - (1.0 - 1.5e-5)).abs() < 1e-9);
        assert!((slab_escape(1e6) * 3e6 - 1.0).abs() < 1e-12);
        assert!((slab_escape(-1.0) - 1.0).abs() < f64::EPSILON);
    }

    #[test]
    fn bad_input_is_refused() {
        let inp = CrInput {
            temperature: 1e4,
            hydrogen_density: 1e10,
            other_electrons: 0.0,
            occupation: None,
            electron_density_guess: None,
        };
        let mut opts = CrOptions {
            levels: 1,
            ..CrOptions::default()
        };
        assert!(matches!(solve(&inp, &opts), Err(CrError::Invalid { .. })));
        opts.levels = 20;
        opts.field.dilution = 1.5;
        assert!(matches!(
            solve(&inp, &opts),
            Err(CrError::Invalid {
                field: "--dilution",
                ..
            })
        ));
        opts.field.dilution = 0.0;
        opts.escape = Escape::Slab {
            thickness: 0.0,
            microturbulence: 0.0,
        };
        assert!(matches!(
            solve(&inp, &opts),
            Err(CrError::Invalid {
                field: "--thickness",
                ..
            })
        ));
    }
}

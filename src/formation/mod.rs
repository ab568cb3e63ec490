//! Line formation in a homogeneous slab: lower-level populations from the state, line and
//! continuum opacity, the emergent spectrum across each line, and line strengths.
//!
//! Model: a plane-parallel slab of thickness L, uniform in temperature and composition, seen
//! in flux (or in intensity at direction cosine μ) against an isotropic Planck background of
//! temperature T_bg, or against nothing (pure emission). In LTE the source function of line
//! and continuum is B_ν(T); continuum scattering is treated as absorption (a lite choice).
//! The continuum opacity is evaluated at line centre and held constant across the line.
//!
//! Profiles are defined in frequency and evaluated at the offset x = λ₀ (1 − ν/ν₀) (cm; to
//! first order x = λ − λ₀), so that v = Δν/Δν_D = −x/Δλ_D exactly and every profile is even
//! in x: one profile evaluation serves both sides of the line (the equivalent-width integral
//! is folded, [`quadrature::integrate_folded`]). The stimulated-emission factor, the Planck
//! functions of source and background and dλ/dx = (λ/λ₀)² are those of the frequency at x,
//! so both sides differ where they should. Beyond |Δλ| = R λ₀ (R = `WING_REACH`) the depth
//! is continued from its values at λ₀ ± R λ₀ as the wing's own law in
//! Δλ = λ − λ₀ (`LineSetup::jacobian`): a damping wing that far out has no physical meaning
//! (a Lorentzian in frequency does not even vanish as λ → ∞), so this fixes a definite
//! continuation, and one that hardly depends on R because the ends are symmetric in Δλ
//! (the changes of the Planck factors, the stimulated emission and the frequency-to-
//! wavelength conversion largely cancel between the two sides): on the pure-hydrogen Balmer
//! benchmark grid (`scripts/bench-slab`, where the part beyond R is up to 15 % of Hα's W),
//! R = 0.2 instead of 0.1 changes W by at most 6.5×10⁻⁵ (median 3×10⁻⁷), inside the two
//! integrals' own tolerance. The blue side never reaches λ ≤ 0.
//!
//! Line strengths (offsets x in cm internally, widths reported in Å):
//! - with a background: the equivalent width W_λ = ∫ (1 − F/F_c) dλ (negative for a line in
//!   emission), the central depth 1 − F(λ₀)/F_c and the FWHM of the depth profile;
//! - without: the integrated line emission ∫ (F_λ − F_λ,c) dλ in erg s⁻¹ cm⁻² (flux) or
//!   erg s⁻¹ cm⁻² sr⁻¹ (intensity), the peak contrast F(λ₀)/F_c − 1 and its FWHM.
//!
//! Hydrogen-like lines use the occupation probabilities: the lower-level population carries
//! w_l, and the line opacity the factor w_u/w_l (the chance that the upper level survives the
//! plasma's fields), so high series members fade into the continuum. Their profile is the
//! linear Stark effect in the quasi-static approximation ([`crate::opacity::stark`]): the
//! shifted Stark components follow the Holtsmark distribution of the ion field (ion density
//! taken equal to n_e) convolved with the Doppler core, and every component, shifted or
//! not, with the Lorentzian of the radiative, self- and van der Waals widths
//! ([`crate::opacity::broadening`]), plus each component's own electron-impact width
//! (second-order dipole impact theory with Debye and wing cut-offs,
//! [`crate::opacity::stark::impact_hwhm`]; its fall along the wing is a correction to the
//! components' Lorentz wings). Not included: ion dynamics (Hα's core is too narrow at low
//! density) and the electrons' quasi-static far wing beyond the Weisskopf frequency.

pub mod departures;
pub mod growth;

use crate::atoms::AtomicData;
use crate::atoms::lines::Line;
use crate::constants::{AMU, C, HC_OVER_K, PI_E2_OVER_MC};
use crate::eos::State;
use crate::eos::occupation::{LevelCutoff, OccupationModel};
use crate::opacity::broadening::{self, BroadeningGas, Widths};
use crate::opacity::continuum::{self, Continuum, ContinuumGas};
use crate::opacity::stark::{ElectronGas, StarkProfile};
use crate::opacity::voigt::voigt_h;
use crate::transfer::{quadrature, slab as rt, special};

/// The reach R: the physics is taken as it is out to |Δλ| = R λ₀ on either side; beyond,
/// the depth is the continuation of the module docs, with the frequency-dependent factors
/// held at their values at λ₀(1 ± R).
pub const WING_REACH: f64 = 0.1;

/// How big the slab is.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Geometry {
    /// Geometrical thickness, cm.
    Thickness(f64),
    /// Column of hydrogen nuclei, cm⁻².
    HydrogenColumn(f64),
}

/// What lies behind the slab.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Background {
    /// An isotropic Planck source of this temperature, K.
    Planck(f64),
    /// Nothing: the slab is seen in emission.
    None,
}

/// Whether strengths are measured in flux or in intensity at a direction cosine.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum View {
    /// Emergent flux (hemisphere-integrated).
    Flux,
    /// Intensity at direction cosine μ ∈ (0, 1].
    Intensity(f64),
}

/// A fixed damping law that replaces every line's own broadening rules: the Lorentz width
/// (FWHM, rad s⁻¹) is Γ = `radiative` + `stark_coefficient` · n_e^{2/3}, no van der Waals
/// or self-broadening term, and hydrogen lines keep a plain Voigt profile (no linear Stark
/// pattern). Meant for comparisons with simplified models.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct DampingOverride {
    /// Constant part of Γ, rad s⁻¹.
    pub radiative: f64,
    /// Coefficient of n_e^{2/3} (n_e in cm⁻³), rad s⁻¹ cm².
    pub stark_coefficient: f64,
}

/// Slab parameters.
#[derive(Debug, Clone, Copy, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct SlabOptions {
    /// Size.
    pub geometry: Geometry,
    /// Background.
    pub background: Background,
    /// Microturbulent velocity, cm s⁻¹.
    pub microturbulence: f64,
    /// Flux or intensity.
    pub view: View,
    /// Include continuum opacity (H⁻, H bound–free and free–free, Thomson, Rayleigh).
    pub continuum: bool,
    /// Replace the broadening rules by a fixed damping law (`None`: the rules of
    /// [`crate::opacity::broadening`]).
    pub damping: Option<DampingOverride>,
}

/// Strength of one line.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct LineStrength {
    /// Line label.
    pub label: String,
    /// Customary wavelength (air above 200 nm), Å.
    pub wavelength_angstrom: f64,
    /// Lower-level column density n_l L (with occupation probability), cm⁻².
    pub lower_column: f64,
    /// Line-centre optical depth of the line alone (normal to the slab).
    pub tau0: f64,
    /// Continuum optical depth at line centre.
    pub continuum_tau: f64,
    /// Equivalent width in Å (absorption; with a background), else `None`.
    pub equivalent_width: Option<f64>,
    /// Integrated line emission (no background), erg s⁻¹ cm⁻² (sr⁻¹ in intensity).
    pub emission: Option<f64>,
    /// Central depth 1 − F(λ₀)/F_c (with a background), or peak contrast F(λ₀)/F_c − 1.
    pub central_depth: f64,
    /// Full width at half maximum of the depth (or emission) profile, Å.
    pub fwhm_angstrom: f64,
    /// Profile evaluations used by the integral (one serves both sides of the line).
    pub evaluations: usize,
    /// Whether the integral reached its tolerance within the evaluation budget
    /// ([`quadrature::MAX_EVALUATIONS`]); grids flag the point when it did not.
    pub converged: bool,
    /// The widths used.
    pub widths: Widths,
    /// Voigt damping parameter.
    pub damping: f64,
}

/// Errors of slab computations.
#[derive(Debug, thiserror::Error)]
pub enum SlabError {
    /// Non-physical slab parameters.
    #[error("invalid {field} = {value}: {expected}")]
    Invalid {
        /// The option.
        field: &'static str,
        /// Its value.
        value: f64,
        /// The accepted range.
        expected: &'static str,
    },
    /// The line's species is not in the state (not in the table or not in the composition).
    #[error("line '{label}': species '{species}' is not present in this composition")]
    SpeciesAbsent {
        /// Line label.
        label: String,
        /// Species.
        species: String,
    },
}

impl SlabOptions {
    /// Check the parameters.
    pub fn validate(&self) -> Result<(), SlabError> {
        let (field, v) = match self.geometry {
            Geometry::Thickness(v) => ("--thickness", v),
            Geometry::HydrogenColumn(v) => ("--hydrogen-column", v),
        };
        if !(v.is_finite() && v > 0.0) {
            return Err(SlabError::Invalid {
                field,
                value: v,
                expected: "must be a finite positive number",
            });
        }
        if let Background::Planck(t) = self.background
            && !(t.is_finite() && t > 0.0)
        {
            return Err(SlabError::Invalid {
                field: "--background-temperature",
                value: t,
                expected: "must be a finite positive number of kelvin",
            });
        }
        if let View::Intensity(mu) = self.view
            && !(mu > 0.0 && mu <= 1.0)
        {
            return Err(SlabError::Invalid {
                field: "--mu",
                value: mu,
                expected: "the direction cosine must lie in (0, 1]",
            });
        }
        if !(self.microturbulence.is_finite()
            && self.microturbulence >= 0.0
            && self.microturbulence < 1e8)
        {
            return Err(SlabError::Invalid {
                field: "--microturbulence",
                value: self.microturbulence / 1e5,
                expected: "must be between 0 and 1000 km/s",
            });
        }
        if let Some(d) = self.damping {
            for (field, v) in [
                ("damping.radiative", d.radiative),
                ("damping.stark_coefficient", d.stark_coefficient),
            ] {
                if !(v.is_finite() && v >= 0.0) {
                    return Err(SlabError::Invalid {
                        field,
                        value: v,
                        expected: "must be a finite number >= 0",
                    });
                }
            }
        }
        Ok(())
    }

    /// Slab thickness for a state, cm.
    pub fn thickness(&self, state: &State) -> f64 {
        match self.geometry {
            Geometry::Thickness(l) => l,
            Geometry::HydrogenColumn(n) => n / state.hydrogen_density,
        }
    }
}

/// The gas description the continuum needs, from a state.
pub fn continuum_gas(data: &AtomicData, state: &State) -> ContinuumGas {
    let idx = |n: &str| {
        data.species_index(n)
            .map(|k| state.species[k].density)
            .unwrap_or(0.0)
    };
    let h = crate::atoms::hydrogenic::Hydrogenic::HYDROGEN;
    let levels: Vec<f64> = state.hydrogen_levels.iter().map(|l| l.population).collect();
    ContinuumGas {
        temperature: state.temperature,
        electron_density: state.electron_density,
        h_minus: idx("H-"),
        h_ground: levels.first().copied().unwrap_or(0.0),
        h_neutral: idx("H I"),
        h_binding_cm: (1..=levels.len() as u32)
            .map(|n| h.binding_wavenumber(n))
            .collect(),
        h_levels: levels,
        ion_charge_squared: state.perturbers.ion_charge_squared_density,
    }
}

/// Everything about one line in one slab that does not depend on the wavelength offset.
#[derive(Debug, Clone)]
pub struct LineSetup {
    /// Vacuum wavelength, cm.
    pub lambda0: f64,
    /// Line-centre frequency, Hz.
    pub nu0: f64,
    /// Widths.
    pub widths: Widths,
    /// Damping parameter a.
    pub a: f64,
    /// Line opacity per unit normalised profile H(a, v): κ_l(v) = kappa_scale × H(a, v), cm⁻¹.
    pub kappa_scale: f64,
    /// Continuum opacity at line centre (absorption + scattering), cm⁻¹.
    pub kappa_cont: f64,
    /// Lower-level density with occupation factors, cm⁻³.
    pub lower_density: f64,
    /// Slab temperature, K.
    pub temperature: f64,
    /// Thickness, cm.
    pub thickness: f64,
    /// Quasi-static Stark profile, for hydrogen-like lines.
    pub stark: Option<StarkProfile>,
    /// Stimulated-emission factor 1 − (b_u/b_l) e^{−hν₀/kT} at line centre (included in
    /// `kappa_scale`).
    pub stim0: f64,
    /// b_u/b_l, the ratio of the departure coefficients of the upper and lower level, where
    /// the populations depart from LTE.
    pub departure_ratio: Option<f64>,
    /// |x| of the red and the blue end of the reach (see `reach_ends`).
    ends: [f64; 2],
    /// 1/Δλ_D, cm⁻¹: v = x/Δλ_D.
    per_doppler: f64,
}

/// Compute the wavelength-independent quantities of a line in a slab.
pub fn setup_line(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    line: &Line,
) -> Result<LineSetup, SlabError> {
    let absent = || SlabError::SpeciesAbsent {
        label: line.label.clone(),
        species: line.species.clone(),
    };
    let k = line.species_index.ok_or_else(absent)?;
    let sp = &data.species[k];
    if state.abundances[sp.element] <= 0.0 {
        return Err(absent());
    }
    let t = state.temperature;
    let st = state.species[k];
    let boltz = (-line.lower_cm * HC_OVER_K / t).exp();
    let mut lower = st.density * line.g_lower * boltz / st.partition_function;
    if let (Some(h), Some((lo, up))) = (&sp.hydrogenic, line.shells) {
        let (wl, wu) = match state.cutoff {
            LevelCutoff::MaxShell(max) => {
                let w = |n: u32| if n <= max { 1.0 } else { 0.0 };
                (w(lo), w(up))
            }
            _ => {
                let m = OccupationModel::new(h.z, &state.perturbers);
                (m.w(lo), m.w(up))
            }
        };
        // Population carries w_l; the transition carries w_u/w_l.
        lower *= wl * if wl > 0.0 { wu / wl } else { 0.0 };
    }
    let gas = BroadeningGas {
        temperature: t,
        electron_density: state.electron_density,
        // the perturbers of self- and van der Waals broadening: H I in its ground state
        neutral_hydrogen: state.hydrogen_levels.first().map_or(0.0, |l| l.population),
        microturbulence: opts.microturbulence,
    };
    let mass = data.elements[sp.element].mass_amu * AMU;
    let mut widths = broadening::widths(
        line,
        mass,
        sp.ionization_ev,
        sp.charge,
        sp.hydrogenic.as_ref(),
        &gas,
    );
    if let Some(d) = opts.damping {
        widths.gamma_rad = d.radiative;
        widths.gamma_vdw = 0.0;
        widths.gamma_self = 0.0;
        widths.gamma_stark = d.stark_coefficient * state.electron_density.powf(2.0 / 3.0);
    }
    let a = widths.damping_parameter();
    let nu0 = C / line.wavelength_vac;
    let stim = -(-HC_OVER_K * nu0 / C / t).exp_m1();
    let kappa_scale = PI_E2_OVER_MC * line.f_value() * lower * stim
        / (std::f64::consts::PI.sqrt() * widths.doppler_hz);
    let kappa_cont = if opts.continuum {
        let c: Continuum = continuum::continuum(line.wavelength_vac, &continuum_gas(data, state));
        c.total()
    } else {
        0.0
    };
    let stark = match (&sp.hydrogenic, line.shells) {
        _ if opts.damping.is_some() => None,
        (Some(h), Some((lo, up))) if lo <= 6 && up <= 30 && widths.doppler_cm > 0.0 => {
            Some(StarkProfile::with_electrons(
                lo,
                up,
                h.z,
                line.wavelength_vac,
                state.electron_density,
                widths.doppler_cm,
                // Every Lorentz width (radiative, self- and van der Waals broadening) as
                // FWHM in wavelength, Δλ = λ²Γ/(2πc), on every Stark component.
                line.wavelength_vac * line.wavelength_vac * widths.gamma()
                    / (2.0 * std::f64::consts::PI * C),
                // and each component's own electron-impact width
                Some(ElectronGas {
                    density: state.electron_density,
                    temperature: t,
                }),
            ))
        }
        _ => None,
    };
    Ok(LineSetup {
        stark,
        stim0: stim,
        departure_ratio: None,
        ends: [
            line.wavelength_vac * WING_REACH / (1.0 + WING_REACH),
            line.wavelength_vac * WING_REACH / (1.0 - WING_REACH),
        ],
        lambda0: line.wavelength_vac,
        nu0,
        per_doppler: 1.0 / widths.doppler_cm,
        widths,
        a,
        kappa_scale,
        kappa_cont,
        lower_density: lower,
        temperature: t,
        thickness: opts.thickness(state),
    })
}

impl LineSetup {
    /// The offset x clamped to the reach |λ − λ₀| ≤ R = `WING_REACH` λ₀, i.e. to
    /// −λ₀R/(1 − R) ≤ x ≤ λ₀R/(1 + R), beyond which the frequency-dependent factors (Planck
    /// functions, stimulated emission) are held at their value there.
    fn clamped(&self, x: f64) -> f64 {
        if x > 0.0 {
            x.min(self.ends[0])
        } else {
            x.max(-self.ends[1])
        }
    }

    /// |x| of the red and the blue end of the reach, where the depth's continuation starts
    /// on either side.
    pub fn reach_ends(&self) -> [f64; 2] {
        self.ends
    }

    /// The larger |x| of the two ends of the reach (the blue one), past which the depth is
    /// the continuation on both sides.
    pub fn reach(&self) -> f64 {
        self.ends[1]
    }

    /// Frequency at offset x: ν = ν₀ (1 − x/λ₀), held constant beyond the reach.
    pub fn frequency_at(&self, x: f64) -> f64 {
        self.nu0 * (1.0 - self.clamped(x) / self.lambda0)
    }

    /// Vacuum wavelength at offset x: λ = λ₀/(1 − x/λ₀), held constant beyond the reach.
    pub fn wavelength_at(&self, x: f64) -> f64 {
        self.lambda0 / (1.0 - self.clamped(x) / self.lambda0)
    }

    /// dλ/dx = (λ/λ₀)² within the reach; beyond it the secant (λ_R − λ₀)/x_R = λ_R/λ₀ of
    /// that side's end x_R (λ_R = λ₀(1 ± R)), so that there the wing continues as the same
    /// law in Δλ = λ − λ₀ that it follows in x, from Δλ_R = ±Rλ₀ on either side:
    /// D(Δλ) = D_R (1 − e^{−τ_R (Δλ_R/Δλ)²}) for a damping wing (D_R, τ_R the values there).
    pub fn jacobian(&self, x: f64) -> f64 {
        let xc = self.clamped(x);
        let r = 1.0 / (1.0 - xc / self.lambda0);
        // strictly inside: at the end itself the continuation applies (an analytic tail that
        // starts there takes its amplitude from that point)
        let end = self.ends[if x > 0.0 { 0 } else { 1 }];
        if x.abs() < end { r * r } else { r }
    }

    /// [`LineSetup::jacobian`] at +x and at −x (x ≥ 0), with one division where both are
    /// inside the reach: 1/(1 ∓ u) = (1 ± u)/(1 − u²), u = x/λ₀.
    pub fn jacobian_pair(&self, x: f64) -> (f64, f64) {
        if x < self.ends[0] {
            // the red end is the nearer one: both sides strictly inside
            let u = x / self.lambda0;
            let inv = 1.0 / ((1.0 - u) * (1.0 + u));
            let (red, blue) = ((1.0 + u) * inv, (1.0 - u) * inv);
            (red * red, blue * blue)
        } else {
            (self.jacobian(x), self.jacobian(-x))
        }
    }

    /// The offset x of the vacuum wavelength λ: x = λ₀ (1 − λ₀/λ) (the inverse of
    /// `wavelength_at` within the reach).
    pub fn offset_of(&self, lambda: f64) -> f64 {
        self.lambda0 * (1.0 - self.lambda0 / lambda)
    }

    /// The stimulated-emission factor at y = hν/kT relative to its line-centre value
    /// (0 where the levels are inverted).
    pub fn stim_ratio(&self, y: f64) -> f64 {
        let s = match self.departure_ratio {
            None => -(-y).exp_m1(),
            Some(r) => 1.0 - r * (-y).exp(),
        };
        if self.stim0 > 0.0 && s > 0.0 {
            s / self.stim0
        } else {
            0.0
        }
    }

    /// Line optical depth (normal) at offset x (cm), with the stimulated emission of the
    /// frequency there.
    pub fn tau_line(&self, x: f64) -> f64 {
        let y = HC_OVER_K * self.frequency_at(x) / (C * self.temperature);
        self.profile_tau(x) * self.stim_ratio(y)
    }

    /// Line optical depth (normal) at offset x (cm) with the stimulated-emission factor of
    /// line centre: even in x.
    pub fn profile_tau(&self, x: f64) -> f64 {
        // v = Δν/Δν_D = −x/Δλ_D exactly, so the profile is even in x and its damping wings
        // fall exactly as 1/x² (the analytic tail then holds to infinity).
        match &self.stark {
            None => self.kappa_scale * voigt_h(self.a, x * self.per_doppler) * self.thickness,
            // φ_λ: every component (Holtsmark ⊗ Doppler ⊗ Lorentz, the unshifted ones
            // Doppler ⊗ Lorentz), per cm.
            Some(sp) => self.tau_of_stark(sp.phi(x)),
        }
    }

    /// Coefficient K of the quasi-static Stark wing τ_line ≈ K |x|^{−5/2} (x in cm) of the
    /// shifted components, for hydrogen-like lines (0 without a Stark profile).
    pub fn stark_wing_coefficient(&self) -> f64 {
        self.stark
            .as_ref()
            .map_or(0.0, |sp| self.tau_of_stark(sp.far_wing_coefficient()))
    }

    /// Whether the Lorentz wing's coefficient changes along the wing (electron-impact
    /// widths of a Stark profile), so that the wing is a power law only far out.
    pub fn varying_wing(&self) -> bool {
        self.stark
            .as_ref()
            .is_some_and(StarkProfile::has_electron_impacts)
    }

    /// Coefficient A of the Lorentz wing τ_line ≈ A/x² far from the core (x in cm).
    pub fn wing_coefficient(&self) -> f64 {
        // H(a, v) → a/(√π v²), v = Δν/Δν_D, Δν ≈ c x/λ₀².
        let dnu_per_x = C / (self.lambda0 * self.lambda0);
        let v_per_x = dnu_per_x / self.widths.doppler_hz;
        match &self.stark {
            None => {
                self.kappa_scale * self.thickness * self.a
                    / (std::f64::consts::PI.sqrt() * v_per_x * v_per_x)
            }
            // Every Stark component carries a Lorentz wing (the common widths and its own
            // electron-impact width, with its core value: it falls along the wing, which
            // is then integrated to ten times the reach, `LineScale::with_varying_wing`).
            Some(sp) => self.tau_of_stark(sp.lorentz_wing_coefficient()),
        }
    }

    /// Line optical depth of this slab from a Stark-profile quantity per unit wavelength
    /// (the profile φ_λ in cm⁻¹, or a wing coefficient of it): κ_scale H/(√π Δν_D) per
    /// unit φ_ν, φ_ν = φ_λ λ²/c, and κ_scale = (πe²/mc) f n_l stim/(√π Δν_D).
    #[inline]
    fn tau_of_stark(&self, per_lambda: f64) -> f64 {
        let per_phi_nu = self.kappa_scale * std::f64::consts::PI.sqrt() * self.widths.doppler_hz;
        per_phi_nu * per_lambda * self.lambda0 * self.lambda0 / C * self.thickness
    }

    /// The Lorentz wing's local coefficient at offset `x` (cm): as
    /// [`LineSetup::wing_coefficient`], with the electron-impact widths of a Stark profile
    /// at that offset (they fall along the wing); the same for every other line.
    pub fn wing_coefficient_at(&self, x: f64) -> f64 {
        match &self.stark {
            Some(sp) if sp.has_electron_impacts() => {
                self.tau_of_stark(sp.lorentz_wing_coefficient_at(x.abs()))
            }
            _ => self.wing_coefficient(),
        }
    }

    /// `scale` with the damping wing's coefficient where its analytic tail starts, for a
    /// line whose wing law changes along the wing (see [`LineSetup::varying_wing`]), so
    /// that the tail splits the depth there between the Lorentz and the quasi-static wing
    /// by their local optical depths; unchanged otherwise. `per_unit` scales the
    /// coefficient as the caller scales the line's optical depth (1 for this slab).
    pub fn with_local_tail_wing(
        &self,
        scale: quadrature::LineScale,
        per_unit: f64,
    ) -> quadrature::LineScale {
        match scale.tail_start() {
            Some(x) if self.varying_wing() => {
                // a rounding below zero is no wing; only a non-finite coefficient (an
                // overflow upstream) keeps the line-centre one
                let a = (per_unit * self.wing_coefficient_at(x)).max(0.0);
                scale.with_tail_wing(a).unwrap_or(scale)
            }
            _ => scale,
        }
    }
}

/// The emergent quantity (flux or intensity per unit frequency) for optical depth `tau`,
/// source `s` and background `i_bg`.
pub(crate) fn emergent(view: View, tau: f64, s: f64, i_bg: f64) -> f64 {
    match view {
        View::Flux => rt::emergent_flux(tau, s, i_bg),
        View::Intensity(mu) => rt::emergent_intensity(tau, mu, s, i_bg),
    }
}

/// Strengths of `lines` in the slab described by `state` and `opts`.
pub fn line_strengths(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    lines: &[&Line],
) -> Result<Vec<LineStrength>, SlabError> {
    opts.validate()?;
    lines
        .iter()
        .map(|l| line_strength(data, state, opts, l))
        .collect()
}

/// Strength of one line.
pub fn line_strength(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    line: &Line,
) -> Result<LineStrength, SlabError> {
    let su = setup_line(data, state, opts, line)?;
    let t = state.temperature;
    let tau_c = su.kappa_cont * su.thickness;
    let s0 = special::planck_nu(su.nu0, t);
    let bg0 = match opts.background {
        Background::Planck(tb) => special::planck_nu(su.nu0, tb),
        Background::None => 0.0,
    };
    let fc0 = emergent(opts.view, tau_c, s0, bg0);
    let absorption = matches!(opts.background, Background::Planck(_));
    // Intensity against a Planck background has a closed-form depth (below) that needs three
    // exponentials per wavelength instead of eight.
    let intensity_bg = match (opts.view, opts.background) {
        (View::Intensity(mu), Background::Planck(tb)) => {
            let ec = (-tau_c / mu).exp();
            Some((mu, t / tb, ec, -(-tau_c / mu).exp_m1()))
        }
        _ => None,
    };
    let drop = rt::E3Drop::new(tau_c);
    let (ec_view, one_minus_ec_view) = match opts.view {
        View::Intensity(mu) => ((-tau_c / mu).exp(), -(-tau_c / mu).exp_m1()),
        View::Flux => (0.0, 0.0),
    };
    // The depth (per unit wavelength) at offset x (cm), given the even profile's optical
    // depth there (`LineSetup::profile_tau`).
    let profile = |x: f64, tau_even: f64| -> f64 {
        let lam = su.wavelength_at(x);
        if let Some((mu, t_over_tb, ec, one_minus_ec)) = intensity_bg {
            // I = I_bg e^{-x} + S (1 - e^{-x}), x = (τ + τ_c)/μ, I_c the same with τ = 0, so
            // 1 - I/I_c = (1 - r) e^{-x_c} (1 - e^{-τ/μ}) / (e^{-x_c} + r (1 - e^{-x_c}))
            // with r = S/I_bg = B_ν(T)/B_ν(T_bg) = (e^{y_bg} - 1)/(e^{y} - 1), y = hν/kT
            // (beyond y ~ 700 the general form below handles the under- and overflows).
            let y = HC_OVER_K / (lam * t);
            let y_bg = y * t_over_tb;
            if y.max(y_bg) < 700.0 {
                // e^z − 1 by exp where that loses at most a bit (z ≥ 0.7), else by expm1.
                let em1 = |z: f64| if z >= 0.7 { z.exp() - 1.0 } else { z.exp_m1() };
                let per_tau = 1.0 / (su.stim0 * mu);
                return intensity_depth(em1(y), em1(y_bg), tau_even * per_tau, ec, one_minus_ec);
            }
        }
        let nu = C / lam;
        let s = special::planck_nu(nu, t);
        let bg = match opts.background {
            Background::Planck(tb) => special::planck_nu(nu, tb),
            Background::None => 0.0,
        };
        let tau = tau_even * su.stim_ratio(HC_OVER_K / (lam * t));
        // F_c − F = (I_bg − S) × loss, without forming the difference of two fluxes (which
        // would leave rounding noise of ~1e-16 F_c in the depth of a weak line):
        // flux: 2π [S/2 + (I_bg − S) E₃] gives loss = 2π (E₃(τ_c) − E₃(τ_c + τ));
        // intensity: S + (I_bg − S) e^{−τ_tot/μ} gives loss = e^{−τ_c/μ} (1 − e^{−τ/μ}).
        let (loss, fc) = match opts.view {
            View::Flux => (
                2.0 * std::f64::consts::PI * drop.at(tau),
                2.0 * std::f64::consts::PI * (bg * drop.e3() + s * drop.deficit()),
            ),
            View::Intensity(mu) => (
                ec_view * -(-tau / mu).exp_m1(),
                bg * ec_view + s * one_minus_ec_view,
            ),
        };
        if absorption {
            if fc > 0.0 { (bg - s) * loss / fc } else { 0.0 }
        } else {
            // F_λ = F_ν c/λ²
            (s - bg) * loss * C / (lam * lam)
        }
    };
    // Both sides at once for intensity against a background: y = hν/kT is y₀ ∓ δ on the red
    // and blue side (δ = y₀ x/λ₀), so e^{y} and e^{y_bg} of both sides come from two
    // exponentials; valid where every y of the reach stays in [0.7, 700] (else per side).
    let pair_fast = intensity_bg.and_then(|(mu, t_over_tb, ec, one_minus_ec)| {
        let y0 = HC_OVER_K * su.nu0 / (C * t);
        // (`wavelength_at` of ±λ₀ is the wavelength of either end of the reach)
        let y_min = HC_OVER_K / (su.wavelength_at(su.lambda0) * t) * t_over_tb.min(1.0);
        let y_max = HC_OVER_K / (su.wavelength_at(-su.lambda0) * t) * t_over_tb.max(1.0);
        (y_min >= 0.7 && y_max < 700.0).then_some((mu, t_over_tb, ec, one_minus_ec, y0))
    });
    match pair_fast {
        Some((mu, t_over_tb, ec, one_minus_ec, y0)) => {
            let (e0, e0_bg) = (y0.exp(), (y0 * t_over_tb).exp());
            let inv_e0 = 1.0 / e0;
            let per_tau = 1.0 / (su.stim0 * mu);
            // One side from e^y, e^{−y} and e^{y_bg}: the same as `intensity_depth`, with
            // the stimulated emission 1 − e^{−y} taken from e^{−y} (y ≥ 0.7 here).
            // `finish` takes r = S/I_bg and 1 − e^{−τ/μ}.
            let finish = |r: f64, a: f64| depth_behind(r, a, ec, one_minus_ec);
            let side = |t: f64, ey: f64, inv_ey: f64, ey_bg: f64| {
                finish((ey_bg - 1.0) / (ey - 1.0), absorbed(t * (1.0 - inv_ey)))
            };
            let pair = |x: f64, tau_even: f64| -> (f64, f64) {
                let t = tau_even * per_tau;
                let (red, blue) = (su.clamped(x), su.clamped(-x));
                let delta = y0 * red / su.lambda0;
                let (ed, ed_bg) = (exp_near_zero(delta), exp_near_zero(delta * t_over_tb));
                // e^{−δ} and e^{−δ_bg} from one division
                let inv = 1.0 / (ed * ed_bg);
                let (inv_ed, inv_ed_bg) = (ed_bg * inv, ed * inv);
                if x <= su.reach_ends()[0] {
                    // Both sides within the reach: blue = −red. The blue side's optical depth
                    // exceeds the red one's by Δ = t e^{−y₀}(e^δ − e^{−δ}) ≥ 0 (its stimulated
                    // emission is weaker), so 1 − e^{−τ_b} = a_r + (1 − a_r)(1 − e^{−Δ})
                    // without a second exponential where Δ is small, and no cancellation.
                    let t_red = t * (1.0 - ed * inv_e0);
                    let a_red = absorbed(t_red);
                    let gap = t * inv_e0 * (ed - inv_ed);
                    let a_blue = a_red + (1.0 - a_red) * absorbed(gap);
                    let (ey_r, ey_b) = (e0 * inv_ed, e0 * ed);
                    (
                        finish((e0_bg * inv_ed_bg - 1.0) / (ey_r - 1.0), a_red),
                        finish((e0_bg * ed_bg - 1.0) / (ey_b - 1.0), a_blue),
                    )
                } else {
                    let red_side = side(t, e0 * inv_ed, ed * inv_e0, e0_bg * inv_ed_bg);
                    // past the red end of the reach: the blue side on its own
                    let delta_b = y0 * blue / su.lambda0;
                    let (eb, eb_bg) = (delta_b.exp(), (delta_b * t_over_tb).exp());
                    (red_side, side(t, e0 / eb, eb * inv_e0, e0_bg / eb_bg))
                }
            };
            // One side at signed x (centre and half widths), from the same factors.
            let single = |x: f64, tau_even: f64| -> f64 {
                let delta = y0 * su.clamped(x) / su.lambda0;
                let ey = e0 / exp_near_zero(delta);
                side(
                    tau_even * per_tau,
                    ey,
                    1.0 / ey,
                    e0_bg / exp_near_zero(delta * t_over_tb),
                )
            };
            Ok(strengths_of(
                &su, line, single, pair, absorption, tau_c, fc0,
            ))
        }
        None => Ok(strengths_of(
            &su,
            line,
            profile,
            |x, tau| (profile(x, tau), profile(-x, tau)),
            absorption,
            tau_c,
            fc0,
        )),
    }
}

/// 1 − I/I_c in intensity against a Planck background (LTE), from e^y − 1 and e^{y_bg} − 1
/// (y = hν/kT, y_bg = hν/kT_bg), the line's optical depth along the ray per unit of its
/// stimulated-emission factor, `tau_per_stim` = τ_even/(stim₀ μ), and e^{−τ_c/μ}, 1 − e^{−τ_c/μ}:
/// r = S/I_bg = (e^{y_bg} − 1)/(e^y − 1), stimulated emission 1 − e^{−y} = (e^y − 1)/e^y,
/// depth (1 − r) e^{−τ_c/μ} (1 − e^{−τ/μ}) / (e^{−τ_c/μ} + r (1 − e^{−τ_c/μ})).
fn intensity_depth(em1_y: f64, em1_bg: f64, tau_per_stim: f64, ec: f64, one_minus_ec: f64) -> f64 {
    let r = em1_bg / em1_y;
    let tm = tau_per_stim * em1_y / (em1_y + 1.0);
    depth_behind(r, absorbed(tm), ec, one_minus_ec)
}

/// The last step of [`intensity_depth`]: (1 − r) e^{−τ_c/μ} a / (e^{−τ_c/μ} + r (1 − e^{−τ_c/μ}))
/// from r = S/I_bg and a = 1 − e^{−τ/μ}; without continuum along the ray (1 − e^{−τ_c/μ} = 0)
/// the same value, (1 − r) a, without the division.
#[inline]
fn depth_behind(r: f64, a: f64, ec: f64, one_minus_ec: f64) -> f64 {
    if one_minus_ec == 0.0 {
        (1.0 - r) * a
    } else {
        (1.0 - r) * ec * a / (ec + r * one_minus_ec)
    }
}

/// e^z, by its Taylor series to z⁷ where |z| < 1/32 (the next term, z⁸/8!, is below
/// 2.3×10⁻¹⁷ relative), else by `exp`: the Planck factors' change across a line core.
fn exp_near_zero(z: f64) -> f64 {
    if z.abs() < 0.03125 {
        let c = [
            1.0,
            1.0,
            1.0 / 2.0,
            1.0 / 6.0,
            1.0 / 24.0,
            1.0 / 120.0,
            1.0 / 720.0,
            1.0 / 5040.0,
        ];
        // Estrin: pairs, then pairs of pairs (plain products: `mul_add` is a library call
        // without a target feature)
        let z2 = z * z;
        let p01 = z * c[1] + c[0];
        let p23 = z * c[3] + c[2];
        let p45 = z * c[5] + c[4];
        let p67 = z * c[7] + c[6];
        let z4 = z2 * z2;
        z4 * (z2 * p67 + p45) + (z2 * p23 + p01)
    } else {
        z.exp()
    }
}

/// 1 − e^{−τ} without cancellation and, for small τ, without an exponential.
fn absorbed(tau: f64) -> f64 {
    if tau < 1e-3 {
        // the series to τ⁴: the next term, τ⁵/120, is below 1e-14 τ
        tau * (1.0 - 0.5 * tau * (1.0 - tau * (1.0 / 3.0) * (1.0 - 0.25 * tau)))
    } else if tau < 0.7 {
        -(-tau).exp_m1()
    } else {
        1.0 - (-tau).exp()
    }
}

/// The strengths of a set-up line from its depth profile 1 − F/F_c (absorption) or its
/// emission profile F_λ − F_λ,c (without background), given as a function of the offset x
/// and the even profile's optical depth τ(x) = `LineSetup::profile_tau`(x), and as `pair`
/// (x ≥ 0, τ(x)) ↦ (profile(x, τ), profile(−x, τ)), which a caller may compute faster than
/// two calls: the adaptive
/// integral on the line's own scales (folded, one profile evaluation for both sides, with
/// dλ = (λ/λ₀)² dx), the centre and the FWHM. `fc0` is the continuum (per unit frequency)
/// at line centre. Shared by LTE and non-LTE lines.
pub(crate) fn strengths_of(
    su: &LineSetup,
    line: &Line,
    profile: impl Fn(f64, f64) -> f64,
    pair: impl Fn(f64, f64) -> (f64, f64),
    absorption: bool,
    tau_c: f64,
    fc0: f64,
) -> LineStrength {
    let tau0 = su.tau_line(0.0);
    let core = match &su.stark {
        // The Stark pattern widens the core: use the larger of the two scales.
        Some(sp) => su.widths.doppler_cm.max(sp.unit_shift()),
        None => su.widths.doppler_cm,
    };
    let scale = quadrature::LineScale::doppler(core, tau0)
        .and_then(|s| s.with_wing(su.wing_coefficient()))
        .and_then(|s| s.with_steep_wing(su.stark_wing_coefficient(), 2.5))
        .and_then(|s| s.with_reach(su.reach()))
        .map(|s| s.with_breaks(su.reach_ends()))
        .map(|s| {
            if su.varying_wing() {
                su.with_local_tail_wing(s.with_varying_wing(), 1.0)
            } else {
                s
            }
        })
        .or_else(|_| quadrature::LineScale::doppler(su.widths.doppler_cm, 0.0))
        .expect("a positive Doppler width");
    // The depths the integral sees, both sides, kept to bracket the half widths.
    let mut samples: Vec<(f64, f64, f64)> = Vec::with_capacity(128);
    let folded = |x: f64| {
        let (red, blue) = pair(x, su.profile_tau(x));
        samples.push((x, red, blue));
        let (j_red, j_blue) = su.jacobian_pair(x);
        j_red * red + j_blue * blue
    };
    let integral = quadrature::integrate_folded(folded, &scale, 5e-5);
    let depth = |x: f64| profile(x, su.profile_tau(x));
    let centre = depth(0.0);
    let guess = half_width_guess(&scale);
    // half widths found in x, reported in wavelength
    let red = half_width(&depth, centre, guess, 1.0, &samples);
    // The sides differ only by the slowly varying factors: the blue half width from a bracket
    // around the red one, failing that as the red one.
    let blue = half_width_near(&depth, centre, red, -1.0)
        .unwrap_or_else(|| half_width(&depth, centre, guess, -1.0, &samples));
    let fwhm = if red.is_finite() && blue.is_finite() {
        su.wavelength_at(red) - su.wavelength_at(-blue)
    } else {
        f64::INFINITY
    };
    let (equivalent_width, emission, central_depth) = if absorption {
        (Some(integral.value * 1e8), None, centre)
    } else {
        let fc_lambda = fc0 * C / (su.lambda0 * su.lambda0);
        let contrast = if fc_lambda > 0.0 {
            centre / fc_lambda
        } else {
            f64::INFINITY
        };
        (None, Some(integral.value), contrast)
    };
    LineStrength {
        label: line.label.clone(),
        wavelength_angstrom: line.wavelength() * 1e8,
        lower_column: su.lower_density * su.thickness,
        tau0,
        continuum_tau: tau_c,
        equivalent_width,
        emission,
        central_depth,
        fwhm_angstrom: fwhm * 1e8,
        evaluations: integral.evaluations,
        converged: integral.converged,
        widths: su.widths,
        damping: su.a,
    }
}

/// The normalised emergent spectrum across one line: for each wavelength offset (cm, from
/// the vacuum line centre) the pair (vacuum wavelength in cm, F/F_c) — flux, or intensity at
/// μ, divided by the continuum of the same slab without the line at that wavelength. The
/// same quantities as [`line_strength`] integrates (1 − F/F_c is its depth profile) within
/// the reach |Δλ| ≤ `WING_REACH` λ₀; beyond it this gives the physics of each wavelength,
/// where the integral uses its continuation. Needs a continuum: a Planck background or
/// continuum opacity.
pub fn line_profile(
    data: &AtomicData,
    state: &State,
    opts: &SlabOptions,
    line: &Line,
    offsets: &[f64],
) -> Result<Vec<(f64, f64)>, SlabError> {
    opts.validate()?;
    if matches!(opts.background, Background::None) && !opts.continuum {
        return Err(SlabError::Invalid {
            field: "--no-background",
            value: 0.0,
            expected: "a normalised profile needs a continuum: give a background temperature or keep the continuum opacity",
        });
    }
    let su = setup_line(data, state, opts, line)?;
    let t = state.temperature;
    let tau_c = su.kappa_cont * su.thickness;
    Ok(offsets
        .iter()
        .map(|&dl| {
            let lam = su.lambda0 + dl;
            let nu = C / lam;
            let s = special::planck_nu(nu, t);
            let bg = match opts.background {
                Background::Planck(tb) => special::planck_nu(nu, tb),
                Background::None => 0.0,
            };
            let x = su.offset_of(lam);
            let tau = su.profile_tau(x) * su.stim_ratio(HC_OVER_K * nu / (C * t));
            let f = emergent(opts.view, tau + tau_c, s, bg);
            let fc = emergent(opts.view, tau_c, s, bg);
            (lam, if fc > 0.0 { f / fc } else { f64::NAN })
        })
        .collect())
}

/// A first guess of the half width at half depth from the line's scales: where the line's
/// optical depth has fallen to τ_h, the depth at which a screen 1 − e^{−τ} is half its
/// central value, (1 − e^{−τ_h}) = (1 − e^{−τ₀})/2, taking the farthest of the Doppler core
/// (s √ln(τ₀/τ_h)), the damping wing (√(A/τ_h)) and the steep wing ((K/τ_h)^{1/q}).
pub(crate) fn half_width_guess(scale: &quadrature::LineScale) -> f64 {
    let s = scale.core();
    let tau0 = scale.peak_optical_depth();
    let tau_h = -(0.5 * (1.0 + (-tau0).exp())).ln();
    let mut x = s * (tau0 / tau_h).max(2.0).ln().sqrt();
    if tau_h > 0.0 {
        if let Some(a) = scale.wing() {
            x = x.max((a / tau_h).sqrt());
        }
        if let Some((k, q)) = scale.steep_wing() {
            x = x.max((k / tau_h).powf(1.0 / q));
        }
    }
    if x.is_finite() && x > 0.0 { x } else { s }
}

/// Distance from line centre (cm, on the side `sign`) where the profile falls to half its
/// central value: bracketed from `known` (distances x ≥ 0 with the profile at +x and at −x,
/// e.g. the points an integral has already evaluated) between the farthest point inside the
/// half maximum and the next one out; failing that, from the guess `start` by doubling
/// outward or halving inward; then refined by the Illinois variant of false position
/// (bisection steps where it stalls), with a probe just past the tolerance on the far side
/// once the steps are below 10⁻³, until the bracket is below 1e-6 relative.
pub(crate) fn half_width(
    profile: &impl Fn(f64) -> f64,
    centre: f64,
    start: f64,
    sign: f64,
    known: &[(f64, f64, f64)],
) -> f64 {
    if centre.abs() < f64::MIN_POSITIVE {
        return 0.0;
    }
    let half = 0.5 * centre;
    // g > 0 inside the half-maximum, g < 0 outside.
    let g = |x: f64| (profile(sign * x) - half) * centre.signum();
    let inside = |d: f64| (d - half) * centre.signum();
    let here = |&(x, red, blue): &(f64, f64, f64)| (x, if sign > 0.0 { red } else { blue });
    let (far_in, g_far_in) = known
        .iter()
        .map(here)
        .filter(|&(x, d)| x > 0.0 && inside(d) > 0.0)
        .fold((0.0, centre.abs() - half.abs()), |acc, (x, d)| {
            if x > acc.0 { (x, inside(d)) } else { acc }
        });
    let next_out = known.iter().map(here).filter(|&(x, _)| x > far_in).fold(
        None,
        |acc: Option<(f64, f64)>, (x, d)| match acc {
            Some((xa, _)) if xa <= x => acc,
            _ => Some((x, inside(d))),
        },
    );
    let (mut lo, mut hi, mut g_lo, mut g_hi);
    if let Some((x_out, g_out)) = next_out {
        (lo, g_lo, hi, g_hi) = (far_in, g_far_in, x_out, g_out);
        return refine_crossing(&g, lo, g_lo, hi, g_hi);
    }
    (lo, hi) = (0.0, start.max(1e-16));
    (g_lo, g_hi) = (centre.abs() - half.abs(), g(hi));
    let mut guard = 0;
    if g_hi > 0.0 {
        while g_hi > 0.0 {
            (lo, g_lo) = (hi, g_hi);
            hi *= 2.0;
            g_hi = g(hi);
            guard += 1;
            if guard > 200 {
                return f64::INFINITY;
            }
        }
    } else {
        // the guess is outside: halve until inside (or keep lo = 0)
        let mut x = 0.5 * hi;
        for _ in 0..60 {
            let gx = g(x);
            if gx > 0.0 {
                (lo, g_lo) = (x, gx);
                break;
            }
            (hi, g_hi) = (x, gx);
            x *= 0.5;
        }
    }
    refine_crossing(&g, lo, g_lo, hi, g_hi)
}

/// The half width on the side `sign` (as [`half_width`]) from a neighbouring value `near`
/// (the other side's): g at `near` and a thousandth of it away in the direction of the
/// root, a secant step when both lie on one side, then the bracket refined as in
/// [`half_width`]. `None` where no bracket turns up within those three evaluations.
fn half_width_near(
    profile: &impl Fn(f64) -> f64,
    centre: f64,
    near: f64,
    sign: f64,
) -> Option<f64> {
    if !(near.is_finite() && near > 0.0) || centre.abs() < f64::MIN_POSITIVE {
        return None;
    }
    let half = 0.5 * centre;
    let g = |x: f64| (profile(sign * x) - half) * centre.signum();
    let g1 = g(near);
    // g > 0 inside the half maximum: the root lies outward
    let x2 = if g1 > 0.0 { near * 1.001 } else { near * 0.999 };
    let g2 = g(x2);
    let bracket = |(xa, ga): (f64, f64), (xb, gb): (f64, f64)| {
        if ga > 0.0 && gb <= 0.0 && xa < xb {
            Some((xa, ga, xb, gb))
        } else if gb > 0.0 && ga <= 0.0 && xb < xa {
            Some((xb, gb, xa, ga))
        } else {
            None
        }
    };
    let found = bracket((near, g1), (x2, g2)).or_else(|| {
        // both on one side: one secant step past the root, by 10 % more
        let step = g2 * (x2 - near) / (g2 - g1);
        let x3 = x2 - 1.1 * step;
        if !(x3.is_finite() && x3 > 0.0) {
            return None;
        }
        bracket((x2, g2), (x3, g(x3)))
    })?;
    let (lo, g_lo, hi, g_hi) = found;
    Some(refine_crossing(&g, lo, g_lo, hi, g_hi))
}

/// The root of g between lo and hi, g(lo) > 0 ≥ g(hi) (see `half_width`).
fn refine_crossing(
    g: &impl Fn(f64) -> f64,
    mut lo: f64,
    mut g_lo: f64,
    mut hi: f64,
    mut g_hi: f64,
) -> f64 {
    // Invariant: g(lo) > 0 >= g(hi). `side` remembers which end moved last (Illinois).
    let mut side = 0i8;
    let mut previous = f64::INFINITY;
    for _ in 0..200 {
        if hi - lo <= 1e-6 * hi {
            break;
        }
        let mut x = if g_lo.is_finite() && g_hi.is_finite() && g_lo > g_hi {
            hi - g_hi * (hi - lo) / (g_hi - g_lo)
        } else {
            0.5 * (lo + hi)
        };
        // Keep strictly inside, at least a thousandth of the bracket from either end: a
        // step that lands closer to an end (the root is there) goes to that distance, which
        // shrinks the bracket a thousandfold when it falls on the far side of the root.
        let margin = 1e-3 * (hi - lo);
        x = if x.is_nan() {
            0.5 * (lo + hi)
        } else {
            x.clamp(lo + margin, hi - margin)
        };
        let gx = g(x);
        if gx > 0.0 {
            (lo, g_lo) = (x, gx);
            if side == 1 {
                g_hi *= 0.5;
            }
            side = 1;
        } else {
            (hi, g_hi) = (x, gx);
            if side == -1 {
                g_lo *= 0.5;
            }
            side = -1;
        }
        // Converging (the step was below 10⁻³ of x): try the point just past the tolerance
        // on the far side, which closes the bracket at once if x is within it.
        if (x - previous).abs() <= 1e-3 * x && hi - lo > 1e-6 * hi {
            let probe = if side == 1 {
                x + 0.5e-6 * x
            } else {
                x - 0.5e-6 * x
            };
            if probe > lo && probe < hi {
                let gp = g(probe);
                if gp > 0.0 {
                    (lo, g_lo) = (probe, gp);
                } else {
                    (hi, g_hi) = (probe, gp);
                }
            }
        }
        previous = x;
    }
    0.5 * (lo + hi)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exp_near_zero_is_exp() {
        // The series branch against the library exponential, across and beyond its range
        // (common practice, no source).
        let mut worst: f64 = 0.0;
        for i in -4000..=4000 {
            let z = f64::from(i) * 1e-5;
            worst = worst.max((exp_near_zero(z) / z.exp() - 1.0).abs());
        }
        assert!(worst < 4e-16, "{worst:e}");
        for &z in &[-0.03125, 0.03125, 0.5, -3.0, 50.0] {
            assert_eq!(exp_near_zero(z).to_bits(), z.exp().to_bits());
        }
    }

    #[test]
    fn half_width_from_the_other_side_matches_the_full_search() {
        // Saturated and thin Voigt-like depths with a slope between the sides (as the Planck
        // factors give), absorption and emission: the half width found from the other side's
        // (`half_width_near`) against the search from the guess alone (`half_width`).
        for &tau0 in &[1e-3, 0.5, 3.0, 1e4] {
            for &tilt in &[0.0, 1e-4, 1e-2, 0.2] {
                for &scale in &[1.0, -2.0] {
                    let depth = |x: f64| {
                        let tau = tau0 * (-(x * x)).exp() + tau0 * 1e-3 / (1.0 + x * x);
                        scale * (1.0 - (-tau).exp()) * (1.0 + tilt * x)
                    };
                    let centre = depth(0.0);
                    let red = half_width(&depth, centre, 1.0, 1.0, &[]);
                    let want = half_width(&depth, centre, 1.0, -1.0, &[]);
                    let near = half_width_near(&depth, centre, red, -1.0);
                    // a small tilt always brackets from the other side; a large one may
                    // leave it to the full search (as `strengths_of` does)
                    assert!(near.is_some() || tilt > 0.1, "τ₀ {tau0}, tilt {tilt}");
                    let got = near.unwrap_or_else(|| half_width(&depth, centre, 1.0, -1.0, &[]));
                    assert!(
                        (got / want - 1.0).abs() < 2e-6,
                        "τ₀ {tau0}, tilt {tilt}, scale {scale}: {got} vs {want} (red {red})"
                    );
                }
            }
        }
    }

    #[test]
    fn jacobian_pair_matches_the_one_sided_jacobians() {
        // Both sides at once against `jacobian` on each side, inside the reach, at its red
        // end and beyond both ends.
        let data = AtomicData::embedded();
        let cat = crate::atoms::lines::Catalogue::embedded();
        let line = cat.get("H-alpha").unwrap();
        let state = crate::eos::solve(&crate::eos::StateRequest {
            temperature: 9500.0,
            density: crate::eos::Density::HydrogenDensity(1e15),
            composition: crate::eos::Composition::default(),
            options: crate::eos::EosOptions::default(),
        })
        .unwrap();
        let opts = SlabOptions {
            geometry: Geometry::HydrogenColumn(1e22),
            background: Background::Planck(11400.0),
            microturbulence: 2e5,
            view: View::Intensity(1.0),
            continuum: true,
            damping: None,
        };
        let su = setup_line(data, &state, &opts, line).unwrap();
        let [red_end, blue_end] = su.reach_ends();
        for &x in &[
            0.0,
            1e-9,
            1e-6,
            0.5 * red_end,
            red_end * (1.0 - 1e-12),
            red_end,
            0.5 * (red_end + blue_end),
            blue_end,
            2.0 * blue_end,
        ] {
            let (r, b) = su.jacobian_pair(x);
            let (rr, bb) = (su.jacobian(x), su.jacobian(-x));
            assert!(
                (r / rr - 1.0).abs() < 1e-15 && (b / bb - 1.0).abs() < 1e-15,
                "{x}: {r} {rr} {b} {bb}"
            );
        }
    }
}

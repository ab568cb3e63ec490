//! Slab radiative transfer and line-strength integration: the mathematics, pure (no files,
//! terminal or threads).
//!
//! - [`special`]: exponential integrals E_n (and e^x E_n, 1/(n−1) − E_n), erf, erfc, erfcx,
//!   the Planck function B_ν and B_λ.
//! - [`slab`]: a homogeneous plane-parallel slab lit from behind — emergent intensity I(μ),
//!   flux by the closed form in E₃ and by a fixed 28-node angular quadrature.
//! - [`quadrature`]: equivalent widths W = ∫ D(x) dx, adaptive on the line's own scales,
//!   with the damping wings carried to infinity by an analytic tail.
//! - [`growth`]: the curve of growth F(τ₀) of a pure Doppler line without re-emission, and
//!   the linear, flat and damping asymptotes of W_λ.
//!
//! ## Conventions and units
//!
//! CGS throughout: wavelengths in cm, frequencies in Hz, column densities in cm⁻², the
//! Doppler parameter b in cm s⁻¹, damping widths Γ (FWHM) in rad s⁻¹, intensities and
//! source functions in erg s⁻¹ cm⁻² Hz⁻¹ sr⁻¹ (or per cm of wavelength for B_λ), fluxes
//! without the steradian. Optical depths τ are measured along the slab normal; μ is the
//! cosine of the angle to the normal, μ = 1 straight out. In `quadrature` the offset x from
//! line centre is in the caller's unit (the widths in `LineScale` share it, and W comes back
//! in it); `growth` uses cm of wavelength. Depths are positive for absorption.

pub mod growth;
pub mod quadrature;
pub mod slab;
pub mod special;

pub use growth::{AbsorptionLine, GrowthAsymptotes, doppler_growth};
pub use quadrature::{InvalidLineScale, LineIntegral, LineScale, integrate_folded, integrate_line};
pub use slab::{AngleQuadrature, Slab, emergent_flux, emergent_intensity};
pub use special::{e1, e2, e3, erf, erfc, erfcx, expn, planck_lambda, planck_nu};

//! Opacity: line profiles and continuum sources.

pub mod broadening;
pub mod continuum;
pub mod stark;
pub mod voigt;

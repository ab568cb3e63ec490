//! Opacity: line profiles and continuum sources.

pub mod stark;

//! linegrid: calibration grids of spectral-line strength.
//!
//! The physics core (`constants`, `atoms`, `eos`) is pure: no files, terminal or threads.
//! Units are CGS throughout unless a name says otherwise.
#![warn(missing_docs)]
#![deny(clippy::float_cmp)]

pub mod atoms;
pub mod constants;
pub mod eos;
pub mod error;
pub mod formation;
pub mod grid;
pub mod interp;
pub mod nlte;
pub mod opacity;
pub mod plot;
pub mod transfer;

pub use error::{Error, Result};

//! Grid engine: spec (TOML) → plan → parallel runner → HDF5 store, plus resume, shards and
//! merge. Only `model` knows the physics; the rest moves numbers.

pub mod build;
pub mod model;
pub mod plan;
pub mod run;
pub mod spec;
pub mod store;

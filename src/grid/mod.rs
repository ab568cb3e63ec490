//! Grid engine: spec, plan, parallel runner, HDF5 store, merge.

pub mod store;

//! Signal processing as pure functions over slices: no I/O, no printing.

pub mod level;
pub mod resample;

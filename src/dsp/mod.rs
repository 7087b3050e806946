//! Signal processing as pure functions over slices: no I/O, no printing.

pub mod active_level;
pub mod channel;
pub mod convolve;
pub mod filter;
pub mod g711;
pub mod level;
pub mod loudness;
pub mod mel;
pub mod mix;
pub mod pcm16;
pub mod resample;
pub mod rt60;
pub mod stft;
pub mod wsola;

//! `retake`: grow a small, time-aligned speech set into a large augmented one, with every
//! word and line timing rewritten through the same operations as the audio.
//!
//! Data flows one way: a [`recipe::Plan`] (validated TOML) and a manifest of
//! [`transcript::Clip`]s go into [`run::run`], which decodes each clip ([`audio`]), runs the
//! plan's [`steps`] per take with a seeded generator ([`seed`]), composes the steps'
//! [`timemap::TimeMap`]s, rewrites the transcript once, and writes takes plus a manifest.
//!
//! The library never prints and never exits; the binary in `src/main.rs` does both.
#![deny(missing_docs)]

pub mod audio;
pub mod check;
pub mod dsp;
pub mod recipe;
pub mod run;
pub mod seed;
pub mod steps;
pub mod timemap;
pub mod transcript;

//! `retake`: grow a small, time-aligned speech set into a large augmented one, with every
//! word and line timing rewritten through the same operations as the audio.
//!
//! Data flows one way: a [`recipe::Plan`] (validated TOML) and a manifest of
//! [`transcript::Clip`]s go into [`run::run`], which decodes each clip ([`audio`]), runs the
//! plan's [`steps`] per take with a seeded generator ([`seed`]), composes the steps'
//! [`timemap::TimeMap`]s, rewrites the transcript once, and writes takes plus a manifest.
//!
//! The library never prints and never exits; the binary in `src/main.rs` does both.
//!
//! ```
//! use std::path::Path;
//! use retake::timemap::TimeMap;
//!
//! // A recipe is checked whole before any audio is read.
//! let plan = retake::recipe::parse(
//!     Path::new("speed.toml"),
//!     "takes = 3\nkeep_source = true\n[[step]]\ndo = \"speed\"\nfactor = [0.9, 1.1]\n",
//! )?;
//! assert_eq!((plan.takes, plan.rate, plan.steps.len()), (3, 16_000, 1));
//!
//! // Speed perturbation by 1.1 of a 2.2 s clip: every timing t becomes t / 1.1.
//! let speed = TimeMap::linear(2.2, 2.0);
//! assert!((speed.apply(1.1) - 1.0).abs() < 1e-12);
//! # Ok::<(), retake::recipe::RecipeError>(())
//! ```
#![deny(missing_docs)]

pub mod audio;
mod batch;
pub mod check;
pub mod dsp;
pub mod export;
pub mod files;
pub mod frames;
pub mod import;
pub mod input_file;
pub mod jobfile;
pub mod join;
pub mod keys;
pub mod memory;
pub mod noise;
pub mod outdir;
pub mod parts;
pub mod recipe;
pub mod remap;
pub mod report;
pub mod room;
pub mod run;
pub mod seed;
pub mod shard;
pub mod slice;
pub mod steps;
pub mod take;
pub mod timemap;
pub mod transcript;

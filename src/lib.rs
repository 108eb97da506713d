//! Pumice: a colour-correct, bit-depth-preserving raster image processor.
//!
//! An image is decoded ([`io::decode`]) into a [`raster::Raster`] of planar
//! `f32` channels, run through a [`pipeline::Pipeline`] of operators
//! ([`ops`]) over row bands on every core ([`tile`]), and encoded
//! ([`io::encode`]). [`job`] ties these together for one input and one output;
//! everything the command line does is callable from here.

#![cfg_attr(not(test), deny(clippy::unwrap_used, clippy::expect_used))]

pub mod batch;
pub mod color;
pub mod error;
pub mod fuzzing;
pub mod io;
pub mod job;
pub mod measure;
pub mod ops;
pub mod pipeline;
pub mod raster;
pub mod stack;
mod suggest;
pub mod tile;

pub use error::Error;

/// Large blocks are advised to be huge pages (see `raster::huge_pages`).
#[global_allocator]
static ALLOCATOR: raster::huge_pages::Advising = raster::huge_pages::Advising;

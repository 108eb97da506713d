//! The integration test binary: runs the real `pumice` binary and the library
//! against images made in the tests and against committed reference fixtures.

mod harness;

mod cli;
mod cmyk;
mod codecs;
mod colour;
mod filters;
mod orientation;
mod reference;
mod resample;
mod scan;
mod tone;

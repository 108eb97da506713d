//! The integration test binary: runs the real `pumice` binary and the library
//! against images made in the tests and against committed reference fixtures.

mod harness;

mod batch;
mod cli;
mod cmyk;
mod codecs;
mod colour;
mod faults;
mod filters;
mod hostile;
mod orientation;
mod reference;
mod resample;
mod robustness;
mod stack;
mod tone;

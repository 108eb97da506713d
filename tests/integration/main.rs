//! The integration test binary: runs the real `pumice` binary and the library
//! against images made in the tests and against committed reference fixtures.

mod harness;

mod batch;
mod canny;
mod cli;
mod cmyk;
mod codecs;
mod colour;
mod denoise;
mod faults;
mod fidelity;
mod filters;
mod fuzz_corpus;
mod hostile;
mod measure;
mod morph;
mod orientation;
mod properties;
mod reference;
mod resample;
mod robustness;
mod scan;
mod stack;
mod tone;

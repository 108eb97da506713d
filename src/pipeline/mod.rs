//! Pipelines: the step grammar, the operator registry, and execution with
//! domain tracking and fusion of point operators. No file or command-line logic.

mod exec;
pub mod grammar;
pub mod registry;

pub use exec::DomainPolicy;

use std::fmt;

use crate::error::Error;
use crate::ops::Operator;
use crate::ops::params::{Args, OpSpec};

/// One checked step: an operator, the parameters it was built from, and the
/// operator itself.
pub struct Step {
    pub spec: &'static OpSpec,
    pub args: Args,
    pub op: Box<dyn Operator>,
}

impl Step {
    /// Parses and checks one step written as `NAME` or `NAME:PARAM=VALUE,…`.
    pub fn parse(text: &str) -> Result<Step, Error> {
        let parsed = grammar::parse_step(text)?;
        Step::build(&parsed.name, &parsed.params)
    }

    /// Builds a step from an operator name and (name, text) parameter pairs; a
    /// `None` name is the main parameter.
    pub fn build(name: &str, params: &[(Option<String>, String)]) -> Result<Step, Error> {
        let spec = registry::find(name)?;
        let fail = |e: crate::error::ParamError| Error::Step { step: name.to_string(), message: e.0 };
        let args = Args::check(spec, params).map_err(fail)?;
        let op = (spec.build)(&args).map_err(fail)?;
        Ok(Step { spec, args, op })
    }
}

impl fmt::Display for Step {
    /// The canonical form, with every parameter spelt out: `gauss:sigma=2,truncate=4,…`.
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.spec.name)?;
        for (i, (name, value)) in self.args.pairs().enumerate() {
            write!(f, "{}{name}={value}", if i == 0 { ':' } else { ',' })?;
        }
        Ok(())
    }
}

impl fmt::Debug for Step {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "Step({self})")
    }
}

/// An ordered list of steps.
#[derive(Debug)]
pub struct Pipeline {
    pub steps: Vec<Step>,
    /// The largest `width × height` any step may produce.
    pub max_pixels: u64,
}

impl Default for Pipeline {
    fn default() -> Self {
        Pipeline::new(Vec::new())
    }
}

impl Pipeline {
    pub fn new(steps: Vec<Step>) -> Pipeline {
        Pipeline { steps, max_pixels: crate::raster::DEFAULT_MAX_PIXELS }
    }

    /// Parses each text as a step.
    pub fn parse<S: AsRef<str>>(texts: &[S]) -> Result<Pipeline, Error> {
        texts.iter().map(|t| Step::parse(t.as_ref())).collect::<Result<_, _>>().map(Pipeline::new)
    }
}

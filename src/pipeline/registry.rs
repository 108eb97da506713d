//! The operator registry: every operator Pumice knows, by name. Adding an
//! operator means writing its module under `ops/` and adding one line here.

use crate::error::Error;
use crate::ops::params::OpSpec;
use crate::ops::{colour, edge, filter, geometry, morph, scan, science, threshold, tone};

/// Every operator, in the order `pumice ops` lists them (by family).
pub static OPERATORS: &[&OpSpec] = &[
    &filter::GAUSS,
    &filter::CONVOLVE,
    &filter::BOX,
    &filter::SHARPEN,
    &filter::MEDIAN,
    &filter::BILATERAL,
    &filter::NLMEANS,
    &edge::SOBEL,
    &edge::SCHARR,
    &edge::LAPLACE,
    &edge::CANNY,
    &geometry::RESIZE,
    &geometry::CROP,
    &geometry::PAD,
    &geometry::FLIP,
    &geometry::ROTATE,
    &geometry::TRANSPOSE,
    &tone::INVERT,
    &tone::GAMMA,
    &tone::WINDOW,
    &tone::EXPOSURE,
    &tone::STRETCH,
    &tone::EQUALIZE,
    &tone::CLAHE,
    &colour::GRAY,
    &colour::SPACE,
    &colour::EXTRACT,
    &colour::BALANCE,
    &threshold::BINARIZE,
    &morph::ERODE,
    &morph::DILATE,
    &morph::OPEN,
    &morph::CLOSE,
    &morph::TOPHAT,
    &science::BIN,
    &science::HOTPIXEL,
    &science::FLATFIELD,
    &science::ILLUMINATION,
    &scan::DESKEW,
    &scan::AUTOCROP,
    &scan::DUST,
];

/// The operator called `name`, or an error suggesting the nearest name.
pub fn find(name: &str) -> Result<&'static OpSpec, Error> {
    OPERATORS.iter().copied().find(|s| s.name == name).ok_or_else(|| {
        let hint = crate::suggest::nearest(name, OPERATORS.iter().map(|s| s.name))
            .map(|s| format!("did you mean `{s}`? "))
            .unwrap_or_default();
        Error::Step {
            step: name.to_string(),
            message: format!("unknown operator `{name}`; {hint}`pumice ops` lists them all"),
        }
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn names_are_unique_and_documented() {
        for (i, a) in OPERATORS.iter().enumerate() {
            assert!(OPERATORS[i + 1..].iter().all(|b| b.name != a.name), "{} twice", a.name);
            assert!(a.doc.contains("Domain"), "{} doc names no domain", a.name);
            if let Some(main) = a.main {
                assert!(a.params.iter().any(|p| p.name == main), "{}: main `{main}` not a parameter", a.name);
            }
        }
    }

    #[test]
    fn unknown_names_get_a_suggestion() {
        let e = find("guass").unwrap_err().to_string();
        assert!(e.contains("did you mean `gauss`?"), "{e}");
    }
}

//! The step grammar: `NAME` or `NAME:PARAM=VALUE,PARAM=VALUE…`, where a value
//! without `PARAM=` is the operator's main parameter. Values hold no commas
//! (matrices use spaces and `;`).

use crate::error::Error;

/// A step as written, before its parameters are checked.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct StepText {
    pub name: String,
    /// (parameter name, value text); a `None` name is the main parameter.
    pub params: Vec<(Option<String>, String)>,
}

/// Splits a step into its name and parameters.
pub fn parse_step(text: &str) -> Result<StepText, Error> {
    let text = text.trim();
    let fail = |message: String| Error::Step { step: text.to_string(), message };
    let (name, rest) = match text.split_once(':') {
        Some((n, r)) => (n.trim(), Some(r)),
        None => (text, None),
    };
    if name.is_empty() {
        return Err(fail("a step starts with an operator name (see `pumice ops`)".into()));
    }
    if !name.chars().all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '-') {
        return Err(fail(format!("`{name}` is not an operator name (lower-case letters, digits and `-`)")));
    }
    let mut params = Vec::new();
    if let Some(rest) = rest {
        for (i, item) in rest.split(',').enumerate() {
            let item = item.trim();
            if item.is_empty() {
                return Err(fail(format!("parameter {} is empty (stray comma?)", i + 1)));
            }
            match item.split_once('=') {
                Some((key, value)) => {
                    let key = key.trim();
                    if key.is_empty() {
                        return Err(fail(format!("`{item}` has no parameter name before `=`")));
                    }
                    params.push((Some(key.to_string()), value.trim().to_string()));
                }
                None => params.push((None, item.to_string())),
            }
        }
    }
    if params.iter().filter(|(k, _)| k.is_none()).count() > 1 {
        return Err(fail("only one value may be given without a name (the main parameter)".into()));
    }
    Ok(StepText { name: name.to_string(), params })
}

#[cfg(test)]
mod tests {
    //! Edge cases: bare names, main-parameter shorthand, matrices, stray commas,
    //! two unnamed values, empty names.
    use super::*;

    fn p(text: &str) -> StepText {
        parse_step(text).unwrap()
    }

    #[test]
    fn forms_of_a_step() {
        assert_eq!(p("invert"), StepText { name: "invert".into(), params: vec![] });
        assert_eq!(p("gauss:2").params, vec![(None, "2".to_string())]);
        assert_eq!(
            p("gauss:sigma=2, border=wrap").params,
            vec![(Some("sigma".into()), "2".into()), (Some("border".into()), "wrap".into())]
        );
        assert_eq!(p("convolve:kernel=1 2 1;2 4 2;1 2 1").params[0].1, "1 2 1;2 4 2;1 2 1");
    }

    #[test]
    fn malformed_steps() {
        for bad in ["", ":2", "gauss:2,", "gauss:=3", "gauss:1,2", "Gauss", "ga uss"] {
            assert!(parse_step(bad).is_err(), "{bad:?} should fail");
        }
    }
}

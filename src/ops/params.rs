//! Typed operator parameters: each operator lists its parameters once (name,
//! kind, range, default, help); this module checks raw text against that list
//! and hands the operator's constructor typed values.

use std::fmt;

use crate::error::ParamError;
use crate::ops::Operator;

/// What values a parameter accepts.
#[derive(Clone, Copy, Debug)]
pub enum Kind {
    /// A real number in `min..=max` (`min` excluded when `min_open`); `integer`
    /// requires a whole number.
    Number { min: f64, max: f64, min_open: bool, integer: bool },
    /// `true` or `false`.
    Bool,
    /// One of the listed words.
    Choice(&'static [&'static str]),
    /// A matrix: numbers separated by spaces, rows by `;`.
    Matrix,
    /// A positive factor written as a number (`0.5`) or a percentage (`50%`),
    /// at most `max`; held as the factor.
    Ratio { max: f64 },
    /// An aspect ratio written `W:H` (`16:9`) or as a number (`1.5`); held as
    /// W/H, with `none` held as 0.
    Aspect,
    /// A colour (`white`, `black`, `gray`, `#rrggbb`) or `transparent`.
    Colour,
    /// The path of a file the step reads when it is built (a calibration
    /// frame), or `none`; held as `None` for `none`.
    File,
}

impl Kind {
    /// A whole number in `min..=max`.
    pub const fn int(min: f64, max: f64) -> Kind {
        Kind::Number { min, max, min_open: false, integer: true }
    }

    /// A real number in `min..=max`.
    pub const fn real(min: f64, max: f64) -> Kind {
        Kind::Number { min, max, min_open: false, integer: false }
    }

    /// A real number in `min < x ≤ max`.
    pub const fn positive(min: f64, max: f64) -> Kind {
        Kind::Number { min, max, min_open: true, integer: false }
    }

    /// How the kind reads in help text.
    pub fn describe(&self) -> String {
        match self {
            Kind::Number { min, max, min_open, integer } => {
                let what = if *integer { "a whole number" } else { "a number" };
                let lo = if *min_open { "(" } else { "[" };
                format!("{what} in {lo}{min}, {max}]")
            }
            Kind::Bool => "true or false".into(),
            Kind::Choice(c) => format!("one of {}", c.join(" | ")),
            Kind::Matrix => "a matrix (numbers separated by spaces, rows by `;`)".into(),
            Kind::Ratio { max } => {
                format!("a factor above 0 and at most {max}, as a number or a percentage (0.5 or 50%)")
            }
            Kind::Aspect => "an aspect ratio above 0, as W:H or a number (16:9 or 1.5), or none".into(),
            Kind::Colour => "a colour: white, black, gray, #rrggbb or transparent".into(),
            Kind::File => "a file path (without commas), or none".into(),
        }
    }
}

/// One parameter of an operator.
#[derive(Clone, Copy, Debug)]
pub struct ParamSpec {
    pub name: &'static str,
    pub kind: Kind,
    /// The default as it would be written; `None` makes the parameter required.
    pub default: Option<&'static str>,
    pub help: &'static str,
}

/// Everything the registry knows about one operator.
pub struct OpSpec {
    pub name: &'static str,
    /// The operator family (DESIGN.md's table): filter, edge, geometry, tone, colour…
    pub family: &'static str,
    /// One line for the operator list.
    pub summary: &'static str,
    /// The full description: formula, domain, border rule and halo, source.
    pub doc: &'static str,
    /// The parameter that may be given without its name (`gauss:2`).
    pub main: Option<&'static str>,
    pub params: &'static [ParamSpec],
    /// Builds the operator from checked parameters.
    pub build: fn(&Args) -> Result<Box<dyn Operator>, ParamError>,
}

impl fmt::Debug for OpSpec {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("OpSpec").field("name", &self.name).finish_non_exhaustive()
    }
}

/// A matrix value, row-major.
#[derive(Clone, Debug, PartialEq)]
pub struct Matrix {
    pub rows: usize,
    pub cols: usize,
    pub data: Vec<f64>,
}

impl Matrix {
    pub fn get(&self, row: usize, col: usize) -> f64 {
        self.data[row * self.cols + col]
    }
}

impl fmt::Display for Matrix {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        for r in 0..self.rows {
            if r > 0 {
                f.write_str(";")?;
            }
            for c in 0..self.cols {
                if c > 0 {
                    f.write_str(" ")?;
                }
                write!(f, "{}", self.get(r, c))?;
            }
        }
        Ok(())
    }
}

/// A checked parameter value.
#[derive(Clone, Debug, PartialEq)]
pub enum Value {
    Number(f64),
    Bool(bool),
    Choice(&'static str),
    Matrix(Matrix),
    /// An sRGB-encoded colour, or `None` for transparent.
    Colour(Option<[f32; 3]>),
    /// A file path, or `None` for `none`.
    File(Option<std::path::PathBuf>),
}

impl fmt::Display for Value {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            Value::Number(v) => write!(f, "{v}"),
            Value::Bool(v) => write!(f, "{v}"),
            Value::Choice(v) => f.write_str(v),
            Value::Matrix(m) => write!(f, "{m}"),
            Value::Colour(None) => f.write_str("transparent"),
            Value::File(None) => f.write_str("none"),
            Value::File(Some(p)) => write!(f, "{}", p.display()),
            Value::Colour(Some(c)) => {
                let [r, g, b] = c.map(|v| (v * 255.0).round() as u8);
                write!(f, "#{r:02x}{g:02x}{b:02x}")
            }
        }
    }
}

/// The checked parameters of one step: every parameter of the operator, given
/// or defaulted, in the order the operator lists them.
#[derive(Clone, Debug, PartialEq)]
pub struct Args {
    values: Vec<(&'static str, Value)>,
}

impl Args {
    /// Checks `given` (name, raw text) pairs against `spec`; a `None` name is the
    /// main parameter. Unknown names, repeats, missing required parameters and
    /// bad values are errors that name the parameter and what it accepts.
    pub fn check(spec: &OpSpec, given: &[(Option<String>, String)]) -> Result<Args, ParamError> {
        let mut raw: Vec<Option<&str>> = vec![None; spec.params.len()];
        for (name, text) in given {
            let name = match name {
                Some(n) => n.as_str(),
                None => spec.main.ok_or_else(|| {
                    ParamError::new(format!(
                        "`{}` takes no unnamed parameter; write NAME=VALUE (parameters: {})",
                        spec.name,
                        param_names(spec)
                    ))
                })?,
            };
            let i = spec.params.iter().position(|p| p.name == name).ok_or_else(|| {
                let hint = crate::suggest::nearest(name, spec.params.iter().map(|p| p.name))
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                ParamError::new(format!(
                    "unknown parameter `{name}`{hint}; `{}` takes {}",
                    spec.name,
                    param_names(spec)
                ))
            })?;
            if raw[i].replace(text.as_str()).is_some() {
                return Err(ParamError::new(format!("parameter `{name}` is given twice")));
            }
        }
        let mut values = Vec::with_capacity(spec.params.len());
        for (p, text) in spec.params.iter().zip(raw) {
            let text = match text.or(p.default) {
                Some(t) => t,
                None => {
                    return Err(ParamError::new(format!(
                        "`{}` needs parameter `{}` ({})",
                        spec.name,
                        p.name,
                        p.kind.describe()
                    )));
                }
            };
            values.push((p.name, parse_value(p, text)?));
        }
        Ok(Args { values })
    }

    fn get(&self, name: &str) -> Result<&Value, ParamError> {
        self.values
            .iter()
            .find(|(n, _)| *n == name)
            .map(|(_, v)| v)
            .ok_or_else(|| ParamError::new(format!("internal: no parameter `{name}`")))
    }

    pub fn number(&self, name: &str) -> Result<f64, ParamError> {
        match self.get(name)? {
            Value::Number(v) => Ok(*v),
            other => Err(ParamError::new(format!("internal: `{name}` is {other}, not a number"))),
        }
    }

    /// A whole-number parameter (its spec guarantees it is whole and in range).
    pub fn int(&self, name: &str) -> Result<i64, ParamError> {
        self.number(name).map(|v| v as i64)
    }

    pub fn bool(&self, name: &str) -> Result<bool, ParamError> {
        match self.get(name)? {
            Value::Bool(v) => Ok(*v),
            other => Err(ParamError::new(format!("internal: `{name}` is {other}, not a bool"))),
        }
    }

    pub fn choice(&self, name: &str) -> Result<&'static str, ParamError> {
        match self.get(name)? {
            Value::Choice(v) => Ok(v),
            other => Err(ParamError::new(format!("internal: `{name}` is {other}, not a choice"))),
        }
    }

    /// A colour parameter: `Some` sRGB-encoded colour, or `None` for transparent.
    pub fn colour(&self, name: &str) -> Result<Option<[f32; 3]>, ParamError> {
        match self.get(name)? {
            Value::Colour(c) => Ok(*c),
            other => Err(ParamError::new(format!("internal: `{name}` is {other}, not a colour"))),
        }
    }

    /// A file parameter: `Some` path, or `None` for `none`.
    pub fn file(&self, name: &str) -> Result<Option<&std::path::Path>, ParamError> {
        match self.get(name)? {
            Value::File(p) => Ok(p.as_deref()),
            other => Err(ParamError::new(format!("internal: `{name}` is {other}, not a file"))),
        }
    }

    pub fn matrix(&self, name: &str) -> Result<&Matrix, ParamError> {
        match self.get(name)? {
            Value::Matrix(m) => Ok(m),
            other => Err(ParamError::new(format!("internal: `{name}` is {other}, not a matrix"))),
        }
    }

    /// `name=value` pairs in the operator's order, as a step would write them.
    pub fn pairs(&self) -> impl Iterator<Item = (&'static str, &Value)> {
        self.values.iter().map(|(n, v)| (*n, v))
    }
}

fn param_names(spec: &OpSpec) -> String {
    if spec.params.is_empty() {
        return "no parameters".into();
    }
    spec.params.iter().map(|p| format!("`{}`", p.name)).collect::<Vec<_>>().join(", ")
}

fn parse_value(p: &ParamSpec, text: &str) -> Result<Value, ParamError> {
    let bad =
        || ParamError::new(format!("parameter `{}` must be {}, got `{text}`", p.name, p.kind.describe()));
    match p.kind {
        Kind::Number { min, max, min_open, integer } => {
            let v: f64 = text.trim().parse().map_err(|_| bad())?;
            let low_ok = if min_open { v > min } else { v >= min };
            if !v.is_finite() || !low_ok || v > max || (integer && v.fract() != 0.0) {
                return Err(bad());
            }
            Ok(Value::Number(v))
        }
        Kind::Bool => match text.trim() {
            "true" => Ok(Value::Bool(true)),
            "false" => Ok(Value::Bool(false)),
            _ => Err(bad()),
        },
        Kind::Choice(choices) => {
            let t = text.trim();
            match choices.iter().find(|c| **c == t) {
                Some(c) => Ok(Value::Choice(c)),
                None => {
                    let hint = crate::suggest::nearest(t, choices.iter().copied())
                        .map(|s| format!(" (did you mean `{s}`?)"))
                        .unwrap_or_default();
                    Err(ParamError::new(format!(
                        "unknown {} `{t}`{hint}; expected one of {}",
                        p.name,
                        choices.join(", ")
                    )))
                }
            }
        }
        Kind::Ratio { max } => {
            let t = text.trim();
            let v: f64 = match t.strip_suffix('%') {
                Some(p) => p.trim().parse::<f64>().map_err(|_| bad())? / 100.0,
                None => t.parse().map_err(|_| bad())?,
            };
            if !(v.is_finite() && v > 0.0 && v <= max) {
                return Err(bad());
            }
            Ok(Value::Number(v))
        }
        Kind::Aspect => {
            let t = text.trim();
            if t == "none" {
                return Ok(Value::Number(0.0));
            }
            let v = match t.split_once(':') {
                Some((w, h)) => {
                    let w: f64 = w.trim().parse().map_err(|_| bad())?;
                    let h: f64 = h.trim().parse().map_err(|_| bad())?;
                    w / h
                }
                None => t.parse().map_err(|_| bad())?,
            };
            if !(v.is_finite() && v > 0.0) {
                return Err(bad());
            }
            Ok(Value::Number(v))
        }
        Kind::Colour => match text.trim() {
            "transparent" => Ok(Value::Colour(None)),
            t => crate::color::parse_colour(t)
                .map(|c| Value::Colour(Some(c)))
                .map_err(|why| ParamError::new(format!("parameter `{}`: {why} or transparent", p.name))),
        },
        Kind::File => match text.trim() {
            "" => Err(bad()),
            "none" => Ok(Value::File(None)),
            t => Ok(Value::File(Some(std::path::PathBuf::from(t)))),
        },
        Kind::Matrix => parse_matrix(text)
            .map(Value::Matrix)
            .map_err(|why| ParamError::new(format!("parameter `{}`: {why}", p.name))),
    }
}

/// Parses `1 2 1; 2 4 2; 1 2 1`: numbers separated by white space, rows by `;`.
pub fn parse_matrix(text: &str) -> Result<Matrix, String> {
    let mut data = Vec::new();
    let mut cols = None;
    let mut rows = 0;
    for (r, row) in text.split(';').enumerate() {
        let mut n = 0;
        for item in row.split_whitespace() {
            let v: f64 = item
                .parse()
                .ok()
                .filter(|v: &f64| v.is_finite())
                .ok_or_else(|| format!("malformed matrix: `{item}` in row {} is not a number", r + 1))?;
            data.push(v);
            n += 1;
        }
        if n == 0 {
            return Err(format!("malformed matrix: row {} is empty", r + 1));
        }
        match cols {
            None => cols = Some(n),
            Some(c) if c != n => {
                return Err(format!("malformed matrix: row {} has {n} numbers but row 1 has {c}", r + 1));
            }
            Some(_) => {}
        }
        rows += 1;
    }
    let cols = cols.ok_or("malformed matrix: no numbers")?;
    Ok(Matrix { rows, cols, data })
}

/// The `border` parameter shared by neighbourhood operators.
pub const BORDER_PARAM: ParamSpec = ParamSpec {
    name: "border",
    kind: Kind::Choice(&crate::tile::border::BORDER_NAMES),
    default: Some("reflect"),
    help: "how samples outside the image are filled (see `pumice ops` for the rules)",
};

/// The `fill` parameter: the value `border=constant` uses.
pub const FILL_PARAM: ParamSpec = ParamSpec {
    name: "fill",
    kind: Kind::real(-1e30, 1e30),
    default: Some("0"),
    help: "sample value outside the image when border=constant",
};

/// Reads `border` and `fill` into a [`crate::tile::Border`].
pub fn border(args: &Args) -> Result<crate::tile::Border, ParamError> {
    let name = args.choice("border")?;
    let fill = args.number("fill")? as f32;
    crate::tile::Border::from_name(name, fill)
        .ok_or_else(|| ParamError::new(format!("internal: unknown border `{name}`")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matrices_parse_and_reject_ragged_rows() {
        let m = parse_matrix("1 2 1; 2 4 2 ;1 2 1").unwrap();
        assert_eq!((m.rows, m.cols), (3, 3));
        assert_eq!(m.get(1, 1), 4.0);
        assert!(parse_matrix("1 2; 3").unwrap_err().contains("row 2 has 1"));
        assert!(parse_matrix("1 x").unwrap_err().contains("`x`"));
        assert!(parse_matrix("1 2;;3 4").unwrap_err().contains("row 2 is empty"));
        assert!(parse_matrix("").is_err());
        assert!(parse_matrix("nan").is_err());
    }

    #[test]
    fn file_parameters_take_a_path_or_none() {
        let p = ParamSpec { name: "flat", kind: Kind::File, default: Some("none"), help: "" };
        assert_eq!(parse_value(&p, "none").unwrap(), Value::File(None));
        let v = parse_value(&p, " frames/flat.tif ").unwrap();
        assert_eq!(v, Value::File(Some("frames/flat.tif".into())));
        assert_eq!(v.to_string(), "frames/flat.tif");
        assert!(parse_value(&p, "  ").unwrap_err().0.contains("a file path"));
    }
}

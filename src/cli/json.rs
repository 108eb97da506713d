//! A small JSON writer for `--json` output: values built in order and printed
//! compactly on one line. Non-finite numbers print as `null`.

/// A JSON value; objects keep their fields in the order given.
#[derive(Clone, Debug, PartialEq)]
pub enum Json {
    Null,
    Bool(bool),
    Int(i128),
    Num(f64),
    Str(String),
    Arr(Vec<Json>),
    Obj(Vec<(&'static str, Json)>),
}

impl Json {
    pub fn str(s: impl Into<String>) -> Json {
        Json::Str(s.into())
    }

    pub fn int(v: impl Into<i128>) -> Json {
        Json::Int(v.into())
    }

    /// `Null` for `None`, else `f(value)`.
    pub fn opt<T>(v: Option<T>, f: impl FnOnce(T) -> Json) -> Json {
        v.map_or(Json::Null, f)
    }
}

impl std::fmt::Display for Json {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Json::Null => f.write_str("null"),
            Json::Bool(b) => write!(f, "{b}"),
            Json::Int(i) => write!(f, "{i}"),
            // Whole numbers without a point; others in the shortest round-trip
            // form, with an exponent when very small or large (valid JSON either way).
            Json::Num(v) if v.is_finite() && v.trunc() == *v && v.abs() < 1e15 => write!(f, "{v}"),
            Json::Num(v) if v.is_finite() => write!(f, "{v:?}"),
            Json::Num(_) => f.write_str("null"),
            Json::Str(s) => {
                f.write_str("\"")?;
                for c in s.chars() {
                    match c {
                        '"' => f.write_str("\\\"")?,
                        '\\' => f.write_str("\\\\")?,
                        '\n' => f.write_str("\\n")?,
                        '\r' => f.write_str("\\r")?,
                        '\t' => f.write_str("\\t")?,
                        c if u32::from(c) < 0x20 => write!(f, "\\u{:04x}", u32::from(c))?,
                        c => write!(f, "{c}")?,
                    }
                }
                f.write_str("\"")
            }
            Json::Arr(items) => {
                f.write_str("[")?;
                for (i, v) in items.iter().enumerate() {
                    if i > 0 {
                        f.write_str(",")?;
                    }
                    write!(f, "{v}")?;
                }
                f.write_str("]")
            }
            Json::Obj(fields) => {
                f.write_str("{")?;
                for (i, (k, v)) in fields.iter().enumerate() {
                    if i > 0 {
                        f.write_str(",")?;
                    }
                    write!(f, "{}:{v}", Json::str(*k))?;
                }
                f.write_str("}")
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_valid_compact_json() {
        let v = Json::Obj(vec![
            ("a", Json::Arr(vec![Json::int(1u8), Json::Num(0.5), Json::Num(f64::INFINITY), Json::Null])),
            ("s", Json::str("q\"\\\n\u{1}é")),
            ("t", Json::Bool(true)),
        ]);
        assert_eq!(v.to_string(), r#"{"a":[1,0.5,null,null],"s":"q\"\\\n\u0001é","t":true}"#);
        assert_eq!(Json::Num(3.0).to_string(), "3");
        assert_eq!(Json::Num(2.5e-17).to_string(), "2.5e-17");
        assert_eq!(Json::Num(-0.125).to_string(), "-0.125");
        assert_eq!(Json::Num(1e300).to_string(), "1e300");
    }
}

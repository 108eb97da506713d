//! Helpers for `--json` output over serde_json: objects keep their fields in
//! the order given (serde_json's `preserve_order` feature) and are printed
//! compactly on one line; non-finite numbers become `null`.

pub use serde_json::Value;

/// An object with `fields` in this order.
pub fn obj(fields: Vec<(&'static str, Value)>) -> Value {
    Value::Object(fields.into_iter().map(|(k, v)| (k.to_string(), v)).collect())
}

/// `null` for `None`, else `f(value)`.
pub fn opt<T>(v: Option<T>, f: impl FnOnce(T) -> Value) -> Value {
    v.map_or(Value::Null, f)
}

/// A string value.
pub fn text(s: impl AsRef<str>) -> Value {
    Value::String(s.as_ref().to_string())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn writes_ordered_compact_json_with_null_for_non_finite_numbers() {
        let v = obj(vec![
            (
                "z",
                Value::Array(vec![
                    Value::from(1u8),
                    Value::from(0.5),
                    Value::from(f64::INFINITY),
                    Value::Null,
                ]),
            ),
            ("s", text("q\"\\\n\u{1}é")),
            ("a", opt(Some(true), Value::Bool)),
            ("n", opt(None::<f64>, Value::from)),
        ]);
        assert_eq!(v.to_string(), r#"{"z":[1,0.5,null,null],"s":"q\"\\\n\u0001é","a":true,"n":null}"#);
    }
}

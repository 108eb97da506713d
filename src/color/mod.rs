//! Colour maths: the sRGB transfer function and luma weights. Pure functions on
//! numbers and slices; nothing here knows about files or pipelines.

pub mod luma;
pub mod models;
pub mod srgb;

/// Parses a colour: `white`, `black`, `gray` (sRGB 0.5) or `#rrggbb`, as
/// sRGB-encoded values in `[0, 1]`.
pub fn parse_colour(s: &str) -> Result<[f32; 3], String> {
    let bad = || format!("unknown colour `{s}`; expected white, black, gray or #rrggbb");
    match s {
        "white" => Ok([1.0; 3]),
        "black" => Ok([0.0; 3]),
        "gray" | "grey" => Ok([0.5; 3]),
        _ => {
            let hex = s.strip_prefix('#').filter(|h| h.len() == 6 && h.is_ascii()).ok_or_else(bad)?;
            let mut out = [0.0; 3];
            for (i, o) in out.iter_mut().enumerate() {
                let v = u8::from_str_radix(&hex[2 * i..2 * i + 2], 16).map_err(|_| bad())?;
                *o = f32::from(v) / 255.0;
            }
            Ok(out)
        }
    }
}

#[cfg(test)]
mod tests {
    use super::parse_colour;

    #[test]
    fn colours_parse() {
        assert_eq!(parse_colour("#ff8000"), Ok([1.0, 128.0 / 255.0, 0.0]));
        assert!(parse_colour("#ff80").is_err());
        assert!(parse_colour("#ffé000").is_err());
        assert_eq!(parse_colour("black"), Ok([0.0; 3]));
    }
}

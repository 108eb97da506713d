//! Recipe files: TOML holding the run options and the ordered steps, so a run
//! can be repeated exactly.
//!
//! ```toml
//! [options]
//! input-encoding = "linear"   # auto | srgb | linear
//! depth = "16"                # source | 8 | 16 | f32
//! meta = "keep"               # keep | drop
//! pixel-size = "0.65um"       # calibration: nm | um | mm | cm | in
//!
//! [[step]]
//! op = "gauss"
//! sigma = 2.0
//!
//! [[step]]
//! op = "convolve"
//! kernel = [[1, 2, 1], [2, 4, 2], [1, 2, 1]]
//! normalize = true
//! ```

use std::path::Path;

use super::options::{self, OptionOverrides};
use crate::error::Error;
use crate::ops::params::Kind;
use crate::pipeline::{Pipeline, Step, registry};

/// A parsed, checked recipe.
#[derive(Debug)]
pub struct Recipe {
    pub options: OptionOverrides,
    pub pipeline: Pipeline,
}

const OPTION_KEYS: [&str; 9] =
    ["input-encoding", "depth", "meta", "format", "quality", "chroma", "domain", "background", "pixel-size"];

/// Parses and checks a recipe; `origin` names it in errors. File parameters
/// (e.g. `flatfield`'s `dark` and `flat`) given as relative paths are taken
/// relative to `folder`, the recipe file's folder, so a recipe and its frames
/// can move together; without a folder they stay relative to the working folder.
pub fn parse(text: &str, origin: &str, folder: Option<&Path>) -> Result<Recipe, Error> {
    let fail = |m: String| Error::Recipe(format!("recipe {origin}: {m}"));
    let table: toml::Table = toml::from_str(text).map_err(|e| fail(e.to_string().trim_end().to_string()))?;
    let mut options = OptionOverrides::default();
    let mut steps = Vec::new();
    for (key, value) in &table {
        match key.as_str() {
            "options" => {
                let t =
                    value.as_table().ok_or_else(|| fail("`options` must be a table ([options])".into()))?;
                read_options(t, &mut options).map_err(fail)?;
            }
            "step" => {
                let list = value
                    .as_array()
                    .ok_or_else(|| fail("`step` must be an array of tables ([[step]])".into()))?;
                for (i, item) in list.iter().enumerate() {
                    let t = item.as_table().ok_or_else(|| fail(format!("step {} is not a table", i + 1)))?;
                    steps.push(read_step(t, folder).map_err(|m| fail(format!("step {}: {m}", i + 1)))?);
                }
            }
            other => {
                let hint = crate::suggest::nearest(other, ["options", "step"])
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                return Err(fail(format!(
                    "unknown section `{other}`{hint}; a recipe holds [options] and [[step]] tables"
                )));
            }
        }
    }
    Ok(Recipe { options, pipeline: Pipeline::new(steps) })
}

fn read_options(t: &toml::Table, o: &mut OptionOverrides) -> Result<(), String> {
    for (key, value) in t {
        let text = || value.as_str().ok_or_else(|| format!("option `{key}` must be a string"));
        match key.as_str() {
            "input-encoding" => o.input_encoding = Some(text()?.parse()?),
            "depth" => o.sample = Some(options::parse_depth(text()?)?),
            "meta" => o.keep_metadata = Some(options::parse_meta(text()?)?),
            "format" => o.format = Some(options::parse_format(text()?)?),
            "chroma" => o.chroma = Some(text()?.parse()?),
            "domain" => o.domain = Some(text()?.parse()?),
            "background" => o.background = Some(options::parse_colour(text()?)?),
            "pixel-size" => o.pixel_size = Some(options::parse_pixel_size(text()?)?),
            "quality" => {
                let q = value.as_integer().filter(|q| (1..=100).contains(q)).ok_or_else(|| {
                    format!("option `quality` must be a whole number from 1 to 100, got {value}")
                })?;
                o.quality = Some(q as u8);
            }
            other => {
                let hint = crate::suggest::nearest(other, OPTION_KEYS)
                    .map(|s| format!(" (did you mean `{s}`?)"))
                    .unwrap_or_default();
                return Err(format!(
                    "unknown option `{other}`{hint}; expected one of {}",
                    OPTION_KEYS.join(", ")
                ));
            }
        }
    }
    Ok(())
}

fn read_step(t: &toml::Table, folder: Option<&Path>) -> Result<Step, String> {
    let op =
        t.get("op").and_then(|v| v.as_str()).ok_or_else(|| "every step needs `op = \"NAME\"`".to_string())?;
    let spec = registry::find(op).map_err(|e| e.to_string())?;
    let mut params = Vec::new();
    for (key, value) in t {
        if key != "op" {
            let mut text = value_text(key, value)?;
            let is_file = spec.params.iter().any(|p| p.name == key && matches!(p.kind, Kind::File));
            if let Some(folder) = folder
                && is_file
                && text != "none"
                && Path::new(&text).is_relative()
            {
                text = folder.join(&text).to_string_lossy().into_owned();
            }
            params.push((Some(key.clone()), text));
        }
    }
    Step::build(op, &params).map_err(|e| e.to_string())
}

/// A TOML value as the step grammar writes it: numbers and booleans as text,
/// arrays of numbers as a matrix row, arrays of arrays as a matrix.
fn value_text(key: &str, v: &toml::Value) -> Result<String, String> {
    let number = |v: &toml::Value| match v {
        toml::Value::Integer(i) => Ok(i.to_string()),
        toml::Value::Float(f) => Ok(f.to_string()),
        _ => Err(format!("`{key}`: matrix entries must be numbers, got {v}")),
    };
    let row = |v: &toml::Value| -> Result<String, String> {
        match v {
            toml::Value::Array(a) => Ok(a.iter().map(number).collect::<Result<Vec<_>, _>>()?.join(" ")),
            other => number(other),
        }
    };
    match v {
        toml::Value::String(s) => Ok(s.clone()),
        toml::Value::Integer(_) | toml::Value::Float(_) => number(v),
        toml::Value::Boolean(b) => Ok(b.to_string()),
        toml::Value::Array(a) if a.iter().all(|x| x.is_array()) => {
            Ok(a.iter().map(row).collect::<Result<Vec<_>, _>>()?.join(";"))
        }
        toml::Value::Array(_) => row(v),
        other => Err(format!("`{key}` cannot be {other}")),
    }
}

#[cfg(test)]
mod tests {
    //! Edge cases: empty recipe, syntax errors with line and column, unknown
    //! sections, options and parameters, matrices as arrays.
    use super::*;
    use crate::raster::SampleType;

    #[test]
    fn full_recipe() {
        let r = parse(
            "[options]\ndepth = \"16\"\nquality = 80\n\n[[step]]\nop = \"gauss\"\nsigma = 2\n\n\
             [[step]]\nop = \"convolve\"\nkernel = [[1, 2, 1], [2, 4, 2], [1, 2, 1]]\nnormalize = true\n",
            "t.toml",
            None,
        )
        .unwrap();
        assert_eq!(r.options.sample, Some(Some(SampleType::U16)));
        assert_eq!(r.options.quality, Some(80));
        assert_eq!(r.pipeline.steps.len(), 2);
        assert!(r.pipeline.steps[1].to_string().contains("kernel=1 2 1;2 4 2;1 2 1"));
    }

    #[test]
    fn frame_paths_are_relative_to_the_recipe_folder() {
        let text = "[[step]]\nop = \"flatfield\"\ndark = \"frames/dark.tif\"\nflat = \"/abs/flat.tif\"\n";
        // The frames do not exist: the error names the path the recipe resolved.
        let e = parse(text, "lab/r.toml", Some(Path::new("lab"))).unwrap_err().to_string();
        assert!(e.contains("lab/frames/dark.tif"), "{e}");
        let e = parse(text, "r.toml", None).unwrap_err().to_string();
        assert!(e.contains("frames/dark.tif") && !e.contains("lab/"), "{e}");
    }

    #[test]
    fn errors_name_the_place() {
        let e = parse("[[step]]\nop = \"gauss\"\nsigma = = 2\n", "bad.toml", None).unwrap_err().to_string();
        assert!(e.contains("bad.toml") && e.contains("line 3"), "{e}");
        let e = parse("[[step]]\nop = \"gauss\"\nsigmaa = 2\n", "r", None).unwrap_err().to_string();
        assert!(e.contains("step 1") && e.contains("did you mean `sigma`"), "{e}");
        let e = parse("[option]\n", "r", None).unwrap_err().to_string();
        assert!(e.contains("did you mean `options`"), "{e}");
        let e = parse("[options]\ndepht = \"8\"\n", "r", None).unwrap_err().to_string();
        assert!(e.contains("did you mean `depth`"), "{e}");
        assert!(parse("", "r", None).unwrap().pipeline.steps.is_empty());
    }
}

//! Output naming: one file, a folder that mirrors the inputs, or a name template.

use std::path::{Path, PathBuf};

use super::discover::InputFile;
use crate::io::Format;

/// Where a run's outputs go.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum OutputSpec {
    /// One output file (one input only).
    File(PathBuf),
    /// A folder: each output is `FOLDER/SUB/STEM.EXT`, `SUB` the input's sub-folder.
    Folder(PathBuf),
    /// A name template with `{…}` fields (see [`expand`]).
    Template(String),
}

impl OutputSpec {
    /// Reads `-o`: text with `{` is a template; an existing folder, a path
    /// ending in `/`, or — for a batch (several inputs, a folder or a
    /// pattern) — a path without extension is a folder; anything else a file.
    pub fn parse(text: &Path, batch: bool) -> Result<OutputSpec, String> {
        let s = text.to_string_lossy();
        if s.contains('{') {
            // Checked once here so a bad template is a usage error before any work.
            expand(&s, &Fields::example())?;
            return Ok(OutputSpec::Template(s.into_owned()));
        }
        if text.is_dir() || s.ends_with('/') || (batch && text.extension().is_none()) {
            return Ok(OutputSpec::Folder(text.to_path_buf()));
        }
        if batch {
            return Err(format!(
                "several inputs cannot all be written to the one file `{s}`; give a folder or a name template such as `out/{{stem}}.png`"
            ));
        }
        Ok(OutputSpec::File(text.to_path_buf()))
    }

    /// The output path for `input`, the `n`th (1-based) of the whole sorted
    /// input list; `format` is `--format` when given.
    pub fn output_for(&self, input: &InputFile, n: usize, format: Option<Format>) -> Result<PathBuf, String> {
        match self {
            OutputSpec::File(p) => Ok(p.clone()),
            OutputSpec::Folder(dir) => {
                let fields = Fields::of(input, n);
                let ext = match format {
                    Some(f) => f.extension().unwrap_or(fields.ext.as_str()).to_string(),
                    None => match Format::from_extension(&fields.ext).and_then(Format::extension) {
                        Some(_) => fields.ext.to_ascii_lowercase(),
                        None => {
                            return Err(format!(
                                "`{}`: Pumice does not write {} files; give --format",
                                input.path.display(),
                                if fields.ext.is_empty() { "extension-less" } else { fields.ext.as_str() }
                            ));
                        }
                    },
                };
                Ok(dir.join(input.sub_folder()).join(format!("{}.{ext}", fields.stem)))
            }
            OutputSpec::Template(t) => expand(t, &Fields::of(input, n)).map(PathBuf::from),
        }
    }

    /// With `{page}` in the template: the names of `input`'s per-page outputs
    /// ([`OutputSpec::output_for`] is then the first page's name).
    pub fn page_names_for(&self, input: &InputFile, n: usize) -> Option<PageNames> {
        let OutputSpec::Template(t) = self else { return None };
        let fields = Fields::of(input, n);
        let second = Fields { page: 2, ..fields.clone() };
        // A template names pages when page 1 and page 2 get different names.
        (expand(t, &fields).ok()? != expand(t, &second).ok()?)
            .then(|| PageNames { template: t.clone(), fields })
    }
}

/// The output names of one input's pages: a template with `{page}`, and the
/// input's other fields.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct PageNames {
    template: String,
    fields: Fields,
}

impl PageNames {
    /// The output for page `page` (1-based).
    pub fn path(&self, page: usize) -> Result<PathBuf, String> {
        expand(&self.template, &Fields { page, ..self.fields.clone() }).map(PathBuf::from)
    }
}

/// The values a template can use.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct Fields {
    /// File name without its last extension.
    pub stem: String,
    /// The input's extension, without the dot (empty if none).
    pub ext: String,
    /// The whole file name.
    pub name: String,
    /// The name of the folder holding the input (empty at a file-system root).
    pub parent: String,
    /// The input's sub-folder below its root (`a/b`, or empty).
    pub dir: String,
    /// The input's 1-based position in the sorted input list.
    pub n: usize,
    /// The 1-based page of a multi-page input (1 for a single image).
    pub page: usize,
}

impl Fields {
    pub fn of(input: &InputFile, n: usize) -> Fields {
        let text =
            |s: Option<&std::ffi::OsStr>| s.map(|s| s.to_string_lossy().into_owned()).unwrap_or_default();
        let parent = input.path.parent().and_then(|p| {
            if p.as_os_str().is_empty() { Path::new(".").canonicalize().ok() } else { Some(p.to_path_buf()) }
        });
        Fields {
            stem: text(input.path.file_stem()),
            ext: text(input.path.extension()),
            name: text(input.path.file_name()),
            parent: text(parent.as_deref().and_then(Path::file_name)),
            dir: input.sub_folder().to_string_lossy().into_owned(),
            n,
            page: 1,
        }
    }

    fn example() -> Fields {
        Fields {
            stem: "a".into(),
            ext: "png".into(),
            name: "a.png".into(),
            parent: "p".into(),
            dir: String::new(),
            n: 1,
            page: 1,
        }
    }
}

/// The template fields, for messages.
pub const FIELD_NAMES: &str =
    "{stem}, {ext}, {name}, {parent}, {dir}, {n}, {page} (or {n:04}, {page:03} for zero-padded)";

/// Expands `template`: `{stem}`, `{ext}`, `{name}`, `{parent}`, `{dir}`, `{n}`
/// and `{page}` are replaced by the input's values (`{n:0W}` and `{page:0W}`
/// pad with zeros to `W` digits), `{{` and `}}` are literal braces. Anything
/// else in braces is an error naming it.
pub fn expand(template: &str, f: &Fields) -> Result<String, String> {
    let mut out = String::with_capacity(template.len() + 16);
    let mut rest = template;
    while let Some(i) = rest.find(['{', '}']) {
        out.push_str(&rest[..i]);
        let tail = &rest[i..];
        if tail.starts_with("{{") || tail.starts_with("}}") {
            out.push_str(&tail[..1]);
            rest = &tail[2..];
            continue;
        }
        if tail.starts_with('}') {
            return Err(format!(
                "output template `{template}`: a `}}` without its `{{` (write `}}}}` for a brace)"
            ));
        }
        let Some(end) = tail.find('}') else {
            return Err(format!("output template `{template}`: a `{{` without its `}}`"));
        };
        let field = &tail[1..end];
        match field {
            "stem" => out.push_str(&f.stem),
            "ext" => out.push_str(&f.ext),
            "name" => out.push_str(&f.name),
            "parent" => out.push_str(&f.parent),
            "dir" => out.push_str(&f.dir),
            "n" => out.push_str(&f.n.to_string()),
            "page" => out.push_str(&f.page.to_string()),
            _ => match padded(field) {
                Some((Counter::N, width)) => out.push_str(&format!("{:0width$}", f.n)),
                Some((Counter::Page, width)) => out.push_str(&format!("{:0width$}", f.page)),
                None => {
                    return Err(format!(
                        "output template `{template}`: unknown field `{{{field}}}`; the fields are {FIELD_NAMES}"
                    ));
                }
            },
        }
        rest = &tail[end + 1..];
    }
    out.push_str(rest);
    if out.is_empty() {
        return Err(format!("output template `{template}` gives an empty name"));
    }
    Ok(out)
}

enum Counter {
    N,
    Page,
}

/// `n:0W` or `page:0W` with a width of at most 12 digits.
fn padded(field: &str) -> Option<(Counter, usize)> {
    let (counter, width) = if let Some(w) = field.strip_prefix("n:0") {
        (Counter::N, w)
    } else {
        (Counter::Page, field.strip_prefix("page:0")?)
    };
    let width = width.parse::<usize>().ok().filter(|w| *w <= 12)?;
    Some((counter, width))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn input(path: &str, relative: &str) -> InputFile {
        InputFile { path: path.into(), relative: relative.into() }
    }

    #[test]
    fn templates_expand_every_field() {
        let i = input("scans/box3/page.01.TIF", "box3/page.01.TIF");
        let f = Fields::of(&i, 7);
        assert_eq!(
            expand("out/{dir}/{parent}-{stem}-{n:04}.{ext}|{name}|{n}|{{x}}", &f).unwrap(),
            "out/box3/box3-page.01-0007.TIF|page.01.TIF|7|{x}"
        );
        let p = Fields { page: 3, ..f.clone() };
        assert_eq!(expand("{stem}-p{page}-{page:03}.tif", &p).unwrap(), "page.01-p3-003.tif");
        for bad in ["{size}", "{stem", "stem}", "{n:0x}", "{page:0}", "{page:013}", ""] {
            assert!(expand(bad, &f).is_err(), "{bad}");
        }
    }

    #[test]
    fn only_templates_with_a_page_field_name_pages() {
        let i = input("in/stack.tif", "stack.tif");
        let paged = OutputSpec::parse(Path::new("out/{stem}-{page:02}.tif"), false).unwrap();
        let names = paged.page_names_for(&i, 1).unwrap();
        assert_eq!(names.path(1).unwrap(), Path::new("out/stack-01.tif"));
        assert_eq!(names.path(12).unwrap(), Path::new("out/stack-12.tif"));
        assert_eq!(paged.output_for(&i, 1, None).unwrap(), names.path(1).unwrap());
        let plain = OutputSpec::parse(Path::new("out/{stem}.tif"), false).unwrap();
        assert!(plain.page_names_for(&i, 1).is_none());
        assert!(OutputSpec::Folder("out".into()).page_names_for(&i, 1).is_none());
    }

    #[test]
    fn folders_mirror_sub_folders_and_take_the_format_extension() {
        let out = OutputSpec::parse(Path::new("web/"), true).unwrap();
        let i = input("in/a/b.JPG", "a/b.JPG");
        assert_eq!(out.output_for(&i, 1, None).unwrap(), Path::new("web/a/b.jpg"));
        assert_eq!(out.output_for(&i, 1, Some(Format::Webp)).unwrap(), Path::new("web/a/b.webp"));
        let gif = input("in/c.gif", "c.gif");
        assert!(out.output_for(&gif, 2, None).unwrap_err().contains("--format"));
        assert!(OutputSpec::parse(Path::new("one.png"), true).unwrap_err().contains("name template"));
        assert_eq!(
            OutputSpec::parse(Path::new("one.png"), false).unwrap(),
            OutputSpec::File("one.png".into())
        );
        assert!(OutputSpec::parse(Path::new("o/{bad}.png"), true).is_err());
    }
}

//! Input discovery: files, folders (optionally recursive) and glob patterns,
//! in one stable, sorted order.

use std::collections::HashSet;
use std::fs;
use std::path::{Component, Path, PathBuf};

use crate::error::Error;
use crate::io::Format;

/// One input file and where it sits below the folder (or pattern base) it was found under.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct InputFile {
    pub path: PathBuf,
    /// The path below its root: the file name for a file named directly, the
    /// path below the folder for a folder walk, below the pattern's literal
    /// start for a glob. Output folders mirror it; shards hash it.
    pub relative: PathBuf,
}

impl InputFile {
    /// The folder part of [`InputFile::relative`] (empty at the top).
    pub fn sub_folder(&self) -> &Path {
        self.relative.parent().unwrap_or(Path::new(""))
    }
}

/// What discovery found.
#[derive(Debug, Default)]
pub struct Discovery {
    /// Inputs, sorted by path, each once.
    pub files: Vec<InputFile>,
    /// Files met while walking folders that are not images Pumice reads (by extension).
    pub unsupported: Vec<PathBuf>,
}

/// Finds the inputs `args` name. A file is taken whatever its name (its
/// content decides the format); a folder contributes the files whose extension
/// names a format Pumice reads (sub-folders too with `recursive`), skipping
/// hidden names; an argument that does not exist but holds `*`, `?` or `[` is
/// a glob pattern (`**` crosses folders). A named file that does not exist is
/// kept as an input (it fails when read, like any other bad input); a pattern
/// that matches nothing is an error.
pub fn discover(args: &[PathBuf], recursive: bool) -> Result<Discovery, Error> {
    let mut found = Discovery::default();
    for arg in args {
        if arg.is_dir() {
            walk(arg, arg, recursive, &mut found)?;
        } else if !arg.exists() && is_pattern(arg) {
            expand_pattern(arg, &mut found)?;
        } else {
            let relative = PathBuf::from(arg.file_name().unwrap_or(arg.as_os_str()));
            found.files.push(InputFile { path: arg.clone(), relative });
        }
    }
    found.files.sort_by(|a, b| a.path.cmp(&b.path));
    let mut seen = HashSet::new();
    found.files.retain(|f| seen.insert(lexical(&f.path)));
    found.unsupported.sort();
    Ok(found)
}

/// True when `p` holds a glob wildcard (`*`, `?` or `[`).
pub fn is_pattern(p: &Path) -> bool {
    p.to_string_lossy().contains(['*', '?', '['])
}

fn is_hidden(p: &Path) -> bool {
    p.file_name().is_some_and(|n| n.to_string_lossy().starts_with('.'))
}

fn walk(root: &Path, dir: &Path, recursive: bool, found: &mut Discovery) -> Result<(), Error> {
    let entries = fs::read_dir(dir)
        .map_err(|e| Error::Recipe(format!("`{}`: cannot list the folder: {e}", dir.display())))?;
    for entry in entries {
        let entry =
            entry.map_err(|e| Error::Recipe(format!("`{}`: cannot list the folder: {e}", dir.display())))?;
        let path = entry.path();
        if is_hidden(&path) {
            continue;
        }
        // Follows links to files; does not descend into linked folders (no cycles).
        let kind = entry.file_type().map_err(Error::Io)?;
        if kind.is_dir() {
            if recursive {
                walk(root, &path, recursive, found)?;
            }
        } else if path.is_file() {
            if Format::from_path(&path).is_some() {
                let relative = path.strip_prefix(root).unwrap_or(&path).to_path_buf();
                found.files.push(InputFile { path, relative });
            } else {
                found.unsupported.push(path);
            }
        }
    }
    Ok(())
}

fn expand_pattern(pattern: &Path, found: &mut Discovery) -> Result<(), Error> {
    let text = pattern.to_string_lossy();
    let paths =
        glob::glob(&text).map_err(|e| Error::Recipe(format!("`{text}`: not a valid pattern: {e}")))?;
    // The literal start of the pattern: the components before the first wildcard.
    let base: PathBuf = pattern.components().take_while(|c| !is_pattern(Path::new(c.as_os_str()))).collect();
    let mut any = false;
    for entry in paths {
        let path = entry.map_err(|e| Error::Recipe(format!("`{text}`: {e}")))?;
        if path.is_file() && !is_hidden(&path) {
            any = true;
            let relative = path.strip_prefix(&base).unwrap_or(&path).to_path_buf();
            found.files.push(InputFile { path, relative });
        }
    }
    if any { Ok(()) } else { Err(Error::Recipe(format!("`{text}`: the pattern matches no file"))) }
}

/// `p` with `.` components removed and `..` applied where possible, for comparisons.
pub fn lexical(p: &Path) -> PathBuf {
    let mut out = PathBuf::new();
    for c in p.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir if matches!(out.components().next_back(), Some(Component::Normal(_))) => {
                out.pop();
            }
            other => out.push(other),
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    fn touch(p: &Path) {
        fs::create_dir_all(p.parent().unwrap()).unwrap();
        fs::write(p, b"x").unwrap();
    }

    #[test]
    fn folders_patterns_and_files_in_sorted_order() {
        let d = tempfile::tempdir().unwrap();
        let r = d.path();
        for n in ["b.png", "a.TIF", "notes.txt", ".hidden.png", "sub/c.jpg", "sub/deep/d.png"] {
            touch(&r.join(n));
        }
        let flat = discover(&[r.to_path_buf()], false).unwrap();
        let names: Vec<_> = flat.files.iter().map(|f| f.relative.to_string_lossy().into_owned()).collect();
        assert_eq!(names, ["a.TIF", "b.png"]);
        assert_eq!(flat.unsupported, [r.join("notes.txt")]);

        let deep = discover(&[r.to_path_buf()], true).unwrap();
        let names: Vec<_> = deep.files.iter().map(|f| f.relative.to_string_lossy().into_owned()).collect();
        assert_eq!(names, ["a.TIF", "b.png", "sub/c.jpg", "sub/deep/d.png"]);
        assert_eq!(deep.files[3].sub_folder(), Path::new("sub/deep"));

        let pattern = r.join("**/*.png");
        let globbed = discover(&[pattern, r.join("b.png")], false).unwrap();
        let names: Vec<_> = globbed.files.iter().map(|f| f.relative.to_string_lossy().into_owned()).collect();
        assert_eq!(names, ["b.png", "sub/deep/d.png"], "b.png named twice is taken once");

        let missing = discover(&[r.join("missing.png")], false).unwrap();
        assert_eq!(missing.files[0].path, r.join("missing.png"), "kept, to fail when read");
        assert!(discover(&[r.join("*.gif")], false).unwrap_err().to_string().contains("matches no file"));
    }

    #[test]
    fn lexical_normalisation() {
        assert_eq!(lexical(Path::new("./out/./a/../b.png")), Path::new("out/b.png"));
        assert_eq!(lexical(Path::new("../x.png")), Path::new("../x.png"));
    }
}

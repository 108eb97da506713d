//! Files: bounded reading of inputs (a path or standard input) and atomic
//! writing of outputs (a temporary file beside the target, renamed into place).

use std::fs;
use std::io::{self, Read, Write};
use std::path::{Path, PathBuf};

/// Where an image comes from or goes to: a file, or `-` for the standard streams.
#[derive(Clone, Debug, PartialEq, Eq)]
pub enum Location {
    Path(PathBuf),
    Std,
}

impl Location {
    /// `-` is the standard stream; anything else a path.
    pub fn parse(text: &Path) -> Location {
        if text == Path::new("-") { Location::Std } else { Location::Path(text.to_path_buf()) }
    }

    /// How the location reads in messages.
    pub fn display(&self) -> String {
        match self {
            Location::Path(p) => p.display().to_string(),
            Location::Std => "-".into(),
        }
    }
}

/// Reads all of `from`, refusing more than `max_bytes`.
pub fn read_input(from: &Location, max_bytes: u64) -> io::Result<Vec<u8>> {
    let too_big = || {
        io::Error::new(
            io::ErrorKind::InvalidData,
            format!("the input is larger than the limit of {max_bytes} bytes"),
        )
    };
    match from {
        Location::Path(p) => {
            let meta = fs::metadata(p)?;
            if meta.is_dir() {
                return Err(io::Error::new(io::ErrorKind::InvalidInput, "is a folder, not an image file"));
            }
            if meta.len() > max_bytes {
                return Err(too_big());
            }
            fs::read(p)
        }
        Location::Std => {
            let mut buf = Vec::new();
            io::stdin().lock().take(max_bytes.saturating_add(1)).read_to_end(&mut buf)?;
            if buf.len() as u64 > max_bytes {
                return Err(too_big());
            }
            Ok(buf)
        }
    }
}

/// Writes `bytes` to `to`. For a path, the bytes go to a temporary file in the
/// same folder, are flushed to disk, and the file is renamed onto `to` — so an
/// interrupted write leaves no partial image. Without `overwrite`, an existing
/// `to` is left alone and an `AlreadyExists` error returned (also when another
/// process creates it meanwhile).
pub fn write_atomic(to: &Location, bytes: &[u8], overwrite: bool) -> io::Result<()> {
    let path = match to {
        Location::Std => {
            let mut out = io::stdout().lock();
            return match out.write_all(bytes).and_then(|_| out.flush()) {
                // A closed pipe (`pumice … -o - | head`) is the reader's choice, not an error.
                Err(e) if e.kind() == io::ErrorKind::BrokenPipe => Ok(()),
                other => other,
            };
        }
        Location::Path(p) => p,
    };
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    let prefix = format!(".{name}.");
    let mut builder = tempfile::Builder::new();
    builder.prefix(&prefix).suffix(".tmp");
    // A temporary file is private by default; the output should get the
    // permissions a newly created file gets (0666 less the umask, which
    // open(2) applies to this mode) or, when replacing, those of the old file.
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        builder.permissions(fs::Permissions::from_mode(0o666));
    }
    let mut tmp = builder.tempfile_in(dir)?;
    if overwrite && let Ok(old) = fs::metadata(path) {
        tmp.as_file().set_permissions(old.permissions())?;
    }
    tmp.write_all(bytes)?;
    tmp.as_file().sync_all()?;
    if overwrite {
        tmp.persist(path).map_err(|e| e.error)?;
    } else {
        tmp.persist_noclobber(path).map_err(|e| e.error)?;
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn atomic_write_refuses_to_clobber_and_leaves_no_temporaries() {
        let dir = tempfile::tempdir().unwrap();
        let target = Location::Path(dir.path().join("out.png"));
        write_atomic(&target, b"one", false).unwrap();
        let e = write_atomic(&target, b"two", false).unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::AlreadyExists);
        write_atomic(&target, b"three", true).unwrap();
        assert_eq!(fs::read(dir.path().join("out.png")).unwrap(), b"three");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[cfg(unix)]
    #[test]
    fn outputs_get_ordinary_permissions() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("out.png");
        write_atomic(&Location::Path(path.clone()), b"x", false).unwrap();
        // Readable by others unless the umask forbids it (a umask of 077 would).
        let mode = fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_ne!(mode, 0o600, "output was left private: {mode:o}");
        fs::set_permissions(&path, fs::Permissions::from_mode(0o640)).unwrap();
        write_atomic(&Location::Path(path.clone()), b"y", true).unwrap();
        assert_eq!(
            fs::metadata(&path).unwrap().permissions().mode() & 0o777,
            0o640,
            "replacing keeps the old mode"
        );
    }

    #[test]
    fn reading_is_bounded() {
        let dir = tempfile::tempdir().unwrap();
        let p = dir.path().join("big.bin");
        fs::write(&p, vec![0u8; 100]).unwrap();
        assert!(read_input(&Location::Path(p.clone()), 99).is_err());
        assert_eq!(read_input(&Location::Path(p), 100).unwrap().len(), 100);
        assert!(read_input(&Location::Path(dir.path().into()), 100).is_err());
    }
}

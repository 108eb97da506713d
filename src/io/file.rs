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

/// Writes `bytes` to `to`. Without `overwrite`, an existing `to` is left
/// alone and an `AlreadyExists` error returned (also when another process
/// creates it meanwhile). A path never holds a partial image:
///
/// - On Linux the bytes go to an unnamed file in the target folder
///   (`O_TMPFILE`, open(2)), are flushed to disk, and the file is then given its
///   name with linkat(2) — which itself refuses an existing name — or, when
///   replacing, a hidden temporary name renamed onto `to`. A process killed
///   while writing leaves nothing behind: an unnamed file vanishes with its
///   last descriptor.
/// - Elsewhere (or on a file system without `O_TMPFILE`) a hidden temporary
///   file `.NAME.XXXXXX.tmp` in the same folder is written, flushed and renamed
///   onto `to`; only a process killed mid-write leaves that temporary behind.
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
    #[cfg(target_os = "linux")]
    if let Some(done) = unnamed::write(dir, path, bytes, overwrite) {
        return done;
    }
    write_named_temporary(dir, path, bytes, overwrite)
}

/// A name for a temporary file beside `path`: hidden, and ending `.tmp`.
fn temporary_prefix(path: &Path) -> String {
    let name = path.file_name().map(|n| n.to_string_lossy().into_owned()).unwrap_or_default();
    format!(".{name}.")
}

fn write_named_temporary(dir: &Path, path: &Path, bytes: &[u8], overwrite: bool) -> io::Result<()> {
    let prefix = temporary_prefix(path);
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

/// Unnamed temporary files (Linux `O_TMPFILE`), named only once complete.
#[cfg(target_os = "linux")]
mod unnamed {
    use std::fs::{self, File};
    use std::io::{self, Write};
    use std::os::fd::AsRawFd;
    use std::path::Path;
    use std::sync::atomic::{AtomicU64, Ordering};

    use rustix::fs::{AtFlags, CWD, Mode, OFlags};
    use rustix::io::Errno;

    /// Writes `bytes` to `path` through an unnamed file in `dir`; `None` when
    /// the file system cannot make unnamed files (the caller falls back).
    pub(super) fn write(dir: &Path, path: &Path, bytes: &[u8], overwrite: bool) -> Option<io::Result<()>> {
        let flags = OFlags::TMPFILE | OFlags::WRONLY | OFlags::CLOEXEC;
        let fd = match rustix::fs::openat(CWD, dir, flags, Mode::from_raw_mode(0o666)) {
            Ok(fd) => fd,
            // open(2): EOPNOTSUPP when the file system lacks O_TMPFILE, EISDIR
            // or EINVAL from kernels older than 3.11.
            Err(Errno::OPNOTSUPP | Errno::ISDIR | Errno::INVAL) => return None,
            Err(e) => return Some(Err(e.into())),
        };
        Some(finish(File::from(fd), path, bytes, overwrite))
    }

    fn finish(mut file: File, path: &Path, bytes: &[u8], overwrite: bool) -> io::Result<()> {
        if overwrite && let Ok(old) = fs::metadata(path) {
            file.set_permissions(old.permissions())?;
        }
        file.write_all(bytes)?;
        file.sync_all()?;
        // linkat(2) with AT_SYMLINK_FOLLOW on /proc/self/fd/N names the open
        // unnamed file without needing CAP_DAC_READ_SEARCH (which AT_EMPTY_PATH would).
        let source = format!("/proc/self/fd/{}", file.as_raw_fd());
        if !overwrite {
            return rustix::fs::linkat(CWD, source.as_str(), CWD, path, AtFlags::SYMLINK_FOLLOW)
                .map_err(io::Error::from);
        }
        static COUNTER: AtomicU64 = AtomicU64::new(0);
        loop {
            let n = COUNTER.fetch_add(1, Ordering::Relaxed);
            let tmp = path.with_file_name(format!(
                "{}{}-{n}.tmp",
                super::temporary_prefix(path),
                std::process::id()
            ));
            match rustix::fs::linkat(CWD, source.as_str(), CWD, &tmp, AtFlags::SYMLINK_FOLLOW) {
                Ok(()) => {
                    return fs::rename(&tmp, path).inspect_err(|_| {
                        let _ = fs::remove_file(&tmp);
                    });
                }
                Err(Errno::EXIST) => continue,
                Err(e) => return Err(e.into()),
            }
        }
    }
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
    fn the_named_temporary_fallback_is_atomic_too() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.png");
        write_named_temporary(dir.path(), &target, b"one", false).unwrap();
        let e = write_named_temporary(dir.path(), &target, b"two", false).unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::AlreadyExists);
        write_named_temporary(dir.path(), &target, b"three", true).unwrap();
        assert_eq!(fs::read(&target).unwrap(), b"three");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
    }

    #[cfg(target_os = "linux")]
    #[test]
    fn linux_writes_through_an_unnamed_file() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("out.png");
        // tmpfs and ext4, where the tests run, both make unnamed files.
        unnamed::write(dir.path(), &target, b"one", false).expect("O_TMPFILE supported").unwrap();
        let e = unnamed::write(dir.path(), &target, b"two", false).unwrap().unwrap_err();
        assert_eq!(e.kind(), io::ErrorKind::AlreadyExists);
        unnamed::write(dir.path(), &target, b"three", true).unwrap().unwrap();
        assert_eq!(fs::read(&target).unwrap(), b"three");
        assert_eq!(fs::read_dir(dir.path()).unwrap().count(), 1);
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

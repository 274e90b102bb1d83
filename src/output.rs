//! Writing rendered output to files: atomically (a temporary file in the
//! same folder, then a rename, so a reader never sees half a file and a
//! failed write leaves the old file as it was), and never over a file the
//! command read (portfolio, progress file, previous plan).
//!
//! What is already at the path decides how:
//! - nothing, or a regular file that may be written: the atomic write (a
//!   link to a regular file is followed, so the link stays a link);
//! - a regular file without write permission (for its owner by its mode
//!   bits, which bind even root, or for this process): refused;
//! - a character device or a FIFO (`/dev/null`, `/dev/stdout`, a named
//!   pipe): written straight into, as a shell's `>` would, never replaced
//!   by a regular file;
//! - a block device, a socket or a folder: refused.

use std::fmt;
use std::io::Write;
use std::path::{Path, PathBuf};

/// A failure to write an output file.
#[derive(Debug)]
pub enum OutputError {
    /// The output path is the input file (possibly through a link).
    WouldOverwriteInput { output: PathBuf, input: PathBuf },
    /// The output path has no file name (e.g. `out/` or `..`).
    NotAFile { path: PathBuf },
    /// The folder the output would go in does not exist (or is a file).
    MissingFolder { path: PathBuf, folder: PathBuf },
    /// The file exists and its permissions forbid writing it.
    ReadOnly { path: PathBuf },
    /// A block device or a socket: not a place for a plan.
    NotWritable { path: PathBuf, kind: &'static str },
    /// Creating, writing or renaming failed.
    Io {
        path: PathBuf,
        source: std::io::Error,
    },
}

impl fmt::Display for OutputError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            OutputError::WouldOverwriteInput { output, input } => write!(
                f,
                "refusing to write `{}`: it is the input file `{}`; choose another output path",
                output.display(),
                input.display()
            ),
            OutputError::NotAFile { path } => write!(
                f,
                "cannot write `{}`: the output path must name a file",
                path.display()
            ),
            OutputError::MissingFolder { path, folder } => write!(
                f,
                "cannot write `{}`: the folder `{}` does not exist; create it first or choose another path",
                path.display(),
                folder.display()
            ),
            OutputError::ReadOnly { path } => write!(
                f,
                "refusing to write `{}`: the file is read-only; make it writable (`chmod u+w`) or choose another path",
                path.display()
            ),
            OutputError::NotWritable { path, kind } => write!(
                f,
                "refusing to write `{}`: it is {kind}, not a file; choose a file path",
                path.display()
            ),
            OutputError::Io { path, source } => {
                write!(f, "cannot write `{}`: {source}", path.display())
            }
        }
    }
}

impl std::error::Error for OutputError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            OutputError::Io { source, .. } => Some(source),
            _ => None,
        }
    }
}

/// Writes `bytes` to `path` atomically: into a temporary file in the same
/// folder, flushed to disk, then renamed over `path`. An existing file keeps
/// its permissions; a new one gets the usual `rw-r--r--` on Unix.
pub fn write_atomic(path: &Path, bytes: &[u8]) -> Result<(), OutputError> {
    let io = |source| OutputError::Io {
        path: path.to_path_buf(),
        source,
    };
    if path.file_name().is_none() {
        return Err(OutputError::NotAFile {
            path: path.to_path_buf(),
        });
    }
    let dir = match path.parent() {
        Some(d) if !d.as_os_str().is_empty() => d,
        _ => Path::new("."),
    };
    if !dir.is_dir() {
        return Err(OutputError::MissingFolder {
            path: path.to_path_buf(),
            folder: dir.to_path_buf(),
        });
    }
    let existing = std::fs::metadata(path).ok();
    if existing.as_ref().is_some_and(|m| m.is_dir()) {
        return Err(OutputError::NotAFile {
            path: path.to_path_buf(),
        });
    }
    let mut tmp = tempfile::Builder::new()
        .prefix(".sluice-")
        .suffix(".tmp")
        .tempfile_in(dir)
        .map_err(io)?;
    tmp.write_all(bytes).map_err(io)?;
    tmp.as_file().sync_all().map_err(io)?;
    let perms = match existing {
        Some(m) => Some(m.permissions()),
        None => new_file_permissions(),
    };
    if let Some(p) = perms {
        tmp.as_file().set_permissions(p).map_err(io)?;
    }
    tmp.persist(path).map_err(|e| io(e.error))?;
    Ok(())
}

#[cfg(unix)]
fn new_file_permissions() -> Option<std::fs::Permissions> {
    use std::os::unix::fs::PermissionsExt;
    Some(std::fs::Permissions::from_mode(0o644))
}

#[cfg(not(unix))]
fn new_file_permissions() -> Option<std::fs::Permissions> {
    None
}

/// Refuses an output path that is the input file: the same path once both
/// are canonicalised (links resolved), or, on Unix, the same file through a
/// hard link. An output that does not exist yet is compared through its
/// canonical folder.
pub fn guard_input(output: &Path, input: &Path) -> Result<(), OutputError> {
    let refuse = || OutputError::WouldOverwriteInput {
        output: output.to_path_buf(),
        input: input.to_path_buf(),
    };
    let Ok(input_canon) = std::fs::canonicalize(input) else {
        // An input that cannot be found cannot be overwritten.
        return Ok(());
    };
    let output_canon = match std::fs::canonicalize(output) {
        Ok(p) => Some(p),
        Err(_) => {
            let dir = match output.parent() {
                Some(d) if !d.as_os_str().is_empty() => d,
                _ => Path::new("."),
            };
            match (std::fs::canonicalize(dir), output.file_name()) {
                (Ok(d), Some(name)) => Some(d.join(name)),
                _ => None,
            }
        }
    };
    if output_canon.as_deref() == Some(input_canon.as_path()) {
        return Err(refuse());
    }
    if same_file(output, input) {
        return Err(refuse());
    }
    Ok(())
}

/// What `--out PATH` does: refuses `output` if it is one of the `inputs`,
/// then writes `bytes` there as the module documentation says.
pub fn write_output(output: &Path, bytes: &[u8], inputs: &[&Path]) -> Result<(), OutputError> {
    for input in inputs {
        guard_input(output, input)?;
    }
    let Ok(meta) = std::fs::metadata(output) else {
        return write_atomic(output, bytes);
    };
    let io = |source| OutputError::Io {
        path: output.to_path_buf(),
        source,
    };
    match kind(&meta) {
        Kind::File => {
            if mode_forbids_writing(&meta) || open_for_writing(output).is_err() {
                return Err(OutputError::ReadOnly {
                    path: output.to_path_buf(),
                });
            }
            // A link to a file: replace the file it points to, keep the link.
            let target = if std::fs::symlink_metadata(output).is_ok_and(|m| m.is_symlink()) {
                std::fs::canonicalize(output).map_err(io)?
            } else {
                output.to_path_buf()
            };
            write_atomic(&target, bytes)
        }
        Kind::Stream => {
            let mut f = open_for_writing(output).map_err(io)?;
            f.write_all(bytes).and_then(|_| f.flush()).map_err(io)
        }
        Kind::Folder => Err(OutputError::NotAFile {
            path: output.to_path_buf(),
        }),
        Kind::Other(kind) => Err(OutputError::NotWritable {
            path: output.to_path_buf(),
            kind,
        }),
    }
}

/// What an existing output path is.
enum Kind {
    File,
    Folder,
    /// A character device or a FIFO: written into as it is.
    Stream,
    Other(&'static str),
}

#[cfg(unix)]
fn kind(meta: &std::fs::Metadata) -> Kind {
    use std::os::unix::fs::FileTypeExt;
    let t = meta.file_type();
    if t.is_file() {
        Kind::File
    } else if t.is_dir() {
        Kind::Folder
    } else if t.is_char_device() || t.is_fifo() {
        Kind::Stream
    } else if t.is_block_device() {
        Kind::Other("a block device")
    } else if t.is_socket() {
        Kind::Other("a socket")
    } else {
        Kind::Other("not a regular file")
    }
}

#[cfg(not(unix))]
fn kind(meta: &std::fs::Metadata) -> Kind {
    if meta.is_file() {
        Kind::File
    } else if meta.is_dir() {
        Kind::Folder
    } else {
        Kind::Stream
    }
}

/// Opens an existing file for writing without changing it (no truncation):
/// fails when this process may not write it.
fn open_for_writing(path: &Path) -> std::io::Result<std::fs::File> {
    std::fs::OpenOptions::new().write(true).open(path)
}

/// Whether the mode bits mark the file read-only: no write permission for
/// its owner (as `chmod a-w` or `chmod 444` leave it). This binds every
/// user, root included, for whom the permission bits do not stop a write.
fn mode_forbids_writing(meta: &std::fs::Metadata) -> bool {
    mode_is_read_only(permission_bits(meta))
}

#[cfg(unix)]
fn permission_bits(meta: &std::fs::Metadata) -> u32 {
    use std::os::unix::fs::PermissionsExt;
    meta.permissions().mode()
}

#[cfg(not(unix))]
fn permission_bits(meta: &std::fs::Metadata) -> u32 {
    if meta.permissions().readonly() {
        0o444
    } else {
        0o644
    }
}

/// [`mode_forbids_writing`] on the mode bits alone.
fn mode_is_read_only(mode: u32) -> bool {
    mode & 0o200 == 0
}

#[cfg(unix)]
fn same_file(a: &Path, b: &Path) -> bool {
    use std::os::unix::fs::MetadataExt;
    match (std::fs::metadata(a), std::fs::metadata(b)) {
        (Ok(x), Ok(y)) => x.dev() == y.dev() && x.ino() == y.ino(),
        _ => false,
    }
}

#[cfg(not(unix))]
fn same_file(_a: &Path, _b: &Path) -> bool {
    false
}

#[cfg(test)]
mod tests {
    use super::*;

    fn names_in(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    #[test]
    fn writes_new_and_replaces_old_without_leaving_temporary_files() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("plan.csv");
        write_atomic(&path, b"first").unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"first");
        write_atomic(&path, b"second").unwrap();
        assert_eq!(std::fs::read(&path).unwrap(), b"second");
        assert_eq!(names_in(dir.path()), vec!["plan.csv".to_string()]);
    }

    #[cfg(unix)]
    #[test]
    fn new_files_are_readable_by_others_and_old_ones_keep_their_mode() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("report.html");
        write_atomic(&path, b"<p/>").unwrap();
        let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o644);
        std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o600)).unwrap();
        write_atomic(&path, b"<p>2</p>").unwrap();
        let mode = std::fs::metadata(&path).unwrap().permissions().mode() & 0o777;
        assert_eq!(mode, 0o600);
    }

    #[test]
    fn a_missing_folder_is_an_error_naming_the_path() {
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("no-such-folder").join("plan.json");
        let err = write_atomic(&path, b"{}").unwrap_err().to_string();
        assert!(err.contains("plan.json"), "{err}");
        assert!(err.contains("no-such-folder` does not exist"), "{err}");
        assert!(!path.exists());
    }

    #[test]
    fn a_folder_is_not_a_file() {
        let dir = tempfile::tempdir().unwrap();
        let err = write_atomic(dir.path(), b"x").unwrap_err();
        assert!(matches!(err, OutputError::NotAFile { .. }), "{err}");
    }

    #[test]
    fn refuses_the_input_file_by_any_spelling() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("portfolio.yaml");
        std::fs::write(&input, "name: x\n").unwrap();
        let dotted = dir.path().join(".").join("portfolio.yaml");
        let err = guard_input(&dotted, &input).unwrap_err().to_string();
        assert!(
            err.contains("portfolio.yaml") && err.contains("input file"),
            "{err}"
        );
        assert!(guard_input(&dir.path().join("plan.html"), &input).is_ok());
        assert_eq!(std::fs::read_to_string(&input).unwrap(), "name: x\n");
    }

    #[test]
    fn write_output_leaves_the_input_alone() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("portfolio.yaml");
        std::fs::write(&input, "name: x\n").unwrap();
        assert!(write_output(&input, b"<html/>", &[&input]).is_err());
        assert_eq!(std::fs::read_to_string(&input).unwrap(), "name: x\n");
        let out = dir.path().join("plan.html");
        write_output(&out, b"<html/>", &[&input]).unwrap();
        assert_eq!(std::fs::read(&out).unwrap(), b"<html/>");
    }

    #[test]
    fn a_file_without_its_owner_write_bit_is_read_only() {
        for (mode, read_only) in [
            (0o644, false),
            (0o600, false),
            (0o200, false),
            (0o444, true),
            (0o400, true),
            (0o466, true),
            (0o100644, false),
            (0o100444, true),
        ] {
            assert_eq!(mode_is_read_only(mode), read_only, "{mode:o}");
        }
    }

    #[cfg(unix)]
    #[test]
    fn a_read_only_file_is_refused_and_kept() {
        use std::os::unix::fs::PermissionsExt;
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("plan.html");
        std::fs::write(&path, "old").unwrap();
        std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o444)).unwrap();
        let err = write_output(&path, b"new", &[]).unwrap_err();
        assert!(matches!(err, OutputError::ReadOnly { .. }), "{err}");
        assert!(err.to_string().contains("read-only"), "{err}");
        assert_eq!(std::fs::read_to_string(&path).unwrap(), "old");
    }

    #[cfg(unix)]
    #[test]
    fn a_link_to_a_file_stays_a_link() {
        let dir = tempfile::tempdir().unwrap();
        let target = dir.path().join("real.csv");
        std::fs::write(&target, "old").unwrap();
        let link = dir.path().join("link.csv");
        std::os::unix::fs::symlink(&target, &link).unwrap();
        write_output(&link, b"new", &[]).unwrap();
        assert!(std::fs::symlink_metadata(&link).unwrap().is_symlink());
        assert_eq!(std::fs::read_to_string(&target).unwrap(), "new");
    }

    #[cfg(unix)]
    #[test]
    fn refuses_the_input_file_through_links() {
        let dir = tempfile::tempdir().unwrap();
        let input = dir.path().join("portfolio.yaml");
        std::fs::write(&input, "name: x\n").unwrap();
        let sym = dir.path().join("sym.yaml");
        std::os::unix::fs::symlink(&input, &sym).unwrap();
        assert!(guard_input(&sym, &input).is_err());
        let hard = dir.path().join("hard.yaml");
        std::fs::hard_link(&input, &hard).unwrap();
        assert!(guard_input(&hard, &input).is_err());
    }
}

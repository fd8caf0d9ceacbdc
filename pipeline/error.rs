//! Typed errors of the library and the exit codes they map to.
//!
//! Every error names the file it concerns and, where one exists, the place in it (a config key with its
//! line, a data row and column). The binary prints them in one place (`main.rs`) with their causes; the
//! exit code tells a scheduler what kind of failure it was (see README, "Exit codes").

use std::path::{Path, PathBuf};

/// Exit code: the run finished and wrote its pack.
pub const EXIT_OK: i32 = 0;
/// Exit code: an unexpected failure (I/O, a solver that could not start, a bug).
pub const EXIT_FAILURE: i32 = 1;
/// Exit code: the command line, the config file or a custom report template is wrong.
pub const EXIT_CONFIG: i32 = 2;
/// Exit code: the input data failed a blocking data-quality check.
pub const EXIT_DATA: i32 = 3;

/// Exit code: the pack was written, but at least one model ended in a solver error.
pub const EXIT_SOLVER: i32 = 4;
/// Exit code: nothing to do — a pack with identical inputs already exists.
pub const EXIT_NOTHING_TO_DO: i32 = 5;
/// Exit code: another run holds the archive lock and did not finish in time.
pub const EXIT_BUSY: i32 = 6;
/// Exit code: `verify` found a changed, missing or unlisted file or a signature that does not hold (also
/// `sign` and `finalize` on such a pack).
pub const EXIT_VERIFY: i32 = 7;
/// Exit code: `sign`, `finalize` or `keygen` refused (role not required, key not trusted or not a key
/// file, role already signed, pack already final, roles still to sign, key file already there).
pub const EXIT_SIGNOFF: i32 = 8;

/// Every error the library can return.
#[derive(Debug, thiserror::Error)]
pub enum Error {
    /// A config file that cannot be parsed or whose values are out of range.
    #[error("config {}: {message}", path.display())]
    Config { path: PathBuf, message: String },
    /// An input data file that cannot be read as prices, metadata or holdings.
    #[error("data {}: {message}", path.display())]
    Data { path: PathBuf, message: String },
    /// Data that parsed but failed blocking quality checks; each line names file, place and remedy.
    #[error("data quality blocks the run:\n  {}", problems.join("\n  "))]
    Quality { problems: Vec<String> },
    /// A report template that typst could not compile or export: names the template file and, where the
    /// diagnostic has one, the line and column.
    #[error("template {file}{}: {message}", line.map_or(String::new(), |(l, c)| format!(", line {l}, column {c}")))]
    Template {
        file: String,
        line: Option<(usize, usize)>,
        message: String,
    },
    /// A file-system operation failed.
    #[error("{action} {}: {source}{}", path.display(), io_hint(source.kind()))]
    Io {
        action: &'static str,
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// The archive lock is held by another run.
    #[error("another tailpack run holds the archive lock {} (waited without success); try again later", path.display())]
    Busy { path: PathBuf },
    /// A pack failed verification; each line names a file.
    #[error("pack {} failed verification:\n  {}", pack.display(), problems.join("\n  "))]
    Verify {
        pack: PathBuf,
        problems: Vec<String>,
    },
    /// `sign`, `finalize` or `keygen` refused; the message says why.
    #[error("cannot {action} {}: {message}", path.display())]
    Refused {
        action: &'static str,
        path: PathBuf,
        message: String,
    },
    /// A key file that cannot be used: not a regular file, too large, or not a key.
    #[error("key file {}: {message}", path.display())]
    Key { path: PathBuf, message: String },
    /// `sign` or `finalize` on a pack that fails verification; each line names a file.
    #[error("cannot {action} {}: the pack fails verification:\n  {}", pack.display(), problems.join("\n  "))]
    NotIntact {
        action: &'static str,
        pack: PathBuf,
        problems: Vec<String>,
    },
    /// The typesetter failed for a reason that is not the templates': its child process (`program`) could
    /// not be started or waited for or gave an answer that cannot be read, or typst refused the PDF/A-2b
    /// export settings (`program` is `None` when typesetting ran in-process).
    #[error("typesetter{}: {message}", program.as_ref().map_or(String::new(), |p| format!(" {}", p.display())))]
    Typesetter {
        program: Option<PathBuf>,
        message: String,
    },
    /// A chart of the pack (`charts/<name>` in the typesetter's files) could not be drawn.
    #[error("chart charts/{name}: {message}")]
    Chart { name: String, message: String },
    /// `bench --reference`: the reference script's interpreter cannot be started (not installed, or not
    /// where `--python` says).
    #[error("cannot start the reference solver `{program}` for {}: {source}; install it or name the interpreter with --python", script.display())]
    ReferenceMissing {
        program: String,
        script: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// `bench --reference`: the reference script ran but failed (e.g. scipy not installed) or printed a
    /// result line that is not one.
    #[error("reference script {}: {message}", script.display())]
    ReferenceFailed { script: PathBuf, message: String },
    /// `bench --demo`: the running tailpack binary cannot be found or started for the demo run.
    #[error("cannot {action} the tailpack binary {} for the demo run: {source}", path.display())]
    Binary {
        action: &'static str,
        path: PathBuf,
        #[source]
        source: std::io::Error,
    },
    /// `bench --demo`: the child `tailpack run` of the demo config failed; its exit code and stderr.
    #[error("the demo run of {} failed{}: {stderr}", config.display(), code.map_or(String::new(), |c| format!(" (exit {c})")))]
    DemoRun {
        config: PathBuf,
        code: Option<i32>,
        stderr: String,
    },
    /// A scenario set that cannot be built from what it was given: a matrix of the wrong shape, a
    /// non-finite return, probabilities that are negative or do not sum to 1, or fewer observations than
    /// the horizon. The run's data checks stop such data first, so from a run this is a defect.
    #[error("{0}")]
    Scenarios(String),
}

/// What to do about the common I/O failures, appended to their message.
fn io_hint(kind: std::io::ErrorKind) -> &'static str {
    use std::io::ErrorKind as K;
    match kind {
        K::NotADirectory | K::AlreadyExists | K::IsADirectory => {
            "; a file or folder of that name is in the way: move it or choose another path (for packs: output.root or --out)"
        }
        K::PermissionDenied | K::ReadOnlyFilesystem => {
            "; the path is not writable for this user: fix its permissions or choose another path"
        }
        K::NotFound => "; check the path",
        K::StorageFull => "; the disk is full: free space and run again",
        _ => "",
    }
}

/// Shorthand for results of this library.
pub type Result<T, E = Error> = std::result::Result<T, E>;

impl Error {
    /// The documented process exit code for this error.
    pub fn exit_code(&self) -> i32 {
        match self {
            Error::Config { .. } | Error::Template { .. } => EXIT_CONFIG,
            Error::Data { .. } | Error::Quality { .. } => EXIT_DATA,
            Error::Io { .. } | Error::Scenarios(_) => EXIT_FAILURE,
            Error::Typesetter { .. } | Error::Chart { .. } => EXIT_FAILURE,
            Error::ReferenceMissing { .. } | Error::ReferenceFailed { .. } => EXIT_FAILURE,
            Error::Binary { .. } | Error::DemoRun { .. } => EXIT_FAILURE,
            Error::Busy { .. } => EXIT_BUSY,
            Error::Verify { .. } | Error::NotIntact { .. } => EXIT_VERIFY,
            Error::Refused { .. } | Error::Key { .. } => EXIT_SIGNOFF,
        }
    }

    /// A config error for `path`.
    pub fn config(path: &Path, message: impl Into<String>) -> Self {
        Error::Config {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }

    /// A data error for `path`.
    pub fn data(path: &Path, message: impl Into<String>) -> Self {
        Error::Data {
            path: path.to_path_buf(),
            message: message.into(),
        }
    }
}

/// File-system helpers that name the path in every error.
pub mod fs {
    use super::{Error, Result};
    use std::path::Path;

    fn io<'a>(action: &'static str, path: &'a Path) -> impl FnOnce(std::io::Error) -> Error + 'a {
        move |source| Error::Io {
            action,
            path: path.to_path_buf(),
            source,
        }
    }

    /// Opens a file for reading (streamed readers).
    pub fn open(path: &Path) -> Result<std::fs::File> {
        std::fs::File::open(path).map_err(io("cannot read", path))
    }

    /// Creates (or truncates) a file for writing (streamed writers).
    pub fn create(path: &Path) -> Result<std::fs::File> {
        std::fs::File::create(path).map_err(io("cannot write", path))
    }

    /// Reads a whole file into bytes.
    pub fn read(path: &Path) -> Result<Vec<u8>> {
        std::fs::read(path).map_err(io("cannot read", path))
    }

    /// Reads a whole file as UTF-8 text.
    pub fn read_to_string(path: &Path) -> Result<String> {
        std::fs::read_to_string(path).map_err(io("cannot read", path))
    }

    /// Writes a whole file.
    pub fn write(path: &Path, data: impl AsRef<[u8]>) -> Result<()> {
        std::fs::write(path, data).map_err(io("cannot write", path))
    }

    /// Creates a folder and its parents.
    pub fn create_dir_all(path: &Path) -> Result<()> {
        std::fs::create_dir_all(path).map_err(io("cannot create folder", path))
    }

    /// Removes a folder and everything in it.
    pub fn remove_dir_all(path: &Path) -> Result<()> {
        std::fs::remove_dir_all(path).map_err(io("cannot remove folder", path))
    }

    /// The real path of `path`: every symbolic link resolved, absolute.
    pub fn canonicalize(path: &Path) -> Result<std::path::PathBuf> {
        std::fs::canonicalize(path).map_err(io("cannot resolve", path))
    }

    /// What `path` is, following symbolic links.
    pub fn metadata(path: &Path) -> Result<std::fs::Metadata> {
        std::fs::metadata(path).map_err(io("cannot inspect", path))
    }

    /// The entries of a folder (full paths), sorted so that anything built from them is the same on
    /// every run.
    pub fn read_dir_sorted(dir: &Path) -> Result<Vec<std::path::PathBuf>> {
        let mut out = Vec::new();
        for entry in std::fs::read_dir(dir).map_err(io("cannot read folder", dir))? {
            out.push(entry.map_err(io("cannot read folder", dir))?.path());
        }
        out.sort();
        Ok(out)
    }

    /// What a non-regular file is, for messages ("a folder", "a named pipe (FIFO)", "a device"…).
    pub fn kind_of(meta: &std::fs::Metadata) -> &'static str {
        let t = meta.file_type();
        #[cfg(unix)]
        {
            use std::os::unix::fs::FileTypeExt;
            if t.is_fifo() {
                return "a named pipe (FIFO)";
            }
            if t.is_char_device() || t.is_block_device() {
                return "a device";
            }
            if t.is_socket() {
                return "a socket";
            }
        }
        if t.is_dir() {
            "a folder"
        } else if t.is_symlink() {
            "a symbolic link"
        } else if t.is_file() {
            "a regular file"
        } else {
            "not a regular file"
        }
    }

    /// Why `path` cannot be read as an input file, or `None` when it is a regular file (symbolic links
    /// followed): "does not exist", "is a folder, not a file", "is a named pipe (FIFO), not a file"…
    /// Looks at metadata only, so a named pipe is never opened (opening one waits for a writer).
    pub fn not_a_file(path: &Path) -> Option<String> {
        match std::fs::metadata(path) {
            Ok(m) if m.is_file() => None,
            Ok(m) => Some(format!("is {}, not a file", kind_of(&m))),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                let dangling = std::fs::symlink_metadata(path).is_ok_and(|m| m.is_symlink());
                Some(if dangling {
                    "is a symbolic link to something that does not exist".to_string()
                } else {
                    "does not exist".to_string()
                })
            }
            Err(e) => Some(format!("cannot be examined: {e}")),
        }
    }

    /// Refuses a folder path whose nearest existing part is not a folder (a file stands in the way), with
    /// the error creating it would give; writes nothing.
    pub fn creatable_folder(path: &Path) -> Result<()> {
        for part in path.ancestors() {
            let part = if part.as_os_str().is_empty() {
                Path::new(".")
            } else {
                part
            };
            match std::fs::metadata(part) {
                Ok(m) if m.is_dir() => return Ok(()),
                Ok(m) => {
                    let kind = if part == path {
                        std::io::ErrorKind::AlreadyExists
                    } else {
                        std::io::ErrorKind::NotADirectory
                    };
                    let why = format!("{} is {}", part.display(), kind_of(&m));
                    return Err(io("cannot create folder", path)(std::io::Error::new(
                        kind, why,
                    )));
                }
                Err(_) => continue,
            }
        }
        Ok(())
    }

    /// Reads at most `max + 1` bytes of a file, so a caller can refuse a file longer than `max` without
    /// holding all of it (the file may grow after its size was looked at).
    pub fn read_at_most(path: &Path, max: u64) -> Result<Vec<u8>> {
        use std::io::Read;
        let file = std::fs::File::open(path).map_err(io("cannot read", path))?;
        let mut bytes = Vec::new();
        file.take(max + 1)
            .read_to_end(&mut bytes)
            .map_err(io("cannot read", path))?;
        Ok(bytes)
    }

    /// Renames a file or folder.
    pub fn rename(from: &Path, to: &Path) -> Result<()> {
        std::fs::rename(from, to).map_err(io("cannot move into place", to))
    }
}

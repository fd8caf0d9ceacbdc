//! The template files: the defaults embedded from `templates/` at build time, overridden file by file by a
//! custom folder (`report.templates`), and the shipped fonts.
//!
//! A custom folder may hold any of the default names (it replaces that file), new files that a custom
//! partial imports (e.g. a logo), and `.ttf`/`.otf` fonts, which are registered with the typesetter.
//!
//! [`custom`] ([`custom_files`]) is the one listing of the custom folder: the archive copies and hashes
//! exactly these files (`inputs/templates/`) and the typesetter is handed exactly their bytes. It resolves
//! every path and refuses anything whose real path lies outside the folder (a symbolic link to a file or
//! folder elsewhere), links that cannot be followed (dangling, or a loop), links to a folder that contains
//! them, and anything that is not a regular file or folder. Links that stay inside the folder are
//! followed. Hidden entries (names starting with `.`) are skipped, so neither the typesetter nor the
//! archive sees them.

use super::world::{Origin, WorldFile};
use crate::config::Config;
use crate::error::{Error, Result, fs};
use std::path::{Path, PathBuf};

/// The default templates, by file name: `main.typ` includes the others in print order.
pub const DEFAULTS: &[(&str, &str)] = &[
    ("main.typ", include_str!("../../templates/main.typ")),
    ("style.typ", include_str!("../../templates/style.typ")),
    ("cover.typ", include_str!("../../templates/cover.typ")),
    ("contents.typ", include_str!("../../templates/contents.typ")),
    ("summary.typ", include_str!("../../templates/summary.typ")),
    ("policy.typ", include_str!("../../templates/policy.typ")),
    ("change.typ", include_str!("../../templates/change.typ")),
    (
        "liabilities.typ",
        include_str!("../../templates/liabilities.typ"),
    ),
    (
        "allocations.typ",
        include_str!("../../templates/allocations.typ"),
    ),
    ("trades.typ", include_str!("../../templates/trades.typ")),
    (
        "tail-loss.typ",
        include_str!("../../templates/tail-loss.typ"),
    ),
    ("analysis.typ", include_str!("../../templates/analysis.typ")),
    ("checks.typ", include_str!("../../templates/checks.typ")),
    ("caveats.typ", include_str!("../../templates/caveats.typ")),
    ("method.typ", include_str!("../../templates/method.typ")),
    ("data.typ", include_str!("../../templates/data.typ")),
    ("signoff.typ", include_str!("../../templates/signoff.typ")),
    ("cautions.typ", include_str!("../../templates/cautions.typ")),
];

/// The shipped sans family (Inter, SIL Open Font License 1.1; see `templates/fonts/LICENSE-Inter.txt`).
pub const FONTS: [&[u8]; 4] = [
    include_bytes!("../../templates/fonts/Inter-Regular.otf"),
    include_bytes!("../../templates/fonts/Inter-Italic.otf"),
    include_bytes!("../../templates/fonts/Inter-SemiBold.otf"),
    include_bytes!("../../templates/fonts/Inter-Bold.otf"),
];

/// Template files for the world and any extra font files, defaults first, then the files of the config's
/// custom folder replacing defaults of the same name.
pub fn load(cfg: &Config) -> Result<(Vec<WorldFile>, Vec<Vec<u8>>)> {
    Ok(load_from(custom(cfg)?))
}

/// [`load`] from custom files already read (those the archive recorded for this run). Fonts are taken in
/// the order of their names, however the files were listed, so their order never changes the PDF.
pub fn load_from(mut custom: Vec<CustomFile>) -> (Vec<WorldFile>, Vec<Vec<u8>>) {
    custom.sort_by(|a, b| a.rel.cmp(&b.rel));
    let mut files: Vec<WorldFile> = DEFAULTS
        .iter()
        .map(|(name, text)| WorldFile {
            vpath: format!("/{name}"),
            bytes: text.as_bytes().to_vec(),
            origin: Origin::Builtin(name),
        })
        .collect();
    let mut fonts = Vec::new();
    for f in custom {
        if is_font(&f.path) {
            fonts.push(f.bytes);
            continue;
        }
        let vpath = format!("/{}", f.rel);
        files.retain(|w| w.vpath != vpath);
        files.push(WorldFile {
            vpath,
            bytes: f.bytes,
            origin: Origin::Custom(f.path),
        });
    }
    (files, fonts)
}

/// One file of the custom template folder, as the typesetter reads it and the archive keeps it.
#[derive(Debug, Clone)]
pub struct CustomFile {
    /// The path below the folder with `/` separators, as templates name it (`logo.svg`, `parts/x.typ`).
    pub rel: String,
    /// The path as listed in the folder (a symbolic link under its own name), for messages.
    pub path: PathBuf,
    /// The file's bytes, read from its real path.
    pub bytes: Vec<u8>,
}

/// Deepest folder nesting followed below the template folder.
pub const MAX_DEPTH: usize = 32;
/// Most files and folders the walk of the template folder visits (links to folders inside it count what
/// they hold again), so that links fanning out cannot make the walk run away.
pub const MAX_ENTRIES: usize = 10_000;

/// The files of the config's custom template folder (none without one): the one listing both the report
/// and the archive use. The folder may hold at most the typesetting memory budget in bytes, as all of it
/// is handed to the typesetter.
pub fn custom(cfg: &Config) -> Result<Vec<CustomFile>> {
    match &cfg.templates {
        Some(dir) => custom_files(dir, cfg.typeset.memory_mb.saturating_mul(1 << 20)),
        None => Ok(Vec::new()),
    }
}

/// Every file of the custom template folder `dir`, in sorted order, each checked to lie inside the folder
/// once every symbolic link is resolved, their bytes together at most `max_bytes`.
pub fn custom_files(dir: &Path, max_bytes: u64) -> Result<Vec<CustomFile>> {
    let root = fs::canonicalize(dir)?;
    let mut walk = Walk {
        root,
        out: Vec::new(),
        visited: 0,
        left: max_bytes,
        max_bytes,
    };
    let mut above = vec![walk.root.clone()];
    walk.folder(dir, "", &mut above)?;
    Ok(walk.out)
}

/// The state of one walk of the template folder.
struct Walk {
    /// The folder's real path.
    root: PathBuf,
    out: Vec<CustomFile>,
    /// Files and folders visited so far.
    visited: usize,
    /// Bytes the files not yet read may hold together.
    left: u64,
    max_bytes: u64,
}

impl Walk {
    /// Lists the folder `listed` (named `prefix` below the root); `above` holds the real paths of the
    /// folders on the way down, so a link back to one of them is caught as a loop.
    fn folder(&mut self, listed: &Path, prefix: &str, above: &mut Vec<PathBuf>) -> Result<()> {
        if above.len() > MAX_DEPTH {
            return Err(refuse(
                listed,
                format!(
                    "is nested more than {MAX_DEPTH} folders deep in the custom template folder (report.templates); keep templates in a shallower tree"
                ),
            ));
        }
        for entry in fs::read_dir_sorted(listed)? {
            let name = entry
                .file_name()
                .map(|n| n.to_string_lossy().into_owned())
                .unwrap_or_default();
            if name.starts_with('.') {
                continue;
            }
            check_name(&entry)?;
            self.count(&entry)?;
            let rel = format!("{prefix}{name}");
            let real = self.real_path(&entry)?;
            let meta = fs::metadata(&real)?;
            if meta.is_dir() {
                if above.contains(&real) {
                    return Err(refuse(
                        &entry,
                        format!(
                            "is a symbolic link to {}, a folder that contains it (a loop); remove the link from the custom template folder (report.templates)",
                            real.display()
                        ),
                    ));
                }
                above.push(real);
                self.folder(&entry, &format!("{rel}/"), above)?;
                above.pop();
            } else if meta.is_file() {
                self.file(entry, rel, &real)?;
            } else {
                return Err(refuse(
                    &entry,
                    format!(
                        "is {}, not a regular file; the custom template folder (report.templates) may hold only files and folders",
                        fs::kind_of(&meta)
                    ),
                ));
            }
        }
        Ok(())
    }

    /// Counts one more entry visited, refusing the one past [`MAX_ENTRIES`].
    fn count(&mut self, entry: &Path) -> Result<()> {
        self.visited += 1;
        if self.visited <= MAX_ENTRIES {
            return Ok(());
        }
        Err(refuse(
            entry,
            format!(
                "is one entry more than the {MAX_ENTRIES} files and folders the custom template folder (report.templates) may hold (links to folders count what they hold again)"
            ),
        ))
    }

    fn file(&mut self, listed: PathBuf, rel: String, real: &Path) -> Result<()> {
        let bytes = fs::read_at_most(real, self.left)?;
        if bytes.len() as u64 > self.left {
            return Err(refuse(
                &listed,
                format!(
                    "brings the custom template folder (report.templates) over {} MB, the typesetting memory budget (report.typeset_memory_mb), which the folder's files must fit in; keep large files out of the template folder or raise the budget",
                    self.max_bytes >> 20
                ),
            ));
        }
        self.left -= bytes.len() as u64;
        self.out.push(CustomFile {
            rel,
            path: listed,
            bytes,
        });
        Ok(())
    }

    /// The real path of an entry, refused when it cannot be resolved or lies outside the folder.
    fn real_path(&self, entry: &Path) -> Result<PathBuf> {
        let link = std::fs::read_link(entry).ok();
        let real = match std::fs::canonicalize(entry) {
            Ok(real) => real,
            Err(e) => return Err(unresolvable(entry, link.as_deref(), e)),
        };
        if real.starts_with(&self.root) {
            return Ok(real);
        }
        let what = if link.is_some() {
            "is a symbolic link"
        } else {
            "lies on a path through a symbolic link"
        };
        Err(refuse(
            entry,
            format!(
                "{what} to {}, outside the custom template folder {} (report.templates); templates may read only files inside that folder: copy the file in instead of linking to it",
                real.display(),
                self.root.display()
            ),
        ))
    }
}

/// Templates name files by UTF-8 paths with `/` between folders: a name that is not UTF-8 or holds a
/// backslash cannot be named (typst refuses backslashes in paths).
fn check_name(entry: &Path) -> Result<()> {
    let name = entry.file_name().unwrap_or_default();
    match name.to_str() {
        Some(n) if !n.contains('\\') => Ok(()),
        Some(_) => Err(refuse(
            entry,
            "has a backslash in its name, which no template path can name; rename it in the custom template folder (report.templates)".into(),
        )),
        None => Err(refuse(
            entry,
            "has a name that is not UTF-8 text, which no template path can name; rename it in the custom template folder (report.templates)".into(),
        )),
    }
}

/// The refusal of an entry that cannot be resolved: a dangling link or a loop of links.
fn unresolvable(entry: &Path, link: Option<&Path>, e: std::io::Error) -> Error {
    let Some(target) = link else {
        return Error::Io {
            action: "cannot resolve",
            path: entry.to_path_buf(),
            source: e,
        };
    };
    let why = if e.raw_os_error() == Some(libc::ELOOP) {
        "it leads back to itself (a loop of symbolic links)".to_string()
    } else if e.kind() == std::io::ErrorKind::NotFound {
        "it points to nothing (the target does not exist)".to_string()
    } else {
        e.to_string()
    };
    refuse(
        entry,
        format!(
            "is a symbolic link to {} that cannot be followed: {why}; remove or fix the link in the custom template folder (report.templates)",
            target.display()
        ),
    )
}

/// A template-folder entry refused by the walk.
fn refuse(path: &Path, message: String) -> Error {
    Error::Template {
        file: path.display().to_string(),
        line: None,
        message,
    }
}

fn is_font(path: &Path) -> bool {
    matches!(
        path.extension()
            .and_then(|e| e.to_str())
            .map(str::to_ascii_lowercase)
            .as_deref(),
        Some("ttf" | "otf" | "ttc")
    )
}

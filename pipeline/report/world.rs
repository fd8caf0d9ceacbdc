//! The typesetter's whole view of the outside: a typst [`World`] over an in-memory file set.
//!
//! Nothing reaches the compiler except through here: the template files (built-in or the custom folder's),
//! the generated data and chart files, and the fonts — typst's embedded ones plus the Inter family shipped in
//! `templates/fonts/`. No system fonts and no clock: `today()` is the pack's as-of date, so the same inputs
//! give the same PDF on every machine (typst's own test world does the same, `typst/tests/src/world.rs`).

use chrono::Datelike;
use std::collections::HashMap;
use std::path::PathBuf;
use typst::diag::{FileError, FileResult, PackageError};
use typst::foundations::{Bytes, Datetime, Duration};
use typst::syntax::{FileId, RootedPath, Source, VirtualPath, VirtualRoot};
use typst::text::{Font, FontBook};
use typst::utils::LazyHash;
use typst::{Library, LibraryExt, World};

/// Where a file of the world came from; error messages name it.
#[derive(Debug, Clone)]
pub enum Origin {
    /// A default template embedded in the binary, by its name under `templates/`.
    Builtin(&'static str),
    /// A file of the custom template folder (`report.templates`).
    Custom(PathBuf),
    /// Data or a chart written by the report stage for this run.
    Generated,
}

impl Origin {
    /// How an error message names the file.
    pub fn describe(&self, vpath: &str) -> String {
        match self {
            Origin::Builtin(name) => format!("templates/{name} (built-in)"),
            Origin::Custom(path) => path.display().to_string(),
            Origin::Generated => format!("{} (generated)", vpath.trim_start_matches('/')),
        }
    }
}

/// One file of the world: its bytes, its parsed source when it is a `.typ` file, and where it came from.
struct Entry {
    bytes: Bytes,
    source: Option<Source>,
    origin: Origin,
}

/// The files, fonts and date one compilation sees.
pub struct ReportWorld {
    library: LazyHash<Library>,
    book: LazyHash<FontBook>,
    fonts: Vec<Font>,
    files: HashMap<FileId, Entry>,
    main: FileId,
    today: Datetime,
}

/// The file id of a path in the project root, e.g. `/main.typ`.
pub fn file_id(vpath: &str) -> FileId {
    let path = VirtualPath::new(vpath).expect("virtual paths of the report are valid");
    RootedPath::new(VirtualRoot::Project, path).intern()
}

/// Builder input: a virtual path (`/main.typ`, `/data/report.json`), its bytes and its origin.
pub struct WorldFile {
    pub vpath: String,
    pub bytes: Vec<u8>,
    pub origin: Origin,
}

impl ReportWorld {
    /// A world over `files` with `fonts` (font files) before typst's embedded fonts; `main` is the entry
    /// template and `today` the date typst's `datetime.today()` returns.
    pub fn new(
        files: Vec<WorldFile>,
        fonts: Vec<Bytes>,
        main: &str,
        today: chrono::NaiveDate,
    ) -> Self {
        let fonts: Vec<Font> = fonts
            .into_iter()
            .chain(typst_assets::fonts().map(Bytes::new))
            .flat_map(Font::iter)
            .collect();
        let files = files
            .into_iter()
            .map(|f| {
                let id = file_id(&f.vpath);
                let source = f
                    .vpath
                    .ends_with(".typ")
                    .then(|| String::from_utf8(f.bytes.clone()).ok())
                    .flatten()
                    .map(|t| Source::new(id, t));
                (
                    id,
                    Entry {
                        bytes: Bytes::new(f.bytes),
                        source,
                        origin: f.origin,
                    },
                )
            })
            .collect();
        let today = Datetime::from_ymd(today.year(), today.month() as u8, today.day() as u8)
            .expect("a valid calendar date");
        ReportWorld {
            library: LazyHash::new(Library::default()),
            book: LazyHash::new(FontBook::from_fonts(&fonts)),
            fonts,
            files,
            main: file_id(main),
            today,
        }
    }

    /// Where the file behind `id` came from, if it is part of this world.
    pub fn origin(&self, id: FileId) -> Option<&Origin> {
        self.files.get(&id).map(|e| &e.origin)
    }

    /// The parsed source behind `id`, for turning byte offsets into lines.
    pub fn parsed(&self, id: FileId) -> Option<&Source> {
        self.files.get(&id).and_then(|e| e.source.as_ref())
    }

    /// The error for a file outside this world; packages are never fetched.
    fn missing(id: FileId) -> FileError {
        match id.root() {
            VirtualRoot::Package(spec) => FileError::Package(PackageError::Other(Some(
                format!(
                    "{spec}: tailpack does not fetch typst packages; copy the files you need into the custom template folder (report.templates) and import them by path"
                )
                .into(),
            ))),
            VirtualRoot::Project => FileError::NotFound(id.vpath().get_with_slash().into()),
        }
    }
}

impl World for ReportWorld {
    fn library(&self) -> &LazyHash<Library> {
        &self.library
    }

    fn book(&self) -> &LazyHash<FontBook> {
        &self.book
    }

    fn main(&self) -> FileId {
        self.main
    }

    fn source(&self, id: FileId) -> FileResult<Source> {
        let entry = self.files.get(&id).ok_or_else(|| Self::missing(id))?;
        match &entry.source {
            Some(s) => Ok(s.clone()),
            None if id.vpath().get_with_slash().ends_with(".typ") => Err(FileError::InvalidUtf8),
            None => Err(FileError::NotSource),
        }
    }

    fn file(&self, id: FileId) -> FileResult<Bytes> {
        self.files
            .get(&id)
            .map(|e| e.bytes.clone())
            .ok_or_else(|| Self::missing(id))
    }

    fn font(&self, index: usize) -> Option<Font> {
        self.fonts.get(index).cloned()
    }

    /// The as-of date, whatever offset is asked for: a pack is dated by its data, never by the clock.
    fn today(&self, _offset: Option<Duration>) -> Option<Datetime> {
        Some(self.today)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn world() -> ReportWorld {
        let fonts = crate::report::templates::FONTS
            .into_iter()
            .map(Bytes::new)
            .collect();
        ReportWorld::new(vec![], fonts, "/main.typ", "2026-11-30".parse().unwrap())
    }

    #[test]
    fn today_is_the_as_of_date_whatever_the_offset() {
        let w = world();
        for offset in [None, Some(Duration::construct(0, 0, 5, 0, 0))] {
            let d = w.today(offset).unwrap();
            assert_eq!(
                (d.year(), d.month(), d.day()),
                (Some(2026), Some(11), Some(30))
            );
        }
    }

    #[test]
    fn fonts_are_the_shipped_family_and_typst_embedded_ones_only() {
        let w = world();
        let families: Vec<String> = w
            .book()
            .families()
            .map(|(name, _)| name.to_string())
            .collect();
        assert!(families.iter().any(|f| f == "Inter"), "{families:?}");
        let embedded = [
            "Inter",
            "Libertinus Serif",
            "New Computer Modern",
            "New Computer Modern Math",
            "DejaVu Sans Mono",
        ];
        for f in &families {
            assert!(
                embedded.contains(&f.as_str()),
                "unexpected font family {f}: no system font may reach the PDF"
            );
        }
    }
}

//! Typesetting in this process: the prepared file set compiled by typst through the [`ReportWorld`] and
//! exported as PDF/A-2b, identified by the pack id; typst's first error becomes an [`Error::Template`]
//! naming file, line and column, in tailpack's words (no project root, only the template folder).
//!
//! Runs in the typesetter child, or in a library caller that has no child ([`super::typeset`]). May read:
//! the job's files and fonts, the shipped fonts ([`super::templates::FONTS`]).

use super::templates;
use super::world::{ReportWorld, WorldFile};
use crate::error::{Error, Result};
use typst::WorldExt;
use typst::diag::{Severity, SourceDiagnostic};
use typst::foundations::{Bytes, Smart};
use typst_layout::PagedDocument;
use typst_pdf::{PdfOptions, PdfStandard, PdfStandards};

/// The entry template.
pub const MAIN: &str = "/main.typ";

/// Everything one typesetting run sees besides the shipped templates and fonts.
pub struct Job {
    /// Template files (built-in and custom) and the generated data and chart files.
    pub files: Vec<WorldFile>,
    /// Font files of the custom template folder (the shipped ones are added where it is typeset).
    pub fonts: Vec<Vec<u8>>,
    /// The date `datetime.today()` returns: the as-of date.
    pub today: chrono::NaiveDate,
    /// The pack id the PDF is identified by.
    pub pack_id: String,
}

/// Typesets a prepared job in this process (the typesetter child, or a library caller without one).
pub fn typeset_here(job: Job) -> Result<Vec<u8>> {
    let fonts = job
        .fonts
        .into_iter()
        .map(Bytes::new)
        .chain(templates::FONTS.into_iter().map(Bytes::new))
        .collect();
    let world = ReportWorld::new(job.files, fonts, MAIN, job.today);
    let doc = compile(&world)?;
    export(&world, &doc, &job.pack_id)
}

fn compile(world: &ReportWorld) -> Result<PagedDocument> {
    typst::compile::<PagedDocument>(world)
        .output
        .map_err(|diags| template_error(world, &diags))
}

/// PDF/A-2b, identified by the pack id; the document date comes from the template (`set document`),
/// which takes precedence over any timestamp here.
fn export(world: &ReportWorld, doc: &PagedDocument, pack_id: &str) -> Result<Vec<u8>> {
    let standards = PdfStandards::new(&[PdfStandard::A_2b]).map_err(|e| Error::Typesetter {
        program: None,
        message: format!("PDF/A-2b settings refused: {}", e.message()),
    })?;
    let options = PdfOptions {
        ident: Smart::Custom(pack_id.to_string()),
        creator: Smart::Custom(Some(format!("tailpack {}", env!("CARGO_PKG_VERSION")))),
        standards,
        ..PdfOptions::default()
    };
    typst_pdf::pdf(doc, &options).map_err(|diags| template_error(world, &diags))
}

/// The first error of a failed compilation as a [`Error::Template`] naming file, line and column.
fn template_error(world: &ReportWorld, diags: &[SourceDiagnostic]) -> Error {
    let errors: Vec<&SourceDiagnostic> = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .collect();
    let Some(first) = errors.first().copied().or(diags.first()) else {
        return Error::Template {
            file: MAIN.trim_start_matches('/').into(),
            line: None,
            message: "typesetting failed without a diagnostic".into(),
        };
    };
    let spans = std::iter::once(first.span).chain(first.trace.iter().map(|t| t.span.into()));
    let place = spans.filter_map(|s| locate(world, s)).next();
    let mut message = in_our_terms(&first.message);
    let mut hints: Vec<String> = Vec::new();
    for hint in first.hints.iter().map(|h| hint_in_our_terms(&h.v)) {
        if !hints.contains(&hint) {
            hints.push(hint);
        }
    }
    for hint in hints {
        message.push_str(&format!("; hint: {hint}"));
    }
    if errors.len() > 1 {
        message.push_str(&format!(" (and {} more error(s))", errors.len() - 1));
    }
    match place {
        Some((file, line, column)) => Error::Template {
            file,
            line: Some((line, column)),
            message,
        },
        None => Error::Template {
            file: MAIN.trim_start_matches('/').into(),
            line: None,
            message,
        },
    }
}

/// What templates can read, for messages that would otherwise speak of typst's project root.
const READABLE: &str = "templates can read only the files of the custom template folder (report.templates), the built-in templates and the generated /data and /charts files; copy the file into the template folder and name it by its path there";

/// A typst message in tailpack's terms: tailpack has no project root or `--root` option, only the
/// custom template folder; a file typst did not find was looked for among the files templates can read.
fn in_our_terms(message: &str) -> String {
    if let Some(path) = message
        .strip_prefix("file not found (searched at ")
        .and_then(|m| m.strip_suffix(')'))
    {
        return format!(
            "file not found: {path} is not a file of the custom template folder (report.templates), a built-in template or generated data"
        );
    }
    message
        .replace("the project root", "the template folder (report.templates)")
        .replace("project root", "template folder")
        .replace("project sandbox", "template folder")
}

/// A typst hint in tailpack's terms: hints about widening the project root become what templates can
/// read.
fn hint_in_our_terms(hint: &str) -> String {
    let about_root = ["root", "sandbox"].iter().any(|w| hint.contains(w));
    if about_root {
        READABLE.to_string()
    } else {
        hint.to_string()
    }
}

/// File description, 1-based line and column of a diagnostic span, if it points into a known file.
fn locate(world: &ReportWorld, span: typst::syntax::DiagSpan) -> Option<(String, usize, usize)> {
    let id = span.id()?;
    let origin = world.origin(id)?;
    let range = world.range(span)?;
    let (line, column) = match world.parsed(id) {
        Some(source) => source
            .lines()
            .byte_to_line_column(range.start)
            .map(|(l, c)| (l + 1, c + 1))?,
        None => (1, range.start + 1),
    };
    Some((origin.describe(id.vpath().get_with_slash()), line, column))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn typst_words_for_its_project_root_become_the_template_folder() {
        // typst 0.15's wording (typst-library, foundations/path.rs, `format_resolve_error`).
        let m = in_our_terms("path `\"../x.typ\"` would escape the project root");
        assert_eq!(
            m,
            "path `\"../x.typ\"` would escape the template folder (report.templates)"
        );
        for hint in [
            "cannot access files outside of the project sandbox",
            "you can adjust the project root with the `--root` argument",
        ] {
            let h = hint_in_our_terms(hint);
            assert!(h.contains("report.templates") && !h.contains("root"), "{h}");
        }
        assert_eq!(
            hint_in_our_terms("use forward slashes"),
            "use forward slashes"
        );
        let m = in_our_terms("file not found (searched at /etc/passwd)");
        assert!(m.starts_with(
            "file not found: /etc/passwd is not a file of the custom template folder"
        ));
        assert!(!m.contains("searched at"));
    }
}

//! Stage 6, report: the committee PDF (`pack.pdf`), typeset by typst from the run's results.
//!
//! [`data`] turns the results into display data with every number formatted ([`format`]), [`further`] does
//! the same for the analysis results (frontier, stress, backtest), [`text`] writes the sentences that depend
//! on the run, [`charts`] and [`further_charts`] draw the SVG charts, [`templates`] supplies the typst
//! templates (built-in or a custom folder's), and [`world`] is the only door through which the typesetter
//! sees files, fonts and the date. [`typeset`] runs the typesetter in a child process under a time and
//! memory budget (`report.typeset_seconds`, `report.typeset_memory_mb`). The PDF claims PDF/A-2b, is dated
//! by the as-of date and identified by the pack id, so the same inputs give the same bytes.
//!
//! May read: the [`RunResult`], the `results.json` value and the custom template folder. Writes nothing:
//! the pack writer stores the returned bytes.

pub mod charts;
pub mod data;
pub mod format;
pub mod further;
pub mod further_charts;
pub mod templates;
pub mod text;
pub mod typeset;
pub mod world;

use crate::error::{Error, Result};
use crate::run::RunResult;
use serde_json::Value;
use typst::WorldExt;
use typst::diag::{Severity, SourceDiagnostic};
use typst::foundations::{Bytes, Smart};
use typst_layout::PagedDocument;
use typst_pdf::{PdfOptions, PdfStandard, PdfStandards};
use world::{Origin, ReportWorld, WorldFile};

/// The entry template.
pub const MAIN: &str = "/main.typ";
/// The display data file as templates read it.
pub const REPORT_JSON: &str = "/data/report.json";
/// The full results document as templates may read it.
pub const RESULTS_JSON: &str = "/data/results.json";

/// Typesets the pack PDF of a run. `results` is the `results.json` document and `pack_id` its identifier.
/// Everything is prepared in memory first; typesetting then runs under the config's budget.
pub fn render(r: &RunResult, results: &Value, pack_id: &str) -> Result<Vec<u8>> {
    render_with(r, results, pack_id, templates::custom(&r.config)?)
}

/// [`render`] with the custom template files already read: the pack writer passes the ones the archive
/// recorded, so the PDF is typeset from exactly the bytes the pack id covers.
pub fn render_with(
    r: &RunResult,
    results: &Value,
    pack_id: &str,
    custom: Vec<templates::CustomFile>,
) -> Result<Vec<u8>> {
    let job = crate::timings::time("charts", || job(r, results, pack_id, custom))?;
    let budget = budget(&r.config);
    crate::timings::time("typesetting", || typeset::run(job, &budget))
}

/// The typesetting budget of a config, and the template a breach is blamed on.
fn budget(cfg: &crate::config::Config) -> typeset::Budget {
    let template = match &cfg.templates {
        Some(dir) => format!("{} (custom template folder)", dir.display()),
        None => Origin::Builtin("main.typ").describe(MAIN),
    };
    typeset::Budget {
        seconds: cfg.typeset.seconds,
        memory_mb: cfg.typeset.memory_mb,
        config: cfg.path.clone(),
        template,
    }
}

fn job(
    r: &RunResult,
    results: &Value,
    pack_id: &str,
    custom: Vec<templates::CustomFile>,
) -> Result<typeset::Job> {
    let views = data::views(r);
    let report = data::build(r, results, pack_id);
    let (mut files, fonts) = templates::load_from(custom);
    let mut made = vec![
        generated(
            REPORT_JSON,
            serde_json::to_vec_pretty(&report).expect("display data serialises"),
        ),
        generated(
            RESULTS_JSON,
            serde_json::to_vec_pretty(results).expect("results serialise"),
        ),
    ];
    for chart in charts::all(r, &views)?
        .into_iter()
        .chain(further_charts::all(r, &views)?)
    {
        made.push(generated(
            &format!("/charts/{}", chart.name),
            chart.svg.into_bytes(),
        ));
    }
    for file in made {
        refuse_shadow(&files, &file.vpath)?;
        files.push(file);
    }
    Ok(typeset::Job {
        files,
        fonts,
        today: r.data.as_of,
        pack_id: pack_id.to_string(),
    })
}

/// Typesets a prepared job in this process (the typesetter child, or a library caller without one).
pub fn typeset_here(job: typeset::Job) -> Result<Vec<u8>> {
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

/// A custom template file may not take the name of a generated one: the typesetter would read one of the
/// two while the archive records the other.
fn refuse_shadow(files: &[WorldFile], vpath: &str) -> Result<()> {
    match files.iter().find(|f| f.vpath == vpath) {
        Some(f) => Err(Error::Template {
            file: f.origin.describe(vpath),
            line: None,
            message: format!(
                "has the name of a file tailpack generates ({vpath}); rename it: templates read the generated one there"
            ),
        }),
        None => Ok(()),
    }
}

fn generated(vpath: &str, bytes: Vec<u8>) -> WorldFile {
    WorldFile {
        vpath: vpath.into(),
        bytes,
        origin: Origin::Generated,
    }
}

fn compile(world: &ReportWorld) -> Result<PagedDocument> {
    typst::compile::<PagedDocument>(world)
        .output
        .map_err(|diags| template_error(world, &diags))
}

/// PDF/A-2b, identified by the pack id; the document date comes from the template (`set document`),
/// which takes precedence over any timestamp here.
fn export(world: &ReportWorld, doc: &PagedDocument, pack_id: &str) -> Result<Vec<u8>> {
    let standards = PdfStandards::new(&[PdfStandard::A_2b])
        .map_err(|e| Error::Run(format!("PDF/A-2b settings: {}", e.message())))?;
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

    #[test]
    fn every_default_template_is_listed_once() {
        let mut names: Vec<&str> = templates::DEFAULTS.iter().map(|(n, _)| *n).collect();
        names.sort();
        names.dedup();
        assert_eq!(names.len(), templates::DEFAULTS.len());
        assert!(names.contains(&"main.typ"));
    }
}
